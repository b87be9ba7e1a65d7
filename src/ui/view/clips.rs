//! The recent clips: one line per clip episode, newest first (time, channel, kind by symbol and
//! word, level, length).

use ratatui::buffer::Buffer;
use ratatui::layout::Rect;
use ratatui::style::{Color, Style};
use ratatui::text::Line;
use ratatui::widgets::{Block, Borders, Widget};

use super::{num, truncate, Theme};
use crate::dsp::clip::ClipKind;
use crate::ui::model::{clock, Dashboard};

pub(super) fn render_clips(d: &Dashboard, theme: Theme, area: Rect, buf: &mut Buffer) {
    let shown = d.shown();
    let block = Block::default()
        .borders(Borders::TOP)
        .title(Line::from(" recent clips ").style(theme.fg(Color::Cyan)));
    let inner = block.inner(area);
    block.render(area, buf);
    if shown.clips.is_empty() {
        buf.set_string(inner.x, inner.y, "none", theme.fg(Color::DarkGray));
        return;
    }
    for (i, l) in shown.clips.iter().take(inner.height as usize).enumerate() {
        let e = &l.event;
        let (sym, word) = match e.kind {
            ClipKind::Over => ('◆', "over"),
            ClipKind::FlatTop => ('▲', "flat top"),
        };
        let len = if l.open {
            "going on".to_string()
        } else {
            format!("{:.2} s, {} samples", e.end_s - e.start_s, e.samples)
        };
        let text = format!(
            "{:>8}  ch {:<2} {sym} {word:<8} {} dBFS  {len}",
            clock(e.start_s),
            l.channel,
            num(e.level_dbfs, 5, 1)
        );
        buf.set_string(
            inner.x,
            inner.y + i as u16,
            truncate(&text, inner.width),
            Style::default(),
        );
    }
}
