//! Flags shared by `quern ingest` and `quern stage plan`: how the inputs
//! are read and how their text is prepared, as plain data.

use clap::Args;
use quern::tokenize::{Digits, Normalize, Preparation, Sentences, Tokens};

/// The text preparation of an ingest (or a staged plan), chosen once and
/// recorded in the store.
#[derive(Args, Debug, Clone, Copy)]
pub struct PreparationArgs {
    /// Lowercase every token (Unicode lowercasing). Default: off.
    #[arg(long)]
    pub lowercase: bool,
    /// Unicode normalization of the text, first of the preparation steps:
    /// none, nfc or nfkc (UAX #15).
    #[arg(long, value_name = "FORM", default_value = "none", value_parser = setting::<Normalize>)]
    pub normalize: Normalize,
    /// Where sentences end: lines (a line is a sentence), split (UAX #29
    /// sentence boundaries) or document (a document, or an input line, is
    /// one sentence).
    #[arg(long, value_name = "HOW", default_value = "lines", value_parser = setting::<Sentences>)]
    pub sentences: Sentences,
    /// What a token is: whitespace (runs of characters that are not
    /// White_Space) or words (UAX #29 word-boundary segments that are not
    /// all White_Space: punctuation apart, "can't" and "3.14" whole).
    #[arg(long, value_name = "HOW", default_value = "whitespace", value_parser = setting::<Tokens>)]
    pub tokens: Tokens,
    /// Decimal digits (Unicode Nd): keep, or zero (each becomes 0).
    #[arg(long, value_name = "HOW", default_value = "keep", value_parser = setting::<Digits>)]
    pub digits: Digits,
}

impl PreparationArgs {
    /// The preparation the flags ask for.
    pub fn preparation(&self) -> Preparation {
        Preparation {
            normalize: self.normalize,
            sentences: self.sentences,
            tokens: self.tokens,
            lowercase: self.lowercase,
            digits: self.digits,
        }
    }
}

/// How the inputs of an ingest (or a staged plan) are read.
#[derive(Args, Debug, Clone)]
pub struct InputArgs {
    /// Skip (and report) lines longer than this many bytes.
    #[arg(long, value_name = "BYTES", default_value_t = 1 << 20)]
    pub max_line_bytes: usize,
    #[command(flatten)]
    pub documents: DocumentArgs,
}

impl InputArgs {
    /// How the lines hold documents.
    pub fn format(&self) -> quern::corpus::Format {
        self.documents.format()
    }
}

/// Whether the input lines are documents in JSON (ingest, stage, lines).
#[derive(Args, Debug, Clone)]
pub struct DocumentArgs {
    /// The inputs are JSON lines, one document a line: the text field of
    /// each (a string) is read, its lines as sentences. A line that holds
    /// no document is named, counted and skipped. Default: plain text, a
    /// line a sentence.
    #[arg(long)]
    pub jsonl: bool,
    /// --jsonl: the field holding the text.
    #[arg(long, default_value = "text", value_name = "NAME", requires = "jsonl")]
    pub text_field: String,
}

impl DocumentArgs {
    /// How the lines hold documents.
    pub fn format(&self) -> quern::corpus::Format {
        if self.jsonl {
            quern::corpus::Format::json_lines(&self.text_field)
        } else {
            quern::corpus::Format::default()
        }
    }
}

/// A preparation setting from its name on the command line (the name it
/// has in the store's records).
fn setting<T: serde::de::DeserializeOwned>(s: &str) -> Result<T, String> {
    serde_json::from_value(serde_json::Value::String(s.to_string()))
        .map_err(|_| format!("{s:?} is not one of the values listed in --help"))
}
