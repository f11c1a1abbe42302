//! `quern ingest`.

use std::io::Write;

use anyhow::Context;
use quern::ingest::{ingest, IngestOptions};

use super::{bytes, thousands};
use crate::cli::args::IngestArgs;
use crate::cli::progress::Bar;

/// The phases in the order they run.
const RUN_ORDER: [&str; 5] = ["hashing", "counting", "merging", "joining", "building"];

pub fn run(a: IngestArgs) -> anyhow::Result<()> {
    let preparation = a.prep.preparation();
    let mut o = IngestOptions::new(&a.store, a.inputs.clone());
    o.order = a.order;
    o.memory = a.memory.bytes();
    if let Some(t) = a.threads {
        o.threads = t;
    }
    o.preparation = preparation;
    o.word_list = a.word_list.clone();
    o.max_line_bytes = a.input.max_line_bytes;
    o.partitions = a.partitions;
    o.restart = a.restart;
    o.append = a.append;
    o.format = a.input.format();
    o.counts = a.counts;
    o.unique = a.unique;
    o.document_counts = a.document_counts;
    let bar = Bar::new(a.quiet);
    let result = ingest(&o, &bar);
    bar.finish();
    let s = result.with_context(|| format!("ingest into {} stopped", a.store.display()))?;
    let mut out = std::io::stdout().lock();
    if a.json {
        return super::print_json(&mut out, &s);
    }
    let t = &s.totals;
    let verb = match (s.resumed, s.appended) {
        (_, true) => "appended to",
        (true, false) => "resumed and finished",
        _ => "built",
    };
    writeln!(out, "{verb} {}", s.store.display())?;
    writeln!(
        out,
        "  sentences {}   tokens {}   types {}   vocabulary {}",
        thousands(t.sentences),
        thousands(t.tokens),
        thousands(t.types),
        thousands(t.vocabulary)
    )?;
    for (k, n) in s.ngrams.iter().enumerate() {
        writeln!(out, "  {}-grams {:>14}", k + 1, thousands(*n))?;
    }
    if t.skipped_lines + t.invalid_utf8_lines + t.marker_tokens > 0 {
        writeln!(
            out,
            "  lines skipped (over --max-line-bytes) {}   lines with invalid UTF-8 {}   marker-like tokens read as <unk> {}",
            thousands(t.skipped_lines),
            thousands(t.invalid_utf8_lines),
            thousands(t.marker_tokens)
        )?;
    }
    if t.bad_lines > 0 {
        writeln!(
            out,
            "  lines without a document, skipped: {}",
            thousands(t.bad_lines)
        )?;
        for b in &s.bad_lines {
            let at = match b.line {
                Some(l) => format!("line {l}"),
                None => format!("byte {}", b.offset),
            };
            writeln!(out, "    {}, {at}: {}", b.path.display(), b.detail)?;
        }
        if t.bad_lines > s.bad_lines.len() as u64 {
            writeln!(out, "    (the first {} shown)", s.bad_lines.len())?;
        }
    }
    if a.word_list.is_some() {
        writeln!(
            out,
            "  tokens outside the word list, counted as <unk>: {}",
            thousands(t.mapped_tokens)
        )?;
    }
    if let Some(u) = a.unique {
        writeln!(out, "  {}", duplicates_line(u, t))?;
    }
    if a.document_counts {
        writeln!(
            out,
            "  documents: {} (each n-gram's documents stored)",
            thousands(t.documents)
        )?;
    }
    for r in &s.repaired {
        writeln!(out, "  repaired: {r}")?;
    }
    // In the order the phases run (the map holds them by name).
    let mut timed: Vec<(&String, &f64)> = s.phase_seconds.iter().collect();
    timed.sort_by_key(|(p, _)| {
        RUN_ORDER
            .iter()
            .position(|q| q == p)
            .unwrap_or(RUN_ORDER.len())
    });
    let phases: Vec<String> = timed.iter().map(|(p, x)| format!("{p} {x:.1}")).collect();
    writeln!(out, "  time {:.1} s ({})", s.seconds, phases.join(", "))?;
    writeln!(
        out,
        "  input {}   peak memory {}   temporary files {}   store {}",
        bytes(t.input_bytes),
        s.peak_rss_bytes.map_or("unknown".into(), bytes),
        bytes(s.temp_bytes),
        bytes(s.store_bytes)
    )?;
    Ok(())
}

/// What `--unique` left out: `duplicates not counted: 3 sentences (12
/// tokens, 4.1 % of the tokens read)`.
pub(crate) fn duplicates_line(u: quern::records::Unique, t: &quern::records::Totals) -> String {
    let what = u.units();
    format!(
        "duplicates not counted: {} {what} ({} tokens, {:.2} % of the tokens read)",
        thousands(t.duplicate_units),
        thousands(t.duplicate_tokens),
        100.0 * t.duplicate_token_share()
    )
}
