//! `quern tune`: fit add-k's k or interp's weights on held-out text.

use std::io::Write;

use quern::query::score::read_sentences;
use quern::query::tune::tune;
use quern::query::Method;

use quern::query::ParamsFile;

use super::prob::{open_store, params};
use crate::cli::args::TuneArgs;

/// The report as JSON, in the order written.
#[derive(serde::Serialize)]
struct TuneJson<'a> {
    method: &'static str,
    heldout_sentences: usize,
    iterations: usize,
    perplexity_before: Option<f64>,
    perplexity_after: Option<f64>,
    params: &'a quern::query::Params,
    written: String,
    seconds: f64,
}

fn ppl(x: Option<f64>) -> String {
    x.map_or("infinite".into(), |v| format!("{v:.4}"))
}

pub fn run(a: TuneArgs) -> anyhow::Result<()> {
    let store = open_store(&a.store)?;
    let method = a.method;
    let start = params(method, &a.params)?;
    let sentences = read_sentences(&a.heldout, store.meta().settings.preparation)?;
    let t = std::time::Instant::now();
    let r = tune(&store, method, &start, &sentences, a.buckets)?;
    let secs = t.elapsed().as_secs_f64();
    let text = ParamsFile::new(method, r.params.clone()).to_text();
    // A bare file name has an empty parent; write it in the current folder.
    let out_path = if a.out.is_relative() {
        std::env::current_dir()?.join(&a.out)
    } else {
        a.out.clone()
    };
    quern::fsutil::write_atomic(&out_path, text.as_bytes())?;
    let mut out = std::io::stdout().lock();
    if a.json {
        let v = TuneJson {
            method: method.name(),
            heldout_sentences: sentences.len(),
            iterations: r.iterations,
            perplexity_before: r.before,
            perplexity_after: r.after,
            params: &r.params,
            written: a.out.display().to_string(),
            seconds: secs,
        };
        return super::print_json(&mut out, &v);
    }
    writeln!(
        out,
        "tuned {method} on {} held-out sentences ({} rounds, {secs:.1} s)",
        sentences.len(),
        r.iterations
    )?;
    match method {
        Method::AddK => writeln!(out, "  k = {:.6}", r.params.k)?,
        _ => {
            if let Some(l) = &r.params.lambdas {
                for (i, x) in l.iter().enumerate() {
                    writeln!(out, "  lambda order {}: {x:.4}", i + 1)?;
                }
            }
            if let Some(b) = &r.params.bucket_lambdas {
                for (i, x) in b.iter().enumerate() {
                    let xs: Vec<String> = x.iter().map(|v| format!("{v:.3}")).collect();
                    writeln!(out, "  lambdas order {} by bucket: {}", i + 1, xs.join(" "))?;
                }
            }
        }
    }
    writeln!(
        out,
        "held-out perplexity {} -> {}",
        ppl(r.before),
        ppl(r.after)
    )?;
    writeln!(
        out,
        "written to {} (use it with --tuned {})",
        a.out.display(),
        a.out.display()
    )?;
    Ok(())
}
