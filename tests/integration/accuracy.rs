//! Accuracy of the measurement core against published figures and analytic expectations.

use brink::analysis::ChannelSettings;
use brink::dsp::clip::ClipKind;
use brink::dsp::tone::ToneSettings;

use crate::util::*;

fn dist(r: &brink::analysis::report::ChannelReport) -> &brink::analysis::report::DistortionReport {
    r.distortion.as_ref().expect("a tone is found")
}

/// Fundamental within 0.01 Hz for 1 s of a steady tone at any frequency (the bench
/// requirement). Frequencies are deliberately off bin centres; the estimator is the IEEE 1057
/// four-parameter fit.
#[test]
fn fundamental_within_a_hundredth_of_a_hertz() {
    let cases: &[(u32, f64)] = &[
        (8_000, 997.0),
        (8_000, 3_210.77),
        (44_100, 20.37),
        (44_100, 1_234.567),
        (48_000, 97.31),
        (48_000, 997.0),
        (48_000, 15_003.33),
        (96_000, 7_777.7),
        (192_000, 440.123),
        (384_000, 19_999.9),
    ];
    for &(rate, f) in cases {
        let x = to_f32(&tones(rate, rate as usize, &[(f, 0.5, 0.3)]));
        let r = analyze(&x, rate, ChannelSettings::default());
        let got = dist(&r).fundamental_hz;
        assert!(
            (got - f).abs() < 0.01,
            "{rate} Hz rate, {f} Hz tone: read {got}"
        );
    }
}

/// Harmonic levels within ±0.1 dB down to −90 dBc for a tone at −20 dBFS, exact harmonics made
/// with Chebyshev polynomials (T_n(cos t) = cos(nt), shared/reference-values.md §6), both as float
/// and rounded to 24 bits. Phases: every harmonic in cosine phase with a cosine fundamental;
/// cos(kφ) = sin(kφ + 90°), so in the sine convention θ_k − k·θ_1 = 90° − k·90° (mod 360).
#[test]
fn harmonic_levels_within_a_tenth_of_a_db_down_to_minus_90_dbc() {
    let rate = 48_000;
    let f0 = 1_001.7;
    let a1 = lin(-20.0);
    let recipe = [(2, -30.0), (3, -50.0), (4, -70.0), (5, -90.0), (7, -60.0)];
    let n = rate as usize * 2;
    let x: Vec<f64> = (0..n)
        .map(|i| {
            let c = (2.0 * std::f64::consts::PI * f0 * i as f64 / rate as f64 + 0.4).cos();
            // T_n by recurrence; T_n(c) = cos(n·θ).
            let (mut t0, mut t1) = (1.0, c);
            let mut y = a1 * c;
            for k in 2..=7 {
                let t2 = 2.0 * c * t1 - t0;
                if let Some(&(_, dbc)) = recipe.iter().find(|(o, _)| *o == k) {
                    y += a1 * lin(dbc) * t2;
                }
                t0 = t1;
                t1 = t2;
            }
            y
        })
        .collect();
    for (label, samples) in [("float", to_f32(&x)), ("24-bit", quantise(&x, 24))] {
        let r = analyze(&samples, rate, ChannelSettings::default());
        let d = dist(&r);
        assert!((d.fundamental_dbfs.unwrap() + 20.0).abs() < 0.01, "{label}");
        for &(order, dbc) in &recipe {
            let h = d.harmonics.iter().find(|h| h.order == order).unwrap();
            let got = h.level_dbc.unwrap();
            assert!((got - dbc).abs() <= 0.1, "{label} H{order}: {got} vs {dbc}");
            let want_phase = ((1.0 - order as f64) * 90.0 + 180.0).rem_euclid(360.0) - 180.0;
            let err = (h.phase_deg - want_phase + 540.0).rem_euclid(360.0) - 180.0;
            if dbc >= -70.0 {
                assert!(
                    err.abs() < 0.5,
                    "{label} H{order} phase {} vs {want_phase}",
                    h.phase_deg
                );
            }
        }
        // THD_F from the recipe (IEEE usage √ΣH²/H1, shared/reference-values.md §8).
        let want: f64 = recipe
            .iter()
            .map(|(_, d)| lin(*d).powi(2))
            .sum::<f64>()
            .sqrt();
        assert!(
            (d.thd_pct.unwrap() / 100.0 / want - 1.0).abs() < 0.005,
            "{label} THD {}",
            d.thd_pct.unwrap()
        );
    }
}

/// A float pure sine at −1 dBFS reads THD+N ≤ −120 dB (the requirement; AES17
/// definition, everything but the fundamental within 20 Hz–20 kHz).
#[test]
fn pure_float_sine_has_thd_n_below_minus_120_db() {
    for &(rate, f) in &[(48_000u32, 997.0), (44_100, 1_000.0), (96_000, 6_001.3)] {
        let x = to_f32(&tones(rate, rate as usize, &[(f, lin(-1.0), 1.0)]));
        let r = analyze(&x, rate, ChannelSettings::default());
        let thdn = dist(&r).thd_n_db.unwrap();
        assert!(thdn <= -120.0, "{rate}/{f}: THD+N {thdn}");
    }
}

/// Ideal N-bit quantiser: SNR = 6.02·N + 1.76 dB for a full-scale sine, ENOB = N (IEEE 1241;
/// shared/reference-values.md §4: 16 bit 98.09 dB, a rounded 997 Hz 32767-peak sine ≈ 98.07 dB).
#[test]
fn rounded_sines_read_the_ideal_quantiser_sinad_and_enob() {
    let rate = 48_000;
    for &(bits, peak_dbfs) in &[(16u32, db(32767.0 / 32768.0)), (16, -0.5), (24, -0.1)] {
        let x = tones(rate, rate as usize * 2, &[(997.0, lin(peak_dbfs), 0.2)]);
        let q = quantise(&x, bits);
        let r = analyze(&q, rate, ChannelSettings::default());
        let d = dist(&r);
        let ideal = 6.02 * bits as f64 + 1.76 + peak_dbfs;
        let sinad = d.sinad_db.unwrap();
        assert!(
            (sinad - ideal).abs() < 0.5,
            "{bits} bit at {peak_dbfs} dBFS: SINAD {sinad} vs {ideal}"
        );
        let enob = d.enob_bits.unwrap();
        assert!((enob - bits as f64).abs() < 0.15, "{bits} bit: ENOB {enob}");
    }
}

/// EBU Tech 3341 true-peak signals at 48 kHz read within +0.2/−0.4 dB of the published
/// figures (shared/reference-values.md §2). Signals are faded in over 100 samples, as the
/// reference file advises, so start-up ringing plays no part.
#[test]
fn ebu_tech_3341_true_peak_cases() {
    let rate = 48_000u32;
    let fs = rate as f64;
    let cases = [
        (fs / 4.0, 0.50, 0.0, -6.0),
        (fs / 4.0, 0.50, 45.0, -6.0),
        (fs / 6.0, 0.50, 60.0, -6.0),
        (fs / 8.0, 0.50, 67.5, -6.0),
        (fs / 4.0, 1.41, 45.0, 3.0),
    ];
    for (f, amp, phase, want) in cases {
        let mut x = tones(rate, rate as usize, &[(f, amp, f64::to_radians(phase))]);
        for (i, v) in x.iter_mut().take(100).enumerate() {
            *v *= i as f64 / 100.0;
        }
        let r = analyze(&to_f32(&x), rate, ChannelSettings::default());
        let got = r.level.true_peak_dbtp.unwrap();
        assert!(
            got - want <= 0.2 && want - got <= 0.4,
            "f={f} amp={amp} phase={phase}: {got} dBTP"
        );
    }
}

/// Cross-check against a general-purpose reference implementation from the registry: the
/// `ebur128` crate's true-peak mode (BS.1770-4), on band-limited programme-like signals.
#[test]
fn true_peak_agrees_with_the_ebur128_crate() {
    for &rate in &[44_100u32, 48_000, 96_000] {
        for seed in 0..4u64 {
            let parts: Vec<(f64, f64, f64)> = (0..6)
                .map(|k| {
                    let f = 300.0 + 2_900.0 * ((seed * 7 + k) % 7) as f64 + 111.1 * k as f64;
                    (f, 0.12, (seed + k) as f64)
                })
                .collect();
            let mut x = tones(rate, rate as usize / 2, &parts);
            for (i, v) in x.iter_mut().take(200).enumerate() {
                *v *= i as f64 / 200.0;
            }
            let xs = to_f32(&x);
            let mut e = ebur128::EbuR128::new(1, rate, ebur128::Mode::TRUE_PEAK).unwrap();
            e.add_frames_f32(&xs).unwrap();
            let theirs = db(e.true_peak(0).unwrap());
            let r = analyze(&xs, rate, ChannelSettings::default());
            let ours = r.level.true_peak_dbtp.unwrap();
            assert!(
                (ours - theirs).abs() < 0.15,
                "rate {rate} seed {seed}: ours {ours}, ebur128 {theirs}"
            );
        }
    }
}

/// The time of the first over within 10 ms (the requirement); overs are runs of ≥ 3
/// samples at full scale (common practice).
#[test]
fn first_over_is_timed_to_the_sample() {
    let rate = 48_000;
    let mut x = tones(rate, rate as usize * 3, &[(440.0, 0.5, 0.0)]);
    let onset = 1.234_5;
    let n0 = (onset * rate as f64) as usize;
    for v in &mut x[n0..n0 + 480] {
        *v = (*v * 4.0).clamp(-1.0, 1.0);
    }
    let q = quantise(&x, 24);
    let mut s = ChannelSettings::default();
    s.clip.full_scale = brink::dsp::clip::ClipSettings::full_scale_for_bits(Some(24));
    let r = analyze(&q, rate, s);
    let first = r.clipping.first_clip_s.unwrap();
    assert!((first - onset).abs() < 0.010, "first over at {first}");
    assert!(r.clipping.overs >= 8, "{}", r.clipping.overs);
    assert_eq!(r.clipping.flat_tops, 0);
    assert_eq!(r.clipping.events.len(), 1);
    assert_eq!(r.clipping.events[0].kind, ClipKind::Over);
}

/// A sine flat-topped at −6 dBFS with noise at −96 dBFS added afterwards is reported as flat-top
/// clipping at −6.0 ± 0.2 dBFS; a clean sine with the same noise reports none (the issue's
/// requirement). Noise level in AES17 terms: rms = 10^(−96/20)/√2.
#[test]
fn flat_tops_under_noise_at_minus_six_dbfs() {
    let rate = 48_000;
    let frames = rate as usize * 2;
    let noise = gaussian(frames, lin(-96.0) / 2f64.sqrt(), 7);
    for &f in &[60.0, 440.0, 997.0, 3_000.0] {
        // A plateau must span at least 3 samples (two equal samples also occur at any smooth
        // peak sampled symmetrically). 3 kHz clipped by 1 dB holds ≈ 2.4 samples at 48 kHz, so
        // that mild case is only asked of the slower tones.
        let drives: &[f64] = if f > 1_000.0 {
            &[6.0, 12.0]
        } else {
            &[1.0, 6.0, 12.0]
        };
        for &drive_db in drives {
            let clipped: Vec<f64> = tones(rate, frames, &[(f, lin(-6.0 + drive_db), 0.1)])
                .iter()
                .zip(&noise)
                .map(|(v, n)| v.clamp(-lin(-6.0), lin(-6.0)) + n)
                .collect();
            let r = analyze(&to_f32(&clipped), rate, ChannelSettings::default());
            let k = &r.clipping;
            assert!(k.flat_tops > 0, "{f} Hz, drive {drive_db} dB: no flat top");
            assert_eq!(k.overs, 0);
            let level = k.clip_level_dbfs.unwrap();
            assert!(
                (level + 6.0).abs() <= 0.2,
                "{f} Hz drive {drive_db}: level {level}"
            );
            // Most half-cycles are caught.
            let half_cycles = 2.0 * f * 2.0;
            assert!(
                k.flat_tops as f64 >= 0.9 * half_cycles,
                "{f} Hz drive {drive_db}: {} of {half_cycles}",
                k.flat_tops
            );
        }
        for &amp_db in &[-6.0, -1.0, -20.0] {
            let clean: Vec<f64> = tones(rate, frames, &[(f, lin(amp_db), 0.1)])
                .iter()
                .zip(&noise)
                .map(|(v, n)| v + n)
                .collect();
            let r = analyze(&to_f32(&clean), rate, ChannelSettings::default());
            assert_eq!(r.clipping.flat_tops, 0, "clean {f} Hz at {amp_db} dBFS");
            assert_eq!(r.clipping.overs, 0);
        }
    }
}

/// Silence and noise-only channels report no fundamental rather than a made-up one.
#[test]
fn no_fundamental_for_silence_or_noise() {
    let rate = 48_000;
    let n = rate as usize;
    let silent = vec![0.0f32; n];
    assert!(analyze(&silent, rate, ChannelSettings::default())
        .distortion
        .is_none());
    let white = to_f32(&gaussian(n, 0.1, 3));
    assert!(analyze(&white, rate, ChannelSettings::default())
        .distortion
        .is_none());
    // Brown-ish noise (integrated white noise, high-passed by a leak): energy piles up at low
    // frequencies without forming a tone.
    let mut acc = 0.0;
    let brown: Vec<f64> = gaussian(n, 0.01, 5)
        .iter()
        .map(|v| {
            acc = 0.999 * acc + v;
            acc
        })
        .collect();
    assert!(analyze(&to_f32(&brown), rate, ChannelSettings::default())
        .distortion
        .is_none());
    // A tone well above that noise is found.
    let toned: Vec<f64> = tones(rate, n, &[(1_000.0, 0.3, 0.0)])
        .iter()
        .zip(&brown)
        .map(|(a, b)| a + b * 0.1)
        .collect();
    assert!(analyze(&to_f32(&toned), rate, ChannelSettings::default())
        .distortion
        .is_some());
}

/// A fundamental given by the user is honoured even when a louder tone is present.
#[test]
fn a_given_fundamental_is_measured() {
    let rate = 48_000;
    let x = to_f32(&tones(
        rate,
        rate as usize,
        &[(1_000.0, 0.5, 0.0), (3_000.0, 0.2, 0.0)],
    ));
    // With the louder 1 kHz tone present the share test is relaxed: this is a two-tone signal.
    let s = ChannelSettings {
        tone: ToneSettings {
            fundamental_hz: Some(3_000.0),
            min_tone_fraction: 0.1,
            ..ToneSettings::default()
        },
        ..ChannelSettings::default()
    };
    let r = analyze(&x, rate, s);
    assert!((dist(&r).fundamental_hz - 3_000.0).abs() < 0.01);
}

/// A tone whose harmonics all lie above the band has no measurable THD: `null`, not 0 or −0.
#[test]
fn thd_is_null_when_no_harmonic_lies_in_the_band() {
    let rate = 96_000;
    let x = to_f32(&tones(rate, rate as usize, &[(12_000.0, 0.5, 0.0)]));
    let r = analyze(&x, rate, ChannelSettings::default());
    let d = dist(&r);
    assert!(d.harmonics.is_empty());
    assert_eq!(d.thd_pct, None);
    assert_eq!(d.thd_db, None);
    assert!((d.fundamental_hz - 12_000.0).abs() < 0.01);
}
