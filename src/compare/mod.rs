//! `brink compare`'s library: two harmonic fingerprints, or two sweeps, side by side, with the
//! differences and a few lines in plain words on how the two differ.
//!
//! Each input is recognised from its content, not its name ([`inputs`]): a RIFF header is a WAV
//! capture (measured as `brink scan` would, one channel picked with `--channel`); JSON with
//! `"format": "brink-scan-1"` is one line of `brink scan --json`; `"format": "brink-sweep-1"` is
//! a `brink sweep --json` document; JSON without a format key holding a `distortion` key is a
//! snapshot (a `scan` channel report, as the dashboard's `s` key saves it). Two fingerprints (WAV,
//! scan report, snapshot, in any mix; [`fingerprint`]) or two sweeps ([`sweep`]) compare; a sweep
//! against a fingerprint does not. [`words`] writes the numbers the findings and tables share,
//! [`output`] the text and `brink-compare-1` JSON.
//!
//! Differences are always B − A. The words use the character thresholds of
//! [`crate::analysis::character`] where they fit; the few of our own are constants below, each
//! with where it comes from.

use std::io;

use serde::Serialize;

use crate::source::wav::WavError;
use crate::{EXIT_FILE_ERROR, EXIT_USAGE};

pub mod fingerprint;
pub mod inputs;
pub mod output;
pub mod sweep;
pub mod words;

pub use fingerprint::{
    compare_fingerprints, FingerprintComparison, FingerprintSummary, HarmonicDiff,
};
pub use inputs::{load, parse_json_input, Fingerprint, Input, Source, Sweep};
pub use output::{write_json, write_text};
pub use sweep::{compare_sweeps, OnsetState, SweepComparison, SweepRow, SweepSummary};

/// Format tag of a comparison document.
pub const COMPARE_FORMAT: &str = "brink-compare-1";

/// THD (or THD+N) levels closer than this (dB) read as alike. Ours: about the smallest level
/// difference a listener or a meter reading is taken to notice (1 dB; common practice).
pub const THD_ALIKE_DB: f64 = 1.0;

/// Fall-off slopes closer than this (dB per octave of order) read as alike. Ours: a third of
/// the 9 dB/octave band between [`SLOW_FALLOFF`] and [`FAST_FALLOFF`] in the character line.
///
/// [`SLOW_FALLOFF`]: crate::analysis::character::SLOW_FALLOFF
/// [`FAST_FALLOFF`]: crate::analysis::character::FAST_FALLOFF
pub const FALLOFF_ALIKE_DB: f64 = 3.0;

/// Two onsets closer than this (dB of drive) read as "about the same drive". Ours: the accuracy
/// the sweep's onset is held to against the closed form (issue 5's test: within 0.3 dB).
pub const ONSET_ALIKE_DB: f64 = 0.3;

/// Steepest THD rises closer than this (dB of THD per dB of drive) read as equally abrupt. Ours:
/// the step between a second-order curve (H2 rises 1 dB/dB) and a third-order one (H3 rises
/// 2 dB/dB), from the Taylor expansion behind [`crate::sweep::report::KNEE_SLOPE`].
pub const ABRUPT_ALIKE_DB_PER_DB: f64 = 1.0;

/// Two level-sweep steps within this many dB of drive are the same step. Ours: drives are set
/// in steps of a tenth of a dB or more, so 0.05 dB can only be rounding.
pub const ALIGN_DRIVE_DB: f64 = 0.05;

/// Two frequency-sweep steps within this fraction of each other are the same step. Ours: well
/// under the spacing of any log-spaced frequency sweep (0.1 %).
pub const ALIGN_FREQ_FRACTION: f64 = 0.001;

/// Fundamentals further apart than this fraction are different tones, which the words point
/// out. Ours: 1 %, far beyond the fit's accuracy (0.01 Hz) and any converter clock's error.
pub const SAME_TONE_FRACTION: f64 = 0.01;

/// Harmonic orders always shown in the table (H2..H10); higher orders follow when measured.
pub const MIN_TABLE_ORDER: usize = 10;

/// Everything that can go wrong in `compare`. Messages name the file and what to do.
#[derive(Debug, thiserror::Error)]
pub enum CompareError {
    /// The file could not be read at all.
    #[error("{path}: cannot read: {source}")]
    Read {
        /// The file.
        path: String,
        /// Why.
        #[source]
        source: io::Error,
    },
    /// A WAV capture that could not be measured.
    #[error("{path}: {source}")]
    Wav {
        /// The file.
        path: String,
        /// Why.
        #[source]
        source: WavError,
    },
    /// Neither a RIFF header nor JSON, or JSON of no known shape.
    #[error("{path}: {what}; compare reads a WAV capture, a dashboard snapshot, one line of `brink scan --json` or a `brink sweep --json` document")]
    Unrecognised {
        /// The file.
        path: String,
        /// What it looked like.
        what: String,
    },
    /// A known format that does not parse as that format.
    #[error("{path}: not a valid {format} document: {detail}")]
    BadDocument {
        /// The file.
        path: String,
        /// The format it claims or seems to be.
        format: &'static str,
        /// The parser's complaint.
        detail: String,
    },
    /// A channel the input does not have.
    #[error("{path}: has no channel {channel} (it has {channels}); pick one with --channel")]
    NoChannel {
        /// The file.
        path: String,
        /// The channel asked for.
        channel: usize,
        /// How many it has.
        channels: usize,
    },
    /// The chosen channel carries no tone, so it has no fingerprint.
    #[error(
        "{path}: channel {channel} carries no steady tone, so it has no harmonic fingerprint{hint}"
    )]
    NoTone {
        /// The file.
        path: String,
        /// The channel.
        channel: usize,
        /// Which channels do, as a hint.
        hint: String,
    },
    /// A sweep document without steps.
    #[error("{path}: the sweep has no steps to compare")]
    EmptySweep {
        /// The file.
        path: String,
    },
    /// A sweep against a fingerprint.
    #[error("cannot compare a sweep with a harmonic fingerprint: {sweep} is a sweep, {other} a fingerprint; compare two sweeps or two fingerprints")]
    Mixed {
        /// The sweep.
        sweep: String,
        /// The fingerprint.
        other: String,
    },
    /// A level sweep against a frequency sweep.
    #[error("cannot compare a level sweep with a frequency sweep: {level} steps the drive, {frequency} the frequency; compare two sweeps of one kind")]
    SweepKinds {
        /// The level sweep.
        level: String,
        /// The frequency sweep.
        frequency: String,
    },
    /// The configuration files (for a WAV capture's scan settings) could not be used.
    #[error("cannot use the scan settings: {0}")]
    Settings(String),
}

impl CompareError {
    /// The exit status this error ends `compare` with.
    pub fn exit_code(&self) -> u8 {
        match self {
            CompareError::NoChannel { .. }
            | CompareError::Mixed { .. }
            | CompareError::SweepKinds { .. }
            | CompareError::Settings(_) => EXIT_USAGE,
            _ => EXIT_FILE_ERROR,
        }
    }
}

/// Two inputs compared.
#[derive(Debug, Clone, PartialEq, Serialize)]
#[serde(tag = "kind", rename_all = "lowercase")]
pub enum Comparison {
    /// Two harmonic fingerprints.
    Fingerprints(FingerprintComparison),
    /// Two sweeps.
    Sweeps(SweepComparison),
}

/// Compare two inputs: two fingerprints or two sweeps of one kind.
pub fn compare(a: &Input, b: &Input) -> Result<Comparison, CompareError> {
    match (a, b) {
        (Input::Fingerprint(fa), Input::Fingerprint(fb)) => {
            Ok(Comparison::Fingerprints(compare_fingerprints(fa, fb)))
        }
        (Input::Sweep(sa), Input::Sweep(sb)) => compare_sweeps(sa, sb).map(Comparison::Sweeps),
        (Input::Sweep(s), Input::Fingerprint(f)) | (Input::Fingerprint(f), Input::Sweep(s)) => {
            Err(CompareError::Mixed {
                sweep: s.file.clone(),
                other: f.file.clone(),
            })
        }
    }
}

#[cfg(test)]
mod tests {
    use super::fingerprint::tests::fingerprint;
    use super::sweep::tests::{step, sweep};
    use super::*;
    use crate::sweep::report::SweepKind;

    #[test]
    fn mixing_kinds_is_refused() {
        let s = Input::Sweep(sweep("s.json", vec![step(-20.0, 0.1)]));
        let f = Input::Fingerprint(fingerprint("f.json", &[(3, -40.0)], 1.0, -50.0, -10.0));
        let e = compare(&s, &f).expect_err("mixed");
        assert_eq!(e.exit_code(), EXIT_USAGE);
        assert!(
            e.to_string()
                .contains("s.json is a sweep, f.json a fingerprint"),
            "{e}"
        );
        let mut freq = sweep("f2.json", vec![step(-20.0, 0.1)]);
        freq.report.kind = SweepKind::Frequency;
        let e = compare(&s, &Input::Sweep(freq)).expect_err("kinds");
        assert!(
            e.to_string()
                .contains("s.json steps the drive, f2.json the frequency"),
            "{e}"
        );
    }
}
