//! `brink watch` and `brink demo`: the terminal dashboard on a live input, a WAV file, the
//! bundled demo tones, or a log another brink process is writing (`--follow`).

use std::io::Write;
use std::path::PathBuf;
use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::Arc;
use std::time::Duration;

use clap::Args;
use crossbeam_channel::{unbounded, Sender};

use crate::dsp::ballistics::Ballistics;
use crate::live::engine::EngineSettings;
use crate::live::session::{Session, SourceMeta, SourceSpec};
use crate::live::source::Pace;
use crate::ui::model::{Dashboard, Fingerprint};
use crate::ui::view::Theme;
use crate::ui::{feed, run_screen, Input, ScreenOptions};

/// Options every dashboard mode shares.
#[derive(Debug, Args, Clone)]
pub struct ScreenArgs {
    /// Meter ballistics: peak (sample peak, IEC 60268-18 fall-back), ppm1, ppm2
    /// (IEC 60268-10 Type I, II) or vu (IEC 60268-17); the m key cycles them.
    #[arg(long, value_name = "KIND")]
    pub meter: Option<Ballistics>,
    /// Most screen frames a second (1 to 30); the screen is drawn only when something changed.
    #[arg(long, value_parser = clap::value_parser!(u32).range(1..=30))]
    pub fps: Option<u32>,
    /// THD (%) whose first crossing marks the clipping onset.
    #[arg(long)]
    pub onset: Option<f64>,
    /// Load a saved fingerprint (a snapshot, or a `brink scan --json` report) as B; given twice,
    /// as A then B.
    #[arg(long, value_name = "FILE")]
    pub compare: Vec<PathBuf>,
    /// Folder the s key saves snapshots into.
    #[arg(long, value_name = "DIR")]
    pub snapshot_dir: Option<PathBuf>,
    /// Read settings from this TOML file ([measure] and [watch] sections).
    #[arg(long, value_name = "FILE")]
    pub config: Option<PathBuf>,
}

/// Arguments of `brink watch`.
#[derive(Debug, Args)]
pub struct WatchArgs {
    /// What to measure: an input device (name, a piece of it, or its number in `brink
    /// devices`; default: the host's default input), or `file:PATH.wav` to play a WAV file
    /// through the live pipeline at real speed.
    #[arg(long, value_name = "SOURCE", conflicts_with = "follow")]
    pub input: Option<String>,
    /// Audio host (e.g. alsa, jack); default: the platform's.
    #[arg(long, conflicts_with = "follow")]
    pub host: Option<String>,
    /// Channels to show, numbered from 1 (e.g. 1-8,12); default: all.
    #[arg(long, value_name = "LIST", conflicts_with = "follow")]
    pub channels: Option<String>,
    /// Sample rate to ask the device for (Hz).
    #[arg(long, conflicts_with = "follow")]
    pub rate: Option<u32>,
    /// Play a file input again and again.
    #[arg(long = "loop", conflicts_with = "follow")]
    pub looping: bool,
    /// Draw a headless log (NDJSON, from `brink log --out FILE`) as another brink process
    /// writes it, instead of measuring here.
    #[arg(long, value_name = "FILE")]
    pub follow: Option<PathBuf>,
    #[allow(missing_docs)] // clap would print a doc comment here as help text
    #[command(flatten)]
    pub screen: ScreenArgs,
}

/// Arguments of `brink demo`.
#[derive(Debug, Args)]
pub struct DemoArgs {
    /// Which demo: stage-box (default), push-pull, single-ended or laptop-96k.
    #[arg(long, default_value = "stage-box")]
    pub scene: String,
    /// List the demos and what each shows.
    #[arg(long)]
    pub list: bool,
    #[allow(missing_docs)] // clap would print a doc comment here as help text
    #[command(flatten)]
    pub screen: ScreenArgs,
}

/// The demos: scene name, file in demo-tones/recipes.txt, what it shows.
pub const SCENES: &[(&str, &str, &str)] = &[
    (
        "stage-box",
        "stage-box-soundcheck.wav",
        "four stage inputs at soundcheck: the vocal preamp flat-tops at -4 dBFS, the bass DI hits overs, the room mic carries only noise",
    ),
    (
        "push-pull",
        "push-pull-stage-drive-steps.wav",
        "a symmetric stage driven up in six steps: odd harmonics only, rising",
    ),
    (
        "single-ended",
        "single-ended-stage-drive-steps.wav",
        "an asymmetric stage at the same steps: even harmonics lead",
    ),
    (
        "laptop-96k",
        "playback-laptop-96k-intersample.wav",
        "96 kHz playback whose left channel peaks between samples (+0.6 dBTP)",
    ),
];

/// The recipes the demo tones are made from (the same text `make.sh` reads).
const RECIPES: &str = include_str!("../demo-tones/recipes.txt");

/// Render a demo scene from the bundled recipes: (rate, channels, interleaved samples), the
/// same signals as the WAV files in demo-tones/ before they were quantised to 24 bits.
pub fn render_scene(file: &str) -> Result<(u32, usize, Vec<f32>), String> {
    use clap::Parser;
    let line = RECIPES
        .lines()
        .find(|l| l.split_whitespace().next() == Some(file))
        .ok_or_else(|| format!("no recipe for {file}"))?;
    #[derive(Parser)]
    struct One {
        #[command(flatten)]
        gen: crate::gen::GenArgs,
    }
    let words = std::iter::once("gen").chain(line.split_whitespace());
    let args = One::try_parse_from(words)
        .map_err(|e| format!("demo recipe for {file}: {e}"))?
        .gen;
    let channels = crate::gen::render_channels(&args).map_err(|e| e.to_string())?;
    let frames = channels.first().map_or(0, Vec::len);
    let mut out = Vec::with_capacity(frames * channels.len());
    for i in 0..frames {
        for c in &channels {
            // Full scale as the 24-bit file has it: clamped at ±1.
            out.push(c[i].clamp(-1.0, 1.0) as f32);
        }
    }
    Ok((args.rate, channels.len(), out))
}

/// Resolved screen settings.
struct Screen {
    meter: Ballistics,
    fps: u32,
    onset: f64,
    snapshot_dir: PathBuf,
    compare: Vec<Fingerprint>,
    settings: EngineSettings,
}

fn screen_settings(a: &ScreenArgs) -> Result<Screen, String> {
    let files = crate::config::layered(a.config.as_deref()).map_err(|e| e.to_string())?;
    let cfg = crate::config::builtin_defaults().merge(files);
    let plan = crate::cli::plan_from(&cfg)?;
    let meter = a
        .meter
        .or(cfg.watch.meter)
        .unwrap_or(Ballistics::SamplePeak);
    let fps = a.fps.or(cfg.watch.fps).unwrap_or(20);
    let onset = a.onset.or(cfg.watch.onset_pct).unwrap_or(1.0);
    if !(onset > 0.0 && onset < 100.0) {
        return Err(format!("--onset {onset} % must be between 0 and 100"));
    }
    let snapshot_dir = a
        .snapshot_dir
        .clone()
        .or(cfg.watch.snapshot_dir.clone())
        .unwrap_or_else(|| PathBuf::from("."));
    if a.compare.len() > 2 {
        return Err("--compare takes at most two files (A and B)".into());
    }
    let compare = a
        .compare
        .iter()
        .map(|p| {
            let text = std::fs::read_to_string(p).map_err(|e| format!("{}: {e}", p.display()))?;
            let label = p.file_name().map_or_else(
                || p.display().to_string(),
                |n| n.to_string_lossy().into_owned(),
            );
            Fingerprint::from_json(&text, &label).map_err(|e| format!("{}: {e}", p.display()))
        })
        .collect::<Result<Vec<_>, _>>()?;
    let settings = EngineSettings {
        channel: plan.settings.channel,
        summary_every_s: None,
        onset_thd_pct: onset,
        meter_every_s: Some(1.0 / 30.0),
        tone_events: true,
        ..EngineSettings::default()
    };
    Ok(Screen {
        meter,
        fps,
        onset,
        snapshot_dir,
        compare,
        settings,
    })
}

/// `brink watch`; returns the exit status.
pub fn run_watch<E: Write>(args: &WatchArgs, err: &mut E) -> u8 {
    let result = screen_settings(&args.screen).and_then(|screen| {
        if let Some(path) = &args.follow {
            return follow(path, screen);
        }
        let spec = match args.input.as_deref().and_then(|i| i.strip_prefix("file:")) {
            Some(path) => SourceSpec::File {
                path: PathBuf::from(path),
                looping: args.looping,
                pace: Pace::RealTime,
            },
            None => SourceSpec::Device {
                host: args.host.clone(),
                input: args.input.clone(),
                rate: args.rate,
            },
        };
        let mode = if matches!(spec, SourceSpec::File { .. }) {
            "file"
        } else {
            "live"
        };
        live(&spec, args.channels.as_deref(), mode, screen)
    });
    finish(result, "watch", err)
}

/// `brink demo`; returns the exit status.
pub fn run_demo<W: Write, E: Write>(args: &DemoArgs, out: &mut W, err: &mut E) -> u8 {
    if args.list {
        for (name, file, what) in SCENES {
            if writeln!(out, "{name:<13} {what}\n{:<13} (demo-tones/{file})", "").is_err() {
                return crate::EXIT_OK;
            }
        }
        return crate::EXIT_OK;
    }
    let result = (|| {
        let (name, file, _) = SCENES
            .iter()
            .find(|(n, _, _)| *n == args.scene)
            .ok_or_else(|| {
                let names: Vec<&str> = SCENES.iter().map(|s| s.0).collect();
                format!(
                    "no demo called '{}'; try one of: {}",
                    args.scene,
                    names.join(", ")
                )
            })?;
        let screen = screen_settings(&args.screen)?;
        let (rate, channels, samples) = render_scene(file)?;
        let spec = SourceSpec::Memory {
            name: format!("{name} (demo-tones/{file}, looping)"),
            rate,
            channels,
            samples: Arc::new(samples),
        };
        live(&spec, None, "demo", screen)
    })();
    finish(result, "demo", err)
}

fn finish<E: Write>(result: Result<(), String>, what: &str, err: &mut E) -> u8 {
    match result {
        Ok(()) => crate::EXIT_OK,
        Err(msg) => {
            let _ = writeln!(err, "brink {what}: {msg}");
            crate::EXIT_FILE_ERROR
        }
    }
}

fn dashboard(meta: SourceMeta, mode: &str, screen: &Screen) -> Dashboard {
    let mut d = Dashboard::new(meta, mode, screen.meter, screen.onset);
    match screen.compare.as_slice() {
        [b] => d.snapshots[1] = Some(b.clone()),
        [a, b] => {
            d.snapshots[0] = Some(a.clone());
            d.snapshots[1] = Some(b.clone());
        }
        _ => {}
    }
    d
}

fn live(
    spec: &SourceSpec,
    channels: Option<&str>,
    mode: &str,
    screen: Screen,
) -> Result<(), String> {
    let session = Session::start(spec, channels, screen.settings.clone(), 4096)?;
    let mut d = dashboard(session.meta.clone(), mode, &screen);
    let (tx, rx) = unbounded();
    let stop = Arc::new(AtomicBool::new(false));
    let feeder = feed::spawn_live(session, tx, Arc::clone(&stop))
        .map_err(|e| format!("cannot start the feed thread: {e}"))?;
    let shown = on_terminal(&mut d, &rx, &screen);
    stop.store(true, Ordering::Relaxed);
    let source_error = feeder.join().ok().and_then(|(_, e)| e);
    shown?;
    match source_error {
        Some(e) => Err(e),
        None => Ok(()),
    }
}

fn follow(path: &std::path::Path, screen: Screen) -> Result<(), String> {
    let meta = feed::read_log_start(path, Duration::from_secs(10))?;
    let mut d = dashboard(meta, &format!("following {}", path.display()), &screen);
    let (tx, rx) = unbounded();
    let stop = Arc::new(AtomicBool::new(false));
    let follower = feed::spawn_follow(path.to_path_buf(), tx, Arc::clone(&stop))
        .map_err(|e| format!("cannot start the follow thread: {e}"))?;
    let shown = on_terminal(&mut d, &rx, &screen);
    stop.store(true, Ordering::Relaxed);
    let _ = follower.join();
    shown
}

/// Keys, resizes and signals into one channel.
fn spawn_inputs(tx: Sender<Input>) -> Result<(), String> {
    let mut signals = signal_hook::iterator::Signals::new([
        signal_hook::consts::SIGTERM,
        signal_hook::consts::SIGHUP,
        signal_hook::consts::SIGINT,
    ])
    .map_err(|e| format!("cannot install signal handlers: {e}"))?;
    let sig_tx = tx.clone();
    std::thread::Builder::new()
        .name("brink-signals".into())
        .spawn(move || {
            if let Some(s) = signals.forever().next() {
                let _ = sig_tx.send(Input::Signal(s));
            }
        })
        .map_err(|e| format!("cannot start the signal thread: {e}"))?;
    std::thread::Builder::new()
        .name("brink-keys".into())
        .spawn(move || {
            while let Ok(ev) = crossterm::event::read() {
                if tx.send(Input::Term(ev)).is_err() {
                    break;
                }
            }
        })
        .map_err(|e| format!("cannot start the key thread: {e}"))?;
    Ok(())
}

/// Run the screen on the terminal, restoring it however the screen ends (the panic hook that
/// `ratatui::init` installs restores it on a panic too).
fn on_terminal(
    d: &mut Dashboard,
    updates: &crossbeam_channel::Receiver<crate::ui::model::Update>,
    screen: &Screen,
) -> Result<(), String> {
    let (in_tx, in_rx) = unbounded();
    spawn_inputs(in_tx)?;
    let mut terminal =
        ratatui::try_init().map_err(|e| format!("cannot set up the terminal: {e}"))?;
    let opts = ScreenOptions {
        fps: screen.fps,
        theme: Theme::from_env(),
        snapshot_dir: screen.snapshot_dir.clone(),
    };
    let result = run_screen(&mut terminal, d, updates, &in_rx, &opts);
    ratatui::restore();
    result.map(|_| ()).map_err(|e| format!("terminal: {e}"))
}
