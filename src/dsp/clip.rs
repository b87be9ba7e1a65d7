//! Clip detection on a stream of samples: **overs** (runs at digital full scale) and **flat tops**
//! (the waveform held at one level below full scale: clipping before the converter).
//!
//! A flat top is a run of at least `flat_min_run` samples that stay inside a band `flat_tolerance`
//! wide, at a level of at least `flat_min_level`, that is a local extreme (the samples either side
//! are nearer zero), and that is entered and left with a kink. The kink test tells a plateau from a
//! smooth peak: a smooth peak of curvature κ stays in a band of width *w* for `2h` samples with
//! `κh²/2 ≈ w`, and its slope just outside is about `κh`, so `slope·h/w ≈ 2`; a clipped waveform
//! arrives at its plateau with the full slope of the unclipped wave, so the same figure
//! ("sharpness") is in the tens to thousands. Runs whose sharpness is below `flat_min_sharpness`
//! are smooth peaks, not clipping.

use serde::{Deserialize, Serialize};

/// What kind of clipping a run shows.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum ClipKind {
    /// Samples at digital full scale.
    Over,
    /// Samples held at one level below full scale.
    FlatTop,
}

impl ClipKind {
    /// The word used in reports and logs.
    pub fn as_str(self) -> &'static str {
        match self {
            ClipKind::Over => "over",
            ClipKind::FlatTop => "flat-top",
        }
    }
}

/// One run of clipped samples.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct ClipRun {
    /// Over or flat top.
    pub kind: ClipKind,
    /// Index of the first sample of the run in the stream.
    pub start: u64,
    /// Number of samples in the run.
    pub len: u64,
    /// Mean sample value over the run (signed, full scale = 1).
    pub level: f32,
}

/// Detector settings; see the module documentation.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct ClipSettings {
    /// Smallest magnitude that counts as digital full scale (for an n-bit integer source this is
    /// the largest code, `(2^(n−1) − 1)/2^(n−1)`; for float sources 1.0).
    pub full_scale: f32,
    /// Shortest run at full scale that counts as an over (common practice: 3).
    pub min_over_run: usize,
    /// Width of the band a plateau must stay in.
    pub flat_tolerance: f32,
    /// Shortest plateau that counts.
    pub flat_min_run: usize,
    /// Lowest plateau level that counts (linear).
    pub flat_min_level: f32,
    /// Lowest sharpness (see module docs) that counts.
    pub flat_min_sharpness: f32,
}

impl Default for ClipSettings {
    fn default() -> Self {
        ClipSettings {
            full_scale: 1.0,
            min_over_run: 3,
            flat_tolerance: 1.0e-3,
            flat_min_run: 3,
            flat_min_level: 0.01,
            flat_min_sharpness: 16.0,
        }
    }
}

impl ClipSettings {
    /// The full-scale threshold for a source of the given integer bit depth (`None` for float).
    pub fn full_scale_for_bits(bits: Option<u32>) -> f32 {
        match bits {
            Some(b) if (2..=32).contains(&b) => {
                let half = 2f64.powi(b as i32 - 1);
                ((half - 1.0) / half) as f32
            }
            _ => 1.0,
        }
    }
}

#[derive(Debug, Clone, Copy)]
struct Plateau {
    start: u64,
    len: u64,
    min: f32,
    max: f32,
    sum: f64,
    before2: f32,
    before1: f32,
}

#[derive(Debug, Clone, Copy)]
struct Pending {
    run: Plateau,
    after1: f32,
}

#[derive(Debug, Clone, Copy)]
struct OverRun {
    start: u64,
    len: u64,
    positive: bool,
    sum: f64,
}

/// Streaming clip detector for one channel.
#[derive(Debug, Clone, Copy)]
pub struct ClipDetector {
    s: ClipSettings,
    pos: u64,
    last2: f32,
    last1: f32,
    over: Option<OverRun>,
    run: Option<Plateau>,
    pending: Option<Pending>,
}

impl ClipDetector {
    /// A detector with these settings.
    pub fn new(settings: ClipSettings) -> Self {
        ClipDetector {
            s: settings,
            pos: 0,
            last2: 0.0,
            last1: 0.0,
            over: None,
            run: None,
            pending: None,
        }
    }

    /// The settings in use.
    pub fn settings(&self) -> &ClipSettings {
        &self.s
    }

    /// Index of the next sample to arrive.
    pub fn position(&self) -> u64 {
        self.pos
    }

    /// Stream index of the earliest sample of a run still in flight (an over or a plateau that
    /// may yet be reported), if any: no run reported later can start before it, nor before
    /// [`ClipDetector::position`].
    pub fn earliest_open_start(&self) -> Option<u64> {
        let over = self.over.map(|o| o.start);
        let run = self.run.map(|r| r.start);
        let pending = self.pending.map(|p| p.run.start);
        [over, run, pending].into_iter().flatten().min()
    }

    /// Start over after a gap at stream index `pos`: runs in progress are dropped, not reported.
    pub fn reset_at(&mut self, pos: u64) {
        self.pos = pos;
        self.last1 = 0.0;
        self.last2 = 0.0;
        self.over = None;
        self.run = None;
        self.pending = None;
    }

    /// Feed samples; completed runs are passed to `emit` in stream order per kind.
    ///
    /// Most samples cannot matter: away from plateaus and full scale every sample differs from
    /// its neighbour by more than the tolerance, so each is a run of one that never counts. Per
    /// chunk of 64, a bit mask marks the samples that can matter (within the tolerance of the
    /// previous sample, or at full scale); while nothing is in flight the detector jumps from one
    /// marked sample to the next, setting the state exactly as stepping would have.
    pub fn process(&mut self, samples: &[f32], mut emit: impl FnMut(ClipRun)) {
        const CHUNK: usize = 64;
        // Jumping assumes a lone sample can never be a run that counts.
        let jumps = self.s.flat_min_run >= 2 && self.s.min_over_run >= 1;
        // Work on a local copy so the state can live in registers across the loop.
        let mut d = *self;
        for chunk in samples.chunks(CHUNK) {
            if !jumps {
                for &x in chunk {
                    d.step(x, &mut emit);
                }
                continue;
            }
            let mask = d.interest_mask(chunk);
            let mut i = 0;
            while i < chunk.len() {
                if d.is_idle() {
                    let rest = mask >> i;
                    let j = if rest == 0 {
                        chunk.len()
                    } else {
                        i + rest.trailing_zeros() as usize
                    };
                    if j > i {
                        d.jump(chunk, i, j);
                        i = j;
                        continue;
                    }
                }
                let k = d.extend_plateau(chunk, i);
                if k > i {
                    i = k;
                    continue;
                }
                d.step(chunk[i], &mut emit);
                i += 1;
            }
        }
        *self = d;
    }

    /// Bit `i` set when `chunk[i]` is within the tolerance of the sample before it or at full
    /// scale (`chunk.len()` ≤ 64).
    #[inline(always)]
    fn interest_mask(&self, chunk: &[f32]) -> u64 {
        let (tol, fs) = (self.s.flat_tolerance, self.s.full_scale);
        let mut prev = self.last1;
        let mut mask = 0u64;
        for (i, &x) in chunk.iter().enumerate() {
            let hit = (x - prev).abs() <= tol || x.abs() >= fs;
            mask |= u64::from(hit) << i;
            prev = x;
        }
        mask
    }

    /// Nothing in flight: no over, no plateau awaiting judgement, and the plateau in progress
    /// too short to count when an unmarked sample ends it.
    #[inline(always)]
    fn is_idle(&self) -> bool {
        self.over.is_none()
            && self.pending.is_none()
            && self
                .run
                .as_ref()
                .is_none_or(|r| (r.len as usize) < self.s.flat_min_run)
    }

    /// Inside a plateau with nothing else in flight (no over, no plateau awaiting judgement),
    /// the samples that stay in the plateau's band and below full scale only extend it: take
    /// them in a tight loop, setting the state exactly as stepping would (the run's sum is
    /// added in the same order). Returns the index of the first sample left to step.
    #[inline(always)]
    fn extend_plateau(&mut self, chunk: &[f32], i: usize) -> usize {
        if self.over.is_some() || self.pending.is_some() {
            return i;
        }
        let Some(r) = self.run.as_mut() else {
            return i;
        };
        let (tol, fs) = (self.s.flat_tolerance, self.s.full_scale);
        let (mut lo, mut hi, mut sum) = (r.min, r.max, r.sum);
        let mut k = i;
        while k < chunk.len() {
            let x = chunk[k];
            let nlo = if x < lo { x } else { lo };
            let nhi = if x > hi { x } else { hi };
            // As `step`: a NaN, a sample at full scale or one outside the band is stepped (a
            // NaN band, from a run that began on a NaN, is never inside).
            let inside = nhi - nlo <= tol;
            if !inside || x.is_nan() || x.abs() >= fs {
                break;
            }
            lo = nlo;
            hi = nhi;
            sum += x as f64;
            k += 1;
        }
        if k > i {
            r.min = lo;
            r.max = hi;
            r.sum = sum;
            r.len += (k - i) as u64;
            self.last2 = if k - i >= 2 { chunk[k - 2] } else { self.last1 };
            self.last1 = chunk[k - 1];
            self.pos += (k - i) as u64;
        }
        k
    }

    /// Consume the unmarked samples `chunk[i..j]` (`j > i`) while idle: each ends the run before
    /// it (too short to count) and starts a run of one, so afterwards the run is `chunk[j − 1]`
    /// alone, preceded by the two samples before it.
    #[inline(always)]
    fn jump(&mut self, chunk: &[f32], i: usize, j: usize) {
        // Sample k of the stream relative to the chunk; k ≥ i − 2 always holds here.
        let (l1, l2) = (self.last1, self.last2);
        let sample = |k: isize| -> f32 {
            if k >= i as isize {
                chunk[k as usize]
            } else if k == i as isize - 1 {
                l1
            } else {
                l2
            }
        };
        let x = chunk[j - 1];
        let before1 = sample(j as isize - 2);
        let before2 = sample(j as isize - 3);
        self.pos += (j - i - 1) as u64;
        self.run = Some(Plateau {
            start: self.pos,
            len: 1,
            min: x,
            max: x,
            sum: x as f64,
            before2,
            before1,
        });
        self.last2 = before1;
        self.last1 = x;
        self.pos += 1;
    }

    /// End of stream: report runs still open (a plateau cut by the end is not judged).
    pub fn finish(&mut self, mut emit: impl FnMut(ClipRun)) {
        if let Some(o) = self.over.take() {
            self.emit_over(o, &mut emit);
        }
        self.run = None;
        self.pending = None;
    }

    #[inline(always)]
    fn step(&mut self, x: f32, emit: &mut impl FnMut(ClipRun)) {
        let s = self.s;
        // Overs.
        let at_full = x.abs() >= s.full_scale;
        match (&mut self.over, at_full) {
            (Some(o), true) if o.positive == (x > 0.0) => {
                o.len += 1;
                o.sum += x as f64;
            }
            (_, true) => {
                if let Some(o) = self.over.take() {
                    self.emit_over(o, emit);
                }
                self.over = Some(OverRun {
                    start: self.pos,
                    len: 1,
                    positive: x > 0.0,
                    sum: x as f64,
                });
            }
            (Some(_), false) => {
                if let Some(o) = self.over.take() {
                    self.emit_over(o, emit);
                }
            }
            (None, false) => {}
        }

        // Flat tops: a pending run waits for its second sample after the end.
        if let Some(p) = self.pending.take() {
            self.judge(p.run, p.after1, x, emit);
        }
        match &mut self.run {
            Some(r) => {
                // Plain comparisons (no NaN fix-ups); a NaN sample ends the run.
                let lo = if x < r.min { x } else { r.min };
                let hi = if x > r.max { x } else { r.max };
                if hi - lo <= s.flat_tolerance && !x.is_nan() {
                    r.min = lo;
                    r.max = hi;
                    r.len += 1;
                    r.sum += x as f64;
                } else {
                    let done = *r;
                    if done.len as usize >= s.flat_min_run {
                        self.pending = Some(Pending {
                            run: done,
                            after1: x,
                        });
                    }
                    self.run = Some(self.new_plateau(x));
                }
            }
            None => self.run = Some(self.new_plateau(x)),
        }

        self.last2 = self.last1;
        self.last1 = x;
        self.pos += 1;
    }

    fn new_plateau(&self, x: f32) -> Plateau {
        Plateau {
            start: self.pos,
            len: 1,
            min: x,
            max: x,
            sum: x as f64,
            before2: self.last2,
            before1: self.last1,
        }
    }

    #[cold]
    #[inline(never)]
    fn emit_over(&self, o: OverRun, emit: &mut impl FnMut(ClipRun)) {
        if o.len as usize >= self.s.min_over_run {
            emit(ClipRun {
                kind: ClipKind::Over,
                start: o.start,
                len: o.len,
                level: (o.sum / o.len as f64) as f32,
            });
        }
    }

    #[inline(never)]
    fn judge(&self, r: Plateau, after1: f32, after2: f32, emit: &mut impl FnMut(ClipRun)) {
        let s = &self.s;
        let level = (r.sum / r.len as f64) as f32;
        if level.abs() < s.flat_min_level || r.min.abs().max(r.max.abs()) >= s.full_scale {
            return;
        }
        let extreme = if level > 0.0 {
            r.before1 < r.min && after1 < r.min
        } else {
            r.before1 > r.max && after1 > r.max
        };
        if !extreme {
            return;
        }
        let entry = (r.before1 - r.before2).abs();
        let exit = (after2 - after1).abs();
        let sharpness = entry.min(exit) * (r.len as f32 / 2.0) / s.flat_tolerance;
        if sharpness >= s.flat_min_sharpness {
            emit(ClipRun {
                kind: ClipKind::FlatTop,
                start: r.start,
                len: r.len,
                level,
            });
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn runs(x: &[f32], s: ClipSettings) -> Vec<ClipRun> {
        let mut d = ClipDetector::new(s);
        let mut out = Vec::new();
        d.process(x, |r| out.push(r));
        d.finish(|r| out.push(r));
        out
    }

    /// The reference: the same samples through the state machine one step at a time, with none
    /// of `process`'s fast paths.
    fn stepped(x: &[f32], s: ClipSettings) -> Vec<ClipRun> {
        let mut d = ClipDetector::new(s);
        let mut out = Vec::new();
        for &v in x {
            d.step(v, &mut |r| out.push(r));
        }
        d.finish(|r| out.push(r));
        out
    }

    /// The quiet-chunk fast path must report exactly what the per-sample path reports.
    #[test]
    fn fast_path_matches_the_sample_by_sample_path() {
        let mut seed = 0x1234_5678_9abc_def0u64;
        let mut next = move || {
            seed ^= seed << 13;
            seed ^= seed >> 7;
            seed ^= seed << 17;
            (seed >> 11) as f64 / (1u64 << 53) as f64
        };
        for case in 0..20 {
            let clip = 0.3 + 0.05 * case as f64;
            let f = 0.002 + 0.003 * case as f64;
            let noise = [1e-4, 1e-3, 3e-3][case % 3];
            let x: Vec<f32> = (0..20_000)
                .map(|i| {
                    let t = 2.0 * std::f64::consts::PI * i as f64;
                    let v = 0.9 * (f * t).sin();
                    let v = match (i / 3000) % 3 {
                        0 => v.clamp(-clip, clip),
                        1 => v * 1.2,
                        // A slow chord: many short near-flat stretches that must not count.
                        _ => 0.3 * (f / 7.0 * t).sin() + 0.25 * (f / 5.3 * t).sin() + 0.01 * v,
                    };
                    (v.clamp(-1.0, 1.0) + (next() - 0.5) * noise) as f32
                })
                .collect();
            let s = ClipSettings::default();
            let fast = runs(&x, s);
            let slow = stepped(&x, s);
            assert_eq!(fast, slow, "case {case}");
            assert!(!fast.is_empty(), "case {case} exercises runs");
        }
    }

    /// Plateaus broken by a NaN, by reaching full scale, or by leaving their band one sample
    /// into a chunk, at every offset within the 64-sample chunks: processing and stepping agree.
    #[test]
    fn plateau_ends_of_every_kind_match_the_sample_by_sample_path() {
        let s = ClipSettings::default();
        for offset in 0..70 {
            let mut x: Vec<f32> = (0..offset).map(|i| 0.1 * (i as f32 * 0.7).sin()).collect();
            for end in [f32::NAN, 1.0, 0.2, -0.6] {
                x.extend([
                    0.35, 0.3, 0.5, 0.5, 0.5001, 0.5, 0.5, 0.4999, 0.5, end, 0.3, 0.1,
                ]);
                x.extend(std::iter::repeat_n(1.0, 4));
                x.extend([0.2, -0.5, -0.5, -0.5, -0.5, -0.2]);
            }
            let fast = runs(&x, s);
            let slow = stepped(&x, s);
            assert_eq!(fast, slow, "offset {offset}");
            assert!(fast.len() >= 4, "offset {offset}: {fast:?}");
            // The whole state, not only what it reports, after every piece of the stream.
            for piece in [13, 64] {
                let (mut a, mut b) = (ClipDetector::new(s), ClipDetector::new(s));
                for (n, p) in x.chunks(piece).enumerate() {
                    a.process(p, |_| {});
                    for &v in p {
                        b.step(v, &mut |_| {});
                    }
                    assert_eq!(
                        format!("{a:?}"),
                        format!("{b:?}"),
                        "offset {offset} piece {n}"
                    );
                }
            }
        }
    }

    #[test]
    fn overs_need_three_samples_at_full_scale() {
        let fs = ClipSettings::full_scale_for_bits(Some(16));
        let s = ClipSettings {
            full_scale: fs,
            ..Default::default()
        };
        let x = [0.0, fs, fs, 0.5, fs, fs, fs, 0.1, -1.0, -1.0, -1.0, -1.0];
        let r = runs(&x, s);
        let overs: Vec<_> = r.iter().filter(|r| r.kind == ClipKind::Over).collect();
        assert_eq!(overs.len(), 2);
        assert_eq!((overs[0].start, overs[0].len), (4, 3));
        assert_eq!((overs[1].start, overs[1].len), (8, 4));
        assert!(overs[1].level < 0.0);
    }

    #[test]
    fn nan_samples_never_make_a_plateau() {
        let mut x = vec![0.0f32; 10];
        x.extend([0.5, 0.5, f32::NAN, 0.5, 0.5, 0.5, 0.0, 0.0]);
        let r = runs(&x, ClipSettings::default());
        assert!(r.iter().all(|r| r.level.is_finite()), "{r:?}");
    }

    #[test]
    fn full_scale_codes_per_bit_depth() {
        // Common practice: the largest positive code is full scale for integer PCM.
        assert_eq!(
            ClipSettings::full_scale_for_bits(Some(16)),
            32767.0 / 32768.0
        );
        assert_eq!(ClipSettings::full_scale_for_bits(None), 1.0);
    }

    #[test]
    fn a_smooth_slow_peak_is_not_a_flat_top() {
        // 20 Hz at 48 kHz spends ~34 samples within 1e-3 of its peak, but enters gently.
        let x: Vec<f32> = (0..48_000)
            .map(|i| (0.9 * (2.0 * std::f64::consts::PI * 20.0 * i as f64 / 48_000.0).sin()) as f32)
            .collect();
        assert!(runs(&x, ClipSettings::default()).is_empty());
    }

    #[test]
    fn a_clipped_sine_shows_one_flat_top_per_half_cycle() {
        let x: Vec<f32> = (0..4800)
            .map(|i| {
                (2.0 * std::f64::consts::PI * 1000.0 * i as f64 / 48_000.0)
                    .sin()
                    .clamp(-0.5, 0.5) as f32
            })
            .collect();
        let r = runs(&x, ClipSettings::default());
        // 100 cycles; the first and last half-cycles may be cut by the ends.
        assert!(r.len() >= 198 && r.len() <= 200, "{}", r.len());
        assert!(r
            .iter()
            .all(|r| r.kind == ClipKind::FlatTop && (r.level.abs() - 0.5).abs() < 1e-6));
    }
}
