//! What an ingest is asked to do, what it reports while it runs, and what
//! it reports when done.

use std::collections::BTreeMap;
use std::path::PathBuf;

use serde::Serialize;

use super::manifest::Phase;
use crate::corpus::Format;
use crate::records::{BadLineAt, Totals, Unique};
use crate::tokenize::Preparation;

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
    /// How the text is prepared (normalization, sentences, tokens, case,
    /// digits).
    pub preparation: Preparation,
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
    /// How the input lines hold documents (plain lines, or JSON lines
    /// whose text field is counted).
    pub format: Format,
    /// The inputs are count tables (`n-gram<TAB>count` lines of every
    /// order, see [`crate::corpus::count_table`]), not text.
    pub counts: bool,
    /// Count each distinct sentence or document only the first time it
    /// occurs (see [`crate::unique`]).
    pub unique: Option<Unique>,
    /// Also store each n-gram's number of documents (see
    /// [`crate::count::CountConfig::documents`]).
    pub document_counts: bool,
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
            preparation: Preparation::default(),
            word_list: None,
            max_line_bytes: 1 << 20,
            partitions: None,
            restart: false,
            append: false,
            chunk_bytes: 16 << 20,
            format: Format::Lines,
            counts: false,
            unique: None,
            document_counts: false,
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
    /// The first bad lines (`--jsonl`; [`Totals::bad_lines`] counts them
    /// all), by input and line, in input order.
    #[serde(skip_serializing_if = "Vec::is_empty")]
    pub bad_lines: Vec<BadLineReport>,
}

/// A bad line, named by input and line number.
#[derive(Clone, Debug, Serialize)]
pub struct BadLineReport {
    /// The input.
    pub path: PathBuf,
    /// Line number (1-based); `None` on standard input, which cannot be
    /// read again to count them.
    pub line: Option<u64>,
    /// Offset of the line's first byte in the (decompressed) input.
    pub offset: u64,
    /// Why it holds no document.
    pub detail: String,
}

impl BadLineReport {
    /// The bad lines `bad` of `inputs`, ordered by input and position, at
    /// most `limit`, each named by its line number (counted by reading the
    /// input up to it).
    pub fn name(
        inputs: &[crate::corpus::InputFile],
        mut bad: Vec<BadLineAt>,
        limit: usize,
    ) -> crate::error::Result<Vec<BadLineReport>> {
        bad.sort_by_key(|b| (b.file, b.offset));
        bad.dedup_by_key(|b| (b.file, b.offset));
        bad.truncate(limit);
        let mut out = Vec::with_capacity(bad.len());
        for group in bad.chunk_by(|a, b| a.file == b.file) {
            let f = &inputs[group[0].file as usize];
            let offsets: Vec<u64> = group.iter().map(|b| b.offset).collect();
            let lines = if f.is_stdin() {
                vec![None; offsets.len()]
            } else {
                crate::corpus::line_numbers(f, &offsets)?
                    .into_iter()
                    .map(Some)
                    .collect()
            };
            for (b, line) in group.iter().zip(lines) {
                out.push(BadLineReport {
                    path: f.path.clone(),
                    line,
                    offset: b.offset,
                    detail: b.detail.clone(),
                });
            }
        }
        Ok(out)
    }
}
