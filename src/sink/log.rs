//! The writer behind `brink log`: headless logging of live events for hours, as NDJSON (one
//! self-describing object per line, format [`LOG_FORMAT`]) or CSV (one header line, the fixed
//! columns of [`CSV_COLUMNS`]), to standard output or to a file with optional size rotation.
//!
//! Records: `start` first, then `summary` every interval and `clip`, `onset`, `dropped`,
//! `input-lost` and `input-restored` as they happen, `stop` last. Every line is written and flushed
//! as soon as its record is made; nothing waits in a buffer.
//!
//! Write failures (disk full, directory removed, permission lost) never panic and never stop the
//! caller: the first failure of an episode is reported on the diagnostics stream (stderr), the
//! records that could not be written are counted, every later record retries (a file target is
//! reopened; a missing directory is not created), and once writing works again a `write-gap`
//! record with the number of lost records comes first. On standard output a broken pipe means the
//! reader has gone: [`LogWriter::is_closed`] turns true so the caller can stop cleanly.

use std::fmt;
use std::fs::{self, File, OpenOptions};
use std::io::{self, Read, Seek, SeekFrom, Write};
use std::path::{Path, PathBuf};
use std::str::FromStr;
use std::time::{SystemTime, UNIX_EPOCH};

use serde::Serialize;

use crate::analysis::report::ClipEvent;
use crate::analysis::IntervalReading;
use crate::live::engine::{LiveEvent, Onset};

/// Format tag carried by the `start` record.
pub const LOG_FORMAT: &str = "brink-log-1";

/// The CSV columns, in order. A summary becomes one row per channel; `start`, `stop`,
/// `input-lost`, `write-gap` and the extras of `clip` (`end_s`, `runs`) and `onset`
/// (`fundamental_dbfs`) go into `detail` as `key=value` pairs separated by `;`. Null readings are
/// empty cells. Harmonic levels (`harmonics_dbc`) are not in CSV: use NDJSON for them.
pub const CSV_COLUMNS: [&str; 18] = [
    "kind",
    "time",
    "t_s",
    "channel",
    "sample_peak_dbfs",
    "true_peak_dbtp",
    "rms_dbfs",
    "overs",
    "flat_tops",
    "fundamental_hz",
    "thd_pct",
    "thd_n_db",
    "odd_even_db",
    "clip",
    "level_dbfs",
    "samples",
    "frames",
    "detail",
];

/// The CSV header line ([`CSV_COLUMNS`] joined), newline included.
const CSV_HEADER: &str = "kind,time,t_s,channel,sample_peak_dbfs,true_peak_dbtp,rms_dbfs,overs,\
flat_tops,fundamental_hz,thd_pct,thd_n_db,odd_even_db,clip,level_dbfs,samples,frames,detail\n";

const C_KIND: usize = 0;
const C_TIME: usize = 1;
const C_T_S: usize = 2;
const C_CHANNEL: usize = 3;
const C_SAMPLE_PEAK: usize = 4;
const C_TRUE_PEAK: usize = 5;
const C_RMS: usize = 6;
const C_OVERS: usize = 7;
const C_FLAT_TOPS: usize = 8;
const C_FUNDAMENTAL_HZ: usize = 9;
const C_THD_PCT: usize = 10;
const C_THD_N_DB: usize = 11;
const C_ODD_EVEN_DB: usize = 12;
const C_CLIP: usize = 13;
const C_LEVEL_DBFS: usize = 14;
const C_SAMPLES: usize = 15;
const C_FRAMES: usize = 16;
const C_DETAIL: usize = 17;

/// Errors that keep a log from starting. Failures after the start are not errors: see
/// [`LogWriter::had_write_error`].
#[derive(Debug, thiserror::Error)]
pub enum LogError {
    /// The format name is neither `ndjson` nor `csv`.
    #[error("unknown log format {0:?} (expected \"ndjson\" or \"csv\")")]
    UnknownFormat(String),
    /// A rotation size of 0 bytes.
    #[error("the rotation size must be at least 1 byte")]
    ZeroRotationSize,
    /// The log file could not be opened (or created) at the start.
    #[error("cannot open {}: {source}", path.display())]
    Open {
        /// The file.
        path: PathBuf,
        /// Why.
        #[source]
        source: io::Error,
    },
}

/// Line format of a log.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum LogFormat {
    /// One JSON object per line, every line self-describing.
    Ndjson,
    /// A header line, then rows of [`CSV_COLUMNS`] (RFC 4180 quoting).
    Csv,
}

impl FromStr for LogFormat {
    type Err = LogError;

    fn from_str(s: &str) -> Result<Self, Self::Err> {
        match s {
            "ndjson" => Ok(LogFormat::Ndjson),
            "csv" => Ok(LogFormat::Csv),
            other => Err(LogError::UnknownFormat(other.to_string())),
        }
    }
}

impl fmt::Display for LogFormat {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(match self {
            LogFormat::Ndjson => "ndjson",
            LogFormat::Csv => "csv",
        })
    }
}

/// What the `start` record says about the input.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct LogMeta {
    /// Audio host (e.g. "alsa").
    pub host: String,
    /// Input device name.
    pub device: String,
    /// Sample rate (Hz).
    pub sample_rate_hz: u32,
    /// Channels measured, numbered from 1.
    pub channels: Vec<usize>,
}

/// Size rotation of a log file.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Rotation {
    /// A line that would take the file past this size (bytes) goes to a fresh file instead (a
    /// file always takes at least one line, however long).
    pub max_bytes: u64,
    /// Rotated files kept: `FILE.1` (newest) .. `FILE.keep` (oldest); 0 keeps none.
    pub keep: usize,
}

/// Where a log goes.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum Target {
    /// Standard output.
    Stdout,
    /// A file, appended to if it exists. Rotation applies only when it is a regular file.
    File {
        /// The file.
        path: PathBuf,
        /// Size rotation, if any.
        rotation: Option<Rotation>,
    },
}

/// Counts carried by the `stop` record (`totals`).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Serialize)]
pub struct LogTotals {
    /// Summary events received.
    pub summaries: u64,
    /// Clip episodes received.
    pub clip_events: u64,
    /// Frames lost by the input: the capture side's own count once
    /// [`LogWriter::set_input_counts`] has given it, else the sum of the gaps received.
    pub dropped_frames: u64,
    /// Input overruns, as given to [`LogWriter::stop`].
    pub xruns: u64,
    /// Times the input was lost.
    pub input_losses: u64,
    /// Records that could not be written.
    pub lost_records: u64,
    /// Frames the input delivered (set with [`LogWriter::set_input_counts`]).
    pub frames_delivered: u64,
    /// Frames analysed; with `dropped_frames` these add up to `frames_delivered`.
    pub frames_analysed: u64,
    /// Results (summaries, clip events, gaps…) the analysis published while this writer was
    /// too slow to take them, so they are missing from the log.
    pub results_missed: u64,
}

/// Format `t` as RFC 3339 UTC with milliseconds, e.g. `2026-12-02T07:12:03.123Z` (rounded down
/// to the millisecond).
pub fn rfc3339_millis(t: SystemTime) -> String {
    // Milliseconds since the epoch, rounded down (before 1970 too: 1 ns before the epoch is
    // 23:59:59.999 of the day before).
    let ms: i128 = match t.duration_since(UNIX_EPOCH) {
        Ok(d) => (d.as_nanos() / 1_000_000) as i128,
        Err(e) => (-(e.duration().as_nanos() as i128)).div_euclid(1_000_000),
    };
    let days = ms.div_euclid(86_400_000) as i64;
    let in_day = ms.rem_euclid(86_400_000) as i64;
    let (y, m, d) = civil_from_days(days);
    let (hh, mm, ss, milli) = (
        in_day / 3_600_000,
        in_day / 60_000 % 60,
        in_day / 1000 % 60,
        in_day % 1000,
    );
    format!("{y:04}-{m:02}-{d:02}T{hh:02}:{mm:02}:{ss:02}.{milli:03}Z")
}

/// Proleptic Gregorian (year, month, day) of a day count from 1970-01-01.
///
/// Howard Hinnant's `civil_from_days`, from "chrono-Compatible Low-Level Date Algorithms"
/// (<https://howardhinnant.github.io/date_algorithms.html#civil_from_days>): shift the epoch to
/// 0000-03-01 so leap days end each year, split into 400-year eras of 146097 days, then find the
/// year of the era, the day of the year and the month from March (153 days per 5 months).
fn civil_from_days(days: i64) -> (i64, u32, u32) {
    let z = days + 719_468;
    let era = if z >= 0 { z } else { z - 146_096 } / 146_097;
    let doe = z - era * 146_097; // [0, 146096]
    let yoe = (doe - doe / 1460 + doe / 36_524 - doe / 146_096) / 365; // [0, 399]
    let doy = doe - (365 * yoe + yoe / 4 - yoe / 100); // [0, 365]
    let mp = (5 * doy + 2) / 153; // [0, 11], March = 0
    let d = doy - (153 * mp + 2) / 5 + 1; // [1, 31]
    let m = if mp < 10 { mp + 3 } else { mp - 9 }; // [1, 12]
    let y = yoe + era * 400 + i64::from(m <= 2);
    (y, m as u32, d as u32)
}

/// A finite number, or `None` (JSON `null`, empty CSV cell).
fn fin(x: f64) -> Option<f64> {
    x.is_finite().then_some(x)
}

fn fin_opt(x: Option<f64>) -> Option<f64> {
    x.and_then(fin)
}

/// A CSV number cell: empty when null or not finite.
fn cell_num(x: Option<f64>) -> String {
    fin_opt(x).map(|v| v.to_string()).unwrap_or_default()
}

/// One CSV cell, quoted per RFC 4180 when it holds a comma, quote or line break. Line breaks
/// and other control characters become spaces first, so a row is always one line.
fn csv_cell(s: &str) -> String {
    let clean: String = s
        .chars()
        .map(|c| if c.is_control() { ' ' } else { c })
        .collect();
    if clean.contains([',', '"']) {
        format!("\"{}\"", clean.replace('"', "\"\""))
    } else {
        clean
    }
}

/// One CSV row under construction.
struct Row([String; 18]);

impl Row {
    fn new(kind: &str, time: &str) -> Row {
        let mut row = Row(Default::default());
        row.0[C_KIND] = kind.to_string();
        row.0[C_TIME] = time.to_string();
        row
    }

    fn set(mut self, col: usize, value: impl Into<String>) -> Row {
        self.0[col] = value.into();
        self
    }

    fn line(&self) -> String {
        let mut s = self
            .0
            .iter()
            .map(|c| csv_cell(c))
            .collect::<Vec<_>>()
            .join(",");
        s.push('\n');
        s
    }
}

/// An NDJSON line: kind and time first, then the body's keys.
#[derive(Serialize)]
struct JsonLine<'a, B: Serialize> {
    kind: &'a str,
    time: &'a str,
    #[serde(flatten)]
    body: B,
}

#[derive(Serialize)]
struct StartBody<'a> {
    format: &'a str,
    host: &'a str,
    device: &'a str,
    sample_rate_hz: u32,
    channels: &'a [usize],
}

#[derive(Serialize)]
struct SummaryBody<'a> {
    t_s: Option<f64>,
    channels: &'a [IntervalReading],
}

#[derive(Serialize)]
struct ClipBody {
    t_s: Option<f64>,
    channel: usize,
    clip: &'static str,
    level_dbfs: Option<f64>,
    samples: u64,
    end_s: Option<f64>,
    runs: u64,
}

#[derive(Serialize)]
struct OnsetBody {
    t_s: Option<f64>,
    channel: usize,
    thd_pct: Option<f64>,
    fundamental_dbfs: Option<f64>,
}

#[derive(Serialize)]
struct InputLostBody<'a> {
    t_s: Option<f64>,
    reason: &'a str,
}

#[derive(Serialize)]
struct TimeBody {
    t_s: Option<f64>,
}

#[derive(Serialize)]
struct DroppedBody {
    t_s: Option<f64>,
    frames: u64,
}

#[derive(Serialize)]
struct StopBody {
    t_s: Option<f64>,
    totals: LogTotals,
}

#[derive(Serialize)]
struct WriteGapBody<'a> {
    lost_records: u64,
    /// Time of the first record lost.
    since: &'a str,
}

fn json_line<B: Serialize>(kind: &str, time: &str, body: B) -> String {
    let mut s = serde_json::to_string(&JsonLine { kind, time, body }).unwrap_or_else(|e| {
        // Not expected (every body is plain data); keep the line valid JSON all the same.
        serde_json::json!({"kind": "internal-error", "time": time, "detail": e.to_string()})
            .to_string()
    });
    s.push('\n');
    s
}

/// A record to write.
enum Record<'a> {
    Start(&'a LogMeta),
    Summary {
        t_s: f64,
        channels: &'a [IntervalReading],
    },
    Clip {
        channel: usize,
        event: &'a ClipEvent,
    },
    Onset(&'a Onset),
    InputLost {
        t_s: f64,
        reason: &'a str,
    },
    InputRestored {
        t_s: f64,
    },
    Dropped {
        t_s: f64,
        frames: u64,
    },
    Stop {
        t_s: f64,
        totals: LogTotals,
    },
    WriteGap {
        lost: u64,
        since: &'a str,
    },
}

impl Record<'_> {
    /// The lines of this record, each ending in a newline.
    fn render(&self, format: LogFormat, time: &str) -> Vec<String> {
        match format {
            LogFormat::Ndjson => vec![self.ndjson(time)],
            LogFormat::Csv => self.csv(time),
        }
    }

    fn ndjson(&self, time: &str) -> String {
        match *self {
            Record::Start(meta) => json_line(
                "start",
                time,
                StartBody {
                    format: LOG_FORMAT,
                    host: &meta.host,
                    device: &meta.device,
                    sample_rate_hz: meta.sample_rate_hz,
                    channels: &meta.channels,
                },
            ),
            Record::Summary { t_s, channels } => json_line(
                "summary",
                time,
                SummaryBody {
                    t_s: fin(t_s),
                    channels,
                },
            ),
            Record::Clip { channel, event } => json_line(
                "clip",
                time,
                ClipBody {
                    t_s: fin(event.start_s),
                    channel,
                    clip: event.kind.as_str(),
                    level_dbfs: fin_opt(event.level_dbfs),
                    samples: event.samples,
                    end_s: fin(event.end_s),
                    runs: event.runs,
                },
            ),
            Record::Onset(o) => json_line(
                "onset",
                time,
                OnsetBody {
                    t_s: fin(o.t_s),
                    channel: o.channel,
                    thd_pct: fin(o.thd_pct),
                    fundamental_dbfs: fin_opt(o.fundamental_dbfs),
                },
            ),
            Record::InputLost { t_s, reason } => json_line(
                "input-lost",
                time,
                InputLostBody {
                    t_s: fin(t_s),
                    reason,
                },
            ),
            Record::InputRestored { t_s } => {
                json_line("input-restored", time, TimeBody { t_s: fin(t_s) })
            }
            Record::Dropped { t_s, frames } => json_line(
                "dropped",
                time,
                DroppedBody {
                    t_s: fin(t_s),
                    frames,
                },
            ),
            Record::Stop { t_s, totals } => json_line(
                "stop",
                time,
                StopBody {
                    t_s: fin(t_s),
                    totals,
                },
            ),
            Record::WriteGap { lost, since } => json_line(
                "write-gap",
                time,
                WriteGapBody {
                    lost_records: lost,
                    since,
                },
            ),
        }
    }

    fn csv(&self, time: &str) -> Vec<String> {
        let row = match *self {
            Record::Start(meta) => {
                let channels = meta
                    .channels
                    .iter()
                    .map(|c| c.to_string())
                    .collect::<Vec<_>>()
                    .join(",");
                Row::new("start", time).set(
                    C_DETAIL,
                    format!(
                        "format={LOG_FORMAT};host={};device={};rate={};channels={channels}",
                        meta.host, meta.device, meta.sample_rate_hz
                    ),
                )
            }
            Record::Summary { t_s, channels } => {
                return channels
                    .iter()
                    .map(|c| {
                        Row::new("summary", time)
                            .set(C_T_S, cell_num(Some(t_s)))
                            .set(C_CHANNEL, c.channel.to_string())
                            .set(C_SAMPLE_PEAK, cell_num(c.sample_peak_dbfs))
                            .set(C_TRUE_PEAK, cell_num(c.true_peak_dbtp))
                            .set(C_RMS, cell_num(c.rms_dbfs))
                            .set(C_OVERS, c.overs.to_string())
                            .set(C_FLAT_TOPS, c.flat_tops.to_string())
                            .set(C_FUNDAMENTAL_HZ, cell_num(c.fundamental_hz))
                            .set(C_THD_PCT, cell_num(c.thd_pct))
                            .set(C_THD_N_DB, cell_num(c.thd_n_db))
                            .set(C_ODD_EVEN_DB, cell_num(c.odd_even_db))
                            .line()
                    })
                    .collect();
            }
            Record::Clip { channel, event } => Row::new("clip", time)
                .set(C_T_S, cell_num(Some(event.start_s)))
                .set(C_CHANNEL, channel.to_string())
                .set(C_CLIP, event.kind.as_str())
                .set(C_LEVEL_DBFS, cell_num(event.level_dbfs))
                .set(C_SAMPLES, event.samples.to_string())
                .set(
                    C_DETAIL,
                    format!("end_s={};runs={}", cell_num(Some(event.end_s)), event.runs),
                ),
            Record::Onset(o) => Row::new("onset", time)
                .set(C_T_S, cell_num(Some(o.t_s)))
                .set(C_CHANNEL, o.channel.to_string())
                .set(C_THD_PCT, cell_num(Some(o.thd_pct)))
                .set(
                    C_DETAIL,
                    format!("fundamental_dbfs={}", cell_num(o.fundamental_dbfs)),
                ),
            Record::InputLost { t_s, reason } => Row::new("input-lost", time)
                .set(C_T_S, cell_num(Some(t_s)))
                .set(C_DETAIL, format!("reason={reason}")),
            Record::InputRestored { t_s } => {
                Row::new("input-restored", time).set(C_T_S, cell_num(Some(t_s)))
            }
            Record::Dropped { t_s, frames } => Row::new("dropped", time)
                .set(C_T_S, cell_num(Some(t_s)))
                .set(C_FRAMES, frames.to_string()),
            Record::Stop { t_s, totals } => {
                Row::new("stop", time).set(C_T_S, cell_num(Some(t_s))).set(
                    C_DETAIL,
                    format!(
                        "summaries={};clip_events={};dropped_frames={};xruns={};\
                         input_losses={};lost_records={};frames_delivered={};frames_analysed={};\
                         results_missed={}",
                        totals.summaries,
                        totals.clip_events,
                        totals.dropped_frames,
                        totals.xruns,
                        totals.input_losses,
                        totals.lost_records,
                        totals.frames_delivered,
                        totals.frames_analysed,
                        totals.results_missed
                    ),
                )
            }
            Record::WriteGap { lost, since } => Row::new("write-gap", time)
                .set(C_DETAIL, format!("lost_records={lost};since={since}")),
        };
        vec![row.line()]
    }
}

/// `path` with `.k` appended to its file name.
fn numbered(path: &Path, k: usize) -> PathBuf {
    let mut s = path.as_os_str().to_owned();
    s.push(format!(".{k}"));
    PathBuf::from(s)
}

/// Identity of a file, to notice that its path now names another file (or none).
#[cfg(unix)]
fn file_id(m: &fs::Metadata) -> Option<(u64, u64)> {
    use std::os::unix::fs::MetadataExt;
    Some((m.dev(), m.ino()))
}

#[cfg(not(unix))]
fn file_id(_: &fs::Metadata) -> Option<(u64, u64)> {
    None
}

fn ends_with_newline(path: &Path) -> io::Result<bool> {
    let mut f = File::open(path)?;
    f.seek(SeekFrom::End(-1))?;
    let mut b = [0u8; 1];
    f.read_exact(&mut b)?;
    Ok(b[0] == b'\n')
}

/// A log file: reopened after failures or when its path comes to name another file, rotated by
/// size.
struct FileSink {
    path: PathBuf,
    rotation: Option<Rotation>,
    /// The CSV header, written at the top of every new file.
    header: Option<&'static str>,
    file: Option<File>,
    id: Option<(u64, u64)>,
    /// Bytes in the file (regular files).
    size: u64,
    /// A regular file (rotation and truncation of partial lines apply only to those).
    regular: bool,
    opened_before: bool,
    needs_header: bool,
    /// The file ends in a partial line (an earlier crash): end it before writing.
    needs_newline: bool,
    /// A rotation that failed during the last record (the record went to the current file).
    rotation_error: Option<io::Error>,
}

impl FileSink {
    fn open_handle(&mut self) -> io::Result<()> {
        self.file = None;
        let file = OpenOptions::new()
            .create(true)
            .append(true)
            .open(&self.path)?;
        let m = file.metadata()?;
        self.regular = m.is_file();
        self.size = if self.regular { m.len() } else { 0 };
        self.id = file_id(&m);
        self.needs_header = if self.regular {
            self.size == 0
        } else {
            !self.opened_before
        };
        self.needs_newline =
            self.regular && self.size > 0 && !ends_with_newline(&self.path).unwrap_or(true);
        self.opened_before = true;
        self.file = Some(file);
        Ok(())
    }

    /// Open the file unless the handle held still is the file at the path.
    fn ensure_open(&mut self) -> io::Result<()> {
        if self.file.is_some() {
            let same = match fs::metadata(&self.path) {
                Ok(m) => match (file_id(&m), self.id) {
                    (Some(a), Some(b)) => a == b,
                    _ => true,
                },
                Err(_) => false,
            };
            if same {
                return Ok(());
            }
        }
        self.open_handle()
    }

    fn should_rotate(&self, len: usize) -> bool {
        match self.rotation {
            Some(r) if self.regular => {
                let pending = len as u64 + u64::from(self.needs_newline);
                self.size > 0 && self.size + pending > r.max_bytes
            }
            _ => false,
        }
    }

    /// FILE.(k) → FILE.(k+1) down to FILE → FILE.1 (FILE.keep is replaced), then a new FILE.
    fn rotate(&mut self) -> io::Result<()> {
        let Some(r) = self.rotation else {
            return Ok(());
        };
        // Closed before renaming: some systems refuse to rename open files.
        self.file = None;
        if r.keep == 0 {
            fs::remove_file(&self.path)?;
        } else {
            for k in (1..r.keep).rev() {
                match fs::rename(numbered(&self.path, k), numbered(&self.path, k + 1)) {
                    Ok(()) => {}
                    Err(e) if e.kind() == io::ErrorKind::NotFound => {}
                    Err(e) => return Err(e),
                }
            }
            fs::rename(&self.path, numbered(&self.path, 1))?;
        }
        self.open_handle()
    }

    fn write_raw(&mut self, bytes: &[u8]) -> io::Result<()> {
        let Some(f) = self.file.as_mut() else {
            return Err(io::Error::other("the log file is not open"));
        };
        // One write of a whole line on an unbuffered file: written through at once.
        match f.write_all(bytes) {
            Ok(()) => {
                self.size += bytes.len() as u64;
                Ok(())
            }
            Err(e) => {
                // Take back a partial line so the file holds complete lines only.
                if self.regular {
                    let _ = f.set_len(self.size);
                }
                self.file = None;
                Err(e)
            }
        }
    }

    fn write_line(&mut self, line: &str) -> io::Result<()> {
        self.ensure_open()?;
        if self.should_rotate(line.len()) {
            if let Err(e) = self.rotate() {
                // Better a file past its size than a lost record: write on where we are.
                self.rotation_error = Some(e);
                self.ensure_open()?;
            }
        }
        if self.needs_newline {
            self.write_raw(b"\n")?;
            self.needs_newline = false;
        }
        if self.needs_header {
            if let Some(h) = self.header {
                self.write_raw(h.as_bytes())?;
            }
            self.needs_header = false;
        }
        self.write_raw(line.as_bytes())
    }
}

enum Sink {
    /// Standard output (or, in tests, any stream).
    Stream {
        w: Box<dyn Write + Send>,
        name: String,
    },
    File(FileSink),
}

impl Sink {
    fn name(&self) -> String {
        match self {
            Sink::Stream { name, .. } => name.clone(),
            Sink::File(f) => f.path.display().to_string(),
        }
    }

    fn write_lines(&mut self, lines: &[String]) -> io::Result<()> {
        for line in lines {
            match self {
                Sink::Stream { w, .. } => {
                    w.write_all(line.as_bytes())?;
                    w.flush()?;
                }
                Sink::File(f) => f.write_line(line)?,
            }
        }
        Ok(())
    }

    fn take_rotation_error(&mut self) -> Option<io::Error> {
        match self {
            Sink::Stream { .. } => None,
            Sink::File(f) => f.rotation_error.take(),
        }
    }

    /// Ask the system to put the file on disk (best effort; devices may refuse).
    fn sync(&mut self) {
        if let Sink::File(FileSink {
            file: Some(f),
            regular: true,
            ..
        }) = self
        {
            let _ = f.sync_data();
        }
    }
}

/// The log writer. See the module documentation for the records and the failure rules.
pub struct LogWriter {
    sink: Sink,
    format: LogFormat,
    clock: Box<dyn Fn() -> SystemTime + Send>,
    diag: Box<dyn Write + Send>,
    totals: LogTotals,
    /// Records not written since writing last worked.
    lost: u64,
    /// Time of the first of them.
    lost_since: Option<String>,
    /// In a failure episode (reported once).
    failing: bool,
    had_error: bool,
    closed: bool,
    stopped: bool,
    /// The CSV header is still to go to the stream.
    stream_header: bool,
}

impl fmt::Debug for LogWriter {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.debug_struct("LogWriter")
            .field("target", &self.sink.name())
            .field("format", &self.format)
            .field("totals", &self.totals)
            .field("had_error", &self.had_error)
            .field("closed", &self.closed)
            .finish()
    }
}

impl LogWriter {
    /// Open the target and write the `start` record; diagnostics go to stderr. A file is created
    /// if missing and appended to if present (its directory must exist). Fails only when the file
    /// cannot be opened or the rotation size is 0; a failing first write is a write failure like
    /// any other.
    pub fn open(
        target: Target,
        format: LogFormat,
        meta: LogMeta,
        clock: Box<dyn Fn() -> SystemTime + Send>,
    ) -> Result<LogWriter, LogError> {
        Self::open_with_diagnostics(target, format, meta, clock, Box::new(io::stderr()))
    }

    /// [`LogWriter::open`] with write-failure reports going to `diag` instead of stderr.
    pub fn open_with_diagnostics(
        target: Target,
        format: LogFormat,
        meta: LogMeta,
        clock: Box<dyn Fn() -> SystemTime + Send>,
        diag: Box<dyn Write + Send>,
    ) -> Result<LogWriter, LogError> {
        let sink = match target {
            Target::Stdout => Sink::Stream {
                w: Box::new(io::stdout()),
                name: "standard output".to_string(),
            },
            Target::File { path, rotation } => {
                if rotation.is_some_and(|r| r.max_bytes == 0) {
                    return Err(LogError::ZeroRotationSize);
                }
                let mut f = FileSink {
                    path,
                    rotation,
                    header: (format == LogFormat::Csv).then_some(CSV_HEADER),
                    file: None,
                    id: None,
                    size: 0,
                    regular: false,
                    opened_before: false,
                    needs_header: false,
                    needs_newline: false,
                    rotation_error: None,
                };
                if let Err(source) = f.open_handle() {
                    return Err(LogError::Open {
                        path: f.path,
                        source,
                    });
                }
                Sink::File(f)
            }
        };
        Ok(Self::start(sink, format, &meta, clock, diag))
    }

    /// A writer on any stream (named `name` in reports), treated like standard output.
    #[cfg(test)]
    fn open_stream(
        w: Box<dyn Write + Send>,
        format: LogFormat,
        meta: &LogMeta,
        clock: Box<dyn Fn() -> SystemTime + Send>,
        diag: Box<dyn Write + Send>,
    ) -> LogWriter {
        let sink = Sink::Stream {
            w,
            name: "test stream".to_string(),
        };
        Self::start(sink, format, meta, clock, diag)
    }

    fn start(
        sink: Sink,
        format: LogFormat,
        meta: &LogMeta,
        clock: Box<dyn Fn() -> SystemTime + Send>,
        diag: Box<dyn Write + Send>,
    ) -> LogWriter {
        let is_stream = matches!(sink, Sink::Stream { .. });
        let mut w = LogWriter {
            sink,
            format,
            clock,
            diag,
            totals: LogTotals::default(),
            lost: 0,
            lost_since: None,
            failing: false,
            had_error: false,
            closed: false,
            stopped: false,
            // A stream has no "new file": the CSV header goes once, with the first record.
            stream_header: format == LogFormat::Csv && is_stream,
        };
        w.emit(&Record::Start(meta));
        w
    }

    /// Log a live event: summaries, clip episodes, onsets and gaps (`dropped`).
    /// [`LiveEvent::ClipStarted`] is for screens and is not logged. Nothing is written after
    /// [`LogWriter::stop`].
    pub fn event(&mut self, ev: &LiveEvent) {
        if self.stopped {
            return;
        }
        match ev {
            LiveEvent::Summary { t_s, channels } => {
                self.totals.summaries += 1;
                self.emit(&Record::Summary {
                    t_s: *t_s,
                    channels,
                });
            }
            // Screens' fare: a log has its summaries.
            LiveEvent::ClipStarted { .. } | LiveEvent::Meters { .. } | LiveEvent::Tone { .. } => {}
            LiveEvent::Clip { channel, event } => {
                self.totals.clip_events += 1;
                self.emit(&Record::Clip {
                    channel: *channel,
                    event,
                });
            }
            LiveEvent::Onset(o) => self.emit(&Record::Onset(o)),
            LiveEvent::Gap { t_s, frames } => {
                self.totals.dropped_frames += frames;
                self.emit(&Record::Dropped {
                    t_s: *t_s,
                    frames: *frames,
                });
            }
        }
    }

    /// The input has gone (device unplugged, stream error) at stream time `t_s`.
    pub fn input_lost(&mut self, t_s: f64, reason: &str) {
        if self.stopped {
            return;
        }
        self.totals.input_losses += 1;
        self.emit(&Record::InputLost { t_s, reason });
    }

    /// The input is back at stream time `t_s`.
    pub fn input_restored(&mut self, t_s: f64) {
        if self.stopped {
            return;
        }
        self.emit(&Record::InputRestored { t_s });
    }

    /// Record the input's own accounting for the stop record (delivered = analysed + dropped,
    /// counted where the frames are, so it holds even when gap records went missing), and the
    /// results this writer missed.
    pub fn set_input_counts(&mut self, delivered: u64, analysed: u64, dropped: u64, missed: u64) {
        self.totals.frames_delivered = delivered;
        self.totals.frames_analysed = analysed;
        self.totals.dropped_frames = dropped;
        self.totals.results_missed = missed;
    }

    /// Write the `stop` record with the totals (`xruns` from the capture side). Only the first
    /// call writes; later records are ignored.
    pub fn stop(&mut self, t_s: f64, xruns: u64) {
        if self.stopped {
            return;
        }
        self.stopped = true;
        self.totals.xruns = xruns;
        let totals = self.totals;
        self.emit(&Record::Stop { t_s, totals });
        self.sink.sync();
    }

    /// Whether any write failed (or a rotation could not be made) since the start: for the exit
    /// code.
    pub fn had_write_error(&self) -> bool {
        self.had_error
    }

    /// Whether standard output's reader has gone (broken pipe): nothing more can be written, the
    /// caller may stop. Always false for files.
    pub fn is_closed(&self) -> bool {
        self.closed
    }

    /// Counts so far (`xruns` is set by [`LogWriter::stop`]).
    pub fn totals(&self) -> LogTotals {
        self.totals
    }

    /// The line format.
    pub fn format(&self) -> LogFormat {
        self.format
    }

    fn emit(&mut self, rec: &Record<'_>) {
        if self.closed {
            return;
        }
        let time = rfc3339_millis((self.clock)());
        let gap_lost = self.lost;
        if gap_lost > 0 {
            let since = self.lost_since.clone().unwrap_or_default();
            let gap = Record::WriteGap {
                lost: gap_lost,
                since: &since,
            }
            .render(self.format, &time);
            if let Err(e) = self.sink.write_lines(&gap) {
                self.failed(e, &time);
                return;
            }
            self.lost = 0;
            self.lost_since = None;
        }
        let mut lines = rec.render(self.format, &time);
        if self.stream_header {
            lines.insert(0, CSV_HEADER.to_string());
        }
        match self.sink.write_lines(&lines) {
            Ok(()) => {
                self.stream_header = false;
                self.written(gap_lost);
            }
            Err(e) => self.failed(e, &time),
        }
    }

    /// A record was written (after a `write-gap` record for `gap_lost` records, if any).
    fn written(&mut self, gap_lost: u64) {
        match self.sink.take_rotation_error() {
            Some(e) => {
                self.had_error = true;
                if !self.failing {
                    self.failing = true;
                    let _ = writeln!(
                        self.diag,
                        "brink log: cannot rotate {}: {e}; the file grows past its size \
                             limit until rotation works",
                        self.sink.name()
                    );
                }
            }
            None if self.failing => {
                self.failing = false;
                let _ = if gap_lost > 0 {
                    writeln!(
                        self.diag,
                        "brink log: writing {} again; {gap_lost} record(s) were lost",
                        self.sink.name()
                    )
                } else {
                    writeln!(self.diag, "brink log: writing {} again", self.sink.name())
                };
            }
            None => {}
        }
    }

    /// A record (made at `time`) could not be written.
    fn failed(&mut self, e: io::Error, time: &str) {
        if matches!(self.sink, Sink::Stream { .. }) && e.kind() == io::ErrorKind::BrokenPipe {
            self.closed = true;
            return;
        }
        self.had_error = true;
        self.lost += 1;
        self.totals.lost_records += 1;
        if self.lost_since.is_none() {
            self.lost_since = Some(time.to_string());
        }
        if !self.failing {
            self.failing = true;
            let _ = writeln!(
                self.diag,
                "brink log: cannot write {}: {e}; measurement continues and writing resumes \
                 when possible",
                self.sink.name()
            );
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use std::collections::BTreeMap;
    use std::sync::atomic::{AtomicU64, Ordering};
    use std::sync::{Arc, Mutex};
    use std::time::Duration;

    use serde_json::Value;

    use crate::dsp::clip::ClipKind;

    /// 2026-12-02T07:12:03.123Z in ms since the epoch (`date -u -d 2026-12-02T07:12:03Z +%s`).
    const BASE_MS: u64 = 1_796_195_523_123;

    /// A clock that starts at `BASE_MS` and moves 1 ms per reading.
    fn clock() -> Box<dyn Fn() -> SystemTime + Send> {
        let n = AtomicU64::new(0);
        Box::new(move || {
            UNIX_EPOCH + Duration::from_millis(BASE_MS + n.fetch_add(1, Ordering::SeqCst))
        })
    }

    fn meta() -> LogMeta {
        LogMeta {
            host: "alsa".into(),
            device: "hw:CARD=PCH,DEV=0".into(),
            sample_rate_hz: 48_000,
            channels: vec![1, 2],
        }
    }

    /// A diagnostics (or output) stream whose text the test can read.
    #[derive(Clone, Default)]
    struct Shared(Arc<Mutex<Vec<u8>>>);

    impl Write for Shared {
        fn write(&mut self, buf: &[u8]) -> io::Result<usize> {
            self.0.lock().unwrap().extend_from_slice(buf);
            Ok(buf.len())
        }
        fn flush(&mut self) -> io::Result<()> {
            Ok(())
        }
    }

    impl Shared {
        fn text(&self) -> String {
            String::from_utf8(self.0.lock().unwrap().clone()).unwrap()
        }
    }

    fn open_file(
        path: &Path,
        format: LogFormat,
        rotation: Option<Rotation>,
        diag: &Shared,
    ) -> LogWriter {
        LogWriter::open_with_diagnostics(
            Target::File {
                path: path.to_path_buf(),
                rotation,
            },
            format,
            meta(),
            clock(),
            Box::new(diag.clone()),
        )
        .unwrap()
    }

    fn channel_summary(channel: usize, v: f64) -> IntervalReading {
        let mut harmonics = BTreeMap::new();
        harmonics.insert("2".to_string(), Some(-40.0));
        harmonics.insert("3".to_string(), Some(-52.5));
        IntervalReading {
            channel,
            sample_peak_dbfs: Some(v),
            true_peak_dbtp: Some(v + 0.5),
            rms_dbfs: Some(v - 3.0),
            overs: 2,
            flat_tops: 1,
            fundamental_hz: Some(1000.0),
            fundamental_dbfs: Some(v - 3.0),
            thd_pct: Some(0.25),
            thd_n_db: Some(-50.0),
            odd_even_db: None,
            sinad_db: None,
            falloff_db_per_octave: None,
            harmonics_phase_deg: BTreeMap::new(),
            noise_floor_dbc: None,
            harmonics_dbc: harmonics,
        }
    }

    fn summary(t_s: f64, channels: usize) -> LiveEvent {
        LiveEvent::Summary {
            t_s,
            channels: (1..=channels).map(|c| channel_summary(c, -6.0)).collect(),
        }
    }

    fn clip() -> LiveEvent {
        LiveEvent::Clip {
            channel: 2,
            event: ClipEvent {
                kind: ClipKind::FlatTop,
                start_s: 3.5,
                end_s: 3.75,
                level_dbfs: Some(-0.5),
                runs: 4,
                samples: 120,
            },
        }
    }

    fn onset() -> LiveEvent {
        LiveEvent::Onset(Onset {
            channel: 1,
            t_s: 4.0,
            thd_pct: 1.0,
            fundamental_dbfs: Some(-2.5),
        })
    }

    fn json_lines(text: &str) -> Vec<Value> {
        text.lines()
            .map(|l| serde_json::from_str(l).unwrap_or_else(|e| panic!("{e}: {l}")))
            .collect()
    }

    fn keys(v: &Value) -> Vec<&str> {
        v.as_object().unwrap().keys().map(String::as_str).collect()
    }

    fn assert_has(v: &Value, wanted: &[&str]) {
        let have = keys(v);
        for k in wanted {
            assert!(have.contains(k), "{k} missing from {v}");
        }
    }

    /// Split one CSV line per RFC 4180 (no line breaks inside cells).
    fn split_csv(line: &str) -> Vec<String> {
        let mut cells = vec![String::new()];
        let mut quoted = false;
        let mut chars = line.chars().peekable();
        while let Some(c) = chars.next() {
            match (c, quoted) {
                ('"', false) => quoted = true,
                ('"', true) if chars.peek() == Some(&'"') => {
                    chars.next();
                    cells.last_mut().unwrap().push('"');
                }
                ('"', true) => quoted = false,
                (',', false) => cells.push(String::new()),
                (c, _) => cells.last_mut().unwrap().push(c),
            }
        }
        cells
    }

    #[test]
    fn rfc3339_on_known_instants() {
        let at = |ms: u64| rfc3339_millis(UNIX_EPOCH + Duration::from_millis(ms));
        assert_eq!(at(0), "1970-01-01T00:00:00.000Z");
        // `date -u -d @951827696` = Tue Feb 29 12:34:56 UTC 2000 (a leap day of a /400 year).
        assert_eq!(at(951_827_696_789), "2000-02-29T12:34:56.789Z");
        assert_eq!(at(BASE_MS), "2026-12-02T07:12:03.123Z");
        // 2100 is not a leap year: 2100-03-01 follows 2100-02-28.
        assert_eq!(at(4_107_542_400_000), "2100-03-01T00:00:00.000Z");
        assert_eq!(at(4_107_542_400_000 - 1), "2100-02-28T23:59:59.999Z");
        // Rounded down to the millisecond, also before the epoch.
        assert_eq!(
            rfc3339_millis(UNIX_EPOCH + Duration::from_nanos(1_999_999)),
            "1970-01-01T00:00:00.001Z"
        );
        assert_eq!(
            rfc3339_millis(UNIX_EPOCH - Duration::from_nanos(1)),
            "1969-12-31T23:59:59.999Z"
        );
    }

    #[test]
    fn format_names_parse_and_display() {
        for f in [LogFormat::Ndjson, LogFormat::Csv] {
            assert_eq!(f.to_string().parse::<LogFormat>().unwrap(), f);
        }
        assert_eq!("csv".parse::<LogFormat>().unwrap(), LogFormat::Csv);
        assert!(matches!(
            "json".parse::<LogFormat>(),
            Err(LogError::UnknownFormat(_))
        ));
        assert_eq!(CSV_HEADER, format!("{}\n", CSV_COLUMNS.join(",")));
    }

    #[test]
    fn ndjson_records_carry_the_fixed_keys() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("log.ndjson");
        let diag = Shared::default();
        let mut w = open_file(&path, LogFormat::Ndjson, None, &diag);
        w.event(&summary(1.0, 2));
        w.event(&LiveEvent::ClipStarted {
            channel: 2,
            kind: ClipKind::FlatTop,
            t_s: 3.5,
            level_dbfs: Some(-0.5),
        });
        w.event(&clip());
        w.event(&onset());
        w.event(&LiveEvent::Gap {
            t_s: 5.0,
            frames: 256,
        });
        w.input_lost(6.0, "device unplugged");
        w.input_restored(7.0);
        w.stop(8.0, 3);
        w.event(&summary(9.0, 2)); // after stop: ignored
        assert!(!w.had_write_error());
        assert_eq!(diag.text(), "");

        let text = fs::read_to_string(&path).unwrap();
        for l in text.lines() {
            assert!(l.starts_with("{\"kind\":\""), "kind first: {l}");
        }
        let lines = json_lines(&text);
        let kinds: Vec<&str> = lines.iter().map(|l| l["kind"].as_str().unwrap()).collect();
        assert_eq!(
            kinds,
            [
                "start",
                "summary",
                "clip",
                "onset",
                "dropped",
                "input-lost",
                "input-restored",
                "stop"
            ]
        );
        for l in &lines {
            let time = l["time"].as_str().unwrap();
            assert!(
                time.starts_with("2026-12-02T07:12:03.") && time.ends_with('Z'),
                "{time}"
            );
        }
        let start = &lines[0];
        assert_has(
            start,
            &["format", "host", "device", "sample_rate_hz", "channels"],
        );
        assert_eq!(start["format"], LOG_FORMAT);
        assert_eq!(start["time"], "2026-12-02T07:12:03.123Z");
        assert_eq!(start["device"], "hw:CARD=PCH,DEV=0");
        assert_eq!(start["sample_rate_hz"], 48_000);
        assert_eq!(start["channels"], serde_json::json!([1, 2]));

        let s = &lines[1];
        assert_eq!(s["t_s"], 1.0);
        let chans = s["channels"].as_array().unwrap();
        assert_eq!(chans.len(), 2);
        for c in chans {
            assert_has(
                c,
                &[
                    "channel",
                    "sample_peak_dbfs",
                    "true_peak_dbtp",
                    "rms_dbfs",
                    "overs",
                    "flat_tops",
                    "fundamental_hz",
                    "thd_pct",
                    "thd_n_db",
                    "odd_even_db",
                    "harmonics_dbc",
                ],
            );
            assert!(c["odd_even_db"].is_null());
            assert_eq!(c["harmonics_dbc"]["3"], -52.5);
        }
        assert_eq!(chans[1]["channel"], 2);

        let c = &lines[2];
        assert_has(
            c,
            &[
                "t_s",
                "channel",
                "clip",
                "level_dbfs",
                "samples",
                "end_s",
                "runs",
            ],
        );
        assert_eq!(c["clip"], "flat-top");
        assert_eq!(c["t_s"], 3.5);
        assert_eq!(c["end_s"], 3.75);
        assert_eq!(c["channel"], 2);
        assert_eq!(c["runs"], 4);
        assert_eq!(c["samples"], 120);

        let o = &lines[3];
        assert_has(o, &["t_s", "channel", "thd_pct", "fundamental_dbfs"]);
        assert_eq!(o["fundamental_dbfs"], -2.5);
        assert_eq!(lines[4]["frames"], 256);
        assert_eq!(lines[4]["t_s"], 5.0);
        assert_eq!(lines[5]["reason"], "device unplugged");
        assert_eq!(lines[6]["t_s"], 7.0);

        let stop = &lines[7];
        assert_eq!(stop["t_s"], 8.0);
        let t = &stop["totals"];
        assert_has(t, &["summaries", "clip_events", "dropped_frames", "xruns"]);
        assert_eq!(t["summaries"], 1);
        assert_eq!(t["clip_events"], 1);
        assert_eq!(t["dropped_frames"], 256);
        assert_eq!(t["xruns"], 3);
        assert_eq!(t["input_losses"], 1);
        assert_eq!(t["lost_records"], 0);
    }

    #[test]
    fn ndjson_numbers_are_null_not_nan() {
        let out = Shared::default();
        let mut w = LogWriter::open_stream(
            Box::new(out.clone()),
            LogFormat::Ndjson,
            &meta(),
            clock(),
            Box::new(io::sink()),
        );
        let mut c = channel_summary(1, f64::NAN);
        c.true_peak_dbtp = Some(f64::INFINITY);
        c.harmonics_dbc.insert("4".into(), Some(f64::NEG_INFINITY));
        c.harmonics_dbc.insert("5".into(), None);
        w.event(&LiveEvent::Summary {
            t_s: f64::NAN,
            channels: vec![c],
        });
        w.event(&LiveEvent::Onset(Onset {
            channel: 1,
            t_s: 2.0,
            thd_pct: f64::NAN,
            fundamental_dbfs: Some(f64::NEG_INFINITY),
        }));
        let text = out.text();
        assert!(!text.contains("NaN") && !text.contains("inf"), "{text}");
        let lines = json_lines(&text);
        let s = &lines[1];
        assert!(s["t_s"].is_null());
        let c = &s["channels"][0];
        for k in [
            "sample_peak_dbfs",
            "true_peak_dbtp",
            "rms_dbfs",
            "odd_even_db",
        ] {
            assert!(c[k].is_null(), "{k}: {c}");
        }
        assert!(c["harmonics_dbc"]["4"].is_null());
        assert!(c["harmonics_dbc"]["5"].is_null());
        assert_eq!(c["harmonics_dbc"]["2"], -40.0);
        assert!(lines[2]["thd_pct"].is_null());
        assert!(lines[2]["fundamental_dbfs"].is_null());
    }

    #[test]
    fn csv_has_one_header_and_fixed_rows() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("log.csv");
        let diag = Shared::default();
        let mut w = open_file(&path, LogFormat::Csv, None, &diag);
        let mut s = summary(1.5, 2);
        if let LiveEvent::Summary { channels, .. } = &mut s {
            channels[1].rms_dbfs = Some(f64::NAN);
        }
        w.event(&s);
        w.event(&clip());
        w.event(&onset());
        w.event(&LiveEvent::Gap {
            t_s: 5.0,
            frames: 64,
        });
        w.input_lost(6.0, "stream error: \"POLLERR\"");
        w.input_restored(7.0);
        w.stop(8.0, 0);
        assert!(!w.had_write_error());

        let text = fs::read_to_string(&path).unwrap();
        let lines: Vec<&str> = text.lines().collect();
        assert_eq!(lines[0], CSV_COLUMNS.join(","));
        assert_eq!(text.matches("kind,time").count(), 1);
        let rows: Vec<Vec<String>> = lines[1..].iter().map(|l| split_csv(l)).collect();
        for (r, l) in rows.iter().zip(&lines[1..]) {
            assert_eq!(r.len(), CSV_COLUMNS.len(), "{l}");
        }
        let col = |name: &str| CSV_COLUMNS.iter().position(|c| *c == name).unwrap();
        let kinds: Vec<&str> = rows.iter().map(|r| r[0].as_str()).collect();
        assert_eq!(
            kinds,
            [
                "start",
                "summary",
                "summary",
                "clip",
                "onset",
                "dropped",
                "input-lost",
                "input-restored",
                "stop"
            ]
        );
        // The start detail holds commas: quoted as one cell.
        assert!(
            lines[1].ends_with(
                ",\"format=brink-log-1;host=alsa;device=hw:CARD=PCH,DEV=0;rate=48000;channels=1,2\""
            ),
            "{}",
            lines[1]
        );
        assert_eq!(
            rows[0][col("detail")],
            "format=brink-log-1;host=alsa;device=hw:CARD=PCH,DEV=0;rate=48000;channels=1,2"
        );
        assert_eq!(rows[0][col("time")], "2026-12-02T07:12:03.123Z");
        // One summary row per channel; null and NaN are empty cells.
        assert_eq!(rows[1][col("channel")], "1");
        assert_eq!(rows[2][col("channel")], "2");
        assert_eq!(rows[1][col("t_s")], "1.5");
        assert_eq!(rows[1][col("sample_peak_dbfs")], "-6");
        assert_eq!(rows[1][col("true_peak_dbtp")], "-5.5");
        assert_eq!(rows[1][col("rms_dbfs")], "-9");
        assert_eq!(rows[2][col("rms_dbfs")], "");
        assert_eq!(rows[1][col("odd_even_db")], "");
        assert_eq!(rows[1][col("overs")], "2");
        assert_eq!(rows[1][col("thd_pct")], "0.25");
        assert!(!text.contains("-52.5"), "harmonics are not in CSV");
        let c = &rows[3];
        assert_eq!(c[col("clip")], "flat-top");
        assert_eq!(c[col("t_s")], "3.5");
        assert_eq!(c[col("level_dbfs")], "-0.5");
        assert_eq!(c[col("samples")], "120");
        assert_eq!(c[col("detail")], "end_s=3.75;runs=4");
        assert_eq!(rows[4][col("detail")], "fundamental_dbfs=-2.5");
        assert_eq!(rows[5][col("frames")], "64");
        // A quote inside a cell is doubled.
        assert!(lines[7].ends_with(",\"reason=stream error: \"\"POLLERR\"\"\""));
        assert_eq!(rows[6][col("detail")], "reason=stream error: \"POLLERR\"");
        assert_eq!(
            rows[8][col("detail")],
            "summaries=1;clip_events=1;dropped_frames=64;xruns=0;input_losses=1;lost_records=0;frames_delivered=0;frames_analysed=0;results_missed=0"
        );
    }

    #[test]
    fn csv_on_a_stream_writes_the_header_once() {
        let out = Shared::default();
        let mut w = LogWriter::open_stream(
            Box::new(out.clone()),
            LogFormat::Csv,
            &meta(),
            clock(),
            Box::new(io::sink()),
        );
        w.event(&summary(1.0, 1));
        w.stop(2.0, 0);
        let text = out.text();
        let lines: Vec<&str> = text.lines().collect();
        assert_eq!(lines.len(), 4);
        assert_eq!(lines[0], CSV_COLUMNS.join(","));
        assert!(lines[1].starts_with("start,"));
    }

    /// Rotated files, oldest first, then the live file.
    fn rotated_in_order(path: &Path, keep: usize) -> Vec<PathBuf> {
        let mut files: Vec<PathBuf> = (1..=keep).rev().map(|k| numbered(path, k)).collect();
        files.push(path.to_path_buf());
        files
    }

    #[test]
    fn rotation_keeps_keep_files_of_complete_lines_in_order() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("log.ndjson");
        let diag = Shared::default();
        let rot = Rotation {
            max_bytes: 2000,
            keep: 3,
        };
        let mut w = open_file(&path, LogFormat::Ndjson, Some(rot), &diag);
        let n = 200;
        for i in 0..n {
            w.event(&summary(i as f64, 1));
        }
        w.stop(n as f64, 0);
        assert!(!w.had_write_error(), "{}", diag.text());

        let files = rotated_in_order(&path, 3);
        for f in &files {
            let len = fs::metadata(f).unwrap().len();
            assert!(len > 0 && len <= rot.max_bytes, "{}: {len}", f.display());
        }
        assert!(!numbered(&path, 4).exists());
        assert_eq!(fs::read_dir(dir.path()).unwrap().count(), 4);

        let mut t = Vec::new();
        for f in &files {
            let text = fs::read_to_string(f).unwrap();
            assert!(text.ends_with('\n'));
            for l in json_lines(&text) {
                t.push(l["t_s"].as_f64().unwrap());
            }
        }
        // Oldest records were dropped with the oldest file; the rest are all there, in order.
        assert!(t.len() > 10);
        assert_eq!(*t.last().unwrap(), n as f64);
        for pair in t.windows(2) {
            assert_eq!(pair[1], pair[0] + 1.0, "{t:?}");
        }
    }

    #[test]
    fn csv_rotation_starts_every_file_with_the_header() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("log.csv");
        let diag = Shared::default();
        let rot = Rotation {
            max_bytes: 600,
            keep: 2,
        };
        let mut w = open_file(&path, LogFormat::Csv, Some(rot), &diag);
        for i in 0..50 {
            w.event(&LiveEvent::Gap {
                t_s: i as f64,
                frames: 1,
            });
        }
        let mut t = Vec::new();
        for f in rotated_in_order(&path, 2) {
            let text = fs::read_to_string(&f).unwrap();
            assert!(text.len() as u64 <= rot.max_bytes);
            let mut lines = text.lines();
            assert_eq!(lines.next(), Some(CSV_HEADER.trim_end()));
            for l in lines {
                let cells = split_csv(l);
                assert_eq!(cells[0], "dropped");
                t.push(cells[2].parse::<f64>().unwrap());
            }
        }
        assert!(!numbered(&path, 3).exists());
        assert_eq!(*t.last().unwrap(), 49.0);
        for pair in t.windows(2) {
            assert_eq!(pair[1], pair[0] + 1.0, "{t:?}");
        }
    }

    #[test]
    fn a_line_longer_than_the_limit_gets_a_file_of_its_own() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("log.ndjson");
        let diag = Shared::default();
        let rot = Rotation {
            max_bytes: 10,
            keep: 1,
        };
        let mut w = open_file(&path, LogFormat::Ndjson, Some(rot), &diag);
        w.event(&summary(1.0, 1));
        w.stop(2.0, 0);
        assert_eq!(
            json_lines(&fs::read_to_string(&path).unwrap())[0]["kind"],
            "stop"
        );
        let rotated = json_lines(&fs::read_to_string(numbered(&path, 1)).unwrap());
        assert_eq!(rotated.len(), 1);
        assert_eq!(rotated[0]["kind"], "summary");
    }

    #[test]
    fn keep_zero_keeps_no_rotated_file() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("log.ndjson");
        let diag = Shared::default();
        let rot = Rotation {
            max_bytes: 500,
            keep: 0,
        };
        let mut w = open_file(&path, LogFormat::Ndjson, Some(rot), &diag);
        for i in 0..20 {
            w.input_restored(i as f64);
        }
        assert_eq!(fs::read_dir(dir.path()).unwrap().count(), 1);
        let lines = json_lines(&fs::read_to_string(&path).unwrap());
        assert_eq!(lines.last().unwrap()["t_s"], 19.0);
    }

    #[test]
    fn removed_directory_loses_records_until_it_is_back() {
        let dir = tempfile::tempdir().unwrap();
        let sub = dir.path().join("logs");
        fs::create_dir(&sub).unwrap();
        let path = sub.join("log.ndjson");
        let diag = Shared::default();
        let mut w = open_file(&path, LogFormat::Ndjson, None, &diag);
        w.event(&summary(0.0, 1));
        assert!(!w.had_write_error());

        fs::remove_dir_all(&sub).unwrap();
        for i in 1..=3 {
            w.event(&summary(i as f64, 1));
        }
        w.input_lost(3.5, "test");
        assert!(w.had_write_error());
        assert!(!w.is_closed());
        assert_eq!(w.totals().lost_records, 4);
        let reports = diag.text();
        assert_eq!(reports.matches("cannot write").count(), 1, "{reports}");
        assert!(reports.contains(&format!("brink log: cannot write {}: ", path.display())));
        assert!(reports.contains("measurement continues and writing resumes when possible"));

        fs::create_dir(&sub).unwrap();
        w.event(&summary(5.0, 1));
        w.event(&summary(6.0, 1));
        w.stop(7.0, 0);
        assert!(w.had_write_error());
        assert!(diag.text().contains("again; 4 record(s) were lost"));

        let lines = json_lines(&fs::read_to_string(&path).unwrap());
        let kinds: Vec<&str> = lines.iter().map(|l| l["kind"].as_str().unwrap()).collect();
        assert_eq!(kinds, ["write-gap", "summary", "summary", "stop"]);
        assert_eq!(lines[0]["lost_records"], 4);
        assert!(lines[0]["time"].is_string());
        assert_eq!(lines[1]["t_s"], 5.0);
        assert_eq!(lines[2]["t_s"], 6.0);
        assert_eq!(lines[3]["totals"]["lost_records"], 4);
        assert_eq!(lines[3]["totals"]["summaries"], 6);
    }

    #[test]
    fn each_failure_episode_is_reported_once() {
        let dir = tempfile::tempdir().unwrap();
        let sub = dir.path().join("logs");
        fs::create_dir(&sub).unwrap();
        let path = sub.join("log.csv");
        let diag = Shared::default();
        let mut w = open_file(&path, LogFormat::Csv, None, &diag);
        for round in 0..2 {
            fs::remove_dir_all(&sub).unwrap();
            w.input_restored(round as f64);
            w.input_restored(round as f64 + 0.5);
            fs::create_dir(&sub).unwrap();
            w.input_restored(round as f64 + 0.75);
        }
        let reports = diag.text();
        assert_eq!(reports.matches("cannot write").count(), 2, "{reports}");
        // The recreated file is a new CSV file: header first, then the gap.
        let text = fs::read_to_string(&path).unwrap();
        let lines: Vec<&str> = text.lines().collect();
        assert_eq!(lines[0], CSV_COLUMNS.join(","));
        let gap = split_csv(lines[1]);
        assert_eq!(gap[0], "write-gap");
        assert!(gap[17].starts_with("lost_records=2;since=2026-"), "{gap:?}");
        assert_eq!(split_csv(lines[2])[2], "1.75");
    }

    #[test]
    fn a_full_device_is_a_write_error_not_a_panic() {
        let full = Path::new("/dev/full");
        if !full.exists() {
            return;
        }
        let diag = Shared::default();
        let mut w = open_file(full, LogFormat::Ndjson, None, &diag);
        assert!(w.had_write_error());
        w.event(&summary(1.0, 2));
        w.event(&clip());
        w.stop(2.0, 0);
        assert!(w.had_write_error());
        assert!(!w.is_closed());
        assert_eq!(w.totals().lost_records, 3 + 1);
        let reports = diag.text();
        assert_eq!(
            reports.matches("cannot write /dev/full").count(),
            1,
            "{reports}"
        );
    }

    #[test]
    fn missing_directory_at_the_start_is_an_open_error() {
        let dir = tempfile::tempdir().unwrap();
        let r = LogWriter::open(
            Target::File {
                path: dir.path().join("nowhere/log.ndjson"),
                rotation: None,
            },
            LogFormat::Ndjson,
            meta(),
            clock(),
        );
        assert!(matches!(r, Err(LogError::Open { .. })));
        let r = LogWriter::open(
            Target::File {
                path: dir.path().join("log.ndjson"),
                rotation: Some(Rotation {
                    max_bytes: 0,
                    keep: 1,
                }),
            },
            LogFormat::Ndjson,
            meta(),
            clock(),
        );
        assert!(matches!(r, Err(LogError::ZeroRotationSize)));
    }

    #[test]
    fn an_existing_file_is_appended_to_after_its_partial_line() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("log.ndjson");
        fs::write(&path, "{\"kind\":\"stop\"}\n{\"kind\":\"summ").unwrap();
        let diag = Shared::default();
        let mut w = open_file(&path, LogFormat::Ndjson, None, &diag);
        w.stop(1.0, 0);
        let text = fs::read_to_string(&path).unwrap();
        let lines: Vec<&str> = text.lines().collect();
        assert_eq!(lines.len(), 4);
        assert_eq!(lines[1], "{\"kind\":\"summ");
        assert!(lines[2].starts_with("{\"kind\":\"start\""));
        assert!(lines[3].starts_with("{\"kind\":\"stop\""));
    }

    #[test]
    fn a_replaced_file_is_followed_to_its_path() {
        // logrotate-style: the file is moved away; the next record starts a new one at the path.
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("log.ndjson");
        let diag = Shared::default();
        let mut w = open_file(&path, LogFormat::Ndjson, None, &diag);
        fs::rename(&path, dir.path().join("old.ndjson")).unwrap();
        w.input_restored(1.0);
        assert!(!w.had_write_error());
        let lines = json_lines(&fs::read_to_string(&path).unwrap());
        assert_eq!(lines.len(), 1);
        assert_eq!(lines[0]["kind"], "input-restored");
    }

    /// A stream whose reader has gone.
    struct BrokenPipe;

    impl Write for BrokenPipe {
        fn write(&mut self, _: &[u8]) -> io::Result<usize> {
            Err(io::ErrorKind::BrokenPipe.into())
        }
        fn flush(&mut self) -> io::Result<()> {
            Ok(())
        }
    }

    #[test]
    fn a_broken_pipe_closes_the_log_quietly() {
        let diag = Shared::default();
        let mut w = LogWriter::open_stream(
            Box::new(BrokenPipe),
            LogFormat::Ndjson,
            &meta(),
            clock(),
            Box::new(diag.clone()),
        );
        assert!(w.is_closed());
        w.event(&summary(1.0, 1));
        w.stop(2.0, 0);
        assert!(w.is_closed());
        assert!(!w.had_write_error());
        assert_eq!(diag.text(), "");
    }
}
