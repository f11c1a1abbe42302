//! `quern freeze`: a method over a store written as a read-only back-off
//! model file and/or ARPA text; and `quern check-model`, which checks a
//! model file.

use std::io::Write;
use std::path::{Path, PathBuf};

use anyhow::Context;
use quern::model::{arpa, freeze, FreezeOptions, Model};
use quern::query::score::read_sentences;
use quern::query::{prediction, Method};
use quern::store::Store;
use quern::words::WordId;
use serde_json::json;

use super::prob::{estimator, jnum};
use super::{bytes, thousands};
use crate::cli::args::FreezeArgs;

/// Perplexity of padded sentences from a batch scorer: `None` if a
/// prediction got 0.
pub fn perplexity(
    sentences: &[Vec<WordId>],
    n: usize,
    mut batch: impl FnMut(&[&[WordId]]) -> quern::Result<Vec<quern::query::Prob>>,
) -> anyhow::Result<Option<f64>> {
    let mut sum = 0.0;
    let mut count = 0u64;
    let mut zero = false;
    for chunk in sentences.chunks(512) {
        let mut qs: Vec<&[WordId]> = Vec::new();
        for s in chunk {
            for i in 1..s.len() {
                qs.push(prediction(s, i, n));
            }
        }
        for p in batch(&qs)? {
            count += 1;
            if p.p > 0.0 {
                sum += p.log10;
            } else {
                zero = true;
            }
        }
    }
    Ok((!zero).then(|| 10f64.powf(-sum / count.max(1) as f64)))
}

/// `quern check-model`: every checksum and invariant of a model file.
pub fn check_model(path: &Path, json_out: bool) -> anyhow::Result<()> {
    let t = std::time::Instant::now();
    let m = Model::open(path)?;
    m.verify()?;
    let secs = t.elapsed().as_secs_f64();
    let mut out = std::io::stdout().lock();
    if json_out {
        let v = json!({
            "model": path.display().to_string(),
            "ok": true,
            "method": m.meta().method.name(),
            "order": m.order(),
            "ngrams": m.meta().ngrams,
            "bytes": m.file_bytes(),
            "seconds": secs,
        });
        return super::print_json(&mut out, &v);
    }
    writeln!(
        out,
        "{}: verified ({} method {}, order {}, {} n-grams, every checksum and invariant holds; {secs:.2} s)",
        path.display(),
        bytes(m.file_bytes()),
        m.meta().method,
        m.order(),
        thousands(m.meta().ngrams.iter().sum())
    )?;
    Ok(())
}

/// The reductions of a model made without counts (from ARPA text or a
/// blend): pruning and quantization, no count thresholds, one thread.
pub fn reduce_options(a: &FreezeArgs) -> anyhow::Result<FreezeOptions> {
    Ok(FreezeOptions {
        min_counts: Vec::new(),
        relative_entropy: a.relative_entropy,
        max_ngrams: a.max_ngrams,
        bits: a.bits,
        weight_bits: a.weight_bits,
        threads: 1,
        max_bytes: a.max_bytes.map(|b| b.bytes()),
        never_suggest: never_suggest(a)?,
    })
}

/// The model file to write, and whether it is temporary (only `--arpa`
/// given: the model is written beside it and removed afterwards).
pub fn model_path(a: &FreezeArgs) -> (PathBuf, bool) {
    match (&a.out, &a.arpa) {
        (Some(o), _) => (o.clone(), false),
        (None, Some(arpa)) => {
            let mut p = arpa.as_os_str().to_owned();
            p.push(".model.tmp");
            (PathBuf::from(p), true)
        }
        (None, None) => unreachable!("clap requires --out or --arpa"),
    }
}

/// `--from-arpa`: ARPA text read, checked and written as a model file
/// (and ARPA again, reduced, with `--arpa`).
fn from_arpa(a: &FreezeArgs, src: &Path) -> anyhow::Result<()> {
    let opts = reduce_options(a)?;
    let (out, temporary) = model_path(a);
    let t = std::time::Instant::now();
    let text = quern::arpa::read_arpa_file(src)?;
    let read_secs = t.elapsed().as_secs_f64();
    let report = quern::model::freeze_arpa(&text, src, &out, &opts, a.lowercase)
        .with_context(|| format!("writing {}", out.display()))?;
    drop(text);
    for n in &report.notes[1..] {
        eprintln!("quern: note: {n}");
    }
    let model = Model::open(&out)?;
    let arpa_bytes = match &a.arpa {
        Some(p) => Some(arpa::write_arpa_file(&model, p)?),
        None => None,
    };
    let heldout = if a.heldout.is_empty() {
        None
    } else {
        let s = read_sentences(&a.heldout, model.meta().preparation)?;
        let pp = perplexity(&s, model.order(), |q| model.prob_batch(q))?;
        Some((pp, s.len()))
    };
    let secs = t.elapsed().as_secs_f64();
    drop(model);
    if temporary {
        std::fs::remove_file(&out).with_context(|| format!("removing {}", out.display()))?;
    }
    let kept: u64 = report.ngrams.iter().sum();
    let mut o = std::io::stdout().lock();
    if a.json {
        let v = json!({
            "arpa_in": src.display().to_string(),
            "method": "arpa",
            "order": report.ngrams.len(),
            "model": a.out.as_ref().map(|p| p.display().to_string()),
            "model_bytes": (!temporary).then_some(report.file_bytes),
            "value_bits": report.value_bits,
            "weight_bits": report.weight_bits,
            "relative_entropy": report.threshold,
            "ngrams_before_pruning": report.ngrams_unpruned,
            "ngrams_kept": report.ngrams,
            "arpa": a.arpa.as_ref().map(|p| p.display().to_string()),
            "arpa_bytes": arpa_bytes,
            "notes": report.notes,
            "heldout": heldout.map(|(p, s)| json!({
                "sentences": s,
                "perplexity_model": p.map_or(serde_json::Value::Null, jnum),
            })),
            "seconds_read": read_secs,
            "seconds": secs,
        });
        return super::print_json(&mut o, &v);
    }
    writeln!(
        o,
        "read {} (ARPA, order {}, {} n-grams, every line checked) into {}",
        src.display(),
        report.ngrams.len(),
        thousands(report.ngrams_unpruned.iter().sum()),
        match (&a.out, &a.arpa) {
            (Some(m), Some(r)) => format!("{} and {}", m.display(), r.display()),
            (Some(m), None) => m.display().to_string(),
            (None, Some(r)) => r.display().to_string(),
            (None, None) => unreachable!(),
        }
    )?;
    writeln!(o, "  order   n-grams in the file     kept")?;
    for (k, (s, kk)) in report
        .ngrams_unpruned
        .iter()
        .zip(&report.ngrams)
        .enumerate()
    {
        writeln!(
            o,
            "  {:>5} {:>21} {:>8}",
            k + 1,
            thousands(*s),
            thousands(*kk)
        )?;
    }
    if let Some(t) = report.threshold {
        writeln!(o, "  relative-entropy pruning at {t:.3e} nats")?;
    }
    if !temporary {
        writeln!(
            o,
            "  model {} ({:.2} bytes per n-gram)",
            bytes(report.file_bytes),
            report.file_bytes as f64 / kept.max(1) as f64
        )?;
    }
    if let Some(b) = arpa_bytes {
        writeln!(o, "  ARPA {}", bytes(b))?;
    }
    if let Some((p, s)) = heldout {
        let f = p.map_or("infinite".to_string(), |v| format!("{v:.4}"));
        writeln!(o, "  held-out perplexity ({s} sentences): {f}")?;
    }
    writeln!(o, "  time {secs:.2} s (reading {read_secs:.2} s)")?;
    Ok(())
}

/// The words of `--never-suggest`, if given.
fn never_suggest(a: &FreezeArgs) -> anyhow::Result<Vec<String>> {
    match &a.never_suggest {
        Some(p) => super::next::word_list(p),
        None => Ok(Vec::new()),
    }
}

pub fn run(a: FreezeArgs) -> anyhow::Result<()> {
    if let Some(p) = a.from_arpa.clone() {
        return from_arpa(&a, &p);
    }
    let store_dir = a.store.clone().expect("clap requires --store");
    let method = a.method.unwrap_or(Method::Mkn);
    let store = Store::open_with_cache(&store_dir, a.memory.block_cache())?;
    let est = estimator(&store, method, &a.params)?;
    est.backoff_kind()?;
    let opts = FreezeOptions {
        min_counts: a.min_counts.clone().unwrap_or_default(),
        relative_entropy: a.relative_entropy,
        max_ngrams: a.max_ngrams,
        bits: a.bits,
        weight_bits: a.weight_bits,
        threads: a.threads.unwrap_or(0),
        max_bytes: a.max_bytes.map(|b| b.bytes()),
        never_suggest: never_suggest(&a)?,
    };
    if opts.min_counts.len() > store.order() {
        anyhow::bail!(
            "--min-counts gives {} thresholds for a store of order {}",
            opts.min_counts.len(),
            store.order()
        );
    }
    let (out, temporary) = model_path(&a);
    let t = std::time::Instant::now();
    let report =
        freeze(&est, &out, &opts).with_context(|| format!("freezing into {}", out.display()))?;
    let freeze_secs = t.elapsed().as_secs_f64();
    for n in &report.notes[est.notes().len()..] {
        eprintln!("quern: note: {n}");
    }
    let model = Model::open(&out)?;
    let mut arpa_bytes = None;
    if let Some(p) = &a.arpa {
        arpa_bytes = Some(arpa::write_arpa_file(&model, p)?);
    }
    let heldout = if a.heldout.is_empty() || !est.method().is_probability() {
        None
    } else {
        let s = read_sentences(&a.heldout, store.meta().settings.preparation)?;
        let n = store.order();
        let before = perplexity(&s, n, |q| est.prob_batch(q))?;
        let after = perplexity(&s, n, |q| model.prob_batch(q))?;
        Some((before, after, s.len()))
    };
    let total_secs = t.elapsed().as_secs_f64();
    let kept: u64 = report.ngrams.iter().sum();
    let file_bytes = if temporary {
        None
    } else {
        Some(report.file_bytes)
    };
    drop(model);
    if temporary {
        std::fs::remove_file(&out).with_context(|| format!("removing {}", out.display()))?;
    }
    let mut o = std::io::stdout().lock();
    if a.json {
        let v = json!({
            "store": store_dir.display().to_string(),
            "method": est.method().name(),
            "probabilities": est.method().is_probability(),
            "order": store.order(),
            "model": a.out.as_ref().map(|p| p.display().to_string()),
            "model_bytes": file_bytes,
            "bytes_per_ngram": file_bytes.map(|b| b as f64 / kept.max(1) as f64),
            "value_bits": report.value_bits,
            "weight_bits": report.weight_bits,
            "weight_error": report.weight_error,
            "relative_entropy": report.threshold,
            "ngrams_before_pruning": report.ngrams_unpruned,
            "arpa": a.arpa.as_ref().map(|p| p.display().to_string()),
            "arpa_bytes": arpa_bytes,
            "ngrams_kept": report.ngrams,
            "ngrams_store": report.store_ngrams,
            "min_counts": opts.min_counts,
            "notes": report.notes,
            "preparation": store.meta().settings.preparation.to_json(),
            "heldout": heldout.map(|(b, a, s)| json!({
                "sentences": s,
                "perplexity_store": b.map_or(serde_json::Value::Null, jnum),
                "perplexity_model": a.map_or(serde_json::Value::Null, jnum),
            })),
            "seconds_freeze": freeze_secs,
            "seconds": total_secs,
        });
        return super::print_json(&mut o, &v);
    }
    let target = match (&a.out, &a.arpa) {
        (Some(m), Some(r)) => format!("{} and {}", m.display(), r.display()),
        (Some(m), None) => m.display().to_string(),
        (None, Some(r)) => r.display().to_string(),
        (None, None) => unreachable!(),
    };
    writeln!(
        o,
        "froze {} ({}, order {}) into {target}",
        store_dir.display(),
        est.method(),
        store.order()
    )?;
    let prep = store.meta().settings.preparation;
    if prep != quern::tokenize::Preparation::lowercasing(prep.lowercase) {
        writeln!(o, "  text prepared: {}", prep.describe())?;
    }
    if !est.method().is_probability() {
        writeln!(
            o,
            "  the values are stupid back-off scores, not probabilities (so marked in the file)"
        )?;
    }
    if let Some(t) = report.threshold {
        writeln!(
            o,
            "  relative-entropy pruning at {t:.3e} nats: {} of {} n-grams kept",
            thousands(kept),
            thousands(report.ngrams_unpruned.iter().sum())
        )?;
    }
    writeln!(o, "  order   store n-grams     kept  min count")?;
    for (k, (s, kk)) in report.store_ngrams.iter().zip(&report.ngrams).enumerate() {
        writeln!(
            o,
            "  {:>5} {:>15} {:>8} {:>10}",
            k + 1,
            thousands(*s),
            thousands(*kk),
            opts.min_counts.get(k).copied().unwrap_or(1).max(1)
        )?;
    }
    if let Some(b) = file_bytes {
        let values = match (report.value_bits, report.weight_bits) {
            (32, 32) => "32-bit values".to_string(),
            (q, 32) => format!("probabilities in {q}-bit codes, back-off weights 32-bit"),
            (32, w) => format!("probabilities 32-bit, back-off weights in {w}-bit codes"),
            (q, w) => format!("probabilities in {q}-bit and back-off weights in {w}-bit codes"),
        };
        writeln!(
            o,
            "  model {} ({:.2} bytes per n-gram, {values})",
            bytes(b),
            b as f64 / kept.max(1) as f64
        )?;
    }
    if let Some(b) = arpa_bytes {
        writeln!(o, "  ARPA {}", bytes(b))?;
    }
    if let Some((b, a, s)) = heldout {
        let f = |x: Option<f64>| x.map_or("infinite".to_string(), |v| format!("{v:.4}"));
        writeln!(
            o,
            "  held-out perplexity ({s} sentences): store {}, model {}",
            f(b),
            f(a)
        )?;
    }
    writeln!(o, "  time {total_secs:.2} s (freezing {freeze_secs:.2} s)")?;
    Ok(())
}
