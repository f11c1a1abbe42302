//! [`TopK`]: the one collector of the best K candidates (see the module
//! doc of [`crate::topk`]).

use std::cmp::Ordering;

/// Collects candidates `(probability, word)` group by group and returns
/// the best `k`: higher probability first, ties by the words' bytes.
#[derive(Debug, Clone)]
pub struct TopK<W> {
    k: usize,
    found: Vec<(f64, W)>,
    scored: usize,
}

impl<W: Copy> TopK<W> {
    /// A collector of the best `k`.
    pub fn new(k: usize) -> TopK<W> {
        TopK {
            k,
            found: Vec::new(),
            scored: 0,
        }
    }

    /// How many candidates were scored so far.
    #[cfg(test)]
    pub fn scored(&self) -> usize {
        self.scored
    }

    /// Every candidate of a group (scanned whole).
    pub fn take_all<E>(
        &mut self,
        group: impl IntoIterator<Item = Result<(f64, W), E>>,
    ) -> Result<(), E> {
        if self.k == 0 {
            return Ok(());
        }
        for c in group {
            self.found.push(c?);
            self.scored += 1;
        }
        Ok(())
    }

    /// A group whose candidates come in an order where the probability
    /// never increases: the first K, then those tied with the K-th. The
    /// group also stops at the first candidate less probable than the K-th
    /// best of the earlier groups (it and those after it cannot be among
    /// the best K). The iterator is not advanced further, so candidates
    /// past the stop are never scored.
    pub fn take_ranked<E>(
        &mut self,
        group: impl IntoIterator<Item = Result<(f64, W), E>>,
    ) -> Result<(), E> {
        self.take_ranked_if(group, |_| true)
    }

    /// [`TopK::take_ranked`] for a group whose members are known only from
    /// a test that costs more than the probability (for example "not kept
    /// at a longer context"): the candidates come with their probability,
    /// and `member` is asked only of those that can still be among the
    /// best K, so the stops above also save the tests.
    pub fn take_ranked_if<E>(
        &mut self,
        group: impl IntoIterator<Item = Result<(f64, W), E>>,
        mut member: impl FnMut(W) -> bool,
    ) -> Result<(), E> {
        if self.k == 0 {
            return Ok(());
        }
        let bound = self.kth_best();
        let (mut last, mut taken) = (f64::INFINITY, 0);
        for c in group {
            let (p, w) = c?;
            if p.total_cmp(&bound) == Ordering::Less
                || (taken >= self.k && p.total_cmp(&last) == Ordering::Less)
            {
                self.scored += 1;
                break;
            }
            if !member(w) {
                continue;
            }
            self.scored += 1;
            debug_assert!(
                p.total_cmp(&last) != Ordering::Greater,
                "a ranked group rose"
            );
            self.found.push((p, w));
            last = p;
            taken += 1;
        }
        Ok(())
    }

    /// The K-th best probability collected so far (−∞ while fewer than K
    /// were): a later candidate less probable cannot be among the best K.
    fn kth_best(&self) -> f64 {
        if self.found.len() < self.k {
            return f64::NEG_INFINITY;
        }
        let mut p: Vec<f64> = self.found.iter().map(|c| c.0).collect();
        p.select_nth_unstable_by(self.k - 1, |a, b| b.total_cmp(a));
        p[self.k - 1]
    }

    /// A group whose candidates all have one probability, in the order of
    /// their bytes: its first K are its best, so the rest is never read.
    pub fn take_tied<E>(
        &mut self,
        group: impl IntoIterator<Item = Result<(f64, W), E>>,
    ) -> Result<(), E> {
        for c in group.into_iter().take(self.k) {
            self.found.push(c?);
            self.scored += 1;
        }
        Ok(())
    }

    /// The best `k`, best first: higher probability, then `bytes_order`
    /// of the words (the order of their UTF-8 bytes); and how many
    /// candidates were scored.
    pub fn finish(self, mut bytes_order: impl FnMut(W, W) -> Ordering) -> (Vec<(f64, W)>, usize) {
        let TopK {
            k,
            mut found,
            scored,
        } = self;
        if k == 0 {
            return (Vec::new(), scored);
        }
        if found.len() > k {
            // The K-th probability; every candidate at least as probable
            // stays for the tie-break, the rest go before any text is read.
            found.select_nth_unstable_by(k - 1, |a, b| b.0.total_cmp(&a.0));
            let edge = found[k - 1].0;
            found.retain(|c| c.0.total_cmp(&edge) != Ordering::Less);
        }
        found.sort_unstable_by(|a, b| b.0.total_cmp(&a.0).then_with(|| bytes_order(a.1, b.1)));
        found.truncate(k);
        (found, scored)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    type R = Result<(f64, &'static str), ()>;

    fn best(top: TopK<&'static str>) -> Vec<(f64, &'static str)> {
        top.finish(|a, b| a.as_bytes().cmp(b.as_bytes())).0
    }

    /// Brute force: all candidates sorted by (probability desc, bytes).
    fn brute(all: &[(f64, &'static str)], k: usize) -> Vec<(f64, &'static str)> {
        let mut v = all.to_vec();
        v.sort_by(|a, b| b.0.total_cmp(&a.0).then(a.1.as_bytes().cmp(b.1.as_bytes())));
        v.truncate(k);
        v
    }

    #[test]
    fn ties_are_broken_by_bytes_whatever_the_order_met() {
        // Three words of exactly equal probability, met in the order
        // "package.", "package,", "package": the bytes order is
        // "package" < "package," < "package." (',' is 0x2C, '.' 0x2E).
        let p = 0.000_223_113_728_261_713_13;
        let group: Vec<R> = vec![
            Ok((0.5, "the")),
            Ok((p, "package.")),
            Ok((p, "package,")),
            Ok((p, "package")),
            Ok((0.0001, "pack")),
        ];
        for k in 1..=5 {
            let mut top = TopK::new(k);
            top.take_ranked(group.clone()).unwrap();
            let all: Vec<_> = group.iter().map(|c| c.unwrap()).collect();
            assert_eq!(best(top), brute(&all, k), "k = {k}");
        }
        let mut top = TopK::new(2);
        top.take_ranked(group.clone()).unwrap();
        assert_eq!(best(top), vec![(0.5, "the"), (p, "package")]);
    }

    #[test]
    fn a_ranked_group_stops_at_the_first_lower_probability_past_k() {
        let group: Vec<R> = vec![
            Ok((0.4, "a")),
            Ok((0.3, "b")),
            Ok((0.3, "c")),
            Ok((0.3, "d")),
            Ok((0.2, "e")),
            Ok((0.1, "f")),
        ];
        let mut top = TopK::new(2);
        top.take_ranked(group).unwrap();
        // a, b (K), c and d (tied with b), e (lower: stop) = 5 scored.
        assert_eq!(top.scored(), 5);
        assert_eq!(best(top), vec![(0.4, "a"), (0.3, "b")]);
    }

    #[test]
    fn groups_combine_to_the_brute_force_answer() {
        // Seeded candidates with many ties, in several groups; ranked
        // groups sorted by probability only (ties in reverse bytes order).
        let mut s = 7u64;
        let words: Vec<&'static str> = (0..60)
            .map(|i| &*Box::leak(format!("w{:02}", (i * 37) % 60).into_boxed_str()))
            .collect();
        for k in [1usize, 2, 3, 5, 10, 40] {
            let mut all = Vec::new();
            let mut top = TopK::new(k);
            for (gi, g) in words.chunks(12).enumerate() {
                let mut group: Vec<(f64, &'static str)> = g
                    .iter()
                    .map(|&w| {
                        s = s
                            .wrapping_mul(6364136223846793005)
                            .wrapping_add(1442695040888963407);
                        (((s >> 61) as f64) / 8.0, w)
                    })
                    .collect();
                all.extend(group.iter().copied());
                group.sort_by(|a, b| b.0.total_cmp(&a.0).then(b.1.cmp(a.1)));
                if gi % 2 == 0 {
                    top.take_ranked(group.into_iter().map(Ok::<_, ()>)).unwrap();
                } else {
                    top.take_all(group.into_iter().map(Ok::<_, ()>)).unwrap();
                }
            }
            assert_eq!(best(top), brute(&all, k), "k = {k}");
        }
    }

    #[test]
    fn members_tested_only_while_they_can_reach_the_best_k() {
        // Ranked groups whose members are a subset known from a test; the
        // answer is the brute force over the members, and a group below
        // the K-th best of the earlier ones asks no member test at all.
        let mut s = 11u64;
        let mut draw = || {
            s = s
                .wrapping_mul(6364136223846793005)
                .wrapping_add(1442695040888963407);
            ((s >> 58) as f64) / 64.0
        };
        let words: Vec<&'static str> = (0..90)
            .map(|i| &*Box::leak(format!("v{i:02}").into_boxed_str()))
            .collect();
        let member = |w: &str| !w.ends_with(['3', '6', '9']);
        for k in [1usize, 2, 4, 10, 30] {
            let (mut all, mut top, mut asked) = (Vec::new(), TopK::new(k), 0);
            for g in words.chunks(30) {
                let mut group: Vec<(f64, &'static str)> = g.iter().map(|&w| (draw(), w)).collect();
                all.extend(group.iter().copied().filter(|c| member(c.1)));
                group.sort_by(|a, b| b.0.total_cmp(&a.0));
                let test = |w: &'static str| {
                    asked += 1;
                    member(w)
                };
                top.take_ranked_if(group.into_iter().map(Ok::<_, ()>), test)
                    .unwrap();
            }
            assert!(asked < 90, "k = {k}: every candidate was tested");
            assert_eq!(best(top), brute(&all, k), "k = {k}");
        }
        // A last group wholly below the K-th best so far: no test asked.
        let mut top = TopK::new(2);
        top.take_all(vec![Ok::<_, ()>((0.5, "a")), Ok((0.4, "b"))])
            .unwrap();
        let mut asked = 0;
        let low: Vec<R> = vec![Ok((0.3, "c")), Ok((0.2, "d"))];
        top.take_ranked_if(low, |_| {
            asked += 1;
            true
        })
        .unwrap();
        assert_eq!(asked, 0);
        assert_eq!(best(top), vec![(0.5, "a"), (0.4, "b")]);
    }

    #[test]
    fn a_tied_group_in_bytes_order_gives_its_first_k() {
        let group: Vec<R> = ["ant", "bee", "cat", "dog"].map(|w| Ok((0.25, w))).to_vec();
        let mut top = TopK::new(2);
        top.take_all(vec![Ok::<_, ()>((0.25, "cow")), Ok((0.5, "zebra"))])
            .unwrap();
        top.take_tied(group).unwrap();
        assert_eq!(top.scored(), 4);
        assert_eq!(best(top), vec![(0.5, "zebra"), (0.25, "ant")]);
    }

    #[test]
    fn k_zero_scores_nothing() {
        let mut top = TopK::new(0);
        top.take_ranked(vec![Ok::<_, ()>((1.0, "a"))]).unwrap();
        top.take_all(vec![Ok::<_, ()>((1.0, "a"))]).unwrap();
        top.take_tied(vec![Ok::<_, ()>((1.0, "a"))]).unwrap();
        assert_eq!(top.scored(), 0);
        assert!(best(top).is_empty());
    }
}
