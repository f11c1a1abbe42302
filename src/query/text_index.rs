//! [`TextIndex`]: a store's V in text, for completion's prefixes and the
//! top K's tie-break (built by [`super::complete`]).

use std::cmp::Ordering;

use std::sync::OnceLock;

use crate::topk::{fold, PrefixIndex};
use crate::words::{IdMap, WordId};

/// V's texts in the order of the unigram ranking, with a prefix index
/// over them.
pub(crate) struct TextIndex {
    /// By rank.
    pub(super) texts: Vec<Box<str>>,
    /// The rank of each word of V.
    pub(super) rank: IdMap<u32>,
    pub(super) index: PrefixIndex,
    /// The folded texts by rank and a prefix index over them, built on the
    /// first folded completion.
    pub(super) folded: OnceLock<(Vec<Box<str>>, PrefixIndex)>,
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

    /// The folded texts by rank, and their prefix index.
    pub(super) fn folded(&self) -> &(Vec<Box<str>>, PrefixIndex) {
        self.folded.get_or_init(|| {
            let texts: Vec<Box<str>> = self.texts.iter().map(|t| fold(t).into()).collect();
            let index = PrefixIndex::new(texts.len(), |r| Some(texts[r as usize].as_bytes()));
            (texts, index)
        })
    }

    /// Where `w` is in the byte order of the folded texts.
    pub(super) fn folded_place(&self, w: WordId) -> Option<usize> {
        let &r = self.rank.get(&w)?;
        self.folded().1.place(r).map(|p| p as usize)
    }
}
