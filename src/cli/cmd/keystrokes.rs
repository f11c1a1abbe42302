//! `quern keystrokes`: keystroke savings of word completion on held-out
//! text (the simulation is `quern::query::keystrokes`).

use std::io::Write;

use quern::query::keystrokes::keystrokes;

use super::prob::{open_source, predictor};
use super::thousands;
use crate::cli::args::KeystrokesArgs;

/// The report as JSON, in the order written.
#[derive(serde::Serialize)]
struct Json<'a> {
    method: &'static str,
    results: &'a [quern::query::keystrokes::TopResult],
    words: u64,
    outside_vocabulary: u64,
    keystrokes_without: u64,
    completion_queries: u64,
    seconds: f64,
}

pub fn run(a: KeystrokesArgs) -> anyhow::Result<()> {
    let src = open_source(&a.store)?;
    let pred = predictor(&src, a.method.method, &a.params)?;
    let est = pred.get();
    let t = std::time::Instant::now();
    let r = keystrokes(est, &a.heldout, &a.top)?;
    let secs = t.elapsed().as_secs_f64();
    let mut out = std::io::stdout().lock();
    if a.json {
        return super::print_json(
            &mut out,
            &Json {
                method: est.method().name(),
                results: &r.results,
                words: r.words,
                outside_vocabulary: r.outside_vocabulary,
                keystrokes_without: r.keystrokes_without,
                completion_queries: r.queries,
                seconds: secs,
            },
        );
    }
    writeln!(
        out,
        "{}: {} words typed ({} outside the vocabulary), {} keystrokes without prediction",
        est.method(),
        thousands(r.words),
        thousands(r.outside_vocabulary),
        thousands(r.keystrokes_without)
    )?;
    writeln!(
        out,
        "{:>4}  {:>12}  {:>8}  {:>17}  {:>14}",
        "top", "keystrokes", "savings", "before first char", "chars per word"
    )?;
    for x in &r.results {
        writeln!(
            out,
            "{:>4}  {:>12}  {:>7.2}%  {:>16.2}%  {:>14.3}",
            x.top,
            thousands(x.keystrokes),
            100.0 * x.savings,
            100.0 * x.before_first_char,
            x.chars_per_word
        )?;
    }
    writeln!(
        out,
        "{} completion queries in {:.2} s",
        thousands(r.queries),
        secs
    )?;
    Ok(())
}
