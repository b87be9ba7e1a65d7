//! The dashboard's state: everything the screen shows, fed by [`Update`]s (from the live engine
//! or from a followed log) and changed by keys. No terminal here: tests drive it directly.

use std::collections::VecDeque;

use crate::analysis::report::{ChannelReport, ClipEvent, DistortionReport, HarmonicReport};
use crate::dsp::ballistics::Ballistics;
use crate::dsp::clip::ClipKind;
use crate::dsp::level::amplitude_db;
use crate::live::engine::{MeterFrame, Onset};
use crate::live::session::SourceMeta;

/// How long the peak-hold marker stays before it drops to the current peak (s). IEC 60268-18
/// gives 1.0 s ± 0.5 s for a digital meter's hold (second-hand, shared/reference-values.md §5);
/// the marker here holds for the upper end, so a glance catches it.
pub const HOLD_S: f64 = 1.5;
/// Clip events kept for the list.
pub const RECENT_CLIPS: usize = 64;
/// Harmonics drawn as bars (H1 and H2..H10).
pub const BAR_ORDERS: usize = 10;

pub use crate::analysis::fingerprint::Fingerprint;
use crate::analysis::fingerprint::Source;

/// A snapshot file's text: the fingerprint's channel report (levels and clipping as the
/// dashboard had them when it was stored), pretty-printed.
pub fn snapshot_json(f: &Fingerprint) -> Result<String, String> {
    let report = f.report.as_deref().cloned().unwrap_or_else(|| {
        let mut r = ChannelView::new(f.channel).to_report();
        r.distortion = Some(f.distortion.clone());
        r
    });
    serde_json::to_string_pretty(&report).map_err(|e| e.to_string())
}

/// A clip in the recent list.
#[derive(Debug, Clone, PartialEq)]
pub struct ClipLine {
    /// Channel number.
    pub channel: usize,
    /// The episode (its end is the start while it is still going on).
    pub event: ClipEvent,
    /// Still going on.
    pub open: bool,
}

/// One channel's meter and findings.
#[derive(Debug, Clone, PartialEq)]
pub struct ChannelView {
    /// Channel number, from 1.
    pub channel: usize,
    /// Each ballistics' reading (dBFS), in the order of [`Ballistics::ALL`].
    pub readings: [Option<f64>; 4],
    /// Peak-hold marker: level (dBFS) and when it was set (s).
    pub hold: Option<(f64, f64)>,
    /// Highest sample peak since the last reset (dBFS).
    pub peak_dbfs: Option<f64>,
    /// Highest true peak since the last reset (dBTP).
    pub true_peak_dbtp: Option<f64>,
    /// Overs since the last reset.
    pub overs: u64,
    /// Flat tops since the last reset.
    pub flat_tops: u64,
    /// Kind and time (s) of the latest clip.
    pub last_clip: Option<(ClipKind, f64)>,
    /// A clipping episode is going on now.
    pub clipping: Option<ClipKind>,
    /// The latest tone analysis; `None` when the channel carries no tone.
    pub tone: Option<Fingerprint>,
    /// The clipping onset, once THD has passed the threshold.
    pub onset: Option<Onset>,
}

impl ChannelView {
    fn new(channel: usize) -> Self {
        ChannelView {
            channel,
            readings: [None; 4],
            hold: None,
            peak_dbfs: None,
            true_peak_dbtp: None,
            overs: 0,
            flat_tops: 0,
            last_clip: None,
            clipping: None,
            tone: None,
            onset: None,
        }
    }

    /// Headroom left (dB): from the highest true peak (or sample peak) to full scale.
    pub fn headroom_db(&self) -> Option<f64> {
        self.true_peak_dbtp.or(self.peak_dbfs).map(|p| -p)
    }

    fn reset(&mut self) {
        let keep_tone = self.tone.take();
        *self = ChannelView::new(self.channel);
        self.tone = keep_tone;
    }

    /// The channel as a `scan` channel report (a snapshot file).
    pub fn to_report(&self) -> ChannelReport {
        use crate::analysis::report::{ClipReport, LevelReport, SidedLevels};
        ChannelReport {
            channel: self.channel,
            level: LevelReport {
                sample_peak_dbfs: self.peak_dbfs,
                true_peak_dbtp: self.true_peak_dbtp,
                rms_dbfs: None,
                crest_db: None,
                dc_offset: 0.0,
                headroom_db: self.headroom_db(),
                true_peak_oversampling: 0,
            },
            clipping: ClipReport {
                overs: self.overs,
                flat_tops: self.flat_tops,
                clipped_samples: 0,
                clip_level_dbfs: None,
                flat_top_levels_dbfs: SidedLevels::default(),
                first_clip_s: None,
                events: Vec::new(),
                events_omitted: 0,
            },
            distortion: self.tone.as_ref().map(|f| f.distortion.clone()),
            imd: None,
        }
    }
}

/// Whether the input is there.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum InputStatus {
    /// Running.
    Ok,
    /// Gone, being retried (the reason).
    Lost(String),
    /// Finished for good (the reason).
    Ended(String),
}

/// Counts for the status line.
#[derive(Debug, Clone, PartialEq)]
pub struct Status {
    /// Frames lost before analysis.
    pub dropped_frames: u64,
    /// Host overruns.
    pub xruns: u64,
    /// The analysis thread's busy share of the last second (0..1); `None` when not known.
    pub load: Option<f64>,
    /// The input.
    pub input: InputStatus,
}

/// What the dashboard is fed.
#[derive(Debug, Clone, PartialEq)]
pub enum Update {
    /// Meter frame (live).
    Meters {
        /// Stream time (s).
        t_s: f64,
        /// Per channel.
        channels: Vec<MeterFrame>,
    },
    /// Interval levels (a followed log's summary): they stand in for meters.
    Levels {
        /// Stream time (s).
        t_s: f64,
        /// Channel.
        channel: usize,
        /// Interval sample peak (dBFS).
        sample_peak_dbfs: Option<f64>,
        /// Interval true peak (dBTP).
        true_peak_dbtp: Option<f64>,
        /// Overs in the interval.
        overs: u64,
        /// Flat tops in the interval.
        flat_tops: u64,
    },
    /// A tone analysis; `None` when the channel carries no tone.
    Tone {
        /// Stream time (s).
        t_s: f64,
        /// Channel.
        channel: usize,
        /// The measurement.
        distortion: Option<DistortionReport>,
    },
    /// A clipping episode began (live).
    ClipStarted {
        /// Channel.
        channel: usize,
        /// Kind.
        kind: ClipKind,
        /// Start (s).
        t_s: f64,
        /// Level (dBFS).
        level_dbfs: Option<f64>,
        /// Count it (live: episodes start here; a followed log counts from summaries).
        count: bool,
    },
    /// A clipping episode ended.
    Clip {
        /// Channel.
        channel: usize,
        /// The episode.
        event: ClipEvent,
    },
    /// THD passed the onset threshold.
    Onset(Onset),
    /// Frames were lost.
    Gap {
        /// Frames.
        frames: u64,
    },
    /// The input went away.
    InputLost(String),
    /// The input is back.
    InputRestored,
    /// The source finished for good.
    Ended(String),
    /// Counters read from the running session.
    Health {
        /// Host overruns so far.
        xruns: u64,
        /// Analysis load (0..1).
        load: Option<f64>,
    },
}

/// The part of the state that moves with the input (frozen as a whole).
#[derive(Debug, Clone, PartialEq)]
pub struct Live {
    /// Stream time (s).
    pub now_s: f64,
    /// Per channel, in the order measured.
    pub channels: Vec<ChannelView>,
    /// Recent clip events, newest first.
    pub clips: VecDeque<ClipLine>,
    /// Status line counts.
    pub status: Status,
}

/// Which middle view is up.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum View {
    /// The focused channel's fingerprint.
    Harmonics,
    /// Snapshots A and B side by side.
    Compare,
}

/// The whole dashboard.
#[derive(Debug, Clone, PartialEq)]
pub struct Dashboard {
    /// The source.
    pub meta: SourceMeta,
    /// Where the audio comes from, in words ("live", "demo", "following FILE").
    pub mode: String,
    live: Live,
    frozen: Option<Box<Live>>,
    /// Index of the channel in focus.
    pub focus: usize,
    /// Meter ballistics drawn.
    pub ballistics: Ballistics,
    /// Middle view.
    pub view: View,
    /// Help overlay up.
    pub help: bool,
    /// Stored fingerprints A and B.
    pub snapshots: [Option<Fingerprint>; 2],
    /// The onset threshold (%), for the onset line.
    pub onset_pct: f64,
    /// A short message for the status line (what a key did).
    pub message: Option<String>,
    /// Something changed since the last draw.
    pub dirty: bool,
    /// Channels a page key moves the focus by: one meter page as last drawn (the screen thread
    /// sets it from the screen's size and layout).
    pub page: usize,
}

impl Dashboard {
    /// A dashboard for `meta`'s channels.
    pub fn new(meta: SourceMeta, mode: &str, ballistics: Ballistics, onset_pct: f64) -> Self {
        let channels = meta.channels.iter().map(|&c| ChannelView::new(c)).collect();
        Dashboard {
            meta,
            mode: mode.to_string(),
            live: Live {
                now_s: 0.0,
                channels,
                clips: VecDeque::new(),
                status: Status {
                    dropped_frames: 0,
                    xruns: 0,
                    load: None,
                    input: InputStatus::Ok,
                },
            },
            frozen: None,
            focus: 0,
            ballistics,
            view: View::Harmonics,
            help: false,
            snapshots: [None, None],
            onset_pct,
            message: None,
            dirty: true,
            page: 8,
        }
    }

    /// What the screen shows: the frozen picture, or the live one.
    pub fn shown(&self) -> &Live {
        self.frozen.as_deref().unwrap_or(&self.live)
    }

    /// Whether the picture is frozen.
    pub fn is_frozen(&self) -> bool {
        self.frozen.is_some()
    }

    /// The channel in focus (as shown).
    pub fn focused(&self) -> Option<&ChannelView> {
        self.shown().channels.get(self.focus)
    }

    fn lane(&mut self, channel: usize) -> Option<&mut ChannelView> {
        self.live.channels.iter_mut().find(|c| c.channel == channel)
    }

    /// Apply one update (to the live state; a frozen picture stays as it is, except the status
    /// line's input state).
    pub fn apply(&mut self, update: Update) {
        match update {
            Update::Meters { t_s, channels } => {
                self.live.now_s = t_s;
                for f in channels {
                    if let Some(c) = self.lane(f.channel) {
                        for (r, v) in c.readings.iter_mut().zip(f.readings) {
                            *r = amplitude_db(v);
                        }
                        note_peaks(
                            c,
                            t_s,
                            amplitude_db(f.sample_peak),
                            amplitude_db(f.true_peak),
                        );
                    }
                }
            }
            Update::Levels {
                t_s,
                channel,
                sample_peak_dbfs,
                true_peak_dbtp,
                overs,
                flat_tops,
            } => {
                self.live.now_s = self.live.now_s.max(t_s);
                if let Some(c) = self.lane(channel) {
                    // A log's interval peak stands in for every needle.
                    c.readings = [sample_peak_dbfs; 4];
                    note_peaks(c, t_s, sample_peak_dbfs, true_peak_dbtp);
                    c.overs += overs;
                    c.flat_tops += flat_tops;
                }
            }
            Update::Tone {
                t_s,
                channel,
                distortion,
            } => {
                if let Some(c) = self.lane(channel) {
                    c.tone = distortion.map(|d| Fingerprint {
                        label: format!("ch {channel} at {}", clock(t_s)),
                        file: String::new(),
                        source: Source::Live,
                        channel,
                        distortion: d,
                        report: None,
                    });
                }
            }
            Update::ClipStarted {
                channel,
                kind,
                t_s,
                level_dbfs,
                count,
            } => {
                self.live.now_s = self.live.now_s.max(t_s);
                if let Some(c) = self.lane(channel) {
                    c.clipping = Some(kind);
                    c.last_clip = Some((kind, t_s));
                    if count {
                        match kind {
                            ClipKind::Over => c.overs += 1,
                            ClipKind::FlatTop => c.flat_tops += 1,
                        }
                    }
                }
                self.push_clip(ClipLine {
                    channel,
                    event: ClipEvent {
                        kind,
                        start_s: t_s,
                        end_s: t_s,
                        level_dbfs,
                        runs: 1,
                        samples: 0,
                    },
                    open: true,
                });
            }
            Update::Clip { channel, event } => {
                if let Some(c) = self.lane(channel) {
                    c.clipping = None;
                    c.last_clip = Some((event.kind, event.start_s));
                }
                // Close the open line for this episode, or add the whole episode.
                let open = self.live.clips.iter_mut().find(|l| {
                    l.open && l.channel == channel && (l.event.start_s - event.start_s).abs() < 1e-6
                });
                match open {
                    Some(line) => {
                        line.event = event;
                        line.open = false;
                    }
                    None => self.push_clip(ClipLine {
                        channel,
                        event,
                        open: false,
                    }),
                }
            }
            Update::Onset(o) => {
                let ch = o.channel;
                if let Some(c) = self.lane(ch) {
                    c.onset = Some(o);
                }
            }
            Update::Gap { frames } => self.live.status.dropped_frames += frames,
            Update::InputLost(reason) => self.set_input(InputStatus::Lost(reason)),
            Update::InputRestored => self.set_input(InputStatus::Ok),
            Update::Ended(reason) => self.set_input(InputStatus::Ended(reason)),
            Update::Health { xruns, load } => {
                self.live.status.xruns = xruns;
                self.live.status.load = load;
            }
        }
        self.dirty = true;
    }

    fn set_input(&mut self, s: InputStatus) {
        self.live.status.input = s.clone();
        if let Some(f) = &mut self.frozen {
            f.status.input = s;
        }
    }

    fn push_clip(&mut self, line: ClipLine) {
        self.live.clips.push_front(line);
        self.live.clips.truncate(RECENT_CLIPS);
    }

    /// Freeze or unfreeze the picture (analysis goes on underneath).
    pub fn toggle_freeze(&mut self) {
        self.frozen = match self.frozen {
            Some(_) => None,
            None => Some(Box::new(self.live.clone())),
        };
        self.dirty = true;
    }

    /// Reset peaks, holds, counters and the clip list (tone analyses stay).
    pub fn reset(&mut self) {
        for c in &mut self.live.channels {
            c.reset();
        }
        self.live.clips.clear();
        self.live.status.dropped_frames = 0;
        if self.frozen.is_some() {
            self.frozen = Some(Box::new(self.live.clone()));
        }
        self.message = Some("peaks and counters reset".into());
        self.dirty = true;
    }

    /// Move the focus by `by` channels (clamped).
    pub fn move_focus(&mut self, by: isize) {
        let n = self.live.channels.len();
        if n == 0 {
            return;
        }
        self.focus = (self.focus as isize + by).clamp(0, n as isize - 1) as usize;
        self.dirty = true;
    }

    /// Store the focused channel's fingerprint as snapshot `slot` (0 = A, 1 = B).
    pub fn store(&mut self, slot: usize) {
        let name = if slot == 0 { "A" } else { "B" };
        let found = self.focused().and_then(|c| {
            c.tone.clone().map(|mut f| {
                f.report = Some(Box::new(c.to_report()));
                f
            })
        });
        match found {
            Some(f) => {
                self.message = Some(format!("{name} = {}", f.label));
                self.snapshots[slot] = Some(f);
            }
            None => {
                self.message = Some(format!("no tone on this channel to store as {name}"));
            }
        }
        self.dirty = true;
    }

    /// Next meter ballistics.
    pub fn cycle_ballistics(&mut self) {
        self.ballistics = self.ballistics.next();
        self.message = Some(format!("meters: {}", self.ballistics.label()));
        self.dirty = true;
    }
}

fn note_peaks(c: &mut ChannelView, t_s: f64, peak: Option<f64>, true_peak: Option<f64>) {
    match peak {
        Some(p) => {
            c.peak_dbfs = Some(c.peak_dbfs.map_or(p, |q| q.max(p)));
            c.hold = match c.hold {
                Some((h, at)) if h >= p && t_s - at < HOLD_S => Some((h, at)),
                _ => Some((p, t_s)),
            };
        }
        // Digital silence: the hold lets go once its time is up, as it would for a quiet signal.
        None => {
            if c.hold.is_some_and(|(_, at)| t_s - at >= HOLD_S) {
                c.hold = None;
            }
        }
    }
    if let Some(p) = true_peak {
        c.true_peak_dbtp = Some(c.true_peak_dbtp.map_or(p, |q| q.max(p)));
    }
}

/// Stream time as `m:ss.s` (or `h:mm:ss` past an hour).
pub fn clock(t_s: f64) -> String {
    let t = t_s.max(0.0);
    let whole = t.floor() as u64;
    if whole >= 3600 {
        format!(
            "{}:{:02}:{:02}",
            whole / 3600,
            (whole / 60) % 60,
            whole % 60
        )
    } else {
        format!("{}:{:04.1}", whole / 60, t - (whole / 60 * 60) as f64)
    }
}

/// A harmonic list entry for report building.
pub fn harmonic_report(
    order: usize,
    f0: f64,
    level_dbc: Option<f64>,
    phase: f64,
    resolved: bool,
) -> HarmonicReport {
    HarmonicReport {
        order,
        freq_hz: f0 * order as f64,
        level_dbc,
        phase_deg: phase,
        resolved,
    }
}

/// Whether a harmonic at `level_dbc` stands the default resolve margin above `floor` (dBc): the
/// judgement for readings that do not carry the analysis's own.
pub fn resolved_by_default(level_dbc: Option<f64>, floor: Option<f64>) -> bool {
    match (level_dbc, floor) {
        (Some(l), Some(f)) => l > f + crate::dsp::tone::ToneSettings::default().resolve_margin_db,
        (Some(_), None) => true,
        (None, _) => false,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn meta(n: usize) -> SourceMeta {
        SourceMeta {
            host: "test".into(),
            device: "dev".into(),
            sample_rate_hz: 48_000,
            channels: (1..=n).collect(),
        }
    }

    fn frame(channel: usize, peak: f64) -> MeterFrame {
        MeterFrame {
            channel,
            sample_peak: peak,
            true_peak: peak * 1.05,
            readings: [peak; 4],
        }
    }

    #[test]
    fn peaks_hold_then_drop() {
        let mut d = Dashboard::new(meta(1), "live", Ballistics::SamplePeak, 1.0);
        d.apply(Update::Meters {
            t_s: 0.0,
            channels: vec![frame(1, 0.5)],
        });
        d.apply(Update::Meters {
            t_s: 1.0,
            channels: vec![frame(1, 0.1)],
        });
        let c = &d.shown().channels[0];
        assert!((c.hold.expect("hold").0 - amplitude_db(0.5).expect("db")).abs() < 1e-9);
        d.apply(Update::Meters {
            t_s: 1.0 + HOLD_S,
            channels: vec![frame(1, 0.1)],
        });
        let c = &d.shown().channels[0];
        assert!((c.hold.expect("hold").0 - (-20.0)).abs() < 1e-9);
        // The peak since reset stays; true peak and headroom follow the true peak.
        assert!((c.peak_dbfs.expect("peak") - amplitude_db(0.5).expect("db")).abs() < 1e-9);
        let tp = amplitude_db(0.525).expect("db");
        assert!((c.headroom_db().expect("room") + tp).abs() < 1e-9);
    }

    #[test]
    fn the_hold_lets_go_on_digital_silence() {
        let mut d = Dashboard::new(meta(1), "live", Ballistics::SamplePeak, 1.0);
        d.apply(Update::Meters {
            t_s: 0.0,
            channels: vec![frame(1, 0.2)],
        });
        // Silence reads no level at all (no dBFS for zero).
        d.apply(Update::Meters {
            t_s: 1.0,
            channels: vec![frame(1, 0.0)],
        });
        assert!(d.shown().channels[0].hold.is_some(), "held within its time");
        d.apply(Update::Meters {
            t_s: HOLD_S + 0.1,
            channels: vec![frame(1, 0.0)],
        });
        let c = &d.shown().channels[0];
        assert_eq!(c.hold, None, "let go after {HOLD_S} s of silence");
        // The peak since reset is kept.
        assert!((c.peak_dbfs.expect("peak") - amplitude_db(0.2).expect("db")).abs() < 1e-9);
    }

    #[test]
    fn clips_count_list_and_close() {
        let mut d = Dashboard::new(meta(2), "live", Ballistics::SamplePeak, 1.0);
        d.apply(Update::ClipStarted {
            channel: 2,
            kind: ClipKind::FlatTop,
            t_s: 3.0,
            level_dbfs: Some(-4.0),
            count: true,
        });
        assert_eq!(d.shown().channels[1].flat_tops, 1);
        assert_eq!(d.shown().channels[1].clipping, Some(ClipKind::FlatTop));
        assert!(d.shown().clips[0].open);
        d.apply(Update::Clip {
            channel: 2,
            event: ClipEvent {
                kind: ClipKind::FlatTop,
                start_s: 3.0,
                end_s: 3.5,
                level_dbfs: Some(-4.0),
                runs: 20,
                samples: 900,
            },
        });
        let l = &d.shown().clips[0];
        assert!(!l.open);
        assert_eq!(l.event.samples, 900);
        assert_eq!(d.shown().clips.len(), 1);
        assert_eq!(d.shown().channels[1].clipping, None);
        d.reset();
        assert_eq!(d.shown().channels[1].flat_tops, 0);
        assert!(d.shown().clips.is_empty());
    }

    #[test]
    fn freeze_holds_the_picture_while_counting_goes_on() {
        let mut d = Dashboard::new(meta(1), "live", Ballistics::SamplePeak, 1.0);
        d.toggle_freeze();
        d.apply(Update::ClipStarted {
            channel: 1,
            kind: ClipKind::Over,
            t_s: 1.0,
            level_dbfs: Some(0.0),
            count: true,
        });
        assert_eq!(d.shown().channels[0].overs, 0);
        d.apply(Update::InputLost("gone".into()));
        assert_eq!(d.shown().status.input, InputStatus::Lost("gone".into()));
        d.toggle_freeze();
        assert_eq!(d.shown().channels[0].overs, 1);
    }

    #[test]
    fn focus_is_clamped_and_snapshots_need_a_tone() {
        let mut d = Dashboard::new(meta(3), "live", Ballistics::SamplePeak, 1.0);
        d.move_focus(-1);
        assert_eq!(d.focus, 0);
        d.move_focus(10);
        assert_eq!(d.focus, 2);
        d.store(0);
        assert!(d.snapshots[0].is_none());
        assert!(d.message.as_deref().is_some_and(|m| m.contains("no tone")));
    }

    #[test]
    fn clock_formats() {
        assert_eq!(clock(0.0), "0:00.0");
        assert_eq!(clock(75.25), "1:15.2");
        assert_eq!(clock(3725.0), "1:02:05");
    }
}
