//! The `brink-sweep-1` document: one sweep's steps, its clipping onset and knee. Field names are
//! part of the format; values with no meaning are `None` (JSON `null`), never NaN.

use std::collections::BTreeMap;

use serde::{Deserialize, Serialize};

/// Format tag of a sweep report.
pub const SWEEP_FORMAT: &str = "brink-sweep-1";

/// What was stepped.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum SweepKind {
    /// Drive stepped at a fixed frequency.
    Level,
    /// Frequency stepped at a fixed drive.
    Frequency,
}

/// One sweep.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct SweepReport {
    /// Always [`SWEEP_FORMAT`].
    pub format: String,
    /// Level or frequency sweep.
    pub kind: SweepKind,
    /// The stimulus frequency of a level sweep (Hz); `None` for a frequency sweep.
    pub frequency_hz: Option<f64>,
    /// The drive of a frequency sweep (dBFS); `None` for a level sweep.
    pub drive_dbfs: Option<f64>,
    /// Sample rate of both streams (Hz).
    pub sample_rate_hz: u32,
    /// Audio host (alsa, jack, ...).
    pub host: String,
    /// Output device's name.
    pub output_device: String,
    /// Output channel driven (from 1).
    pub output_channel: usize,
    /// Input device's name.
    pub input_device: String,
    /// Input channel measured (from 1).
    pub input_channel: usize,
    /// The THD threshold the onset refers to (%).
    pub onset_threshold_pct: f64,
    /// Loop gain at the lowest drive: return minus drive (dB).
    pub loop_gain_db: Option<f64>,
    /// The steps in rising drive (a level sweep's refining steps, played last, sorted in) or in
    /// rising frequency.
    pub steps: Vec<SweepStep>,
    /// Where THD first crosses the threshold (level sweep only); `None` when it never does.
    pub onset: Option<Onset>,
    /// Where THD starts rising fast (level sweep only); `None` when it never does.
    pub knee: Option<Knee>,
}

/// One step's measurement of the returned signal.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct SweepStep {
    /// Drive: the stimulus sine's peak level at the output (dBFS).
    pub drive_dbfs: f64,
    /// Stimulus frequency (Hz).
    pub frequency_hz: f64,
    /// Returned fundamental's peak level (dBFS, AES17: equals its RMS dBFS); `None` when no tone
    /// came back.
    pub return_dbfs: Option<f64>,
    /// Returned fundamental's frequency as measured (Hz).
    pub return_hz: Option<f64>,
    /// Returned sample peak (dBFS).
    pub return_peak_dbfs: Option<f64>,
    /// THD_F over the harmonics within the band (%).
    pub thd_pct: Option<f64>,
    /// THD+N, AES17 (dB).
    pub thd_n_db: Option<f64>,
    /// 20·log10(√ΣH_even² / √ΣH_odd²) (dB); positive means even-rich.
    pub odd_even_db: Option<f64>,
    /// Harmonic fall-off (dB per octave of order).
    pub falloff_db_per_octave: Option<f64>,
    /// H2..H10 (those within the band) in dBc, keyed by order; `null` for an exact zero.
    pub harmonics_dbc: BTreeMap<u32, Option<f64>>,
    /// Intermodulation of a two-tone sweep (%), referred as `scan --imd` refers it; the key is
    /// left out of a sine sweep.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub imd_pct: Option<f64>,
    /// The same in dB.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub imd_db: Option<f64>,
    /// An extra step played after the sweep between the two steps around the onset, to pin it
    /// down; the key is left out of regular steps.
    #[serde(default, skip_serializing_if = "std::ops::Not::not")]
    pub refined: bool,
}

impl SweepStep {
    /// The distortion figure the onset and knee follow: IMD for a two-tone sweep, else THD (%).
    pub fn figure_pct(&self) -> Option<f64> {
        self.imd_pct.or(self.thd_pct)
    }
}

/// The clipping onset: THD (IMD for a two-tone sweep) crossing the threshold, interpolated
/// between two steps.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct Onset {
    /// The threshold crossed (%).
    pub thd_pct: f64,
    /// Drive at the crossing (dBFS).
    pub drive_dbfs: f64,
    /// Returned level at the crossing (dBFS).
    pub return_dbfs: Option<f64>,
}

/// The knee: the first step from which THD rises faster than [`KNEE_SLOPE`] dB per dB of drive.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct Knee {
    /// Drive at the knee (dBFS).
    pub drive_dbfs: f64,
    /// Returned level at the knee (dBFS).
    pub return_dbfs: Option<f64>,
    /// THD (IMD for a two-tone sweep) at the knee (%).
    pub thd_pct: Option<f64>,
    /// Steepest THD rise anywhere in the sweep (dB of THD per dB of drive): about 1 for a
    /// second-order curve, 2 for a third-order one, far more where a hard clip sets in.
    pub steepest_db_per_db: f64,
}

/// THD rising faster than this (dB of THD per dB of drive) marks the knee. A memoryless curve
/// `y = x + a₂x² + a₃x³` gives H2 rising 1 dB/dB and H3 2 dB/dB (Taylor expansion; common
/// practice); a rise steeper than 3 dB/dB comes from a higher-order process setting in, such as
/// clipping.
pub const KNEE_SLOPE: f64 = 3.0;
