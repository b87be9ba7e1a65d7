//! The sweep figure (`brink sweep --svg`): THD (or IMD) and H2..H5 against drive or frequency,
//! the onset and knee marked.

use std::path::Path;

use plotters::prelude::*;

use super::kit::{
    draw_err, draw_panel, fmt_db, fmt_pct, step_x, thd_axis, write_svg, x_axis, x_words, Axis,
    Curve, Marker, Panel, VMark, BLUE, GREEN, HEIGHT_TWO, ORANGE, PURPLE, WIDTH,
};
use super::PlotError;
use crate::sweep::report::{SweepKind, SweepReport};

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

#[cfg(test)]
pub(crate) mod tests {
    use std::collections::BTreeMap;

    use super::super::kit::tests::{legible, texts};
    use super::*;
    use crate::sweep::report::{SweepStep, SWEEP_FORMAT};

    /// A step from its `brink-sweep-1` JSON form: H2..H5 falling 3 dB per order below THD.
    pub(crate) fn step(drive: f64, thd: f64) -> SweepStep {
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

    pub(crate) fn sweep() -> SweepReport {
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
}
