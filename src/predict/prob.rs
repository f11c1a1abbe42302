//! [`Prob`]: one probability, as every predictor answers it.

use crate::words::WordId;

/// One probability and how it came about.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Prob {
    /// The probability (for `stupid`, the score).
    pub p: f64,
    /// log10 of `p` (−∞ for 0).
    pub log10: f64,
    /// The order of the longest stored n-gram ending in the word (after the
    /// context was cut and OOV words mapped): 0 if the word was never seen.
    pub order: usize,
    /// The word is outside V and was scored as `<unk>`.
    pub oov: bool,
    /// The word that was scored (`<unk>` for an OOV word).
    pub word: WordId,
}

impl Prob {
    /// How many words of the n-gram, the word included, were found stored
    /// together: the predicted word and the `matched − 1` words before it
    /// form the longest stored n-gram that ends in the word. 0 means the
    /// word is outside V (and was scored as `<unk>`); a word in V matches
    /// at least itself.
    pub fn matched(&self) -> usize {
        if self.oov {
            0
        } else {
            self.order
        }
    }
}
