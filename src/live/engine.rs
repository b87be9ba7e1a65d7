//! The live analysis engine: blocks of interleaved frames in, events out. It holds no thread and
//! no clock (time is the sample count), so the same engine serves the analysis thread, the
//! headless logger and deterministic tests.
//!
//! Per channel, every block: levels, true peak and clip detection. Clip runs gather into episodes
//! ([`EpisodeTracker`]); an episode's first run raises [`LiveEvent::ClipStarted`] at once, and the
//! whole episode is reported as one [`LiveEvent::Clip`] when no run has joined it for the merge
//! gap. Several times a second the last `tone_window_s` of each channel is analysed for its tone;
//! the first time THD passes the onset threshold, [`LiveEvent::Onset`] reports the fundamental
//! level at which it happened (interpolated between the two analyses either side). Every
//! `summary_every_s`, a [`LiveEvent::Summary`] carries interval maxima and counts. For a screen,
//! `meter_every_s` adds [`LiveEvent::Meters`] (every meter ballistics' needle, and the peaks since
//! the last frame) and `tone_events` a [`LiveEvent::Tone`] per analysis.

use std::collections::BTreeMap;

use serde::Serialize;

use crate::analysis::episode::EpisodeTracker;
use crate::analysis::report::ClipEvent;
use crate::analysis::ChannelSettings;
use crate::dsp::ballistics::{Ballistics, Meter};
use crate::dsp::clip::{ClipDetector, ClipKind};
use crate::dsp::level::{amplitude_db, rms_dbfs, LevelStats};
use crate::dsp::tone::{ToneAnalyzer, ToneReport};
use crate::dsp::truepeak::TruePeak;

/// Settings of the live engine.
#[derive(Debug, Clone, PartialEq)]
pub struct EngineSettings {
    /// Measurement settings shared with `scan` (the merge gap sets episode length).
    pub channel: ChannelSettings,
    /// Length of the analysis window for tone measurements (s).
    pub tone_window_s: f64,
    /// How often tone measurements run (s).
    pub tone_every_s: f64,
    /// Interval of summary events (s); `None` for none.
    pub summary_every_s: Option<f64>,
    /// THD (%) whose first crossing is reported as the clipping onset.
    pub onset_thd_pct: f64,
    /// Interval of meter frames (s); `None` for none (the logger needs none).
    pub meter_every_s: Option<f64>,
    /// Publish every tone analysis as it is made.
    pub tone_events: bool,
}

impl Default for EngineSettings {
    fn default() -> Self {
        EngineSettings {
            channel: ChannelSettings::default(),
            tone_window_s: 1.0,
            tone_every_s: 0.25,
            summary_every_s: Some(1.0),
            onset_thd_pct: 1.0,
            meter_every_s: None,
            tone_events: false,
        }
    }
}

/// One channel's readings over a summary interval (`null` in JSON when not meaningful).
#[derive(Debug, Clone, PartialEq, Serialize, serde::Deserialize)]
pub struct ChannelSummary {
    /// Channel number, from 1.
    pub channel: usize,
    /// Highest sample peak in the interval (dBFS).
    pub sample_peak_dbfs: Option<f64>,
    /// Highest true peak in the interval (dBTP).
    pub true_peak_dbtp: Option<f64>,
    /// RMS over the interval, AES17 (dBFS).
    pub rms_dbfs: Option<f64>,
    /// Overs that started in the interval.
    pub overs: u64,
    /// Flat tops that started in the interval.
    pub flat_tops: u64,
    /// Fundamental of the latest tone analysis in the interval (Hz).
    pub fundamental_hz: Option<f64>,
    /// Its level (dBFS).
    pub fundamental_dbfs: Option<f64>,
    /// THD (%).
    pub thd_pct: Option<f64>,
    /// THD+N (dB).
    pub thd_n_db: Option<f64>,
    /// Odd/even balance (dB).
    pub odd_even_db: Option<f64>,
    /// SINAD (dB).
    pub sinad_db: Option<f64>,
    /// Harmonic fall-off (dB per octave of order).
    pub falloff_db_per_octave: Option<f64>,
    /// Harmonic levels by order (dBc).
    pub harmonics_dbc: BTreeMap<String, Option<f64>>,
    /// Harmonic phases by order, relative to the fundamental (degrees, sine convention).
    pub harmonics_phase_deg: BTreeMap<String, f64>,
    /// Noise floor of the tone analysis (dBc in one harmonic's bandwidth).
    pub noise_floor_dbc: Option<f64>,
}

/// One channel's meters at a meter frame.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct MeterFrame {
    /// Channel number, from 1.
    pub channel: usize,
    /// Highest sample magnitude since the previous frame (full scale = 1).
    pub sample_peak: f64,
    /// Highest true peak since the previous frame (full scale = 1).
    pub true_peak: f64,
    /// Each ballistics' reading now, in the order of [`Ballistics::ALL`] (full scale = 1; a
    /// steady sine reads its peak on all of them).
    pub readings: [f64; 4],
}

/// The first crossing of the onset threshold on a channel.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Onset {
    /// Channel number, from 1.
    pub channel: usize,
    /// Stream time of the analysis that crossed (s).
    pub t_s: f64,
    /// The threshold (%).
    pub thd_pct: f64,
    /// Fundamental level at the crossing, interpolated in dB between the analyses either side.
    pub fundamental_dbfs: Option<f64>,
}

/// What the engine reports.
#[derive(Debug, Clone, PartialEq)]
pub enum LiveEvent {
    /// Readings over the last interval, every channel.
    Summary {
        /// End of the interval in stream time (s).
        t_s: f64,
        /// Per channel.
        channels: Vec<ChannelSummary>,
    },
    /// A clipping episode has begun (raised on its first run, for lamps).
    ClipStarted {
        /// Channel number, from 1.
        channel: usize,
        /// Over or flat top.
        kind: ClipKind,
        /// Start (s).
        t_s: f64,
        /// Run level (dBFS).
        level_dbfs: Option<f64>,
    },
    /// A clipping episode has ended: one event for the whole episode.
    Clip {
        /// Channel number, from 1.
        channel: usize,
        /// The episode.
        event: ClipEvent,
    },
    /// THD passed the onset threshold for the first time.
    Onset(Onset),
    /// Meter frame (with `meter_every_s`).
    Meters {
        /// Stream time (s).
        t_s: f64,
        /// Per channel.
        channels: Vec<MeterFrame>,
    },
    /// A tone analysis (with `tone_events`); `report` is `None` when the channel carries no tone.
    Tone {
        /// Channel number, from 1.
        channel: usize,
        /// Stream time at the end of the analysed record (s).
        t_s: f64,
        /// The analysis.
        report: Option<Box<ToneReport>>,
    },
    /// Frames were lost before this point; state spanning samples was reset.
    Gap {
        /// Stream time of the gap (s).
        t_s: f64,
        /// Frames lost.
        frames: u64,
    },
}

struct Lane {
    /// Channel number reported (from 1); its sample is `frame[channel - 1]`.
    channel: usize,
    levels: LevelStats,
    tp: TruePeak,
    clip: ClipDetector,
    episodes: EpisodeTracker,
    overs: u64,
    flat_tops: u64,
    /// Circular history for tone analysis.
    history: Vec<f32>,
    head: usize,
    filled: usize,
    /// Stream position of this lane's next tone analysis (the lanes take turns, see
    /// [`Engine::stagger`]).
    next_tone: u64,
    latest: Option<ToneReport>,
    /// Fundamental of the lane's last tone analysis (starts the next fit).
    last_f0: Option<f64>,
    /// Meters of every ballistics, and the peaks since the last meter frame.
    meters: [Meter; 4],
    frame_peak: f32,
    /// (THD %, fundamental dBFS) of the previous analysis, for the onset interpolation.
    previous: Option<(f64, Option<f64>)>,
    onset_seen: bool,
}

/// The engine. Feed it with [`Engine::process`]; events go to the closure given.
pub struct Engine {
    rate: u32,
    /// Channels per incoming frame (the lanes may analyse a subset).
    frame_channels: usize,
    settings: EngineSettings,
    lanes: Vec<Lane>,
    /// One tone analyser serves every lane in turn (its buffers are the size of one record).
    tone: ToneAnalyzer,
    pos: u64,
    tone_every: u64,
    /// The earliest of the lanes' next tone analyses.
    next_tone: u64,
    summary_every: Option<u64>,
    next_summary: u64,
    meter_every: Option<u64>,
    next_meter: u64,
    plane: Vec<f32>,
}

impl std::fmt::Debug for Engine {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("Engine")
            .field("rate", &self.rate)
            .field("channels", &self.lanes.len())
            .field("pos", &self.pos)
            .finish()
    }
}

impl Engine {
    /// An engine for `channels` interleaved channels at `rate`; `full_scale_bits` gives the
    /// source's integer depth for over detection (`None` for float sources).
    pub fn new(
        rate: u32,
        channels: usize,
        full_scale_bits: Option<u32>,
        settings: EngineSettings,
    ) -> Self {
        let mut clip = settings.channel.clip;
        clip.full_scale = crate::dsp::clip::ClipSettings::full_scale_for_bits(full_scale_bits);
        let r = rate as f64;
        let window = ((settings.tone_window_s * r).round() as usize).max(256);
        let gap = (settings.channel.merge_gap_s * r) as u64;
        let tone_every = ((settings.tone_every_s * r).round() as u64).max(1);
        let lanes = (0..channels)
            .map(|c| Lane {
                channel: c + 1,
                levels: LevelStats::default(),
                tp: TruePeak::new(rate),
                clip: ClipDetector::new(clip),
                episodes: EpisodeTracker::new(gap),
                overs: 0,
                flat_tops: 0,
                history: vec![0.0; window],
                head: 0,
                filled: 0,
                next_tone: 0,
                latest: None,
                last_f0: None,
                meters: Ballistics::ALL.map(|b| Meter::new(b, r)),
                frame_peak: 0.0,
                previous: None,
                onset_seen: false,
            })
            .collect();
        let summary_every = settings
            .summary_every_s
            .map(|s| ((s * r).round() as u64).max(1));
        let meter_every = settings
            .meter_every_s
            .map(|s| ((s * r).round() as u64).max(1));
        let mut engine = Engine {
            rate,
            frame_channels: channels,
            lanes,
            tone: ToneAnalyzer::new(),
            pos: 0,
            tone_every,
            next_tone: tone_every,
            next_summary: summary_every.unwrap_or(u64::MAX),
            summary_every,
            next_meter: meter_every.unwrap_or(u64::MAX),
            meter_every,
            settings,
            plane: Vec::new(),
        };
        engine.stagger();
        engine
    }

    /// Spread the lanes' tone analyses evenly over the tone interval, from `self.pos` on, so
    /// that no single block carries every channel's analysis.
    fn stagger(&mut self) {
        let count = self.lanes.len().max(1) as u64;
        let every = self.tone_every;
        for (i, lane) in self.lanes.iter_mut().enumerate() {
            lane.next_tone = self.pos + every + every * i as u64 / count;
        }
        self.next_tone = self.earliest_tone();
    }

    /// The earliest of the lanes' next tone analyses.
    fn earliest_tone(&self) -> u64 {
        self.lanes
            .iter()
            .map(|l| l.next_tone)
            .min()
            .unwrap_or(self.pos + self.tone_every)
    }

    /// Sample rate.
    pub fn rate(&self) -> u32 {
        self.rate
    }

    /// Channels per incoming frame.
    pub fn channels(&self) -> usize {
        self.frame_channels
    }

    /// Analyse only these channels (numbers from 1, as `--channels` gives them); the frames
    /// still carry every channel. Numbers outside the frame are ignored.
    pub fn select(mut self, channels: &[usize]) -> Self {
        let n = self.frame_channels;
        self.lanes
            .retain(|l| channels.contains(&l.channel) && l.channel <= n);
        self.stagger();
        self
    }

    /// Channel numbers analysed.
    pub fn selected(&self) -> Vec<usize> {
        self.lanes.iter().map(|l| l.channel).collect()
    }

    /// Stream position in frames.
    pub fn position(&self) -> u64 {
        self.pos
    }

    fn t(&self, pos: u64) -> f64 {
        pos as f64 / self.rate as f64
    }

    /// Feed interleaved frames (any count; summaries and tone analyses fall on their exact
    /// sample positions).
    pub fn process(&mut self, interleaved: &[f32], out: &mut impl FnMut(LiveEvent)) {
        let ch = self.frame_channels.max(1);
        let mut rest = interleaved;
        while rest.len() >= ch {
            let frames = rest.len() / ch;
            let next_due = self.next_tone.min(self.next_summary).min(self.next_meter);
            let take = ((next_due - self.pos) as usize).min(frames).max(1);
            let (now, later) = rest.split_at(take * ch);
            self.process_span(now, out);
            rest = later;
            if self.pos >= self.next_tone {
                self.analyse_tones(out);
            }
            if self.pos >= self.next_summary {
                self.summary(out);
                self.next_summary = self.pos + self.summary_every.unwrap_or(u64::MAX - self.pos);
            }
            if self.pos >= self.next_meter {
                self.meter_frame(out);
                self.next_meter = self.pos + self.meter_every.unwrap_or(u64::MAX - self.pos);
            }
        }
    }

    fn meter_frame(&mut self, out: &mut impl FnMut(LiveEvent)) {
        let channels = self
            .lanes
            .iter_mut()
            .map(|lane| MeterFrame {
                channel: lane.channel,
                sample_peak: std::mem::take(&mut lane.frame_peak) as f64,
                true_peak: lane.tp.take_frame_peak() as f64,
                readings: std::array::from_fn(|i| lane.meters[i].reading()),
            })
            .collect();
        out(LiveEvent::Meters {
            t_s: self.t(self.pos),
            channels,
        });
    }

    fn process_span(&mut self, interleaved: &[f32], out: &mut impl FnMut(LiveEvent)) {
        let ch = self.frame_channels.max(1);
        let start = self.pos;
        let frames = interleaved.len() / ch;
        let rate = self.rate as f64;
        for lane in self.lanes.iter_mut() {
            let c = lane.channel - 1;
            self.plane.clear();
            self.plane
                .extend(interleaved.chunks_exact(ch).map(|f| f[c]));
            let peak = lane.levels.process(&self.plane);
            lane.tp.process_with_peak(&self.plane, peak);
            if self.meter_every.is_some() {
                lane.frame_peak = lane.frame_peak.max(peak);
                for m in &mut lane.meters {
                    m.process(&self.plane);
                }
            }
            let (episodes, overs, flats, channel) = (
                &mut lane.episodes,
                &mut lane.overs,
                &mut lane.flat_tops,
                lane.channel,
            );
            lane.clip.process(&self.plane, |run| {
                match run.kind {
                    ClipKind::Over => *overs += 1,
                    ClipKind::FlatTop => *flats += 1,
                }
                if let Some(closed) = episodes.add(&run) {
                    out(LiveEvent::Clip {
                        channel,
                        event: closed.to_event(rate),
                    });
                }
                if episodes.open().is_some_and(|e| e.runs == 1) {
                    out(LiveEvent::ClipStarted {
                        channel,
                        kind: run.kind,
                        t_s: run.start as f64 / rate,
                        level_dbfs: amplitude_db(run.level.abs() as f64),
                    });
                }
            });
            if let Some(closed) = lane.episodes.poll(start + frames as u64) {
                out(LiveEvent::Clip {
                    channel,
                    event: closed.to_event(rate),
                });
            }
            // History for tone analysis.
            for &v in &self.plane {
                lane.history[lane.head] = v;
                lane.head = (lane.head + 1) % lane.history.len();
            }
            lane.filled = (lane.filled + frames).min(lane.history.len());
        }
        self.pos += frames as u64;
    }

    /// Analyse the tone of every lane whose turn has come.
    fn analyse_tones(&mut self, out: &mut impl FnMut(LiveEvent)) {
        let rate = self.rate as f64;
        let t_s = self.t(self.pos);
        let threshold = self.settings.onset_thd_pct;
        let (pos, every) = (self.pos, self.tone_every);
        for lane in &mut self.lanes {
            if lane.next_tone > pos {
                continue;
            }
            lane.next_tone = pos + every;
            if lane.filled < lane.history.len() {
                continue;
            }
            // The oldest sample sits at `head`.
            let (newer, older) = lane.history.split_at(lane.head);
            let hint = lane.last_f0;
            let report =
                self.tone
                    .analyze_parts(older, newer, rate, &self.settings.channel.tone, hint);
            if let Some((r, thd)) = report
                .as_ref()
                .and_then(|r| r.thd_ratio.map(|t| (r, 100.0 * t)))
            {
                let level = amplitude_db(r.fundamental_amplitude);
                if !lane.onset_seen && thd >= threshold {
                    lane.onset_seen = true;
                    let at = match (lane.previous, level) {
                        (Some((p_thd, Some(p_level))), Some(l))
                            if p_thd < threshold && p_thd > 0.0 =>
                        {
                            // Interpolate the level where THD (in dB) meets the threshold.
                            let (a, b, x) = (p_thd.log10(), thd.log10(), threshold.log10());
                            let k = if b > a { (x - a) / (b - a) } else { 1.0 };
                            Some(p_level + k * (l - p_level))
                        }
                        _ => level,
                    };
                    out(LiveEvent::Onset(Onset {
                        channel: lane.channel,
                        t_s,
                        thd_pct: threshold,
                        fundamental_dbfs: at,
                    }));
                }
                lane.previous = Some((thd, level));
            }
            lane.last_f0 = report.as_ref().map(|r| r.fundamental_hz);
            if self.settings.tone_events {
                out(LiveEvent::Tone {
                    channel: lane.channel,
                    t_s,
                    report: report.clone().map(Box::new),
                });
            }
            lane.latest = report;
        }
        self.next_tone = self.earliest_tone();
    }

    fn summary(&mut self, out: &mut impl FnMut(LiveEvent)) {
        let t_s = self.t(self.pos);
        let channels = self
            .lanes
            .iter_mut()
            .map(|lane| {
                let tone = lane.latest.take();
                let s = ChannelSummary {
                    channel: lane.channel,
                    sample_peak_dbfs: (lane.levels.count > 0)
                        .then(|| amplitude_db(lane.levels.peak as f64))
                        .flatten(),
                    true_peak_dbtp: amplitude_db(lane.tp.take_interval_peak() as f64),
                    rms_dbfs: rms_dbfs(lane.levels.rms()),
                    overs: std::mem::take(&mut lane.overs),
                    flat_tops: std::mem::take(&mut lane.flat_tops),
                    fundamental_hz: tone.as_ref().map(|t| t.fundamental_hz),
                    fundamental_dbfs: tone
                        .as_ref()
                        .and_then(|t| amplitude_db(t.fundamental_amplitude)),
                    thd_pct: tone.as_ref().and_then(|t| t.thd_ratio).map(|t| 100.0 * t),
                    thd_n_db: tone.as_ref().and_then(|t| amplitude_db(t.thd_n_ratio)),
                    odd_even_db: tone.as_ref().and_then(|t| t.odd_even_db),
                    sinad_db: tone.as_ref().map(|t| t.sinad_db).filter(|v| v.is_finite()),
                    falloff_db_per_octave: tone.as_ref().and_then(|t| t.falloff_db_per_octave),
                    harmonics_dbc: tone
                        .as_ref()
                        .map(|t| {
                            t.harmonics
                                .iter()
                                .map(|h| (h.order.to_string(), h.level_dbc))
                                .collect()
                        })
                        .unwrap_or_default(),
                    harmonics_phase_deg: tone
                        .as_ref()
                        .map(|t| {
                            t.harmonics
                                .iter()
                                .map(|h| (h.order.to_string(), h.phase_deg))
                                .collect()
                        })
                        .unwrap_or_default(),
                    noise_floor_dbc: tone.as_ref().and_then(|t| t.noise_floor_dbc),
                };
                lane.levels = LevelStats::default();
                s
            })
            .collect();
        out(LiveEvent::Summary { t_s, channels });
    }

    /// Frames were lost: close open episodes, reset state spanning samples, report the gap.
    pub fn gap(&mut self, frames: u64, out: &mut impl FnMut(LiveEvent)) {
        let t_s = self.t(self.pos);
        self.pos += frames;
        self.restart(out);
        out(LiveEvent::Gap { t_s, frames });
    }

    /// The input starts over (a reconnected device): close open episodes and reset state
    /// spanning samples, without claiming a count of lost frames.
    pub fn restart(&mut self, out: &mut impl FnMut(LiveEvent)) {
        let rate = self.rate as f64;
        for lane in &mut self.lanes {
            if let Some(closed) = lane.episodes.flush() {
                out(LiveEvent::Clip {
                    channel: lane.channel,
                    event: closed.to_event(rate),
                });
            }
            lane.tp.reset();
            lane.clip.reset_at(self.pos);
            lane.filled = 0;
            lane.head = 0;
        }
        self.stagger();
        if self.next_summary != u64::MAX {
            self.next_summary = self.next_summary.max(self.pos);
        }
    }

    /// End of input: close open episodes and emit a last (partial) summary if one is due.
    pub fn finish(&mut self, out: &mut impl FnMut(LiveEvent)) {
        let rate = self.rate as f64;
        for lane in &mut self.lanes {
            let mut late = Vec::new();
            lane.clip.finish(|run| late.push(run));
            for run in late {
                match run.kind {
                    ClipKind::Over => lane.overs += 1,
                    ClipKind::FlatTop => lane.flat_tops += 1,
                }
                if let Some(closed) = lane.episodes.add(&run) {
                    out(LiveEvent::Clip {
                        channel: lane.channel,
                        event: closed.to_event(rate),
                    });
                }
            }
            if let Some(closed) = lane.episodes.flush() {
                out(LiveEvent::Clip {
                    channel: lane.channel,
                    event: closed.to_event(rate),
                });
            }
        }
        if self.summary_every.is_some() && self.lanes.iter().any(|l| l.levels.count > 0) {
            self.summary(out);
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    const RATE: u32 = 48_000;

    fn tone(n: usize, amp: impl Fn(usize) -> f64, clip: impl Fn(usize) -> f64) -> Vec<f32> {
        (0..n)
            .map(|i| {
                let v =
                    amp(i) * (2.0 * std::f64::consts::PI * 997.0 * i as f64 / RATE as f64).sin();
                let c = clip(i);
                v.clamp(-c, c) as f32
            })
            .collect()
    }

    fn run(x: &[f32], block: usize) -> (Vec<LiveEvent>, Vec<u64>) {
        let mut e = Engine::new(RATE, 1, None, EngineSettings::default());
        let mut events = Vec::new();
        let mut when = Vec::new();
        for b in x.chunks(block) {
            let mut sink = |ev| {
                events.push(ev);
            };
            e.process(b, &mut sink);
            when.resize(events.len(), e.position());
        }
        e.finish(&mut |ev| events.push(ev));
        when.resize(events.len(), e.position());
        (events, when)
    }

    /// The lanes take turns: with 8 channels, 10 ms blocks and an analysis every 250 ms per
    /// channel, no block carries more than one channel's analysis, yet every channel is analysed
    /// four times a second and every summary after the first second has every fundamental.
    #[test]
    fn channels_take_turns_for_tone_analysis() {
        let lanes = 8;
        let mono = tone(RATE as usize * 3, |_| 0.25, |_| 1.0);
        let x: Vec<f32> = mono
            .iter()
            .flat_map(|&v| std::iter::repeat_n(v, lanes))
            .collect();
        let settings = EngineSettings {
            summary_every_s: Some(0.5),
            ..EngineSettings::default()
        };
        let mut e = Engine::new(RATE, lanes, None, settings);
        let mut events = Vec::new();
        let mut analyses = vec![0usize; lanes];
        let block = (RATE / 100) as usize * lanes;
        for b in x.chunks(block) {
            let before: Vec<u64> = e.lanes.iter().map(|l| l.next_tone).collect();
            e.process(b, &mut |ev| events.push(ev));
            let moved: Vec<usize> = (0..lanes)
                .filter(|&i| e.lanes[i].next_tone != before[i])
                .collect();
            assert!(moved.len() <= 1, "one block, several analyses: {moved:?}");
            for i in moved {
                analyses[i] += 1;
            }
        }
        // 3 s at four a second: 12 turns each (the first second's turns find too little audio).
        assert!(analyses.iter().all(|&a| a == 11 || a == 12), "{analyses:?}");
        let summaries: Vec<_> = events
            .iter()
            .filter_map(|ev| match ev {
                LiveEvent::Summary { t_s, channels } if *t_s > 1.49 => Some(channels),
                _ => None,
            })
            .collect();
        assert!(summaries.len() >= 3);
        for chans in summaries {
            for c in chans {
                let f = c.fundamental_hz.expect("every channel analysed");
                assert!((f - 997.0).abs() < 1e-6, "{f}");
            }
        }
    }

    #[test]
    fn steady_tone_summaries() {
        let x = tone(RATE as usize * 3, |_| 0.1, |_| 1.0);
        let (events, _) = run(&x, 480);
        let sums: Vec<&Vec<ChannelSummary>> = events
            .iter()
            .filter_map(|e| match e {
                LiveEvent::Summary { channels, .. } => Some(channels),
                _ => None,
            })
            .collect();
        assert_eq!(sums.len(), 3);
        for s in &sums[1..] {
            let c = &s[0];
            assert!((c.fundamental_hz.unwrap() - 997.0).abs() < 0.01);
            assert!((c.sample_peak_dbfs.unwrap() + 20.0).abs() < 0.01);
            assert!(c.thd_pct.unwrap() < 1e-3);
            assert_eq!(c.overs + c.flat_tops, 0);
        }
        assert!(!events.iter().any(|e| matches!(e, LiveEvent::Clip { .. })));
    }

    /// Clean for 2 s, then flat-topped at −6 dBFS: one episode (one Clip event), announced
    /// promptly by ClipStarted, and an onset between the clean and clipped levels.
    #[test]
    fn clipping_episode_onset_and_prompt_notice() {
        let start = RATE as usize * 2;
        let x = tone(
            RATE as usize * 4,
            |i| if i < start { 0.4 } else { 1.0 },
            |i| {
                if i < start {
                    1.0
                } else {
                    0.5
                }
            },
        );
        let (events, when) = run(&x, 480);
        let started: Vec<usize> = events
            .iter()
            .enumerate()
            .filter(|(_, e)| matches!(e, LiveEvent::ClipStarted { .. }))
            .map(|(i, _)| i)
            .collect();
        assert_eq!(started.len(), 1, "{events:?}");
        let LiveEvent::ClipStarted {
            t_s,
            kind,
            level_dbfs,
            ..
        } = &events[started[0]]
        else {
            unreachable!()
        };
        assert_eq!(*kind, ClipKind::FlatTop);
        assert!((*t_s - 2.0).abs() < 0.001, "{t_s}");
        assert!((level_dbfs.unwrap() + 6.02).abs() < 0.05);
        // Reported with the block that completed the first plateau: within one 10 ms block.
        let seen_at = when[started[0]] as f64 / RATE as f64;
        assert!(seen_at - t_s < 0.02, "{seen_at} vs {t_s}");
        let clips: Vec<&ClipEvent> = events
            .iter()
            .filter_map(|e| match e {
                LiveEvent::Clip { event, .. } => Some(event),
                _ => None,
            })
            .collect();
        assert_eq!(clips.len(), 1);
        assert!(clips[0].runs > 300 && (clips[0].end_s - 4.0).abs() < 0.01);
        let onset = events
            .iter()
            .find_map(|e| match e {
                LiveEvent::Onset(o) => Some(o),
                _ => None,
            })
            .expect("onset");
        assert!(onset.t_s > 2.0 && onset.t_s <= 3.1, "{onset:?}");
        let l = onset.fundamental_dbfs.unwrap();
        assert!(l > 20.0 * 0.4f64.log10() - 0.1 && l < 0.0, "{l}");
    }

    #[test]
    fn selected_channels_only() {
        let x = tone(RATE as usize, |_| 0.5, |_| 1.0);
        // Three channels: silence, the tone, the tone clipped.
        let frames: Vec<f32> = x
            .iter()
            .flat_map(|&v| [0.0, v, v.clamp(-0.25, 0.25)])
            .collect();
        let mut e = Engine::new(RATE, 3, None, EngineSettings::default()).select(&[2, 3]);
        assert_eq!(e.selected(), vec![2, 3]);
        let mut events = Vec::new();
        e.process(&frames, &mut |ev| events.push(ev));
        let LiveEvent::Summary { channels, .. } = events
            .iter()
            .find(|e| matches!(e, LiveEvent::Summary { .. }))
            .unwrap()
        else {
            unreachable!()
        };
        assert_eq!(
            channels.iter().map(|c| c.channel).collect::<Vec<_>>(),
            vec![2, 3]
        );
        assert_eq!(channels[0].flat_tops, 0);
        assert!(channels[1].flat_tops > 1000);
        assert!(events
            .iter()
            .all(|e| !matches!(e, LiveEvent::ClipStarted { channel: 2, .. })));
    }

    #[test]
    fn a_gap_resets_and_is_reported() {
        let x = tone(RATE as usize, |_| 0.5, |_| 1.0);
        let mut e = Engine::new(RATE, 1, None, EngineSettings::default());
        let mut events = Vec::new();
        e.process(&x[..24_000], &mut |ev| events.push(ev));
        e.gap(4_800, &mut |ev| events.push(ev));
        e.process(&x[24_000..], &mut |ev| events.push(ev));
        assert!(events
            .iter()
            .any(|ev| matches!(ev, LiveEvent::Gap { frames: 4_800, .. })));
        assert_eq!(e.position(), 48_000 + 4_800);
    }
}
