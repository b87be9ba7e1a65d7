//! Test fixtures shared by the dashboard's tests: dashboards fed as the screen thread would
//! feed them (the stage-box demo through the real engine, a 64-input rack, hand-made
//! fingerprints) and screens and buffers read back as text.

use ratatui::backend::TestBackend;
use ratatui::buffer::Buffer;
use ratatui::Terminal;

use super::{draw, Theme};
use crate::analysis::report::{ClipEvent, DistortionReport};
use crate::dsp::ballistics::Ballistics;
use crate::dsp::clip::ClipKind;
use crate::live::engine::{Engine, EngineSettings, MeterFrame};
use crate::live::session::SourceMeta;
use crate::ui::feed::from_live;
use crate::ui::model::{harmonic_report, resolved_by_default, Dashboard, Fingerprint, Update};

pub(super) const PLAIN: Theme = Theme { color: false };
pub(super) const COLOUR: Theme = Theme { color: true };

pub(super) fn meta(channels: Vec<usize>, device: &str) -> SourceMeta {
    SourceMeta {
        host: "demo".into(),
        device: device.into(),
        sample_rate_hz: 48_000,
        channels,
    }
}

/// The stage-box demo scene through the real engine for `secs`, its findings recorded into a
/// dashboard (what the screen thread would have been fed).
pub(super) fn recorded_stage_box(secs: f64) -> Dashboard {
    let (rate, channels, samples) =
        crate::gen::demo::render_scene("stage-box-soundcheck.wav").expect("scene");
    let settings = EngineSettings {
        summary_every_s: None,
        meter_every_s: Some(1.0 / 30.0),
        tone_events: true,
        ..EngineSettings::default()
    };
    let mut engine = Engine::new(rate, channels, None, settings);
    let mut d = Dashboard::new(
        meta((1..=channels).collect(), "stage-box (demo-tones)"),
        "demo",
        Ballistics::SamplePeak,
        1.0,
    );
    let frames = (secs * f64::from(rate)) as usize;
    let block = (rate / 100) as usize * channels;
    for chunk in samples[..frames * channels].chunks(block) {
        engine.process(chunk, &mut |ev| {
            if let Some(u) = from_live(ev) {
                d.apply(u);
            }
        });
    }
    d.apply(Update::Health {
        xruns: 0,
        load: Some(0.021),
    });
    d
}

pub(super) fn screen(d: &Dashboard, w: u16, h: u16, theme: Theme) -> Terminal<TestBackend> {
    let mut t = Terminal::new(TestBackend::new(w, h)).expect("terminal");
    t.draw(|f| draw(f, d, theme)).expect("draw");
    t
}

pub(super) fn text(t: &Terminal<TestBackend>) -> String {
    let buf = t.backend().buffer();
    let mut out = String::new();
    for y in 0..buf.area.height {
        let line: String = (0..buf.area.width)
            .map(|x| buf[(x, y)].symbol().to_string())
            .collect();
        out.push_str(line.trim_end());
        out.push('\n');
    }
    out
}

/// A fingerprint made by hand: a 1 kHz tone at -6 dBFS with the given harmonics (order, dBc).
pub(super) fn fingerprint(label: &str, levels: &[(usize, f64)]) -> Fingerprint {
    Fingerprint {
        label: label.into(),
        file: String::new(),
        source: crate::analysis::fingerprint::Source::Live,
        channel: 1,
        distortion: DistortionReport {
            fundamental_hz: 1000.0,
            fundamental_dbfs: Some(-6.0),
            thd_pct: Some(3.2),
            thd_db: None,
            thd_n_db: Some(-29.5),
            thd_n_pct: 3.35,
            sinad_db: Some(29.5),
            enob_bits: None,
            odd_even_db: Some(-18.0),
            falloff_db_per_octave: Some(-12.0),
            noise_floor_dbc: Some(-140.0),
            span_start_s: 0.0,
            span_end_s: 1.0,
            harmonics: levels
                .iter()
                .map(|&(k, l)| {
                    let resolved = resolved_by_default(Some(l), Some(-140.0));
                    harmonic_report(k, 1000.0, Some(l), 0.0, resolved)
                })
                .collect(),
        },
        report: None,
    }
}

/// The peak (dBFS) channel `ch` of [`many_channels`] is given: spread over the scale.
pub(super) fn spread_db(ch: usize) -> f64 {
    -2.0 - ((ch * 7) % 50) as f64
}

/// `n` channels as a 64-input stage rack would feed them, at 61.5 s: peaks spread over the
/// scale, channel 7 in an over right now, channel 23 after a flat-top episode, channel 41 (a
/// later page) after overs; channel 3 in focus with a tone.
pub(super) fn many_channels(n: usize) -> Dashboard {
    let mut d = Dashboard::new(
        SourceMeta {
            host: "jack".into(),
            device: "stage rack".into(),
            sample_rate_hz: 48_000,
            channels: (1..=n).collect(),
        },
        "live",
        Ballistics::SamplePeak,
        1.0,
    );
    // The clips in the order they happened.
    for (channel, kind, start_s, level) in [
        (41, ClipKind::Over, 40.2, 0.0),
        (23, ClipKind::FlatTop, 58.2, -4.1),
    ] {
        d.apply(Update::ClipStarted {
            channel,
            kind,
            t_s: start_s,
            level_dbfs: Some(level),
            count: true,
        });
        d.apply(Update::Clip {
            channel,
            event: ClipEvent {
                kind,
                start_s,
                end_s: start_s + 0.7,
                level_dbfs: Some(level),
                runs: 12,
                samples: 640,
            },
        });
    }
    d.apply(Update::ClipStarted {
        channel: 7,
        kind: ClipKind::Over,
        t_s: 61.4,
        level_dbfs: Some(0.0),
        count: true,
    });
    let channels = (1..=n)
        .map(|ch| {
            let peak = if ch == 7 {
                1.0
            } else {
                10f64.powf(spread_db(ch) / 20.0)
            };
            MeterFrame {
                channel: ch,
                sample_peak: peak,
                true_peak: peak * 1.02,
                readings: [peak * 0.7; 4],
            }
        })
        .collect();
    d.apply(Update::Meters {
        t_s: 61.5,
        channels,
    });
    d.apply(Update::Tone {
        t_s: 61.0,
        channel: 3,
        distortion: Some(
            fingerprint(
                "",
                &[(2, -52.0), (3, -31.0), (4, -70.0), (5, -44.0), (7, -58.0)],
            )
            .distortion,
        ),
    });
    d.apply(Update::Health {
        xruns: 0,
        load: Some(0.043),
    });
    d.move_focus(2);
    d
}

/// Line `y` of a buffer, as text.
pub(super) fn row(buf: &Buffer, y: u16) -> String {
    (0..buf.area.width)
        .map(|x| buf[(x, y)].symbol().to_string())
        .collect()
}

pub(super) fn text_of(d: &Dashboard, w: u16, h: u16) -> String {
    text(&screen(d, w, h, PLAIN))
}
