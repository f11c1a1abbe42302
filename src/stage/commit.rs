//! The commit protocol of a task's output: a temporary folder of a unique
//! name, a `done.json` listing every file with its size and checksum, and
//! a rename into place that only one copy of a task wins; reading a
//! finished output back, checked; and clean-up.

use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicU64, Ordering};

use serde::de::DeserializeOwned;
use serde::{Deserialize, Serialize};

use super::{DONE_FILE, STAGE_VERSION};
use crate::error::{Error, IoContext, Result};
use crate::fsutil;

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
    /// `plan`, `hash`, `mark`, `map`, `merge`, `join` or `assemble`.
    pub stage: &'static str,
    /// Task (hash, map) or partition (mark, merge, join) number; 0 for
    /// plan and assemble.
    pub task: u32,
    /// What it did.
    pub outcome: Outcome,
    /// The output folder.
    pub output: PathBuf,
    /// Input bytes read (hash, map), units marked (mark), records merged
    /// (merge), n-grams stored (join).
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
    let Some(d): Option<Done<T>> = fsutil::read_checked_json_upgraded(
        &path,
        STAGE_VERSION,
        crate::records::upgrade_partition_records,
    )?
    else {
        return Ok(None);
    };
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
    crate::fault::point(crate::fault::Point::StageWritten);
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
    crate::fault::point(crate::fault::Point::StageDone);
    Ok((outcome, total))
}

/// Removes the intermediate outputs of a staged ingest (hash, mark, map,
/// merge and join folders, and temporary folders of attempts that died); the plan
/// stays. Call only when no task of this directory is running.
pub fn clean(dir: &Path) -> Result<()> {
    for sub in ["hash", "mark", "map", "merge", "join"] {
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
