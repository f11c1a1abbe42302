//! Writing the corpus statistics' lists: TSV or CSV under a header line,
//! or one JSON object a line (helpers of `top`, `ngrams --pattern`,
//! `collocations` and `keyness`).

use std::io::Write;

use crate::cli::args::ListFormatArgs;

/// One row: its cells as text (TSV, CSV) and its JSON object.
pub struct Row<T> {
    pub cells: Vec<String>,
    pub json: T,
}

/// Writes `rows` under `header` (none if empty) in the format asked for.
pub fn write_list<T: serde::Serialize>(
    out: &mut impl Write,
    format: ListFormatArgs,
    header: &[&str],
    rows: impl IntoIterator<Item = Row<T>>,
) -> anyhow::Result<()> {
    if format.json {
        for r in rows {
            serde_json::to_writer(&mut *out, &r.json)?;
            writeln!(out)?;
        }
        return Ok(());
    }
    if format.csv {
        let mut w = csv::WriterBuilder::new()
            .quote_style(csv::QuoteStyle::Necessary)
            .from_writer(&mut *out);
        if !header.is_empty() {
            w.write_record(header)?;
        }
        for r in rows {
            w.write_record(&r.cells)?;
        }
        w.flush()?;
        return Ok(());
    }
    if !header.is_empty() {
        writeln!(out, "{}", header.join("\t"))?;
    }
    for r in rows {
        writeln!(out, "{}", r.cells.join("\t"))?;
    }
    Ok(())
}

/// A statistic as printed in TSV and CSV: four decimals.
pub fn fixed(x: f64) -> String {
    format!("{x:.4}")
}

/// The rows of a frequency list (with the documents column when the store
/// has document counts: `docs`).
pub fn freq_rows(
    items: Vec<quern::linguistics::freq::FreqItem>,
    docs: bool,
) -> (
    Vec<&'static str>,
    Vec<Row<quern::linguistics::freq::FreqItem>>,
) {
    let mut header = vec!["rank", "ngram", "count", "per_million"];
    if docs {
        header.push("documents");
    }
    let rows = items
        .into_iter()
        .map(|i| {
            let mut cells = vec![
                i.rank.to_string(),
                i.ngram.clone(),
                i.count.to_string(),
                format!("{:.2}", i.per_million),
            ];
            if docs {
                cells.push(i.documents.map_or("-".into(), |d| d.to_string()));
            }
            Row { cells, json: i }
        })
        .collect();
    (header, rows)
}
