//! The ingest as separate stages over a shared directory, for running it
//! on a cluster (a scheduler such as Spark runs the tasks; quern does not).
//!
//! The single-machine [`crate::ingest`] runs the same library functions
//! ([`crate::count::count_spans`], [`crate::merge::merge_partition`],
//! [`crate::merge::join_partition`], [`crate::finish`])
//! in one process with a manifest; here every task is a separate process
//! whose inputs and outputs are folders of the shared directory:
//!
//! ```text
//! DIR/job.json            the plan: settings, partitions, inputs, map tasks
//! DIR/word-list.txt       the fixed vocabulary, if the plan was given one
//! DIR/hash/h000007/       --unique: map task 7's units hashed, runs by hash range
//! DIR/mark/p0003/         --unique: hash range 3 marked: duplicate positions + hashes
//! DIR/map/m000007/        map task 7: count runs + dictionaries + done.json
//! DIR/merge/p0003/        partition 3 merged: counts + continuation runs + done.json
//! DIR/join/p0003/         partition 3 joined: SST files + statistics in done.json
//! STORE/db/               the store, built by assemble
//! STORE/unique.hashes     --unique: the hashes of every unit counted
//! ```
//!
//! * [`plan`] lists the inputs (as `quern ingest` does), cuts plain files
//!   into line-aligned chunks and packs them into map tasks of about equal
//!   bytes; the partition count is fixed here and recorded.
//! * With `--unique`, [`run_hash`] hashes one map task's units and
//!   [`run_mark`] marks the duplicates of one hash range (see
//!   `dedup.rs`), before any map task runs.
//! * [`run_map`] counts one map task's spans into runs partitioned by the
//!   first word, plus the dictionaries of their words.
//! * [`run_merge`] merges one partition across every map output and emits
//!   the continuation contributions of its n-grams, partitioned by suffix
//!   (the second shuffle).
//! * [`run_join`] joins one partition's merged counts with its continuation
//!   contributions from every merge output, writing SST files and the
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
mod commit;
mod dedup;
mod plan;
mod shared;
mod tasks;

pub use assemble::run_assemble;
pub use commit::clean;
pub use dedup::{run_hash, run_mark};
pub use plan::{plan, Job, PlanOptions};
pub use tasks::{run_join, run_map, run_merge};

use std::path::{Path, PathBuf};

/// Format version of `job.json` and of the `done.json` of every output.
/// Version 1 is read too, converted by
/// [`crate::records::upgrade_partition_records`]. A plan made with
/// `--unique` records it in its settings (`settings.unique`), which a plan
/// without it does not write, so older plans read and identify as before.
pub const STAGE_VERSION: u32 = 2;

/// File name of the plan inside the shared directory.
pub const JOB_FILE: &str = "job.json";
/// File name of an output's record of its files.
pub const DONE_FILE: &str = "done.json";

/// The output folder of map task `t`.
pub fn map_dir(dir: &Path, t: u32) -> PathBuf {
    dir.join("map").join(format!("m{t:06}"))
}

/// The output folder of hash task `t` (`--unique`: map task `t`'s units
/// hashed).
pub fn hash_dir(dir: &Path, t: u32) -> PathBuf {
    dir.join("hash").join(format!("h{t:06}"))
}

/// The output folder of hash range `p`'s marking (`--unique`).
pub fn mark_dir(dir: &Path, p: u32) -> PathBuf {
    dir.join("mark").join(format!("p{p:04}"))
}

/// The output folder of partition `p`'s merge.
pub fn merge_dir(dir: &Path, p: u32) -> PathBuf {
    dir.join("merge").join(format!("p{p:04}"))
}

/// The output folder of partition `p`'s join.
pub fn join_dir(dir: &Path, p: u32) -> PathBuf {
    dir.join("join").join(format!("p{p:04}"))
}
