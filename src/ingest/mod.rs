//! The ingest pipeline: inputs → count runs → merged partitions → store,
//! resumable at every step.
//!
//! [`ingest`] takes the store's lock, then either starts a new ingest
//! ([`start`]: plan the inputs into chunks and write a manifest), resumes
//! the one recorded in the store's manifest ([`resume`]: check, repair,
//! clean up), or (with `append`) exports a finished store's counts as a
//! base run ([`append`]) and starts an ingest of the new inputs on top.
//! Each phase ([`phases`]) records its durable results in the manifest as
//! it goes ([`manifest`]); on resume, everything the manifest does not
//! name is deleted and redone. The phases call counting
//! ([`crate::count`]), merging and joining ([`crate::merge`]) and
//! finishing ([`crate::finish`]).

mod append;
mod counts;
pub mod manifest;
mod options;
mod phases;
mod resume;
mod space;
mod start;
mod status;
mod unique;
mod verify;

pub use manifest::{Manifest, MarkedUnits, Phase, UniqueWork};
pub use options::{BadLineReport, IngestOptions, IngestSummary, Progress, Silent};
pub use status::{status, IngestStatus};

use std::collections::BTreeMap;
use std::time::Instant;

use crate::corpus;
use crate::count::BAD_LINES_KEPT;
use crate::error::{Error, IoContext, Result};
use crate::fsutil;
use crate::key::MAX_ORDER;
use crate::layout::{self, WorkDirs};
use crate::memory::{peak_rss, Plan};
use crate::records::Settings;
use crate::store::Store;
use crate::wordlist;
use manifest::Mode;
use phases::Run;
use std::path::Path;

fn lock(store: &Path) -> Result<std::fs::File> {
    let path = layout::lock(store);
    let f = std::fs::OpenOptions::new()
        .create(true)
        .truncate(false)
        .write(true)
        .open(&path)
        .at(&path, "open")?;
    f.try_lock().map_err(|_| Error::Locked {
        path: store.to_path_buf(),
        lock: path.clone(),
    })?;
    Ok(f)
}

/// Runs (or resumes) an ingest.
pub fn ingest(opts: &IngestOptions, progress: &dyn Progress) -> Result<IngestSummary> {
    ingest_inner(opts, progress).map_err(|e| {
        if e.is_out_of_space() {
            space::disk_full(&opts.store, e)
        } else {
            e
        }
    })
}

fn ingest_inner(opts: &IngestOptions, progress: &dyn Progress) -> Result<IngestSummary> {
    let t0 = Instant::now();
    if opts.order == 0 || opts.order > MAX_ORDER {
        return Err(Error::Config(format!(
            "--order {} is outside 1..={MAX_ORDER}",
            opts.order
        )));
    }
    if opts.inputs.is_empty() {
        return Err(Error::Config("no inputs given".into()));
    }
    if opts.counts {
        counts::check_options(opts)?;
    }
    let threads = opts.threads.max(1);
    let plan = Plan::new(opts.memory, threads)?;
    fsutil::create_dir(&opts.store)?;
    let _lock = lock(&opts.store)?;
    let dirs = WorkDirs::of(&opts.store);
    let list = match &opts.word_list {
        Some(p) => Some(wordlist::load(p, &opts.preparation)?),
        None => None,
    };
    let settings = Settings {
        order: opts.order,
        preparation: opts.preparation,
        max_line_bytes: opts.max_line_bytes,
        word_list: list.as_ref().map(|l| l.info),
        from_counts: opts.counts,
        unique: opts.unique,
        document_counts: opts.document_counts,
    };
    fsutil::remove_dir(&layout::work_new(&opts.store))?;
    fsutil::remove_dir(&layout::work_done(&opts.store))?;
    if opts.restart {
        fsutil::remove_dir(&dirs.work)?;
        fsutil::remove_dir(&layout::db_new(&opts.store))?;
    }
    let loaded = Manifest::load_noted(&dirs.work).map_err(|e| match e {
        Error::Corrupt { path, detail } => Error::Corrupt {
            path,
            detail: format!(
                "{detail}; run the same command with --restart to start this ingest again"
            ),
        },
        e => e,
    })?;
    let inputs = corpus::discover(&opts.inputs)?;
    let mut repaired = Vec::new();
    let (mut m, resumed) = match loaded {
        Some((mut m, note)) => {
            repaired.extend(note);
            resume::check_resume(&m, &settings, &inputs, opts)?;
            let notes = verify::verify_inputs(&mut m, &inputs, threads)?;
            if !notes.is_empty() {
                m.save(&dirs.work)?;
                repaired.extend(notes);
            }
            (m, true)
        }
        None => {
            if dirs.work.exists() {
                // Started, but not even the first manifest was written.
                fsutil::remove_dir(&dirs.work)?;
            }
            let finished = layout::has_db(&opts.store);
            match (finished, opts.append) {
                (true, false) => {
                    return Err(Error::state(
                        &opts.store,
                        "this store is finished; use --append to add inputs to it, or give another --store",
                    ))
                }
                (false, true) => return Err(Error::state(&opts.store, "there is no finished store here to append to")),
                _ => {}
            }
            let parts = opts
                .partitions
                .unwrap_or_else(|| (threads as u32 * 16).clamp(16, 256));
            (
                start::plan_new(opts, &dirs, settings, inputs, parts, threads)?,
                false,
            )
        }
    };
    if let Some(l) = &list {
        l.keep(&opts.store)?;
    }
    let mut run = Run {
        dirs: &dirs,
        plan,
        threads,
        word_list: list.as_ref().map(|l| &l.set),
        progress,
        runs_written: 0,
        temp_bytes: 0,
        phase_seconds: BTreeMap::new(),
    };
    if resumed {
        repaired.extend(resume::drop_damaged(&mut m, &dirs)?);
    }
    resume::cleanup_orphans(&m, &dirs)?;
    let inputs = m.inputs.clone();
    // A count run found damaged while merging is forgotten and its input
    // ranges counted again (a few times at most; then the error stands).
    let mut recounts = 0;
    let hashing = unique::Hashing {
        dirs: &dirs,
        plan: &run.plan,
        threads,
        word_list: run.word_list,
        progress,
    };
    if let Some(h) = hashing.run(&mut m, &inputs)? {
        run.phase_seconds
            .insert(Phase::Hashing.name().to_string(), h.seconds);
        run.temp_bytes += h.temp_bytes;
    }
    loop {
        run.counting(&mut m, &inputs)?;
        if m.settings.from_counts {
            counts::check_sum(&m)?;
        }
        match run.merging(&mut m) {
            Err(Error::Corrupt { path, detail }) if recounts < 3 => {
                let name = path.file_name().map(|n| n.to_string_lossy().into_owned());
                let before = m.runsets.len();
                m.runsets
                    .retain(|r| name.as_ref().is_none_or(|n| !r.runs.contains(n)));
                if m.runsets.len() == before {
                    return Err(Error::Corrupt { path, detail });
                }
                m.phase = Phase::Counting;
                m.merged.iter_mut().for_each(|x| *x = None);
                m.save(&dirs.work)?;
                resume::cleanup_orphans(&m, &dirs)?;
                recounts += 1;
                repaired.push(format!(
                    "{}: {detail}; its input was counted again",
                    path.display()
                ));
            }
            r => break r?,
        }
    }
    run.joining(&mut m).map_err(|e| {
        if m.settings.from_counts {
            counts::name_line(e, &m.inputs, m.settings.order, m.settings.max_line_bytes)
        } else {
            e
        }
    })?;
    // The bad lines are named before the work folder goes: by input and
    // line number, counted in the inputs (which are still as counted: the
    // checksums of a resume saw to that).
    let bad: Vec<_> = m.runsets.iter().flat_map(|r| r.bad.clone()).collect();
    let bad_lines = if bad.is_empty() {
        Vec::new()
    } else {
        BadLineReport::name(&m.inputs, bad, BAD_LINES_KEPT)?
    };
    run.building(&mut m)?;
    let s = Store::open(&opts.store)?;
    let meta = s.meta().clone();
    Ok(IngestSummary {
        store: opts.store.clone(),
        resumed,
        appended: m.mode == Mode::Append,
        totals: meta.totals,
        ngrams: meta.orders.iter().map(|o| o.ngrams).collect(),
        runs_written: run.runs_written,
        temp_bytes: run.temp_bytes,
        store_bytes: s.disk_bytes(),
        phase_seconds: run.phase_seconds,
        seconds: t0.elapsed().as_secs_f64(),
        peak_rss_bytes: peak_rss(),
        repaired,
        bad_lines,
    })
}
