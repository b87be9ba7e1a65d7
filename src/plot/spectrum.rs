//! The scan spectrum figure (`brink scan --svg`): one channel's tone span, dBFS against log
//! frequency, the fundamental and harmonics marked by order.

use std::path::Path;

use plotters::prelude::*;
use plotters::style::text_anchor::{HPos, Pos, VPos};

use super::kit::{
    draw_err, draw_legend, draw_marker, draw_text, fmt_db, fmt_hz, font, stroke, write_svg, Glyph,
    Marker, AXIS_W, BLACK_RGB, BLUE, DESC_SIZE, GREY, GRID, HEIGHT, LABEL_SIZE, ORANGE, SIDE_W,
    TITLE_SIZE, WIDTH,
};
use super::PlotError;
use crate::analysis::report::{DistortionReport, ScanReport};
use crate::dsp::spectrum::amplitude_spectrum;
use crate::dsp::window::Window;
use crate::scan::SpanSamples;

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

/// `scan --svg`: the spectrum of one channel of the scanned `wav` over its tone span, from the
/// samples the scan read (`spans`, see `scan::scan_file_keeping_spans`). The channel is
/// `channel` (from 1) or else the first carrying a tone, else channel 1; returns the channel
/// drawn.
pub fn scan_spectrum_svg(
    wav: &Path,
    report: &ScanReport,
    spans: &SpanSamples,
    channel: Option<usize>,
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
    let (Some(c), Some(samples)) = (
        report.channels.iter().find(|c| c.channel == ch),
        spans.channels.get(ch - 1),
    ) else {
        return Err(PlotError::Nothing(format!(
            "{} has no channels",
            wav.display()
        )));
    };
    let rate = f64::from(report.sample_rate_hz);
    let x: Vec<f64> = samples.iter().map(|&v| f64::from(v)).collect();
    let start = spans.start as f64 / rate;
    let name = wav.file_name().map_or_else(
        || wav.display().to_string(),
        |n| n.to_string_lossy().into_owned(),
    );
    let s = Spectrum::new(
        &format!("{name} ch {ch}"),
        &x,
        report.sample_rate_hz,
        (start, start + x.len() as f64 / rate),
        c.distortion.as_ref(),
    );
    spectrum_svg(&s, out)?;
    Ok(ch)
}

#[cfg(test)]
mod tests {
    use super::super::compare::tests::distortion;
    use super::super::kit::tests::{legible, texts};
    use super::*;

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
}
