//! `quern status`.

use std::io::Write;

use quern::ingest::status;

use super::{bytes, thousands};
use crate::cli::args::StatusArgs;

pub fn run(a: StatusArgs) -> anyhow::Result<()> {
    let s = status(&a.store)?;
    let mut out = std::io::stdout().lock();
    if a.json {
        return super::print_json(&mut out, &s);
    }
    writeln!(out, "{}: {}", s.store.display(), s.state)?;
    if let Some(i) = &s.ingest {
        writeln!(out, "  ingest ({}) in its {} phase", i.mode, i.phase)?;
        let pct = if i.input_bytes > 0 {
            100.0 * i.counted_bytes as f64 / i.input_bytes as f64
        } else {
            0.0
        };
        writeln!(
            out,
            "  counted {} of {} in {} files ({pct:.1}%), {} durable spills",
            bytes(i.counted_bytes),
            bytes(i.input_bytes),
            i.input_files,
            i.spills
        )?;
        writeln!(
            out,
            "  partitions merged {}/{}, joined {}/{}",
            i.merged, i.partitions, i.joined, i.partitions
        )?;
        if s.state == "interrupted" {
            writeln!(
                out,
                "  no ingest is running: run the same ingest command again to resume"
            )?;
        }
    }
    if let Some(f) = &s.finished {
        writeln!(
            out,
            "  order {}{}, {} sentences, {} tokens, vocabulary {}, {} on disk",
            f.order,
            if f.lowercase { " (lowercased)" } else { "" },
            thousands(f.sentences),
            thousands(f.tokens),
            thousands(f.vocabulary),
            bytes(f.disk_bytes)
        )?;
        if let Some(p) = &f.preparation {
            writeln!(out, "  preparation {}", super::preparation_text(p))?;
        }
        if let (Some(u), Some(d)) = (f.unique, &f.duplicates) {
            writeln!(
                out,
                "  --unique {}: {} duplicates not counted ({} tokens, {:.2} % of the tokens read)",
                u.name(),
                thousands(d.units),
                thousands(d.tokens),
                100.0 * d.token_share
            )?;
        }
        for (k, n) in f.ngrams.iter().enumerate() {
            writeln!(out, "  {}-grams {:>14}", k + 1, thousands(*n))?;
        }
    }
    Ok(())
}
