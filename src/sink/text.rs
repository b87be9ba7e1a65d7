//! The readable scan report: a table per file.

use std::io::{self, Write};

use crate::analysis::report::{ChannelReport, ScanReport};

/// Placeholder for a reading that has no value (silence, no tone, no clip).
const NONE: &str = "--";

fn opt(v: Option<f64>, prec: usize, signed: bool) -> String {
    // Avoid "-0.00" for values that round to zero.
    let v = v.map(|x| {
        if x.abs() < 0.5 * 10f64.powi(-(prec as i32)) {
            0.0
        } else {
            x
        }
    });
    match v {
        Some(x) if signed => format!("{x:+.prec$}"),
        Some(x) => format!("{x:.prec$}"),
        None => NONE.to_string(),
    }
}

/// Write the readable report of one file.
pub fn write_scan<W: Write>(w: &mut W, r: &ScanReport) -> io::Result<()> {
    writeln!(
        w,
        "{}  ({} Hz, {} ch, {}, {:.3} s)",
        r.file,
        r.sample_rate_hz,
        r.channels.len(),
        r.encoding,
        r.duration_s
    )?;
    writeln!(w)?;
    writeln!(
        w,
        "  ch   peak  true pk      RMS  crest        DC  headroom   overs  flat tops    clipped  first clip"
    )?;
    writeln!(
        w,
        "       dBFS     dBTP     dBFS     dB                  dB                     samples           s"
    )?;
    for c in &r.channels {
        let l = &c.level;
        let k = &c.clipping;
        writeln!(
            w,
            "{:>4} {:>6} {:>8} {:>8} {:>6} {:>9} {:>9} {:>7} {:>10} {:>10} {:>11}",
            c.channel,
            opt(l.sample_peak_dbfs, 2, false),
            opt(l.true_peak_dbtp, 2, true),
            opt(l.rms_dbfs, 2, false),
            opt(l.crest_db, 2, false),
            format!(
                "{:+.5}",
                if l.dc_offset.abs() < 5e-6 {
                    0.0
                } else {
                    l.dc_offset
                }
            ),
            opt(l.headroom_db, 2, false),
            k.overs,
            k.flat_tops,
            k.clipped_samples,
            opt(k.first_clip_s, 3, false),
        )?;
    }
    let clipped: Vec<&ChannelReport> = r
        .channels
        .iter()
        .filter(|c| c.clipping.overs + c.clipping.flat_tops > 0)
        .collect();
    if !clipped.is_empty() {
        writeln!(w)?;
        writeln!(w, "Clipping:")?;
        for c in &clipped {
            let k = &c.clipping;
            let mut line = format!(
                "  ch {}: clip level {} dBFS",
                c.channel,
                opt(k.clip_level_dbfs, 2, true)
            );
            if k.flat_tops > 0 {
                line.push_str(&format!(
                    "; flat tops at {} / {} dBFS (positive / negative side)",
                    opt(k.flat_top_levels_dbfs.positive, 2, true),
                    opt(k.flat_top_levels_dbfs.negative, 2, true)
                ));
                if k.overs == 0 {
                    line.push_str(" -- held below full scale: clipping before the converter");
                }
            }
            writeln!(w, "{line}")?;
        }
        writeln!(w)?;
        writeln!(w, "Clip events (episodes):")?;
        writeln!(
            w,
            "  ch  kind         start s      end s   level dBFS   runs    samples"
        )?;
        for c in &clipped {
            for e in &c.clipping.events {
                writeln!(
                    w,
                    "{:>4}  {:<8} {:>11.4} {:>10.4} {:>12} {:>6} {:>10}",
                    c.channel,
                    e.kind.as_str(),
                    e.start_s,
                    e.end_s,
                    opt(e.level_dbfs, 2, true),
                    e.runs,
                    e.samples
                )?;
            }
            if c.clipping.events_omitted > 0 {
                writeln!(
                    w,
                    "{:>4}  ... {} more episodes not listed",
                    c.channel, c.clipping.events_omitted
                )?;
            }
        }
    }

    let toned: Vec<&ChannelReport> = r
        .channels
        .iter()
        .filter(|c| c.distortion.is_some())
        .collect();
    writeln!(w)?;
    if toned.is_empty() {
        writeln!(w, "Distortion: no channel carries a steady tone.")?;
    } else {
        if let Some(d) = toned.first().and_then(|c| c.distortion.as_ref()) {
            writeln!(
                w,
                "Distortion (span {:.3}-{:.3} s; harmonics within the band; THD+N AES17, SINAD/ENOB IEEE 1241):",
                d.span_start_s, d.span_end_s
            )?;
        }
        writeln!(
            w,
            "  ch       fund Hz    dBFS     THD %  THD dB  THD+N dB  SINAD dB   ENOB  odd/even dB  fall-off dB/oct"
        )?;
        for c in &toned {
            let Some(d) = &c.distortion else { continue };
            writeln!(
                w,
                "{:>4} {:>13.4} {:>7} {:>9} {:>7} {:>9} {:>9} {:>6} {:>12} {:>16}",
                c.channel,
                d.fundamental_hz,
                opt(d.fundamental_dbfs, 2, false),
                opt(d.thd_pct, 4, false),
                opt(d.thd_db, 1, false),
                opt(d.thd_n_db, 1, false),
                opt(d.sinad_db, 1, false),
                opt(d.enob_bits, 2, false),
                opt(d.odd_even_db, 1, true),
                opt(d.falloff_db_per_octave, 1, false),
            )?;
        }
        let max_order = toned
            .iter()
            .filter_map(|c| c.distortion.as_ref())
            .flat_map(|d| d.harmonics.iter().map(|h| h.order))
            .max()
            .unwrap_or(1)
            .min(10);
        if max_order >= 2 {
            writeln!(w)?;
            let mut head = String::from("  ch");
            for n in 2..=max_order {
                head.push_str(&format!("{:>9}", format!("H{n}")));
            }
            writeln!(
                w,
                "{head}   (dBc; odd orders marked o, even e; ~ within 10 dB of the noise floor)"
            )?;
            for c in &toned {
                let Some(d) = &c.distortion else { continue };
                let mut line = format!("{:>4}", c.channel);
                for n in 2..=max_order {
                    let cell = d
                        .harmonics
                        .iter()
                        .find(|h| h.order == n)
                        .map(|h| {
                            let tag = if n % 2 == 0 { 'e' } else { 'o' };
                            let floor = if h.resolved { ' ' } else { '~' };
                            format!("{}{}{}", opt(h.level_dbc, 1, false), tag, floor)
                        })
                        .unwrap_or_else(|| NONE.to_string());
                    line.push_str(&format!("{cell:>9}"));
                }
                writeln!(w, "{line}")?;
            }
        }
    }

    // Intermodulation: only with `scan --imd`, for channels carrying a tone pair.
    let imd: Vec<&ChannelReport> = r.channels.iter().filter(|c| c.imd.is_some()).collect();
    if !imd.is_empty() {
        writeln!(w)?;
        writeln!(
            w,
            "Intermodulation (smpte: sidebands f2 +- n*f1 re f2; twin: f2-f1, 2f1-f2, 2f2-f1 re f1+f2):"
        )?;
        writeln!(
            w,
            "  ch  method       f1 Hz  f1 dBFS        f2 Hz  f2 dBFS  ref        IMD %   IMD dB   d2 dB   d3 dB"
        )?;
        for c in &imd {
            let Some(m) = &c.imd else { continue };
            writeln!(
                w,
                "{:>4}  {:<6} {:>11.4} {:>8} {:>12.4} {:>8}  {:<5} {:>10} {:>8} {:>7} {:>7}",
                c.channel,
                m.method,
                m.f1_hz,
                opt(m.f1_dbfs, 2, false),
                m.f2_hz,
                opt(m.f2_dbfs, 2, false),
                m.reference,
                opt(Some(m.imd_pct), 4, false),
                opt(m.imd_db, 2, false),
                opt(m.d2_db, 2, false),
                opt(m.d3_db, 2, false),
            )?;
        }
        writeln!(w, "  products (dB re the reference):")?;
        for c in &imd {
            let Some(m) = &c.imd else { continue };
            let cells: Vec<String> = m
                .products
                .iter()
                .map(|p| format!("{} {}", p.name, opt(p.level_dbr, 2, false)))
                .collect();
            writeln!(w, "{:>4}  {}", c.channel, cells.join(", "))?;
        }
    }

    if let Some(tl) = &r.timeline {
        writeln!(w)?;
        writeln!(w, "Timeline:")?;
        writeln!(
            w,
            "     t s  ch   peak  true pk     RMS  overs  flat tops       fund Hz     THD %  THD+N dB"
        )?;
        for s in tl {
            for c in &s.channels {
                writeln!(
                    w,
                    "{:>8.3} {:>3} {:>6} {:>8} {:>7} {:>6} {:>10} {:>13} {:>9} {:>9}",
                    s.t_s,
                    c.channel,
                    opt(c.sample_peak_dbfs, 2, false),
                    opt(c.true_peak_dbtp, 2, true),
                    opt(c.rms_dbfs, 2, false),
                    c.overs,
                    c.flat_tops,
                    opt(c.fundamental_hz, 3, false),
                    opt(c.thd_pct, 4, false),
                    opt(c.thd_n_db, 1, false),
                )?;
            }
        }
    }
    writeln!(w)?;
    Ok(())
}
