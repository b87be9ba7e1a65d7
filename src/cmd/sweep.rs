//! `brink sweep`: its arguments, the help under `brink sweep --help`, their validation into a
//! sweep plan, and the run: open the loop, step, print the table, assemble the report. The
//! measuring is in [`crate::sweep`].

use std::io::{self, Write};
use std::path::PathBuf;
use std::sync::atomic::AtomicBool;
use std::sync::Arc;
use std::time::Duration;

use clap::Args;

use crate::dsp::imd::ImdMethod;
use crate::dsp::tone::ToneSettings;
use crate::parse::{parse_duration, parse_range};
use crate::sweep::onset;
use crate::sweep::report::{SweepKind, SweepReport, SweepStep, SWEEP_FORMAT};
use crate::sweep::run::{Stimulus, SweepFailure, SweepPlan};
use crate::sweep::{
    header_lines, log_spaced, open_rig, step_line, write_summary, Place, Validated, Wiring,
};

/// How a sweep steps and what it finds; shown under `brink sweep --help`.
pub const SWEEP_AFTER_HELP: &str = "\
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
#[command(after_help = SWEEP_AFTER_HELP)]
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
    #[arg(long, default_value = "300ms", value_parser = parse_duration)]
    pub settle: Duration,
    /// Length of each measurement (at least 40 cycles are taken).
    #[arg(long, default_value = "500ms", value_parser = parse_duration)]
    pub measure: Duration,
    /// How long the loop check waits for the tone to come back.
    #[arg(long, default_value = "5s", value_parser = parse_duration)]
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

/// Most steps a sweep may have.
pub const MAX_STEPS: usize = 2000;

impl SweepArgs {
    /// The devices and channels asked for.
    pub fn wiring(&self) -> Wiring {
        Wiring {
            host: self.host.clone(),
            output: self.output.clone(),
            input: self.input.clone(),
            output_channel: self.output_channel,
            input_channel: self.input_channel,
            rate: self.rate,
        }
    }

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
                let (lo, hi) = parse_range(spec).map_err(|e| format!("--freqs {e}"))?;
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

/// `brink sweep`.
pub fn run<W: Write, E: Write>(args: &SweepArgs, out: &mut W, err: &mut E) -> u8 {
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
    let first = v.plan.steps.first().map_or(args.freq, |s| s.1);
    let (mut rig, place) = match open_rig(&args.wiring(), &v, first, interrupt, err) {
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
    let result = crate::sweep::run::run(&v.plan, &mut rig, &mut progress);
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
        let mut rig = crate::sweep::run::tests::Simulated::new(Box::new(|x| x.clamp(-0.25, 0.25)));
        let a = args(&["--from", "-16", "--to", "-8", "--step", "0.5"]);
        let v = a.validate().expect("valid");
        let mut plan = v.plan.clone();
        plan.settle = Duration::from_millis(10);
        plan.measure = Duration::from_millis(200);
        let steps = crate::sweep::run::run(&plan, &mut rig, &mut |_| {}).expect("runs");
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
