//! Word ids: every token is identified by the 64-bit xxh3 hash of its bytes.
//!
//! Hashed ids make a run file meaningful on its own, whatever order the
//! chunks were counted in, which keeps resume, append and cluster runs simple.
//! The [`Dictionary`] maps ids back to words and turns a collision between two
//! different words into [`Error::HashCollision`], never a silent merge.
//!
//! The markers `<s>`, `</s>` and `<unk>` have the ids of their spellings; a
//! literal input token spelled like a marker is mapped to `<unk>` by the
//! tokenizer, so a marker id always means the marker.

use std::collections::HashMap;
use std::hash::{BuildHasherDefault, Hasher};

use crate::error::{Error, Result};

/// A word's 64-bit id.
pub type WordId = u64;

/// Sentence-start marker.
pub const BOS: &str = "<s>";
/// Sentence-end marker.
pub const EOS: &str = "</s>";
/// Unknown-word marker.
pub const UNK: &str = "<unk>";

/// The id of a word's bytes.
#[inline]
pub fn word_id(word: &[u8]) -> WordId {
    xxhash_rust::xxh3::xxh3_64(word)
}

/// Id of `<s>`.
pub fn bos_id() -> WordId {
    word_id(BOS.as_bytes())
}
/// Id of `</s>`.
pub fn eos_id() -> WordId {
    word_id(EOS.as_bytes())
}
/// Id of `<unk>`.
pub fn unk_id() -> WordId {
    word_id(UNK.as_bytes())
}

/// A hasher for keys that are already uniformly distributed 64-bit hashes.
#[derive(Default, Clone, Copy)]
pub struct IdHasher(u64);

impl Hasher for IdHasher {
    fn finish(&self) -> u64 {
        self.0
    }
    fn write(&mut self, bytes: &[u8]) {
        for &b in bytes {
            self.0 = (self.0.rotate_left(8) ^ b as u64).wrapping_mul(0x9E37_79B9_7F4A_7C15);
        }
    }
    fn write_u64(&mut self, v: u64) {
        self.0 = v;
    }
}

/// A `HashMap` keyed by word ids.
pub type IdMap<V> = HashMap<WordId, V, BuildHasherDefault<IdHasher>>;

/// Id-to-word map that detects collisions.
#[derive(Default)]
pub struct Dictionary {
    words: IdMap<Box<str>>,
    bytes: usize,
}

impl Dictionary {
    /// An empty dictionary.
    pub fn new() -> Self {
        Self::default()
    }

    /// Records `word` under `id`; fails if `id` already names another word.
    #[inline]
    pub fn insert(&mut self, id: WordId, word: &str) -> Result<()> {
        match self.words.get(&id) {
            Some(seen) if &**seen == word => Ok(()),
            Some(seen) => Err(Error::HashCollision {
                first: seen.to_string(),
                second: word.to_string(),
                id,
            }),
            None => {
                self.bytes += word.len() + 48;
                self.words.insert(id, word.into());
                Ok(())
            }
        }
    }

    /// The word of `id`, if known.
    pub fn get(&self, id: WordId) -> Option<&str> {
        self.words.get(&id).map(|w| &**w)
    }

    /// Approximate heap bytes held (used against the memory budget).
    pub fn heap_bytes(&self) -> usize {
        self.bytes
    }

    /// Number of words.
    pub fn len(&self) -> usize {
        self.words.len()
    }

    /// True if empty.
    pub fn is_empty(&self) -> bool {
        self.words.is_empty()
    }

    /// The entries sorted by id, emptying the dictionary.
    pub fn drain_sorted(&mut self) -> Vec<(WordId, Box<str>)> {
        // Taken, not drained: the map's memory goes too, as `bytes` says.
        let mut v: Vec<_> = std::mem::take(&mut self.words).into_iter().collect();
        self.bytes = 0;
        v.sort_unstable_by_key(|e| e.0);
        v
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn collision_is_an_error() {
        let mut d = Dictionary::new();
        d.insert(7, "a").unwrap();
        d.insert(7, "a").unwrap();
        assert!(matches!(
            d.insert(7, "b"),
            Err(Error::HashCollision { id: 7, .. })
        ));
    }

    #[test]
    fn markers_have_distinct_ids() {
        assert_ne!(bos_id(), eos_id());
        assert_ne!(eos_id(), unk_id());
        assert_ne!(bos_id(), 0);
    }
}
