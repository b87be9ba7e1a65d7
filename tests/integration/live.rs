//! The live pipeline and `brink log`, with a WAV file as the live source.

use std::process::{Command, Stdio};
use std::sync::atomic::AtomicBool;
use std::sync::Arc;
use std::time::Duration;

use brink::live::engine::{Engine, EngineSettings, LiveEvent};
use brink::live::ring::ring;
use brink::live::run::{spawn_analysis, Published};
use brink::live::source::{FileSource, Pace};
use serde_json::Value;

use crate::util::*;

/// A clean second, then flat tops at −6 dBFS: start first, stop last, a summary per interval
/// with the right fundamental, one clip record for the whole episode at the right level.
#[test]
fn log_records_from_a_file_played_live() {
    let dir = tempfile::tempdir().unwrap();
    let f = gen(
        dir.path(),
        "steps.wav",
        &["clip:997@-6,drive=0..12/2", "--length", "2s"],
    );
    let out = dir.path().join("run.ndjson");
    brink()
        .args(["log", "--every", "500ms", "--input"])
        .arg(format!("file:{}", f.display()))
        .arg("--out")
        .arg(&out)
        .assert()
        .success();
    let recs = records(&std::fs::read_to_string(&out).unwrap());
    assert_eq!(recs[0]["kind"], "start");
    assert_eq!(recs[0]["format"], "brink-log-1");
    assert_eq!(recs[0]["sample_rate_hz"], 48_000);
    assert_eq!(recs.last().unwrap()["kind"], "stop");
    let sums: Vec<&Value> = recs.iter().filter(|r| r["kind"] == "summary").collect();
    assert_eq!(sums.len(), 4);
    for s in &sums[1..] {
        let c = &s["channels"][0];
        assert!(
            (c["fundamental_hz"].as_f64().unwrap() - 997.0).abs() < 0.05,
            "{c}"
        );
        for k in [
            "sample_peak_dbfs",
            "true_peak_dbtp",
            "rms_dbfs",
            "overs",
            "flat_tops",
            "thd_pct",
            "thd_n_db",
            "odd_even_db",
            "harmonics_dbc",
        ] {
            assert!(c.get(k).is_some(), "summary key {k}");
        }
    }
    assert_eq!(sums[1]["channels"][0]["flat_tops"], 0);
    assert!(sums[3]["channels"][0]["flat_tops"].as_u64().unwrap() > 900);
    let clips: Vec<&Value> = recs.iter().filter(|r| r["kind"] == "clip").collect();
    assert_eq!(clips.len(), 1, "one episode, one record");
    assert_eq!(clips[0]["clip"], "flat-top");
    assert!((clips[0]["level_dbfs"].as_f64().unwrap() + 6.0).abs() < 0.1);
    assert!((clips[0]["t_s"].as_f64().unwrap() - 1.0).abs() < 0.01);
    let stop = recs.last().unwrap();
    assert_eq!(stop["totals"]["summaries"], 4);
    assert_eq!(stop["totals"]["clip_events"], 1);
    assert_eq!(stop["totals"]["dropped_frames"], 0);
}

/// SIGHUP is ignored (a dropped SSH session must not end a recording); SIGTERM writes the stop
/// record and exits 0.
#[test]
fn signals_end_the_run_cleanly_and_hangup_is_ignored() {
    let dir = tempfile::tempdir().unwrap();
    let f = gen(dir.path(), "tone.wav", &["sine:997@-20", "--length", "1s"]);
    let bin = assert_cmd::cargo::cargo_bin("brink");
    let child = Command::new(bin)
        .args(["log", "--loop", "--every", "250ms", "--input"])
        .arg(format!("file:{}", f.display()))
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .unwrap();
    let pid = child.id().to_string();
    std::thread::sleep(Duration::from_millis(700));
    let kill = |sig: &str| {
        Command::new("kill").args([sig, &pid]).status().unwrap();
    };
    kill("-HUP");
    std::thread::sleep(Duration::from_millis(600));
    kill("-TERM");
    let out = child.wait_with_output().unwrap();
    assert_eq!(
        out.status.code(),
        Some(0),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let recs = records(&String::from_utf8(out.stdout).unwrap());
    assert_eq!(recs.last().unwrap()["kind"], "stop");
    // Summaries kept coming after the hang-up (about 1.3 s of 250 ms intervals in all).
    let sums = recs.iter().filter(|r| r["kind"] == "summary").count();
    assert!(sums >= 4, "{sums} summaries");
}

#[test]
fn csv_records_have_a_header_and_a_row_per_channel() {
    let dir = tempfile::tempdir().unwrap();
    let f = gen(
        dir.path(),
        "two.wav",
        &["sine:997@-20", "sine:440@-10", "--length", "1s"],
    );
    let out = brink()
        .args(["log", "--format", "csv", "--every", "500ms", "--input"])
        .arg(format!("file:{}", f.display()))
        .output()
        .unwrap();
    assert!(out.status.success());
    let text = String::from_utf8(out.stdout).unwrap();
    let mut lines = text.lines();
    assert!(lines.next().unwrap().starts_with("kind,time,t_s,channel,"));
    let summary_rows = text.lines().filter(|l| l.starts_with("summary,")).count();
    assert_eq!(summary_rows, 4, "2 intervals x 2 channels:\n{text}");
    assert!(text.lines().last().unwrap().starts_with("stop,"));
}

/// A log that cannot be written (disk full) is reported, measurement goes on to the end, and
/// the exit status says so.
#[test]
fn a_full_disk_is_reported_and_the_exit_status_says_so() {
    if !std::path::Path::new("/dev/full").exists() {
        eprintln!("no /dev/full here: skipping");
        return;
    }
    let dir = tempfile::tempdir().unwrap();
    let f = gen(
        dir.path(),
        "tone.wav",
        &["sine:997@-20", "--length", "500ms"],
    );
    let out = brink()
        .args(["log", "--every", "250ms", "--out", "/dev/full", "--input"])
        .arg(format!("file:{}", f.display()))
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(3));
    let err = String::from_utf8(out.stderr).unwrap();
    assert!(
        err.contains("cannot write") && err.contains("/dev/full"),
        "{err}"
    );
    assert!(!err.contains("panicked"), "{err}");
}

/// Unpaced, through a ring far too small: frames are lost, but every frame is accounted for:
/// delivered = analysed + dropped; and the loss is reported as a gap.
#[test]
fn accounting_holds_when_the_ring_overflows() {
    let dir = tempfile::tempdir().unwrap();
    let f = gen(
        dir.path(),
        "long.wav",
        &["sine:997@-20", "square:100@-6", "--length", "20s"],
    );
    let source = FileSource::open(&f, false, Pace::Unpaced).unwrap();
    let info = source.info().clone();
    let (writer, reader) = ring(info.channels, 512);
    let engine = Engine::new(
        info.sample_rate,
        info.channels,
        info.integer_bits(),
        EngineSettings::default(),
    );
    let done = Arc::new(AtomicBool::new(false));
    let analysis = spawn_analysis(reader, engine, Arc::clone(&done), 1 << 16).unwrap();
    let player = source
        .spawn(writer, Arc::new(AtomicBool::new(false)), Arc::clone(&done))
        .unwrap();
    let mut gaps = 0u64;
    let totals = loop {
        match analysis
            .events
            .recv_timeout(Duration::from_secs(60))
            .unwrap()
        {
            Published::Event(LiveEvent::Gap { frames, .. }) => gaps += frames,
            Published::Event(_) => {}
            Published::End(t) => break t,
        }
    };
    player.join().unwrap().unwrap();
    assert_eq!(totals.delivered, 20 * 48_000);
    assert_eq!(
        totals.delivered,
        totals.analysed + totals.dropped_frames,
        "{totals:?}"
    );
    assert!(
        totals.dropped_frames > 0,
        "the tiny ring must overflow: {totals:?}"
    );
    assert_eq!(gaps, totals.dropped_frames);
}

/// The real capture code on the real ALSA backend, through alsa-lib's `null` device (present
/// without any sound card; it captures silence as fast as it is read): a start record naming
/// the host, summaries, and on SIGTERM a stop record whose accounting holds:
/// frames delivered = frames analysed + frames dropped.
#[test]
fn alsa_null_device_through_the_real_capture_path() {
    let bin = assert_cmd::cargo::cargo_bin("brink");
    let child = Command::new(bin)
        .args([
            "log",
            "--host",
            "alsa",
            "--input",
            "null",
            "--channels",
            "1-2",
            "--rate",
            "48000",
            "--every",
            "250ms",
        ])
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .unwrap();
    std::thread::sleep(Duration::from_millis(1500));
    Command::new("kill")
        .args(["-TERM", &child.id().to_string()])
        .status()
        .unwrap();
    let out = child.wait_with_output().unwrap();
    assert_eq!(
        out.status.code(),
        Some(0),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let recs = records(&String::from_utf8(out.stdout).unwrap());
    assert_eq!(recs[0]["kind"], "start");
    assert_eq!(recs[0]["host"], "alsa");
    assert_eq!(recs[0]["channels"], serde_json::json!([1, 2]));
    assert!(recs.iter().filter(|r| r["kind"] == "summary").count() >= 2);
    let stop = recs.last().unwrap();
    assert_eq!(stop["kind"], "stop");
    let t = &stop["totals"];
    let delivered = t["frames_delivered"].as_u64().unwrap();
    let analysed = t["frames_analysed"].as_u64().unwrap();
    let dropped = t["dropped_frames"].as_u64().unwrap();
    assert!(delivered > 0);
    assert_eq!(delivered, analysed + dropped, "{t}");
    assert!(
        !recs.iter().any(|r| r["kind"] == "input-lost"),
        "our own shutdown is not a loss"
    );
}

#[test]
fn devices_lists_hosts_as_json_and_table() {
    let out = brink().args(["devices", "--json"]).output().unwrap();
    assert!(out.status.success());
    let v: Value = serde_json::from_slice(&out.stdout).unwrap();
    let alsa = v
        .as_array()
        .unwrap()
        .iter()
        .find(|h| h["host"] == "alsa")
        .unwrap();
    assert!(alsa["devices"]
        .as_array()
        .unwrap()
        .iter()
        .any(|d| d["id"] == "null"));
    brink()
        .args(["devices"])
        .assert()
        .success()
        .stdout(predicates::str::contains("host alsa"));
    brink()
        .args(["log", "--host", "alsa", "--input", "no-such-interface"])
        .assert()
        .code(1)
        .stderr(predicates::str::contains("brink devices"));
}
