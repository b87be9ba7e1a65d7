//! The comparison figure (`brink compare --svg`): harmonic bars of A beside B per order, or the
//! THD curves of two sweeps with their onsets.

use std::path::Path;

use plotters::prelude::*;
use plotters::style::text_anchor::{HPos, Pos, VPos};

use super::kit::{
    draw_err, draw_hatched, draw_legend, draw_marker, draw_panel, draw_text, fmt_db, fmt_pct, font,
    step_x, stroke, thd_axis, write_svg, x_axis, x_words, Axis, Curve, Glyph, Marker, Panel, VMark,
    AXIS_W, BLACK_RGB, BLUE, DESC_SIZE, GRID, HEIGHT, LABEL_SIZE, ORANGE, SIDE_W, TITLE_SIZE,
    WIDTH,
};
use super::PlotError;
use crate::analysis::report::DistortionReport;
use crate::sweep::report::{SweepKind, SweepReport};

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

#[cfg(test)]
pub(crate) mod tests {
    use super::super::kit::tests::{legible, texts};
    use super::super::sweep::tests::sweep;
    use super::*;
    use crate::analysis::report::HarmonicReport;

    pub(crate) fn distortion(levels: &[(usize, f64)]) -> DistortionReport {
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
}
