//! Two modes, one analyser: the same WAV through `brink scan --every` (offline) and through the
//! live pipeline (`brink log --input file:... --fast`, which waits for the analysis rather than drop) gives the same interval readings.
//!
//! The expectation is the project's own promise, not an outside figure: both modes drive the
//! one `analysis::ChannelAnalyzer`, so sample and true peaks (BS.1770 meter, read per interval)
//! and the counts of overs and flat tops must agree interval by interval, and THD must agree
//! wherever the tone is steady over both modes' analysis windows. The live engine's channels
//! take turns for tone analysis (a channel's last window may end up to one tone interval before
//! the summary), so THD is compared only in intervals whose own second and the quarter second
//! before it hold no drive step.

use serde_json::Value;

use crate::util::*;

/// Per interval end time (s), each channel's reading.
type Intervals = Vec<(f64, Vec<Value>)>;

fn scan_intervals(file: &std::path::Path, every: &str) -> Intervals {
    let report = scan_json(file, &["--every", every]);
    report["timeline"]
        .as_array()
        .unwrap()
        .iter()
        .map(|s| {
            (
                s["end_s"].as_f64().unwrap(),
                s["channels"].as_array().unwrap().clone(),
            )
        })
        .collect()
}

fn log_intervals(file: &std::path::Path, every: &str) -> Intervals {
    let out = brink()
        .args(["log", "--fast", "--every", every, "--input"])
        .arg(format!("file:{}", file.display()))
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    records(&String::from_utf8_lossy(&out.stdout))
        .into_iter()
        .filter(|r| r["kind"] == "summary")
        .map(|r| {
            (
                r["t_s"].as_f64().unwrap(),
                r["channels"].as_array().unwrap().clone(),
            )
        })
        .collect()
}

fn close(a: &Value, b: &Value, tol: f64) -> bool {
    match (a.as_f64(), b.as_f64()) {
        (Some(x), Some(y)) => (x - y).abs() <= tol,
        (None, None) => true,
        _ => false,
    }
}

/// Compare the two modes on `file`; `steps` are the drive-step times (s) of its recipes.
fn agree(file: &std::path::Path, every: &str, every_s: f64, steps: &[f64]) -> usize {
    let scan = scan_intervals(file, every);
    let live = log_intervals(file, every);
    assert_eq!(scan.len(), live.len(), "interval count");
    let mut thd_compared = 0;
    for ((t_scan, a), (t_live, b)) in scan.iter().zip(&live) {
        assert!((t_scan - t_live).abs() < 1e-6, "{t_scan} vs {t_live}");
        assert_eq!(a.len(), b.len());
        let steady = !steps
            .iter()
            .any(|&s| s > t_scan - every_s - 0.25 - 1e-9 && s < t_scan - 1e-9);
        for (x, y) in a.iter().zip(b) {
            let ch = &x["channel"];
            assert_eq!(ch, &y["channel"]);
            for key in ["sample_peak_dbfs", "true_peak_dbtp"] {
                assert!(
                    close(&x[key], &y[key], 0.05),
                    "t {t_scan} ch {ch} {key}: scan {} live {}",
                    x[key],
                    y[key]
                );
            }
            assert!(close(&x["rms_dbfs"], &y["rms_dbfs"], 0.01), "rms {x} {y}");
            for key in ["overs", "flat_tops"] {
                assert_eq!(x[key], y[key], "t {t_scan} ch {ch} {key}");
            }
            // THD where both modes analysed a steady tone with distortion above the noise
            // floor: within 0.2 dB (a window shifted within a steady tone changes only the
            // noise in it).
            if let (true, Some(p), Some(q)) = (steady, x["thd_pct"].as_f64(), y["thd_pct"].as_f64())
            {
                if p > 0.1 {
                    let d = 20.0 * (q / p).log10();
                    assert!(d.abs() < 0.2, "t {t_scan} ch {ch} THD scan {p} live {q}");
                    thd_compared += 1;
                } else {
                    assert!(q < 0.1, "t {t_scan} ch {ch} THD scan {p} live {q}");
                }
            }
        }
    }
    thd_compared
}

/// A stage box at 48 kHz, 24 bits: a steady clean tone, a vocal preamp flat-topping harder in
/// three drive steps, a bass DI rising into overs, a room mic of noise, and a slow swell driven
/// 6 dB past full scale whose overs straddle every interval boundary (counted in the interval
/// that completes them, in both modes; `scan` counted them where they began, before the two
/// modes shared one analyser).
#[test]
fn scan_and_live_agree_interval_by_interval() {
    let dir = tempfile::tempdir().unwrap();
    let f = gen(
        dir.path(),
        "box.wav",
        &[
            "--rate",
            "48000",
            "--bits",
            "24",
            "--length",
            "6s",
            "--seed",
            "7",
            "sine:997@-12,noise=-100",
            "clip:440@-6,drive=0..12/3,noise=-96",
            "sine:55@-9..3/3,noise=-92",
            "noise@-40",
            "sine:1@6,phase=90",
        ],
    );
    let compared = agree(&f, "1s", 1.0, &[2.0, 4.0]);
    // The clipped channel in its three steady seconds at least.
    assert!(compared >= 3, "THD compared in {compared} readings");
}

/// The same at 44.1 kHz, 16 bits, half-second intervals, and a clip that starts mid-file.
#[test]
fn scan_and_live_agree_at_cd_rate() {
    let dir = tempfile::tempdir().unwrap();
    let f = gen(
        dir.path(),
        "cd.wav",
        &[
            "--rate",
            "44100",
            "--bits",
            "16",
            "--length",
            "4s",
            "--seed",
            "8",
            "clip:997@-6,drive=0..9/2",
            "sine:3150@-1,noise=-90",
        ],
    );
    let compared = agree(&f, "500ms", 0.5, &[2.0]);
    assert!(compared >= 2, "THD compared in {compared} readings");
}
