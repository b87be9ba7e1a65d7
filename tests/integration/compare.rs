//! `brink compare` and the `--svg` figures, through the real binary: two `gen` stages against
//! the closed-form Fourier series of a clipped sine, two sweep documents, every input kind, the
//! error cases, and the SVG files' structure (text checks, no pixels).

use std::f64::consts::PI;
use std::path::{Path, PathBuf};

use serde_json::{json, Value};

use brink::sweep::onset;
use brink::sweep::report::{SweepReport, SweepStep, SWEEP_FORMAT};

use crate::util::*;

fn tmp() -> tempfile::TempDir {
    tempfile::tempdir().unwrap()
}

/// `brink gen FILE RECIPE...`.
fn gen(path: &Path, recipes: &[&str]) {
    let out = brink().arg("gen").arg(path).args(recipes).output().unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
}

/// Run `brink ARGS` with no user configuration; (exit code, stdout, stderr).
fn run(dir: &Path, args: &[&std::ffi::OsStr]) -> (i32, String, String) {
    let out = brink()
        .env("XDG_CONFIG_HOME", dir)
        .args(args)
        .output()
        .unwrap();
    (
        out.status.code().unwrap(),
        String::from_utf8(out.stdout).unwrap(),
        String::from_utf8(out.stderr).unwrap(),
    )
}

macro_rules! os {
    ($($a:expr),* $(,)?) => { &[$(std::ffi::OsStr::new($a)),*] };
}

/// Fourier sine coefficient b_n of sin t clipped symmetrically at ±c, α = arcsin c:
/// b_n = (2/(πn))·[S(n−1) + S(n+1)], S(m) = sin(mα)/m, S(0) = α
/// (shared/reference-values.md §6); zero for even n.
fn clip_bn(c: f64, n: usize) -> f64 {
    if n % 2 == 0 {
        return 0.0;
    }
    let a = c.asin();
    let s = |m: usize| {
        if m == 0 {
            a
        } else {
            (m as f64 * a).sin() / m as f64
        }
    };
    2.0 / (PI * n as f64) * (s(n - 1) + s(n + 1))
}

/// Harmonic amplitudes |c_n| (n = 1..=max) of one period of `f(t)`, by direct summation over
/// 8192 points: exact for a band-limited curve, and tanh's harmonics fall off exponentially
/// ([calc]: the numerical Fourier series of the transfer curve, independent of brink).
fn fourier(f: impl Fn(f64) -> f64, max: usize) -> Vec<f64> {
    let n = 8192;
    let y: Vec<f64> = (0..n).map(|k| f(2.0 * PI * k as f64 / n as f64)).collect();
    (1..=max)
        .map(|h| {
            let (mut re, mut im) = (0.0, 0.0);
            for (k, v) in y.iter().enumerate() {
                let ph = 2.0 * PI * (h * k) as f64 / n as f64;
                re += v * ph.cos();
                im += v * ph.sin();
            }
            2.0 * (re * re + im * im).sqrt() / n as f64
        })
        .collect()
}

/// The A/B/B−A columns of harmonic row `Hn` in the text table.
fn table_row(text: &str, order: usize) -> (Option<f64>, Option<f64>, Option<f64>) {
    let head = format!("H{order} ");
    let line = text
        .lines()
        .find(|l| l.starts_with(&head))
        .unwrap_or_else(|| panic!("no row H{order} in\n{text}"));
    let cells: Vec<Option<f64>> = line
        .split_whitespace()
        .skip(2)
        .map(|c| c.trim_end_matches('~').parse().ok())
        .collect();
    (cells[0], cells[1], cells[2])
}

/// The texts of all `<text>` elements of an SVG.
fn svg_texts(svg: &str) -> Vec<String> {
    svg.split("<text")
        .skip(1)
        .filter_map(|s| {
            let body = s.split_once('>')?.1;
            Some(body.split("</text>").next()?.trim().to_string())
        })
        .collect()
}

/// XML-ish checks every figure passes: one `<svg>` root, closed, every `<text>` closed, text at
/// least 12 px, and a white background.
fn check_svg(path: &Path) -> String {
    let svg = std::fs::read_to_string(path).unwrap();
    assert!(svg.starts_with("<svg"), "{}", path.display());
    assert!(svg.trim_end().ends_with("</svg>"));
    assert_eq!(svg.matches("<svg").count(), 1);
    assert_eq!(svg.matches("<text").count(), svg.matches("</text>").count());
    assert!(svg.contains(r##"fill="#FFFFFF""##), "white background");
    for size in svg.split("font-size=\"").skip(1) {
        let px: f64 = size.split('"').next().unwrap().parse().unwrap();
        assert!(px >= 12.0, "text of {px} px in {}", path.display());
    }
    svg
}

/// Symmetric hard clip against an asymmetric tanh stage, both from `brink gen`.
/// A: `clip`, drive 6.0206 dB past the clipper, i.e. a sine clipped at c = 10^(−6.0206/20) =
/// 0.5 of its peak: odd harmonics only, b_n from the closed form (reference-values §6).
/// B: `soft` with bias 0.3: y = tanh(g(x + 0.3)) − tanh(0.3g), g = 1 (drive 0 dB), even-rich; its
/// harmonics from the numerical Fourier series of that curve.
#[test]
fn compare_two_gen_stages() {
    let dir = tmp();
    let (a, b) = (dir.path().join("clip.wav"), dir.path().join("soft.wav"));
    gen(&a, &["clip:997@-6,drive=6.0206"]);
    gen(&b, &["soft:997@-6,drive=0,bias=0.3"]);

    let c = 10f64.powf(-6.0206 / 20.0);
    let g = 1.0; // drive=0 dB
    let soft = fourier(|t| (g * (t.sin() + 0.3)).tanh() - (0.3 * g).tanh(), 20);
    let a_dbc = |n: usize| db((clip_bn(c, n) / clip_bn(c, 1)).abs());
    let b_dbc = |n: usize| db(soft[n - 1] / soft[0]);

    let (code, text, err) = run(dir.path(), os!["compare", &a, &b]);
    assert_eq!(code, 0, "{err}");
    // The table: H2..H10 at least; A's odd orders and B's first orders on the closed form /
    // numerical series within 0.05 dB (the accuracy the harmonic measurement is tested to,
    // closed_form.rs), printed to 0.01 dB.
    for n in 2..=10 {
        let (ta, tb, td) = table_row(&text, n);
        if n % 2 == 1 {
            let want = a_dbc(n);
            let got = ta.unwrap();
            assert!((got - want).abs() < 0.05, "A H{n}: {got} vs {want}\n{text}");
        } else {
            // Symmetric clip: no even harmonics (24-bit noise sits near −140 dBc).
            assert!(ta.is_none_or(|l| l < -100.0), "A H{n}: {ta:?}");
        }
        let want = b_dbc(n);
        if want > -80.0 {
            let got = tb.unwrap();
            assert!((got - want).abs() < 0.05, "B H{n}: {got} vs {want}\n{text}");
        }
        // B − A, to the printing's rounding.
        if let (Some(x), Some(y), Some(d)) = (ta, tb, td) {
            assert!((d - (y - x)).abs() < 0.011, "H{n}: {d} vs {y} - {x}");
        }
    }
    // The words: B (biased tanh) is the even-rich one; A the odd-only hard clip.
    assert!(text.contains("B is more even-rich"), "{text}");
    assert!(text.contains("A: heavy; odd only"), "{text}");
    // Which has more THD, from the two series over the reported orders (H2..H20, below 20 kHz).
    let thd_a = (2..=20).map(|n| clip_bn(c, n).powi(2)).sum::<f64>().sqrt() / clip_bn(c, 1);
    let thd_b = soft[1..20].iter().map(|v| v * v).sum::<f64>().sqrt() / soft[0];
    let (more, by) = if thd_a > thd_b {
        ("A", thd_a / thd_b)
    } else {
        ("B", thd_b / thd_a)
    };
    // The stages differ by more than compare's 1 dB "alike" margin (THD_ALIKE_DB), so the
    // words must name one.
    assert!(db(by) > 1.0, "{} dB", db(by));
    let line = text
        .lines()
        .find(|l| l.contains("has more THD"))
        .unwrap_or_else(|| panic!("no THD line\n{text}"));
    assert!(
        line.trim_start()
            .starts_with(&format!("{more} has more THD")),
        "{line}"
    );
    let stated: f64 = line
        .split('(')
        .nth(1)
        .and_then(|s| s.split(" dB more").next())
        .unwrap()
        .parse()
        .unwrap();
    assert!((stated - db(by)).abs() < 0.1, "{line} vs {} dB", db(by));
    // The hard clip's harmonics fall off more slowly than the soft curve's (common practice;
    // reference-values §6): the words name B as the faster.
    assert!(text.contains("B's harmonics fall off faster"), "{text}");

    // The same in JSON: one document, per-harmonic differences B − A.
    let (code, json_text, err) = run(dir.path(), os!["compare", "--json", &a, &b]);
    assert_eq!(code, 0, "{err}");
    assert_eq!(json_text.lines().count(), 1);
    let v: Value = serde_json::from_str(&json_text).unwrap();
    assert_eq!(v["format"], "brink-compare-1");
    assert_eq!(v["kind"], "fingerprints");
    assert_eq!(v["a"]["source"], "wav");
    assert_eq!(v["a"]["family"], "odd-only");
    let hs = v["harmonics"].as_array().unwrap();
    assert!(hs.len() >= 9);
    for h in hs {
        let n = h["order"].as_u64().unwrap() as usize;
        assert_eq!(h["parity"], if n % 2 == 0 { "even" } else { "odd" });
        if let (Some(x), Some(y)) = (h["a_dbc"].as_f64(), h["b_dbc"].as_f64()) {
            assert!((h["diff_db"].as_f64().unwrap() - (y - x)).abs() < 1e-9);
        }
        if n % 2 == 1 {
            assert!(
                (h["a_dbc"].as_f64().unwrap() - a_dbc(n)).abs() < 0.05,
                "H{n}"
            );
        }
    }
    let thd_pct = v["a"]["thd_pct"].as_f64().unwrap();
    assert!(
        (thd_pct / (100.0 * thd_a) - 1.0).abs() < 2e-3,
        "{thd_pct} vs {}",
        100.0 * thd_a
    );
    assert!(v["findings"].as_array().unwrap().len() >= 5);

    // The figure: bars of A beside B, every order named and its family written under it.
    let fig = dir.path().join("fp.svg");
    let (code, _, err) = run(dir.path(), os!["compare", "--svg", &fig, &a, &b]);
    assert_eq!(code, 0, "{err}");
    let svg = check_svg(&fig);
    let t = svg_texts(&svg);
    // The title carries both THDs: A's on the closed form (0.2 % relative, as above).
    let title = t
        .iter()
        .find(|s| s.starts_with("Harmonic fingerprints, A beside B (THD: A "))
        .unwrap_or_else(|| panic!("{t:?}"));
    let a_thd: f64 = title["Harmonic fingerprints, A beside B (THD: A ".len()..]
        .split(' ')
        .next()
        .unwrap()
        .parse()
        .unwrap();
    assert!((a_thd / (100.0 * thd_a) - 1.0).abs() < 2e-3, "{title}");
    assert!(t.iter().any(|s| s.starts_with("harmonic order")), "{t:?}");
    assert!(t.iter().any(|s| s.starts_with("level (dBc")), "{t:?}");
    for n in 2..=10 {
        assert!(t.contains(&format!("H{n}")), "H{n} in {t:?}");
    }
    assert!(t.contains(&"odd".to_string()) && t.contains(&"even".to_string()));
    assert!(t.iter().any(|s| s == "A (solid): clip.wav ch 1"), "{t:?}");
    assert!(t.iter().any(|s| s == "B (hatched): soft.wav ch 1"), "{t:?}");
    // A's bars are filled rectangles; B's outlined and hatched (polylines); odd orders carry
    // circles and even ones triangles (polygons).
    assert!(svg.matches("<rect").count() >= 10);
    assert!(svg.matches("<polyline").count() >= 20);
    assert!(svg.contains("<circle") && svg.contains("<polygon"));
}

/// Every fingerprint input kind reads the same measurement: a WAV capture, one line of
/// `scan --json`, and a snapshot (the channel report alone, pretty-printed as the dashboard
/// saves it). The same channel compared with itself differs by exactly zero everywhere.
#[test]
fn snapshots_scan_lines_and_wavs_compare_alike() {
    let dir = tmp();
    let wav = dir.path().join("pair.wav");
    gen(&wav, &["silence", "harmonics:1000@-20,h2=-40,h3=-60"]);
    let (code, line, err) = run(dir.path(), os!["scan", "--json", &wav]);
    assert_eq!(code, 0, "{err}");
    let report: Value = serde_json::from_str(line.trim()).unwrap();
    let scan_line = dir.path().join("scan.json");
    std::fs::write(&scan_line, &line).unwrap();
    let snap = dir.path().join("snapshot-b.json");
    std::fs::write(
        &snap,
        serde_json::to_string_pretty(&report["channels"][1]).unwrap() + "\n",
    )
    .unwrap();

    let (code, out, err) = run(
        dir.path(),
        os!["compare", "--json", "--channel", "2", &scan_line, &snap],
    );
    assert_eq!(code, 0, "{err}");
    let v: Value = serde_json::from_str(&out).unwrap();
    assert_eq!(v["a"]["source"], "scan-report");
    assert_eq!(v["b"]["source"], "snapshot");
    for h in v["harmonics"].as_array().unwrap() {
        if !h["diff_db"].is_null() {
            assert_eq!(h["diff_db"].as_f64().unwrap(), 0.0, "{h}");
        }
    }
    // The Chebyshev recipe's levels (reference-values §6: T_n(cos t) = cos nt) in the table.
    let h2 = &v["harmonics"][0];
    assert!((h2["a_dbc"].as_f64().unwrap() + 40.0).abs() < 0.05, "{h2}");
    let words = v["findings"].to_string();
    assert!(words.contains("about as even-rich"), "{words}");
    assert!(words.contains("about the same THD"), "{words}");

    // The WAV itself against the snapshot: channel 2 of the WAV (--channel) against the
    // snapshot's own channel, the same readings.
    let (code, out, err) = run(
        dir.path(),
        os!["compare", "--json", "--channel", "2", &wav, &snap],
    );
    assert_eq!(code, 0, "{err}");
    let v: Value = serde_json::from_str(&out).unwrap();
    assert_eq!(v["a"]["source"], "wav");
    assert_eq!(v["thd_diff_db"].as_f64(), Some(0.0));

    // --channel-b picks B's channel apart from A's; channel 1 is silent: no fingerprint.
    let (code, _, err) = run(
        dir.path(),
        os!["compare", "--channel", "1", "--channel-b", "2", &wav, &wav],
    );
    assert_eq!(code, 1);
    assert!(
        err.contains("channel 1 carries no steady tone") && err.contains("channels with a tone: 2"),
        "{err}"
    );
}

/// A level-sweep step of a stage that clips hard and symmetrically at `clip_dbfs`, driven by a
/// sine peaking at `drive` dBFS: below the clip point a clean return with THD at a measurement
/// floor of 0.001 %; above it the clipped sine's closed-form series (reference-values §6),
/// H2..H10 in dBc, THD over H2..H20, return level b₁ in dBFS.
fn clipped_step(drive: f64, clip_dbfs: f64) -> SweepStep {
    let over = drive - clip_dbfs;
    let (thd, ret, h): (f64, f64, Vec<(String, Option<f64>)>) = if over <= 0.0 {
        (
            0.001,
            drive,
            (2..=10).map(|n| (n.to_string(), None)).collect(),
        )
    } else {
        let c = 10f64.powf(-over / 20.0);
        let b1 = clip_bn(c, 1);
        let thd = (2..=20).map(|n| clip_bn(c, n).powi(2)).sum::<f64>().sqrt() / b1 * 100.0;
        let h = (2..=10)
            .map(|n| {
                let b = clip_bn(c, n);
                (n.to_string(), (b != 0.0).then(|| db((b / b1).abs())))
            })
            .collect();
        (thd, drive + db(b1), h)
    };
    let harmonics: serde_json::Map<String, Value> =
        h.into_iter().map(|(k, v)| (k, json!(v))).collect();
    serde_json::from_value(json!({
        "drive_dbfs": drive, "frequency_hz": 997.0, "return_dbfs": ret, "return_hz": 997.0,
        "return_peak_dbfs": drive.min(clip_dbfs), "thd_pct": thd, "thd_n_db": db(thd / 100.0),
        "odd_even_db": null, "falloff_db_per_octave": null, "harmonics_dbc": harmonics
    }))
    .unwrap()
}

/// A soft stage: y = tanh(x) on a sine of peak 10^(drive/20) (full scale 1), its THD from the
/// numerical Fourier series: rises about 2 dB per dB of drive at low level (third order).
fn tanh_step(drive: f64) -> SweepStep {
    let a = 10f64.powf(drive / 20.0);
    let h = fourier(|t| (a * t.sin()).tanh(), 20);
    let thd = h[1..].iter().map(|v| v * v).sum::<f64>().sqrt() / h[0] * 100.0;
    let harmonics: serde_json::Map<String, Value> = (2..=10)
        .map(|n| {
            (
                n.to_string(),
                json!((h[n - 1] > 1e-12).then(|| db(h[n - 1] / h[0]))),
            )
        })
        .collect();
    serde_json::from_value(json!({
        "drive_dbfs": drive, "frequency_hz": 997.0, "return_dbfs": db(h[0]),
        "return_hz": 997.0, "return_peak_dbfs": db(a.tanh()), "thd_pct": thd,
        "thd_n_db": db(thd / 100.0), "odd_even_db": null, "falloff_db_per_octave": null,
        "harmonics_dbc": harmonics
    }))
    .unwrap()
}

/// A `brink-sweep-1` document from its steps, with onset and knee as the sweep reckons them.
fn sweep_report(steps: Vec<SweepStep>) -> SweepReport {
    serde_json::from_value(json!({
        "format": SWEEP_FORMAT, "kind": "level", "frequency_hz": 997.0, "drive_dbfs": null,
        "sample_rate_hz": 48000, "host": "jack", "output_device": "out", "output_channel": 1,
        "input_device": "in", "input_channel": 1, "onset_threshold_pct": 1.0,
        "loop_gain_db": onset::loop_gain(&steps), "onset": onset::onset(&steps, 1.0),
        "knee": onset::knee(&steps), "steps": steps
    }))
    .unwrap()
}

fn write_sweep(dir: &Path, name: &str, r: &SweepReport) -> PathBuf {
    let p = dir.join(name);
    std::fs::write(&p, serde_json::to_string(r).unwrap() + "\n").unwrap();
    p
}

/// Two hard clippers 6 dB apart, swept over the same drives in 0.5 dB steps: the same curve
/// shifted, so A (clipping at −12 dBFS) reaches 1 % THD exactly 6.0 dB of drive earlier than
/// B (−6 dBFS), at a returned level 6.0 dB lower; each onset within 0.3 dB of the closed form
/// (the drive where the clipped sine's THD is 1 %, issue 5's tolerance). Against a tanh stage,
/// the hard clip is the more abrupt.
#[test]
fn compare_two_sweeps() {
    let dir = tmp();
    let drives: Vec<f64> = (0..=60).map(|i| -30.0 + 0.5 * f64::from(i)).collect();
    let a = sweep_report(drives.iter().map(|&d| clipped_step(d, -12.0)).collect());
    let b = sweep_report(drives.iter().map(|&d| clipped_step(d, -6.0)).collect());
    let (pa, pb) = (
        write_sweep(dir.path(), "a.json", &a),
        write_sweep(dir.path(), "b.json", &b),
    );

    // Closed form: THD(c) = 1 % by bisection on c; the onset lies 20·log10(1/c) dB above the
    // clip point.
    let thd_at =
        |c: f64| (2..=20).map(|n| clip_bn(c, n).powi(2)).sum::<f64>().sqrt() / clip_bn(c, 1);
    let (mut lo, mut hi) = (0.5, 1.0);
    for _ in 0..60 {
        let mid = 0.5 * (lo + hi);
        if thd_at(mid) > 0.01 {
            lo = mid;
        } else {
            hi = mid;
        }
    }
    let over = -db(0.5 * (lo + hi));

    let (code, out, err) = run(dir.path(), os!["compare", "--json", &pa, &pb]);
    assert_eq!(code, 0, "{err}");
    let v: Value = serde_json::from_str(&out).unwrap();
    assert_eq!(v["kind"], "sweeps");
    assert_eq!(v["sweep"], "level");
    assert_eq!(
        v["rows"].as_array().unwrap().len(),
        drives.len(),
        "aligned by drive"
    );
    let oa = v["a"]["onset"]["drive_dbfs"].as_f64().unwrap();
    let ob = v["b"]["onset"]["drive_dbfs"].as_f64().unwrap();
    assert!(
        (oa - (-12.0 + over)).abs() < 0.3,
        "A onset {oa} vs {}",
        -12.0 + over
    );
    assert!(
        (ob - (-6.0 + over)).abs() < 0.3,
        "B onset {ob} vs {}",
        -6.0 + over
    );
    assert!((v["onset_drive_diff_db"].as_f64().unwrap() - 6.0).abs() < 1e-9);
    assert!((v["onset_return_diff_db"].as_f64().unwrap() - 6.0).abs() < 1e-9);
    // Where both clip, the THD differs row by row as the shifted closed form says.
    let row = v["rows"]
        .as_array()
        .unwrap()
        .iter()
        .find(|r| r["drive_dbfs"] == json!(-3.0))
        .unwrap();
    let want = db(thd_at(10f64.powf(-3.0 / 20.0)) / thd_at(10f64.powf(-9.0 / 20.0)));
    assert!(
        (row["thd_diff_db"].as_f64().unwrap() - want).abs() < 1e-9,
        "{row}"
    );
    assert!((row["harmonics_diff_db"]["3"].as_f64().unwrap()).is_finite());

    let (code, text, err) = run(dir.path(), os!["compare", &pa, &pb]);
    assert_eq!(code, 0, "{err}");
    assert!(
        text.contains(&format!(
            "A clips earlier: THD reaches 1.00 % at {oa:.1} dBFS of drive against {ob:.1} dBFS for B, 6.0 dB less drive; returned level"
        )),
        "{text}"
    );
    assert!(text.contains("6.0 dB lower"), "{text}");
    assert!(text.contains("both clip about as abruptly"), "{text}");

    // A tanh stage against the hard clip: the clip is the abrupt one, and clips earlier.
    let soft = sweep_report(drives.iter().map(|&d| tanh_step(d)).collect());
    let ps = write_sweep(dir.path(), "soft.json", &soft);
    let (code, text, err) = run(dir.path(), os!["compare", &ps, &pb]);
    assert_eq!(code, 0, "{err}");
    assert!(text.contains("B clips more abruptly"), "{text}");

    // The figures: both THD curves with the onsets marked; the single sweep's own figure.
    let fig = dir.path().join("sweeps.svg");
    let (code, _, err) = run(dir.path(), os!["compare", "--svg", &fig, &pa, &pb]);
    assert_eq!(code, 0, "{err}");
    let svg = check_svg(&fig);
    let t = svg_texts(&svg);
    for want in [
        "THD against drive: A and B",
        "THD (%)",
        "A: a.json",
        "B: b.json",
    ] {
        assert!(t.iter().any(|s| s == want), "{want} in {t:?}");
    }
    assert!(t.iter().any(|s| s.starts_with("drive (dBFS")), "{t:?}");
    assert!(
        t.iter().any(|s| s.starts_with("A onset")) && t.iter().any(|s| s.starts_with("B onset"))
    );
    assert!(svg.matches("<polyline").count() >= 2);

    let one = dir.path().join("one.svg");
    brink::plot::sweep_svg(&a, &one).unwrap();
    let t = svg_texts(&check_svg(&one));
    assert!(
        t.iter().any(|s| s.starts_with("Level sweep at 997 Hz")),
        "{t:?}"
    );
    assert!(
        t.iter().any(|s| s.starts_with("onset: THD 1 % at")),
        "{t:?}"
    );
    assert!(t.iter().any(|s| s == "H3 (odd)"), "{t:?}");
}

/// What `compare` refuses, with the exit codes of the other commands: 1 for a file that
/// cannot be read or understood, 2 for a wrong command line.
#[test]
fn compare_errors() {
    let dir = tmp();
    let d = dir.path();
    let wav = d.join("tone.wav");
    gen(&wav, &["sine:997@-6"]);
    let text = d.join("notes.txt");
    std::fs::write(&text, "hello\n").unwrap();
    let log = d.join("log.json");
    std::fs::write(&log, "{\"format\":\"brink-log-1\",\"record\":\"start\"}\n").unwrap();
    let missing = d.join("missing.wav");
    let sweep = write_sweep(d, "s.json", &sweep_report(vec![clipped_step(-20.0, -10.0)]));

    let (code, _, err) = run(d, os!["compare", &missing, &wav]);
    assert_eq!(code, 1);
    assert!(err.contains("missing.wav: cannot read"), "{err}");

    let (code, _, err) = run(d, os!["compare", &wav, &text]);
    assert_eq!(code, 1);
    assert!(err.contains("notes.txt: neither a WAV file"), "{err}");

    let (code, _, err) = run(d, os!["compare", &log, &wav]);
    assert_eq!(code, 1);
    assert!(err.contains("format 'brink-log-1'"), "{err}");

    let (code, out, err) = run(d, os!["compare", &sweep, &wav]);
    assert_eq!(code, 2);
    assert!(out.is_empty());
    assert!(
        err.contains("cannot compare a sweep with a harmonic fingerprint"),
        "{err}"
    );

    let (code, _, err) = run(d, os!["compare", "--channel", "3", &wav, &wav]);
    assert_eq!(code, 2);
    assert!(err.contains("has no channel 3 (it has 1)"), "{err}");

    // Both inputs bad: both named.
    let (code, _, err) = run(d, os!["compare", &missing, &text]);
    assert_eq!(code, 1);
    assert!(
        err.contains("missing.wav") && err.contains("notes.txt"),
        "{err}"
    );

    let (code, _, _) = run(d, os!["compare", &wav]);
    assert_eq!(code, 2, "B is required");
}

/// `scan --svg`: the spectrum of the tone span, fundamental and harmonics marked by order;
/// with several files, one figure each named after its file; two files of one name refused.
#[test]
fn scan_draws_the_spectrum() {
    let dir = tmp();
    let d = dir.path();
    let a = d.join("take1.wav");
    let b = d.join("take2.wav");
    gen(&a, &["silence", "harmonics:1000@-10,h2=-30,h3=-50"]);
    gen(&b, &["clip:997@-6,drive=6"]);

    let fig = d.join("spec.svg");
    let (code, out, err) = run(d, os!["scan", "--json", "--svg", &fig, &a]);
    assert_eq!(code, 0, "{err}");
    assert_eq!(out.lines().count(), 1, "the report is unchanged on stdout");
    let svg = check_svg(&fig);
    let t = svg_texts(&svg);
    // Channel 2 is the first with a tone.
    assert!(
        t.iter()
            .any(|s| s.starts_with("Spectrum of take1.wav ch 2")),
        "{t:?}"
    );
    for want in [
        "frequency (Hz)",
        "level (dBFS, sine peak)",
        "H1",
        "H2",
        "H3",
    ] {
        assert!(t.iter().any(|s| s == want), "{want} in {t:?}");
    }
    assert!(
        t.iter()
            .any(|s| s.contains("fundamental 1000.00 Hz at -10.00 dBFS")),
        "{t:?}"
    );
    assert!(svg.contains("<polyline"), "the spectrum's line");

    // Two files: spec-take1.svg and spec-take2.svg.
    let (code, _, err) = run(d, os!["scan", "--svg", &fig, &a, &b]);
    assert_eq!(code, 0, "{err}");
    check_svg(&d.join("spec-take1.svg"));
    let t = svg_texts(&check_svg(&d.join("spec-take2.svg")));
    assert!(
        t.iter()
            .any(|s| s.starts_with("Spectrum of take2.wav ch 1")),
        "{t:?}"
    );

    // --channel picks the channel drawn; one the file lacks is an error for that file.
    let one = d.join("ch1.svg");
    let (code, _, err) = run(d, os!["scan", "--svg", &one, "--channel", "1", &a]);
    assert_eq!(code, 0, "{err}");
    let t = svg_texts(&check_svg(&one));
    assert!(
        t.iter()
            .any(|s| s.starts_with("Spectrum of take1.wav ch 1")),
        "{t:?}"
    );
    assert!(t.iter().any(|s| s.starts_with("no steady tone")), "{t:?}");
    let (code, _, err) = run(d, os!["scan", "--svg", &one, "--channel", "5", &a]);
    assert_eq!(code, 1);
    assert!(err.contains("has no channel 5 (it has 2)"), "{err}");

    // Same-named inputs in two folders: refused before anything is measured.
    std::fs::create_dir(d.join("other")).unwrap();
    let twin = d.join("other").join("take1.wav");
    std::fs::copy(&a, &twin).unwrap();
    let (code, out, err) = run(d, os!["scan", "--svg", &fig, &a, &twin]);
    assert_eq!(code, 2);
    assert!(out.is_empty());
    assert!(err.contains("share the name 'take1'"), "{err}");
    // --channel means nothing without --svg.
    let (code, _, _) = run(d, os!["scan", "--channel", "1", &a]);
    assert_eq!(code, 2);
}
