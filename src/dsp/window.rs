//! Cosine-sum windows (periodic form) and their figures of merit.
//!
//! `w[n] = Σ a_k cos(2πkn/N)`; coefficients from Harris 1978 (Hann, 4-term Blackman-Harris),
//! Albrecht 2001 (7-term Blackman-Harris) and Heinzel, Rüdiger & Schilling 2002 (HFT flat-tops).

use std::f64::consts::PI;

use realfft::num_complex::Complex;

/// The windows brink knows. Each is a periodic cosine sum.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub enum Window {
    /// Hann (Harris 1978).
    Hann,
    /// 4-term Blackman-Harris, −92 dB sidelobes (Harris 1978).
    BlackmanHarris4,
    /// 7-term Blackman-Harris, ≈ −180 dB sidelobes (Albrecht 2001).
    BlackmanHarris7,
    /// HFT90D flat-top (Heinzel 2002).
    Hft90d,
    /// HFT95 flat-top (Heinzel 2002).
    Hft95,
}

impl Window {
    /// The cosine-sum coefficients `a_0, a_1, ...` with alternating signs.
    pub fn coefficients(self) -> &'static [f64] {
        match self {
            Window::Hann => &[0.5, -0.5],
            Window::BlackmanHarris4 => &[0.35875, -0.48829, 0.14128, -0.01168],
            Window::BlackmanHarris7 => &[
                0.271_051_400_693_42,
                -0.433_297_939_234_48,
                0.218_122_999_543_11,
                -0.065_925_446_388_03,
                0.010_811_742_098_37,
                -0.000_776_584_825_22,
                0.000_013_887_217_35,
            ],
            Window::Hft90d => &[1.0, -1.942604, 1.340318, -0.440811, 0.043097],
            Window::Hft95 => &[1.0, -1.9383379, 1.3045202, -0.4028270, 0.0350665],
        }
    }

    /// Half-width of the main lobe in bins (a K-term cosine sum has zeros at ±K bins).
    pub fn main_lobe_half_width(self) -> usize {
        self.coefficients().len()
    }

    /// Fill `out` with the periodic window of length `out.len()`.
    pub fn fill(self, out: &mut [f64]) {
        let n = out.len();
        if n == 0 {
            return;
        }
        let coeffs = self.coefficients();
        for (i, w) in out.iter_mut().enumerate() {
            // cos(kx) from cos(x) by the Chebyshev recurrence T_(k+1) = 2c·T_k − T_(k−1):
            // one cosine per sample instead of one per term.
            let c = (2.0 * PI * i as f64 / n as f64).cos();
            let (mut t_prev, mut t) = (1.0, c);
            let mut acc = coeffs[0];
            for &a in &coeffs[1..] {
                acc += a * t;
                let next = 2.0 * c * t - t_prev;
                t_prev = t;
                t = next;
            }
            *w = acc;
        }
    }

    /// The periodic window of length `n`.
    pub fn generate(self, n: usize) -> Vec<f64> {
        let mut w = vec![0.0; n];
        self.fill(&mut w);
        w
    }

    /// The window's transform `K(δ) = Σ w[n]·e^(−i2πδn/N)` at `delta` bins, in closed form:
    /// each cosine term shifts the rectangular window's Dirichlet kernel
    /// `D(θ) = e^(−iπθ(N−1)/N)·sin(πθ)/sin(πθ/N)` by ± its index.
    pub fn kernel(self, n: usize, delta: f64) -> Complex<f64> {
        let nf = n as f64;
        let dirichlet = |theta: f64| -> Complex<f64> {
            let den = (PI * theta / nf).sin();
            let mag = if den.abs() < 1e-300 {
                nf
            } else {
                (PI * theta).sin() / den
            };
            Complex::from_polar(mag, -PI * theta * (nf - 1.0) / nf)
        };
        let coeffs = self.coefficients();
        let mut k = dirichlet(delta) * coeffs[0];
        for (j, &a) in coeffs.iter().enumerate().skip(1) {
            k += (dirichlet(delta - j as f64) + dirichlet(delta + j as f64)) * (a / 2.0);
        }
        k
    }

    /// Bin `m` of the windowed transform, from the *rectangular* (unwindowed) real-input
    /// transform `rect` (bins 0..=N/2 of an N-point record, N even): a periodic cosine-sum window
    /// multiplies in time, so it is a short convolution across bins,
    /// `X_w[m] = a₀·R[m] + Σ_j (a_j/2)·(R[m−j] + R[m+j])`, with `R[−k] = R̄[k]` and
    /// `R[N/2+k] = R̄[N/2−k]` for a real record. Exact, as the time-domain product is.
    pub fn windowed_bin(self, rect: &[Complex<f64>], m: usize) -> Complex<f64> {
        let half = rect.len() - 1;
        let at = |k: isize| -> Complex<f64> {
            if k < 0 {
                rect[k.unsigned_abs()].conj()
            } else if k as usize > half {
                rect[2 * half - k as usize].conj()
            } else {
                rect[k as usize]
            }
        };
        let coeffs = self.coefficients();
        let m = m as isize;
        let mut x = at(m) * coeffs[0];
        for (j, &a) in coeffs.iter().enumerate().skip(1) {
            let j = j as isize;
            x += (at(m - j) + at(m + j)) * (a / 2.0);
        }
        x
    }
}

/// The window of length `n`, computed once per (window, length) for the whole process and
/// shared: every channel's analyser asks for the same few lengths.
pub fn shared(window: Window, n: usize) -> std::sync::Arc<Vec<f64>> {
    use std::collections::HashMap;
    use std::sync::{Arc, Mutex, OnceLock};
    type Cache = Mutex<HashMap<(Window, usize), Arc<Vec<f64>>>>;
    static CACHE: OnceLock<Cache> = OnceLock::new();
    let cache = CACHE.get_or_init(|| Mutex::new(HashMap::new()));
    let mut map = cache.lock().unwrap_or_else(|p| p.into_inner());
    if let Some(w) = map.get(&(window, n)) {
        return Arc::clone(w);
    }
    // Keep the cache small: lengths come from settings, but a long-running process could see
    // many; forget them all past a handful.
    if map.len() >= 16 {
        map.clear();
    }
    let w = Arc::new(window.generate(n));
    map.insert((window, n), Arc::clone(&w));
    w
}

/// Coherent gain `Σw/N`.
pub fn coherent_gain(w: &[f64]) -> f64 {
    if w.is_empty() {
        return 0.0;
    }
    w.iter().sum::<f64>() / w.len() as f64
}

/// Equivalent noise bandwidth in bins, `N·Σw²/(Σw)²`.
pub fn enbw_bins(w: &[f64]) -> f64 {
    let s1: f64 = w.iter().sum();
    let s2: f64 = w.iter().map(|x| x * x).sum();
    if s1 == 0.0 {
        return 0.0;
    }
    w.len() as f64 * s2 / (s1 * s1)
}

/// Magnitude response of the window at `offset_bins` from a bin centre, relative to its DC gain,
/// computed by direct summation (used for scalloping-loss and sidelobe figures).
pub fn response_at(w: &[f64], offset_bins: f64) -> f64 {
    let n = w.len() as f64;
    let (mut re, mut im) = (0.0, 0.0);
    for (i, &x) in w.iter().enumerate() {
        let ph = -2.0 * PI * offset_bins * i as f64 / n;
        re += x * ph.cos();
        im += x * ph.sin();
    }
    (re * re + im * im).sqrt() / w.iter().sum::<f64>()
}

#[cfg(test)]
mod tests {
    use super::*;

    fn db(x: f64) -> f64 {
        20.0 * x.log10()
    }

    // ENBW and scalloping loss: Harris 1978 Table 1, Heinzel 2002 Appendix C, Albrecht 2001
    // (figures as collected in shared/reference-values.md §1).
    #[test]
    fn enbw_and_scalloping_match_published_figures() {
        let cases = [
            (Window::Hann, 1.5000, Some(1.4236)),
            (Window::BlackmanHarris4, 2.0044, Some(0.8256)),
            (Window::BlackmanHarris7, 2.6319, Some(0.4846)),
            (Window::Hft90d, 3.8832, None),
            (Window::Hft95, 3.8112, None),
        ];
        for (win, enbw, scallop) in cases {
            let w = win.generate(4096);
            assert!(
                (enbw_bins(&w) - enbw).abs() < 2e-4,
                "{win:?}: ENBW {} vs {enbw}",
                enbw_bins(&w)
            );
            if let Some(s) = scallop {
                let loss = -db(response_at(&w, 0.5));
                assert!((loss - s).abs() < 2e-3, "{win:?}: scallop {loss} vs {s}");
            }
        }
    }

    // Flat-top amplitude flatness: Heinzel 2002 gives ±0.0039 dB (HFT90D) and ±0.0044 dB (HFT95)
    // across a bin.
    #[test]
    fn flat_tops_are_flat_within_published_bounds() {
        for (win, bound) in [(Window::Hft90d, 0.0039), (Window::Hft95, 0.0044)] {
            let w = win.generate(2048);
            for i in 0..=10 {
                let off = i as f64 * 0.05;
                let err = db(response_at(&w, off)).abs();
                assert!(err <= bound + 2e-4, "{win:?} at {off} bins: {err} dB");
            }
        }
    }

    // Highest sidelobe of the 4-term Blackman-Harris: −92 dB (Harris 1978); 7-term below −170 dB
    // (Albrecht 2001 quotes ≈ −180 dB).
    #[test]
    fn sidelobes_stay_below_published_levels() {
        let w = Window::BlackmanHarris4.generate(1024);
        let worst = (1..400)
            .map(|i| db(response_at(&w, 4.0 + i as f64 * 0.05)))
            .fold(f64::MIN, f64::max);
        assert!(worst < -91.5 && worst > -93.5, "BH4 worst sidelobe {worst}");
        let w = Window::BlackmanHarris7.generate(1024);
        let worst = (0..200)
            .map(|i| db(response_at(&w, 7.2 + i as f64 * 0.1)))
            .fold(f64::MIN, f64::max);
        assert!(worst < -170.0, "BH7 worst sidelobe {worst}");
    }

    /// The closed-form kernel against direct summation of the window's transform.
    #[test]
    fn kernel_matches_direct_summation() {
        for (win, n) in [
            (Window::BlackmanHarris7, 1000),
            (Window::BlackmanHarris4, 777),
        ] {
            let w = win.generate(n);
            for &delta in &[0.0, 0.3, -0.5, 1.0, 2.71, -6.2, 9.5] {
                let direct: Complex<f64> = w
                    .iter()
                    .enumerate()
                    .map(|(i, &x)| Complex::from_polar(x, -2.0 * PI * delta * i as f64 / n as f64))
                    .sum();
                let k = win.kernel(n, delta);
                assert!(
                    (k - direct).norm() < 1e-9 * w.iter().sum::<f64>(),
                    "{win:?} δ={delta}: {k} vs {direct}"
                );
            }
        }
    }

    /// Windowing by convolution across bins equals windowing in time (the FFT of `x·w`).
    #[test]
    fn windowed_bins_from_the_rectangular_transform() {
        use realfft::RealFftPlanner;
        let n = 960;
        let x: Vec<f64> = (0..n)
            .map(|i| (0.37 * i as f64).sin() + 0.2 * (1.9 * i as f64 + 0.5).cos() + 0.01)
            .collect();
        let mut planner = RealFftPlanner::<f64>::new();
        let fft = planner.plan_fft_forward(n);
        let mut input = x.clone();
        let mut rect = fft.make_output_vec();
        fft.process(&mut input, &mut rect).expect("fft");
        for win in [Window::BlackmanHarris4, Window::BlackmanHarris7] {
            let w = win.generate(n);
            let mut input: Vec<f64> = x.iter().zip(&w).map(|(a, b)| a * b).collect();
            let mut want = fft.make_output_vec();
            fft.process(&mut input, &mut want).expect("fft");
            for m in (0..=n / 2).step_by(7).chain([0, 1, 2, n / 2 - 1, n / 2]) {
                let got = win.windowed_bin(&rect, m);
                assert!(
                    (got - want[m]).norm() < 1e-9,
                    "{win:?} bin {m}: {got} vs {}",
                    want[m]
                );
            }
        }
    }

    #[test]
    fn empty_window_is_harmless() {
        assert!(Window::Hann.generate(0).is_empty());
        assert_eq!(coherent_gain(&[]), 0.0);
        assert_eq!(enbw_bins(&[]), 0.0);
    }
}
