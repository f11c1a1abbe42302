//! `quern dump`: every n-gram (or context) as TSV, under a header line
//! (`ngram, count, continuation`, and `documents` for a store with
//! document counts; with `--contexts`:
//! `context, C, T, A, N1, N2, N3+`).

use std::collections::HashMap;
use std::io::{BufWriter, Write};

use anyhow::{bail, Context};
use quern::key::Key;
use quern::store::{ContextStats, Store};
use quern::words::WordId;

use crate::cli::args::DumpArgs;

fn words(vocab: &HashMap<WordId, String>, key: &Key, out: &mut String) -> anyhow::Result<()> {
    out.clear();
    for (i, id) in key.ids().iter().enumerate() {
        if i > 0 {
            out.push(' ');
        }
        out.push_str(
            vocab
                .get(id)
                .with_context(|| format!("word id {id:#018x} is not in the vocabulary"))?,
        );
    }
    Ok(())
}

fn context_line(out: &mut impl Write, w: &str, s: &ContextStats) -> std::io::Result<()> {
    writeln!(
        out,
        "{w}\t{}\t{}\t{}\t{}\t{}\t{}",
        s.count_sum, s.types, s.left_type_sum, s.n1, s.n2, s.n3plus
    )
}

pub fn run(a: DumpArgs) -> anyhow::Result<()> {
    let store = Store::open(&a.store)?;
    let n = store.order();
    let orders: Vec<usize> = match a.order {
        Some(k) if a.contexts && k >= n => bail!(
            "--contexts --order {k}: a context has at most {} words in this store of order {n} (the {n}-grams are no context of anything); give 0 to {}",
            n - 1,
            n - 1
        ),
        Some(0) if a.contexts => vec![0],
        Some(k) if k == 0 || k > n => bail!("--order {k}: this store has orders 1 to {n}"),
        Some(k) => vec![k],
        None => (0..=n).collect(),
    };
    let vocab = store.vocabulary()?;
    let mut out = BufWriter::with_capacity(1 << 16, std::io::stdout().lock());
    let mut w = String::new();
    if a.contexts {
        if !a.no_header {
            writeln!(out, "context\tC\tT\tA\tN1\tN2\tN3+")?;
        }
        if orders.contains(&0) && store.meta().root.count_sum >= a.min_count {
            context_line(&mut out, "", &store.meta().root)?;
        }
        for k in orders.into_iter().filter(|&k| k > 0 && k < n) {
            for item in store.contexts(k)? {
                let (key, st) = item?;
                if st.count_sum < a.min_count {
                    continue;
                }
                words(&vocab, &key, &mut w)?;
                context_line(&mut out, &w, &st)?;
            }
        }
    } else {
        // A store with document counts has a fourth column.
        let docs = store.has_documents();
        if !a.no_header {
            let more = if docs { "\tdocuments" } else { "" };
            writeln!(out, "ngram\tcount\tcontinuation{more}")?;
        }
        for k in orders.into_iter().filter(|&k| k > 0) {
            for item in store.scan_records(k, &[], None)? {
                let (key, r) = item?;
                let c = r.count;
                if c < a.min_count {
                    continue;
                }
                words(&vocab, &key, &mut w)?;
                match r.continuation {
                    Some(x) => write!(out, "{w}\t{c}\t{x}")?,
                    None => write!(out, "{w}\t{c}\t-")?,
                }
                match r.documents {
                    Some(d) => writeln!(out, "\t{d}")?,
                    None => writeln!(out)?,
                }
            }
        }
    }
    out.flush()?;
    Ok(())
}
