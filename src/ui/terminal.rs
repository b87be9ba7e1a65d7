//! The dashboard on the real terminal: a live session or a followed log fed to the screen loop,
//! keys, resizes and signals read on their own threads, and the terminal set up and restored
//! however the screen ends.

use std::path::PathBuf;
use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::Arc;
use std::time::Duration;

use crossbeam_channel::{unbounded, Sender};

use super::model::{Dashboard, Fingerprint};
use super::view::Theme;
use super::{feed, run_screen, Input, ScreenOptions};
use crate::dsp::ballistics::Ballistics;
use crate::live::engine::EngineSettings;
use crate::live::session::{Session, SourceMeta, SourceSpec};

/// Resolved screen settings.
pub struct Screen {
    /// Meter ballistics.
    pub meter: Ballistics,
    /// Most screen frames a second.
    pub fps: u32,
    /// THD (%) whose first crossing marks the clipping onset.
    pub onset: f64,
    /// Folder the s key saves snapshots into.
    pub snapshot_dir: PathBuf,
    /// Saved fingerprints loaded as B, or as A then B.
    pub compare: Vec<Fingerprint>,
    /// The live analysis settings.
    pub settings: EngineSettings,
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

/// Measure `spec` (the `channels` given, or all) and show it until the user quits; `mode` names
/// the source on screen (live, file, demo).
pub fn live(
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

/// Draw the log at `path` as another brink process writes it, until the user quits.
pub fn follow(path: &std::path::Path, screen: Screen) -> Result<(), String> {
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
    updates: &crossbeam_channel::Receiver<super::model::Update>,
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
