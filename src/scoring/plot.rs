//! The histogram of the documents' scores with the cut marked, drawn with
//! `plotters` (`.svg` or `.png`).
//!
//! The x axis is log10 of the perplexity (the cross-entropy difference
//! itself with two models), between the 0.5th and the 99.5th percentile
//! (so one stray document does not squeeze the rest into a bar), in 80 bars
//! re-binned from the distribution's histogram; the y axis is the number of
//! documents per bar. The cut is a vertical dashed line, labelled with the
//! share of the plotted documents left of it.

use std::path::Path;

use plotters::prelude::*;

use super::dist::{Scale, BIN_WIDTH};
use super::Distribution;
use crate::error::{Error, Result};

const BARS: usize = 80;

/// Draws `dist` into `path`, with the cut at score `cut` if given.
pub fn histogram(path: &Path, dist: &Distribution, cut: Option<f64>) -> Result<()> {
    let err = |e: String| Error::Plot {
        path: path.to_path_buf(),
        detail: e,
    };
    if dist.count == 0 {
        return Err(err("no document has a finite score".into()));
    }
    let ext = path
        .extension()
        .map(|e| e.to_string_lossy().to_lowercase())
        .unwrap_or_default();
    let size = (1000u32, 560u32);
    crate::stats::plot::register_font();
    match ext.as_str() {
        "svg" => {
            let root = SVGBackend::new(path, size).into_drawing_area();
            draw(&root, dist, cut).map_err(err)?;
            root.present().map_err(|e| err(e.to_string()))
        }
        "png" => {
            let root = BitMapBackend::new(path, size).into_drawing_area();
            draw(&root, dist, cut).map_err(err)?;
            root.present().map_err(|e| err(e.to_string()))
        }
        _ => Err(err("the figure's file name must end in .svg or .png".into())),
    }
}

fn draw<DB: DrawingBackend>(
    root: &DrawingArea<DB, plotters::coord::Shift>,
    dist: &Distribution,
    cut: Option<f64>,
) -> std::result::Result<(), String>
where
    DB::ErrorType: 'static,
{
    let s = |e: DrawingAreaErrorKind<DB::ErrorType>| e.to_string();
    root.fill(&WHITE).map_err(s)?;
    let sc = dist.scale;
    let p = dist.percentiles(&[0.5, 99.5]);
    let (mut lo, mut hi) = (sc.x(p[0]), sc.x(p[1]));
    if hi - lo < 100.0 * BIN_WIDTH {
        lo -= 50.0 * BIN_WIDTH;
        hi += 50.0 * BIN_WIDTH;
    }
    let w = (hi - lo) / BARS as f64;
    let mut bars = vec![0u64; BARS];
    for (&b, &c) in &dist.bins {
        let x = (b as f64 + 0.5) * BIN_WIDTH;
        if x >= lo && x <= hi {
            bars[(((x - lo) / w) as usize).min(BARS - 1)] += c;
        }
    }
    let top = bars.iter().copied().max().unwrap_or(1).max(1) as f64 * 1.1;
    let xdesc = match sc {
        Scale::Log10 => "log10 perplexity of the document",
        Scale::Linear => "cross-entropy difference H_in - H_general (log10 per token)",
    };
    let mut c = ChartBuilder::on(root)
        .caption(format!("{} documents", dist.count), ("sans-serif", 22))
        .margin(16)
        .x_label_area_size(48)
        .y_label_area_size(72)
        .build_cartesian_2d(lo..hi, 0.0..top)
        .map_err(s)?;
    c.configure_mesh()
        .x_desc(xdesc)
        .y_desc("documents")
        .y_label_formatter(&|v| format!("{v:.0}"))
        .label_style(("sans-serif", 15))
        .axis_desc_style(("sans-serif", 17))
        .light_line_style(RGBColor(0xEE, 0xEE, 0xEE))
        .draw()
        .map_err(s)?;
    let blue = RGBColor(0x00, 0x72, 0xB2);
    c.draw_series(bars.iter().enumerate().map(|(i, &n)| {
        let x0 = lo + i as f64 * w;
        Rectangle::new([(x0, 0.0), (x0 + w, n as f64)], blue.mix(0.8).filled())
    }))
    .map_err(s)?;
    if let Some(t) = cut {
        let x = sc.x(t);
        if x.is_finite() {
            let left: u64 = dist
                .bins
                .iter()
                .filter(|(&b, _)| (b as f64 + 0.5) * BIN_WIDTH <= x)
                .map(|(_, &c)| c)
                .sum();
            let share = 100.0 * left as f64 / dist.count as f64;
            let red = RGBColor(0xD5, 0x5E, 0x00);
            c.draw_series(DashedLineSeries::new(
                vec![(x, 0.0), (x, top)],
                8,
                5,
                red.stroke_width(3),
            ))
            .map_err(s)?
            .label(format!("cut at {t:.4}: {share:.1} % kept"))
            .legend(move |(x, y)| PathElement::new(vec![(x, y), (x + 20, y)], red.stroke_width(3)));
            c.configure_series_labels()
                .background_style(WHITE.mix(0.9))
                .border_style(BLACK)
                .label_font(("sans-serif", 15))
                .draw()
                .map_err(s)?;
        }
    }
    Ok(())
}
