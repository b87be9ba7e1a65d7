//! The interval reading: one channel's levels, clip counts and latest tone figures over one
//! interval of the stream. One type serves every mode that reads a stream in intervals: `scan
//! --every` slices (`timeline` in `brink-scan-1`), the logger's `summary` records
//! (`brink-log-1`) and the dashboard's summaries, so they cannot disagree on what a field means.
//!
//! Values with no meaning are `None` (JSON `null`), never NaN.

use std::collections::BTreeMap;

use serde::{Deserialize, Serialize};

use super::report::DistortionReport;
use crate::dsp::level::{amplitude_db, rms_dbfs, LevelStats};

/// One channel's readings over an interval.
#[derive(Debug, Clone, PartialEq, Default, Serialize, Deserialize)]
pub struct IntervalReading {
    /// Channel number, from 1.
    pub channel: usize,
    /// Highest sample peak in the interval (dBFS).
    pub sample_peak_dbfs: Option<f64>,
    /// Highest true peak in the interval (dBTP).
    pub true_peak_dbtp: Option<f64>,
    /// RMS over the interval, AES17 (dBFS).
    pub rms_dbfs: Option<f64>,
    /// Overs found in the interval: a run is counted in the interval in which it ends (the
    /// interval that completes it), so live and offline counts agree.
    pub overs: u64,
    /// Flat tops found in the interval (counted as overs are).
    pub flat_tops: u64,
    /// Fundamental of the interval's tone analysis (Hz).
    pub fundamental_hz: Option<f64>,
    /// Its level (dBFS).
    pub fundamental_dbfs: Option<f64>,
    /// THD (%).
    pub thd_pct: Option<f64>,
    /// THD+N (dB).
    pub thd_n_db: Option<f64>,
    /// Odd/even balance (dB).
    #[serde(default)]
    pub odd_even_db: Option<f64>,
    /// SINAD (dB).
    #[serde(default)]
    pub sinad_db: Option<f64>,
    /// Harmonic fall-off (dB per octave of order).
    #[serde(default)]
    pub falloff_db_per_octave: Option<f64>,
    /// Harmonic levels by order (dBc).
    #[serde(default)]
    pub harmonics_dbc: BTreeMap<String, Option<f64>>,
    /// Harmonic phases by order, relative to the fundamental (degrees, sine convention).
    #[serde(default)]
    pub harmonics_phase_deg: BTreeMap<String, f64>,
    /// Noise floor of the tone analysis (dBc in one harmonic's bandwidth).
    #[serde(default)]
    pub noise_floor_dbc: Option<f64>,
    /// Whether each harmonic stood the configured resolve margin above the noise floor, by
    /// order, as the tone analysis judged it (a reader need not judge again, with settings it
    /// does not know).
    #[serde(default)]
    pub harmonics_resolved: BTreeMap<String, bool>,
}

impl IntervalReading {
    /// The reading of `channel` from an interval's level statistics, its true peak (linear),
    /// its clip counts and the tone analysis that stands for it.
    pub fn new(
        channel: usize,
        levels: &LevelStats,
        true_peak: f32,
        (overs, flat_tops): (u64, u64),
        tone: Option<&DistortionReport>,
    ) -> Self {
        IntervalReading {
            channel,
            sample_peak_dbfs: (levels.count > 0)
                .then(|| amplitude_db(f64::from(levels.peak)))
                .flatten(),
            true_peak_dbtp: amplitude_db(f64::from(true_peak)),
            rms_dbfs: rms_dbfs(levels.rms()),
            overs,
            flat_tops,
            fundamental_hz: tone.map(|t| t.fundamental_hz),
            fundamental_dbfs: tone.and_then(|t| t.fundamental_dbfs),
            thd_pct: tone.and_then(|t| t.thd_pct),
            thd_n_db: tone.and_then(|t| t.thd_n_db),
            odd_even_db: tone.and_then(|t| t.odd_even_db),
            sinad_db: tone.and_then(|t| t.sinad_db),
            falloff_db_per_octave: tone.and_then(|t| t.falloff_db_per_octave),
            harmonics_dbc: tone
                .map(|t| {
                    t.harmonics
                        .iter()
                        .map(|h| (h.order.to_string(), h.level_dbc))
                        .collect()
                })
                .unwrap_or_default(),
            harmonics_phase_deg: tone
                .map(|t| {
                    t.harmonics
                        .iter()
                        .map(|h| (h.order.to_string(), h.phase_deg))
                        .collect()
                })
                .unwrap_or_default(),
            noise_floor_dbc: tone.and_then(|t| t.noise_floor_dbc),
            harmonics_resolved: tone
                .map(|t| {
                    t.harmonics
                        .iter()
                        .map(|h| (h.order.to_string(), h.resolved))
                        .collect()
                })
                .unwrap_or_default(),
        }
    }
}
