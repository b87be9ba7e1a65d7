//! The per-channel analyser: levels, true peak and clip detection on every sample; clip runs
//! gathered into episodes; a span kept for tone analysis; optional fixed-length slices.

use std::ops::Range;

use crate::dsp::clip::{ClipDetector, ClipKind, ClipRun, ClipSettings};
use crate::dsp::imd::{self, ImdResult, ImdSettings};
use crate::dsp::level::{amplitude_db, rms_dbfs, LevelStats};
use crate::dsp::tone::{ToneAnalyzer, ToneReport, ToneSettings};
use crate::dsp::truepeak::TruePeak;

use super::episode::{Episode, EpisodeTracker};
use super::report::{
    ChannelReport, ClipEvent, ClipReport, DistortionReport, HarmonicReport, ImdProductReport,
    ImdReport, LevelReport, SidedLevels, SliceChannel,
};

/// Settings for one channel's analysis.
#[derive(Debug, Clone, PartialEq)]
pub struct ChannelSettings {
    /// Clip detection.
    pub clip: ClipSettings,
    /// Tone analysis.
    pub tone: ToneSettings,
    /// Runs of one kind closer than this join one episode (s).
    pub merge_gap_s: f64,
    /// Most episodes listed per channel; the rest are counted.
    pub max_events: usize,
    /// Intermodulation analysis of the tone span (`scan --imd`); `None` leaves it out.
    pub imd: Option<ImdSettings>,
}

impl Default for ChannelSettings {
    fn default() -> Self {
        ChannelSettings {
            clip: ClipSettings::default(),
            tone: ToneSettings::default(),
            merge_gap_s: 0.1,
            max_events: 10_000,
            imd: None,
        }
    }
}

/// Samples handed to the level statistics and true-peak meter at a time (the meter's block).
const TP_BLOCK: usize = 4096;

/// Most run levels kept per kind and side for the median clip level.
const LEVELS_KEPT: usize = 65_536;

/// Tally of clip runs for one channel.
#[derive(Debug, Clone, Default)]
struct ClipTally {
    overs: u64,
    flat_tops: u64,
    clipped_samples: u64,
    first: Option<u64>,
    /// Run levels: [over, flat-top] × [positive, negative].
    levels: [[Vec<f32>; 2]; 2],
    episodes: EpisodeTracker,
    events: Vec<ClipEvent>,
    omitted: u64,
}

fn median_f32(v: &[f32]) -> Option<f32> {
    if v.is_empty() {
        return None;
    }
    let mut s = v.to_vec();
    let mid = s.len() / 2;
    let (_, m, _) = s.select_nth_unstable_by(mid, f32::total_cmp);
    Some(*m)
}

impl ClipTally {
    fn add(&mut self, run: ClipRun, rate: f64, s: &ChannelSettings) {
        let k = match run.kind {
            ClipKind::Over => {
                self.overs += 1;
                0
            }
            ClipKind::FlatTop => {
                self.flat_tops += 1;
                1
            }
        };
        self.clipped_samples += run.len;
        self.first = Some(self.first.map_or(run.start, |f| f.min(run.start)));
        let side = usize::from(run.level < 0.0);
        if self.levels[k][side].len() < LEVELS_KEPT {
            self.levels[k][side].push(run.level.abs());
        }
        if let Some(ep) = self.episodes.add(&run) {
            self.keep(ep, rate, s);
        }
    }

    fn keep(&mut self, ep: Episode, rate: f64, s: &ChannelSettings) {
        if self.events.len() < s.max_events {
            self.events.push(ep.to_event(rate));
        } else {
            self.omitted += 1;
        }
    }

    fn close_episode(&mut self, rate: f64, s: &ChannelSettings) {
        if let Some(ep) = self.episodes.flush() {
            self.keep(ep, rate, s);
        }
    }

    fn report(&self, rate: f64) -> ClipReport {
        let all =
            |k: usize| -> Vec<f32> { [&self.levels[k][0][..], &self.levels[k][1][..]].concat() };
        let dominant = if self.overs >= self.flat_tops { 0 } else { 1 };
        let db = |v: Option<f32>| v.and_then(|x| amplitude_db(x as f64));
        ClipReport {
            overs: self.overs,
            flat_tops: self.flat_tops,
            clipped_samples: self.clipped_samples,
            clip_level_dbfs: db(median_f32(&all(dominant))),
            flat_top_levels_dbfs: SidedLevels {
                positive: db(median_f32(&self.levels[1][0])),
                negative: db(median_f32(&self.levels[1][1])),
            },
            first_clip_s: self.first.map(|f| f as f64 / rate),
            events: self.events.clone(),
            events_omitted: self.omitted,
        }
    }
}

/// Per-slice accumulators.
#[derive(Debug)]
struct SliceState {
    len: u64,
    levels: LevelStats,
    buf: Vec<f32>,
    done: Vec<SliceChannel>,
    /// Run counts by slice index: (overs, flat tops).
    counts: Vec<(u64, u64)>,
}

/// Analyses one channel of a stream.
#[derive(Debug)]
pub struct ChannelAnalyzer {
    channel: usize,
    rate: u32,
    settings: ChannelSettings,
    pos: u64,
    levels: LevelStats,
    tp: TruePeak,
    clip: ClipDetector,
    tally: ClipTally,
    tone_span: Range<u64>,
    tone_buf: Vec<f32>,
    /// The span's analysis, done as soon as the span is complete.
    tone_result: Option<Option<ToneReport>>,
    /// The span's IMD analysis (when asked for), done with the tone analysis.
    imd_result: Option<Option<ImdResult>>,
    slices: Option<SliceState>,
    tone: ToneAnalyzer,
}

impl ChannelAnalyzer {
    /// An analyser for channel number `channel` (from 1) at `rate`, keeping samples in
    /// `tone_span` (stream indices) for tone analysis, and cutting slices of `slice_len` samples
    /// when given.
    pub fn new(
        channel: usize,
        rate: u32,
        settings: ChannelSettings,
        tone_span: Range<u64>,
        slice_len: Option<u64>,
    ) -> Self {
        let cap = (tone_span.end.saturating_sub(tone_span.start)).min(1 << 24) as usize;
        let gap = (settings.merge_gap_s * rate as f64) as u64;
        ChannelAnalyzer {
            channel,
            rate,
            clip: ClipDetector::new(settings.clip),
            settings,
            pos: 0,
            levels: LevelStats::default(),
            tp: TruePeak::new(rate),
            tally: ClipTally {
                episodes: EpisodeTracker::new(gap),
                ..ClipTally::default()
            },
            tone_buf: Vec::with_capacity(cap),
            tone_span,
            tone_result: None,
            imd_result: None,
            slices: slice_len.filter(|&l| l > 0).map(|len| SliceState {
                len,
                levels: LevelStats::default(),
                buf: Vec::with_capacity(len.min(1 << 24) as usize),
                done: Vec::new(),
                counts: Vec::new(),
            }),
            tone: ToneAnalyzer::new(),
        }
    }

    /// Feed the next samples of this channel.
    pub fn process(&mut self, x: &[f32]) {
        let rate = self.rate as f64;
        let (tally, settings, slices) = (&mut self.tally, &self.settings, &mut self.slices);
        self.clip.process(x, |run| {
            if let Some(sl) = slices.as_mut() {
                let idx = (run.start / sl.len) as usize;
                if sl.counts.len() <= idx {
                    sl.counts.resize(idx + 1, (0, 0));
                }
                match run.kind {
                    ClipKind::Over => sl.counts[idx].0 += 1,
                    ClipKind::FlatTop => sl.counts[idx].1 += 1,
                }
            }
            tally.add(run, rate, settings);
        });

        // Keep the tone span.
        let start = self.pos;
        let end = start + x.len() as u64;
        let lo = self.tone_span.start.max(start);
        let hi = self.tone_span.end.min(end);
        if lo < hi {
            self.tone_buf
                .extend_from_slice(&x[(lo - start) as usize..(hi - start) as usize]);
            if hi == self.tone_span.end {
                // Analyse now, while the rest of the stream is still being read.
                let rate = self.rate as f64;
                let t = self.tone.analyze(&self.tone_buf, rate, &self.settings.tone);
                self.tone_result = Some(t);
                if let Some(s) = &self.settings.imd {
                    self.imd_result = Some(imd::analyze(&self.tone_buf, rate, s));
                }
                self.tone_buf = Vec::new();
            }
        }

        if self.slices.is_none() {
            for block in x.chunks(TP_BLOCK) {
                let peak = self.levels.process(block);
                self.tp.process_with_peak(block, peak);
            }
        } else {
            // Slices: levels per slice (merged into the totals when a slice closes) and the
            // true-peak meter read per interval.
            let mut rest = x;
            let mut at = start;
            while !rest.is_empty() {
                let Some(sl) = self.slices.as_mut() else {
                    break;
                };
                let room = (sl.len - at % sl.len) as usize;
                let take = room.min(rest.len());
                for block in rest[..take].chunks(TP_BLOCK) {
                    let peak = sl.levels.process(block);
                    self.tp.process_with_peak(block, peak);
                }
                sl.buf.extend_from_slice(&rest[..take]);
                at += take as u64;
                rest = &rest[take..];
                if at % sl.len == 0 {
                    self.close_slice();
                }
            }
        }
        self.pos = end;
    }

    fn close_slice(&mut self) {
        let rate = self.rate as f64;
        let channel = self.channel;
        let Some(sl) = self.slices.as_mut() else {
            return;
        };
        if sl.buf.is_empty() {
            return;
        }
        let tone = self.tone.analyze(&sl.buf, rate, &self.settings.tone);
        self.levels.merge(&sl.levels);
        sl.done.push(SliceChannel {
            channel,
            sample_peak_dbfs: amplitude_db(sl.levels.peak as f64),
            true_peak_dbtp: amplitude_db(self.tp.take_interval_peak() as f64),
            rms_dbfs: rms_dbfs(sl.levels.rms()),
            overs: 0,
            flat_tops: 0,
            fundamental_hz: tone.as_ref().map(|t| t.fundamental_hz),
            fundamental_dbfs: tone
                .as_ref()
                .and_then(|t| amplitude_db(t.fundamental_amplitude)),
            thd_pct: tone.as_ref().and_then(|t| t.thd_ratio).map(|t| 100.0 * t),
            thd_n_db: tone.as_ref().and_then(|t| amplitude_db(t.thd_n_ratio)),
        });
        sl.levels = LevelStats::default();
        sl.buf.clear();
    }

    /// End of stream: close open runs, episodes and the last slice, and analyse the tone span.
    pub fn finish(&mut self) -> (ChannelReport, Vec<SliceChannel>) {
        let rate = self.rate as f64;
        let (tally, settings) = (&mut self.tally, &self.settings);
        let mut late = Vec::new();
        self.clip.finish(|run| late.push(run));
        for run in late {
            tally.add(run, rate, settings);
        }
        self.tally.close_episode(rate, &self.settings);
        self.close_slice();

        let tone = match self.tone_result.take() {
            Some(t) => t,
            None => self.tone.analyze(&self.tone_buf, rate, &self.settings.tone),
        };
        let imd_result = match (self.imd_result.take(), &self.settings.imd) {
            (Some(r), _) => r,
            (None, Some(s)) => imd::analyze(&self.tone_buf, rate, s),
            (None, None) => None,
        };
        let span_start = self.tone_span.start.min(self.pos) as f64 / rate;
        let distortion = tone.map(|t| distortion_report(&t, span_start, rate));
        let imd = imd_result.map(|r| imd_report(&r, span_start, rate));
        let peak = self.levels.peak as f64;
        let tp = self.tp.peak() as f64;
        let report = ChannelReport {
            channel: self.channel,
            level: LevelReport {
                sample_peak_dbfs: amplitude_db(peak),
                true_peak_dbtp: amplitude_db(tp),
                rms_dbfs: rms_dbfs(self.levels.rms()),
                crest_db: self.levels.crest_db(),
                dc_offset: self.levels.mean(),
                headroom_db: amplitude_db(tp).map(|d| -d),
                true_peak_oversampling: self.tp.factor(),
            },
            clipping: self.tally.report(rate),
            distortion,
            imd,
        };
        let mut slices = self
            .slices
            .as_mut()
            .map(|s| std::mem::take(&mut s.done))
            .unwrap_or_default();
        if let Some(sl) = &self.slices {
            for (i, (o, f)) in sl.counts.iter().enumerate() {
                if let Some(s) = slices.get_mut(i) {
                    s.overs = *o;
                    s.flat_tops = *f;
                }
            }
        }
        (report, slices)
    }
}

/// Turn a tone analysis into its report form.
pub fn distortion_report(t: &ToneReport, span_start_s: f64, rate: f64) -> DistortionReport {
    DistortionReport {
        fundamental_hz: t.fundamental_hz,
        fundamental_dbfs: amplitude_db(t.fundamental_amplitude),
        thd_pct: t.thd_ratio.map(|r| 100.0 * r),
        thd_db: t.thd_ratio.and_then(amplitude_db),
        thd_n_db: amplitude_db(t.thd_n_ratio),
        thd_n_pct: 100.0 * t.thd_n_ratio,
        sinad_db: t.sinad_db.is_finite().then_some(t.sinad_db),
        enob_bits: t.enob_bits.is_finite().then_some(t.enob_bits),
        odd_even_db: t.odd_even_db,
        falloff_db_per_octave: t.falloff_db_per_octave,
        noise_floor_dbc: t.noise_floor_dbc,
        span_start_s,
        span_end_s: span_start_s + t.samples as f64 / rate,
        harmonics: t
            .harmonics
            .iter()
            .map(|h| HarmonicReport {
                order: h.order,
                freq_hz: h.freq_hz,
                level_dbc: h.level_dbc,
                phase_deg: h.phase_deg,
                resolved: h.resolved,
            })
            .collect(),
    }
}

/// Turn an IMD analysis into its report form.
pub fn imd_report(r: &ImdResult, span_start_s: f64, rate: f64) -> ImdReport {
    let re_ref = |a: f64| amplitude_db(a / r.reference_amplitude);
    ImdReport {
        method: r.method.name().to_string(),
        f1_hz: r.f1_hz,
        f1_dbfs: amplitude_db(r.f1_amplitude),
        f2_hz: r.f2_hz,
        f2_dbfs: amplitude_db(r.f2_amplitude),
        reference: r.reference_name().to_string(),
        reference_dbfs: amplitude_db(r.reference_amplitude),
        imd_ratio: r.ratio,
        imd_pct: 100.0 * r.ratio,
        imd_db: amplitude_db(r.ratio),
        d2_db: r.d2_ratio.and_then(amplitude_db),
        d3_db: r.d3_ratio.and_then(amplitude_db),
        products: r
            .products
            .iter()
            .map(|p| ImdProductReport {
                name: p.name.clone(),
                order: p.order,
                freq_hz: p.freq_hz,
                level_dbfs: amplitude_db(p.amplitude),
                level_dbr: re_ref(p.amplitude),
            })
            .collect(),
        span_start_s,
        span_end_s: span_start_s + r.samples as f64 / rate,
    }
}
