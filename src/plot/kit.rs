//! The small plotting kit every figure shares: sizes, colours and strokes, markers, text and
//! legends, hatching, writing the SVG file, and curve panels with their axes and ticks (linear,
//! log, dB and % scales) against drive or frequency.

use std::ops::Range;
use std::path::Path;

use plotters::coord::ranged1d::{AsRangedCoord, ValueFormatter};
use plotters::coord::Shift;
use plotters::prelude::*;
use plotters::style::text_anchor::{HPos, Pos, VPos};

use super::PlotError;
use crate::sweep::report::{SweepKind, SweepStep};

/// Width of every figure (px).
pub(crate) const WIDTH: u32 = 1200;
/// Width of the legend column beside a bar chart or spectrum (px).
pub(crate) const SIDE_W: u32 = 300;
/// Height of a one-panel figure (px).
pub(crate) const HEIGHT: u32 = 720;
/// Height of a two-panel figure (px).
pub(crate) const HEIGHT_TWO: u32 = 1000;
/// Font sizes in plotters' units; its SVG backend writes `font-size` as size / 1.24 px, so
/// these give 22.6, 16.1 and 13.7 px (at least 12 px for print).
pub(crate) const TITLE_SIZE: f64 = 28.0;
pub(crate) const DESC_SIZE: f64 = 20.0;
pub(crate) const LABEL_SIZE: f64 = 17.0;
/// Data lines and axes (px).
pub(crate) const LINE_W: u32 = 3;
pub(crate) const AXIS_W: u32 = 2;
pub(crate) const FONT: &str = "sans-serif";

/// A point on the figure, in pixels.
pub(crate) type Px = (i32, i32);

/// Colours, from a palette told apart by most colour-blind readers; markers and dashes carry
/// the same meaning.
pub(crate) const BLUE: RGBColor = RGBColor(0, 90, 181);
pub(crate) const ORANGE: RGBColor = RGBColor(220, 100, 0);
pub(crate) const GREEN: RGBColor = RGBColor(0, 140, 90);
pub(crate) const PURPLE: RGBColor = RGBColor(140, 60, 160);
pub(crate) const GREY: RGBColor = RGBColor(90, 90, 90);
pub(crate) const GRID: RGBColor = RGBColor(225, 225, 225);

pub(crate) fn draw_err<E: std::fmt::Display>(e: E) -> PlotError {
    PlotError::Draw(e.to_string())
}

pub(crate) fn font(size: f64) -> TextStyle<'static> {
    TextStyle::from((FONT, size).into_font()).color(&BLACK)
}

pub(crate) fn stroke(color: RGBColor, width: u32) -> ShapeStyle {
    ShapeStyle {
        color: color.to_rgba(),
        filled: false,
        stroke_width: width,
    }
}

pub(crate) fn write_svg(path: &Path, svg: &str) -> Result<(), PlotError> {
    std::fs::write(path, svg).map_err(|source| PlotError::Write {
        path: path.to_path_buf(),
        source,
    })
}

/// Marker shapes, so series differ by shape as well as colour.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) enum Marker {
    /// Filled circle.
    Circle,
    /// Filled triangle.
    Triangle,
    /// Open circle.
    Ring,
    /// Diagonal cross.
    Cross,
}

/// `p` (absolute pixels) relative to `area`'s corner.
pub(crate) fn rel<DB: DrawingBackend>(area: &DrawingArea<DB, Shift>, p: Px) -> Px {
    let b = area.get_base_pixel();
    (p.0 - b.0, p.1 - b.1)
}

/// A marker at `at` (absolute pixels).
pub(crate) fn draw_marker<DB: DrawingBackend>(
    area: &DrawingArea<DB, Shift>,
    at: Px,
    m: Marker,
    color: RGBColor,
) -> Result<(), PlotError> {
    let at = rel(area, at);
    match m {
        Marker::Circle => area.draw(&Circle::new(at, 6, color.filled())),
        Marker::Triangle => area.draw(&TriangleMarker::new(at, 8, color.filled())),
        Marker::Ring => area.draw(&Circle::new(at, 6, stroke(color, LINE_W))),
        Marker::Cross => area.draw(&Cross::new(at, 6, stroke(color, LINE_W))),
    }
    .map_err(draw_err)
}

/// Text at `at` (absolute pixels), anchored by `pos`.
pub(crate) fn draw_text<DB: DrawingBackend>(
    area: &DrawingArea<DB, Shift>,
    text: &str,
    at: Px,
    size: f64,
    pos: Pos,
) -> Result<(), PlotError> {
    area.draw(&Text::new(text, rel(area, at), font(size).pos(pos)))
        .map_err(draw_err)
}

/// A polyline through `points` (absolute pixels).
pub(crate) fn draw_line<DB: DrawingBackend>(
    area: &DrawingArea<DB, Shift>,
    points: &[Px],
    style: ShapeStyle,
) -> Result<(), PlotError> {
    let pts: Vec<Px> = points.iter().map(|&p| rel(area, p)).collect();
    area.draw(&PathElement::new(pts, style)).map_err(draw_err)
}

/// Width of label text (px), estimated: the SVG viewer sets the text, so allow 0.6 em a
/// character of a sans-serif face.
pub(crate) fn text_width(text: &str) -> i32 {
    (text.chars().count() as f64 * LABEL_SIZE / 1.24 * 0.6).ceil() as i32
}

/// `text`, cut to about `max_px` wide with "..." when longer.
pub(crate) fn fit(text: &str, max_px: i32) -> String {
    if text_width(text) <= max_px {
        return text.to_string();
    }
    let keep = ((max_px as f64 / (LABEL_SIZE / 1.24 * 0.6)) as usize).saturating_sub(3);
    let mut out: String = text.chars().take(keep).collect();
    out.push_str("...");
    out
}

/// What a legend entry shows beside its words.
#[derive(Debug, Clone, Copy)]
pub(crate) enum Glyph {
    /// A line (broken when dashed), with a marker on it when given.
    Line(RGBColor, bool, Option<Marker>),
    /// A filled box.
    Solid(RGBColor),
    /// An outlined, hatched box.
    Hatched(RGBColor),
    /// A marker alone.
    Mark(Marker, RGBColor),
}

/// Hatch lines at 45° filling the pixel box `(x0, y0)..(x1, y1)`, `gap` px apart.
pub(crate) fn hatch(x0: i32, y0: i32, x1: i32, y1: i32, gap: i32) -> Vec<[Px; 2]> {
    let mut out = Vec::new();
    let mut c = x0 - y1;
    while c <= x1 - y0 {
        // Points on x = y + c inside the box.
        let ya = y0.max(x0 - c);
        let yb = y1.min(x1 - c);
        if ya < yb {
            out.push([(ya + c, ya), (yb + c, yb)]);
        }
        c += gap;
    }
    out
}

/// A box outlined and hatched in `color` (absolute pixels, `p0` top left).
pub(crate) fn draw_hatched<DB: DrawingBackend>(
    area: &DrawingArea<DB, Shift>,
    p0: Px,
    p1: Px,
    color: RGBColor,
) -> Result<(), PlotError> {
    let st = stroke(color, AXIS_W);
    draw_line(area, &[p0, (p1.0, p0.1), p1, (p0.0, p1.1), p0], st)?;
    for seg in hatch(p0.0, p0.1, p1.0, p1.1, 8) {
        draw_line(area, &seg, st)?;
    }
    Ok(())
}

/// A legend box inside the plotting area `plot` (absolute pixel ranges), at its upper left or
/// upper right corner.
pub(crate) fn draw_legend<DB: DrawingBackend>(
    area: &DrawingArea<DB, Shift>,
    plot: &(Range<i32>, Range<i32>),
    entries: &[(Glyph, String)],
    right: bool,
) -> Result<(), PlotError> {
    if entries.is_empty() {
        return Ok(());
    }
    const ROW: i32 = 26;
    const GLYPH: i32 = 44;
    // Words longer than the room left are cut with "...".
    let room = plot.0.end - plot.0.start - 24 - GLYPH - 16;
    let words: Vec<String> = entries.iter().map(|e| fit(&e.1, room)).collect();
    let longest = words.iter().map(|w| text_width(w)).max().unwrap_or(0);
    let w = GLYPH + 16 + longest;
    let h = ROW * entries.len() as i32 + 12;
    let x0 = if right {
        plot.0.end - 12 - w
    } else {
        plot.0.start + 12
    };
    let y0 = plot.1.start + 12;
    area.draw(&Rectangle::new(
        [rel(area, (x0, y0)), rel(area, (x0 + w, y0 + h))],
        WHITE.mix(0.9).filled(),
    ))
    .map_err(draw_err)?;
    for (i, ((glyph, _), words)) in entries.iter().zip(&words).enumerate() {
        let y = y0 + 6 + ROW * i as i32 + ROW / 2;
        let (gx0, gx1) = (x0 + 8, x0 + 8 + GLYPH - 8);
        let mid = (gx0 + gx1) / 2;
        match *glyph {
            Glyph::Line(color, dashed, m) => {
                let st = stroke(color, LINE_W);
                if dashed {
                    draw_line(area, &[(gx0, y), (mid - 6, y)], st)?;
                    draw_line(area, &[(mid + 6, y), (gx1, y)], st)?;
                } else {
                    draw_line(area, &[(gx0, y), (gx1, y)], st)?;
                }
                if let Some(m) = m {
                    draw_marker(area, (mid, y), m, color)?;
                }
            }
            Glyph::Solid(color) => {
                area.draw(&Rectangle::new(
                    [rel(area, (gx0, y - 8)), rel(area, (gx1, y + 8))],
                    color.filled(),
                ))
                .map_err(draw_err)?;
            }
            Glyph::Hatched(color) => draw_hatched(area, (gx0, y - 8), (gx1, y + 8), color)?,
            Glyph::Mark(m, color) => draw_marker(area, (mid, y), m, color)?,
        }
        draw_text(
            area,
            words,
            (x0 + GLYPH + 8, y),
            LABEL_SIZE,
            Pos::new(HPos::Left, VPos::Center),
        )?;
    }
    Ok(())
}

/// One curve of a panel.
pub(crate) struct Curve {
    pub(crate) label: String,
    pub(crate) points: Vec<(f64, f64)>,
    pub(crate) color: RGBColor,
    pub(crate) marker: Marker,
    pub(crate) dashed: bool,
}

/// A vertical mark (onset, knee) with its label.
pub(crate) struct VMark {
    pub(crate) x: f64,
    pub(crate) label: String,
    pub(crate) color: RGBColor,
    /// Label row, from the top of the panel (0, 1, ...), so two marks' labels do not overlap.
    pub(crate) row: u32,
}

/// One axis' range.
#[derive(Debug, Clone, Copy)]
pub(crate) enum Axis {
    Linear(f64, f64),
    Log(f64, f64),
}

/// One panel: curves, marks and their words.
pub(crate) struct Panel {
    pub(crate) caption: String,
    pub(crate) x_desc: String,
    pub(crate) y_desc: String,
    pub(crate) x_fmt: fn(&f64) -> String,
    pub(crate) y_fmt: fn(&f64) -> String,
    pub(crate) curves: Vec<Curve>,
    pub(crate) vmarks: Vec<VMark>,
    /// A horizontal dashed line (the THD threshold) and its label.
    pub(crate) hmark: Option<(f64, String)>,
}

pub(crate) fn fmt_db(v: &f64) -> String {
    format!("{v:.0}")
}

pub(crate) fn fmt_pct(v: &f64) -> String {
    if *v >= 1.0 {
        format!("{v:.0}")
    } else {
        let decimals = (-v.log10()).ceil().max(0.0) as usize;
        format!("{v:.decimals$}")
    }
}

pub(crate) fn fmt_hz(v: &f64) -> String {
    if *v >= 1000.0 {
        format!("{}k", v / 1000.0)
    } else {
        format!("{v:.0}")
    }
}

/// Whole decades around `lo..hi` (at least one).
pub(crate) fn decades(lo: f64, hi: f64) -> (f64, f64) {
    let a = 10f64.powf(lo.log10().floor());
    let mut b = 10f64.powf(hi.log10().ceil());
    if b <= a * 1.0001 {
        b = a * 10.0;
    }
    // A hair wider, so rounding in the axis cannot drop the end decades' labels.
    (a * 0.999, b * 1.001)
}

/// Padded linear range of values.
pub(crate) fn padded(lo: f64, hi: f64, pad: f64) -> (f64, f64) {
    if hi - lo < 1e-9 {
        (lo - pad, hi + pad)
    } else {
        let p = (hi - lo) * 0.05;
        (lo - p, hi + p)
    }
}

pub(crate) fn draw_panel_on<DB, X, Y>(
    area: &DrawingArea<DB, Shift>,
    x: X,
    y: Y,
    p: &Panel,
) -> Result<(), PlotError>
where
    DB: DrawingBackend,
    X: AsRangedCoord<Value = f64>,
    Y: AsRangedCoord<Value = f64>,
    X::CoordDescType: ValueFormatter<f64>,
    Y::CoordDescType: ValueFormatter<f64>,
{
    let mut chart = ChartBuilder::on(area)
        .caption(&p.caption, font(TITLE_SIZE))
        .margin(20)
        .x_label_area_size(70)
        .y_label_area_size(100)
        .build_cartesian_2d(x, y)
        .map_err(draw_err)?;
    chart
        .configure_mesh()
        .x_desc(p.x_desc.as_str())
        .y_desc(p.y_desc.as_str())
        .x_labels(10)
        .y_labels(8)
        .x_label_formatter(&p.x_fmt)
        .y_label_formatter(&p.y_fmt)
        .label_style(font(LABEL_SIZE))
        .axis_desc_style(font(DESC_SIZE))
        .axis_style(stroke(BLACK_RGB, AXIS_W))
        .bold_line_style(stroke(GRID, AXIS_W))
        .light_line_style(TRANSPARENT)
        .draw()
        .map_err(draw_err)?;
    let (x_range, y_range) = (chart.x_range(), chart.y_range());
    let plot = chart.plotting_area().get_pixel_range();
    if let Some((level, label)) = &p.hmark {
        chart
            .draw_series(DashedLineSeries::new(
                vec![(x_range.start, *level), (x_range.end, *level)],
                10,
                8,
                stroke(GREY, AXIS_W),
            ))
            .map_err(draw_err)?;
        let (_, py) = chart.backend_coord(&(x_range.start, *level));
        draw_text(
            area,
            label,
            (plot.0.end - 8, py - 6),
            LABEL_SIZE,
            Pos::new(HPos::Right, VPos::Bottom),
        )?;
    }
    for m in &p.vmarks {
        chart
            .draw_series(DashedLineSeries::new(
                vec![(m.x, y_range.start), (m.x, y_range.end)],
                10,
                8,
                stroke(m.color, AXIS_W),
            ))
            .map_err(draw_err)?;
        if m.label.is_empty() {
            continue;
        }
        // Labels sit low, right of their line (where THD has risen, the curve is high), or
        // left of it when they would run past the plot's right edge.
        let (px, _) = chart.backend_coord(&(m.x, y_range.start));
        let (x, h) = if px + 6 + text_width(&m.label) > plot.0.end {
            (px - 6, HPos::Right)
        } else {
            (px + 6, HPos::Left)
        };
        draw_text(
            area,
            &m.label,
            (x, plot.1.end - 10 - 24 * m.row as i32),
            LABEL_SIZE,
            Pos::new(h, VPos::Bottom),
        )?;
    }
    let mut legend = Vec::new();
    for c in &p.curves {
        let st = stroke(c.color, LINE_W);
        if c.dashed {
            chart.draw_series(DashedLineSeries::new(c.points.clone(), 14, 8, st))
        } else {
            chart.draw_series(LineSeries::new(c.points.clone(), st))
        }
        .map_err(draw_err)?;
        for pt in &c.points {
            draw_marker(area, chart.backend_coord(pt), c.marker, c.color)?;
        }
        legend.push((
            Glyph::Line(c.color, c.dashed, Some(c.marker)),
            c.label.clone(),
        ));
    }
    draw_legend(area, &plot, &legend, false)
}

pub(crate) const BLACK_RGB: RGBColor = RGBColor(0, 0, 0);

pub(crate) fn draw_panel<DB: DrawingBackend>(
    area: &DrawingArea<DB, Shift>,
    x: Axis,
    y: Axis,
    p: &Panel,
) -> Result<(), PlotError> {
    match (x, y) {
        (Axis::Linear(a, b), Axis::Linear(c, d)) => draw_panel_on(area, a..b, c..d, p),
        (Axis::Linear(a, b), Axis::Log(c, d)) => draw_panel_on(area, a..b, (c..d).log_scale(), p),
        (Axis::Log(a, b), Axis::Linear(c, d)) => draw_panel_on(area, (a..b).log_scale(), c..d, p),
        (Axis::Log(a, b), Axis::Log(c, d)) => {
            draw_panel_on(area, (a..b).log_scale(), (c..d).log_scale(), p)
        }
    }
}

/// The THD axis of some curves: whole decades around the readings and `extra` values.
pub(crate) fn thd_axis(curves: &[Curve], extra: &[f64]) -> Option<Axis> {
    let ys = curves
        .iter()
        .flat_map(|c| c.points.iter().map(|p| p.1))
        .chain(extra.iter().copied())
        .filter(|v| *v > 0.0 && v.is_finite());
    let (lo, hi) = ys.fold(None, |acc: Option<(f64, f64)>, v| {
        Some(acc.map_or((v, v), |(a, b)| (a.min(v), b.max(v))))
    })?;
    let (a, b) = decades(lo, hi);
    Some(Axis::Log(a, b))
}

pub(crate) fn x_axis(kind: SweepKind, xs: impl Iterator<Item = f64>) -> Option<Axis> {
    let (lo, hi) = xs
        .filter(|v| v.is_finite())
        .fold(None, |acc: Option<(f64, f64)>, v| {
            Some(acc.map_or((v, v), |(a, b)| (a.min(v), b.max(v))))
        })?;
    Some(match kind {
        SweepKind::Level => {
            let (a, b) = padded(lo, hi, 1.0);
            Axis::Linear(a, b)
        }
        SweepKind::Frequency => Axis::Log(lo / 1.25, hi * 1.25),
    })
}

pub(crate) fn step_x(kind: SweepKind, s: &SweepStep) -> f64 {
    match kind {
        SweepKind::Level => s.drive_dbfs,
        SweepKind::Frequency => s.frequency_hz,
    }
}

pub(crate) fn x_words(kind: SweepKind) -> (&'static str, fn(&f64) -> String) {
    match kind {
        SweepKind::Level => ("drive (dBFS, stimulus peak)", fmt_db),
        SweepKind::Frequency => ("frequency (Hz)", fmt_hz),
    }
}

#[cfg(test)]
pub(crate) mod tests {
    use super::*;

    /// Every `font-size` in an SVG, in px.
    fn font_sizes(svg: &str) -> Vec<f64> {
        svg.split("font-size=\"")
            .skip(1)
            .filter_map(|s| s.split('"').next()?.parse().ok())
            .collect()
    }

    /// Widths of every stroke drawn (tags with `stroke="none"` draw none).
    fn stroke_widths(svg: &str) -> Vec<f64> {
        svg.split('<')
            .filter(|tag| !tag.contains("stroke=\"none\""))
            .filter_map(|tag| tag.split("stroke-width=\"").nth(1))
            .filter_map(|s| s.split('"').next()?.parse().ok())
            .collect()
    }

    /// The texts of all `<text>` elements.
    pub(crate) fn texts(svg: &str) -> Vec<String> {
        svg.split("<text")
            .skip(1)
            .filter_map(|s| {
                let body = s.split_once('>')?.1;
                Some(body.split("</text>").next()?.trim().to_string())
            })
            .collect()
    }

    pub(crate) fn legible(svg: &str) {
        // BRINK_SVG_DUMP=DIR keeps every figure the tests draw, to look at in a browser.
        if let Ok(dir) = std::env::var("BRINK_SVG_DUMP") {
            let n = std::time::SystemTime::now()
                .duration_since(std::time::UNIX_EPOCH)
                .map_or(0, |d| d.as_nanos());
            let _ = std::fs::write(format!("{dir}/{n}.svg"), svg);
        }
        assert!(svg.starts_with("<svg"), "{}", &svg[..40.min(svg.len())]);
        assert!(svg.trim_end().ends_with("</svg>"));
        let sizes = font_sizes(svg);
        assert!(!sizes.is_empty());
        assert!(sizes.iter().all(|&s| s >= 12.0), "{sizes:?}");
        let widths = stroke_widths(svg);
        assert!(widths.iter().all(|&w| w >= 2.0), "{widths:?}");
        // White background: the first shape fills the whole figure white.
        assert!(svg.contains("fill=\"#FFFFFF\""), "no white background");
    }

    #[test]
    fn hatch_lines_stay_in_their_box() {
        let lines = hatch(10, 20, 40, 36, 8);
        assert!(!lines.is_empty());
        for [(xa, ya), (xb, yb)] in lines {
            for (x, y) in [(xa, ya), (xb, yb)] {
                assert!(
                    (10..=40).contains(&x) && (20..=36).contains(&y),
                    "({x}, {y})"
                );
            }
            // 45°: as far across as down.
            assert_eq!(xb - xa, yb - ya);
        }
    }
}
