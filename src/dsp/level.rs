//! Level conventions.
//!
//! Sample values are normalised so digital full scale is ±1. **RMS dBFS follows AES17**: the RMS of
//! a sine whose peak just reaches full scale reads 0 dBFS, so `rms_dbfs = 20·log10(√2 · rms)`; a
//! full-scale square wave reads +3.01 dBFS. Peak readings (sample peak dBFS, true peak dBTP, clip
//! levels) are `20·log10(|x|)`. Crest factor is peak over plain RMS, in dB (a sine reads 3.01 dB).

/// `20·log10(x)`, or `None` where it has no finite value (zero, negative, NaN).
pub fn amplitude_db(x: f64) -> Option<f64> {
    (x > 0.0 && x.is_finite()).then(|| 20.0 * x.log10())
}

/// RMS in dBFS after AES17 (a full-scale sine reads 0 dBFS).
pub fn rms_dbfs(rms: f64) -> Option<f64> {
    amplitude_db(rms * std::f64::consts::SQRT_2)
}

/// Running level statistics for one channel.
#[derive(Debug, Clone, Copy, Default, PartialEq)]
pub struct LevelStats {
    /// Samples seen.
    pub count: u64,
    /// Σx.
    pub sum: f64,
    /// Σx².
    pub sum_sq: f64,
    /// max |x|.
    pub peak: f32,
}

impl LevelStats {
    /// Add samples; returns the largest |sample| among them (0 for none).
    pub fn process(&mut self, x: &[f32]) -> f32 {
        // Eight independent f32 lanes over short chunks (so the loop vectorises and no lane sums
        // more than 32 values), folded into f64 totals after each chunk.
        const LANES: usize = 8;
        const CHUNK: usize = 256;
        let mut p = [0.0f32; LANES];
        for chunk in x.chunks(CHUNK) {
            let mut s = [0.0f32; LANES];
            let mut s2 = [0.0f32; LANES];
            let mut lanes = chunk.chunks_exact(LANES);
            for v in &mut lanes {
                for i in 0..LANES {
                    s[i] += v[i];
                    s2[i] += v[i] * v[i];
                    // A plain comparison vectorises (f32::max adds NaN fix-ups).
                    let a = v[i].abs();
                    p[i] = if a > p[i] { a } else { p[i] };
                }
            }
            for (i, &v) in lanes.remainder().iter().enumerate() {
                s[i] += v;
                s2[i] += v * v;
                let a = v.abs();
                p[i] = if a > p[i] { a } else { p[i] };
            }
            self.sum += s.iter().map(|&v| v as f64).sum::<f64>();
            self.sum_sq += s2.iter().map(|&v| v as f64).sum::<f64>();
        }
        let block_peak = p.iter().fold(0.0f32, |m, &v| m.max(v));
        self.peak = self.peak.max(block_peak);
        self.count += x.len() as u64;
        block_peak
    }

    /// Merge another set of statistics into this one.
    pub fn merge(&mut self, o: &LevelStats) {
        self.count += o.count;
        self.sum += o.sum;
        self.sum_sq += o.sum_sq;
        self.peak = self.peak.max(o.peak);
    }

    /// Plain RMS (DC included, as meters read it).
    pub fn rms(&self) -> f64 {
        if self.count == 0 {
            0.0
        } else {
            (self.sum_sq / self.count as f64).sqrt()
        }
    }

    /// Mean (DC offset, full scale = 1).
    pub fn mean(&self) -> f64 {
        let m = if self.count == 0 {
            0.0
        } else {
            self.sum / self.count as f64
        };
        // No negative zero in reports.
        if m == 0.0 {
            0.0
        } else {
            m
        }
    }

    /// Crest factor in dB, peak over plain RMS.
    pub fn crest_db(&self) -> Option<f64> {
        let rms = self.rms();
        if rms > 0.0 {
            amplitude_db(self.peak as f64 / rms)
        } else {
            None
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    // AES17 level convention (shared/reference-values.md §3): a full-scale sine reads 0 dBFS and a
    // full-scale square +3.01 dBFS; crest factor of a sine √2 = 3.01 dB, of a square 0 dB (§6).
    #[test]
    fn aes17_convention_for_sine_and_square() {
        let n = 48_000;
        let sine: Vec<f32> = (0..n)
            .map(|i| (2.0 * std::f64::consts::PI * 1000.0 * i as f64 / 48_000.0).sin() as f32)
            .collect();
        let mut s = LevelStats::default();
        s.process(&sine);
        assert!(rms_dbfs(s.rms()).unwrap().abs() < 0.001);
        assert!((s.crest_db().unwrap() - 3.0103).abs() < 0.001);
        let square: Vec<f32> = (0..n)
            .map(|i| if (i / 24) % 2 == 0 { 1.0 } else { -1.0 })
            .collect();
        let mut q = LevelStats::default();
        q.process(&square);
        assert!((rms_dbfs(q.rms()).unwrap() - 3.0103).abs() < 0.001);
        assert!(q.crest_db().unwrap().abs() < 1e-9);
    }

    #[test]
    fn silence_has_no_decibel_value() {
        let mut s = LevelStats::default();
        s.process(&[0.0; 10]);
        assert_eq!(rms_dbfs(s.rms()), None);
        assert_eq!(s.crest_db(), None);
        assert_eq!(amplitude_db(0.0), None);
    }
}
