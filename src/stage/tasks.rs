//! The map, merge and join tasks.

use std::path::Path;
use std::sync::atomic::AtomicU64;
use std::sync::Mutex;
use std::time::Instant;

use serde::{Deserialize, Serialize};

use super::commit::{commit, finished, need_done, temp_dir_for, Outcome, TaskReport};
use super::shared::{
    check_inputs, check_partition, finish_temp, report, skipped_bytes, task_spans,
};
use super::{join_dir, map_dir, merge_dir, Job};
use crate::count::{count_spans, CountConfig, Spill};
use crate::error::{Error, Result};
use crate::fsutil;
use crate::memory::Plan;
use crate::merge::{join_partition, merge_partition, MergeConfig};
use crate::records::{Joined, Merged, ReadTotals};
use crate::shard::RunFile;
use crate::store::Ranks;

/// What a map task produced.
#[derive(Clone, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub struct MapResult {
    /// Count run files, one section per partition.
    pub runs: Vec<String>,
    /// Dictionary files of the words in them.
    pub dicts: Vec<String>,
    /// What the readers saw.
    pub totals: ReadTotals,
    /// First-sighting files ([`crate::growth`]), each with where its covers
    /// start (file index, offset), for the vocabulary growth curve.
    #[serde(default)]
    pub firsts: Vec<(String, Vec<(u32, u64)>)>,
}

/// Map task `task` of the plan in `dir`: counts its spans into
/// `DIR/map/m<task>/` with `threads` workers sharing `memory` bytes.
pub fn run_map(dir: &Path, task: u32, memory: u64, threads: usize) -> Result<TaskReport> {
    let t0 = Instant::now();
    let job = Job::load(dir)?;
    let id = job.id();
    let spans = task_spans(&job, "map", task, dir)?;
    let out = map_dir(dir, task);
    if let Some(d) = finished::<MapResult>(&out, "map", task, &id) {
        let w = d.result.totals.bytes;
        return Ok(report(
            "map",
            task,
            Outcome::Skipped,
            out,
            w,
            skipped_bytes(&d),
            t0,
        ));
    }
    check_inputs(&job, "map", task, &spans)?;
    let list = job.word_list(dir)?;
    let skips = super::dedup::map_skips(dir, &job, &id)?;
    let threads = threads.max(1);
    let plan = Plan::new(memory, threads)?;
    let tmp = temp_dir_for(&out)?;
    let r = (|| {
        let next_id = AtomicU64::new(0);
        let read = AtomicU64::new(0);
        let cfg = CountConfig {
            inputs: &job.inputs,
            order: job.settings.order,
            preparation: job.settings.preparation,
            word_list: list.as_ref().map(|l| &l.set),
            max_line_bytes: job.settings.max_line_bytes,
            format: &job.format,
            partitions: job.partitions,
            threads,
            worker_bytes: plan.count_worker,
            dir: &tmp,
            next_id: &next_id,
            progress: &read,
            counts: false,
            unique: skips.as_ref(),
            documents: job.settings.document_counts,
        };
        let spills: Mutex<Vec<Spill>> = Mutex::new(Vec::new());
        let keep = |s: Spill| -> Result<()> {
            spills.lock().map_err(|_| poisoned())?.push(s);
            Ok(())
        };
        count_spans(&cfg, spans, &keep)?;
        let mut spills = spills.into_inner().map_err(|_| poisoned())?;
        spills.sort_by_key(|s| s.id);
        let mut r = MapResult {
            runs: vec![],
            dicts: vec![],
            totals: ReadTotals::default(),
            firsts: vec![],
        };
        for s in spills {
            r.runs.extend(s.runs);
            r.dicts.push(s.dict);
            r.totals.add(&s.totals);
            let starts = s.covers.iter().map(|c| (c.file, c.start)).collect();
            // Text (a staged plan reads no count tables) always has them.
            if let Some(f) = s.firsts {
                r.firsts.push((f, starts));
            }
        }
        let work = r.totals.bytes;
        let firsts = r.firsts.iter().map(|f| &f.0);
        let names = r
            .runs
            .iter()
            .chain(&r.dicts)
            .chain(firsts)
            .cloned()
            .collect();
        commit(&tmp, &out, "map", task, &id, names, r).map(|(o, b)| (o, b, work))
    })();
    finish_temp(&tmp, r).map(|(o, b, w)| report("map", task, o, out, w, b, t0))
}

/// Merge task of partition `p`: merges section `p` of every map output
/// into `DIR/merge/p<p>/` (merged counts, and the continuation
/// contributions of its n-grams for every partition).
pub fn run_merge(dir: &Path, p: u32, memory: u64) -> Result<TaskReport> {
    let t0 = Instant::now();
    let job = Job::load(dir)?;
    let id = job.id();
    check_partition(&job, p, dir)?;
    let out = merge_dir(dir, p);
    if let Some(d) = finished::<Merged>(&out, "merge", p, &id) {
        return Ok(report(
            "merge",
            p,
            Outcome::Skipped,
            out,
            0,
            skipped_bytes(&d),
            t0,
        ));
    }
    let mut files = Vec::new();
    for t in 0..job.map_tasks.len() as u32 {
        let m = map_dir(dir, t);
        let d = need_done::<MapResult>(&m, "map", t, &id)?;
        for r in &d.result.runs {
            let f = RunFile::open(&m.join(r))?;
            if f.partitions() != job.partitions
                || f.value_width() != 1 + usize::from(job.settings.document_counts)
            {
                return Err(Error::corrupt(
                    f.path(),
                    "run file of another plan (partitions or width differ)",
                ));
            }
            files.push(f);
        }
    }
    let plan = Plan::new(memory, 1)?;
    let records: u64 = files.iter().map(|f| f.records(p)).sum();
    let tmp = temp_dir_for(&out)?;
    let r = (|| {
        let merged = with_merge_config(&job, &plan, &tmp, |cfg| {
            merge_partition(cfg, p, files.iter().map(|f| (f.clone(), p)).collect())
        })?;
        let names = std::iter::once(merged.counts.clone())
            .chain(merged.suffix_runs.iter().cloned())
            .collect();
        commit(&tmp, &out, "merge", p, &id, names, merged)
    })();
    finish_temp(&tmp, r).map(|(o, b)| report("merge", p, o, out, records, b, t0))
}

/// Join task of partition `q`: joins `q`'s merged counts with section `q`
/// of every merge output's continuation runs into `DIR/join/p<q>/` (SST
/// files, and the partition's statistics in `done.json`).
pub fn run_join(dir: &Path, q: u32, memory: u64) -> Result<TaskReport> {
    let t0 = Instant::now();
    let job = Job::load(dir)?;
    let id = job.id();
    check_partition(&job, q, dir)?;
    let out = join_dir(dir, q);
    if let Some(d) = finished::<Joined>(&out, "join", q, &id) {
        let w = d.result.stats.ngrams.iter().sum();
        return Ok(report(
            "join",
            q,
            Outcome::Skipped,
            out,
            w,
            skipped_bytes(&d),
            t0,
        ));
    }
    let mut suffix = Vec::new();
    let mut counts = None;
    for p in 0..job.partitions {
        let r = merge_dir(dir, p);
        let d = need_done::<Merged>(&r, "merge", p, &id)?;
        for f in &d.result.suffix_runs {
            suffix.push(RunFile::open(&r.join(f))?);
        }
        if p == q {
            counts = Some(RunFile::open(&r.join(&d.result.counts))?);
        }
    }
    let counts = counts.expect("q < partitions");
    // Every join task reads every map task's dictionaries for the word
    // ranks of the keys: the same list everywhere, by construction.
    let mut dicts = Vec::new();
    for t in 0..job.map_tasks.len() as u32 {
        let m = map_dir(dir, t);
        let d = need_done::<MapResult>(&m, "map", t, &id)?;
        dicts.extend(d.result.dicts.iter().map(|f| m.join(f)));
    }
    let ranks = Ranks::from_dicts(&dicts)?;
    let plan = Plan::new(memory, 1)?;
    let tmp = temp_dir_for(&out)?;
    let r = (|| {
        let joined = with_merge_config(&job, &plan, &tmp, |cfg| {
            join_partition(
                cfg,
                q,
                &counts,
                suffix.iter().map(|f| (f.clone(), q)).collect(),
                &ranks,
                &tmp,
            )
        })?;
        let n: u64 = joined.stats.ngrams.iter().sum();
        let names = joined.ssts.iter().map(|(_, f)| f.clone()).collect();
        commit(&tmp, &out, "join", q, &id, names, joined).map(|(o, b)| (o, b, n))
    })();
    finish_temp(&tmp, r).map(|(o, b, n)| report("join", q, o, out, n, b, t0))
}

/// Runs `f` with the merge settings of a partition task whose output goes
/// to `tmp`, its merge rounds in `tmp/rounds` (removed after).
fn with_merge_config<T>(
    job: &Job,
    plan: &Plan,
    tmp: &Path,
    f: impl FnOnce(&MergeConfig) -> Result<T>,
) -> Result<T> {
    let rounds = tmp.join("rounds");
    fsutil::create_dir(&rounds)?;
    let next_tmp = AtomicU64::new(0);
    let cfg = MergeConfig {
        order: job.settings.order,
        partitions: job.partitions,
        fanin: plan.fanin,
        worker_bytes: plan.merge_worker,
        merged_dir: tmp,
        tmp_dir: &rounds,
        next_tmp: &next_tmp,
    };
    let out = f(&cfg)?;
    fsutil::remove_dir(&rounds)?;
    Ok(out)
}

/// The error for the spill list that a panicking counting thread left
/// behind.
fn poisoned() -> Error {
    Error::Poisoned {
        what: "the map task's list of spills",
    }
}
