//! The search structures a model builds on first use and shares between
//! threads: the text index of completion and the children lists ranked
//! by q (see [`super::complete`]).

use std::collections::HashMap;
use std::sync::atomic::{AtomicUsize, Ordering};
use std::sync::{Arc, Mutex, OnceLock};

use crate::topk::PrefixIndex;

/// At most this many children entries are kept ranked (4 bytes each);
/// past it the cache is emptied and fills again.
pub const RANKED_BUDGET: usize = 1 << 25;

/// Shards of the children cache (fewer threads wait on one lock).
const SHARDS: usize = 16;

/// The lazily built search structures of a model, shared by threads.
#[derive(Default)]
pub struct Completion {
    text: OnceLock<TextIndex>,
    folded: OnceLock<TextIndex>,
    ranked: [Shard; SHARDS],
    ranked_entries: AtomicUsize,
}

impl std::fmt::Debug for Completion {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("Completion")
            .field("text_index_built", &self.text.get().is_some())
            .field(
                "ranked_entries",
                &self.ranked_entries.load(Ordering::Relaxed),
            )
            .finish()
    }
}

/// V by the stored unigram q, with a prefix index over it (the markers
/// left out).
pub(super) struct TextIndex {
    /// Word indices by q, most probable first (ties by index).
    pub order: Vec<u32>,
    /// Over the places in `order`.
    pub index: PrefixIndex,
    /// Per word index: its place in byte order (`u32::MAX`: a marker).
    pub place: Vec<u32>,
    /// The folded texts in `order` (empty in the index of the words'
    /// own texts), which `index` is over.
    pub folded: Vec<Box<str>>,
}

impl Completion {
    /// The text index, built by `build` on first use.
    pub(super) fn text(&self, build: impl FnOnce() -> TextIndex) -> &TextIndex {
        self.text.get_or_init(build)
    }

    /// The index of the folded texts, built by `build` on first use.
    pub(super) fn folded(&self, build: impl FnOnce() -> TextIndex) -> &TextIndex {
        self.folded.get_or_init(build)
    }

    /// The ranked children list under `key`, made by `rank` on first use.
    pub(super) fn ranked(&self, key: u64, rank: impl FnOnce() -> Vec<u32>) -> Arc<[u32]> {
        let shard = &self.ranked[(key as usize ^ (key >> 32) as usize) % SHARDS];
        if let Some(r) = lock(shard).get(&key) {
            return r.clone();
        }
        let v: Arc<[u32]> = rank().into();
        if self.ranked_entries.fetch_add(v.len(), Ordering::Relaxed) + v.len() > RANKED_BUDGET {
            for s in &self.ranked {
                lock(s).clear();
            }
            self.ranked_entries.store(v.len(), Ordering::Relaxed);
        }
        lock(shard).insert(key, v.clone());
        v
    }
}

type Shard = Mutex<HashMap<u64, Arc<[u32]>>>;

/// Locks a shard of the cache. A shard whose lock a panicking thread held
/// is emptied and used again: it holds only lists that can be ranked
/// anew, and no answer depends on what it held.
fn lock(m: &Shard) -> std::sync::MutexGuard<'_, HashMap<u64, Arc<[u32]>>> {
    m.lock().unwrap_or_else(|poisoned| {
        let mut g = poisoned.into_inner();
        g.clear();
        m.clear_poison();
        g
    })
}
