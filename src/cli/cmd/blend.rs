//! `quern blend`: several stores and models mixed into one blend file,
//! with weights given or fitted by EM on held-out text.

use std::io::Write;

use anyhow::bail;
use quern::blend::fit::{self, Fit, Stop};
use quern::blend::open::{check_preparations, record, Part};
use quern::blend::{file::Fitted, mixture::check_weights};
use quern::model::Residence;
use quern::query::{score::read_sentences, Method, Params, Predictor};
use serde_json::json;

use super::prob::params;
use super::thousands;
use crate::cli::args::BlendArgs;

pub fn run(a: BlendArgs) -> anyhow::Result<()> {
    let n = a.parts.len();
    if n < 2 {
        bail!("a blend mixes two parts or more: give --part twice or more");
    }
    let methods: Vec<Option<Method>> = match a.methods.len() {
        0 => vec![None; n],
        1 => vec![Some(a.methods[0]); n],
        m if m == n => a.methods.iter().map(|&m| Some(m)).collect(),
        m => bail!(
            "{m} methods for {n} parts: give --method once for all store parts, or once a part"
        ),
    };
    let per_part = a.methods.len() == n && n > 1;
    let stores = a.parts.iter().filter(|p| p.is_dir()).count().max(1);
    let cache = a.memory.block_cache() / stores;
    let mut parts: Vec<Part> = Vec::with_capacity(n);
    for (path, method) in a.parts.iter().zip(&methods) {
        let part = if path.is_dir() {
            let m = method.unwrap_or(Method::Mkn);
            Part::open(
                path,
                Some(m),
                params(m, &a.params)?,
                cache,
                Residence::Mapped,
            )?
        } else {
            // One --method for all applies to the stores; a model keeps
            // its own unless this part's method was named.
            let m = if per_part { *method } else { None };
            Part::open(path, m, Params::default(), cache, Residence::Mapped)?
        };
        if !part.method.is_probability() {
            bail!(
                "{}: {} gives scores, not probabilities: it cannot be part of a blend",
                path.display(),
                part.method
            );
        }
        parts.push(part);
    }
    check_preparations(&parts)?;
    let (weights, fitted) = match (&a.weights, a.heldout.is_empty()) {
        (Some(w), _) => {
            check_weights(w, n)?;
            (w.clone(), None)
        }
        (None, false) => {
            let prep = parts[0].preparation();
            let sentences = read_sentences(&a.heldout, prep)?;
            let preds = parts
                .iter()
                .map(|p| p.predictor())
                .collect::<quern::Result<Vec<_>>>()?;
            let refs: Vec<&dyn Predictor> = preds.iter().map(|p| p.as_ref()).collect();
            let probs = fit::part_probabilities(&refs, &sentences)?;
            let f = fit::fit_weights(&probs)?;
            (f.weights.clone(), Some((f, sentences.len())))
        }
        (None, true) => bail!("give --heldout FILE or --weights W1,W2,..."),
    };
    let file = record(
        &parts,
        &weights,
        fitted.as_ref().map(|(f, _)| Fitted {
            heldout: a.heldout.clone(),
            predictions: f.predictions,
            perplexity: f.perplexity(),
            iterations: f.iterations.len() - 1,
        }),
    );
    file.save(&a.out)?;
    let mut out = std::io::stdout().lock();
    if a.json {
        let v = json!({
            "out": a.out,
            "parts": parts.iter().zip(&a.parts).enumerate().map(|(i, (p, given))| json!({
                "path": given,
                "kind": p.kind(),
                "method": p.method.name(),
                "weight": weights[i],
                "perplexity_alone": fitted.as_ref().map(|(f, _)| f.alone[i]),
            })).collect::<Vec<_>>(),
            "weights": weights,
            "fit": fitted.as_ref().map(|(f, sentences)| json!({
                "sentences": sentences,
                "predictions": f.predictions,
                "left_out": f.left_out,
                "iterations": f.iterations,
                "stop": f.stop,
                "max_iterations": fit::MAX_ITERATIONS,
                "relative_tolerance": fit::RELATIVE_TOLERANCE,
                "perplexity": f.perplexity(),
            })),
        });
        super::print_json(&mut out, &v)?;
        return Ok(());
    }
    if let Some((f, sentences)) = &fitted {
        report_fit(&mut out, &a, &parts, f, *sentences)?;
    } else {
        for (i, (p, given)) in parts.iter().zip(&a.parts).enumerate() {
            writeln!(
                out,
                "part {}: {} {} ({}), weight {:.6}",
                i + 1,
                p.kind_name(),
                given.display(),
                p.method,
                weights[i]
            )?;
        }
    }
    writeln!(out, "wrote {} ({} parts)", a.out.display(), n)?;
    Ok(())
}

/// The EM report: each part alone, each iteration, the stop, the weights.
fn report_fit(
    out: &mut impl Write,
    a: &BlendArgs,
    parts: &[Part],
    f: &Fit,
    sentences: usize,
) -> anyhow::Result<()> {
    let ppl = |x: Option<f64>| x.map_or("infinite".to_string(), |p| format!("{p:.4}"));
    writeln!(
        out,
        "held-out text: {} sentences, {} predictions{}",
        thousands(sentences as u64),
        thousands(f.predictions),
        if f.left_out > 0 {
            format!(
                " ({} left out: every part gives them probability 0)",
                thousands(f.left_out)
            )
        } else {
            String::new()
        }
    )?;
    writeln!(out)?;
    writeln!(out, "part  perplexity alone  method       path")?;
    for (i, (p, given)) in parts.iter().zip(&a.parts).enumerate() {
        writeln!(
            out,
            "{:>4}  {:>16}  {:<11}  {}",
            i + 1,
            ppl(f.alone[i]),
            p.method.name(),
            given.display()
        )?;
    }
    writeln!(out)?;
    writeln!(out, "iteration  perplexity  weights")?;
    for it in &f.iterations {
        let w: Vec<String> = it.weights.iter().map(|w| format!("{w:.6}")).collect();
        writeln!(
            out,
            "{:>9}  {:>10.4}  {}",
            it.iteration,
            it.perplexity,
            w.join(" ")
        )?;
    }
    writeln!(out)?;
    let runs = f.iterations.len() - 1;
    match f.stop {
        Stop::Converged => writeln!(
            out,
            "EM stopped after {runs} iterations: the perplexity fell by less than {:e} of itself",
            fit::RELATIVE_TOLERANCE
        )?,
        Stop::IterationLimit => writeln!(
            out,
            "EM stopped at its limit of {} iterations (the perplexity still fell)",
            fit::MAX_ITERATIONS
        )?,
    }
    let w: Vec<String> = f.weights.iter().map(|w| format!("{w:.6}")).collect();
    writeln!(
        out,
        "weights: {} (held-out perplexity {:.4})",
        w.join(" "),
        f.perplexity()
    )?;
    Ok(())
}
