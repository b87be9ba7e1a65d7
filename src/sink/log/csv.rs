//! CSV rows of the log: a [`Record`] becomes rows of the fixed [`CSV_COLUMNS`] (RFC 4180
//! quoting), one row per channel for a summary, one row for every other record.

use super::record::Record;

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
pub(super) const CSV_HEADER: &str = "kind,time,t_s,channel,sample_peak_dbfs,true_peak_dbtp,\
rms_dbfs,overs,flat_tops,fundamental_hz,thd_pct,thd_n_db,odd_even_db,clip,level_dbfs,samples,\
frames,detail\n";

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

/// A CSV number cell: empty when null or not finite.
fn cell_num(x: Option<f64>) -> String {
    x.filter(|v| v.is_finite())
        .map(|v| v.to_string())
        .unwrap_or_default()
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

/// The rows of a record, each ending in a newline.
pub fn rows(record: &Record<'_>) -> Vec<String> {
    let new = || Row::new(record.kind(), record.time());
    let row = match record {
        Record::Start(s) => {
            let channels = s
                .channels
                .iter()
                .map(|c| c.to_string())
                .collect::<Vec<_>>()
                .join(",");
            new().set(
                C_DETAIL,
                format!(
                    "format={};host={};device={};rate={};channels={channels}",
                    s.format, s.host, s.device, s.sample_rate_hz
                ),
            )
        }
        Record::Summary(s) => {
            return s
                .channels
                .iter()
                .map(|c| {
                    new()
                        .set(C_T_S, cell_num(s.t_s))
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
        Record::Clip(c) => new()
            .set(C_T_S, cell_num(c.t_s))
            .set(C_CHANNEL, c.channel.to_string())
            .set(C_CLIP, c.clip.as_str())
            .set(C_LEVEL_DBFS, cell_num(c.level_dbfs))
            .set(C_SAMPLES, c.samples.to_string())
            .set(
                C_DETAIL,
                format!("end_s={};runs={}", cell_num(c.end_s), c.runs),
            ),
        Record::Onset(o) => new()
            .set(C_T_S, cell_num(o.t_s))
            .set(C_CHANNEL, o.channel.to_string())
            .set(C_THD_PCT, cell_num(o.thd_pct))
            .set(
                C_DETAIL,
                format!("fundamental_dbfs={}", cell_num(o.fundamental_dbfs)),
            ),
        Record::InputLost(l) => new()
            .set(C_T_S, cell_num(l.t_s))
            .set(C_DETAIL, format!("reason={}", l.reason)),
        Record::InputRestored(r) => new().set(C_T_S, cell_num(r.t_s)),
        Record::Dropped(d) => new()
            .set(C_T_S, cell_num(d.t_s))
            .set(C_FRAMES, d.frames.to_string()),
        Record::Stop(s) => {
            let t = &s.totals;
            new().set(C_T_S, cell_num(s.t_s)).set(
                C_DETAIL,
                format!(
                    "summaries={};clip_events={};dropped_frames={};xruns={};\
                     input_losses={};lost_records={};frames_delivered={};frames_analysed={};\
                     results_missed={}",
                    t.summaries,
                    t.clip_events,
                    t.dropped_frames,
                    t.xruns,
                    t.input_losses,
                    t.lost_records,
                    t.frames_delivered,
                    t.frames_analysed,
                    t.results_missed
                ),
            )
        }
        Record::WriteGap(g) => new().set(
            C_DETAIL,
            format!("lost_records={};since={}", g.lost_records, g.since),
        ),
    };
    vec![row.line()]
}

#[cfg(test)]
mod tests {
    use super::*;
    use std::{fs, io};

    use crate::live::engine::LiveEvent;
    use crate::sink::log::testkit::*;
    use crate::sink::log::{LogFormat, LogWriter};

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
}
