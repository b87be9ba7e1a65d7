//! Harmonic analysis of a channel carrying a steady tone.
//!
//! 1. **Is there a tone?** A 4-term Blackman-Harris spectrum of the record (mean removed) is
//!    searched for its strongest peak. It counts as a tone when its main lobe holds at least
//!    [`ToneSettings::min_tone_fraction`] of the AC power *and* the peak bin stands at least
//!    [`ToneSettings::min_prominence_db`] above the median of its neighbourhood. Otherwise the
//!    analysis returns `None`: silence and noise get no made-up fundamental.
//! 2. **Fundamental.** Interpolated peak → IEEE 1057 four-parameter sine fit over the whole record
//!    (its amplitude is the reference for dBc).
//! 3. **Harmonics.** The 7-term Blackman-Harris window's transform (sidelobes ≈ −180 dB) of the
//!    fit residual, taken exactly at `k·f0` (the single-frequency DFT, so no scalloping loss). It
//!    is read off one FFT of the residual: the window is a sum of cosines, so windowed bins are
//!    short sums of unwindowed ones, and the window's kernel in closed form turns the two bins
//!    either side of `k·f0` into the value at `k·f0` itself. Levels in dBc,
//!    phases relative to the fundamental in the sine convention: with
//!    `x = Σ A_k sin(k ω t + θ_k)`, the reported phase is `θ_k − k·θ_1`, wrapped to (−180°, 180°].
//!    A waveform's shape, not its start time, sets these phases.
//! 4. **THD** = √(Σ A_k²)/A_1 over the harmonics inside the band (THD_F, IEEE usage).
//!    **THD+N** (AES17): RMS of everything but the fitted fundamental within the band, relative to
//!    the total RMS within the band. **SINAD** and **ENOB** after IEEE 1241: fitted sine RMS over the
//!    full-band fit residual; ENOB = log2(FSR / (NAD·√12)) with full-scale range 2 (±1).
//! 5. **Odd/even balance** 20·log10(√ΣA_even² / √ΣA_odd²) over H2.. (`None` when no harmonic
//!    stands above the noise floor); **fall-off**: least-squares slope of level (dBc) against
//!    log2(order), in dB per octave of order, over the harmonics standing at least
//!    [`ToneSettings::resolve_margin_db`] above the noise floor, taken from the dominant family
//!    (odd orders alone when the even ones are [`FAMILY_MARGIN_DB`] down, and the reverse).
//!    The noise floor never goes below −180 dBc, the limit of the arithmetic.

use std::f64::consts::PI;
use std::sync::Arc;

use realfft::num_complex::Complex;
use realfft::{RealFftPlanner, RealToComplex};

use super::sinefit::{fit4, sum_and_squares};
use super::spectrum::{log_parabola_offset, median, power_into};
use super::window::{self, Window};

/// How far one family of harmonics (odd or even orders) must stand below the other for the
/// fall-off slope to follow the stronger family alone (dB).
pub const FAMILY_MARGIN_DB: f64 = 20.0;

/// Settings for tone analysis.
#[derive(Debug, Clone, PartialEq)]
pub struct ToneSettings {
    /// Lower edge of the measurement band (Hz).
    pub band_low_hz: f64,
    /// Upper edge of the measurement band (Hz).
    pub band_high_hz: f64,
    /// Highest harmonic order reported.
    pub max_order: usize,
    /// A fundamental to look for (searched within ±2 % of it); `None` finds the strongest tone.
    pub fundamental_hz: Option<f64>,
    /// Least share of the AC power the tone must hold.
    pub min_tone_fraction: f64,
    /// Least height of the peak above the median of its neighbourhood (dB).
    pub min_prominence_db: f64,
    /// A harmonic must stand this far above the noise floor to count in the fall-off slope (dB).
    pub resolve_margin_db: f64,
}

impl Default for ToneSettings {
    fn default() -> Self {
        ToneSettings {
            band_low_hz: 20.0,
            band_high_hz: 20_000.0,
            max_order: 20,
            fundamental_hz: None,
            min_tone_fraction: 0.2,
            min_prominence_db: 30.0,
            resolve_margin_db: 10.0,
        }
    }
}

/// One harmonic's measurement.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Harmonic {
    /// Harmonic order (2 = second harmonic).
    pub order: usize,
    /// Frequency (Hz).
    pub freq_hz: f64,
    /// Peak amplitude (full scale = 1).
    pub amplitude: f64,
    /// Level relative to the fundamental (dB); `None` when the amplitude is exactly zero.
    pub level_dbc: Option<f64>,
    /// Phase relative to the fundamental (degrees, sine convention, see module docs).
    pub phase_deg: f64,
    /// Whether it stands [`ToneSettings::resolve_margin_db`] above the noise floor.
    pub resolved: bool,
}

/// The result of tone analysis.
#[derive(Debug, Clone, PartialEq)]
pub struct ToneReport {
    /// Fundamental frequency (Hz).
    pub fundamental_hz: f64,
    /// Fundamental peak amplitude (full scale = 1).
    pub fundamental_amplitude: f64,
    /// THD_F as a ratio; `None` when no harmonic lies within the band (nothing to measure).
    pub thd_ratio: Option<f64>,
    /// THD+N as an RMS ratio (AES17, within the band).
    pub thd_n_ratio: f64,
    /// SINAD (dB), IEEE 1241.
    pub sinad_db: f64,
    /// ENOB (bits), IEEE 1241, full-scale range ±1.
    pub enob_bits: f64,
    /// Odd/even balance (dB); `None` when no odd or no even harmonic was measured.
    pub odd_even_db: Option<f64>,
    /// Harmonic fall-off (dB per octave of order); `None` with fewer than two resolved harmonics.
    pub falloff_db_per_octave: Option<f64>,
    /// Noise floor as the level (dBc) a sine would need to match the noise in one harmonic's
    /// measurement bandwidth; `None` when it could not be estimated.
    pub noise_floor_dbc: Option<f64>,
    /// H2.. within the band and below Nyquist.
    pub harmonics: Vec<Harmonic>,
    /// Record length used (samples).
    pub samples: usize,
}

/// Tone analyser with cached FFT plans and scratch buffers (plan once, reuse). One analyser can
/// serve any number of channels in turn: it keeps nothing of a record once it has reported.
pub struct ToneAnalyzer {
    planner: RealFftPlanner<f64>,
    plan: Option<(usize, Arc<dyn RealToComplex<f64>>)>,
    win4: Arc<Vec<f64>>,
    /// `Σw²` of the 4-term window.
    win4_sq: f64,
    x: Vec<f64>,
    buf: Vec<f64>,
    spec: Vec<Complex<f64>>,
    scratch: Vec<Complex<f64>>,
    power: Vec<f64>,
    bins: Vec<f64>,
}

impl Default for ToneAnalyzer {
    fn default() -> Self {
        Self::new()
    }
}

impl std::fmt::Debug for ToneAnalyzer {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("ToneAnalyzer")
            .field("size", &self.plan.as_ref().map(|p| p.0))
            .finish()
    }
}

fn wrap_deg(mut d: f64) -> f64 {
    d %= 360.0;
    if d <= -180.0 {
        d += 360.0;
    } else if d > 180.0 {
        d -= 360.0;
    }
    d
}

impl ToneAnalyzer {
    /// A new analyser; buffers grow to the largest record seen and are then reused.
    pub fn new() -> Self {
        ToneAnalyzer {
            planner: RealFftPlanner::new(),
            plan: None,
            win4: Arc::new(Vec::new()),
            win4_sq: 0.0,
            x: Vec::new(),
            buf: Vec::new(),
            spec: Vec::new(),
            scratch: Vec::new(),
            power: Vec::new(),
            bins: Vec::new(),
        }
    }

    fn prepare(&mut self, n: usize) -> Arc<dyn RealToComplex<f64>> {
        if let Some((len, plan)) = &self.plan {
            if *len == n {
                return Arc::clone(plan);
            }
        }
        let plan = self.planner.plan_fft_forward(n);
        self.win4 = window::shared(Window::BlackmanHarris4, n);
        self.win4_sq = self.win4.iter().map(|w| w * w).sum();
        self.buf.resize(n, 0.0);
        self.spec = plan.make_output_vec();
        self.scratch = plan.make_scratch_vec();
        self.power.resize(n / 2 + 1, 0.0);
        self.plan = Some((n, Arc::clone(&plan)));
        plan
    }

    /// Power per bin of the 4-term window from the *unwindowed* transform in `self.spec`
    /// ([`Window::windowed_bin`], written out for the bins away from the ends).
    fn power_bh4_from_rect(&mut self, n: usize) {
        let win = Window::BlackmanHarris4;
        let [a0, a1, a2, a3] = match win.coefficients() {
            &[a0, a1, a2, a3] => [a0, a1 / 2.0, a2 / 2.0, a3 / 2.0],
            _ => unreachable!("the 4-term window has four coefficients"),
        };
        let r = &self.spec;
        let inner = 3..r.len().saturating_sub(3);
        power_into(n, self.win4_sq, &mut self.power, |m| {
            if inner.contains(&m) {
                r[m] * a0
                    + (r[m - 1] + r[m + 1]) * a1
                    + (r[m - 2] + r[m + 2]) * a2
                    + (r[m - 3] + r[m + 3]) * a3
            } else {
                win.windowed_bin(r, m)
            }
        });
    }

    /// Analyse `samples` (one channel, full scale = 1) taken at `sample_rate`.
    pub fn analyze(
        &mut self,
        samples: &[f32],
        sample_rate: f64,
        settings: &ToneSettings,
    ) -> Option<ToneReport> {
        self.analyze_parts(samples, &[], sample_rate, settings, None)
    }

    /// [`ToneAnalyzer::analyze`] of the record `first` followed by `second` (a ring buffer's two
    /// halves, with no copy to join them). `hint_hz`, the fundamental an earlier overlapping
    /// record gave, starts the sine fit there when the spectrum's peak agrees with it (within a
    /// bin): a steady tone then needs one refining step instead of several. It changes how fast
    /// the fit gets there, not where it ends up.
    pub fn analyze_parts(
        &mut self,
        first: &[f32],
        second: &[f32],
        sample_rate: f64,
        settings: &ToneSettings,
        hint_hz: Option<f64>,
    ) -> Option<ToneReport> {
        // An even record length keeps the real FFT simple.
        let n = (first.len() + second.len()) & !1;
        if n < 256 || sample_rate.is_nan() || sample_rate <= 0.0 {
            return None;
        }
        self.x.clear();
        self.x.extend(first.iter().map(|&v| v as f64));
        self.x.extend(second.iter().map(|&v| v as f64));
        self.x.truncate(n);
        // Finite f32 samples cannot overflow an f64 sum: a non-finite sum means a non-finite
        // sample.
        let (sum, squares) = sum_and_squares(&self.x);
        if !sum.is_finite() {
            return None;
        }
        let mean = sum / n as f64;
        // Mean square less the squared mean: f32 samples leave f64 ample digits for this.
        let ac_power = squares / n as f64 - mean * mean;
        if ac_power <= 0.0 {
            return None;
        }
        let plan = self.prepare(n);

        // Spectrum of the mean-removed record under the 4-term window.
        for ((b, &v), &w) in self.buf.iter_mut().zip(&self.x).zip(self.win4.iter()) {
            *b = (v - mean) * w;
        }
        plan.process_with_scratch(&mut self.buf, &mut self.spec, &mut self.scratch)
            .ok()?;
        let spec = &self.spec;
        power_into(n, self.win4_sq, &mut self.power, |m| spec[m]);

        let df = sample_rate / n as f64;
        let nyquist = sample_rate / 2.0;
        let lobe4 = Window::BlackmanHarris4.main_lobe_half_width();
        let lobe7 = Window::BlackmanHarris7.main_lobe_half_width();

        // Search range: at least 8 cycles in the record, inside the band and clear of Nyquist.
        let (lo_hz, hi_hz) = match settings.fundamental_hz {
            Some(f) => (f * 0.98, f * 1.02),
            None => (
                settings.band_low_hz * 0.5,
                settings.band_high_hz.min(nyquist),
            ),
        };
        let k_lo = ((lo_hz / df).floor() as usize).max(8);
        let k_hi = ((hi_hz / df).ceil() as usize).min(self.power.len().saturating_sub(lobe7 + 2));
        if k_lo + 2 > k_hi {
            return None;
        }
        let kp = (k_lo..=k_hi).max_by(|&a, &b| self.power[a].total_cmp(&self.power[b]))?;

        // Is it a tone?
        let lobe_power: f64 = self.power[kp - lobe4..=kp + lobe4].iter().sum();
        if lobe_power < settings.min_tone_fraction * ac_power {
            return None;
        }
        let reach = 64usize;
        self.bins.clear();
        self.bins.extend(
            (kp.saturating_sub(reach)..(kp + reach).min(self.power.len()))
                .filter(|&k| k.abs_diff(kp) > lobe4 + 1 && k > 0)
                .map(|k| self.power[k]),
        );
        let local = median(&mut self.bins).unwrap_or(0.0);
        if local > 0.0 && 10.0 * (self.power[kp] / local).log10() < settings.min_prominence_db {
            return None;
        }

        // Interpolated peak (parabola through log power), then the four-parameter fit.
        let delta = log_parabola_offset(&self.power, kp);
        let f_coarse = match hint_hz {
            Some(h) if (h / df - kp as f64).abs() <= 1.0 => h,
            _ => (kp as f64 + delta) * df,
        };
        let omega0 = 2.0 * PI * f_coarse / sample_rate;
        let fit = fit4(&self.x, omega0, 2.0 * PI * 2.0 * df / sample_rate)?;
        let f0 = fit.omega * sample_rate / (2.0 * PI);
        if f0 * n as f64 / sample_rate < 8.0 {
            return None;
        }

        // Residual: everything but the fitted fundamental and DC, straight into the FFT input.
        let nad_power = fit.residual_into(&self.x, &mut self.buf) / n as f64;
        let fund_power = fit.amplitude().powi(2) / 2.0;

        // Its unwindowed transform serves both windows: the 4-term one for every bin (in-band
        // power, noise floor), the 7-term one at the harmonics.
        plan.process_with_scratch(&mut self.buf, &mut self.spec, &mut self.scratch)
            .ok()?;
        self.power_bh4_from_rect(n);
        let band_lo = settings.band_low_hz.max(0.0);
        let band_hi = settings.band_high_hz.min(nyquist);
        let in_band = |k: usize| {
            let f = k as f64 * df;
            f >= band_lo && f <= band_hi
        };
        let band_power: f64 = (0..self.power.len())
            .filter(|&k| in_band(k))
            .map(|k| self.power[k])
            .sum();
        let thd_n_ratio = (band_power / (fund_power + band_power)).sqrt();

        // Harmonics: the 7-term window's transform at exactly k·f0 (no scalloping), see
        // `harmonic_at`. Phases in the sine convention, time centred on the record as the fit's.
        let max_freq = band_hi.min(nyquist - (lobe7 as f64 + 1.0) * df);
        let a1 = fit.amplitude();
        let theta1 = (-fit.b).atan2(fit.a) + PI / 2.0;
        let mut harmonics: Vec<Harmonic> = (2..=settings.max_order)
            .take_while(|&k| f0 * k as f64 <= max_freq)
            .map(|k| {
                let fk = f0 * k as f64;
                let z = self.harmonic_at(n, fk / df);
                let ak = 2.0 * z.norm();
                let thetak = z.arg() + PI / 2.0;
                Harmonic {
                    order: k,
                    freq_hz: fk,
                    amplitude: ak,
                    level_dbc: (ak > 0.0 && a1 > 0.0).then(|| 20.0 * (ak / a1).log10()),
                    phase_deg: wrap_deg((thetak - k as f64 * theta1).to_degrees()),
                    resolved: false,
                }
            })
            .collect();

        // Noise floor: median residual power per bin away from harmonics, per Hz, times the
        // 7-term window's noise bandwidth; the median of a χ²₂ bin is ln 2 times its mean.
        let guard = lobe4 + 2;
        self.bins.clear();
        {
            // Walk the band from one harmonic's guard zone to the next.
            let first = ((band_lo / df).ceil() as usize).max(1);
            let last = ((band_hi / df).floor() as usize).min(self.power.len() - 1);
            let f0_bins = f0 / df;
            let mut k = first;
            while k <= last {
                let order = (k as f64 / f0_bins).round().max(1.0);
                let centre = order * f0_bins;
                let (lo, hi) = (centre - guard as f64, centre + guard as f64);
                if (k as f64) < lo {
                    // Free bins up to the next guard zone.
                    let end = ((lo.ceil() as usize).max(k + 1)).min(last + 1);
                    self.bins.extend_from_slice(&self.power[k..end]);
                    k = end;
                } else if (k as f64) <= hi {
                    k = (hi.floor() as usize + 1).max(k + 1);
                } else {
                    self.bins.push(self.power[k]);
                    k += 1;
                }
            }
        }
        // Below −180 dBc nothing is measurable in f64 arithmetic on f32 samples: that is the
        // floor when the record is noiseless (synthetic or exactly periodic signals).
        let numeric_floor = (a1 * 1e-9).powi(2) / 2.0;
        let noise_floor = median(&mut self.bins).map(|m| {
            let enbw7 = 2.6319;
            (m / std::f64::consts::LN_2 * enbw7).max(numeric_floor)
        });
        // Per-bin power is in units of mean power per bin; a sine of amplitude A has A²/2.
        let noise_floor_dbc = noise_floor
            .filter(|p| *p > 0.0)
            .map(|p| 10.0 * (p / (a1 * a1 / 2.0)).log10());
        let margin = 10f64.powf(settings.resolve_margin_db / 10.0);
        for h in &mut harmonics {
            h.resolved = match noise_floor {
                Some(p) => h.amplitude * h.amplitude / 2.0 > p * margin,
                None => true,
            };
        }

        let sum_sq = |pred: &dyn Fn(usize) -> bool| -> f64 {
            harmonics
                .iter()
                .filter(|h| pred(h.order))
                .map(|h| h.amplitude * h.amplitude)
                .sum()
        };
        let all = sum_sq(&|_| true);
        let even = sum_sq(&|k| k % 2 == 0);
        let odd = sum_sq(&|k| k % 2 == 1);
        let thd_ratio = (!harmonics.is_empty()).then(|| all.sqrt() / a1);
        // With no harmonic above the floor there is no distortion to characterise.
        let any_resolved = harmonics.iter().any(|h| h.resolved);
        let odd_even_db =
            (any_resolved && even > 0.0 && odd > 0.0).then(|| 10.0 * (even / odd).log10());

        // Fall-off follows the dominant family: odd orders only when the even ones are more
        // than 20 dB down (symmetric curves), even orders only in the opposite case, else all.
        let family = |k: usize| match odd_even_db {
            Some(b) if b < -FAMILY_MARGIN_DB => k % 2 == 1,
            Some(b) if b > FAMILY_MARGIN_DB => k % 2 == 0,
            _ => true,
        };
        let pts: Vec<(f64, f64)> = harmonics
            .iter()
            .filter(|h| h.resolved && family(h.order))
            .filter_map(|h| h.level_dbc.map(|l| ((h.order as f64).log2(), l)))
            .collect();
        let falloff_db_per_octave = (pts.len() >= 2).then(|| {
            let m = pts.len() as f64;
            let sx: f64 = pts.iter().map(|p| p.0).sum();
            let sy: f64 = pts.iter().map(|p| p.1).sum();
            let sxx: f64 = pts.iter().map(|p| p.0 * p.0).sum();
            let sxy: f64 = pts.iter().map(|p| p.0 * p.1).sum();
            (m * sxy - sx * sy) / (m * sxx - sx * sx)
        });

        let sinad_db = 10.0 * (fund_power / nad_power).log10();
        let enob_bits = (2.0 / (nad_power.sqrt() * 12f64.sqrt())).log2();
        Some(ToneReport {
            fundamental_hz: f0,
            fundamental_amplitude: a1,
            thd_ratio,
            thd_n_ratio,
            sinad_db,
            enob_bits,
            odd_even_db,
            falloff_db_per_octave,
            noise_floor_dbc,
            harmonics,
            samples: n,
        })
    }

    /// The complex amplitude `Z = A·e^(iφ)/2` of a component `A·cos(ω(n − c) + φ)` at `nu` bins
    /// (`c` = the record's centre), from the residual's unwindowed transform in `self.spec`.
    ///
    /// Under the 7-term window, bin `m` of such a component is `Z·e^(−iωc)·K(m − ν)` with `K` the
    /// window's kernel. A least-squares match of `K` to the two bins either side of `ν` gives `Z`
    /// exactly for a lone component: this is the window's transform at `ν` itself (the
    /// single-frequency DFT, free of scalloping), read off an FFT instead of a pass over the
    /// record per harmonic. The bins used stand at least 7 bins (the main lobe's half-width)
    /// from any other harmonic once the fundamental is 8 bins or more, where the 7-term window's
    /// sidelobes are below −180 dB.
    fn harmonic_at(&self, n: usize, nu: f64) -> Complex<f64> {
        let m0 = nu.floor() as usize;
        let centre = (n as f64 - 1.0) / 2.0;
        let rot = Complex::from_polar(1.0, 2.0 * PI * nu * centre / n as f64);
        let (mut num, mut den) = (Complex::new(0.0, 0.0), 0.0);
        for m in [m0, m0 + 1] {
            if m >= self.spec.len() {
                continue;
            }
            let y = Window::BlackmanHarris7.windowed_bin(&self.spec, m) * rot;
            let k = Window::BlackmanHarris7.kernel(n, m as f64 - nu);
            num += y * k.conj();
            den += k.norm_sqr();
        }
        if den > 0.0 {
            num / den
        } else {
            Complex::new(0.0, 0.0)
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn wrap_keeps_phases_in_range() {
        assert_eq!(wrap_deg(190.0), -170.0);
        assert_eq!(wrap_deg(-180.0), 180.0);
        assert_eq!(wrap_deg(540.0), 180.0);
    }

    /// A record of known harmonics at a fundamental between bins, some with noise: every
    /// harmonic read off the FFT (`harmonic_at`) matches the windowed single-frequency DFT at
    /// `k·f0` summed directly, sample by sample (the definition of the measurement).
    #[test]
    fn harmonics_match_the_direct_single_frequency_dft() {
        let rate = 48_000.0;
        let n = 24_000;
        let f0 = 1_234.567;
        let levels = [
            (2, 1e-2, 0.3),
            (3, 3e-3, 1.1),
            (5, 1e-4, -2.0),
            (7, 1e-6, 0.5),
        ];
        for noise in [0.0, 1e-7] {
            let mut seed = 0x2545_F491_4F6C_DD1Du64;
            let x: Vec<f32> = (0..n)
                .map(|i| {
                    seed ^= seed << 13;
                    seed ^= seed >> 7;
                    seed ^= seed << 17;
                    let w = 2.0 * PI * f0 * i as f64 / rate;
                    let mut v = 0.5 * (w + 0.2).sin();
                    for &(k, a, p) in &levels {
                        v += a * (k as f64 * w + p).sin();
                    }
                    (v + noise * ((seed >> 11) as f64 / (1u64 << 53) as f64 - 0.5)) as f32
                })
                .collect();
            let mut an = ToneAnalyzer::new();
            let r = an
                .analyze(&x, rate, &ToneSettings::default())
                .expect("a tone");
            let w7 = Window::BlackmanHarris7.generate(n);
            let sum_w: f64 = w7.iter().sum();
            let centre = (n as f64 - 1.0) / 2.0;
            for h in &r.harmonics {
                let omega = 2.0 * PI * h.freq_hz / rate;
                let direct: Complex<f64> = x
                    .iter()
                    .zip(&w7)
                    .enumerate()
                    .map(|(i, (&v, &w))| {
                        Complex::from_polar(v as f64 * w, -omega * (i as f64 - centre))
                    })
                    .sum();
                let a = 2.0 * direct.norm() / sum_w;
                // Agreement to 1e-4 of the harmonic or 1e-9 of full scale, whichever is larger
                // (f32 samples, and noise weighted slightly differently by the two).
                let tol = (1e-4 * a).max(1e-9);
                assert!(
                    (h.amplitude - a).abs() < tol,
                    "noise {noise}, H{}: {} vs direct {}",
                    h.order,
                    h.amplitude,
                    a
                );
            }
            let h3 = &r.harmonics[1];
            assert!((h3.amplitude - 3e-3).abs() < 1e-7, "{h3:?}");
        }
    }

    /// A hint starts the fit elsewhere; the result is the same.
    #[test]
    fn a_hint_changes_nothing_but_speed() {
        let rate = 48_000.0;
        let x: Vec<f32> = (0..48_000)
            .map(|i| {
                let w = 2.0 * PI * 441.3 * i as f64 / rate;
                (0.4 * w.sin() + 0.01 * (3.0 * w).sin()) as f32
            })
            .collect();
        let s = ToneSettings::default();
        let mut a = ToneAnalyzer::new();
        let plain = a.analyze(&x, rate, &s).expect("tone");
        let hinted = a
            .analyze_parts(&x[..1000], &x[1000..], rate, &s, Some(441.3001))
            .expect("tone");
        assert!((plain.fundamental_hz - hinted.fundamental_hz).abs() < 1e-9);
        assert!((plain.fundamental_amplitude - hinted.fundamental_amplitude).abs() < 1e-12);
        let (p, h) = (
            plain.thd_ratio.expect("thd"),
            hinted.thd_ratio.expect("thd"),
        );
        assert!((p - h).abs() < 1e-9 * p, "{p} vs {h}");
    }

    #[test]
    fn silence_and_short_records_have_no_tone() {
        let mut a = ToneAnalyzer::new();
        assert!(a
            .analyze(&[0.0; 4800], 48_000.0, &ToneSettings::default())
            .is_none());
        assert!(a
            .analyze(&[0.5; 100], 48_000.0, &ToneSettings::default())
            .is_none());
    }
}
