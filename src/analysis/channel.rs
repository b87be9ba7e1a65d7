//! The one per-channel analyser that every mode drives: `scan` (whole files, `--every`
//! slices), the live pipeline (`log`, the dashboard, `demo`), and `sweep` (each step's record).
//!
//! Samples go in with [`ChannelAnalyzer::process`], in blocks of any size: results never depend
//! on how the stream was cut. Every sample passes through the level statistics, the BS.1770
//! true-peak meter and the clip detector; clip runs gather into episodes, whose start and end
//! are announced as [`ClipNotice`]s. At any time the caller may take an [`IntervalReading`]
//! (levels and clip counts since the last one, with the tone figures that stand for the
//! interval) and analyse the tone of what the analyser keeps:
//! - a **window**, the latest N samples ([`ChannelAnalyzer::keep_window`]): the live tone window,
//!   and `scan --every`'s slices (cleared at each interval);
//! - a **span**, fixed stream positions ([`ChannelAnalyzer::keep_span`]): `scan`'s centre span,
//!   a sweep step's record; analysed once, as soon as it is complete.
//!
//! Tone analysis borrows a [`ToneAnalyzer`] from the caller, so one analyser's FFT plans and
//! buffers can serve many channels in turn (the live engine holds one; `scan` one per thread).
//! [`ChannelAnalyzer::report`] gives the whole-stream [`ChannelReport`] (the `brink-scan-1`
//! channel, also the snapshot shape).

use std::ops::Range;

use crate::dsp::clip::{ClipDetector, ClipKind, ClipRun, ClipSettings};
use crate::dsp::imd::{self, ImdResult, ImdSettings};
use crate::dsp::level::{amplitude_db, rms_dbfs, LevelStats};
use crate::dsp::tone::{ToneAnalyzer, ToneReport, ToneSettings};
use crate::dsp::truepeak::TruePeak;

use super::episode::{Episode, EpisodeTracker};
use super::reading::IntervalReading;
use super::report::{
    ChannelReport, ClipEvent, ClipReport, DistortionReport, HarmonicReport, ImdProductReport,
    ImdReport, LevelReport, SidedLevels,
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

/// What an analyser says about clipping as it happens.
#[derive(Debug, Clone, PartialEq)]
pub enum ClipNotice {
    /// An episode has begun: raised with its first run, for lamps.
    Started {
        /// Over or flat top.
        kind: ClipKind,
        /// Start of the run (s).
        t_s: f64,
        /// Run level (dBFS).
        level_dbfs: Option<f64>,
    },
    /// An episode has ended: no run has joined it for the merge gap (or the stream ended or
    /// broke off).
    Ended(ClipEvent),
}

/// Samples handed to the level statistics and true-peak meter at a time (the meter's block).
const TP_BLOCK: usize = 4096;

/// Most run levels kept per kind and side for the median clip level.
const LEVELS_KEPT: usize = 65_536;

fn median_f32(v: &[f32]) -> Option<f32> {
    if v.is_empty() {
        return None;
    }
    let mut s = v.to_vec();
    let mid = s.len() / 2;
    let (_, m, _) = s.select_nth_unstable_by(mid, f32::total_cmp);
    Some(*m)
}

/// Tally of clip runs for one channel.
#[derive(Debug, Clone, Default)]
struct ClipTally {
    overs: u64,
    flat_tops: u64,
    /// Runs found since the last interval reading: (overs, flat tops).
    interval: (u64, u64),
    clipped_samples: u64,
    first: Option<u64>,
    /// Keep run levels and the episode list (the whole-stream report needs them; a live lane,
    /// which only reports intervals and notices, does not).
    details: bool,
    /// Run levels: [over, flat-top] × [positive, negative].
    levels: [[Vec<f32>; 2]; 2],
    episodes: EpisodeTracker,
    events: Vec<ClipEvent>,
    omitted: u64,
    max_events: usize,
}

impl ClipTally {
    fn add(&mut self, run: &ClipRun) {
        let k = match run.kind {
            ClipKind::Over => {
                self.overs += 1;
                self.interval.0 += 1;
                0
            }
            ClipKind::FlatTop => {
                self.flat_tops += 1;
                self.interval.1 += 1;
                1
            }
        };
        self.clipped_samples += run.len;
        self.first = Some(self.first.map_or(run.start, |f| f.min(run.start)));
        if self.details {
            let side = usize::from(run.level < 0.0);
            if self.levels[k][side].len() < LEVELS_KEPT {
                self.levels[k][side].push(run.level.abs());
            }
        }
    }

    fn keep(&mut self, ep: &Episode, rate: f64) -> ClipEvent {
        let event = ep.to_event(rate);
        if self.details && self.events.len() < self.max_events {
            self.events.push(event.clone());
        } else {
            self.omitted += 1;
        }
        event
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

/// The latest samples of a channel, oldest overwritten first.
#[derive(Debug)]
struct Window {
    buf: Vec<f32>,
    /// Where the next sample goes (the oldest sample when full).
    head: usize,
    filled: usize,
}

impl Window {
    fn new(len: usize) -> Self {
        Window {
            buf: vec![0.0; len.max(1)],
            head: 0,
            filled: 0,
        }
    }

    fn push(&mut self, x: &[f32]) {
        let n = self.buf.len();
        let x = &x[x.len().saturating_sub(n)..];
        let first = x.len().min(n - self.head);
        self.buf[self.head..self.head + first].copy_from_slice(&x[..first]);
        let rest = x.len() - first;
        self.buf[..rest].copy_from_slice(&x[first..]);
        self.head = (self.head + x.len()) % n;
        self.filled = (self.filled + x.len()).min(n);
    }

    /// The samples kept, oldest first, as two slices.
    fn parts(&self) -> (&[f32], &[f32]) {
        let n = self.buf.len();
        if self.filled == n {
            let (newer, older) = self.buf.split_at(self.head);
            (older, newer)
        } else if self.head >= self.filled {
            (&self.buf[self.head - self.filled..self.head], &[])
        } else {
            let wrap = self.filled - self.head;
            (&self.buf[n - wrap..], &self.buf[..self.head])
        }
    }

    fn clear(&mut self) {
        self.head = 0;
        self.filled = 0;
    }
}

/// A fixed span of the stream kept for one tone analysis.
#[derive(Debug)]
struct Span {
    range: Range<u64>,
    buf: Vec<f32>,
    /// Keep the samples after the analysis (for a figure of the span).
    keep: bool,
    /// The span's analyses, once made: tone, and IMD when asked for.
    done: Option<(Option<ToneReport>, Option<ImdResult>)>,
}

/// Analyses one channel of a stream.
#[derive(Debug)]
pub struct ChannelAnalyzer {
    channel: usize,
    rate: u32,
    settings: ChannelSettings,
    pos: u64,
    /// Levels of the intervals already taken.
    totals: LevelStats,
    /// Levels since the last interval reading.
    interval: LevelStats,
    tp: TruePeak,
    clip: ClipDetector,
    tally: ClipTally,
    span: Option<Span>,
    window: Option<Window>,
}

impl ChannelAnalyzer {
    /// An analyser for channel number `channel` (from 1) at `rate`. It keeps nothing for tone
    /// analysis and no episode list until told to ([`ChannelAnalyzer::keep_span`],
    /// [`ChannelAnalyzer::keep_window`], [`ChannelAnalyzer::keep_details`]).
    pub fn new(channel: usize, rate: u32, settings: ChannelSettings) -> Self {
        let gap = (settings.merge_gap_s * rate as f64) as u64;
        ChannelAnalyzer {
            channel,
            rate,
            clip: ClipDetector::new(settings.clip),
            tally: ClipTally {
                episodes: EpisodeTracker::new(gap),
                max_events: settings.max_events,
                ..ClipTally::default()
            },
            settings,
            pos: 0,
            totals: LevelStats::default(),
            interval: LevelStats::default(),
            tp: TruePeak::new(rate),
            span: None,
            window: None,
        }
    }

    /// Keep the samples at stream positions `range` for one tone analysis (the report's).
    pub fn keep_span(mut self, range: Range<u64>) -> Self {
        let cap = (range.end.saturating_sub(range.start)).min(1 << 24) as usize;
        self.span = Some(Span {
            range,
            buf: Vec::with_capacity(cap),
            keep: false,
            done: None,
        });
        self
    }

    /// Keep the span's samples after its analysis, for [`ChannelAnalyzer::take_span_samples`].
    pub fn keep_span_samples(mut self) -> Self {
        if let Some(span) = &mut self.span {
            span.keep = true;
        }
        self
    }

    /// The span's first stream position and its samples (as far as the stream reached), when
    /// they were kept.
    pub fn take_span_samples(&mut self) -> Option<(u64, Vec<f32>)> {
        let span = self.span.as_mut().filter(|s| s.keep)?;
        Some((span.range.start, std::mem::take(&mut span.buf)))
    }

    /// Keep the latest `frames` samples for tone analysis of a sliding window.
    pub fn keep_window(mut self, frames: usize) -> Self {
        self.window = Some(Window::new(frames));
        self
    }

    /// Keep run levels and the list of episodes for the whole-stream report.
    pub fn keep_details(mut self) -> Self {
        self.tally.details = true;
        self
    }

    /// Channel number, from 1.
    pub fn channel(&self) -> usize {
        self.channel
    }

    /// Stream position: samples processed (and skipped over gaps).
    pub fn position(&self) -> u64 {
        self.pos
    }

    /// Feed the next samples of this channel; clip notices go to `notice`. Returns the largest
    /// |sample| of the block.
    pub fn process(&mut self, x: &[f32], notice: &mut impl FnMut(ClipNotice)) -> f32 {
        let rate = self.rate as f64;
        let start = self.pos;
        let end = start + x.len() as u64;
        let tally = &mut self.tally;
        self.clip.process(x, |run| {
            tally.add(&run);
            if let Some(closed) = tally.episodes.add(&run) {
                notice(ClipNotice::Ended(tally.keep(&closed, rate)));
            }
            if tally.episodes.open().is_some_and(|e| e.runs == 1) {
                notice(ClipNotice::Started {
                    kind: run.kind,
                    t_s: run.start as f64 / rate,
                    level_dbfs: amplitude_db(run.level.abs() as f64),
                });
            }
        });
        // An episode ends once no run can join it any more: the stream, and any run still in
        // flight, are past its merge window.
        let settled = self.clip.earliest_open_start().unwrap_or(end).min(end);
        if let Some(closed) = self.tally.episodes.poll(settled) {
            notice(ClipNotice::Ended(self.tally.keep(&closed, rate)));
        }

        if let Some(span) = &mut self.span {
            let lo = span.range.start.max(start);
            let hi = span.range.end.min(end);
            if lo < hi && span.done.is_none() {
                span.buf
                    .extend_from_slice(&x[(lo - start) as usize..(hi - start) as usize]);
            }
        }
        if let Some(w) = &mut self.window {
            w.push(x);
        }

        let mut peak = 0.0f32;
        for block in x.chunks(TP_BLOCK) {
            let p = self.interval.process(block);
            self.tp.process_with_peak(block, p);
            peak = peak.max(p);
        }
        self.pos = end;
        peak
    }

    /// The span is complete and not analysed yet: call [`ChannelAnalyzer::analyse_span`] now,
    /// while the rest of the stream is still being read.
    pub fn span_ready(&self) -> bool {
        self.span
            .as_ref()
            .is_some_and(|s| s.done.is_none() && self.pos >= s.range.end)
    }

    /// Analyse the span (as far as it got) now; its samples are released.
    pub fn analyse_span(&mut self, tone: &mut ToneAnalyzer) {
        let rate = self.rate as f64;
        let Some(span) = &mut self.span else {
            return;
        };
        if span.done.is_some() {
            return;
        }
        let t = tone.analyze(&span.buf, rate, &self.settings.tone);
        let i = self
            .settings
            .imd
            .as_ref()
            .and_then(|s| imd::analyze(&span.buf, rate, s));
        span.done = Some((t, i));
        if !span.keep {
            span.buf = Vec::new();
        }
    }

    /// The window holds as many samples as it can.
    pub fn window_full(&self) -> bool {
        self.window
            .as_ref()
            .is_some_and(|w| w.filled == w.buf.len())
    }

    /// Analyse the tone of the window (what it holds, oldest first). `hint_hz`, the fundamental
    /// of an earlier overlapping window, speeds the fit up without moving its result.
    pub fn analyse_window(
        &self,
        tone: &mut ToneAnalyzer,
        hint_hz: Option<f64>,
    ) -> Option<DistortionReport> {
        let w = self.window.as_ref()?;
        let rate = self.rate as f64;
        let (older, newer) = w.parts();
        let t = tone.analyze_parts(older, newer, rate, &self.settings.tone, hint_hz)?;
        let start = self.pos.saturating_sub(w.filled as u64) as f64 / rate;
        Some(distortion_report(&t, start, rate))
    }

    /// Forget the window's samples (a new interval's window starts empty).
    pub fn clear_window(&mut self) {
        if let Some(w) = &mut self.window {
            w.clear();
        }
    }

    /// The reading of the interval since the last call (or the start), with `tone` standing for
    /// its tone figures; a new interval starts.
    pub fn take_interval(&mut self, tone: Option<&DistortionReport>) -> IntervalReading {
        let tp = self.tp.take_interval_peak();
        let counts = std::mem::take(&mut self.tally.interval);
        let reading = IntervalReading::new(self.channel, &self.interval, tp, counts, tone);
        self.totals.merge(&self.interval);
        self.interval = LevelStats::default();
        reading
    }

    /// Highest true peak since the last call (for meter frames; independent of intervals).
    pub fn take_frame_true_peak(&mut self) -> f32 {
        self.tp.take_frame_peak()
    }

    /// Samples seen since the last interval reading.
    pub fn interval_samples(&self) -> u64 {
        self.interval.count
    }

    /// The stream skips `frames` lost frames; call [`ChannelAnalyzer::restart`] next.
    pub fn skip(&mut self, frames: u64) {
        self.pos += frames;
    }

    /// The stream starts over here (after a gap, or a reconnected input): the open episode is
    /// closed, and the state that spans samples (interpolator history, plateaus in progress,
    /// the window) is reset. Readings are kept.
    pub fn restart(&mut self, notice: &mut impl FnMut(ClipNotice)) {
        let rate = self.rate as f64;
        if let Some(closed) = self.tally.episodes.flush() {
            notice(ClipNotice::Ended(self.tally.keep(&closed, rate)));
        }
        self.tp.reset();
        self.clip.reset_at(self.pos);
        self.clear_window();
    }

    /// End of stream: report runs still open and close the open episode.
    pub fn close(&mut self, notice: &mut impl FnMut(ClipNotice)) {
        let rate = self.rate as f64;
        let mut late = Vec::new();
        self.clip.finish(|run| late.push(run));
        for run in late {
            self.tally.add(&run);
            if let Some(closed) = self.tally.episodes.add(&run) {
                notice(ClipNotice::Ended(self.tally.keep(&closed, rate)));
            }
        }
        if let Some(closed) = self.tally.episodes.flush() {
            notice(ClipNotice::Ended(self.tally.keep(&closed, rate)));
        }
    }

    /// The whole stream's report: levels, clipping, and the span's tone (analysed now if it
    /// was not yet). Call after [`ChannelAnalyzer::close`].
    pub fn report(&mut self, tone: &mut ToneAnalyzer) -> ChannelReport {
        let rate = self.rate as f64;
        self.analyse_span(tone);
        let (tone_report, imd_result, span_start) = match &mut self.span {
            Some(span) => {
                let (t, i) = span.done.take().unwrap_or((None, None));
                let start = span.range.start.min(self.pos) as f64 / rate;
                (t, i, start)
            }
            None => (None, None, 0.0),
        };
        let distortion = tone_report.map(|t| distortion_report(&t, span_start, rate));
        let imd = imd_result.map(|r| imd_report(&r, span_start, rate));
        let mut levels = self.totals;
        levels.merge(&self.interval);
        let peak = levels.peak as f64;
        let tp = self.tp.peak() as f64;
        ChannelReport {
            channel: self.channel,
            level: LevelReport {
                sample_peak_dbfs: amplitude_db(peak),
                true_peak_dbtp: amplitude_db(tp),
                rms_dbfs: rms_dbfs(levels.rms()),
                crest_db: levels.crest_db(),
                dc_offset: levels.mean(),
                headroom_db: amplitude_db(tp).map(|d| -d),
                true_peak_oversampling: self.tp.factor(),
            },
            clipping: self.tally.report(rate),
            distortion,
            imd,
        }
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

#[cfg(test)]
mod tests {
    use super::*;

    fn kept(w: &Window) -> Vec<f32> {
        let (a, b) = w.parts();
        [a, b].concat()
    }

    #[test]
    fn the_window_keeps_the_latest_samples_oldest_first() {
        let mut w = Window::new(5);
        w.push(&[1.0, 2.0, 3.0]);
        assert_eq!(kept(&w), vec![1.0, 2.0, 3.0]);
        w.push(&[4.0, 5.0, 6.0, 7.0]);
        assert_eq!(kept(&w), vec![3.0, 4.0, 5.0, 6.0, 7.0]);
        let long: Vec<f32> = (10..22).map(|v| v as f32).collect();
        w.push(&long);
        assert_eq!(kept(&w), vec![17.0, 18.0, 19.0, 20.0, 21.0]);
        w.clear();
        w.push(&[8.0]);
        assert_eq!(kept(&w), vec![8.0]);
    }

    /// A 997 Hz sine at 0.9 of full scale, flat-topped at 0.5, with a burst at full scale from
    /// sample 47 990 to 48 010 (an over straddling the first interval's end).
    fn clipped() -> Vec<f32> {
        (0..96_000)
            .map(|i| {
                if (47_990..48_010).contains(&i) {
                    1.0
                } else {
                    let v = 0.9 * (2.0 * std::f64::consts::PI * 997.0 * i as f64 / 48_000.0).sin();
                    v.clamp(-0.5, 0.5) as f32
                }
            })
            .collect()
    }

    /// Feed `x` in blocks of the sizes given (cycled), taking an interval reading every
    /// `every` samples, as `scan --every` and the live engine both do.
    fn readings(x: &[f32], blocks: &[usize], every: usize) -> Vec<IntervalReading> {
        let mut a = ChannelAnalyzer::new(1, 48_000, ChannelSettings::default()).keep_window(every);
        let mut tone = ToneAnalyzer::new();
        let mut out = Vec::new();
        let (mut at, mut k) = (0, 0);
        while at < x.len() {
            let to_boundary = every - at % every;
            let n = blocks[k % blocks.len()].min(to_boundary).min(x.len() - at);
            a.process(&x[at..at + n], &mut |_| {});
            at += n;
            k += 1;
            if at % every == 0 {
                let t = a.analyse_window(&mut tone, None);
                out.push(a.take_interval(t.as_ref()));
            }
        }
        out
    }

    #[test]
    fn interval_readings_do_not_depend_on_how_the_stream_is_cut() {
        let x = clipped();
        let whole = readings(&x, &[x.len()], 48_000);
        let mut cut = readings(&x, &[4096, 1000, 333, 7], 48_000);
        assert_eq!(whole.len(), 2);
        // The level statistics sum short runs in f32 before adding them up in f64, so the RMS
        // may differ in the last digits with the cut; everything else is the same to the bit.
        for (w, c) in whole.iter().zip(&mut cut) {
            let (a, b) = (w.rms_dbfs.expect("rms"), c.rms_dbfs.expect("rms"));
            assert!((a - b).abs() < 1e-6, "{a} {b}");
            c.rms_dbfs = w.rms_dbfs;
        }
        assert_eq!(whole, cut);
        assert!(whole[0].flat_tops > 100, "{:?}", whole[0]);
        assert!(whole[0].thd_pct.is_some_and(|t| t > 5.0));
    }

    /// A run belongs to the interval that completes it: the over that starts 10 samples before
    /// the first interval's end is counted in the second (where the live engine, which cannot
    /// look back, finds it too).
    #[test]
    fn a_run_is_counted_in_the_interval_that_completes_it() {
        let r = readings(&clipped(), &[480], 48_000);
        assert_eq!((r[0].overs, r[1].overs), (0, 1));
    }
}
