//! The discounts of the Kneser-Ney family, as pure functions of one order's
//! count-of-counts: the one definition that the statistics report shows and
//! the estimators use, so that the two never disagree.
//!
//! * Modified Kneser-Ney (Chen & Goodman 1998, "An empirical study of
//!   smoothing techniques for language modeling", eq. 26): with
//!   Y = n1/(n1 + 2 n2), D1 = 1 − 2Y n2/n1, D2 = 2 − 3Y n3/n2,
//!   D3+ = 3 − 4Y n4/n3.
//! * The single discount of Ney, Essen & Kneser (1994): D = n1/(n1 + 2 n2).
//!
//! D_r is undefined where one of the count-of-counts its formula reads
//! (n1, n2, n_r, n_{r+1}) is 0, and unusable outside (0, r]; the single
//! discount is undefined where n1 or n2 is 0 (it is in (0, 1) otherwise).
//! This module knows nothing of stores: it takes the numbers n1..n4 and the
//! name of the counts they were taken over ("left-type" or "raw"), which
//! only words the reason.

use std::fmt;

/// Why a discount cannot be taken from the count-of-counts.
#[derive(Clone, Debug, PartialEq)]
pub struct Unusable {
    /// The discount: `D1`, `D2`, `D3+` or `D`.
    pub name: &'static str,
    /// The counts the count-of-counts are over: `left-type` or `raw`.
    pub counts: &'static str,
    /// n1, n2, n3, n4.
    pub n: [u64; 4],
    /// What is wrong.
    pub problem: Problem,
}

/// What makes a discount unusable.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum Problem {
    /// The count-of-count n_r (r given) that the formula reads is 0.
    Zero(u64),
    /// The formula gives this value, outside (0, r].
    OutOfRange(f64),
}

impl fmt::Display for Unusable {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        let [n1, n2, n3, n4] = self.n;
        match self.problem {
            Problem::Zero(r) => write!(
                f,
                "{} cannot be computed: {} n{r} = 0 (n1 = {n1}, n2 = {n2}, n3 = {n3}, n4 = {n4})",
                self.name, self.counts
            ),
            Problem::OutOfRange(d) => write!(
                f,
                "{} would be {d:.6}, outside (0, {}] ({} n1 = {n1}, n2 = {n2}, n3 = {n3}, n4 = {n4})",
                self.name,
                upper(self.name),
                self.counts
            ),
        }
    }
}

/// The upper end of a discount's range: r for D_r, 1 for D.
fn upper(name: &str) -> u64 {
    match name {
        "D2" => 2,
        "D3+" => 3,
        _ => 1,
    }
}

/// The name of modified discount `r` (1, 2, 3): `D1`, `D2`, `D3+`.
pub fn modified_name(r: usize) -> &'static str {
    match r {
        1 => "D1",
        2 => "D2",
        _ => "D3+",
    }
}

/// Modified Kneser-Ney discount D_r (r = 1, 2, or 3 for D3+) from n1..n4,
/// or why the data leave it undefined or out of range.
pub fn modified(n: [u64; 4], r: usize, counts: &'static str) -> Result<f64, Unusable> {
    assert!((1..=3).contains(&r), "modified discounts are D1, D2, D3+");
    let unusable = |problem| Unusable {
        name: modified_name(r),
        counts,
        n,
        problem,
    };
    for i in [1, 2, r, r + 1] {
        if n[i - 1] == 0 {
            return Err(unusable(Problem::Zero(i as u64)));
        }
    }
    let (n1, n2) = (n[0] as f64, n[1] as f64);
    let y = n1 / (n1 + 2.0 * n2);
    let rf = r as f64;
    let d = rf - (rf + 1.0) * y * n[r] as f64 / n[r - 1] as f64;
    if d > 0.0 && d <= rf {
        Ok(d)
    } else {
        Err(unusable(Problem::OutOfRange(d)))
    }
}

/// The single discount D = n1/(n1 + 2 n2), or why it is undefined.
pub fn single(n: [u64; 4], counts: &'static str) -> Result<f64, Unusable> {
    let unusable = |r| Unusable {
        name: "D",
        counts,
        n,
        problem: Problem::Zero(r),
    };
    match (n[0], n[1]) {
        (0, _) => Err(unusable(1)),
        (_, 0) => Err(unusable(2)),
        (n1, n2) => Ok(n1 as f64 / (n1 as f64 + 2.0 * n2 as f64)),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Chen & Goodman (1998), eq. 26, worked by hand: n1..n4 = 10, 4, 2, 1 →
    /// Y = 10/18 = 5/9; D1 = 1 − 2·(5/9)·(4/10) = 5/9;
    /// D2 = 2 − 3·(5/9)·(2/4) = 7/6; D3+ = 3 − 4·(5/9)·(1/2) = 17/9.
    #[test]
    fn by_hand() {
        let n = [10, 4, 2, 1];
        let close = |a: f64, b: f64| assert!((a - b).abs() < 1e-12, "{a} vs {b}");
        close(modified(n, 1, "raw").unwrap(), 5.0 / 9.0);
        close(modified(n, 2, "raw").unwrap(), 7.0 / 6.0);
        close(modified(n, 3, "raw").unwrap(), 17.0 / 9.0);
        close(single(n, "raw").unwrap(), 10.0 / 18.0);
    }

    #[test]
    fn undefined_and_out_of_range() {
        // n4 = 0: D3+ reads it, D1 and D2 do not.
        let n = [6, 3, 1, 0];
        assert!(modified(n, 2, "left-type").is_ok());
        let e = modified(n, 3, "left-type").unwrap_err();
        assert_eq!(e.problem, Problem::Zero(4));
        assert!(e
            .to_string()
            .starts_with("D3+ cannot be computed: left-type n4 = 0"));
        // n1 = 2050, n2 = 243, n3 = 95, n4 = 96 (the demo corpus, order 2):
        // Y = 2050/2536, D3+ = 3 − 4Y·96/95 = −0.267475.
        let e = modified([2050, 243, 95, 96], 3, "left-type").unwrap_err();
        match e.problem {
            Problem::OutOfRange(d) => assert!((d + 0.267475).abs() < 1e-6, "{d}"),
            p => panic!("{p:?}"),
        }
        assert!(e.to_string().contains("outside (0, 3]"), "{e}");
        assert_eq!(
            single([0, 3, 1, 1], "raw").unwrap_err().problem,
            Problem::Zero(1)
        );
        assert_eq!(
            single([3, 0, 1, 1], "raw").unwrap_err().problem,
            Problem::Zero(2)
        );
    }
}
