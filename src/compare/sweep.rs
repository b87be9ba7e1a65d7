//! Two sweeps compared: their steps aligned by drive (or frequency), each side's onset and knee,
//! and the findings in plain words (which clips earlier, and which more abruptly).

use std::collections::BTreeMap;
use std::fmt::Write as _;

use serde::Serialize;

use super::inputs::Sweep;
use super::words::{diff, hz, pct, plain, signed};
use super::{
    CompareError, ABRUPT_ALIKE_DB_PER_DB, ALIGN_DRIVE_DB, ALIGN_FREQ_FRACTION, ONSET_ALIKE_DB,
    THD_ALIKE_DB,
};
use crate::sweep::onset;
use crate::sweep::report::{Knee, Onset, SweepKind, SweepReport};

/// Where a sweep crosses its THD threshold.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
#[serde(tag = "state", rename_all = "kebab-case")]
pub enum OnsetState {
    /// Crosses between two steps.
    At(Onset),
    /// Already at or above the threshold at the lowest drive.
    BelowSweep {
        /// The lowest drive (dBFS).
        lowest_drive_dbfs: f64,
    },
    /// Never reaches the threshold.
    Never {
        /// The highest drive measured (dBFS).
        highest_drive_dbfs: f64,
    },
    /// No step measured a THD.
    Unknown,
}

/// One side's sweep, as the comparison document shows it.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct SweepSummary {
    /// The file as given.
    pub file: String,
    /// The stimulus frequency of a level sweep (Hz).
    pub frequency_hz: Option<f64>,
    /// The drive of a frequency sweep (dBFS).
    pub drive_dbfs: Option<f64>,
    /// Steps in the document.
    pub steps: usize,
    /// The THD threshold the onset refers to (%).
    pub onset_threshold_pct: f64,
    /// The onset at the comparison's threshold (A's).
    pub onset: OnsetState,
    /// The knee, as the document gives it (reckoned from its steps when it gives none).
    pub knee: Option<Knee>,
    /// Steepest THD rise between steps (dB of THD per dB of drive), above the THD floor.
    pub steepest_db_per_db: Option<f64>,
    /// Loop gain at the lowest drive (dB).
    pub loop_gain_db: Option<f64>,
    /// Highest THD of any step (%).
    pub max_thd_pct: Option<f64>,
}

/// One aligned step of A and B.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct SweepRow {
    /// Drive of a level sweep (dBFS).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub drive_dbfs: Option<f64>,
    /// Frequency of a frequency sweep (Hz).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub frequency_hz: Option<f64>,
    /// A's THD (%).
    pub a_thd_pct: Option<f64>,
    /// B's THD (%).
    pub b_thd_pct: Option<f64>,
    /// B − A of THD (dB).
    pub thd_diff_db: Option<f64>,
    /// A's returned level (dBFS).
    pub a_return_dbfs: Option<f64>,
    /// B's returned level (dBFS).
    pub b_return_dbfs: Option<f64>,
    /// B − A per harmonic order (dB), where both measured it.
    pub harmonics_diff_db: BTreeMap<u32, f64>,
}

/// Two sweeps compared.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct SweepComparison {
    /// "level" or "frequency".
    pub sweep: SweepKind,
    /// The distortion figure the rows, onsets and knees follow: "THD", or "IMD" when both
    /// sweeps are two-tone sweeps (the `*_thd_pct` keys then hold IMD, as the sweep document's
    /// own onset does).
    pub figure: &'static str,
    /// The THD threshold both onsets refer to (A's, %).
    pub onset_threshold_pct: f64,
    /// A.
    pub a: SweepSummary,
    /// B.
    pub b: SweepSummary,
    /// Steps aligned by drive (level sweeps) or frequency, rising.
    pub rows: Vec<SweepRow>,
    /// B − A of the onset drive (dB), when both cross within their sweeps.
    pub onset_drive_diff_db: Option<f64>,
    /// B − A of the returned level at the onset (dB).
    pub onset_return_diff_db: Option<f64>,
    /// The plain-words lines.
    pub findings: Vec<String>,
}

fn thd_db_of(pct: f64) -> f64 {
    20.0 * (pct / 100.0).log10()
}

/// Steepest THD rise between measured steps, as [`onset::knee`] reckons it (steps above its
/// floor), whether or not it passes the knee slope.
fn steepest(r: &SweepReport) -> Option<f64> {
    let measured: Vec<(f64, f64)> = r
        .steps
        .iter()
        .filter_map(|s| {
            s.figure_pct()
                .filter(|t| *t > 0.0)
                .map(|t| (s.drive_dbfs, t))
        })
        .collect();
    measured
        .windows(2)
        .filter_map(|w| {
            let ((da, ta), (db, tb)) = (w[0], w[1]);
            (db > da && tb > onset::KNEE_FLOOR_PCT)
                .then(|| (thd_db_of(tb) - thd_db_of(ta)) / (db - da))
        })
        .reduce(f64::max)
}

fn onset_state(r: &SweepReport, threshold: f64) -> OnsetState {
    let mut steps = r.steps.clone();
    steps.sort_by(|a, b| a.drive_dbfs.total_cmp(&b.drive_dbfs));
    let measured: Vec<(f64, f64)> = steps
        .iter()
        .filter_map(|s| {
            s.figure_pct()
                .filter(|t| *t > 0.0)
                .map(|t| (s.drive_dbfs, t))
        })
        .collect();
    let (Some(first), Some(last)) = (measured.first(), measured.last()) else {
        return OnsetState::Unknown;
    };
    if first.1 >= threshold {
        return OnsetState::BelowSweep {
            lowest_drive_dbfs: first.0,
        };
    }
    let stored = r
        .onset
        .filter(|o| (o.thd_pct - threshold).abs() < 1e-9 && r.onset_threshold_pct == threshold);
    match stored.or_else(|| onset::onset(&steps, threshold)) {
        Some(o) => OnsetState::At(o),
        None => OnsetState::Never {
            highest_drive_dbfs: last.0,
        },
    }
}

fn sweep_summary(s: &Sweep, threshold: f64) -> SweepSummary {
    let r = &s.report;
    let level = r.kind == SweepKind::Level;
    SweepSummary {
        file: s.file.clone(),
        frequency_hz: r.frequency_hz,
        drive_dbfs: r.drive_dbfs,
        steps: r.steps.len(),
        onset_threshold_pct: r.onset_threshold_pct,
        onset: if level {
            onset_state(r, threshold)
        } else {
            OnsetState::Unknown
        },
        // The document's knee; one reckoned from its steps when it gives none.
        knee: if level {
            r.knee.or_else(|| {
                let mut steps = r.steps.clone();
                steps.sort_by(|a, b| a.drive_dbfs.total_cmp(&b.drive_dbfs));
                onset::knee(&steps)
            })
        } else {
            None
        },
        steepest_db_per_db: if level { steepest(r) } else { None },
        loop_gain_db: r.loop_gain_db,
        max_thd_pct: r
            .steps
            .iter()
            .filter_map(|s| s.figure_pct())
            .reduce(f64::max),
    }
}

/// Merge the steps of A and B by drive (level) or frequency.
fn align(a: &SweepReport, b: &SweepReport, kind: SweepKind) -> Vec<SweepRow> {
    let key = |s: &crate::sweep::report::SweepStep| match kind {
        SweepKind::Level => s.drive_dbfs,
        SweepKind::Frequency => s.frequency_hz,
    };
    let same = |x: f64, y: f64| match kind {
        SweepKind::Level => (x - y).abs() <= ALIGN_DRIVE_DB,
        SweepKind::Frequency => (x / y - 1.0).abs() <= ALIGN_FREQ_FRACTION,
    };
    let mut sa: Vec<_> = a.steps.iter().collect();
    let mut sb: Vec<_> = b.steps.iter().collect();
    sa.sort_by(|x, y| key(x).total_cmp(&key(y)));
    sb.sort_by(|x, y| key(x).total_cmp(&key(y)));
    let (mut i, mut j) = (0, 0);
    let mut rows = Vec::new();
    while i < sa.len() || j < sb.len() {
        let (sa_i, sb_j) = (sa.get(i).copied(), sb.get(j).copied());
        let (pa, pb) = match (sa_i, sb_j) {
            (Some(x), Some(y)) if same(key(x), key(y)) => {
                i += 1;
                j += 1;
                (Some(x), Some(y))
            }
            (Some(x), Some(y)) if key(x) < key(y) => {
                i += 1;
                (Some(x), None)
            }
            (Some(_), Some(y)) => {
                j += 1;
                (None, Some(y))
            }
            (Some(x), None) => {
                i += 1;
                (Some(x), None)
            }
            (None, Some(y)) => {
                j += 1;
                (None, Some(y))
            }
            (None, None) => break,
        };
        let Some(x) = pa.map(key).or(pb.map(key)) else {
            break;
        };
        let a_thd = pa.and_then(|s| s.figure_pct());
        let b_thd = pb.and_then(|s| s.figure_pct());
        let mut harmonics_diff_db = BTreeMap::new();
        if let (Some(p), Some(q)) = (pa, pb) {
            for (order, la) in &p.harmonics_dbc {
                if let (Some(la), Some(Some(lb))) = (la, q.harmonics_dbc.get(order)) {
                    harmonics_diff_db.insert(*order, lb - la);
                }
            }
        }
        rows.push(SweepRow {
            drive_dbfs: (kind == SweepKind::Level).then_some(x),
            frequency_hz: (kind == SweepKind::Frequency).then_some(x),
            a_thd_pct: a_thd,
            b_thd_pct: b_thd,
            thd_diff_db: diff(
                a_thd.filter(|t| *t > 0.0).map(thd_db_of),
                b_thd.filter(|t| *t > 0.0).map(thd_db_of),
            ),
            a_return_dbfs: pa.and_then(|s| s.return_dbfs),
            b_return_dbfs: pb.and_then(|s| s.return_dbfs),
            harmonics_diff_db,
        });
    }
    rows
}

/// Compare two sweeps of one kind.
pub fn compare_sweeps(a: &Sweep, b: &Sweep) -> Result<SweepComparison, CompareError> {
    let kind = a.report.kind;
    if b.report.kind != kind {
        let (level, frequency) = if kind == SweepKind::Level {
            (&a.file, &b.file)
        } else {
            (&b.file, &a.file)
        };
        return Err(CompareError::SweepKinds {
            level: level.clone(),
            frequency: frequency.clone(),
        });
    }
    let threshold = a.report.onset_threshold_pct;
    let sa = sweep_summary(a, threshold);
    let sb = sweep_summary(b, threshold);
    let (onset_drive_diff_db, onset_return_diff_db) = match (&sa.onset, &sb.onset) {
        (OnsetState::At(oa), OnsetState::At(ob)) => (
            Some(ob.drive_dbfs - oa.drive_dbfs),
            diff(oa.return_dbfs, ob.return_dbfs),
        ),
        _ => (None, None),
    };
    let imd = |r: &SweepReport| r.steps.iter().any(|s| s.imd_pct.is_some());
    let figure = match (imd(&a.report), imd(&b.report)) {
        (true, true) => "IMD",
        (false, false) => "THD",
        _ => "THD or IMD",
    };
    let mut c = SweepComparison {
        sweep: kind,
        figure,
        onset_threshold_pct: threshold,
        rows: align(&a.report, &b.report, kind),
        a: sa,
        b: sb,
        onset_drive_diff_db,
        onset_return_diff_db,
        findings: Vec::new(),
    };
    c.findings = match kind {
        SweepKind::Level => level_findings(&c, b.report.onset_threshold_pct),
        SweepKind::Frequency => frequency_findings(&c),
    };
    if imd(&a.report) != imd(&b.report) {
        let (two, one) = if imd(&a.report) {
            ("A", "B")
        } else {
            ("B", "A")
        };
        c.findings.insert(
            0,
            format!("{two} is a two-tone sweep (IMD) and {one} a sine sweep (THD): the figures differ in kind"),
        );
    }
    Ok(c)
}

fn level_findings(c: &SweepComparison, b_threshold: f64) -> Vec<String> {
    let t = pct(c.onset_threshold_pct);
    let fig = c.figure;
    let mut lines = Vec::new();
    if (b_threshold - c.onset_threshold_pct).abs() > 1e-9 {
        lines.push(format!(
            "B's document uses a {} threshold; both onsets here are taken at A's {t}",
            pct(b_threshold)
        ));
    }
    // Which clips earlier. Rank: crossing below the sweep < crossing at a drive < never.
    use OnsetState::*;
    let line = match (&c.a.onset, &c.b.onset) {
        (At(oa), At(ob)) => {
            let d = ob.drive_dbfs - oa.drive_dbfs;
            if d.abs() < ONSET_ALIKE_DB {
                format!(
                    "A and B clip at about the same drive: {fig} reaches {t} at {} and {} dBFS",
                    plain(oa.drive_dbfs, 1),
                    plain(ob.drive_dbfs, 1)
                )
            } else {
                let (early, late, oe, ol) = if d > 0.0 {
                    ("A", "B", oa, ob)
                } else {
                    ("B", "A", ob, oa)
                };
                let mut s = format!(
                    "{early} clips earlier: {fig} reaches {t} at {} dBFS of drive against {} dBFS for {late}, {} dB less drive",
                    plain(oe.drive_dbfs, 1),
                    plain(ol.drive_dbfs, 1),
                    plain(d.abs(), 1)
                );
                if let (Some(re), Some(rl)) = (oe.return_dbfs, ol.return_dbfs) {
                    let dr = rl - re;
                    let _ = write!(
                        s,
                        "; returned level {} dBFS against {} dBFS, {} dB {}",
                        plain(re, 1),
                        plain(rl, 1),
                        plain(dr.abs(), 1),
                        if dr >= 0.0 { "lower" } else { "higher" }
                    );
                }
                s
            }
        }
        (At(o), Never { highest_drive_dbfs }) | (Never { highest_drive_dbfs }, At(o)) => {
            let (early, late) = if matches!(c.a.onset, At(_)) {
                ("A", "B")
            } else {
                ("B", "A")
            };
            format!(
                "{early} clips earlier: {fig} reaches {t} at {} dBFS of drive; {late} stays below {t} up to {} dBFS, at least {} dB more drive",
                plain(o.drive_dbfs, 1),
                plain(*highest_drive_dbfs, 1),
                plain(highest_drive_dbfs - o.drive_dbfs, 1)
            )
        }
        (BelowSweep { lowest_drive_dbfs }, At(o)) | (At(o), BelowSweep { lowest_drive_dbfs }) => {
            let (early, late) = if matches!(c.a.onset, BelowSweep { .. }) {
                ("A", "B")
            } else {
                ("B", "A")
            };
            format!(
                "{early} clips earlier: it is above {t} {fig} already at its lowest drive, {} dBFS; {late} reaches {t} at {} dBFS",
                plain(*lowest_drive_dbfs, 1),
                plain(o.drive_dbfs, 1)
            )
        }
        (BelowSweep { lowest_drive_dbfs }, Never { highest_drive_dbfs })
        | (Never { highest_drive_dbfs }, BelowSweep { lowest_drive_dbfs }) => {
            let (early, late) = if matches!(c.a.onset, BelowSweep { .. }) {
                ("A", "B")
            } else {
                ("B", "A")
            };
            format!(
                "{early} clips earlier: it is above {t} {fig} already at {} dBFS of drive; {late} stays below {t} up to {} dBFS",
                plain(*lowest_drive_dbfs, 1),
                plain(*highest_drive_dbfs, 1)
            )
        }
        (BelowSweep { .. }, BelowSweep { .. }) => format!(
            "both are above {t} {fig} already at their lowest drive: the sweeps start too high to tell which clips earlier"
        ),
        (Never { .. }, Never { .. }) => format!(
            "neither reaches {t} {fig} within its sweep (A up to {} dBFS, B up to {} dBFS)",
            plain(c.a.max_drive(), 1),
            plain(c.b.max_drive(), 1)
        ),
        (Unknown, _) | (_, Unknown) => {
            "cannot tell which clips earlier: a sweep has no {fig} readings".to_string()
        }
    };
    lines.push(line);
    // Knees.
    let knee = |k: &Option<Knee>| match k {
        Some(k) => format!("{} dBFS", plain(k.drive_dbfs, 1)),
        None => "none".to_string(),
    };
    lines.push(format!(
        "knee ({fig} rising faster than {} dB per dB of drive): A {}, B {}",
        crate::sweep::report::KNEE_SLOPE,
        knee(&c.a.knee),
        knee(&c.b.knee)
    ));
    // Which more abruptly.
    match (c.a.steepest_db_per_db, c.b.steepest_db_per_db) {
        (Some(sa), Some(sb)) => {
            if (sb - sa).abs() < ABRUPT_ALIKE_DB_PER_DB {
                lines.push(format!(
                    "both clip about as abruptly: {fig} rises at most {} and {} dB per dB of drive",
                    plain(sa, 1),
                    plain(sb, 1)
                ));
            } else {
                let (abrupt, gentle, qa, qg) = if sb > sa {
                    ("B", "A", sb, sa)
                } else {
                    ("A", "B", sa, sb)
                };
                lines.push(format!(
                    "{abrupt} clips more abruptly: {fig} rises up to {} dB per dB of drive against {} for {gentle}",
                    plain(qa, 1),
                    plain(qg, 1)
                ));
            }
        }
        _ => lines.push(
            "cannot tell which clips more abruptly: a sweep has fewer than two {fig} readings above the floor"
                .to_string(),
        ),
    }
    if let (Some(ga), Some(gb)) = (c.a.loop_gain_db, c.b.loop_gain_db) {
        lines.push(format!(
            "loop gain at the lowest drive: A {} dB, B {} dB",
            signed(ga, 1),
            signed(gb, 1)
        ));
    }
    lines
}

impl SweepSummary {
    fn max_drive(&self) -> f64 {
        match self.onset {
            OnsetState::Never { highest_drive_dbfs } => highest_drive_dbfs,
            _ => f64::NAN,
        }
    }
}

fn frequency_findings(c: &SweepComparison) -> Vec<String> {
    let fig = c.figure;
    let mut lines = Vec::new();
    let shared: Vec<(f64, f64)> = c
        .rows
        .iter()
        .filter_map(|r| Some((r.frequency_hz?, r.thd_diff_db?)))
        .collect();
    if shared.is_empty() {
        lines.push(format!(
            "A and B share no frequency with a {fig} reading on both"
        ));
    } else {
        let mean = shared.iter().map(|s| s.1).sum::<f64>() / shared.len() as f64;
        let lo = shared.first().map_or(0.0, |s| s.0);
        let hi = shared.last().map_or(0.0, |s| s.0);
        if mean.abs() < THD_ALIKE_DB {
            lines.push(format!(
                "A and B have about the same {fig} from {} to {} (B {} dB on average)",
                hz(lo),
                hz(hi),
                signed(mean, 1)
            ));
        } else {
            let more = if mean > 0.0 { "B" } else { "A" };
            lines.push(format!(
                "{more} has more {fig} from {} to {}: {} dB on average",
                hz(lo),
                hz(hi),
                plain(mean.abs(), 1)
            ));
        }
        if let Some(&(f, d)) = shared.iter().max_by(|x, y| x.1.abs().total_cmp(&y.1.abs())) {
            lines.push(format!(
                "largest difference at {}: B {} dB",
                hz(f),
                signed(d, 1)
            ));
        }
    }
    for (name, col) in [("A", 0), ("B", 1)] {
        let worst = c
            .rows
            .iter()
            .filter_map(|r| {
                let t = if col == 0 { r.a_thd_pct } else { r.b_thd_pct };
                Some((r.frequency_hz?, t?))
            })
            .max_by(|x, y| x.1.total_cmp(&y.1));
        if let Some((f, t)) = worst {
            lines.push(format!(
                "{name}'s {fig} is highest at {}: {}",
                hz(f),
                pct(t)
            ));
        }
    }
    lines
}

#[cfg(test)]
pub(crate) mod tests {
    use super::super::words::pct_db;
    use super::*;
    use crate::sweep::report::{SweepStep, SWEEP_FORMAT};

    /// A level-sweep step built from its JSON form, so the test reads like a `brink-sweep-1`
    /// document (and keys added to the format later need no change here).
    pub(crate) fn step(drive: f64, thd: f64) -> SweepStep {
        serde_json::from_value(serde_json::json!({
            "drive_dbfs": drive, "frequency_hz": 997.0, "return_dbfs": drive - 1.0,
            "return_hz": 997.0, "return_peak_dbfs": drive - 1.0, "thd_pct": thd,
            "thd_n_db": null, "odd_even_db": null, "falloff_db_per_octave": null,
            "harmonics_dbc": {"3": pct_db(thd)}
        }))
        .expect("a sweep step")
    }

    pub(crate) fn sweep(name: &str, steps: Vec<SweepStep>) -> Sweep {
        let report = serde_json::from_value(serde_json::json!({
            "format": SWEEP_FORMAT, "kind": "level", "frequency_hz": 997.0, "drive_dbfs": null,
            "sample_rate_hz": 48000, "host": "test", "output_device": "out", "output_channel": 1,
            "input_device": "in", "input_channel": 1, "onset_threshold_pct": 1.0,
            "loop_gain_db": onset::loop_gain(&steps), "onset": onset::onset(&steps, 1.0),
            "knee": onset::knee(&steps), "steps": steps
        }))
        .expect("a sweep report");
        Sweep {
            file: name.to_string(),
            report,
        }
    }

    /// THD 0.1 % → 10 % across one 10 dB step crosses 1 % half way on a dB scale (the onset's
    /// interpolation, sweep/onset.rs): A at −15, B (the same curve 4 dB later) at −11 dBFS.
    #[test]
    fn sweeps_align_by_drive_and_name_the_earlier_clipper() {
        let a = sweep(
            "a.json",
            vec![step(-30.0, 0.05), step(-20.0, 0.1), step(-10.0, 10.0)],
        );
        let b = sweep(
            "b.json",
            vec![
                step(-26.0, 0.05),
                step(-20.0, 0.08),
                step(-16.0, 0.1),
                step(-6.0, 10.0),
            ],
        );
        let c = compare_sweeps(&a, &b).expect("same kind");
        let drives: Vec<f64> = c.rows.iter().filter_map(|r| r.drive_dbfs).collect();
        assert_eq!(drives, vec![-30.0, -26.0, -20.0, -16.0, -10.0, -6.0]);
        let shared = &c.rows[2];
        assert_eq!(
            (shared.a_thd_pct, shared.b_thd_pct),
            (Some(0.1), Some(0.08))
        );
        // 20·log10(0.08/0.1) = −1.938 dB, the same for H3.
        assert!((shared.thd_diff_db.expect("both") + 1.9382).abs() < 1e-3);
        assert!((shared.harmonics_diff_db[&3] + 1.9382).abs() < 1e-3);
        assert!((c.onset_drive_diff_db.expect("both cross") - 4.0).abs() < 1e-9);
        let text = c.findings.join("\n");
        assert!(
            text.contains("A clips earlier: THD reaches 1.00 % at -15.0 dBFS of drive against -11.0 dBFS for B, 4.0 dB less drive; returned level -16.0 dBFS against -12.0 dBFS, 4.0 dB lower"),
            "{text}"
        );
    }

    #[test]
    fn sweep_that_never_crosses_and_abruptness() {
        // A: gentle (1 dB/dB); B: a hard knee (THD +30 dB over 2 dB of drive: 15 dB/dB).
        let a = sweep(
            "a.json",
            (0..6)
                .map(|i| {
                    let d = -30.0 + 4.0 * f64::from(i);
                    step(d, 0.01 * 10f64.powf((d + 30.0) / 20.0))
                })
                .collect(),
        );
        let b = sweep(
            "b.json",
            vec![
                step(-30.0, 0.02),
                step(-12.0, 0.05),
                step(-10.0, 1.58),
                step(-8.0, 5.0),
            ],
        );
        let c = compare_sweeps(&a, &b).expect("same kind");
        assert!(
            matches!(c.a.onset, OnsetState::Never { highest_drive_dbfs } if highest_drive_dbfs == -10.0)
        );
        let text = c.findings.join("\n");
        assert!(text.contains("B clips earlier"), "{text}");
        assert!(
            text.contains("A stays below 1.00 % up to -10.0 dBFS"),
            "{text}"
        );
        assert!(
            // 20·log10(1.58/0.05) = 30.0 dB over 2 dB; A's curve rises 1 dB per dB.
            text.contains(
                "B clips more abruptly: THD rises up to 15.0 dB per dB of drive against 1.0 for A"
            ),
            "{text}"
        );
    }
}
