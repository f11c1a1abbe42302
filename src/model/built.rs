//! The arrays of a freeze's finished orders, memory-mapped: the next
//! order's parts search them ([`Built::lookup`]) for the suffix h'·w of
//! each n-gram, moving forward from their last search.

use std::fs::File;
use std::path::Path;

use crate::error::{IoContext, Result};

use super::bytes::{map_read_only, u32_at};
use super::seek::Seek;

/// A file's bytes, memory-mapped (or empty).
pub(super) enum Bytes {
    Map(memmap2::Mmap),
    Empty,
}

impl std::ops::Deref for Bytes {
    type Target = [u8];
    fn deref(&self) -> &[u8] {
        match self {
            Bytes::Map(m) => m,
            Bytes::Empty => &[],
        }
    }
}

/// Maps the file at `path` read-only.
pub(super) fn map(path: &Path) -> Result<Bytes> {
    let f = File::open(path).at(path, "open")?;
    if f.metadata().at(path, "stat")?.len() == 0 {
        return Ok(Bytes::Empty);
    }
    Ok(Bytes::Map(map_read_only(&f, path)?))
}

/// The arrays of the finished orders, searchable: `words[k]` and
/// `children[k]` (index k − 1 … as the order), mapped and shared by the
/// parts.
pub(super) struct Built {
    /// The number of word indices W (every word index is below it).
    pub universe: u64,
    pub words: Vec<Bytes>,
    pub children: Vec<Bytes>,
}

/// One reader's place in [`Built`]: the path of its last lookup (word
/// indices and entries), and where the last search of each level ended
/// (the entry found, or where the word would be) and under which parent
/// entry: the n-grams of one context come in word order, so their suffixes
/// are children of one entry in increasing order, and the next search
/// gallops forward from there.
#[derive(Default)]
pub(super) struct Cursor {
    path_x: Vec<u32>,
    path_e: Vec<u32>,
    hint: Vec<(u32, usize)>,
}

impl Built {
    /// The entry of order |xs| of the n-gram of word indices `xs`.
    pub fn lookup(&self, c: &mut Cursor, xs: &[u32]) -> Option<u32> {
        let mut same = 0;
        while same < xs.len() && same < c.path_x.len() && c.path_x[same] == xs[same] {
            same += 1;
        }
        c.path_x.truncate(same);
        c.path_e.truncate(same);
        if c.hint.len() < xs.len() {
            c.hint.resize(xs.len(), (u32::MAX, 0));
        }
        for t in same..xs.len() {
            let e = if t == 0 {
                xs[0]
            } else {
                // Entry path_e[t-1] of order t; its children are of order t + 1.
                let ch = &self.children[t - 1];
                let w = &self.words[t];
                let n = w.len() / 4;
                let p = c.path_e[t - 1];
                let lo = (u32_at(ch, p as usize) as usize).min(n);
                let hi = (u32_at(ch, p as usize + 1) as usize).clamp(lo, n);
                let (hp, hpos) = c.hint[t];
                let found = if hp == p && hpos > lo && hpos <= hi && u32_at(w, hpos - 1) < xs[t] {
                    // The next child of the last parent: near the last one.
                    gallop(w, hpos, hi, xs[t])
                } else {
                    // A new parent: its children are spread evenly over
                    // the word indices, so the staged interpolation search
                    // of the model's queries finds the word in a few reads
                    // (galloping from the start would take about log2 of
                    // the list's length, each a cache miss on a long one).
                    let at = |i: usize| u32_at(w, i);
                    match Seek::start(lo, hi, xs[t], self.universe).finish(at, xs[t], self.universe)
                    {
                        Some(i) => Ok(i),
                        None => Err(lo),
                    }
                };
                match found {
                    Ok(i) => {
                        c.hint[t] = (p, i + 1);
                        i as u32
                    }
                    Err(i) => {
                        c.hint[t] = (p, i);
                        return None;
                    }
                }
            };
            c.path_x.push(xs[t]);
            c.path_e.push(e);
        }
        c.path_e.last().copied()
    }
}

/// The position of `w` among the increasing u32 words `words[lo..hi]`
/// (little-endian bytes), or where it would be: galloping from `lo`
/// (1, 2, 4, … ahead), then bisecting, so that a word near `lo` costs few
/// reads.
fn gallop(words: &[u8], lo: usize, hi: usize, w: u32) -> std::result::Result<usize, usize> {
    let (mut a, mut step) = (lo, 1usize);
    let mut b = lo;
    while b < hi && u32_at(words, b) < w {
        a = b + 1;
        b = lo + step;
        step *= 2;
    }
    let b = b.min(hi);
    let (mut a, mut b) = (a.min(b), b);
    while a < b {
        let m = a + (b - a) / 2;
        if u32_at(words, m) < w {
            a = m + 1;
        } else {
            b = m;
        }
    }
    if a < hi && u32_at(words, a) == w {
        Ok(a)
    } else {
        Err(a)
    }
}
