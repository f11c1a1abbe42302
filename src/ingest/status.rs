//! What a store directory holds and what an ingest on it is doing.

use std::path::{Path, PathBuf};

use serde::Serialize;

use super::manifest::{Manifest, Mode};
use crate::error::Result;
use crate::layout;
use crate::store::Store;

/// State of an ingest on a store, and what the finished store holds.
#[derive(Clone, Debug, Serialize)]
pub struct IngestStatus {
    /// The store directory.
    pub store: PathBuf,
    /// `running` (an ingest holds the lock), `interrupted` (unfinished, no
    /// process at work), `finished`, or `empty`.
    pub state: &'static str,
    /// The unfinished ingest, if there is one.
    pub ingest: Option<UnfinishedIngest>,
    /// The finished store, if there is one.
    pub finished: Option<FinishedStore>,
}

/// Progress of an unfinished ingest.
#[derive(Clone, Debug, Serialize)]
pub struct UnfinishedIngest {
    /// Phase name.
    pub phase: &'static str,
    /// `fresh` or `append`.
    pub mode: &'static str,
    /// Unix time the ingest started.
    pub started: u64,
    /// Input files.
    pub input_files: usize,
    /// Input bytes on disk.
    pub input_bytes: u64,
    /// Input bytes whose counts are durable.
    pub counted_bytes: u64,
    /// Durable spills.
    pub spills: usize,
    /// Partitions.
    pub partitions: u32,
    /// Partitions merged.
    pub merged: usize,
    /// Partitions joined.
    pub joined: usize,
}

/// Summary of a finished store.
#[derive(Clone, Debug, Serialize)]
pub struct FinishedStore {
    /// Highest order.
    pub order: usize,
    /// Lowercased.
    pub lowercase: bool,
    /// `--unique`: the unit counted once; absent without it.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub unique: Option<crate::records::Unique>,
    /// The other steps of the text's preparation, where not the default
    /// (absent for the default preparation).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub preparation: Option<serde_json::Value>,
    /// Sentences.
    pub sentences: u64,
    /// Tokens T.
    pub tokens: u64,
    /// |V|.
    pub vocabulary: u64,
    /// Stored n-grams per order.
    pub ngrams: Vec<u64>,
    /// What `--unique` left out; absent for a store without it.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub duplicates: Option<crate::stats::ReportDuplicates>,
    /// Size of the database on disk.
    pub disk_bytes: u64,
}

fn lock_held(dir: &Path) -> bool {
    let Ok(f) = std::fs::File::open(layout::lock(dir)) else {
        return false;
    };
    match f.try_lock_shared() {
        Ok(()) => {
            let _ = f.unlock();
            false
        }
        Err(_) => true,
    }
}

/// Reports on the store directory `dir`; works while an ingest runs.
pub fn status(dir: &Path) -> Result<IngestStatus> {
    let manifest = Manifest::load(&layout::work(dir))?;
    let ingest = manifest.map(|m| {
        let input_bytes: u64 = m.inputs.iter().map(|f| f.size).sum();
        let counted_bytes = m.counted_bytes();
        UnfinishedIngest {
            phase: m.phase.name(),
            mode: match m.mode {
                Mode::Fresh => "fresh",
                Mode::Append => "append",
            },
            started: m.started,
            input_files: m.inputs.len(),
            input_bytes,
            counted_bytes,
            spills: m.runsets.len(),
            partitions: m.partitions,
            merged: m.merged.iter().flatten().count(),
            joined: m.joined.iter().flatten().count(),
        }
    });
    let running = lock_held(dir);
    let has_db = layout::has_db(dir);
    let finished = if has_db && ingest.is_none() {
        let s = Store::open(dir)?;
        let m = s.meta();
        Some(FinishedStore {
            order: m.settings.order,
            lowercase: m.settings.preparation.lowercase,
            unique: m.settings.unique,
            preparation: (m.settings.preparation
                != crate::tokenize::Preparation::lowercasing(m.settings.preparation.lowercase))
            .then(|| m.settings.preparation.to_json()),
            sentences: m.totals.sentences,
            tokens: m.totals.tokens,
            vocabulary: m.totals.vocabulary,
            ngrams: m.orders.iter().map(|o| o.ngrams).collect(),
            duplicates: m.settings.unique.map(|_| crate::stats::ReportDuplicates {
                units: m.totals.duplicate_units,
                tokens: m.totals.duplicate_tokens,
                token_share: m.totals.duplicate_token_share(),
            }),
            disk_bytes: s.disk_bytes(),
        })
    } else {
        None
    };
    let state = match (&ingest, running, has_db) {
        (_, true, _) => "running",
        (Some(_), false, _) => "interrupted",
        (None, false, true) => "finished",
        (None, false, false) => "empty",
    };
    Ok(IngestStatus {
        store: dir.to_path_buf(),
        state,
        ingest,
        finished,
    })
}
