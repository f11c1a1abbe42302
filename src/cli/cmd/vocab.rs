//! `quern vocab`: a vocabulary by size, or the top N words as a word list.

use std::io::Write;

use quern::query::score::read_sentences;
use quern::store::Store;
use quern::vocab::{heldout_tokens, rank, sizes};
use serde_json::json;

use crate::cli::args::VocabArgs;

pub fn run(a: VocabArgs) -> anyhow::Result<()> {
    if a.sizes.is_empty() && a.top.is_none() {
        anyhow::bail!("give --sizes, or --top N --out FILE");
    }
    let store = Store::open(&a.store)?;
    let r = rank(&store)?;
    if let (Some(n), Some(out)) = (a.top, &a.out) {
        let mut text = String::new();
        for (w, _) in r.words.iter().take(n as usize) {
            text.push_str(w);
            text.push('\n');
        }
        quern::fsutil::write_atomic(out, text.as_bytes())?;
        eprintln!(
            "quern: wrote the {} most frequent words to {}",
            n.min(r.words.len() as u64),
            out.display()
        );
    }
    if a.sizes.is_empty() {
        return Ok(());
    }
    let held = if a.heldout.is_empty() {
        None
    } else {
        Some(read_sentences(
            &a.heldout,
            store.meta().settings.preparation,
        )?)
    };
    let rows = sizes(&r, &a.sizes, held.as_deref());
    let mut o = std::io::stdout().lock();
    if a.json {
        let v = json!({
            "store": a.store.display().to_string(),
            "words": r.words.len(),
            "training_tokens": r.tokens,
            "heldout_tokens": held.as_deref().map(heldout_tokens),
            "sizes": rows,
        });
        return super::print_json(&mut o, &v);
    }
    writeln!(
        o,
        "size\twords\tcovered_tokens\tcoverage\theldout_outside\theldout_oov_rate"
    )?;
    for row in rows {
        let opt = |x: Option<String>| x.unwrap_or_default();
        writeln!(
            o,
            "{}\t{}\t{}\t{:.6}\t{}\t{}",
            row.size,
            row.words,
            row.covered_tokens,
            row.coverage,
            opt(row.heldout_outside.map(|x| x.to_string())),
            opt(row.heldout_oov_rate.map(|x| format!("{x:.6}")))
        )?;
    }
    Ok(())
}
