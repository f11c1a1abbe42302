//! `ingest --counts`: the options it refuses, the check that the tables'
//! counts add up within 64 bits, and the table line named for an n-gram
//! that the join found without its prefix or suffix.
//!
//! Counting reads each line as [`crate::corpus::count_table`] says and names a bad
//! line itself. Closure under prefixes and suffixes can only be seen once
//! everything is sorted: the join reports the missing (n − 1)-gram
//! ([`Error::NotCounted`]), and [`name_line`] reads the tables again, in
//! input order, for the first line whose n-gram lacks it.

use super::manifest::Manifest;
use super::options::IngestOptions;
use crate::corpus::count_table as tsv;
use crate::corpus::{self, Format, InputFile, Line, LineReader};
use crate::error::{Error, Result, Side};
use crate::tokenize::Preparation;
use crate::words::WordId;

/// Refuses the options that prepare text: a count table's words are taken
/// as they are.
pub(super) fn check_options(opts: &IngestOptions) -> Result<()> {
    let refused = if opts.preparation != Preparation::default() {
        Some(format!(
            "a text preparation ({})",
            opts.preparation.describe()
        ))
    } else if opts.word_list.is_some() {
        Some("--word-list".to_string())
    } else if opts.format != Format::Lines {
        Some(format!("inputs read as {}", opts.format.describe()))
    } else if opts.unique.is_some() {
        Some(crate::records::Unique::describe(opts.unique))
    } else if opts.document_counts {
        Some("--document-counts (a table holds no documents)".to_string())
    } else {
        None
    };
    match refused {
        Some(what) => Err(Error::Config(format!(
            "--counts reads count tables, whose words are taken as they are: {what} applies to text only"
        ))),
        None => Ok(()),
    }
}

/// Fails if the counts read (and an appended store's) add up to more than
/// 64 bits hold.
pub(super) fn check_sum(m: &Manifest) -> Result<()> {
    let base = m.base.as_ref().map_or(0, |b| b.totals.counts_sum);
    let mut sum = Some(base);
    for r in &m.runsets {
        sum = sum.and_then(|s| s.checked_add(r.totals.counts_sum));
    }
    match sum {
        Some(_) => Ok(()),
        None => Err(Error::Config(
            "the counts of the tables (and of the store appended to) add up to more than 18446744073709551615, which 64 bits cannot hold".into(),
        )),
    }
}

/// The error for the table line behind `e` when it is an
/// [`Error::NotCounted`]: the first line, in input order, whose n-gram
/// has the missing (n − 1)-gram as its prefix or suffix. When no file
/// holds it (it came from standard input, which cannot be read again),
/// the error says so without a line. Any other error is returned as it is.
pub(super) fn name_line(
    e: Error,
    inputs: &[InputFile],
    max_order: usize,
    max_line: usize,
) -> Error {
    let Error::NotCounted { side, missing, .. } = &e else {
        return e;
    };
    match find(inputs, max_order, max_line, *side, missing) {
        Ok(Some(found)) => found,
        Ok(None) => match inputs.iter().find(|f| f.is_stdin()) {
            Some(stdin) => Error::Input {
                path: stdin.path.clone(),
                detail: format!(
                    "an n-gram of {} words was counted, but not its {side}; no file names it, so it is on standard input, which cannot be read again to find its line",
                    missing.len() + 1
                ),
            },
            None => e,
        },
        Err(read) => read,
    }
}

fn find(
    inputs: &[InputFile],
    max_order: usize,
    max_line: usize,
    side: Side,
    missing: &[WordId],
) -> Result<Option<Error>> {
    let mut line = Vec::new();
    let mut ids = Vec::with_capacity(max_order);
    for f in inputs.iter().filter(|f| !f.is_stdin()) {
        let mut r = LineReader::new(
            corpus::open_at(f, 0)?,
            f.path.clone(),
            0,
            u64::MAX,
            max_line,
        );
        let mut number = 0u64;
        loop {
            let kind = r.next_line(&mut line)?;
            number += 1;
            match kind {
                Line::End => break,
                Line::TooLong => continue,
                Line::Text => {}
            }
            // Lines that do not read were refused while counting.
            let Ok(l) = tsv::read_line(&line, max_order) else {
                continue;
            };
            if l.order != missing.len() + 1 {
                continue;
            }
            ids.clear();
            ids.extend(l.words().map(|w| crate::words::word_id(w.as_bytes())));
            let part = match side {
                Side::Prefix => &ids[..l.order - 1],
                Side::Suffix => &ids[1..],
            };
            if part != missing {
                continue;
            }
            let words: Vec<&str> = l.words().collect();
            let (gram, without) = match side {
                Side::Prefix => (words[..l.order - 1].join(" "), "last"),
                Side::Suffix => (words[1..].join(" "), "first"),
            };
            return Ok(Some(Error::BadLine {
                path: f.path.clone(),
                line: number,
                expected: format!(
                    "the {side} {gram:?} of this line's n-gram (it without its {without} word) on a line of the tables"
                ),
                found: format!("{:?} counted, and no line for its {side}", l.ngram),
            }));
        }
    }
    Ok(None)
}
