//! The lower-order entries of a batch of n-grams, found together.
//!
//! A freeze's pass over order k needs, for each n-gram h·w whose context
//! h is kept, the entry of h'·w in order k − 1 and its exact q. The suffix
//! h' of a kept context is where the previous order's pass found h's own
//! lower entry, which that pass wrote down as h's *link*; so h'·w is one
//! search among the children of `links[h]`, not a walk from the root.
//!
//! In a store larger than the caches every read of that search is a cache
//! miss (the word's index, the children range, the probes, q). A part
//! gathers a batch of n-grams and [`resolve`] advances their searches in
//! turn, each prefetching its next read before the others' loads, so the
//! thread waits on many misses at once instead of one after another (the
//! model's queries do the same with [`Seek`]).

use crate::hint::prefetch;

use super::built::Built;
use super::bytes::{self, f64_at, u32_at};
use super::seek::Seek;

/// One n-gram's search: the entry of its kept context h (order k − 1) and
/// the store's rank of its last word w.
#[derive(Clone, Copy)]
pub(super) struct Want {
    pub parent: u32,
    pub rank: u64,
}

/// What the search found: w's word index (`None`: w is not a unigram),
/// and h'·w's entry of order k − 1 with its exact q (`None`: not kept).
#[derive(Clone, Copy, Debug, PartialEq)]
pub(super) struct Lower {
    pub x: Option<u32>,
    pub e: Option<(u32, f64)>,
}

/// The arrays one order's searches read.
pub(super) struct Arrays<'a> {
    /// The order k being frozen (at least 2).
    pub k: usize,
    pub built: &'a Built,
    /// The word index of every store rank (`u32::MAX`: not a unigram).
    pub rank_index: &'a [u32],
    /// The suffix entry (order k − 2) of every entry of order k − 1, u32
    /// each (empty for k = 2, where h' is empty).
    pub links: &'a [u8],
    /// The exact q of order k − 1, f64 each.
    pub q64: &'a [u8],
}

/// A search's state between its reads.
#[derive(Clone, Copy)]
enum Step {
    Seek(Seek),
    Done(Option<usize>),
}

/// Finds the lower entries of `wants` into `out` (same positions),
/// advancing all the searches stage by stage.
pub(super) fn resolve(a: &Arrays<'_>, wants: &[Want], out: &mut Vec<Lower>) {
    let k = a.k;
    out.clear();
    for w in wants {
        if let Some(x) = a.rank_index.get(w.rank as usize) {
            prefetch(x);
        }
    }
    // The words' indices, and the children ranges of the contexts'
    // suffixes (read in entry order, so the links stream).
    let (children, words) = if k > 2 {
        (&a.built.children[k - 3][..], &a.built.words[k - 2][..])
    } else {
        (&[][..], &[][..])
    };
    let mut suffix = Vec::with_capacity(wants.len());
    for w in wants {
        let x = a
            .rank_index
            .get(w.rank as usize)
            .copied()
            .filter(|&x| x != u32::MAX);
        let s = if k > 2 && 4 * w.parent as usize + 4 <= a.links.len() {
            let s = u32_at(a.links, w.parent as usize) as usize;
            bytes::prefetch(children, 4 * s);
            Some(s)
        } else {
            None
        };
        suffix.push(s);
        out.push(Lower { x, e: None });
    }
    // The searches' first reads.
    let n = words.len() / 4;
    let universe = a.built.universe;
    let mut steps: Vec<Step> = Vec::with_capacity(wants.len());
    for (l, s) in out.iter().zip(&suffix) {
        let step = match (l.x, k) {
            (None, _) => Step::Done(None),
            (Some(x), 2) => Step::Done(Some(x as usize)),
            (Some(x), _) => match *s {
                // A kept context's suffix is always kept; a damaged
                // temporary array only loses the entry.
                Some(s) if 4 * s + 8 <= children.len() => {
                    let lo = (u32_at(children, s) as usize).min(n);
                    let hi = (u32_at(children, s + 1) as usize).clamp(lo, n);
                    let seek = Seek::start(lo, hi, x, universe);
                    prefetch_reads(words, &seek);
                    Step::Seek(seek)
                }
                _ => Step::Done(None),
            },
        };
        steps.push(step);
    }
    // Every search one step a round, until all are done.
    let at = |i: usize| u32_at(words, i);
    loop {
        let mut open = false;
        for (step, l) in steps.iter_mut().zip(out.iter()) {
            let Step::Seek(seek) = *step else { continue };
            let x = l.x.expect("searched words have an index");
            *step = match seek.step(at, x, universe) {
                Seek::Found(i) => Step::Done(Some(i)),
                Seek::Absent => Step::Done(None),
                next => {
                    prefetch_reads(words, &next);
                    open = true;
                    Step::Seek(next)
                }
            };
        }
        if !open {
            break;
        }
    }
    // The entries found, and their q.
    for step in &steps {
        if let Step::Done(Some(e)) = *step {
            bytes::prefetch(a.q64, 8 * e);
        }
    }
    for (step, l) in steps.iter().zip(out.iter_mut()) {
        if let Step::Done(Some(e)) = *step {
            // A damaged temporary array only loses the entry.
            l.e = (8 * e + 8 <= a.q64.len()).then(|| (e as u32, f64_at(a.q64, e)));
        }
    }
}

/// Prefetches what `seek`'s next step reads among `words`.
#[inline(always)]
fn prefetch_reads(words: &[u8], seek: &Seek) {
    if let Some((a, b)) = seek.next_read() {
        bytes::prefetch(words, 4 * a);
        if let Some(b) = b {
            bytes::prefetch(words, 4 * b);
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::model::built::{map, Bytes, Cursor};
    use crate::search::splitmix64 as next;
    use std::path::Path;

    /// Writes little-endian u32s to `dir/name` and maps them.
    fn mapped_u32(dir: &Path, name: &str, xs: &[u32]) -> Bytes {
        let p = dir.join(name);
        let bytes: Vec<u8> = xs.iter().flat_map(|x| x.to_le_bytes()).collect();
        std::fs::write(&p, bytes).expect("write");
        map(&p).expect("map")
    }

    /// One order's children: for each context (its word indices), a
    /// random share of the words that follow its suffix (every word for a
    /// unigram), so that the n-grams are closed under suffixes like a
    /// store's; as (children starts, words).
    fn children_of(
        s: &mut u64,
        contexts: &[Vec<u32>],
        follow: &mut dyn FnMut(&[u32]) -> Vec<u32>,
    ) -> (Vec<u32>, Vec<u32>) {
        let (mut starts, mut words) = (vec![0u32], Vec::new());
        for h in contexts {
            let share = [0, 20, 150, 600][(next(s) % 4) as usize];
            for w in follow(h) {
                if next(s) % 1000 < share {
                    words.push(w);
                }
            }
            starts.push(words.len() as u32);
        }
        (starts, words)
    }

    /// The batched searches through links find, for every order and every
    /// kind of context, the entry and q that the one-at-a-time walk from
    /// the root ([`Built::lookup`]) finds: present and absent words, words
    /// whose rank is no unigram, in random order.
    #[test]
    fn batched_searches_through_links_equal_walks_from_the_root() {
        let dir = tempfile::tempdir().expect("temporary folder");
        let mut s = 11u64;
        let universe = 200u32;
        // Orders 1 to 4: unigram entries are the word indices; the
        // children of an entry follow its suffix's children.
        let mut words = vec![Bytes::Empty];
        let mut children = Vec::new();
        let mut paths: Vec<Vec<Vec<u32>>> = vec![(0..universe).map(|w| vec![w]).collect()];
        let mut lists: Vec<Vec<Vec<u32>>> = Vec::new();
        for k in 2..=4usize {
            let prev = &paths[k - 2];
            let index: std::collections::HashMap<&[u32], usize> = if k > 2 {
                paths[k - 3]
                    .iter()
                    .enumerate()
                    .map(|(e, g)| (&g[..], e))
                    .collect()
            } else {
                Default::default()
            };
            let mut follow = |h: &[u32]| -> Vec<u32> {
                if k == 2 {
                    (0..universe).collect()
                } else {
                    lists[k - 3][index[&h[1..]]].clone()
                }
            };
            let (starts, ws) = children_of(&mut s, prev, &mut follow);
            let mut mine = Vec::new();
            let mut kids = Vec::new();
            for (p, path) in prev.iter().enumerate() {
                let these = &ws[starts[p] as usize..starts[p + 1] as usize];
                kids.push(these.to_vec());
                for &w in these {
                    let mut g = path.clone();
                    g.push(w);
                    mine.push(g);
                }
            }
            lists.push(kids);
            children.push(mapped_u32(dir.path(), &format!("f{k}"), &starts));
            words.push(mapped_u32(dir.path(), &format!("w{k}"), &ws));
            paths.push(mine);
        }
        let built = Built {
            universe: u64::from(universe),
            words,
            children,
        };
        // Ranks are a permutation of the word indices, with some ranks
        // that are no unigram.
        let ranks = universe as usize + 50;
        let mut rank_index: Vec<u32> = (0..ranks as u32)
            .map(|r| if r < universe { r } else { u32::MAX })
            .collect();
        for i in (1..ranks).rev() {
            rank_index.swap(i, (next(&mut s) % (i as u64 + 1)) as usize);
        }
        let mut cursor = Cursor::default();
        let mut walk = |xs: &[u32]| -> Option<u32> {
            if xs.len() == 1 {
                Some(xs[0])
            } else {
                built.lookup(&mut cursor, xs)
            }
        };
        for k in 2..=4usize {
            // The links of order k − 1's entries (their suffixes' entries),
            // and q: an entry's own number.
            let ctx = &paths[k - 2];
            let links: Vec<u32> = if k > 2 {
                ctx.iter()
                    .map(|g| walk(&g[1..]).expect("closed under suffixes"))
                    .collect()
            } else {
                Vec::new()
            };
            let links = mapped_u32(dir.path(), &format!("l{k}"), &links);
            let q64: Vec<u8> = (0..ctx.len())
                .flat_map(|e| (e as f64 + 0.5).to_le_bytes())
                .collect();
            let arrays = Arrays {
                k,
                built: &built,
                rank_index: &rank_index,
                links: &links,
                q64: &q64,
            };
            let mut wants = Vec::new();
            let mut expect = Vec::new();
            for i in 0..3000 {
                let parent = (next(&mut s) % ctx.len() as u64) as usize;
                let h = &ctx[parent];
                // Half the words follow the context's suffix.
                let after = &lists[k - 2][parent];
                let rank = match (i % 2, k) {
                    (0, 3..) if !after.is_empty() => {
                        let x = after[(next(&mut s) % after.len() as u64) as usize];
                        rank_index.iter().position(|&y| y == x).expect("a rank") as u64
                    }
                    _ => next(&mut s) % ranks as u64,
                };
                let x = rank_index[rank as usize];
                let e = (x != u32::MAX)
                    .then(|| {
                        let mut g = h[1..].to_vec();
                        g.push(x);
                        walk(&g)
                    })
                    .flatten();
                wants.push(Want {
                    parent: parent as u32,
                    rank,
                });
                expect.push(Lower {
                    x: (x != u32::MAX).then_some(x),
                    e: e.map(|e| (e, e as f64 + 0.5)),
                });
            }
            assert!(expect.iter().filter(|l| l.e.is_some()).count() > 100);
            assert!(expect.iter().filter(|l| l.e.is_none()).count() > 100);
            let mut out = Vec::new();
            for (w, e) in wants.chunks(64).zip(expect.chunks(64)) {
                resolve(&arrays, w, &mut out);
                assert_eq!(out, e, "order {k}");
            }
        }
    }
}
