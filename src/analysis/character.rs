//! One line in plain words on a harmonic fingerprint's character: how much distortion, which
//! family of harmonics leads, and what shape of curve that points to.
//!
//! The physics behind the words: a transfer curve symmetric about zero (push-pull stages, hard
//! clippers) makes odd harmonics only; an asymmetric one (single-ended stages) adds even ones,
//! often leading with H2; a hard corner (clipping) leaves harmonics that fall slowly with order
//! (a square wave's fall as 1/n, −6.02 dB per octave of order), a gentle curve makes them fall
//! fast. The thresholds are ours (common practice has no standard for them) and are listed in
//! [`THRESHOLDS`] and the README.

use std::fmt::Write as _;

/// The thresholds behind [`describe`], as shown in the README and the help overlay.
pub const THRESHOLDS: &str = "\
amount:  THD < 0.1 % clean, < 1 % mild, < 10 % moderate, from 10 % heavy
family:  odd/even > +6 dB mostly even (asymmetric), -6..+6 dB mixed, < -6 dB mostly odd,
         < -20 dB odd only (symmetric)
shape:   fall-off above -9 dB/octave of order slow (hard corners, clipping),
         below -18 dB/octave fast (soft curve)";

/// THD below which a channel reads as clean (%).
pub const CLEAN_THD_PCT: f64 = 0.1;
/// THD below which distortion is mild (%).
pub const MILD_THD_PCT: f64 = 1.0;
/// THD from which distortion is heavy (%).
pub const HEAVY_THD_PCT: f64 = 10.0;
/// Odd/even balance beyond which one family leads (dB).
pub const FAMILY_LEAD_DB: f64 = 6.0;
/// Odd/even balance below which the even family is absent: odd only (dB).
pub const ODD_ONLY_DB: f64 = -20.0;
/// Fall-off slower than this is a hard corner (dB per octave of order).
pub const SLOW_FALLOFF: f64 = -9.0;
/// Fall-off faster than this is a soft curve (dB per octave of order).
pub const FAST_FALLOFF: f64 = -18.0;

/// What a fingerprint says about the stage that made it.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Family {
    /// Even harmonics lead: an asymmetric curve.
    MostlyEven,
    /// Neither leads.
    Mixed,
    /// Odd harmonics lead.
    MostlyOdd,
    /// Odd harmonics only: a symmetric curve.
    OddOnly,
}

/// The family from the odd/even balance (dB; positive = even-rich).
pub fn family(odd_even_db: f64) -> Family {
    if odd_even_db > FAMILY_LEAD_DB {
        Family::MostlyEven
    } else if odd_even_db < ODD_ONLY_DB {
        Family::OddOnly
    } else if odd_even_db < -FAMILY_LEAD_DB {
        Family::MostlyOdd
    } else {
        Family::Mixed
    }
}

/// One line on the character: e.g. "heavy; odd only: symmetric clipping, slow fall-off".
/// `None` inputs are what the analysis could not tell (no harmonic above the noise floor, fewer
/// than two harmonics for a slope).
pub fn describe(
    thd_pct: Option<f64>,
    odd_even_db: Option<f64>,
    falloff_db_per_octave: Option<f64>,
) -> String {
    let Some(thd) = thd_pct else {
        return "no harmonics in the band".to_string();
    };
    if thd < CLEAN_THD_PCT {
        return "clean".to_string();
    }
    let amount = if thd < MILD_THD_PCT {
        "mild"
    } else if thd < HEAVY_THD_PCT {
        "moderate"
    } else {
        "heavy"
    };
    let mut s = amount.to_string();
    let fam = odd_even_db.map(family);
    let shape = falloff_db_per_octave.map(|f| {
        if f > SLOW_FALLOFF {
            "slow fall-off"
        } else if f < FAST_FALLOFF {
            "fast fall-off"
        } else {
            "moderate fall-off"
        }
    });
    let hard = falloff_db_per_octave.is_some_and(|f| f > SLOW_FALLOFF);
    let soft = falloff_db_per_octave.is_some_and(|f| f < FAST_FALLOFF);
    match fam {
        Some(Family::OddOnly) => {
            let what = if hard {
                "symmetric clipping"
            } else if soft {
                "soft symmetric curve"
            } else {
                "symmetric curve"
            };
            let _ = write!(s, "; odd only: {what}");
        }
        Some(Family::MostlyOdd) => s.push_str("; mostly odd: nearly symmetric"),
        Some(Family::Mixed) => s.push_str("; odd and even alike"),
        Some(Family::MostlyEven) => {
            let what = if hard {
                "asymmetric clipping"
            } else {
                "asymmetric, single-ended character"
            };
            let _ = write!(s, "; mostly even: {what}");
        }
        None => s.push_str("; harmonics near the noise floor"),
    }
    if let Some(shape) = shape {
        let _ = write!(s, ", {shape}");
    }
    s
}

#[cfg(test)]
mod tests {
    use super::*;

    // Fingerprints of known waveforms (shared/reference-values.md §6, calc): a hard symmetric
    // clip of a sine at 0.5 (THD 23.29 %, odd only, fall-off near a square's −6.02 dB/octave);
    // a half-wave-like asymmetric stage (even-rich); a clean converter.
    #[test]
    fn known_shapes_read_as_expected() {
        assert_eq!(
            describe(Some(23.29), Some(-300.0), Some(-6.5)),
            "heavy; odd only: symmetric clipping, slow fall-off"
        );
        assert_eq!(
            describe(Some(3.0), Some(12.0), Some(-25.0)),
            "moderate; mostly even: asymmetric, single-ended character, fast fall-off"
        );
        assert_eq!(
            describe(Some(0.5), Some(-40.0), Some(-30.0)),
            "mild; odd only: soft symmetric curve, fast fall-off"
        );
        assert_eq!(describe(Some(0.001), Some(3.0), None), "clean");
        assert_eq!(describe(None, None, None), "no harmonics in the band");
        assert_eq!(
            describe(Some(2.0), None, None),
            "moderate; harmonics near the noise floor"
        );
    }

    #[test]
    fn family_edges() {
        assert_eq!(family(6.1), Family::MostlyEven);
        assert_eq!(family(6.0), Family::Mixed);
        assert_eq!(family(-6.1), Family::MostlyOdd);
        assert_eq!(family(-20.1), Family::OddOnly);
    }
}
