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
) -> Result<Manifest> {
    let chunks = corpus::plan_chunks(&inputs, opts.chunk_bytes)?;
    let mut m = Manifest {
        format_version: manifest::MANIFEST_VERSION,
        settings,
        mode: if opts.append {
            Mode::Append
        } else {
            Mode::Fresh
        },
        inputs,
        chunks,
        partitions: parts,
        phase: Phase::Counting,
        next_id: 0,
        base: None,
        runsets: vec![],
        merged: vec![None; parts as usize],
        joined: vec![None; parts as usize],
        started: now_secs(),
    };
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

fn now_secs() -> u64 {
    std::time::SystemTime::now()
        .duration_since(std::time::UNIX_EPOCH)
        .map_or(0, |d| d.as_secs())
}
