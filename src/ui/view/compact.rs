//! Compact meters, for more channels than the screen has lines: a header naming the page and the
//! focused channel's figures, then one small [`CompactMeter`] cell a channel, in columns read
//! down, then across.

use ratatui::buffer::Buffer;
use ratatui::layout::Rect;
use ratatui::style::{Color, Modifier, Style};
use ratatui::widgets::Widget;

use super::meters::{lamp, render_bar, MeterGrid};
use super::{num, put, Theme};
use crate::dsp::ballistics::Ballistics;
use crate::ui::model::{ChannelView, Dashboard};

/// Compact meters: a header naming the page and the focused channel's figures (peak, true
/// peak, headroom, the whole lamp), then [`CompactMeter`] cells down the columns.
pub(super) fn render_compact_meters(
    d: &Dashboard,
    theme: Theme,
    grid: MeterGrid,
    area: Rect,
    buf: &mut Buffer,
) {
    let shown = d.shown();
    let n = shown.channels.len();
    if n == 0 || area.width == 0 || area.height == 0 {
        return;
    }
    let first = grid.first(d.focus).min(n - 1);
    let last = (first + grid.page()).min(n);
    let page = format!(
        " ch {}-{} of {n}{}",
        shown.channels[first].channel,
        shown.channels[last - 1].channel,
        if n > grid.page() { ", PgUp/PgDn" } else { "" }
    );
    let head_style = theme.fg(Color::Gray).add_modifier(Modifier::BOLD);
    let right = area.x + area.width;
    let mut x = put(buf, area.x, area.y, right, &page, head_style);
    if let Some(c) = d.focused() {
        let figures = format!(
            " · ▶ {}: peak {} true {} room {} ",
            c.channel,
            num(c.peak_dbfs, 1, 1),
            num(c.true_peak_dbtp, 1, 1),
            num(c.headroom_db(), 1, 1)
        );
        x = put(buf, x, area.y, right, &figures, head_style);
        let (text, style) = lamp(c, shown.now_s, theme);
        put(buf, x, area.y, right, &text, style);
    }
    let widest = shown.channels[first..last]
        .iter()
        .map(|c| c.channel.to_string().len())
        .max()
        .unwrap_or(1)
        .max(2);
    let cell_w = area.width / grid.cols.max(1);
    let rows = usize::from(grid.rows.max(1));
    for (i, c) in shown.channels[first..last].iter().enumerate() {
        let (col, row) = ((i / rows) as u16, (i % rows) as u16);
        if row + 1 >= area.height {
            continue;
        }
        let cell = Rect::new(
            area.x + col * cell_w,
            area.y + 1 + row,
            cell_w.saturating_sub(1),
            1,
        );
        (&CompactMeter {
            channel: c,
            ballistics: d.ballistics,
            focused: first + i == d.focus,
            number_width: widest,
            theme,
        })
            .render(cell, buf);
    }
}

/// One channel in a compact cell: `▶12 ██████▌│·  -6.0 ▲`: the focus mark, the number, the level
/// bar (as [`render_bar`], with the peak-hold marker), the highest sample peak since the reset
/// and the lamp's symbol (`◆` overs, `▲` flat tops, `·` none; reversed while clipping).
#[derive(Debug, Clone, Copy)]
pub struct CompactMeter<'a> {
    /// The channel.
    pub channel: &'a ChannelView,
    /// Which needle.
    pub ballistics: Ballistics,
    /// In focus.
    pub focused: bool,
    /// Width of the channel number (the widest on the page, so the bars line up).
    pub number_width: usize,
    /// Colours.
    pub theme: Theme,
}

impl Widget for &CompactMeter<'_> {
    fn render(self, area: Rect, buf: &mut Buffer) {
        if area.width == 0 || area.height == 0 {
            return;
        }
        let c = self.channel;
        let right = area.x + area.width;
        let head = format!(
            "{}{:>w$} ",
            if self.focused { '▶' } else { ' ' },
            c.channel,
            w = self.number_width
        );
        let head_style = if self.focused {
            Style::default().add_modifier(Modifier::BOLD)
        } else {
            Style::default()
        };
        let peak = format!(" {} ", compact_db(c.peak_dbfs));
        let (lamp_text, lamp_style) = lamp(c, 0.0, self.theme);
        let symbol: String = lamp_text.chars().take(1).collect();
        let head_w = head.chars().count() as u16;
        let tail_w = peak.chars().count() as u16 + 1;
        let bar_w = area.width.saturating_sub(head_w + tail_w);
        let x = put(buf, area.x, area.y, right, &head, head_style);
        let idx = Ballistics::ALL
            .iter()
            .position(|b| *b == self.ballistics)
            .unwrap_or(0);
        render_bar(
            c.readings[idx],
            c.hold.map(|h| h.0),
            self.theme,
            Rect::new(x, area.y, bar_w, 1),
            buf,
        );
        let x = put(buf, x + bar_w, area.y, right, &peak, Style::default());
        put(buf, x, area.y, right, &symbol, lamp_style);
    }
}

/// A level in five cells: one decimal down to -99.9, whole numbers below.
fn compact_db(v: Option<f64>) -> String {
    match v {
        Some(x) if x.is_finite() && x <= -99.95 => format!("{x:>5.0}"),
        _ => num(v, 5, 1),
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::dsp::clip::ClipKind;
    use crate::live::engine::MeterFrame;
    use crate::ui::model::Update;
    use crate::ui::view::fixtures::{
        many_channels, meta, row, screen, spread_db, text, text_of, COLOUR, PLAIN,
    };

    /// 16 channels on 80x24: every one visible at once, in four columns read downwards, each
    /// cell with its number, bar, peak and lamp symbol; 8 channels keep the full lines.
    #[test]
    fn sixteen_channels_are_all_visible_on_80x24() {
        let d = many_channels(16);
        let t = screen(&d, 80, 24, PLAIN);
        let buf = t.backend().buffer();
        for ch in 1..=16usize {
            let (col, r) = ((ch - 1) / 4, (ch - 1) % 4);
            let line = row(buf, 2 + r as u16);
            let cell: String = line.chars().skip(col * 20).take(20).collect();
            let mark = if ch == 3 { '▶' } else { ' ' };
            assert!(
                cell.starts_with(&format!("{mark}{ch:>2} ")),
                "ch {ch}: {cell:?}"
            );
            let peak = if ch == 7 { 0.0 } else { spread_db(ch) };
            assert!(
                cell.contains(&format!(" {} ", num(Some(peak), 5, 1))),
                "ch {ch} peak {peak}: {cell:?}"
            );
            let symbol = match ch {
                7 => '◆',
                23 => '▲',
                _ => '·',
            };
            assert_eq!(cell.chars().nth(18), Some(symbol), "ch {ch}: {cell:?}");
            assert_eq!(cell.chars().nth(19), Some(' '), "a space between cells");
        }
        let text = text(&t);
        assert!(text.contains(" ch 1-16 of 16 · ▶ 3: peak -23.0"), "{text}");
        assert!(!text.contains("PgUp/PgDn"), "one page: {text}");
        // Eight channels still have a line each, with the lamp's words.
        let eight = text_of(&many_channels(8), 80, 24);
        assert!(eight.contains("▶  3 "), "{eight}");
        assert!(eight.contains("◆ OVER 1 0s"), "{eight}");
        assert_eq!(eight.matches("· no clips").count(), 7, "{eight}");
    }

    /// 64 channels on 80x24: a page of 36, the focus decides the page, the header says which
    /// channels are shown and carries the focused channel's figures and whole lamp.
    #[test]
    fn sixty_four_channels_page_around_the_focus() {
        let mut d = many_channels(64);
        let first = text_of(&d, 80, 24);
        assert!(
            first.contains(
                " ch 1-36 of 64, PgUp/PgDn · ▶ 3: peak -23.0 true -22.8 room 22.8 · no clips"
            ),
            "{first}"
        );
        let lines: Vec<&str> = first.lines().collect();
        // Bottom of the fourth column: channel 36; channel 37 is not on this page.
        assert!(
            lines[10]
                .chars()
                .skip(60)
                .collect::<String>()
                .starts_with(" 36 "),
            "{first}"
        );
        assert!(!first.contains(" 37 "), "{first}");
        d.move_focus(40 - 2);
        assert_eq!(d.focus, 40);
        let second = text_of(&d, 80, 24);
        assert!(
            second.contains(" ch 37-64 of 64, PgUp/PgDn · ▶ 41: "),
            "{second}"
        );
        assert!(second.contains("◆ OVER 1 21s"), "{second}");
        let lines: Vec<&str> = second.lines().collect();
        assert!(lines[2].starts_with(" 37 "), "{second}");
        assert!(lines[6].starts_with("▶41 "), "{second}");
        // The last page holds 28 channels: nine in each of three columns, one in the fourth.
        assert!(
            lines[2]
                .chars()
                .skip(60)
                .collect::<String>()
                .starts_with(" 64 "),
            "{second}"
        );
    }

    #[test]
    fn compact_cell_shows_number_bar_hold_peak_and_lamp_symbol() {
        let mut d = Dashboard::new(meta(vec![12], "dev"), "live", Ballistics::SamplePeak, 1.0);
        d.apply(Update::Meters {
            t_s: 10.0,
            channels: vec![MeterFrame {
                channel: 12,
                sample_peak: 0.5,
                true_peak: 0.52,
                readings: [0.25; 4],
            }],
        });
        d.apply(Update::ClipStarted {
            channel: 12,
            kind: ClipKind::FlatTop,
            t_s: 9.0,
            level_dbfs: Some(-6.0),
            count: true,
        });
        let area = Rect::new(0, 0, 19, 1);
        let mut buf = Buffer::empty(area);
        let cell = |d: &Dashboard, theme, buf: &mut Buffer| {
            (&CompactMeter {
                channel: &d.shown().channels[0],
                ballistics: Ballistics::SamplePeak,
                focused: true,
                number_width: 2,
                theme,
            })
                .render(area, buf);
        };
        cell(&d, COLOUR, &mut buf);
        let line = row(&buf, 0);
        // "▶12 " + a 7-cell bar + " -6.0 " + the lamp symbol: 4 + 7 + 7 + 1 = 19.
        assert!(line.starts_with("▶12 "), "{line}");
        assert!(line.ends_with("  -6.0 ▲"), "{line}");
        // 0.25 is -12.04 dBFS: (60 - 12.04) / 60 of 7 cells = 5.595, so five full cells and
        // four eighths; the hold at the peak (-6.02 dBFS: 6.298 cells) in the seventh cell.
        assert_eq!(line.chars().filter(|&c| c == '█').count(), 5, "{line}");
        assert_eq!(buf[(4 + 5, 0)].symbol(), "▌");
        assert_eq!(buf[(4 + 6, 0)].symbol(), "│");
        // The lamp lit while the flat top goes on: reversed, in the flat-top colour.
        let lamp_cell = &buf[(18, 0)];
        assert!(lamp_cell.modifier.contains(Modifier::REVERSED));
        assert_eq!(lamp_cell.fg, Color::Magenta);
        // NO_COLOR: the same symbols, no colours anywhere.
        let mut plain = Buffer::empty(area);
        cell(&d, PLAIN, &mut plain);
        assert_eq!(row(&plain, 0), line);
        assert!((0..19).all(|x| plain[(x, 0)].fg == Color::Reset));
        // Too narrow for a bar: what fits, no panic.
        for w in [1, 3, 5, 11, 12] {
            let mut small = Buffer::empty(Rect::new(0, 0, w, 1));
            cell(&d, COLOUR, &mut small);
        }
        let mut small = Buffer::empty(Rect::new(0, 0, 5, 1));
        (&CompactMeter {
            channel: &d.shown().channels[0],
            ballistics: Ballistics::SamplePeak,
            focused: false,
            number_width: 2,
            theme: PLAIN,
        })
            .render(Rect::new(0, 0, 5, 1), &mut small);
        assert_eq!(row(&small, 0), " 12  ");
        // Levels below -99.9 dBFS keep five cells.
        assert_eq!(compact_db(Some(-120.4)), " -120");
        assert_eq!(compact_db(Some(-99.9)), "-99.9");
        assert_eq!(compact_db(None), "   --");
    }
}
