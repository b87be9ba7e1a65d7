//! `LogWriter`: live events into log records, written at once to standard output or a log file;
//! write failures are counted, reported once per episode and followed by a `write-gap` record
//! when writing works again; the totals go into the `stop` record (see the module documentation
//! of `sink::log` for the rules).

use std::borrow::Cow;
use std::fmt;
use std::io::{self, Write};
use std::path::PathBuf;
use std::time::SystemTime;

use super::clock::rfc3339_millis;
use super::csv::{self, CSV_HEADER};
use super::ndjson;
use super::record::{self, LogTotals, Record, LOG_FORMAT};
use super::rotate::{FileSink, Rotation};
use super::{LogError, LogFormat};
use crate::live::engine::LiveEvent;

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

/// A finite number, or `None` (JSON `null`, empty CSV cell).
fn fin(x: f64) -> Option<f64> {
    x.is_finite().then_some(x)
}

fn fin_opt(x: Option<f64>) -> Option<f64> {
    x.and_then(fin)
}

/// The lines of a record, each ending in a newline.
fn render(record: &Record<'_>, format: LogFormat) -> Vec<String> {
    match format {
        LogFormat::Ndjson => vec![ndjson::line(record)],
        LogFormat::Csv => csv::rows(record),
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
            Sink::File(f) => f.path().display().to_string(),
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
            Sink::File(f) => f.take_rotation_error(),
        }
    }

    /// Ask the system to put the file on disk (best effort; devices may refuse).
    fn sync(&mut self) {
        if let Sink::File(f) = self {
            f.sync();
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
                let header = (format == LogFormat::Csv).then_some(CSV_HEADER);
                match FileSink::open(path, rotation, header) {
                    Ok(f) => Sink::File(f),
                    Err((path, source)) => return Err(LogError::Open { path, source }),
                }
            }
        };
        Ok(Self::start(sink, format, &meta, clock, diag))
    }

    /// A writer on any stream (named `name` in reports), treated like standard output.
    #[cfg(test)]
    pub(crate) fn open_stream(
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
        w.emit(|time| {
            Record::Start(record::Start {
                time,
                format: Cow::Borrowed(LOG_FORMAT),
                host: Cow::Borrowed(&meta.host),
                device: Cow::Borrowed(&meta.device),
                sample_rate_hz: meta.sample_rate_hz,
                channels: Cow::Borrowed(&meta.channels),
            })
        });
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
                self.emit(|time| {
                    Record::Summary(record::Summary {
                        time,
                        t_s: fin(*t_s),
                        channels: Cow::Borrowed(channels),
                    })
                });
            }
            // Screens' fare: a log has its summaries.
            LiveEvent::ClipStarted { .. } | LiveEvent::Meters { .. } | LiveEvent::Tone { .. } => {}
            LiveEvent::Clip { channel, event } => {
                self.totals.clip_events += 1;
                self.emit(|time| {
                    Record::Clip(record::Clip {
                        time,
                        t_s: fin(event.start_s),
                        channel: *channel,
                        clip: event.kind,
                        level_dbfs: fin_opt(event.level_dbfs),
                        samples: event.samples,
                        end_s: fin(event.end_s),
                        runs: event.runs,
                    })
                });
            }
            LiveEvent::Onset(o) => self.emit(|time| {
                Record::Onset(record::Onset {
                    time,
                    t_s: fin(o.t_s),
                    channel: o.channel,
                    thd_pct: fin(o.thd_pct),
                    fundamental_dbfs: fin_opt(o.fundamental_dbfs),
                })
            }),
            LiveEvent::Gap { t_s, frames } => {
                self.totals.dropped_frames += frames;
                self.emit(|time| {
                    Record::Dropped(record::Dropped {
                        time,
                        t_s: fin(*t_s),
                        frames: *frames,
                    })
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
        self.emit(|time| {
            Record::InputLost(record::InputLost {
                time,
                t_s: fin(t_s),
                reason: Cow::Borrowed(reason),
            })
        });
    }

    /// The input is back at stream time `t_s`.
    pub fn input_restored(&mut self, t_s: f64) {
        if self.stopped {
            return;
        }
        self.emit(|time| {
            Record::InputRestored(record::InputRestored {
                time,
                t_s: fin(t_s),
            })
        });
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
        self.emit(|time| {
            Record::Stop(record::Stop {
                time,
                t_s: fin(t_s),
                totals,
            })
        });
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

    /// Make the record (`make` is given its time, read from the clock only when the log is still
    /// open) and write it, after a `write-gap` record if records were lost.
    fn emit<'e>(&mut self, make: impl FnOnce(Cow<'e, str>) -> Record<'e>) {
        if self.closed {
            return;
        }
        let rec = make(Cow::Owned(rfc3339_millis((self.clock)())));
        let time = rec.time();
        let gap_lost = self.lost;
        if gap_lost > 0 {
            let since = self.lost_since.clone().unwrap_or_default();
            let gap = Record::WriteGap(record::WriteGap {
                time: Cow::Borrowed(time),
                lost_records: gap_lost,
                since: Cow::Owned(since),
            });
            if let Err(e) = self.sink.write_lines(&render(&gap, self.format)) {
                self.failed(e, time);
                return;
            }
            self.lost = 0;
            self.lost_since = None;
        }
        let mut lines = render(&rec, self.format);
        if self.stream_header {
            lines.insert(0, CSV_HEADER.to_string());
        }
        match self.sink.write_lines(&lines) {
            Ok(()) => {
                self.stream_header = false;
                self.written(gap_lost);
            }
            Err(e) => self.failed(e, time),
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
    use std::fs;
    use std::path::Path;

    use crate::sink::log::testkit::*;
    use crate::sink::log::CSV_COLUMNS;

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
