//! Duplicate removal in a staged ingest (`stage plan --unique`): the
//! single-machine hashing and marking of [`crate::unique`], cut into tasks.
//!
//! ```text
//! DIR/hash/h000007/   map task 7's units hashed: sorted runs, one per
//!                     spill and hash range (s0000-p0003.run) + done.json
//! DIR/mark/p0003/     hash range 3 marked: duplicate positions per chunk
//!                     (dups-C.pos) + the range's hashes (hashes.set) + done.json
//! ```
//!
//! * [`run_hash`] reads map task T's spans exactly as its counting will
//!   ([`crate::unique::hash_span`]) and spills the sightings sorted, each
//!   spill cut into the plan's `partitions` equal ranges of the hash
//!   ([`runs::range_of`]).
//! * [`run_mark`] merges range P of every hash output and marks, of each
//!   hash, every sighting but the first in input order
//!   ([`runs::mark`]). A hash lies in one range, so the ranges are marked
//!   independently and the first sighting is found across every task.
//!   The positions go to the chunk holding them (the chunks are every span
//!   of every map task, [`super::Job::chunks`]), as the ingest files them.
//! * The map task loads its chunks' positions from every range
//!   ([`map_skips`]) and skips them, so its totals carry the duplicates.
//! * Assembling concatenates the ranges' sets, ascending, into
//!   `STORE/unique.hashes` ([`install_set`]), so that a later
//!   `ingest --append --unique` knows every unit counted here.
//!
//! A staged ingest builds a new store only, so there is no old set to mark
//! against. Memory: a hash task holds three quarters of a counting worker's
//! budget of sightings; a mark task one 64 KiB buffer per run merged (at
//! most the fan-in; more runs are merged in rounds first) and its
//! duplicates buffer; a map task one chunk's duplicate positions.

use std::path::{Path, PathBuf};
use std::sync::atomic::AtomicU64;
use std::time::Instant;

use serde::{Deserialize, Serialize};

use super::commit::{commit, finished, need_done, temp_dir_for, Outcome, TaskReport};
use super::shared::{
    check_inputs, check_partition, finish_temp, report, skipped_bytes, task_spans,
};
use super::{hash_dir, mark_dir, Job};
use crate::count::UniqueSkips;
use crate::error::{Error, Result};
use crate::fsutil;
use crate::layout;
use crate::memory::Plan;
use crate::records::Unique;
use crate::tokenize::Tokenizer;
use crate::unique::runs;
use crate::unique::{hash_span, DupWriter, HashConfig, Sighting};

/// What a hash task produced.
#[derive(Clone, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub struct HashResult {
    /// Per hash range, its run files (sorted sightings).
    pub runs: Vec<Vec<String>>,
    /// Units hashed.
    pub units: u64,
    /// Input bytes read.
    pub bytes: u64,
}

/// What a mark task produced.
#[derive(Clone, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub struct MarkResult {
    /// Per chunk of the plan ([`Job::chunks`]), its file of duplicate
    /// positions in this hash range (`None`: it has none).
    pub dups: Vec<Option<String>>,
    /// The set file of the range's distinct hashes.
    pub set: String,
    /// Units in the range.
    pub units: u64,
    /// Units marked as duplicates.
    pub duplicates: u64,
}

/// The unit of a plan made with `--unique`, or an error saying that `stage`
/// has nothing to do without it.
fn unit_of(job: &Job, dir: &Path, stage: &str) -> Result<Unique> {
    job.settings.unique.ok_or_else(|| {
        Error::Config(format!(
            "the plan {} was made without --unique: it has no {stage} stage",
            dir.join(super::JOB_FILE).display()
        ))
    })
}

/// Hash task `task` of the plan in `dir`: hashes map task `task`'s units
/// into `DIR/hash/h<task>/` within `memory` bytes.
pub fn run_hash(dir: &Path, task: u32, memory: u64) -> Result<TaskReport> {
    let t0 = Instant::now();
    let job = Job::load(dir)?;
    let id = job.id();
    let unit = unit_of(&job, dir, "hash")?;
    let spans = task_spans(&job, "hash", task, dir)?;
    let out = hash_dir(dir, task);
    if let Some(d) = finished::<HashResult>(&out, "hash", task, &id) {
        let (w, b) = (d.result.bytes, skipped_bytes(&d));
        return Ok(report("hash", task, Outcome::Skipped, out, w, b, t0));
    }
    check_inputs(&job, "hash", task, &spans)?;
    let list = job.word_list(dir)?;
    let plan = Plan::new(memory, 1)?;
    let tmp = temp_dir_for(&out)?;
    let r = (|| {
        let tok =
            Tokenizer::new(job.settings.preparation).with_word_list(list.as_ref().map(|l| &l.set));
        let read = AtomicU64::new(0);
        let cfg = HashConfig {
            inputs: &job.inputs,
            unique: unit,
            tokenizer: &tok,
            max_line_bytes: job.settings.max_line_bytes,
            format: &job.format,
            progress: &read,
            dict_bytes: plan.count_worker / 8,
        };
        // As the ingest's hashing: a sighting takes 48 bytes in memory.
        let cap = (plan.count_worker / 4 * 3 / std::mem::size_of::<Sighting>()).max(1024);
        let parts = job.partitions;
        let mut result = HashResult {
            runs: vec![Vec::new(); parts as usize],
            units: 0,
            bytes: 0,
        };
        let mut spills = 0u32;
        let mut buf: Vec<Sighting> = Vec::with_capacity(cap.min(1 << 16));
        let mut spill = |buf: &mut Vec<Sighting>, result: &mut HashResult| -> Result<()> {
            buf.sort_unstable();
            let mut rest = &mut buf[..];
            while let Some(first) = rest.first() {
                let p = runs::range_of(first.hash, parts);
                let n = rest.partition_point(|s| runs::range_of(s.hash, parts) == p);
                let (here, later) = rest.split_at_mut(n);
                let name = format!("s{spills:04}-p{p:04}.run");
                runs::write_run(&tmp.join(&name), here)?;
                result.runs[p as usize].push(name);
                rest = later;
            }
            result.units += buf.len() as u64;
            spills += 1;
            buf.clear();
            Ok(())
        };
        for span in spans {
            hash_span(&cfg, span, &mut |s| {
                buf.push(s);
                if buf.len() >= cap {
                    spill(&mut buf, &mut result)?;
                }
                Ok(())
            })?;
        }
        if !buf.is_empty() {
            spill(&mut buf, &mut result)?;
        }
        result.bytes = read.load(std::sync::atomic::Ordering::Relaxed);
        let work = result.bytes;
        let names = result.runs.iter().flatten().cloned().collect();
        commit(&tmp, &out, "hash", task, &id, names, result).map(|(o, b)| (o, b, work))
    })();
    finish_temp(&tmp, r).map(|(o, b, w)| report("hash", task, o, out, w, b, t0))
}

/// Mark task of hash range `p`: merges range `p` of every hash output and
/// writes its duplicate positions, by chunk, and its set into
/// `DIR/mark/p<p>/`.
pub fn run_mark(dir: &Path, p: u32, memory: u64) -> Result<TaskReport> {
    let t0 = Instant::now();
    let job = Job::load(dir)?;
    let id = job.id();
    unit_of(&job, dir, "mark")?;
    check_partition(&job, p, dir)?;
    let out = mark_dir(dir, p);
    if let Some(d) = finished::<MarkResult>(&out, "mark", p, &id) {
        let (w, b) = (d.result.units, skipped_bytes(&d));
        return Ok(report("mark", p, Outcome::Skipped, out, w, b, t0));
    }
    let mut paths = Vec::new();
    for t in 0..job.map_tasks.len() as u32 {
        let h = hash_dir(dir, t);
        let d = need_done::<HashResult>(&h, "hash", t, &id)?;
        let section = d
            .result
            .runs
            .get(p as usize)
            .filter(|_| d.result.runs.len() == job.partitions as usize);
        let section = section.ok_or_else(|| {
            Error::corrupt(
                h.join(super::DONE_FILE),
                format!(
                    "{} hash ranges recorded, the plan has {}",
                    d.result.runs.len(),
                    job.partitions
                ),
            )
        })?;
        paths.extend(section.iter().map(|f| h.join(f)));
    }
    let plan = Plan::new(memory, 1)?;
    let chunks = job.chunks();
    let tmp = temp_dir_for(&out)?;
    let r = (|| {
        let rounds = tmp.join("rounds");
        fsutil::create_dir(&rounds)?;
        let paths = runs::merge_to_fanin(paths, plan.fanin, &rounds)?;
        let set = "hashes.set".to_string();
        let mut dups = DupWriter::new(&chunks, &tmp, plan.merge_worker);
        let found = runs::mark(&paths, None, &tmp.join(&set), &mut dups)?;
        let dups = dups.finish()?;
        fsutil::remove_dir(&rounds)?;
        let names = dups.iter().flatten().chain([&set]).cloned().collect();
        let result = MarkResult {
            dups,
            set,
            units: found.units,
            duplicates: found.duplicates,
        };
        commit(&tmp, &out, "mark", p, &id, names, result).map(|(o, b)| (o, b, found.units))
    })();
    finish_temp(&tmp, r).map(|(o, b, w)| report("mark", p, o, out, w, b, t0))
}

/// The finished mark outputs of every hash range, in order, for a plan
/// made with `--unique` (`None` without it).
fn marks(dir: &Path, job: &Job, id: &str) -> Result<Option<Vec<(PathBuf, MarkResult)>>> {
    if job.settings.unique.is_none() {
        return Ok(None);
    }
    let chunks = job.chunks().len();
    let mut all = Vec::new();
    for p in 0..job.partitions {
        let m = mark_dir(dir, p);
        let d = need_done::<MarkResult>(&m, "mark", p, id)?;
        if d.result.dups.len() != chunks {
            return Err(Error::corrupt(
                m.join(super::DONE_FILE),
                format!(
                    "{} chunks recorded, the plan has {chunks}",
                    d.result.dups.len()
                ),
            ));
        }
        all.push((m, d.result));
    }
    Ok(Some(all))
}

/// What a map task of a plan made with `--unique` skips: per chunk, its
/// duplicate files of every hash range.
pub(super) fn map_skips(dir: &Path, job: &Job, id: &str) -> Result<Option<UniqueSkips>> {
    let (Some(unit), Some(marks)) = (job.settings.unique, marks(dir, job, id)?) else {
        return Ok(None);
    };
    let chunks = job.chunks();
    let files = (0..chunks.len())
        .map(|c| {
            marks
                .iter()
                .filter_map(|(m, r)| r.dups[c].as_ref().map(|f| m.join(f)))
                .collect()
        })
        .collect();
    Ok(Some(UniqueSkips {
        unit,
        chunks,
        files,
    }))
}

/// What the mark tasks of a plan made with `--unique` left for the store.
pub(super) struct Marks {
    /// Every range's set, ascending.
    sets: Vec<PathBuf>,
    /// The duplicates found.
    pub(super) duplicates: u64,
}

impl Marks {
    /// The mark outputs of the plan in `dir` (`None`: made without
    /// `--unique`).
    pub(super) fn load(dir: &Path, job: &Job, id: &str) -> Result<Option<Marks>> {
        Ok(marks(dir, job, id)?.map(|m| Marks {
            sets: m.iter().map(|(d, r)| d.join(&r.set)).collect(),
            duplicates: m.iter().map(|(_, r)| r.duplicates).sum(),
        }))
    }

    /// Writes the store's hash set (`STORE/unique.hashes`) from every
    /// range's set; a set already there is replaced by the same one.
    pub(super) fn install_set(&self, store: &Path) -> Result<()> {
        let to = layout::unique_hashes(store);
        let tmp = store.join(format!(".unique.hashes.{}.tmp", super::commit::unique()));
        let r = runs::concat_sets(&self.sets, &tmp).and_then(|_| fsutil::rename_durable(&tmp, &to));
        if r.is_err() {
            let _ = std::fs::remove_file(&tmp);
        }
        r
    }
}
