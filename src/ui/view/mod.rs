//! Drawing the dashboard: pure functions from [`Dashboard`] to a ratatui buffer, generic over the
//! backend so tests draw into `TestBackend` exactly as the terminal does.
//!
//! Screen, top to bottom: a title line; the meters (one line per channel: level bar with
//! peak-hold marker, peak, true peak, headroom, clip lamp; or, when the channels would not fit
//! one a line, compact cells side by side: number, small bar, peak, lamp symbol, paged beyond
//! one screenful); the focused channel's harmonic bars and figures (or the A/B comparison: bars
//! per harmonic side by side and their differences); the recent clips; a status line. Meaning
//! never rests on colour alone: odd and even harmonics differ by glyph, the lamps by symbol and
//! word.
//!
//! One module per panel, each drawing into the `Rect` it is given: `title`, `meters` (and
//! `compact` cells for many channels), `fingerprint` (harmonic bars, figures, balance and onset
//! lines), `compare` (A/B side by side), `clips`, `status` and the `help` overlay.
//! This module lays the screen out and holds what they share: the scales, the glyphs, [`Theme`]
//! and the number formatting.

use ratatui::buffer::Buffer;
use ratatui::layout::{Constraint, Layout, Rect};
use ratatui::style::{Color, Style};
use ratatui::widgets::{Paragraph, Widget, Wrap};
use ratatui::Frame;

use crate::ui::model::{Dashboard, View};

mod clips;
mod compact;
mod compare;
mod fingerprint;
#[cfg(test)]
mod fixtures;
mod help;
mod meters;
mod status;
mod title;

pub use compact::CompactMeter;
pub use compare::CompareBars;
pub use fingerprint::{balance_line, HarmonicBars};
pub use help::KEYS;
pub use meters::{lamp, meter_grid, meter_page, render_bar, MeterGrid, MeterLine, COMPACT_CELL_W};

use clips::render_clips;
use compare::render_compare;
use fingerprint::render_focus;
use help::render_help;
use meters::render_meters;
use status::render_status;
use title::render_title;

/// Smallest screen the dashboard draws on; below it, a notice.
pub const MIN_WIDTH: u16 = 40;
/// Smallest screen height.
pub const MIN_HEIGHT: u16 = 12;
/// Meter scale: its left end (dBFS).
pub const METER_FLOOR_DB: f64 = -60.0;
/// Harmonic bars: their floor (dBc).
pub const BARS_FLOOR_DBC: f64 = -120.0;
/// Glyph of odd-order harmonic bars (the fundamental is odd, order 1).
pub const ODD_GLYPH: char = '█';
/// Glyph of even-order harmonic bars.
pub const EVEN_GLYPH: char = '▒';

/// Colours, or none (`NO_COLOR`).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Theme {
    /// Use colours.
    pub color: bool,
}

impl Theme {
    /// Colours unless `NO_COLOR` is set to anything non-empty (no-color.org).
    pub fn from_env() -> Self {
        Theme {
            color: std::env::var_os("NO_COLOR").is_none_or(|v| v.is_empty()),
        }
    }

    fn fg(self, c: Color) -> Style {
        if self.color {
            Style::default().fg(c)
        } else {
            Style::default()
        }
    }

    fn level(self, db: f64) -> Style {
        self.fg(if db >= -6.0 {
            Color::Red
        } else if db >= -18.0 {
            Color::Yellow
        } else {
            Color::Green
        })
    }
}

fn num(v: Option<f64>, width: usize, decimals: usize) -> String {
    match v {
        Some(x) if x.is_finite() => {
            let text = format!("{x:>width$.decimals$}");
            // A value that rounds to zero reads 0, not -0.
            if text
                .trim_start()
                .trim_start_matches('-')
                .chars()
                .all(|c| c == '0' || c == '.')
            {
                format!("{:>width$.decimals$}", 0.0)
            } else {
                text
            }
        }
        _ => format!("{:>width$}", "--"),
    }
}

/// Draw the whole dashboard.
pub fn draw(frame: &mut Frame<'_>, d: &Dashboard, theme: Theme) {
    let area = frame.area();
    render(d, theme, area, frame.buffer_mut());
}

/// Draw into a buffer region (what [`draw`] does with the frame's).
pub fn render(d: &Dashboard, theme: Theme, area: Rect, buf: &mut Buffer) {
    if area.width < MIN_WIDTH || area.height < MIN_HEIGHT {
        let text = format!(
            "brink: too small ({}x{}); needs {MIN_WIDTH}x{MIN_HEIGHT}. q quits",
            area.width, area.height
        );
        Paragraph::new(text)
            .wrap(Wrap { trim: true })
            .render(area, buf);
        return;
    }
    let grid = meter_grid(d, area);
    let meter_lines = grid.rows;
    let middle = (area.height.saturating_sub(1 + 1 + meter_lines + 1 + 2)).clamp(10, 14);
    let [title, meters, mid, clips, status] = Layout::vertical([
        Constraint::Length(1),
        Constraint::Length(meter_lines + 1),
        Constraint::Length(middle),
        Constraint::Min(2),
        Constraint::Length(1),
    ])
    .areas(area);
    render_title(d, theme, title, buf);
    render_meters(d, theme, grid, meters, buf);
    match d.view {
        View::Harmonics => render_focus(d, theme, mid, buf),
        View::Compare => render_compare(d, theme, mid, buf),
    }
    render_clips(d, theme, clips, buf);
    render_status(d, theme, status, buf);
    if d.help {
        render_help(theme, area, buf);
    }
}

/// Write `text` at (`x`, `y`), cut at column `right`; returns the column after it.
fn put(buf: &mut Buffer, x: u16, y: u16, right: u16, text: &str, style: Style) -> u16 {
    let room = right.saturating_sub(x);
    let text = truncate(text, room);
    let w = text.chars().count() as u16;
    if w > 0 {
        buf.set_string(x, y, &text, style);
    }
    x + w
}

fn truncate(s: &str, width: u16) -> String {
    s.chars().take(width as usize).collect()
}

#[cfg(test)]
mod tests {
    use ratatui::backend::TestBackend;
    use ratatui::Terminal;

    use super::fixtures::{
        fingerprint, many_channels, recorded_stage_box, screen, text, text_of, COLOUR, PLAIN,
    };
    use super::*;
    use crate::dsp::ballistics::Ballistics;
    use crate::ui::model::Update;

    /// The stage box at 2.9 s on 80×24: meters for four inputs, the vocal channel (2) in focus
    /// with its odd-only fingerprint, its flat-top lamp, the clips list.
    #[test]
    fn whole_screen_stage_box_80x24() {
        let mut d = recorded_stage_box(2.9);
        d.move_focus(1);
        let t = screen(&d, 80, 24, PLAIN);
        insta::assert_snapshot!("stage_box_80x24", text(&t));
    }

    #[test]
    fn whole_screen_help_and_compare() {
        let mut d = recorded_stage_box(2.0);
        d.move_focus(1);
        d.store(0);
        d.move_focus(1);
        d.store(1);
        d.view = View::Compare;
        insta::assert_snapshot!("compare_80x24", text(&screen(&d, 80, 24, PLAIN)));
        d.help = true;
        insta::assert_snapshot!("help_80x24", text(&screen(&d, 80, 24, PLAIN)));
    }

    #[test]
    fn a_lost_input_keeps_the_counters_in_view_and_marks_the_meters() {
        let mut d = recorded_stage_box(1.2);
        d.apply(Update::Health {
            xruns: 7,
            load: Some(0.021),
        });
        d.apply(Update::InputLost(
            "JACK Input: JACK server shut down: the server is gone for good".into(),
        ));
        let s = text(&screen(&d, 80, 24, PLAIN));
        let lines: Vec<&str> = s.lines().collect();
        assert!(lines[0].contains("INPUT LOST"), "{s}");
        let status = lines[23];
        assert!(
            status.starts_with("INPUT LOST, retrying · dropped 0 · xruns 7 · analysis load 2.1 %"),
            "{status}"
        );
        // The reason follows, cut at the edge.
        assert!(status.ends_with(" · JACK Input: J"), "{status}");
        d.apply(Update::InputRestored);
        let s = text(&screen(&d, 80, 24, PLAIN));
        assert!(!s.contains("INPUT LOST"), "{s}");
    }

    #[test]
    fn any_size_draws_without_panic() {
        let d = recorded_stage_box(1.2);
        for (w, h) in [
            (1, 1),
            (0, 0),
            (10, 3),
            (39, 30),
            (40, 12),
            (41, 13),
            (80, 24),
            (200, 60),
            (120, 12),
        ] {
            let mut t = Terminal::new(TestBackend::new(w, h)).expect("terminal");
            t.draw(|f| draw(f, &d, COLOUR)).expect("draw");
        }
        let small = text(&screen(&d, 30, 8, PLAIN));
        assert!(small.contains("too small"), "{small}");
        // Every widget on an empty area.
        let mut buf = Buffer::empty(Rect::ZERO);
        let c = &d.shown().channels[0];
        (&MeterLine {
            channel: c,
            ballistics: Ballistics::Vu,
            focused: true,
            now_s: 1.0,
            theme: COLOUR,
        })
            .render(Rect::ZERO, &mut buf);
        render_bar(Some(-3.0), Some(-1.0), COLOUR, Rect::ZERO, &mut buf);
        render(&d, COLOUR, Rect::ZERO, &mut buf);
        (&CompactMeter {
            channel: c,
            ballistics: Ballistics::Vu,
            focused: true,
            number_width: 2,
            theme: COLOUR,
        })
            .render(Rect::ZERO, &mut buf);
        let (a, b) = (fingerprint("A", &[(3, -20.0)]), fingerprint("B", &[]));
        (&CompareBars {
            a: &a,
            b: &b,
            theme: COLOUR,
        })
            .render(Rect::ZERO, &mut buf);
        // Many channels (compact cells) and the comparison, at every size too.
        let mut many = many_channels(64);
        many.snapshots = [Some(a), Some(b)];
        for (w, h) in [(1, 1), (40, 12), (41, 13), (59, 16), (80, 24), (200, 60)] {
            for view in [View::Harmonics, View::Compare] {
                many.view = view;
                let mut t = Terminal::new(TestBackend::new(w, h)).expect("terminal");
                t.draw(|f| draw(f, &many, COLOUR)).expect("draw");
            }
        }
    }

    /// The 64-channel feed on 80x24: compact cells (page 1 of 2), the focused channel's
    /// fingerprint, the clips list.
    #[test]
    fn whole_screen_64_channels_80x24() {
        let d = many_channels(64);
        insta::assert_snapshot!("channels_64_80x24", text_of(&d, 80, 24));
    }
}
