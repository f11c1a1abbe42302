//! Flags of `quern stage`, as plain data (the rest are in [`super::args`]).

use std::path::PathBuf;

use clap::{Args, Subcommand};

use super::args::{InputArgs, PreparationArgs};
use super::values::{self, size_syntax, ByteSize};

/// The stages of a staged ingest. Each prints one JSON line describing
/// what it did; each is safe to run again or twice at once.
#[derive(Subcommand, Debug)]
pub enum StageCommand {
    /// Plan: list the inputs, fix the partitions, pack the inputs into map
    /// tasks of about equal bytes; writes DIR/job.json.
    Plan(StagePlanArgs),
    /// --unique: hash the units of one map task's inputs, cut into the
    /// plan's hash ranges.
    Hash(StageHashArgs),
    /// --unique: mark the duplicates of one hash range across every hash
    /// output (every hash task first).
    Mark(StagePartArgs),
    /// Count one map task's inputs into partitioned runs and dictionaries
    /// (with --unique: after every mark task, skipping the duplicates).
    Map(StageMapArgs),
    /// Merge one partition across every map output.
    Merge(StagePartArgs),
    /// Join one partition's merged counts with its continuation counts.
    Join(StagePartArgs),
    /// Build the store from every partition's output.
    Assemble(StageAssembleArgs),
    /// Remove the intermediate outputs (when the store is built and no task runs).
    Clean(StageDirArgs),
}

#[derive(Args, Debug)]
pub struct StageDirArgs {
    /// The shared directory of the job.
    #[arg(long, value_name = "DIR")]
    pub dir: PathBuf,
}

#[derive(Args, Debug)]
pub struct StagePlanArgs {
    /// The shared directory of the job (created if missing).
    #[arg(long, value_name = "DIR")]
    pub dir: PathBuf,
    /// Highest n-gram order N (1 to 8).
    #[arg(long, value_name = "N", default_value_t = 5)]
    pub order: usize,
    #[command(flatten)]
    pub prep: PreparationArgs,
    /// A fixed vocabulary, as for `quern ingest --word-list`: FILE holds
    /// one word a line, and every other token is counted as `<unk>`. The
    /// plan keeps a copy in DIR for the tasks, and the store keeps it.
    /// Default: every token counts.
    #[arg(long, value_name = "FILE")]
    pub word_list: Option<PathBuf>,
    #[command(flatten)]
    pub input: InputArgs,
    /// Count each distinct sentence (lines) or document (documents),
    /// judged on its prepared tokens, only where it first occurs, as
    /// `quern ingest --unique` does; adds the hash and mark stages before
    /// the map stage. Default: every occurrence counts.
    #[arg(long, value_name = "UNIT", value_parser = values::unique)]
    pub unique: Option<quern::records::Unique>,
    /// Also store each n-gram's number of documents, as `quern ingest
    /// --document-counts` does.
    #[arg(long)]
    pub document_counts: bool,
    /// Number of partitions: one merge and one join task each (and with
    /// --unique one mark task each). Required (the Spark driver passes its
    /// own default).
    #[arg(long, value_name = "N")]
    pub partitions: u32,
    /// Number of map tasks (fewer if the inputs have fewer chunks).
    /// Required (the Spark driver passes its own default).
    #[arg(long, value_name = "N")]
    pub map_tasks: usize,
    /// Files or directories (walked recursively, sorted), on the shared storage.
    #[arg(required = true)]
    pub inputs: Vec<PathBuf>,
}

#[derive(Args, Debug)]
pub struct StageMapArgs {
    /// The shared directory of the job.
    #[arg(long, value_name = "DIR")]
    pub dir: PathBuf,
    /// The map task's number in the plan (from 0).
    #[arg(long, value_name = "I")]
    pub task: u32,
    #[command(flatten)]
    pub memory: TaskMemoryArgs,
    /// Counting threads (more than one: same counts, not byte-identical runs).
    #[arg(long, value_name = "N", default_value_t = 1)]
    pub threads: usize,
}

#[derive(Args, Debug)]
pub struct StageHashArgs {
    /// The shared directory of the job.
    #[arg(long, value_name = "DIR")]
    pub dir: PathBuf,
    /// The map task whose inputs are hashed (from 0).
    #[arg(long, value_name = "I")]
    pub task: u32,
    #[command(flatten)]
    pub memory: TaskMemoryArgs,
}

#[derive(Args, Debug)]
pub struct StagePartArgs {
    /// The shared directory of the job.
    #[arg(long, value_name = "DIR")]
    pub dir: PathBuf,
    /// The partition (from 0).
    #[arg(long, value_name = "P")]
    pub partition: u32,
    #[command(flatten)]
    pub memory: TaskMemoryArgs,
}

#[derive(Args, Debug)]
pub struct StageAssembleArgs {
    /// The shared directory of the job.
    #[arg(long, value_name = "DIR")]
    pub dir: PathBuf,
    /// Store directory to build (created if missing).
    #[arg(long, value_name = "DIR")]
    pub store: PathBuf,
    #[command(flatten)]
    pub memory: TaskMemoryArgs,
}

/// The memory budget of a `quern stage` task.
#[derive(Args, Debug, Clone, Copy)]
pub struct TaskMemoryArgs {
    #[arg(
        id = "memory",
        long = "memory",
        value_name = "SIZE",
        default_value = "1GiB",
        value_parser = values::byte_size,
        help = concat!("Memory budget of this task. ", size_syntax!())
    )]
    pub bytes: ByteSize,
}
