//! What the commands share: the configuration files merged under the built-in defaults, and
//! their validation into scan settings (`plan_from`), which `scan`, `log`, `watch`, `demo` and
//! `compare` all measure with.

use std::path::Path;

use crate::analysis::ChannelSettings;
use crate::config::{self, ConfigFile};
use crate::dsp::clip::ClipSettings;
use crate::dsp::tone::ToneSettings;
use crate::scan::ScanSettings;

/// Validated settings of a scan run.
#[derive(Debug, Clone, PartialEq)]
pub struct ScanPlan {
    /// Measurement settings.
    pub settings: ScanSettings,
    /// JSON lines instead of the readable report.
    pub json: bool,
}

/// The built-in defaults under the configuration files (`--config FILE` over the user file).
pub fn configured(config_file: Option<&Path>) -> Result<ConfigFile, String> {
    let files = config::layered(config_file).map_err(|e| e.to_string())?;
    Ok(config::builtin_defaults().merge(files))
}

/// Validate a merged configuration into scan settings.
pub fn plan_from(c: &ConfigFile) -> Result<ScanPlan, String> {
    let d = config::builtin_defaults();
    let m = &c.measure;
    let pick = |v: Option<f64>, def: Option<f64>| v.or(def).unwrap_or(f64::NAN);
    let band_low = pick(m.band_low_hz, d.measure.band_low_hz);
    let band_high = pick(m.band_high_hz, d.measure.band_high_hz);
    if !(band_low >= 0.0 && band_high > band_low) {
        return Err(format!(
            "band {band_low} Hz to {band_high} Hz is empty: --band-high must exceed --band-low"
        ));
    }
    if let Some(f) = m.fundamental_hz {
        if !(f > 0.0 && f.is_finite()) {
            return Err(format!("--fundamental {f} Hz must be a positive frequency"));
        }
    }
    let flat_tolerance = pick(m.flat_tolerance, d.measure.flat_tolerance);
    if !(flat_tolerance > 0.0 && flat_tolerance < 0.5) {
        return Err(format!(
            "--flat-tolerance {flat_tolerance} must be between 0 and 0.5 of full scale"
        ));
    }
    let flat_min_level = pick(m.flat_min_level_dbfs, d.measure.flat_min_level_dbfs);
    if flat_min_level.is_nan() || flat_min_level >= 0.0 {
        return Err(format!(
            "--flat-min-level {flat_min_level} dBFS must be below full scale (negative)"
        ));
    }
    let secs = |v: Option<std::time::Duration>, def: Option<std::time::Duration>| {
        v.or(def).unwrap_or_default().as_secs_f64()
    };
    let max_order = m.max_order.or(d.measure.max_order).unwrap_or(20);
    let over_length = m.over_length.or(d.measure.over_length).unwrap_or(3);
    Ok(ScanPlan {
        settings: ScanSettings {
            channel: ChannelSettings {
                clip: ClipSettings {
                    min_over_run: over_length as usize,
                    flat_tolerance: flat_tolerance as f32,
                    flat_min_level: 10f64.powf(flat_min_level / 20.0) as f32,
                    ..ClipSettings::default()
                },
                tone: ToneSettings {
                    band_low_hz: band_low,
                    band_high_hz: band_high,
                    max_order: max_order as usize,
                    fundamental_hz: m.fundamental_hz,
                    ..ToneSettings::default()
                },
                merge_gap_s: secs(c.scan.merge_gap, d.scan.merge_gap),
                ..ChannelSettings::default()
            },
            tone_span_s: secs(c.scan.tone_span, d.scan.tone_span),
            every_s: c.scan.every.map(|e| e.as_secs_f64()),
            keep_spans: false,
        },
        json: c.scan.json.or(d.scan.json).unwrap_or(false),
    })
}
