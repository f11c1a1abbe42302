//! Starting a new ingest: the inputs planned into chunks, the first
//! manifest written, and the work folder put in place by a rename, so that
//! a work folder always has a manifest.

use super::manifest::{self, Manifest, Mode, Phase};
use super::options::IngestOptions;
use crate::corpus::{self, InputFile};
use crate::error::Result;
use crate::fsutil;
use crate::layout::{self, WorkDirs};
use crate::records::Settings;

pub(super) fn plan_new(
    opts: &IngestOptions,
    dirs: &WorkDirs,
    settings: Settings,
    inputs: Vec<InputFile>,
    parts: u32,
    threads: usize,
) -> Result<Manifest> {
    let chunks = corpus::plan_chunks(&inputs, chunk_bytes(opts.chunk_bytes, &inputs, threads))?;
    let n_chunks = chunks.len();
    let mut m = Manifest {
        format_version: manifest::MANIFEST_VERSION,
        settings,
        format: opts.format.clone(),
        mode: if opts.append {
            Mode::Append
        } else {
            Mode::Fresh
        },
        inputs,
        chunks,
        partitions: parts,
        phase: if settings.unique.is_some() {
            Phase::Hashing
        } else {
            Phase::Counting
        },
        next_id: 0,
        base: None,
        runsets: vec![],
        merged: vec![None; parts as usize],
        joined: vec![None; parts as usize],
        started: now_secs(),
        unique: None,
    };
    if settings.unique.is_some() {
        m.unique = Some(super::manifest::UniqueWork {
            hashed: vec![None; n_chunks],
            marked: None,
        });
    }
    // Build the work folder under another name and rename it into place,
    // so a work folder always has a manifest.
    let staging = WorkDirs::new(&dirs.store, layout::work_new(&dirs.store));
    staging.create()?;
    if opts.append {
        m.base = Some(super::append::export_base(
            &dirs.store,
            &staging.runs,
            &settings,
            parts,
        )?);
    }
    m.save(&staging.work)?;
    fsutil::rename_durable(&staging.work, &dirs.work)?;
    Ok(m)
}

/// Smallest chunk [`chunk_bytes`] cuts a small input into.
const MIN_CHUNK_BYTES: u64 = 1 << 20;

/// The chunk size for `inputs` on `threads` workers: `requested`, or less
/// for an input small enough that it would make fewer than eight chunks a
/// worker (at least [`MIN_CHUNK_BYTES`]). A worker that takes the last
/// chunk counts it while the others wait, so on 40 MB at 16 MiB (three
/// chunks for two workers) one core idled for most of a chunk.
fn chunk_bytes(requested: u64, inputs: &[InputFile], threads: usize) -> u64 {
    let plain: u64 = inputs
        .iter()
        .filter(|f| f.compression == corpus::Compression::None && !f.is_stdin())
        .map(|f| f.size)
        .sum();
    let share = plain / (threads.max(1) as u64 * 8);
    requested.min(share.max(MIN_CHUNK_BYTES))
}

fn now_secs() -> u64 {
    std::time::SystemTime::now()
        .duration_since(std::time::UNIX_EPOCH)
        .map_or(0, |d| d.as_secs())
}
