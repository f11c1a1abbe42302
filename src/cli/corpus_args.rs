//! Flags of the corpus commands (`top`, `collocations`, `keyness`,
//! `lines`), as plain data (the rest are in [`super::args`]).

use std::path::PathBuf;

use clap::Args;

use super::args::{DocumentArgs, QueryStoreArgs};

/// How a list is written: TSV by default.
#[derive(Args, Debug, Clone, Copy)]
pub struct ListFormatArgs {
    /// One JSON object a line. Default: TSV with a header line.
    #[arg(long, conflicts_with = "csv")]
    pub json: bool,
    /// CSV with a header line. Default: TSV.
    #[arg(long)]
    pub csv: bool,
}

#[derive(Args, Debug)]
pub struct TopArgs {
    #[command(flatten)]
    pub store: QueryStoreArgs,
    /// The order of the n-grams listed.
    #[arg(long, value_name = "K", default_value_t = 1)]
    pub order: usize,
    /// Leave out n-grams seen fewer times.
    #[arg(long, value_name = "C", default_value_t = 1)]
    pub min_count: u64,
    /// Leave out n-grams seen in fewer documents (a store counted with
    /// ingest --document-counts). Default: no bound.
    #[arg(long, value_name = "D", default_value_t = 0)]
    pub min_documents: u64,
    /// List at most N n-grams (memory: N entries and the vocabulary).
    #[arg(long, value_name = "N", default_value_t = 100)]
    pub limit: usize,
    /// Also list n-grams that hold <s> or </s>. Default: leave them out.
    #[arg(long)]
    pub markers: bool,
    #[command(flatten)]
    pub format: ListFormatArgs,
}

#[derive(Args, Debug)]
pub struct CollocationsArgs {
    #[command(flatten)]
    pub store: QueryStoreArgs,
    /// The node: a word, or several words (an n-gram).
    #[arg(long, value_name = "WORDS")]
    pub node: String,
    /// Words to the left and to the right of the node. Default: as many as
    /// the store's order allows on each side.
    #[arg(long, value_name = "L,R")]
    pub window: Option<String>,
    /// Sort by: observed, pmi, t_score, g2, log_dice, dice (descending).
    #[arg(long, value_name = "MEASURE", default_value = "log_dice")]
    pub sort: String,
    /// Leave out collocates seen fewer times in the window.
    #[arg(long, value_name = "C", default_value_t = 1)]
    pub min_count: u64,
    /// List at most N collocates.
    #[arg(long, value_name = "N", default_value_t = 50)]
    pub limit: usize,
    /// Also list <s> and </s> as collocates. Default: leave them out.
    #[arg(long)]
    pub markers: bool,
    #[command(flatten)]
    pub format: ListFormatArgs,
}

#[derive(Args, Debug)]
pub struct KeynessArgs {
    /// The study store (and its cache memory).
    #[command(flatten)]
    pub store: QueryStoreArgs,
    /// The reference store.
    #[arg(long, value_name = "DIR")]
    pub reference: PathBuf,
    /// The order of the n-grams compared.
    #[arg(long, value_name = "K", default_value_t = 1)]
    pub order: usize,
    /// The larger of the two counts must reach C.
    #[arg(long, value_name = "C", default_value_t = 5)]
    pub min_count: u64,
    /// G² must reach X (3.84: p < 0.05 with one degree of freedom; 6.63:
    /// p < 0.01; 15.13: p < 0.0001).
    #[arg(long, value_name = "X", default_value_t = 3.84)]
    pub min_g2: f64,
    /// At most N positive and N negative key n-grams.
    #[arg(long, value_name = "N", default_value_t = 25)]
    pub limit: usize,
    /// Sort by: g2, log_ratio (its size), descending.
    #[arg(long, value_name = "BY", default_value = "g2")]
    pub sort: String,
    /// Also compare n-grams that hold <s> or </s>. Default: leave them out.
    #[arg(long)]
    pub markers: bool,
    /// Draw the key n-grams by log ratio into FILE (.svg or .png).
    #[arg(long, value_name = "FILE")]
    pub figure: Option<PathBuf>,
    #[command(flatten)]
    pub format: ListFormatArgs,
}

#[derive(Args, Debug)]
pub struct LinesArgs {
    #[command(flatten)]
    pub store: QueryStoreArgs,
    /// Words and `*` (any one word), e.g. "the * of".
    #[arg(long, value_name = "PATTERN")]
    pub pattern: String,
    #[command(flatten)]
    pub documents: DocumentArgs,
    /// Words of context on each side.
    #[arg(long, value_name = "K", default_value_t = 5)]
    pub context: usize,
    /// Print the first N occurrences only.
    #[arg(long, value_name = "N", conflicts_with = "sample")]
    pub limit: Option<usize>,
    /// Print a random sample of N occurrences (uniform; the same for the
    /// same --seed and input).
    #[arg(long, value_name = "N")]
    pub sample: Option<usize>,
    /// Seed of --sample.
    #[arg(long, value_name = "S", default_value_t = 1)]
    pub seed: u64,
    /// Sort by the words to the right of the match, or to the left (nearest
    /// first). Default: in file order.
    #[arg(long, value_name = "SIDE", value_parser = ["left", "right"])]
    pub sort: Option<String>,
    /// Width of each context column of the aligned output, in characters.
    #[arg(long, value_name = "W", default_value_t = 40)]
    pub width: usize,
    /// TSV (file, line, left, match, right) with a header line. Default:
    /// aligned columns.
    #[arg(long, conflicts_with = "json")]
    pub tsv: bool,
    /// One JSON object a line: file, line, left, match, right.
    #[arg(long)]
    pub json: bool,
    /// Corpus files or folders (plain, .gz, .zst; `-`: standard input):
    /// those the store was counted from.
    #[arg(required = true)]
    pub inputs: Vec<PathBuf>,
}
