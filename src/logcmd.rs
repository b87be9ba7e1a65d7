//! `brink log`: headless measurement for hours, over SSH if need be. Summaries every interval,
//! clip episodes and onsets as they happen, NDJSON (default) or CSV, to stdout or a rotating file.
//! SIGINT and SIGTERM end the run with a stop record; SIGHUP is ignored so a dropped SSH session
//! does not end a recording.

use std::io::Write;
use std::path::PathBuf;
use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::Arc;
use std::time::{Duration, SystemTime};

use clap::Args;

use crate::cli::plan_from;
use crate::config;
use crate::live::engine::{Engine, EngineSettings};
use crate::live::ring::ring;
use crate::live::run::{spawn_analysis, Published, Totals};
use crate::live::source::{FileSource, Pace};
use crate::sink::log::{LogFormat, LogMeta, LogWriter, Rotation, Target};

/// Exit status when measurement completed but some log lines could not be written.
pub const EXIT_WRITE_FAILED: u8 = 3;

/// Arguments of `brink log`.
#[derive(Debug, Args)]
pub struct LogArgs {
    /// What to measure: `file:PATH.wav` plays a WAV file through the live pipeline at real
    /// speed.
    #[arg(long, value_name = "SOURCE")]
    pub input: String,
    /// Play a file input again and again.
    #[arg(long = "loop")]
    pub looping: bool,
    /// Play a file input as fast as it can be read; frames the analysis cannot keep up with are
    /// dropped and reported (a stress test of the pipeline).
    #[arg(long)]
    pub unpaced: bool,
    /// Interval of summary records (e.g. 250ms, 1s).
    #[arg(long, default_value = "1s", value_parser = crate::gen::parse_duration)]
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

/// Parse a size with an optional k/M/G suffix (powers of 1024).
pub fn parse_size(s: &str) -> Result<u64, String> {
    let t = s.trim();
    let (num, mult) = match t.chars().last() {
        Some('k' | 'K') => (&t[..t.len() - 1], 1u64 << 10),
        Some('m' | 'M') => (&t[..t.len() - 1], 1 << 20),
        Some('g' | 'G') => (&t[..t.len() - 1], 1 << 30),
        _ => (t, 1),
    };
    match num.parse::<u64>() {
        Ok(n) if n > 0 => n
            .checked_mul(mult)
            .ok_or_else(|| format!("size '{s}' is too large")),
        _ => Err(format!(
            "bad size '{s}': use a whole number with an optional k, M or G, e.g. 10M"
        )),
    }
}

/// Run `brink log`; returns the exit status.
pub fn run_log<E: Write>(args: &LogArgs, err: &mut E) -> u8 {
    match run(args, err) {
        Ok(code) => code,
        Err(msg) => {
            let _ = writeln!(err, "brink log: {msg}");
            crate::EXIT_FILE_ERROR
        }
    }
}

fn run<E: Write>(args: &LogArgs, err: &mut E) -> Result<u8, String> {
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
    let files = config::layered(args.config.as_deref()).map_err(|e| e.to_string())?;
    let plan = plan_from(&config::builtin_defaults().merge(files))?;
    let settings = EngineSettings {
        channel: plan.settings.channel,
        summary_every_s: Some(args.every.as_secs_f64()),
        onset_thd_pct: args.onset,
        ..EngineSettings::default()
    };

    let Some(path) = args.input.strip_prefix("file:") else {
        return Err(format!(
            "input '{}' is not available: this build measures files played as live input \
             (`--input file:PATH.wav`); audio device capture is not built yet",
            args.input
        ));
    };
    let pace = if args.unpaced {
        Pace::Unpaced
    } else {
        Pace::RealTime
    };
    let source = FileSource::open(std::path::Path::new(path), args.looping, pace)
        .map_err(|e| format!("{path}: {e}"))?;
    let info = source.info().clone();
    let (writer, reader) = ring(info.channels, info.sample_rate as usize * 2);
    let engine = Engine::new(
        info.sample_rate,
        info.channels,
        info.integer_bits(),
        settings,
    );
    let done = Arc::new(AtomicBool::new(false));
    let analysis = spawn_analysis(reader, engine, Arc::clone(&done), 4096)
        .map_err(|e| format!("cannot start the analysis thread: {e}"))?;
    let player = source
        .spawn(writer, Arc::clone(&stop), Arc::clone(&done))
        .map_err(|e| format!("cannot start the file source: {e}"))?;

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
    let meta = LogMeta {
        host: "file".to_string(),
        device: path.to_string(),
        sample_rate_hz: info.sample_rate,
        channels: (1..=info.channels).collect(),
    };
    let mut log = LogWriter::open(target, args.format, meta, Box::new(SystemTime::now))
        .map_err(|e| e.to_string())?;

    let rate = info.sample_rate as f64;
    let mut totals = Totals::default();
    loop {
        if stop.load(Ordering::Relaxed) || log.is_closed() {
            // Stop the source; the analysis drains what is in the ring and ends.
            stop.store(true, Ordering::Relaxed);
        }
        match analysis.events.recv_timeout(Duration::from_millis(100)) {
            Ok(Published::Event(ev)) => log.event(&ev),
            Ok(Published::End(t)) => {
                totals = t;
                break;
            }
            Err(crossbeam_channel::RecvTimeoutError::Timeout) => {}
            Err(crossbeam_channel::RecvTimeoutError::Disconnected) => break,
        }
    }
    let source_result = player.join();
    let _ = analysis.join();
    log.stop(totals.analysed as f64 / rate, totals.xruns);
    if let Ok(Err(e)) = source_result {
        let _ = writeln!(err, "brink log: {path}: {e}");
        return Ok(crate::EXIT_FILE_ERROR);
    }
    if totals.dropped_events > 0 {
        let _ = writeln!(
            err,
            "brink log: {} results were dropped because writing fell behind",
            totals.dropped_events
        );
    }
    Ok(if log.had_write_error() {
        EXIT_WRITE_FAILED
    } else {
        crate::EXIT_OK
    })
}
