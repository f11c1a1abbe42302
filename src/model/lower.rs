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
use super::bytes::u32_at;
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

/// Prefetches the u32 at index `i` of `b`, if there is one.
#[inline(always)]
fn prefetch_u32(b: &[u8], i: usize) {
    if let Some(x) = b.get(4 * i) {
        prefetch(x);
    }
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
            prefetch_u32(children, s);
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
            if let Some(b) = a.q64.get(8 * e) {
                prefetch(b);
            }
        }
    }
    for (step, l) in steps.iter().zip(out.iter_mut()) {
        if let Step::Done(Some(e)) = *step {
            l.e = a
                .q64
                .get(8 * e..8 * e + 8)
                .map(|b| (e as u32, f64::from_le_bytes(b.try_into().expect("8 bytes"))));
        }
    }
}

/// Prefetches what `seek`'s next step reads among `words`.
#[inline(always)]
fn prefetch_reads(words: &[u8], seek: &Seek) {
    if let Some((a, b)) = seek.next_read() {
        prefetch_u32(words, a);
        if let Some(b) = b {
            prefetch_u32(words, b);
        }
    }
}
