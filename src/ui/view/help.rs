//! The help overlay: every key ([`KEYS`]) in a box over the middle of the screen.

use ratatui::buffer::Buffer;
use ratatui::layout::Rect;
use ratatui::style::Color;
use ratatui::text::Line;
use ratatui::widgets::{Block, Borders, Clear, Paragraph, Widget};

use super::Theme;

/// Every key, for the help overlay and the README.
pub const KEYS: &[(&str, &str)] = &[
    ("Up/Down, k/j", "move the focus between channels"),
    ("PgUp/PgDn", "move the focus a page of channels"),
    ("space", "freeze / unfreeze the picture"),
    ("r", "reset peaks, holds, counters and the clip list"),
    ("a / b", "store the focused fingerprint as A / B"),
    ("s", "save A and B to JSON files (scan channel reports)"),
    ("c", "compare A and B side by side / back"),
    ("m", "next meter ballistics: peak, PPM I, PPM II, VU"),
    ("?", "this help"),
    ("q, Esc, Ctrl-C", "quit"),
];

pub(super) fn render_help(theme: Theme, area: Rect, buf: &mut Buffer) {
    let w = 62.min(area.width);
    let h = (KEYS.len() as u16 + 4).min(area.height);
    let r = Rect::new(
        area.x + (area.width - w) / 2,
        area.y + (area.height - h) / 2,
        w,
        h,
    );
    Clear.render(r, buf);
    let mut lines: Vec<Line> = KEYS
        .iter()
        .map(|(k, what)| Line::from(format!("{k:>15}  {what}")))
        .collect();
    lines.push(Line::from(""));
    lines.push(Line::from("any key closes this help"));
    Paragraph::new(lines)
        .block(
            Block::default()
                .borders(Borders::ALL)
                .title(Line::from(" keys ").style(theme.fg(Color::Cyan))),
        )
        .render(r, buf);
}
