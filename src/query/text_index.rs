//! [`TextIndex`]: a store's V in text, for completion's prefixes and the
//! top K's tie-break (built by [`super::complete`]).

use std::cmp::Ordering;

use crate::topk::PrefixIndex;
use crate::words::{IdMap, WordId};

/// V's texts in the order of the unigram ranking, with a prefix index
/// over them.
pub(crate) struct TextIndex {
    /// By rank.
    pub(super) texts: Vec<Box<str>>,
    /// The rank of each word of V.
    pub(super) rank: IdMap<u32>,
    pub(super) index: PrefixIndex,
}

impl TextIndex {
    /// The order of two words' bytes (words outside V last).
    pub(super) fn bytes_order(&self, a: WordId, b: WordId) -> Ordering {
        let text = |w: WordId| {
            self.rank
                .get(&w)
                .map(|&r| self.texts[r as usize].as_bytes())
        };
        match (text(a), text(b)) {
            (Some(x), Some(y)) => x.cmp(y),
            (x, y) => y.is_none().cmp(&x.is_none()).then(a.cmp(&b)),
        }
    }

    /// Where `w` is in byte order.
    pub(super) fn place(&self, w: WordId) -> Option<usize> {
        let &r = self.rank.get(&w)?;
        self.index.place(r).map(|p| p as usize)
    }
}
