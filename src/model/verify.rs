//! [`Model::verify`]: the full check of a model file, reading all of it
//! (`quern freeze --verify`).

use crate::error::{Error, Result};

use super::bytes::{u32_at, u64_at};
use super::file::Model;
use super::format::SectionKind;

impl Model {
    /// Checks every section's checksum and every structural invariant
    /// (children ranges increasing and ending at the next order's count,
    /// words increasing within each context and in range, values finite
    /// and probabilities within [0, 1], the ranking a permutation of V).
    /// Reads the whole file.
    pub fn verify(&self) -> Result<()> {
        let b = self.bytes();
        let bad = |d: String| Error::corrupt(self.path(), d);
        let (n, nw, bos) = (
            self.order(),
            self.words_with_bos(),
            self.bos_index() as usize,
        );
        let [ids, offs, text, rk] = self.vocabulary_sections();
        for e in self.directory().entries() {
            let r = e.offset as usize..(e.offset + e.len) as usize;
            if xxhash_rust::xxh3::xxh3_64(&b[r]) != e.hash {
                let name = SectionKind::from_u32(e.kind).map_or("unknown", |k| k.name());
                return Err(bad(format!(
                    "the checksum of the {name} section of order {} (bytes {}..+{}) does not match",
                    e.order, e.offset, e.len
                )));
            }
        }
        for i in 1..nw {
            if u64_at(ids, i - 1) >= u64_at(ids, i) {
                return Err(bad(format!("the word ids are not increasing at {i}")));
            }
        }
        for i in 0..nw {
            let (a, z) = (u64_at(offs, i), u64_at(offs, i + 1));
            if a > z || z as usize > text.len() {
                return Err(bad(format!("the offsets of word {i} are out of range")));
            }
        }
        let mut seen = vec![false; nw];
        for i in 0..self.meta().vocabulary as usize {
            let x = u32_at(rk, i) as usize;
            if x >= nw || x == bos || std::mem::replace(&mut seen[x], true) {
                return Err(bad(format!(
                    "the unigram ranking is not a permutation of V at {i}"
                )));
            }
        }
        for k in 1..=n {
            let o = self.sections(k);
            for i in 0..o.len {
                let q = o.probs.get(b, i);
                if !(q.is_finite() && q >= 0.0 && (q <= 1.0 || !self.meta().probabilities)) {
                    return Err(bad(format!("order {k}: value {q} of n-gram {i}")));
                }
            }
            if k < n {
                for i in 0..o.len {
                    let x = o.weights.get(b, i);
                    if !(x.is_finite() && x >= 0.0) {
                        return Err(bad(format!("order {k}: back-off weight {x} of n-gram {i}")));
                    }
                }
                for i in 0..if o.skips.is_empty() { 0 } else { o.len } {
                    let sk = b[o.skips.start + i] as usize;
                    if sk == 0 || sk > k {
                        return Err(bad(format!("order {k}: back-off skip {sk} of n-gram {i}")));
                    }
                }
                let next = self.sections(k + 1);
                let mut prev = 0u64;
                for i in 0..=o.len {
                    let s = o.children.get(b, i);
                    if s < prev || (i == 0 && s != 0) || (i == o.len && s as usize != next.len) {
                        return Err(bad(format!(
                            "order {k}: the children index is broken at {i}"
                        )));
                    }
                    // Decoded on open in one pass, it must read as its
                    // samples read it.
                    if self.plain_start(k, i).is_some_and(|p| p as u64 != s) {
                        return Err(bad(format!(
                            "order {k}: the children index reads differently from its samples at {i}"
                        )));
                    }
                    if i > 0 {
                        for e in prev as usize..s as usize {
                            let x = next.words.get(b, e);
                            if x as usize >= nw
                                || (e > prev as usize && next.words.get(b, e - 1) >= x)
                            {
                                return Err(bad(format!(
                                    "order {}: the words of the children of n-gram {} are not increasing",
                                    k + 1,
                                    i - 1
                                )));
                            }
                        }
                    }
                    prev = s;
                }
            }
        }
        Ok(())
    }
}
