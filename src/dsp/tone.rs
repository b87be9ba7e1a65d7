//! Harmonic analysis of a channel carrying a steady tone.
//!
//! 1. **Is there a tone?** A 4-term Blackman-Harris spectrum of the record (mean removed) is
//!    searched for its strongest peak. It counts as a tone when its main lobe holds at least
//!    [`ToneSettings::min_tone_fraction`] of the AC power *and* the peak bin stands at least
//!    [`ToneSettings::min_prominence_db`] above the median of its neighbourhood. Otherwise the
//!    analysis returns `None`: silence and noise get no made-up fundamental.
//! 2. **Fundamental.** Interpolated peak → IEEE 1057 four-parameter sine fit over the whole record.
//! 3. **Harmonics.** The record under a 7-term Blackman-Harris window (sidelobes ≈ −180 dB) is
//!    projected onto `k·f0` exactly (a single-frequency DFT, so no scalloping loss). Levels in dBc,
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

use super::sinefit::{fit4, SineFit};
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

/// Tone analyser with cached FFT plans and scratch buffers (plan once, reuse).
pub struct ToneAnalyzer {
    planner: RealFftPlanner<f64>,
    plan: Option<(usize, Arc<dyn RealToComplex<f64>>)>,
    win4: Arc<Vec<f64>>,
    win7: Arc<Vec<f64>>,
    x: Vec<f64>,
    buf: Vec<f64>,
    spec: Vec<Complex<f64>>,
    scratch: Vec<Complex<f64>>,
    power: Vec<f64>,
    resid: Vec<f64>,
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

fn median(v: &mut [f64]) -> Option<f64> {
    if v.is_empty() {
        return None;
    }
    let mid = v.len() / 2;
    let (_, m, _) = v.select_nth_unstable_by(mid, f64::total_cmp);
    Some(*m)
}

impl ToneAnalyzer {
    /// A new analyser; buffers grow to the largest record seen and are then reused.
    pub fn new() -> Self {
        ToneAnalyzer {
            planner: RealFftPlanner::new(),
            plan: None,
            win4: Arc::new(Vec::new()),
            win7: Arc::new(Vec::new()),
            x: Vec::new(),
            buf: Vec::new(),
            spec: Vec::new(),
            scratch: Vec::new(),
            power: Vec::new(),
            resid: Vec::new(),
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
        self.win7 = window::shared(Window::BlackmanHarris7, n);
        self.buf.resize(n, 0.0);
        self.spec = plan.make_output_vec();
        self.scratch = plan.make_scratch_vec();
        self.power.resize(n / 2 + 1, 0.0);
        self.plan = Some((n, Arc::clone(&plan)));
        plan
    }

    /// One-sided power spectrum of `src` under the 4-term window into `self.power`, calibrated so
    /// that the sum over bins estimates mean power.
    fn power_spectrum(&mut self, plan: &Arc<dyn RealToComplex<f64>>, src: &[f64]) -> bool {
        let n = src.len();
        for ((b, &v), &w) in self.buf.iter_mut().zip(src).zip(self.win4.iter()) {
            *b = v * w;
        }
        if plan
            .process_with_scratch(&mut self.buf, &mut self.spec, &mut self.scratch)
            .is_err()
        {
            return false;
        }
        let s2: f64 = self.win4.iter().map(|w| w * w).sum();
        let norm = 2.0 / (n as f64 * s2);
        for (p, c) in self.power.iter_mut().zip(&self.spec) {
            *p = c.norm_sqr() * norm;
        }
        // DC and Nyquist bins are not doubled.
        self.power[0] *= 0.5;
        if n % 2 == 0 {
            let last = self.power.len() - 1;
            self.power[last] *= 0.5;
        }
        true
    }

    /// Analyse `samples` (one channel, full scale = 1) taken at `sample_rate`.
    pub fn analyze(
        &mut self,
        samples: &[f32],
        sample_rate: f64,
        settings: &ToneSettings,
    ) -> Option<ToneReport> {
        // An even record length keeps the real FFT simple.
        let n = samples.len() & !1;
        if n < 256 || sample_rate.is_nan() || sample_rate <= 0.0 {
            return None;
        }
        let samples = &samples[..n];
        self.x.clear();
        self.x.extend(samples.iter().map(|&v| v as f64));
        if self.x.iter().any(|v| !v.is_finite()) {
            return None;
        }
        let mean = self.x.iter().sum::<f64>() / n as f64;
        let ac_power = self.x.iter().map(|v| (v - mean) * (v - mean)).sum::<f64>() / n as f64;
        if ac_power <= 0.0 {
            return None;
        }
        let plan = self.prepare(n);
        // The mean-removed record, in the residual's scratch buffer (overwritten below).
        let mut centred = std::mem::take(&mut self.resid);
        centred.clear();
        centred.extend(self.x.iter().map(|v| v - mean));
        let ok = self.power_spectrum(&plan, &centred);
        self.resid = centred;
        if !ok {
            return None;
        }
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
        let mut neighbours: Vec<f64> = (kp.saturating_sub(reach)
            ..(kp + reach).min(self.power.len()))
            .filter(|&k| k.abs_diff(kp) > lobe4 + 1 && k > 0)
            .map(|k| self.power[k])
            .collect();
        let local = median(&mut neighbours).unwrap_or(0.0);
        if local > 0.0 && 10.0 * (self.power[kp] / local).log10() < settings.min_prominence_db {
            return None;
        }

        // Interpolated peak (parabola through log power), then the four-parameter fit.
        let (a, b, c) = (
            self.power[kp - 1].max(1e-300).ln(),
            self.power[kp].max(1e-300).ln(),
            self.power[kp + 1].max(1e-300).ln(),
        );
        let denom = a - 2.0 * b + c;
        let delta = if denom.abs() > 0.0 {
            (0.5 * (a - c) / denom).clamp(-0.5, 0.5)
        } else {
            0.0
        };
        let f_coarse = (kp as f64 + delta) * df;
        let omega0 = 2.0 * PI * f_coarse / sample_rate;
        let fit = fit4(&self.x, omega0, 2.0 * PI * 2.0 * df / sample_rate)?;
        let f0 = fit.omega * sample_rate / (2.0 * PI);
        if f0 * n as f64 / sample_rate < 8.0 {
            return None;
        }

        // Residual: everything but the fitted fundamental and DC.
        let mut resid = std::mem::take(&mut self.resid);
        fit.residual_into(&self.x, &mut resid);
        let nad_power = resid.iter().map(|v| v * v).sum::<f64>() / n as f64;
        let fund_power = fit.amplitude().powi(2) / 2.0;

        // In-band residual power and the noise floor from its spectrum.
        let ok = self.power_spectrum(&plan, &resid);
        self.resid = resid;
        if !ok {
            return None;
        }
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

        // Harmonics: single-frequency DFT under the 7-term window.
        let max_freq = band_hi.min(nyquist - (lobe7 as f64 + 1.0) * df);
        let w7_sum: f64 = self.win7.iter().sum();
        let orders: Vec<usize> = (1..=settings.max_order)
            .take_while(|&k| k == 1 || f0 * k as f64 <= max_freq)
            .collect();
        let proj = self.project(&fit, &orders);
        let x1 = proj[0];
        let a1 = 2.0 * x1.norm() / w7_sum;
        let theta1 = x1.arg() + PI / 2.0;
        let mut harmonics = Vec::new();
        for (&k, xk) in orders.iter().zip(&proj).skip(1) {
            let fk = f0 * k as f64;
            let ak = 2.0 * xk.norm() / w7_sum;
            let thetak = xk.arg() + PI / 2.0;
            harmonics.push(Harmonic {
                order: k,
                freq_hz: fk,
                amplitude: ak,
                level_dbc: (ak > 0.0 && a1 > 0.0).then(|| 20.0 * (ak / a1).log10()),
                phase_deg: wrap_deg((thetak - k as f64 * theta1).to_degrees()),
                resolved: false,
            });
        }

        // Noise floor: median residual power per bin away from harmonics, per Hz, times the
        // 7-term window's noise bandwidth; the median of a χ²₂ bin is ln 2 times its mean.
        let guard = lobe4 + 2;
        let mut floor_bins: Vec<f64> = (1..self.power.len())
            .filter(|&k| in_band(k))
            .filter(|&k| {
                let f = k as f64 * df;
                let nearest = (f / f0).round().max(1.0);
                ((f - nearest * f0).abs() / df) > guard as f64
            })
            .map(|k| self.power[k])
            .collect();
        // Below −180 dBc nothing is measurable in f64 arithmetic on f32 samples: that is the
        // floor when the record is noiseless (synthetic or exactly periodic signals).
        let numeric_floor = (a1 * 1e-9).powi(2) / 2.0;
        let noise_floor = median(&mut floor_bins).map(|m| {
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
            fundamental_amplitude: fit.amplitude(),
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

    /// Windowed single-frequency DFTs of the record at `k·ω` for each order, time centred on the
    /// record. Four orders share each pass over the data so their rotating phasors advance side by
    /// side (the rotation is a dependency chain; four of them keep the core busy).
    fn project(&self, fit: &SineFit, orders: &[usize]) -> Vec<Complex<f64>> {
        const GROUP: usize = 4;
        let n = self.x.len();
        let centre = (n as f64 - 1.0) / 2.0;
        let mut out = Vec::with_capacity(orders.len());
        for group in orders.chunks(GROUP) {
            let mut w = [0.0f64; GROUP];
            for (wk, &k) in w.iter_mut().zip(group) {
                *wk = fit.omega * k as f64;
            }
            let step: [Complex<f64>; GROUP] =
                std::array::from_fn(|g| Complex::from_polar(1.0, -w[g]));
            let mut acc = [Complex::new(0.0, 0.0); GROUP];
            let mut z = [Complex::new(0.0, 0.0); GROUP];
            for (i, (&x, &win)) in self.x.iter().zip(self.win7.iter()).enumerate() {
                // Re-anchor the phasors exactly every 1024 samples to stop error build-up.
                if i % 1024 == 0 {
                    for g in 0..GROUP {
                        z[g] = Complex::from_polar(1.0, -w[g] * (i as f64 - centre));
                    }
                }
                let xw = x * win;
                for g in 0..GROUP {
                    acc[g] += z[g] * xw;
                    z[g] *= step[g];
                }
            }
            out.extend_from_slice(&acc[..group.len()]);
        }
        out
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
