//! The status line: the input's state, the dropped-frame, xrun and load counters, a lost
//! input's reason, the last message, and the help and quit keys when they fit.

use ratatui::buffer::Buffer;
use ratatui::layout::Rect;
use ratatui::style::{Color, Modifier};
use ratatui::text::{Line, Span};
use ratatui::widgets::Widget;

use super::Theme;
use crate::ui::model::{Dashboard, InputStatus};

pub(super) fn render_status(d: &Dashboard, theme: Theme, area: Rect, buf: &mut Buffer) {
    let s = &d.shown().status;
    // The counters come right after the state, so an 80-column line keeps them; a long reason
    // for a loss goes last.
    let (input, style, reason) = match &s.input {
        InputStatus::Ok => ("input ok".to_string(), theme.fg(Color::Green), None),
        InputStatus::Lost(r) => (
            "INPUT LOST, retrying".to_string(),
            theme.fg(Color::Red).add_modifier(Modifier::BOLD),
            Some(r.clone()),
        ),
        InputStatus::Ended(r) => (format!("input ended ({r})"), theme.fg(Color::Yellow), None),
    };
    let load = s
        .load
        .map_or("--".to_string(), |l| format!("{:.1} %", 100.0 * l));
    let mut spans = vec![
        Span::styled(input, style),
        Span::raw(format!(
            " · dropped {} · xruns {} · analysis load {load}",
            s.dropped_frames, s.xruns
        )),
    ];
    if let Some(r) = reason {
        spans.push(Span::styled(format!(" · {r}"), style));
    }
    if let Some(m) = &d.message {
        spans.push(Span::styled(format!(" · {m}"), theme.fg(Color::Cyan)));
    }
    let keys = "  ? help  q quit";
    let used: usize = spans.iter().map(|s| s.width()).sum();
    if used + keys.len() <= area.width as usize {
        spans.push(Span::raw(
            " ".repeat(area.width as usize - used - keys.len()),
        ));
        spans.push(Span::styled(keys, theme.fg(Color::Gray)));
    }
    Line::from(spans).render(area, buf);
}
