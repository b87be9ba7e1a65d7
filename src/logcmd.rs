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
use std::sync::atomic::AtomicU64;
use std::time::Instant;

use crate::live::capture::{open_input, probe_input, Capture, CaptureFault};
use crate::live::devices::{find_host, find_input, parse_channels};
use crate::live::engine::{Engine, EngineSettings};
use crate::live::ring::{ring, AnalysisReader, Counters};
use crate::live::run::{spawn_analysis, spawn_analysis_with, Feed, Published, Totals};
use crate::live::source::{FileSource, Pace};
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
    let open_log = |meta: LogMeta| {
        LogWriter::open(target.clone(), args.format, meta, Box::new(SystemTime::now))
            .map_err(|e| e.to_string())
    };
    match args.input.as_deref().and_then(|i| i.strip_prefix("file:")) {
        Some(path) => run_file(args, path, settings, &stop, open_log, err),
        None => run_device(args, settings, &stop, open_log, err),
    }
}

/// Wait for the analysis thread's findings and write them until it ends; `tick` runs between
/// waits (supervision). Returns the totals.
fn pump(
    analysis: &crate::live::run::Analysis,
    log: &mut LogWriter,
    stop: &AtomicBool,
    mut tick: impl FnMut(&mut LogWriter, bool),
) -> Totals {
    loop {
        let stopping = stop.load(Ordering::Relaxed) || log.is_closed();
        if stopping {
            stop.store(true, Ordering::Relaxed);
        }
        tick(log, stopping);
        match analysis.events.recv_timeout(Duration::from_millis(50)) {
            Ok(Published::Event(ev)) => log.event(&ev),
            Ok(Published::End(t)) => return t,
            Err(crossbeam_channel::RecvTimeoutError::Timeout) => {}
            Err(crossbeam_channel::RecvTimeoutError::Disconnected) => return Totals::default(),
        }
    }
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

fn run_file<E: Write>(
    args: &LogArgs,
    path: &str,
    settings: EngineSettings,
    stop: &Arc<AtomicBool>,
    open_log: impl Fn(LogMeta) -> Result<LogWriter, String>,
    err: &mut E,
) -> Result<u8, String> {
    let pace = if args.unpaced {
        Pace::Unpaced
    } else {
        Pace::RealTime
    };
    let source = FileSource::open(std::path::Path::new(path), args.looping, pace)
        .map_err(|e| format!("{path}: {e}"))?;
    let info = source.info().clone();
    let selected = selected_channels(args.channels.as_deref(), info.channels)?;
    let (writer, reader) = ring(info.channels, info.sample_rate as usize * 2);
    let engine = Engine::new(
        info.sample_rate,
        info.channels,
        info.integer_bits(),
        settings,
    )
    .select(&selected);
    let done = Arc::new(AtomicBool::new(false));
    let analysis = spawn_analysis(reader, engine, Arc::clone(&done), 4096)
        .map_err(|e| format!("cannot start the analysis thread: {e}"))?;
    let player = source
        .spawn(writer, Arc::clone(stop), Arc::clone(&done))
        .map_err(|e| format!("cannot start the file source: {e}"))?;
    let mut log = open_log(LogMeta {
        host: "file".to_string(),
        device: path.to_string(),
        sample_rate_hz: info.sample_rate,
        channels: selected,
    })?;
    let totals = pump(&analysis, &mut log, stop, |_, _| {});
    let source_result = player.join();
    let _ = analysis.join();
    let code = finish(log, totals, info.sample_rate as f64, err);
    if let Ok(Err(e)) = source_result {
        let _ = writeln!(err, "brink log: {path}: {e}");
        return Ok(crate::EXIT_FILE_ERROR);
    }
    Ok(code)
}

/// The channels `--channels` names (numbered from 1), or all of them.
fn selected_channels(spec: Option<&str>, available: usize) -> Result<Vec<usize>, String> {
    match spec {
        Some(spec) => parse_channels(spec, available).map_err(|e| e.to_string()),
        None => Ok((1..=available).collect()),
    }
}

/// Full scale for over detection from the device's sample format ("i16", "i24", "u8", "f32"...).
fn format_bits(format: &str) -> Option<u32> {
    let digits = format
        .strip_prefix('i')
        .or_else(|| format.strip_prefix('u'))?;
    digits.parse().ok()
}

/// How long callbacks may stop arriving before the input counts as lost.
const HEARTBEAT: Duration = Duration::from_millis(1500);
/// First and longest wait between attempts to reopen a lost input.
const RETRY_FIRST: Duration = Duration::from_millis(250);
const RETRY_MAX: Duration = Duration::from_secs(4);

enum InputState {
    Running {
        /// Held to keep the stream alive: dropping it stops the stream.
        _stream: Capture,
        counters: Arc<Counters>,
        callbacks: u64,
        since: Instant,
    },
    Lost {
        next_try: Instant,
        wait: Duration,
    },
}

fn run_device<E: Write>(
    args: &LogArgs,
    settings: EngineSettings,
    stop: &Arc<AtomicBool>,
    open_log: impl Fn(LogMeta) -> Result<LogWriter, String>,
    err: &mut E,
) -> Result<u8, String> {
    let host = find_host(args.host.as_deref()).map_err(|e| e.to_string())?;
    let host_name = host.id().name().to_lowercase();
    let device = find_input(&host, args.input.as_deref()).map_err(|e| e.to_string())?;
    let info = probe_input(&device, args.rate).map_err(|e| e.to_string())?;
    let selected = selected_channels(args.channels.as_deref(), info.channels)?;
    let rate = info.sample_rate;
    let ring_frames = rate as usize * 2;
    let (fault_tx, fault_rx) = crossbeam_channel::bounded(64);
    let open = |device: &cpal::Device| -> Result<(Capture, AnalysisReader), String> {
        let (writer, reader) = ring(info.channels, ring_frames);
        let (capture, _) =
            open_input(device, Some(rate), writer, fault_tx.clone()).map_err(|e| e.to_string())?;
        capture.play().map_err(|e| e.to_string())?;
        Ok((capture, reader))
    };
    let (capture, reader) = open(&device)?;
    let counters = Arc::clone(reader.counters());
    let engine = Engine::new(
        rate,
        info.channels,
        format_bits(&info.sample_format),
        settings,
    )
    .select(&selected);
    let done = Arc::new(AtomicBool::new(false));
    let position = Arc::new(AtomicU64::new(0));
    let (replace_tx, replace_rx) = crossbeam_channel::bounded(1);
    let analysis = spawn_analysis_with(
        reader,
        engine,
        Feed {
            source_done: Arc::clone(&done),
            replacements: replace_rx,
            position: Arc::clone(&position),
        },
        4096,
    )
    .map_err(|e| format!("cannot start the analysis thread: {e}"))?;
    let mut log = open_log(LogMeta {
        host: host_name,
        device: info.device.clone(),
        sample_rate_hz: rate,
        channels: selected,
    })?;

    let t_s = || position.load(Ordering::Relaxed) as f64 / rate as f64;
    let mut state = Some(InputState::Running {
        _stream: capture,
        counters,
        callbacks: 0,
        since: Instant::now(),
    });
    let selector = args.input.clone();
    let host_sel = args.host.clone();
    let totals = pump(&analysis, &mut log, stop, |log, stopping| {
        if stopping {
            // Our own shutdown: drop the stream first, then ignore whatever it reports.
            state = None;
            while fault_rx.try_recv().is_ok() {}
            done.store(true, Ordering::Release);
            return;
        }
        let now = Instant::now();
        let mut lost: Option<String> = None;
        while let Ok(fault) = fault_rx.try_recv() {
            match fault {
                CaptureFault::DeviceLost(reason) => lost = Some(reason),
                CaptureFault::Other(msg) => {
                    let _ = writeln!(std::io::stderr(), "brink log: input: {msg}");
                }
            }
        }
        match &mut state {
            Some(InputState::Running {
                counters,
                callbacks,
                since,
                ..
            }) => {
                let seen = counters.callbacks.load(Ordering::Relaxed);
                if seen != *callbacks {
                    *callbacks = seen;
                    *since = now;
                } else if lost.is_none() && now.duration_since(*since) > HEARTBEAT {
                    lost = Some("callbacks stopped arriving".to_string());
                }
                if let Some(reason) = lost {
                    log.input_lost(t_s(), &reason);
                    // Dropping the capture stops (what is left of) the stream.
                    state = Some(InputState::Lost {
                        next_try: now + RETRY_FIRST,
                        wait: RETRY_FIRST,
                    });
                }
            }
            Some(InputState::Lost { next_try, wait }) if now >= *next_try => {
                let reopened = find_host(host_sel.as_deref())
                    .and_then(|h| find_input(&h, selector.as_deref()))
                    .map_err(|e| e.to_string())
                    .and_then(|d| open(&d));
                match reopened {
                    Ok((capture, reader)) => {
                        let counters = Arc::clone(reader.counters());
                        if replace_tx.send(reader).is_ok() {
                            log.input_restored(t_s());
                            state = Some(InputState::Running {
                                _stream: capture,
                                counters,
                                callbacks: 0,
                                since: now,
                            });
                        }
                    }
                    Err(_) => {
                        let next = (*wait * 2).min(RETRY_MAX);
                        *wait = next;
                        *next_try = now + next;
                    }
                }
            }
            _ => {}
        }
    });
    drop(state);
    let _ = analysis.join();
    Ok(finish(log, totals, rate as f64, err))
}
