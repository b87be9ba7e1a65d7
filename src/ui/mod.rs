//! The terminal dashboard: state ([`model`]), drawing ([`view`]), what feeds it ([`feed`]) and
//! the screen thread's loop, which waits on findings, keys and signals together and draws at
//! most `fps` times a second, only when something changed.

pub mod feed;
pub mod model;
pub mod terminal;
pub mod view;

use std::io;
use std::path::{Path, PathBuf};
use std::time::{Duration, Instant};

use crossbeam_channel::{select, Receiver};
use crossterm::event::{Event, KeyCode, KeyEvent, KeyEventKind, KeyModifiers};
use ratatui::backend::Backend;
use ratatui::Terminal;

use model::{Dashboard, Update, View};
use view::Theme;

/// What the screen thread waits on besides findings.
#[derive(Debug, Clone, PartialEq)]
pub enum Input {
    /// A key or a resize.
    Term(Event),
    /// SIGTERM, SIGHUP or SIGINT: leave, restoring the terminal.
    Signal(i32),
}

/// What a key asks for.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Action {
    /// Keep going.
    Continue,
    /// Leave.
    Quit,
}

/// Screen options.
#[derive(Debug, Clone)]
pub struct ScreenOptions {
    /// Most frames a second (1 to 30).
    pub fps: u32,
    /// Colours or not.
    pub theme: Theme,
    /// Where `s` writes snapshot files.
    pub snapshot_dir: PathBuf,
}

/// Apply a key to the dashboard.
pub fn handle_key(d: &mut Dashboard, key: KeyEvent, snapshot_dir: &Path) -> Action {
    if key.kind == KeyEventKind::Release {
        return Action::Continue;
    }
    let ctrl = key.modifiers.contains(KeyModifiers::CONTROL);
    match key.code {
        KeyCode::Char('c') if ctrl => return Action::Quit,
        KeyCode::Char('q') => return Action::Quit,
        KeyCode::Esc if !d.help => return Action::Quit,
        _ if d.help => d.help = false,
        KeyCode::Char('?') => d.help = true,
        KeyCode::Up | KeyCode::Char('k') => d.move_focus(-1),
        KeyCode::Down | KeyCode::Char('j') => d.move_focus(1),
        KeyCode::PageUp => d.move_focus(-(d.page.max(1) as isize)),
        KeyCode::PageDown => d.move_focus(d.page.max(1) as isize),
        KeyCode::Char(' ') => d.toggle_freeze(),
        KeyCode::Char('r') => d.reset(),
        KeyCode::Char('a') => d.store(0),
        KeyCode::Char('b') => d.store(1),
        KeyCode::Char('c') => {
            d.view = match d.view {
                View::Harmonics => View::Compare,
                View::Compare => View::Harmonics,
            }
        }
        KeyCode::Char('m') => d.cycle_ballistics(),
        KeyCode::Char('s') => d.message = Some(save_snapshots(d, snapshot_dir)),
        _ => return Action::Continue,
    }
    d.dirty = true;
    Action::Continue
}

/// Write A and B (those stored) as `snapshot-a.json` / `snapshot-b.json`; a message for the
/// status line.
pub fn save_snapshots(d: &Dashboard, dir: &Path) -> String {
    let mut saved = Vec::new();
    for (slot, name) in [(0, "a"), (1, "b")] {
        let Some(f) = &d.snapshots[slot] else {
            continue;
        };
        let path = dir.join(format!("snapshot-{name}.json"));
        let written = model::snapshot_json(f)
            .and_then(|text| std::fs::write(&path, text + "\n").map_err(|e| e.to_string()));
        match written {
            Ok(()) => saved.push(path.display().to_string()),
            Err(e) => return format!("cannot save {}: {e}", path.display()),
        }
    }
    if saved.is_empty() {
        "nothing to save: store A or B first (keys a, b)".to_string()
    } else {
        format!("saved {}", saved.join(", "))
    }
}

/// The screen thread: draw `d` on `terminal`, applying findings from `updates` and keys and
/// signals from `inputs`, until a quit key or a signal. Draws at most `fps` times a second and
/// only when something changed (the clock-driven parts, such as "time since the last clip",
/// count as a change once a second).
pub fn run_screen<B: Backend>(
    terminal: &mut Terminal<B>,
    d: &mut Dashboard,
    updates: &Receiver<Update>,
    inputs: &Receiver<Input>,
    opts: &ScreenOptions,
) -> io::Result<Option<i32>>
where
    B::Error: Into<io::Error>,
{
    let frame_gap = Duration::from_secs_f64(1.0 / f64::from(opts.fps.clamp(1, 30)));
    // A clip or a lost input goes on screen sooner: at the 30-a-second cap, not the chosen rate.
    let urgent_gap = Duration::from_secs_f64(1.0 / 30.0).min(frame_gap);
    let mut last_draw: Option<Instant> = None;
    let mut updates_open = true;
    let mut urgent = false;
    loop {
        let now = Instant::now();
        let gap = if urgent { urgent_gap } else { frame_gap };
        let due = last_draw.map_or(now, |t| t + gap);
        if d.dirty && now >= due {
            draw_frame(terminal, d, opts.theme).map_err(Into::into)?;
            urgent = false;
            last_draw = Some(Instant::now());
        }
        // Sleep until the next frame may be drawn when something waits to be drawn, else until
        // the once-a-second refresh.
        let wait = if d.dirty {
            due.saturating_duration_since(Instant::now())
        } else {
            Duration::from_secs(1)
        };
        let never = crossbeam_channel::never();
        let upd = if updates_open { updates } else { &never };
        select! {
            recv(upd) -> u => match u {
                Ok(u) => {
                    urgent |= is_urgent(&u);
                    d.apply(u);
                    // Take whatever else is waiting in one go.
                    while let Ok(u) = updates.try_recv() {
                        urgent |= is_urgent(&u);
                        d.apply(u);
                    }
                }
                Err(_) => updates_open = false,
            },
            recv(inputs) -> i => match i {
                Ok(Input::Term(Event::Key(k))) => {
                    if handle_key(d, k, &opts.snapshot_dir) == Action::Quit {
                        return Ok(None);
                    }
                }
                Ok(Input::Term(Event::Resize(..))) => {
                    terminal.autoresize().map_err(Into::into)?;
                    d.dirty = true;
                }
                Ok(Input::Term(_)) => {}
                Ok(Input::Signal(s)) => return Ok(Some(s)),
                Err(_) => return Ok(None),
            },
            default(wait) => {
                if !d.dirty && last_draw.is_some_and(|t| t.elapsed() >= Duration::from_secs(1)) {
                    d.dirty = true;
                }
            }
        }
    }
}

/// Draw one frame of `d` and note what the screen holds: the page keys then move the focus by
/// one meter page of this screen.
pub fn draw_frame<B: Backend>(
    terminal: &mut Terminal<B>,
    d: &mut Dashboard,
    theme: Theme,
) -> Result<(), B::Error> {
    let drawn = terminal.draw(|f| view::draw(f, d, theme))?;
    d.page = view::meter_page(d, drawn.area);
    d.dirty = false;
    Ok(())
}

/// Updates worth drawing before the next regular frame.
fn is_urgent(u: &Update) -> bool {
    matches!(
        u,
        Update::ClipStarted { .. } | Update::InputLost(_) | Update::Ended(_)
    )
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::dsp::ballistics::Ballistics;
    use crate::live::session::SourceMeta;

    fn dash() -> Dashboard {
        Dashboard::new(
            SourceMeta {
                host: "test".into(),
                device: "dev".into(),
                sample_rate_hz: 48_000,
                channels: vec![1, 2],
            },
            "live",
            Ballistics::SamplePeak,
            1.0,
        )
    }

    fn key(c: KeyCode) -> KeyEvent {
        KeyEvent::new(c, KeyModifiers::NONE)
    }

    #[test]
    fn keys_do_what_the_help_says() {
        let dir = std::env::temp_dir();
        let mut d = dash();
        assert_eq!(
            handle_key(&mut d, key(KeyCode::Char('?')), &dir),
            Action::Continue
        );
        assert!(d.help);
        // Any key closes the help (and does nothing else).
        handle_key(&mut d, key(KeyCode::Down), &dir);
        assert!(!d.help);
        assert_eq!(d.focus, 0);
        handle_key(&mut d, key(KeyCode::Down), &dir);
        assert_eq!(d.focus, 1);
        handle_key(&mut d, key(KeyCode::Char('m')), &dir);
        assert_eq!(d.ballistics, Ballistics::SamplePeak.next());
        handle_key(&mut d, key(KeyCode::Char(' ')), &dir);
        assert!(d.is_frozen());
        handle_key(&mut d, key(KeyCode::Char('c')), &dir);
        assert_eq!(d.view, View::Compare);
        assert_eq!(
            handle_key(&mut d, key(KeyCode::Char('q')), &dir),
            Action::Quit
        );
        assert_eq!(handle_key(&mut d, key(KeyCode::Esc), &dir), Action::Quit);
        assert_eq!(
            handle_key(
                &mut d,
                KeyEvent::new(KeyCode::Char('c'), KeyModifiers::CONTROL),
                &dir
            ),
            Action::Quit
        );
        let msg = save_snapshots(&d, &dir);
        assert!(msg.starts_with("nothing to save"), "{msg}");
    }

    /// PgUp/PgDn move the focus by the meter page the screen last showed: 36 channels of 64 in
    /// compact cells on 80x24, all 64 on a big screen.
    #[test]
    fn page_keys_move_by_the_page_on_screen() {
        use ratatui::backend::TestBackend;
        let dir = std::env::temp_dir();
        let mut d = Dashboard::new(
            SourceMeta {
                host: "test".into(),
                device: "rack".into(),
                sample_rate_hz: 48_000,
                channels: (1..=64).collect(),
            },
            "live",
            Ballistics::SamplePeak,
            1.0,
        );
        let mut t = Terminal::new(TestBackend::new(80, 24)).expect("terminal");
        draw_frame(&mut t, &mut d, Theme { color: false }).expect("draw");
        assert_eq!(d.page, 36);
        assert!(!d.dirty);
        handle_key(&mut d, key(KeyCode::PageDown), &dir);
        assert_eq!(d.focus, 36, "the first channel of page 2");
        handle_key(&mut d, key(KeyCode::PageDown), &dir);
        assert_eq!(d.focus, 63, "clamped to the last channel");
        handle_key(&mut d, key(KeyCode::PageUp), &dir);
        assert_eq!(d.focus, 27);
        handle_key(&mut d, key(KeyCode::PageUp), &dir);
        assert_eq!(d.focus, 0);
        // Page 2 is drawn when the focus is on it.
        handle_key(&mut d, key(KeyCode::PageDown), &dir);
        draw_frame(&mut t, &mut d, Theme { color: false }).expect("draw");
        let row: String = (0..80)
            .map(|x| t.backend().buffer()[(x, 2)].symbol().to_string())
            .collect();
        assert!(row.starts_with("▶37 "), "{row}");
        // A screen that holds every channel: no page of 36 any more.
        t.backend_mut().resize(200, 60);
        t.autoresize().expect("resize");
        draw_frame(&mut t, &mut d, Theme { color: false }).expect("draw");
        assert_eq!(d.page, 70, "ten columns of seven lines");
    }
}
