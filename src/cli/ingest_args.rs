//! Flags of `quern ingest`, as plain data.

use std::path::PathBuf;

use clap::Args;

use super::input_args::{InputArgs, PreparationArgs};
use super::values::{self, size_syntax, ByteSize};

#[derive(Args, Debug)]
pub struct IngestArgs {
    /// Store directory (created if missing).
    #[arg(long, value_name = "DIR")]
    pub store: PathBuf,
    /// Highest n-gram order N (1 to 8).
    #[arg(long, value_name = "N", default_value_t = 5)]
    pub order: usize,
    #[arg(
        long,
        value_name = "SIZE",
        default_value = "1GiB",
        value_parser = values::byte_size,
        help = concat!("Memory budget of the whole process, at least 16MiB. ", size_syntax!())
    )]
    pub memory: ByteSize,
    /// Worker threads. Default: all cores.
    #[arg(long, value_name = "N")]
    pub threads: Option<usize>,
    #[command(flatten)]
    pub prep: PreparationArgs,
    /// A fixed vocabulary: FILE holds one word a line, and every other
    /// token is counted as `<unk>` (lowercased first with --lowercase). The
    /// store keeps the list; --append and a resume must give the same one.
    /// Default: every token counts.
    #[arg(long, value_name = "FILE")]
    pub word_list: Option<PathBuf>,
    #[command(flatten)]
    pub input: InputArgs,
    /// Count each distinct sentence (lines) or document (documents: a JSON
    /// line's text, or an input line), judged on its prepared tokens, only
    /// where it first occurs. Default: every occurrence counts.
    #[arg(long, value_name = "UNIT", value_parser = values::unique)]
    pub unique: Option<quern::records::Unique>,
    /// Number of partitions the merge is cut into. Default: 16 per thread,
    /// at least 16 and at most 256.
    #[arg(long, value_name = "N")]
    pub partitions: Option<u32>,
    /// Discard an unfinished ingest in this store and start again.
    #[arg(long)]
    pub restart: bool,
    /// Add the inputs to a finished store.
    #[arg(long)]
    pub append: bool,
    /// The inputs are count tables, not text: lines `n-gram<TAB>count` of
    /// every order 1 to N, as `quern dump` writes them (its header and
    /// third column allowed); duplicates add up. Default: text.
    #[arg(long)]
    pub counts: bool,
    /// Also store, for each n-gram, the number of documents it occurs in
    /// (a JSON line's text, or an input line, is a document): `top`,
    /// `ngrams --pattern` and `dump` show it, `--min-documents` filters on
    /// it. The store grows by a column of its own. --append and a resume
    /// must give the same setting. Default: counts only.
    #[arg(long)]
    pub document_counts: bool,
    /// No progress display (shown on standard error when it is a terminal).
    #[arg(long, short)]
    pub quiet: bool,
    /// Print the summary as one JSON object on standard output. Default: text.
    #[arg(long)]
    pub json: bool,
    /// Files or directories (walked recursively, sorted); `.gz` and `.zst`
    /// are decompressed; `-` reads standard input.
    #[arg(required = true)]
    pub inputs: Vec<PathBuf>,
}
