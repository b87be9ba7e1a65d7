//! Sine fitting after IEEE Std 1057 / 1241: the three-parameter fit at a known frequency and the
//! four-parameter fit that also refines the frequency (Gauss-Newton), both in f64.
//!
//! Model: `y[n] ≈ a·cos(ω t_n) + b·sin(ω t_n) + c` with `t_n = n − (N−1)/2` (time centred on the
//! record, which keeps the normal equations well conditioned).

/// Samples handled side by side by [`sweep_lanes`]: four independent phasor chains and
/// accumulators keep the vector units busy (no single dependency chain sets the pace).
pub const LANES: usize = 4;

/// One value per lane.
pub type Lanes = [f64; LANES];

/// Call `f(i, sin(ω·t_i), cos(ω·t_i))` for `i` in `0..n`, `t_i = i − centre`, stepping a
/// rotating phasor that is re-anchored exactly every 1024 samples (error stays near 1e-13).
#[inline]
pub fn sweep(n: usize, omega: f64, centre: f64, mut f: impl FnMut(usize, f64, f64)) {
    sweep_lanes(n, omega, centre, |i, s, c, m| {
        for l in 0..LANES {
            if m[l] != 0.0 {
                f(i + l, s[l], c[l]);
            }
        }
    });
}

/// [`sweep`] four samples at a time: `f(i, s, c, m)` for `i` = 0, 4, 8, … below `n`, where lane
/// `l` stands for sample `i + l`: `s[l] = sin(ω·t)`, `c[l] = cos(ω·t)`, and `m[l]` is 1 for a
/// sample inside the record, 0 past its end (where `s` and `c` are 0 too, so products vanish).
#[inline]
pub fn sweep_lanes(
    n: usize,
    omega: f64,
    centre: f64,
    mut f: impl FnMut(usize, &Lanes, &Lanes, &Lanes),
) {
    const ANCHOR: usize = 1024;
    let (sd, cd) = (omega * LANES as f64).sin_cos();
    let mut i = 0;
    while i < n {
        let mut s = [0.0; LANES];
        let mut c = [0.0; LANES];
        let mut m = [0.0; LANES];
        for l in 0..LANES {
            if i + l < n {
                (s[l], c[l]) = (omega * ((i + l) as f64 - centre)).sin_cos();
                m[l] = 1.0;
            }
        }
        let end = (i + ANCHOR).min(n);
        // Whole blocks of four first; a short last block keeps its mask.
        let whole_end = i + (end - i) / LANES * LANES;
        while i < whole_end {
            f(i, &s, &c, &m);
            for l in 0..LANES {
                let ns = s[l] * cd + c[l] * sd;
                c[l] = c[l] * cd - s[l] * sd;
                s[l] = ns;
            }
            i += LANES;
        }
        if i < end {
            for l in 0..LANES {
                if i + l >= n {
                    (s[l], c[l], m[l]) = (0.0, 0.0, 0.0);
                }
            }
            f(i, &s, &c, &m);
            i = n;
        }
    }
}

/// Four consecutive values of `x` from `i`, zero past the end.
#[inline(always)]
pub fn load(x: &[f64], i: usize) -> Lanes {
    match x.get(i..i + LANES) {
        Some(v) => [v[0], v[1], v[2], v[3]],
        None => {
            let mut out = [0.0; LANES];
            for (o, v) in out.iter_mut().zip(x.get(i..).unwrap_or(&[])) {
                *o = *v;
            }
            out
        }
    }
}

/// Sum of the lanes.
#[inline(always)]
pub fn total(v: &Lanes) -> f64 {
    (v[0] + v[1]) + (v[2] + v[3])
}

/// Result of a sine fit.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct SineFit {
    /// Cosine coefficient.
    pub a: f64,
    /// Sine coefficient.
    pub b: f64,
    /// Offset (DC).
    pub c: f64,
    /// Angular frequency in radians per sample.
    pub omega: f64,
    /// Iterations the four-parameter fit took (0 for the three-parameter fit).
    pub iterations: usize,
}

impl SineFit {
    /// Peak amplitude `√(a² + b²)`.
    pub fn amplitude(&self) -> f64 {
        self.a.hypot(self.b)
    }

    /// The fitted value at sample index `n` of a record `len` long.
    pub fn value_at(&self, n: usize, len: usize) -> f64 {
        let t = n as f64 - (len as f64 - 1.0) / 2.0;
        let (s, c) = (self.omega * t).sin_cos();
        self.a * c + self.b * s + self.c
    }

    /// Fill `out` with the residual `x − fit` (the noise and distortion, NAD, of IEEE 1241);
    /// returns its sum of squares.
    pub fn residual_into(&self, x: &[f64], out: &mut Vec<f64>) -> f64 {
        let n = x.len();
        out.clear();
        out.resize(n, 0.0);
        let centre = (n as f64 - 1.0) / 2.0;
        let mut sq = [0.0; LANES];
        sweep_lanes(n, self.omega, centre, |i, s, c, _| {
            let y = load(x, i);
            let mut r = [0.0; LANES];
            for l in 0..LANES {
                r[l] = y[l] - (self.a * c[l] + self.b * s[l] + self.c);
            }
            match out.get_mut(i..i + LANES) {
                Some(o) => {
                    o.copy_from_slice(&r);
                    for l in 0..LANES {
                        sq[l] += r[l] * r[l];
                    }
                }
                None => {
                    let left = n - i;
                    out[i..].copy_from_slice(&r[..left]);
                    for (q, v) in sq.iter_mut().zip(&r[..left]) {
                        *q += v * v;
                    }
                }
            }
        });
        total(&sq)
    }
}

/// `(Σx, Σx²)` in four lanes of partial sums (no single chain of dependent additions).
pub fn sum_and_squares(x: &[f64]) -> (f64, f64) {
    let mut s = [0.0; LANES];
    let mut q = [0.0; LANES];
    let chunks = x.chunks_exact(LANES);
    let tail = chunks.remainder();
    for c in chunks {
        for l in 0..LANES {
            s[l] += c[l];
            q[l] += c[l] * c[l];
        }
    }
    for (l, &v) in tail.iter().enumerate() {
        s[l] += v;
        q[l] += v * v;
    }
    (total(&s), total(&q))
}

#[allow(clippy::needless_range_loop)] // textbook elimination reads best with indices
/// Solve the `K×K` system `m·u = r` by Gaussian elimination with partial pivoting.
fn solve<const K: usize>(mut m: [[f64; K]; K], mut r: [f64; K]) -> Option<[f64; K]> {
    for col in 0..K {
        let piv = (col..K).max_by(|&i, &j| m[i][col].abs().total_cmp(&m[j][col].abs()))?;
        if m[piv][col].abs() < 1e-300 {
            return None;
        }
        m.swap(col, piv);
        r.swap(col, piv);
        for row in col + 1..K {
            let f = m[row][col] / m[col][col];
            for k in col..K {
                m[row][k] -= f * m[col][k];
            }
            r[row] -= f * r[col];
        }
    }
    let mut u = [0.0; K];
    for row in (0..K).rev() {
        let mut acc = r[row];
        for k in row + 1..K {
            acc -= m[row][k] * u[k];
        }
        u[row] = acc / m[row][row];
    }
    u.iter().all(|v| v.is_finite()).then_some(u)
}

/// Sums of the model's own columns over the centred times `t = n − (N−1)/2`, in closed form.
/// The record is symmetric about its centre, so every sum of an odd function of `t` vanishes;
/// the rest follow from the Dirichlet kernel `S0(θ) = Σ cos(θt) = sin(Nθ/2)/sin(θ/2)` and its
/// derivatives: `S1(θ) = Σ t·sin(θt) = −S0′(θ)` and `S2(θ) = Σ t²·cos(θt) = −S0″(θ)`.
#[derive(Debug, Clone, Copy)]
struct Kernel {
    n: f64,
    /// `Σ t²`.
    t2: f64,
    /// `S0(ω)`, `S1(ω)`.
    s0_1: f64,
    s1_1: f64,
    /// `S0(2ω)`, `S1(2ω)`, `S2(2ω)`.
    s0_2: f64,
    s1_2: f64,
    s2_2: f64,
}

impl Kernel {
    fn new(n: usize, omega: f64) -> Self {
        let nf = n as f64;
        let sums = |theta: f64| -> (f64, f64, f64) {
            let (g, gc) = (theta / 2.0).sin_cos();
            let (f, fc) = (nf * theta / 2.0).sin_cos();
            if g.abs() < 1e-300 {
                // θ is a multiple of 2π: every cosine is ±1 (the fits never ask for this).
                let sign = if (theta / (2.0 * std::f64::consts::PI)).round() % 2.0 == 0.0 {
                    1.0
                } else {
                    -1.0
                };
                return (sign * nf, 0.0, sign * nf * (nf * nf - 1.0) / 12.0);
            }
            let s0 = f / g;
            // S0′ = (f′g − f g′)/g² with f′ = (N/2)cos(Nθ/2), g′ = cos(θ/2)/2.
            let s1 = -((nf / 2.0) * fc * g - f * gc / 2.0) / (g * g);
            // S0″ = (1 − N²)/4·S0 − 2(g′/g)·S0′, so S2 = (N² − 1)/4·S0 − cot(θ/2)·S1.
            let s2 = (nf * nf - 1.0) / 4.0 * s0 - (gc / g) * s1;
            (s0, s1, s2)
        };
        let (s0_1, s1_1, _) = sums(omega);
        let (s0_2, s1_2, s2_2) = sums(2.0 * omega);
        Kernel {
            n: nf,
            t2: nf * (nf * nf - 1.0) / 12.0,
            s0_1,
            s1_1,
            s0_2,
            s1_2,
            s2_2,
        }
    }

    /// `Σc²`, `Σs²`, `Σc` for `c = cos(ωt)`, `s = sin(ωt)` (`Σcs = Σs = 0`).
    fn three(&self) -> [[f64; 3]; 3] {
        let cc = (self.n + self.s0_2) / 2.0;
        let ss = (self.n - self.s0_2) / 2.0;
        let c1 = self.s0_1;
        [[cc, 0.0, c1], [0.0, ss, 0.0], [c1, 0.0, self.n]]
    }

    /// The four-parameter normal matrix for columns `c, s, 1, d` with
    /// `d = scale·t·(b·c − a·s)`.
    fn four(&self, a: f64, b: f64, scale: f64) -> [[f64; 4]; 4] {
        let [[cc, _, c1], [_, ss, _], _] = self.three();
        // Σc·d = −scale·a·Σ t·c·s = −scale·a·S1(2ω)/2; Σs·d = scale·b·S1(2ω)/2;
        // Σd = −scale·a·S1(ω); Σd² = scale²·(b²·Σt²c² + a²·Σt²s²).
        let cd = -scale * a * self.s1_2 / 2.0;
        let sd = scale * b * self.s1_2 / 2.0;
        let d1 = -scale * a * self.s1_1;
        let t2c2 = (self.t2 + self.s2_2) / 2.0;
        let t2s2 = (self.t2 - self.s2_2) / 2.0;
        let dd = scale * scale * (b * b * t2c2 + a * a * t2s2);
        [
            [cc, 0.0, c1, cd],
            [0.0, ss, 0.0, sd],
            [c1, 0.0, self.n, d1],
            [cd, sd, d1, dd],
        ]
    }
}

/// The data's sums against the model: `Σy·c`, `Σy·s`, `Σy`, and with `timed` also `Σy·t·c` and
/// `Σy·t·s`. Four lanes of partial sums, added at the end.
fn data_sums(x: &[f64], omega: f64, timed: bool) -> [f64; 5] {
    let n = x.len();
    let centre = (n as f64 - 1.0) / 2.0;
    let mut acc = [[0.0; LANES]; 5];
    if timed {
        sweep_lanes(n, omega, centre, |i, s, c, _| {
            let y = load(x, i);
            for l in 0..LANES {
                let t = (i + l) as f64 - centre;
                let yc = y[l] * c[l];
                let ys = y[l] * s[l];
                acc[0][l] += yc;
                acc[1][l] += ys;
                acc[2][l] += y[l];
                acc[3][l] += t * yc;
                acc[4][l] += t * ys;
            }
        });
    } else {
        sweep_lanes(n, omega, centre, |i, s, c, _| {
            let y = load(x, i);
            for l in 0..LANES {
                acc[0][l] += y[l] * c[l];
                acc[1][l] += y[l] * s[l];
                acc[2][l] += y[l];
            }
        });
    }
    acc.map(|a| total(&a))
}

/// Three-parameter least-squares fit at a known `omega` (radians per sample).
pub fn fit3(x: &[f64], omega: f64) -> Option<SineFit> {
    let n = x.len();
    if n < 4 {
        return None;
    }
    fit3_from_sums(n, omega, data_sums(x, omega, false))
}

/// [`fit3`] from the data's sums at `omega` (the first three of [`data_sums`]).
fn fit3_from_sums(n: usize, omega: f64, sums: [f64; 5]) -> Option<SineFit> {
    let [yc, ys, y1, _, _] = sums;
    let u = solve(Kernel::new(n, omega).three(), [yc, ys, y1])?;
    Some(SineFit {
        a: u[0],
        b: u[1],
        c: u[2],
        omega,
        iterations: 0,
    })
}

/// A frequency step is small enough to stop at when it moves the phase at the record's ends by
/// less than this (radians). What is left after it is of the order of its square (1e-12 rad):
/// a misfit of the fundamental that leaks into the residual some 240 dB down, far below the
/// −180 dBc numeric floor of the harmonic measurement. A tone measured with some noise moves its
/// fit by more than 1e-7 rad from one window to the next, so this bound, not a tighter one, lets
/// a steady tone started from the previous window's frequency stop after one step.
const PHASE_TOLERANCE: f64 = 1e-6;

/// Four-parameter fit starting from `omega0`; returns `None` when it does not converge or wanders
/// further than `max_step` radians per sample from the start.
///
/// Gauss-Newton on the full parameters (not increments). It stops once a frequency step moves
/// the phase at the record's ends by under [`PHASE_TOLERANCE`]; the amplitudes of that last
/// solve then differ from a fresh three-parameter fit at the new frequency only in the second
/// order of that step (below 1e-12 relative), so none is run.
pub fn fit4(x: &[f64], omega0: f64, max_step: f64) -> Option<SineFit> {
    let n = x.len();
    if n < 4 {
        return None;
    }
    // One pass at the start frequency serves both the starting three-parameter fit and the
    // first Gauss-Newton step: its first three sums are exactly those `fit3` would make (the
    // same products added in the same order), so the result is the same, one pass sooner.
    let first = data_sums(x, omega0, true);
    let mut fit = fit3_from_sums(n, omega0, first)?;
    // The frequency column is scaled by 1/N so all four columns are of similar size.
    let scale = 1.0 / n as f64;
    let half = n as f64 / 2.0;
    for it in 1..=16 {
        let [yc, ys, y1, ytc, yts] = if it == 1 {
            first
        } else {
            data_sums(x, fit.omega, true)
        };
        let yd = scale * (fit.b * ytc - fit.a * yts);
        let m = Kernel::new(n, fit.omega).four(fit.a, fit.b, scale);
        let u = solve(m, [yc, ys, y1, yd])?;
        let d_omega = u[3] * scale;
        fit.a = u[0];
        fit.b = u[1];
        fit.c = u[2];
        fit.omega += d_omega;
        fit.iterations = it;
        if (fit.omega - omega0).abs() > max_step || !fit.omega.is_finite() {
            return None;
        }
        if (d_omega * half).abs() <= PHASE_TOLERANCE {
            return Some(fit);
        }
    }
    // No convergence in 16 steps: amplitudes at the last frequency.
    let f3 = fit3(x, fit.omega)?;
    Some(SineFit {
        iterations: fit.iterations,
        ..f3
    })
}

#[cfg(test)]
mod tests {
    #![allow(clippy::needless_range_loop)] // matrix checks read best with indices
    use super::*;

    #[test]
    fn four_parameter_fit_recovers_an_exact_sine() {
        let omega = 2.0 * std::f64::consts::PI * 997.3 / 48_000.0;
        let x: Vec<f64> = (0..48_000)
            .map(|i| 0.3 * (omega * i as f64 + 0.7).sin() + 0.01)
            .collect();
        let fit = fit4(&x, omega * 1.0005, 0.01).expect("converges");
        assert!((fit.omega - omega).abs() < 1e-12, "{}", fit.omega - omega);
        assert!((fit.amplitude() - 0.3).abs() < 1e-10);
        assert!((fit.c - 0.01).abs() < 1e-10);
        let mut r = Vec::new();
        fit.residual_into(&x, &mut r);
        let rms = (r.iter().map(|v| v * v).sum::<f64>() / r.len() as f64).sqrt();
        assert!(rms < 1e-10, "{rms}");
    }

    /// The closed-form model sums against plain summation, for odd and even lengths and
    /// frequencies from a few cycles per record to near Nyquist (textbook Dirichlet-kernel
    /// identities; the brute-force sums are the reference).
    #[test]
    fn closed_form_model_sums_match_direct_summation() {
        for &n in &[257usize, 1000, 4801, 48_000] {
            for &omega in &[0.013, 0.1, 1.0, 2.5, 3.0] {
                let k = Kernel::new(n, omega);
                let (a, b, scale) = (0.3, -0.7, 1.0 / n as f64);
                let centre = (n as f64 - 1.0) / 2.0;
                let mut m = [[0.0; 4]; 4];
                for i in 0..n {
                    let t = i as f64 - centre;
                    let (s, c) = (omega * t).sin_cos();
                    let v = [c, s, 1.0, scale * t * (b * c - a * s)];
                    for j in 0..4 {
                        for q in 0..4 {
                            m[j][q] += v[j] * v[q];
                        }
                    }
                }
                let got = k.four(a, b, scale);
                for j in 0..4 {
                    for q in 0..4 {
                        // Relative to the diagonal scale of the two entries involved.
                        let size = (m[j][j] * m[q][q]).sqrt();
                        let err = (got[j][q] - m[j][q]).abs() / size;
                        assert!(
                            err < 1e-9,
                            "n={n} ω={omega} [{j}][{q}]: {} vs {}",
                            got[j][q],
                            m[j][q]
                        );
                    }
                }
            }
        }
    }

    /// A tone with strong harmonics and noise: the four-parameter fit lands where brute-force
    /// minimisation of the residual over frequency does (a golden-section search on fit3).
    #[test]
    fn four_parameter_fit_finds_the_least_squares_frequency() {
        let n = 9_600;
        let omega = 2.0 * std::f64::consts::PI * 441.37 / 9_600.0;
        let mut seed = 0x9E37_79B9_7F4A_7C15u64;
        let x: Vec<f64> = (0..n)
            .map(|i| {
                seed ^= seed << 13;
                seed ^= seed >> 7;
                seed ^= seed << 17;
                let noise = (seed >> 11) as f64 / (1u64 << 53) as f64 - 0.5;
                let p = omega * i as f64 + 0.4;
                0.5 * p.sin() + 0.05 * (2.0 * p).sin() + 0.02 * (3.0 * p + 1.0).sin() + 0.01 * noise
            })
            .collect();
        let sse = |w: f64| {
            let f = fit3(&x, w).expect("fits");
            let mut r = Vec::new();
            f.residual_into(&x, &mut r);
            r.iter().map(|v| v * v).sum::<f64>()
        };
        let (mut lo, mut hi) = (omega * 0.999, omega * 1.001);
        let g = (5f64.sqrt() - 1.0) / 2.0;
        for _ in 0..200 {
            let (m1, m2) = (hi - g * (hi - lo), lo + g * (hi - lo));
            if sse(m1) < sse(m2) {
                hi = m2;
            } else {
                lo = m1;
            }
        }
        let best = (lo + hi) / 2.0;
        let fit = fit4(&x, omega * 1.0002, 0.01).expect("converges");
        assert!(
            (fit.omega - best).abs() * (n as f64) < 1e-6,
            "{} vs {}",
            fit.omega,
            best
        );
        let f3 = fit3(&x, fit.omega).expect("fits");
        assert!((fit.amplitude() - f3.amplitude()).abs() < 1e-12);
    }

    #[test]
    fn fits_refuse_degenerate_input() {
        assert!(fit3(&[1.0, 2.0], 0.1).is_none());
        assert!(fit4(&[0.0; 100], 0.1, 0.01).is_none());
    }
}
