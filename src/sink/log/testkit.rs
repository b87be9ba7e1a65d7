//! Test helpers shared by the log's tests: a stepping clock, the test input, streams whose text
//! a test reads, sample events and small readers of NDJSON and CSV text.

use std::collections::BTreeMap;
use std::io::{self, Write};
use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicU64, Ordering};
use std::sync::{Arc, Mutex};
use std::time::{Duration, SystemTime, UNIX_EPOCH};

use serde_json::Value;

use super::record::IntervalReading;
use super::rotate::numbered;
use super::{LogFormat, LogMeta, LogWriter, Rotation, Target};
use crate::analysis::report::ClipEvent;
use crate::dsp::clip::ClipKind;
use crate::live::engine::{LiveEvent, Onset};

/// 2026-12-02T07:12:03.123Z in ms since the epoch (`date -u -d 2026-12-02T07:12:03Z +%s`).
pub(crate) const BASE_MS: u64 = 1_796_195_523_123;

/// A clock that starts at `BASE_MS` and moves 1 ms per reading.
pub(crate) fn clock() -> Box<dyn Fn() -> SystemTime + Send> {
    let n = AtomicU64::new(0);
    Box::new(move || UNIX_EPOCH + Duration::from_millis(BASE_MS + n.fetch_add(1, Ordering::SeqCst)))
}

pub(crate) fn meta() -> LogMeta {
    LogMeta {
        host: "alsa".into(),
        device: "hw:CARD=PCH,DEV=0".into(),
        sample_rate_hz: 48_000,
        channels: vec![1, 2],
    }
}

/// A diagnostics (or output) stream whose text the test can read.
#[derive(Clone, Default)]
pub(crate) struct Shared(pub(crate) Arc<Mutex<Vec<u8>>>);

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
    pub(crate) fn text(&self) -> String {
        String::from_utf8(self.0.lock().unwrap().clone()).unwrap()
    }
}

pub(crate) fn open_file(
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

pub(crate) fn channel_summary(channel: usize, v: f64) -> IntervalReading {
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
        harmonics_resolved: BTreeMap::new(),
        harmonics_dbc: harmonics,
    }
}

pub(crate) fn summary(t_s: f64, channels: usize) -> LiveEvent {
    LiveEvent::Summary {
        t_s,
        channels: (1..=channels).map(|c| channel_summary(c, -6.0)).collect(),
    }
}

pub(crate) fn clip() -> LiveEvent {
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

pub(crate) fn onset() -> LiveEvent {
    LiveEvent::Onset(Onset {
        channel: 1,
        t_s: 4.0,
        thd_pct: 1.0,
        fundamental_dbfs: Some(-2.5),
    })
}

pub(crate) fn json_lines(text: &str) -> Vec<Value> {
    text.lines()
        .map(|l| serde_json::from_str(l).unwrap_or_else(|e| panic!("{e}: {l}")))
        .collect()
}

pub(crate) fn keys(v: &Value) -> Vec<&str> {
    v.as_object().unwrap().keys().map(String::as_str).collect()
}

pub(crate) fn assert_has(v: &Value, wanted: &[&str]) {
    let have = keys(v);
    for k in wanted {
        assert!(have.contains(k), "{k} missing from {v}");
    }
}

/// Split one CSV line per RFC 4180 (no line breaks inside cells).
pub(crate) fn split_csv(line: &str) -> Vec<String> {
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

/// Rotated files, oldest first, then the live file.
pub(crate) fn rotated_in_order(path: &Path, keep: usize) -> Vec<PathBuf> {
    let mut files: Vec<PathBuf> = (1..=keep).rev().map(|k| numbered(path, k)).collect();
    files.push(path.to_path_buf());
    files
}
