//! Sine fitting after IEEE Std 1057 / 1241: the three-parameter fit at a known frequency and the
//! four-parameter fit that also refines the frequency (Gauss-Newton), both in f64.
//!
//! Model: `y[n] ≈ a·cos(ω t_n) + b·sin(ω t_n) + c` with `t_n = n − (N−1)/2` (time centred on the
//! record, which keeps the normal equations well conditioned).

/// Call `f(i, sin(ω·t_i), cos(ω·t_i))` for `i` in `0..n`, `t_i = i − centre`, stepping a
/// rotating phasor that is re-anchored exactly every 1024 samples (error stays near 1e-13).
#[inline]
pub fn sweep(n: usize, omega: f64, centre: f64, mut f: impl FnMut(usize, f64, f64)) {
    let (sd, cd) = omega.sin_cos();
    let mut i = 0;
    while i < n {
        let (mut s, mut c) = (omega * (i as f64 - centre)).sin_cos();
        let end = (i + 1024).min(n);
        for j in i..end {
            f(j, s, c);
            let ns = s * cd + c * sd;
            c = c * cd - s * sd;
            s = ns;
        }
        i = end;
    }
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

    /// Fill `out` with the residual `x − fit` (the noise and distortion, NAD, of IEEE 1241).
    pub fn residual_into(&self, x: &[f64], out: &mut Vec<f64>) {
        out.clear();
        out.resize(x.len(), 0.0);
        let centre = (x.len() as f64 - 1.0) / 2.0;
        sweep(x.len(), self.omega, centre, |i, s, c| {
            out[i] = x[i] - (self.a * c + self.b * s + self.c);
        });
    }
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

#[allow(clippy::needless_range_loop)] // symmetric normal-equation accumulation
/// Three-parameter least-squares fit at a known `omega` (radians per sample).
pub fn fit3(x: &[f64], omega: f64) -> Option<SineFit> {
    let n = x.len();
    if n < 4 {
        return None;
    }
    let centre = (n as f64 - 1.0) / 2.0;
    let mut m = [[0.0; 3]; 3];
    let mut r = [0.0; 3];
    sweep(n, omega, centre, |i, s, c| {
        let y = x[i];
        let v = [c, s, 1.0];
        for j in 0..3 {
            r[j] += v[j] * y;
            for k in j..3 {
                m[j][k] += v[j] * v[k];
            }
        }
    });
    for j in 0..3 {
        for k in 0..j {
            m[j][k] = m[k][j];
        }
    }
    let u = solve(m, r)?;
    Some(SineFit {
        a: u[0],
        b: u[1],
        c: u[2],
        omega,
        iterations: 0,
    })
}

#[allow(clippy::needless_range_loop)] // symmetric normal-equation accumulation
/// Four-parameter fit starting from `omega0`; returns `None` when it does not converge or wanders
/// further than `max_step` radians per sample from the start.
pub fn fit4(x: &[f64], omega0: f64, max_step: f64) -> Option<SineFit> {
    let n = x.len();
    let mut fit = fit3(x, omega0)?;
    let centre = (n as f64 - 1.0) / 2.0;
    // The frequency column is scaled by 1/N so all four columns are of similar size.
    let scale = 1.0 / n as f64;
    for it in 1..=16 {
        let mut m = [[0.0; 4]; 4];
        let mut r = [0.0; 4];
        let (fa, fb) = (fit.a, fit.b);
        sweep(n, fit.omega, centre, |i, s, c| {
            let y = x[i];
            let t = i as f64 - centre;
            let d = t * scale * (fb * c - fa * s);
            let v = [c, s, 1.0, d];
            for j in 0..4 {
                r[j] += v[j] * y;
                for k in j..4 {
                    m[j][k] += v[j] * v[k];
                }
            }
        });
        for j in 0..4 {
            for k in 0..j {
                m[j][k] = m[k][j];
            }
        }
        // Solving for the full parameters (not increments): a, b, c directly, Δω scaled.
        let u = solve(m, r)?;
        let d_omega = u[3] * scale;
        fit.a = u[0];
        fit.b = u[1];
        fit.c = u[2];
        fit.omega += d_omega;
        fit.iterations = it;
        if (fit.omega - omega0).abs() > max_step || !fit.omega.is_finite() {
            return None;
        }
        if d_omega.abs() <= 1e-15 * fit.omega.abs().max(1e-9) {
            break;
        }
    }
    // Final amplitudes at the converged frequency.
    let f3 = fit3(x, fit.omega)?;
    Some(SineFit {
        iterations: fit.iterations,
        ..f3
    })
}

#[cfg(test)]
mod tests {
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

    #[test]
    fn fits_refuse_degenerate_input() {
        assert!(fit3(&[1.0, 2.0], 0.1).is_none());
        assert!(fit4(&[0.0; 100], 0.1, 0.01).is_none());
    }
}
