//! A small seeded random source for noise and dither.
//!
//! Written here rather than taken from a crate so that a given seed gives the same file on every
//! build and every version of brink: test signals must be reproducible. The generator is
//! xoshiro256** (Blackman and Vigna, "Scrambled linear pseudorandom number generators", 2018/2021),
//! seeded through SplitMix64 as its authors recommend; Gaussian values come from the Box–Muller
//! transform (Box and Muller 1958).

use std::f64::consts::TAU;

/// SplitMix64 step (Steele, Lea, Flood 2014, "Fast splittable pseudorandom number generators").
fn splitmix64(state: &mut u64) -> u64 {
    *state = state.wrapping_add(0x9E37_79B9_7F4A_7C15);
    let mut z = *state;
    z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
    z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
    z ^ (z >> 31)
}

/// Mix a seed with a stream number into an independent seed (one stream per channel and use).
pub(crate) fn derive_seed(seed: u64, stream: u64) -> u64 {
    let mut s = seed ^ stream.wrapping_mul(0xD1B5_4A32_D192_ED03);
    splitmix64(&mut s)
}

/// xoshiro256** generator with a Box–Muller Gaussian on top.
#[derive(Debug, Clone)]
pub(crate) struct Rng {
    s: [u64; 4],
    spare: Option<f64>,
}

impl Rng {
    /// A generator whose whole state is expanded from `seed` with SplitMix64.
    pub(crate) fn new(seed: u64) -> Self {
        let mut sm = seed;
        let s = [
            splitmix64(&mut sm),
            splitmix64(&mut sm),
            splitmix64(&mut sm),
            splitmix64(&mut sm),
        ];
        Self { s, spare: None }
    }

    #[cfg(test)]
    fn from_state(s: [u64; 4]) -> Self {
        Self { s, spare: None }
    }

    /// Next 64 random bits (xoshiro256**).
    pub(crate) fn next_u64(&mut self) -> u64 {
        let s = &mut self.s;
        let result = s[1].wrapping_mul(5).rotate_left(7).wrapping_mul(9);
        let t = s[1] << 17;
        s[2] ^= s[0];
        s[3] ^= s[1];
        s[1] ^= s[2];
        s[0] ^= s[3];
        s[2] ^= t;
        s[3] = s[3].rotate_left(45);
        result
    }

    /// Uniform in [0, 1) with 53 random bits.
    pub(crate) fn uniform(&mut self) -> f64 {
        (self.next_u64() >> 11) as f64 * (1.0 / (1u64 << 53) as f64)
    }

    /// Standard normal value (mean 0, variance 1), Box–Muller in its trigonometric form.
    pub(crate) fn gaussian(&mut self) -> f64 {
        if let Some(z) = self.spare.take() {
            return z;
        }
        // 1 − u lies in (0, 1], so the logarithm is finite.
        let u1 = 1.0 - self.uniform();
        let u2 = self.uniform();
        let r = (-2.0 * u1.ln()).sqrt();
        let (s, c) = (TAU * u2).sin_cos();
        self.spare = Some(r * s);
        r * c
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn xoshiro256starstar_matches_reference_sequence() {
        // Reference outputs of the authors' C code (prng.di.unimi.it/xoshiro256starstar.c) for the
        // state {1, 2, 3, 4}, as used by several ports' test suites.
        let mut r = Rng::from_state([1, 2, 3, 4]);
        let got: Vec<u64> = (0..4).map(|_| r.next_u64()).collect();
        assert_eq!(got, [11520, 0, 1509978240, 1215971899390074240]);
    }

    #[test]
    fn gaussian_has_unit_variance() {
        // Sample mean and variance of 200k standard normal values: σ of the mean ≈ 0.0022,
        // σ of the variance ≈ √(2/n) ≈ 0.0032.
        let mut r = Rng::new(7);
        let n = 200_000;
        let v: Vec<f64> = (0..n).map(|_| r.gaussian()).collect();
        let mean = v.iter().sum::<f64>() / n as f64;
        let var = v.iter().map(|x| (x - mean).powi(2)).sum::<f64>() / n as f64;
        assert!(mean.abs() < 0.012, "mean {mean}");
        assert!((var - 1.0).abs() < 0.02, "variance {var}");
    }

    #[test]
    fn uniform_stays_in_unit_interval() {
        let mut r = Rng::new(3);
        for _ in 0..10_000 {
            let u = r.uniform();
            assert!((0.0..1.0).contains(&u));
        }
    }
}
