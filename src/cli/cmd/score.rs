//! `quern score`: the perplexity of held-out text.
//!
//! The text report leads with one sentence (the perplexity, over how many
//! predictions, how many words outside the vocabulary), then a table of
//! the totals over every prediction and over the predictions of words in
//! the vocabulary. `--per-line` writes one TSV row per sentence under a
//! header line (the report then goes to standard error), or with `--json`
//! one object a line and the report as the last line's `total`.

use std::io::{BufRead, Write};

use anyhow::Context;
use quern::query::{ScoreReport, Scorer, SentenceScore};
use serde::Serialize;
use serde_json::json;

use super::prob::{jnum, open_source, predictor};
use super::thousands;
use crate::cli::args::ScoreArgs;

/// The totals of some predictions, as JSON (`null` for −∞ and an infinite
/// perplexity).
#[derive(Serialize)]
struct Totals {
    predictions: u64,
    probability_zero: u64,
    log10_sum: serde_json::Value,
    log10_sum_nonzero: serde_json::Value,
    perplexity: serde_json::Value,
}

/// The report as JSON, in the order written.
#[derive(Serialize)]
struct ReportJson {
    method: &'static str,
    sentences: u64,
    predictions: u64,
    outside_vocabulary: u64,
    probability_zero: u64,
    log10_sum: serde_json::Value,
    log10_sum_nonzero: serde_json::Value,
    perplexity: serde_json::Value,
    in_vocabulary: Totals,
    constants: serde_json::Value,
    notes: Vec<String>,
    seconds: f64,
}

/// One sentence's row.
#[derive(Serialize)]
struct SentenceJson<'a> {
    file: &'a str,
    line: u64,
    predictions: u64,
    outside_vocabulary: u64,
    probability_zero: u64,
    log10_sum: serde_json::Value,
    perplexity: serde_json::Value,
}

const TSV_HEADER: &str =
    "file\tline\tpredictions\toutside_vocabulary\tprobability_zero\tlog10_sum\tperplexity";

fn ppl_json(x: Option<f64>, probability: bool) -> serde_json::Value {
    match x {
        Some(v) if probability => jnum(v),
        _ => serde_json::Value::Null,
    }
}

fn sum_json(zero: u64, log10: f64) -> serde_json::Value {
    if zero > 0 {
        serde_json::Value::Null
    } else {
        jnum(log10)
    }
}

pub fn run(a: ScoreArgs) -> anyhow::Result<()> {
    if a.docs.jsonl || a.docs.lines {
        return super::scoring::run(a);
    }
    let src = open_source(&a.store)?;
    let pred = predictor(&src, a.method.method, &a.params)?;
    let est = pred.get();
    let probability = est.method().is_probability();
    let mut out = std::io::BufWriter::new(std::io::stdout().lock());
    if a.per_line && !a.json {
        writeln!(out, "{TSV_HEADER}")?;
    }
    let t = std::time::Instant::now();
    let mut total = ScoreReport::default();
    for f in &a.files {
        let mut scorer = Scorer::new(est, a.per_line);
        let reader: Box<dyn BufRead> = if f.as_os_str() == "-" {
            Box::new(std::io::stdin().lock())
        } else {
            Box::new(std::io::BufReader::new(
                std::fs::File::open(f).with_context(|| format!("opening {}", f.display()))?,
            ))
        };
        let name = f.display().to_string();
        for (i, line) in reader.split(b'\n').enumerate() {
            let line = line.with_context(|| format!("reading {}", f.display()))?;
            scorer.add_line(i as u64 + 1, &line)?;
            if a.per_line {
                for s in scorer.take_sentences() {
                    per_line(&mut out, a.json, &name, &s, probability)?;
                }
            }
        }
        scorer.flush()?;
        for s in scorer.take_sentences() {
            per_line(&mut out, a.json, &name, &s, probability)?;
        }
        total.add(&scorer.finish()?);
    }
    let secs = t.elapsed().as_secs_f64();
    let r = &total;
    if a.json {
        let mut notes = est.notes().to_vec();
        if !probability {
            notes.push("stupid back-off scores are not probabilities: no perplexity".into());
        }
        let v = ReportJson {
            method: est.method().name(),
            sentences: r.sentences,
            predictions: r.predictions,
            outside_vocabulary: r.oov,
            probability_zero: r.zero,
            log10_sum: sum_json(r.zero, r.log10_nonzero),
            log10_sum_nonzero: jnum(r.log10_nonzero),
            perplexity: ppl_json(r.perplexity(), probability),
            in_vocabulary: Totals {
                predictions: r.predictions - r.oov,
                probability_zero: r.zero_in_vocab,
                log10_sum: sum_json(r.zero_in_vocab, r.log10_nonzero_in_vocab),
                log10_sum_nonzero: jnum(r.log10_nonzero_in_vocab),
                perplexity: ppl_json(r.perplexity_in_vocab(), probability),
            },
            constants: est.constants(),
            notes,
            seconds: secs,
        };
        if a.per_line {
            writeln!(out, "{}", json!({ "total": v }))?;
        } else {
            super::print_json(&mut out, &v)?;
        }
        out.flush()?;
        return Ok(());
    }
    if a.per_line {
        // The rows are TSV; the report goes beside them, to standard error.
        out.flush()?;
        report(
            &mut std::io::stderr().lock(),
            est.method().name(),
            r,
            probability,
            secs,
        )
    } else {
        report(&mut out, est.method().name(), r, probability, secs)?;
        out.flush()?;
        Ok(())
    }
}

/// The text report: one sentence, then the table.
fn report(
    out: &mut impl Write,
    method: &str,
    r: &ScoreReport,
    probability: bool,
    secs: f64,
) -> anyhow::Result<()> {
    let outside = match r.oov {
        0 => "every word in the vocabulary".to_string(),
        1 => "1 word outside the vocabulary (scored as <unk>)".to_string(),
        n => format!(
            "{} words outside the vocabulary (scored as <unk>)",
            thousands(n)
        ),
    };
    let over = format!(
        "{} predictions in {} sentences",
        thousands(r.predictions),
        thousands(r.sentences)
    );
    match (probability, r.perplexity()) {
        (false, _) => writeln!(
            out,
            "{method}: no perplexity (stupid back-off gives scores, not probabilities); {over}; {outside}"
        )?,
        (true, Some(p)) => writeln!(out, "{method}: perplexity {p:.4} over {over}; {outside}")?,
        (true, None) => writeln!(
            out,
            "{method}: perplexity infinite: {} of {over} got probability 0; {outside}",
            thousands(r.zero)
        )?,
    }
    writeln!(out)?;
    let iv = r.predictions - r.oov;
    let rows: Vec<(String, String, String)> = vec![
        (
            "predictions".into(),
            thousands(r.predictions),
            thousands(iv),
        ),
        (
            "at probability 0".into(),
            thousands(r.zero),
            thousands(r.zero_in_vocab),
        ),
        (
            if probability {
                "sum of log10 P"
            } else {
                "sum of log10 score"
            }
            .into(),
            sum_text(r.zero, r.log10_nonzero),
            sum_text(r.zero_in_vocab, r.log10_nonzero_in_vocab),
        ),
        (
            "  where P > 0".into(),
            format!("{:.2}", r.log10_nonzero),
            format!("{:.2}", r.log10_nonzero_in_vocab),
        ),
        (
            "perplexity".into(),
            ppl_text(r.perplexity(), probability),
            ppl_text(r.perplexity_in_vocab(), probability),
        ),
    ];
    writeln!(
        out,
        "{:<20} {:>16} {:>16}",
        "", "every word", "words in vocab."
    )?;
    for (label, all, inv) in rows {
        if label.starts_with("  ") && r.zero == 0 {
            continue;
        }
        writeln!(out, "{label:<20} {all:>16} {inv:>16}")?;
    }
    writeln!(out)?;
    writeln!(
        out,
        "{method}: {secs:.2} s, {} predictions a second (each sentence: its words, then </s>)",
        thousands((r.predictions as f64 / secs.max(1e-9)) as u64)
    )?;
    Ok(())
}

fn sum_text(zero: u64, log10: f64) -> String {
    if zero > 0 {
        "-infinity".into()
    } else {
        format!("{log10:.2}")
    }
}

fn ppl_text(x: Option<f64>, probability: bool) -> String {
    match x {
        _ if !probability => "-".into(),
        Some(v) => format!("{v:.4}"),
        None => "infinite".into(),
    }
}

fn per_line(
    out: &mut impl Write,
    json_out: bool,
    file: &str,
    s: &SentenceScore,
    probability: bool,
) -> anyhow::Result<()> {
    let r = &s.report;
    if json_out {
        let v = SentenceJson {
            file,
            line: s.line,
            predictions: r.predictions,
            outside_vocabulary: r.oov,
            probability_zero: r.zero,
            log10_sum: sum_json(r.zero, r.log10_nonzero),
            perplexity: ppl_json(r.perplexity(), probability),
        };
        serde_json::to_writer(&mut *out, &v)?;
        writeln!(out)?;
    } else {
        let p = match r.perplexity() {
            Some(v) if probability => format!("{v:.4}"),
            Some(_) => String::new(),
            None => "inf".into(),
        };
        let l = match r.log10_prob() {
            Some(l) => format!("{l:.4}"),
            None => "-inf".into(),
        };
        writeln!(
            out,
            "{file}\t{}\t{}\t{}\t{}\t{l}\t{p}",
            s.line, r.predictions, r.oov, r.zero
        )?;
    }
    Ok(())
}
