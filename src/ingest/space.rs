//! Disk space: turning an out-of-space failure into an error that says
//! where, how much is free, and roughly how much more the ingest needs.
//!
//! The estimate extrapolates this ingest's own count runs: their bytes per
//! input byte counted so far, times the whole input, times
//! [`PEAK_PER_RUN_BYTE`] for the merged partitions, store files and database
//! that coexist with them later. It is rough by nature (how much a corpus
//! repeats itself decides the store's size) and said to be.

use std::path::Path;

use super::manifest::{Manifest, Phase};
use crate::error::Error;
use crate::layout;
use crate::store;

/// Peak bytes of an ingest's files (work folder and the database it
/// builds) per byte of count runs. Measured on fixtures/gutenberg/
/// persuasion.txt at order 5 with `--memory 16MiB`: count runs 2.4 MB,
/// peak of work folder and database 12.0 MB, so about 5.
pub const PEAK_PER_RUN_BYTE: u64 = 5;

/// Peak bytes per input byte when nothing has been counted yet to
/// extrapolate from (same measurement: 12.0 MB for 467 KB of input).
pub const PEAK_PER_INPUT_BYTE: u64 = 26;

/// Wraps out-of-space error `e` of an ingest into `store` as
/// [`Error::DiskFull`].
pub fn disk_full(store: &Path, e: Error) -> Error {
    let dirs = layout::WorkDirs::of(store);
    let used = store::dir_bytes(&dirs.work) + store::dir_bytes(&layout::db_new(store));
    let free = crate::fsutil::free_space(store).unwrap_or(0);
    let peak = Manifest::load(&dirs.work)
        .ok()
        .flatten()
        .map(|m| estimate_peak(&m, store::dir_bytes(&dirs.runs)))
        .unwrap_or(0);
    Error::DiskFull {
        dir: store.to_path_buf(),
        detail: e.to_string(),
        free,
        used,
        needed: peak.saturating_sub(used),
    }
}

/// Estimated peak bytes of the whole ingest described by `m`, whose count
/// runs now take `run_bytes`.
pub fn estimate_peak(m: &Manifest, run_bytes: u64) -> u64 {
    let input: u64 = m.inputs.iter().map(|f| f.size).sum();
    let counted = m.counted_bytes();
    match m.phase {
        Phase::Counting if counted > 0 && run_bytes > 0 => {
            let per_input = run_bytes as f64 / counted as f64;
            (per_input * input as f64 * PEAK_PER_RUN_BYTE as f64) as u64
        }
        // All count runs are written: they are the measure.
        Phase::Merging if run_bytes > 0 => run_bytes.saturating_mul(PEAK_PER_RUN_BYTE),
        _ => input.saturating_mul(PEAK_PER_INPUT_BYTE),
    }
}
