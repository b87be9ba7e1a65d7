//! Two harmonic fingerprints compared: each side's summary, the harmonics of A and B order by
//! order with B − A, and the findings in plain words (character, even/odd balance, fall-off,
//! THD, strongest harmonic).

use serde::Serialize;

use super::inputs::{Fingerprint, Source};
use super::words::{diff, pct, pct_db, plain, signed};
use super::{FALLOFF_ALIKE_DB, MIN_TABLE_ORDER, SAME_TONE_FRACTION, THD_ALIKE_DB};
use crate::analysis::character::{self, Family, FAMILY_LEAD_DB, FAST_FALLOFF, SLOW_FALLOFF};

/// One side's fingerprint, as the comparison document shows it.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct FingerprintSummary {
    /// The file as given.
    pub file: String,
    /// "wav", "snapshot" or "scan-report".
    pub source: Source,
    /// The channel (from 1).
    pub channel: usize,
    /// Fundamental frequency (Hz).
    pub fundamental_hz: f64,
    /// Fundamental peak level (dBFS).
    pub fundamental_dbfs: Option<f64>,
    /// THD_F (%).
    pub thd_pct: Option<f64>,
    /// THD_F (dB).
    pub thd_db: Option<f64>,
    /// THD+N, AES17 (dB).
    pub thd_n_db: Option<f64>,
    /// Odd/even balance (dB; positive = even-rich).
    pub odd_even_db: Option<f64>,
    /// Harmonic fall-off (dB per octave of order).
    pub falloff_db_per_octave: Option<f64>,
    /// The family from the odd/even balance: "mostly-even", "mixed", "mostly-odd", "odd-only".
    pub family: Option<&'static str>,
    /// The character line.
    pub character: String,
}

/// One harmonic order of A and B.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct HarmonicDiff {
    /// Order (2 = second harmonic).
    pub order: usize,
    /// "odd" or "even".
    pub parity: &'static str,
    /// A's level (dBc).
    pub a_dbc: Option<f64>,
    /// B's level (dBc).
    pub b_dbc: Option<f64>,
    /// B − A (dB).
    pub diff_db: Option<f64>,
    /// A's harmonic stands 10 dB above its noise floor.
    pub a_resolved: Option<bool>,
    /// B's harmonic stands 10 dB above its noise floor.
    pub b_resolved: Option<bool>,
}

/// Two fingerprints compared.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct FingerprintComparison {
    /// A.
    pub a: FingerprintSummary,
    /// B.
    pub b: FingerprintSummary,
    /// Per order, H2 up.
    pub harmonics: Vec<HarmonicDiff>,
    /// B − A of THD (dB).
    pub thd_diff_db: Option<f64>,
    /// B − A of THD+N (dB).
    pub thd_n_diff_db: Option<f64>,
    /// B − A of the odd/even balance (dB; positive: B is more even-rich).
    pub odd_even_diff_db: Option<f64>,
    /// B − A of the fall-off (dB per octave; negative: B falls off faster).
    pub falloff_diff_db_per_octave: Option<f64>,
    /// The plain-words lines.
    pub findings: Vec<String>,
}

fn family_name(f: Family) -> &'static str {
    match f {
        Family::MostlyEven => "mostly-even",
        Family::Mixed => "mixed",
        Family::MostlyOdd => "mostly-odd",
        Family::OddOnly => "odd-only",
    }
}

fn summary(f: &Fingerprint) -> FingerprintSummary {
    let d = &f.distortion;
    FingerprintSummary {
        file: f.file.clone(),
        source: f.source,
        channel: f.channel,
        fundamental_hz: d.fundamental_hz,
        fundamental_dbfs: d.fundamental_dbfs,
        thd_pct: d.thd_pct,
        thd_db: d.thd_db,
        thd_n_db: d.thd_n_db,
        odd_even_db: d.odd_even_db,
        falloff_db_per_octave: d.falloff_db_per_octave,
        family: d.odd_even_db.map(|b| family_name(character::family(b))),
        character: character::describe(d.thd_pct, d.odd_even_db, d.falloff_db_per_octave),
    }
}

/// Compare two fingerprints.
pub fn compare_fingerprints(a: &Fingerprint, b: &Fingerprint) -> FingerprintComparison {
    let top = a
        .distortion
        .harmonics
        .iter()
        .chain(&b.distortion.harmonics)
        .map(|h| h.order)
        .max()
        .unwrap_or(0)
        .max(MIN_TABLE_ORDER);
    let harmonics = (2..=top)
        .map(|order| {
            let ha = a.harmonic(order).map(|h| (h.level_dbc, h.resolved));
            let hb = b.harmonic(order).map(|h| (h.level_dbc, h.resolved));
            let a_dbc = ha.and_then(|h| h.0);
            let b_dbc = hb.and_then(|h| h.0);
            HarmonicDiff {
                order,
                parity: if order % 2 == 0 { "even" } else { "odd" },
                a_dbc,
                b_dbc,
                diff_db: diff(a_dbc, b_dbc),
                a_resolved: ha.map(|h| h.1),
                b_resolved: hb.map(|h| h.1),
            }
        })
        .collect();
    let (da, db) = (&a.distortion, &b.distortion);
    let thd_diff_db = diff(
        da.thd_pct.filter(|p| *p > 0.0).map(pct_db),
        db.thd_pct.filter(|p| *p > 0.0).map(pct_db),
    );
    let mut c = FingerprintComparison {
        a: summary(a),
        b: summary(b),
        harmonics,
        thd_diff_db,
        thd_n_diff_db: diff(da.thd_n_db, db.thd_n_db),
        odd_even_diff_db: diff(da.odd_even_db, db.odd_even_db),
        falloff_diff_db_per_octave: diff(da.falloff_db_per_octave, db.falloff_db_per_octave),
        findings: Vec::new(),
    };
    c.findings = fingerprint_findings(&c);
    c
}

fn fingerprint_findings(c: &FingerprintComparison) -> Vec<String> {
    let (a, b) = (&c.a, &c.b);
    let mut lines = vec![format!("A: {}", a.character), format!("B: {}", b.character)];
    if (b.fundamental_hz / a.fundamental_hz - 1.0).abs() > SAME_TONE_FRACTION {
        lines.push(format!(
            "the fundamentals differ ({:.1} Hz against {:.1} Hz): harmonics of different tones compare only loosely",
            a.fundamental_hz, b.fundamental_hz
        ));
    }
    // Which is more even-rich.
    match (a.odd_even_db, b.odd_even_db) {
        (Some(ea), Some(eb)) => {
            let d = eb - ea;
            let (fa, fb) = (character::family(ea), character::family(eb));
            if d.abs() <= FAMILY_LEAD_DB && fa == fb {
                lines.push(format!(
                    "A and B are about as even-rich: odd/even {} dB against {} dB",
                    signed(ea, 1),
                    signed(eb, 1)
                ));
            } else {
                let (more, less, hi, lo) = if d > 0.0 {
                    ("B", "A", eb, ea)
                } else {
                    ("A", "B", ea, eb)
                };
                lines.push(format!(
                    "{more} is more even-rich: odd/even {} dB against {} dB for {less} ({} dB further toward even)",
                    signed(hi, 1),
                    signed(lo, 1),
                    plain((hi - lo).abs(), 1)
                ));
            }
        }
        (None, Some(_)) | (Some(_), None) | (None, None) => {
            let which = match (a.odd_even_db, b.odd_even_db) {
                (None, None) => "neither A nor B has",
                (None, _) => "A has no",
                _ => "B has no",
            };
            lines.push(format!(
                "cannot tell which is more even-rich: {which} harmonic above the noise floor"
            ));
        }
    }
    // Which falls off faster.
    match (a.falloff_db_per_octave, b.falloff_db_per_octave) {
        (Some(fa), Some(fb)) => {
            if (fb - fa).abs() < FALLOFF_ALIKE_DB {
                lines.push(format!(
                    "their harmonics fall off alike: {} and {} dB per octave of order",
                    plain(fa, 1),
                    plain(fb, 1)
                ));
            } else {
                let (faster, slower, qf, qs) = if fb < fa {
                    ("B", "A", fb, fa)
                } else {
                    ("A", "B", fa, fb)
                };
                let what = if qs > SLOW_FALLOFF && qf < FAST_FALLOFF {
                    " (a soft curve against hard corners)"
                } else if qs > SLOW_FALLOFF {
                    ": the other has the hard corners of clipping"
                } else {
                    ": the softer curve"
                };
                lines.push(format!(
                    "{faster}'s harmonics fall off faster: {} dB per octave of order against {} dB for {slower} ({} dB/octave faster){what}",
                    plain(qf, 1),
                    plain(qs, 1),
                    plain(qs - qf, 1)
                ));
            }
        }
        _ => lines.push(
            "cannot compare the fall-off: one of them has fewer than two harmonics above the noise floor"
                .to_string(),
        ),
    }
    // Which has more THD.
    match (a.thd_pct, b.thd_pct, c.thd_diff_db) {
        (Some(ta), Some(tb), Some(d)) => {
            if d.abs() < THD_ALIKE_DB {
                lines.push(format!(
                    "A and B have about the same THD: {} and {} (within {THD_ALIKE_DB} dB)",
                    pct(ta),
                    pct(tb)
                ));
            } else {
                let (more, less, hi, lo) = if d > 0.0 {
                    ("B", "A", tb, ta)
                } else {
                    ("A", "B", ta, tb)
                };
                lines.push(format!(
                    "{more} has more THD: {} against {} for {less} ({} dB more)",
                    pct(hi),
                    pct(lo),
                    plain(d.abs(), 1)
                ));
            }
        }
        _ => lines.push("cannot compare THD: one of them has no harmonic in the band".to_string()),
    }
    // Each one's strongest harmonic: which order leads the fingerprint.
    let strongest = |level: fn(&HarmonicDiff) -> Option<f64>| {
        c.harmonics
            .iter()
            .filter_map(|h| level(h).map(|l| (h, l)))
            .max_by(|x, y| x.1.total_cmp(&y.1))
    };
    if let (Some((ha, la)), Some((hb, lb))) = (strongest(|h| h.a_dbc), strongest(|h| h.b_dbc)) {
        lines.push(format!(
            "strongest harmonic: A's H{} ({}) at {} dBc, B's H{} ({}) at {} dBc",
            ha.order,
            ha.parity,
            plain(la, 1),
            hb.order,
            hb.parity,
            plain(lb, 1)
        ));
    }
    lines
}

#[cfg(test)]
pub(crate) mod tests {
    use super::*;
    use crate::analysis::report::{DistortionReport, HarmonicReport};

    pub(crate) fn fingerprint(
        name: &str,
        levels: &[(usize, f64)],
        thd: f64,
        oe: f64,
        fall: f64,
    ) -> Fingerprint {
        Fingerprint {
            label: format!("{name} ch 1"),
            file: name.to_string(),
            source: Source::Snapshot,
            channel: 1,
            report: None,
            distortion: DistortionReport {
                fundamental_hz: 997.0,
                fundamental_dbfs: Some(-6.0),
                thd_pct: Some(thd),
                thd_db: Some(pct_db(thd)),
                thd_n_db: Some(pct_db(thd)),
                thd_n_pct: thd,
                sinad_db: None,
                enob_bits: None,
                odd_even_db: Some(oe),
                falloff_db_per_octave: Some(fall),
                noise_floor_dbc: Some(-140.0),
                span_start_s: 0.0,
                span_end_s: 1.0,
                harmonics: levels
                    .iter()
                    .map(|&(order, l)| HarmonicReport {
                        order,
                        freq_hz: 997.0 * order as f64,
                        level_dbc: Some(l),
                        phase_deg: 0.0,
                        resolved: true,
                    })
                    .collect(),
            },
        }
    }

    /// Differences are B − A per order; the words follow the character thresholds: a hard
    /// symmetric clip (odd only, −6 dB/octave; reference-values §6) against an even-rich soft
    /// stage.
    #[test]
    fn fingerprint_words_name_the_right_side() {
        let a = fingerprint(
            "clip.json",
            &[(2, -130.0), (3, -13.2), (5, -23.9)],
            23.3,
            -110.0,
            -6.5,
        );
        let b = fingerprint(
            "soft.json",
            &[(2, -20.0), (3, -40.0), (5, -70.0)],
            10.1,
            20.0,
            -25.0,
        );
        let c = compare_fingerprints(&a, &b);
        assert_eq!(c.harmonics.len(), 9, "H2..H10 at least");
        assert_eq!(c.harmonics[0].diff_db, Some(110.0));
        assert_eq!(
            c.harmonics[1].diff_db.map(|d| (d * 10.0).round()),
            Some(-268.0)
        );
        assert_eq!(c.harmonics[2].a_dbc, None, "H4 measured by neither");
        assert_eq!(c.harmonics[0].parity, "even");
        let text = c.findings.join("\n");
        assert!(text.contains("B is more even-rich"), "{text}");
        assert!(text.contains("B's harmonics fall off faster"), "{text}");
        // 20·log10(23.3/10.1) = 7.26 dB.
        assert!(
            text.contains("A has more THD: 23.3 % against 10.1 % for B (7.3 dB more)"),
            "{text}"
        );
        assert!(
            text.contains("A: heavy; odd only: symmetric clipping"),
            "{text}"
        );
        assert!(
            text.contains(
                "strongest harmonic: A's H3 (odd) at -13.2 dBc, B's H2 (even) at -20.0 dBc"
            ),
            "{text}"
        );
    }

    #[test]
    fn alike_fingerprints_read_alike() {
        let a = fingerprint("a", &[(2, -40.0), (3, -50.0)], 1.05, 9.0, -12.0);
        let b = fingerprint("b", &[(2, -40.5), (3, -50.2)], 1.0, 9.5, -13.0);
        let text = compare_fingerprints(&a, &b).findings.join("\n");
        assert!(text.contains("about as even-rich"), "{text}");
        assert!(text.contains("fall off alike"), "{text}");
        assert!(text.contains("about the same THD"), "{text}");
    }
}
