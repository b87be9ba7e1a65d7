//! `brink scan`: measure WAV files offline with the same analysers the live pipeline uses.

use std::path::Path;

use crate::analysis::report::{ScanReport, TimelineSlice, SCAN_FORMAT};
use crate::analysis::{ChannelAnalyzer, ChannelSettings};
use crate::dsp::clip::ClipSettings;
use crate::source::wav::{WavError, WavSource};

/// Settings for a scan.
#[derive(Debug, Clone, PartialEq)]
pub struct ScanSettings {
    /// Per-channel analysis settings (the full-scale threshold is set per file).
    pub channel: ChannelSettings,
    /// Length of the span at the centre of the file used for the distortion report (s).
    pub tone_span_s: f64,
    /// Timeline slice length (s), if any.
    pub every_s: Option<f64>,
}

impl Default for ScanSettings {
    fn default() -> Self {
        ScanSettings {
            channel: ChannelSettings::default(),
            tone_span_s: 4.0,
            every_s: None,
        }
    }
}

/// Frames read per block.
const BLOCK_FRAMES: usize = 16_384;

/// The centred span of `span_frames` in a file of `frames` (the whole file when shorter).
pub fn centre_span(frames: u64, span_frames: u64) -> std::ops::Range<u64> {
    if frames <= span_frames {
        0..frames
    } else {
        let start = (frames - span_frames) / 2;
        start..start + span_frames
    }
}

/// Scan one file.
pub fn scan_file(path: &Path, settings: &ScanSettings) -> Result<ScanReport, WavError> {
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
    let mut analyzers: Vec<ChannelAnalyzer> = (0..info.channels)
        .map(|c| ChannelAnalyzer::new(c + 1, rate, chs.clone(), span.clone(), slice_len))
        .collect();

    let n_ch = info.channels;
    let mut inter = Vec::with_capacity(BLOCK_FRAMES * n_ch);
    let mut planar: Vec<Vec<f32>> = vec![Vec::with_capacity(BLOCK_FRAMES); n_ch];
    let mut frames = 0u64;
    loop {
        let got = src.read_frames(&mut inter, BLOCK_FRAMES)?;
        if got == 0 {
            break;
        }
        for (c, plane) in planar.iter_mut().enumerate() {
            plane.clear();
            plane.extend(inter.iter().skip(c).step_by(n_ch).take(got));
        }
        process_planes(&mut analyzers, &planar);
        frames += got as u64;
    }

    let mut channels = Vec::with_capacity(n_ch);
    let mut per_channel_slices = Vec::with_capacity(n_ch);
    for a in &mut analyzers {
        let (report, slices) = a.finish();
        channels.push(report);
        per_channel_slices.push(slices);
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
    Ok(ScanReport {
        format: SCAN_FORMAT.to_string(),
        file: path.display().to_string(),
        sample_rate_hz: rate,
        encoding: info.encoding.to_string(),
        frames,
        duration_s: frames as f64 / rate as f64,
        channels,
        timeline,
    })
}

/// Run each channel's analyser on its plane; channels are shared between two threads when
/// there are several.
fn process_planes(analyzers: &mut [ChannelAnalyzer], planes: &[Vec<f32>]) {
    if analyzers.len() < 2 {
        for (a, p) in analyzers.iter_mut().zip(planes) {
            a.process(p);
        }
        return;
    }
    let mid = analyzers.len() / 2;
    let (left, right) = analyzers.split_at_mut(mid);
    let (pl, pr) = planes.split_at(mid);
    std::thread::scope(|s| {
        s.spawn(|| {
            for (a, p) in left.iter_mut().zip(pl) {
                a.process(p);
            }
        });
        for (a, p) in right.iter_mut().zip(pr) {
            a.process(p);
        }
    });
}
