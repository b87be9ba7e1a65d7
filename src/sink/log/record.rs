//! The records of the `brink-log-1` format ([`LOG_FORMAT`]): one type per record kind, the one
//! definition of its keys, written by `brink log` ([`super::LogWriter`]) and read back by the
//! dashboard's `--follow`.
//!
//! A record is one NDJSON line `{"kind": ..., "time": ..., ...the record's own keys}` (see
//! [`super::ndjson`]) or one or more CSV rows (`csv.rs`, written only). Readings with no meaning
//! (not finite) are `None`, JSON `null`. Text and lists are [`Cow`]s: the writer lends what it
//! already holds (a summary's channel readings are not copied), the reader owns what it reads.
//!
//! Reading forgives a missing `time`, `totals`, start detail (`format`, `host`, `device`,
//! `sample_rate_hz`, `channels`), clip `samples` (0) or `runs` (1) or dropped `frames` (0): each
//! reads as that default; a missing reading (an `Option`) reads as `None`. Every other key is
//! needed, and every writer writes every key.

use std::borrow::Cow;

use serde::{Deserialize, Serialize};

use crate::dsp::clip::ClipKind;

/// One channel's readings over a summary interval, as a `summary` record carries them: the
/// interval reading every mode's analyser gives, written and read as it is.
pub use crate::analysis::IntervalReading;

/// Format tag carried by the `start` record.
pub const LOG_FORMAT: &str = "brink-log-1";

/// A record of the log, tagged by `kind` (first in a line).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(tag = "kind", rename_all = "kebab-case")]
pub enum Record<'a> {
    /// `start`: the first record, what is measured.
    Start(Start<'a>),
    /// `summary`: readings over the last interval, every channel.
    Summary(Summary<'a>),
    /// `clip`: one clipping episode, once it has ended.
    Clip(Clip<'a>),
    /// `onset`: THD passed the onset threshold for the first time.
    Onset(Onset<'a>),
    /// `input-lost`: the input has gone.
    InputLost(InputLost<'a>),
    /// `input-restored`: the input is back.
    InputRestored(InputRestored<'a>),
    /// `dropped`: frames the input lost.
    Dropped(Dropped<'a>),
    /// `write-gap`: records that could not be written, first after writing works again.
    WriteGap(WriteGap<'a>),
    /// `stop`: the last record, with the totals.
    Stop(Stop<'a>),
}

impl Record<'_> {
    /// The `kind` of the record, as in the line.
    pub fn kind(&self) -> &'static str {
        match self {
            Record::Start(_) => "start",
            Record::Summary(_) => "summary",
            Record::Clip(_) => "clip",
            Record::Onset(_) => "onset",
            Record::InputLost(_) => "input-lost",
            Record::InputRestored(_) => "input-restored",
            Record::Dropped(_) => "dropped",
            Record::WriteGap(_) => "write-gap",
            Record::Stop(_) => "stop",
        }
    }

    /// When the record was made (RFC 3339 UTC with milliseconds, see [`super::rfc3339_millis`]).
    pub fn time(&self) -> &str {
        match self {
            Record::Start(r) => &r.time,
            Record::Summary(r) => &r.time,
            Record::Clip(r) => &r.time,
            Record::Onset(r) => &r.time,
            Record::InputLost(r) => &r.time,
            Record::InputRestored(r) => &r.time,
            Record::Dropped(r) => &r.time,
            Record::WriteGap(r) => &r.time,
            Record::Stop(r) => &r.time,
        }
    }
}

/// `start`: the format and what is measured.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Start<'a> {
    /// When the record was made.
    #[serde(default)]
    pub time: Cow<'a, str>,
    /// [`LOG_FORMAT`].
    #[serde(default)]
    pub format: Cow<'a, str>,
    /// Audio host (e.g. "alsa").
    #[serde(default)]
    pub host: Cow<'a, str>,
    /// Input device name.
    #[serde(default)]
    pub device: Cow<'a, str>,
    /// Sample rate (Hz).
    #[serde(default)]
    pub sample_rate_hz: u32,
    /// Channels measured, numbered from 1.
    #[serde(default)]
    pub channels: Cow<'a, [usize]>,
}

/// `summary`: readings over the interval ending at `t_s`, one entry per channel.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Summary<'a> {
    /// When the record was made.
    #[serde(default)]
    pub time: Cow<'a, str>,
    /// End of the interval in stream time (s).
    pub t_s: Option<f64>,
    /// Per channel.
    pub channels: Cow<'a, [IntervalReading]>,
}

/// `clip`: one clipping episode.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Clip<'a> {
    /// When the record was made.
    #[serde(default)]
    pub time: Cow<'a, str>,
    /// Start of the episode in stream time (s).
    pub t_s: Option<f64>,
    /// Channel number, from 1.
    pub channel: usize,
    /// Over or flat top (`over`, `flat-top`).
    pub clip: ClipKind,
    /// Run level (dBFS).
    pub level_dbfs: Option<f64>,
    /// Clipped samples in the episode.
    #[serde(default)]
    pub samples: u64,
    /// End of the episode (s).
    pub end_s: Option<f64>,
    /// Runs merged into the episode.
    #[serde(default = "one")]
    pub runs: u64,
}

fn one() -> u64 {
    1
}

/// `onset`: the first crossing of the onset threshold on a channel.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Onset<'a> {
    /// When the record was made.
    #[serde(default)]
    pub time: Cow<'a, str>,
    /// Stream time of the analysis that crossed (s).
    pub t_s: Option<f64>,
    /// Channel number, from 1.
    pub channel: usize,
    /// The threshold (%).
    pub thd_pct: Option<f64>,
    /// Fundamental level at the crossing (dBFS).
    pub fundamental_dbfs: Option<f64>,
}

/// `input-lost`: the input has gone (device unplugged, stream error).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct InputLost<'a> {
    /// When the record was made.
    #[serde(default)]
    pub time: Cow<'a, str>,
    /// Stream time (s).
    pub t_s: Option<f64>,
    /// Why, in words.
    pub reason: Cow<'a, str>,
}

/// `input-restored`: the input is back.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct InputRestored<'a> {
    /// When the record was made.
    #[serde(default)]
    pub time: Cow<'a, str>,
    /// Stream time (s).
    pub t_s: Option<f64>,
}

/// `dropped`: a gap in the input.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Dropped<'a> {
    /// When the record was made.
    #[serde(default)]
    pub time: Cow<'a, str>,
    /// Stream time of the gap (s).
    pub t_s: Option<f64>,
    /// Frames lost.
    #[serde(default)]
    pub frames: u64,
}

/// `write-gap`: records lost to write failures (no stream time: the records are gone).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct WriteGap<'a> {
    /// When the record was made.
    #[serde(default)]
    pub time: Cow<'a, str>,
    /// Records that could not be written.
    pub lost_records: u64,
    /// Time of the first record lost.
    pub since: Cow<'a, str>,
}

/// `stop`: the end of the log.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Stop<'a> {
    /// When the record was made.
    #[serde(default)]
    pub time: Cow<'a, str>,
    /// Stream time (s).
    pub t_s: Option<f64>,
    /// Counts over the whole log.
    #[serde(default)]
    pub totals: LogTotals,
}

/// Counts carried by the `stop` record (`totals`).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Serialize, Deserialize)]
pub struct LogTotals {
    /// Summary events received.
    pub summaries: u64,
    /// Clip episodes received.
    pub clip_events: u64,
    /// Frames lost by the input: the capture side's own count once
    /// [`super::LogWriter::set_input_counts`] has given it, else the sum of the gaps received.
    pub dropped_frames: u64,
    /// Input overruns, as given to [`super::LogWriter::stop`].
    pub xruns: u64,
    /// Times the input was lost.
    pub input_losses: u64,
    /// Records that could not be written.
    pub lost_records: u64,
    /// Frames the input delivered (set with [`super::LogWriter::set_input_counts`]).
    pub frames_delivered: u64,
    /// Frames analysed; with `dropped_frames` these add up to `frames_delivered`.
    pub frames_analysed: u64,
    /// Results (summaries, clip events, gaps…) the analysis published while this writer was
    /// too slow to take them, so they are missing from the log.
    pub results_missed: u64,
}
