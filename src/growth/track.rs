//! The count worker's record of where each word was first seen.

use crate::words::{bos_id, IdMap, WordId};

/// First sightings since the last spill: word → (cover index, token
/// position in that cover), and the tokens of each finished cover.
pub struct FirstSeen {
    first: IdMap<(u32, u64)>,
    covers: Vec<u64>,
    tokens: u64,
    bos: WordId,
}

impl Default for FirstSeen {
    fn default() -> Self {
        FirstSeen {
            first: IdMap::default(),
            covers: Vec::new(),
            tokens: 0,
            bos: bos_id(),
        }
    }
}

impl FirstSeen {
    /// An empty record.
    pub fn new() -> Self {
        Self::default()
    }

    /// Reads the padded ids of one sentence. With `scan` false only the
    /// tokens are counted: the caller knows that no id of the sentence is
    /// new (none was added to its dictionary, which is emptied at the same
    /// spills as this record).
    #[inline]
    pub fn sentence(&mut self, ids: &[WordId], scan: bool) {
        let cover = self.covers.len() as u32;
        for &id in ids {
            if id == self.bos {
                continue;
            }
            if scan {
                let at = self.tokens;
                self.first.entry(id).or_insert((cover, at));
            }
            self.tokens += 1;
        }
    }

    /// True if `id` was seen since the last spill.
    pub fn contains(&self, id: WordId) -> bool {
        self.first.contains_key(&id)
    }

    /// Ends the current cover (the caller recorded it as a covered range).
    pub fn end_cover(&mut self) {
        self.covers.push(self.tokens);
        self.tokens = 0;
    }

    /// Approximate heap bytes held (counted against the dictionary's share).
    pub fn heap_bytes(&self) -> usize {
        self.first.capacity() * 32 + self.covers.capacity() * 8
    }

    /// The tokens per cover and the sightings sorted by id, emptying the
    /// record and releasing its memory: a map drained in place keeps its
    /// capacity, which [`FirstSeen::heap_bytes`] counts, so every later
    /// spill would come as soon as the dictionary grew a little.
    pub fn drain(&mut self) -> (Vec<u64>, Vec<(WordId, u32, u64)>) {
        let first = std::mem::take(&mut self.first);
        let mut v: Vec<_> = first.into_iter().map(|(w, (c, p))| (w, c, p)).collect();
        v.sort_unstable_by_key(|e| e.0);
        self.tokens = 0;
        (std::mem::take(&mut self.covers), v)
    }
}
