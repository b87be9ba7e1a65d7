//! The sweep (`brink sweep`): a stimulus out through an interface's output, the return measured on
//! an input, the drive (or the frequency) stepped; the clipping onset and knee found from the steps.
//!
//! [`stimulus`] makes and plays the tone, [`rig`] is the loop as the sweep sees it, [`run`]
//! steps and measures, [`onset`] reads the steps, [`report`] is the `brink-sweep-1` document.
//! Here: opening the real loop ([`open_rig`]) and the step table and summary as text. The
//! command's arguments and their validation into a [`Validated`] plan are in `cmd::sweep`.

pub mod onset;
pub mod report;
pub mod rig;
pub mod run;
pub mod stimulus;

use std::io::{self, Write};
use std::sync::atomic::AtomicBool;
use std::sync::Arc;

use crate::analysis::character;
use crate::live::{capture, devices, ring};
use report::{SweepKind, SweepReport, SweepStep};
use rig::CpalRig;
use run::{Stimulus, SweepPlan, STEP_MAX_ORDER};
use stimulus::{Control, Player};

/// What the sweep says before it plays anything.
pub const CAUTION: &str = "\
CAUTION: brink sweep plays a test tone on {OUTPUT}, rising to {TOP} dBFS.
  - Turn monitors and headphones on this output down before you start; a test tone at full
    level can damage hearing and tweeters.
  - Never connect a power amplifier's output straight to a line input: put an attenuator or a
    dummy load rated for the power between them.
  - Valve (tube) amplifiers hold lethal voltages inside, even unplugged; leave work inside the
    chassis to qualified people and follow your local electrical codes and practice.
  - Ctrl-C stops the tone at once (it fades out in 50 ms).";

/// A validated sweep: the plan and where it plays.
#[derive(Debug, Clone, PartialEq)]
pub struct Validated {
    /// The plan.
    pub plan: SweepPlan,
    /// Level or frequency sweep.
    pub kind: SweepKind,
    /// The highest drive played (dBFS).
    pub top_dbfs: f64,
    /// Onset threshold (%).
    pub onset_pct: f64,
}

/// Log-spaced frequencies from `lo` to `hi`, `per_octave` to the octave, both ends included.
pub fn log_spaced(lo: f64, hi: f64, per_octave: u16) -> Vec<f64> {
    let octaves = (hi / lo).log2();
    let n = (octaves * f64::from(per_octave)).round().max(1.0) as usize;
    (0..=n)
        .map(|i| lo * (hi / lo).powf(i as f64 / n as f64))
        .collect()
}

/// Where the sweep plays, once the devices are open.
#[derive(Debug, Clone, PartialEq)]
pub struct Place {
    /// The host's id.
    pub host: String,
    /// The output device's name.
    pub output: String,
    /// The input device's name.
    pub input: String,
    /// The sample rate of both (Hz).
    pub rate: u32,
}

/// The devices and channels a sweep asks for, as given (`None`: the host's default).
#[derive(Debug, Clone, PartialEq)]
pub struct Wiring {
    /// Audio host.
    pub host: Option<String>,
    /// Output device that plays the stimulus.
    pub output: Option<String>,
    /// Input device the return comes back on.
    pub input: Option<String>,
    /// Output channel that plays the stimulus (from 1).
    pub output_channel: u16,
    /// Input channel measured (from 1).
    pub input_channel: u16,
    /// Sample rate for both devices [default: the output's preferred rate].
    pub rate: Option<u32>,
}

/// Find the devices, print the caution, open both streams; the output starts on the wave of
/// the first step (`first_freq` when there is none). Errors: (message, exit code).
pub fn open_rig<E: Write>(
    args: &Wiring,
    v: &Validated,
    first_freq: f64,
    interrupt: Arc<AtomicBool>,
    err: &mut E,
) -> Result<(CpalRig, Place), (String, u8)> {
    let usage = |e: capture::CaptureError| (e.to_string(), crate::EXIT_USAGE);
    let host = devices::find_host(args.host.as_deref()).map_err(usage)?;
    let out_dev = devices::find_output(&host, args.output.as_deref()).map_err(usage)?;
    let in_dev = devices::find_input(&host, args.input.as_deref()).map_err(usage)?;
    use cpal::traits::DeviceTrait;
    let rate = match args.rate {
        Some(r) => r,
        None => out_dev
            .default_output_config()
            .map(|c| c.sample_rate())
            .map_err(|e| {
                (
                    format!(
                        "output '{}' gives no preferred rate ({e}): check that it is there \
                         (`brink devices`), or give --rate",
                        capture::device_name(&out_dev)
                    ),
                    crate::EXIT_USAGE,
                )
            })?,
    };
    // Before any stream is opened (or the caution printed): every tone must fit the rate.
    if let Some(f) = v
        .plan
        .steps
        .iter()
        .map(|s| s.1)
        .find(|&f| f >= f64::from(rate) / 2.0)
    {
        return Err((
            format!("{f:.0} Hz is not below Nyquist at {rate} Hz"),
            crate::EXIT_USAGE,
        ));
    }
    let info = capture::probe_input(&in_dev, Some(rate)).map_err(usage)?;
    let in_ch = usize::from(args.input_channel);
    if in_ch > info.channels {
        return Err((
            format!(
                "input channel {in_ch} is not on '{}' (it has {})",
                info.device, info.channels
            ),
            crate::EXIT_USAGE,
        ));
    }
    let (writer, reader) = ring::ring(info.channels, rate as usize * 2);
    let (in_tx, in_rx) = crossbeam_channel::bounded(8);
    let (capture, info) = capture::open_input(&in_dev, Some(rate), writer, in_tx)
        .map_err(|e| (e.to_string(), crate::EXIT_FILE_ERROR))?;
    capture
        .play()
        .map_err(|e| (e.to_string(), crate::EXIT_FILE_ERROR))?;
    let output_name = capture::device_name(&out_dev);
    let _ = writeln!(
        err,
        "{}",
        CAUTION
            .replace(
                "{OUTPUT}",
                &format!("'{output_name}' channel {}", args.output_channel)
            )
            .replace("{TOP}", &format!("{:.1}", v.top_dbfs))
    );
    let control = Control::new(run::wave_of(v.plan.stimulus, first_freq));
    let (out_tx, out_rx) = crossbeam_channel::bounded(8);
    let player = Player::open(
        &out_dev,
        rate,
        usize::from(args.output_channel),
        Arc::clone(&control),
        out_tx,
    )
    .map_err(|e| (e.to_string(), crate::EXIT_FILE_ERROR))?;
    let place = Place {
        host: host.id().to_string(),
        output: player.device.clone(),
        input: info.device.clone(),
        rate,
    };
    Ok((
        CpalRig {
            output_faults: out_rx,
            input_faults: in_rx,
            player: Some(player),
            control,
            capture,
            reader,
            input_channel: in_ch - 1,
            interrupt,
            block: Vec::new(),
        },
        place,
    ))
}

/// What the sweep is and where it plays, then the head of the step table.
pub fn header_lines(v: &Validated, place: &Place) -> String {
    let what = match (v.kind, v.plan.stimulus) {
        (SweepKind::Frequency, _) => format!(
            "frequency sweep at {:.1} dBFS, {} points",
            v.top_dbfs,
            v.plan.steps.len()
        ),
        (SweepKind::Level, Stimulus::Sine) => format!(
            "level sweep at {} Hz, {} steps up to {:.1} dBFS",
            v.plan.steps.first().map_or(0.0, |s| s.1),
            v.plan.steps.len(),
            v.top_dbfs
        ),
        (
            SweepKind::Level,
            Stimulus::Pair {
                method,
                f1,
                f2,
                ratio,
            },
        ) => format!(
            "{} IMD sweep, {f1} Hz + {f2} Hz at {ratio}:1, {} steps up to {:.1} dBFS",
            method.name(),
            v.plan.steps.len(),
            v.top_dbfs
        ),
    };
    let mut s = format!(
        "brink sweep: {what}\n  out: '{}'  in: '{}' channel {}  host {} at {} Hz\n",
        place.output, place.input, v.plan.input_channel, place.host, place.rate
    );
    s.push_str(&table_head(v.plan.stimulus));
    s
}

fn table_head(stimulus: Stimulus) -> String {
    match stimulus {
        Stimulus::Sine => {
            let mut s = format!(
                "{:>7} {:>9} {:>7} {:>9} {:>7} {:>8} {:>8}",
                "drive", "freq", "return", "THD", "THD+N", "odd/ev", "fall"
            );
            for k in 2..=STEP_MAX_ORDER {
                s.push_str(&format!(" {:>6}", format!("H{k}")));
            }
            s.push('\n');
            s.push_str(&format!(
                "{:>7} {:>9} {:>7} {:>9} {:>7} {:>8} {:>8}",
                "dBFS", "Hz", "dBFS", "%", "dB", "dB", "dB/oct"
            ));
            for _ in 2..=STEP_MAX_ORDER {
                s.push_str(&format!(" {:>6}", "dBc"));
            }
            s.push('\n');
            s
        }
        Stimulus::Pair { .. } => format!(
            "{:>7} {:>7} {:>9} {:>7}\n{:>7} {:>7} {:>9} {:>7}\n",
            "drive", "return", "IMD", "IMD", "dBFS", "dBFS", "%", "dB"
        ),
    }
}

fn opt(v: Option<f64>, width: usize, prec: usize) -> String {
    match v {
        Some(x) => format!("{x:>width$.prec$}"),
        None => format!("{:>width$}", "-"),
    }
}

/// A THD in % with enough digits to read small values.
fn pct(v: Option<f64>, width: usize) -> String {
    match v {
        Some(x) if x < 0.001 => format!("{x:>width$.1e}"),
        Some(x) if x < 0.01 => format!("{x:>width$.5}"),
        Some(x) if x < 1.0 => format!("{x:>width$.4}"),
        Some(x) => format!("{x:>width$.2}"),
        None => format!("{:>width$}", "-"),
    }
}

/// One table line for a step.
pub fn step_line(s: &SweepStep) -> String {
    if s.imd_pct.is_some() {
        return format!(
            "{:>7.1} {} {} {}",
            s.drive_dbfs,
            opt(s.return_dbfs, 7, 2),
            pct(s.imd_pct, 9),
            opt(s.imd_db, 7, 1)
        );
    }
    let mut line = format!(
        "{:>7} {:>9.1} {} {} {} {} {}",
        if s.refined {
            format!("{:.2}*", s.drive_dbfs)
        } else {
            format!("{:.1}", s.drive_dbfs)
        },
        s.frequency_hz,
        opt(s.return_dbfs, 7, 2),
        pct(s.thd_pct, 9),
        opt(s.thd_n_db, 7, 1),
        opt(s.odd_even_db, 8, 1),
        opt(s.falloff_db_per_octave, 8, 1)
    );
    for k in 2..=STEP_MAX_ORDER as u32 {
        line.push(' ');
        line.push_str(&opt(s.harmonics_dbc.get(&k).copied().flatten(), 6, 1));
    }
    line
}

/// The lines after the table.
pub fn write_summary<W: Write>(out: &mut W, r: &SweepReport) -> io::Result<()> {
    if let Some(g) = r.loop_gain_db {
        writeln!(out, "loop gain (return - drive, lowest step): {g:+.2} dB")?;
    }
    let figure = if r.steps.iter().any(|s| s.imd_pct.is_some()) {
        "IMD"
    } else {
        "THD"
    };
    if r.kind == SweepKind::Level {
        match &r.onset {
            Some(o) => writeln!(
                out,
                "onset ({figure} {} %): drive {:.2} dBFS, return {} dBFS",
                o.thd_pct,
                o.drive_dbfs,
                o.return_dbfs.map_or("-".into(), |v| format!("{v:.2}"))
            )?,
            None => {
                let first = r.steps.first().and_then(SweepStep::figure_pct);
                if first.is_some_and(|t| t >= r.onset_threshold_pct) {
                    writeln!(
                        out,
                        "onset ({figure} {} %): already above it at the first step; start lower",
                        r.onset_threshold_pct
                    )?;
                } else {
                    writeln!(
                        out,
                        "onset ({figure} {} %): not reached up to the highest drive",
                        r.onset_threshold_pct
                    )?;
                }
            }
        }
        match &r.knee {
            Some(k) => writeln!(
                out,
                "knee: drive {:.2} dBFS ({figure} {}), steepest rise {:.1} dB per dB of drive",
                k.drive_dbfs,
                pct(k.thd_pct, 0).trim(),
                k.steepest_db_per_db
            )?,
            None => writeln!(
                out,
                "knee: none ({figure} never rose faster than 3 dB per dB)"
            )?,
        }
    }
    if let Some(last) = r.steps.last().filter(|s| s.imd_pct.is_none()) {
        writeln!(
            out,
            "character at the last step: {}",
            character::describe(last.thd_pct, last.odd_even_db, last.falloff_db_per_octave)
        )?;
    }
    Ok(())
}
