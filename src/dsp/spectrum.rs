//! Small pieces of spectrum reading shared by the tone and intermodulation analyses: calibrated
//! power per bin, log-parabola peak interpolation and the median used for noise levels.

use realfft::num_complex::Complex;
use realfft::RealFftPlanner;

use super::window::Window;

/// Power per bin of an `n`-point real record's one-sided transform under a window with
/// `Σw² = win_sq`: `|X[m]|²·2/(n·Σw²)`, with the DC and Nyquist bins not doubled, so that the sum
/// over bins estimates the record's mean power. `bin(m)` gives `X[m]` for `m` in `0..out.len()`.
pub fn power_into(n: usize, win_sq: f64, out: &mut [f64], bin: impl Fn(usize) -> Complex<f64>) {
    let norm = 2.0 / (n as f64 * win_sq);
    for (m, p) in out.iter_mut().enumerate() {
        *p = bin(m).norm_sqr() * norm;
    }
    if let Some(first) = out.first_mut() {
        *first *= 0.5;
    }
    if n % 2 == 0 {
        if let Some(last) = out.last_mut() {
            *last *= 0.5;
        }
    }
}

/// Where a peak at bin `k` really lies, as an offset in bins (−0.5..0.5): the vertex of the
/// parabola through the log power of bins `k − 1`, `k`, `k + 1`. `k` must have both neighbours.
pub fn log_parabola_offset(power: &[f64], k: usize) -> f64 {
    let (a, b, c) = (
        power[k - 1].max(1e-300).ln(),
        power[k].max(1e-300).ln(),
        power[k + 1].max(1e-300).ln(),
    );
    let denom = a - 2.0 * b + c;
    if denom.abs() > 0.0 {
        (0.5 * (a - c) / denom).clamp(-0.5, 0.5)
    } else {
        0.0
    }
}

/// The median of `v` (reordered in place); `None` when empty.
pub fn median(v: &mut [f64]) -> Option<f64> {
    if v.is_empty() {
        return None;
    }
    let mid = v.len() / 2;
    let (_, m, _) = v.select_nth_unstable_by(mid, f64::total_cmp);
    Some(*m)
}

/// Peak-amplitude spectrum of a real record under `window`, for drawing: bin `m` (of `0..=n/2`,
/// `m·rate/n` Hz) holds `2·|X_w[m]|/Σw` (DC and Nyquist not doubled), so a sine of peak
/// amplitude A centred on a bin reads A, and `20·log10` of it is the sine's level in dBFS after
/// AES17. Empty for an empty record.
pub fn amplitude_spectrum(x: &[f64], window: Window) -> Vec<f64> {
    let n = x.len();
    if n == 0 {
        return Vec::new();
    }
    let w = window.generate(n);
    let gain: f64 = w.iter().sum();
    let mut buf: Vec<f64> = x.iter().zip(&w).map(|(v, w)| v * w).collect();
    let plan = RealFftPlanner::<f64>::new().plan_fft_forward(n);
    let mut spec = plan.make_output_vec();
    if plan.process(&mut buf, &mut spec).is_err() || gain <= 0.0 {
        return vec![0.0; n / 2 + 1];
    }
    let mut out: Vec<f64> = spec.iter().map(|c| 2.0 * c.norm() / gain).collect();
    if let Some(first) = out.first_mut() {
        *first *= 0.5;
    }
    if n % 2 == 0 {
        if let Some(last) = out.last_mut() {
            *last *= 0.5;
        }
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A sine of peak 0.5 centred on bin 100 reads 0.5 (−6.02 dBFS) under every window (the
    /// coherent gain is divided out); a DC of 0.25 reads 0.25; half a bin off centre the 7-term
    /// Blackman-Harris reads its scalloping loss, 0.4846 dB (shared/reference-values.md §1).
    #[test]
    fn amplitude_spectrum_is_calibrated_in_peak_amplitude() {
        let n = 4096;
        let sine = |bin: f64| -> Vec<f64> {
            (0..n)
                .map(|i| {
                    0.25 + 0.5 * (2.0 * std::f64::consts::PI * bin * i as f64 / n as f64).sin()
                })
                .collect()
        };
        for w in [
            Window::Hann,
            Window::BlackmanHarris4,
            Window::BlackmanHarris7,
        ] {
            let a = amplitude_spectrum(&sine(100.0), w);
            assert_eq!(a.len(), n / 2 + 1);
            assert!((a[100] - 0.5).abs() < 1e-9, "{w:?}: {}", a[100]);
            assert!((a[0] - 0.25).abs() < 1e-9, "{w:?}: DC {}", a[0]);
        }
        let a = amplitude_spectrum(&sine(100.5), Window::BlackmanHarris7);
        let peak = a[100].max(a[101]);
        let loss_db = -20.0 * (peak / 0.5).log10();
        assert!((loss_db - 0.4846).abs() < 0.002, "scalloping {loss_db}");
        assert!(amplitude_spectrum(&[], Window::Hann).is_empty());
    }

    /// Parseval: under a rectangular window (Σw² = N) the calibrated bins of a sine of amplitude
    /// A on a bin sum to its mean power A²/2.
    #[test]
    fn calibrated_power_sums_to_mean_power() {
        let n = 64;
        let x: Vec<f64> = (0..n)
            .map(|i| 0.5 * (2.0 * std::f64::consts::PI * 5.0 * i as f64 / n as f64).sin())
            .collect();
        let bins: Vec<Complex<f64>> = (0..=n / 2)
            .map(|m| {
                x.iter()
                    .enumerate()
                    .map(|(i, &v)| {
                        Complex::from_polar(
                            v,
                            -2.0 * std::f64::consts::PI * (m * i) as f64 / n as f64,
                        )
                    })
                    .sum()
            })
            .collect();
        let mut p = vec![0.0; n / 2 + 1];
        power_into(n, n as f64, &mut p, |m| bins[m]);
        assert!((p.iter().sum::<f64>() - 0.125).abs() < 1e-12);
    }

    /// A Gaussian is a parabola in log: the vertex comes out exactly.
    #[test]
    fn log_parabola_finds_a_gaussian_peak() {
        let centre = 10.3;
        let p: Vec<f64> = (0..20)
            .map(|k| (-((k as f64 - centre).powi(2)) / 4.0).exp())
            .collect();
        assert!((10.0 + log_parabola_offset(&p, 10) - centre).abs() < 1e-12);
        assert_eq!(median(&mut [3.0, 1.0, 2.0]), Some(2.0));
        assert_eq!(median(&mut []), None);
    }
}
