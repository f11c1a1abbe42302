//! The search for a word among the children of a context: a staged
//! interpolation search whose steps several searches can take in turn,
//! prefetching each other's next reads ([`Seek`]).

use crate::search::find_in;

/// Where a search for `w` among the increasing words `at(lo..hi)` (all
/// below `universe`) stands between its reads.
///
/// Word indices are ranks of hashes, so the children of a context are
/// spread evenly over `0..universe` whatever the words' frequencies: the
/// first probe is placed from `w / universe` alone (no read of the range's
/// ends, which in a long list are two more cache misses), and the next
/// pair of probes brackets `w` from the distance the first one was off,
/// with a margin of a few standard deviations. What is left is searched by
/// interpolation with bisection steps, which keeps the worst case
/// logarithmic. [`find_by`] runs the steps in a row; `Model::extend` runs
/// each step for several searches before the next, prefetching what the
/// next step reads ([`Seek::next_read`]).
#[derive(Clone, Copy, Debug)]
pub(crate) enum Seek {
    /// Read the first probe at `p`.
    Probe { lo: usize, hi: usize, p: usize },
    /// Read the bracket `a`, `b` within `lo..hi`.
    Bracket {
        lo: usize,
        hi: usize,
        a: usize,
        b: usize,
    },
    /// Search `lo..hi` to the end.
    Rest { lo: usize, hi: usize },
    /// Found at this position.
    Found(usize),
    /// Not there.
    Absent,
}

impl Seek {
    /// The start of a search for `w` among `lo..hi`.
    #[inline(always)]
    pub(crate) fn start(lo: usize, hi: usize, w: u32, universe: u64) -> Seek {
        if hi - lo > 32 && (w as u64) < universe {
            let p = lo + ((w as u64 * (hi - lo) as u64) / universe) as usize;
            Seek::Probe { lo, hi, p }
        } else {
            Seek::Rest { lo, hi }
        }
    }

    /// The position the next step reads first (to prefetch), if any.
    #[inline(always)]
    pub(crate) fn next_read(&self) -> Option<(usize, Option<usize>)> {
        match *self {
            Seek::Probe { p, .. } => Some((p, None)),
            Seek::Bracket { a, b, .. } => Some((a, Some(b))),
            Seek::Rest { lo, hi } if lo < hi => Some((lo, Some(hi - 1))),
            _ => None,
        }
    }

    /// One step: the first probe gives the bracket, the bracket the rest,
    /// the rest the answer.
    #[inline(always)]
    pub(crate) fn step(self, at: impl Fn(usize) -> u32, w: u32, universe: u64) -> Seek {
        match self {
            Seek::Probe { mut lo, mut hi, p } => {
                let x = at(p);
                if x == w {
                    return Seek::Found(p);
                }
                let d = ((x.abs_diff(w) as u64 * (hi - lo) as u64) / universe) as usize;
                let margin = 2 * d.isqrt() + 8;
                if x < w {
                    lo = p + 1;
                } else {
                    hi = p;
                }
                if lo >= hi {
                    return Seek::Absent;
                }
                let centre = if x < w { p + d } else { p.saturating_sub(d) };
                let a = centre.saturating_sub(margin).clamp(lo, hi - 1);
                let b = (centre + margin).clamp(lo, hi - 1);
                Seek::Bracket { lo, hi, a, b }
            }
            Seek::Bracket { lo, hi, a, b } => {
                let (xa, xb) = (at(a), at(b));
                if w < xa {
                    Seek::Rest { lo, hi: a }
                } else if w > xb {
                    Seek::Rest { lo: b + 1, hi }
                } else {
                    Seek::Rest { lo: a, hi: b + 1 }
                }
            }
            Seek::Rest { lo, hi } => match find_in(at, lo, hi, w, 16) {
                Some(i) => Seek::Found(i),
                None => Seek::Absent,
            },
            done => done,
        }
    }

    /// Runs the steps to the end.
    #[inline(always)]
    pub(crate) fn finish(
        mut self,
        at: impl Fn(usize) -> u32 + Copy,
        w: u32,
        universe: u64,
    ) -> Option<usize> {
        loop {
            match self {
                Seek::Found(i) => return Some(i),
                Seek::Absent => return None,
                s => self = s.step(at, w, universe),
            }
        }
    }
}

/// The position of `w` among the increasing words `at(lo..hi)`, all
/// below `universe` (see [`Seek`]).
#[inline]
pub(crate) fn find_by(
    at: impl Fn(usize) -> u32 + Copy,
    lo: usize,
    hi: usize,
    w: u32,
    universe: u64,
) -> Option<usize> {
    Seek::start(lo, hi, w, universe).finish(at, w, universe)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::search::splitmix64 as next;

    /// `find_by` against the standard library's binary search, on ranges
    /// of 0 to 5,000 increasing words spread evenly, bunched at one end,
    /// and in runs of neighbours (where the first probe's guess is far
    /// off): every present word found where it is, every absent one not;
    /// within a sub-range too.
    #[test]
    fn find_by_finds_what_binary_search_finds() {
        let mut s = 7u64;
        let universe = 1u64 << 20;
        for len in [0usize, 1, 2, 16, 17, 33, 100, 1000, 5000] {
            for shape in 0..3 {
                let mut v: Vec<u32> = (0..len)
                    .map(|i| match shape {
                        0 => (next(&mut s) % universe) as u32,
                        1 => (next(&mut s) % 3000) as u32,
                        _ => (i as u32 / 50) * 20_000 + (i as u32 % 50),
                    })
                    .collect();
                v.sort_unstable();
                v.dedup();
                let at = |i: usize| v[i];
                let (lo, hi) = (v.len() / 5, v.len() - v.len() / 7);
                for _ in 0..400 {
                    let w = if next(&mut s).is_multiple_of(2) && !v.is_empty() {
                        v[(next(&mut s) % v.len() as u64) as usize]
                    } else {
                        (next(&mut s) % universe) as u32
                    };
                    let want = v.binary_search(&w).ok();
                    assert_eq!(
                        find_by(at, 0, v.len(), w, universe),
                        want,
                        "{len} {shape} {w}"
                    );
                    let want = v[lo..hi].binary_search(&w).ok().map(|i| i + lo);
                    assert_eq!(
                        find_by(at, lo, hi, w, universe),
                        want,
                        "{len} {shape} {w} sub"
                    );
                }
            }
        }
    }
}
