//! The last stage: the store built from every task's output, by the same
//! finishing path as the single-machine ingest ([`crate::finish`]).

use std::path::{Path, PathBuf};
use std::time::Instant;

use super::commit::{need_done, unique, Outcome, TaskReport};
use super::dedup::Marks;
use super::tasks::MapResult;
use super::{join_dir, map_dir, Job};
use crate::error::{Error, Result};
use crate::finish::{self, GrowthInputs};
use crate::fsutil;
use crate::growth::curve::SpillFirsts;
use crate::layout;
use crate::memory::Plan;
use crate::records::{Joined, ReadTotals};
use crate::store::{self, Store};

/// Builds the store in `store_dir` from every output of the plan in `dir`:
/// the vocabulary from the map outputs' dictionaries, the metadata from the
/// joins' statistics and the maps' totals, and the n-grams and contexts by
/// ingesting the joins' SST files. A finished store with the same metadata
/// is recognised and skipped; another store there is an error.
pub fn run_assemble(dir: &Path, store_dir: &Path, memory: u64) -> Result<TaskReport> {
    let t0 = Instant::now();
    let job = Job::load(dir)?;
    let id = job.id();
    let mut dicts = Vec::new();
    let mut firsts = Vec::new();
    let mut read = ReadTotals::default();
    for t in 0..job.map_tasks.len() as u32 {
        let m = map_dir(dir, t);
        let d = need_done::<MapResult>(&m, "map", t, &id)?;
        dicts.extend(d.result.dicts.iter().map(|f| m.join(f)));
        read.add(&d.result.totals);
        for (f, starts) in &d.result.firsts {
            firsts.push(SpillFirsts {
                path: m.join(f),
                starts: starts.clone(),
            });
        }
    }
    let mut joined = Vec::new();
    for q in 0..job.partitions {
        let j = join_dir(dir, q);
        let d = need_done::<Joined>(&j, "join", q, &id)?;
        joined.push((j, d.result));
    }
    // `--unique`: the maps skipped exactly what the marks found.
    let marks = Marks::load(dir, &job, &id)?;
    if let Some(m) = &marks {
        if m.duplicates != read.duplicate_units {
            return Err(Error::state(
                dir,
                format!(
                    "the mark tasks found {} duplicates but the map tasks skipped {}: run the map tasks again after the mark tasks",
                    m.duplicates, read.duplicate_units
                ),
            ));
        }
    }
    let plan = Plan::new(memory, 1)?;
    fsutil::create_dir(store_dir)?;
    // The vocabulary growth curve, as the single-machine ingest computes it.
    let growth = GrowthInputs {
        before: None,
        spills: firsts,
    };
    let meta = finish::store_meta(
        job.settings,
        joined.iter().map(|(_, j)| &j.stats),
        read,
        Some(&growth),
        &store_dir.join(format!(".growth.{}.tmp", unique())),
        plan.fanin,
    )?;
    let ngrams: u64 = meta.orders.iter().map(|o| o.ngrams).sum();
    let db = layout::db(store_dir);
    if layout::has_db(store_dir) {
        let s = Store::open(store_dir)?;
        if *s.meta() != meta {
            return Err(Error::state(
                store_dir,
                format!(
                    "a different store is already here (not the one the plan in {} builds): give another --store",
                    dir.display()
                ),
            ));
        }
        // Its set, unless an assemble put it there before the database.
        if let Some(m) = &marks {
            if !layout::unique_hashes(store_dir).exists() {
                m.install_set(store_dir)?;
            }
        }
        let bytes = s.disk_bytes();
        return Ok(report(Outcome::Skipped, store_dir, ngrams, bytes, t0));
    }
    let u = unique();
    let work = store_dir.join(format!(".assemble.{u}.tmp"));
    let db_new = store_dir.join(format!(".db.{u}.tmp"));
    let r = (|| {
        // The store keeps the plan's word list, as the ingest's does.
        if let Some(l) = job.word_list(dir)? {
            l.keep(store_dir)?;
        }
        let ssts: Vec<(String, PathBuf)> = joined
            .iter()
            .flat_map(|(j, d)| d.ssts.iter().map(|(cf, f)| (cf.clone(), j.join(f))))
            .collect();
        finish::build_db(&meta, dicts, &ssts, &db_new, &work, plan.fanin)?;
        // The set before the database: a store's set holds every unit its
        // database counted.
        if let Some(m) = &marks {
            m.install_set(store_dir)?;
        }
        crate::fault::point(crate::fault::Point::StageWritten);
        let outcome = match std::fs::rename(&db_new, &db) {
            Ok(()) => Outcome::Written,
            Err(_) if layout::has_db(store_dir) => {
                // Another copy finished first; it built the same store if
                // its metadata is ours.
                let same = Store::open(store_dir).is_ok_and(|s| *s.meta() == meta);
                if !same {
                    return Err(Error::state(
                        store_dir,
                        "another store was put here while this one was being built",
                    ));
                }
                fsutil::remove_dir(&db_new)?;
                Outcome::Raced
            }
            Err(e) => return Err(Error::io(&db, "rename", e)),
        };
        fsutil::sync_dir(store_dir)?;
        crate::fault::point(crate::fault::Point::StageDone);
        fsutil::remove_dir(&work)?;
        Ok(outcome)
    })();
    if r.is_err() {
        let _ = fsutil::remove_dir(&work);
        let _ = fsutil::remove_dir(&db_new);
    }
    let outcome = r?;
    let bytes = store::dir_bytes(&db);
    Ok(report(outcome, store_dir, ngrams, bytes, t0))
}

fn report(outcome: Outcome, store: &Path, ngrams: u64, bytes: u64, t0: Instant) -> TaskReport {
    TaskReport {
        stage: "assemble",
        task: 0,
        outcome,
        output: store.to_path_buf(),
        work: ngrams,
        output_bytes: bytes,
        seconds: t0.elapsed().as_secs_f64(),
    }
}
