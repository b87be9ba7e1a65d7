//! NDJSON lines of the log: a [`Record`] becomes one line `{"kind":...,"time":...,...}` and one
//! line read back becomes a [`Record`] again (the dashboard's `--follow` reads logs this way).

use serde::Deserialize;

use super::record::Record;

/// The record as one NDJSON line, newline included.
pub fn line(record: &Record<'_>) -> String {
    let mut s = serde_json::to_string(record).unwrap_or_else(|e| {
        // Not expected (every record is plain data); keep the line valid JSON all the same.
        serde_json::json!({"kind": "internal-error", "time": record.time(), "detail": e.to_string()})
            .to_string()
    });
    s.push('\n');
    s
}

/// Why a line is not a record.
#[derive(Debug, thiserror::Error)]
pub enum ReadError {
    /// Not a JSON object with a text `kind`.
    #[error("{0}")]
    NotARecord(serde_json::Error),
    /// A `kind` this format does not have, or keys that do not fit the kind.
    #[error("a {kind:?} record that does not read: {source}")]
    Record {
        /// The line's `kind`.
        kind: String,
        /// What did not fit.
        #[source]
        source: serde_json::Error,
    },
}

/// Just the `kind` of a line, to say what a line that does not read was meant to be.
#[derive(Deserialize)]
struct Kind {
    kind: String,
}

/// The record of one line (a trailing newline is allowed).
pub fn read(line: &str) -> Result<Record<'static>, ReadError> {
    serde_json::from_str(line).map_err(|source| match serde_json::from_str::<Kind>(line) {
        Ok(Kind { kind }) => ReadError::Record { kind, source },
        Err(e) => ReadError::NotARecord(e),
    })
}

#[cfg(test)]
mod tests {
    use std::{fs, io};

    use crate::dsp::clip::ClipKind;
    use crate::live::engine::{LiveEvent, Onset};
    use crate::sink::log::testkit::*;
    use crate::sink::log::{LogFormat, LogWriter, LOG_FORMAT};

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
}
