//! SVG figures (`--svg FILE`): a sweep's THD and harmonics against drive, two fingerprints'
//! harmonic bars side by side (or two sweeps' THD curves), and a channel's spectrum with its
//! harmonics marked by order.
//!
//! Drawn with `plotters` on its SVG backend alone: text is written as SVG `<text>` in a generic
//! sans-serif face, so no font library is needed to draw and any browser or printer sets it.
//! For print and screen alike: white background, text at least 12 px, lines at least 2 px,
//! and nothing told by colour alone (markers, dashes, hatching and labels carry the meaning).

use std::io;
use std::ops::Range;
use std::path::{Path, PathBuf};

use plotters::coord::ranged1d::{AsRangedCoord, ValueFormatter};
use plotters::coord::Shift;
use plotters::prelude::*;
use plotters::style::text_anchor::{HPos, Pos, VPos};

use crate::analysis::report::{DistortionReport, ScanReport};
use crate::dsp::spectrum::amplitude_spectrum;
use crate::dsp::window::Window;
use crate::source::wav::WavError;
use crate::sweep::report::{SweepKind, SweepReport};

/// Everything that can go wrong while drawing a figure.
#[derive(Debug, thiserror::Error)]
pub enum PlotError {
    /// The data holds nothing a figure could show.
    #[error("nothing to draw: {0}")]
    Nothing(String),
    /// The drawing library failed.
    #[error("cannot draw the figure: {0}")]
    Draw(String),
    /// The file could not be written.
    #[error("cannot write the figure to {path}: {source}; check that the folder exists and can be written")]
    Write {
        /// The figure's path.
        path: PathBuf,
        /// Why.
        #[source]
        source: io::Error,
    },
    /// The WAV file could not be read again for its spectrum.
    #[error("cannot read the file again for its spectrum: {source}")]
    Read {
        /// The WAV file.
        path: PathBuf,
        /// Why.
        #[source]
        source: WavError,
    },
    /// `--channel` names a channel the file does not have.
    #[error("has no channel {channel} (it has {channels}); pick one with --channel")]
    NoChannel {
        /// The WAV file.
        path: PathBuf,
        /// The channel asked for.
        channel: usize,
        /// How many it has.
        channels: usize,
    },
}

/// Width of every figure (px).
const WIDTH: u32 = 1200;
/// Width of the legend column beside a bar chart or spectrum (px).
const SIDE_W: u32 = 300;
/// Height of a one-panel figure (px).
const HEIGHT: u32 = 720;
/// Height of a two-panel figure (px).
const HEIGHT_TWO: u32 = 1000;
/// Font sizes in plotters' units; its SVG backend writes `font-size` as size / 1.24 px, so
/// these give 22.6, 16.1 and 13.7 px (at least 12 px for print).
const TITLE_SIZE: f64 = 28.0;
const DESC_SIZE: f64 = 20.0;
const LABEL_SIZE: f64 = 17.0;
/// Data lines and axes (px).
const LINE_W: u32 = 3;
const AXIS_W: u32 = 2;
const FONT: &str = "sans-serif";

/// A point on the figure, in pixels.
type Px = (i32, i32);

/// Colours, from a palette told apart by most colour-blind readers; markers and dashes carry
/// the same meaning.
const BLUE: RGBColor = RGBColor(0, 90, 181);
const ORANGE: RGBColor = RGBColor(220, 100, 0);
const GREEN: RGBColor = RGBColor(0, 140, 90);
const PURPLE: RGBColor = RGBColor(140, 60, 160);
const GREY: RGBColor = RGBColor(90, 90, 90);
const GRID: RGBColor = RGBColor(225, 225, 225);

fn draw_err<E: std::fmt::Display>(e: E) -> PlotError {
    PlotError::Draw(e.to_string())
}

fn font(size: f64) -> TextStyle<'static> {
    TextStyle::from((FONT, size).into_font()).color(&BLACK)
}

fn stroke(color: RGBColor, width: u32) -> ShapeStyle {
    ShapeStyle {
        color: color.to_rgba(),
        filled: false,
        stroke_width: width,
    }
}

fn write_svg(path: &Path, svg: &str) -> Result<(), PlotError> {
    std::fs::write(path, svg).map_err(|source| PlotError::Write {
        path: path.to_path_buf(),
        source,
    })
}

/// Marker shapes, so series differ by shape as well as colour.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum Marker {
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
fn rel<DB: DrawingBackend>(area: &DrawingArea<DB, Shift>, p: Px) -> Px {
    let b = area.get_base_pixel();
    (p.0 - b.0, p.1 - b.1)
}

/// A marker at `at` (absolute pixels).
fn draw_marker<DB: DrawingBackend>(
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
fn draw_text<DB: DrawingBackend>(
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
fn draw_line<DB: DrawingBackend>(
    area: &DrawingArea<DB, Shift>,
    points: &[Px],
    style: ShapeStyle,
) -> Result<(), PlotError> {
    let pts: Vec<Px> = points.iter().map(|&p| rel(area, p)).collect();
    area.draw(&PathElement::new(pts, style)).map_err(draw_err)
}

/// Width of label text (px), estimated: the SVG viewer sets the text, so allow 0.6 em a
/// character of a sans-serif face.
fn text_width(text: &str) -> i32 {
    (text.chars().count() as f64 * LABEL_SIZE / 1.24 * 0.6).ceil() as i32
}

/// `text`, cut to about `max_px` wide with "..." when longer.
fn fit(text: &str, max_px: i32) -> String {
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
enum Glyph {
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
fn hatch(x0: i32, y0: i32, x1: i32, y1: i32, gap: i32) -> Vec<[Px; 2]> {
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
fn draw_hatched<DB: DrawingBackend>(
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
fn draw_legend<DB: DrawingBackend>(
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

// ---------------------------------------------------------------------------------------------
// Curves against drive or frequency

/// One curve of a panel.
struct Curve {
    label: String,
    points: Vec<(f64, f64)>,
    color: RGBColor,
    marker: Marker,
    dashed: bool,
}

/// A vertical mark (onset, knee) with its label.
struct VMark {
    x: f64,
    label: String,
    color: RGBColor,
    /// Label row, from the top of the panel (0, 1, ...), so two marks' labels do not overlap.
    row: u32,
}

/// One axis' range.
#[derive(Debug, Clone, Copy)]
enum Axis {
    Linear(f64, f64),
    Log(f64, f64),
}

/// One panel: curves, marks and their words.
struct Panel {
    caption: String,
    x_desc: String,
    y_desc: String,
    x_fmt: fn(&f64) -> String,
    y_fmt: fn(&f64) -> String,
    curves: Vec<Curve>,
    vmarks: Vec<VMark>,
    /// A horizontal dashed line (the THD threshold) and its label.
    hmark: Option<(f64, String)>,
}

fn fmt_db(v: &f64) -> String {
    format!("{v:.0}")
}

fn fmt_pct(v: &f64) -> String {
    if *v >= 1.0 {
        format!("{v:.0}")
    } else {
        let decimals = (-v.log10()).ceil().max(0.0) as usize;
        format!("{v:.decimals$}")
    }
}

fn fmt_hz(v: &f64) -> String {
    if *v >= 1000.0 {
        format!("{}k", v / 1000.0)
    } else {
        format!("{v:.0}")
    }
}

/// Whole decades around `lo..hi` (at least one).
fn decades(lo: f64, hi: f64) -> (f64, f64) {
    let a = 10f64.powf(lo.log10().floor());
    let mut b = 10f64.powf(hi.log10().ceil());
    if b <= a * 1.0001 {
        b = a * 10.0;
    }
    // A hair wider, so rounding in the axis cannot drop the end decades' labels.
    (a * 0.999, b * 1.001)
}

/// Padded linear range of values.
fn padded(lo: f64, hi: f64, pad: f64) -> (f64, f64) {
    if hi - lo < 1e-9 {
        (lo - pad, hi + pad)
    } else {
        let p = (hi - lo) * 0.05;
        (lo - p, hi + p)
    }
}

fn draw_panel_on<DB, X, Y>(
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

const BLACK_RGB: RGBColor = RGBColor(0, 0, 0);

fn draw_panel<DB: DrawingBackend>(
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
fn thd_axis(curves: &[Curve], extra: &[f64]) -> Option<Axis> {
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

fn x_axis(kind: SweepKind, xs: impl Iterator<Item = f64>) -> Option<Axis> {
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

fn step_x(kind: SweepKind, s: &crate::sweep::report::SweepStep) -> f64 {
    match kind {
        SweepKind::Level => s.drive_dbfs,
        SweepKind::Frequency => s.frequency_hz,
    }
}

fn x_words(kind: SweepKind) -> (&'static str, fn(&f64) -> String) {
    match kind {
        SweepKind::Level => ("drive (dBFS, stimulus peak)", fmt_db),
        SweepKind::Frequency => ("frequency (Hz)", fmt_hz),
    }
}

/// Harmonic series of a sweep: H2..H5, each its own colour, marker and (even orders) dashes.
const SWEEP_ORDERS: [(u32, RGBColor, Marker); 4] = [
    (2, ORANGE, Marker::Triangle),
    (3, BLUE, Marker::Circle),
    (4, PURPLE, Marker::Ring),
    (5, GREEN, Marker::Cross),
];

/// The figure of one sweep, as SVG text.
pub fn sweep_svg_string(report: &SweepReport) -> Result<String, PlotError> {
    let kind = report.kind;
    // A two-tone sweep follows IMD where a sine sweep follows THD.
    let figure = if report.steps.iter().any(|s| s.imd_pct.is_some()) {
        "IMD"
    } else {
        "THD"
    };
    let mut steps: Vec<_> = report.steps.iter().collect();
    steps.sort_by(|a, b| step_x(kind, a).total_cmp(&step_x(kind, b)));
    let thd = Curve {
        label: figure.into(),
        points: steps
            .iter()
            .filter_map(|s| {
                s.figure_pct()
                    .filter(|t| *t > 0.0)
                    .map(|t| (step_x(kind, s), t))
            })
            .collect(),
        color: BLUE,
        marker: Marker::Circle,
        dashed: false,
    };
    if thd.points.is_empty() {
        return Err(PlotError::Nothing(format!(
            "no step of the sweep measured a {figure}"
        )));
    }
    let Some(x) = x_axis(kind, steps.iter().map(|s| step_x(kind, s))) else {
        return Err(PlotError::Nothing("the sweep has no steps".into()));
    };
    let harmonics: Vec<Curve> = SWEEP_ORDERS
        .iter()
        .map(|&(order, color, m)| Curve {
            label: format!("H{order} ({})", if order % 2 == 0 { "even" } else { "odd" }),
            points: steps
                .iter()
                .filter_map(|s| {
                    s.harmonics_dbc
                        .get(&order)
                        .copied()
                        .flatten()
                        .filter(|l| l.is_finite())
                        .map(|l| (step_x(kind, s), l.max(-200.0)))
                })
                .collect(),
            color,
            marker: m,
            dashed: order % 2 == 0,
        })
        .filter(|c| !c.points.is_empty())
        .collect();
    let (x_desc, x_fmt) = x_words(kind);
    let mut marks = Vec::new();
    let threshold = report.onset_threshold_pct;
    if kind == SweepKind::Level {
        if let Some(o) = report.onset {
            let ret = o
                .return_dbfs
                .map_or(String::new(), |r| format!(", return {r:.1} dBFS"));
            marks.push(VMark {
                x: o.drive_dbfs,
                label: format!(
                    "onset: {figure} {} % at {:.1} dBFS{ret}",
                    o.thd_pct, o.drive_dbfs
                ),
                color: ORANGE,
                row: 0,
            });
        }
        if let Some(k) = report.knee {
            marks.push(VMark {
                x: k.drive_dbfs,
                label: format!(
                    "knee: {:.1} dBFS (steepest {:.1} dB/dB)",
                    k.drive_dbfs, k.steepest_db_per_db
                ),
                color: PURPLE,
                row: 1,
            });
        }
    }
    let caption = match kind {
        SweepKind::Level => format!(
            "Level sweep at {}: {figure} against drive",
            if figure == "IMD" {
                "a tone pair".to_string()
            } else {
                report
                    .frequency_hz
                    .map_or("--".into(), |f| format!("{f:.0} Hz"))
            }
        ),
        SweepKind::Frequency => format!(
            "Frequency sweep at {}: THD against frequency",
            report
                .drive_dbfs
                .map_or("--".into(), |d| format!("{d:.1} dBFS drive"))
        ),
    };
    let extra = if kind == SweepKind::Level {
        vec![threshold]
    } else {
        vec![]
    };
    let thd_y = thd_axis(std::slice::from_ref(&thd), &extra).unwrap_or(Axis::Log(0.001, 100.0));
    let top = Panel {
        caption,
        x_desc: x_desc.into(),
        y_desc: format!("{figure} (%)"),
        x_fmt,
        y_fmt: fmt_pct,
        curves: vec![thd],
        vmarks: marks
            .iter()
            .map(|m| VMark {
                x: m.x,
                label: m.label.clone(),
                color: m.color,
                row: m.row,
            })
            .collect(),
        hmark: (kind == SweepKind::Level)
            .then(|| (threshold, format!("onset threshold {threshold} %"))),
    };
    let (lo, hi) = harmonics
        .iter()
        .flat_map(|c| c.points.iter().map(|p| p.1))
        .fold((0.0f64, -200.0f64), |(a, b), v| (a.min(v), b.max(v)));
    let lo = ((lo - 10.0) / 20.0).floor() * 20.0;
    let hi = ((hi + 5.0) / 10.0).ceil() * 10.0;
    let bottom = Panel {
        caption: "Harmonics H2..H5 against the fundamental".into(),
        x_desc: x_desc.into(),
        y_desc: "level (dBc)".into(),
        x_fmt,
        y_fmt: fmt_db,
        curves: harmonics,
        vmarks: marks
            .into_iter()
            .map(|mut m| {
                m.label = String::new();
                m
            })
            .collect(),
        hmark: None,
    };
    let mut svg = String::new();
    if bottom.curves.is_empty() {
        // No harmonics to show (a two-tone sweep): the one panel alone.
        let root = SVGBackend::with_string(&mut svg, (WIDTH, HEIGHT_TWO / 2)).into_drawing_area();
        root.fill(&WHITE).map_err(draw_err)?;
        draw_panel(&root, x, thd_y, &top)?;
        root.present().map_err(draw_err)?;
        drop(root);
        return Ok(svg);
    }
    {
        let root = SVGBackend::with_string(&mut svg, (WIDTH, HEIGHT_TWO)).into_drawing_area();
        root.fill(&WHITE).map_err(draw_err)?;
        let (up, down) = root.split_vertically(HEIGHT_TWO / 2);
        draw_panel(&up, x, thd_y, &top)?;
        draw_panel(
            &down,
            x,
            Axis::Linear(lo.max(-200.0), hi.min(20.0)),
            &bottom,
        )?;
        root.present().map_err(draw_err)?;
    }
    Ok(svg)
}

/// Draw one sweep into `path`: for a level sweep, THD (%) and H2..H5 (dBc) against drive
/// (dBFS) with the onset and knee marked; for a frequency sweep, the same against frequency
/// on a log axis.
pub fn sweep_svg(report: &SweepReport, path: &Path) -> Result<(), PlotError> {
    write_svg(path, &sweep_svg_string(report)?)
}

// ---------------------------------------------------------------------------------------------
// Two inputs side by side

/// What `compare` draws: two fingerprints or two sweeps, each with its label.
pub enum Pair<'a> {
    /// Harmonic bars of A beside B per order.
    Fingerprints {
        /// A and B, each with its label.
        sides: [(&'a str, &'a DistortionReport); 2],
        /// Orders up to this one are always drawn (as the comparison's table shows them);
        /// higher ones follow when measured.
        min_top_order: usize,
    },
    /// THD curves of two sweeps of one kind.
    Sweeps([(&'a str, &'a SweepReport); 2]),
}

/// The comparison figure, as SVG text.
pub fn compare_svg_string(pair: &Pair) -> Result<String, PlotError> {
    match pair {
        Pair::Fingerprints {
            sides,
            min_top_order,
        } => bars_svg(sides, *min_top_order),
        Pair::Sweeps(sides) => sweeps_svg(sides),
    }
}

/// Draw a comparison into `path`: harmonic bars of A beside B per order (A solid, B hatched;
/// odd orders topped with a circle, even with a triangle, and named under the axis), or the
/// THD curves of two sweeps with their onsets.
pub fn compare_svg(pair: &Pair, path: &Path) -> Result<(), PlotError> {
    write_svg(path, &compare_svg_string(pair)?)
}

fn bars_svg(
    sides: &[(&str, &DistortionReport); 2],
    min_top_order: usize,
) -> Result<String, PlotError> {
    let top_order = sides
        .iter()
        .flat_map(|(_, d)| d.harmonics.iter().map(|h| h.order))
        .max()
        .unwrap_or(0)
        .max(min_top_order);
    let level = |d: &DistortionReport, n: usize| {
        d.harmonics
            .iter()
            .find(|h| h.order == n)
            .and_then(|h| h.level_dbc)
            .filter(|l| l.is_finite())
    };
    let lowest = sides
        .iter()
        .flat_map(|(_, d)| (2..=top_order).filter_map(move |n| level(d, n)))
        .fold(f64::INFINITY, f64::min);
    if !lowest.is_finite() {
        return Err(PlotError::Nothing(
            "neither fingerprint has a harmonic within the band".into(),
        ));
    }
    let floor = (((lowest - 10.0) / 20.0).floor() * 20.0).max(-200.0);
    let thd = |d: &DistortionReport| d.thd_pct.map_or("--".into(), |t| format!("{t:.3} %"));
    let caption = format!(
        "Harmonic fingerprints, A beside B (THD: A {}, B {})",
        thd(sides[0].1),
        thd(sides[1].1)
    );
    let mut svg = String::new();
    {
        let root = SVGBackend::with_string(&mut svg, (WIDTH, HEIGHT)).into_drawing_area();
        root.fill(&WHITE).map_err(draw_err)?;
        let (head, body) = root.split_vertically(50);
        draw_text(
            &head,
            &caption,
            (WIDTH as i32 / 2, 14),
            TITLE_SIZE - 2.0,
            Pos::new(HPos::Center, VPos::Top),
        )?;
        let (main, side) = body.split_horizontally(WIDTH - SIDE_W);
        let mut chart = ChartBuilder::on(&main)
            .margin(20)
            .x_label_area_size(90)
            .y_label_area_size(100)
            .build_cartesian_2d(1.4f64..top_order as f64 + 0.6, floor..0.0f64)
            .map_err(draw_err)?;
        chart
            .configure_mesh()
            .disable_x_mesh()
            .x_labels(0)
            .y_labels(10)
            .x_desc("harmonic order (circle on top: odd order; triangle: even order)")
            .y_desc("level (dBc, re the fundamental)")
            .y_label_formatter(&fmt_db)
            .label_style(font(LABEL_SIZE))
            .axis_desc_style(font(DESC_SIZE))
            .axis_style(stroke(BLACK_RGB, AXIS_W))
            .bold_line_style(stroke(GRID, AXIS_W))
            .light_line_style(TRANSPARENT)
            .draw()
            .map_err(draw_err)?;
        const HALF: f64 = 0.36;
        for n in 2..=top_order {
            let xn = n as f64;
            let m = if n % 2 == 0 {
                Marker::Triangle
            } else {
                Marker::Circle
            };
            for (side, (x0, x1), color) in [
                (0, (xn - HALF, xn - 0.02), BLUE),
                (1, (xn + 0.02, xn + HALF), ORANGE),
            ] {
                let Some(l) = level(sides[side].1, n) else {
                    continue;
                };
                let l = l.max(floor);
                let (p0, p1) = (
                    chart.backend_coord(&(x0, l)),
                    chart.backend_coord(&(x1, floor)),
                );
                if side == 0 {
                    root.draw(&Rectangle::new([p0, p1], color.filled()))
                        .map_err(draw_err)?;
                } else {
                    draw_hatched(&root, p0, p1, color)?;
                }
                draw_marker(&root, ((p0.0 + p1.0) / 2, p0.1 - 10), m, BLACK_RGB)?;
            }
            // The order and its family under the axis.
            let (bx, by) = chart.backend_coord(&(xn, floor));
            let family = if n % 2 == 0 { "even" } else { "odd" };
            for (row, text) in [(0, format!("H{n}")), (1, family.to_string())] {
                draw_text(
                    &root,
                    &text,
                    (bx, by + 12 + 20 * row),
                    LABEL_SIZE,
                    Pos::new(HPos::Center, VPos::Top),
                )?;
            }
        }
        let plot = chart.plotting_area().get_pixel_range();
        draw_legend(
            &root,
            &(side.get_pixel_range().0, plot.1),
            &[
                (Glyph::Solid(BLUE), format!("A (solid): {}", sides[0].0)),
                (
                    Glyph::Hatched(ORANGE),
                    format!("B (hatched): {}", sides[1].0),
                ),
                (
                    Glyph::Mark(Marker::Circle, BLACK_RGB),
                    "odd order".to_string(),
                ),
                (
                    Glyph::Mark(Marker::Triangle, BLACK_RGB),
                    "even order".to_string(),
                ),
            ],
            false,
        )?;
        root.present().map_err(draw_err)?;
    }
    Ok(svg)
}

fn sweeps_svg(sides: &[(&str, &SweepReport); 2]) -> Result<String, PlotError> {
    let kind = sides[0].1.kind;
    let styles = [
        (BLUE, Marker::Circle, false),
        (ORANGE, Marker::Triangle, true),
    ];
    let mut curves = Vec::new();
    let mut marks = Vec::new();
    for (i, ((name, r), (color, m, dashed))) in sides.iter().zip(styles).enumerate() {
        let mut pts: Vec<(f64, f64)> = r
            .steps
            .iter()
            .filter_map(|s| s.thd_pct.filter(|t| *t > 0.0).map(|t| (step_x(kind, s), t)))
            .collect();
        pts.sort_by(|a, b| a.0.total_cmp(&b.0));
        let side = if i == 0 { "A" } else { "B" };
        curves.push(Curve {
            label: format!("{side}: {name}"),
            points: pts,
            color,
            marker: m,
            dashed,
        });
        if kind == SweepKind::Level {
            if let Some(o) = r.onset {
                marks.push(VMark {
                    x: o.drive_dbfs,
                    label: format!("{side} onset {:.1} dBFS", o.drive_dbfs),
                    color,
                    row: i as u32,
                });
            }
        }
    }
    if curves.iter().all(|c| c.points.is_empty()) {
        return Err(PlotError::Nothing("neither sweep measured a THD".into()));
    }
    let Some(x) = x_axis(
        kind,
        sides
            .iter()
            .flat_map(|(_, r)| r.steps.iter().map(|s| step_x(kind, s))),
    ) else {
        return Err(PlotError::Nothing("the sweeps have no steps".into()));
    };
    let threshold = sides[0].1.onset_threshold_pct;
    let extra = if kind == SweepKind::Level {
        vec![threshold]
    } else {
        vec![]
    };
    let y = thd_axis(&curves, &extra).unwrap_or(Axis::Log(0.001, 100.0));
    let (x_desc, x_fmt) = x_words(kind);
    let panel = Panel {
        caption: match kind {
            SweepKind::Level => "THD against drive: A and B".into(),
            SweepKind::Frequency => "THD against frequency: A and B".into(),
        },
        x_desc: x_desc.into(),
        y_desc: "THD (%)".into(),
        x_fmt,
        y_fmt: fmt_pct,
        curves,
        vmarks: marks,
        hmark: (kind == SweepKind::Level)
            .then(|| (threshold, format!("onset threshold {threshold} %"))),
    };
    let mut svg = String::new();
    {
        let root = SVGBackend::with_string(&mut svg, (WIDTH, HEIGHT)).into_drawing_area();
        root.fill(&WHITE).map_err(draw_err)?;
        draw_panel(&root, x, y, &panel)?;
        root.present().map_err(draw_err)?;
    }
    Ok(svg)
}

// ---------------------------------------------------------------------------------------------
// Spectrum

/// One channel's spectrum over its tone span, ready to draw.
#[derive(Debug, Clone, PartialEq)]
pub struct Spectrum {
    /// What it shows, for the title ("take.wav ch 1").
    pub label: String,
    /// Bin spacing (Hz).
    pub bin_hz: f64,
    /// Peak amplitude per bin (full scale = 1), bins 0..=N/2.
    pub amplitude: Vec<f64>,
    /// Sample rate (Hz).
    pub sample_rate_hz: u32,
    /// The analysed span (s).
    pub span_s: (f64, f64),
    /// The fundamental (Hz, dBFS), when the channel carries a tone.
    pub fundamental: Option<(f64, f64)>,
    /// Harmonics to mark: order, frequency (Hz), level (dBFS).
    pub harmonics: Vec<(usize, f64, f64)>,
    /// THD (%), for the subtitle.
    pub thd_pct: Option<f64>,
}

/// The window the spectrum figure uses: the harmonic measurement's own 7-term Blackman-Harris
/// (sidelobes near −180 dB, so the figure's floor is the signal's, not the window's).
pub const SPECTRUM_WINDOW: Window = Window::BlackmanHarris7;

impl Spectrum {
    /// The spectrum of samples `x` (one channel, full scale ±1) at `rate`, with the harmonics of
    /// `distortion` (when given) marked.
    pub fn new(
        label: &str,
        x: &[f64],
        rate: u32,
        span_s: (f64, f64),
        distortion: Option<&DistortionReport>,
    ) -> Spectrum {
        let amplitude = amplitude_spectrum(x, SPECTRUM_WINDOW);
        let fundamental =
            distortion.and_then(|d| d.fundamental_dbfs.map(|l| (d.fundamental_hz, l)));
        let harmonics = match (distortion, fundamental) {
            (Some(d), Some((_, f_db))) => d
                .harmonics
                .iter()
                .filter_map(|h| h.level_dbc.map(|l| (h.order, h.freq_hz, f_db + l)))
                .collect(),
            _ => Vec::new(),
        };
        Spectrum {
            label: label.to_string(),
            bin_hz: if x.is_empty() {
                0.0
            } else {
                f64::from(rate) / x.len() as f64
            },
            amplitude,
            sample_rate_hz: rate,
            span_s,
            fundamental,
            harmonics,
            thd_pct: distortion.and_then(|d| d.thd_pct),
        }
    }

    /// Points to draw on a log frequency axis from `f_lo` to Nyquist: the highest bin in each of
    /// `buckets` equal steps of log frequency (so no peak is lost), in dBFS.
    fn decimated(&self, f_lo: f64, buckets: usize) -> Vec<(f64, f64)> {
        let nyq = f64::from(self.sample_rate_hz) / 2.0;
        let span = (nyq / f_lo).ln();
        let mut best: Vec<Option<(f64, f64)>> = vec![None; buckets];
        for (m, &a) in self.amplitude.iter().enumerate() {
            let f = m as f64 * self.bin_hz;
            if f < f_lo || f > nyq {
                continue;
            }
            let b = (((f / f_lo).ln() / span) * buckets as f64) as usize;
            let b = b.min(buckets - 1);
            if best[b].is_none_or(|(_, prev)| a > prev) {
                best[b] = Some((f, a));
            }
        }
        best.into_iter()
            .flatten()
            .map(|(f, a)| (f, 20.0 * a.max(1e-12).log10()))
            .collect()
    }
}

/// The spectrum figure, as SVG text.
pub fn spectrum_svg_string(s: &Spectrum) -> Result<String, PlotError> {
    let nyq = f64::from(s.sample_rate_hz) / 2.0;
    let f_lo = 10f64.max(s.bin_hz);
    if s.amplitude.len() < 4 || f_lo >= nyq {
        return Err(PlotError::Nothing(
            "the span is too short for a spectrum".into(),
        ));
    }
    let points = s.decimated(f_lo, 1400);
    let mut levels: Vec<f64> = points.iter().map(|p| p.1).collect();
    let median = crate::dsp::spectrum::median(&mut levels).unwrap_or(-120.0);
    let lowest_mark = s
        .harmonics
        .iter()
        .map(|h| h.2)
        .fold(f64::INFINITY, f64::min);
    let floor = ((median - 20.0).min(lowest_mark - 10.0) / 20.0).floor() * 20.0;
    let floor = floor.clamp(-200.0, -40.0);
    let peak = points.iter().map(|p| p.1).fold(f64::NEG_INFINITY, f64::max);
    let top = if peak > -3.0 { 10.0 } else { 0.0 };
    let points: Vec<(f64, f64)> = points.into_iter().map(|(f, l)| (f, l.max(floor))).collect();
    let caption = format!(
        "Spectrum of {} ({:.3}-{:.3} s)",
        s.label, s.span_s.0, s.span_s.1
    );
    let sub = match (s.fundamental, s.thd_pct) {
        (Some((f, l)), Some(t)) => format!(
            "fundamental {f:.2} Hz at {l:.2} dBFS, THD {t:.4} %; 7-term Blackman-Harris window, peak-calibrated"
        ),
        (Some((f, l)), None) => format!(
            "fundamental {f:.2} Hz at {l:.2} dBFS; 7-term Blackman-Harris window, peak-calibrated"
        ),
        _ => "no steady tone: no harmonics to mark; 7-term Blackman-Harris window, peak-calibrated"
            .to_string(),
    };
    let mut svg = String::new();
    {
        let root = SVGBackend::with_string(&mut svg, (WIDTH, HEIGHT)).into_drawing_area();
        root.fill(&WHITE).map_err(draw_err)?;
        let (head, body) = root.split_vertically(70);
        head.draw(&Text::new(
            caption,
            (WIDTH as i32 / 2, 10),
            font(TITLE_SIZE - 2.0).pos(Pos::new(HPos::Center, VPos::Top)),
        ))
        .map_err(draw_err)?;
        head.draw(&Text::new(
            sub,
            (WIDTH as i32 / 2, 44),
            font(LABEL_SIZE).pos(Pos::new(HPos::Center, VPos::Top)),
        ))
        .map_err(draw_err)?;
        let (main, side) = body.split_horizontally(WIDTH - SIDE_W);
        let mut chart = ChartBuilder::on(&main)
            .margin(20)
            .x_label_area_size(70)
            .y_label_area_size(100)
            .build_cartesian_2d((f_lo..nyq).log_scale(), floor..top)
            .map_err(draw_err)?;
        chart
            .configure_mesh()
            .x_desc("frequency (Hz)")
            .y_desc("level (dBFS, sine peak)")
            .x_labels(10)
            .y_labels(12)
            .x_label_formatter(&fmt_hz)
            .y_label_formatter(&fmt_db)
            .label_style(font(LABEL_SIZE))
            .axis_desc_style(font(DESC_SIZE))
            .axis_style(stroke(BLACK_RGB, AXIS_W))
            .bold_line_style(stroke(GRID, AXIS_W))
            .light_line_style(TRANSPARENT)
            .draw()
            .map_err(draw_err)?;
        chart
            .draw_series(LineSeries::new(points, stroke(GREY, AXIS_W)))
            .map_err(draw_err)?;
        // The fundamental and the harmonics, marked and named by order; a label that would
        // crowd the one before it is left out (its marker stays).
        let mut marks: Vec<(usize, f64, f64)> = Vec::new();
        if let Some((f, l)) = s.fundamental {
            marks.push((1, f, l));
        }
        marks.extend(
            s.harmonics
                .iter()
                .copied()
                .filter(|h| h.1 >= f_lo && h.1 <= nyq),
        );
        let mut last_label_x: Option<i32> = None;
        for (order, f, l) in marks {
            let l = l.max(floor);
            let (m, color) = if order % 2 == 0 {
                (Marker::Triangle, ORANGE)
            } else {
                (Marker::Circle, BLUE)
            };
            let at = chart.backend_coord(&(f, l));
            draw_marker(&root, at, m, color)?;
            if last_label_x.is_none_or(|x| at.0 - x >= 30) {
                last_label_x = Some(at.0);
                draw_text(
                    &root,
                    &format!("H{order}"),
                    (at.0, at.1 - 14),
                    LABEL_SIZE,
                    Pos::new(HPos::Center, VPos::Bottom),
                )?;
            }
        }
        let plot = chart.plotting_area().get_pixel_range();
        draw_legend(
            &root,
            &(side.get_pixel_range().0, plot.1),
            &[
                (Glyph::Line(GREY, false, None), "spectrum".to_string()),
                (
                    Glyph::Mark(Marker::Circle, BLUE),
                    "odd order (H1: fundamental)".to_string(),
                ),
                (
                    Glyph::Mark(Marker::Triangle, ORANGE),
                    "even order".to_string(),
                ),
            ],
            false,
        )?;
        root.present().map_err(draw_err)?;
    }
    Ok(svg)
}

/// Draw a spectrum into `path`: dBFS against log frequency, the fundamental and harmonics
/// marked by order.
pub fn spectrum_svg(s: &Spectrum, path: &Path) -> Result<(), PlotError> {
    write_svg(path, &spectrum_svg_string(s)?)
}

/// `scan --svg`: the spectrum of one channel of the scanned `wav` over its tone span. The
/// channel is `channel` (from 1) or else the first carrying a tone, else channel 1; returns
/// the channel drawn.
pub fn scan_spectrum_svg(
    wav: &Path,
    report: &ScanReport,
    channel: Option<usize>,
    tone_span_s: f64,
    out: &Path,
) -> Result<usize, PlotError> {
    let ch = match channel {
        Some(c) if (1..=report.channels.len()).contains(&c) => c,
        Some(c) => {
            return Err(PlotError::NoChannel {
                path: wav.to_path_buf(),
                channel: c,
                channels: report.channels.len(),
            })
        }
        None => report
            .channels
            .iter()
            .find(|c| c.distortion.is_some())
            .map_or(1, |c| c.channel),
    };
    let Some(c) = report.channels.iter().find(|c| c.channel == ch) else {
        return Err(PlotError::Nothing(format!(
            "{} has no channels",
            wav.display()
        )));
    };
    let rate = f64::from(report.sample_rate_hz);
    let range: Range<u64> = match &c.distortion {
        Some(d) => (d.span_start_s * rate).round() as u64..(d.span_end_s * rate).round() as u64,
        None => {
            crate::scan::centre_span(report.frames, (tone_span_s * rate).round().max(1.0) as u64)
        }
    };
    let x =
        crate::scan::read_channel(wav, ch, range.clone()).map_err(|source| PlotError::Read {
            path: wav.to_path_buf(),
            source,
        })?;
    let name = wav.file_name().map_or_else(
        || wav.display().to_string(),
        |n| n.to_string_lossy().into_owned(),
    );
    let s = Spectrum::new(
        &format!("{name} ch {ch}"),
        &x,
        report.sample_rate_hz,
        (range.start as f64 / rate, range.end as f64 / rate),
        c.distortion.as_ref(),
    );
    spectrum_svg(&s, out)?;
    Ok(ch)
}

/// Where `scan --svg OUT` writes each input's figure: OUT itself for one input; for several,
/// OUT's name with each input's file stem added (`spectrum.svg` + `take1.wav` →
/// `spectrum-take1.svg`). Two inputs with the same stem are refused.
pub fn per_file_paths(out: &Path, inputs: &[PathBuf]) -> Result<Vec<PathBuf>, String> {
    if inputs.len() <= 1 {
        return Ok(vec![out.to_path_buf(); inputs.len()]);
    }
    let stem = out
        .file_stem()
        .map_or_else(|| "spectrum".into(), |s| s.to_string_lossy().into_owned());
    let ext = out
        .extension()
        .map_or_else(|| "svg".into(), |e| e.to_string_lossy().into_owned());
    let mut seen = std::collections::HashMap::new();
    let mut paths = Vec::with_capacity(inputs.len());
    for input in inputs {
        let in_stem = input
            .file_stem()
            .map_or_else(|| "input".into(), |s| s.to_string_lossy().into_owned());
        if let Some(prev) = seen.insert(in_stem.clone(), input.clone()) {
            return Err(format!(
                "--svg with several files names each figure after its file ({stem}-{in_stem}.{ext}), but {} and {} share the name '{in_stem}'; scan them one at a time",
                prev.display(),
                input.display()
            ));
        }
        paths.push(out.with_file_name(format!("{stem}-{in_stem}.{ext}")));
    }
    Ok(paths)
}

#[cfg(test)]
mod tests {
    use std::collections::BTreeMap;

    use super::*;
    use crate::analysis::report::HarmonicReport;
    use crate::sweep::report::{SweepStep, SWEEP_FORMAT};

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
    fn texts(svg: &str) -> Vec<String> {
        svg.split("<text")
            .skip(1)
            .filter_map(|s| {
                let body = s.split_once('>')?.1;
                Some(body.split("</text>").next()?.trim().to_string())
            })
            .collect()
    }

    fn legible(svg: &str) {
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

    /// A step from its `brink-sweep-1` JSON form: H2..H5 falling 3 dB per order below THD.
    fn step(drive: f64, thd: f64) -> SweepStep {
        let h: BTreeMap<String, f64> = (2..=5)
            .map(|k| {
                (
                    k.to_string(),
                    20.0 * (thd / 100.0).log10() - 3.0 * f64::from(k),
                )
            })
            .collect();
        serde_json::from_value(serde_json::json!({
            "drive_dbfs": drive, "frequency_hz": 997.0, "return_dbfs": drive - 1.0,
            "return_hz": 997.0, "return_peak_dbfs": drive, "thd_pct": thd, "thd_n_db": null,
            "odd_even_db": null, "falloff_db_per_octave": null, "harmonics_dbc": h
        }))
        .expect("a sweep step")
    }

    fn sweep() -> SweepReport {
        serde_json::from_value(serde_json::json!({
            "format": SWEEP_FORMAT, "kind": "level", "frequency_hz": 997.0, "drive_dbfs": null,
            "sample_rate_hz": 48000, "host": "test", "output_device": "o", "output_channel": 1,
            "input_device": "i", "input_channel": 1, "onset_threshold_pct": 1.0,
            "loop_gain_db": -1.0,
            "steps": [step(-30.0, 0.01), step(-20.0, 0.1), step(-10.0, 10.0)],
            "onset": {"thd_pct": 1.0, "drive_dbfs": -15.0, "return_dbfs": -16.0},
            "knee": {"drive_dbfs": -20.0, "return_dbfs": -21.0, "thd_pct": 0.1,
                     "steepest_db_per_db": 4.0}
        }))
        .expect("a sweep report")
    }

    #[test]
    fn sweep_figure_has_titles_axes_series_and_marks() {
        let svg = sweep_svg_string(&sweep()).expect("draws");
        legible(&svg);
        let t = texts(&svg);
        let has = |s: &str| t.iter().any(|x| x.contains(s));
        assert!(has("Level sweep at 997 Hz"), "{t:?}");
        assert!(has("drive (dBFS"), "{t:?}");
        assert!(has("THD (%)") && has("level (dBc)"), "{t:?}");
        assert!(has("onset: THD 1 % at -15.0 dBFS"), "{t:?}");
        assert!(has("knee: -20.0 dBFS"), "{t:?}");
        for k in ["H2 (even)", "H3 (odd)", "H4 (even)", "H5 (odd)"] {
            assert!(has(k), "{k} in {t:?}");
        }
        // One polyline per curve (THD, H2..H5) and more for dashes, marks and the legend.
        assert!(svg.matches("<polyline").count() >= 5);
        // The frequency sweep draws against a log frequency axis.
        let mut f = sweep();
        f.kind = SweepKind::Frequency;
        f.frequency_hz = None;
        f.drive_dbfs = Some(-20.0);
        for (s, hz) in f.steps.iter_mut().zip([100.0, 1000.0, 10000.0]) {
            s.frequency_hz = hz;
        }
        let svg = sweep_svg_string(&f).expect("draws");
        let t = texts(&svg);
        assert!(
            t.iter().any(|x| x == "1k") && t.iter().any(|x| x == "10k"),
            "{t:?}"
        );
        assert!(t.iter().any(|x| x.contains("frequency (Hz)")));
    }

    #[test]
    fn two_sweeps_draw_two_curves_with_their_onsets() {
        let a = sweep();
        let mut b = sweep();
        for s in &mut b.steps {
            s.drive_dbfs += 6.0;
        }
        b.onset = b.onset.map(|mut o| {
            o.drive_dbfs += 6.0;
            o
        });
        let svg =
            compare_svg_string(&Pair::Sweeps([("a.json", &a), ("b.json", &b)])).expect("draws");
        legible(&svg);
        let t = texts(&svg);
        for want in [
            "THD against drive: A and B",
            "THD (%)",
            "A: a.json",
            "B: b.json",
            "A onset -15.0 dBFS",
            "B onset -9.0 dBFS",
            "onset threshold 1 %",
        ] {
            assert!(t.iter().any(|x| x == want), "{want} in {t:?}");
        }
        // A solid line, B dashed (many short polylines), plus the marks.
        assert!(svg.matches("<polyline").count() >= 4);
    }

    #[test]
    fn a_two_tone_sweep_draws_imd_in_one_panel() {
        let mut r = sweep();
        for s in &mut r.steps {
            s.imd_pct = s.thd_pct.take();
            s.harmonics_dbc.clear();
        }
        let svg = sweep_svg_string(&r).expect("draws");
        legible(&svg);
        let t = texts(&svg);
        let has = |s: &str| t.iter().any(|x| x.contains(s));
        assert!(
            has("Level sweep at a tone pair: IMD against drive"),
            "{t:?}"
        );
        assert!(has("IMD (%)") && has("onset: IMD 1 %"), "{t:?}");
        assert!(!has("level (dBc)") && !has("THD"), "{t:?}");
    }

    #[test]
    fn empty_sweep_is_refused() {
        let mut r = sweep();
        for s in &mut r.steps {
            s.thd_pct = None;
        }
        assert!(matches!(sweep_svg_string(&r), Err(PlotError::Nothing(_))));
    }

    fn distortion(levels: &[(usize, f64)]) -> DistortionReport {
        DistortionReport {
            fundamental_hz: 997.0,
            fundamental_dbfs: Some(-6.0),
            thd_pct: Some(5.0),
            thd_db: None,
            thd_n_db: None,
            thd_n_pct: 5.0,
            sinad_db: None,
            enob_bits: None,
            odd_even_db: None,
            falloff_db_per_octave: None,
            noise_floor_dbc: None,
            span_start_s: 0.0,
            span_end_s: 1.0,
            harmonics: levels
                .iter()
                .map(|&(order, l)| HarmonicReport {
                    order,
                    freq_hz: 997.0 * order as f64,
                    level_dbc: Some(l),
                    phase_deg: 0.0,
                    resolved: true,
                })
                .collect(),
        }
    }

    #[test]
    fn bars_name_every_order_and_tell_odd_from_even() {
        let a = distortion(&[(2, -90.0), (3, -20.0), (4, -95.0), (5, -30.0)]);
        let b = distortion(&[(2, -25.0), (3, -40.0), (4, -50.0), (5, -60.0)]);
        let svg = compare_svg_string(&Pair::Fingerprints {
            sides: [("a.wav ch 1", &a), ("b.wav ch 1", &b)],
            min_top_order: 10,
        })
        .expect("draws");
        legible(&svg);
        let t = texts(&svg);
        for n in 2..=10 {
            assert!(t.iter().any(|x| x == &format!("H{n}")), "H{n} in {t:?}");
        }
        // H3, H5, H7, H9 odd; H2..H10 even.
        assert_eq!(t.iter().filter(|x| *x == "odd").count(), 4, "{t:?}");
        assert_eq!(t.iter().filter(|x| *x == "even").count(), 5, "{t:?}");
        assert!(t.iter().any(|x| x == "A (solid): a.wav ch 1"), "{t:?}");
        assert!(t.iter().any(|x| x == "B (hatched): b.wav ch 1"), "{t:?}");
        assert!(t
            .iter()
            .any(|x| x.starts_with("Harmonic fingerprints, A beside B")));
        assert!(t.iter().any(|x| x.contains("level (dBc")));
        // 4 + 4 bars: A's filled rectangles, B's outlines (polylines) with hatching; a marker on
        // each: circles on odd orders, triangles (polygons) on even ones, and one of each in the
        // legend.
        assert_eq!(svg.matches("<circle").count(), 4 + 1, "circles");
        assert_eq!(svg.matches("<polygon").count(), 4 + 1, "triangles");
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

    #[test]
    fn spectrum_marks_harmonics_by_order() {
        // 1 s of a 1 kHz sine at 0.5 with H2 at −40 dBc and H3 at −60 dBc.
        let rate = 48_000;
        let x: Vec<f64> = (0..rate)
            .map(|i| {
                let t = 2.0 * std::f64::consts::PI * 1000.0 * f64::from(i) / f64::from(rate);
                0.5 * t.sin() + 0.005 * (2.0 * t).sin() + 0.0005 * (3.0 * t).sin()
            })
            .collect();
        let d = DistortionReport {
            fundamental_dbfs: Some(-6.0206),
            ..distortion(&[(2, -40.0), (3, -60.0)])
        };
        let s = Spectrum::new("t.wav ch 1", &x, rate, (0.0, 1.0), Some(&d));
        // The drawn points carry the tone at its level (peak-calibrated, on a bin).
        let pts = s.decimated(10.0, 1400);
        let top = pts
            .iter()
            .fold((0.0, f64::MIN), |a, p| if p.1 > a.1 { *p } else { a });
        assert_eq!(top.0, 1000.0);
        assert!((top.1 + 6.0206).abs() < 0.01, "{top:?}");
        let svg = spectrum_svg_string(&s).expect("draws");
        legible(&svg);
        let t = texts(&svg);
        for k in [
            "H1",
            "H2",
            "H3",
            "frequency (Hz)",
            "level (dBFS, sine peak)",
        ] {
            assert!(t.iter().any(|x| x == k), "{k} in {t:?}");
        }
        assert!(t.iter().any(|x| x.starts_with("Spectrum of t.wav ch 1")));
    }

    #[test]
    fn several_inputs_get_their_own_figures() {
        let out = Path::new("figs/spectrum.svg");
        let one = per_file_paths(out, &[PathBuf::from("a/take.wav")]).expect("one");
        assert_eq!(one, vec![PathBuf::from("figs/spectrum.svg")]);
        let two = per_file_paths(
            out,
            &[PathBuf::from("a/take1.wav"), PathBuf::from("take2.wav")],
        )
        .expect("two");
        assert_eq!(
            two,
            vec![
                PathBuf::from("figs/spectrum-take1.svg"),
                PathBuf::from("figs/spectrum-take2.svg")
            ]
        );
        let e = per_file_paths(
            out,
            &[PathBuf::from("a/take.wav"), PathBuf::from("b/take.wav")],
        )
        .expect_err("same stem");
        assert!(e.contains("share the name 'take'"), "{e}");
    }
}
