//! What feeds the dashboard: a live session (its analysis thread's findings and supervision) or
//! a headless log another brink process is writing (`--follow`). Each runs on its own thread and
//! sends [`Update`]s; the screen thread only draws.

use std::fs::File;
use std::io::{BufRead, BufReader, Seek, SeekFrom};
use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::Arc;
use std::thread::JoinHandle;
use std::time::{Duration, Instant};

use crossbeam_channel::Sender;

use super::model::{harmonic_report, resolved_by_default, Update};
use crate::analysis::report::{ClipEvent, DistortionReport};
use crate::live::engine::{LiveEvent, Onset};
use crate::live::run::Totals;
use crate::live::session::{Notice, Session, SourceMeta, Step};
use crate::sink::log::ndjson::{self, ReadError};
use crate::sink::log::record::{IntervalReading, Record};
use crate::sink::log::LOG_FORMAT;

/// The update a live finding makes (`None` for what the screen does not use).
pub fn from_live(ev: LiveEvent) -> Option<Update> {
    Some(match ev {
        LiveEvent::Meters { t_s, channels } => Update::Meters { t_s, channels },
        LiveEvent::Tone {
            channel,
            t_s,
            report,
        } => Update::Tone {
            t_s,
            channel,
            distortion: report.map(|r| *r),
        },
        LiveEvent::ClipStarted {
            channel,
            kind,
            t_s,
            level_dbfs,
        } => Update::ClipStarted {
            channel,
            kind,
            t_s,
            level_dbfs,
            count: true,
        },
        LiveEvent::Clip { channel, event } => Update::Clip { channel, event },
        LiveEvent::Onset(o) => Update::Onset(o),
        LiveEvent::Gap { frames, .. } => Update::Gap { frames },
        LiveEvent::Summary { .. } => return None,
    })
}

/// Run a live session's feed on a thread: findings become updates, the input is supervised,
/// and counters go out twice a second. When `stop` is raised the session is stopped and
/// drained; the thread ends with the totals and a source error, if any.
pub fn spawn_live(
    mut session: Session,
    tx: Sender<Update>,
    stop: Arc<AtomicBool>,
) -> std::io::Result<JoinHandle<(Totals, Option<String>)>> {
    std::thread::Builder::new()
        .name("brink-feed".into())
        .spawn(move || {
            let mut last_health = Instant::now();
            let end = session.drive(&stop, |session, step| {
                let update = match step {
                    Step::Event(ev) => from_live(ev),
                    Step::Notice(Notice::Lost(r)) => Some(Update::InputLost(r)),
                    Step::Notice(Notice::Restored) => Some(Update::InputRestored),
                    Step::Notice(Notice::Trouble(_)) | Step::Idle => None,
                };
                // An unbounded hand-over: the screen thread drains it every wake.
                if let Some(u) = update {
                    let _ = tx.send(u);
                }
                if last_health.elapsed() >= Duration::from_millis(500) {
                    last_health = Instant::now();
                    let _ = tx.send(Update::Health {
                        xruns: session.xruns(),
                        load: Some(session.analysis.load()),
                    });
                }
                true
            });
            let stopping = stop.load(Ordering::Relaxed);
            let (totals, err) = session.finish(end);
            let why = match &err {
                Some(e) => format!("read error: {e}"),
                None if stopping => "stopped".to_string(),
                None => "the source ended".to_string(),
            };
            let _ = tx.send(Update::Ended(why));
            (totals, err)
        })
}

/// The dashboard's reading of one channel of a `summary` record.
fn distortion(c: &IntervalReading, t_s: f64) -> Option<DistortionReport> {
    let f0 = c.fundamental_hz?;
    let mut harmonics: Vec<_> = c
        .harmonics_dbc
        .iter()
        .filter_map(|(k, v)| {
            let order: usize = k.parse().ok()?;
            let phase = c.harmonics_phase_deg.get(k).copied().unwrap_or(0.0);
            // The analysis's own judgement, with the logger's settings; a log written before
            // summaries carried it is judged with the default margin.
            let resolved = c
                .harmonics_resolved
                .get(k)
                .copied()
                .unwrap_or_else(|| resolved_by_default(*v, c.noise_floor_dbc));
            Some(harmonic_report(order, f0, *v, phase, resolved))
        })
        .collect();
    harmonics.sort_by_key(|h| h.order);
    Some(DistortionReport {
        fundamental_hz: f0,
        fundamental_dbfs: c.fundamental_dbfs,
        thd_pct: c.thd_pct,
        thd_db: c
            .thd_pct
            .filter(|t| *t > 0.0)
            .map(|t| 20.0 * (t / 100.0).log10()),
        thd_n_db: c.thd_n_db,
        thd_n_pct: c.thd_n_db.map_or(0.0, |d| 100.0 * 10f64.powf(d / 20.0)),
        sinad_db: c.sinad_db,
        enob_bits: None,
        odd_even_db: c.odd_even_db,
        falloff_db_per_octave: c.falloff_db_per_octave,
        noise_floor_dbc: c.noise_floor_dbc,
        span_start_s: t_s,
        span_end_s: t_s,
        harmonics,
    })
}

/// The updates a log line makes (none for lines it does not know). The line is read as the
/// log's own [`Record`] type, the one `brink log` writes.
pub fn from_log_line(line: &str) -> Vec<Update> {
    let Ok(record) = ndjson::read(line) else {
        return Vec::new();
    };
    match record {
        Record::Summary(s) => {
            let t_s = s.t_s.unwrap_or(0.0);
            let mut out = Vec::new();
            for c in s.channels.iter() {
                out.push(Update::Levels {
                    t_s,
                    channel: c.channel,
                    sample_peak_dbfs: c.sample_peak_dbfs,
                    true_peak_dbtp: c.true_peak_dbtp,
                    overs: c.overs,
                    flat_tops: c.flat_tops,
                });
                out.push(Update::Tone {
                    t_s,
                    channel: c.channel,
                    distortion: distortion(c, t_s),
                });
            }
            out
        }
        Record::Clip(c) => {
            let t_s = c.t_s.unwrap_or(0.0);
            vec![Update::Clip {
                channel: c.channel,
                event: ClipEvent {
                    kind: c.clip,
                    start_s: t_s,
                    end_s: c.end_s.unwrap_or(t_s),
                    level_dbfs: c.level_dbfs,
                    runs: c.runs,
                    samples: c.samples,
                },
            }]
        }
        Record::Onset(o) => vec![Update::Onset(Onset {
            channel: o.channel,
            t_s: o.t_s.unwrap_or(0.0),
            thd_pct: o.thd_pct.unwrap_or(0.0),
            fundamental_dbfs: o.fundamental_dbfs,
        })],
        Record::Dropped(d) => vec![Update::Gap { frames: d.frames }],
        Record::InputLost(l) => vec![Update::InputLost(l.reason.into_owned())],
        Record::InputRestored(_) => vec![Update::InputRestored],
        Record::Stop(_) => vec![Update::Ended("the logger stopped".into())],
        Record::Start(_) | Record::WriteGap(_) => Vec::new(),
    }
}

/// The start record of a followed log, read before the screen opens. Waits up to `wait` for a
/// file that is being created.
pub fn read_log_start(path: &Path, wait: Duration) -> Result<SourceMeta, String> {
    let shown = path.display();
    let deadline = Instant::now() + wait;
    loop {
        match File::open(path) {
            Ok(f) => {
                let mut first = String::new();
                BufReader::new(f)
                    .read_line(&mut first)
                    .map_err(|e| format!("{shown}: {e}"))?;
                if first.ends_with('\n') {
                    return parse_start(&first).map_err(|e| format!("{shown}: {e}"));
                }
            }
            Err(e) if Instant::now() >= deadline => return Err(format!("{shown}: {e}")),
            Err(_) => {}
        }
        if Instant::now() >= deadline {
            return Err(format!("{shown}: no start record yet"));
        }
        std::thread::sleep(Duration::from_millis(100));
    }
}

fn parse_start(line: &str) -> Result<SourceMeta, String> {
    if line.trim_start().starts_with("time,") || line.contains(",kind,") {
        return Err("a CSV log: --follow reads NDJSON logs (brink log's default format)".into());
    }
    let not_start = || "not a brink-log-1 log: its first line is not a start record".to_string();
    match ndjson::read(line) {
        Ok(Record::Start(s)) if s.format == LOG_FORMAT => {
            if s.channels.is_empty() {
                return Err("the start record lists no channels".into());
            }
            Ok(SourceMeta {
                host: s.host.into_owned(),
                device: s.device.into_owned(),
                sample_rate_hz: s.sample_rate_hz,
                channels: s.channels.into_owned(),
            })
        }
        Ok(_) => Err(not_start()),
        Err(ReadError::Record { kind, .. }) if kind != "start" => Err(not_start()),
        Err(e) => Err(format!("not a brink log (first line: {e})")),
    }
}

/// Follow a log as it grows (like `tail -f`), from its start: every complete line becomes
/// updates. A file that shrinks (rotated or rewritten) is read again from its start.
pub fn spawn_follow(
    path: PathBuf,
    tx: Sender<Update>,
    stop: Arc<AtomicBool>,
) -> std::io::Result<JoinHandle<()>> {
    std::thread::Builder::new()
        .name("brink-follow".into())
        .spawn(move || {
            let mut pos: u64 = 0;
            let mut partial = String::new();
            while !stop.load(Ordering::Relaxed) {
                let len = std::fs::metadata(&path).map(|m| m.len()).unwrap_or(0);
                if len < pos {
                    pos = 0;
                    partial.clear();
                }
                if len > pos {
                    if let Ok(mut f) = File::open(&path) {
                        if f.seek(SeekFrom::Start(pos)).is_ok() {
                            let mut r = BufReader::new(f);
                            let mut line = String::new();
                            while let Ok(n) = r.read_line(&mut line) {
                                if n == 0 {
                                    break;
                                }
                                pos += n as u64;
                                if line.ends_with('\n') {
                                    partial.push_str(&line);
                                    for u in from_log_line(partial.trim_end()) {
                                        let _ = tx.send(u);
                                    }
                                    partial.clear();
                                } else {
                                    // The writer is mid-line: keep it for the next turn.
                                    partial.push_str(&line);
                                }
                                line.clear();
                            }
                        }
                    }
                }
                std::thread::sleep(Duration::from_millis(100));
            }
        })
}

#[cfg(test)]
mod tests {
    use super::*;
    use std::borrow::Cow;

    use crate::dsp::clip::ClipKind;
    use crate::sink::log::record::{self, LogTotals};
    use crate::sink::log::testkit::{channel_summary, clip, clock, meta, onset, summary, Shared};
    use crate::sink::log::{LogFormat, LogWriter};

    #[test]
    fn log_lines_become_updates() {
        let start = r#"{"kind":"start","format":"brink-log-1","time":"2026-12-02T10:00:00.000Z","host":"alsa","device":"hw:1","sample_rate_hz":48000,"channels":[1,2]}"#;
        let m = parse_start(&format!("{start}\n")).expect("start");
        assert_eq!(m.channels, vec![1, 2]);
        assert_eq!(m.sample_rate_hz, 48_000);
        let summary = r#"{"kind":"summary","time":"x","t_s":2.0,"channels":[{"channel":1,"sample_peak_dbfs":-6.0,"true_peak_dbtp":-5.9,"rms_dbfs":-9.0,"overs":0,"flat_tops":3,"fundamental_hz":220.0,"fundamental_dbfs":-7.0,"thd_pct":12.0,"thd_n_db":-18.0,"odd_even_db":-40.0,"sinad_db":18.0,"falloff_db_per_octave":-7.0,"harmonics_dbc":{"2":-80.0,"3":-20.0},"harmonics_phase_deg":{"2":10.0,"3":180.0},"noise_floor_dbc":-100.0}]}"#;
        let u = from_log_line(summary);
        assert_eq!(u.len(), 2);
        match &u[1] {
            Update::Tone {
                distortion: Some(d),
                ..
            } => {
                assert_eq!(d.harmonics.len(), 2);
                assert_eq!(d.harmonics[1].order, 3);
                assert_eq!(d.harmonics[1].phase_deg, 180.0);
                assert!(d.harmonics[1].resolved);
                assert!((d.thd_db.expect("db") - 20.0 * 0.12f64.log10()).abs() < 1e-9);
            }
            other => panic!("{other:?}"),
        }
        let clip = r#"{"kind":"clip","time":"x","t_s":1.5,"channel":2,"clip":"flat-top","level_dbfs":-4.0,"samples":90,"end_s":1.6,"runs":3}"#;
        match &from_log_line(clip)[0] {
            Update::Clip { channel: 2, event } => {
                assert_eq!(event.kind, ClipKind::FlatTop);
                assert_eq!(event.samples, 90);
            }
            other => panic!("{other:?}"),
        }
        assert!(from_log_line("not json").is_empty());
        assert!(matches!(
            from_log_line(r#"{"kind":"stop","t_s":3.0}"#)[0],
            Update::Ended(_)
        ));
        assert!(parse_start("time,kind,t_s\n").is_err());
    }

    /// A harmonic is marked resolved as the logger's analysis judged it (with the logger's
    /// resolve margin), not by a margin the reader assumes; a log without the judgement falls
    /// back to the default margin of 10 dB.
    #[test]
    fn a_followed_summary_keeps_the_analysis_judgement_of_each_harmonic() {
        let line = |resolved: &str| {
            format!(
                r#"{{"kind":"summary","time":"x","t_s":2.0,"channels":[{{"channel":1,"sample_peak_dbfs":-6.0,"true_peak_dbtp":-5.9,"rms_dbfs":-9.0,"overs":0,"flat_tops":0,"fundamental_hz":220.0,"fundamental_dbfs":-7.0,"thd_pct":1.0,"thd_n_db":-40.0,"harmonics_dbc":{{"2":-95.0,"3":-40.0}},"noise_floor_dbc":-100.0{resolved}}}]}}"#
            )
        };
        let flags = |text: &str| -> Vec<bool> {
            match from_log_line(text).pop() {
                Some(Update::Tone {
                    distortion: Some(d),
                    ..
                }) => d.harmonics.iter().map(|h| h.resolved).collect(),
                other => panic!("{other:?}"),
            }
        };
        // Judged by an analysis with a 3 dB margin: H2 (5 dB above the floor) resolved.
        assert_eq!(
            flags(&line(r#","harmonics_resolved":{"2":true,"3":true}"#)),
            vec![true, true]
        );
        // No judgement in the log: the default 10 dB margin leaves H2 unresolved.
        assert_eq!(flags(&line("")), vec![false, true]);
    }

    /// An output stream that fails (not a broken pipe) while `fail` is set.
    struct Flaky {
        out: Shared,
        fail: Arc<AtomicBool>,
    }

    impl std::io::Write for Flaky {
        fn write(&mut self, buf: &[u8]) -> std::io::Result<usize> {
            if self.fail.load(Ordering::SeqCst) {
                return Err(std::io::Error::other("test: the device is full"));
            }
            self.out.write(buf)
        }
        fn flush(&mut self) -> std::io::Result<()> {
            Ok(())
        }
    }

    #[test]
    fn every_record_kind_written_by_log_writer_is_read_back_by_the_follow_reader() {
        let out = Shared::default();
        let fail = Arc::new(AtomicBool::new(false));
        let stream = Flaky {
            out: out.clone(),
            fail: Arc::clone(&fail),
        };
        let mut w = LogWriter::open_stream(
            Box::new(stream),
            LogFormat::Ndjson,
            &meta(),
            clock(),
            Box::new(std::io::sink()),
        );
        w.event(&summary(1.0, 2));
        w.event(&clip());
        w.event(&onset());
        w.event(&LiveEvent::Gap {
            t_s: 5.0,
            frames: 256,
        });
        w.input_lost(6.0, "device unplugged");
        fail.store(true, Ordering::SeqCst);
        w.input_restored(6.5); // lost: comes back as a write-gap
        fail.store(false, Ordering::SeqCst);
        w.input_restored(7.0);
        w.stop(8.0, 3);

        // The clock moves 1 ms per record made, from 07:12:03.123.
        let at = |ms: u32| Cow::Owned(format!("2026-12-02T07:12:03.{ms}Z"));
        let expected = vec![
            Record::Start(record::Start {
                time: at(123),
                format: LOG_FORMAT.into(),
                host: "alsa".into(),
                device: "hw:CARD=PCH,DEV=0".into(),
                sample_rate_hz: 48_000,
                channels: vec![1, 2].into(),
            }),
            Record::Summary(record::Summary {
                time: at(124),
                t_s: Some(1.0),
                channels: vec![channel_summary(1, -6.0), channel_summary(2, -6.0)].into(),
            }),
            Record::Clip(record::Clip {
                time: at(125),
                t_s: Some(3.5),
                channel: 2,
                clip: ClipKind::FlatTop,
                level_dbfs: Some(-0.5),
                samples: 120,
                end_s: Some(3.75),
                runs: 4,
            }),
            Record::Onset(record::Onset {
                time: at(126),
                t_s: Some(4.0),
                channel: 1,
                thd_pct: Some(1.0),
                fundamental_dbfs: Some(-2.5),
            }),
            Record::Dropped(record::Dropped {
                time: at(127),
                t_s: Some(5.0),
                frames: 256,
            }),
            Record::InputLost(record::InputLost {
                time: at(128),
                t_s: Some(6.0),
                reason: "device unplugged".into(),
            }),
            Record::WriteGap(record::WriteGap {
                time: at(130),
                lost_records: 1,
                since: at(129),
            }),
            Record::InputRestored(record::InputRestored {
                time: at(130),
                t_s: Some(7.0),
            }),
            Record::Stop(record::Stop {
                time: at(131),
                t_s: Some(8.0),
                totals: LogTotals {
                    summaries: 1,
                    clip_events: 1,
                    dropped_frames: 256,
                    xruns: 3,
                    input_losses: 1,
                    lost_records: 1,
                    ..LogTotals::default()
                },
            }),
        ];
        let text = out.text();
        let read: Vec<Record<'static>> = text
            .lines()
            .map(|l| ndjson::read(l).unwrap_or_else(|e| panic!("{e}: {l}")))
            .collect();
        assert_eq!(read, expected);

        // And the follow reader's own decoding of those lines.
        let lines: Vec<&str> = text.lines().collect();
        let m = parse_start(&format!("{}\n", lines[0])).expect("start");
        assert_eq!(m.host, "alsa");
        assert_eq!(m.device, "hw:CARD=PCH,DEV=0");
        assert_eq!(m.sample_rate_hz, 48_000);
        assert_eq!(m.channels, vec![1, 2]);
        let updates: Vec<usize> = lines.iter().map(|l| from_log_line(l).len()).collect();
        // start, 2 channels × (levels, tone), clip, onset, gap, lost, write-gap, restored, ended.
        assert_eq!(updates, [0, 4, 1, 1, 1, 1, 0, 1, 1]);
    }

    #[test]
    fn a_first_line_that_is_not_a_brink_log_1_start_is_refused_with_its_reason() {
        let not_start = "not a brink-log-1 log: its first line is not a start record";
        let summary = r#"{"kind":"summary","time":"x","t_s":1.0,"channels":[]}"#;
        assert_eq!(parse_start(summary).unwrap_err(), not_start);
        let other = r#"{"kind":"start","format":"brink-log-2","channels":[1]}"#;
        assert_eq!(parse_start(other).unwrap_err(), not_start);
        let unknown = r#"{"kind":"hello","time":"x"}"#;
        assert_eq!(parse_start(unknown).unwrap_err(), not_start);
        let no_channels = r#"{"kind":"start","format":"brink-log-1","host":"alsa"}"#;
        assert_eq!(
            parse_start(no_channels).unwrap_err(),
            "the start record lists no channels"
        );
        for line in ["hello", r#"{"time":"x"}"#] {
            let e = parse_start(line).unwrap_err();
            assert!(e.starts_with("not a brink log (first line: "), "{e}");
        }
    }
}
