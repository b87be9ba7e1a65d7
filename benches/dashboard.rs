//! Dashboard load: the targets of the dashboard issue.
//!
//! 1. CPU: the real `brink watch` process (capture from a WAV file played at real speed,
//!    analysis, drawing at 20 frames a second) in a real terminal (tmux, 80×24) for 2 channels
//!    at 48 kHz; its user + system CPU time from `/proc/PID/stat` over 20 s after a 3 s warm-up,
//!    as a share of one core. Target: under 5 %.
//! 2. Clip to screen: the same pipeline in-process (session, feed thread, screen loop) drawing
//!    into a test backend that notes when a drawn frame first shows the flat-top lamp. Measured
//!    from the instant the paced source was due to write the block holding the first clipped
//!    sample. Target: within 50 ms.
//!
//! Run with `cargo bench --bench dashboard` (about 40 s; needs tmux). Prints figures; asserts
//! nothing.

use std::error::Error;
use std::f64::consts::PI;
use std::process::Command;
use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::{Arc, Mutex};
use std::time::{Duration, Instant};

use brink::dsp::ballistics::Ballistics;
use brink::live::engine::EngineSettings;
use brink::live::session::{Session, SourceSpec};
use brink::ui::model::Dashboard;
use brink::ui::view::Theme;
use brink::ui::{feed, run_screen, Input, ScreenOptions};
use ratatui::backend::{Backend, ClearType, TestBackend, WindowSize};
use ratatui::buffer::Cell;
use ratatui::layout::{Position, Size};
use ratatui::Terminal;

type Res<T> = Result<T, Box<dyn Error>>;

const RATE: u32 = 48_000;

/// `secs` of 2-channel audio: a 997 Hz tone at -10 dBFS on both; channel 1 flat-topped at
/// -6 dBFS for 50 ms from `clip_at` s of every second (when given).
fn programme(secs: usize, clip_at: Option<f64>) -> Vec<f32> {
    let n = RATE as usize * secs;
    let mut out = Vec::with_capacity(n * 2);
    for i in 0..n {
        let t = i as f64 / f64::from(RATE);
        let x = (2.0 * PI * 997.0 * t).sin();
        let clipping = clip_at.is_some_and(|c| (c..c + 0.05).contains(&t.fract()));
        let a = if clipping {
            (0.9 * x).clamp(-0.5, 0.5)
        } else {
            0.316 * x
        };
        out.push(a as f32);
        out.push((0.316 * x) as f32);
    }
    out
}

fn write_wav(path: &std::path::Path, samples: &[f32]) -> Res<()> {
    let spec = hound::WavSpec {
        channels: 2,
        sample_rate: RATE,
        bits_per_sample: 32,
        sample_format: hound::SampleFormat::Float,
    };
    let mut w = hound::WavWriter::create(path, spec)?;
    for &s in samples {
        w.write_sample(s)?;
    }
    w.finalize()?;
    Ok(())
}

fn cpu_ticks(pid: u32) -> Res<u64> {
    let stat = std::fs::read_to_string(format!("/proc/{pid}/stat"))?;
    let rest = stat.rsplit_once(')').ok_or("malformed stat")?.1;
    let f: Vec<&str> = rest.split_whitespace().collect();
    // Fields 14 and 15 (utime, stime) are the 12th and 13th after the command name.
    Ok(f[11].parse::<u64>()? + f[12].parse::<u64>()?)
}

fn clock_ticks() -> f64 {
    let out = Command::new("getconf").arg("CLK_TCK").output();
    out.ok()
        .and_then(|o| String::from_utf8(o.stdout).ok())
        .and_then(|s| s.trim().parse().ok())
        .unwrap_or(100.0)
}

fn cpu_in_tmux() -> Res<f64> {
    let dir = tempfile::tempdir()?;
    let wav = dir.path().join("two-channels.wav");
    write_wav(&wav, &programme(10, Some(0.5)))?;
    let socket = format!("brink-bench-{}", std::process::id());
    let bin = env!("CARGO_BIN_EXE_brink");
    let cmd = format!(
        "exec '{bin}' watch --input 'file:{}' --loop --fps 20",
        wav.display()
    );
    let ok = Command::new("tmux")
        .args([
            "-L",
            &socket,
            "-f",
            "/dev/null",
            "new-session",
            "-d",
            "-x",
            "80",
            "-y",
            "24",
            &cmd,
        ])
        .status()?;
    if !ok.success() {
        return Err("tmux new-session failed (is tmux installed?)".into());
    }
    let kill = || {
        let _ = Command::new("tmux")
            .args(["-L", &socket, "kill-server"])
            .status();
    };
    let pid_txt = Command::new("tmux")
        .args(["-L", &socket, "list-panes", "-F", "#{pane_pid}"])
        .output()?;
    let pid: u32 = String::from_utf8(pid_txt.stdout)?.trim().parse()?;
    std::thread::sleep(Duration::from_secs(3));
    let (t0, c0) = (Instant::now(), cpu_ticks(pid)?);
    std::thread::sleep(Duration::from_secs(20));
    let (t1, c1) = (Instant::now(), cpu_ticks(pid)?);
    let screen = Command::new("tmux")
        .args(["-L", &socket, "capture-pane", "-p"])
        .output()?;
    kill();
    let screen = String::from_utf8_lossy(&screen.stdout);
    if !screen.contains("recent clips") {
        return Err(format!("the dashboard was not on screen:\n{screen}").into());
    }
    let cpu_s = (c1 - c0) as f64 / clock_ticks();
    Ok(100.0 * cpu_s / (t1 - t0).as_secs_f64())
}

/// A test backend that notes when a drawn frame first holds `needle`.
struct Probe {
    inner: TestBackend,
    needle: &'static str,
    seen: Arc<Mutex<Option<Instant>>>,
}

impl Backend for Probe {
    type Error = std::io::Error;
    fn draw<'a, I>(&mut self, content: I) -> Result<(), Self::Error>
    where
        I: Iterator<Item = (u16, u16, &'a Cell)>,
    {
        self.inner.draw(content).map_err(|e| match e {})
    }
    fn hide_cursor(&mut self) -> Result<(), Self::Error> {
        self.inner.hide_cursor().map_err(|e| match e {})
    }
    fn show_cursor(&mut self) -> Result<(), Self::Error> {
        self.inner.show_cursor().map_err(|e| match e {})
    }
    fn get_cursor_position(&mut self) -> Result<Position, Self::Error> {
        self.inner.get_cursor_position().map_err(|e| match e {})
    }
    fn set_cursor_position<P: Into<Position>>(&mut self, p: P) -> Result<(), Self::Error> {
        self.inner.set_cursor_position(p).map_err(|e| match e {})
    }
    fn clear(&mut self) -> Result<(), Self::Error> {
        self.inner.clear().map_err(|e| match e {})
    }
    fn clear_region(&mut self, t: ClearType) -> Result<(), Self::Error> {
        self.inner.clear_region(t).map_err(|e| match e {})
    }
    fn size(&self) -> Result<Size, Self::Error> {
        self.inner.size().map_err(|e| match e {})
    }
    fn window_size(&mut self) -> Result<WindowSize, Self::Error> {
        self.inner.window_size().map_err(|e| match e {})
    }
    fn flush(&mut self) -> Result<(), Self::Error> {
        self.inner
            .flush()
            .map_err(|e| -> std::io::Error { match e {} })?;
        let mut seen = self
            .seen
            .lock()
            .map_err(|_| std::io::Error::other("poisoned"))?;
        if seen.is_none() {
            let buf = self.inner.buffer();
            let text: String = buf.content().iter().map(|c| c.symbol()).collect();
            if text.contains(self.needle) {
                *seen = Some(Instant::now());
            }
        }
        Ok(())
    }
}

/// One run: clip at `clip_s` of stream time; returns ms from due write to drawn lamp.
fn clip_to_screen(clip_s: f64) -> Res<f64> {
    // Two seconds of audio with the clip once, at clip_s (the source does not loop... it does:
    // the demo source loops, so the clip recurs every 2 s; only the first counts).
    let secs = 2;
    let mut samples = programme(secs, None);
    let first = (clip_s * f64::from(RATE)) as usize;
    for i in first..first + (RATE as usize / 20) {
        let x = (2.0 * PI * 997.0 * i as f64 / f64::from(RATE)).sin();
        samples[2 * i] = (0.9 * x).clamp(-0.5, 0.5) as f32;
    }
    // The first clipped sample is the first past the plateau level after `first`.
    let first_clipped = (first..first + RATE as usize / 20)
        .find(|&i| samples[2 * i].abs() >= 0.5 - 1e-6)
        .ok_or("no clipped sample")?;
    let settings = EngineSettings {
        summary_every_s: None,
        meter_every_s: Some(1.0 / 30.0),
        tone_events: true,
        ..EngineSettings::default()
    };
    let spec = SourceSpec::Memory {
        name: "bench".into(),
        rate: RATE,
        channels: 2,
        samples: Arc::new(samples),
    };
    let started = Instant::now();
    let session = Session::start(&spec, None, settings, 4096)?;
    let mut d = Dashboard::new(session.meta.clone(), "bench", Ballistics::SamplePeak, 1.0);
    let (tx, rx) = crossbeam_channel::unbounded();
    let stop = Arc::new(AtomicBool::new(false));
    let feeder = feed::spawn_live(session, tx, Arc::clone(&stop))?;
    let seen = Arc::new(Mutex::new(None));
    let backend = Probe {
        inner: TestBackend::new(80, 24),
        needle: "▲ FLAT",
        seen: Arc::clone(&seen),
    };
    let mut terminal = Terminal::new(backend)?;
    let (in_tx, in_rx) = crossbeam_channel::unbounded();
    let seen2 = Arc::clone(&seen);
    let watcher = std::thread::spawn(move || {
        let deadline = Instant::now() + Duration::from_secs(10);
        while Instant::now() < deadline {
            if seen2.lock().map(|s| s.is_some()).unwrap_or(true) {
                break;
            }
            std::thread::sleep(Duration::from_millis(5));
        }
        let _ = in_tx.send(Input::Signal(15));
    });
    let opts = ScreenOptions {
        fps: 20,
        theme: Theme { color: true },
        snapshot_dir: std::env::temp_dir(),
    };
    run_screen(&mut terminal, &mut d, &rx, &in_rx, &opts)?;
    stop.store(true, Ordering::Relaxed);
    let _ = watcher.join();
    let _ = feeder.join();
    let drawn = seen
        .lock()
        .map_err(|_| "poisoned")?
        .ok_or("the lamp never showed")?;
    // The paced source writes 10 ms blocks, each due at its first frame's time; the block holding
    // the first clipped sample is due at its start.
    let block = RATE as usize / 100;
    let due =
        started + Duration::from_secs_f64((first_clipped / block * block) as f64 / f64::from(RATE));
    Ok(drawn.saturating_duration_since(due).as_secs_f64() * 1e3)
}

fn main() -> Res<()> {
    println!("Dashboard load (2 channels at 48 kHz, 80x24, 20 frames a second)");
    match cpu_in_tmux() {
        Ok(pct) => println!(
            "  CPU of the whole `brink watch` process over 20 s: {pct:.2} % of one core (target < 5 %): {}",
            if pct < 5.0 { "met" } else { "NOT met" }
        ),
        Err(e) => println!("  CPU: could not measure: {e}"),
    }
    let mut lat = Vec::new();
    for k in 0..8 {
        // Different places within the 10 ms blocks and the 50 ms frame gap.
        let at = 1.2 + 0.0137 * k as f64;
        lat.push(clip_to_screen(at)?);
    }
    lat.sort_by(f64::total_cmp);
    println!(
        "  clip to screen over {} runs: min {:.1} ms, median {:.1} ms, max {:.1} ms (target <= 50 ms): {}",
        lat.len(),
        lat[0],
        lat[lat.len() / 2],
        lat[lat.len() - 1],
        if lat[lat.len() - 1] <= 50.0 { "met" } else { "NOT met" }
    );
    Ok(())
}
