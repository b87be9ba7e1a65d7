//! `brink compare A B`: two harmonic fingerprints, or two sweeps, side by side, with the
//! differences and a few lines in plain words on how the two differ.
//!
//! Each input is recognised from its content, not its name: a RIFF header is a WAV capture
//! (measured as `brink scan` would, one channel picked with `--channel`); JSON with
//! `"format": "brink-scan-1"` is one line of `brink scan --json`; `"format": "brink-sweep-1"` is
//! a `brink sweep --json` document; JSON without a format key holding a `distortion` key is a
//! snapshot (a `scan` channel report, as the dashboard's `s` key saves it). Two fingerprints (WAV,
//! scan report, snapshot, in any mix) or two sweeps compare; a sweep against a fingerprint does
//! not.
//!
//! Differences are always B − A. The words use the character thresholds of
//! [`crate::analysis::character`] where they fit; the few of our own are constants below, each
//! with where it comes from.

use std::collections::BTreeMap;
use std::fmt::Write as _;
use std::io::{self, Read, Write};
use std::path::Path;

use serde::Serialize;

use crate::analysis::character::{self, Family, FAMILY_LEAD_DB, FAST_FALLOFF, SLOW_FALLOFF};
use crate::analysis::report::{ChannelReport, DistortionReport, ScanReport, SCAN_FORMAT};
use crate::scan::ScanSettings;
use crate::source::wav::WavError;
use crate::sweep::onset;
use crate::sweep::report::{Knee, Onset, SweepKind, SweepReport, SWEEP_FORMAT};
use crate::{EXIT_FILE_ERROR, EXIT_USAGE};

/// Format tag of a comparison document.
pub const COMPARE_FORMAT: &str = "brink-compare-1";

/// THD (or THD+N) levels closer than this (dB) read as alike. Ours: about the smallest level
/// difference a listener or a meter reading is taken to notice (1 dB; common practice).
pub const THD_ALIKE_DB: f64 = 1.0;

/// Fall-off slopes closer than this (dB per octave of order) read as alike. Ours: a third of
/// the 9 dB/octave band between [`SLOW_FALLOFF`] and [`FAST_FALLOFF`] in the character line.
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

/// Placeholder for a value that is not there.
const NONE: &str = "--";

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

/// Where a fingerprint came from.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum Source {
    /// A WAV capture, measured now.
    Wav,
    /// A saved snapshot (a `scan` channel report).
    Snapshot,
    /// One line of `brink scan --json`.
    ScanReport,
}

impl Source {
    fn words(self) -> &'static str {
        match self {
            Source::Wav => "WAV capture",
            Source::Snapshot => "snapshot",
            Source::ScanReport => "scan report",
        }
    }
}

/// One harmonic fingerprint read from an input.
#[derive(Debug, Clone, PartialEq)]
pub struct Fingerprint {
    /// The file as given.
    pub file: String,
    /// What kind of input it was.
    pub source: Source,
    /// The channel (from 1).
    pub channel: usize,
    /// The measurement.
    pub distortion: DistortionReport,
}

impl Fingerprint {
    /// A short name for tables and figures: "take.wav ch 1".
    pub fn label(&self) -> String {
        format!("{} ch {}", file_name(&self.file), self.channel)
    }

    fn level_dbc(&self, order: usize) -> Option<(Option<f64>, bool)> {
        self.distortion
            .harmonics
            .iter()
            .find(|h| h.order == order)
            .map(|h| (h.level_dbc, h.resolved))
    }
}

/// One sweep read from an input.
#[derive(Debug, Clone, PartialEq)]
pub struct Sweep {
    /// The file as given.
    pub file: String,
    /// The document.
    pub report: SweepReport,
}

impl Sweep {
    /// A short name for tables and figures: the file name.
    pub fn label(&self) -> String {
        file_name(&self.file)
    }
}

/// What an input holds.
#[derive(Debug, Clone, PartialEq)]
pub enum Input {
    /// A harmonic fingerprint.
    Fingerprint(Fingerprint),
    /// A sweep.
    Sweep(Sweep),
}

fn file_name(path: &str) -> String {
    Path::new(path)
        .file_name()
        .map_or_else(|| path.to_string(), |n| n.to_string_lossy().into_owned())
}

/// Read one input and tell what it is. `channel` (from 1) picks the channel of a WAV capture
/// or scan report; `settings` measure a WAV capture.
pub fn load(path: &Path, channel: usize, settings: &ScanSettings) -> Result<Input, CompareError> {
    let name = path.display().to_string();
    let mut file = std::fs::File::open(path).map_err(|source| CompareError::Read {
        path: name.clone(),
        source,
    })?;
    if file.metadata().is_ok_and(|m| m.is_dir()) {
        return Err(CompareError::Unrecognised {
            path: name,
            what: "is a directory".to_string(),
        });
    }
    let mut head = [0u8; 4];
    let mut got = 0;
    while got < head.len() {
        match file.read(&mut head[got..]) {
            Ok(0) => break,
            Ok(n) => got += n,
            Err(e) if e.kind() == io::ErrorKind::Interrupted => {}
            Err(source) => return Err(CompareError::Read { path: name, source }),
        }
    }
    if got == 0 {
        return Err(CompareError::Unrecognised {
            path: name,
            what: "the file is empty".to_string(),
        });
    }
    // RIFF and its relatives (RF64, BW64, RIFX): the WAV reader takes them or says why not.
    if matches!(&head[..got], b"RIFF" | b"RF64" | b"BW64" | b"RIFX") {
        let report =
            crate::scan::scan_file(path, settings).map_err(|source| CompareError::Wav {
                path: name.clone(),
                source,
            })?;
        return pick_channel(&name, report.channels, channel, Source::Wav).map(Input::Fingerprint);
    }
    let mut bytes = head[..got].to_vec();
    file.read_to_end(&mut bytes)
        .map_err(|source| CompareError::Read {
            path: name.clone(),
            source,
        })?;
    parse_json_input(&name, &bytes, channel)
}

/// Recognise JSON input (`name` for messages).
pub fn parse_json_input(name: &str, bytes: &[u8], channel: usize) -> Result<Input, CompareError> {
    let unrecognised = |what: &str| CompareError::Unrecognised {
        path: name.to_string(),
        what: what.to_string(),
    };
    let text = std::str::from_utf8(bytes)
        .map_err(|_| unrecognised("neither a WAV file (no RIFF header) nor JSON text"))?;
    let text = text.trim_start_matches('\u{feff}').trim();
    if text.is_empty() {
        return Err(unrecognised("the file holds only white space"));
    }
    if !text.starts_with('{') {
        return Err(unrecognised(
            "neither a WAV file (no RIFF header) nor a JSON object",
        ));
    }
    let mut docs = serde_json::Deserializer::from_str(text).into_iter::<serde_json::Value>();
    let value = match docs.next() {
        Some(Ok(v)) => v,
        Some(Err(e)) => return Err(unrecognised(&format!("not valid JSON ({e})"))),
        None => return Err(unrecognised("the file holds no JSON")),
    };
    let more = docs.count();
    if more > 0 {
        return Err(unrecognised(&format!(
            "holds {} JSON documents (several lines of `brink scan --json`?); keep the one to compare",
            more + 1
        )));
    }
    let bad = |format: &'static str, e: serde_json::Error| CompareError::BadDocument {
        path: name.to_string(),
        format,
        detail: e.to_string(),
    };
    match value.get("format").map(|f| f.as_str()) {
        Some(Some(f)) if f == SCAN_FORMAT => {
            let report: ScanReport =
                serde_json::from_value(value).map_err(|e| bad(SCAN_FORMAT, e))?;
            pick_channel(name, report.channels, channel, Source::ScanReport).map(Input::Fingerprint)
        }
        Some(Some(f)) if f == SWEEP_FORMAT => {
            let report: SweepReport =
                serde_json::from_value(value).map_err(|e| bad(SWEEP_FORMAT, e))?;
            if report.steps.is_empty() {
                return Err(CompareError::EmptySweep {
                    path: name.to_string(),
                });
            }
            Ok(Input::Sweep(Sweep {
                file: name.to_string(),
                report,
            }))
        }
        Some(Some(f)) => Err(unrecognised(&format!(
            "JSON of format '{f}', which compare does not read"
        ))),
        Some(None) => Err(unrecognised("JSON whose \"format\" is not a string")),
        None if value.get("distortion").is_some() && value.get("channel").is_some() => {
            let report: ChannelReport =
                serde_json::from_value(value).map_err(|e| bad("snapshot", e))?;
            let ch = report.channel;
            match report.distortion {
                Some(distortion) => Ok(Input::Fingerprint(Fingerprint {
                    file: name.to_string(),
                    source: Source::Snapshot,
                    channel: ch,
                    distortion,
                })),
                None => Err(CompareError::NoTone {
                    path: name.to_string(),
                    channel: ch,
                    hint: " (the snapshot holds no distortion measurement)".to_string(),
                }),
            }
        }
        None => Err(unrecognised(
            "JSON with neither a \"format\" key nor the shape of a snapshot",
        )),
    }
}

fn pick_channel(
    name: &str,
    channels: Vec<ChannelReport>,
    channel: usize,
    source: Source,
) -> Result<Fingerprint, CompareError> {
    let count = channels.len();
    let toned: Vec<String> = channels
        .iter()
        .filter(|c| c.distortion.is_some())
        .map(|c| c.channel.to_string())
        .collect();
    let Some(c) = channels.into_iter().find(|c| c.channel == channel) else {
        return Err(CompareError::NoChannel {
            path: name.to_string(),
            channel,
            channels: count,
        });
    };
    match c.distortion {
        Some(distortion) => Ok(Fingerprint {
            file: name.to_string(),
            source,
            channel,
            distortion,
        }),
        None => Err(CompareError::NoTone {
            path: name.to_string(),
            channel,
            hint: if toned.is_empty() {
                " (no channel of this file does)".to_string()
            } else {
                format!(
                    " (channels with a tone: {}; pick one with --channel)",
                    toned.join(", ")
                )
            },
        }),
    }
}

// ---------------------------------------------------------------------------------------------
// Fingerprints

/// One side's fingerprint, as the comparison document shows it.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct FingerprintSummary {
    /// The file as given.
    pub file: String,
    /// "wav", "snapshot" or "scan-report".
    pub source: Source,
    /// The channel (from 1).
    pub channel: usize,
    /// Fundamental frequency (Hz).
    pub fundamental_hz: f64,
    /// Fundamental peak level (dBFS).
    pub fundamental_dbfs: Option<f64>,
    /// THD_F (%).
    pub thd_pct: Option<f64>,
    /// THD_F (dB).
    pub thd_db: Option<f64>,
    /// THD+N, AES17 (dB).
    pub thd_n_db: Option<f64>,
    /// Odd/even balance (dB; positive = even-rich).
    pub odd_even_db: Option<f64>,
    /// Harmonic fall-off (dB per octave of order).
    pub falloff_db_per_octave: Option<f64>,
    /// The family from the odd/even balance: "mostly-even", "mixed", "mostly-odd", "odd-only".
    pub family: Option<&'static str>,
    /// The character line.
    pub character: String,
}

/// One harmonic order of A and B.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct HarmonicDiff {
    /// Order (2 = second harmonic).
    pub order: usize,
    /// "odd" or "even".
    pub parity: &'static str,
    /// A's level (dBc).
    pub a_dbc: Option<f64>,
    /// B's level (dBc).
    pub b_dbc: Option<f64>,
    /// B − A (dB).
    pub diff_db: Option<f64>,
    /// A's harmonic stands 10 dB above its noise floor.
    pub a_resolved: Option<bool>,
    /// B's harmonic stands 10 dB above its noise floor.
    pub b_resolved: Option<bool>,
}

/// Two fingerprints compared.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct FingerprintComparison {
    /// A.
    pub a: FingerprintSummary,
    /// B.
    pub b: FingerprintSummary,
    /// Per order, H2 up.
    pub harmonics: Vec<HarmonicDiff>,
    /// B − A of THD (dB).
    pub thd_diff_db: Option<f64>,
    /// B − A of THD+N (dB).
    pub thd_n_diff_db: Option<f64>,
    /// B − A of the odd/even balance (dB; positive: B is more even-rich).
    pub odd_even_diff_db: Option<f64>,
    /// B − A of the fall-off (dB per octave; negative: B falls off faster).
    pub falloff_diff_db_per_octave: Option<f64>,
    /// The plain-words lines.
    pub findings: Vec<String>,
}

fn family_name(f: Family) -> &'static str {
    match f {
        Family::MostlyEven => "mostly-even",
        Family::Mixed => "mixed",
        Family::MostlyOdd => "mostly-odd",
        Family::OddOnly => "odd-only",
    }
}

fn summary(f: &Fingerprint) -> FingerprintSummary {
    let d = &f.distortion;
    FingerprintSummary {
        file: f.file.clone(),
        source: f.source,
        channel: f.channel,
        fundamental_hz: d.fundamental_hz,
        fundamental_dbfs: d.fundamental_dbfs,
        thd_pct: d.thd_pct,
        thd_db: d.thd_db,
        thd_n_db: d.thd_n_db,
        odd_even_db: d.odd_even_db,
        falloff_db_per_octave: d.falloff_db_per_octave,
        family: d.odd_even_db.map(|b| family_name(character::family(b))),
        character: character::describe(d.thd_pct, d.odd_even_db, d.falloff_db_per_octave),
    }
}

fn diff(a: Option<f64>, b: Option<f64>) -> Option<f64> {
    Some(b? - a?)
}

fn pct_db(p: f64) -> f64 {
    20.0 * (p / 100.0).log10()
}

/// Compare two fingerprints.
pub fn compare_fingerprints(a: &Fingerprint, b: &Fingerprint) -> FingerprintComparison {
    let top = a
        .distortion
        .harmonics
        .iter()
        .chain(&b.distortion.harmonics)
        .map(|h| h.order)
        .max()
        .unwrap_or(0)
        .max(MIN_TABLE_ORDER);
    let harmonics = (2..=top)
        .map(|order| {
            let ha = a.level_dbc(order);
            let hb = b.level_dbc(order);
            let a_dbc = ha.and_then(|h| h.0);
            let b_dbc = hb.and_then(|h| h.0);
            HarmonicDiff {
                order,
                parity: if order % 2 == 0 { "even" } else { "odd" },
                a_dbc,
                b_dbc,
                diff_db: diff(a_dbc, b_dbc),
                a_resolved: ha.map(|h| h.1),
                b_resolved: hb.map(|h| h.1),
            }
        })
        .collect();
    let (da, db) = (&a.distortion, &b.distortion);
    let thd_diff_db = diff(
        da.thd_pct.filter(|p| *p > 0.0).map(pct_db),
        db.thd_pct.filter(|p| *p > 0.0).map(pct_db),
    );
    let mut c = FingerprintComparison {
        a: summary(a),
        b: summary(b),
        harmonics,
        thd_diff_db,
        thd_n_diff_db: diff(da.thd_n_db, db.thd_n_db),
        odd_even_diff_db: diff(da.odd_even_db, db.odd_even_db),
        falloff_diff_db_per_octave: diff(da.falloff_db_per_octave, db.falloff_db_per_octave),
        findings: Vec::new(),
    };
    c.findings = fingerprint_findings(&c);
    c
}

/// Format a signed dB figure without "-0.0".
fn signed(x: f64, prec: usize) -> String {
    let x = if x.abs() < 0.5 * 10f64.powi(-(prec as i32)) {
        0.0
    } else {
        x
    };
    format!("{x:+.prec$}")
}

fn plain(x: f64, prec: usize) -> String {
    let x = if x.abs() < 0.5 * 10f64.powi(-(prec as i32)) {
        0.0
    } else {
        x
    };
    format!("{x:.prec$}")
}

fn opt(v: Option<f64>, prec: usize, sign: bool) -> String {
    match v {
        Some(x) if sign => signed(x, prec),
        Some(x) => plain(x, prec),
        None => NONE.to_string(),
    }
}

/// THD in % with enough digits for small values.
fn pct(p: f64) -> String {
    if p >= 10.0 {
        format!("{p:.1} %")
    } else if p >= 0.1 {
        format!("{p:.2} %")
    } else {
        format!("{p:.4} %")
    }
}

fn fingerprint_findings(c: &FingerprintComparison) -> Vec<String> {
    let (a, b) = (&c.a, &c.b);
    let mut lines = vec![format!("A: {}", a.character), format!("B: {}", b.character)];
    if (b.fundamental_hz / a.fundamental_hz - 1.0).abs() > SAME_TONE_FRACTION {
        lines.push(format!(
            "the fundamentals differ ({:.1} Hz against {:.1} Hz): harmonics of different tones compare only loosely",
            a.fundamental_hz, b.fundamental_hz
        ));
    }
    // Which is more even-rich.
    match (a.odd_even_db, b.odd_even_db) {
        (Some(ea), Some(eb)) => {
            let d = eb - ea;
            let (fa, fb) = (character::family(ea), character::family(eb));
            if d.abs() <= FAMILY_LEAD_DB && fa == fb {
                lines.push(format!(
                    "A and B are about as even-rich: odd/even {} dB against {} dB",
                    signed(ea, 1),
                    signed(eb, 1)
                ));
            } else {
                let (more, less, hi, lo) = if d > 0.0 {
                    ("B", "A", eb, ea)
                } else {
                    ("A", "B", ea, eb)
                };
                lines.push(format!(
                    "{more} is more even-rich: odd/even {} dB against {} dB for {less} ({} dB further toward even)",
                    signed(hi, 1),
                    signed(lo, 1),
                    plain((hi - lo).abs(), 1)
                ));
            }
        }
        (None, Some(_)) | (Some(_), None) | (None, None) => {
            let which = match (a.odd_even_db, b.odd_even_db) {
                (None, None) => "neither A nor B has",
                (None, _) => "A has no",
                _ => "B has no",
            };
            lines.push(format!(
                "cannot tell which is more even-rich: {which} harmonic above the noise floor"
            ));
        }
    }
    // Which falls off faster.
    match (a.falloff_db_per_octave, b.falloff_db_per_octave) {
        (Some(fa), Some(fb)) => {
            if (fb - fa).abs() < FALLOFF_ALIKE_DB {
                lines.push(format!(
                    "their harmonics fall off alike: {} and {} dB per octave of order",
                    plain(fa, 1),
                    plain(fb, 1)
                ));
            } else {
                let (faster, slower, qf, qs) = if fb < fa {
                    ("B", "A", fb, fa)
                } else {
                    ("A", "B", fa, fb)
                };
                let what = if qs > SLOW_FALLOFF && qf < FAST_FALLOFF {
                    " (a soft curve against hard corners)"
                } else if qs > SLOW_FALLOFF {
                    ": the other has the hard corners of clipping"
                } else {
                    ": the softer curve"
                };
                lines.push(format!(
                    "{faster}'s harmonics fall off faster: {} dB per octave of order against {} dB for {slower} ({} dB/octave faster){what}",
                    plain(qf, 1),
                    plain(qs, 1),
                    plain(qs - qf, 1)
                ));
            }
        }
        _ => lines.push(
            "cannot compare the fall-off: one of them has fewer than two harmonics above the noise floor"
                .to_string(),
        ),
    }
    // Which has more THD.
    match (a.thd_pct, b.thd_pct, c.thd_diff_db) {
        (Some(ta), Some(tb), Some(d)) => {
            if d.abs() < THD_ALIKE_DB {
                lines.push(format!(
                    "A and B have about the same THD: {} and {} (within {THD_ALIKE_DB} dB)",
                    pct(ta),
                    pct(tb)
                ));
            } else {
                let (more, less, hi, lo) = if d > 0.0 {
                    ("B", "A", tb, ta)
                } else {
                    ("A", "B", ta, tb)
                };
                lines.push(format!(
                    "{more} has more THD: {} against {} for {less} ({} dB more)",
                    pct(hi),
                    pct(lo),
                    plain(d.abs(), 1)
                ));
            }
        }
        _ => lines.push("cannot compare THD: one of them has no harmonic in the band".to_string()),
    }
    // Each one's strongest harmonic: which order leads the fingerprint.
    let strongest = |level: fn(&HarmonicDiff) -> Option<f64>| {
        c.harmonics
            .iter()
            .filter_map(|h| level(h).map(|l| (h, l)))
            .max_by(|x, y| x.1.total_cmp(&y.1))
    };
    if let (Some((ha, la)), Some((hb, lb))) = (strongest(|h| h.a_dbc), strongest(|h| h.b_dbc)) {
        lines.push(format!(
            "strongest harmonic: A's H{} ({}) at {} dBc, B's H{} ({}) at {} dBc",
            ha.order,
            ha.parity,
            plain(la, 1),
            hb.order,
            hb.parity,
            plain(lb, 1)
        ));
    }
    lines
}

// ---------------------------------------------------------------------------------------------
// Sweeps

/// Where a sweep crosses its THD threshold.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
#[serde(tag = "state", rename_all = "kebab-case")]
pub enum OnsetState {
    /// Crosses between two steps.
    At(Onset),
    /// Already at or above the threshold at the lowest drive.
    BelowSweep {
        /// The lowest drive (dBFS).
        lowest_drive_dbfs: f64,
    },
    /// Never reaches the threshold.
    Never {
        /// The highest drive measured (dBFS).
        highest_drive_dbfs: f64,
    },
    /// No step measured a THD.
    Unknown,
}

/// One side's sweep, as the comparison document shows it.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct SweepSummary {
    /// The file as given.
    pub file: String,
    /// The stimulus frequency of a level sweep (Hz).
    pub frequency_hz: Option<f64>,
    /// The drive of a frequency sweep (dBFS).
    pub drive_dbfs: Option<f64>,
    /// Steps in the document.
    pub steps: usize,
    /// The THD threshold the onset refers to (%).
    pub onset_threshold_pct: f64,
    /// The onset at the comparison's threshold (A's).
    pub onset: OnsetState,
    /// The knee, as the document gives it (reckoned from its steps when it gives none).
    pub knee: Option<Knee>,
    /// Steepest THD rise between steps (dB of THD per dB of drive), above the THD floor.
    pub steepest_db_per_db: Option<f64>,
    /// Loop gain at the lowest drive (dB).
    pub loop_gain_db: Option<f64>,
    /// Highest THD of any step (%).
    pub max_thd_pct: Option<f64>,
}

/// One aligned step of A and B.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct SweepRow {
    /// Drive of a level sweep (dBFS).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub drive_dbfs: Option<f64>,
    /// Frequency of a frequency sweep (Hz).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub frequency_hz: Option<f64>,
    /// A's THD (%).
    pub a_thd_pct: Option<f64>,
    /// B's THD (%).
    pub b_thd_pct: Option<f64>,
    /// B − A of THD (dB).
    pub thd_diff_db: Option<f64>,
    /// A's returned level (dBFS).
    pub a_return_dbfs: Option<f64>,
    /// B's returned level (dBFS).
    pub b_return_dbfs: Option<f64>,
    /// B − A per harmonic order (dB), where both measured it.
    pub harmonics_diff_db: BTreeMap<u32, f64>,
}

/// Two sweeps compared.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct SweepComparison {
    /// "level" or "frequency".
    pub sweep: SweepKind,
    /// The distortion figure the rows, onsets and knees follow: "THD", or "IMD" when both
    /// sweeps are two-tone sweeps (the `*_thd_pct` keys then hold IMD, as the sweep document's
    /// own onset does).
    pub figure: &'static str,
    /// The THD threshold both onsets refer to (A's, %).
    pub onset_threshold_pct: f64,
    /// A.
    pub a: SweepSummary,
    /// B.
    pub b: SweepSummary,
    /// Steps aligned by drive (level sweeps) or frequency, rising.
    pub rows: Vec<SweepRow>,
    /// B − A of the onset drive (dB), when both cross within their sweeps.
    pub onset_drive_diff_db: Option<f64>,
    /// B − A of the returned level at the onset (dB).
    pub onset_return_diff_db: Option<f64>,
    /// The plain-words lines.
    pub findings: Vec<String>,
}

fn thd_db_of(pct: f64) -> f64 {
    20.0 * (pct / 100.0).log10()
}

/// Steepest THD rise between measured steps, as [`onset::knee`] reckons it (steps above its
/// floor), whether or not it passes the knee slope.
fn steepest(r: &SweepReport) -> Option<f64> {
    let measured: Vec<(f64, f64)> = r
        .steps
        .iter()
        .filter_map(|s| {
            s.figure_pct()
                .filter(|t| *t > 0.0)
                .map(|t| (s.drive_dbfs, t))
        })
        .collect();
    measured
        .windows(2)
        .filter_map(|w| {
            let ((da, ta), (db, tb)) = (w[0], w[1]);
            (db > da && tb > onset::KNEE_FLOOR_PCT)
                .then(|| (thd_db_of(tb) - thd_db_of(ta)) / (db - da))
        })
        .reduce(f64::max)
}

fn onset_state(r: &SweepReport, threshold: f64) -> OnsetState {
    let mut steps = r.steps.clone();
    steps.sort_by(|a, b| a.drive_dbfs.total_cmp(&b.drive_dbfs));
    let measured: Vec<(f64, f64)> = steps
        .iter()
        .filter_map(|s| {
            s.figure_pct()
                .filter(|t| *t > 0.0)
                .map(|t| (s.drive_dbfs, t))
        })
        .collect();
    let (Some(first), Some(last)) = (measured.first(), measured.last()) else {
        return OnsetState::Unknown;
    };
    if first.1 >= threshold {
        return OnsetState::BelowSweep {
            lowest_drive_dbfs: first.0,
        };
    }
    let stored = r
        .onset
        .filter(|o| (o.thd_pct - threshold).abs() < 1e-9 && r.onset_threshold_pct == threshold);
    match stored.or_else(|| onset::onset(&steps, threshold)) {
        Some(o) => OnsetState::At(o),
        None => OnsetState::Never {
            highest_drive_dbfs: last.0,
        },
    }
}

fn sweep_summary(s: &Sweep, threshold: f64) -> SweepSummary {
    let r = &s.report;
    let level = r.kind == SweepKind::Level;
    SweepSummary {
        file: s.file.clone(),
        frequency_hz: r.frequency_hz,
        drive_dbfs: r.drive_dbfs,
        steps: r.steps.len(),
        onset_threshold_pct: r.onset_threshold_pct,
        onset: if level {
            onset_state(r, threshold)
        } else {
            OnsetState::Unknown
        },
        // The document's knee; one reckoned from its steps when it gives none.
        knee: if level {
            r.knee.or_else(|| {
                let mut steps = r.steps.clone();
                steps.sort_by(|a, b| a.drive_dbfs.total_cmp(&b.drive_dbfs));
                onset::knee(&steps)
            })
        } else {
            None
        },
        steepest_db_per_db: if level { steepest(r) } else { None },
        loop_gain_db: r.loop_gain_db,
        max_thd_pct: r
            .steps
            .iter()
            .filter_map(|s| s.figure_pct())
            .reduce(f64::max),
    }
}

/// Merge the steps of A and B by drive (level) or frequency.
fn align(a: &SweepReport, b: &SweepReport, kind: SweepKind) -> Vec<SweepRow> {
    let key = |s: &crate::sweep::report::SweepStep| match kind {
        SweepKind::Level => s.drive_dbfs,
        SweepKind::Frequency => s.frequency_hz,
    };
    let same = |x: f64, y: f64| match kind {
        SweepKind::Level => (x - y).abs() <= ALIGN_DRIVE_DB,
        SweepKind::Frequency => (x / y - 1.0).abs() <= ALIGN_FREQ_FRACTION,
    };
    let mut sa: Vec<_> = a.steps.iter().collect();
    let mut sb: Vec<_> = b.steps.iter().collect();
    sa.sort_by(|x, y| key(x).total_cmp(&key(y)));
    sb.sort_by(|x, y| key(x).total_cmp(&key(y)));
    let (mut i, mut j) = (0, 0);
    let mut rows = Vec::new();
    while i < sa.len() || j < sb.len() {
        let (sa_i, sb_j) = (sa.get(i).copied(), sb.get(j).copied());
        let (pa, pb) = match (sa_i, sb_j) {
            (Some(x), Some(y)) if same(key(x), key(y)) => {
                i += 1;
                j += 1;
                (Some(x), Some(y))
            }
            (Some(x), Some(y)) if key(x) < key(y) => {
                i += 1;
                (Some(x), None)
            }
            (Some(_), Some(y)) => {
                j += 1;
                (None, Some(y))
            }
            (Some(x), None) => {
                i += 1;
                (Some(x), None)
            }
            (None, Some(y)) => {
                j += 1;
                (None, Some(y))
            }
            (None, None) => break,
        };
        let Some(x) = pa.map(key).or(pb.map(key)) else {
            break;
        };
        let a_thd = pa.and_then(|s| s.figure_pct());
        let b_thd = pb.and_then(|s| s.figure_pct());
        let mut harmonics_diff_db = BTreeMap::new();
        if let (Some(p), Some(q)) = (pa, pb) {
            for (order, la) in &p.harmonics_dbc {
                if let (Some(la), Some(Some(lb))) = (la, q.harmonics_dbc.get(order)) {
                    harmonics_diff_db.insert(*order, lb - la);
                }
            }
        }
        rows.push(SweepRow {
            drive_dbfs: (kind == SweepKind::Level).then_some(x),
            frequency_hz: (kind == SweepKind::Frequency).then_some(x),
            a_thd_pct: a_thd,
            b_thd_pct: b_thd,
            thd_diff_db: diff(
                a_thd.filter(|t| *t > 0.0).map(thd_db_of),
                b_thd.filter(|t| *t > 0.0).map(thd_db_of),
            ),
            a_return_dbfs: pa.and_then(|s| s.return_dbfs),
            b_return_dbfs: pb.and_then(|s| s.return_dbfs),
            harmonics_diff_db,
        });
    }
    rows
}

/// Compare two sweeps of one kind.
pub fn compare_sweeps(a: &Sweep, b: &Sweep) -> Result<SweepComparison, CompareError> {
    let kind = a.report.kind;
    if b.report.kind != kind {
        let (level, frequency) = if kind == SweepKind::Level {
            (&a.file, &b.file)
        } else {
            (&b.file, &a.file)
        };
        return Err(CompareError::SweepKinds {
            level: level.clone(),
            frequency: frequency.clone(),
        });
    }
    let threshold = a.report.onset_threshold_pct;
    let sa = sweep_summary(a, threshold);
    let sb = sweep_summary(b, threshold);
    let (onset_drive_diff_db, onset_return_diff_db) = match (&sa.onset, &sb.onset) {
        (OnsetState::At(oa), OnsetState::At(ob)) => (
            Some(ob.drive_dbfs - oa.drive_dbfs),
            diff(oa.return_dbfs, ob.return_dbfs),
        ),
        _ => (None, None),
    };
    let imd = |r: &SweepReport| r.steps.iter().any(|s| s.imd_pct.is_some());
    let figure = match (imd(&a.report), imd(&b.report)) {
        (true, true) => "IMD",
        (false, false) => "THD",
        _ => "THD or IMD",
    };
    let mut c = SweepComparison {
        sweep: kind,
        figure,
        onset_threshold_pct: threshold,
        rows: align(&a.report, &b.report, kind),
        a: sa,
        b: sb,
        onset_drive_diff_db,
        onset_return_diff_db,
        findings: Vec::new(),
    };
    c.findings = match kind {
        SweepKind::Level => level_findings(&c, b.report.onset_threshold_pct),
        SweepKind::Frequency => frequency_findings(&c),
    };
    if imd(&a.report) != imd(&b.report) {
        let (two, one) = if imd(&a.report) {
            ("A", "B")
        } else {
            ("B", "A")
        };
        c.findings.insert(
            0,
            format!("{two} is a two-tone sweep (IMD) and {one} a sine sweep (THD): the figures differ in kind"),
        );
    }
    Ok(c)
}

fn level_findings(c: &SweepComparison, b_threshold: f64) -> Vec<String> {
    let t = pct(c.onset_threshold_pct);
    let fig = c.figure;
    let mut lines = Vec::new();
    if (b_threshold - c.onset_threshold_pct).abs() > 1e-9 {
        lines.push(format!(
            "B's document uses a {} threshold; both onsets here are taken at A's {t}",
            pct(b_threshold)
        ));
    }
    // Which clips earlier. Rank: crossing below the sweep < crossing at a drive < never.
    use OnsetState::*;
    let line = match (&c.a.onset, &c.b.onset) {
        (At(oa), At(ob)) => {
            let d = ob.drive_dbfs - oa.drive_dbfs;
            if d.abs() < ONSET_ALIKE_DB {
                format!(
                    "A and B clip at about the same drive: {fig} reaches {t} at {} and {} dBFS",
                    plain(oa.drive_dbfs, 1),
                    plain(ob.drive_dbfs, 1)
                )
            } else {
                let (early, late, oe, ol) = if d > 0.0 {
                    ("A", "B", oa, ob)
                } else {
                    ("B", "A", ob, oa)
                };
                let mut s = format!(
                    "{early} clips earlier: {fig} reaches {t} at {} dBFS of drive against {} dBFS for {late}, {} dB less drive",
                    plain(oe.drive_dbfs, 1),
                    plain(ol.drive_dbfs, 1),
                    plain(d.abs(), 1)
                );
                if let (Some(re), Some(rl)) = (oe.return_dbfs, ol.return_dbfs) {
                    let dr = rl - re;
                    let _ = write!(
                        s,
                        "; returned level {} dBFS against {} dBFS, {} dB {}",
                        plain(re, 1),
                        plain(rl, 1),
                        plain(dr.abs(), 1),
                        if dr >= 0.0 { "lower" } else { "higher" }
                    );
                }
                s
            }
        }
        (At(o), Never { highest_drive_dbfs }) | (Never { highest_drive_dbfs }, At(o)) => {
            let (early, late) = if matches!(c.a.onset, At(_)) {
                ("A", "B")
            } else {
                ("B", "A")
            };
            format!(
                "{early} clips earlier: {fig} reaches {t} at {} dBFS of drive; {late} stays below {t} up to {} dBFS, at least {} dB more drive",
                plain(o.drive_dbfs, 1),
                plain(*highest_drive_dbfs, 1),
                plain(highest_drive_dbfs - o.drive_dbfs, 1)
            )
        }
        (BelowSweep { lowest_drive_dbfs }, At(o)) | (At(o), BelowSweep { lowest_drive_dbfs }) => {
            let (early, late) = if matches!(c.a.onset, BelowSweep { .. }) {
                ("A", "B")
            } else {
                ("B", "A")
            };
            format!(
                "{early} clips earlier: it is above {t} {fig} already at its lowest drive, {} dBFS; {late} reaches {t} at {} dBFS",
                plain(*lowest_drive_dbfs, 1),
                plain(o.drive_dbfs, 1)
            )
        }
        (BelowSweep { lowest_drive_dbfs }, Never { highest_drive_dbfs })
        | (Never { highest_drive_dbfs }, BelowSweep { lowest_drive_dbfs }) => {
            let (early, late) = if matches!(c.a.onset, BelowSweep { .. }) {
                ("A", "B")
            } else {
                ("B", "A")
            };
            format!(
                "{early} clips earlier: it is above {t} {fig} already at {} dBFS of drive; {late} stays below {t} up to {} dBFS",
                plain(*lowest_drive_dbfs, 1),
                plain(*highest_drive_dbfs, 1)
            )
        }
        (BelowSweep { .. }, BelowSweep { .. }) => format!(
            "both are above {t} {fig} already at their lowest drive: the sweeps start too high to tell which clips earlier"
        ),
        (Never { .. }, Never { .. }) => format!(
            "neither reaches {t} {fig} within its sweep (A up to {} dBFS, B up to {} dBFS)",
            plain(c.a.max_drive(), 1),
            plain(c.b.max_drive(), 1)
        ),
        (Unknown, _) | (_, Unknown) => {
            "cannot tell which clips earlier: a sweep has no {fig} readings".to_string()
        }
    };
    lines.push(line);
    // Knees.
    let knee = |k: &Option<Knee>| match k {
        Some(k) => format!("{} dBFS", plain(k.drive_dbfs, 1)),
        None => "none".to_string(),
    };
    lines.push(format!(
        "knee ({fig} rising faster than {} dB per dB of drive): A {}, B {}",
        crate::sweep::report::KNEE_SLOPE,
        knee(&c.a.knee),
        knee(&c.b.knee)
    ));
    // Which more abruptly.
    match (c.a.steepest_db_per_db, c.b.steepest_db_per_db) {
        (Some(sa), Some(sb)) => {
            if (sb - sa).abs() < ABRUPT_ALIKE_DB_PER_DB {
                lines.push(format!(
                    "both clip about as abruptly: {fig} rises at most {} and {} dB per dB of drive",
                    plain(sa, 1),
                    plain(sb, 1)
                ));
            } else {
                let (abrupt, gentle, qa, qg) = if sb > sa {
                    ("B", "A", sb, sa)
                } else {
                    ("A", "B", sa, sb)
                };
                lines.push(format!(
                    "{abrupt} clips more abruptly: {fig} rises up to {} dB per dB of drive against {} for {gentle}",
                    plain(qa, 1),
                    plain(qg, 1)
                ));
            }
        }
        _ => lines.push(
            "cannot tell which clips more abruptly: a sweep has fewer than two {fig} readings above the floor"
                .to_string(),
        ),
    }
    if let (Some(ga), Some(gb)) = (c.a.loop_gain_db, c.b.loop_gain_db) {
        lines.push(format!(
            "loop gain at the lowest drive: A {} dB, B {} dB",
            signed(ga, 1),
            signed(gb, 1)
        ));
    }
    lines
}

impl SweepSummary {
    fn max_drive(&self) -> f64 {
        match self.onset {
            OnsetState::Never { highest_drive_dbfs } => highest_drive_dbfs,
            _ => f64::NAN,
        }
    }
}

fn hz(f: f64) -> String {
    if f >= 1000.0 {
        format!("{} kHz", plain(f / 1000.0, 2))
    } else {
        format!("{} Hz", plain(f, 1))
    }
}

fn frequency_findings(c: &SweepComparison) -> Vec<String> {
    let fig = c.figure;
    let mut lines = Vec::new();
    let shared: Vec<(f64, f64)> = c
        .rows
        .iter()
        .filter_map(|r| Some((r.frequency_hz?, r.thd_diff_db?)))
        .collect();
    if shared.is_empty() {
        lines.push(format!(
            "A and B share no frequency with a {fig} reading on both"
        ));
    } else {
        let mean = shared.iter().map(|s| s.1).sum::<f64>() / shared.len() as f64;
        let lo = shared.first().map_or(0.0, |s| s.0);
        let hi = shared.last().map_or(0.0, |s| s.0);
        if mean.abs() < THD_ALIKE_DB {
            lines.push(format!(
                "A and B have about the same {fig} from {} to {} (B {} dB on average)",
                hz(lo),
                hz(hi),
                signed(mean, 1)
            ));
        } else {
            let more = if mean > 0.0 { "B" } else { "A" };
            lines.push(format!(
                "{more} has more {fig} from {} to {}: {} dB on average",
                hz(lo),
                hz(hi),
                plain(mean.abs(), 1)
            ));
        }
        if let Some(&(f, d)) = shared.iter().max_by(|x, y| x.1.abs().total_cmp(&y.1.abs())) {
            lines.push(format!(
                "largest difference at {}: B {} dB",
                hz(f),
                signed(d, 1)
            ));
        }
    }
    for (name, col) in [("A", 0), ("B", 1)] {
        let worst = c
            .rows
            .iter()
            .filter_map(|r| {
                let t = if col == 0 { r.a_thd_pct } else { r.b_thd_pct };
                Some((r.frequency_hz?, t?))
            })
            .max_by(|x, y| x.1.total_cmp(&y.1));
        if let Some((f, t)) = worst {
            lines.push(format!(
                "{name}'s {fig} is highest at {}: {}",
                hz(f),
                pct(t)
            ));
        }
    }
    lines
}

// ---------------------------------------------------------------------------------------------
// The whole comparison

/// Two inputs compared.
#[derive(Debug, Clone, PartialEq, Serialize)]
#[serde(tag = "kind", rename_all = "lowercase")]
pub enum Comparison {
    /// Two harmonic fingerprints.
    Fingerprints(FingerprintComparison),
    /// Two sweeps.
    Sweeps(SweepComparison),
}

#[derive(Serialize)]
struct Document<'a> {
    format: &'static str,
    #[serde(flatten)]
    comparison: &'a Comparison,
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

/// The comparison as one JSON document (format [`COMPARE_FORMAT`]), one line.
pub fn write_json<W: Write>(w: &mut W, c: &Comparison) -> io::Result<()> {
    crate::sink::json::write_line(
        w,
        &Document {
            format: COMPARE_FORMAT,
            comparison: c,
        },
    )
}

/// The readable comparison: a table and the plain-words lines.
pub fn write_text<W: Write>(w: &mut W, c: &Comparison) -> io::Result<()> {
    match c {
        Comparison::Fingerprints(f) => write_fingerprints(w, f),
        Comparison::Sweeps(s) => write_sweeps(w, s),
    }
}

fn side_line(s: &FingerprintSummary) -> String {
    format!(
        "{} ch {} ({}): {} Hz at {} dBFS",
        s.file,
        s.channel,
        s.source.words(),
        plain(s.fundamental_hz, 2),
        opt(s.fundamental_dbfs, 2, false)
    )
}

fn write_fingerprints<W: Write>(w: &mut W, c: &FingerprintComparison) -> io::Result<()> {
    writeln!(w, "A: {}", side_line(&c.a))?;
    writeln!(w, "B: {}", side_line(&c.b))?;
    writeln!(w)?;
    writeln!(
        w,
        "             A          B       B-A   (dBc; ~ within 10 dB of the noise floor)"
    )?;
    for h in &c.harmonics {
        let cell = |v: Option<f64>, r: Option<bool>| {
            let mark = if r == Some(false) { "~" } else { " " };
            format!("{}{mark}", opt(v, 2, false))
        };
        writeln!(
            w,
            "{:<9} {:>10} {:>10} {:>9}",
            format!("H{} {}", h.order, h.parity),
            cell(h.a_dbc, h.a_resolved),
            cell(h.b_dbc, h.b_resolved),
            opt(h.diff_db, 2, true)
        )?;
    }
    let row = |w: &mut W, name: &str, a: Option<f64>, b: Option<f64>, d: Option<f64>, p: usize| {
        writeln!(
            w,
            "{:<9} {:>9}  {:>9}  {:>9}",
            name,
            opt(a, p, false),
            opt(b, p, false),
            opt(d, 2, true)
        )
    };
    writeln!(w)?;
    row(w, "THD %", c.a.thd_pct, c.b.thd_pct, None, 4)?;
    row(w, "THD dB", c.a.thd_db, c.b.thd_db, c.thd_diff_db, 2)?;
    row(
        w,
        "THD+N dB",
        c.a.thd_n_db,
        c.b.thd_n_db,
        c.thd_n_diff_db,
        2,
    )?;
    writeln!(
        w,
        "{:<9} {:>9}  {:>9}  {:>9}   (dB; positive = even-rich)",
        "odd/even",
        opt(c.a.odd_even_db, 1, true),
        opt(c.b.odd_even_db, 1, true),
        opt(c.odd_even_diff_db, 1, true)
    )?;
    writeln!(
        w,
        "{:<9} {:>9}  {:>9}  {:>9}   (dB per octave of order)",
        "fall-off",
        opt(c.a.falloff_db_per_octave, 1, false),
        opt(c.b.falloff_db_per_octave, 1, false),
        opt(c.falloff_diff_db_per_octave, 1, true)
    )?;
    write_findings(w, &c.findings)
}

fn write_findings<W: Write>(w: &mut W, findings: &[String]) -> io::Result<()> {
    writeln!(w)?;
    writeln!(w, "In plain words:")?;
    for f in findings {
        writeln!(w, "  {f}")?;
    }
    Ok(())
}

fn onset_words(o: &OnsetState) -> String {
    match o {
        OnsetState::At(o) => match o.return_dbfs {
            Some(r) => format!(
                "{} dBFS drive (return {} dBFS)",
                plain(o.drive_dbfs, 2),
                plain(r, 2)
            ),
            None => format!("{} dBFS drive", plain(o.drive_dbfs, 2)),
        },
        OnsetState::BelowSweep { lowest_drive_dbfs } => {
            format!(
                "below the sweep (over at {} dBFS)",
                plain(*lowest_drive_dbfs, 1)
            )
        }
        OnsetState::Never { highest_drive_dbfs } => {
            format!("not reached up to {} dBFS", plain(*highest_drive_dbfs, 1))
        }
        OnsetState::Unknown => NONE.to_string(),
    }
}

fn write_sweeps<W: Write>(w: &mut W, c: &SweepComparison) -> io::Result<()> {
    let describe = |s: &SweepSummary| match c.sweep {
        SweepKind::Level => format!(
            "{}, level sweep at {}, {} steps",
            s.file,
            s.frequency_hz.map_or(NONE.to_string(), hz),
            s.steps
        ),
        SweepKind::Frequency => format!(
            "{}, frequency sweep at {} dBFS drive, {} steps",
            s.file,
            opt(s.drive_dbfs, 1, false),
            s.steps
        ),
    };
    writeln!(w, "A: {}", describe(&c.a))?;
    writeln!(w, "B: {}", describe(&c.b))?;
    writeln!(w)?;
    let x_head = match c.sweep {
        SweepKind::Level => "drive dBFS",
        SweepKind::Frequency => "   freq Hz",
    };
    let fig = c.figure.split(' ').next().unwrap_or("THD");
    writeln!(
        w,
        "{x_head}  {:>9}  {:>9}   B-A dB   A return   B return   (return in dBFS)",
        format!("A {fig} %"),
        format!("B {fig} %")
    )?;
    for r in &c.rows {
        let x = match c.sweep {
            SweepKind::Level => opt(r.drive_dbfs, 2, false),
            SweepKind::Frequency => opt(r.frequency_hz, 1, false),
        };
        writeln!(
            w,
            "{:>10} {:>10} {:>10} {:>8} {:>10} {:>10}",
            x,
            opt(r.a_thd_pct, 4, false),
            opt(r.b_thd_pct, 4, false),
            opt(r.thd_diff_db, 2, true),
            opt(r.a_return_dbfs, 2, false),
            opt(r.b_return_dbfs, 2, false)
        )?;
    }
    if c.sweep == SweepKind::Level {
        writeln!(w)?;
        writeln!(w, "onset ({} {}):", c.figure, pct(c.onset_threshold_pct))?;
        writeln!(w, "  A {}", onset_words(&c.a.onset))?;
        writeln!(w, "  B {}", onset_words(&c.b.onset))?;
        let knee = |s: &SweepSummary| match s.knee {
            Some(k) => format!(
                "{} dBFS drive, THD {}; steepest rise {} dB/dB",
                plain(k.drive_dbfs, 2),
                k.thd_pct.map_or(NONE.to_string(), pct),
                plain(k.steepest_db_per_db, 1)
            ),
            None => format!(
                "none; steepest rise {} dB/dB",
                opt(s.steepest_db_per_db, 1, false)
            ),
        };
        writeln!(w, "knee:")?;
        writeln!(w, "  A {}", knee(&c.a))?;
        writeln!(w, "  B {}", knee(&c.b))?;
    }
    write_findings(w, &c.findings)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::analysis::report::HarmonicReport;
    use crate::sweep::report::SweepStep;

    fn fingerprint(
        name: &str,
        levels: &[(usize, f64)],
        thd: f64,
        oe: f64,
        fall: f64,
    ) -> Fingerprint {
        Fingerprint {
            file: name.to_string(),
            source: Source::Snapshot,
            channel: 1,
            distortion: DistortionReport {
                fundamental_hz: 997.0,
                fundamental_dbfs: Some(-6.0),
                thd_pct: Some(thd),
                thd_db: Some(pct_db(thd)),
                thd_n_db: Some(pct_db(thd)),
                thd_n_pct: thd,
                sinad_db: None,
                enob_bits: None,
                odd_even_db: Some(oe),
                falloff_db_per_octave: Some(fall),
                noise_floor_dbc: Some(-140.0),
                span_start_s: 0.0,
                span_end_s: 1.0,
                harmonics: levels
                    .iter()
                    .map(|&(order, l)| HarmonicReport {
                        order,
                        freq_hz: 997.0 * order as f64,
                        level_dbc: Some(l),
                        phase_deg: 0.0,
                        resolved: true,
                    })
                    .collect(),
            },
        }
    }

    /// Differences are B − A per order; the words follow the character thresholds: a hard
    /// symmetric clip (odd only, −6 dB/octave; reference-values §6) against an even-rich soft
    /// stage.
    #[test]
    fn fingerprint_words_name_the_right_side() {
        let a = fingerprint(
            "clip.json",
            &[(2, -130.0), (3, -13.2), (5, -23.9)],
            23.3,
            -110.0,
            -6.5,
        );
        let b = fingerprint(
            "soft.json",
            &[(2, -20.0), (3, -40.0), (5, -70.0)],
            10.1,
            20.0,
            -25.0,
        );
        let c = compare_fingerprints(&a, &b);
        assert_eq!(c.harmonics.len(), 9, "H2..H10 at least");
        assert_eq!(c.harmonics[0].diff_db, Some(110.0));
        assert_eq!(
            c.harmonics[1].diff_db.map(|d| (d * 10.0).round()),
            Some(-268.0)
        );
        assert_eq!(c.harmonics[2].a_dbc, None, "H4 measured by neither");
        assert_eq!(c.harmonics[0].parity, "even");
        let text = c.findings.join("\n");
        assert!(text.contains("B is more even-rich"), "{text}");
        assert!(text.contains("B's harmonics fall off faster"), "{text}");
        // 20·log10(23.3/10.1) = 7.26 dB.
        assert!(
            text.contains("A has more THD: 23.3 % against 10.1 % for B (7.3 dB more)"),
            "{text}"
        );
        assert!(
            text.contains("A: heavy; odd only: symmetric clipping"),
            "{text}"
        );
        assert!(
            text.contains(
                "strongest harmonic: A's H3 (odd) at -13.2 dBc, B's H2 (even) at -20.0 dBc"
            ),
            "{text}"
        );
    }

    #[test]
    fn alike_fingerprints_read_alike() {
        let a = fingerprint("a", &[(2, -40.0), (3, -50.0)], 1.05, 9.0, -12.0);
        let b = fingerprint("b", &[(2, -40.5), (3, -50.2)], 1.0, 9.5, -13.0);
        let text = compare_fingerprints(&a, &b).findings.join("\n");
        assert!(text.contains("about as even-rich"), "{text}");
        assert!(text.contains("fall off alike"), "{text}");
        assert!(text.contains("about the same THD"), "{text}");
    }

    /// A level-sweep step built from its JSON form, so the test reads like a `brink-sweep-1`
    /// document (and keys added to the format later need no change here).
    fn step(drive: f64, thd: f64) -> SweepStep {
        serde_json::from_value(serde_json::json!({
            "drive_dbfs": drive, "frequency_hz": 997.0, "return_dbfs": drive - 1.0,
            "return_hz": 997.0, "return_peak_dbfs": drive - 1.0, "thd_pct": thd,
            "thd_n_db": null, "odd_even_db": null, "falloff_db_per_octave": null,
            "harmonics_dbc": {"3": pct_db(thd)}
        }))
        .expect("a sweep step")
    }

    fn sweep(name: &str, steps: Vec<SweepStep>) -> Sweep {
        let report = serde_json::from_value(serde_json::json!({
            "format": SWEEP_FORMAT, "kind": "level", "frequency_hz": 997.0, "drive_dbfs": null,
            "sample_rate_hz": 48000, "host": "test", "output_device": "out", "output_channel": 1,
            "input_device": "in", "input_channel": 1, "onset_threshold_pct": 1.0,
            "loop_gain_db": onset::loop_gain(&steps), "onset": onset::onset(&steps, 1.0),
            "knee": onset::knee(&steps), "steps": steps
        }))
        .expect("a sweep report");
        Sweep {
            file: name.to_string(),
            report,
        }
    }

    /// THD 0.1 % → 10 % across one 10 dB step crosses 1 % half way on a dB scale (the onset's
    /// interpolation, sweep/onset.rs): A at −15, B (the same curve 4 dB later) at −11 dBFS.
    #[test]
    fn sweeps_align_by_drive_and_name_the_earlier_clipper() {
        let a = sweep(
            "a.json",
            vec![step(-30.0, 0.05), step(-20.0, 0.1), step(-10.0, 10.0)],
        );
        let b = sweep(
            "b.json",
            vec![
                step(-26.0, 0.05),
                step(-20.0, 0.08),
                step(-16.0, 0.1),
                step(-6.0, 10.0),
            ],
        );
        let c = compare_sweeps(&a, &b).expect("same kind");
        let drives: Vec<f64> = c.rows.iter().filter_map(|r| r.drive_dbfs).collect();
        assert_eq!(drives, vec![-30.0, -26.0, -20.0, -16.0, -10.0, -6.0]);
        let shared = &c.rows[2];
        assert_eq!(
            (shared.a_thd_pct, shared.b_thd_pct),
            (Some(0.1), Some(0.08))
        );
        // 20·log10(0.08/0.1) = −1.938 dB, the same for H3.
        assert!((shared.thd_diff_db.expect("both") + 1.9382).abs() < 1e-3);
        assert!((shared.harmonics_diff_db[&3] + 1.9382).abs() < 1e-3);
        assert!((c.onset_drive_diff_db.expect("both cross") - 4.0).abs() < 1e-9);
        let text = c.findings.join("\n");
        assert!(
            text.contains("A clips earlier: THD reaches 1.00 % at -15.0 dBFS of drive against -11.0 dBFS for B, 4.0 dB less drive; returned level -16.0 dBFS against -12.0 dBFS, 4.0 dB lower"),
            "{text}"
        );
    }

    #[test]
    fn sweep_that_never_crosses_and_abruptness() {
        // A: gentle (1 dB/dB); B: a hard knee (THD +30 dB over 2 dB of drive: 15 dB/dB).
        let a = sweep(
            "a.json",
            (0..6)
                .map(|i| {
                    let d = -30.0 + 4.0 * f64::from(i);
                    step(d, 0.01 * 10f64.powf((d + 30.0) / 20.0))
                })
                .collect(),
        );
        let b = sweep(
            "b.json",
            vec![
                step(-30.0, 0.02),
                step(-12.0, 0.05),
                step(-10.0, 1.58),
                step(-8.0, 5.0),
            ],
        );
        let c = compare_sweeps(&a, &b).expect("same kind");
        assert!(
            matches!(c.a.onset, OnsetState::Never { highest_drive_dbfs } if highest_drive_dbfs == -10.0)
        );
        let text = c.findings.join("\n");
        assert!(text.contains("B clips earlier"), "{text}");
        assert!(
            text.contains("A stays below 1.00 % up to -10.0 dBFS"),
            "{text}"
        );
        assert!(
            // 20·log10(1.58/0.05) = 30.0 dB over 2 dB; A's curve rises 1 dB per dB.
            text.contains(
                "B clips more abruptly: THD rises up to 15.0 dB per dB of drive against 1.0 for A"
            ),
            "{text}"
        );
    }

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

    #[test]
    fn json_inputs_are_told_apart_by_content() {
        let f = fingerprint("x", &[(3, -40.0)], 1.0, -50.0, -10.0);
        let snap = ChannelReport {
            channel: 2,
            level: crate::analysis::report::LevelReport {
                sample_peak_dbfs: None,
                true_peak_dbtp: None,
                rms_dbfs: None,
                crest_db: None,
                dc_offset: 0.0,
                headroom_db: None,
                true_peak_oversampling: 0,
            },
            clipping: crate::analysis::report::ClipReport {
                overs: 0,
                flat_tops: 0,
                clipped_samples: 0,
                clip_level_dbfs: None,
                flat_top_levels_dbfs: Default::default(),
                first_clip_s: None,
                events: vec![],
                events_omitted: 0,
            },
            distortion: Some(f.distortion.clone()),
            imd: None,
        };
        let text = serde_json::to_string_pretty(&snap).expect("json");
        match parse_json_input("s.json", text.as_bytes(), 1).expect("snapshot") {
            Input::Fingerprint(g) => {
                assert_eq!((g.source, g.channel), (Source::Snapshot, 2));
                assert_eq!(g.distortion, f.distortion);
            }
            other => panic!("{other:?}"),
        }
        let scan = ScanReport {
            format: SCAN_FORMAT.into(),
            file: "t.wav".into(),
            sample_rate_hz: 48_000,
            encoding: "24-bit integer PCM".into(),
            frames: 1,
            duration_s: 1.0,
            channels: vec![snap.clone()],
            timeline: None,
        };
        let line = serde_json::to_string(&scan).expect("json");
        assert!(matches!(
            parse_json_input("r.json", line.as_bytes(), 2),
            Ok(Input::Fingerprint(Fingerprint {
                source: Source::ScanReport,
                ..
            }))
        ));
        let e = parse_json_input("r.json", line.as_bytes(), 1).expect_err("no ch 1");
        assert!(
            matches!(
                e,
                CompareError::NoChannel {
                    channel: 1,
                    channels: 1,
                    ..
                }
            ),
            "{e}"
        );
        let two = format!("{line}\n{line}\n");
        let e = parse_json_input("r.json", two.as_bytes(), 2).expect_err("two");
        assert!(e.to_string().contains("holds 2 JSON documents"), "{e}");
        let e = parse_json_input("x.json", br#"{"format":"brink-log-1"}"#, 1).expect_err("log");
        assert!(e.to_string().contains("format 'brink-log-1'"), "{e}");
        let e = parse_json_input("x.txt", b"hello", 1).expect_err("text");
        assert!(e.to_string().contains("neither a WAV file"), "{e}");
        let e = parse_json_input("x.json", br#"{"a":1}"#, 1).expect_err("shape");
        assert_eq!(e.exit_code(), EXIT_FILE_ERROR);
    }
}
