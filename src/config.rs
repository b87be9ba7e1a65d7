//! Configuration files: TOML presets and the user's own defaults.
//!
//! Two steps, as with the command line: the file is first read into a private serde model of the
//! TOML text (every table refuses unknown keys, every key is optional), then each value is checked
//! and turned into the public [`ConfigFile`], whose fields are `None` where the file said nothing.
//! Layers are joined with [`ConfigFile::merge`] (the upper layer wins key by key); the command line
//! goes on top of the result.
//!
//! ```toml
//! [scan]
//! every = "1s"               # duration strings as on the command line: 500ms, 2s, 1.5s, 1m
//! tone_span = "4s"
//! merge_gap = "100ms"
//! json = false
//!
//! [measure]                  # shared by every mode
//! band_low_hz = 20.0
//! band_high_hz = 20000.0
//! max_order = 20
//! fundamental_hz = 997.0     # absent = the strongest tone
//! over_length = 3
//! flat_tolerance = 0.001
//! flat_min_level_dbfs = -40.0
//!
//! [watch]                    # the terminal dashboard: brink watch, brink demo
//! meter = "peak"             # "peak", "ppm1", "ppm2" or "vu"
//! fps = 20
//! onset_pct = 1.0
//! snapshot_dir = "."
//! ```
//!
//! Files are looked for in this order by [`layered`]: the user's file ([`user_config_path`]) if it
//! exists, then the file named with `--config` on top of it. `config/default.toml` in the source
//! tree documents every key.

// Config errors carry the file, the place and the text people need; they are made once per
// run, so their size costs nothing worth boxing for.
#![allow(clippy::result_large_err)]

use std::ffi::OsString;
use std::fmt;
use std::io;
use std::path::{Path, PathBuf};
use std::time::Duration;

use serde::de::{self, Deserializer, Visitor};
use serde::Deserialize;
use toml::Spanned;

use crate::dsp::ballistics::Ballistics;
use crate::parse::{parse_duration, ParseError};

/// Shortest `every` and `tone_span` accepted: below this a slice holds a handful of samples.
const MIN_SPAN: Duration = Duration::from_millis(1);

/// Longest duration accepted for any key (24 hours): anything longer is a typing slip.
const MAX_DURATION: Duration = Duration::from_secs(24 * 3600);

/// Allowed harmonic orders (the same range as `--max-order`).
const MAX_ORDER_RANGE: std::ops::RangeInclusive<i64> = 2..=40;

/// Allowed over lengths in samples (the same range as `--over-length`).
const OVER_LENGTH_RANGE: std::ops::RangeInclusive<i64> = 1..=u16::MAX as i64;

/// Allowed screen frame rates, frames a second (the same range as `--fps`).
const FPS_RANGE: std::ops::RangeInclusive<i64> = 1..=30;

/// A whole configuration file, checked. `None` means the file does not set the key.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct ConfigFile {
    /// `[scan]`: options of `brink scan`.
    pub scan: ScanSection,
    /// `[measure]`: measurement settings shared by every mode.
    pub measure: MeasureSection,
    /// `[watch]`: options of the terminal dashboard (`brink watch`, `brink demo`).
    pub watch: WatchSection,
}

/// The `[scan]` table.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct ScanSection {
    /// `every`: length of the time-line slices (`--every`); absent = no time line.
    pub every: Option<Duration>,
    /// `tone_span`: span at the centre of each file used for distortion (`--tone-span`).
    pub tone_span: Option<Duration>,
    /// `merge_gap`: clipped runs of one kind closer than this join one episode (`--merge-gap`).
    pub merge_gap: Option<Duration>,
    /// `json`: one JSON object per file instead of text (`--json`).
    pub json: Option<bool>,
}

/// The `[measure]` table.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct MeasureSection {
    /// `band_low_hz`: lower edge of the THD+N band, Hz (`--band-low`).
    pub band_low_hz: Option<f64>,
    /// `band_high_hz`: upper edge of the band, Hz (`--band-high`).
    pub band_high_hz: Option<f64>,
    /// `max_order`: highest harmonic order reported, 2..=40 (`--max-order`).
    pub max_order: Option<u16>,
    /// `fundamental_hz`: measure this fundamental, Hz (`--fundamental`); absent = strongest tone.
    pub fundamental_hz: Option<f64>,
    /// `over_length`: shortest run of full-scale samples counted as an over (`--over-length`).
    pub over_length: Option<u16>,
    /// `flat_tolerance`: width of the band a flat top stays in, fraction of full scale
    /// (`--flat-tolerance`).
    pub flat_tolerance: Option<f64>,
    /// `flat_min_level_dbfs`: lowest level a flat top may sit at, dBFS (`--flat-min-level`).
    pub flat_min_level_dbfs: Option<f64>,
}

/// The `[watch]` table.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct WatchSection {
    /// `meter`: meter ballistics: "peak", "ppm1", "ppm2" or "vu" (`--meter`).
    pub meter: Option<Ballistics>,
    /// `fps`: most screen frames a second, 1..=30 (`--fps`).
    pub fps: Option<u32>,
    /// `onset_pct`: THD (%) whose first crossing marks the clipping onset, above 0 and below 100
    /// (`--onset`).
    pub onset_pct: Option<f64>,
    /// `snapshot_dir`: folder where snapshots are saved (`--snapshot-dir`).
    pub snapshot_dir: Option<PathBuf>,
}

impl ConfigFile {
    /// Join two layers: every key set in `over` wins, keys `over` leaves unset keep `self`'s value.
    pub fn merge(self, over: ConfigFile) -> ConfigFile {
        ConfigFile {
            scan: ScanSection {
                every: over.scan.every.or(self.scan.every),
                tone_span: over.scan.tone_span.or(self.scan.tone_span),
                merge_gap: over.scan.merge_gap.or(self.scan.merge_gap),
                json: over.scan.json.or(self.scan.json),
            },
            measure: MeasureSection {
                band_low_hz: over.measure.band_low_hz.or(self.measure.band_low_hz),
                band_high_hz: over.measure.band_high_hz.or(self.measure.band_high_hz),
                max_order: over.measure.max_order.or(self.measure.max_order),
                fundamental_hz: over.measure.fundamental_hz.or(self.measure.fundamental_hz),
                over_length: over.measure.over_length.or(self.measure.over_length),
                flat_tolerance: over.measure.flat_tolerance.or(self.measure.flat_tolerance),
                flat_min_level_dbfs: over
                    .measure
                    .flat_min_level_dbfs
                    .or(self.measure.flat_min_level_dbfs),
            },
            watch: WatchSection {
                meter: over.watch.meter.or(self.watch.meter),
                fps: over.watch.fps.or(self.watch.fps),
                onset_pct: over.watch.onset_pct.or(self.watch.onset_pct),
                snapshot_dir: over.watch.snapshot_dir.or(self.watch.snapshot_dir),
            },
        }
    }
}

/// The built-in defaults (those of `brink scan` and of the dashboard) as a configuration: every key
/// that has a default is `Some`. `every` and `fundamental_hz` have none (no time line; the
/// strongest tone) and stay `None`.
pub fn builtin_defaults() -> ConfigFile {
    ConfigFile {
        scan: ScanSection {
            every: None,
            tone_span: Some(Duration::from_secs(4)),
            merge_gap: Some(Duration::from_millis(100)),
            json: Some(false),
        },
        measure: MeasureSection {
            band_low_hz: Some(20.0),
            band_high_hz: Some(20_000.0),
            max_order: Some(20),
            fundamental_hz: None,
            over_length: Some(3),
            flat_tolerance: Some(0.001),
            flat_min_level_dbfs: Some(-40.0),
        },
        watch: WatchSection {
            meter: Some(Ballistics::SamplePeak),
            fps: Some(20),
            onset_pct: Some(1.0),
            snapshot_dir: Some(PathBuf::from(".")),
        },
    }
}

/// A place in a file, 1-based; the column counts characters.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Position {
    /// Line, from 1.
    pub line: usize,
    /// Column in characters, from 1.
    pub column: usize,
}

/// `":line:column"` after a file name, or nothing when the place is unknown.
struct At(Option<Position>);

impl fmt::Display for At {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self.0 {
            Some(p) => write!(f, ":{}:{}", p.line, p.column),
            None => Ok(()),
        }
    }
}

/// Why a configuration file could not be used. Each renders as one line that starts with the
/// file's name.
#[derive(Debug, thiserror::Error)]
pub enum ConfigError {
    /// The file does not exist.
    #[error("{}: no such configuration file", .path.display())]
    NotFound {
        /// The file named.
        path: PathBuf,
    },
    /// The file exists but could not be read (permissions, a folder, not UTF-8...).
    #[error("{}: cannot read configuration file: {source}", .path.display())]
    Read {
        /// The file named.
        path: PathBuf,
        /// What the system said.
        source: io::Error,
    },
    /// Not TOML, or TOML with a key, table or type brink does not take.
    #[error("{}{}: {message}", .path.display(), At(*.at))]
    Parse {
        /// The file.
        path: PathBuf,
        /// Where the problem starts, when the parser said.
        at: Option<Position>,
        /// What is wrong, one line.
        message: String,
    },
    /// A key whose value is of the right type but not usable.
    #[error("{}{}: [{section}] {key} = {value} {problem}", .path.display(), At(*.at))]
    Value {
        /// The file.
        path: PathBuf,
        /// Where the value starts, when known.
        at: Option<Position>,
        /// The table holding the key.
        section: &'static str,
        /// The key.
        key: &'static str,
        /// The value as written (strings quoted).
        value: String,
        /// What is wrong with it and what is allowed.
        problem: String,
    },
}

/// The TOML text as written. Private: only checked values leave this module.
#[derive(Debug, Default, Deserialize)]
#[serde(deny_unknown_fields)]
struct RawFile {
    #[serde(default)]
    scan: RawScan,
    #[serde(default)]
    measure: RawMeasure,
    #[serde(default)]
    watch: RawWatch,
}

/// Each value that can be refused keeps its place in the text, for errors that name line and
/// column.
#[derive(Debug, Default, Deserialize)]
#[serde(deny_unknown_fields)]
struct RawScan {
    every: Option<Spanned<Dur>>,
    tone_span: Option<Spanned<Dur>>,
    merge_gap: Option<Spanned<Dur>>,
    json: Option<bool>,
}

/// Each value with its place in the text, for errors that name line and column.
#[derive(Debug, Default, Deserialize)]
#[serde(deny_unknown_fields)]
struct RawMeasure {
    band_low_hz: Option<Spanned<Num>>,
    band_high_hz: Option<Spanned<Num>>,
    max_order: Option<Spanned<Int>>,
    fundamental_hz: Option<Spanned<Num>>,
    over_length: Option<Spanned<Int>>,
    flat_tolerance: Option<Spanned<Num>>,
    flat_min_level_dbfs: Option<Spanned<Num>>,
}

/// Each value with its place in the text, for errors that name line and column.
#[derive(Debug, Default, Deserialize)]
#[serde(deny_unknown_fields)]
struct RawWatch {
    meter: Option<Spanned<String>>,
    fps: Option<Spanned<Int>>,
    onset_pct: Option<Spanned<Num>>,
    snapshot_dir: Option<Spanned<String>>,
}

/// A number as written: integer or float (`20` and `20.0` both do).
#[derive(Debug, Clone, Copy)]
struct Num(f64);

/// A whole number as written. Read as `i64` so that an out-of-range value gets the allowed range
/// in the message rather than a type error.
#[derive(Debug, Clone, Copy)]
struct Int(i64);

/// A duration string as written, parsed when checked (so that the message can name the key).
#[derive(Debug, Clone)]
struct Dur(String);

impl<'de> Deserialize<'de> for Num {
    fn deserialize<D: Deserializer<'de>>(d: D) -> Result<Self, D::Error> {
        struct V;
        impl Visitor<'_> for V {
            type Value = Num;
            fn expecting(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
                f.write_str("a number, e.g. 20.0")
            }
            fn visit_f64<E: de::Error>(self, v: f64) -> Result<Num, E> {
                Ok(Num(v))
            }
            fn visit_i64<E: de::Error>(self, v: i64) -> Result<Num, E> {
                Ok(Num(v as f64))
            }
            fn visit_u64<E: de::Error>(self, v: u64) -> Result<Num, E> {
                Ok(Num(v as f64))
            }
        }
        d.deserialize_f64(V)
    }
}

impl<'de> Deserialize<'de> for Int {
    fn deserialize<D: Deserializer<'de>>(d: D) -> Result<Self, D::Error> {
        struct V;
        impl Visitor<'_> for V {
            type Value = Int;
            fn expecting(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
                f.write_str("a whole number, e.g. 20")
            }
            fn visit_i64<E: de::Error>(self, v: i64) -> Result<Int, E> {
                Ok(Int(v))
            }
            fn visit_u64<E: de::Error>(self, v: u64) -> Result<Int, E> {
                Ok(Int(i64::try_from(v).unwrap_or(i64::MAX)))
            }
        }
        d.deserialize_i64(V)
    }
}

impl<'de> Deserialize<'de> for Dur {
    fn deserialize<D: Deserializer<'de>>(d: D) -> Result<Self, D::Error> {
        struct V;
        impl Visitor<'_> for V {
            type Value = Dur;
            fn expecting(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
                f.write_str("a duration string with a unit, e.g. \"500ms\", \"2s\", \"1m\"")
            }
            fn visit_str<E: de::Error>(self, v: &str) -> Result<Dur, E> {
                Ok(Dur(v.to_string()))
            }
        }
        d.deserialize_str(V)
    }
}

/// Parse and check the text of a configuration file; `origin` names it in errors.
pub fn parse(text: &str, origin: &Path) -> Result<ConfigFile, ConfigError> {
    let raw: RawFile = toml::from_str(text).map_err(|e| ConfigError::Parse {
        path: origin.to_path_buf(),
        at: e.span().map(|s| position(text, s.start)),
        message: one_line(e.message()),
    })?;
    Checker { path: origin, text }.check(raw)
}

/// Read, parse and check a configuration file. A file that does not exist is
/// [`ConfigError::NotFound`].
pub fn load(path: &Path) -> Result<ConfigFile, ConfigError> {
    let text = std::fs::read_to_string(path).map_err(|e| match e.kind() {
        io::ErrorKind::NotFound | io::ErrorKind::NotADirectory => ConfigError::NotFound {
            path: path.to_path_buf(),
        },
        _ => ConfigError::Read {
            path: path.to_path_buf(),
            source: e,
        },
    })?;
    parse(&text, path)
}

/// The user's configuration file: `$XDG_CONFIG_HOME/brink/config.toml`, else
/// `$HOME/.config/brink/config.toml`; `None` when neither variable is usable. An empty or relative
/// `XDG_CONFIG_HOME` is ignored, as the XDG base directory specification asks.
pub fn user_config_path() -> Option<PathBuf> {
    user_config_path_from(
        std::env::var_os("XDG_CONFIG_HOME"),
        std::env::var_os("HOME"),
    )
}

fn user_config_path_from(xdg: Option<OsString>, home: Option<OsString>) -> Option<PathBuf> {
    let base = match xdg.map(PathBuf::from) {
        Some(x) if x.is_absolute() => x,
        _ => PathBuf::from(home.filter(|h| !h.is_empty())?).join(".config"),
    };
    Some(base.join("brink").join("config.toml"))
}

/// The configuration in force before the command line: the user's file if it exists, then the
/// `explicit` (`--config`) file on top. A missing user file is no error; a missing explicit file
/// is [`ConfigError::NotFound`]. Keys neither file sets stay `None`.
pub fn layered(explicit: Option<&Path>) -> Result<ConfigFile, ConfigError> {
    layered_from(user_config_path().as_deref(), explicit)
}

fn layered_from(user: Option<&Path>, explicit: Option<&Path>) -> Result<ConfigFile, ConfigError> {
    let mut cfg = ConfigFile::default();
    if let Some(u) = user {
        match load(u) {
            Ok(c) => cfg = c,
            Err(ConfigError::NotFound { .. }) => {}
            Err(e) => return Err(e),
        }
    }
    if let Some(p) = explicit {
        cfg = cfg.merge(load(p)?);
    }
    Ok(cfg)
}

/// 1-based line and column (in characters) of byte `offset` in `text`.
fn position(text: &str, offset: usize) -> Position {
    let mut off = offset.min(text.len());
    while !text.is_char_boundary(off) {
        off -= 1;
    }
    let before = &text[..off];
    let line_start = before.rfind('\n').map_or(0, |i| i + 1);
    Position {
        line: before.matches('\n').count() + 1,
        column: before[line_start..].chars().count() + 1,
    }
}

/// The parser's message on one line.
fn one_line(msg: &str) -> String {
    msg.split('\n')
        .map(str::trim)
        .filter(|l| !l.is_empty())
        .collect::<Vec<_>>()
        .join("; ")
}

/// Checks values of one file and names it in errors.
struct Checker<'a> {
    path: &'a Path,
    /// The file's text, to turn spans into line and column.
    text: &'a str,
}

impl Checker<'_> {
    fn bad_at(
        &self,
        at: Option<Position>,
        section: &'static str,
        key: &'static str,
        value: impl fmt::Display,
        problem: impl Into<String>,
    ) -> ConfigError {
        ConfigError::Value {
            path: self.path.to_path_buf(),
            at,
            section,
            key,
            value: value.to_string(),
            problem: problem.into(),
        }
    }

    fn check(&self, raw: RawFile) -> Result<ConfigFile, ConfigError> {
        let s = raw.scan;
        let scan = ScanSection {
            every: self.duration("every", s.every, MIN_SPAN)?,
            tone_span: self.duration("tone_span", s.tone_span, MIN_SPAN)?,
            merge_gap: self.duration("merge_gap", s.merge_gap, Duration::ZERO)?,
            json: s.json,
        };
        Ok(ConfigFile {
            scan,
            measure: self.measure(raw.measure)?,
            watch: self.watch(raw.watch)?,
        })
    }

    /// The `[measure]` table; errors name the value's line and column.
    fn measure(&self, m: RawMeasure) -> Result<MeasureSection, ConfigError> {
        const M: &str = "measure";
        let num = |(v, at): (Option<Num>, Option<Position>)| (v.map(|Num(x)| x), at);
        let (band_low_hz, low_at) = num(self.unspan(m.band_low_hz));
        let (band_high_hz, high_at) = num(self.unspan(m.band_high_hz));
        let (fundamental_hz, fundamental_at) = num(self.unspan(m.fundamental_hz));
        let (flat_tolerance, tolerance_at) = num(self.unspan(m.flat_tolerance));
        let (flat_min_level_dbfs, min_level_at) = num(self.unspan(m.flat_min_level_dbfs));
        if let Some(v) = band_low_hz {
            if !(v >= 0.0 && v.is_finite()) {
                return Err(self.bad_at(
                    low_at,
                    M,
                    "band_low_hz",
                    fmt_f(v),
                    "must be 0 Hz or above",
                ));
            }
        }
        if let Some(v) = band_high_hz {
            if !(v > 0.0 && v.is_finite()) {
                return Err(self.bad_at(
                    high_at,
                    M,
                    "band_high_hz",
                    fmt_f(v),
                    "must be above 0 Hz",
                ));
            }
            if let Some(low) = band_low_hz {
                if v <= low {
                    return Err(self.bad_at(
                        high_at,
                        M,
                        "band_high_hz",
                        fmt_f(v),
                        format!("must be above band_low_hz = {}", fmt_f(low)),
                    ));
                }
            }
        }
        if let Some(v) = fundamental_hz {
            if !(v > 0.0 && v.is_finite()) {
                return Err(self.bad_at(
                    fundamental_at,
                    M,
                    "fundamental_hz",
                    fmt_f(v),
                    "must be above 0 Hz",
                ));
            }
        }
        let (max_order, at) = self.unspan(m.max_order);
        let max_order = self.int(at, M, "max_order", max_order, MAX_ORDER_RANGE)?;
        let (over_length, at) = self.unspan(m.over_length);
        let over_length = self.int(at, M, "over_length", over_length, OVER_LENGTH_RANGE)?;
        if let Some(v) = flat_tolerance {
            if !(v > 0.0 && v < 0.5) {
                return Err(self.bad_at(
                    tolerance_at,
                    M,
                    "flat_tolerance",
                    fmt_f(v),
                    "must be above 0 and below 0.5 (fraction of full scale)",
                ));
            }
        }
        if let Some(v) = flat_min_level_dbfs {
            if v.is_nan() || v >= 0.0 {
                return Err(self.bad_at(
                    min_level_at,
                    M,
                    "flat_min_level_dbfs",
                    fmt_f(v),
                    "must be below 0 dBFS (negative)",
                ));
            }
        }
        Ok(MeasureSection {
            band_low_hz,
            band_high_hz,
            max_order,
            fundamental_hz,
            over_length,
            flat_tolerance,
            flat_min_level_dbfs,
        })
    }

    /// The `[watch]` table; errors name the value's line and column.
    fn watch(&self, w: RawWatch) -> Result<WatchSection, ConfigError> {
        const W: &str = "watch";
        let (meter, at) = self.unspan(w.meter);
        let meter = match meter {
            None => None,
            Some(text) => Some(text.parse::<Ballistics>().map_err(|_| {
                self.bad_at(
                    at,
                    W,
                    "meter",
                    format!("{text:?}"),
                    format!(
                        "is not a meter: expected one of {}",
                        Ballistics::keys_list()
                    ),
                )
            })?),
        };
        let (fps, at) = self.unspan(w.fps);
        let fps = self.int(at, W, "fps", fps, FPS_RANGE)?;
        let (onset_pct, at) = self.unspan(w.onset_pct);
        let onset_pct = onset_pct.map(|Num(v)| v);
        if let Some(v) = onset_pct {
            if !(v > 0.0 && v < 100.0) {
                return Err(self.bad_at(
                    at,
                    W,
                    "onset_pct",
                    fmt_f(v),
                    "must be above 0 and below 100 (THD, %)",
                ));
            }
        }
        let (snapshot_dir, at) = self.unspan(w.snapshot_dir);
        if let Some(d) = &snapshot_dir {
            if d.is_empty() {
                return Err(self.bad_at(
                    at,
                    W,
                    "snapshot_dir",
                    "\"\"",
                    "must name a folder, e.g. \".\" or \"snapshots\"",
                ));
            }
        }
        Ok(WatchSection {
            meter,
            fps,
            onset_pct,
            snapshot_dir: snapshot_dir.map(PathBuf::from),
        })
    }

    /// A value without its span, and where the span starts.
    fn unspan<T>(&self, v: Option<Spanned<T>>) -> (Option<T>, Option<Position>) {
        match v {
            None => (None, None),
            Some(s) => {
                let at = position(self.text, s.span().start);
                (Some(s.into_inner()), Some(at))
            }
        }
    }

    /// A `[scan]` duration string: parses as on the command line, at least `min`, at most
    /// [`MAX_DURATION`]; errors name its line and column.
    fn duration(
        &self,
        key: &'static str,
        text: Option<Spanned<Dur>>,
        min: Duration,
    ) -> Result<Option<Duration>, ConfigError> {
        let (Some(Dur(text)), at) = self.unspan(text) else {
            return Ok(None);
        };
        let quoted = format!("{text:?}");
        let d = parse_duration(&text).map_err(|e| {
            let why = match e {
                ParseError::Duration { reason, .. } => reason.to_string(),
                other => other.to_string(),
            };
            self.bad_at(
                at,
                "scan",
                key,
                &quoted,
                format!("is not a duration: {why}"),
            )
        })?;
        if d < min {
            return Err(self.bad_at(
                at,
                "scan",
                key,
                &quoted,
                format!("is too short: at least {}ms", min.as_millis()),
            ));
        }
        if d > MAX_DURATION {
            return Err(self.bad_at(at, "scan", key, &quoted, "is too long: at most 24 hours"));
        }
        Ok(Some(d))
    }

    /// An integer key within `range` (which must fit `T`); `at` is where the value starts, when
    /// known.
    fn int<T: TryFrom<i64>>(
        &self,
        at: Option<Position>,
        section: &'static str,
        key: &'static str,
        v: Option<Int>,
        range: std::ops::RangeInclusive<i64>,
    ) -> Result<Option<T>, ConfigError> {
        let Some(Int(v)) = v else {
            return Ok(None);
        };
        match T::try_from(v) {
            Ok(n) if range.contains(&v) => Ok(Some(n)),
            _ => Err(self.bad_at(
                at,
                section,
                key,
                v,
                format!("is outside {}..={}", range.start(), range.end()),
            )),
        }
    }
}

/// A float as TOML writes it (`20000.0`, `-40.0`, `nan`, `inf`).
fn fmt_f(v: f64) -> String {
    if v.is_nan() {
        "nan".to_string()
    } else if v.is_infinite() {
        if v > 0.0 { "inf" } else { "-inf" }.to_string()
    } else {
        format!("{v:?}")
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn presets_dir() -> PathBuf {
        Path::new(env!("CARGO_MANIFEST_DIR")).join("config")
    }

    fn preset(name: &str) -> ConfigFile {
        let path = presets_dir().join(name);
        load(&path).unwrap_or_else(|e| panic!("{e}"))
    }

    fn err(text: &str) -> String {
        match parse(text, Path::new("config/x.toml")) {
            Ok(c) => panic!("expected an error for {text:?}, got {c:?}"),
            Err(e) => e.to_string(),
        }
    }

    #[test]
    fn every_preset_parses() {
        let mut names = Vec::new();
        for entry in std::fs::read_dir(presets_dir()).unwrap() {
            let path = entry.unwrap().path();
            if path.extension().and_then(|e| e.to_str()) == Some("toml") {
                if let Err(e) = load(&path) {
                    panic!("{e}");
                }
                names.push(path.file_name().unwrap().to_string_lossy().into_owned());
            }
        }
        names.sort();
        for want in [
            "amp-bench.toml",
            "default.toml",
            "lab-logger.toml",
            "soundcheck.toml",
        ] {
            assert!(
                names.iter().any(|n| n == want),
                "{want} missing from {names:?}"
            );
        }
    }

    #[test]
    fn default_toml_is_the_builtin_defaults() {
        let file = preset("default.toml");
        let want = builtin_defaults();
        assert_eq!(file.scan.every, want.scan.every, "every");
        assert_eq!(file.scan.tone_span, want.scan.tone_span, "tone_span");
        assert_eq!(file.scan.merge_gap, want.scan.merge_gap, "merge_gap");
        assert_eq!(file.scan.json, want.scan.json, "json");
        let (f, w) = (&file.measure, &want.measure);
        assert_eq!(f.band_low_hz, w.band_low_hz, "band_low_hz");
        assert_eq!(f.band_high_hz, w.band_high_hz, "band_high_hz");
        assert_eq!(f.max_order, w.max_order, "max_order");
        assert_eq!(f.fundamental_hz, w.fundamental_hz, "fundamental_hz");
        assert_eq!(f.over_length, w.over_length, "over_length");
        assert_eq!(f.flat_tolerance, w.flat_tolerance, "flat_tolerance");
        assert_eq!(
            f.flat_min_level_dbfs, w.flat_min_level_dbfs,
            "flat_min_level_dbfs"
        );
        let (f, w) = (&file.watch, &want.watch);
        assert_eq!(f.meter, w.meter, "meter");
        assert_eq!(f.fps, w.fps, "fps");
        assert_eq!(f.onset_pct, w.onset_pct, "onset_pct");
        assert_eq!(f.snapshot_dir, w.snapshot_dir, "snapshot_dir");
        // And nothing the field list above forgot.
        assert_eq!(file, want);
    }

    #[test]
    fn presets_say_what_they_are_for() {
        let sc = preset("soundcheck.toml");
        assert_eq!(sc.scan.every, Some(Duration::from_secs(1)));
        let d = builtin_defaults();
        assert!(
            sc.scan.merge_gap < d.scan.merge_gap,
            "soundcheck merges less"
        );
        assert!(sc.measure.flat_min_level_dbfs > d.measure.flat_min_level_dbfs);

        let amp = preset("amp-bench.toml");
        assert_eq!(amp.measure.max_order, Some(20));
        assert_eq!(
            amp.measure.fundamental_hz, None,
            "997 Hz is left commented out"
        );
        assert!(
            amp.scan.tone_span > d.scan.tone_span,
            "steady tones: a longer span"
        );

        let log = preset("lab-logger.toml");
        assert_eq!(log.scan.every, Some(Duration::from_secs(1)));
        assert_eq!(log.scan.json, Some(true));

        // [watch]: PPM Type II for the live engineer, sample peak and saved snapshots on the bench,
        // built-in values for the unattended logger.
        assert_eq!(sc.watch.meter, Some(Ballistics::PpmType2));
        assert_eq!(amp.watch.meter, Some(Ballistics::SamplePeak));
        assert_eq!(amp.watch.onset_pct, Some(1.0));
        assert_eq!(amp.watch.snapshot_dir, Some(PathBuf::from("snapshots")));
        assert_eq!(log.watch, WatchSection::default());
    }

    #[test]
    fn builtin_watch_defaults_match_the_engine_and_the_screen() {
        let w = builtin_defaults().watch;
        assert_eq!(
            w.onset_pct,
            Some(crate::live::engine::EngineSettings::default().onset_thd_pct)
        );
        assert!(FPS_RANGE.contains(&i64::from(w.fps.unwrap())));
        assert_eq!(w.meter, Some(Ballistics::SamplePeak));
        assert_eq!(w.snapshot_dir.as_deref(), Some(Path::new(".")));
    }

    #[test]
    fn merge_lets_the_upper_layer_win_key_by_key() {
        let base = parse(
            "[scan]\nevery = \"2s\"\njson = true\n[measure]\nmax_order = 10\nover_length = 5\n",
            Path::new("base.toml"),
        )
        .unwrap();
        let over = parse(
            "[scan]\nevery = \"500ms\"\n[measure]\nmax_order = 30\nfundamental_hz = 997.0\n",
            Path::new("over.toml"),
        )
        .unwrap();
        let m = base.clone().merge(over.clone());
        assert_eq!(m.scan.every, Some(Duration::from_millis(500)));
        assert_eq!(m.scan.json, Some(true));
        assert_eq!(m.scan.tone_span, None);
        assert_eq!(m.measure.max_order, Some(30));
        assert_eq!(m.measure.over_length, Some(5));
        assert_eq!(m.measure.fundamental_hz, Some(997.0));
        assert_eq!(m.measure.band_low_hz, None);
        // The other way round the base's values win.
        let r = over.merge(base);
        assert_eq!(r.scan.every, Some(Duration::from_secs(2)));
        assert_eq!(r.measure.max_order, Some(10));
        assert_eq!(r.measure.fundamental_hz, Some(997.0));
        // An empty layer changes nothing.
        assert_eq!(
            builtin_defaults().merge(ConfigFile::default()),
            builtin_defaults()
        );
    }

    #[test]
    fn merge_lets_the_upper_layer_win_in_watch() {
        let base = parse(
            "[watch]\nmeter = \"vu\"\nfps = 10\nsnapshot_dir = \"base\"\n",
            Path::new("base.toml"),
        )
        .unwrap();
        let over = parse(
            "[watch]\nmeter = \"ppm1\"\nonset_pct = 3.0\n",
            Path::new("over.toml"),
        )
        .unwrap();
        let m = base.clone().merge(over.clone());
        assert_eq!(m.watch.meter, Some(Ballistics::PpmType1));
        assert_eq!(m.watch.fps, Some(10));
        assert_eq!(m.watch.onset_pct, Some(3.0));
        assert_eq!(m.watch.snapshot_dir, Some(PathBuf::from("base")));
        let r = over.merge(base.clone());
        assert_eq!(r.watch.meter, Some(Ballistics::Vu));
        assert_eq!(r.watch.onset_pct, Some(3.0));
        // A file on top of the built-in values replaces only what it sets.
        let d = builtin_defaults().merge(base);
        assert_eq!(d.watch.meter, Some(Ballistics::Vu));
        assert_eq!(d.watch.onset_pct, Some(1.0));
        assert_eq!(d.scan, builtin_defaults().scan);
    }

    #[test]
    fn unknown_key_names_file_line_column_and_key() {
        // The misspelt key on line 7, column 1.
        let text =
            "# soundcheck\n\n[scan]\nevery = \"1s\"\n\nmerge_gap = \"50ms\"\ntone_spam = \"4s\"\n";
        let e = match parse(text, Path::new("config/soundcheck.toml")) {
            Err(e) => e.to_string(),
            Ok(c) => panic!("{c:?}"),
        };
        assert!(
            e.starts_with("config/soundcheck.toml:7:1: unknown field `tone_spam`"),
            "{e}"
        );
        assert!(e.contains("expected one of `every`, `tone_span`"), "{e}");
        assert!(!e.contains('\n'), "one line: {e}");
    }

    #[test]
    fn unknown_table_is_refused() {
        let e = err("[scan]\njson = true\n\n[log]\nevery = \"1s\"\n");
        assert!(e.starts_with("config/x.toml:4:"), "{e}");
        assert!(e.contains("unknown field `log`"), "{e}");
    }

    #[test]
    fn type_error_has_line_and_column() {
        let e = err("[measure]\nband_low_hz = 20.0\nmax_order = \"20\"\n");
        assert!(e.starts_with("config/x.toml:3:13: "), "{e}");
        assert!(
            e.ends_with("invalid type: string \"20\", expected a whole number, e.g. 20"),
            "{e}"
        );
        let e = err("[measure]\nband_high_hz = \"20k\"\n");
        assert!(e.starts_with("config/x.toml:2:16: "), "{e}");
        assert!(e.contains("expected a number"), "{e}");
        let e = err("[measure]\nmax_order = 20.0\n");
        assert!(e.starts_with("config/x.toml:2:13: "), "{e}");
        let e = err("[scan]\njson = 1\n");
        assert!(e.starts_with("config/x.toml:2:8: "), "{e}");
        let e = err("[scan]\nevery = 5\n");
        assert!(e.starts_with("config/x.toml:2:9: "), "{e}");
        assert!(e.contains("expected a duration string"), "{e}");
    }

    #[test]
    fn syntax_error_has_line_and_column() {
        let e = err("[scan]\njson = false\nevery = \n");
        assert!(e.starts_with("config/x.toml:3:"), "{e}");
        assert!(!e.contains('\n'), "one line: {e}");
        let e = err("[measure\n");
        assert!(e.starts_with("config/x.toml:1:"), "{e}");
    }

    #[test]
    fn bad_values_name_key_and_value() {
        assert_eq!(
            err("[measure]\nmax_order = 90\n"),
            "config/x.toml:2:13: [measure] max_order = 90 is outside 2..=40"
        );
        // The pair is refused at the upper edge, where it is written.
        assert_eq!(
            err("[measure]\nband_low_hz = 1000.0\nband_high_hz = 500.0\n"),
            "config/x.toml:3:16: [measure] band_high_hz = 500.0 must be above \
             band_low_hz = 1000.0"
        );
        // Each value on line 2, right after `key = `.
        let cases: &[(&str, &str)] = &[
            (
                "[measure]\nmax_order = 1\n",
                "2:13: [measure] max_order = 1 ",
            ),
            (
                "[measure]\nmax_order = -3\n",
                "2:13: [measure] max_order = -3 ",
            ),
            (
                "[measure]\nover_length = 0\n",
                "2:15: [measure] over_length = 0 ",
            ),
            (
                "[measure]\nover_length = 70000\n",
                "2:15: [measure] over_length = 70000 ",
            ),
            (
                "[measure]\nband_low_hz = -1.0\n",
                "2:15: [measure] band_low_hz = -1.0 ",
            ),
            (
                "[measure]\nband_high_hz = inf\n",
                "2:16: [measure] band_high_hz = inf ",
            ),
            (
                "[measure]\nfundamental_hz = 0.0\n",
                "2:18: [measure] fundamental_hz = 0.0 ",
            ),
            (
                "[measure]\nfundamental_hz = nan\n",
                "2:18: [measure] fundamental_hz = nan ",
            ),
            (
                "[measure]\nflat_tolerance = 0.5\n",
                "2:18: [measure] flat_tolerance = 0.5 ",
            ),
            (
                "[measure]\nflat_tolerance = 0.0\n",
                "2:18: [measure] flat_tolerance = 0.0 ",
            ),
            (
                "[measure]\nflat_min_level_dbfs = 0.0\n",
                "2:23: [measure] flat_min_level_dbfs = 0.0 ",
            ),
            (
                "[measure]\nflat_min_level_dbfs = nan\n",
                "2:23: [measure] flat_min_level_dbfs = nan ",
            ),
            (
                "[scan]\nevery = \"0s\"\n",
                "2:9: [scan] every = \"0s\" is not a duration",
            ),
            (
                "[scan]\nevery = \"1.5\"\n",
                "2:9: [scan] every = \"1.5\" is not a duration",
            ),
            (
                "[scan]\ntone_span = \"2h\"\n",
                "2:13: [scan] tone_span = \"2h\" is not a duration",
            ),
            (
                "[scan]\ntone_span = \"0.5ms\"\n",
                "2:13: [scan] tone_span = \"0.5ms\" is too short",
            ),
            (
                "[scan]\nmerge_gap = \"-5ms\"\n",
                "2:13: [scan] merge_gap = \"-5ms\" is not a duration",
            ),
            (
                "[scan]\nmerge_gap = \"1441m\"\n",
                "2:13: [scan] merge_gap = \"1441m\" is too long",
            ),
        ];
        for (text, want) in cases {
            let e = err(text);
            assert!(e.starts_with("config/x.toml:"), "{e}");
            assert!(
                e.starts_with(&format!("config/x.toml:{want}")),
                "{text:?}: {e} does not start with {want}"
            );
        }
        // The band pair is checked only when both edges are in the same file; the edge alone is
        // fine here (the merged result is checked with the command line).
        assert!(parse("[measure]\nband_high_hz = 20.0\n", Path::new("x")).is_ok());
        assert!(parse("[measure]\nband_high_hz = 0.0\n", Path::new("x")).is_err());
        assert!(parse("[measure]\nband_low_hz = 30000.0\n", Path::new("x")).is_ok());
    }

    /// One bad value in each table, deep in a file with comments, indents and other tables:
    /// every error names the line and the column (in characters) where the value starts.
    #[test]
    fn bad_values_in_every_table_name_line_and_column() {
        let head = "# bench preset, é\n[scan]\njson = true\n";
        // [scan]: line 4; "  tone_span = " is 14 characters, so the value starts in column 15.
        assert_eq!(
            err(&format!("{head}  tone_span = \"2h\"\n")),
            "config/x.toml:4:15: [scan] tone_span = \"2h\" is not a duration: \
             expected a number with a unit ms, s or m, e.g. 500ms, 2s, 1.5s, 1m"
        );
        // [measure] after [scan]: line 7; "flat_tolerance   =   " is 21 characters.
        assert_eq!(
            err(&format!(
                "{head}every = \"1s\"\n\n[measure]\nflat_tolerance   =   0.5\nmax_order = 10\n"
            )),
            "config/x.toml:7:22: [measure] flat_tolerance = 0.5 must be above 0 and below 0.5 \
             (fraction of full scale)"
        );
        // [measure] before [scan], a whole number: line 3, after "over_length=".
        assert_eq!(
            err("[measure]\nmax_order = 10\nover_length=0\n[scan]\nevery = \"1s\"\n"),
            "config/x.toml:3:13: [measure] over_length = 0 is outside 1..=65535"
        );
        // [watch] after both: line 10 (the head's three lines, then a blank one); "fps = " is 6
        // characters.
        assert_eq!(
            err(&format!(
                "{head}\n[measure]\nmax_order = 10\n\n[watch]\nmeter = \"vu\"\nfps = 45\n"
            )),
            "config/x.toml:10:7: [watch] fps = 45 is outside 1..=30"
        );
        // Through `load`, with the file's real name.
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("bench.toml");
        std::fs::write(&path, "[scan]\n\n\nmerge_gap = \"1441m\"\n").unwrap();
        let e = load(&path).unwrap_err().to_string();
        assert_eq!(
            e,
            format!(
                "{}:4:13: [scan] merge_gap = \"1441m\" is too long: at most 24 hours",
                path.display()
            )
        );
    }

    #[test]
    fn bad_watch_values_name_line_column_and_allowed_values() {
        assert_eq!(
            err("[watch]\nmeter = \"loud\"\n"),
            "config/x.toml:2:9: [watch] meter = \"loud\" is not a meter: \
             expected one of peak, ppm1, ppm2, vu"
        );
        assert_eq!(
            err("[watch]\nfps = 0\n"),
            "config/x.toml:2:7: [watch] fps = 0 is outside 1..=30"
        );
        assert_eq!(
            err("[watch]\nfps = 31\n"),
            "config/x.toml:2:7: [watch] fps = 31 is outside 1..=30"
        );
        assert_eq!(
            err("[watch]\nonset_pct = 100\n"),
            "config/x.toml:2:13: [watch] onset_pct = 100.0 must be above 0 and below 100 (THD, %)"
        );
        assert_eq!(
            err("[watch]\nsnapshot_dir = \"\"\n"),
            "config/x.toml:2:16: [watch] snapshot_dir = \"\" must name a folder, \
             e.g. \".\" or \"snapshots\""
        );
        // Lines and columns count from the top of the file, in characters.
        let e = err("# é\n[scan]\njson = true\n\n[watch]\nfps = 20\n  meter   = \"PPM2\"\n");
        assert!(
            e.starts_with("config/x.toml:7:13: [watch] meter = \"PPM2\" "),
            "{e}"
        );
        let cases: &[(&str, &str)] = &[
            ("[watch]\nmeter = \"\"\n", "2:9: [watch] meter = \"\" "),
            (
                "[watch]\nmeter = \"ppm\"\n",
                "2:9: [watch] meter = \"ppm\" ",
            ),
            ("[watch]\nfps = -1\n", "2:7: [watch] fps = -1 "),
            (
                "[watch]\nfps = 5000000000\n",
                "2:7: [watch] fps = 5000000000 ",
            ),
            (
                "[watch]\nonset_pct = 0.0\n",
                "2:13: [watch] onset_pct = 0.0 ",
            ),
            (
                "[watch]\nonset_pct = -1\n",
                "2:13: [watch] onset_pct = -1.0 ",
            ),
            (
                "[watch]\nonset_pct = 100.5\n",
                "2:13: [watch] onset_pct = 100.5 ",
            ),
            (
                "[watch]\nonset_pct = nan\n",
                "2:13: [watch] onset_pct = nan ",
            ),
            (
                "[watch]\nonset_pct = inf\n",
                "2:13: [watch] onset_pct = inf ",
            ),
        ];
        for (text, want) in cases {
            let e = err(text);
            assert!(e.starts_with("config/x.toml:"), "{e}");
            assert!(e.contains(want), "{text:?}: {e} lacks {want}");
        }
        // Wrong types are parse errors, also with line and column.
        let e = err("[watch]\nmeter = 2\n");
        assert!(e.starts_with("config/x.toml:2:9: invalid type"), "{e}");
        let e = err("[watch]\nfps = 20.0\n");
        assert!(e.starts_with("config/x.toml:2:7: "), "{e}");
        assert!(e.contains("expected a whole number"), "{e}");
        let e = err("[watch]\nonset_pct = \"1%\"\n");
        assert!(e.starts_with("config/x.toml:2:13: "), "{e}");
        assert!(e.contains("expected a number"), "{e}");
        let e = err("[watch]\nsnapshot_dir = 5\n");
        assert!(e.starts_with("config/x.toml:2:16: "), "{e}");
        let e = err("[watch]\nfps = 20\nframes = 20\n");
        assert!(
            e.starts_with("config/x.toml:3:1: unknown field `frames`"),
            "{e}"
        );
    }

    #[test]
    fn watch_values_come_through() {
        let c = parse(
            "[watch]\nmeter = \"ppm2\"\nfps = 30\nonset_pct = 0.5\n\
             snapshot_dir = \"/tmp/snaps\"\n",
            Path::new("x.toml"),
        )
        .unwrap();
        assert_eq!(
            c.watch,
            WatchSection {
                meter: Some(Ballistics::PpmType2),
                fps: Some(30),
                onset_pct: Some(0.5),
                snapshot_dir: Some(PathBuf::from("/tmp/snaps")),
            }
        );
        assert_eq!(c.scan, ScanSection::default());
        assert_eq!(c.measure, MeasureSection::default());
        for (key, want) in [
            ("peak", Ballistics::SamplePeak),
            ("ppm1", Ballistics::PpmType1),
            ("ppm2", Ballistics::PpmType2),
            ("vu", Ballistics::Vu),
        ] {
            let c = parse(&format!("[watch]\nmeter = {key:?}\n"), Path::new("x")).unwrap();
            assert_eq!(c.watch.meter, Some(want), "{key}");
        }
        let c = parse("[watch]\nfps = 1\nonset_pct = 3\n", Path::new("x")).unwrap();
        assert_eq!(c.watch.fps, Some(1));
        assert_eq!(c.watch.onset_pct, Some(3.0));
        assert_eq!(c.watch.meter, None);
        let c = parse("[watch]\nonset_pct = 99.9\n", Path::new("x")).unwrap();
        assert_eq!(c.watch.onset_pct, Some(99.9));
        assert_eq!(
            parse("[watch]\n", Path::new("x")).unwrap(),
            ConfigFile::default()
        );
    }

    #[test]
    fn accepted_values_come_through() {
        let c = parse(
            "[scan]\nevery = \"1.5s\"\ntone_span = \"1m\"\nmerge_gap = \"0.5ms\"\njson = true\n\
             [measure]\nband_low_hz = 10\nband_high_hz = 96000\nmax_order = 40\n\
             fundamental_hz = 997.0\nover_length = 1\nflat_tolerance = 0.01\n\
             flat_min_level_dbfs = -20\n",
            Path::new("x.toml"),
        )
        .unwrap();
        assert_eq!(c.scan.every, Some(Duration::from_millis(1500)));
        assert_eq!(c.scan.tone_span, Some(Duration::from_secs(60)));
        assert_eq!(c.scan.merge_gap, Some(Duration::from_micros(500)));
        assert_eq!(c.scan.json, Some(true));
        assert_eq!(c.measure.band_low_hz, Some(10.0));
        assert_eq!(c.measure.band_high_hz, Some(96_000.0));
        assert_eq!(c.measure.max_order, Some(40));
        assert_eq!(c.measure.fundamental_hz, Some(997.0));
        assert_eq!(c.measure.over_length, Some(1));
        assert_eq!(c.measure.flat_tolerance, Some(0.01));
        assert_eq!(c.measure.flat_min_level_dbfs, Some(-20.0));
        assert_eq!(parse("", Path::new("x")).unwrap(), ConfigFile::default());
        assert_eq!(
            parse("# nothing\n[scan]\n[measure]\n", Path::new("x")).unwrap(),
            ConfigFile::default()
        );
    }

    #[test]
    fn positions_count_lines_and_characters() {
        let t = "ab\r\nçé = 1\n\nx";
        assert_eq!(position(t, 0), Position { line: 1, column: 1 });
        assert_eq!(position(t, 4), Position { line: 2, column: 1 });
        // After "çé" (four bytes): column 3.
        assert_eq!(position(t, 8), Position { line: 2, column: 3 });
        // Inside a character: its start.
        assert_eq!(position(t, 5), Position { line: 2, column: 1 });
        assert_eq!(position(t, t.len() + 10), Position { line: 4, column: 2 });
    }

    #[test]
    fn user_path_falls_back_to_home() {
        let p = |x: Option<&str>, h: Option<&str>| {
            user_config_path_from(x.map(OsString::from), h.map(OsString::from))
        };
        assert_eq!(
            p(Some("/xdg"), Some("/home/u")),
            Some(PathBuf::from("/xdg/brink/config.toml"))
        );
        assert_eq!(
            p(None, Some("/home/u")),
            Some(PathBuf::from("/home/u/.config/brink/config.toml"))
        );
        assert_eq!(
            p(Some(""), Some("/home/u")),
            Some(PathBuf::from("/home/u/.config/brink/config.toml"))
        );
        assert_eq!(
            p(Some("rel/dir"), Some("/home/u")),
            Some(PathBuf::from("/home/u/.config/brink/config.toml"))
        );
        assert_eq!(p(None, None), None);
        assert_eq!(p(None, Some("")), None);
    }

    /// The only test that touches the environment (tests run in parallel).
    #[test]
    fn user_path_honours_xdg_config_home_and_layers() {
        let dir = tempfile::tempdir().unwrap();
        let saved = std::env::var_os("XDG_CONFIG_HOME");
        std::env::set_var("XDG_CONFIG_HOME", dir.path());
        let path = user_config_path();
        let no_user_file = layered(None);
        std::fs::create_dir_all(dir.path().join("brink")).unwrap();
        std::fs::write(
            dir.path().join("brink/config.toml"),
            "[scan]\nevery = \"2s\"\njson = true\n",
        )
        .unwrap();
        let explicit = dir.path().join("over.toml");
        std::fs::write(&explicit, "[scan]\nevery = \"250ms\"\n").unwrap();
        let user_only = layered(None);
        let both = layered(Some(&explicit));
        match saved {
            Some(v) => std::env::set_var("XDG_CONFIG_HOME", v),
            None => std::env::remove_var("XDG_CONFIG_HOME"),
        }
        assert_eq!(path, Some(dir.path().join("brink").join("config.toml")));
        assert_eq!(no_user_file.unwrap(), ConfigFile::default());
        let user_only = user_only.unwrap();
        assert_eq!(user_only.scan.every, Some(Duration::from_secs(2)));
        assert_eq!(user_only.scan.json, Some(true));
        let both = both.unwrap();
        assert_eq!(both.scan.every, Some(Duration::from_millis(250)));
        assert_eq!(both.scan.json, Some(true));
    }

    #[test]
    fn layered_with_missing_explicit_file_names_it() {
        let missing = Path::new("/nonexistent/brink-test/nope.toml");
        match layered(Some(missing)) {
            Err(e @ ConfigError::NotFound { .. }) => {
                assert_eq!(
                    e.to_string(),
                    "/nonexistent/brink-test/nope.toml: no such configuration file"
                );
            }
            other => panic!("{other:?}"),
        }
    }

    #[test]
    fn layered_user_file_missing_is_fine_broken_is_not() {
        let dir = tempfile::tempdir().unwrap();
        let user = dir.path().join("config.toml");
        assert_eq!(
            layered_from(Some(&user), None).unwrap(),
            ConfigFile::default()
        );
        std::fs::write(&user, "[scan]\nevry = \"1s\"\n").unwrap();
        let e = layered_from(Some(&user), None).unwrap_err().to_string();
        assert!(e.contains(":2:1: unknown field `evry`"), "{e}");
        // A folder where the file should be is an error, not "missing".
        let e = load(dir.path()).unwrap_err();
        assert!(matches!(e, ConfigError::Read { .. }), "{e:?}");
    }
}
