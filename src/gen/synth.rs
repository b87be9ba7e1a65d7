//! Rendering recipes to samples.
//!
//! Every oscillator takes its phase from the integer sample index, `θ = 2π·((f·n) mod fs)/fs + φ`
//! with `n` counted from the start of the active span, instead of accumulating a phase increment:
//! no error builds up over long files, and an integer frequency repeats exactly.

use std::f64::consts::{FRAC_PI_2, PI, SQRT_2, TAU};

use super::recipe::{Harmonic, Recipe, Shape, Sweep, Wave};
use super::rng::{derive_seed, Rng};
use super::GenError;

/// Band-limited waveforms stop below this fraction of Nyquist.
pub const WAVE_NYQUIST_FRACTION: f64 = 0.98;

/// Most (harmonic × sample) evaluations a band-limited waveform may cost before we refuse it.
const WAVE_WORK_BUDGET: f64 = 2.0e9;

/// Random streams within one channel's seed.
const STREAM_NOISE_KIND: u64 = 0;
const STREAM_NOISE_KEY: u64 = 1;

/// `10^(db/20)`.
fn db_to_amp(db: f64) -> f64 {
    10f64.powf(db / 20.0)
}

/// Standard deviation of Gaussian noise whose AES17 RMS level is `db` dBFS
/// (`20·log10(√2·rms) = db`).
fn aes17_sigma(db: f64) -> f64 {
    db_to_amp(db) / SQRT_2
}

/// Render one channel: `frames` samples at `sample_rate`, full scale ±1.
///
/// `seed` drives the Gaussian noise (`noise` kind and `noise=` key); the same seed gives the same
/// samples. Frequencies are checked against Nyquist here, since only now is the rate known.
pub fn render(
    recipe: &Recipe,
    sample_rate: u32,
    frames: usize,
    seed: u64,
) -> Result<Vec<f64>, GenError> {
    if sample_rate == 0 {
        return Err(GenError::Render(
            "sample rate must be above zero".to_string(),
        ));
    }
    let fs = f64::from(sample_rate);
    check_frequencies(recipe, fs)?;

    let c = &recipe.common;
    let to_frame = |s: f64| ((s * fs).round().max(0.0) as usize).min(frames);
    let start = c.start_s.map_or(0, to_frame);
    let stop = c.stop_s.map_or(frames, to_frame).max(start);
    let mut out = vec![0.0; frames];
    let y = &mut out[start..stop];
    let len = y.len();
    if len == 0 {
        return Ok(out);
    }
    let osc = Osc {
        fs,
        phi: c.phase_deg.to_radians(),
    };

    match &recipe.shape {
        Shape::Sine { freq, level } => match level {
            Sweep::Fixed(db) => {
                let a = db_to_amp(*db);
                for (i, v) in y.iter_mut().enumerate() {
                    *v = a * osc.theta(*freq, i).sin();
                }
            }
            sweep => {
                for (i, v) in y.iter_mut().enumerate() {
                    *v = db_to_amp(sweep.at(i, len)) * osc.theta(*freq, i).sin();
                }
            }
        },
        Shape::Harmonics {
            freq,
            level,
            orders,
        } => {
            let coeffs = harmonic_coefficients(orders);
            let a = db_to_amp(*level);
            fill_periodic(y, period(*freq, sample_rate), |i| {
                a * chebyshev_sum(&coeffs, osc.theta(*freq, i).cos())
            });
        }
        Shape::Wave {
            wave,
            freq,
            level,
            limit,
        } => {
            let bound = limit.map_or(WAVE_NYQUIST_FRACTION * fs / 2.0, |l| {
                l.min(WAVE_NYQUIST_FRACTION * fs / 2.0)
            });
            let series = Series::new(*wave, *freq, bound);
            if series.terms.is_empty() {
                return Err(GenError::Render(format!(
                    "{} at {freq} Hz has no harmonic below {bound} Hz (98 % of Nyquist, or limit=): \
                     '{recipe}'",
                    wave_name(*wave)
                )));
            }
            let p = period(*freq, sample_rate);
            let work = series.terms.len() as f64 * p.unwrap_or(len).min(len) as f64;
            if work > WAVE_WORK_BUDGET {
                return Err(GenError::Render(format!(
                    "{} at {freq} Hz needs {} harmonics per sample, too slow to render; raise the \
                     frequency or set limit=HZ: '{recipe}'",
                    wave_name(*wave),
                    series.terms.len()
                )));
            }
            let scale = db_to_amp(*level) / series.peak();
            fill_periodic(y, p, |i| scale * series.eval(osc.theta(*freq, i)));
        }
        Shape::Clip { freq, level, drive } => {
            // Clipping at ±1 and then scaling by the plateau makes the plateau exactly `a`.
            let a = db_to_amp(*level);
            for (i, v) in y.iter_mut().enumerate() {
                let g = db_to_amp(drive.at(i, len));
                *v = a * (g * osc.theta(*freq, i).sin()).clamp(-1.0, 1.0);
            }
        }
        Shape::Soft {
            freq,
            level,
            drive,
            bias,
        } => {
            let a = db_to_amp(*level);
            let fixed = match drive {
                Sweep::Fixed(d) => Some(SoftStage::new(db_to_amp(*d), *bias)),
                _ => None,
            };
            for (i, v) in y.iter_mut().enumerate() {
                let stage =
                    fixed.unwrap_or_else(|| SoftStage::new(db_to_amp(drive.at(i, len)), *bias));
                *v = a * stage.apply(osc.theta(*freq, i).sin());
            }
        }
        Shape::Twin {
            f1,
            f2,
            level,
            ratio,
        } => {
            let a = db_to_amp(*level);
            let (a1, a2) = (a * ratio / (ratio + 1.0), a / (ratio + 1.0));
            for (i, v) in y.iter_mut().enumerate() {
                *v = a1 * osc.theta(*f1, i).sin() + a2 * osc.theta(*f2, i).sin();
            }
        }
        Shape::Noise { level } => {
            let sigma = aes17_sigma(*level);
            let mut rng = Rng::new(derive_seed(seed, STREAM_NOISE_KIND));
            for v in y.iter_mut() {
                *v = sigma * rng.gaussian();
            }
        }
        Shape::Silence => {}
    }

    if let Some(db) = c.noise_db {
        let sigma = aes17_sigma(db);
        let mut rng = Rng::new(derive_seed(seed, STREAM_NOISE_KEY));
        for v in y.iter_mut() {
            *v += sigma * rng.gaussian();
        }
    }
    if c.dc != 0.0 {
        for v in y.iter_mut() {
            *v += c.dc;
        }
    }
    apply_fades(y, (c.fade_ms / 1000.0 * fs).round() as usize);
    Ok(out)
}

fn wave_name(w: Wave) -> &'static str {
    match w {
        Wave::Square => "square",
        Wave::Triangle => "triangle",
        Wave::Saw => "saw",
    }
}

/// Every frequency the recipe will produce must lie below Nyquist.
fn check_frequencies(recipe: &Recipe, fs: f64) -> Result<(), GenError> {
    let nyquist = fs / 2.0;
    let check = |freq: f64, what: String| {
        if freq >= nyquist {
            Err(GenError::AboveNyquist {
                freq,
                nyquist,
                what,
            })
        } else {
            Ok(())
        }
    };
    match &recipe.shape {
        Shape::Sine { freq, .. }
        | Shape::Wave { freq, .. }
        | Shape::Clip { freq, .. }
        | Shape::Soft { freq, .. } => check(*freq, format!("'{recipe}'")),
        Shape::Harmonics { freq, orders, .. } => {
            check(*freq, format!("'{recipe}'"))?;
            for h in orders {
                check(
                    f64::from(h.order) * freq,
                    format!("harmonic h{} of '{recipe}'", h.order),
                )?;
            }
            Ok(())
        }
        Shape::Twin { f1, f2, .. } => {
            check(*f1, format!("'{recipe}'"))?;
            check(*f2, format!("'{recipe}'"))
        }
        Shape::Noise { .. } | Shape::Silence => Ok(()),
    }
}

/// Phase from the integer sample index.
#[derive(Debug, Clone, Copy)]
struct Osc {
    fs: f64,
    phi: f64,
}

impl Osc {
    /// `2π·((f·n) mod fs)/fs + φ`. For integer `f` below 2^53/n the product and the remainder are
    /// exact, so the phase repeats bit for bit with the period of the tone.
    fn theta(&self, f: f64, n: usize) -> f64 {
        TAU * ((f * n as f64) % self.fs) / self.fs + self.phi
    }
}

/// Samples after which an integer frequency's phase sequence repeats: `fs / gcd(fs, f)`.
fn period(freq: f64, sample_rate: u32) -> Option<usize> {
    if freq.fract() != 0.0 || freq <= 0.0 || freq >= f64::from(sample_rate) {
        return None;
    }
    let f = freq as u64;
    let fs = u64::from(sample_rate);
    let (mut a, mut b) = (fs, f);
    while b != 0 {
        (a, b) = (b, a % b);
    }
    usize::try_from(fs / a).ok()
}

/// Fill `y[i] = value(i)`, computing only one period when the sequence repeats within `y`.
fn fill_periodic(y: &mut [f64], period: Option<usize>, mut value: impl FnMut(usize) -> f64) {
    let n = match period {
        Some(p) if p < y.len() => p,
        _ => y.len(),
    };
    for (i, v) in y[..n].iter_mut().enumerate() {
        *v = value(i);
    }
    let mut done = n;
    while done < y.len() {
        let chunk = done.min(y.len() - done);
        y.copy_within(0..chunk, done);
        done += chunk;
    }
}

/// Coefficients `a_n` of `Σ a_n T_n` (index = order): `a_1 = 1`, `a_n = 10^(dBc/20)`.
fn harmonic_coefficients(orders: &[Harmonic]) -> Vec<f64> {
    let top = orders.iter().map(|h| h.order as usize).max().unwrap_or(1);
    let mut c = vec![0.0; top + 1];
    c[1] = 1.0;
    for h in orders {
        c[h.order as usize] = db_to_amp(h.dbc);
    }
    c
}

/// `Σ coeffs[n]·T_n(x)` with the Chebyshev recurrence `T_{n+1} = 2x·T_n − T_{n−1}`
/// (`T_0 = 1`, `T_1 = x`). Chebyshev: `T_n(cos t) = cos(n t)`, so on `x = cos ωt` every term is
/// a harmonic in exact cosine phase with the fundamental.
pub(crate) fn chebyshev_sum(coeffs: &[f64], x: f64) -> f64 {
    let mut sum = coeffs.first().copied().unwrap_or(0.0);
    let (mut prev, mut cur) = (1.0, x);
    for (n, &a) in coeffs.iter().enumerate().skip(1) {
        if n > 1 {
            (prev, cur) = (cur, 2.0 * x * cur - prev);
        }
        sum += a * cur;
    }
    sum
}

/// A truncated Fourier sine series `Σ c_n sin(nθ)` of one of the classic waveforms
/// (series as in `../shared/reference-values.md` §6).
#[derive(Debug, Clone)]
struct Series {
    wave: Wave,
    /// `(n, c_n)` with increasing `n`.
    terms: Vec<(u32, f64)>,
}

impl Series {
    /// Every harmonic `n·freq` strictly below `bound` Hz.
    fn new(wave: Wave, freq: f64, bound: f64) -> Self {
        let mut terms = Vec::new();
        let step = if wave == Wave::Saw { 1 } else { 2 };
        let mut n: u32 = 1;
        while f64::from(n) * freq < bound {
            let nf = f64::from(n);
            let c = match wave {
                Wave::Square => 4.0 / PI / nf,
                Wave::Triangle => {
                    let sign = if (n / 2) % 2 == 0 { 1.0 } else { -1.0 }; // (−1)^((n−1)/2)
                    8.0 / (PI * PI) * sign / (nf * nf)
                }
                Wave::Saw => {
                    let sign = if n % 2 == 1 { 1.0 } else { -1.0 }; // (−1)^(n+1)
                    2.0 / PI * sign / nf
                }
            };
            terms.push((n, c));
            n += step;
        }
        Self { wave, terms }
    }

    /// `Σ c_n sin(nθ)`. Consecutive `sin(nθ)` come from rotating a unit phasor (error grows
    /// linearly with the number of steps), re-anchored with a direct `sin_cos` every 32 terms.
    fn eval(&self, theta: f64) -> f64 {
        let step = if self.wave == Wave::Saw { 1.0 } else { 2.0 };
        let (rs, rc) = (step * theta).sin_cos();
        let mut sum = 0.0;
        for block in self.terms.chunks(32) {
            let (mut s, mut c) = (f64::from(block[0].0) * theta).sin_cos();
            for &(_, coef) in block {
                sum += coef * s;
                (s, c) = (s * rc + c * rs, c * rc - s * rs);
            }
        }
        sum
    }

    /// Peak of `|Σ c_n sin(nθ)|` over a period, at known positions:
    /// - square with K terms: the derivative is `Σ_{k<K} cos((2k+1)θ) = sin(2Kθ)/(2 sin θ)`, whose
    ///   first zero `θ = π/(2K)` is the first Gibbs lobe, the highest (checked by brute force in
    ///   the tests);
    /// - triangle: at `θ = π/2` every term is `|c_n|`, so the peak is `Σ|c_n|`;
    /// - saw with N terms: with `u = π − θ` the series is `(2/π)Σ sin(nu)/n`, whose derivative
    ///   `Σ cos(nu) = sin(Nu/2)·cos((N+1)u/2)/sin(u/2)` first vanishes at `u = π/(N+1)`, again the
    ///   highest lobe (checked by brute force).
    fn peak(&self) -> f64 {
        let k = self.terms.len() as f64;
        match self.wave {
            Wave::Square => self.eval(FRAC_PI_2 / k).abs(),
            Wave::Triangle => self.terms.iter().map(|(_, c)| c.abs()).sum(),
            Wave::Saw => self.eval(PI - PI / (k + 1.0)).abs(),
        }
    }
}

/// `y = tanh(g(x + bias)) − tanh(g·bias)`, normalised so that max |y| over x ∈ [−1, 1] is 1.
/// The curve rises monotonically, so the extremes are at x = ±1.
#[derive(Debug, Clone, Copy)]
struct SoftStage {
    g: f64,
    bias: f64,
    offset: f64,
    inv_norm: f64,
}

impl SoftStage {
    fn new(g: f64, bias: f64) -> Self {
        let offset = (g * bias).tanh();
        let hi = (g * (1.0 + bias)).tanh() - offset;
        let lo = (g * (bias - 1.0)).tanh() - offset;
        Self {
            g,
            bias,
            offset,
            inv_norm: 1.0 / hi.abs().max(lo.abs()),
        }
    }

    fn apply(&self, x: f64) -> f64 {
        ((self.g * (x + self.bias)).tanh() - self.offset) * self.inv_norm
    }
}

/// Raised-cosine fade in over the first `n` samples and out over the last `n`:
/// `w = sin²(π(i + ½)/(2n))`, symmetric at both ends.
fn apply_fades(y: &mut [f64], n: usize) {
    let len = y.len();
    for i in 0..n.min(len) {
        let w = (FRAC_PI_2 * (i as f64 + 0.5) / n as f64).sin().powi(2);
        y[i] *= w;
        y[len - 1 - i] *= w;
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::gen::parse_recipe;

    fn rend(s: &str, fs: u32, frames: usize) -> Vec<f64> {
        render(&parse_recipe(s).unwrap(), fs, frames, 1).unwrap()
    }

    /// Least-squares projection of `y` onto `cos(kωn)` and `sin(kωn)` (ω in radians per sample);
    /// exact for whole periods, where the basis is orthogonal. Returns (cos, sin) amplitudes.
    fn project(y: &[f64], omega: f64, k: u32) -> (f64, f64) {
        let w = omega * f64::from(k);
        let (mut a, mut b) = (0.0, 0.0);
        for (n, v) in y.iter().enumerate() {
            let (s, c) = (w * n as f64).sin_cos();
            a += v * c;
            b += v * s;
        }
        let scale = 2.0 / y.len() as f64;
        (a * scale, b * scale)
    }

    fn harmonic_amp(y: &[f64], omega: f64, k: u32) -> f64 {
        let (a, b) = project(y, omega, k);
        a.hypot(b)
    }

    fn omega(f: f64, fs: u32) -> f64 {
        TAU * f / f64::from(fs)
    }

    fn peak(y: &[f64]) -> f64 {
        y.iter().fold(0.0f64, |m, v| m.max(v.abs()))
    }

    #[test]
    fn chebyshev_recurrence_matches_explicit_forms() {
        // Explicit T2..T5 (reference-values.md §6; any table of Chebyshev polynomials).
        let explicit: [fn(f64) -> f64; 4] = [
            |x| 2.0 * x * x - 1.0,
            |x| 4.0 * x.powi(3) - 3.0 * x,
            |x| 8.0 * x.powi(4) - 8.0 * x * x + 1.0,
            |x| 16.0 * x.powi(5) - 20.0 * x.powi(3) + 5.0 * x,
        ];
        for (i, t) in explicit.iter().enumerate() {
            let n = i + 2;
            let mut coeffs = vec![0.0; n + 1];
            coeffs[n] = 1.0;
            for k in 0..=200 {
                let x = -1.0 + 2.0 * k as f64 / 200.0;
                let got = chebyshev_sum(&coeffs, x);
                assert!((got - t(x)).abs() < 1e-13, "T{n}({x}) = {got} vs {}", t(x));
            }
        }
        // And T_n(cos t) = cos(nt) for the highest order we offer.
        let mut coeffs = vec![0.0; 41];
        coeffs[40] = 1.0;
        for k in 0..100 {
            let t = k as f64 * 0.0317;
            assert!((chebyshev_sum(&coeffs, t.cos()) - (40.0 * t).cos()).abs() < 1e-11);
        }
    }

    #[test]
    fn harmonics_recipe_gives_exact_h3() {
        // harmonics:1000@-20,h3=-40 at 48 kHz, 1 s = 1000 whole periods (48 samples each).
        let fs = 48000;
        let y = rend("harmonics:1000@-20,h3=-40", fs, 48000);
        let w = omega(1000.0, fs);
        let (a1, b1) = project(&y, w, 1);
        let (a3, b3) = project(&y, w, 3);
        // The recipe's LEVEL is the fundamental's peak: 10^(−20/20) = 0.1, in cosine phase.
        assert!((a1 - 0.1).abs() < 1e-12, "a1 {a1}");
        assert!(b1.abs() < 1e-12 && b3.abs() < 1e-12);
        // H3 in cosine phase at −40 dBc (the recipe), within 0.001 dB.
        assert!(a3 > 0.0);
        let dbc = 20.0 * (a3 / a1).log10();
        assert!((dbc + 40.0).abs() < 0.001, "H3 {dbc} dBc");
        // Nothing else: H2, H4, H5 absent.
        for k in [2, 4, 5] {
            assert!(harmonic_amp(&y, w, k) < 1e-12);
        }
    }

    #[test]
    fn harmonics_phase_is_cosine_phase_of_fundamental() {
        let y = rend("harmonics:1000@0,h2=-6.0206", 48000, 48);
        // T_n(cos 0) = 1 for all n: the waveform starts at 1 + 10^(−6.0206/20) ≈ 1.5.
        assert!((y[0] - (1.0 + db_to_amp(-6.0206))).abs() < 1e-12);
    }

    /// THD_F from projections onto harmonics 2.. below Nyquist.
    fn thd_f(y: &[f64], w: f64, top: u32) -> f64 {
        let h1 = harmonic_amp(y, w, 1);
        let rest: f64 = (2..=top).map(|k| harmonic_amp(y, w, k).powi(2)).sum();
        rest.sqrt() / h1
    }

    #[test]
    fn band_limited_waves_match_fourier_series() {
        // 100 Hz at 48 kHz: 480 samples a period; harmonics below 0.98·24000 = 23520 Hz, i.e.
        // n ≤ 235. Bins up to 239 are below Nyquist, so the projections see every term unaliased.
        let fs = 48000;
        let w = omega(100.0, fs);
        // (recipe, expected partial sum Σ_{included n ≥ 2} (c_n/c_1)², full-series THD_F from
        // reference-values.md §6)
        let odd_sq: f64 = (3..=235)
            .step_by(2)
            .map(|n: u32| 1.0 / f64::from(n * n))
            .sum();
        let odd_4: f64 = (3..=235)
            .step_by(2)
            .map(|n: u32| f64::from(n).powi(-4))
            .sum();
        let all_sq: f64 = (2..=235).map(|n: u32| 1.0 / f64::from(n * n)).sum();
        let cases = [
            ("square:100@-6", odd_sq.sqrt(), (PI * PI / 8.0 - 1.0).sqrt()), // 48.34 %
            (
                "triangle:100@-6",
                odd_4.sqrt(),
                (PI.powi(4) / 96.0 - 1.0).sqrt(),
            ), // 12.12 %
            ("saw:100@-6", all_sq.sqrt(), (PI * PI / 6.0 - 1.0).sqrt()),    // 80.31 %
        ];
        for (recipe, partial, full) in cases {
            let y = rend(recipe, fs, 48000);
            let thd = thd_f(&y, w, 239);
            assert!(
                ((thd - partial) / partial).abs() < 1e-9,
                "{recipe}: THD_F {thd} vs partial sum {partial}"
            );
            // Sanity bound: the truncated series sits just under the full one, within 0.5 %.
            assert!(
                thd <= full && (full - thd) / full < 0.005,
                "{recipe}: {thd} vs {full}"
            );
            // Nothing above the highest included harmonic.
            for k in 236..=239 {
                assert!(harmonic_amp(&y, w, k) < 1e-12, "{recipe} H{k}");
            }
            // Peak: the continuous waveform peaks at LEVEL; samples can only fall short of it.
            let level = db_to_amp(-6.0);
            let p = peak(&y);
            assert!(
                p <= level * (1.0 + 1e-12) && p > level * 0.99,
                "{recipe}: peak {p}"
            );
        }
        // Spot values of the published THD_F figures themselves.
        assert!(((PI * PI / 8.0 - 1.0).sqrt() - 0.4834).abs() < 5e-5);
        assert!(((PI.powi(4) / 96.0 - 1.0).sqrt() - 0.1212).abs() < 5e-5);
    }

    #[test]
    fn square_has_no_even_harmonics_and_right_sign() {
        let fs = 48000;
        let y = rend("square:100@-6", fs, 4800);
        let w = omega(100.0, fs);
        for k in [2, 4, 6, 100] {
            assert!(harmonic_amp(&y, w, k) < 1e-12);
        }
        // Starts at zero and rises (sine phase, phase=0).
        assert!(y[0].abs() < 1e-12 && y[1] > 0.0);
    }

    #[test]
    fn series_peaks_are_global_maxima() {
        // The closed-form peak positions (Series::peak) against a dense brute-force search of one
        // period; the search can only under-read, so it must come out at most equal, and close.
        for wave in [Wave::Square, Wave::Triangle, Wave::Saw] {
            for n_terms in [1u32, 2, 3, 5, 8, 13, 40, 117] {
                let top = if wave == Wave::Saw {
                    n_terms
                } else {
                    2 * n_terms - 1
                };
                let s = Series::new(wave, 1.0, f64::from(top) + 0.5);
                assert_eq!(s.terms.len(), n_terms as usize);
                let claimed = s.peak();
                let grid = 200 * top as usize + 1000;
                let found = (0..grid)
                    .map(|i| s.eval(TAU * i as f64 / grid as f64).abs())
                    .fold(0.0f64, f64::max);
                assert!(
                    found <= claimed + 1e-12,
                    "{wave:?}/{n_terms}: {found} > {claimed}"
                );
                assert!(
                    claimed - found < 1e-4 * claimed,
                    "{wave:?}/{n_terms}: {found} {claimed}"
                );
            }
        }
    }

    #[test]
    fn series_eval_is_accurate_for_many_terms() {
        // Phasor rotation against direct sin() for a 4704-term square (20 Hz at 384 kHz).
        let s = Series::new(Wave::Square, 20.0, 0.98 * 192_000.0);
        assert_eq!(s.terms.len(), 4704);
        for k in 0..50 {
            let th = 0.1234 * k as f64;
            let direct: f64 = s
                .terms
                .iter()
                .map(|&(n, c)| c * (f64::from(n) * th).sin())
                .sum();
            assert!((s.eval(th) - direct).abs() < 1e-12);
        }
    }

    #[test]
    fn periodic_fill_equals_direct_computation() {
        // 100 Hz at 48 kHz repeats every 480 samples; the tiled copy must equal direct values.
        let r = parse_recipe("square:100@-6,phase=30").unwrap();
        let y = render(&r, 48000, 100_000, 1).unwrap();
        let s = Series::new(Wave::Square, 100.0, 23520.0);
        let scale = db_to_amp(-6.0) / s.peak();
        let osc = Osc {
            fs: 48000.0,
            phi: 30f64.to_radians(),
        };
        for i in [0, 479, 480, 12345, 99_999] {
            assert_eq!(y[i], scale * s.eval(osc.theta(100.0, i)), "sample {i}");
        }
        assert_eq!(period(100.0, 48000), Some(480));
        assert_eq!(period(997.0, 48000), Some(48000));
        assert_eq!(period(997.5, 48000), None);
    }

    #[test]
    fn limit_caps_the_harmonics() {
        let fs = 48000;
        let y = rend("square:100@-6,limit=1000", fs, 4800);
        let w = omega(100.0, fs);
        // Harmonics strictly below 1000 Hz: 1, 3, 5, 7, 9.
        assert!(harmonic_amp(&y, w, 9) > 1e-3);
        assert!(harmonic_amp(&y, w, 11) < 1e-12);
        let e = render(&parse_recipe("square:23600").unwrap(), fs, 100, 1).unwrap_err();
        assert_eq!(
            e.to_string(),
            "square at 23600 Hz has no harmonic below 23520 Hz (98 % of Nyquist, or limit=): \
             'square:23600@-20'"
        );
        // 1 Hz at 384 kHz would need 94080 terms for each of 384000 samples: refused up front.
        let e = render(&parse_recipe("square:1").unwrap(), 384_000, 384_000, 1).unwrap_err();
        assert!(
            e.to_string()
                .starts_with("square at 1 Hz needs 94080 harmonics per sample, too slow"),
            "{e}"
        );
    }

    /// Closed form for a sine sin t clipped at ±c (reference-values.md §6):
    /// b_n = (2/(πn))·[S(n−1) + S(n+1)], S(m) = sin(mα)/m, S(0) = α, α = arcsin c.
    fn clip_bn(c: f64, n: u32) -> f64 {
        let alpha = c.asin();
        let s = |m: u32| {
            if m == 0 {
                alpha
            } else {
                (f64::from(m) * alpha).sin() / f64::from(m)
            }
        };
        2.0 / (PI * f64::from(n)) * (s(n - 1) + s(n + 1))
    }

    #[test]
    fn hard_clip_plateau_and_harmonics() {
        // drive = 20·log10(2) dB puts the clip point at half the sine's peak: c = 0.5.
        // 20 Hz at 48 kHz: 2400 samples a period, so aliases of the (1/n²-decaying) clip harmonics
        // land far below the tolerance; 1 s = 20 whole periods.
        let fs = 48000;
        let drive = 20.0 * 2f64.log10();
        let y = rend(&format!("clip:20@-6,drive={drive}"), fs, 48000);
        let level = db_to_amp(-6.0);
        // The plateau is exactly LEVEL, with no overshoot, on both sides.
        assert_eq!(peak(&y), level);
        assert!(y.iter().filter(|&&v| v == level).count() > 1000);
        assert!(y.iter().filter(|&&v| v == -level).count() > 1000);
        let w = omega(20.0, fs);
        let (_, b1) = project(&y, w, 1);
        let (_, b3) = project(&y, w, 3);
        let expected = clip_bn(0.5, 3) / clip_bn(0.5, 1);
        assert!(
            ((b3 / b1) - expected).abs() < 1e-4 * expected.abs(),
            "{} vs {expected}",
            b3 / b1
        );
        // Closed-form THD_F for c = 0.5 is 23.29 % (reference-values.md §6).
        let thd_closed = ((3..2000)
            .step_by(2)
            .map(|n| clip_bn(0.5, n).powi(2))
            .sum::<f64>())
        .sqrt()
            / clip_bn(0.5, 1);
        assert!((thd_closed - 0.2329).abs() < 5e-5, "{thd_closed}");
        // Even harmonics absent (symmetric clip).
        assert!(harmonic_amp(&y, w, 2) < 1e-12 * b1.abs());
    }

    #[test]
    fn clip_drive_zero_is_clean_sine() {
        let fs = 48000;
        let y = rend("clip:100@-6,drive=0", fs, 4800);
        let w = omega(100.0, fs);
        assert!((harmonic_amp(&y, w, 1) - db_to_amp(-6.0)).abs() < 1e-12);
        assert!(harmonic_amp(&y, w, 3) < 1e-12);
    }

    #[test]
    fn clip_drive_steps() {
        // drive=0..12/5 over 1 s: five 0.2 s steps at 0, 3, 6, 9, 12 dB. The fraction of samples
        // on the plateau in each step is 1 − (2/π)·arcsin(10^(−d/20)) (time a sine spends above c).
        let fs = 48000;
        let y = rend("clip:100@-6,drive=0..12/5", fs, 48000);
        let level = db_to_amp(-6.0);
        for (k, d) in [0.0, 3.0, 6.0, 9.0, 12.0].iter().enumerate() {
            let seg = &y[k * 9600..(k + 1) * 9600];
            let frac = seg.iter().filter(|&&v| v.abs() == level).count() as f64 / 9600.0;
            let expect = 1.0 - 2.0 / PI * db_to_amp(-d).asin();
            assert!((frac - expect).abs() < 0.01, "step {k}: {frac} vs {expect}");
        }
    }

    #[test]
    fn soft_symmetric_has_only_odd_harmonics() {
        // tanh is odd, so with bias 0 the transfer curve is odd: odd harmonics only (§6).
        let fs = 48000;
        let w = omega(100.0, fs);
        let y = rend("soft:100@-6,drive=12,bias=0", fs, 48000);
        let h1 = harmonic_amp(&y, w, 1);
        assert!(harmonic_amp(&y, w, 3) > 1e-2 * h1);
        for k in [2, 4] {
            assert!(harmonic_amp(&y, w, k) < 1e-9 * h1, "H{k}");
        }
        assert!((peak(&y) - db_to_amp(-6.0)).abs() < 1e-12);
    }

    #[test]
    fn soft_biased_has_strong_second_harmonic() {
        let fs = 48000;
        let w = omega(100.0, fs);
        let y = rend("soft:100@-6,drive=6,bias=0.3", fs, 48000);
        let h1 = harmonic_amp(&y, w, 1);
        let h2 = harmonic_amp(&y, w, 2);
        assert!(
            20.0 * (h2 / h1).log10() > -40.0,
            "H2 {} dBc",
            20.0 * (h2 / h1).log10()
        );
        // Peak normalised to LEVEL (the positive side of the shifted curve reaches it first or
        // the negative side: either way max |y| = LEVEL, up to the sampling of the crest).
        let p = peak(&y);
        assert!(p <= db_to_amp(-6.0) * (1.0 + 1e-12) && p > db_to_amp(-6.0) * 0.9999);
    }

    #[test]
    fn twin_amplitudes_follow_ratio() {
        // 60 Hz + 7 kHz at 4:1 (SMPTE RP120 stimulus), A1 + A2 = 10^(−6/20).
        let fs = 48000;
        let y = rend("twin:60+7000@-6,ratio=4", fs, 48000);
        let a = db_to_amp(-6.0);
        let a1 = harmonic_amp(&y, omega(60.0, fs), 1);
        let a2 = harmonic_amp(&y, omega(7000.0, fs), 1);
        assert!((a1 - 0.8 * a).abs() < 1e-12, "{a1}");
        assert!((a2 - 0.2 * a).abs() < 1e-12, "{a2}");
        assert!(peak(&y) <= a);
    }

    #[test]
    fn smpte_and_twin_defaults_render_their_tone_pairs() {
        // Projections over 1 s at 48 kHz: 60, 7000, 19000 and 20000 Hz all complete whole
        // periods, so each projection reads its tone alone, exactly.
        let fs = 48000;
        let a = db_to_amp(-6.0);
        // smpte: 60 Hz + 7 kHz at 4:1, combined peak = LEVEL (SMPTE RP120, reference-values.md §7).
        let y = rend("smpte@-6", fs, 48000);
        let a1 = harmonic_amp(&y, omega(60.0, fs), 1);
        let a2 = harmonic_amp(&y, omega(7000.0, fs), 1);
        assert!((a1 - 0.8 * a).abs() < 1e-12, "{a1}");
        assert!((a2 - 0.2 * a).abs() < 1e-12, "{a2}");
        // Nothing else: the residual after both tones is zero (calc).
        let (c1, s1) = project(&y, omega(60.0, fs), 1);
        let (c2, s2) = project(&y, omega(7000.0, fs), 1);
        let resid = y.iter().enumerate().fold(0.0f64, |m, (n, v)| {
            let (w1, w2) = (omega(60.0, fs) * n as f64, omega(7000.0, fs) * n as f64);
            let model = c1 * w1.cos() + s1 * w1.sin() + c2 * w2.cos() + s2 * w2.sin();
            m.max((v - model).abs())
        });
        assert!(resid < 1e-12, "{resid}");
        // The sum of two sines at phase 0 comes within a hair of A1 + A2 at 48 kHz.
        assert!(peak(&y) <= a && peak(&y) > 0.99 * a, "{}", peak(&y));
        // ratio= overrides the default: 10:1 gives 10/11 and 1/11 of the level.
        let y = rend("smpte@-6,ratio=10", fs, 48000);
        let a1 = harmonic_amp(&y, omega(60.0, fs), 1);
        assert!((a1 - a * 10.0 / 11.0).abs() < 1e-12, "{a1}");
        // twin: 19 kHz + 20 kHz at 1:1 (twin-tone test, reference-values.md §7).
        let y = rend("twin@-6", fs, 48000);
        let a1 = harmonic_amp(&y, omega(19000.0, fs), 1);
        let a2 = harmonic_amp(&y, omega(20000.0, fs), 1);
        assert!((a1 - 0.5 * a).abs() < 1e-12, "{a1}");
        assert!((a2 - 0.5 * a).abs() < 1e-12, "{a2}");
    }

    fn aes17_rms_db(y: &[f64]) -> f64 {
        let rms = (y.iter().map(|v| v * v).sum::<f64>() / y.len() as f64).sqrt();
        20.0 * (SQRT_2 * rms).log10()
    }

    #[test]
    fn noise_level_and_reproducibility() {
        // AES17 RMS of 48000 Gaussian samples: the estimate's spread is ≈ 0.03 dB.
        let r = parse_recipe("noise@-60").unwrap();
        let a = render(&r, 48000, 48000, 5).unwrap();
        assert!(
            (aes17_rms_db(&a) + 60.0).abs() < 0.2,
            "{}",
            aes17_rms_db(&a)
        );
        assert_eq!(a, render(&r, 48000, 48000, 5).unwrap());
        let b = render(&r, 48000, 48000, 6).unwrap();
        assert_ne!(a, b);
        assert!(a.iter().zip(&b).filter(|(x, y)| x == y).count() < 10);
    }

    #[test]
    fn added_noise_and_dc() {
        // A flat-topped sine at −6 dBFS with noise at −96 dBFS and a DC offset of 0.01.
        let fs = 48000;
        let clean = rend("clip:100@-6,drive=6", fs, 48000);
        let y = rend("clip:100@-6,drive=6,noise=-96,dc=0.01", fs, 48000);
        let diff: Vec<f64> = y.iter().zip(&clean).map(|(a, b)| a - b - 0.01).collect();
        assert!((aes17_rms_db(&diff) + 96.0).abs() < 0.2);
        let mean = diff.iter().sum::<f64>() / diff.len() as f64;
        assert!(mean.abs() < 1e-6);
    }

    #[test]
    fn start_stop_and_fades() {
        let fs = 48000;
        let y = rend("sine:1000@0,phase=90,start=0.1,stop=0.2,fade=5", fs, 14400);
        assert!(y[..4800].iter().all(|&v| v == 0.0));
        assert!(y[9600..].iter().all(|&v| v == 0.0));
        // Fade of 240 samples: first active sample weighted sin²(π/960), the phase starts at the
        // span start (phase=90: cosine crest).
        let w0 = (FRAC_PI_2 * 0.5 / 240.0).sin().powi(2);
        assert!((y[4800] - w0).abs() < 1e-15);
        // Past the fade the tone is untouched: 480 samples in = 10 periods of 1 kHz, at the crest.
        let i = 4800 + 480;
        assert!((y[i] - 1.0).abs() < 1e-12, "{}", y[i]);
        // Symmetric fade-out: last active sample carries the same small weight.
        let last = rend("sine:1000@0,phase=90,fade=5", fs, 4800);
        assert!((last[4799] - w0 * (TAU * 4799.0 / 48.0 + FRAC_PI_2).sin()).abs() < 1e-15);
    }

    #[test]
    fn sine_level_sweep_and_phase() {
        let fs = 48000;
        // 8 steps from −40 to −6 dB over 0.8 s: step k at −40 + 34k/7 dB.
        let y = rend("sine:1000@-40..-6/8", fs, 38400);
        for k in 0..8 {
            let seg = &y[k * 4800..(k + 1) * 4800];
            let expect = db_to_amp(-40.0 + 34.0 * k as f64 / 7.0);
            assert!((peak(seg) - expect).abs() < 1e-12 * expect.max(1.0));
        }
        // phase=90 starts at the crest: exactly the level (sin(π/2) is 1 in f64).
        let y = rend("sine:1000@-6.0206,phase=90", fs, 10);
        assert_eq!(y[0], db_to_amp(-6.0206));
    }

    #[test]
    fn nyquist_is_checked_at_render_time() {
        let err = |s: &str, fs: u32| {
            render(&parse_recipe(s).unwrap(), fs, 10, 1)
                .unwrap_err()
                .to_string()
        };
        assert_eq!(
            err("sine:30000", 48000),
            "frequency 30000 Hz is at or above Nyquist (24000 Hz): 'sine:30000@-20'"
        );
        assert_eq!(
            err("harmonics:10000,h3=-40", 48000),
            "frequency 30000 Hz is at or above Nyquist (24000 Hz): harmonic h3 of \
             'harmonics:10000@-20,h3=-40'"
        );
        assert_eq!(
            err("twin", 32000),
            "frequency 19000 Hz is at or above Nyquist (16000 Hz): 'twin:19000+20000@-20,ratio=1'"
        );
        // 20 kHz is fine at 44.1 kHz.
        assert!(render(&parse_recipe("twin").unwrap(), 44100, 10, 1).is_ok());
    }
}
