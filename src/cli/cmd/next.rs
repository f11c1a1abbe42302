//! `quern next`: the most probable next words after a context.

use std::io::Write;

use quern::query::query_ids;

use super::prob::{jnum, log, num, open_source, predictor, words, ProbJson};
use crate::cli::args::NextArgs;

/// One word of the answer.
#[derive(serde::Serialize)]
struct Item<'a> {
    word: &'a str,
    #[serde(skip_serializing_if = "Option::is_none")]
    probability: Option<serde_json::Value>,
    #[serde(skip_serializing_if = "Option::is_none")]
    score: Option<serde_json::Value>,
    log10: serde_json::Value,
}

/// The answer as JSON, in the order written.
#[derive(serde::Serialize)]
struct NextJson<'a> {
    context: &'a str,
    method: &'static str,
    top: Vec<Item<'a>>,
    rest: serde_json::Value,
    words_scored: usize,
    seconds: f64,
}

pub fn run(a: NextArgs) -> anyhow::Result<()> {
    let src = open_source(&a.store)?;
    let pred = predictor(&src, a.method.method.as_deref(), &a.params)?;
    let est = pred.get();
    let ids = query_ids(&a.words.join(" "), est.lowercase());
    let t = std::time::Instant::now();
    let next = est.next(&ids, a.top)?;
    let secs = t.elapsed().as_secs_f64();
    let prob = est.method().is_probability();
    let mut out = std::io::stdout().lock();
    let context = words(est, &next.context)?;
    if a.json {
        let names: Vec<String> = next
            .items
            .iter()
            .map(|(w, _)| words(est, &[*w]))
            .collect::<anyhow::Result<_>>()?;
        let top = next
            .items
            .iter()
            .zip(&names)
            .map(|((_, p), w)| {
                let j = ProbJson::new(w, est.method(), *p, None, None);
                Item {
                    word: w,
                    probability: j.probability,
                    score: j.score,
                    log10: j.log10,
                }
            })
            .collect();
        let v = NextJson {
            context: &context,
            method: est.method().name(),
            top,
            rest: if prob {
                jnum(next.rest)
            } else {
                serde_json::Value::Null
            },
            words_scored: next.scored,
            seconds: secs,
        };
        return super::print_json(&mut out, &v);
    }
    let heading = if context.is_empty() {
        "with no context: the unigram level".to_string()
    } else {
        format!("after \"{context}\"")
    };
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
