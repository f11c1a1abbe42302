//! `quern stats`: totals, n-grams per order, count-of-counts, discounts.

use std::io::Write;

use quern::store::{mkn_discounts, Store};
use serde_json::json;

use super::thousands;
use crate::cli::args::StatsArgs;

pub fn run(a: StatsArgs) -> anyhow::Result<()> {
    let store = Store::open(&a.store)?;
    let m = store.meta();
    let mut out = std::io::stdout().lock();
    if a.json {
        let orders: Vec<_> = m
            .orders
            .iter()
            .map(|o| {
                json!({
                    "order": o.order,
                    "ngrams": o.ngrams,
                    "count_of_counts": {"raw": o.coc_raw, "adjusted": o.coc_adjusted},
                    "mkn_discounts": mkn_discounts(o),
                })
            })
            .collect();
        let t = &m.totals;
        let v = json!({
            "format_version": m.format_version,
            "settings": {"order": m.settings.order, "lowercase": m.settings.lowercase},
            "totals": {
                "sentences": t.sentences,
                "tokens": t.tokens,
                "vocabulary": t.vocabulary,
                "types": t.types,
                "marker_tokens": t.marker_tokens,
                "skipped_lines": t.skipped_lines,
                "invalid_utf8_lines": t.invalid_utf8_lines,
            },
            "orders": orders,
        });
        return super::print_json(&mut out, &v);
    }
    let t = &m.totals;
    writeln!(
        out,
        "store {}   order {}   lowercase {}",
        store.dir().display(),
        m.settings.order,
        if m.settings.lowercase { "yes" } else { "no" }
    )?;
    writeln!(out, "sentences  {:>14}", thousands(t.sentences))?;
    writeln!(
        out,
        "tokens     {:>14}   (words and one </s> per sentence)",
        thousands(t.tokens)
    )?;
    writeln!(
        out,
        "types      {:>14}   (distinct tokens but <s>)",
        thousands(t.types)
    )?;
    writeln!(
        out,
        "vocabulary {:>14}   (types{})",
        thousands(t.vocabulary),
        if t.unk_seen {
            ", <unk> among them"
        } else {
            " and <unk>"
        }
    )?;
    writeln!(out)?;
    writeln!(
        out,
        "order {:>14} {:>12} {:>8} {:>8} {:>8}",
        "n-grams", "singletons", "D1", "D2", "D3+"
    )?;
    for o in &m.orders {
        let (d1, d2, d3) = match mkn_discounts(o) {
            Some(d) => (
                format!("{:.4}", d.d1),
                format!("{:.4}", d.d2),
                format!("{:.4}", d.d3plus),
            ),
            None => ("undef".into(), "undef".into(), "undef".into()),
        };
        writeln!(
            out,
            "{:>5} {:>14} {:>12} {d1:>8} {d2:>8} {d3:>8}",
            o.order,
            thousands(o.ngrams),
            thousands(o.raw(1))
        )?;
    }
    writeln!(out)?;
    writeln!(
        out,
        "count-of-counts n_r, raw / adjusted (discounts use adjusted):"
    )?;
    write!(out, "{:>5}", "r")?;
    for o in &m.orders {
        write!(out, " {:>21}", format!("order {}", o.order))?;
    }
    writeln!(out)?;
    for r in 1..=a.rows as u64 {
        write!(out, "{r:>5}")?;
        for o in &m.orders {
            write!(
                out,
                " {:>21}",
                format!("{} / {}", thousands(o.raw(r)), thousands(o.adjusted(r)))
            )?;
        }
        writeln!(out)?;
    }
    Ok(())
}
