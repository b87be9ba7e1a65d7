//! `brink watch`: its arguments, the options every dashboard mode shares (`ScreenArgs`) and their
//! resolution into screen settings, and the run on a live input, a WAV file or a followed log.

use std::io::Write;
use std::path::PathBuf;

use clap::Args;

use super::common::{configured, plan_from};
use crate::dsp::ballistics::Ballistics;
use crate::live::engine::EngineSettings;
use crate::live::session::SourceSpec;
use crate::live::source::Pace;
use crate::ui::model::Fingerprint;
use crate::ui::terminal::{follow, live, Screen};

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

/// The screen settings: the options given, then the configuration files, then the defaults.
pub fn screen_settings(a: &ScreenArgs) -> Result<Screen, String> {
    let cfg = configured(a.config.as_deref())?;
    let plan = plan_from(&cfg)?;
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
            Fingerprint::from_snapshot_json(&text, &p.display().to_string(), &label)
                .map_err(|e| format!("{}: {e}", p.display()))
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
pub fn run<E: Write>(args: &WatchArgs, err: &mut E) -> u8 {
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

/// The exit status of a dashboard run; an error is printed as `brink WHAT: ...`.
pub fn finish<E: Write>(result: Result<(), String>, what: &str, err: &mut E) -> u8 {
    match result {
        Ok(()) => crate::EXIT_OK,
        Err(msg) => {
            let _ = writeln!(err, "brink {what}: {msg}");
            crate::EXIT_FILE_ERROR
        }
    }
}
