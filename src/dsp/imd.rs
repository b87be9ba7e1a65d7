//! Intermodulation distortion (IMD) of a two-tone stimulus on one channel's record.
//!
//! Two methods, both read as amplitude ratios (`../shared/reference-values.md` §7):
//!
//! - **SMPTE** (SMPTE RP120: 60 Hz + 7 kHz at 4:1; the DIN pair 250 Hz + 8 kHz works the same
//!   way): a strong low tone `f1` modulates a weaker high tone `f2`. The sidebands `f2 ± n·f1`
//!   for `n = 1..=N` ([`ImdSettings::sidebands`], default 3) are measured while both of a pair
//!   lie clear of the low tone and below Nyquist, and
//!   `IMD = √Σ(A_{f2−n·f1}² + A_{f2+n·f1}²) / A_{f2}`: referred to the **high tone**.
//! - **Twin tone** (CCIF style, e.g. 19 kHz + 20 kHz at 1:1): the difference product
//!   `f2 − f1` (2nd order, `d2`) and the 3rd-order products `2f1 − f2` and `2f2 − f1`
//!   (`d3` = their RSS). References differ between standards (one tone, or the sum of the two);
//!   ours is the **sum of the two tones' amplitudes** `A_{f1} + A_{f2}` (the peak of the pair),
//!   for every product and for the total `√Σ A_p² / (A_{f1} + A_{f2})`. The figure against one
//!   tone is the product's level in dBFS less that tone's.
//!
//! Steps:
//! 1. The two strongest peaks of a 4-term Blackman-Harris spectrum of the mean-removed record
//!    (or the peaks within ±2 % of the given tones). The second may not sit on a harmonic 2..10
//!    of the first (a single distorted tone is not a pair); each must stand
//!    [`ImdSettings::min_prominence_db`] above the median of its neighbourhood, the weaker no
//!    more than [`ImdSettings::max_level_difference_db`] below the stronger, and together their
//!    main lobes hold [`ImdSettings::min_pair_fraction`] of the AC power. Otherwise: `None`.
//! 2. Each tone's frequency is refined by the IEEE 1057 four-parameter fit
//!    ([`super::sinefit::fit4`]), alternating so each fit sees the record less the other tone.
//! 3. Every amplitude (tones and products) is the single-frequency DFT at its exact frequency
//!    under the 7-term Blackman-Harris window (sidelobes near −180 dB, no scalloping loss),
//!    summed directly over the record with a rotating phasor ([`super::sinefit::sweep`]).
//!    A product counts only when it stands at least the window's main lobe (8 bins) clear of
//!    DC, Nyquist and both tones. A product that coincides with a harmonic of a tone (e.g.
//!    `f2 = k·f1` exactly) reads that harmonic too: the method cannot tell them apart.
//!
//! `Auto` picks twin tone when the tones are close (`f2 < 2·f1`, so the difference product lies
//! below both), SMPTE otherwise.

use std::f64::consts::PI;
use std::fmt;
use std::str::FromStr;

use realfft::RealFftPlanner;

use super::sinefit::{fit4, sum_and_squares, sweep, SineFit};
use super::spectrum::{log_parabola_offset, median, power_into};
use super::window::{self, Window};

/// Which IMD measurement to make.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum ImdMethod {
    /// Low tone modulating a high tone: sidebands `f2 ± n·f1`, referred to the high tone.
    Smpte,
    /// Two close tones: `f2 − f1`, `2f1 − f2`, `2f2 − f1`, referred to the sum of the tones.
    Twin,
    /// Decide from the two strongest tones (twin when `f2 < 2·f1`).
    Auto,
}

impl ImdMethod {
    /// The name used on the command line and in reports.
    pub fn name(self) -> &'static str {
        match self {
            ImdMethod::Smpte => "smpte",
            ImdMethod::Twin => "twin",
            ImdMethod::Auto => "auto",
        }
    }
}

impl fmt::Display for ImdMethod {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.name())
    }
}

impl FromStr for ImdMethod {
    type Err = String;

    fn from_str(s: &str) -> Result<Self, Self::Err> {
        match s.trim() {
            "smpte" => Ok(ImdMethod::Smpte),
            "twin" => Ok(ImdMethod::Twin),
            "auto" => Ok(ImdMethod::Auto),
            other => Err(format!(
                "unknown IMD method '{other}' (use smpte, twin or auto)"
            )),
        }
    }
}

/// Settings for IMD analysis.
#[derive(Debug, Clone, PartialEq)]
pub struct ImdSettings {
    /// Which measurement.
    pub method: ImdMethod,
    /// The two tones (Hz, any order), each searched within ±2 %; `None` finds the two strongest.
    pub tones_hz: Option<(f64, f64)>,
    /// SMPTE: most sideband pairs `f2 ± n·f1` counted.
    pub sidebands: usize,
    /// Least height of each tone's peak above the median of its neighbourhood (dB).
    pub min_prominence_db: f64,
    /// Most the weaker tone may lie below the stronger (dB).
    pub max_level_difference_db: f64,
    /// Least share of the AC power the two tones' main lobes must hold together.
    pub min_pair_fraction: f64,
}

impl Default for ImdSettings {
    fn default() -> Self {
        ImdSettings {
            method: ImdMethod::Auto,
            tones_hz: None,
            sidebands: 3,
            min_prominence_db: 30.0,
            max_level_difference_db: 40.0,
            min_pair_fraction: 0.5,
        }
    }
}

impl ImdSettings {
    /// Default settings for `method`.
    pub fn with_method(method: ImdMethod) -> Self {
        ImdSettings {
            method,
            ..ImdSettings::default()
        }
    }
}

/// One intermodulation product.
#[derive(Debug, Clone, PartialEq)]
pub struct ImdProduct {
    /// Which product, e.g. `f2-f1`, `f2+2f1`, `2f1-f2`.
    pub name: String,
    /// Order of the product (`|a| + |b|` for `a·f1 + b·f2`).
    pub order: u32,
    /// Frequency (Hz).
    pub freq_hz: f64,
    /// Peak amplitude (full scale = 1).
    pub amplitude: f64,
}

/// The result of IMD analysis.
#[derive(Debug, Clone, PartialEq)]
pub struct ImdResult {
    /// The measurement made ([`ImdMethod::Smpte`] or [`ImdMethod::Twin`], never `Auto`).
    pub method: ImdMethod,
    /// Lower tone (Hz).
    pub f1_hz: f64,
    /// Its peak amplitude.
    pub f1_amplitude: f64,
    /// Higher tone (Hz).
    pub f2_hz: f64,
    /// Its peak amplitude.
    pub f2_amplitude: f64,
    /// What the products are referred to: `A_{f2}` (SMPTE) or `A_{f1} + A_{f2}` (twin).
    pub reference_amplitude: f64,
    /// The products measured, in a fixed order (SMPTE: `f2−f1, f2+f1, f2−2f1, ...`; twin:
    /// `f2−f1, 2f1−f2, 2f2−f1`).
    pub products: Vec<ImdProduct>,
    /// Total: `√Σ A_p² / reference`.
    pub ratio: f64,
    /// Twin: the 2nd-order product `f2 − f1` over the reference.
    pub d2_ratio: Option<f64>,
    /// Twin: the RSS of the 3rd-order products over the reference.
    pub d3_ratio: Option<f64>,
    /// Record length used (samples).
    pub samples: usize,
}

impl ImdResult {
    /// The reference's name as reports spell it.
    pub fn reference_name(&self) -> &'static str {
        match self.method {
            ImdMethod::Twin => "f1+f2",
            _ => "f2",
        }
    }
}

/// Products stand at least this many bins (the 7-term window's main lobe and one more) from
/// DC, Nyquist, the tones and each other.
const GUARD_BINS: f64 = 8.0;

/// Harmonics of the stronger tone not taken for the second tone.
const HARMONICS_EXCLUDED: std::ops::RangeInclusive<usize> = 2..=10;

/// The windowed single-frequency DFT amplitude at `freq_hz` of the pre-windowed record `xw`:
/// `2·|Σ xw[n]·e^(−iω(n−c))| / Σw`.
fn amplitude_at(xw: &[f64], win_sum: f64, freq_hz: f64, sample_rate: f64) -> f64 {
    let n = xw.len();
    let omega = 2.0 * PI * freq_hz / sample_rate;
    let (mut re, mut im) = (0.0, 0.0);
    sweep(n, omega, (n as f64 - 1.0) / 2.0, |i, s, c| {
        re += xw[i] * c;
        im -= xw[i] * s;
    });
    2.0 * re.hypot(im) / win_sum
}

/// A spectral peak found in the 4-term spectrum.
#[derive(Debug, Clone, Copy)]
struct Peak {
    bin: usize,
    /// Interpolated position (bins).
    nu: f64,
}

/// Analyse one channel's record (full scale = 1) at `sample_rate`. `None` when the record
/// carries no two tones that fit the settings.
pub fn analyze(samples: &[f32], sample_rate: f64, settings: &ImdSettings) -> Option<ImdResult> {
    let n = samples.len() & !1;
    if n < 256 || !sample_rate.is_finite() || sample_rate <= 0.0 {
        return None;
    }
    let mut x: Vec<f64> = samples[..n].iter().map(|&v| f64::from(v)).collect();
    let (sum, squares) = sum_and_squares(&x);
    if !sum.is_finite() || !squares.is_finite() {
        return None;
    }
    let mean = sum / n as f64;
    let ac_power = squares / n as f64 - mean * mean;
    if ac_power <= 0.0 {
        return None;
    }
    for v in &mut x {
        *v -= mean;
    }

    // 1. The 4-term spectrum, calibrated so the sum over bins estimates mean power.
    let plan = RealFftPlanner::<f64>::new().plan_fft_forward(n);
    let win4 = window::shared(Window::BlackmanHarris4, n);
    let win4_sq: f64 = win4.iter().map(|w| w * w).sum();
    let mut buf: Vec<f64> = x.iter().zip(win4.iter()).map(|(v, w)| v * w).collect();
    let mut spec = plan.make_output_vec();
    plan.process(&mut buf, &mut spec).ok()?;
    let mut power = vec![0.0; spec.len()];
    power_into(n, win4_sq, &mut power, |m| spec[m]);
    let last = power.len() - 1;

    let df = sample_rate / n as f64;
    let lobe4 = Window::BlackmanHarris4.main_lobe_half_width();
    let lobe7 = Window::BlackmanHarris7.main_lobe_half_width();
    let k_lo = GUARD_BINS as usize;
    let k_hi = last.saturating_sub(lobe7 + 2);
    if k_lo + 2 > k_hi {
        return None;
    }
    let is_local_max = |k: usize| power[k] >= power[k - 1] && power[k] >= power[k + 1];
    let strongest = |lo: usize, hi: usize, skip: &dyn Fn(usize) -> bool| -> Option<usize> {
        (lo.max(k_lo)..=hi.min(k_hi))
            .filter(|&k| !skip(k) && is_local_max(k))
            .max_by(|&a, &b| power[a].total_cmp(&power[b]))
    };
    let interpolate = |k: usize| -> Peak {
        Peak {
            bin: k,
            nu: k as f64 + log_parabola_offset(&power, k),
        }
    };
    let near = |k: usize, centre: f64| (k as f64 - centre).abs() < GUARD_BINS;

    let (pa, pb) = match settings.tones_hz {
        Some((fa, fb)) => {
            let window_of = |f: f64| {
                (
                    (f * 0.98 / df).floor().max(0.0) as usize,
                    (f * 1.02 / df).ceil().min(k_hi as f64) as usize,
                )
            };
            let (lo, hi) = window_of(fa);
            let a = interpolate(strongest(lo, hi, &|_| false)?);
            let (lo, hi) = window_of(fb);
            let b = interpolate(strongest(lo, hi, &|k| near(k, a.nu))?);
            (a, b)
        }
        None => {
            let a = interpolate(strongest(k_lo, k_hi, &|_| false)?);
            let skip = |k: usize| {
                near(k, a.nu)
                    || HARMONICS_EXCLUDED
                        .clone()
                        .any(|h| (k as f64 - h as f64 * a.nu).abs() <= (lobe4 + 1) as f64)
            };
            let b = interpolate(strongest(k_lo, k_hi, &skip)?);
            (a, b)
        }
    };
    if (pa.nu - pb.nu).abs() < GUARD_BINS {
        return None;
    }

    // Are they tones? Prominence over the neighbourhood, level difference, share of power.
    let reach = 64usize;
    let mut bins = Vec::with_capacity(2 * reach);
    let mut prominence = |p: &Peak, other: &Peak| -> Option<f64> {
        bins.clear();
        bins.extend(
            (p.bin.saturating_sub(reach)..(p.bin + reach).min(power.len()))
                .filter(|&k| {
                    k > 0 && k.abs_diff(p.bin) > lobe4 + 1 && k.abs_diff(other.bin) > lobe4 + 1
                })
                .map(|k| power[k]),
        );
        let local = median(&mut bins)?;
        Some(if local > 0.0 {
            10.0 * (power[p.bin] / local).log10()
        } else {
            f64::INFINITY
        })
    };
    for (p, other) in [(&pa, &pb), (&pb, &pa)] {
        if prominence(p, other)? < settings.min_prominence_db {
            return None;
        }
    }
    let (pa_pow, pb_pow) = (power[pa.bin], power[pb.bin]);
    if pa_pow <= 0.0 || pb_pow <= 0.0 {
        return None;
    }
    if 10.0 * (pa_pow.max(pb_pow) / pa_pow.min(pb_pow)).log10() > settings.max_level_difference_db {
        return None;
    }
    let lobe_power = |p: &Peak| -> f64 {
        power[p.bin.saturating_sub(lobe4)..=(p.bin + lobe4).min(last)]
            .iter()
            .sum()
    };
    if lobe_power(&pa) + lobe_power(&pb) < settings.min_pair_fraction * ac_power {
        return None;
    }

    // 2. Refine both frequencies: fit the stronger tone, then the weaker on the record less the
    //    stronger, and once more each way.
    let to_omega = |nu: f64| 2.0 * PI * nu / n as f64;
    let max_step = to_omega(2.0);
    let (strong, weak) = if pa_pow >= pb_pow { (pa, pb) } else { (pb, pa) };
    let mut rest = Vec::with_capacity(n);
    let mut fit_less = |other: Option<&SineFit>, omega0: f64| -> Option<SineFit> {
        match other {
            None => fit4(&x, omega0, max_step),
            Some(o) => {
                o.residual_into(&x, &mut rest);
                fit4(&rest, omega0, max_step)
            }
        }
    };
    let mut fit_s = fit_less(None, to_omega(strong.nu))?;
    let mut fit_w = fit_less(Some(&fit_s), to_omega(weak.nu))?;
    fit_s = fit_less(Some(&fit_w), fit_s.omega)?;
    fit_w = fit_less(Some(&fit_s), fit_w.omega)?;
    let hz = |f: &SineFit| f.omega * sample_rate / (2.0 * PI);
    let (fs_hz, fw_hz) = (hz(&fit_s), hz(&fit_w));
    let (f1, f2) = if fs_hz < fw_hz {
        (fs_hz, fw_hz)
    } else {
        (fw_hz, fs_hz)
    };
    if !(f1 > 0.0 && f2 - f1 >= GUARD_BINS * df) {
        return None;
    }

    // 3. Amplitudes at exact frequencies under the 7-term window.
    let win7 = window::shared(Window::BlackmanHarris7, n);
    let win7_sum: f64 = win7.iter().sum();
    for (v, w) in x.iter_mut().zip(win7.iter()) {
        *v *= w;
    }
    let amp = |f: f64| amplitude_at(&x, win7_sum, f, sample_rate);
    let (a1, a2) = (amp(f1), amp(f2));
    let nyquist = sample_rate / 2.0;
    let guard = GUARD_BINS * df;
    let clear = |f: f64| {
        f >= guard && f <= nyquist - guard && (f - f1).abs() >= guard && (f - f2).abs() >= guard
    };
    let product = |name: String, order: u32, f: f64| ImdProduct {
        name,
        order,
        freq_hz: f,
        amplitude: amp(f),
    };

    let method = match settings.method {
        ImdMethod::Auto if f2 < 2.0 * f1 => ImdMethod::Twin,
        ImdMethod::Auto => ImdMethod::Smpte,
        m => m,
    };
    let (reference, products, d2_ratio, d3_ratio) = match method {
        ImdMethod::Twin => {
            let reference = a1 + a2;
            let d2 = f2 - f1;
            let (l3, h3) = (2.0 * f1 - f2, 2.0 * f2 - f1);
            let mut products = Vec::new();
            if clear(d2) {
                products.push(product("f2-f1".to_string(), 2, d2));
            }
            for (name, f) in [("2f1-f2", l3), ("2f2-f1", h3)] {
                if clear(f) {
                    products.push(product(name.to_string(), 3, f));
                }
            }
            let rss = |order: u32| -> Option<f64> {
                let v: Vec<f64> = products
                    .iter()
                    .filter(|p| p.order == order)
                    .map(|p| p.amplitude * p.amplitude)
                    .collect();
                (!v.is_empty()).then(|| v.iter().sum::<f64>().sqrt() / reference)
            };
            let (d2r, d3r) = (rss(2), rss(3));
            (reference, products, d2r, d3r)
        }
        _ => {
            let mut products = Vec::new();
            for k in 1..=settings.sidebands {
                let kf = k as f64 * f1;
                let (lo, hi) = (f2 - kf, f2 + kf);
                // Both of the pair clear of the low tone (above it) and of Nyquist.
                if !(lo - f1 >= guard && clear(lo) && clear(hi)) {
                    break;
                }
                let tag = if k == 1 {
                    "f1".to_string()
                } else {
                    format!("{k}f1")
                };
                let order = k as u32 + 1;
                products.push(product(format!("f2-{tag}"), order, lo));
                products.push(product(format!("f2+{tag}"), order, hi));
            }
            (a2, products, None, None)
        }
    };
    if products.is_empty() || reference.is_nan() || reference <= 0.0 {
        return None;
    }
    let ratio = products
        .iter()
        .map(|p| p.amplitude * p.amplitude)
        .sum::<f64>()
        .sqrt()
        / reference;
    if !ratio.is_finite() {
        return None;
    }
    Some(ImdResult {
        method,
        f1_hz: f1,
        f1_amplitude: a1,
        f2_hz: f2,
        f2_amplitude: a2,
        reference_amplitude: reference,
        products,
        ratio,
        d2_ratio,
        d3_ratio,
        samples: n,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    fn db(x: f64) -> f64 {
        20.0 * x.log10()
    }

    /// `Σ a·sin(2π f n / rate + φ)`, then the curve `y = x + c2·x² + c3·x³`, as f32.
    fn pair_through(
        rate: f64,
        frames: usize,
        tones: &[(f64, f64, f64)],
        c2: f64,
        c3: f64,
    ) -> Vec<f32> {
        (0..frames)
            .map(|i| {
                let t = i as f64 / rate;
                let x: f64 = tones
                    .iter()
                    .map(|&(f, a, ph)| a * (2.0 * PI * f * t + ph).sin())
                    .sum();
                (x + c2 * x * x + c3 * x * x * x) as f32
            })
            .collect()
    }

    fn find<'a>(r: &'a ImdResult, name: &str) -> &'a ImdProduct {
        r.products
            .iter()
            .find(|p| p.name == name)
            .unwrap_or_else(|| panic!("no product {name} in {:?}", r.products))
    }

    #[test]
    fn smpte_vector_through_a_square_law() {
        // reference-values.md §7 [calc]: 0.8 sin(60 Hz) + 0.2 sin(7 kHz) through x + 0.1x²:
        // 0.1·2·0.8·0.2·sin a·sin b = 0.016 [cos(a−b) − cos(a+b)], so each f2 ± f1 sideband is
        // 0.016 = 0.08·A_f2 (−21.94 dB) and IMD = √2·0.08 = 11.31 %. x² adds nothing at f2, so
        // A_f2 stays 0.2. Two records at 48 kHz: 3.3 s (whole periods of both tones) and
        // 2.77 s (166.2 periods of 60 Hz: not whole), with the low tone's phase off zero.
        for (frames, ph) in [(158_400usize, 0.3), (132_960, 1.1)] {
            let x = pair_through(
                48_000.0,
                frames,
                &[(60.0, 0.8, ph), (7000.0, 0.2, 2.0)],
                0.1,
                0.0,
            );
            let r = analyze(&x, 48_000.0, &ImdSettings::with_method(ImdMethod::Smpte))
                .expect("a tone pair");
            assert_eq!(r.method, ImdMethod::Smpte);
            // The fits see the other products (120 Hz at 4 % of the low tone) as noise: a
            // frequency bias of the order of 1e-5 Hz, 1e-4 bins, which costs the 7-term
            // window's reading under 1e-6 dB.
            assert!((r.f1_hz - 60.0).abs() < 1e-4, "{}", r.f1_hz);
            assert!((r.f2_hz - 7000.0).abs() < 1e-4, "{}", r.f2_hz);
            assert!((r.f1_amplitude - 0.8).abs() < 1e-6, "{}", r.f1_amplitude);
            assert!((r.f2_amplitude - 0.2).abs() < 1e-6, "{}", r.f2_amplitude);
            assert_eq!(r.reference_amplitude, r.f2_amplitude);
            for name in ["f2-f1", "f2+f1"] {
                let p = find(&r, name);
                let rel = db(p.amplitude / r.f2_amplitude);
                // −21.94 dB = 20·log10(0.08) (reference-values.md §7, calc).
                assert!((rel - 20.0 * 0.08f64.log10()).abs() < 1e-4, "{name}: {rel}");
                assert!((rel + 21.94).abs() < 0.005, "{name}: {rel}");
                assert_eq!(p.order, 2);
            }
            // x² makes no f2 ± 2f1 or f2 ± 3f1 (calc): only f32 rounding is left there.
            for name in ["f2-2f1", "f2+2f1", "f2-3f1", "f2+3f1"] {
                let rel = db(find(&r, name).amplitude / r.f2_amplitude);
                assert!(rel < -120.0, "{name}: {rel}");
            }
            assert_eq!(r.products.len(), 6);
            // RSS 11.31 % (reference-values.md §7, calc: √2·0.08 = 0.113137).
            assert!((r.ratio - 0.08 * 2f64.sqrt()).abs() < 1e-6, "{}", r.ratio);
            assert!((100.0 * r.ratio - 11.31).abs() < 0.005);
            assert_eq!((r.d2_ratio, r.d3_ratio), (None, None));
        }
    }

    #[test]
    fn twin_vector_through_a_square_law() {
        // reference-values.md §7 [calc]: 0.5 sin(19 kHz) + 0.5 sin(20 kHz) through x + 0.1x²:
        // 0.1·2·0.25·sin a·sin b gives A_{f2−f1} = 0.025: −26.02 dB re one tone (0.5). Our
        // reference is the sum of the tones, 1.0: −32.04 dB (calc). No 3rd-order products.
        // At 96 kHz the x² terms (38, 39, 40 kHz) stay below Nyquist.
        let x = pair_through(
            96_000.0,
            250_000,
            &[(19_000.0, 0.5, 0.4), (20_000.0, 0.5, 1.3)],
            0.1,
            0.0,
        );
        let r = analyze(&x, 96_000.0, &ImdSettings::default()).expect("a tone pair");
        assert_eq!(r.method, ImdMethod::Twin, "auto: 20 kHz < 2·19 kHz");
        assert_eq!(r.reference_name(), "f1+f2");
        assert!((r.reference_amplitude - 1.0).abs() < 1e-6);
        let d2 = find(&r, "f2-f1");
        assert!((d2.freq_hz - 1000.0).abs() < 1e-5, "{}", d2.freq_hz);
        assert!((d2.amplitude - 0.025).abs() < 1e-7, "{}", d2.amplitude);
        // Re one tone: −26.02 dB (reference-values.md §7); re the sum: −32.04 dB (calc).
        assert!((db(d2.amplitude / r.f2_amplitude) + 26.02).abs() < 0.005);
        let d2_db = db(r.d2_ratio.expect("d2"));
        assert!((d2_db - 20.0 * 0.025f64.log10()).abs() < 1e-4, "{d2_db}");
        assert!((d2_db + 32.04).abs() < 0.005, "{d2_db}");
        assert!(db(r.d3_ratio.expect("d3")) < -120.0);
        assert_eq!(
            r.products
                .iter()
                .map(|p| p.name.as_str())
                .collect::<Vec<_>>(),
            ["f2-f1", "2f1-f2", "2f2-f1"]
        );
        assert!((r.ratio - 0.025).abs() < 1e-7);
    }

    #[test]
    fn twin_third_order_through_a_cubic() {
        // calc: a(sin A + sin B) with a = 0.5 through x + 0.1x³. From (sin A + sin B)³,
        // 3 sin²A sin B carries (3/4)·sin(2A − B) in magnitude, so A_{2f1−f2} = A_{2f2−f1}
        // = 0.1·(3/4)·a³ = 0.009375; each tone grows to a + 0.1·a³·(3/4 + 3/2) = 0.528125.
        // Reference = 2·0.528125 = 1.05625; no 2nd-order product.
        let x = pair_through(
            96_000.0,
            200_000,
            &[(19_000.0, 0.5, 0.0), (20_000.0, 0.5, 0.0)],
            0.0,
            0.1,
        );
        let r =
            analyze(&x, 96_000.0, &ImdSettings::with_method(ImdMethod::Twin)).expect("a tone pair");
        assert!(
            (r.f1_amplitude - 0.528125).abs() < 1e-6,
            "{}",
            r.f1_amplitude
        );
        assert!((r.reference_amplitude - 1.05625).abs() < 1e-6);
        for name in ["2f1-f2", "2f2-f1"] {
            let p = find(&r, name);
            assert!(
                (p.amplitude - 0.009375).abs() < 1e-7,
                "{name}: {}",
                p.amplitude
            );
        }
        assert!((find(&r, "2f1-f2").freq_hz - 18_000.0).abs() < 1e-4);
        assert!((find(&r, "2f2-f1").freq_hz - 21_000.0).abs() < 1e-4);
        let d3 = r.d3_ratio.expect("d3");
        assert!((d3 - 0.009375 * 2f64.sqrt() / 1.05625).abs() < 1e-7, "{d3}");
        assert!(db(r.d2_ratio.expect("d2")) < -120.0);
    }

    #[test]
    fn clean_pairs_read_below_minus_120_db() {
        // No curve: every product is f32 rounding only (common practice: below −120 dB).
        for (rate, tones, method) in [
            (
                48_000.0,
                [(60.0, 0.8, 0.1), (7000.0, 0.2, 0.2)],
                ImdMethod::Smpte,
            ),
            (
                48_000.0,
                [(250.0, 0.8, 0.1), (8000.0, 0.2, 0.2)],
                ImdMethod::Auto,
            ),
            (
                48_000.0,
                [(19_000.0, 0.5, 0.3), (20_000.0, 0.5, 0.0)],
                ImdMethod::Twin,
            ),
        ] {
            let x = pair_through(rate, 96_000, &tones, 0.0, 0.0);
            let r = analyze(&x, rate, &ImdSettings::with_method(method)).expect("a tone pair");
            assert!(db(r.ratio) < -120.0, "{method}: {}", db(r.ratio));
            for p in &r.products {
                assert!(
                    db(p.amplitude / r.reference_amplitude) < -120.0,
                    "{}",
                    p.name
                );
            }
        }
    }

    #[test]
    fn auto_decides_from_the_tones() {
        let x = pair_through(
            48_000.0,
            48_000,
            &[(60.0, 0.8, 0.0), (7000.0, 0.2, 0.0)],
            0.0,
            0.0,
        );
        let r = analyze(&x, 48_000.0, &ImdSettings::default()).expect("pair");
        assert_eq!(r.method, ImdMethod::Smpte);
        assert_eq!(r.reference_name(), "f2");
        // The tones may come in either order of strength and frequency.
        let x = pair_through(
            48_000.0,
            48_000,
            &[(7000.0, 0.8, 0.0), (60.0, 0.2, 0.0)],
            0.0,
            0.0,
        );
        let r = analyze(&x, 48_000.0, &ImdSettings::default()).expect("pair");
        assert_eq!(r.method, ImdMethod::Smpte);
        assert!((r.f1_hz - 60.0).abs() < 1e-6 && (r.f2_amplitude - 0.8).abs() < 1e-6);
    }

    #[test]
    fn given_tones_are_honoured() {
        // A louder third tone at 1 kHz is ignored when the pair is given.
        let x = pair_through(
            48_000.0,
            96_000,
            &[(60.0, 0.4, 0.0), (1000.0, 0.5, 0.0), (7000.0, 0.1, 0.0)],
            0.0,
            0.0,
        );
        let s = ImdSettings {
            tones_hz: Some((7000.0, 60.0)),
            min_pair_fraction: 0.2,
            ..ImdSettings::with_method(ImdMethod::Smpte)
        };
        let r = analyze(&x, 48_000.0, &s).expect("pair");
        // The louder 1 kHz tone biases the fits slightly (about 2e-4 Hz, 4e-4 bins).
        assert!(
            (r.f1_hz - 60.0).abs() < 1e-3 && (r.f2_hz - 7000.0).abs() < 1e-3,
            "{} {}",
            r.f1_hz,
            r.f2_hz
        );
        assert!((r.f2_amplitude - 0.1).abs() < 1e-6);
        // The 1 kHz tone lies far from every sideband (7000 ± 60..180 Hz): three pairs.
        assert_eq!(r.products.len(), 6);
    }

    #[test]
    fn sidebands_stay_clear_of_the_low_tone_and_nyquist() {
        // 1 kHz + 3.5 kHz (calc): f2 − 3·f1 = 500 Hz lies below the low tone, so two pairs.
        let x = pair_through(
            48_000.0,
            48_000,
            &[(1000.0, 0.8, 0.0), (3500.0, 0.2, 0.0)],
            0.0,
            0.0,
        );
        let r = analyze(&x, 48_000.0, &ImdSettings::with_method(ImdMethod::Smpte)).expect("pair");
        assert_eq!(r.products.len(), 4);
        // 60 Hz + 23.95 kHz at 48 kHz: f2 + f1 is above Nyquist, nothing to measure.
        let x = pair_through(
            48_000.0,
            48_000,
            &[(60.0, 0.8, 0.0), (23_950.0, 0.2, 0.0)],
            0.0,
            0.0,
        );
        assert_eq!(
            analyze(&x, 48_000.0, &ImdSettings::with_method(ImdMethod::Smpte)),
            None
        );
    }

    #[test]
    fn no_pair_gives_none() {
        let s = ImdSettings::default();
        assert_eq!(analyze(&[], 48_000.0, &s), None);
        assert_eq!(analyze(&vec![0.0; 48_000], 48_000.0, &s), None);
        // One tone, clean or with harmonics (a distorted tone is not a pair).
        let one = pair_through(48_000.0, 48_000, &[(997.0, 0.5, 0.0)], 0.0, 0.0);
        assert_eq!(analyze(&one, 48_000.0, &s), None);
        let bent = pair_through(48_000.0, 48_000, &[(997.0, 0.5, 0.0)], 0.3, 0.2);
        assert_eq!(analyze(&bent, 48_000.0, &s), None);
        // White noise (a deterministic xorshift stream, uniform in ±0.5).
        let mut state = 0x1234_5678_9abc_def0u64;
        let noise: Vec<f32> = (0..48_000)
            .map(|_| {
                state ^= state << 13;
                state ^= state >> 7;
                state ^= state << 17;
                ((state >> 11) as f64 / (1u64 << 53) as f64 - 0.5) as f32
            })
            .collect();
        assert_eq!(analyze(&noise, 48_000.0, &s), None);
        // A second tone 60 dB down is not a pair (limit 40 dB).
        let weak = pair_through(
            48_000.0,
            48_000,
            &[(60.0, 0.8, 0.0), (7000.0, 0.0008, 0.0)],
            0.0,
            0.0,
        );
        assert_eq!(analyze(&weak, 48_000.0, &s), None);
        // Non-finite samples and rates.
        let mut bad = pair_through(
            48_000.0,
            48_000,
            &[(60.0, 0.8, 0.0), (7000.0, 0.2, 0.0)],
            0.0,
            0.0,
        );
        assert!(analyze(&bad, 48_000.0, &s).is_some());
        assert_eq!(analyze(&bad, f64::NAN, &s), None);
        bad[100] = f32::NAN;
        assert_eq!(analyze(&bad, 48_000.0, &s), None);
    }

    #[test]
    fn methods_parse_and_print() {
        for m in [ImdMethod::Smpte, ImdMethod::Twin, ImdMethod::Auto] {
            assert_eq!(m.name().parse::<ImdMethod>(), Ok(m));
            assert_eq!(m.to_string(), m.name());
        }
        assert_eq!(
            "din".parse::<ImdMethod>(),
            Err("unknown IMD method 'din' (use smpte, twin or auto)".to_string())
        );
    }
}
