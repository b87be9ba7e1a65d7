//! The real binary: `scan` output forms, the JSON contract, bad input, `gen`.

use std::io::Read;
use std::process::{Command, Stdio};

use serde_json::Value;

use crate::util::*;

fn tmp() -> tempfile::TempDir {
    tempfile::tempdir().unwrap()
}

/// The `brink-scan-1` key names are fixed by the issue; every one must be present.
#[test]
fn json_report_has_the_fixed_keys() {
    let dir = tmp();
    let f = dir.path().join("two.wav");
    brink()
        .args(["gen"])
        .arg(&f)
        .args([
            "sine:997@-20",
            "clip:220@-6,drive=9,noise=-96",
            "--length",
            "2s",
        ])
        .assert()
        .success();
    let v = scan_json(&f, &[]);
    assert_eq!(v["format"], "brink-scan-1");
    assert_eq!(v["sample_rate_hz"], 48_000);
    assert!(v["file"].as_str().unwrap().ends_with("two.wav"));
    let chans = v["channels"].as_array().unwrap();
    assert_eq!(chans.len(), 2);
    for (i, c) in chans.iter().enumerate() {
        assert_eq!(c["channel"], i + 1);
        for k in [
            "sample_peak_dbfs",
            "true_peak_dbtp",
            "rms_dbfs",
            "crest_db",
            "dc_offset",
        ] {
            assert!(c["level"].get(k).is_some(), "level.{k}");
        }
        for k in [
            "overs",
            "flat_tops",
            "clipped_samples",
            "clip_level_dbfs",
            "first_clip_s",
            "events",
        ] {
            assert!(c["clipping"].get(k).is_some(), "clipping.{k}");
        }
        let d = &c["distortion"];
        for k in [
            "fundamental_hz",
            "fundamental_dbfs",
            "thd_pct",
            "thd_db",
            "thd_n_db",
            "sinad_db",
            "enob_bits",
            "odd_even_db",
            "falloff_db_per_octave",
            "harmonics",
        ] {
            assert!(d.get(k).is_some(), "distortion.{k}");
        }
        for h in d["harmonics"].as_array().unwrap() {
            for k in ["order", "freq_hz", "level_dbc", "phase_deg"] {
                assert!(h.get(k).is_some(), "harmonics[].{k}");
            }
        }
    }
    // Channel 2 flat-tops at −6 dBFS, before the converter.
    let k = &chans[1]["clipping"];
    assert!(k["flat_tops"].as_u64().unwrap() > 700);
    assert_eq!(k["overs"], 0);
    assert!((k["clip_level_dbfs"].as_f64().unwrap() + 6.0).abs() < 0.2);
    let ev = &k["events"][0];
    assert_eq!(ev["kind"], "flat-top");
    assert!(ev["start_s"].as_f64().unwrap() < 0.01);
    // Symmetric clipping: odd harmonics only.
    assert!(chans[1]["distortion"]["odd_even_db"].as_f64().unwrap() < -40.0);
}

/// Silence has no fundamental and no decibel levels: `null`, never NaN.
#[test]
fn silence_reports_nulls() {
    let dir = tmp();
    let f = dir.path().join("silent.wav");
    brink()
        .arg("gen")
        .arg(&f)
        .args(["silence", "--length", "1s"])
        .assert()
        .success();
    let v = scan_json(&f, &[]);
    let c = &v["channels"][0];
    assert!(c["distortion"].is_null());
    assert!(c["level"]["sample_peak_dbfs"].is_null());
    assert!(c["level"]["rms_dbfs"].is_null());
    assert!(c["clipping"]["first_clip_s"].is_null());
}

/// `--every` adds a time line showing when distortion began: a stage driven harder in steps.
#[test]
fn timeline_shows_when_distortion_starts() {
    let dir = tmp();
    let f = dir.path().join("steps.wav");
    brink()
        .arg("gen")
        .arg(&f)
        .args(["clip:997@-6,drive=0..12/4", "--length", "4s"])
        .assert()
        .success();
    let v = scan_json(&f, &["--every", "1s"]);
    let tl = v["timeline"].as_array().unwrap();
    assert_eq!(tl.len(), 4);
    let thd: Vec<f64> = tl
        .iter()
        .map(|s| s["channels"][0]["thd_pct"].as_f64().unwrap())
        .collect();
    // Step 1 is a clean sine; THD then rises with every step.
    assert!(thd[0] < 0.01, "{thd:?}");
    assert!(thd.windows(2).all(|w| w[1] > w[0]), "{thd:?}");
    assert_eq!(tl[0]["channels"][0]["flat_tops"], 0);
    assert!(tl[3]["channels"][0]["flat_tops"].as_u64().unwrap() > 1900);
    assert!((tl[2]["t_s"].as_f64().unwrap() - 2.0).abs() < 1e-9);
}

#[test]
fn readable_report_names_what_it_found() {
    let dir = tmp();
    let f = dir.path().join("di.wav");
    brink()
        .arg("gen")
        .arg(&f)
        .args(["clip:82.4@0,drive=4", "--length", "1s"])
        .assert()
        .success();
    let out = brink().arg("scan").arg(&f).output().unwrap();
    assert!(out.status.success());
    let text = String::from_utf8(out.stdout).unwrap();
    assert!(
        text.contains("di.wav  (48000 Hz, 1 ch, 24-bit integer PCM, 1.000 s)"),
        "{text}"
    );
    assert!(text.contains("Clip events"), "{text}");
    assert!(
        text.lines().any(|l| l.trim_start().starts_with("1  over")),
        "{text}"
    );
}

/// Bad input: each bad file gets one line on stderr naming it and what is wrong; the good file in
/// the same batch is still reported; the exit code is 1; nothing panics.
#[test]
fn bad_files_in_a_batch() {
    let dir = tmp();
    let p = |n: &str| dir.path().join(n);
    let good = p("good.wav");
    brink()
        .arg("gen")
        .arg(&good)
        .args(["sine:997@-20", "--length", "500ms"])
        .assert()
        .success();
    let pcm: Vec<u8> = (0..4800u32)
        .flat_map(|i| ((i as i16).wrapping_mul(7)).to_le_bytes())
        .collect();
    std::fs::write(p("empty.wav"), b"").unwrap();
    std::fs::write(p("notes.wav"), b"these are soundcheck notes, not audio\n").unwrap();
    std::fs::write(p("short.wav"), wav_bytes(1, 1, 48_000, 16, 96_000, &pcm)).unwrap();
    std::fs::write(p("mulaw.wav"), wav_bytes(7, 1, 8_000, 8, 100, &[0u8; 100])).unwrap();
    std::fs::write(
        p("nochan.wav"),
        wav_bytes(1, 0, 48_000, 16, 100, &[0u8; 100]),
    )
    .unwrap();
    std::fs::write(p("zerohz.wav"), wav_bytes(1, 1, 0, 16, 100, &[0u8; 100])).unwrap();
    std::fs::write(
        p("huge.wav"),
        wav_bytes(1, 2, 48_000, 16, 0xFFFF_FF00, &[0u8; 64]),
    )
    .unwrap();
    let mut list = wav_bytes(1, 1, 48_000, 16, 100, &[0u8; 100]);
    // A LIST chunk claiming 4 GB before the data.
    let mut with_list = list[..36].to_vec();
    with_list.extend_from_slice(b"LIST");
    with_list.extend_from_slice(&0xFFFF_FF00u32.to_le_bytes());
    with_list.extend_from_slice(&list.split_off(36));
    std::fs::write(p("biglist.wav"), with_list).unwrap();

    let cases: &[(&str, &str)] = &[
        ("missing.wav", "cannot open"),
        ("empty.wav", "empty"),
        ("notes.wav", "not a WAV file"),
        ("short.wav", "truncated"),
        ("mulaw.wav", "µ-law"),
        ("nochan.wav", "0 channels"),
        ("zerohz.wav", "0 Hz"),
        ("huge.wav", "truncated"),
        ("biglist.wav", "LIST"),
    ];
    let mut cmd = brink();
    cmd.arg("scan").arg("--json");
    for (name, _) in cases {
        cmd.arg(p(name));
    }
    cmd.arg(&good);
    let out = cmd.output().unwrap();
    assert_eq!(out.status.code(), Some(1));
    let stderr = String::from_utf8(out.stderr).unwrap();
    assert!(!stderr.contains("panicked"), "{stderr}");
    let lines: Vec<&str> = stderr.lines().collect();
    assert_eq!(lines.len(), cases.len(), "{stderr}");
    for ((name, words), line) in cases.iter().zip(&lines) {
        assert!(
            line.contains(name) && line.contains(words),
            "{name}: {line}"
        );
    }
    let stdout = String::from_utf8(out.stdout).unwrap();
    assert_eq!(stdout.lines().count(), 1);
    assert!(stdout.contains("good.wav"));
}

/// Formats and extremes the issue names: 64-bit float, 64 channels, 8 kHz and 384 kHz.
#[test]
fn float64_and_channel_and_rate_extremes() {
    let dir = tmp();
    let rate = 8_000;
    let x = tones(rate, rate as usize, &[(997.0, 0.5, 0.0)]);
    let f = dir.path().join("f64.wav");
    std::fs::write(&f, f64_wav(1, rate, &x)).unwrap();
    let v = scan_json(&f, &[]);
    assert_eq!(v["encoding"], "64-bit float");
    let fund = v["channels"][0]["distortion"]["fundamental_hz"]
        .as_f64()
        .unwrap();
    assert!((fund - 997.0).abs() < 0.01);

    let rate = 384_000;
    let chans: Vec<Vec<f64>> = (0..64)
        .map(|c| {
            tones(
                rate,
                rate as usize / 4,
                &[(1_000.0 + 100.0 * c as f64, 0.25, 0.0)],
            )
        })
        .collect();
    let f = dir.path().join("many.wav");
    write_i24(&f, rate, &chans);
    let v = scan_json(&f, &[]);
    let cs = v["channels"].as_array().unwrap();
    assert_eq!(cs.len(), 64);
    for (c, rep) in cs.iter().enumerate() {
        let fund = rep["distortion"]["fundamental_hz"].as_f64().unwrap();
        assert!(
            (fund - (1_000.0 + 100.0 * c as f64)).abs() < 0.05,
            "ch {c}: {fund}"
        );
        assert_eq!(rep["level"]["true_peak_oversampling"], 1);
    }
}

/// A reader that goes away (`brink scan ... | head -1`) ends the run quietly with status 0.
#[test]
fn broken_pipe_ends_quietly() {
    let dir = tmp();
    let f = dir.path().join("a.wav");
    brink()
        .arg("gen")
        .arg(&f)
        .args(["sine:997@-20", "--length", "200ms"])
        .assert()
        .success();
    let bin = assert_cmd::cargo::cargo_bin("brink");
    let mut child = Command::new(bin)
        .arg("scan")
        .args(std::iter::repeat_n(&f, 50))
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .unwrap();
    drop(child.stdout.take());
    let status = child.wait().unwrap();
    let mut err = String::new();
    child
        .stderr
        .take()
        .unwrap()
        .read_to_string(&mut err)
        .unwrap();
    assert_eq!(status.code(), Some(0), "{err}");
    assert!(err.is_empty(), "{err}");
}

#[test]
fn usage_errors_exit_2() {
    brink().args(["scan"]).assert().code(2);
    brink()
        .args(["scan", "--band-low", "500", "--band-high", "100", "x.wav"])
        .assert()
        .code(2)
        .stderr(predicates::str::contains(
            "--band-high must exceed --band-low",
        ));
    brink()
        .args(["scan", "--every", "soon", "x.wav"])
        .assert()
        .code(2);
}

#[test]
fn gen_reports_recipe_errors() {
    let dir = tmp();
    brink()
        .arg("gen")
        .arg(dir.path().join("x.wav"))
        .arg("sqare:100@-6")
        .assert()
        .code(1)
        .stderr(predicates::str::contains("unknown signal kind 'sqare'"));
}

/// Peak, RMS and DC against a general-purpose statistics pass: `sox FILE -n stats` (sox prints
/// plain RMS in dB, so brink's AES17 reading is 3.01 dB higher). Runs where sox is installed;
/// in CI (which installs sox) a missing sox is a failure.
#[test]
fn levels_agree_with_sox_stats() {
    if Command::new("sox").arg("--version").output().is_err() {
        assert!(std::env::var_os("CI").is_none(), "CI must install sox");
        eprintln!("sox not installed: skipping the sox cross-check");
        return;
    }
    let dir = tmp();
    let f = dir.path().join("mix.wav");
    brink()
        .arg("gen")
        .arg(&f)
        .args([
            "sine:440@-3,dc=0.01,noise=-40",
            "--bits",
            "16",
            "--length",
            "2s",
        ])
        .assert()
        .success();
    let out = Command::new("sox")
        .arg(&f)
        .args(["-n", "stats"])
        .output()
        .unwrap();
    let stats = String::from_utf8_lossy(&out.stderr).to_string();
    let field = |name: &str| -> f64 {
        let line = stats
            .lines()
            .find(|l| l.starts_with(name))
            .unwrap_or_else(|| panic!("{stats}"));
        line.split_whitespace().last().unwrap().parse().unwrap()
    };
    let v = scan_json(&f, &[]);
    let l = &v["channels"][0]["level"];
    let peak = l["sample_peak_dbfs"].as_f64().unwrap();
    let rms = l["rms_dbfs"].as_f64().unwrap();
    let dc = l["dc_offset"].as_f64().unwrap();
    assert!(
        (peak - field("Pk lev dB")).abs() < 0.01,
        "peak {peak} vs sox {}",
        field("Pk lev dB")
    );
    assert!(
        (rms - 3.0103 - field("RMS lev dB")).abs() < 0.01,
        "rms {rms} vs sox {}",
        field("RMS lev dB")
    );
    assert!(
        (dc - field("DC offset")).abs() < 1e-4,
        "dc {dc} vs sox {}",
        field("DC offset")
    );
}

/// Settings come from the built-in defaults, then the user file, then `--config`, then flags.
#[test]
fn configuration_layers_and_flags_override_files() {
    let dir = tmp();
    let f = dir.path().join("tone.wav");
    brink()
        .arg("gen")
        .arg(&f)
        .args(["square:1000@-6", "--length", "1s"])
        .assert()
        .success();
    let xdg = dir.path().join("xdg");
    std::fs::create_dir_all(xdg.join("brink")).unwrap();
    std::fs::write(xdg.join("brink/config.toml"), "[measure]\nmax_order = 9\n").unwrap();
    let preset = dir.path().join("bench.toml");
    std::fs::write(&preset, "[scan]\njson = true\n[measure]\nmax_order = 5\n").unwrap();
    let orders = |args: &[&str]| -> usize {
        let out = brink()
            .env("XDG_CONFIG_HOME", &xdg)
            .arg("scan")
            .args(args)
            .arg(&f)
            .output()
            .unwrap();
        assert!(
            out.status.success(),
            "{}",
            String::from_utf8_lossy(&out.stderr)
        );
        let v: Value = serde_json::from_slice(&out.stdout).unwrap();
        v["channels"][0]["distortion"]["harmonics"]
            .as_array()
            .unwrap()
            .len()
    };
    // User file: H2..H9; preset on top: H2..H5 and JSON; a flag on top of both: H2..H7.
    assert_eq!(orders(&["--json"]), 8);
    assert_eq!(orders(&["--config", preset.to_str().unwrap()]), 4);
    assert_eq!(
        orders(&["--config", preset.to_str().unwrap(), "--max-order", "7"]),
        6
    );
    // --text wins over a file asking for JSON.
    let out = brink()
        .env("XDG_CONFIG_HOME", &xdg)
        .args(["scan", "--text", "--config"])
        .arg(&preset)
        .arg(&f)
        .output()
        .unwrap();
    assert!(String::from_utf8(out.stdout)
        .unwrap()
        .contains("Distortion"));
}

#[test]
fn a_bad_configuration_file_names_file_line_and_column() {
    let dir = tmp();
    let bad = dir.path().join("bad.toml");
    std::fs::write(&bad, "[measure]\nmax_order = 9\nmax_ordr = 3\n").unwrap();
    brink()
        .env("XDG_CONFIG_HOME", dir.path())
        .args(["scan", "--config"])
        .arg(&bad)
        .arg("x.wav")
        .assert()
        .code(2)
        .stderr(predicates::str::contains("bad.toml:3:1"))
        .stderr(predicates::str::contains("max_ordr"));
    // A value of the right type but out of range: its line and column too.
    std::fs::write(&bad, "[scan]\njson = true\n\n[measure]\nmax_order = 90\n").unwrap();
    brink()
        .env("XDG_CONFIG_HOME", dir.path())
        .args(["scan", "--config"])
        .arg(&bad)
        .arg("x.wav")
        .assert()
        .code(2)
        .stderr(predicates::str::contains(
            "bad.toml:5:13: [measure] max_order = 90 is outside 2..=40",
        ));
}

/// Every bundled preset is accepted by the real binary.
#[test]
fn bundled_presets_are_accepted() {
    let dir = tmp();
    let f = dir.path().join("a.wav");
    brink()
        .arg("gen")
        .arg(&f)
        .args(["sine:997@-20", "--length", "1s"])
        .assert()
        .success();
    for preset in ["default", "soundcheck", "amp-bench", "lab-logger"] {
        let path = format!("{}/config/{preset}.toml", env!("CARGO_MANIFEST_DIR"));
        brink()
            .env("XDG_CONFIG_HOME", dir.path())
            .args(["scan", "--config", &path])
            .arg(&f)
            .assert()
            .success();
    }
}
