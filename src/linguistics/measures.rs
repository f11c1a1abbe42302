//! Association and keyness statistics: pure functions of counts.
//!
//! # The collocation table
//!
//! A node n (a word or n-gram) with f(n) occurrences, a collocate c with
//! f(c), a window of S positions around each occurrence of n, N positions
//! in all, and O₁₁ co-occurrences of c in the windows of n:
//!
//! ```text
//!              c                 not c
//! window       O₁₁               S·f(n) − O₁₁          R₁ = S·f(n)
//! elsewhere    f(c) − O₁₁        N − R₁ − f(c) + O₁₁   R₂ = N − R₁
//!              C₁ = f(c)         C₂ = N − f(c)         N
//! ```
//!
//! with expected counts Eᵢⱼ = Rᵢ·Cⱼ / N, so E₁₁ = S·f(n)·f(c) / N. With
//! S = 1 (one position on one side) this is the textbook 2×2 table of a
//! bigram. A cell that a repeated node pushes below zero (a collocate
//! counted in two overlapping windows) is taken as 0.
//!
//! # The keyness table
//!
//! An item with count a in a study corpus of n₁ words and b in a reference
//! corpus of n₂ words.

/// The four observed cells of a collocation table, row by row.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Table {
    /// O₁₁, O₁₂, O₂₁, O₂₂.
    pub observed: [f64; 4],
    /// E₁₁, E₁₂, E₂₁, E₂₂.
    pub expected: [f64; 4],
}

impl Table {
    /// The table of `observed` co-occurrences of a collocate with `fc`
    /// occurrences in a window of `span` positions around each of `fn_`
    /// occurrences of the node, among `n` positions.
    pub fn collocation(observed: u64, fn_: u64, fc: u64, span: u64, n: u64) -> Table {
        let (o11, n) = (observed as f64, n as f64);
        let r1 = (span * fn_) as f64;
        let c1 = fc as f64;
        let (r2, c2) = (n - r1, n - c1);
        let cell = |x: f64| x.max(0.0);
        Table {
            observed: [o11, cell(r1 - o11), cell(c1 - o11), cell(n - r1 - c1 + o11)],
            expected: [r1 * c1 / n, r1 * c2 / n, r2 * c1 / n, r2 * c2 / n],
        }
    }

    /// E₁₁.
    pub fn e11(&self) -> f64 {
        self.expected[0]
    }

    /// O₁₁.
    pub fn o11(&self) -> f64 {
        self.observed[0]
    }
}

/// Pointwise mutual information, log₂(O₁₁ / E₁₁) (Church & Hanks 1990,
/// "Word association norms, mutual information, and lexicography").
pub fn pmi(o11: f64, e11: f64) -> f64 {
    (o11 / e11).log2()
}

/// t-score, (O₁₁ − E₁₁) / √O₁₁ (Church, Gale, Hanks & Hindle 1991, "Using
/// statistics in lexical analysis").
pub fn t_score(o11: f64, e11: f64) -> f64 {
    (o11 - e11) / o11.sqrt()
}

/// The log-likelihood ratio G² = 2 Σ Oᵢ ln(Oᵢ / Eᵢ) over the cells, a cell
/// with Oᵢ = 0 adding 0 (Dunning 1993, "Accurate methods for the
/// statistics of surprise and coincidence").
pub fn g2(observed: &[f64], expected: &[f64]) -> f64 {
    2.0 * observed
        .iter()
        .zip(expected)
        .filter(|(o, _)| **o > 0.0)
        .map(|(o, e)| o * (o / e).ln())
        .sum::<f64>()
}

/// The Dice coefficient 2·O₁₁ / (f(n) + f(c)) (Dice 1945, "Measures of the
/// amount of ecologic association between species"; for collocations
/// Smadja, McKeown & Hatzivassiloglou 1996).
pub fn dice(o11: f64, fn_: f64, fc: f64) -> f64 {
    2.0 * o11 / (fn_ + fc)
}

/// logDice, 14 + log₂ Dice (Rychlý 2008, "A lexicographer-friendly
/// association score").
pub fn log_dice(o11: f64, fn_: f64, fc: f64) -> f64 {
    14.0 + dice(o11, fn_, fc).log2()
}

/// Keyness G² of count `a` in `n1` words against `b` in `n2`: the two
/// cells of the item, E₁ = n₁(a + b)/(n₁ + n₂), E₂ = n₂(a + b)/(n₁ + n₂)
/// (Dunning 1993; the keyness form of Rayson & Garside 2000, "Comparing
/// corpora using frequency profiling").
pub fn keyness_g2(a: u64, n1: u64, b: u64, n2: u64) -> f64 {
    let (a, b, n1, n2) = (a as f64, b as f64, n1 as f64, n2 as f64);
    let e1 = n1 * (a + b) / (n1 + n2);
    let e2 = n2 * (a + b) / (n1 + n2);
    g2(&[a, b], &[e1, e2])
}

/// Log ratio, log₂ of the ratio of the normalised frequencies, with 0.5 in
/// place of a zero count (Hardie 2014, "Log Ratio: an informal
/// introduction", CASS).
pub fn log_ratio(a: u64, n1: u64, b: u64, n2: u64) -> f64 {
    let half = |x: u64| if x == 0 { 0.5 } else { x as f64 };
    ((half(a) / n1 as f64) / (half(b) / n2 as f64)).log2()
}

/// %DIFF, 100 · (NF₁ − NF₂) / NF₂ with NF the normalised frequencies
/// (Gabrielatos & Marchi 2012, "Keyness: appropriate metrics and practical
/// issues"); `None` when b = 0 (no finite value).
pub fn percent_diff(a: u64, n1: u64, b: u64, n2: u64) -> Option<f64> {
    if b == 0 {
        return None;
    }
    let (f1, f2) = (a as f64 / n1 as f64, b as f64 / n2 as f64);
    Some(100.0 * (f1 - f2) / f2)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn close(a: f64, b: f64) -> bool {
        (a - b).abs() <= 1e-9 * b.abs().max(1.0)
    }

    /// Worked by hand: a bigram seen 10 times, node 20 times, collocate 30
    /// times, N = 1000, one position (S = 1).
    ///
    /// ```text
    /// O = 10   10  | 20      E = 0.6    19.4
    ///     20  960  | 980         29.4  950.6
    ///     30  970  | 1000
    /// ```
    /// PMI = log₂(10/0.6) = 4.058894; t = 9.4/√10 = 2.972541;
    /// G² = 2(10 ln 16.667 + 10 ln(10/19.4) + 20 ln(20/29.4)
    ///        + 960 ln(960/950.6)) = 46.496606;
    /// Dice = 20/50 = 0.4; logDice = 14 + log₂ 0.4 = 12.678072.
    #[test]
    fn a_bigram_table_worked_by_hand() {
        let t = Table::collocation(10, 20, 30, 1, 1000);
        assert_eq!(t.observed, [10.0, 10.0, 20.0, 960.0]);
        for (e, want) in t.expected.iter().zip([0.6, 19.4, 29.4, 950.6]) {
            assert!(close(*e, want), "{e} vs {want}");
        }
        assert!((pmi(t.o11(), t.e11()) - 4.058894).abs() < 1e-6);
        assert!((t_score(t.o11(), t.e11()) - 2.972541).abs() < 1e-6);
        assert!((g2(&t.observed, &t.expected) - 46.496606).abs() < 1e-6);
        assert!(close(dice(10.0, 20.0, 30.0), 0.4));
        assert!((log_dice(10.0, 20.0, 30.0) - 12.678072).abs() < 1e-6);
    }

    /// Worked by hand: 30 in 1,000 study words against 10 in 2,000.
    /// E₁ = 1000·40/3000 = 13.333, E₂ = 26.667;
    /// G² = 2(30 ln(30/13.333) + 10 ln(10/26.667)) = 29.039228;
    /// log ratio = log₂(0.03/0.005) = log₂ 6 = 2.584963;
    /// %DIFF = 100 (0.03 − 0.005)/0.005 = 500.
    #[test]
    fn a_keyness_table_worked_by_hand() {
        assert!((keyness_g2(30, 1000, 10, 2000) - 29.039228).abs() < 1e-6);
        assert!(close(log_ratio(30, 1000, 10, 2000), 6f64.log2()));
        assert!(close(percent_diff(30, 1000, 10, 2000).unwrap(), 500.0));
        // A zero count: 0.5 in its place (Hardie 2014); no finite %DIFF.
        assert!(close(log_ratio(3, 100, 0, 100), 6f64.log2()));
        assert_eq!(percent_diff(3, 100, 0, 100), None);
        // Equal relative frequencies: no evidence either way.
        assert!(keyness_g2(10, 1000, 20, 2000).abs() < 1e-12);
    }

    #[test]
    fn a_collocate_counted_in_two_windows_leaves_no_negative_cell() {
        // "a a b", node a (2), b (1), window of 2 on the right: b is in
        // both windows, O₁₁ = 2 > f(b).
        let t = Table::collocation(2, 2, 1, 2, 3);
        assert!(t.observed.iter().all(|&x| x >= 0.0));
        assert!(g2(&t.observed, &t.expected).is_finite());
    }
}
