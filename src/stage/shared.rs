//! What every task does alike: its report, its checks of the plan and of
//! the inputs, and the removal of its temporary folder on failure.

use std::path::{Path, PathBuf};
use std::time::Instant;

use super::commit::{Done, Outcome, TaskReport};
use super::Job;
use crate::corpus::Span;
use crate::error::{Error, Result};
use crate::fsutil;

pub(super) fn report(
    stage: &'static str,
    task: u32,
    outcome: Outcome,
    output: PathBuf,
    work: u64,
    output_bytes: u64,
    t0: Instant,
) -> TaskReport {
    TaskReport {
        stage,
        task,
        outcome,
        output,
        work,
        output_bytes,
        seconds: t0.elapsed().as_secs_f64(),
    }
}

pub(super) fn skipped_bytes<T>(d: &Done<T>) -> u64 {
    d.files.iter().map(|f| f.bytes).sum()
}

/// The spans of map task `task` (which `stage` task `task` reads).
pub(super) fn task_spans(job: &Job, stage: &str, task: u32, dir: &Path) -> Result<Vec<Span>> {
    job.map_tasks.get(task as usize).cloned().ok_or_else(|| {
        Error::Config(format!(
            "{stage} task {task} is not in the plan {} (it has tasks 0 to {})",
            dir.join(super::JOB_FILE).display(),
            job.map_tasks.len().saturating_sub(1)
        ))
    })
}

/// Every input of `stage` task `task` (reading `spans`) must be there and
/// unchanged since planned.
pub(super) fn check_inputs(job: &Job, stage: &str, task: u32, spans: &[Span]) -> Result<()> {
    let mut used: Vec<u32> = spans.iter().map(|s| s.file).collect();
    used.dedup();
    for i in used {
        let f = &job.inputs[i as usize];
        let meta = std::fs::metadata(&f.path).map_err(|e| Error::Input {
            path: f.path.clone(),
            detail: format!("an input of {stage} task {task} cannot be read: {e}"),
        })?;
        let mtime_ns = meta
            .modified()
            .ok()
            .and_then(|t| t.duration_since(std::time::UNIX_EPOCH).ok())
            .map_or(0, |d| d.as_nanos() as u64);
        if meta.len() != f.size || mtime_ns != f.mtime_ns {
            return Err(Error::Input {
                path: f.path.clone(),
                detail: format!(
                    "an input of {stage} task {task} changed since it was planned (size {} → {}); plan again in a new --dir",
                    f.size,
                    meta.len()
                ),
            });
        }
    }
    Ok(())
}

pub(super) fn check_partition(job: &Job, p: u32, dir: &Path) -> Result<()> {
    if p >= job.partitions {
        return Err(Error::Config(format!(
            "partition {p} is not in the plan {} (it has partitions 0 to {})",
            dir.join(super::JOB_FILE).display(),
            job.partitions - 1
        )));
    }
    Ok(())
}

/// Removes a task's temporary folder when the task failed (after a
/// successful commit it is gone already).
pub(super) fn finish_temp<T>(tmp: &Path, r: Result<T>) -> Result<T> {
    if r.is_err() {
        let _ = fsutil::remove_dir(tmp);
    }
    r
}
