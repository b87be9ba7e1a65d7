//! The meters: one line per channel ([`MeterLine`]: level bar with peak-hold marker, peak, true
//! peak, headroom, clip lamp), or compact cells when the channels would not fit one a line
//! ([`MeterGrid`] decides; the `compact` module draws them); paged so the focus stays in view.

use ratatui::buffer::Buffer;
use ratatui::layout::Rect;
use ratatui::style::{Color, Modifier, Style};
use ratatui::widgets::Widget;

use super::compact::render_compact_meters;
use super::{num, truncate, Theme, METER_FLOOR_DB};
use crate::dsp::ballistics::Ballistics;
use crate::dsp::clip::ClipKind;
use crate::ui::model::{ChannelView, Dashboard};

/// One channel's meter line.
#[derive(Debug, Clone, Copy)]
pub struct MeterLine<'a> {
    /// The channel.
    pub channel: &'a ChannelView,
    /// Which needle.
    pub ballistics: Ballistics,
    /// In focus.
    pub focused: bool,
    /// Stream time now (for "time since the last clip").
    pub now_s: f64,
    /// Colours.
    pub theme: Theme,
}

/// Width of the numbers and lamp after the bar.
const METER_TAIL: u16 = 40;

impl Widget for &MeterLine<'_> {
    fn render(self, area: Rect, buf: &mut Buffer) {
        if area.width == 0 || area.height == 0 {
            return;
        }
        let c = self.channel;
        let head = format!("{}{:>3} ", if self.focused { '▶' } else { ' ' }, c.channel);
        buf.set_string(area.x, area.y, &head, Style::default());
        let head_w = head.chars().count() as u16;
        let tail_w = METER_TAIL.min(area.width.saturating_sub(head_w));
        let bar_w = area.width.saturating_sub(head_w + tail_w);
        let bar = Rect::new(area.x + head_w, area.y, bar_w, 1);
        let idx = Ballistics::ALL
            .iter()
            .position(|b| *b == self.ballistics)
            .unwrap_or(0);
        let reading = c.readings[idx];
        let hold = c.hold.map(|h| h.0);
        render_bar(reading, hold, self.theme, bar, buf);
        // Numbers: peak, true peak, headroom.
        let nums = format!(
            " {} {} {} ",
            num(c.peak_dbfs, 6, 1),
            num(c.true_peak_dbtp, 6, 1),
            num(c.headroom_db(), 5, 1)
        );
        let x = bar.x + bar.width;
        buf.set_string(x, area.y, &nums, Style::default());
        let lamp_x = x + nums.chars().count() as u16;
        let lamp_w = (area.x + area.width).saturating_sub(lamp_x);
        let (text, style) = lamp(c, self.now_s, self.theme);
        let text: String = text.chars().take(lamp_w as usize).collect();
        buf.set_string(lamp_x, area.y, text, style);
    }
}

/// The clip lamp: symbol and word per kind (◆ OVER for overs at full scale, ▲ FLAT for flat
/// tops below it), the count, and the time since the last clip; lit (reversed) while clipping.
pub fn lamp(c: &ChannelView, now_s: f64, theme: Theme) -> (String, Style) {
    let total = c.overs + c.flat_tops;
    match c.last_clip {
        None => ("· no clips".to_string(), theme.fg(Color::DarkGray)),
        Some((kind, at)) => {
            let (sym, word, count) = match kind {
                ClipKind::Over => ('◆', "OVER", c.overs),
                ClipKind::FlatTop => ('▲', "FLAT", c.flat_tops),
            };
            let ago = (now_s - at).max(0.0);
            let ago = if ago < 60.0 {
                format!("{ago:.0}s")
            } else {
                format!("{:.0}m", ago / 60.0)
            };
            let others = if total > count {
                format!("+{}", total - count)
            } else {
                String::new()
            };
            let text = format!("{sym} {word} {count}{others} {ago}");
            let base = theme.fg(if kind == ClipKind::Over {
                Color::Red
            } else {
                Color::Magenta
            });
            let style = if c.clipping.is_some() {
                base.add_modifier(Modifier::REVERSED | Modifier::BOLD)
            } else {
                base
            };
            (text, style)
        }
    }
}

/// A horizontal level bar from [`METER_FLOOR_DB`] to 0 dBFS with eighth-cell resolution and a
/// `│` peak-hold marker; a `!` in the last cell when the level reaches full scale.
pub fn render_bar(
    level_db: Option<f64>,
    hold_db: Option<f64>,
    theme: Theme,
    area: Rect,
    buf: &mut Buffer,
) {
    if area.width == 0 || area.height == 0 {
        return;
    }
    let w = area.width as f64;
    let pos = |db: f64| ((db - METER_FLOOR_DB) / -METER_FLOOR_DB).clamp(0.0, 1.0) * w;
    const EIGHTHS: [char; 8] = [' ', '▏', '▎', '▍', '▌', '▋', '▊', '▉'];
    let fill = level_db.map_or(0.0, pos);
    for i in 0..area.width {
        let x = area.x + i;
        let cell_db = METER_FLOOR_DB + (i as f64 + 1.0) / w * -METER_FLOOR_DB;
        let covered = (fill - i as f64).clamp(0.0, 1.0);
        let ch = if covered >= 1.0 {
            '█'
        } else {
            let e = (covered * 8.0).floor() as usize;
            if e == 0 {
                '·'
            } else {
                EIGHTHS[e]
            }
        };
        let style = if ch == '·' {
            theme.fg(Color::DarkGray)
        } else {
            theme.level(cell_db)
        };
        buf.set_string(x, area.y, ch.to_string(), style);
    }
    if let Some(h) = hold_db {
        let i = (pos(h).ceil() as u16).clamp(1, area.width) - 1;
        buf.set_string(
            area.x + i,
            area.y,
            "│",
            theme.level(h).add_modifier(Modifier::BOLD),
        );
    }
    if level_db.is_some_and(|l| l >= 0.0) {
        buf.set_string(
            area.x + area.width - 1,
            area.y,
            "!",
            theme
                .fg(Color::Red)
                .add_modifier(Modifier::BOLD | Modifier::REVERSED),
        );
    }
}

/// Narrowest compact meter cell (the focus mark, the number, a small bar, the peak, the lamp
/// symbol and a space between cells).
pub const COMPACT_CELL_W: u16 = 20;

/// How the meters sit on the screen: one full line per channel when every channel has a line,
/// else compact cells in columns (read down, then across); paged beyond one screenful.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct MeterGrid {
    /// Compact cells rather than full lines.
    pub compact: bool,
    /// Meter lines under the header.
    pub rows: u16,
    /// Cells side by side on a line (1 for full lines).
    pub cols: u16,
}

impl MeterGrid {
    /// The layout for `n` channels in `width` columns with room for `max_rows` meter lines.
    pub fn new(n: usize, width: u16, max_rows: u16) -> Self {
        let max_rows = max_rows.max(1);
        let cols = width / COMPACT_CELL_W;
        if n <= usize::from(max_rows) || cols < 2 {
            return MeterGrid {
                compact: false,
                rows: n.clamp(1, usize::from(max_rows)) as u16,
                cols: 1,
            };
        }
        MeterGrid {
            compact: true,
            rows: n.div_ceil(usize::from(cols)).min(usize::from(max_rows)) as u16,
            cols,
        }
    }

    /// Channels on one page.
    pub fn page(self) -> usize {
        usize::from(self.rows) * usize::from(self.cols)
    }

    /// Index of the first channel of the page that holds channel index `focus`.
    pub fn first(self, focus: usize) -> usize {
        let page = self.page().max(1);
        (focus / page) * page
    }
}

/// The meter layout of `d` on a screen of `area`: the meters get what the title, the middle view
/// (at least 10 lines), the clips (2) and the status line leave.
pub fn meter_grid(d: &Dashboard, area: Rect) -> MeterGrid {
    let spare = area.height.saturating_sub(1 + 1 + 10 + 2 + 1);
    MeterGrid::new(d.shown().channels.len(), area.width, spare)
}

/// Channels a page key moves the focus by on a screen of `area`: one meter page.
pub fn meter_page(d: &Dashboard, area: Rect) -> usize {
    meter_grid(d, area).page().max(1)
}

pub(super) fn render_meters(
    d: &Dashboard,
    theme: Theme,
    grid: MeterGrid,
    area: Rect,
    buf: &mut Buffer,
) {
    if grid.compact {
        render_compact_meters(d, theme, grid, area, buf);
        return;
    }
    let shown = d.shown();
    let rows = area.height.saturating_sub(1) as usize;
    let n = shown.channels.len();
    // Page so the focus is visible.
    let first = if n <= rows || rows == 0 {
        0
    } else {
        (d.focus / rows) * rows
    };
    let last = (first + rows).min(n);
    let bar_w = area.width.saturating_sub(5 + METER_TAIL);
    let header = format!(
        " ch  {:<bw$} {:>6} {:>6} {:>5}  clip",
        if n > rows {
            format!(
                "dBFS -60..0  (ch {}-{} of {n}, PgUp/PgDn)",
                shown.channels[first].channel,
                shown.channels[last - 1].channel
            )
        } else {
            "dBFS -60..0".to_string()
        },
        "peak",
        "true",
        "room",
        bw = bar_w as usize
    );
    buf.set_string(
        area.x,
        area.y,
        truncate(&header, area.width),
        theme.fg(Color::Gray).add_modifier(Modifier::BOLD),
    );
    for (row, c) in shown.channels[first..last].iter().enumerate() {
        let line = Rect::new(area.x, area.y + 1 + row as u16, area.width, 1);
        let w = MeterLine {
            channel: c,
            ballistics: d.ballistics,
            focused: first + row == d.focus,
            now_s: shown.now_s,
            theme,
        };
        (&w).render(line, buf);
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::analysis::report::ClipEvent;
    use crate::live::engine::MeterFrame;
    use crate::ui::model::Update;
    use crate::ui::view::fixtures::{many_channels, meta, COLOUR, PLAIN};

    #[test]
    fn meter_line_shows_numbers_lamp_and_marks() {
        let mut d = Dashboard::new(meta(vec![3], "dev"), "live", Ballistics::SamplePeak, 1.0);
        d.apply(Update::Meters {
            t_s: 10.0,
            channels: vec![MeterFrame {
                channel: 3,
                sample_peak: 0.5,
                true_peak: 0.52,
                readings: [0.25; 4],
            }],
        });
        d.apply(Update::ClipStarted {
            channel: 3,
            kind: ClipKind::FlatTop,
            t_s: 8.0,
            level_dbfs: Some(-6.0),
            count: true,
        });
        let c = &d.shown().channels[0];
        let area = Rect::new(0, 0, 80, 1);
        let mut buf = Buffer::empty(area);
        (&MeterLine {
            channel: c,
            ballistics: Ballistics::SamplePeak,
            focused: true,
            now_s: 10.0,
            theme: COLOUR,
        })
            .render(area, &mut buf);
        let line: String = (0..80).map(|x| buf[(x, 0)].symbol().to_string()).collect();
        assert!(line.starts_with("▶  3 "), "{line}");
        // A reading of 0.25 (-12.04 dBFS) on a -60..0 scale of 35 cells (80 less the 5-cell
        // head and the 40-cell tail): 27.98 cells, so 27 full and a seven-eighths cell.
        assert_eq!(line.chars().filter(|&c| c == '█').count(), 27, "{line}");
        assert_eq!(buf[(5 + 27, 0)].symbol(), "▉");
        // The hold marker at the peak (0.5, -6.02 dBFS: 31.49 cells, so in cell 32).
        assert_eq!(buf[(5 + 31, 0)].symbol(), "│");
        assert!(line.contains("  -6.0   -5.7   5.7 "), "{line}");
        assert!(line.contains("▲ FLAT 1 2s"), "{line}");
        // Lit while the episode goes on: reversed, and the flat-top colour (meaning by symbol
        // and word as well).
        let lamp_x = line.chars().position(|c| c == '▲').expect("lamp") as u16;
        let cell = &buf[(lamp_x, 0)];
        assert!(cell.modifier.contains(Modifier::REVERSED));
        assert_eq!(cell.fg, Color::Magenta);
        // Closed: no longer reversed.
        d.apply(Update::Clip {
            channel: 3,
            event: ClipEvent {
                kind: ClipKind::FlatTop,
                start_s: 8.0,
                end_s: 8.2,
                level_dbfs: Some(-6.0),
                runs: 3,
                samples: 40,
            },
        });
        let (_, style) = lamp(&d.shown().channels[0], 10.0, PLAIN);
        assert!(!style.add_modifier.contains(Modifier::REVERSED));
        assert_eq!(style.fg, None, "NO_COLOR: no colours");
    }

    #[test]
    fn meters_go_compact_when_channels_would_not_fit_one_a_line() {
        let g = |n, w, rows| MeterGrid::new(n, w, rows);
        let full = |rows| MeterGrid {
            compact: false,
            rows,
            cols: 1,
        };
        let compact = |rows, cols| MeterGrid {
            compact: true,
            rows,
            cols,
        };
        // 80x24 leaves 9 meter lines: up to 9 channels one a line, more in 20-column cells.
        assert_eq!(g(4, 80, 9), full(4));
        assert_eq!(g(9, 80, 9), full(9));
        assert_eq!(g(0, 80, 9), full(1));
        assert_eq!(g(10, 80, 9), compact(3, 4));
        assert_eq!(g(16, 80, 9), compact(4, 4));
        // 64 channels: 36 on a page (9 lines of 4), the rest a page further.
        let many = g(64, 80, 9);
        assert_eq!(many, compact(9, 4));
        assert_eq!(many.page(), 36);
        assert_eq!(many.first(0), 0);
        assert_eq!(many.first(35), 0);
        assert_eq!(many.first(36), 36);
        assert_eq!(many.first(63), 36);
        // A big screen holds them all; a narrow one falls back to paged full lines.
        assert_eq!(g(64, 200, 40), compact(7, 10));
        assert_eq!(g(64, 39, 9), full(9));
        // The screen's own figure: 80x24 with the 64-channel feed.
        let d = many_channels(64);
        assert_eq!(meter_grid(&d, Rect::new(0, 0, 80, 24)), compact(9, 4));
        assert_eq!(meter_page(&d, Rect::new(0, 0, 80, 24)), 36);
        assert_eq!(meter_page(&many_channels(4), Rect::new(0, 0, 80, 24)), 4);
    }
}
