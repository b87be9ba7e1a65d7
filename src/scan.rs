//! `brink scan`: measure WAV files offline with the same analysers the live pipeline uses.

use std::path::Path;
use std::sync::Arc;

use crate::analysis::report::{ChannelReport, ScanReport, TimelineSlice, SCAN_FORMAT};
use crate::analysis::{ChannelAnalyzer, ChannelSettings, IntervalReading};
use crate::dsp::clip::ClipSettings;
use crate::dsp::tone::ToneAnalyzer;
use crate::source::wav::{WavError, WavSource};
use std::collections::VecDeque;
use std::ops::Range;
use std::sync::atomic::{AtomicU64, Ordering};
use std::sync::{Condvar, Mutex, MutexGuard};
use std::time::Duration;

/// Settings for a scan.
#[derive(Debug, Clone, PartialEq)]
pub struct ScanSettings {
    /// Per-channel analysis settings (the full-scale threshold is set per file).
    pub channel: ChannelSettings,
    /// Length of the span at the centre of the file used for the distortion report (s).
    pub tone_span_s: f64,
    /// Timeline slice length (s), if any.
    pub every_s: Option<f64>,
    /// Keep every channel's tone-span samples for a figure ([`scan_file_keeping_spans`]).
    pub keep_spans: bool,
}

impl Default for ScanSettings {
    fn default() -> Self {
        ScanSettings {
            channel: ChannelSettings::default(),
            tone_span_s: 4.0,
            every_s: None,
            keep_spans: false,
        }
    }
}

/// Most decoded blocks held at once; the decoder helps analyse while the queue is full.
const QUEUE: usize = 8;

/// Frames read per block.
const BLOCK_FRAMES: usize = 32_768;

/// The centred span of `span_frames` in a file of `frames` (the whole file when shorter).
pub fn centre_span(frames: u64, span_frames: u64) -> std::ops::Range<u64> {
    if frames <= span_frames {
        0..frames
    } else {
        let start = (frames - span_frames) / 2;
        start..start + span_frames
    }
}

/// The samples of the tone span of every channel, as the scan read them (full scale ±1).
#[derive(Debug, Clone, PartialEq, Default)]
pub struct SpanSamples {
    /// Stream position (frame) of the span's first sample.
    pub start: u64,
    /// Per channel, channel 1 first.
    pub channels: Vec<Vec<f32>>,
}

/// Scan one file.
pub fn scan_file(path: &Path, settings: &ScanSettings) -> Result<ScanReport, WavError> {
    scan_file_keeping_spans(path, settings).map(|(report, _)| report)
}

/// Scan one file, and give back the samples of its tone span as read (every channel's, when
/// `settings.keep_spans`; none otherwise): what a figure of the span draws, without reading
/// the file again.
pub fn scan_file_keeping_spans(
    path: &Path,
    settings: &ScanSettings,
) -> Result<(ScanReport, SpanSamples), WavError> {
    let mut src = WavSource::open(path)?;
    let info = src.info().clone();
    let rate = info.sample_rate;
    let mut chs = settings.channel.clone();
    chs.clip.full_scale = ClipSettings::full_scale_for_bits(info.integer_bits());
    let span_frames = (settings.tone_span_s * rate as f64).round().max(1.0) as u64;
    let span = centre_span(info.frames.unwrap_or(span_frames), span_frames);
    let slice_len = settings
        .every_s
        .map(|s| (s * rate as f64).round().max(1.0) as u64);
    let analyzers: Vec<ScanChannel> = (0..info.channels)
        .map(|c| {
            ScanChannel::new(
                c + 1,
                rate,
                chs.clone(),
                span.clone(),
                slice_len,
                settings.keep_spans,
            )
        })
        .collect();

    let n_ch = info.channels;
    let threads = std::thread::available_parallelism().map_or(1, |n| n.get());
    let pool = Pool::new(analyzers);
    let frames = std::thread::scope(|scope| -> Result<u64, WavError> {
        let helpers: Vec<_> = (1..threads.min(n_ch + 1))
            .map(|t| {
                let pool = &pool;
                scope.spawn(move || pool.work_until_done(t, &mut ToneAnalyzer::new()))
            })
            .collect();
        let mut frames = 0u64;
        let mut result = Ok(());
        let mut tone = ToneAnalyzer::new();
        let mut inter = Vec::with_capacity(BLOCK_FRAMES * n_ch);
        loop {
            match src.read_frames(&mut inter, BLOCK_FRAMES) {
                Ok(0) => break,
                Ok(n) => {
                    frames += n as u64;
                    // Split into channel planes once, here, so the analysers read contiguous data.
                    let mut planes = pool.spare_planes();
                    split_planes(&inter, n_ch, &mut planes);
                    pool.push(planes, 0, &mut tone);
                }
                Err(e) => {
                    result = Err(e);
                    break;
                }
            }
        }
        pool.close();
        pool.work_until_done(0, &mut tone);
        for h in helpers {
            if let Err(panic) = h.join() {
                std::panic::resume_unwind(panic);
            }
        }
        result.map(|()| frames)
    })?;
    let finished = pool.finish();

    let mut channels = Vec::with_capacity(n_ch);
    let mut per_channel_slices = Vec::with_capacity(n_ch);
    let mut spans = SpanSamples::default();
    for (report, slices, samples) in finished {
        channels.push(report);
        per_channel_slices.push(slices);
        if let Some((start, x)) = samples {
            spans.start = start;
            spans.channels.push(x);
        }
    }
    let timeline = slice_len.map(|len| {
        let count = per_channel_slices.iter().map(Vec::len).max().unwrap_or(0);
        (0..count)
            .map(|i| TimelineSlice {
                t_s: (i as u64 * len) as f64 / rate as f64,
                end_s: (((i as u64 + 1) * len).min(frames)) as f64 / rate as f64,
                channels: per_channel_slices
                    .iter()
                    .filter_map(|s| s.get(i).cloned())
                    .collect(),
            })
            .collect()
    });
    let report = ScanReport {
        format: SCAN_FORMAT.to_string(),
        file: path.display().to_string(),
        sample_rate_hz: rate,
        encoding: info.encoding.to_string(),
        frames,
        duration_s: frames as f64 / rate as f64,
        channels,
        timeline,
    };
    Ok((report, spans))
}

/// Split interleaved frames into one plane per channel. The frames are taken in tiles small
/// enough to stay in the first-level cache while every channel's samples are picked out of
/// them, so many channels cost one pass over memory rather than one each.
fn split_planes(inter: &[f32], channels: usize, planes: &mut Planes) {
    const TILE: usize = 256;
    let frames = inter.len() / channels.max(1);
    planes.resize_with(channels, Vec::new);
    for plane in planes.iter_mut() {
        plane.clear();
        plane.reserve(frames);
    }
    if channels == 1 {
        planes[0].extend_from_slice(&inter[..frames]);
        return;
    }
    for tile in inter[..frames * channels].chunks(TILE * channels) {
        for (c, plane) in planes.iter_mut().enumerate() {
            plane.extend(tile.chunks_exact(channels).map(|frame| frame[c]));
        }
    }
}

/// One channel's analyser and how far it has got.
struct Lane {
    state: Mutex<LaneState>,
    /// Index of the next block this channel needs (mirrors `LaneState::next` for lock-free reads).
    next: AtomicU64,
}

struct LaneState {
    analyzer: ScanChannel,
    next: u64,
}

/// What a channel's scan gives: its report, its slices, and its span's samples when kept.
type Finished = (ChannelReport, Vec<IntervalReading>, Option<(u64, Vec<f32>)>);

/// One channel of a scan: the channel analyser, and the `--every` slices it has given.
struct ScanChannel {
    analyzer: ChannelAnalyzer,
    /// Slice length (frames), with `--every`.
    every: Option<u64>,
    slices: Vec<IntervalReading>,
}

impl ScanChannel {
    fn new(
        channel: usize,
        rate: u32,
        settings: ChannelSettings,
        span: Range<u64>,
        every: Option<u64>,
        keep_span: bool,
    ) -> Self {
        let every = every.filter(|&l| l > 0);
        let mut analyzer = ChannelAnalyzer::new(channel, rate, settings)
            .keep_span(span)
            .keep_details();
        if keep_span {
            analyzer = analyzer.keep_span_samples();
        }
        if let Some(len) = every {
            analyzer = analyzer.keep_window(len.min(1 << 24) as usize);
        }
        ScanChannel {
            analyzer,
            every,
            slices: Vec::new(),
        }
    }

    /// Feed a block, closing the slices it completes; the tone span is analysed as soon as it
    /// is complete.
    fn feed(&mut self, mut x: &[f32], tone: &mut ToneAnalyzer) {
        while !x.is_empty() {
            let take = match self.every {
                Some(len) => ((len - self.analyzer.position() % len) as usize).min(x.len()),
                None => x.len(),
            };
            self.analyzer.process(&x[..take], &mut |_| {});
            x = &x[take..];
            if self
                .every
                .is_some_and(|len| self.analyzer.position() % len == 0)
            {
                self.close_slice(tone);
            }
        }
        if self.analyzer.span_ready() {
            self.analyzer.analyse_span(tone);
        }
    }

    fn close_slice(&mut self, tone: &mut ToneAnalyzer) {
        if self.analyzer.interval_samples() == 0 {
            return;
        }
        let reading = self.analyzer.analyse_window(tone, None);
        self.slices
            .push(self.analyzer.take_interval(reading.as_ref()));
        self.analyzer.clear_window();
    }

    fn finish(&mut self, tone: &mut ToneAnalyzer) -> Finished {
        self.analyzer.close(&mut |_| {});
        if self.every.is_some() {
            self.close_slice(tone);
        }
        let report = self.analyzer.report(tone);
        let samples = self.analyzer.take_span_samples();
        (report, std::mem::take(&mut self.slices), samples)
    }
}

struct Queue {
    /// `blocks[i]` is block number `base + i`.
    blocks: VecDeque<Arc<Planes>>,
    base: u64,
    produced: u64,
    closed: bool,
    spare: Vec<Planes>,
}

/// One block of decoded audio, a plane per channel.
type Planes = Vec<Vec<f32>>;

/// Analysis work shared by every thread: each channel takes the decoded blocks in order, and
/// any idle thread (the decoder included, while the queue is full) may take a channel's next
/// block, so a heavy channel does not hold the others up.
struct Pool {
    lanes: Vec<Lane>,
    queue: Mutex<Queue>,
    changed: Condvar,
}

/// Lock a mutex, carrying on with the data if another thread panicked while holding it (that
/// panic is re-raised when the thread is joined).
fn lock<T>(m: &Mutex<T>) -> MutexGuard<'_, T> {
    m.lock().unwrap_or_else(|poison| poison.into_inner())
}

impl Pool {
    fn new(analyzers: Vec<ScanChannel>) -> Self {
        Pool {
            lanes: analyzers
                .into_iter()
                .map(|analyzer| Lane {
                    state: Mutex::new(LaneState { analyzer, next: 0 }),
                    next: AtomicU64::new(0),
                })
                .collect(),
            queue: Mutex::new(Queue {
                blocks: VecDeque::new(),
                base: 0,
                produced: 0,
                closed: false,
                spare: Vec::new(),
            }),
            changed: Condvar::new(),
        }
    }

    /// An emptied block, or a new one.
    fn spare_planes(&self) -> Planes {
        lock(&self.queue).spare.pop().unwrap_or_default()
    }

    /// Queue a decoded block; while the queue is full, do analysis work instead of waiting.
    fn push(&self, block: Planes, me: usize, tone: &mut ToneAnalyzer) {
        loop {
            {
                let mut q = lock(&self.queue);
                if q.blocks.len() < QUEUE {
                    q.blocks.push_back(Arc::new(block));
                    q.produced += 1;
                    drop(q);
                    self.changed.notify_all();
                    return;
                }
            }
            if !self.work_once(me, tone) {
                let q = lock(&self.queue);
                if q.blocks.len() >= QUEUE {
                    let _ = self.changed.wait_timeout(q, Duration::from_millis(5));
                }
            }
        }
    }

    fn close(&self) {
        lock(&self.queue).closed = true;
        self.changed.notify_all();
    }

    /// Process one block of some channel; false when no channel could take one now.
    fn work_once(&self, me: usize, tone: &mut ToneAnalyzer) -> bool {
        let n = self.lanes.len();
        for k in 0..n {
            let lane = &self.lanes[(me + k) % n];
            let Ok(mut st) = lane.state.try_lock() else {
                continue;
            };
            let block = {
                let q = lock(&self.queue);
                if st.next < q.produced {
                    q.blocks.get((st.next - q.base) as usize).cloned()
                } else {
                    None
                }
            };
            let Some(block) = block else { continue };
            let c = (me + k) % n;
            if let Some(plane) = block.get(c) {
                st.analyzer.feed(plane, tone);
            }
            st.next += 1;
            lane.next.store(st.next, Ordering::Release);
            drop(block);
            self.trim();
            return true;
        }
        false
    }

    /// Drop blocks every channel is past, keeping their buffers for reuse.
    fn trim(&self) {
        let low = self
            .lanes
            .iter()
            .map(|l| l.next.load(Ordering::Acquire))
            .min()
            .unwrap_or(0);
        let mut q = lock(&self.queue);
        let mut freed = false;
        while q.base < low {
            let Some(front) = q.blocks.pop_front() else {
                break;
            };
            q.base += 1;
            freed = true;
            if let Ok(v) = Arc::try_unwrap(front) {
                if q.spare.len() < QUEUE {
                    q.spare.push(v);
                }
            }
        }
        drop(q);
        if freed {
            self.changed.notify_all();
        }
    }

    /// Work until the queue is closed and every channel has taken every block.
    fn work_until_done(&self, me: usize, tone: &mut ToneAnalyzer) {
        loop {
            if self.work_once(me, tone) {
                continue;
            }
            let q = lock(&self.queue);
            let all_done = self
                .lanes
                .iter()
                .all(|l| l.next.load(Ordering::Acquire) >= q.produced);
            if q.closed && all_done {
                return;
            }
            let _ = self.changed.wait_timeout(q, Duration::from_millis(5));
        }
    }

    /// Finish every channel (tone analysis included), two threads at a time.
    fn finish(self) -> Vec<Finished> {
        let mut analyzers: Vec<ScanChannel> = self
            .lanes
            .into_iter()
            .map(|l| {
                l.state
                    .into_inner()
                    .unwrap_or_else(|p| p.into_inner())
                    .analyzer
            })
            .collect();
        let threads = std::thread::available_parallelism().map_or(1, |n| n.get());
        let per = analyzers.len().div_ceil(threads.max(1)).max(1);
        std::thread::scope(|scope| {
            let handles: Vec<_> = analyzers
                .chunks_mut(per)
                .map(|group| {
                    scope.spawn(move || {
                        let mut tone = ToneAnalyzer::new();
                        group
                            .iter_mut()
                            .map(|a| a.finish(&mut tone))
                            .collect::<Vec<_>>()
                    })
                })
                .collect();
            handles
                .into_iter()
                .flat_map(|h| h.join().unwrap_or_else(|p| std::panic::resume_unwind(p)))
                .collect()
        })
    }
}
