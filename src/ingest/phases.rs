//! The phases of an ingest, each resumable: counting, merging, joining,
//! building. Each records its durable results in the manifest as it goes;
//! a phase that finds its work recorded skips it.

use std::collections::BTreeMap;
use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicU64, Ordering};
use std::sync::Mutex;
use std::time::Instant;

use super::manifest::{Manifest, Phase, RunSet};
use super::options::Progress;
use crate::corpus::InputFile;
use crate::count::{count_spans, CountConfig, Spill};
use crate::error::{Error, IoContext, Result};
use crate::fault::Point;
use crate::finish::{self, GrowthInputs};
use crate::fsutil;
use crate::growth;
use crate::layout::{self, WorkDirs};
use crate::memory::Plan;
use crate::merge::{join_partition, merge_partition, MergeConfig};
use crate::records::Joined;
use crate::shard::RunFile;
use crate::store::{self, Ranks};

fn merge_config<'b>(
    dirs: &'b WorkDirs,
    plan: &Plan,
    m: &Manifest,
    next_tmp: &'b AtomicU64,
) -> MergeConfig<'b> {
    MergeConfig {
        order: m.settings.order,
        partitions: m.partitions,
        fanin: plan.fanin,
        worker_bytes: plan.merge_worker,
        merged_dir: &dirs.merged,
        tmp_dir: &dirs.tmp,
        next_tmp,
    }
}

pub(super) struct Run<'a> {
    pub(super) dirs: &'a WorkDirs,
    pub(super) plan: Plan,
    pub(super) threads: usize,
    pub(super) word_list: Option<&'a crate::tokenize::WordSet>,
    pub(super) progress: &'a dyn Progress,
    pub(super) runs_written: u64,
    pub(super) temp_bytes: u64,
    pub(super) phase_seconds: BTreeMap<String, f64>,
}

impl Run<'_> {
    /// Runs phase `f`, adding its wall time to `phase_seconds`. The memory
    /// that the phase before freed goes back to the system first, before
    /// this phase's tables and readers are made (see
    /// [`crate::memory::release_free_heap`]).
    fn timed<T>(&mut self, phase: Phase, f: impl FnOnce(&mut Self) -> Result<T>) -> Result<T> {
        crate::memory::release_free_heap();
        let t = Instant::now();
        let r = f(self);
        *self
            .phase_seconds
            .entry(phase.name().to_string())
            .or_insert(0.0) += t.elapsed().as_secs_f64();
        r
    }

    pub(super) fn counting(&mut self, m: &mut Manifest, inputs: &[InputFile]) -> Result<()> {
        if m.phase != Phase::Counting {
            return Ok(());
        }
        self.timed(Phase::Counting, |run| {
            let spans = m.uncovered();
            let total: u64 = m.inputs.iter().map(|f| f.size).sum();
            let todo: u64 = spans
                .iter()
                .map(|s| {
                    s.end
                        .min(m.inputs[s.file as usize].size)
                        .saturating_sub(s.start)
                })
                .sum();
            let done0 = total.saturating_sub(todo);
            run.progress.phase(Phase::Counting, total);
            run.progress.advance(done0);
            let next_id = AtomicU64::new(m.next_id);
            let read = AtomicU64::new(0);
            let skips = super::unique::skips(m, run.dirs)?;
            let cfg = CountConfig {
                inputs,
                order: m.settings.order,
                preparation: m.settings.preparation,
                word_list: run.word_list,
                max_line_bytes: m.settings.max_line_bytes,
                format: &m.format.clone(),
                partitions: m.partitions,
                threads: run.threads,
                worker_bytes: run.plan.count_worker,
                dir: &run.dirs.runs,
                next_id: &next_id,
                progress: &read,
                counts: m.settings.from_counts,
                unique: skips.as_ref(),
                documents: m.settings.document_counts,
            };
            let shared = Mutex::new(Committed {
                manifest: &mut *m,
                runs: 0,
                bytes: 0,
            });
            let work = &run.dirs.work;
            let commit = |s: Spill| -> Result<()> {
                let mut g = shared.lock().map_err(|_| poisoned())?;
                g.runs += s.runs.len() as u64;
                g.bytes += s.bytes;
                g.manifest.runsets.push(RunSet {
                    id: s.id,
                    runs: s.runs,
                    dict: s.dict,
                    firsts: s.firsts,
                    covers: s.covers,
                    hashes: s.hashes,
                    totals: s.totals,
                    bad: s.bad,
                });
                g.manifest.next_id = next_id.load(Ordering::SeqCst);
                g.manifest.save(work)
            };
            let done = std::sync::atomic::AtomicBool::new(false);
            let result = std::thread::scope(|scope| {
                let ticker = scope.spawn(|| {
                    while !done.load(Ordering::Relaxed) {
                        run.progress.advance(done0 + read.load(Ordering::Relaxed));
                        std::thread::sleep(std::time::Duration::from_millis(200));
                    }
                });
                let r = count_spans(&cfg, spans, &commit);
                done.store(true, Ordering::Relaxed);
                let _ = ticker.join();
                r
            });
            let committed = shared.into_inner().map_err(|_| poisoned())?;
            run.runs_written += committed.runs;
            run.temp_bytes += committed.bytes;
            result?;
            m.phase = Phase::Merging;
            m.next_id = next_id.load(Ordering::SeqCst);
            m.save(&run.dirs.work)
        })
    }

    /// Runs `job(p)` for every partition `p` in `todo` on the worker
    /// threads; `record` is called (serialised) with each result.
    fn per_partition<T: Send>(
        &self,
        todo: Vec<u32>,
        job: &(dyn Fn(u32) -> Result<T> + Sync),
        record: &mut (dyn FnMut(u32, T) -> Result<()> + Send),
    ) -> Result<()> {
        let record = Mutex::new(record);
        let done = AtomicU64::new(0);
        crate::pool::try_for_each(self.threads, todo, |p| {
            let t = job(p)?;
            (*record.lock().map_err(|_| poisoned())?)(p, t)?;
            self.progress
                .advance(done.fetch_add(1, Ordering::SeqCst) + 1);
            Ok(())
        })
    }

    /// The skeleton of a phase with one task per partition (merging,
    /// joining): `job(p)` runs on the worker threads for every partition
    /// whose result in `slots(m)` is not recorded yet; each result is
    /// recorded and the manifest saved as it comes (then `fault` is
    /// reached), and when every partition is done the manifest moves on to
    /// `next`.
    fn each_partition<T: Send>(
        &self,
        m: &mut Manifest,
        (phase, next): (Phase, Phase),
        slots: fn(&mut Manifest) -> &mut Vec<Option<T>>,
        fault: Point,
        job: &(dyn Fn(u32) -> Result<T> + Sync),
    ) -> Result<()> {
        let todo: Vec<u32> = (0..m.partitions)
            .filter(|&p| slots(m)[p as usize].is_none())
            .collect();
        self.progress.phase(phase, m.partitions as u64);
        let work = &self.dirs.work;
        let shared = Mutex::new(&mut *m);
        self.per_partition(todo, job, &mut |p, result| {
            let mut g = shared.lock().map_err(|_| poisoned())?;
            slots(&mut g)[p as usize] = Some(result);
            g.save(work)?;
            crate::fault::point(fault);
            Ok(())
        })?;
        m.phase = next;
        m.save(work)
    }

    pub(super) fn merging(&mut self, m: &mut Manifest) -> Result<()> {
        if m.phase != Phase::Merging {
            return Ok(());
        }
        self.timed(Phase::Merging, |run| {
            let mut files = Vec::new();
            if let Some(b) = &m.base {
                files.push(RunFile::open(&run.dirs.runs.join(&b.run))?);
            }
            for r in &m.runsets {
                for f in &r.runs {
                    files.push(RunFile::open(&run.dirs.runs.join(f))?);
                }
            }
            for f in &files {
                if f.partitions() != m.partitions
                    || f.value_width() != 1 + usize::from(m.settings.document_counts)
                {
                    return Err(Error::corrupt(
                        f.path(),
                        "run file of another ingest (partitions or width differ)",
                    ));
                }
            }
            let next_tmp = AtomicU64::new(0);
            let cfg = merge_config(run.dirs, &run.plan, m, &next_tmp);
            let job =
                |p: u32| merge_partition(&cfg, p, files.iter().map(|f| (f.clone(), p)).collect());
            run.each_partition(
                m,
                (Phase::Merging, Phase::Joining),
                |m| &mut m.merged,
                Point::Merge,
                &job,
            )?;
            run.temp_bytes += store::dir_bytes(&run.dirs.merged);
            // The merged counts hold everything the count runs held.
            remove_matching(&run.dirs.runs, ".run")
        })
    }

    pub(super) fn joining(&mut self, m: &mut Manifest) -> Result<()> {
        if m.phase != Phase::Joining {
            return Ok(());
        }
        self.timed(Phase::Joining, |run| {
            if m.joined.iter().all(Option::is_some) {
                m.phase = Phase::Building;
                return m.save(&run.dirs.work);
            }
            let merged: Vec<_> = m
                .merged
                .iter()
                .map(|x| {
                    x.clone().ok_or_else(|| {
                        Error::corrupt(
                            Manifest::path(&run.dirs.work),
                            "a partition is missing its merge",
                        )
                    })
                })
                .collect::<Result<_>>()?;
            let mut suffix = Vec::new();
            for x in &merged {
                for f in &x.suffix_runs {
                    suffix.push(RunFile::open(&run.dirs.merged.join(f))?);
                }
            }
            let next_tmp = AtomicU64::new(0);
            let cfg = merge_config(run.dirs, &run.plan, m, &next_tmp);
            let ranks = Ranks::from_dicts(&dictionaries(m, run.dirs))?;
            let job = |q: u32| -> Result<Joined> {
                let counts = RunFile::open(&run.dirs.merged.join(&merged[q as usize].counts))?;
                join_partition(
                    &cfg,
                    q,
                    &counts,
                    suffix.iter().map(|f| (f.clone(), q)).collect(),
                    &ranks,
                    &run.dirs.sst,
                )
            };
            run.each_partition(
                m,
                (Phase::Joining, Phase::Building),
                |m| &mut m.joined,
                Point::Join,
                &job,
            )?;
            run.temp_bytes += store::dir_bytes(&run.dirs.sst);
            fsutil::remove_dir(&run.dirs.merged)?;
            fsutil::remove_dir(&run.dirs.tmp)
        })
    }

    pub(super) fn building(&mut self, m: &mut Manifest) -> Result<()> {
        if m.phase == Phase::Building {
            self.timed(Phase::Building, |run| {
                run.progress.phase(Phase::Building, 1);
                let dirs = run.dirs;
                let stats = m
                    .joined
                    .iter()
                    .map(|j| {
                        j.as_ref().map(|j| &j.stats).ok_or_else(|| {
                            Error::corrupt(
                                Manifest::path(&dirs.work),
                                "a partition is missing its join",
                            )
                        })
                    })
                    .collect::<Result<Vec<_>>>()?;
                let meta = finish::store_meta(
                    m.settings,
                    stats,
                    m.read_totals(),
                    growth_inputs(m, dirs).as_ref(),
                    &dirs.tmp,
                    run.plan.fanin,
                )?;
                let ssts: Vec<(String, PathBuf)> = m
                    .joined
                    .iter()
                    .flatten()
                    .flat_map(|j| j.ssts.iter().map(|(cf, f)| (cf.clone(), dirs.sst.join(f))))
                    .collect();
                let db_new = layout::db_new(&dirs.store);
                crate::fault::full(crate::fault::Full::Build).at(&db_new, "create")?;
                finish::build_db(
                    &meta,
                    dictionaries(m, dirs),
                    &ssts,
                    &db_new,
                    &dirs.staging,
                    run.plan.fanin,
                )?;
                crate::fault::point(crate::fault::Point::Build);
                finish::replace_db(&dirs.store, &db_new)?;
                super::unique::install_set(m, dirs)?;
                m.phase = Phase::Done;
                m.save(&run.dirs.work)?;
                run.progress.advance(1);
                Ok(())
            })?;
        }
        if m.phase == Phase::Done {
            // Moved aside in one step, then removed: a kill while it is being
            // removed must not leave a work folder without its manifest,
            // which would look like an ingest that never started.
            let done = crate::layout::work_done(&self.dirs.store);
            fsutil::remove_dir(&done)?;
            std::fs::rename(&self.dirs.work, &done).at(&self.dirs.work, "move aside")?;
            fsutil::sync_dir(&self.dirs.store)?;
            fsutil::remove_dir(&done)?;
        }
        Ok(())
    }
}

/// What the counting phase's spills update, under one lock.
struct Committed<'m> {
    manifest: &'m mut Manifest,
    /// Run files written.
    runs: u64,
    /// Bytes of the spills' files.
    bytes: u64,
}

/// The error for a lock that a panicking thread left behind.
fn poisoned() -> Error {
    Error::Poisoned {
        what: "the ingest's manifest",
    }
}

fn remove_matching(dir: &Path, suffix: &str) -> Result<()> {
    for e in std::fs::read_dir(dir).at(dir, "read directory")? {
        let e = e.at(dir, "read directory")?;
        if e.file_name().to_string_lossy().ends_with(suffix) {
            std::fs::remove_file(e.path()).at(&e.path(), "remove")?;
        }
    }
    Ok(())
}

/// Every dictionary of the ingest: the spills' and the appended store's.
fn dictionaries(m: &Manifest, d: &WorkDirs) -> Vec<PathBuf> {
    let mut paths: Vec<PathBuf> = m.runsets.iter().map(|r| d.runs.join(&r.dict)).collect();
    if let Some(b) = &m.base {
        paths.push(d.runs.join(&b.dict));
    }
    paths
}

/// The first-sighting files of the spills and of the appended store, or
/// `None` where one is missing (a manifest or a store from before growth
/// curves were kept): such a store gets no curve.
fn growth_inputs(m: &Manifest, d: &WorkDirs) -> Option<GrowthInputs> {
    let before = match &m.base {
        None => None,
        Some(b) => {
            let g = b.growth.as_ref()?;
            Some(growth::curve::Before {
                path: d.runs.join(&g.firsts),
                tokens: g.tokens,
                points: g.curve.points.clone(),
            })
        }
    };
    let spills = m
        .runsets
        .iter()
        .map(|r| {
            Some(growth::curve::SpillFirsts {
                path: d.runs.join(r.firsts.as_ref()?),
                starts: r.covers.iter().map(|s| (s.file, s.start)).collect(),
            })
        })
        .collect::<Option<Vec<_>>>()?;
    Some(GrowthInputs { before, spills })
}
