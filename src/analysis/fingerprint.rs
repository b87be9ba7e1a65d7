//! The harmonic fingerprint: one channel's tone report (H2.. in dBc, THD, THD+N, odd/even,
//! fall-off) with a name and where it came from. One type serves every place that shows or
//! compares fingerprints: the dashboard's harmonic panel and its A/B snapshots, and `compare`'s
//! two sides, whether measured live, from a WAV capture, from a saved snapshot or from a line of
//! `brink scan --json`.

use serde::Serialize;

use super::character;
use super::report::{ChannelReport, DistortionReport, HarmonicReport, ScanReport};

/// Where a fingerprint came from.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum Source {
    /// Measured live (the dashboard).
    Live,
    /// A WAV capture, measured now.
    Wav,
    /// A saved snapshot (a `scan` channel report).
    Snapshot,
    /// One line of `brink scan --json`.
    ScanReport,
}

impl Source {
    /// The source in words, for messages and tables.
    pub fn words(self) -> &'static str {
        match self {
            Source::Live => "live measurement",
            Source::Wav => "WAV capture",
            Source::Snapshot => "snapshot",
            Source::ScanReport => "scan report",
        }
    }
}

/// A harmonic fingerprint with a name.
#[derive(Debug, Clone, PartialEq)]
pub struct Fingerprint {
    /// How screens, tables and figures name it ("ch 2 at 12.3 s", "take.wav ch 1").
    pub label: String,
    /// The file it was read from, as given (empty for a live measurement).
    pub file: String,
    /// Where it came from.
    pub source: Source,
    /// The channel (from 1).
    pub channel: usize,
    /// The measurement, in `scan`'s report form.
    pub distortion: DistortionReport,
    /// The whole channel report (levels and clipping too), when there is one: what a snapshot
    /// file holds.
    pub report: Option<Box<ChannelReport>>,
}

impl Fingerprint {
    /// A fingerprint of the channel report `c`, when it carries a tone; labelled from the file
    /// name and channel ("take.wav ch 1").
    pub fn of_channel(file: &str, source: Source, c: ChannelReport) -> Option<Fingerprint> {
        let distortion = c.distortion.clone()?;
        Some(Fingerprint {
            label: format!("{} ch {}", file_name(file), c.channel),
            file: file.to_string(),
            source,
            channel: c.channel,
            distortion,
            report: Some(Box::new(c)),
        })
    }

    /// Harmonic `order` as measured (2 = second harmonic), if it lies within the band.
    pub fn harmonic(&self, order: usize) -> Option<&HarmonicReport> {
        self.distortion.harmonics.iter().find(|h| h.order == order)
    }

    /// The level (dBc) of harmonic `order` (1 = the fundamental, 0 dBc by definition).
    pub fn level_dbc(&self, order: usize) -> Option<f64> {
        if order == 1 {
            return Some(0.0);
        }
        self.harmonic(order).and_then(|h| h.level_dbc)
    }

    /// The character line.
    pub fn character(&self) -> String {
        let d = &self.distortion;
        character::describe(d.thd_pct, d.odd_even_db, d.falloff_db_per_octave)
    }

    /// Read a snapshot back: a `scan` channel report, or a whole `scan` report (its first
    /// channel with a tone). `label` names it, `file` is where it was read from.
    pub fn from_snapshot_json(text: &str, file: &str, label: &str) -> Result<Fingerprint, String> {
        let value: serde_json::Value =
            serde_json::from_str(text).map_err(|e| format!("not JSON: {e}"))?;
        let (channel, source) = if value.get("channels").is_some() {
            let report: ScanReport =
                serde_json::from_value(value).map_err(|e| format!("not a scan report: {e}"))?;
            let c = report
                .channels
                .into_iter()
                .find(|c| c.distortion.is_some())
                .ok_or("the scan report has no channel with a tone")?;
            (c, Source::ScanReport)
        } else {
            let c = serde_json::from_value::<ChannelReport>(value)
                .map_err(|e| format!("not a channel report: {e}"))?;
            (c, Source::Snapshot)
        };
        let mut f = Fingerprint::of_channel(file, source, channel)
            .ok_or("the channel report has no distortion measurement")?;
        f.label = label.to_string();
        Ok(f)
    }
}

/// The last part of a path, for labels.
pub fn file_name(path: &str) -> String {
    std::path::Path::new(path)
        .file_name()
        .map_or_else(|| path.to_string(), |n| n.to_string_lossy().into_owned())
}
