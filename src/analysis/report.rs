//! Report types shared by `scan`, snapshots and the live sinks. Field names are part of the
//! `brink-scan-1` format; values with no meaning are `None` (JSON `null`), never NaN.

use serde::{Deserialize, Serialize};

use super::reading::IntervalReading;
use crate::dsp::clip::ClipKind;

/// Format tag of a scan report.
pub const SCAN_FORMAT: &str = "brink-scan-1";

/// One file's report.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ScanReport {
    /// Always [`SCAN_FORMAT`].
    pub format: String,
    /// The path as given.
    pub file: String,
    /// Sample rate (Hz).
    pub sample_rate_hz: u32,
    /// Sample encoding, e.g. "24-bit integer PCM".
    pub encoding: String,
    /// Frames analysed.
    pub frames: u64,
    /// Length (s).
    pub duration_s: f64,
    /// Per-channel reports, channel 1 first.
    pub channels: Vec<ChannelReport>,
    /// Per-slice readings when `--every` was given.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub timeline: Option<Vec<TimelineSlice>>,
}

/// One channel's report (also the shape of a saved snapshot).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ChannelReport {
    /// Channel number, from 1.
    pub channel: usize,
    /// Levels.
    pub level: LevelReport,
    /// Clipping.
    pub clipping: ClipReport,
    /// Distortion, when the channel carries a tone.
    pub distortion: Option<DistortionReport>,
    /// Intermodulation distortion, only with `scan --imd`; the key is left out without the
    /// flag and when the channel carries no tone pair to measure.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub imd: Option<ImdReport>,
}

/// Level readings.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct LevelReport {
    /// Highest |sample| (dBFS).
    pub sample_peak_dbfs: Option<f64>,
    /// True peak per ITU-R BS.1770-4 Annex 2, raw samples included (dBTP).
    pub true_peak_dbtp: Option<f64>,
    /// RMS, AES17 convention: a full-scale sine reads 0 dBFS.
    pub rms_dbfs: Option<f64>,
    /// Peak over plain RMS (dB).
    pub crest_db: Option<f64>,
    /// Mean sample value (full scale = 1).
    pub dc_offset: f64,
    /// Headroom left above the true peak (dB); negative when over full scale.
    pub headroom_db: Option<f64>,
    /// Oversampling factor used for true peak.
    pub true_peak_oversampling: usize,
}

/// Clipping readings.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ClipReport {
    /// Runs of consecutive samples at digital full scale (at least the configured length).
    pub overs: u64,
    /// Plateaus below full scale (clipping before the converter).
    pub flat_tops: u64,
    /// Samples inside overs and flat tops.
    pub clipped_samples: u64,
    /// Median level of the clipped runs of the more frequent kind (dBFS).
    pub clip_level_dbfs: Option<f64>,
    /// Median plateau level on the positive and negative side (dBFS): unequal sides mean
    /// asymmetric clipping.
    pub flat_top_levels_dbfs: SidedLevels,
    /// Start of the first clipped run (s).
    pub first_clip_s: Option<f64>,
    /// Clipping episodes: runs of one kind closer together than the merge gap.
    pub events: Vec<ClipEvent>,
    /// Episodes not listed because the list reached its limit.
    pub events_omitted: u64,
}

/// A level on each side of zero.
#[derive(Debug, Clone, Copy, PartialEq, Default, Serialize, Deserialize)]
pub struct SidedLevels {
    /// Positive side (dBFS).
    pub positive: Option<f64>,
    /// Negative side (dBFS, of the magnitude).
    pub negative: Option<f64>,
}

/// One clipping episode.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ClipEvent {
    /// "over" or "flat-top".
    pub kind: ClipKind,
    /// First clipped sample (s).
    pub start_s: f64,
    /// End of the last clipped sample (s).
    pub end_s: f64,
    /// Highest run level in the episode (dBFS).
    pub level_dbfs: Option<f64>,
    /// Clipped runs in the episode.
    pub runs: u64,
    /// Clipped samples in the episode.
    pub samples: u64,
}

/// Distortion readings of a channel carrying a tone.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct DistortionReport {
    /// Fundamental frequency (Hz).
    pub fundamental_hz: f64,
    /// Fundamental level: peak amplitude in dBFS (AES17: equals its RMS dBFS).
    pub fundamental_dbfs: Option<f64>,
    /// THD_F: √ΣH²/H1 over H2..H20 within the band (%); `None` when no harmonic lies within
    /// the band.
    pub thd_pct: Option<f64>,
    /// The same in dB.
    pub thd_db: Option<f64>,
    /// THD+N (AES17): all but the fundamental within the band, relative to the total (dB).
    pub thd_n_db: Option<f64>,
    /// The same in %.
    pub thd_n_pct: f64,
    /// SINAD (IEEE 1241, full band) in dB.
    pub sinad_db: Option<f64>,
    /// ENOB (IEEE 1241, full-scale range ±1) in bits.
    pub enob_bits: Option<f64>,
    /// 20·log10(√ΣH_even² / √ΣH_odd²) (dB); positive means even-rich.
    pub odd_even_db: Option<f64>,
    /// Slope of harmonic level against log2(order) (dB per octave of order).
    pub falloff_db_per_octave: Option<f64>,
    /// Level a harmonic would need to match the noise in its measurement bandwidth (dBc).
    pub noise_floor_dbc: Option<f64>,
    /// Start of the analysed span (s).
    pub span_start_s: f64,
    /// End of the analysed span (s).
    pub span_end_s: f64,
    /// H2.. within the band.
    pub harmonics: Vec<HarmonicReport>,
}

/// One harmonic.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct HarmonicReport {
    /// Order (2 = second harmonic).
    pub order: usize,
    /// Frequency (Hz).
    pub freq_hz: f64,
    /// Level relative to the fundamental (dB).
    pub level_dbc: Option<f64>,
    /// Phase relative to the fundamental (degrees, sine convention: θ_k − k·θ_1).
    pub phase_deg: f64,
    /// Stands at least the resolve margin above the noise floor.
    pub resolved: bool,
}

/// Intermodulation distortion of a two-tone stimulus (`scan --imd`).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ImdReport {
    /// "smpte" (sidebands f2 ± n·f1) or "twin" (f2 − f1, 2f1 − f2, 2f2 − f1).
    pub method: String,
    /// Lower tone (Hz).
    pub f1_hz: f64,
    /// Its peak level (dBFS).
    pub f1_dbfs: Option<f64>,
    /// Higher tone (Hz).
    pub f2_hz: f64,
    /// Its peak level (dBFS).
    pub f2_dbfs: Option<f64>,
    /// What every ratio is referred to: "f2" (the high tone, SMPTE) or "f1+f2" (the sum of the
    /// two tones' amplitudes, twin).
    pub reference: String,
    /// The reference's peak level (dBFS).
    pub reference_dbfs: Option<f64>,
    /// Total: √ΣA_p² over the reference, as a ratio.
    pub imd_ratio: f64,
    /// The same in %.
    pub imd_pct: f64,
    /// The same in dB; `None` when no product was measured above exact zero.
    pub imd_db: Option<f64>,
    /// Twin: the 2nd-order difference product f2 − f1 re the reference (dB); `None` for SMPTE.
    pub d2_db: Option<f64>,
    /// Twin: RSS of the 3rd-order products re the reference (dB); `None` for SMPTE.
    pub d3_db: Option<f64>,
    /// The products measured.
    pub products: Vec<ImdProductReport>,
    /// Start of the analysed span (s).
    pub span_start_s: f64,
    /// End of the analysed span (s).
    pub span_end_s: f64,
}

/// One intermodulation product.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ImdProductReport {
    /// Which product: "f2-f1", "f2+f1", "f2-2f1", ... (SMPTE); "f2-f1", "2f1-f2", "2f2-f1" (twin).
    pub name: String,
    /// Order of the product.
    pub order: u32,
    /// Frequency (Hz).
    pub freq_hz: f64,
    /// Peak level (dBFS).
    pub level_dbfs: Option<f64>,
    /// Level relative to the reference (dB).
    pub level_dbr: Option<f64>,
}

/// Readings of one slice of the timeline.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct TimelineSlice {
    /// Slice start (s).
    pub t_s: f64,
    /// Slice end (s).
    pub end_s: f64,
    /// Per channel: the same reading a live log's summary carries.
    pub channels: Vec<IntervalReading>,
}
