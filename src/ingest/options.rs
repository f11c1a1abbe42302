//! What an ingest is asked to do, what it reports while it runs, and what
//! it reports when done.

use std::collections::BTreeMap;
use std::path::PathBuf;

use serde::Serialize;

use super::manifest::Phase;
use crate::records::Totals;

/// What to ingest and how.
#[derive(Clone, Debug)]
pub struct IngestOptions {
    /// The store directory.
    pub store: PathBuf,
    /// Files, directories, or `-` for standard input.
    pub inputs: Vec<PathBuf>,
    /// Highest order N.
    pub order: usize,
    /// Memory budget of the whole process, in bytes.
    pub memory: u64,
    /// Worker threads.
    pub threads: usize,
    /// Lowercase every token.
    pub lowercase: bool,
    /// A fixed vocabulary: every other token counts as `<unk>`.
    pub word_list: Option<PathBuf>,
    /// Skip lines longer than this (bytes, without the line end).
    pub max_line_bytes: usize,
    /// Number of partitions (default: chosen from the thread count).
    pub partitions: Option<u32>,
    /// Discard an unfinished ingest and start again.
    pub restart: bool,
    /// Add the inputs to a finished store.
    pub append: bool,
    /// Size of the chunks plain files are cut into.
    pub chunk_bytes: u64,
}

impl IngestOptions {
    /// Options with the defaults: order 5, 1 GiB, all cores, 1 MiB lines.
    pub fn new(store: impl Into<PathBuf>, inputs: Vec<PathBuf>) -> Self {
        IngestOptions {
            store: store.into(),
            inputs,
            order: 5,
            memory: 1 << 30,
            threads: std::thread::available_parallelism().map_or(1, |n| n.get()),
            lowercase: false,
            word_list: None,
            max_line_bytes: 1 << 20,
            partitions: None,
            restart: false,
            append: false,
            chunk_bytes: 16 << 20,
        }
    }
}

/// Receives progress; the library never prints.
pub trait Progress: Sync {
    /// A phase starts; `total` is its amount of work (bytes or partitions).
    fn phase(&self, phase: Phase, total: u64);
    /// Work done so far in the current phase.
    fn advance(&self, done: u64);
}

/// A [`Progress`] that ignores everything.
pub struct Silent;

impl Progress for Silent {
    fn phase(&self, _: Phase, _: u64) {}
    fn advance(&self, _: u64) {}
}

/// What an ingest did.
#[derive(Clone, Debug, Serialize)]
pub struct IngestSummary {
    /// The store directory.
    pub store: PathBuf,
    /// An unfinished ingest was resumed.
    pub resumed: bool,
    /// Inputs were appended to a finished store.
    pub appended: bool,
    /// Corpus totals.
    pub totals: Totals,
    /// Stored n-grams per order (index 0: unigrams).
    pub ngrams: Vec<u64>,
    /// Count run files written by this process.
    pub runs_written: u64,
    /// Bytes of temporary files written by this process.
    pub temp_bytes: u64,
    /// Size of the store on disk.
    pub store_bytes: u64,
    /// Wall-clock seconds per phase run by this process.
    pub phase_seconds: BTreeMap<String, f64>,
    /// Wall-clock seconds in all.
    pub seconds: f64,
    /// Peak resident memory of the process, bytes.
    pub peak_rss_bytes: Option<u64>,
    /// Damaged intermediate files found and the work redone because of them.
    pub repaired: Vec<String>,
}
