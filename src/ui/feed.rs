//! What feeds the dashboard: a live session (its analysis thread's findings and supervision) or
//! a headless log another brink process is writing (`--follow`). Each runs on its own thread and
//! sends [`Update`]s; the screen thread only draws.

use std::collections::BTreeMap;
use std::fs::File;
use std::io::{BufRead, BufReader, Seek, SeekFrom};
use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::Arc;
use std::thread::JoinHandle;
use std::time::{Duration, Instant};

use crossbeam_channel::Sender;
use serde::Deserialize;

use super::model::{harmonic_report, Update};
use crate::analysis::report::{ClipEvent, DistortionReport};
use crate::dsp::clip::ClipKind;
use crate::live::engine::{LiveEvent, Onset};
use crate::live::run::Totals;
use crate::live::session::{Notice, Session, SourceMeta, Step};

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

/// A record of a brink-log-1 file, as much as the dashboard reads.
#[derive(Debug, Deserialize)]
struct Record {
    kind: String,
    #[serde(default)]
    format: Option<String>,
    #[serde(default)]
    host: Option<String>,
    #[serde(default)]
    device: Option<String>,
    #[serde(default)]
    sample_rate_hz: Option<u32>,
    #[serde(default)]
    channels: Option<serde_json::Value>,
    #[serde(default)]
    t_s: Option<f64>,
    #[serde(default)]
    channel: Option<usize>,
    #[serde(default)]
    clip: Option<String>,
    #[serde(default)]
    level_dbfs: Option<f64>,
    #[serde(default)]
    samples: Option<u64>,
    #[serde(default)]
    end_s: Option<f64>,
    #[serde(default)]
    runs: Option<u64>,
    #[serde(default)]
    thd_pct: Option<f64>,
    #[serde(default)]
    fundamental_dbfs: Option<f64>,
    #[serde(default)]
    frames: Option<u64>,
    #[serde(default)]
    reason: Option<String>,
}

/// One channel of a summary record.
#[derive(Debug, Deserialize)]
struct SummaryChannel {
    channel: usize,
    sample_peak_dbfs: Option<f64>,
    true_peak_dbtp: Option<f64>,
    #[serde(default)]
    overs: u64,
    #[serde(default)]
    flat_tops: u64,
    fundamental_hz: Option<f64>,
    fundamental_dbfs: Option<f64>,
    thd_pct: Option<f64>,
    thd_n_db: Option<f64>,
    odd_even_db: Option<f64>,
    #[serde(default)]
    sinad_db: Option<f64>,
    #[serde(default)]
    falloff_db_per_octave: Option<f64>,
    #[serde(default)]
    harmonics_dbc: BTreeMap<String, Option<f64>>,
    #[serde(default)]
    harmonics_phase_deg: BTreeMap<String, f64>,
    #[serde(default)]
    noise_floor_dbc: Option<f64>,
}

impl SummaryChannel {
    fn distortion(&self, t_s: f64) -> Option<DistortionReport> {
        let f0 = self.fundamental_hz?;
        let mut harmonics: Vec<_> = self
            .harmonics_dbc
            .iter()
            .filter_map(|(k, v)| {
                let order: usize = k.parse().ok()?;
                let phase = self.harmonics_phase_deg.get(k).copied().unwrap_or(0.0);
                Some(harmonic_report(order, f0, *v, phase, self.noise_floor_dbc))
            })
            .collect();
        harmonics.sort_by_key(|h| h.order);
        Some(DistortionReport {
            fundamental_hz: f0,
            fundamental_dbfs: self.fundamental_dbfs,
            thd_pct: self.thd_pct,
            thd_db: self
                .thd_pct
                .filter(|t| *t > 0.0)
                .map(|t| 20.0 * (t / 100.0).log10()),
            thd_n_db: self.thd_n_db,
            thd_n_pct: self.thd_n_db.map_or(0.0, |d| 100.0 * 10f64.powf(d / 20.0)),
            sinad_db: self.sinad_db,
            enob_bits: None,
            odd_even_db: self.odd_even_db,
            falloff_db_per_octave: self.falloff_db_per_octave,
            noise_floor_dbc: self.noise_floor_dbc,
            span_start_s: t_s,
            span_end_s: t_s,
            harmonics,
        })
    }
}

/// The updates a log line makes (none for lines it does not know).
pub fn from_log_line(line: &str) -> Vec<Update> {
    let Ok(r) = serde_json::from_str::<Record>(line) else {
        return Vec::new();
    };
    let t_s = r.t_s.unwrap_or(0.0);
    match r.kind.as_str() {
        "summary" => {
            let chans: Vec<SummaryChannel> = r
                .channels
                .and_then(|v| serde_json::from_value(v).ok())
                .unwrap_or_default();
            let mut out = Vec::new();
            for c in chans {
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
                    distortion: c.distortion(t_s),
                });
            }
            out
        }
        "clip" => {
            let kind = match r.clip.as_deref() {
                Some("over") => ClipKind::Over,
                Some("flat-top") => ClipKind::FlatTop,
                _ => return Vec::new(),
            };
            let Some(channel) = r.channel else {
                return Vec::new();
            };
            vec![Update::Clip {
                channel,
                event: ClipEvent {
                    kind,
                    start_s: t_s,
                    end_s: r.end_s.unwrap_or(t_s),
                    level_dbfs: r.level_dbfs,
                    runs: r.runs.unwrap_or(1),
                    samples: r.samples.unwrap_or(0),
                },
            }]
        }
        "onset" => match r.channel {
            Some(channel) => vec![Update::Onset(Onset {
                channel,
                t_s,
                thd_pct: r.thd_pct.unwrap_or(0.0),
                fundamental_dbfs: r.fundamental_dbfs,
            })],
            None => Vec::new(),
        },
        "dropped" => vec![Update::Gap {
            frames: r.frames.unwrap_or(0),
        }],
        "input-lost" => vec![Update::InputLost(
            r.reason.unwrap_or_else(|| "no reason given".into()),
        )],
        "input-restored" => vec![Update::InputRestored],
        "stop" => vec![Update::Ended("the logger stopped".into())],
        _ => Vec::new(),
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
    let r: Record =
        serde_json::from_str(line).map_err(|e| format!("not a brink log (first line: {e})"))?;
    if r.kind != "start" || r.format.as_deref() != Some("brink-log-1") {
        return Err("not a brink-log-1 log: its first line is not a start record".into());
    }
    let channels: Vec<usize> = r
        .channels
        .and_then(|v| serde_json::from_value(v).ok())
        .ok_or("the start record lists no channels")?;
    Ok(SourceMeta {
        host: r.host.unwrap_or_default(),
        device: r.device.unwrap_or_default(),
        sample_rate_hz: r.sample_rate_hz.unwrap_or(0),
        channels,
    })
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
}
