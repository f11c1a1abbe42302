//! `quern next`: the most probable next words after a context.

use std::io::Write;

use quern::query::query_ids;
use serde_json::json;

use super::prob::{jnum, log, num, open_source, predictor, words};
use crate::cli::args::NextArgs;

pub fn run(a: NextArgs) -> anyhow::Result<()> {
    let src = open_source(&a.store)?;
    let pred = predictor(&src, a.method.as_deref(), &a.params)?;
    let est = pred.get();
    let ids = query_ids(&a.words.join(" "), est.lowercase());
    let t = std::time::Instant::now();
    let next = est.next(&ids, a.top)?;
    let secs = t.elapsed().as_secs_f64();
    let prob = est.method().is_probability();
    let mut out = std::io::stdout().lock();
    let context = words(est, &next.context)?;
    if a.json {
        let mut items = Vec::new();
        for (w, p) in &next.items {
            items.push(json!({
                "word": words(est, &[*w])?,
                if prob { "probability" } else { "score" }: jnum(*p),
                "log10": jnum(p.log10()),
            }));
        }
        let v = json!({
            "context": context,
            "method": est.method().name(),
            "top": items,
            "rest": if prob { jnum(next.rest) } else { serde_json::Value::Null },
            "words_scored": next.scored,
            "seconds": secs,
        });
        return super::print_json(&mut out, &v);
    }
    writeln!(
        out,
        "after \"{context}\" ({}, {} of {} words scored)",
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
