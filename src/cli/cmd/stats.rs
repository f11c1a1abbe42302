//! `quern stats`: the statistics report ([`quern::stats`]) as a table, TSV,
//! CSV or JSON; figures; the comparison of two stores.

use std::io::Write;
use std::path::Path;

use quern::stats::compare::{compare, Difference};
use quern::stats::plot::write_figure;
use quern::stats::tables::Discount;
use quern::stats::{report, PowerFit, Report, ReportOptions};
use quern::store::Store;

use super::thousands;
use crate::cli::args::{StatsArgs, StatsFormat};

/// The comparison as JSON, in the order written.
#[derive(serde::Serialize)]
struct CompareJson<'a> {
    schema: u32,
    a: &'a str,
    b: &'a str,
    differences: &'a [Difference],
}

/// Rows of count-of-counts in the table when `--max-count` is not given.
const TABLE_ROWS: u64 = 10;

pub fn run(a: StatsArgs) -> anyhow::Result<()> {
    let format = match (a.format, a.json, &a.plot) {
        (Some(f), _, _) => Some(f),
        (None, true, _) => Some(StatsFormat::Json),
        (None, false, Some(_)) => None,
        (None, false, None) => Some(StatsFormat::Table),
    };
    let store = Store::open(&a.store)?;
    let max_order = store.meta().settings.order;
    if let Some(k) = a.order {
        if k == 0 || k > max_order {
            anyhow::bail!(
                "--order {k}: the store {} has orders 1..={max_order}",
                a.store.display()
            );
        }
    }
    let opts = ReportOptions {
        katz_k: a.katz_k,
        max_count: a.max_count,
        order: a.order,
    };
    let rep = report(store.meta(), &opts);
    let label_a = label(&a.store);
    let other = match &a.compare {
        Some(b) => {
            let sb = Store::open(b)?;
            Some((label(b), report(sb.meta(), &opts)))
        }
        None => None,
    };
    if let Some(path) = &a.plot {
        let mut figs = vec![(label_a.as_str(), &rep)];
        if let Some((lb, rb)) = &other {
            figs.push((lb.as_str(), rb));
        }
        write_figure(path, &figs)?;
        eprintln!("stats: wrote {}", path.display());
    }
    let Some(format) = format else {
        return Ok(());
    };
    let mut out = std::io::stdout().lock();
    match &other {
        Some((lb, rb)) => {
            let diffs = compare(&rep, rb);
            match format {
                StatsFormat::Table => compare_table(&mut out, &label_a, lb, &diffs),
                StatsFormat::Json => super::print_json(
                    &mut out,
                    &CompareJson {
                        schema: quern::stats::REPORT_SCHEMA,
                        a: &label_a,
                        b: lb,
                        differences: &diffs,
                    },
                ),
                StatsFormat::Tsv => compare_rows(&mut out, b'\t', &diffs),
                StatsFormat::Csv => compare_rows(&mut out, b',', &diffs),
            }
        }
        None => match format {
            StatsFormat::Table => {
                let mut rep = rep;
                if a.max_count.is_none() {
                    for o in &mut rep.orders {
                        o.count_of_counts.raw.retain(|e| e.0 <= TABLE_ROWS);
                        o.count_of_counts.left_type.retain(|e| e.0 <= TABLE_ROWS);
                    }
                }
                table(
                    &mut out,
                    &store.dir().display().to_string(),
                    &rep,
                    a.max_count.unwrap_or(TABLE_ROWS),
                )
            }
            StatsFormat::Json => super::print_json(&mut out, &rep),
            StatsFormat::Tsv => rows(&mut out, b'\t', &rep),
            StatsFormat::Csv => rows(&mut out, b',', &rep),
        },
    }
}

/// A store's label in figures and comparisons: its folder name.
fn label(p: &Path) -> String {
    p.file_name()
        .map(|n| n.to_string_lossy().into_owned())
        .unwrap_or_else(|| p.display().to_string())
}

fn num(v: Option<f64>) -> String {
    v.map(|x| x.to_string()).unwrap_or_default()
}

/// The long format of TSV and CSV: one header line, then one value a row.
/// Columns: `section, order, x, name, value, note` (README.md, "Statistics").
fn rows(out: &mut impl Write, delim: u8, r: &Report) -> anyhow::Result<()> {
    let mut w = csv::WriterBuilder::new()
        .delimiter(delim)
        .quote_style(csv::QuoteStyle::Necessary)
        .from_writer(out);
    w.write_record(["section", "order", "x", "name", "value", "note"])?;
    let mut put = |section: &str,
                   order: Option<usize>,
                   x: Option<u64>,
                   name: &str,
                   value: String,
                   note: &str| {
        w.write_record([
            section,
            &order.map(|k| k.to_string()).unwrap_or_default(),
            &x.map(|k| k.to_string()).unwrap_or_default(),
            name,
            &value,
            note,
        ])
    };
    let t = &r.totals;
    for (name, v) in [
        ("sentences", t.sentences),
        ("tokens", t.tokens),
        ("types", t.types),
        ("vocabulary", t.vocabulary),
        ("marker_tokens", t.marker_tokens),
        ("skipped_lines", t.skipped_lines),
        ("invalid_utf8_lines", t.invalid_utf8_lines),
    ] {
        put("totals", None, None, name, v.to_string(), "")?;
    }
    if t.bad_lines > 0 {
        put(
            "totals",
            None,
            None,
            "bad_lines",
            t.bad_lines.to_string(),
            "",
        )?;
    }
    if let Some(d) = t.documents {
        put(
            "totals",
            None,
            None,
            "documents",
            d.to_string(),
            "--document-counts",
        )?;
    }
    if let (Some(u), Some(d)) = (r.settings.unique, &t.duplicates) {
        let note = format!("--unique {}", u.name());
        put(
            "totals",
            None,
            None,
            "duplicate_units",
            d.units.to_string(),
            &note,
        )?;
        put(
            "totals",
            None,
            None,
            "duplicate_tokens",
            d.tokens.to_string(),
            &note,
        )?;
        put(
            "totals",
            None,
            None,
            "duplicate_token_share",
            num(Some(d.token_share)),
            &note,
        )?;
    }
    // Empty, with a note, for a store counted without a word list.
    let list_words = r.settings.word_list.as_ref().map(|l| l.words);
    for (name, v) in [
        ("word_list_words", list_words),
        ("mapped_tokens", t.mapped_tokens),
    ] {
        let (value, note) = match v {
            Some(x) => (x.to_string(), ""),
            None => (String::new(), "no word list"),
        };
        put("totals", None, None, name, value, note)?;
    }
    put(
        "totals",
        None,
        None,
        "type_token_ratio",
        num(t.type_token_ratio),
        "",
    )?;
    let fit_rows = |prefix: &str, f: &Option<PowerFit>| -> Vec<(String, String)> {
        let f = f.as_ref();
        vec![
            (format!("{prefix}_exponent"), num(f.map(|f| f.exponent))),
            (format!("{prefix}_scale"), num(f.map(|f| f.scale))),
            (format!("{prefix}_r_squared"), num(f.map(|f| f.r_squared))),
            (format!("{prefix}_points"), num(f.map(|f| f.points as f64))),
            (format!("{prefix}_x_min"), num(f.map(|f| f.x_min as f64))),
            (format!("{prefix}_x_max"), num(f.map(|f| f.x_max as f64))),
        ]
    };
    let heaps = r.growth.as_ref().and_then(|g| g.heaps);
    let no_growth = if r.growth.is_none() {
        "the store has no growth curve"
    } else {
        ""
    };
    for (name, v) in fit_rows("heaps", &heaps) {
        put("fit", None, None, &name, v, no_growth)?;
    }
    for (name, v) in fit_rows("zipf", &r.rank_frequency.zipf) {
        put("fit", None, None, &name, v, "")?;
    }
    for o in &r.orders {
        let k = Some(o.order);
        put("order", k, None, "ngrams", o.ngrams.to_string(), "")?;
        put("order", k, None, "singletons", o.singletons.to_string(), "")?;
        put(
            "order",
            k,
            None,
            "singleton_share",
            num(o.singleton_share),
            "",
        )?;
        let d = &o.discounts;
        for (name, x) in [
            ("mkn_d1", &d.d1),
            ("mkn_d2", &d.d2),
            ("mkn_d3plus", &d.d3plus),
            ("kn_d", &d.kn),
        ] {
            put(
                "discount",
                k,
                None,
                name,
                num(x.value),
                x.undefined.as_deref().unwrap_or(""),
            )?;
        }
        for &(c, n) in &o.count_of_counts.raw {
            put("coc_raw", k, Some(c), "n_r", n.to_string(), "")?;
        }
        for &(c, n) in &o.count_of_counts.left_type {
            put("coc_left_type", k, Some(c), "n_r", n.to_string(), "")?;
        }
        let g = &o.good_turing;
        put(
            "good_turing",
            k,
            None,
            "k_used",
            g.k_used.to_string(),
            g.note.as_deref().unwrap_or(""),
        )?;
        for row in &g.rows {
            let x = Some(row.r);
            put("good_turing", k, x, "n_r", row.n_r.to_string(), "")?;
            put("good_turing", k, x, "n_next", row.n_next.to_string(), "")?;
            put("good_turing", k, x, "r_star", num(row.r_star), "")?;
            put("good_turing", k, x, "katz_d", num(row.katz_d), "")?;
        }
    }
    if let Some(g) = &r.growth {
        for &(t, v) in &g.points {
            put("growth", None, Some(t), "types", v.to_string(), "")?;
        }
    }
    for &(rank, f) in &r.rank_frequency.points {
        put(
            "rank_frequency",
            None,
            Some(rank),
            "frequency",
            f.to_string(),
            "",
        )?;
    }
    w.flush()?;
    Ok(())
}

fn fixed(v: Option<f64>, places: usize) -> String {
    match v {
        Some(x) => format!("{x:.places$}"),
        None => "undef".into(),
    }
}

fn disc(d: &Discount) -> String {
    fixed(d.value, 4)
}

fn table(out: &mut impl Write, dir: &str, r: &Report, rows: u64) -> anyhow::Result<()> {
    let t = &r.totals;
    writeln!(
        out,
        "store {dir}   order {}   lowercase {}   word list {}",
        r.settings.order,
        if r.settings.lowercase { "yes" } else { "no" },
        r.settings
            .word_list
            .as_ref()
            .map_or("none".to_string(), |l| format!(
                "{} words",
                thousands(l.words)
            ))
    )?;
    if let Some(p) = &r.settings.preparation {
        writeln!(out, "preparation {}", super::preparation_text(p))?;
    }
    if r.settings.from_counts {
        writeln!(
            out,
            "source     count tables (ingest --counts): counts as read, statistics derived from them"
        )?;
    }
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
    writeln!(out, "vocabulary {:>14}", thousands(t.vocabulary))?;
    writeln!(out, "types/tokens {:>12}", fixed(t.type_token_ratio, 4))?;
    if let Some(m) = t.mapped_tokens {
        writeln!(
            out,
            "mapped     {:>14}   (tokens outside the word list, counted as <unk>)",
            thousands(m)
        )?;
    }
    if t.bad_lines > 0 {
        writeln!(
            out,
            "bad lines  {:>14}   (input lines without a document, skipped)",
            thousands(t.bad_lines)
        )?;
    }
    if let Some(d) = t.documents {
        writeln!(
            out,
            "documents  {:>14}   (each n-gram's documents stored: --document-counts)",
            thousands(d)
        )?;
    }
    if let (Some(u), Some(d)) = (r.settings.unique, &r.totals.duplicates) {
        writeln!(
            out,
            "duplicates {:>14}   ({} not counted, --unique {}; {} tokens, {:.2} % of the tokens read)",
            thousands(d.units),
            u.units(),
            u.name(),
            thousands(d.tokens),
            100.0 * d.token_share
        )?;
    }
    match r.growth.as_ref() {
        None if r.settings.from_counts => writeln!(
            out,
            "growth     none (count tables do not say in what order the tokens came)"
        )?,
        None => writeln!(out, "growth     none kept (the store was built before growth curves)")?,
        Some(g) => match &g.heaps {
            Some(h) => writeln!(
                out,
                "Heaps      V(n) = K n^beta, K = {:.3}, beta = {:.4}   (R² {:.4}, n = {}..{}, {} points)",
                h.scale,
                h.exponent,
                h.r_squared,
                thousands(h.x_min),
                thousands(h.x_max),
                h.points
            )?,
            None => writeln!(out, "Heaps      too few growth points to fit")?,
        },
    }
    match &r.rank_frequency.zipf {
        Some(z) => writeln!(
            out,
            "Zipf       f(r) = C r^-s, s = {:.4}, C = {:.1}   (R² {:.4}, ranks {}..{}, {} points)",
            z.exponent,
            z.scale,
            z.r_squared,
            thousands(z.x_min),
            thousands(z.x_max),
            z.points
        )?,
        None => writeln!(out, "Zipf       too few ranks to fit")?,
    }
    writeln!(out)?;
    writeln!(
        out,
        "order        n-grams   singletons  share       D1       D2      D3+     KN D"
    )?;
    let mut notes = Vec::new();
    for o in &r.orders {
        let d = &o.discounts;
        writeln!(
            out,
            "{:>5} {:>14} {:>12} {:>6} {:>8} {:>8} {:>8} {:>8}",
            o.order,
            thousands(o.ngrams),
            thousands(o.singletons),
            o.singleton_share
                .map(|s| format!("{:.1}%", 100.0 * s))
                .unwrap_or_else(|| "-".into()),
            disc(&d.d1),
            disc(&d.d2),
            disc(&d.d3plus),
            disc(&d.kn)
        )?;
        for (name, x) in [
            ("D1", &d.d1),
            ("D2", &d.d2),
            ("D3+", &d.d3plus),
            ("KN D", &d.kn),
        ] {
            if let Some(why) = &x.undefined {
                notes.push(format!("order {} {name}: {why}", o.order));
            }
        }
    }
    for n in notes {
        writeln!(out, "  {n}")?;
    }
    writeln!(out)?;
    writeln!(out, "count-of-counts n_r, raw / left-type:")?;
    write!(out, "{:>5}", "r")?;
    for o in &r.orders {
        write!(out, " {:>21}", format!("order {}", o.order))?;
    }
    writeln!(out)?;
    let get = |v: &[(u64, u64)], c: u64| v.iter().find(|e| e.0 == c).map_or(0, |e| e.1);
    for c in 1..=rows {
        write!(out, "{c:>5}")?;
        for o in &r.orders {
            write!(
                out,
                " {:>21}",
                format!(
                    "{} / {}",
                    thousands(get(&o.count_of_counts.raw, c)),
                    thousands(get(&o.count_of_counts.left_type, c))
                )
            )?;
        }
        writeln!(out)?;
    }
    writeln!(out)?;
    writeln!(
        out,
        "Good-Turing on raw counts: r* = (r+1) n_(r+1) / n_r, and Katz's d_r:"
    )?;
    writeln!(out, "order     r          n_r        r*   Katz d_r")?;
    for o in &r.orders {
        let g = &o.good_turing;
        for row in &g.rows {
            writeln!(
                out,
                "{:>5} {:>5} {:>12} {:>9} {:>10}",
                o.order,
                row.r,
                thousands(row.n_r),
                fixed(row.r_star, 4),
                row.katz_d
                    .map(|d| format!("{d:.4}"))
                    .unwrap_or_else(|| "-".into())
            )?;
        }
        if let Some(n) = &g.note {
            writeln!(
                out,
                "      K = {} is not usable ({n}); Katz uses K = {}",
                g.k_requested, g.k_used
            )?;
        }
    }
    if let Some(g) = &r.growth {
        writeln!(out)?;
        writeln!(out, "vocabulary growth (every point: --format tsv):")?;
        writeln!(out, "{:>16} {:>12}", "tokens read", "types seen")?;
        let last = g.points.last().copied();
        for &(n, v) in &g.points {
            let decade = n
                .to_string()
                .trim_start_matches('1')
                .chars()
                .all(|c| c == '0');
            if decade || Some((n, v)) == last {
                writeln!(out, "{:>16} {:>12}", thousands(n), thousands(v))?;
            }
        }
    }
    Ok(())
}

fn compare_rows(out: &mut impl Write, delim: u8, diffs: &[Difference]) -> anyhow::Result<()> {
    let mut w = csv::WriterBuilder::new().delimiter(delim).from_writer(out);
    w.write_record(["order", "name", "a", "b", "change", "ratio"])?;
    for d in diffs {
        w.write_record([
            d.order.map(|k| k.to_string()).unwrap_or_default(),
            d.name.to_string(),
            num(d.a),
            num(d.b),
            num(d.change),
            num(d.ratio),
        ])?;
    }
    w.flush()?;
    Ok(())
}

fn short(v: Option<f64>) -> String {
    match v {
        None => "undef".into(),
        Some(x) if x.fract() == 0.0 && x.abs() < 1e15 => {
            let s = thousands(x.abs() as u64);
            if x < 0.0 {
                format!("-{s}")
            } else {
                s
            }
        }
        Some(x) => format!("{x:.4}"),
    }
}

fn compare_table(
    out: &mut impl Write,
    a: &str,
    b: &str,
    diffs: &[Difference],
) -> anyhow::Result<()> {
    writeln!(out, "a = {a}   b = {b}")?;
    writeln!(
        out,
        "{:>5} {:<18} {:>14} {:>14} {:>14} {:>9}",
        "order", "quantity", "a", "b", "b - a", "b / a"
    )?;
    for d in diffs {
        writeln!(
            out,
            "{:>5} {:<18} {:>14} {:>14} {:>14} {:>9}",
            d.order
                .map(|k| k.to_string())
                .unwrap_or_else(|| "all".into()),
            d.name,
            short(d.a),
            short(d.b),
            short(d.change),
            d.ratio
                .map(|x| format!("{x:.4}"))
                .unwrap_or_else(|| "-".into())
        )?;
    }
    Ok(())
}
