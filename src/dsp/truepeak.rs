//! True-peak meter after ITU-R BS.1770-4 Annex 2.
//!
//! Below 88.2 kHz the signal is oversampled ×4 with the Annex's 48-tap, 4-phase FIR; at 88.2 and
//! 96 kHz (up to 176.4 kHz) ×2 with a 24-tap half-sample interpolator of our own design
//! (Kaiser-windowed sinc); at 176.4 kHz and above the sample peak is the reading. The reading is
//! the maximum of the interpolated values **and the raw samples** (the Annex's phases sit at 1/8, 3/8,
//! 5/8 and 7/8 of a sample, so none reproduces the input).
//!
//! The filter's 12-sample span is filled with real samples before interpolated values count, so a
//! stream that starts abruptly does not ring against invented zeros. [`TruePeak::reset`] starts
//! that over (used after a gap in live input).

/// Annex 2 example interpolator, phase 0 (phase 3 is this reversed). The published digits are
/// kept verbatim; every one is a multiple of 2⁻¹⁶ and exact in f32.
#[allow(clippy::excessive_precision)]
const BS1770_PHASE0: [f32; 12] = [
    0.001_708_984_375,
    0.010_986_328_125,
    -0.019_653_320_312_5,
    0.033_203_125,
    -0.059_448_242_187_5,
    0.137_329_101_562_5,
    0.972_167_968_75,
    -0.102_294_921_875,
    0.047_607_421_875,
    -0.026_611_328_125,
    0.014_892_578_125,
    -0.008_300_781_25,
];

/// Annex 2 example interpolator, phase 1 (phase 2 is this reversed).
#[allow(clippy::excessive_precision)]
const BS1770_PHASE1: [f32; 12] = [
    -0.029_174_804_687_5,
    0.029_296_875,
    -0.051_757_812_5,
    0.089_111_328_125,
    -0.166_503_906_25,
    0.465_087_890_625,
    0.779_785_156_25,
    -0.200_317_382_812_5,
    0.101_562_5,
    -0.058_227_539_062_5,
    0.033_081_054_687_5,
    -0.018_920_898_437_5,
];

const TAPS: usize = 12;
/// Samples processed per inner block; bounds scratch memory.
const BLOCK: usize = 4096;

/// The oversampling factor BS.1770-4 calls for at a sample rate.
pub fn oversampling_for_rate(sample_rate: u32) -> usize {
    if sample_rate < 88_200 {
        4
    } else if sample_rate < 176_400 {
        2
    } else {
        1
    }
}

/// Polyphase coefficient sets for a factor, each `TAPS` long, applied as `y = Σ h[k]·x[n−k]`.
pub fn phases_for_factor(factor: usize) -> Vec<[f32; TAPS]> {
    match factor {
        4 => {
            let mut p2 = BS1770_PHASE1;
            p2.reverse();
            let mut p3 = BS1770_PHASE0;
            p3.reverse();
            vec![BS1770_PHASE0, BS1770_PHASE1, p2, p3]
        }
        2 => vec![half_sample_interpolator()],
        _ => Vec::new(),
    }
}

/// A 12-tap phase placing its output half-way between input samples 5 and 6 of its span:
/// a sinc under a Kaiser window (β = 6), normalised to unity DC gain.
fn half_sample_interpolator() -> [f32; TAPS] {
    let beta = 6.0;
    let centre = (TAPS as f64 - 1.0) / 2.0; // 5.5: half-way between taps 5 and 6
    let mut h = [0.0f64; TAPS];
    for (k, v) in h.iter_mut().enumerate() {
        let t = k as f64 - centre;
        let sinc = if t == 0.0 {
            1.0
        } else {
            (std::f64::consts::PI * t).sin() / (std::f64::consts::PI * t)
        };
        let r = t / (centre + 0.5);
        let kaiser = bessel_i0(beta * (1.0 - r * r).max(0.0).sqrt()) / bessel_i0(beta);
        *v = sinc * kaiser;
    }
    let sum: f64 = h.iter().sum();
    let mut out = [0.0f32; TAPS];
    for (o, v) in out.iter_mut().zip(h) {
        *o = (v / sum) as f32;
    }
    out
}

/// Modified Bessel function of the first kind, order 0 (power series).
fn bessel_i0(x: f64) -> f64 {
    let mut sum = 1.0;
    let mut term = 1.0;
    let q = x * x / 4.0;
    for k in 1..64 {
        term *= q / (k as f64 * k as f64);
        sum += term;
        if term < sum * 1e-17 {
            break;
        }
    }
    sum
}

/// Streaming true-peak meter for one channel.
#[derive(Debug, Clone)]
pub struct TruePeak {
    factor: usize,
    phases: Vec<[f32; TAPS]>,
    /// Σ|h| of the loosest phase: no interpolated value can exceed `gain · max|x|` over its span.
    bound_gain: f32,
    /// The last `TAPS − 1` samples, then room for one block.
    buf: Vec<f32>,
    /// How many real samples the history holds (up to `TAPS − 1`).
    filled: usize,
    max_abs: f32,
    /// Highest value since the last [`TruePeak::take_interval_peak`].
    interval: f32,
    /// Highest value since the last [`TruePeak::take_frame_peak`] (a second, shorter interval
    /// for meters on a screen).
    frame: f32,
}

impl TruePeak {
    /// A meter for a stream at `sample_rate`.
    pub fn new(sample_rate: u32) -> Self {
        Self::with_factor(oversampling_for_rate(sample_rate))
    }

    /// A meter with an explicit oversampling factor (1, 2 or 4).
    pub fn with_factor(factor: usize) -> Self {
        let factor = if matches!(factor, 2 | 4) { factor } else { 1 };
        let phases = phases_for_factor(factor);
        let bound_gain = phases
            .iter()
            .map(|p| p.iter().map(|h| h.abs()).sum::<f32>())
            .fold(1.0f32, f32::max);
        TruePeak {
            factor: factor.max(1),
            phases,
            bound_gain,
            buf: vec![0.0; TAPS - 1 + BLOCK],
            filled: 0,
            max_abs: 0.0,
            interval: 0.0,
            frame: 0.0,
        }
    }

    /// The oversampling factor in use.
    pub fn factor(&self) -> usize {
        self.factor
    }

    /// Forget the filter history (not the reading): the next samples start a new stream.
    pub fn reset(&mut self) {
        self.filled = 0;
    }

    /// The highest true-peak amplitude so far (linear, full scale = 1).
    pub fn peak(&self) -> f32 {
        self.max_abs
    }

    /// Clear the readings, keeping the filter history.
    pub fn clear_peak(&mut self) {
        self.max_abs = 0.0;
        self.interval = 0.0;
        self.frame = 0.0;
    }

    /// The highest value since the previous call (or the start), and start a new interval.
    pub fn take_interval_peak(&mut self) -> f32 {
        std::mem::take(&mut self.interval)
    }

    /// The highest value since the previous call of this (or the start), and start a new
    /// frame; independent of [`TruePeak::take_interval_peak`].
    pub fn take_frame_peak(&mut self) -> f32 {
        std::mem::take(&mut self.frame)
    }

    /// Feed samples.
    pub fn process(&mut self, samples: &[f32]) {
        for chunk in samples.chunks(BLOCK) {
            let raw_max = chunk.iter().fold(0.0f32, |m, v| m.max(v.abs()));
            self.process_block(chunk, raw_max);
        }
    }

    /// Feed samples whose largest magnitude the caller already knows (from level statistics),
    /// sparing a pass. `raw_max` must be exactly max |x| over `samples`.
    pub fn process_with_peak(&mut self, samples: &[f32], raw_max: f32) {
        if samples.len() <= BLOCK {
            self.process_block(samples, raw_max);
        } else {
            self.process(samples);
        }
    }

    fn process_block(&mut self, x: &[f32], raw_max: f32) {
        let h = TAPS - 1;
        self.interval = self.interval.max(raw_max);
        self.frame = self.frame.max(raw_max);
        if self.phases.is_empty() {
            self.max_abs = self.max_abs.max(self.interval);
            return;
        }
        let n = x.len();
        self.buf[h..h + n].copy_from_slice(x);
        let hist_max = self.buf[h - self.filled.min(h)..h]
            .iter()
            .fold(0.0f32, |m, v| m.max(v.abs()));
        // Exact skip: no output of this block can exceed bound_gain · max|x| over the spans, so
        // when that stays under both running maxima the block cannot change either.
        if raw_max.max(hist_max) * self.bound_gain > self.interval.min(self.frame) {
            // Output j (0-based over the block) uses buf[j .. j + TAPS] ending at sample j + h.
            // It is valid when all of its TAPS samples are real: j + h − (TAPS−1) ≥ h − filled,
            // i.e. j ≥ h − filled.
            let j0 = h - self.filled.min(h);
            if j0 < n {
                let span = &self.buf[j0..h + n];
                let best = match self.phases.as_slice() {
                    [a, b, c, d] => polyphase_max_abs(span, &[*a, *b, *c, *d]),
                    [a] => polyphase_max_abs(span, &[*a]),
                    other => other
                        .iter()
                        .map(|p| polyphase_max_abs(span, &[*p]))
                        .fold(0.0f32, f32::max),
                };
                self.interval = self.interval.max(best);
                self.frame = self.frame.max(best);
            }
        }
        self.max_abs = self.max_abs.max(self.interval);
        self.filled = (self.filled + n).min(h);
        // Keep the last h samples as history.
        self.buf.copy_within(n..n + h, 0);
    }
}

/// Max |y| over every phase of `y_p[j] = Σ_k h_p[k]·x[j + TAPS − 1 − k]` and every full span of
/// `x`, choosing the widest vector unit the CPU has at run time: AVX2 with fused multiply-add
/// where present (results then differ from the portable path only in the last bits, since a fused
/// multiply-add rounds once instead of twice).
fn polyphase_max_abs<const P: usize>(x: &[f32], h: &[[f32; TAPS]; P]) -> f32 {
    #[cfg(target_arch = "x86_64")]
    {
        if std::arch::is_x86_feature_detected!("avx2") && std::arch::is_x86_feature_detected!("fma")
        {
            // SAFETY: `polyphase_avx2` only requires AVX2 and FMA, which the CPU was just found
            // to have.
            #[allow(unsafe_code)]
            return unsafe { polyphase_avx2(x, h) };
        }
    }
    polyphase_kernel::<P, 8, false>(x, h)
}

/// The kernel compiled for AVX2 with FMA (16 lanes: two 256-bit registers per phase).
#[cfg(target_arch = "x86_64")]
#[target_feature(enable = "avx2,fma")]
fn polyphase_avx2<const P: usize>(x: &[f32], h: &[[f32; TAPS]; P]) -> f32 {
    polyphase_kernel::<P, 16, true>(x, h)
}

/// The kernel: all phases in one pass, `LANES` outputs at a time, so the accumulators stay in
/// registers and the inner loops vectorise. `FUSED` uses `mul_add`, which is only fast where the
/// caller is compiled with FMA (elsewhere it would call a software routine).
#[inline(always)]
fn polyphase_kernel<const P: usize, const LANES: usize, const FUSED: bool>(
    x: &[f32],
    h: &[[f32; TAPS]; P],
) -> f32 {
    if x.len() < TAPS {
        return 0.0;
    }
    let outputs = x.len() - TAPS + 1;
    let mut best = [0.0f32; LANES];
    let mut j = 0;
    while j + LANES <= outputs {
        let mut acc = [[0.0f32; LANES]; P];
        // One window of fixed length per step: every index below is provably in bounds.
        let Some(win) = x.get(j..j + TAPS - 1 + LANES) else {
            break;
        };
        for k in 0..TAPS {
            let xs = &win[TAPS - 1 - k..TAPS - 1 - k + LANES];
            for (a, hp) in acc.iter_mut().zip(h) {
                let hk = hp[k];
                for (ai, &xi) in a.iter_mut().zip(xs) {
                    *ai = if FUSED {
                        hk.mul_add(xi, *ai)
                    } else {
                        *ai + hk * xi
                    };
                }
            }
        }
        for a in &acc {
            for (b, &v) in best.iter_mut().zip(a) {
                *b = b.max(v.abs());
            }
        }
        j += LANES;
    }
    let mut out = best.iter().fold(0.0f32, |m, &v| m.max(v));
    // Remaining outputs, one at a time.
    for jj in j..outputs {
        for hp in h {
            let y: f32 = (0..TAPS).map(|k| hp[k] * x[jj + TAPS - 1 - k]).sum();
            out = out.max(y.abs());
        }
    }
    out
}

/// Max |y| of one phase over every full span of `x`, output by output (reference for tests).
#[cfg(test)]
fn fir_max_abs(x: &[f32], h: &[f32; TAPS]) -> f32 {
    (0..=x.len().saturating_sub(TAPS))
        .map(|j| {
            (0..TAPS)
                .map(|k| h[k] * x[j + TAPS - 1 - k])
                .sum::<f32>()
                .abs()
        })
        .fold(0.0, f32::max)
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Annex 2 checks recorded in shared/reference-values.md §2 [calc]: DC gain per phase 1.0016
    /// (phases 0, 3) and 0.9730 (phases 1, 2); the interleaved 48-tap prototype is symmetric.
    #[test]
    fn annex2_coefficients_have_documented_dc_gains_and_symmetry() {
        let phases = phases_for_factor(4);
        let dc: Vec<f32> = phases.iter().map(|p| p.iter().sum()).collect();
        assert!(
            (dc[0] - 1.0016).abs() < 1e-4 && (dc[3] - 1.0016).abs() < 1e-4,
            "{dc:?}"
        );
        assert!(
            (dc[1] - 0.9730).abs() < 1e-4 && (dc[2] - 0.9730).abs() < 1e-4,
            "{dc:?}"
        );
        // Interleave: prototype[4k + p] = phase_p[k].
        let mut proto = Vec::new();
        for k in 0..TAPS {
            for p in &phases {
                proto.push(p[k]);
            }
        }
        for i in 0..proto.len() {
            assert_eq!(proto[i], proto[proto.len() - 1 - i], "tap {i}");
        }
        // The corrupted copy of tap 7 circulates as −0.1024169921875; ours is the right one.
        assert_eq!(BS1770_PHASE0[7] as f64, -6704.0 / 65536.0);
    }

    /// The vector kernels (portable 8 lanes, AVX2 + FMA 16 lanes where present) agree with a
    /// plain output-by-output evaluation.
    #[test]
    fn vector_kernels_match_plain_evaluation() {
        let x: Vec<f32> = (0..1000)
            .map(|i| ((i * 7919) % 1013) as f32 / 1013.0 - 0.5)
            .collect();
        let phases = phases_for_factor(4);
        let p4 = [phases[0], phases[1], phases[2], phases[3]];
        let plain = phases
            .iter()
            .map(|p| fir_max_abs(&x, p))
            .fold(0.0f32, f32::max);
        for len in [12, 13, 27, 100, 1000] {
            let plain = phases
                .iter()
                .map(|p| fir_max_abs(&x[..len], p))
                .fold(0.0f32, f32::max);
            let eight = polyphase_kernel::<4, 8, false>(&x[..len], &p4);
            assert!(
                (eight - plain).abs() <= 1e-6 * plain,
                "len {len}: {eight} vs {plain}"
            );
            // The dispatched path (FMA where present) agrees to a few ulp.
            let best = polyphase_max_abs(&x[..len], &p4);
            assert!(
                (best - eight).abs() <= 4.0 * f32::EPSILON * plain,
                "len {len}: {best}"
            );
        }
        assert!(plain > 0.0);
    }

    #[test]
    fn half_sample_interpolator_is_symmetric_with_unity_dc_gain() {
        let h = half_sample_interpolator();
        let s: f32 = h.iter().sum();
        assert!((s - 1.0).abs() < 1e-6);
        for i in 0..TAPS {
            assert!((h[i] - h[TAPS - 1 - i]).abs() < 1e-7);
        }
    }

    fn sine(n: usize, cycles_per_sample: f64, amp: f64, phase_deg: f64) -> Vec<f32> {
        (0..n)
            .map(|i| {
                let t = 2.0 * std::f64::consts::PI * cycles_per_sample * i as f64
                    + phase_deg.to_radians();
                (amp * t.sin()) as f32
            })
            .collect()
    }

    /// Exact skipping must never change the reading: compare with an unskipped computation.
    #[test]
    fn block_skipping_does_not_change_the_reading() {
        let x: Vec<f32> = sine(20_000, 0.23, 0.7, 10.0)
            .iter()
            .enumerate()
            .map(|(i, v)| v * (1.0 + (i as f32 / 3000.0).sin()) * 0.5)
            .collect();
        let mut tp = TruePeak::with_factor(4);
        for c in x.chunks(37) {
            tp.process(c);
        }
        let mut exact = x.iter().fold(0.0f32, |m, v| m.max(v.abs()));
        for p in phases_for_factor(4) {
            exact = exact.max(fir_max_abs(&x, &p));
        }
        assert_eq!(tp.peak(), exact);
    }

    /// Under-read bound for ideal ×L interpolation: −20·log10(cos(π f/(L·fs)))
    /// (shared/reference-values.md §2 [calc]). A 2× reading at 96 kHz of a 20 kHz tone stays inside it.
    #[test]
    fn twice_oversampling_reads_within_the_ideal_bound() {
        let fs = 96_000.0;
        let f = 20_000.0;
        let bound = -20.0 * (std::f64::consts::PI * f / (2.0 * fs)).cos().log10();
        for phase in [0.0, 17.0, 45.0, 73.0] {
            let x = sine(9600, f / fs, 0.5, phase);
            let mut tp = TruePeak::new(96_000);
            assert_eq!(tp.factor(), 2);
            tp.process(&x);
            let err = 20.0 * (tp.peak() as f64 / 0.5).log10();
            assert!(err > -bound - 0.05 && err < 0.1, "phase {phase}: {err} dB");
        }
    }

    #[test]
    fn high_rates_read_sample_peak() {
        let mut tp = TruePeak::new(192_000);
        assert_eq!(tp.factor(), 1);
        tp.process(&[0.1, -0.4, 0.2]);
        assert_eq!(tp.peak(), 0.4);
    }

    #[test]
    fn abrupt_start_does_not_ring() {
        // A full-scale fs/8 sine starting at its peak: with zero history the interpolator would
        // overshoot by ≈ 0.7 dB (shared/reference-values.md §2); priming on real samples avoids it.
        let x = sine(4800, 0.125, 0.5, 90.0);
        let mut tp = TruePeak::new(48_000);
        tp.process(&x);
        let db = 20.0 * (tp.peak() as f64 / 0.5).log10();
        assert!(db < 0.2, "{db}");
    }
}
