//! The ingest as separate stages over a shared directory, for running it
//! on a cluster (a scheduler such as Spark runs the tasks; quern does not).
//!
//! The single-machine [`crate::ingest`] runs the same library functions
//! ([`crate::count::count_spans`], [`crate::merge::merge_partition`],
//! [`crate::merge::join_partition`], [`merge_vocabulary`], [`store_meta`])
//! in one process with a manifest; here every task is a separate process
//! whose inputs and outputs are folders of the shared directory:
//!
//! ```text
//! DIR/job.json            the plan: settings, partitions, inputs, map tasks
//! DIR/map/m000007/        map task 7: count runs + dictionaries + done.json
//! DIR/reduce/p0003/       partition 3 merged: counts + continuation runs + done.json
//! DIR/join/p0003/         partition 3 joined: SST files + statistics in done.json
//! STORE/db/               the store, built by assemble
//! ```
//!
//! * [`plan`] lists the inputs (as `quern ingest` does), cuts plain files
//!   into line-aligned chunks and packs them into map tasks of about equal
//!   bytes; the partition count is fixed here and recorded.
//! * [`run_map`] counts one map task's spans into runs partitioned by the
//!   first word, plus the dictionaries of their words.
//! * [`run_reduce`] merges one partition across every map output and emits
//!   the continuation contributions of its n-grams, partitioned by suffix
//!   (the second shuffle).
//! * [`run_join`] joins one partition's merged counts with its continuation
//!   contributions from every reduce output, writing SST files and the
//!   partition's share of the statistics.
//! * [`run_assemble`] merges the dictionaries into the vocabulary, sums the
//!   statistics and builds the store from every partition's SST files.
//!
//! # Idempotence
//!
//! A task writes into a temporary folder of a unique name next to its
//! output (`.m000007.<host>-<pid>-<time>-<n>.tmp`), fsyncs it, writes a
//! `done.json` there listing every file with its size and xxh3-64 (JSON plus
//! an `#xxh3=` line, like the ingest manifest), and renames the folder into
//! place. The rename is the commit: it fails when the output already
//! exists, so of two copies running at once the first to finish wins and
//! the other deletes its folder and reports `raced`. Before working, a task
//! checks for a finished output (its `done.json` and every file's checksum)
//! and reports `skipped` when there is one; a damaged output is moved aside
//! and written again. Map outputs are deterministic for a given plan and
//! memory budget with one thread (the default); with more threads they hold
//! the same counts split differently, and the later stages give the same
//! result from either. Temporary folders of attempts that died are left
//! behind (another attempt may still be writing one); [`clean`] removes
//! them and every intermediate output once the store is built.

mod assemble;
mod tasks;

pub use assemble::{merge_dicts, merge_vocabulary, run_assemble, store_meta};
pub use tasks::{run_join, run_map, run_reduce};

use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicU64, Ordering};

use serde::de::DeserializeOwned;
use serde::{Deserialize, Serialize};

use crate::corpus::{self, InputFile};
use crate::error::{Error, IoContext, Result};
use crate::fsutil;
use crate::ingest::manifest::Span;
use crate::key::MAX_ORDER;
use crate::store::Settings;

/// Format version of `job.json` and of the `done.json` of every output.
pub const STAGE_VERSION: u32 = 1;

/// File name of the plan inside the shared directory.
pub const JOB_FILE: &str = "job.json";
/// File name of an output's record of its files.
pub const DONE_FILE: &str = "done.json";

/// The plan of a staged ingest, written once to `DIR/job.json`.
#[derive(Clone, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub struct Job {
    /// [`STAGE_VERSION`].
    pub format_version: u32,
    /// Counting settings.
    pub settings: Settings,
    /// Number of hash partitions (reduce and join tasks).
    pub partitions: u32,
    /// The inputs, as found when planned.
    pub inputs: Vec<InputFile>,
    /// Per map task, the input spans it counts.
    pub map_tasks: Vec<Vec<Span>>,
}

impl Job {
    /// Reads and verifies `DIR/job.json`.
    pub fn load(dir: &Path) -> Result<Job> {
        let path = dir.join(JOB_FILE);
        let job: Job = fsutil::read_checked_json(&path)?.ok_or_else(|| {
            Error::state(
                dir,
                format!(
                    "no plan here ({} is missing): run `quern stage plan --dir {}` first",
                    path.display(),
                    dir.display()
                ),
            )
        })?;
        if job.format_version != STAGE_VERSION {
            return Err(Error::Version {
                path,
                found: job.format_version,
                expected: STAGE_VERSION,
            });
        }
        Ok(job)
    }

    /// A short identity of the plan, recorded in every output so that
    /// outputs of another plan in the same directory are never mixed in.
    pub fn id(&self) -> String {
        let body = serde_json::to_vec(self).expect("job serialises");
        format!("{:016x}", xxhash_rust::xxh3::xxh3_64(&body))
    }

    /// Input bytes of map task `t` (a span to the end counts the whole file).
    pub fn task_bytes(&self, t: usize) -> u64 {
        self.map_tasks[t]
            .iter()
            .map(|s| span_bytes(s, &self.inputs))
            .sum()
    }
}

fn span_bytes(s: &Span, inputs: &[InputFile]) -> u64 {
    s.end
        .min(inputs[s.file as usize].size)
        .saturating_sub(s.start)
}

/// What [`plan`] needs.
#[derive(Clone, Debug)]
pub struct PlanOptions {
    /// The shared directory.
    pub dir: PathBuf,
    /// Files or directories (walked recursively, sorted).
    pub inputs: Vec<PathBuf>,
    /// Counting settings.
    pub settings: Settings,
    /// Number of partitions.
    pub partitions: u32,
    /// Number of map tasks wanted (fewer when there are fewer chunks).
    pub map_tasks: usize,
}

/// Plans a staged ingest: writes `DIR/job.json`, or checks that the one
/// there is the same plan (a second run of the same command is a no-op).
pub fn plan(o: &PlanOptions) -> Result<(Job, Outcome)> {
    let order = o.settings.order;
    if order == 0 || order > MAX_ORDER {
        return Err(Error::Config(format!(
            "--order {order} is outside 1..={MAX_ORDER}"
        )));
    }
    if o.partitions == 0 {
        return Err(Error::Config("--partitions must be at least 1".into()));
    }
    if o.map_tasks == 0 {
        return Err(Error::Config("--map-tasks must be at least 1".into()));
    }
    if o.inputs.is_empty() {
        return Err(Error::Config("no inputs given".into()));
    }
    let inputs = corpus::discover(&o.inputs)?;
    if let Some(f) = inputs.iter().find(|f| f.is_stdin()) {
        return Err(Error::Input {
            path: f.path.clone(),
            detail: "a staged ingest cannot read standard input (its tasks run elsewhere)".into(),
        });
    }
    let total: u64 = inputs.iter().map(|f| f.size).sum();
    // About four chunks per task, so that the packing can even them out;
    // compressed files cannot be cut and stay one chunk each.
    let chunk = (total / (o.map_tasks as u64 * 4)).clamp(1 << 20, 1 << 30);
    let chunks = corpus::plan_chunks(&inputs, chunk)?;
    let mut spans: Vec<Span> = chunks
        .iter()
        .map(|c| Span {
            file: c.file,
            start: c.start,
            end: c.end,
        })
        .collect();
    // Largest first, each to the task with the fewest bytes so far (ties:
    // the lowest task); deterministic for a given input list.
    spans.sort_by(|a, b| {
        span_bytes(b, &inputs)
            .cmp(&span_bytes(a, &inputs))
            .then((a.file, a.start).cmp(&(b.file, b.start)))
    });
    let n = o.map_tasks.min(spans.len()).max(1);
    let mut tasks: Vec<(u64, Vec<Span>)> = vec![(0, Vec::new()); n];
    for s in spans {
        let t = (0..n).min_by_key(|&i| (tasks[i].0, i)).expect("n ≥ 1");
        tasks[t].0 += span_bytes(&s, &inputs);
        tasks[t].1.push(s);
    }
    let map_tasks = tasks
        .into_iter()
        .map(|(_, mut v)| {
            v.sort_by_key(|s| (s.file, s.start));
            v
        })
        .filter(|v| !v.is_empty())
        .collect();
    let job = Job {
        format_version: STAGE_VERSION,
        settings: o.settings,
        partitions: o.partitions,
        inputs,
        map_tasks,
    };
    fsutil::create_dir(&o.dir)?;
    let path = o.dir.join(JOB_FILE);
    if path.exists() {
        let old = Job::load(&o.dir)?;
        if old != job {
            return Err(Error::state(
                &o.dir,
                format!(
                    "{} holds another plan (other settings, partitions, map tasks or inputs, or an input changed since): give another --dir, or delete this one",
                    path.display()
                ),
            ));
        }
        return Ok((old, Outcome::Skipped));
    }
    // Unique temporary name, then rename: two planners at once write the
    // same plan, so whichever rename lands last is as good as the first.
    let tmp = o.dir.join(format!(".{JOB_FILE}.{}.tmp", unique()));
    fsutil::write_checked_json(&tmp, &job)?;
    fsutil::rename_durable(&tmp, &path)?;
    Ok((job, Outcome::Written))
}

/// What a task did.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum Outcome {
    /// It wrote its output.
    Written,
    /// A finished output was already there; nothing was done.
    Skipped,
    /// Another copy of the task finished first; this one's work was dropped.
    Raced,
    /// A damaged output was there; it was moved aside and written again.
    Repaired,
}

/// One task's report (printed by `quern stage` as one JSON line).
#[derive(Clone, Debug, Serialize)]
pub struct TaskReport {
    /// `plan`, `map`, `reduce`, `join` or `assemble`.
    pub stage: &'static str,
    /// Task (map) or partition (reduce, join) number; 0 for plan and assemble.
    pub task: u32,
    /// What it did.
    pub outcome: Outcome,
    /// The output folder.
    pub output: PathBuf,
    /// Input bytes read (map), records merged (reduce), n-grams stored (join).
    pub work: u64,
    /// Bytes of the output's files.
    pub output_bytes: u64,
    /// Wall-clock seconds.
    pub seconds: f64,
}

/// One file of an output, as recorded in its `done.json`.
#[derive(Clone, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub struct FileSum {
    /// File name inside the output folder.
    pub name: String,
    /// Size in bytes.
    pub bytes: u64,
    /// xxh3-64 of the contents, hex.
    pub xxh3: String,
}

/// The `done.json` of an output folder.
#[derive(Clone, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub struct Done<T> {
    /// [`STAGE_VERSION`].
    pub format_version: u32,
    /// Stage name.
    pub stage: String,
    /// Task or partition number.
    pub task: u32,
    /// [`Job::id`] of the plan it belongs to.
    pub job: String,
    /// Every file of the output.
    pub files: Vec<FileSum>,
    /// What the stage produced (file roles, statistics).
    pub result: T,
}

/// The output folder of map task `t`.
pub fn map_dir(dir: &Path, t: u32) -> PathBuf {
    dir.join("map").join(format!("m{t:06}"))
}

/// The output folder of partition `p`'s reduce.
pub fn reduce_dir(dir: &Path, p: u32) -> PathBuf {
    dir.join("reduce").join(format!("p{p:04}"))
}

/// The output folder of partition `p`'s join.
pub fn join_dir(dir: &Path, p: u32) -> PathBuf {
    dir.join("join").join(format!("p{p:04}"))
}

/// A name no other process (on any machine) uses at the same time.
pub(crate) fn unique() -> String {
    static N: AtomicU64 = AtomicU64::new(0);
    let host = std::fs::read_to_string("/proc/sys/kernel/hostname")
        .map(|h| {
            h.trim()
                .chars()
                .map(|c| if c.is_ascii_alphanumeric() { c } else { '_' })
                .collect::<String>()
        })
        .unwrap_or_else(|_| "host".into());
    let nanos = std::time::SystemTime::now()
        .duration_since(std::time::UNIX_EPOCH)
        .map_or(0, |d| d.as_nanos());
    format!(
        "{host}-{}-{nanos}-{}",
        std::process::id(),
        N.fetch_add(1, Ordering::SeqCst)
    )
}

/// A fresh temporary folder next to `out` (same file system, so the final
/// rename is atomic).
pub(crate) fn temp_dir_for(out: &Path) -> Result<PathBuf> {
    let parent = out.parent().unwrap_or(Path::new("."));
    fsutil::create_dir(parent)?;
    let name = out.file_name().unwrap_or_default().to_string_lossy();
    let tmp = parent.join(format!(".{name}.{}.tmp", unique()));
    fsutil::create_dir(&tmp)?;
    Ok(tmp)
}

/// Reads the finished output in `out` of (`stage`, `task`) of plan `job`,
/// checking every file's size and checksum. `Ok(None)`: no output there.
pub fn read_done<T: DeserializeOwned>(
    out: &Path,
    stage: &str,
    task: u32,
    job: &str,
) -> Result<Option<Done<T>>> {
    let path = out.join(DONE_FILE);
    let Some(d): Option<Done<T>> = fsutil::read_checked_json(&path)? else {
        return Ok(None);
    };
    if d.format_version != STAGE_VERSION {
        return Err(Error::Version {
            path,
            found: d.format_version,
            expected: STAGE_VERSION,
        });
    }
    if d.stage != stage || d.task != task {
        return Err(Error::corrupt(
            &path,
            format!(
                "this is the output of {} task {}, expected {stage} task {task}",
                d.stage, d.task
            ),
        ));
    }
    if d.job != job {
        return Err(Error::corrupt(
            &path,
            format!(
                "this output belongs to another plan ({}; this plan is {job})",
                d.job
            ),
        ));
    }
    for f in &d.files {
        let p = out.join(&f.name);
        let (h, len) = match fsutil::file_xxh3(&p) {
            Ok(x) => x,
            Err(_) => return Err(Error::corrupt(&p, "a file of this output is missing")),
        };
        if len != f.bytes || format!("{h:016x}") != f.xxh3 {
            return Err(Error::corrupt(
                &p,
                format!(
                    "size or checksum differs from {} ({len} bytes, {} recorded)",
                    path.display(),
                    f.bytes
                ),
            ));
        }
    }
    Ok(Some(d))
}

/// Reads the finished output an upstream task must have left, with an error
/// that says which task to run when it is missing or damaged.
pub(crate) fn need_done<T: DeserializeOwned>(
    out: &Path,
    stage: &str,
    task: u32,
    job: &str,
) -> Result<Done<T>> {
    match read_done(out, stage, task, job) {
        Ok(Some(d)) => Ok(d),
        Ok(None) => Err(Error::state(
            out,
            format!("{stage} task {task} has no finished output here: run the {stage} stage first"),
        )),
        Err(e) => Err(Error::state(
            out,
            format!("the output of {stage} task {task} is unusable ({e}): run that task again"),
        )),
    }
}

/// Is there a finished output in `out`? Damage is not an error here: the
/// task then writes the output again.
pub(crate) fn finished<T: DeserializeOwned>(
    out: &Path,
    stage: &str,
    task: u32,
    job: &str,
) -> Option<Done<T>> {
    read_done(out, stage, task, job).ok().flatten()
}

/// Records the files `names` of the finished temporary folder `tmp` in its
/// `done.json`, then renames it to `out`: the task's commit.
pub(crate) fn commit<T: Serialize + DeserializeOwned>(
    tmp: &Path,
    out: &Path,
    stage: &str,
    task: u32,
    job: &str,
    names: Vec<String>,
    result: T,
) -> Result<(Outcome, u64)> {
    let mut files = Vec::with_capacity(names.len());
    let mut total = 0;
    for name in names {
        let (h, bytes) = fsutil::file_xxh3(&tmp.join(&name))?;
        total += bytes;
        files.push(FileSum {
            name,
            bytes,
            xxh3: format!("{h:016x}"),
        });
    }
    let done = Done {
        format_version: STAGE_VERSION,
        stage: stage.to_string(),
        task,
        job: job.to_string(),
        files,
        result,
    };
    fsutil::write_checked_json(&tmp.join(DONE_FILE), &done)?;
    fsutil::sync_dir(tmp)?;
    crate::fault::point("stage-written");
    let outcome = match std::fs::rename(tmp, out) {
        Ok(()) => Outcome::Written,
        Err(_) if out.exists() => {
            if finished::<T>(out, stage, task, job).is_some() {
                fsutil::remove_dir(tmp)?;
                return Ok((Outcome::Raced, total));
            }
            // A damaged output: move it aside (a reader may still hold its
            // files open) and put ours in its place.
            let parent = out.parent().unwrap_or(Path::new("."));
            let name = out.file_name().unwrap_or_default().to_string_lossy();
            let aside = parent.join(format!(".{name}.{}.damaged", unique()));
            std::fs::rename(out, &aside).at(out, "move a damaged output aside")?;
            match std::fs::rename(tmp, out) {
                Ok(()) => Outcome::Repaired,
                Err(_) if finished::<T>(out, stage, task, job).is_some() => {
                    fsutil::remove_dir(tmp)?;
                    return Ok((Outcome::Raced, total));
                }
                Err(e) => return Err(Error::io(out, "rename", e)),
            }
        }
        Err(e) => return Err(Error::io(out, "rename", e)),
    };
    fsutil::sync_dir(out.parent().unwrap_or(Path::new(".")))?;
    crate::fault::point("stage-done");
    Ok((outcome, total))
}

/// Removes the intermediate outputs of a staged ingest (map, reduce and
/// join folders, and temporary folders of attempts that died); the plan
/// stays. Call only when no task of this directory is running.
pub fn clean(dir: &Path) -> Result<()> {
    for sub in ["map", "reduce", "join"] {
        fsutil::remove_dir(&dir.join(sub))?;
    }
    for e in std::fs::read_dir(dir).at(dir, "read directory")? {
        let e = e.at(dir, "read directory")?;
        let name = e.file_name().to_string_lossy().into_owned();
        if name.starts_with('.') && name.ends_with(".tmp") {
            let p = e.path();
            if p.is_dir() {
                fsutil::remove_dir(&p)?;
            } else {
                std::fs::remove_file(&p).at(&p, "remove")?;
            }
        }
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The packing covers every chunk exactly once, in line-aligned spans,
    /// and no task exceeds the mean by more than the largest chunk (the
    /// bound of greedy largest-first packing, common practice).
    #[test]
    fn plan_packs_chunks_into_even_tasks() {
        let tmp = tempfile::tempdir().unwrap();
        let mut paths = Vec::new();
        for (i, lines) in [30_000usize, 9_000, 4_000, 700, 50].iter().enumerate() {
            let p = tmp.path().join(format!("in{i}.txt"));
            let text: String = (0..*lines)
                .map(|n| format!("line {n} of file {i} with some words\n"))
                .collect();
            std::fs::write(&p, text).unwrap();
            paths.push(p);
        }
        let o = PlanOptions {
            dir: tmp.path().join("job"),
            inputs: paths,
            settings: Settings {
                order: 3,
                lowercase: false,
                max_line_bytes: 1 << 20,
            },
            partitions: 5,
            map_tasks: 3,
        };
        let (job, outcome) = plan(&o).unwrap();
        assert_eq!(outcome, Outcome::Written);
        assert_eq!(plan(&o).unwrap(), (job.clone(), Outcome::Skipped));
        let total: u64 = job.inputs.iter().map(|f| f.size).sum();
        let bytes: Vec<u64> = (0..job.map_tasks.len())
            .map(|t| job.task_bytes(t))
            .collect();
        assert_eq!(bytes.iter().sum::<u64>(), total);
        let largest = job
            .map_tasks
            .iter()
            .flatten()
            .map(|s| span_bytes(s, &job.inputs))
            .max()
            .unwrap();
        let mean = total / job.map_tasks.len() as u64;
        assert!(
            bytes.iter().all(|&b| b <= mean + largest),
            "{bytes:?}, mean {mean}, largest chunk {largest}"
        );
        // Spans of one file tile it: sorted, contiguous, from 0 to the end.
        for (i, f) in job.inputs.iter().enumerate() {
            let mut spans: Vec<Span> = job
                .map_tasks
                .iter()
                .flatten()
                .filter(|s| s.file as usize == i)
                .copied()
                .collect();
            spans.sort_by_key(|s| s.start);
            assert_eq!(spans[0].start, 0);
            assert_eq!(spans.last().unwrap().end, u64::MAX);
            for w in spans.windows(2) {
                assert_eq!(w[0].end, w[1].start);
                let text = std::fs::read(&f.path).unwrap();
                assert_eq!(text[w[1].start as usize - 1], b'\n', "cut inside a line");
            }
        }
    }
}
