//! Patterns of words: `the * of`, `* of the`, `in the * *`. Each position
//! is a word, tokenized and lowercased as the store's text was, or `*`,
//! any one word but the sentence markers `<s>` and `</s>` (`\*` is the word
//! `*` itself; a marker written in a pattern matches itself, so
//! `<s> the *` finds sentence openings). A pattern of k positions matches
//! n-grams of order k.
//!
//! # Cost of a search in the store
//!
//! - *Fixed leading words* (`the * of`, `in the * *`): a prefix scan of
//!   order k over the n-grams that begin with them, the others checked one
//!   by one: in proportion to the n-grams that share the prefix.
//! - *A leading `*`* (`* of the`): no index by later words exists, so the
//!   whole order k is read ([`super::scan`]), on every core: in proportion
//!   to the order's size.

use super::freq::{best_counts, FreqItem, FreqOptions};
use super::Vocabulary;
use crate::error::{Error, Result};
use crate::store::Store;
use crate::tokenize::{query_ids, Preparation};
use crate::words::{bos_id, eos_id, WordId};

/// A parsed pattern: per position a word or any word (`None`).
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct Pattern {
    slots: Vec<Option<WordId>>,
}

impl Pattern {
    /// Parses `text`, each word prepared as a token the way a store with
    /// `prep` prepared its text.
    pub fn parse(text: &str, prep: &Preparation) -> Result<Pattern> {
        let slots: Vec<Option<WordId>> = text
            .split_whitespace()
            .map(|w| match w {
                "*" => None,
                r"\*" => Some(query_ids("*", prep)[0]),
                w => Some(query_ids(w, prep)[0]),
            })
            .collect();
        if slots.is_empty() {
            return Err(Error::Config(format!(
                "pattern {text:?}: no words (write words and `*`, e.g. \"the * of\")"
            )));
        }
        if slots.len() > crate::key::MAX_ORDER {
            return Err(Error::Config(format!(
                "pattern {text:?}: {} positions, at most {}",
                slots.len(),
                crate::key::MAX_ORDER
            )));
        }
        Ok(Pattern { slots })
    }

    /// Number of positions (the order it matches).
    pub fn len(&self) -> usize {
        self.slots.len()
    }

    /// Per position the word, or `None` for `*`.
    pub fn slots(&self) -> &[Option<WordId>] {
        &self.slots
    }

    /// The fixed words before the first `*`.
    pub fn prefix(&self) -> Vec<WordId> {
        self.slots.iter().map_while(|s| *s).collect()
    }

    /// Whether `ids` (of the pattern's length) fits.
    pub fn matches(&self, ids: &[WordId]) -> bool {
        ids.len() == self.slots.len()
            && self.slots.iter().zip(ids).all(|(s, &w)| match s {
                Some(s) => *s == w,
                None => w != bos_id() && w != eos_id(),
            })
    }
}

/// The stored n-grams that fit `pattern`, by descending count then text,
/// at most `opts.limit` (`opts.order` is the pattern's length).
pub fn best_matches(
    store: &Store,
    vocab: &Vocabulary,
    pattern: &Pattern,
    opts: &FreqOptions,
) -> Result<Vec<FreqItem>> {
    let opts = FreqOptions {
        order: pattern.len(),
        ..opts.clone()
    };
    best_counts(
        store,
        vocab,
        &pattern.prefix(),
        &|ids| pattern.matches(ids),
        &opts,
    )
}

#[cfg(test)]
mod tests {
    use super::*;

    fn lowercased() -> Preparation {
        Preparation {
            lowercase: true,
            ..Default::default()
        }
    }
    use crate::words::word_id;

    #[test]
    fn stars_are_any_word() {
        let p = Pattern::parse("The * OF", &lowercased()).unwrap();
        let w = |s: &str| word_id(s.as_bytes());
        assert_eq!(p.slots(), &[Some(w("the")), None, Some(w("of"))]);
        assert_eq!(p.prefix(), vec![w("the")]);
        assert!(p.matches(&[w("the"), w("end"), w("of")]));
        assert!(!p.matches(&[w("the"), w("end"), w("in")]));
        assert!(!p.matches(&[w("the"), w("end")]));
        assert!(!p.matches(&[w("the"), eos_id(), w("of")]));
        let start = Pattern::parse("<s> the", &Preparation::default()).unwrap();
        assert!(start.matches(&[bos_id(), w("the")]));
        let lead = Pattern::parse("* of the", &Preparation::default()).unwrap();
        assert!(lead.prefix().is_empty());
        assert_eq!(
            Pattern::parse(r"\*", &Preparation::default())
                .unwrap()
                .slots(),
            &[Some(w("*"))]
        );
        assert!(Pattern::parse("  ", &Preparation::default()).is_err());
    }
}
