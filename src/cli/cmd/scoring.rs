//! `quern score --jsonl` / `--lines`: one result per document, the
//! distribution of their scores, and the kept/dropped split.

use std::io::Write;

use anyhow::{bail, Context};
use quern::query::Estimator;
use quern::scoring::{
    self, split::ScoreFile, split::Split, BoxedModel, Format, Models, Options, Summary,
};
use serde_json::json;

use super::prob::{open_source, params, predictor, Source};
use super::thousands;
use crate::cli::args::{QuerySourceArgs, ScoreArgs};

pub fn run(a: ScoreArgs) -> anyhow::Result<()> {
    let d = &a.docs;
    if a.per_line || a.json {
        bail!("--jsonl and --lines already write one JSON result a line and the summary to standard error (as JSON with --summary FILE): leave out --per-line and --json");
    }
    let cut = match (d.keep_below, d.keep_fraction) {
        (Some(x), _) => Some(scoring::split::Cut::Below(x)),
        (_, Some(f)) => {
            if !(0.0..=1.0).contains(&f) {
                bail!("--keep-fraction must be between 0 and 1, not {f}");
            }
            if a.files.iter().any(|f| f.as_os_str() == "-") {
                bail!("--keep-fraction reads the inputs twice: give files, not - (standard input)");
            }
            Some(scoring::split::Cut::Fraction(f))
        }
        _ => None,
    };
    if cut.is_some() != (d.kept.is_some() && d.dropped.is_some()) {
        bail!(
            "a cut (--keep-below or --keep-fraction) goes with both --kept FILE and --dropped FILE"
        );
    }
    let src = open_source(&a.store)?;
    // Built once here so that its notes are shown once and a bad
    // parameter fails before any thread starts.
    let (method, probability) = {
        let pred = predictor(&src, a.method.method, &a.params)?;
        (pred.get().method(), pred.get().method().is_probability())
    };
    let p = params(method, &a.params)?;
    let general = match (&d.minus_store, &d.minus_model) {
        (Some(dir), _) => Some(open_source(&QuerySourceArgs {
            store: Some(dir.clone()),
            model: None,
            blend: None,
            load_model: false,
            memory: a.store.memory,
        })?),
        (_, Some(m)) => Some(open_source(&QuerySourceArgs {
            store: None,
            model: Some(m.clone()),
            blend: None,
            load_model: a.store.load_model,
            memory: a.store.memory,
        })?),
        _ => None,
    };
    // A blend's parts keep their own methods; a general store beside a
    // blend is read with mkn.
    let general_method = match method {
        quern::query::Method::Blend => None,
        m => Some(m),
    };
    if let Some(g) = &general {
        predictor(g, general_method, &a.params)
            .context("the general model (--minus-store or --minus-model)")?;
    }
    let gm = general_method.unwrap_or(quern::query::Method::Mkn);
    let gp = params(gm, &a.params)?;
    let make_main = || make(&src, method, &p);
    let make_general = || make(general.as_ref().expect("a general model"), gm, &gp);
    let models = Models {
        main: &make_main,
        general: general
            .as_ref()
            .map(|_| &make_general as &scoring::MakeModel<'_>),
    };
    run_docs(&a, &models, probability, method.name(), cut)
}

/// One worker's model: its own estimator over the shared store, or the
/// shared frozen model.
fn make<'a>(
    src: &'a Source,
    method: quern::query::Method,
    p: &quern::query::Params,
) -> quern::Result<BoxedModel<'a>> {
    Ok(match src {
        Source::Store(store) => Box::new(Estimator::new(store, method, p.clone())?),
        Source::Model(m) => Box::new(m),
        Source::Blend(b) => Box::new(b.blend()?),
    })
}

fn run_docs(
    a: &ScoreArgs,
    models: &Models<'_>,
    probability: bool,
    method: &str,
    cut: Option<scoring::split::Cut>,
) -> anyhow::Result<()> {
    let d = &a.docs;
    let format = if d.lines {
        Format::Lines
    } else {
        Format::JsonLines {
            text_field: d.text_field.clone(),
            id_field: d.id_field.clone(),
        }
    };
    let mut opts = Options::new(format);
    if let Some(t) = d.threads {
        opts.threads = t.max(1);
    }
    opts.words = d.words;
    opts.max_line_bytes = d.max_line_bytes;
    let names: Vec<String> = a.files.iter().map(|f| f.display().to_string()).collect();
    let several = a.files.len() > 1;
    let mut out = std::io::BufWriter::with_capacity(1 << 20, std::io::stdout().lock());
    let mut split = match (&d.kept, &d.dropped) {
        (Some(k), Some(x)) if cut.is_some() => Some(Split::create(k, x)?),
        _ => None,
    };
    let mut side = match cut {
        Some(scoring::split::Cut::Fraction(_)) => {
            let k = d.kept.as_ref().expect("checked");
            Some(ScoreFile::create(&k.with_extension("scores.tmp"))?)
        }
        _ => None,
    };
    let t = std::time::Instant::now();
    let summary = scoring::score_inputs(&a.files, &opts, models, |r, raw| {
        let file = several.then(|| names[r.file].as_str());
        let v = r.record(probability, file);
        serde_json::to_writer(&mut out, &v)
            .map_err(std::io::Error::from)
            .and_then(|_| out.write_all(b"\n"))
            .map_err(|e| quern::Error::io(std::path::Path::new("standard output"), "write", e))?;
        match (cut, &mut split) {
            (Some(scoring::split::Cut::Below(x)), Some(s)) => {
                if let Some(raw) = raw {
                    s.write(r.value().is_some_and(|v| v < x), raw)?;
                }
            }
            (Some(scoring::split::Cut::Fraction(_)), _) => {
                side.as_mut().expect("made").push(r.value())?;
            }
            _ => {}
        }
        Ok(())
    })?;
    out.flush()?;
    let scoring_secs = t.elapsed().as_secs_f64();
    let mut threshold = None;
    let mut counts = None;
    if let Some(mut s) = split {
        match cut {
            Some(scoring::split::Cut::Below(x)) => threshold = Some(x),
            Some(scoring::split::Cut::Fraction(f)) => {
                let side = side.take().expect("made");
                threshold = Some(side.split(
                    &a.files,
                    opts.max_line_bytes,
                    &summary.distribution,
                    f,
                    &mut s,
                )?);
            }
            None => {}
        }
        counts = Some(s.finish()?);
    }
    if let Some(p) = &d.plot {
        scoring::plot::histogram(p, &summary.distribution, threshold)?;
    }
    let secs = t.elapsed().as_secs_f64();
    let mut v = summary.to_json(probability);
    v["method"] = json!(method);
    v["threads"] = json!(opts.threads);
    v["seconds"] = json!(secs);
    v["scoring_seconds"] = json!(scoring_secs);
    v["predictions_per_second"] = json!(summary.main.predictions as f64 / scoring_secs.max(1e-9));
    v["documents_per_second"] = json!(summary.documents as f64 / scoring_secs.max(1e-9));
    if let (Some(c), Some(t)) = (counts, threshold) {
        v["cut"] = json!({
            "below": scoring::num(Some(t)),
            "fraction": d.keep_fraction,
            "kept": c[0],
            "dropped": c[1],
            "kept_file": d.kept,
            "dropped_file": d.dropped,
        });
    }
    if let Some(f) = &d.summary {
        let mut w =
            std::fs::File::create(f).with_context(|| format!("creating {}", f.display()))?;
        serde_json::to_writer(&mut w, &v)?;
        writeln!(w)?;
    }
    report(&summary, &v, probability)?;
    Ok(())
}

/// The plain summary on standard error, in the manner of the `score`
/// report: one sentence, a table, the time.
fn report(s: &Summary, v: &serde_json::Value, probability: bool) -> anyhow::Result<()> {
    let mut e = std::io::stderr().lock();
    let method = v["method"].as_str().unwrap_or("");
    let what = if s.general.is_some() {
        "cross-entropy difference"
    } else {
        "perplexity"
    };
    let dist = &s.distribution;
    let plural = |n: u64, one: &str, many: &str| {
        format!("{} {}", thousands(n), if n == 1 { one } else { many })
    };
    let lead = match dist.mean() {
        Some(_) if probability => format!(
            "median {what} {:.4} over {}",
            dist.percentiles(&[50.0])[0],
            plural(s.documents, "document", "documents")
        ),
        _ => format!("{} scored", plural(s.documents, "document", "documents")),
    };
    writeln!(
        e,
        "{method}: {lead} ({} predictions, {} outside the vocabulary); {}, {} without a token",
        thousands(s.main.predictions),
        plural(s.main.oov, "word", "words"),
        plural(s.bad, "bad line", "bad lines"),
        thousands(s.empty),
    )?;
    if probability && dist.count > 0 {
        writeln!(e)?;
        let how = if dist.is_exact() {
            "exact"
        } else {
            "from a histogram, within 0.0115 %"
        };
        writeln!(e, "{what} by document ({how})")?;
        writeln!(e, "  scored        {:>14}", thousands(dist.count))?;
        if s.infinite > 0 {
            writeln!(
                e,
                "  infinite      {:>14}   (a prediction got probability 0; not counted below)",
                thousands(s.infinite)
            )?;
        }
        writeln!(
            e,
            "  mean          {:>14.4}",
            dist.mean().unwrap_or(f64::NAN)
        )?;
        let ps = dist.percentiles(&scoring::dist::PERCENTILES);
        for (p, x) in scoring::dist::PERCENTILES.iter().zip(&ps) {
            writeln!(e, "  {:<13} {x:>14.4}", format!("{p} %"))?;
        }
    }
    if let Some(c) = v.get("cut") {
        writeln!(
            e,
            "\ncut: {what} below {}: {} kept, {} dropped",
            c["below"],
            plural(c["kept"].as_u64().unwrap_or(0), "line", "lines"),
            thousands(c["dropped"].as_u64().unwrap_or(0))
        )?;
    }
    writeln!(
        e,
        "\n{method}: {:.2} s on {}, {} predictions and {} documents a second",
        v["scoring_seconds"].as_f64().unwrap_or(0.0),
        plural(v["threads"].as_u64().unwrap_or(1), "thread", "threads"),
        thousands(v["predictions_per_second"].as_f64().unwrap_or(0.0) as u64),
        thousands(v["documents_per_second"].as_f64().unwrap_or(0.0) as u64)
    )?;
    Ok(())
}
