//! `quern score`: the scoring report of held-out text.

use std::io::{BufRead, Write};

use anyhow::Context;
use quern::query::{ScoreReport, Scorer, SentenceScore};
use serde_json::json;

use super::prob::{estimator, jnum, open_store};
use super::thousands;
use crate::cli::args::ScoreArgs;

/// The report as JSON (`null` for an infinite perplexity or a total log10
/// probability of −∞).
pub fn report_json(r: &ScoreReport, probability: bool) -> serde_json::Value {
    let pp = |x: Option<f64>| match x {
        Some(v) if probability => jnum(v),
        _ => serde_json::Value::Null,
    };
    json!({
        "sentences": r.sentences,
        "predictions": r.predictions,
        "oov": r.oov,
        "zero_probability": r.zero,
        "log10_prob": r.log10_prob().map_or(serde_json::Value::Null, jnum),
        "log10_prob_nonzero": jnum(r.log10_nonzero),
        "perplexity": pp(r.perplexity()),
        "perplexity_in_vocabulary": pp(r.perplexity_in_vocab()),
    })
}

fn ppl(x: Option<f64>, zero: u64) -> String {
    match x {
        Some(v) => format!("{v:.4}"),
        None => format!("infinite ({zero} predictions got probability 0)"),
    }
}

fn sentence_json(s: &SentenceScore, probability: bool) -> serde_json::Value {
    let mut v = report_json(&s.report, probability);
    v["line"] = json!(s.line);
    v
}

pub fn run(a: ScoreArgs) -> anyhow::Result<()> {
    if a.docs.jsonl || a.docs.lines {
        return super::docs::run(a);
    }
    let store = open_store(&a.store)?;
    let est = estimator(&store, &a.method, &a.params)?;
    let probability = est.method().is_probability();
    let mut out = std::io::BufWriter::new(std::io::stdout().lock());
    let t = std::time::Instant::now();
    let mut total = ScoreReport::default();
    for f in &a.files {
        let mut scorer = Scorer::new(&est, a.per_line);
        let reader: Box<dyn BufRead> = if f.as_os_str() == "-" {
            Box::new(std::io::stdin().lock())
        } else {
            Box::new(std::io::BufReader::new(
                std::fs::File::open(f).with_context(|| format!("opening {}", f.display()))?,
            ))
        };
        for (i, line) in reader.split(b'\n').enumerate() {
            let line = line.with_context(|| format!("reading {}", f.display()))?;
            scorer.add_line(i as u64 + 1, &line)?;
            if a.per_line {
                for s in scorer.take_sentences() {
                    per_line(&mut out, a.json, f, &s, probability)?;
                }
            }
        }
        scorer.flush()?;
        for s in scorer.take_sentences() {
            per_line(&mut out, a.json, f, &s, probability)?;
        }
        total.add(&scorer.finish()?);
    }
    let secs = t.elapsed().as_secs_f64();
    if a.json {
        let mut v = report_json(&total, probability);
        v["method"] = json!(est.method().name());
        v["constants"] = est.constants();
        v["notes"] = json!(est.notes());
        v["seconds"] = json!(secs);
        if !probability {
            v["note"] = json!("stupid back-off scores are not probabilities: no perplexity");
        }
        if a.per_line {
            writeln!(out, "{}", json!({"total": v}))?;
        } else {
            super::print_json(&mut out, &v)?;
        }
        return Ok(());
    }
    let r = &total;
    writeln!(out, "method       {}", est.method())?;
    writeln!(out, "sentences    {:>12}", thousands(r.sentences))?;
    writeln!(
        out,
        "predictions  {:>12}   (words and one </s> per sentence)",
        thousands(r.predictions)
    )?;
    writeln!(
        out,
        "OOV          {:>12}   (scored as <unk>)",
        thousands(r.oov)
    )?;
    writeln!(out, "zero prob.   {:>12}", thousands(r.zero))?;
    match r.log10_prob() {
        Some(l) => writeln!(out, "log10 prob.  {l:>12.2}")?,
        None => writeln!(
            out,
            "log10 prob.  -infinity   ({:.2} over the predictions with P > 0)",
            r.log10_nonzero
        )?,
    }
    if probability {
        writeln!(out, "perplexity   {}", ppl(r.perplexity(), r.zero))?;
        writeln!(
            out,
            "  without OOV {}",
            ppl(r.perplexity_in_vocab(), r.zero_in_vocab)
        )?;
    } else {
        writeln!(
            out,
            "perplexity   not reported: stupid back-off scores are not probabilities"
        )?;
    }
    writeln!(
        out,
        "time         {secs:.2} s ({:.0} predictions/s)",
        r.predictions as f64 / secs.max(1e-9)
    )?;
    Ok(())
}

fn per_line(
    out: &mut impl Write,
    json_out: bool,
    f: &std::path::Path,
    s: &SentenceScore,
    probability: bool,
) -> anyhow::Result<()> {
    if json_out {
        let mut v = sentence_json(s, probability);
        v["file"] = json!(f.display().to_string());
        writeln!(out, "{v}")?;
    } else {
        let r = &s.report;
        let p = match r.perplexity() {
            Some(v) if probability => format!("{v:.4}"),
            Some(_) => "-".into(),
            None => "inf".into(),
        };
        let l = match r.log10_prob() {
            Some(l) => format!("{l:.4}"),
            None => "-inf".into(),
        };
        writeln!(
            out,
            "{}:{}\tpredictions {}\toov {}\tzero {}\tlog10 {l}\tperplexity {p}",
            f.display(),
            s.line,
            r.predictions,
            r.oov,
            r.zero
        )?;
    }
    Ok(())
}
