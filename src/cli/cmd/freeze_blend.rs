//! `quern freeze --blend`: a blend file's mixture written as one back-off
//! model file (and ARPA text).

use std::io::Write;

use anyhow::Context;
use quern::blend::freeze::backoff;
use quern::blend::Opened;
use quern::model::{arpa, write_backoff, Model, Origin, Residence};
use quern::query::score::read_sentences;
use quern::query::{Method, Predictor};
use serde_json::json;

use super::freeze::{model_path, perplexity, reduce_options};
use super::prob::jnum;
use super::{bytes, thousands};
use crate::cli::args::FreezeArgs;

pub fn run(a: FreezeArgs) -> anyhow::Result<()> {
    let file = a.blend.as_deref().expect("called with --blend");
    let opts = reduce_options(&a)?;
    let (out, temporary) = model_path(&a);
    let t = std::time::Instant::now();
    let opened = Opened::open(file, a.memory.block_cache(), Residence::Mapped)?;
    let blend = opened.blend()?;
    for n in blend.notes() {
        eprintln!("quern: note: {n}");
    }
    let union = opened.ngram_union()?;
    let union_sizes: Vec<u64> = union.iter().map(|o| o.len() as u64).collect();
    let b = backoff(&blend, &union)?;
    drop(union);
    let parts: Vec<String> = opened
        .record
        .parts
        .iter()
        .map(|p| {
            format!(
                "{} ({}, weight {:.6})",
                p.path.display(),
                p.method,
                p.weight
            )
        })
        .collect();
    let mut notes = vec![format!(
        "the blend {} of {}",
        file.display(),
        parts.join(", ")
    )];
    if (b.unigram_sum - 1.0).abs() > 1e-12 {
        notes.push(format!(
            "the unigrams are the mixture divided by {:.9}, its sum over the union of the vocabularies (a word outside a part's vocabulary gets that part's <unk> probability)",
            b.unigram_sum
        ));
    }
    if b.scaled > 0 {
        notes.push(format!(
            "{} contexts: their n-grams' mixture left no room for backing off and was scaled so that the context sums to 1",
            b.scaled
        ));
    }
    let origin = Origin {
        method: Method::Blend,
        preparation: opened.record.preparation,
        notes,
    };
    let report = write_backoff(&b.model, &out, &opts, origin)
        .with_context(|| format!("writing {}", out.display()))?;
    drop(b);
    let freeze_secs = t.elapsed().as_secs_f64();
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
        let s = read_sentences(&a.heldout, opened.record.preparation)?;
        let n = blend.order();
        let exact = perplexity(&s, n, |q| blend.prob_batch(q))?;
        let frozen = perplexity(&s, n, |q| model.prob_batch(q))?;
        Some((exact, frozen, s.len()))
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
            "blend": file.display().to_string(),
            "method": "blend",
            "order": report.ngrams.len(),
            "model": a.out.as_ref().map(|p| p.display().to_string()),
            "model_bytes": (!temporary).then_some(report.file_bytes),
            "value_bits": report.value_bits,
            "weight_bits": report.weight_bits,
            "relative_entropy": report.threshold,
            "ngrams_union": union_sizes,
            "ngrams_kept": report.ngrams,
            "arpa": a.arpa.as_ref().map(|p| p.display().to_string()),
            "arpa_bytes": arpa_bytes,
            "notes": report.notes,
            "heldout": heldout.map(|(e, f, s)| json!({
                "sentences": s,
                "perplexity_blend": e.map_or(serde_json::Value::Null, jnum),
                "perplexity_model": f.map_or(serde_json::Value::Null, jnum),
            })),
            "seconds_freezing": freeze_secs,
            "seconds": secs,
        });
        return super::print_json(&mut o, &v);
    }
    writeln!(
        o,
        "froze the blend {} ({} parts, order {}) into {}",
        file.display(),
        opened.parts.len(),
        report.ngrams.len(),
        match (&a.out, &a.arpa) {
            (Some(m), Some(r)) => format!("{} and {}", m.display(), r.display()),
            (Some(m), None) => m.display().to_string(),
            (None, Some(r)) => r.display().to_string(),
            (None, None) => unreachable!(),
        }
    )?;
    writeln!(o, "  order   union n-grams     kept")?;
    for (k, (s, kk)) in union_sizes.iter().zip(&report.ngrams).enumerate() {
        writeln!(
            o,
            "  {:>5} {:>15} {:>8}",
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
            "  model {} ({:.2} bytes per n-gram, {}-bit values)",
            bytes(report.file_bytes),
            report.file_bytes as f64 / kept.max(1) as f64,
            report.value_bits
        )?;
    }
    if let Some(b) = arpa_bytes {
        writeln!(o, "  ARPA {}", bytes(b))?;
    }
    if let Some((e, f, s)) = heldout {
        let show = |p: Option<f64>| p.map_or("infinite".to_string(), |v| format!("{v:.4}"));
        writeln!(
            o,
            "  held-out perplexity ({s} sentences): blend {}, model {}",
            show(e),
            show(f)
        )?;
    }
    writeln!(o, "  time {secs:.2} s (freezing {freeze_secs:.2} s)")?;
    Ok(())
}
