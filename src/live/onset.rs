//! Onset tracking across a live channel's tone analyses: the first time THD passes a threshold,
//! the fundamental level at which it did, interpolated in dB between the analysis before the
//! crossing and the one that crossed. Live only: `sweep` finds its onset from its steps
//! (`sweep::onset`), `scan` has one analysis per span.

use serde::{Deserialize, Serialize};

use crate::analysis::report::DistortionReport;

/// The first crossing of the onset threshold on a channel.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
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

/// Watches one channel's analyses for the first crossing of the threshold.
#[derive(Debug, Clone, PartialEq)]
pub struct OnsetTracker {
    threshold_pct: f64,
    /// (THD %, fundamental dBFS) of the previous analysis with a THD.
    previous: Option<(f64, Option<f64>)>,
    seen: bool,
}

impl OnsetTracker {
    /// A tracker for THD crossing `threshold_pct`.
    pub fn new(threshold_pct: f64) -> Self {
        OnsetTracker {
            threshold_pct,
            previous: None,
            seen: false,
        }
    }

    /// Look at the channel's next analysis (made at stream time `t_s`); the onset, the first
    /// time THD reaches the threshold.
    pub fn observe(
        &mut self,
        channel: usize,
        t_s: f64,
        report: Option<&DistortionReport>,
    ) -> Option<Onset> {
        let r = report?;
        let thd = r.thd_pct?;
        let threshold = self.threshold_pct;
        let level = r.fundamental_dbfs;
        let mut found = None;
        if !self.seen && thd >= threshold {
            self.seen = true;
            let at = match (self.previous, level) {
                (Some((p_thd, Some(p_level))), Some(l)) if p_thd < threshold && p_thd > 0.0 => {
                    // Interpolate the level where THD (in dB) meets the threshold.
                    let (a, b, x) = (p_thd.log10(), thd.log10(), threshold.log10());
                    let k = if b > a { (x - a) / (b - a) } else { 1.0 };
                    Some(p_level + k * (l - p_level))
                }
                _ => level,
            };
            found = Some(Onset {
                channel,
                t_s,
                thd_pct: threshold,
                fundamental_dbfs: at,
            });
        }
        self.previous = Some((thd, level));
        found
    }
}
