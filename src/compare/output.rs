//! The comparison written out: the readable tables with the plain-words lines, or one
//! `brink-compare-1` JSON document.

use std::io::{self, Write};

use serde::Serialize;

use super::fingerprint::{FingerprintComparison, FingerprintSummary};
use super::sweep::{OnsetState, SweepComparison, SweepSummary};
use super::words::{hz, opt, pct, plain, NONE};
use super::{Comparison, COMPARE_FORMAT};
use crate::sweep::report::SweepKind;

#[derive(Serialize)]
struct Document<'a> {
    format: &'static str,
    #[serde(flatten)]
    comparison: &'a Comparison,
}

/// The comparison as one JSON document (format [`COMPARE_FORMAT`]), one line.
pub fn write_json<W: Write>(w: &mut W, c: &Comparison) -> io::Result<()> {
    crate::sink::json::write_line(
        w,
        &Document {
            format: COMPARE_FORMAT,
            comparison: c,
        },
    )
}

/// The readable comparison: a table and the plain-words lines.
pub fn write_text<W: Write>(w: &mut W, c: &Comparison) -> io::Result<()> {
    match c {
        Comparison::Fingerprints(f) => write_fingerprints(w, f),
        Comparison::Sweeps(s) => write_sweeps(w, s),
    }
}

fn side_line(s: &FingerprintSummary) -> String {
    format!(
        "{} ch {} ({}): {} Hz at {} dBFS",
        s.file,
        s.channel,
        s.source.words(),
        plain(s.fundamental_hz, 2),
        opt(s.fundamental_dbfs, 2, false)
    )
}

fn write_fingerprints<W: Write>(w: &mut W, c: &FingerprintComparison) -> io::Result<()> {
    writeln!(w, "A: {}", side_line(&c.a))?;
    writeln!(w, "B: {}", side_line(&c.b))?;
    writeln!(w)?;
    writeln!(
        w,
        "             A          B       B-A   (dBc; ~ within 10 dB of the noise floor)"
    )?;
    for h in &c.harmonics {
        let cell = |v: Option<f64>, r: Option<bool>| {
            let mark = if r == Some(false) { "~" } else { " " };
            format!("{}{mark}", opt(v, 2, false))
        };
        writeln!(
            w,
            "{:<9} {:>10} {:>10} {:>9}",
            format!("H{} {}", h.order, h.parity),
            cell(h.a_dbc, h.a_resolved),
            cell(h.b_dbc, h.b_resolved),
            opt(h.diff_db, 2, true)
        )?;
    }
    let row = |w: &mut W, name: &str, a: Option<f64>, b: Option<f64>, d: Option<f64>, p: usize| {
        writeln!(
            w,
            "{:<9} {:>9}  {:>9}  {:>9}",
            name,
            opt(a, p, false),
            opt(b, p, false),
            opt(d, 2, true)
        )
    };
    writeln!(w)?;
    row(w, "THD %", c.a.thd_pct, c.b.thd_pct, None, 4)?;
    row(w, "THD dB", c.a.thd_db, c.b.thd_db, c.thd_diff_db, 2)?;
    row(
        w,
        "THD+N dB",
        c.a.thd_n_db,
        c.b.thd_n_db,
        c.thd_n_diff_db,
        2,
    )?;
    writeln!(
        w,
        "{:<9} {:>9}  {:>9}  {:>9}   (dB; positive = even-rich)",
        "odd/even",
        opt(c.a.odd_even_db, 1, true),
        opt(c.b.odd_even_db, 1, true),
        opt(c.odd_even_diff_db, 1, true)
    )?;
    writeln!(
        w,
        "{:<9} {:>9}  {:>9}  {:>9}   (dB per octave of order)",
        "fall-off",
        opt(c.a.falloff_db_per_octave, 1, false),
        opt(c.b.falloff_db_per_octave, 1, false),
        opt(c.falloff_diff_db_per_octave, 1, true)
    )?;
    write_findings(w, &c.findings)
}

fn write_findings<W: Write>(w: &mut W, findings: &[String]) -> io::Result<()> {
    writeln!(w)?;
    writeln!(w, "In plain words:")?;
    for f in findings {
        writeln!(w, "  {f}")?;
    }
    Ok(())
}

fn onset_words(o: &OnsetState) -> String {
    match o {
        OnsetState::At(o) => match o.return_dbfs {
            Some(r) => format!(
                "{} dBFS drive (return {} dBFS)",
                plain(o.drive_dbfs, 2),
                plain(r, 2)
            ),
            None => format!("{} dBFS drive", plain(o.drive_dbfs, 2)),
        },
        OnsetState::BelowSweep { lowest_drive_dbfs } => {
            format!(
                "below the sweep (over at {} dBFS)",
                plain(*lowest_drive_dbfs, 1)
            )
        }
        OnsetState::Never { highest_drive_dbfs } => {
            format!("not reached up to {} dBFS", plain(*highest_drive_dbfs, 1))
        }
        OnsetState::Unknown => NONE.to_string(),
    }
}

fn write_sweeps<W: Write>(w: &mut W, c: &SweepComparison) -> io::Result<()> {
    let describe = |s: &SweepSummary| match c.sweep {
        SweepKind::Level => format!(
            "{}, level sweep at {}, {} steps",
            s.file,
            s.frequency_hz.map_or(NONE.to_string(), hz),
            s.steps
        ),
        SweepKind::Frequency => format!(
            "{}, frequency sweep at {} dBFS drive, {} steps",
            s.file,
            opt(s.drive_dbfs, 1, false),
            s.steps
        ),
    };
    writeln!(w, "A: {}", describe(&c.a))?;
    writeln!(w, "B: {}", describe(&c.b))?;
    writeln!(w)?;
    let x_head = match c.sweep {
        SweepKind::Level => "drive dBFS",
        SweepKind::Frequency => "   freq Hz",
    };
    let fig = c.figure.split(' ').next().unwrap_or("THD");
    writeln!(
        w,
        "{x_head}  {:>9}  {:>9}   B-A dB   A return   B return   (return in dBFS)",
        format!("A {fig} %"),
        format!("B {fig} %")
    )?;
    for r in &c.rows {
        let x = match c.sweep {
            SweepKind::Level => opt(r.drive_dbfs, 2, false),
            SweepKind::Frequency => opt(r.frequency_hz, 1, false),
        };
        writeln!(
            w,
            "{:>10} {:>10} {:>10} {:>8} {:>10} {:>10}",
            x,
            opt(r.a_thd_pct, 4, false),
            opt(r.b_thd_pct, 4, false),
            opt(r.thd_diff_db, 2, true),
            opt(r.a_return_dbfs, 2, false),
            opt(r.b_return_dbfs, 2, false)
        )?;
    }
    if c.sweep == SweepKind::Level {
        writeln!(w)?;
        writeln!(w, "onset ({} {}):", c.figure, pct(c.onset_threshold_pct))?;
        writeln!(w, "  A {}", onset_words(&c.a.onset))?;
        writeln!(w, "  B {}", onset_words(&c.b.onset))?;
        let knee = |s: &SweepSummary| match s.knee {
            Some(k) => format!(
                "{} dBFS drive, THD {}; steepest rise {} dB/dB",
                plain(k.drive_dbfs, 2),
                k.thd_pct.map_or(NONE.to_string(), pct),
                plain(k.steepest_db_per_db, 1)
            ),
            None => format!(
                "none; steepest rise {} dB/dB",
                opt(s.steepest_db_per_db, 1, false)
            ),
        };
        writeln!(w, "knee:")?;
        writeln!(w, "  A {}", knee(&c.a))?;
        writeln!(w, "  B {}", knee(&c.b))?;
    }
    write_findings(w, &c.findings)
}
