//! `quern next`: the most probable next words after a context, optionally
//! only those that begin with a prefix; with no context words, one query a
//! line from standard input.

use std::collections::HashSet;
use std::io::{BufRead, BufWriter, Write};
use std::path::Path;

use anyhow::Context;
use quern::query::{query_ids, Next, Predictor, WordJson};
use quern::words::{word_id, WordId};

use super::prob::{jnum, log, num, open_source, predictor, words};
use crate::cli::args::NextArgs;

/// The answer as JSON, in the order written.
#[derive(serde::Serialize)]
struct NextJson<'a> {
    #[serde(skip_serializing_if = "Option::is_none")]
    line: Option<usize>,
    context: &'a str,
    prefix: &'a str,
    method: &'static str,
    words: Vec<WordJson<'a>>,
    rest: serde_json::Value,
    words_scored: usize,
    seconds: f64,
}

/// The words of an answer.
fn names(est: &dyn Predictor, next: &Next) -> anyhow::Result<Vec<String>> {
    next.items.iter().map(|(w, _)| words(est, &[*w])).collect()
}

/// Writes one answer as a JSON line.
#[allow(clippy::too_many_arguments)]
fn write_json(
    out: &mut impl Write,
    est: &dyn Predictor,
    line: Option<usize>,
    context: &str,
    prefix: &str,
    next: &Next,
    secs: f64,
) -> anyhow::Result<()> {
    let names = names(est, next)?;
    let list = next
        .items
        .iter()
        .zip(&names)
        .map(|((_, p), w)| WordJson::new(w, est.method(), *p))
        .collect();
    let v = NextJson {
        line,
        context,
        prefix,
        method: est.method().name(),
        words: list,
        rest: if est.method().is_probability() {
            jnum(next.rest)
        } else {
            serde_json::Value::Null
        },
        words_scored: next.scored,
        seconds: secs,
    };
    serde_json::to_writer(&mut *out, &v)?;
    writeln!(out)?;
    Ok(())
}

/// The words of a list file: one a line (line ends and surrounding
/// whitespace removed; blank lines skipped).
pub fn word_list(path: &Path) -> anyhow::Result<Vec<String>> {
    let text = std::fs::read_to_string(path)
        .with_context(|| format!("reading the word list {}", path.display()))?;
    Ok(text
        .lines()
        .map(str::trim)
        .filter(|w| !w.is_empty())
        .map(str::to_string)
        .collect())
}

/// The ids of `--never-suggest`'s words (none without it).
fn never_ids(a: &NextArgs) -> anyhow::Result<HashSet<WordId>> {
    let Some(p) = &a.never_suggest else {
        return Ok(HashSet::new());
    };
    Ok(word_list(p)?
        .iter()
        .map(|w| word_id(w.as_bytes()))
        .collect())
}

pub fn run(a: NextArgs) -> anyhow::Result<()> {
    let src = open_source(&a.store)?;
    let pred = predictor(&src, a.method.method, &a.params)?;
    let est = pred.get();
    let never = never_ids(&a)?;
    if a.words.is_empty() {
        return batch(est, &a, &never);
    }
    let ids = query_ids(&a.words.join(" "), &est.preparation());
    let t = std::time::Instant::now();
    let next = est.suggest(&ids, &a.prefix, a.matching, &never, a.top)?;
    let secs = t.elapsed().as_secs_f64();
    let prob = est.method().is_probability();
    let mut out = std::io::stdout().lock();
    let context = words(est, &next.context)?;
    if a.json {
        return write_json(&mut out, est, None, &context, &a.prefix, &next, secs);
    }
    let mut heading = if context.is_empty() {
        "with no context: the unigram level".to_string()
    } else {
        format!("after \"{context}\"")
    };
    if !a.prefix.is_empty() {
        heading.push_str(&format!(", words that begin with \"{}\"", a.prefix));
    }
    writeln!(
        out,
        "{heading} ({}, {} of {} words scored)",
        est.method(),
        next.scored,
        est.vocabulary_size()
    )?;
    let what = if prob { "probability" } else { "score" };
    writeln!(
        out,
        "{:>4}  {:<20} {:>14} {:>10}",
        "rank", "word", what, "log10"
    )?;
    for (i, (w, p)) in next.items.iter().enumerate() {
        writeln!(
            out,
            "{:>4}  {:<20} {:>14} {:>10}",
            i + 1,
            words(est, &[*w])?,
            num(*p),
            log(p.log10())
        )?;
    }
    if prob {
        writeln!(
            out,
            "rest  {:<20} {:>14}",
            "(all other words)",
            num(next.rest)
        )?;
    } else {
        writeln!(
            out,
            "(stupid back-off scores are not probabilities; no rest is shown)"
        )?;
    }
    Ok(())
}

/// One query a line from standard input: the context words, then
/// optionally a tab and the prefix (`--prefix` for lines without a tab).
/// TSV out: a header line, then one row per word shown (`line` is the
/// query's line number, from 1; a query with no word to show has no row);
/// with `--json`, one object a line, one per query, in order.
fn batch(est: &dyn Predictor, a: &NextArgs, never: &HashSet<WordId>) -> anyhow::Result<()> {
    let prep = est.preparation();
    let mut out = BufWriter::with_capacity(1 << 16, std::io::stdout().lock());
    let what = if est.method().is_probability() {
        "probability"
    } else {
        "score"
    };
    if !a.json {
        writeln!(out, "line\tcontext\tprefix\trank\tword\t{what}\tlog10")?;
    }
    let stdin = std::io::stdin();
    let mut reader = stdin.lock();
    let mut buf = Vec::new();
    let mut number = 0;
    loop {
        buf.clear();
        let n = reader
            .read_until(b'\n', &mut buf)
            .context("reading standard input")?;
        if n == 0 {
            break;
        }
        number += 1;
        let mut l = &buf[..];
        l = l.strip_suffix(b"\n").unwrap_or(l);
        l = l.strip_suffix(b"\r").unwrap_or(l);
        let line = String::from_utf8_lossy(l);
        let (ctx_text, prefix) = match line.split_once('\t') {
            Some((c, p)) => (c, p),
            None => (&line[..], a.prefix.as_str()),
        };
        let ids = query_ids(ctx_text, &prep);
        let t = std::time::Instant::now();
        let next = est
            .suggest(&ids, prefix, a.matching, never, a.top)
            .with_context(|| format!("standard input, line {number}"))?;
        let secs = t.elapsed().as_secs_f64();
        let context = words(est, &next.context)?;
        if a.json {
            write_json(&mut out, est, Some(number), &context, prefix, &next, secs)?;
            continue;
        }
        for (i, ((_, p), w)) in next.items.iter().zip(names(est, &next)?).enumerate() {
            writeln!(
                out,
                "{number}\t{context}\t{prefix}\t{}\t{w}\t{}\t{}",
                i + 1,
                num(*p),
                log(p.log10())
            )?;
        }
    }
    out.flush()?;
    Ok(())
}
