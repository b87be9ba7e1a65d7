//! Intermodulation through the real command line: `brink gen` makes the stimulus, the test bends
//! it through a known curve (written back with hound), `brink scan --imd` measures it.
//! Expected figures: `../shared/reference-values.md` §7 (the algebraic vectors, calc).

use std::path::Path;

use serde_json::Value;

use crate::util::*;

/// `brink gen OUT RECIPE --bits f32 ARGS...`, then the samples read back.
fn gen_f32(out: &Path, recipe: &str, extra: &[&str]) -> (u32, Vec<f32>) {
    brink()
        .arg("gen")
        .arg(out)
        .arg(recipe)
        .args(["--bits", "f32", "--length", "2s"])
        .args(extra)
        .assert()
        .success();
    let mut r = hound::WavReader::open(out).unwrap();
    let rate = r.spec().sample_rate;
    let x = r.samples::<f32>().map(|v| v.unwrap()).collect();
    (rate, x)
}

/// Mono 32-bit float WAV.
fn write_f32(path: &Path, rate: u32, x: &[f64]) {
    let spec = hound::WavSpec {
        channels: 1,
        sample_rate: rate,
        bits_per_sample: 32,
        sample_format: hound::SampleFormat::Float,
    };
    let mut w = hound::WavWriter::create(path, spec).unwrap();
    for &v in x {
        w.write_sample(v as f32).unwrap();
    }
    w.finalize().unwrap();
}

/// `y = 0.5·(x + 0.1·x²)`: the square law of reference-values.md §7, halved so the file stays
/// below full scale (IMD ratios do not depend on the scale).
fn bend(x: &[f32]) -> Vec<f64> {
    x.iter()
        .map(|&v| {
            let v = f64::from(v);
            0.5 * (v + 0.1 * v * v)
        })
        .collect()
}

fn scan(path: &Path, extra: &[&str]) -> std::process::Output {
    brink().arg("scan").args(extra).arg(path).output().unwrap()
}

fn scan_json(path: &Path, extra: &[&str]) -> Value {
    let out = scan(path, &[&["--json"], extra].concat());
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    serde_json::from_slice(&out.stdout).unwrap()
}

fn num(v: &Value) -> f64 {
    v.as_f64().unwrap_or_else(|| panic!("not a number: {v}"))
}

fn product<'a>(imd: &'a Value, name: &str) -> &'a Value {
    imd["products"]
        .as_array()
        .unwrap()
        .iter()
        .find(|p| p["name"] == name)
        .unwrap_or_else(|| panic!("no product {name} in {imd}"))
}

#[test]
fn imd_smpte_stimulus_through_a_square_law() {
    let dir = tempfile::tempdir().unwrap();
    let stim = dir.path().join("smpte.wav");
    // smpte@0: 60 Hz + 7 kHz at 4:1, combined peak 1.0, so A1 = 0.8, A2 = 0.2 (SMPTE RP120).
    let (rate, x) = gen_f32(&stim, "smpte@0", &[]);
    assert_eq!(rate, 48_000);
    let bent = dir.path().join("bent.wav");
    write_f32(&bent, rate, &bend(&x));

    let v = scan_json(&bent, &["--imd", "smpte"]);
    let imd = &v["channels"][0]["imd"];
    assert_eq!(imd["method"], "smpte");
    assert_eq!(imd["reference"], "f2");
    assert!((num(&imd["f1_hz"]) - 60.0).abs() < 1e-4, "{imd}");
    assert!((num(&imd["f2_hz"]) - 7000.0).abs() < 1e-4, "{imd}");
    // The high tone: 0.5·0.2 = 0.1 → −20 dBFS (x² adds nothing at f2; calc).
    assert!((num(&imd["f2_dbfs"]) + 20.0).abs() < 1e-3, "{imd}");
    assert_eq!(imd["reference_dbfs"], imd["f2_dbfs"]);
    // Each f2 ± f1 sideband = 0.08·A_f2: −21.94 dB (reference-values.md §7, calc).
    for name in ["f2-f1", "f2+f1"] {
        let p = product(imd, name);
        assert!((num(&p["level_dbr"]) + 21.94).abs() < 0.005, "{name}: {p}");
        assert_eq!(p["order"], 2);
    }
    // No x² product at f2 ± 2f1, f2 ± 3f1 (calc): only f32 rounding there.
    for name in ["f2-2f1", "f2+2f1", "f2-3f1", "f2+3f1"] {
        assert!(num(&product(imd, name)["level_dbr"]) < -120.0, "{name}");
    }
    // RSS: 11.31 % (reference-values.md §7, calc √2·0.08 = 0.113137).
    assert!((num(&imd["imd_pct"]) - 11.31).abs() < 0.005, "{imd}");
    assert!((num(&imd["imd_ratio"]) - 0.113_137).abs() < 1e-5, "{imd}");
    assert!((num(&imd["imd_db"]) - 20.0 * 0.113_137f64.log10()).abs() < 1e-3);
    assert!(imd["d2_db"].is_null() && imd["d3_db"].is_null());

    // The readable report shows the same.
    let out = scan(&bent, &["--imd", "smpte"]);
    assert!(out.status.success());
    let text = String::from_utf8(out.stdout).unwrap();
    assert!(text.contains("Intermodulation"), "{text}");
    assert!(text.contains("f2-f1 -21.94, f2+f1 -21.94"), "{text}");
    assert!(text.contains("11.31"), "{text}");

    // The clean stimulus reads below −120 dB (f32 rounding only; common practice).
    let v = scan_json(&stim, &["--imd", "auto"]);
    let imd = &v["channels"][0]["imd"];
    assert_eq!(imd["method"], "smpte");
    assert!(num(&imd["imd_db"]) < -120.0, "{imd}");
}

#[test]
fn imd_twin_stimulus_through_a_square_law() {
    let dir = tempfile::tempdir().unwrap();
    let stim = dir.path().join("twin.wav");
    // twin@0: 19 kHz + 20 kHz at 1:1, combined peak 1.0 → 0.5 each. At 96 kHz the square law's
    // sum and double frequencies (38 to 40 kHz) stay below Nyquist.
    let (rate, x) = gen_f32(&stim, "twin@0", &["--rate", "96000"]);
    let bent = dir.path().join("bent.wav");
    write_f32(&bent, rate, &bend(&x));

    let v = scan_json(&bent, &["--imd", "auto"]);
    let imd = &v["channels"][0]["imd"];
    assert_eq!(imd["method"], "twin");
    assert_eq!(imd["reference"], "f1+f2");
    let d2 = product(imd, "f2-f1");
    assert!((num(&d2["freq_hz"]) - 1000.0).abs() < 1e-3, "{d2}");
    // Re one tone: −26.02 dB (reference-values.md §7); re the sum of both, our reference:
    // 0.025/1.0 → −32.04 dB (calc).
    let re_one = num(&d2["level_dbfs"]) - num(&imd["f2_dbfs"]);
    assert!((re_one + 26.02).abs() < 0.005, "{re_one}");
    assert!((num(&d2["level_dbr"]) + 32.04).abs() < 0.005, "{d2}");
    assert!((num(&imd["d2_db"]) + 32.04).abs() < 0.005, "{imd}");
    // No 3rd-order products from a square law (calc).
    assert!(num(&imd["d3_db"]) < -120.0, "{imd}");
    for name in ["2f1-f2", "2f2-f1"] {
        assert_eq!(product(imd, name)["order"], 3);
    }
    assert!((num(&imd["imd_pct"]) - 2.5).abs() < 1e-3, "{imd}");
}

#[test]
fn imd_is_left_out_without_the_flag_and_refuses_unknown_methods() {
    let dir = tempfile::tempdir().unwrap();
    let stim = dir.path().join("smpte.wav");
    gen_f32(&stim, "smpte@-6", &[]);
    // Without --imd the report is as before: no "imd" key, no text section.
    let v = scan_json(&stim, &[]);
    let ch = v["channels"][0].as_object().unwrap();
    assert!(!ch.contains_key("imd"), "{v}");
    let text = String::from_utf8(scan(&stim, &[]).stdout).unwrap();
    assert!(!text.contains("Intermodulation"), "{text}");
    // A single tone carries no pair: the key is left out.
    let tone = dir.path().join("tone.wav");
    gen_f32(&tone, "sine:997@-6", &[]);
    let v = scan_json(&tone, &["--imd", "auto"]);
    assert!(!v["channels"][0].as_object().unwrap().contains_key("imd"));
    // A method brink does not know is a usage error (exit 2).
    let out = scan(&stim, &["--imd", "din"]);
    assert_eq!(out.status.code(), Some(2));
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(
        err.contains("unknown IMD method 'din' (use smpte, twin or auto)"),
        "{err}"
    );
}
