//! The keyness figure: the key n-grams as horizontal bars of their log
//! ratio (effect size), positive to the right in one colour, negative to
//! the left in another (Okabe & Ito's blue and vermillion, as the
//! statistics figures use), each labelled with its words and counts.
//!
//! [`write_svg`] writes SVG to any writer; [`write_file`] writes SVG or
//! PNG (the embedded font, no system fonts) to a path the caller chose.

use std::io::Write;
use std::path::{Path, PathBuf};

use plotters::coord::Shift;
use plotters::prelude::*;
use plotters::style::text_anchor::{HPos, Pos, VPos};

use super::keyness::{KeyItem, KeyLists};
use crate::error::{Error, Result};
use crate::stats::plot::{register_font, PALETTE};

/// The items drawn: at most `per_side` of each list, by log ratio
/// (largest effect at the top), positive above negative.
fn bars(lists: &KeyLists, per_side: usize) -> Vec<&KeyItem> {
    fn by_size(v: &[KeyItem], per_side: usize) -> Vec<&KeyItem> {
        let mut v: Vec<&KeyItem> = v.iter().collect();
        v.sort_by(|a, b| b.log_ratio.abs().total_cmp(&a.log_ratio.abs()));
        v.truncate(per_side);
        v
    }
    let mut out = by_size(&lists.positive, per_side);
    let mut neg = by_size(&lists.negative, per_side);
    neg.reverse();
    out.extend(neg);
    out
}

fn size(n: usize) -> (u32, u32) {
    (900, 120 + 26 * n.max(1) as u32)
}

fn draw<DB: DrawingBackend>(
    root: &DrawingArea<DB, Shift>,
    items: &[&KeyItem],
    title: &str,
) -> std::result::Result<(), String> {
    root.fill(&WHITE).map_err(|e| e.to_string())?;
    let reach = items
        .iter()
        .map(|i| i.log_ratio.abs())
        .fold(1.0f64, f64::max)
        .ceil();
    let n = items.len().max(1) as f64;
    let mut chart = ChartBuilder::on(root)
        .caption(title, ("sans-serif", 20))
        .margin(16)
        .x_label_area_size(40)
        .build_cartesian_2d(-reach * 1.9..reach * 1.9, 0.0..n)
        .map_err(|e| e.to_string())?;
    chart
        .configure_mesh()
        .disable_y_mesh()
        .disable_y_axis()
        .x_desc("log ratio (log2 of the ratio of relative frequencies)")
        .draw()
        .map_err(|e| e.to_string())?;
    let (pos, neg) = (PALETTE[4], PALETTE[3]);
    for (i, it) in items.iter().enumerate() {
        let y = n - i as f64;
        let colour = if it.log_ratio > 0.0 { pos } else { neg };
        chart
            .draw_series(std::iter::once(Rectangle::new(
                [(0.0, y - 0.8), (it.log_ratio, y - 0.2)],
                colour.filled(),
            )))
            .map_err(|e| e.to_string())?;
        let label = format!("{} ({} : {})", it.ngram, it.study_count, it.reference_count);
        let (x, anchor) = if it.log_ratio > 0.0 {
            (it.log_ratio + reach * 0.03, HPos::Left)
        } else {
            (it.log_ratio - reach * 0.03, HPos::Right)
        };
        let style =
            TextStyle::from(("sans-serif", 15).into_font()).pos(Pos::new(anchor, VPos::Center));
        chart
            .draw_series(std::iter::once(Text::new(label, (x, y - 0.5), style)))
            .map_err(|e| e.to_string())?;
    }
    Ok(())
}

/// Writes the figure of `lists` (at most `per_side` bars a side) as SVG to
/// `out`.
pub fn write_svg<W: Write>(
    out: &mut W,
    lists: &KeyLists,
    per_side: usize,
    title: &str,
) -> Result<()> {
    let items = bars(lists, per_side);
    let err = |d: String| Error::Plot {
        path: PathBuf::from("(SVG output)"),
        detail: d,
    };
    let mut svg = String::new();
    {
        register_font();
        let root = SVGBackend::with_string(&mut svg, size(items.len())).into_drawing_area();
        draw(&root, &items, title).map_err(err)?;
        root.present().map_err(|e| err(e.to_string()))?;
    }
    out.write_all(svg.as_bytes())
        .map_err(|e| err(e.to_string()))
}

/// Writes the figure to `path`: SVG or PNG by its extension.
pub fn write_file(path: &Path, lists: &KeyLists, per_side: usize, title: &str) -> Result<()> {
    let ext = path
        .extension()
        .map(|e| e.to_string_lossy().to_lowercase())
        .unwrap_or_default();
    let err = |d: String| Error::Plot {
        path: path.to_path_buf(),
        detail: d,
    };
    match ext.as_str() {
        "svg" => {
            let mut f = std::fs::File::create(path).map_err(|e| err(e.to_string()))?;
            write_svg(&mut f, lists, per_side, title)
        }
        "png" => {
            register_font();
            let items = bars(lists, per_side);
            let root = BitMapBackend::new(path, size(items.len())).into_drawing_area();
            draw(&root, &items, title).map_err(err)?;
            root.present().map_err(|e| err(e.to_string()))
        }
        _ => Err(err("the figure's file name must end in .svg or .png".into())),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn item(ngram: &str, log_ratio: f64) -> KeyItem {
        KeyItem {
            ngram: ngram.into(),
            study_count: 1,
            reference_count: 1,
            study_per_million: 1.0,
            reference_per_million: 1.0,
            g2: 4.0,
            log_ratio,
            percent_diff: None,
        }
    }

    #[test]
    fn writes_svg_into_any_writer_with_one_bar_an_item() {
        let lists = KeyLists {
            positive: vec![item("harbour", 2.0), item("ferry", 3.5), item("sheep", 1.0)],
            negative: vec![item("castle", -1.5)],
            study_words: 100,
            reference_words: 100,
        };
        let mut out: Vec<u8> = Vec::new();
        write_svg(&mut out, &lists, 2, "key words").unwrap();
        let svg = String::from_utf8(out).unwrap();
        assert!(svg.starts_with("<svg"));
        // Two a side at most: "sheep" (the smallest effect) is left out.
        for w in ["ferry", "harbour", "castle", "key words"] {
            assert!(svg.contains(w), "{w}");
        }
        assert!(!svg.contains("sheep"));
        assert_eq!(
            bars(&lists, 2)
                .iter()
                .map(|i| i.ngram.as_str())
                .collect::<Vec<_>>(),
            ["ferry", "harbour", "castle"]
        );
    }
}
