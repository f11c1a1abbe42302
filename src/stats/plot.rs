//! Figures of one or more reports, drawn with the `plotters` crate: per
//! store a row of three log-log panels: the count-of-counts of every order
//! (raw and left-type), the rank-frequency curve with Zipf's fit, and the
//! vocabulary growth with Heaps' fit. With several stores the axes are
//! shared, so rows can be compared by eye.
//!
//! The count-of-counts are exact for r ≤ [`EXACT_UP_TO`]; above, where
//! most n_r are 0 or 1, each point is the mean n_r over a logarithmic bin
//! of r (the bins run between consecutive R20 sample points, see
//! [`crate::growth`]), drawn at the bin's geometric centre: logarithmic
//! binning, the usual way to show a power-law tail without a cloud of
//! points (common practice).
//!
//! Colours are the eight of Okabe & Ito (2008), "Color Universal Design",
//! chosen to stay distinct for the common kinds of colour blindness; every
//! order also has its own marker shape, and raw counts are solid lines with
//! filled markers, left-type counts dashed lines with hollow markers, so the
//! figure reads in grey too. Fits are dashed black lines.
//!
//! SVG is drawn in memory by the SVG backend (text as `<text>`, no font
//! needed) and written to any `W: Write` ([`write_svg`]); `.png` files by
//! the bitmap backend with the DejaVu Sans font embedded
//! in the binary (fixtures/fonts/, with its licence), so no system fonts are
//! needed.

use std::io::Write;
use std::path::Path;
use std::sync::Once;

use plotters::coord::Shift;
use plotters::prelude::*;

use super::{PowerFit, Report};
use crate::error::{Error, Result};

/// Okabe-Ito: orange, sky blue, bluish green, vermillion, blue, reddish
/// purple, yellow, black.
pub const PALETTE: [RGBColor; 8] = [
    RGBColor(0xE6, 0x9F, 0x00),
    RGBColor(0x56, 0xB4, 0xE9),
    RGBColor(0x00, 0x9E, 0x73),
    RGBColor(0xD5, 0x5E, 0x00),
    RGBColor(0x00, 0x72, 0xB2),
    RGBColor(0xCC, 0x79, 0xA7),
    RGBColor(0xF0, 0xE4, 0x42),
    RGBColor(0x00, 0x00, 0x00),
];

/// The colour of order k (1-based).
pub fn order_colour(k: usize) -> RGBColor {
    PALETTE[(k - 1) % PALETTE.len()]
}

const FONT: &[u8] = include_bytes!("../../fixtures/fonts/DejaVuSans.ttf");
static FONT_ONCE: Once = Once::new();

/// Registers the embedded font as "sans-serif" (once).
pub fn register_font() {
    FONT_ONCE.call_once(|| {
        for style in [FontStyle::Normal, FontStyle::Bold] {
            // The bytes are a valid TrueType font (checked by a test).
            let _ = plotters::style::register_font("sans-serif", style, FONT);
        }
    });
}

/// Writes the figure of `reports` (each with a label) to `path`; the format
/// follows the extension (`.svg` or `.png`).
pub fn write_figure(path: &Path, reports: &[(&str, &Report)]) -> Result<()> {
    let ext = path
        .extension()
        .map(|e| e.to_string_lossy().to_lowercase())
        .unwrap_or_default();
    let size = figure_size(reports);
    let err = |e: String| Error::Plot {
        path: path.to_path_buf(),
        detail: e,
    };
    match ext.as_str() {
        "svg" => {
            let mut out = Vec::new();
            write_svg(&mut out, path, reports)?;
            std::fs::write(path, &out).map_err(|e| err(e.to_string()))
        }
        "png" => {
            register_font();
            let root = BitMapBackend::new(path, size).into_drawing_area();
            draw(&root, reports).map_err(err)?;
            root.present().map_err(|e| err(e.to_string()))
        }
        _ => Err(err(
            "the figure's file name must end in .svg or .png".to_string()
        )),
    }
}

/// Writes the figure of `reports` (each with a label) as SVG to `out`;
/// `name` is what an error calls the figure.
pub fn write_svg(out: &mut impl Write, name: &Path, reports: &[(&str, &Report)]) -> Result<()> {
    let size = figure_size(reports);
    let err = |e: String| Error::Plot {
        path: name.to_path_buf(),
        detail: e,
    };
    register_font();
    let mut svg = String::new();
    {
        let root = SVGBackend::with_string(&mut svg, size).into_drawing_area();
        draw(&root, reports).map_err(err)?;
        root.present().map_err(|e| err(e.to_string()))?;
    }
    out.write_all(svg.as_bytes())
        .map_err(|e| Error::io(name, "write", e))
}

/// Width and height of the figure of `reports`: a row per report.
fn figure_size(reports: &[(&str, &Report)]) -> (u32, u32) {
    (1800, 560 * reports.len().max(1) as u32)
}

type Chart<'a, DB> = ChartContext<'a, DB, Cartesian2d<LogCoord<f64>, LogCoord<f64>>>;
use plotters::coord::combinators::{IntoLogRange, LogCoord};

struct Ranges {
    coc: (f64, f64, f64),
    rank: (f64, f64, f64),
    growth: (f64, f64, f64),
}

fn up(v: f64) -> f64 {
    10f64.powf(v.max(1.0).log10().ceil()).max(10.0)
}

fn ranges(reports: &[(&str, &Report)]) -> Ranges {
    let mut r = Ranges {
        coc: (0.001, 10.0, 10.0),
        rank: (1.0, 10.0, 10.0),
        growth: (1.0, 10.0, 10.0),
    };
    for (_, rep) in reports {
        for o in &rep.orders {
            for &(c, n) in o
                .count_of_counts
                .raw
                .iter()
                .chain(&o.count_of_counts.left_type)
            {
                r.coc.1 = r.coc.1.max(c as f64);
                r.coc.2 = r.coc.2.max(n as f64);
            }
        }
        for &(k, f) in &rep.rank_frequency.points {
            r.rank.1 = r.rank.1.max(k as f64);
            r.rank.2 = r.rank.2.max(f as f64);
        }
        for &(t, v) in rep.growth.iter().flat_map(|g| &g.points) {
            r.growth.1 = r.growth.1.max(t as f64);
            r.growth.2 = r.growth.2.max(v as f64);
        }
    }
    for x in [&mut r.coc, &mut r.rank, &mut r.growth] {
        x.1 = up(x.1);
        x.2 = up(x.2);
    }
    r
}

fn s<E: std::fmt::Debug>(e: E) -> String {
    format!("{e:?}")
}

fn draw<DB: DrawingBackend>(
    root: &DrawingArea<DB, Shift>,
    reports: &[(&str, &Report)],
) -> std::result::Result<(), String>
where
    DB::ErrorType: 'static,
{
    root.fill(&WHITE).map_err(s)?;
    let r = ranges(reports);
    let rows = root.split_evenly((reports.len().max(1), 3));
    for (i, (label, rep)) in reports.iter().enumerate() {
        let cells = &rows[i * 3..i * 3 + 3];
        spectra_panel(&cells[0], label, rep, r.coc)?;
        rank_panel(&cells[1], label, rep, r.rank)?;
        growth_panel(&cells[2], label, rep, r.growth)?;
    }
    Ok(())
}

fn chart<'a, DB: DrawingBackend>(
    area: &'a DrawingArea<DB, Shift>,
    title: &str,
    range: (f64, f64, f64),
    x: &str,
    y: &str,
) -> std::result::Result<Chart<'a, DB>, String>
where
    DB::ErrorType: 'static,
{
    let mut c = ChartBuilder::on(area)
        .caption(title, ("sans-serif", 22))
        .margin(16)
        .x_label_area_size(48)
        .y_label_area_size(72)
        .build_cartesian_2d((1.0..range.1).log_scale(), (range.0..range.2).log_scale())
        .map_err(s)?;
    c.configure_mesh()
        .x_desc(x)
        .y_desc(y)
        .label_style(("sans-serif", 15))
        .axis_desc_style(("sans-serif", 17))
        .light_line_style(RGBColor(0xEE, 0xEE, 0xEE))
        .x_label_formatter(&|v| sci(*v))
        .y_label_formatter(&|v| sci(*v))
        .draw()
        .map_err(s)?;
    Ok(c)
}

/// 0.01, 1, 10, 100, 1000, 1e4, ...
fn sci(v: f64) -> String {
    if (0.001..10_000.0).contains(&v) {
        format!("{v}")
    } else {
        format!("1e{}", v.log10().round())
    }
}

/// Count-of-counts drawn exactly up to this r, binned above.
pub const EXACT_UP_TO: u64 = 10;

/// The points drawn for a count-of-counts spectrum: exact n_r for
/// r ≤ [`EXACT_UP_TO`], then the mean n_r of each logarithmic bin.
pub fn binned_spectrum(v: &[(u64, u64)]) -> Vec<(f64, f64)> {
    let mut out: Vec<(f64, f64)> = v
        .iter()
        .filter(|e| e.0 >= 1 && e.0 <= EXACT_UP_TO && e.1 > 0)
        .map(|&(r, n)| (r as f64, n as f64))
        .collect();
    let Some(&(rmax, _)) = v.last() else {
        return out;
    };
    let mut edges: Vec<u64> = crate::growth::sample_points(rmax.saturating_add(2))
        .into_iter()
        .filter(|&t| t > EXACT_UP_TO)
        .collect();
    edges.insert(0, EXACT_UP_TO + 1);
    edges.dedup();
    edges.push(rmax + 1);
    for w in edges.windows(2) {
        let (lo, hi) = (w[0], w[1]);
        if hi <= lo {
            continue;
        }
        let sum: u64 = v
            .iter()
            .filter(|e| e.0 >= lo && e.0 < hi)
            .map(|e| e.1)
            .sum();
        if sum > 0 {
            let centre = ((lo as f64) * ((hi - 1) as f64)).sqrt();
            out.push((centre, sum as f64 / (hi - lo) as f64));
        }
    }
    out
}

fn pts(v: &[(u64, u64)]) -> Vec<(f64, f64)> {
    v.iter()
        .filter(|p| p.0 > 0 && p.1 > 0)
        .map(|&(a, b)| (a as f64, b as f64))
        .collect()
}

/// A marker of order k at `p`: circle, triangle, square, diamond, cross, …
fn marker<DB: DrawingBackend>(
    c: &mut Chart<'_, DB>,
    k: usize,
    points: &[(f64, f64)],
    colour: RGBColor,
    filled: bool,
) -> std::result::Result<(), String>
where
    DB::ErrorType: 'static,
{
    let style = if filled {
        colour.filled()
    } else {
        colour.stroke_width(2)
    };
    let it = points.iter().copied();
    match (k - 1) % 4 {
        0 => c
            .draw_series(it.map(|p| Circle::new(p, 5, style)))
            .map(|_| ()),
        1 => c
            .draw_series(it.map(|p| TriangleMarker::new(p, 6, style)))
            .map(|_| ()),
        2 => c
            .draw_series(
                it.map(|p| EmptyElement::at(p) + Rectangle::new([(-4, -4), (4, 4)], style)),
            )
            .map(|_| ()),
        _ => c
            .draw_series(it.map(|p| Cross::new(p, 5, colour.stroke_width(2))))
            .map(|_| ()),
    }
    .map_err(s)
}

fn spectra_panel<DB: DrawingBackend>(
    area: &DrawingArea<DB, Shift>,
    label: &str,
    rep: &Report,
    range: (f64, f64, f64),
) -> std::result::Result<(), String>
where
    DB::ErrorType: 'static,
{
    let mut c = chart(
        area,
        &format!("{label}: count-of-counts"),
        range,
        "count r",
        "n_r (mean over log bins above r = 10)",
    )?;
    for o in &rep.orders {
        let colour = order_colour(o.order);
        let raw = binned_spectrum(&o.count_of_counts.raw);
        c.draw_series(LineSeries::new(raw.clone(), colour.stroke_width(2)))
            .map_err(s)?
            .label(format!("order {} raw", o.order))
            .legend(move |(x, y)| {
                PathElement::new(vec![(x, y), (x + 24, y)], colour.stroke_width(2))
            });
        marker(&mut c, o.order, &raw, colour, true)?;
        if o.order > 1 || o.count_of_counts.left_type != o.count_of_counts.raw {
            let adj = binned_spectrum(&o.count_of_counts.left_type);
            c.draw_series(DashedLineSeries::new(
                adj.clone(),
                8,
                5,
                colour.stroke_width(2),
            ))
            .map_err(s)?
            .label(format!("order {} left-type", o.order))
            .legend(move |(x, y)| {
                PathElement::new(vec![(x, y), (x + 8, y)], colour.stroke_width(2))
            });
            marker(&mut c, o.order, &adj, colour, false)?;
        }
    }
    c.configure_series_labels()
        .position(SeriesLabelPosition::UpperRight)
        .label_font(("sans-serif", 14))
        .background_style(WHITE.mix(0.85))
        .border_style(BLACK)
        .draw()
        .map_err(s)?;
    Ok(())
}

fn fit_line<DB: DrawingBackend>(
    c: &mut Chart<'_, DB>,
    fit: &PowerFit,
    sign: f64,
    label: String,
) -> std::result::Result<(), String>
where
    DB::ErrorType: 'static,
{
    let (a, b) = (fit.x_min as f64, fit.x_max as f64);
    let line: Vec<(f64, f64)> = (0..=40)
        .map(|i| {
            let x = a * (b / a).powf(i as f64 / 40.0);
            (x, fit.scale * x.powf(sign * fit.exponent))
        })
        .collect();
    c.draw_series(DashedLineSeries::new(line, 10, 6, BLACK.stroke_width(2)))
        .map_err(s)?
        .label(label)
        .legend(|(x, y)| PathElement::new(vec![(x, y), (x + 10, y)], BLACK.stroke_width(2)));
    Ok(())
}

fn rank_panel<DB: DrawingBackend>(
    area: &DrawingArea<DB, Shift>,
    label: &str,
    rep: &Report,
    range: (f64, f64, f64),
) -> std::result::Result<(), String>
where
    DB::ErrorType: 'static,
{
    let mut c = chart(
        area,
        &format!("{label}: rank-frequency of words"),
        range,
        "rank",
        "frequency",
    )?;
    let p = pts(&rep.rank_frequency.points);
    let blue = PALETTE[4];
    c.draw_series(LineSeries::new(p.clone(), blue.stroke_width(2)))
        .map_err(s)?
        .label("words")
        .legend(move |(x, y)| PathElement::new(vec![(x, y), (x + 24, y)], blue.stroke_width(2)));
    marker(&mut c, 1, &p, blue, true)?;
    if let Some(z) = &rep.rank_frequency.zipf {
        fit_line(
            &mut c,
            z,
            -1.0,
            format!(
                "Zipf fit: s = {:.3}, ranks {}..{}",
                z.exponent, z.x_min, z.x_max
            ),
        )?;
    }
    c.configure_series_labels()
        .position(SeriesLabelPosition::UpperRight)
        .label_font(("sans-serif", 14))
        .background_style(WHITE.mix(0.85))
        .border_style(BLACK)
        .draw()
        .map_err(s)?;
    Ok(())
}

fn growth_panel<DB: DrawingBackend>(
    area: &DrawingArea<DB, Shift>,
    label: &str,
    rep: &Report,
    range: (f64, f64, f64),
) -> std::result::Result<(), String>
where
    DB::ErrorType: 'static,
{
    let mut c = chart(
        area,
        &format!("{label}: vocabulary growth"),
        range,
        "tokens read",
        "types seen",
    )?;
    let Some(g) = &rep.growth else {
        area.draw(&Text::new(
            "no growth curve in this store",
            (200, 250),
            ("sans-serif", 18),
        ))
        .map_err(s)?;
        return Ok(());
    };
    let p = pts(&g.points);
    let green = PALETTE[2];
    c.draw_series(LineSeries::new(p.clone(), green.stroke_width(2)))
        .map_err(s)?
        .label("types")
        .legend(move |(x, y)| PathElement::new(vec![(x, y), (x + 24, y)], green.stroke_width(2)));
    marker(&mut c, 3, &p, green, true)?;
    if let Some(h) = &g.heaps {
        fit_line(
            &mut c,
            h,
            1.0,
            format!("Heaps fit: K = {:.2}, beta = {:.3}", h.scale, h.exponent),
        )?;
    }
    c.configure_series_labels()
        .position(SeriesLabelPosition::UpperLeft)
        .label_font(("sans-serif", 14))
        .background_style(WHITE.mix(0.85))
        .border_style(BLACK)
        .draw()
        .map_err(s)?;
    Ok(())
}

#[cfg(test)]
mod tests {
    #[test]
    fn spectrum_is_exact_then_binned() {
        // n_r = 1 for r = 1..=40: exact up to 10, then bins of mean 1.
        let v: Vec<(u64, u64)> = (1..=40).map(|r| (r, 1)).collect();
        let p = super::binned_spectrum(&v);
        assert_eq!(p.len(), 10 + 13, "{p:?}");
        assert!(p.iter().all(|q| q.1 == 1.0));
        // Sum is kept: one bin [11, 12) holds n_11 = 6 and r = 12, 13 are 0.
        let p = super::binned_spectrum(&[(11, 6), (13, 0)]);
        assert_eq!(p, vec![(11.0, 6.0)]);
    }

    #[test]
    fn embedded_font_is_a_font() {
        // TrueType files start with 0x00010000 (OpenType spec, "Font file").
        assert_eq!(&super::FONT[..4], &[0, 1, 0, 0]);
    }
}
