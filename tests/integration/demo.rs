//! The bundled demo material in `demo-tones/`: every file regenerates byte for byte from
//! `demo-tones/recipes.txt` (the list `demo-tones/make.sh` runs), and `brink scan` shows what
//! `demo-tones/README.md` promises. The expected readings below are the README's numbers with
//! margin; the signals are defined by the recipes, so each limit follows from the recipe text
//! (a hard clipper's plateau sits at its set level, a sine's crest at its set peak, and so on).

use std::collections::BTreeSet;
use std::path::{Path, PathBuf};
use std::sync::OnceLock;

use serde_json::Value;

use crate::util::brink;

const STAGE_BOX: &str = "stage-box-soundcheck.wav";
const PUSH_PULL: &str = "push-pull-stage-drive-steps.wav";
const SINGLE_ENDED: &str = "single-ended-stage-drive-steps.wav";
const PLAYBACK: &str = "playback-laptop-96k-intersample.wav";

/// Channels of the stage box (1-based, as in the report).
const KICK: usize = 1;
const VOCAL: usize = 2;
const BASS_DI: usize = 3;
const ROOM: usize = 4;

fn demo_dir() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("demo-tones")
}

/// One line of `recipes.txt`: the file name and the `brink gen` arguments after it.
struct Demo {
    file: String,
    args: Vec<String>,
}

impl Demo {
    /// The channel recipes: every argument that is neither an option nor an option's value.
    fn recipes(&self) -> Vec<&str> {
        let mut out = Vec::new();
        let mut it = self.args.iter();
        while let Some(a) = it.next() {
            if a == "--dither" {
                continue;
            }
            if a.starts_with("--") {
                it.next(); // the option's value
                continue;
            }
            out.push(a.as_str());
        }
        out
    }
}

/// Parse `demo-tones/recipes.txt` the way `make.sh` reads it: fields split on whitespace,
/// blank lines and lines starting with `#` skipped.
fn demos() -> Vec<Demo> {
    let text = std::fs::read_to_string(demo_dir().join("recipes.txt")).unwrap();
    text.lines()
        .map(|l| l.split_whitespace().map(str::to_string).collect::<Vec<_>>())
        .filter(|w| !w.is_empty() && !w[0].starts_with('#'))
        .map(|mut w| {
            let file = w.remove(0);
            Demo { file, args: w }
        })
        .collect()
}

fn demo(file: &str) -> Demo {
    demos()
        .into_iter()
        .find(|d| d.file == file)
        .unwrap_or_else(|| panic!("{file} is not in demo-tones/recipes.txt"))
}

/// The fixed `@LEVEL` of a recipe (`clip:220@-4,drive=...` gives -4).
fn set_level(recipe: &str) -> f64 {
    let (_, rest) = recipe.split_once('@').unwrap();
    let level = rest.split(',').next().unwrap();
    level.parse().unwrap()
}

/// `brink scan --json --every 1s` of a committed demo file.
fn scan(file: &str) -> Value {
    let out = brink()
        .args(["scan", "--json", "--every", "1s"])
        .arg(demo_dir().join(file))
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "scan {file}: {}",
        String::from_utf8_lossy(&out.stderr)
    );
    let text = String::from_utf8(out.stdout).unwrap();
    let v: Value = serde_json::from_str(text.trim()).unwrap();
    assert_eq!(v["format"], "brink-scan-1");
    v
}

/// Each file is scanned once and shared by the tests that read it.
fn scanned(file: &'static str) -> &'static Value {
    static STAGE: OnceLock<Value> = OnceLock::new();
    static PP: OnceLock<Value> = OnceLock::new();
    static SE: OnceLock<Value> = OnceLock::new();
    static PB: OnceLock<Value> = OnceLock::new();
    let cell = match file {
        STAGE_BOX => &STAGE,
        PUSH_PULL => &PP,
        SINGLE_ENDED => &SE,
        PLAYBACK => &PB,
        _ => panic!("no cache for {file}"),
    };
    cell.get_or_init(|| scan(file))
}

/// Channel `n` (1-based) of a report.
fn ch(v: &Value, n: usize) -> &Value {
    let c = &v["channels"][n - 1];
    assert_eq!(c["channel"], n);
    c
}

fn num(v: &Value) -> f64 {
    v.as_f64()
        .unwrap_or_else(|| panic!("expected a number, got {v}"))
}

fn count(v: &Value) -> u64 {
    v.as_u64()
        .unwrap_or_else(|| panic!("expected a count, got {v}"))
}

/// The timeline slices of channel `n`, in time order.
fn slices(v: &Value, n: usize) -> Vec<&Value> {
    v["timeline"]
        .as_array()
        .unwrap()
        .iter()
        .map(|s| {
            let c = &s["channels"][n - 1];
            assert_eq!(c["channel"], n);
            c
        })
        .collect()
}

/// Harmonic `order` of channel `c`, dBc.
fn harmonic(c: &Value, order: u64) -> f64 {
    let h = c["distortion"]["harmonics"]
        .as_array()
        .unwrap()
        .iter()
        .find(|h| h["order"] == order)
        .unwrap_or_else(|| panic!("no H{order}"));
    num(&h["level_dbc"])
}

/// THD per one-second slice rises with every drive step: each at least 15 % above the one
/// before (the README's readings rise by 26 % or more), from a light start to a heavy end.
fn assert_thd_rises_per_step(file: &'static str, steps: usize) -> Vec<f64> {
    let v = scanned(file);
    let thd: Vec<f64> = slices(v, 1).iter().map(|s| num(&s["thd_pct"])).collect();
    assert_eq!(thd.len(), steps, "{file}: one slice per drive step");
    for w in thd.windows(2) {
        assert!(
            w[1] > 1.15 * w[0],
            "{file}: THD must rise per step: {thd:?}"
        );
    }
    assert!(thd[0] < 3.0, "{file}: first step light: {thd:?}");
    assert!(thd[steps - 1] > 25.0, "{file}: last step heavy: {thd:?}");
    thd
}

/// The recipe list and the folder agree, `make.sh` runs that list, and the files stay small.
#[test]
fn recipes_name_every_demo_file_and_make_sh_runs_them() {
    let dir = demo_dir();
    let listed: BTreeSet<String> = demos().into_iter().map(|d| d.file).collect();
    let on_disk: BTreeSet<String> = std::fs::read_dir(&dir)
        .unwrap()
        .map(|e| e.unwrap().file_name().into_string().unwrap())
        .filter(|n| n.ends_with(".wav"))
        .collect();
    assert_eq!(listed, on_disk, "recipes.txt must list exactly the WAVs");
    for name in [STAGE_BOX, PUSH_PULL, SINGLE_ENDED, PLAYBACK] {
        assert!(listed.contains(name), "{name} missing from recipes.txt");
    }
    for d in demos() {
        assert!(
            d.args.iter().any(|a| a == "--seed"),
            "{}: a fixed --seed keeps the noise reproducible",
            d.file
        );
    }

    let script = std::fs::read_to_string(dir.join("make.sh")).unwrap();
    assert!(script.starts_with("#!/usr/bin/env bash\n"));
    assert!(script.contains("set -euo pipefail"));
    assert!(script.contains("cargo build --release"));
    assert!(
        script.contains("recipes.txt"),
        "make.sh reads the shared list"
    );

    let mut total = 0;
    for name in &on_disk {
        let len = std::fs::metadata(dir.join(name)).unwrap().len();
        assert!(len < 2_000_000, "{name} is {len} bytes");
        total += len;
    }
    assert!(total < 6_000_000, "demo-tones holds {total} bytes of WAV");
}

/// The README quotes the exact command of every file, as `recipes.txt` has it.
#[test]
fn readme_quotes_the_command_of_every_demo_file() {
    let readme = std::fs::read_to_string(demo_dir().join("README.md")).unwrap();
    for d in demos() {
        let cmd = format!("brink gen demo-tones/{} {}", d.file, d.args.join(" "));
        assert!(readme.contains(&cmd), "README.md lacks `{cmd}`");
    }
}

/// Running the recipes again gives the committed files, byte for byte.
#[test]
fn demo_files_regenerate_byte_for_byte() {
    let tmp = tempfile::tempdir().unwrap();
    for d in demos() {
        let fresh = tmp.path().join(&d.file);
        brink()
            .arg("gen")
            .arg(&fresh)
            .args(&d.args)
            .assert()
            .success();
        let want = std::fs::read(demo_dir().join(&d.file)).unwrap();
        let got = std::fs::read(&fresh).unwrap();
        assert_eq!(got.len(), want.len(), "{}: length differs", d.file);
        let first_diff = got.iter().zip(&want).position(|(a, b)| a != b);
        assert_eq!(
            first_diff, None,
            "{}: regenerated bytes differ (run demo-tones/make.sh and update the README)",
            d.file
        );
    }
}

/// The stage box file is what the README says: 4 channels, 48 kHz, 24-bit, 3 s.
#[test]
fn stage_box_format() {
    let v = scanned(STAGE_BOX);
    assert_eq!(v["sample_rate_hz"], 48_000);
    assert_eq!(v["encoding"], "24-bit integer PCM");
    assert_eq!(v["channels"].as_array().unwrap().len(), 4);
    assert!((num(&v["duration_s"]) - 3.0).abs() < 1e-9);
    assert_eq!(slices(v, KICK).len(), 3, "three one-second slices");
}

/// Kick: a clean 58 Hz thump at -10 dBFS, nothing clipped.
#[test]
fn stage_box_kick_is_clean() {
    let c = ch(scanned(STAGE_BOX), KICK);
    let clip = &c["clipping"];
    assert_eq!(count(&clip["overs"]), 0);
    assert_eq!(count(&clip["flat_tops"]), 0);
    assert_eq!(count(&clip["clipped_samples"]), 0);
    assert!(clip["first_clip_s"].is_null());
    assert!(num(&c["level"]["headroom_db"]) > 9.0);
    let d = &c["distortion"];
    assert!((num(&d["fundamental_hz"]) - 58.0).abs() < 0.01);
    assert!(num(&d["thd_pct"]) < 0.01, "clean sine: {}", d["thd_pct"]);
}

/// Lead vocal: the preamp flat-tops at its set level (-4 dBFS) from the first drive step on,
/// while the converter never gets near full scale: flat tops, no overs.
#[test]
fn stage_box_vocal_flat_tops_below_full_scale() {
    let v = scanned(STAGE_BOX);
    let recipe = demo(STAGE_BOX).recipes()[VOCAL - 1].to_string();
    assert!(recipe.starts_with("clip:"), "{recipe}");
    let set = set_level(&recipe);
    let c = ch(v, VOCAL);
    let clip = &c["clipping"];
    assert!(count(&clip["flat_tops"]) > 0);
    assert_eq!(count(&clip["overs"]), 0);
    assert!(
        (num(&clip["clip_level_dbfs"]) - set).abs() < 0.2,
        "clip level {} vs set {set}",
        clip["clip_level_dbfs"]
    );
    for side in ["positive", "negative"] {
        let l = num(&clip["flat_top_levels_dbfs"][side]);
        assert!((l - set).abs() < 0.2, "{side} flat tops at {l}");
    }
    assert!(
        num(&c["level"]["true_peak_dbtp"]) < -3.0,
        "never near 0 dBFS"
    );
    // drive=0..12/3 over 3 s: the clean step ends at 1.0 s; the first plateau follows within a
    // quarter period of 220 Hz (1.1 ms).
    let first = num(&clip["first_clip_s"]);
    assert!((1.0..1.0012).contains(&first), "first clip at {first} s");
    for e in clip["events"].as_array().unwrap() {
        assert_eq!(e["kind"], "flat-top");
    }
    let per_s: Vec<u64> = slices(v, VOCAL)
        .iter()
        .map(|s| count(&s["flat_tops"]))
        .collect();
    assert_eq!(per_s[0], 0, "first second clean: {per_s:?}");
    assert!(per_s[1] > 0 && per_s[2] > 0, "{per_s:?}");
}

/// Bass DI: the last level step (+3 dB) runs the converter into digital full scale: overs,
/// from 2 s on, and no flat tops below full scale.
#[test]
fn stage_box_bass_di_hits_overs() {
    let v = scanned(STAGE_BOX);
    let c = ch(v, BASS_DI);
    let clip = &c["clipping"];
    assert!(count(&clip["overs"]) > 0);
    assert_eq!(count(&clip["flat_tops"]), 0);
    assert!(num(&clip["clip_level_dbfs"]).abs() < 0.01, "at full scale");
    // sine:41.2@-9..3/3 over 3 s: the +3 dB step starts at 2.0 s; the first crest after it is
    // within a quarter period of 41.2 Hz (6.1 ms).
    let first = num(&clip["first_clip_s"]);
    assert!((2.0..2.0061).contains(&first), "first clip at {first} s");
    for e in clip["events"].as_array().unwrap() {
        assert_eq!(e["kind"], "over");
    }
    let per_s: Vec<u64> = slices(v, BASS_DI)
        .iter()
        .map(|s| count(&s["overs"]))
        .collect();
    assert_eq!(&per_s[..2], &[0, 0], "{per_s:?}");
    assert!(per_s[2] > 0, "{per_s:?}");
}

/// Room mic: only noise, so no fundamental and no distortion block at all.
#[test]
fn stage_box_room_mic_has_no_fundamental() {
    let v = scanned(STAGE_BOX);
    let c = ch(v, ROOM);
    assert!(c["distortion"].is_null(), "got {}", c["distortion"]);
    assert_eq!(count(&c["clipping"]["clipped_samples"]), 0);
    assert!((num(&c["level"]["rms_dbfs"]) + 66.0).abs() < 0.5);
    for s in slices(v, ROOM) {
        assert!(s["fundamental_hz"].is_null());
        assert!(s["thd_pct"].is_null());
    }
}

/// Push-pull (symmetric) stage: odd harmonics only, THD rising with every drive step, and
/// rounded (not flat) tops even at the last step.
#[test]
fn push_pull_stage_is_odd_only_and_thd_rises() {
    let v = scanned(PUSH_PULL);
    assert_eq!(v["channels"].as_array().unwrap().len(), 1);
    let c = ch(v, 1);
    let d = &c["distortion"];
    assert!((num(&d["fundamental_hz"]) - 997.0).abs() < 0.01);
    // README: -77.5 dB; a symmetric curve makes no even harmonics at all.
    assert!(
        num(&d["odd_even_db"]) < -40.0,
        "odd/even {}",
        d["odd_even_db"]
    );
    for even in [2, 4, 6] {
        assert!(harmonic(c, even) < -80.0, "H{even} {}", harmonic(c, even));
    }
    assert!(harmonic(c, 3) > -30.0, "H3 {}", harmonic(c, 3));
    // README: -35.8 dB per octave of order.
    let fall = num(&d["falloff_db_per_octave"]);
    assert!((-45.0..-25.0).contains(&fall), "fall-off {fall}");
    let clip = &c["clipping"];
    assert_eq!(count(&clip["overs"]), 0);
    assert_eq!(count(&clip["flat_tops"]), 0);
    assert_thd_rises_per_step(PUSH_PULL, 6);
}

/// Single-ended (biased) stage: even-rich (H2 strongest, odd/even positive), more THD than the
/// push-pull stage at every step, and one-sided flat tops only in the last step.
#[test]
fn single_ended_stage_is_even_rich_and_thd_rises() {
    let v = scanned(SINGLE_ENDED);
    assert_eq!(v["channels"].as_array().unwrap().len(), 1);
    let c = ch(v, 1);
    let d = &c["distortion"];
    assert!((num(&d["fundamental_hz"]) - 997.0).abs() < 0.01);
    // README: +5.6 dB.
    assert!(
        num(&d["odd_even_db"]) > 0.0,
        "odd/even {}",
        d["odd_even_db"]
    );
    let h2 = harmonic(c, 2);
    assert!(h2 > -25.0, "H2 {h2}");
    for order in 3..=10 {
        assert!(h2 > harmonic(c, order), "H2 strongest, not H{order}");
    }
    let fall = num(&d["falloff_db_per_octave"]);
    assert!((-45.0..-25.0).contains(&fall), "fall-off {fall}");
    assert!(num(&c["level"]["dc_offset"]) < -0.01, "asymmetry shifts DC");

    let se = assert_thd_rises_per_step(SINGLE_ENDED, 6);
    let pp = assert_thd_rises_per_step(PUSH_PULL, 6);
    for (k, (s, p)) in se.iter().zip(&pp).enumerate() {
        assert!(s > p, "step {k}: single-ended {s} % vs push-pull {p} %");
    }

    // The short half-wave saturates flat in the last step (drive +12 dB) only.
    let clip = &c["clipping"];
    assert_eq!(count(&clip["overs"]), 0);
    let per_s: Vec<u64> = slices(v, 1)
        .iter()
        .map(|s| count(&s["flat_tops"]))
        .collect();
    assert_eq!(&per_s[..5], &[0, 0, 0, 0, 0], "{per_s:?}");
    assert!(per_s[5] > 0, "{per_s:?}");
    let first = num(&clip["first_clip_s"]);
    assert!((5.0..5.01).contains(&first), "first clip at {first} s");
    assert!(!clip["flat_top_levels_dbfs"]["positive"].is_null());
    assert!(clip["flat_top_levels_dbfs"]["negative"].is_null());
}

/// Playback laptop at 96 kHz (x2 true-peak oversampling): both channels peak just under
/// 0 dBFS in the samples, but the left one reaches +0.6 dBTP between them.
#[test]
fn playback_laptop_peaks_between_samples() {
    let v = scanned(PLAYBACK);
    assert_eq!(v["sample_rate_hz"], 96_000);
    let left = &ch(v, 1)["level"];
    let right = &ch(v, 2)["level"];
    for (name, l) in [("left", left), ("right", right)] {
        assert_eq!(l["true_peak_oversampling"], 2, "{name}");
        let sp = num(&l["sample_peak_dbfs"]);
        assert!((-0.2..0.0).contains(&sp), "{name} sample peak {sp}");
    }
    for n in [1, 2] {
        let clip = &ch(v, n)["clipping"];
        assert_eq!(count(&clip["overs"]), 0);
        assert_eq!(count(&clip["flat_tops"]), 0);
    }
    // sine:12000@0.6,phase=22.5 at 96 kHz: samples land 22.5 degrees off the crest
    // (sin 67.5 = -0.69 dB), the x2 interpolated points on it.
    let tp = num(&left["true_peak_dbtp"]);
    assert!(tp > 0.5, "left true peak {tp}");
    assert!(num(&left["headroom_db"]) < 0.0);
    let gap = num(&right["true_peak_dbtp"]) - num(&right["sample_peak_dbfs"]);
    assert!(gap.abs() < 0.05, "right: samples on the crests, gap {gap}");
    assert!(num(&right["true_peak_dbtp"]) < 0.0);
}
