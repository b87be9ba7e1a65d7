//! Waveforms whose harmonic content is known in closed form (Fourier series, Chebyshev
//! polynomials, clipped-sine coefficients; shared/reference-values.md §6, §8), run through the
//! real analysis path.

use std::f64::consts::PI;

use brink::analysis::report::DistortionReport;
use brink::analysis::ChannelSettings;
use brink::dsp::tone::ToneSettings;

use crate::util::*;

const RATE: u32 = 48_000;

/// Sum a sine series `Σ b_n sin(n·ω·t)` (n ≥ 1) plus `dc`, keeping orders below 20 kHz.
fn series(f0: f64, frames: usize, dc: f64, coeff: impl Fn(usize) -> f64) -> Vec<f64> {
    let orders: Vec<(usize, f64)> = (1..)
        .take_while(|&n| n as f64 * f0 < 20_000.0)
        .map(|n| (n, coeff(n)))
        .filter(|(_, b)| *b != 0.0)
        .collect();
    (0..frames)
        .map(|i| {
            let t = 2.0 * PI * f0 * i as f64 / RATE as f64;
            dc + orders
                .iter()
                .map(|&(n, b)| b * (n as f64 * t).sin())
                .sum::<f64>()
        })
        .collect()
}

fn measure(x: &[f64], max_order: usize) -> DistortionReport {
    let s = ChannelSettings {
        tone: ToneSettings {
            max_order,
            ..ToneSettings::default()
        },
        ..ChannelSettings::default()
    };
    analyze(&to_f32(x), RATE, s).distortion.expect("tone")
}

/// THD over the orders the analyser reports, from the series' own coefficients.
fn thd_of(coeff: impl Fn(usize) -> f64, orders: impl Iterator<Item = usize>) -> f64 {
    orders.map(|n| coeff(n).powi(2)).sum::<f64>().sqrt() / coeff(1).abs()
}

fn assert_levels(d: &DistortionReport, coeff: &dyn Fn(usize) -> f64, label: &str) {
    for h in &d.harmonics {
        let want = coeff(h.order).abs() / coeff(1).abs();
        if want > 1e-5 {
            let got = h.level_dbc.unwrap();
            assert!(
                (got - db(want)).abs() < 0.05,
                "{label} H{}: {got} vs {}",
                h.order,
                db(want)
            );
        }
    }
}

/// Square wave (4/π)Σ_odd sin(nt)/n: odd harmonics only, at 1/n (−6.02 dB per octave of
/// order), all in phase (0°); full-series THD_F √(π²/8 − 1) = 48.34 %.
#[test]
fn square_wave() {
    let coeff = |n: usize| {
        if n % 2 == 1 {
            4.0 / (PI * n as f64)
        } else {
            0.0
        }
    };
    let d = measure(&series(500.0, RATE as usize, 0.0, coeff), 39);
    assert_levels(&d, &coeff, "square");
    let want = thd_of(coeff, d.harmonics.iter().map(|h| h.order));
    assert!(
        (d.thd_pct.unwrap() / 100.0 / want - 1.0).abs() < 1e-3,
        "THD {} vs {}",
        d.thd_pct.unwrap(),
        100.0 * want
    );
    // The reported orders reach H39; the closed form for the whole series bounds it from above.
    let full = (PI * PI / 8.0 - 1.0).sqrt();
    assert!((full - 0.4834).abs() < 1e-4 && want < full && want > 0.95 * full);
    assert!(
        (d.falloff_db_per_octave.unwrap() + 6.02).abs() < 0.05,
        "{:?}",
        d.falloff_db_per_octave
    );
    assert!(d.odd_even_db.unwrap() < -80.0, "{:?}", d.odd_even_db);
    for h in d.harmonics.iter().filter(|h| h.order % 2 == 1) {
        assert!(
            h.phase_deg.abs() < 0.5,
            "square H{} phase {}",
            h.order,
            h.phase_deg
        );
    }
}

/// Triangle (8/π²)Σ_odd (−1)^((n−1)/2) sin(nt)/n²: odd only, 1/n² (−12.04 dB/octave), phases
/// alternating 180° / 0°; full-series THD_F √(π⁴/96 − 1) = 12.12 %.
#[test]
fn triangle_wave() {
    let coeff = |n: usize| {
        if n % 2 == 1 {
            let sign = if (n / 2) % 2 == 0 { 1.0 } else { -1.0 };
            sign * 8.0 / (PI * PI * (n * n) as f64)
        } else {
            0.0
        }
    };
    let d = measure(&series(400.0, RATE as usize, 0.0, coeff), 20);
    assert_levels(&d, &coeff, "triangle");
    let full = (PI.powi(4) / 96.0 - 1.0).sqrt();
    assert!((full - 0.1212).abs() < 1e-4);
    assert!(
        (d.thd_pct.unwrap() / 100.0 - full).abs() < 0.002,
        "THD {}",
        d.thd_pct.unwrap()
    );
    assert!((d.falloff_db_per_octave.unwrap() + 12.04).abs() < 0.1);
    for h in d
        .harmonics
        .iter()
        .filter(|h| h.order % 2 == 1 && h.order < 15)
    {
        let want = if coeff(h.order) > 0.0 { 0.0 } else { 180.0 };
        let err = (h.phase_deg - want + 540.0).rem_euclid(360.0) - 180.0;
        assert!(
            err.abs() < 0.5,
            "triangle H{} phase {}",
            h.order,
            h.phase_deg
        );
    }
}

/// Sawtooth (2/π)Σ(−1)^(n+1) sin(nt)/n: every harmonic at 1/n; odd and even equally strong
/// pattern; full-series THD_F √(π²/6 − 1) = 80.31 %.
#[test]
fn sawtooth_wave() {
    let coeff = |n: usize| {
        let sign = if n % 2 == 1 { 1.0 } else { -1.0 };
        sign * 2.0 / (PI * n as f64)
    };
    let d = measure(&series(250.0, RATE as usize, 0.0, coeff), 40);
    assert_levels(&d, &coeff, "sawtooth");
    let want = thd_of(coeff, 2..=40);
    assert!((d.thd_pct.unwrap() / 100.0 / want - 1.0).abs() < 1e-3);
    let full = (PI * PI / 6.0 - 1.0).sqrt();
    assert!((full - 0.8031).abs() < 1e-4 && want < full);
    assert!((d.falloff_db_per_octave.unwrap() + 6.02).abs() < 0.05);
    // Even over odd: Σ_even 1/n² vs Σ_odd≥3 1/n² over orders 2..40.
    let even: f64 = (2..=40).step_by(2).map(|n| (1.0 / n as f64).powi(2)).sum();
    let odd: f64 = (3..=39).step_by(2).map(|n| (1.0 / n as f64).powi(2)).sum();
    assert!((d.odd_even_db.unwrap() - 10.0 * (even / odd).log10()).abs() < 0.02);
}

/// Half-wave rectified sine 1/π + ½ sin t − (2/π)Σ cos(2kt)/(4k²−1): besides H1, even harmonics
/// only; full-series THD_F 43.52 %. Odd/even balance is strongly positive.
#[test]
fn half_wave_rectified_sine() {
    let f0 = 200.0;
    let frames = RATE as usize;
    let x: Vec<f64> = (0..frames)
        .map(|i| {
            let t = 2.0 * PI * f0 * i as f64 / RATE as f64;
            let mut y = 1.0 / PI + 0.5 * t.sin();
            for k in 1.. {
                if 2.0 * k as f64 * f0 >= 20_000.0 {
                    break;
                }
                y -= 2.0 / PI * (2.0 * k as f64 * t).cos() / (4.0 * (k * k) as f64 - 1.0);
            }
            y
        })
        .collect();
    let d = measure(&x, 40);
    let coeff = |n: usize| match n {
        1 => 0.5,
        n if n % 2 == 0 => 2.0 / (PI * ((n * n) as f64 - 1.0)),
        _ => 0.0,
    };
    assert_levels(&d, &coeff, "half-wave");
    let full = 0.4352;
    assert!(
        (d.thd_pct.unwrap() / 100.0 - full).abs() < 0.002,
        "THD {}",
        d.thd_pct.unwrap()
    );
    assert!(d.odd_even_db.unwrap() > 80.0, "{:?}", d.odd_even_db);
}

/// Symmetric hard clip of sin t at ±c, α = arcsin c: odd harmonics only with
/// b_n = (2/(πn))·[S(n−1) + S(n+1)], S(m) = sin(mα)/m, S(0) = α (shared/reference-values.md §6;
/// c = 0.5 → 23.29 %, 0.7 → 13.76 %, 0.9 → 4.22 %, 0.99 → 0.286 % with H3 at −58.6 dBc).
#[test]
fn symmetric_hard_clip_matches_the_closed_form() {
    let s = |m: i64, a: f64| {
        if m == 0 {
            a
        } else {
            (m as f64 * a).sin() / m as f64
        }
    };
    for &(c, full_thd) in &[(0.5, 0.2329), (0.7, 0.1376), (0.9, 0.0422), (0.99, 0.00286)] {
        let alpha = f64::asin(c);
        let coeff = |n: usize| {
            if n % 2 == 0 {
                0.0
            } else {
                2.0 / (PI * n as f64) * (s(n as i64 - 1, alpha) + s(n as i64 + 1, alpha))
            }
        };
        // A slow tone keeps the clipped waveform's aliases far below the harmonics measured.
        let f0 = 50.0;
        let x: Vec<f64> = tones(RATE, RATE as usize * 2, &[(f0, 1.0, 0.0)])
            .iter()
            .map(|v| v.clamp(-c, c))
            .collect();
        let d = measure(&x, 40);
        assert_levels(&d, &coeff, &format!("clip {c}"));
        let partial = thd_of(coeff, 2..=40);
        assert!(
            (d.thd_pct.unwrap() / 100.0 / partial - 1.0).abs() < 2e-3,
            "c={c}: THD {} vs {}",
            d.thd_pct.unwrap(),
            partial * 100.0
        );
        // The published full-series figure, less the tail beyond H40.
        assert!(
            partial <= full_thd * 1.001 && partial > full_thd * 0.97,
            "c={c}: {partial} vs {full_thd}"
        );
        // Symmetric curve → odd harmonics only.
        for h in d.harmonics.iter().filter(|h| h.order % 2 == 0) {
            assert!(
                h.level_dbc.unwrap() < -100.0,
                "c={c} H{} at {:?}",
                h.order,
                h.level_dbc
            );
        }
    }
    let h3 = {
        let a = f64::asin(0.99);
        let b = |n: f64| {
            2.0 / (PI * n) * ((n - 1.0) * a).sin() / (n - 1.0)
                + 2.0 / (PI * n) * ((n + 1.0) * a).sin() / (n + 1.0)
        };
        db((b(3.0) / (2.0 / PI * (a + (2.0 * a).sin() / 2.0))).abs())
    };
    assert!((h3 + 58.6).abs() < 0.05, "H3 at c = 0.99: {h3}");
}

/// An odd-symmetric transfer curve (tanh) yields odd harmonics only; biasing it (an asymmetric,
/// single-ended stage) brings strong even harmonics and a positive or near-zero odd/even balance
/// (common practice; shared/reference-values.md §6).
#[test]
fn symmetric_and_asymmetric_soft_curves() {
    let x = tones(RATE, RATE as usize, &[(1_000.0, 1.0, 0.0)]);
    let sym: Vec<f64> = x.iter().map(|v| (2.0 * v).tanh() * 0.5).collect();
    let d = measure(&sym, 20);
    assert!(
        d.odd_even_db.unwrap() < -100.0,
        "symmetric: {:?}",
        d.odd_even_db
    );
    let asym: Vec<f64> = x
        .iter()
        .map(|v| ((2.0 * (v + 0.4)).tanh() - (0.8f64).tanh()) * 0.5)
        .collect();
    let d = measure(&asym, 20);
    let h2 = d
        .harmonics
        .iter()
        .find(|h| h.order == 2)
        .unwrap()
        .level_dbc
        .unwrap();
    assert!(h2 > -30.0, "asymmetric H2 {h2}");
    assert!(
        d.odd_even_db.unwrap() > -3.0,
        "asymmetric balance {:?}",
        d.odd_even_db
    );
    // Soft curves fall off faster than a hard clip's ~1/n.
    assert!(
        d.falloff_db_per_octave.unwrap() < -12.0,
        "{:?}",
        d.falloff_db_per_octave
    );
}

/// THD_F vs THD_R on the vector V1..V4 = 1, 0.1, 0.05, 0.02: THD_F 11.35782 %
/// (shared/reference-values.md §8). brink reports THD_F.
#[test]
fn thd_is_thd_f_on_the_published_vector() {
    let parts = [
        (1_000.0, 0.5, 0.0),
        (2_000.0, 0.05, 0.3),
        (3_000.0, 0.025, 1.1),
        (4_000.0, 0.01, 2.0),
    ];
    let d = measure(&tones(RATE, RATE as usize, &parts), 20);
    assert!(
        (d.thd_pct.unwrap() - 11.35782).abs() < 0.001,
        "THD {}",
        d.thd_pct.unwrap()
    );
}
