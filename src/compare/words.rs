//! The numbers as the comparison's words and tables write them, shared by both kinds: B − A
//! differences, THD % in dB, signed and plain figures without "-0.0", THD % with enough digits,
//! frequencies in Hz or kHz, and the placeholder for a value that is not there.

/// Placeholder for a value that is not there.
pub(crate) const NONE: &str = "--";

pub(crate) fn diff(a: Option<f64>, b: Option<f64>) -> Option<f64> {
    Some(b? - a?)
}

pub(crate) fn pct_db(p: f64) -> f64 {
    20.0 * (p / 100.0).log10()
}

/// Format a signed dB figure without "-0.0".
pub(crate) fn signed(x: f64, prec: usize) -> String {
    let x = if x.abs() < 0.5 * 10f64.powi(-(prec as i32)) {
        0.0
    } else {
        x
    };
    format!("{x:+.prec$}")
}

pub(crate) fn plain(x: f64, prec: usize) -> String {
    let x = if x.abs() < 0.5 * 10f64.powi(-(prec as i32)) {
        0.0
    } else {
        x
    };
    format!("{x:.prec$}")
}

pub(crate) fn opt(v: Option<f64>, prec: usize, sign: bool) -> String {
    match v {
        Some(x) if sign => signed(x, prec),
        Some(x) => plain(x, prec),
        None => NONE.to_string(),
    }
}

/// THD in % with enough digits for small values.
pub(crate) fn pct(p: f64) -> String {
    if p >= 10.0 {
        format!("{p:.1} %")
    } else if p >= 0.1 {
        format!("{p:.2} %")
    } else {
        format!("{p:.4} %")
    }
}

pub(crate) fn hz(f: f64) -> String {
    if f >= 1000.0 {
        format!("{} kHz", plain(f / 1000.0, 2))
    } else {
        format!("{} Hz", plain(f, 1))
    }
}
