//! Reading A and B: each input recognised from its content (a RIFF header is a WAV capture,
//! JSON a scan report, sweep or snapshot by its format key and shape), one channel picked, and
//! what it holds as a fingerprint or a sweep.

use std::io::{self, Read};
use std::path::Path;

use super::CompareError;
use crate::analysis::report::{ChannelReport, ScanReport, SCAN_FORMAT};
use crate::scan::ScanSettings;
use crate::sweep::report::{SweepReport, SWEEP_FORMAT};

use crate::analysis::fingerprint::file_name;
pub use crate::analysis::fingerprint::{Fingerprint, Source};

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
            match Fingerprint::of_channel(name, Source::Snapshot, report) {
                Some(f) => Ok(Input::Fingerprint(f)),
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
    match Fingerprint::of_channel(name, source, c) {
        Some(f) => Ok(f),
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

#[cfg(test)]
mod tests {
    use super::super::fingerprint::tests::fingerprint;
    use super::*;
    use crate::EXIT_FILE_ERROR;

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
