//! Flags, as plain data. Turned into library options by the subcommands.

use std::path::PathBuf;

use clap::{Args, Parser, Subcommand};

/// Count n-grams of large corpora in bounded memory, and query the counts.
#[derive(Parser, Debug)]
#[command(name = "quern", version, about)]
pub struct Cli {
    #[command(subcommand)]
    pub command: Command,
}

#[derive(Subcommand, Debug)]
pub enum Command {
    /// Count every n-gram of the inputs into a store (resumes an unfinished one).
    Ingest(IngestArgs),
    /// Print every stored n-gram (or context) as TSV.
    Dump(DumpArgs),
    /// Totals, n-grams per order, count-of-counts and discounts.
    Stats(StatsArgs),
    /// What a store holds, and the progress of an ingest on it.
    Status(StatusArgs),
}

#[derive(Args, Debug)]
pub struct IngestArgs {
    /// Store directory (created if missing).
    #[arg(long)]
    pub store: PathBuf,
    /// Highest n-gram order N.
    #[arg(long, default_value_t = 5)]
    pub order: usize,
    /// Memory budget of the whole process, e.g. 512MiB or 4GiB.
    #[arg(long, default_value = "1GiB")]
    pub memory: String,
    /// Worker threads (default: all cores).
    #[arg(long)]
    pub threads: Option<usize>,
    /// Lowercase every token (Unicode lowercasing).
    #[arg(long)]
    pub lowercase: bool,
    /// Skip (and report) lines longer than this many bytes.
    #[arg(long, default_value_t = 1 << 20)]
    pub max_line_bytes: usize,
    /// Number of partitions (default: 16 per thread, 16 to 256).
    #[arg(long)]
    pub partitions: Option<u32>,
    /// Discard an unfinished ingest in this store and start again.
    #[arg(long)]
    pub restart: bool,
    /// Add the inputs to a finished store.
    #[arg(long)]
    pub append: bool,
    /// No progress display.
    #[arg(long, short)]
    pub quiet: bool,
    /// Print the summary as JSON on standard output.
    #[arg(long)]
    pub json: bool,
    /// Files or directories (walked recursively, sorted); `-` reads standard input.
    #[arg(required = true)]
    pub inputs: Vec<PathBuf>,
}

#[derive(Args, Debug)]
pub struct DumpArgs {
    /// Store directory.
    #[arg(long)]
    pub store: PathBuf,
    /// Only n-grams of this order.
    #[arg(long)]
    pub order: Option<usize>,
    /// Print context statistics instead: context, C, T, A, N1, N2, N3+.
    #[arg(long)]
    pub contexts: bool,
    /// Leave out n-grams (or contexts) whose raw count is below this: rare
    /// n-grams of crawled text are where personal data hides.
    #[arg(long, default_value_t = 1)]
    pub min_count: u64,
}

#[derive(Args, Debug)]
pub struct StatsArgs {
    /// Store directory.
    #[arg(long)]
    pub store: PathBuf,
    /// JSON instead of a table.
    #[arg(long)]
    pub json: bool,
    /// Rows of count-of-counts shown per order in the table.
    #[arg(long, default_value_t = 10)]
    pub rows: usize,
}

#[derive(Args, Debug)]
pub struct StatusArgs {
    /// Store directory.
    #[arg(long)]
    pub store: PathBuf,
    /// JSON instead of text.
    #[arg(long)]
    pub json: bool,
}
