//! `brink sweep`: a stimulus out through an interface's output, the return measured on an input,
//! the drive (or the frequency) stepped; the clipping onset and knee found from the steps.
//!
//! [`stimulus`] makes and plays the tone, [`rig`] is the loop as the sweep sees it, [`run`]
//! steps and measures, [`onset`] reads the steps, [`report`] is the `brink-sweep-1` document.

pub mod onset;
pub mod report;
pub mod rig;
pub mod run;
pub mod stimulus;

use std::io::{self, Write};
use std::path::PathBuf;
use std::sync::atomic::AtomicBool;
use std::sync::Arc;
use std::time::Duration;

use clap::Args;

use crate::analysis::character;
use crate::dsp::imd::ImdMethod;
use crate::dsp::tone::ToneSettings;
use crate::live::{capture, devices, ring};
use report::{SweepKind, SweepReport, SweepStep, SWEEP_FORMAT};
use rig::CpalRig;
use run::{Stimulus, SweepFailure, SweepPlan, STEP_MAX_ORDER};
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

const AFTER_HELP: &str = "\
A level sweep plays a sine at --freq and raises it from --from to --to dBFS in --step dB; a
frequency sweep (--freqs LO..HI) plays --drive dBFS at log-spaced frequencies. Before the first
step the sweep plays the lowest drive and waits up to --wait for the tone to come back on the
input; with none it stops (\"no signal returns on input N: check the loop\") and never raises the
drive blindly. Each step glides to its level in 50 ms, settles for --settle, then measures
--measure of the return: level, THD, THD+N, H2..H10, odd/even balance, fall-off (as `scan`).
onset   the drive (and returned level) where THD crosses --onset, interpolated between the two
        steps around it on a dB scale; --refine extra steps are played between those two
        once the sweep is done (never above a drive already played)
knee    the first step from which THD rises faster than 3 dB per dB of drive (a curve of
        second or third order rises 1 or 2 dB per dB; faster means clipping has set in), with
        the steepest rise of the sweep
--imd smpte|twin plays a tone pair instead (60 Hz + 7 kHz at 4:1, or 19 + 20 kHz at 1:1, their
peak sum at the drive) and measures IMD per step; the onset then follows IMD.
Drives above -6 dBFS are refused unless --max-drive allows them.";

/// Arguments of `brink sweep`.
#[derive(Debug, Args)]
#[command(after_help = AFTER_HELP)]
pub struct SweepArgs {
    /// Audio host (alsa, jack, ...; `brink devices` lists them) [default: the platform's].
    #[arg(long)]
    pub host: Option<String>,
    /// Output device that plays the stimulus: name, piece of a name, id or number from
    /// `brink devices` [default: the host's default output].
    #[arg(long, value_name = "DEVICE")]
    pub output: Option<String>,
    /// Input device the return comes back on [default: the host's default input].
    #[arg(long, value_name = "DEVICE")]
    pub input: Option<String>,
    /// Output channel that plays the stimulus (from 1); the others stay silent.
    #[arg(long, default_value_t = 1, value_parser = clap::value_parser!(u16).range(1..))]
    pub output_channel: u16,
    /// Input channel measured (from 1).
    #[arg(long, default_value_t = 1, value_parser = clap::value_parser!(u16).range(1..))]
    pub input_channel: u16,
    /// Sample rate for both devices (Hz) [default: the output's preferred rate].
    #[arg(long)]
    pub rate: Option<u32>,
    /// Frequency of a level sweep (Hz).
    #[arg(long, default_value_t = 997.0)]
    pub freq: f64,
    /// Lowest drive (dBFS): where the sweep starts and checks the loop.
    #[arg(long, default_value_t = -40.0, allow_negative_numbers = true)]
    pub from: f64,
    /// Highest drive (dBFS).
    #[arg(long, default_value_t = -6.0, allow_negative_numbers = true)]
    pub to: f64,
    /// Drive step (dB).
    #[arg(long, default_value_t = 1.0)]
    pub step: f64,
    /// Frequency sweep instead: LO..HI in Hz (e.g. 20..20000), log-spaced, at --drive.
    #[arg(long, value_name = "LO..HI", conflicts_with_all = ["freq", "imd"])]
    pub freqs: Option<String>,
    /// Points per octave of a frequency sweep.
    #[arg(long, default_value_t = 3, value_parser = clap::value_parser!(u16).range(1..=48))]
    pub per_octave: u16,
    /// Drive of a frequency sweep (dBFS).
    #[arg(long, default_value_t = -20.0, allow_negative_numbers = true)]
    pub drive: f64,
    /// Highest drive allowed (dBFS); raise it knowingly.
    #[arg(long, default_value_t = -6.0, allow_negative_numbers = true)]
    pub max_drive: f64,
    /// THD threshold of the clipping onset (%).
    #[arg(long, default_value_t = 1.0)]
    pub onset: f64,
    /// Extra steps played at the end between the two steps around the onset, to pin it down
    /// (0: none); they never go above a drive already played.
    #[arg(long, default_value_t = 4, value_parser = clap::value_parser!(u16).range(0..=20))]
    pub refine: u16,
    /// Settling time after each change, once the 50 ms glide has ended (e.g. 300ms).
    #[arg(long, default_value = "300ms", value_parser = crate::gen::parse_duration)]
    pub settle: Duration,
    /// Length of each measurement (at least 40 cycles are taken).
    #[arg(long, default_value = "500ms", value_parser = crate::gen::parse_duration)]
    pub measure: Duration,
    /// How long the loop check waits for the tone to come back.
    #[arg(long, default_value = "5s", value_parser = crate::gen::parse_duration)]
    pub wait: Duration,
    /// Play a tone pair and measure intermodulation: smpte (60 Hz + 7 kHz, 4:1) or twin
    /// (19 + 20 kHz, 1:1).
    #[arg(long, value_name = "METHOD", conflicts_with = "freq")]
    pub imd: Option<ImdMethod>,
    /// Print one `brink-sweep-1` JSON document at the end (the steps go to standard error as
    /// they are measured).
    #[arg(long)]
    pub json: bool,
    /// Also draw the sweep to this SVG file: THD (or IMD) and H2..H5 against drive (or
    /// frequency), onset and knee marked.
    #[arg(long, value_name = "FILE")]
    pub svg: Option<PathBuf>,
}

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

/// Most steps a sweep may have.
pub const MAX_STEPS: usize = 2000;

/// Parse `LO..HI` (Hz).
pub fn parse_range(s: &str) -> Result<(f64, f64), String> {
    let (lo, hi) = s
        .split_once("..")
        .ok_or_else(|| format!("--freqs '{s}': write LO..HI in Hz, e.g. 20..20000"))?;
    let num = |v: &str| {
        v.trim()
            .parse::<f64>()
            .map_err(|_| format!("--freqs '{s}': '{}' is not a number", v.trim()))
    };
    let (lo, hi) = (num(lo)?, num(hi)?);
    if !(lo > 0.0 && hi > lo && hi.is_finite()) {
        return Err(format!("--freqs '{s}': need 0 < LO < HI"));
    }
    Ok((lo, hi))
}

/// Log-spaced frequencies from `lo` to `hi`, `per_octave` to the octave, both ends included.
pub fn log_spaced(lo: f64, hi: f64, per_octave: u16) -> Vec<f64> {
    let octaves = (hi / lo).log2();
    let n = (octaves * f64::from(per_octave)).round().max(1.0) as usize;
    (0..=n)
        .map(|i| lo * (hi / lo).powf(i as f64 / n as f64))
        .collect()
}

impl SweepArgs {
    /// Check the arguments (everything but the devices) and build the plan.
    pub fn validate(&self) -> Result<Validated, String> {
        let finite = |name: &str, v: f64| {
            if v.is_finite() {
                Ok(v)
            } else {
                Err(format!("{name} must be a number"))
            }
        };
        let max_drive = finite("--max-drive", self.max_drive)?;
        if max_drive > 0.0 {
            return Err(format!(
                "--max-drive {max_drive} dBFS: a drive cannot exceed full scale (0 dBFS)"
            ));
        }
        if !(self.onset > 0.0 && self.onset < 100.0) {
            return Err(format!(
                "--onset {}: give a THD in % between 0 and 100",
                self.onset
            ));
        }
        let (kind, steps) = match &self.freqs {
            Some(spec) => {
                let (lo, hi) = parse_range(spec)?;
                let drive = finite("--drive", self.drive)?;
                let f = log_spaced(lo, hi, self.per_octave);
                (
                    SweepKind::Frequency,
                    f.into_iter().map(|f| (drive, f)).collect::<Vec<_>>(),
                )
            }
            None => {
                let (from, to, step) = (
                    finite("--from", self.from)?,
                    finite("--to", self.to)?,
                    finite("--step", self.step)?,
                );
                if from > to {
                    return Err(format!(
                        "--from {from} is above --to {to}: a sweep starts quiet and rises"
                    ));
                }
                if step <= 0.0 {
                    return Err(format!("--step {step}: give a step above 0 dB"));
                }
                let n = ((to - from) / step + 1e-9).floor() as usize + 1;
                if n > MAX_STEPS {
                    return Err(format!(
                        "{n} steps from {from} to {to} dBFS: at most {MAX_STEPS}; take a larger --step"
                    ));
                }
                if !(self.freq > 0.0 && self.freq.is_finite()) {
                    return Err(format!("--freq {}: give a frequency above 0 Hz", self.freq));
                }
                let freq = match self.imd {
                    Some(ImdMethod::Twin) => crate::gen::recipe::DEFAULT_TWIN_HZ.0,
                    Some(_) => crate::gen::recipe::DEFAULT_SMPTE_HZ.0,
                    None => self.freq,
                };
                let drives = (0..n).map(|i| from + step * i as f64);
                (SweepKind::Level, drives.map(|d| (d, freq)).collect())
            }
        };
        let top = steps.iter().map(|s| s.0).fold(f64::MIN, f64::max);
        if top > max_drive {
            return Err(format!(
                "refusing to drive {top} dBFS: above the limit of {max_drive} dBFS; raise \
                 --max-drive only once the loop is known to be safe at that level"
            ));
        }
        let stimulus = match self.imd {
            None => Stimulus::Sine,
            Some(ImdMethod::Auto) => {
                return Err("--imd auto: a sweep must know what to play; use smpte or twin".into())
            }
            Some(method @ ImdMethod::Smpte) => {
                let (f1, f2) = crate::gen::recipe::DEFAULT_SMPTE_HZ;
                Stimulus::Pair {
                    method,
                    f1,
                    f2,
                    ratio: crate::gen::recipe::DEFAULT_SMPTE_RATIO,
                }
            }
            Some(method @ ImdMethod::Twin) => {
                let (f1, f2) = crate::gen::recipe::DEFAULT_TWIN_HZ;
                Stimulus::Pair {
                    method,
                    f1,
                    f2,
                    ratio: 1.0,
                }
            }
        };
        Ok(Validated {
            plan: SweepPlan {
                stimulus,
                steps,
                settle: self.settle,
                measure: self.measure,
                wait_return: self.wait,
                tone: ToneSettings::default(),
                input_channel: usize::from(self.input_channel),
                onset_pct: self.onset,
                refine: if kind == SweepKind::Level {
                    usize::from(self.refine)
                } else {
                    0
                },
            },
            kind,
            top_dbfs: top,
            onset_pct: self.onset,
        })
    }
}

/// Exit status: the sweep ran (or the loop check failed, etc.): see `crate::EXIT_*`.
fn fail<E: Write>(err: &mut E, msg: impl std::fmt::Display, code: u8) -> u8 {
    let _ = writeln!(err, "brink sweep: {msg}");
    code
}

/// Where the sweep plays, once the devices are open.
struct Place {
    host: String,
    output: String,
    input: String,
    rate: u32,
}

/// `brink sweep`.
pub fn run_sweep<W: Write, E: Write>(args: &SweepArgs, out: &mut W, err: &mut E) -> u8 {
    let v = match args.validate() {
        Ok(v) => v,
        Err(msg) => return fail(err, msg, crate::EXIT_USAGE),
    };
    let interrupt = Arc::new(AtomicBool::new(false));
    for sig in [
        signal_hook::consts::SIGINT,
        signal_hook::consts::SIGTERM,
        signal_hook::consts::SIGHUP,
    ] {
        if let Err(e) = signal_hook::flag::register(sig, Arc::clone(&interrupt)) {
            return fail(
                err,
                format!("cannot install signal handler: {e}"),
                crate::EXIT_FILE_ERROR,
            );
        }
    }
    let (mut rig, place) = match open_rig(args, &v, interrupt, err) {
        Ok(r) => r,
        Err((msg, code)) => return fail(err, msg, code),
    };
    let header = header_lines(&v, &place);
    let live_to_stdout = !args.json;
    if live_to_stdout {
        let _ = write!(out, "{header}");
        let _ = out.flush();
    } else {
        let _ = write!(err, "{header}");
    }
    let mut progress = |step: &SweepStep| {
        let line = step_line(step);
        if live_to_stdout {
            let _ = writeln!(out, "{line}");
            let _ = out.flush();
        } else {
            let _ = writeln!(err, "{line}");
        }
    };
    let result = run::run(&v.plan, &mut rig, &mut progress);
    drop(rig);
    let steps = match result {
        Ok(steps) => steps,
        Err(SweepFailure { error, steps }) => {
            if !steps.is_empty() {
                let _ = writeln!(err, "{} steps measured before it stopped", steps.len());
            }
            return fail(err, error, crate::EXIT_FILE_ERROR);
        }
    };
    let report = assemble(&v, &place, args, steps);
    let mut code = crate::EXIT_OK;
    if let Some(path) = &args.svg {
        if let Err(e) = crate::plot::sweep_svg(&report, path) {
            let _ = writeln!(err, "brink sweep: {}: {e}", path.display());
            code = crate::EXIT_FILE_ERROR;
        }
    }
    let written = if args.json {
        crate::sink::json::write_line(out, &report)
    } else {
        write_summary(out, &report)
    };
    match written.and_then(|()| out.flush()) {
        Ok(()) => code,
        Err(e) if e.kind() == io::ErrorKind::BrokenPipe => code,
        Err(e) => fail(
            err,
            format!("cannot write output: {e}"),
            crate::EXIT_FILE_ERROR,
        ),
    }
}

/// The report of a finished sweep.
fn assemble(v: &Validated, place: &Place, args: &SweepArgs, steps: Vec<SweepStep>) -> SweepReport {
    let level = v.kind == SweepKind::Level;
    SweepReport {
        format: SWEEP_FORMAT.to_string(),
        kind: v.kind,
        frequency_hz: level.then(|| v.plan.steps.first().map_or(args.freq, |s| s.1)),
        drive_dbfs: (!level).then_some(args.drive),
        sample_rate_hz: place.rate,
        host: place.host.clone(),
        output_device: place.output.clone(),
        output_channel: usize::from(args.output_channel),
        input_device: place.input.clone(),
        input_channel: usize::from(args.input_channel),
        onset_threshold_pct: v.onset_pct,
        loop_gain_db: onset::loop_gain(&steps),
        onset: if level {
            onset::onset(&steps, v.onset_pct)
        } else {
            None
        },
        knee: if level { onset::knee(&steps) } else { None },
        steps,
    }
}

/// Find the devices, print the caution, open both streams. Errors: (message, exit code).
fn open_rig<E: Write>(
    args: &SweepArgs,
    v: &Validated,
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
    let first = v.plan.steps.first().map_or(args.freq, |s| s.1);
    let control = Control::new(run::wave_of(v.plan.stimulus, first));
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

fn header_lines(v: &Validated, place: &Place) -> String {
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

#[cfg(test)]
mod tests {
    use clap::Parser;

    use super::*;

    #[derive(Parser)]
    struct Wrap {
        #[command(flatten)]
        args: SweepArgs,
    }

    fn args(list: &[&str]) -> SweepArgs {
        let mut v = vec!["sweep"];
        v.extend_from_slice(list);
        Wrap::try_parse_from(v).expect("parses").args
    }

    #[test]
    fn defaults_start_quiet_and_stop_at_the_limit() {
        let v = args(&[]).validate().expect("valid");
        assert_eq!(v.plan.steps.first(), Some(&(-40.0, 997.0)));
        assert_eq!(v.plan.steps.last(), Some(&(-6.0, 997.0)));
        assert_eq!(v.plan.steps.len(), 35);
        assert!(
            v.plan.steps.windows(2).all(|w| w[1].0 > w[0].0),
            "drives rise"
        );
    }

    #[test]
    fn drive_above_the_limit_is_refused_unless_allowed() {
        let e = args(&["--to", "-3"]).validate().expect_err("refused");
        assert!(e.contains("refusing to drive -3 dBFS"), "{e}");
        assert!(args(&["--to", "-3", "--max-drive", "-3"])
            .validate()
            .is_ok());
        let e = args(&["--to", "1", "--max-drive", "1"])
            .validate()
            .expect_err("refused");
        assert!(e.contains("full scale"), "{e}");
        let e = args(&["--freqs", "20..20000", "--drive", "-2"])
            .validate()
            .expect_err("refused");
        assert!(e.contains("refusing"), "{e}");
    }

    #[test]
    fn bad_ranges_are_refused() {
        for (list, needle) in [
            (&["--from", "-10", "--to", "-20"][..], "starts quiet"),
            (&["--step", "0"][..], "--step"),
            (&["--step", "0.001", "--from", "-60"][..], "at most"),
            (&["--freqs", "20-20000"][..], "LO..HI"),
            (&["--freqs", "200..20"][..], "0 < LO < HI"),
            (&["--onset", "0"][..], "--onset"),
            (&["--imd", "auto"][..], "smpte or twin"),
        ] {
            let e = args(list).validate().expect_err("refused");
            assert!(e.contains(needle), "{list:?}: {e}");
        }
    }

    #[test]
    fn frequency_sweeps_are_log_spaced() {
        let v = args(&["--freqs", "20..20480", "--per-octave", "1"])
            .validate()
            .expect("valid");
        // 20 · 2^k for k = 0..10: 1024 = 2^10.
        let f: Vec<f64> = v.plan.steps.iter().map(|s| s.1).collect();
        assert_eq!(f.len(), 11);
        for (k, x) in f.iter().enumerate() {
            assert!((x - 20.0 * 2f64.powi(k as i32)).abs() < 1e-9, "{f:?}");
        }
        assert!(v.plan.steps.iter().all(|s| s.0 == -20.0));
        assert_eq!(v.kind, SweepKind::Frequency);
    }

    #[test]
    fn imd_sweeps_play_the_standard_pairs() {
        let v = args(&["--imd", "smpte"]).validate().expect("valid");
        // SMPTE RP120: 60 Hz + 7 kHz at 4:1.
        assert_eq!(
            v.plan.stimulus,
            Stimulus::Pair {
                method: ImdMethod::Smpte,
                f1: 60.0,
                f2: 7000.0,
                ratio: 4.0
            }
        );
        let v = args(&["--imd", "twin"]).validate().expect("valid");
        assert!(
            matches!(v.plan.stimulus, Stimulus::Pair { f1, f2, ratio, .. }
            if f1 == 19_000.0 && f2 == 20_000.0 && ratio == 1.0)
        );
    }

    #[test]
    fn a_simulated_hard_clip_gives_its_onset_and_a_summary() {
        // A symmetric hard clip at 0.25 (−12.04 dBFS): below it the loop is clean.
        let mut rig = run::tests::Simulated::new(Box::new(|x| x.clamp(-0.25, 0.25)));
        let a = args(&["--from", "-16", "--to", "-8", "--step", "0.5"]);
        let v = a.validate().expect("valid");
        let mut plan = v.plan.clone();
        plan.settle = Duration::from_millis(10);
        plan.measure = Duration::from_millis(200);
        let steps = run::run(&plan, &mut rig, &mut |_| {}).expect("runs");
        let place = Place {
            host: "sim".into(),
            output: "o".into(),
            input: "i".into(),
            rate: 48_000,
        };
        let r = assemble(&v, &place, &a, steps);
        let o = r.onset.expect("onset");
        // The closed form (Fourier series of a clipped sine, ../shared/reference-values.md;
        // computed in tests/integration/servers.rs) puts 1 % THD of a clip at 0.25 at
        // −11.79 dBFS.
        assert!((o.drive_dbfs + 11.79).abs() < 0.05, "{o:?}");
        assert!(r.knee.expect("knee").steepest_db_per_db > 3.0);
        let mut text = Vec::new();
        write_summary(&mut text, &r).expect("writes");
        let text = String::from_utf8(text).expect("utf-8");
        assert!(text.contains("onset (THD 1 %): drive -1"), "{text}");
        assert!(text.contains("odd only"), "{text}");
        // Refined steps sit between −12 and −11.5 dBFS.
        assert_eq!(r.steps.iter().filter(|s| s.refined).count(), 4);
    }
}
