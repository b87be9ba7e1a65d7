//! `brink log`: its arguments and the run wiring source, ring, analysis and log writer, for
//! headless measurement for hours, over SSH if need be. Summaries every interval,
//! clip episodes and onsets as they happen, NDJSON (default) or CSV, to stdout or a rotating file.
//! SIGINT and SIGTERM end the run with a stop record; SIGHUP is ignored so a dropped SSH session
//! does not end a recording.

use std::io::Write;
use std::path::PathBuf;
use std::sync::atomic::AtomicBool;
use std::sync::Arc;
use std::time::{Duration, SystemTime};

use clap::Args;

use super::common::{configured, plan_from};
use crate::live::engine::EngineSettings;
use crate::live::run::Totals;
use crate::live::session::{Notice, Session, SourceSpec, Step};
use crate::live::source::Pace;
use crate::parse::{parse_duration, parse_size};
use crate::sink::log::{LogFormat, LogMeta, LogWriter, Rotation, Target};

/// Exit status when measurement completed but some log lines could not be written.
pub const EXIT_WRITE_FAILED: u8 = 3;

/// Arguments of `brink log`.
#[derive(Debug, Args)]
pub struct LogArgs {
    /// What to measure: an input device (name, a piece of it, or its number in `brink
    /// devices`; default: the host's default input), or `file:PATH.wav` to play a WAV file
    /// through the live pipeline at real speed.
    #[arg(long, value_name = "SOURCE")]
    pub input: Option<String>,
    /// Audio host (e.g. alsa, jack); default: the platform's.
    #[arg(long)]
    pub host: Option<String>,
    /// Channels to measure, numbered from 1 (e.g. 1-8,12); default: all.
    #[arg(long, value_name = "LIST")]
    pub channels: Option<String>,
    /// Sample rate to ask the device for (Hz); default: the device's.
    #[arg(long)]
    pub rate: Option<u32>,
    /// Play a file input again and again.
    #[arg(long = "loop")]
    pub looping: bool,
    /// Play a file input as fast as it can be read; frames the analysis cannot keep up with are
    /// dropped and reported (a stress test of the pipeline).
    #[arg(long, conflicts_with = "fast")]
    pub unpaced: bool,
    /// Play a file input as fast as the analysis takes it, waiting for room so that nothing is
    /// dropped: a whole file through the live pipeline in less than its length.
    #[arg(long)]
    pub fast: bool,
    /// Interval of summary records (e.g. 250ms, 1s).
    #[arg(long, default_value = "1s", value_parser = parse_duration)]
    pub every: Duration,
    /// Write to this file instead of standard output.
    #[arg(long, value_name = "FILE")]
    pub out: Option<PathBuf>,
    /// Record format: ndjson or csv.
    #[arg(long, default_value = "ndjson")]
    pub format: LogFormat,
    /// Start a new file when the current one would pass this size (e.g. 500k, 10M, 1G).
    #[arg(long, value_parser = parse_size, requires = "out")]
    pub rotate_size: Option<u64>,
    /// Rotated files kept (FILE.1 .. FILE.N).
    #[arg(long, default_value_t = 5, requires = "rotate_size")]
    pub keep: usize,
    /// THD (%) whose first crossing is reported as the clipping onset.
    #[arg(long, default_value_t = 1.0)]
    pub onset: f64,
    /// Read measurement settings from this TOML file ([measure] section).
    #[arg(long, value_name = "FILE")]
    pub config: Option<PathBuf>,
}

/// Run `brink log`; returns the exit status.
pub fn run<E: Write>(args: &LogArgs, err: &mut E) -> u8 {
    match record(args, err) {
        Ok(code) => code,
        Err(msg) => {
            let _ = writeln!(err, "brink log: {msg}");
            crate::EXIT_FILE_ERROR
        }
    }
}

fn record<E: Write>(args: &LogArgs, err: &mut E) -> Result<u8, String> {
    // Signals first, so a stop during set-up is not lost.
    let stop = Arc::new(AtomicBool::new(false));
    for sig in [signal_hook::consts::SIGINT, signal_hook::consts::SIGTERM] {
        signal_hook::flag::register(sig, Arc::clone(&stop))
            .map_err(|e| format!("cannot install signal handler: {e}"))?;
    }
    // SIGHUP sets a flag nobody reads: a closed SSH session does not end the recording.
    signal_hook::flag::register(
        signal_hook::consts::SIGHUP,
        Arc::new(AtomicBool::new(false)),
    )
    .map_err(|e| format!("cannot install signal handler: {e}"))?;

    if !(args.onset > 0.0 && args.onset < 100.0) {
        return Err(format!(
            "--onset {} % must be between 0 and 100",
            args.onset
        ));
    }
    let plan = plan_from(&configured(args.config.as_deref())?)?;
    let settings = EngineSettings {
        channel: plan.settings.channel,
        summary_every_s: Some(args.every.as_secs_f64()),
        onset_thd_pct: args.onset,
        ..EngineSettings::default()
    };

    let target = match &args.out {
        Some(p) => Target::File {
            path: p.clone(),
            rotation: args.rotate_size.map(|max_bytes| Rotation {
                max_bytes,
                keep: args.keep,
            }),
        },
        None => Target::Stdout,
    };
    let spec = match args.input.as_deref().and_then(|i| i.strip_prefix("file:")) {
        Some(path) => SourceSpec::File {
            path: PathBuf::from(path),
            looping: args.looping,
            pace: if args.fast {
                Pace::Lossless
            } else if args.unpaced {
                Pace::Unpaced
            } else {
                Pace::RealTime
            },
        },
        None => SourceSpec::Device {
            host: args.host.clone(),
            input: args.input.clone(),
            rate: args.rate,
        },
    };
    let mut session = Session::start(&spec, args.channels.as_deref(), settings, 4096)?;
    let meta = &session.meta;
    let mut log = LogWriter::open(
        target,
        args.format,
        LogMeta {
            host: meta.host.clone(),
            device: meta.device.clone(),
            sample_rate_hz: meta.sample_rate_hz,
            channels: meta.channels.clone(),
        },
        Box::new(SystemTime::now),
    )
    .map_err(|e| e.to_string())?;
    let rate = f64::from(meta.sample_rate_hz);
    let totals = pump(&mut session, &mut log, &stop);
    let (totals, source_error) = session.finish(totals);
    let code = finish(log, totals, rate, err);
    if let Some(e) = source_error {
        let _ = writeln!(err, "brink log: {e}");
        return Ok(crate::EXIT_FILE_ERROR);
    }
    Ok(code)
}

/// Write the analysis thread's findings until it ends, the input's losses and returns with
/// them. Returns the totals from its end marker (`None` if it vanished without one).
fn pump(session: &mut Session, log: &mut LogWriter, stop: &AtomicBool) -> Option<Totals> {
    session.drive(stop, |session, step| {
        match step {
            Step::Event(ev) => log.event(&ev),
            Step::Notice(Notice::Lost(reason)) => log.input_lost(session.t_s(), &reason),
            Step::Notice(Notice::Restored) => log.input_restored(session.t_s()),
            Step::Notice(Notice::Trouble(msg)) => {
                let _ = writeln!(std::io::stderr(), "brink log: input: {msg}");
            }
            Step::Idle => {}
        }
        // A closed output (a broken pipe) ends the run as a signal would.
        !log.is_closed()
    })
}

/// Write the stop record and pick the exit status.
fn finish<E: Write>(mut log: LogWriter, totals: Totals, rate: f64, err: &mut E) -> u8 {
    log.set_input_counts(
        totals.delivered,
        totals.analysed,
        totals.dropped_frames,
        totals.dropped_events,
    );
    log.stop(totals.analysed as f64 / rate, totals.xruns);
    if totals.dropped_events > 0 {
        let _ = writeln!(
            err,
            "brink log: {} results were dropped because writing fell behind",
            totals.dropped_events
        );
    }
    if log.had_write_error() {
        EXIT_WRITE_FAILED
    } else {
        crate::EXIT_OK
    }
}
