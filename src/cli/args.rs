//! Flags, as plain data: sizes, methods and discount policies already
//! parsed into typed values ([`super::values`]). Turned into library
//! options by the subcommands.

use std::path::PathBuf;

use clap::{Args, Parser, Subcommand};
use quern::query::{DiscountPolicy, Method};

pub use super::blend_args::BlendArgs;
pub use super::corpus_args::{CollocationsArgs, KeynessArgs, LinesArgs, ListFormatArgs, TopArgs};
pub use super::ingest_args::IngestArgs;
pub use super::input_args::{DocumentArgs, InputArgs, PreparationArgs};
pub use super::serve_args::ServeArgs;
pub use super::stage_args::StageCommand;
use super::values::{self, method_list, size_syntax, ByteSize};

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
    /// Print every stored n-gram (or context) as TSV, under a header line.
    Dump(DumpArgs),
    /// Totals, n-grams per order, count-of-counts and discounts.
    Stats(StatsArgs),
    /// What a store holds, and the progress of an ingest on it.
    Status(StatusArgs),
    /// The probability of the last word given the words before it (or one
    /// query a line from standard input).
    Prob(ProbArgs),
    /// The most probable next words after a context.
    Next(NextArgs),
    /// The stored n-grams that begin with given words, a page at a time;
    /// or those that fit a pattern (--pattern), by count.
    Ngrams(NgramsArgs),
    /// A frequency list: the n-grams of one order by descending count.
    Top(TopArgs),
    /// The words that keep company with a node word, by association measure.
    Collocations(CollocationsArgs),
    /// The n-grams key in one store against a reference store.
    Keyness(KeynessArgs),
    /// Concordance lines: each occurrence of a pattern in the corpus files,
    /// with its context.
    Lines(LinesArgs),
    /// Perplexity of held-out text, with its predictions, words outside the
    /// vocabulary and log10 probability.
    Score(ScoreArgs),
    /// Fit the free parameters of add-k or interp on held-out text.
    Tune(TuneArgs),
    /// Mix several stores and models into one blend file, with weights
    /// given or fitted on held-out text.
    Blend(BlendArgs),
    /// Keystroke savings of word completion on held-out text: typing it
    /// word by word with the top K completions shown.
    Keystrokes(KeystrokesArgs),
    /// Write a method over a store as a read-only back-off model file (and
    /// ARPA text).
    Freeze(FreezeArgs),
    /// Check every checksum and invariant of a model file written by
    /// `quern freeze`, and nothing else.
    CheckModel(CheckModelArgs),
    /// A vocabulary by size: coverage of the training tokens and held-out
    /// words outside it, or the top N words as a word list.
    Vocab(VocabArgs),
    /// Run one stage of an ingest as a task over a shared directory (for a
    /// cluster; see scripts/spark_ingest.py).
    #[command(subcommand)]
    Stage(StageCommand),
    /// Answer queries over HTTP with JSON (and serve a page to explore the
    /// model) until SIGTERM or Ctrl-C.
    Serve(ServeArgs),
}

#[derive(Args, Debug)]
pub struct VocabArgs {
    /// Store directory.
    #[arg(long)]
    pub store: PathBuf,
    /// Held-out text: the rate of its tokens outside each vocabulary.
    #[arg(long, value_name = "FILE")]
    pub heldout: Vec<PathBuf>,
    /// Vocabulary sizes (comma-separated; k = thousand, m = million), each
    /// the most frequent words, ties broken by their bytes.
    #[arg(long, value_delimiter = ',', value_parser = parse_count)]
    pub sizes: Vec<u64>,
    /// Write the N most frequent words, one a line (what `ingest
    /// --word-list` reads), to --out.
    #[arg(long, value_name = "N", value_parser = parse_count, requires = "out")]
    pub top: Option<u64>,
    /// The file --top writes.
    #[arg(long, requires = "top")]
    pub out: Option<PathBuf>,
    /// JSON instead of TSV.
    #[arg(long)]
    pub json: bool,
}

/// `50k` → 50,000; `2m` → 2,000,000; `700` → 700.
fn parse_count(s: &str) -> Result<u64, String> {
    let t = s.trim();
    let (num, mul) = match t.char_indices().last() {
        Some((i, 'k' | 'K')) => (&t[..i], 1_000),
        Some((i, 'm' | 'M')) => (&t[..i], 1_000_000),
        _ => (t, 1),
    };
    num.parse::<u64>()
        .ok()
        .and_then(|n| n.checked_mul(mul))
        .filter(|&n| n > 0)
        .ok_or_else(|| format!("{s:?}: a count above 0, such as 700, 50k or 2m"))
}

/// The cache memory of a command that reads a store.
#[derive(Args, Debug, Clone, Copy)]
pub struct CacheMemoryArgs {
    #[arg(
        id = "memory",
        long = "memory",
        value_name = "SIZE",
        default_value = "256MiB",
        value_parser = values::byte_size,
        help = concat!(
            "Memory for caches: three quarters go to the store's block cache. ",
            size_syntax!()
        )
    )]
    pub bytes: ByteSize,
}

impl CacheMemoryArgs {
    /// Bytes of the store's block cache: three quarters of the budget.
    pub fn block_cache(self) -> usize {
        (self.bytes.bytes() / 4 * 3) as usize
    }
}

/// The store of a query command and its cache.
#[derive(Args, Debug, Clone)]
pub struct QueryStoreArgs {
    /// Store directory.
    #[arg(long, value_name = "DIR")]
    pub store: PathBuf,
    #[command(flatten)]
    pub memory: CacheMemoryArgs,
}

/// Where `prob`, `next` and `score` get their answers: a method over a
/// store, or a frozen model file.
#[derive(Args, Debug, Clone)]
pub struct QuerySourceArgs {
    /// Store directory.
    #[arg(
        long,
        value_name = "DIR",
        required_unless_present_any = ["model", "blend"],
        conflicts_with_all = ["model", "blend"]
    )]
    pub store: Option<PathBuf>,
    /// A model file written by `quern freeze`, in place of --store (its
    /// method and parameters are the ones it was frozen with).
    #[arg(long, value_name = "FILE", conflicts_with = "blend")]
    pub model: Option<PathBuf>,
    /// A blend file written by `quern blend`, in place of --store: the
    /// mixture of its parts with its weights (a word outside a part's
    /// vocabulary gets that part's <unk> probability).
    #[arg(long, value_name = "FILE")]
    pub blend: Option<PathBuf>,
    /// With --model: read the model whole into memory (on huge pages where
    /// the system allows) instead of mapping it. Opening then takes about
    /// 2 to 4 seconds a gigabyte and the file's size in memory; lookups in a
    /// model far larger than the CPU cache are then as fast as from a map the
    /// page cache holds in 2 MiB pages, and faster than from one in small
    /// pages. For long scoring jobs and services.
    #[arg(long)]
    pub load_model: bool,
    #[command(flatten)]
    pub memory: CacheMemoryArgs,
}

/// A smoothing method's parameters (each method reads only its own).
#[derive(Args, Debug, Clone, Default)]
pub struct ParamArgs {
    /// Parameters from a file written by `quern tune --out` (flags given
    /// here override it). Default: none.
    #[arg(long, value_name = "FILE")]
    pub tuned: Option<PathBuf>,
    /// add-k: the count added to every n-gram (> 0). Default: 1 (Laplace).
    #[arg(long, value_name = "K")]
    pub k: Option<f64>,
    /// stupid: the back-off factor (> 0). Default: 0.4.
    #[arg(long, value_name = "A")]
    pub alpha: Option<f64>,
    /// interp: the weight of orders 1 to N, comma-separated, each in
    /// [0, 1]. Default: 0.5 each.
    #[arg(long, value_name = "L1,...,LN", value_delimiter = ',')]
    pub lambdas: Option<Vec<f64>>,
    /// katz: the largest count that is discounted. Default: 5 (lowered per
    /// order where the data make it unusable, with a note).
    #[arg(long, value_name = "K")]
    pub katz_k: Option<usize>,
    /// mkn, kn, absolute: where the discounts come from. `estimate`: from
    /// the count-of-counts, an error where they leave one undefined or out
    /// of range; `estimate-or-single`: as estimate, and an unusable D1, D2
    /// or D3+ is replaced by that order's single discount n1/(n1 + 2 n2),
    /// with a note; `estimate-or:D1,D2,D3+`: the given values replace
    /// unusable ones, with a note; `fixed:D1,D2,D3+`: the given values at
    /// every order (kn and absolute use the first value).
    /// Default: estimate-or-single.
    #[arg(long, value_name = "POLICY", value_parser = values::discount_policy)]
    pub discounts: Option<DiscountPolicy>,
}

/// The smoothing method of a query command.
#[derive(Args, Debug, Clone)]
pub struct MethodArgs {
    #[arg(
        long,
        value_name = "M",
        value_parser = values::method,
        help = concat!(
            "The smoothing method: ",
            method_list!(),
            ". Default: mkn over a store; with --model, the method it was frozen \
             with (if given, it must be that one)."
        )
    )]
    pub method: Option<Method>,
}

#[derive(Args, Debug)]
pub struct ProbArgs {
    #[command(flatten)]
    pub store: QuerySourceArgs,
    #[command(flatten)]
    pub method: MethodArgs,
    #[command(flatten)]
    pub params: ParamArgs,
    /// One JSON object a line instead of TSV. Default: TSV.
    #[arg(long)]
    pub json: bool,
    /// The context and the predicted word; none: read one query a line
    /// from standard input. `<s>` and `</s>` mean the markers.
    pub words: Vec<String>,
}

#[derive(Args, Debug)]
pub struct NextArgs {
    #[command(flatten)]
    pub store: QuerySourceArgs,
    #[command(flatten)]
    pub method: MethodArgs,
    #[command(flatten)]
    pub params: ParamArgs,
    /// How many words.
    #[arg(long, value_name = "K", default_value_t = 10)]
    pub top: usize,
    /// Only words that begin with these characters (the start of a word
    /// being typed; lowercased if the store was built with --lowercase).
    /// `<s>` and `<unk>` are never shown, `</s>` only without a prefix.
    /// In batch mode, the prefix of lines that give none. Default: none
    /// (any word).
    #[arg(long, value_name = "CHARS", default_value = "")]
    pub prefix: String,
    /// How the prefix matches: `exact` (the word begins with its
    /// characters) or `folded` (regardless of case and accents: Unicode
    /// case folding, then NFD with the combining marks removed, on both
    /// sides; each word shown as the model has it).
    #[arg(long = "match", value_name = "HOW", default_value = "exact", value_parser = values::prefix_match)]
    pub matching: quern::PrefixMatch,
    /// Never show the words of FILE (one a line, as the model has them):
    /// the best words of the others, with their probabilities unchanged.
    /// A model's own list (`freeze --never-suggest`) applies as well.
    #[arg(long, value_name = "FILE")]
    pub never_suggest: Option<PathBuf>,
    /// One JSON object instead of a table (in batch mode, one a line).
    /// Default: a table (in batch mode, TSV with a header line).
    #[arg(long)]
    pub json: bool,
    /// The context (`<s>` means the sentence start); none: read one query
    /// a line from standard input, the context words, then optionally a
    /// tab and the prefix (an empty context asks for the unigram level).
    pub words: Vec<String>,
}

#[derive(Args, Debug)]
pub struct KeystrokesArgs {
    #[command(flatten)]
    pub store: QuerySourceArgs,
    #[command(flatten)]
    pub method: MethodArgs,
    #[command(flatten)]
    pub params: ParamArgs,
    /// How many completions are shown: one or more K, comma-separated,
    /// each at least 1.
    #[arg(
        long,
        value_name = "K,...",
        value_delimiter = ',',
        default_value = "1,3,5"
    )]
    pub top: Vec<usize>,
    /// One JSON object instead of a table. Default: a table.
    #[arg(long)]
    pub json: bool,
    /// Held-out text files (`-`: standard input), one sentence a line.
    #[arg(required = true)]
    pub heldout: Vec<PathBuf>,
}

#[derive(Args, Debug)]
pub struct NgramsArgs {
    #[command(flatten)]
    pub store: QueryStoreArgs,
    #[arg(
        long,
        value_name = "M",
        value_parser = values::method,
        help = concat!(
            "Add the probability of each n-gram's last word under this method (",
            method_list!(),
            "). Default: no probabilities."
        )
    )]
    pub method: Option<Method>,
    #[command(flatten)]
    pub params: ParamArgs,
    /// The order of the n-grams shown. Default: one more than the words given.
    #[arg(long, value_name = "K")]
    pub order: Option<usize>,
    /// N-grams per page.
    #[arg(long, value_name = "N", default_value_t = 20)]
    pub limit: usize,
    /// Continue after this cursor (printed at the end of the previous
    /// page). Default: from the first n-gram.
    #[arg(long, value_name = "CURSOR")]
    pub after: Option<String>,
    /// One JSON object (the page) instead of TSV. Default: TSV.
    #[arg(long)]
    pub json: bool,
    /// Leave out the TSV header line. Default: print it.
    #[arg(long)]
    pub no_header: bool,
    /// The n-grams that fit PATTERN, by descending count: words and `*`
    /// (any one word), e.g. "the * of" (instead of WORDS).
    #[arg(long, value_name = "PATTERN", conflicts_with_all = ["words", "after", "method", "order"])]
    pub pattern: Option<String>,
    /// With --pattern: leave out n-grams seen in fewer documents (a store
    /// counted with ingest --document-counts). Default: no bound.
    #[arg(long, value_name = "D", default_value_t = 0, requires = "pattern")]
    pub min_documents: u64,
    /// The words the n-grams begin with.
    pub words: Vec<String>,
}

#[derive(Args, Debug)]
pub struct ScoreArgs {
    #[command(flatten)]
    pub store: QuerySourceArgs,
    #[command(flatten)]
    pub method: MethodArgs,
    #[command(flatten)]
    pub params: ParamArgs,
    /// One row per sentence (TSV with a header line; with --json one
    /// object a line), then the totals. Default: the totals only.
    #[arg(long)]
    pub per_line: bool,
    /// JSON instead of text: one object (with --per-line, one object a
    /// line). Default: text.
    #[arg(long)]
    pub json: bool,
    #[command(flatten)]
    pub docs: DocArgs,
    /// Text files, one sentence a line; `-` reads standard input.
    #[arg(required = true)]
    pub files: Vec<PathBuf>,
}

#[derive(Args, Debug)]
pub struct TuneArgs {
    #[command(flatten)]
    pub store: QueryStoreArgs,
    /// add-k or interp.
    #[arg(long, value_name = "M", value_parser = values::method)]
    pub method: Method,
    #[command(flatten)]
    pub params: ParamArgs,
    /// interp: one weight per order and bucket of the context count
    /// (bucket b: 2^b <= C(h) < 2^(b+1), the last one everything above).
    /// Default: one weight per order.
    #[arg(long, value_name = "B")]
    pub buckets: Option<usize>,
    /// Write the parameters found to this JSON file (read back with
    /// --tuned FILE).
    #[arg(long, value_name = "FILE")]
    pub out: PathBuf,
    /// One JSON object instead of text. Default: text.
    #[arg(long)]
    pub json: bool,
    /// Held-out text files, one sentence a line.
    #[arg(required = true)]
    pub heldout: Vec<PathBuf>,
}

#[derive(Args, Debug)]
pub struct DumpArgs {
    /// Store directory.
    #[arg(long, value_name = "DIR")]
    pub store: PathBuf,
    /// Only n-grams of this order (with --contexts: contexts of this many
    /// words, 0 to N − 1). Default: every order.
    #[arg(long, value_name = "K")]
    pub order: Option<usize>,
    /// Print context statistics instead (columns: context, C, T, A, N1, N2,
    /// N3+; see the header line).
    #[arg(long)]
    pub contexts: bool,
    /// Leave out n-grams (or contexts) whose raw count is below this: rare
    /// n-grams of crawled text are where personal data hides.
    #[arg(long, value_name = "COUNT", default_value_t = 1)]
    pub min_count: u64,
    /// Leave out the header line. Default: print it.
    #[arg(long)]
    pub no_header: bool,
}

#[derive(Args, Debug)]
pub struct StatsArgs {
    /// Store directory.
    #[arg(long, value_name = "DIR")]
    pub store: PathBuf,
    /// Output format: table (for people), tsv, csv (one header line, stable
    /// column names) or json (one object). Default: table, or nothing with
    /// --plot.
    #[arg(long, value_enum)]
    pub format: Option<StatsFormat>,
    /// The same as --format json.
    #[arg(long, conflicts_with = "format")]
    pub json: bool,
    /// Only this order. Default: every order.
    #[arg(long, value_name = "K")]
    pub order: Option<usize>,
    /// Count-of-counts rows up to this count r. Default: 10 in the table,
    /// all otherwise.
    #[arg(long, value_name = "R", alias = "rows")]
    pub max_count: Option<u64>,
    /// Katz's K: the Good-Turing table has the rows r = 1..=K.
    #[arg(long, value_name = "K", default_value_t = 5)]
    pub katz_k: usize,
    /// Draw the figures into FILE (.svg or .png). Default: no figure.
    #[arg(long, value_name = "FILE")]
    pub plot: Option<PathBuf>,
    /// Compare with this second store: the differences per order, and both
    /// stores in the figure.
    #[arg(long, value_name = "STORE")]
    pub compare: Option<PathBuf>,
}

/// Output formats of `stats`.
#[derive(clap::ValueEnum, Clone, Copy, Debug, PartialEq, Eq)]
pub enum StatsFormat {
    /// Aligned text.
    Table,
    /// Tab-separated values.
    Tsv,
    /// Comma-separated values (RFC 4180 quoting).
    Csv,
    /// JSON.
    Json,
}

#[derive(Args, Debug)]
pub struct StatusArgs {
    /// Store directory.
    #[arg(long, value_name = "DIR")]
    pub store: PathBuf,
    /// One JSON object instead of text. Default: text.
    #[arg(long)]
    pub json: bool,
}

/// `score` of documents: one result per input line (filtering a crawl).
#[derive(Args, Debug, Clone)]
pub struct DocArgs {
    /// Documents as JSON lines (plain, .gz, .zst or -): one JSON result a
    /// line on standard output, in input order; the summary on standard
    /// error.
    #[arg(long, conflicts_with = "lines")]
    pub jsonl: bool,
    /// Documents one a line (plain text); the line number is the id.
    #[arg(long)]
    pub lines: bool,
    /// --jsonl: the field holding the text (a string; its lines are the
    /// sentences).
    #[arg(long, default_value = "text", value_name = "NAME")]
    pub text_field: String,
    /// --jsonl: the field copied as the id (null where absent).
    #[arg(long, default_value = "id", value_name = "NAME")]
    pub id_field: String,
    /// Scoring threads (default: every core).
    #[arg(long)]
    pub threads: Option<usize>,
    /// Add each prediction: its word, log10 probability and how many words
    /// of the n-gram matched (0: outside the vocabulary).
    #[arg(long)]
    pub words: bool,
    /// Also write the summary as JSON to this file.
    #[arg(long, value_name = "FILE")]
    pub summary: Option<PathBuf>,
    /// Keep the documents whose score is below this (perplexity; with a
    /// second model, the cross-entropy difference).
    #[arg(long, value_name = "SCORE", conflicts_with = "keep_fraction")]
    pub keep_below: Option<f64>,
    /// Keep this fraction (0 to 1) of the scored documents, the lowest
    /// scores (reads the inputs twice; not standard input).
    #[arg(long, value_name = "F")]
    pub keep_fraction: Option<f64>,
    /// With a cut: the kept input lines, unchanged (.gz compresses).
    #[arg(long, value_name = "FILE")]
    pub kept: Option<PathBuf>,
    /// With a cut: every other input line, unchanged (.gz compresses).
    #[arg(long, value_name = "FILE")]
    pub dropped: Option<PathBuf>,
    /// Draw the histogram of the scores (log10 perplexity) with the cut
    /// marked (.svg or .png).
    #[arg(long, value_name = "FILE")]
    pub plot: Option<PathBuf>,
    /// A general store: score by the cross-entropy difference of Moore &
    /// Lewis (2010), in-domain (--store or --model) minus general (this),
    /// same method.
    #[arg(long, value_name = "DIR", conflicts_with = "minus_model")]
    pub minus_store: Option<PathBuf>,
    /// A general frozen model: the same as --minus-store, from a model file.
    #[arg(long, value_name = "FILE")]
    pub minus_model: Option<PathBuf>,
    /// Lines longer than this many bytes are bad lines.
    #[arg(long, default_value_t = 64 << 20, value_name = "BYTES")]
    pub max_line_bytes: usize,
}

#[derive(Args, Debug)]
pub struct FreezeArgs {
    /// Store directory.
    #[arg(long, required_unless_present_any = ["from_arpa", "blend"])]
    pub store: Option<PathBuf>,
    /// Freeze a blend file written by `quern blend` instead of a store:
    /// the union of its parts' n-grams with the exact mixture, back-off
    /// weights recomputed.
    #[arg(long, value_name = "FILE", conflicts_with_all = ["store", "from_arpa", "method", "min_counts"])]
    pub blend: Option<PathBuf>,
    /// Read a back-off model from ARPA text (FILE or FILE.gz, checked line
    /// by line) instead of a store, and write it as a model file.
    #[arg(long, value_name = "FILE", conflicts_with_all = ["store", "method", "min_counts"])]
    pub from_arpa: Option<PathBuf>,
    /// With --from-arpa: lowercase query words, as for a store built with
    /// --lowercase.
    #[arg(long, requires = "from_arpa")]
    pub lowercase: bool,
    #[command(flatten)]
    pub memory: CacheMemoryArgs,
    /// The method to freeze: mkn, kn, absolute, witten-bell, katz, interp
    /// or stupid (add-k and mle are not back-off models). Default: mkn.
    #[arg(long, value_name = "M", value_parser = values::method)]
    pub method: Option<Method>,
    #[command(flatten)]
    pub params: ParamArgs,
    /// The model file to write.
    #[arg(long, required_unless_present = "arpa")]
    pub out: Option<PathBuf>,
    /// Also (or only) write the model as ARPA text; a name ending in .gz
    /// is compressed.
    #[arg(long)]
    pub arpa: Option<PathBuf>,
    /// Keep an n-gram of order k only if its raw count is at least the
    /// k-th value (comma-separated, orders 1..N; the first must be 1).
    #[arg(long, value_delimiter = ',')]
    pub min_counts: Option<Vec<u64>>,
    /// Relative-entropy pruning (Stolcke 1998): drop the n-grams whose
    /// removal changes the model's relative entropy by less than THETA
    /// nats, and recompute the back-off weights.
    #[arg(long, value_name = "THETA", conflicts_with = "max_ngrams")]
    pub relative_entropy: Option<f64>,
    /// A size target: prune by relative entropy at the smallest threshold
    /// that keeps at most N n-grams in all (unigrams included).
    #[arg(long, value_name = "N")]
    pub max_ngrams: Option<u64>,
    /// The largest model whose file takes at most SIZE: the pruning
    /// threshold (relative entropy) is searched; with --bits, for the
    /// quantized model. With --heldout, its perplexity is reported.
    /// SIZE: as for --memory.
    #[arg(long, value_name = "SIZE", value_parser = values::byte_size, conflicts_with_all = ["relative_entropy", "max_ngrams"])]
    pub max_bytes: Option<ByteSize>,
    /// Words the model never suggests in `next` and completion (offensive
    /// or private words; one a line, as the model has them): stored in
    /// the model, still used as context, and no probability changes.
    #[arg(long, value_name = "FILE")]
    pub never_suggest: Option<PathBuf>,
    /// Quantize the probabilities of orders 2..N to B bits (2..16), fitted
    /// per order; the back-off weights are recomputed after.
    #[arg(long, value_name = "B")]
    pub bits: Option<u32>,
    /// Quantize the back-off weights to W bits (2..16), fitted per order:
    /// a smaller file, but a context then sums to 1 only within the
    /// rounding of its weight (the summary gives the largest error).
    #[arg(long, value_name = "W")]
    pub weight_bits: Option<u32>,
    /// Held-out text: report its perplexity under the store and the model.
    #[arg(long)]
    pub heldout: Vec<PathBuf>,
    /// Threads that freeze parts of each order side by side (default: one
    /// per core; the model is the same whatever the number).
    #[arg(long)]
    pub threads: Option<usize>,
    /// The summary as JSON.
    #[arg(long)]
    pub json: bool,
}

#[derive(Args, Debug)]
pub struct CheckModelArgs {
    /// The model file.
    pub model: PathBuf,
    /// One JSON object instead of text. Default: text.
    #[arg(long)]
    pub json: bool,
}
