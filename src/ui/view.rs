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

use ratatui::buffer::Buffer;
use ratatui::layout::{Constraint, Layout, Rect};
use ratatui::style::{Color, Modifier, Style};
use ratatui::text::{Line, Span};
use ratatui::widgets::{Block, Borders, Clear, Paragraph, Widget, Wrap};
use ratatui::Frame;

use super::model::{clock, ChannelView, Dashboard, Fingerprint, InputStatus, View, BAR_ORDERS};
use crate::dsp::ballistics::Ballistics;
use crate::dsp::clip::ClipKind;

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

fn render_title(d: &Dashboard, theme: Theme, area: Rect, buf: &mut Buffer) {
    let m = &d.meta;
    let right = format!(
        " meters: {}  {}{}{} ",
        d.ballistics.label(),
        if d.is_frozen() { "FROZEN  " } else { "" },
        // The meters keep their last readings while the input is gone: say so where they are.
        if matches!(d.shown().status.input, InputStatus::Lost(_)) {
            "INPUT LOST  "
        } else {
            ""
        },
        clock(d.shown().now_s)
    );
    let source = if m.host == d.mode || m.host == "file" {
        m.device.clone()
    } else {
        format!("{}: {}", m.host, m.device)
    };
    let tail = format!(" · {} Hz · {} ch", m.sample_rate_hz, m.channels.len());
    let badge = " brink ";
    let avail = (area.width as usize).saturating_sub(badge.len() + right.chars().count());
    let left = title_left(&d.mode, &source, &tail, avail);
    let pad = (area.width as usize)
        .saturating_sub(badge.len() + left.chars().count() + right.chars().count());
    let spans = vec![
        Span::styled(
            badge,
            Style::default().add_modifier(Modifier::BOLD | Modifier::REVERSED),
        ),
        Span::raw(left),
        Span::raw(" ".repeat(pad)),
        Span::styled(
            right,
            if d.is_frozen() {
                theme.fg(Color::Cyan).add_modifier(Modifier::BOLD)
            } else {
                Style::default()
            },
        ),
    ];
    Line::from(spans).render(area, buf);
}

/// The title's left part, ` MODE: SOURCE · RATE · CHANNELS`, in `avail` columns if it can be:
/// the source is cut first (its end becomes `…`), then dropped and the mode shortened in the
/// middle (a followed log's path keeps its first word and its file name), so that the meters,
/// the freeze mark and the stream time on the right stay in view.
fn title_left(mode: &str, source: &str, tail: &str, avail: usize) -> String {
    let width = |s: &str| s.chars().count();
    let full = format!(" {mode}: {source}{tail}");
    if width(&full) <= avail {
        return full;
    }
    let room = avail.saturating_sub(width(mode) + width(tail) + 3);
    if room >= 2 {
        let cut: String = source.chars().take(room - 1).collect();
        return format!(" {mode}: {cut}…{tail}");
    }
    let room = avail.saturating_sub(width(tail) + 1);
    format!(" {}{tail}", shorten_middle(mode, room))
}

/// `s` in at most `max` characters: its first word, `…`, and as much of its end as fits; just
/// `…` and the end when the first word would leave no room for the last path component (a
/// file's name matters more than the word before it).
fn shorten_middle(s: &str, max: usize) -> String {
    let n = s.chars().count();
    if n <= max {
        return s.to_string();
    }
    let last = s.rsplit(['/', ' ']).next().map_or(0, |p| p.chars().count());
    let head: String = match s.find(' ') {
        Some(i) if s[..=i].chars().count() + 1 + last <= max => s[..=i].to_string(),
        _ => String::new(),
    };
    let keep = max.saturating_sub(head.chars().count() + 1);
    let end: String = s.chars().skip(n - keep.min(n)).collect();
    format!("{head}…{end}")
}

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

fn render_meters(d: &Dashboard, theme: Theme, grid: MeterGrid, area: Rect, buf: &mut Buffer) {
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

/// Compact meters: a header naming the page and the focused channel's figures (peak, true
/// peak, headroom, the whole lamp), then [`CompactMeter`] cells down the columns.
fn render_compact_meters(
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

/// Vertical bars for H1..H10 in dBc (0 at the top, [`BARS_FLOOR_DBC`] at the bottom): odd
/// orders drawn with [`ODD_GLYPH`], even with [`EVEN_GLYPH`], numbered underneath.
#[derive(Debug, Clone, Copy)]
pub struct HarmonicBars<'a> {
    /// The fingerprint.
    pub fingerprint: &'a Fingerprint,
    /// Colours.
    pub theme: Theme,
}

impl Widget for &HarmonicBars<'_> {
    fn render(self, area: Rect, buf: &mut Buffer) {
        if area.width < 4 || area.height < 3 {
            return;
        }
        let scale_w = 5u16;
        let plot_h = area.height - 1;
        let col_w = ((area.width - scale_w) / BAR_ORDERS as u16).max(1);
        // Scale labels at the top and bottom.
        buf.set_string(area.x, area.y, "   0", self.theme.fg(Color::Gray));
        buf.set_string(
            area.x,
            area.y + plot_h - 1,
            format!("{:>4}", BARS_FLOOR_DBC as i32),
            self.theme.fg(Color::Gray),
        );
        for k in 1..=BAR_ORDERS {
            let x = area.x + scale_w + (k as u16 - 1) * col_w;
            if x + col_w > area.x + area.width {
                break;
            }
            let odd = k % 2 == 1;
            let glyph = if odd { ODD_GLYPH } else { EVEN_GLYPH };
            let style = self.theme.fg(if k == 1 {
                Color::White
            } else if odd {
                Color::LightRed
            } else {
                Color::LightBlue
            });
            let level = self.fingerprint.level_dbc(k);
            let frac = level.map_or(0.0, |l| {
                ((l - BARS_FLOOR_DBC) / -BARS_FLOOR_DBC).clamp(0.0, 1.0)
            });
            let filled = (frac * plot_h as f64).round() as u16;
            let bar_w = col_w.saturating_sub(1).max(1);
            for r in 0..plot_h {
                let y = area.y + plot_h - 1 - r;
                let ch = if r < filled { glyph } else { ' ' };
                buf.set_string(x, y, ch.to_string().repeat(bar_w as usize), style);
            }
            let label = format!("{k:<w$}", w = col_w as usize);
            buf.set_string(x, area.y + plot_h, truncate(&label, col_w), style);
        }
    }
}

/// The odd/even balance on a line: `odd ◀────●────▶ even`, the dot placed by the balance
/// (±40 dB at the ends), with the figure after it.
pub fn balance_line(odd_even_db: Option<f64>, width: u16) -> String {
    // "odd ◀" + bar + "▶ even " + up to four characters of figure.
    let inner = width.saturating_sub(17).max(5) as usize;
    let mut cells: Vec<char> = vec!['─'; inner];
    let mid = inner / 2;
    cells[mid] = '┼';
    let figure = match odd_even_db {
        Some(b) => {
            let pos = ((b.clamp(-40.0, 40.0) + 40.0) / 80.0 * (inner - 1) as f64).round() as usize;
            cells[pos] = '●';
            format!("{b:+.0}")
        }
        None => "--".to_string(),
    };
    let bar: String = cells.into_iter().collect();
    format!("odd ◀{bar}▶ even {figure}")
}

fn render_focus(d: &Dashboard, theme: Theme, area: Rect, buf: &mut Buffer) {
    let Some(c) = d.focused() else {
        return;
    };
    let block = Block::default()
        .borders(Borders::TOP)
        .title(Line::from(format!(" ch {} fingerprint ", c.channel)).style(theme.fg(Color::Cyan)));
    let inner = block.inner(area);
    block.render(area, buf);
    let Some(f) = &c.tone else {
        Paragraph::new(vec![
            Line::from("no steady tone on this channel"),
            Line::from("(harmonics need one tone: a test tone or a held note)"),
        ])
        .render(inner, buf);
        render_onset(
            d,
            c,
            theme,
            Rect::new(
                inner.x,
                inner.y + inner.height.saturating_sub(1),
                inner.width,
                1,
            ),
            buf,
        );
        return;
    };
    let [left, right] =
        Layout::horizontal([Constraint::Length(46), Constraint::Min(20)]).areas(inner);
    let [bars, legend] = Layout::vertical([Constraint::Min(3), Constraint::Length(1)]).areas(left);
    (&HarmonicBars {
        fingerprint: f,
        theme,
    })
        .render(bars, buf);
    buf.set_string(
        legend.x,
        legend.y,
        truncate(
            &format!("dBc  {ODD_GLYPH} odd  {EVEN_GLYPH} even  (1 = fundamental)"),
            legend.width,
        ),
        theme.fg(Color::Gray),
    );
    let t = &f.distortion;
    let lines = vec![
        Line::from(format!(
            "{:.2} Hz  at {} dBFS",
            t.fundamental_hz,
            num(t.fundamental_dbfs, 1, 1)
        )),
        Line::from(format!(
            "THD {} %  THD+N {} dB",
            num(t.thd_pct, 1, 2),
            num(t.thd_n_db, 1, 1)
        )),
        Line::from(format!("SINAD {} dB", num(t.sinad_db, 1, 1))),
        Line::from(format!(
            "fall-off {} dB per octave",
            num(t.falloff_db_per_octave, 1, 1)
        )),
        Line::from(balance_line(t.odd_even_db, right.width)),
        Line::from(Span::styled(
            f.character(),
            Style::default().add_modifier(Modifier::BOLD),
        )),
    ];
    Paragraph::new(lines).wrap(Wrap { trim: true }).render(
        Rect::new(
            right.x,
            right.y,
            right.width,
            right.height.saturating_sub(2),
        ),
        buf,
    );
    render_onset(
        d,
        c,
        theme,
        Rect::new(
            right.x,
            right.y + right.height.saturating_sub(2),
            right.width,
            2,
        ),
        buf,
    );
}

fn render_onset(d: &Dashboard, c: &ChannelView, theme: Theme, area: Rect, buf: &mut Buffer) {
    let now = c.tone.as_ref().and_then(|f| f.distortion.fundamental_dbfs);
    let text = match &c.onset {
        Some(o) => {
            let at = o.fundamental_dbfs;
            let past = match (now, at) {
                (Some(n), Some(a)) => format!(" ({:+.1} dB)", n - a),
                _ => String::new(),
            };
            format!(
                "onset: THD {:.0} % at {} dBFS; now {}{past}",
                o.thd_pct,
                num(at, 1, 1),
                num(now, 1, 1)
            )
        }
        None => format!(
            "onset: THD below {} % so far; now {} dBFS",
            d.onset_pct,
            num(now, 1, 1)
        ),
    };
    Paragraph::new(text)
        .style(theme.fg(Color::Yellow))
        .wrap(Wrap { trim: true })
        .render(area, buf);
}

fn render_compare(d: &Dashboard, theme: Theme, area: Rect, buf: &mut Buffer) {
    let block = Block::default().borders(Borders::TOP).title(
        Line::from(format!(
            " compare A | B  (dBc, {} to 0; {ODD_GLYPH} odd, {EVEN_GLYPH} even) ",
            BARS_FLOOR_DBC as i32
        ))
        .style(theme.fg(Color::Cyan)),
    );
    let inner = block.inner(area);
    block.render(area, buf);
    let [a, b] = [&d.snapshots[0], &d.snapshots[1]];
    let (Some(a), Some(b)) = (a, b) else {
        Paragraph::new(vec![
            Line::from("store a fingerprint as A (key a) and another as B (key b),"),
            Line::from("or load one with --compare FILE; then this view sets them side by side."),
            Line::from(format!(
                "A: {}   B: {}",
                a.as_ref().map_or("--", |f| f.label.as_str()),
                b.as_ref().map_or("--", |f| f.label.as_str())
            )),
        ])
        .wrap(Wrap { trim: true })
        .render(inner, buf);
        return;
    };
    let bars_h = (BAR_ORDERS as u16).min(inner.height);
    let [bars, rest] =
        Layout::vertical([Constraint::Length(bars_h), Constraint::Min(0)]).areas(inner);
    (&CompareBars { a, b, theme }).render(bars, buf);
    let (da, db) = (&a.distortion, &b.distortion);
    let lines = vec![
        Line::from(format!(
            "THD {} / {} %   odd/even {} / {} dB   fall-off {} / {}",
            num(da.thd_pct, 1, 2),
            num(db.thd_pct, 1, 2),
            num(da.odd_even_db, 1, 0),
            num(db.odd_even_db, 1, 0),
            num(da.falloff_db_per_octave, 1, 1),
            num(db.falloff_db_per_octave, 1, 1)
        )),
        Line::from(format!("A: {}", a.character())),
        Line::from(format!("B: {}", b.character())),
    ];
    Paragraph::new(lines).render(rest, buf);
}

/// Fingerprints A and B side by side, a line per harmonic H2..H10 under a header: A's bar and
/// level, B's bar and level, and the difference B − A in dB. The bars run from
/// [`BARS_FLOOR_DBC`] at the left to 0 dBc at the right, in [`ODD_GLYPH`] for odd orders and
/// [`EVEN_GLYPH`] for even ones, and the order's tag in the first column carries the same glyph.
#[derive(Debug, Clone, Copy)]
pub struct CompareBars<'a> {
    /// Snapshot A.
    pub a: &'a Fingerprint,
    /// Snapshot B.
    pub b: &'a Fingerprint,
    /// Colours.
    pub theme: Theme,
}

/// Columns of a comparison line besides the two bars: tag 4, A's level 7, " │ " 3, B's level 7,
/// difference 7.
const COMPARE_FIXED_W: u16 = 4 + 7 + 3 + 7 + 7;

impl CompareBars<'_> {
    /// Width of each of the two bars in `width` columns.
    pub fn bar_width(width: u16) -> u16 {
        width.saturating_sub(COMPARE_FIXED_W) / 2
    }
}

/// A horizontal harmonic bar: `glyph` over the share of `width` that `level_dbc` reaches on the
/// [`BARS_FLOOR_DBC`]..0 scale (rounded to whole cells), spaces after it.
fn harmonic_hbar(level_dbc: Option<f64>, glyph: char, width: u16) -> String {
    let w = usize::from(width);
    let filled = level_dbc.map_or(0, |l| {
        (((l - BARS_FLOOR_DBC) / -BARS_FLOOR_DBC).clamp(0.0, 1.0) * w as f64).round() as usize
    });
    let mut s: String = std::iter::repeat_n(glyph, filled).collect();
    s.extend(std::iter::repeat_n(' ', w - filled));
    s
}

impl Widget for &CompareBars<'_> {
    fn render(self, area: Rect, buf: &mut Buffer) {
        if area.width == 0 || area.height == 0 {
            return;
        }
        let right = area.x + area.width;
        let bar_w = CompareBars::bar_width(area.width);
        let col_w = usize::from(bar_w) + 7;
        let bold = Style::default().add_modifier(Modifier::BOLD);
        let label = |name: &str, f: &Fingerprint| {
            let text = format!("{name}: {}", f.label);
            format!("{:<col_w$}", truncate(&text, col_w as u16))
        };
        let header = format!(
            "{:<4}{} │ {}{:>7}",
            "H",
            label("A", self.a),
            label("B", self.b),
            "B-A"
        );
        put(buf, area.x, area.y, right, &header, bold);
        for k in 2..=BAR_ORDERS {
            let y = area.y + (k as u16 - 1);
            if y >= area.y + area.height {
                break;
            }
            let odd = k % 2 == 1;
            let glyph = if odd { ODD_GLYPH } else { EVEN_GLYPH };
            let style = self.theme.fg(if odd {
                Color::LightRed
            } else {
                Color::LightBlue
            });
            let (la, lb) = (self.a.level_dbc(k), self.b.level_dbc(k));
            let diff = la.zip(lb).map_or_else(
                || format!("{:>7}", "--"),
                |(x, y)| format!("{:>+7.1}", y - x),
            );
            let mut x = put(buf, area.x, y, right, &format!("{glyph}{k:<3}"), style);
            x = put(buf, x, y, right, &harmonic_hbar(la, glyph, bar_w), style);
            x = put(buf, x, y, right, &num(la, 7, 1), Style::default());
            x = put(buf, x, y, right, " │ ", self.theme.fg(Color::DarkGray));
            x = put(buf, x, y, right, &harmonic_hbar(lb, glyph, bar_w), style);
            x = put(buf, x, y, right, &num(lb, 7, 1), Style::default());
            put(buf, x, y, right, &diff, Style::default());
        }
    }
}

fn render_clips(d: &Dashboard, theme: Theme, area: Rect, buf: &mut Buffer) {
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

fn render_status(d: &Dashboard, theme: Theme, area: Rect, buf: &mut Buffer) {
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

fn render_help(theme: Theme, area: Rect, buf: &mut Buffer) {
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

#[cfg(test)]
mod tests {
    use super::*;
    use crate::analysis::report::{ClipEvent, DistortionReport};
    use crate::live::engine::{Engine, EngineSettings, MeterFrame};
    use crate::live::session::SourceMeta;
    use crate::ui::feed::from_live;
    use crate::ui::model::{harmonic_report, Update};
    use ratatui::backend::TestBackend;
    use ratatui::Terminal;

    const PLAIN: Theme = Theme { color: false };
    const COLOUR: Theme = Theme { color: true };

    fn meta(channels: Vec<usize>, device: &str) -> SourceMeta {
        SourceMeta {
            host: "demo".into(),
            device: device.into(),
            sample_rate_hz: 48_000,
            channels,
        }
    }

    /// The stage-box demo scene through the real engine for `secs`, its findings recorded into a
    /// dashboard (what the screen thread would have been fed).
    fn recorded_stage_box(secs: f64) -> Dashboard {
        let (rate, channels, samples) =
            crate::gen::demo::render_scene("stage-box-soundcheck.wav").expect("scene");
        let settings = EngineSettings {
            summary_every_s: None,
            meter_every_s: Some(1.0 / 30.0),
            tone_events: true,
            ..EngineSettings::default()
        };
        let window = settings.tone_window_s;
        let mut engine = Engine::new(rate, channels, None, settings);
        let mut d = Dashboard::new(
            meta((1..=channels).collect(), "stage-box (demo-tones)"),
            "demo",
            Ballistics::SamplePeak,
            1.0,
        );
        let frames = (secs * f64::from(rate)) as usize;
        let block = (rate / 100) as usize * channels;
        for chunk in samples[..frames * channels].chunks(block) {
            engine.process(chunk, &mut |ev| {
                if let Some(u) = from_live(ev, f64::from(rate), window) {
                    d.apply(u);
                }
            });
        }
        d.apply(Update::Health {
            xruns: 0,
            load: Some(0.021),
        });
        d
    }

    fn screen(d: &Dashboard, w: u16, h: u16, theme: Theme) -> Terminal<TestBackend> {
        let mut t = Terminal::new(TestBackend::new(w, h)).expect("terminal");
        t.draw(|f| draw(f, d, theme)).expect("draw");
        t
    }

    fn text(t: &Terminal<TestBackend>) -> String {
        let buf = t.backend().buffer();
        let mut out = String::new();
        for y in 0..buf.area.height {
            let line: String = (0..buf.area.width)
                .map(|x| buf[(x, y)].symbol().to_string())
                .collect();
            out.push_str(line.trim_end());
            out.push('\n');
        }
        out
    }

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

    /// A fingerprint made by hand: a 1 kHz tone at -6 dBFS with the given harmonics (order, dBc).
    fn fingerprint(label: &str, levels: &[(usize, f64)]) -> Fingerprint {
        Fingerprint {
            label: label.into(),
            distortion: DistortionReport {
                fundamental_hz: 1000.0,
                fundamental_dbfs: Some(-6.0),
                thd_pct: Some(3.2),
                thd_db: None,
                thd_n_db: Some(-29.5),
                thd_n_pct: 3.35,
                sinad_db: Some(29.5),
                enob_bits: None,
                odd_even_db: Some(-18.0),
                falloff_db_per_octave: Some(-12.0),
                noise_floor_dbc: Some(-140.0),
                span_start_s: 0.0,
                span_end_s: 1.0,
                harmonics: levels
                    .iter()
                    .map(|&(k, l)| harmonic_report(k, 1000.0, Some(l), 0.0, Some(-140.0)))
                    .collect(),
            },
            report: None,
        }
    }

    /// The peak (dBFS) channel `ch` of [`many_channels`] is given: spread over the scale.
    fn spread_db(ch: usize) -> f64 {
        -2.0 - ((ch * 7) % 50) as f64
    }

    /// `n` channels as a 64-input stage rack would feed them, at 61.5 s: peaks spread over the
    /// scale, channel 7 in an over right now, channel 23 after a flat-top episode, channel 41 (a
    /// later page) after overs; channel 3 in focus with a tone.
    fn many_channels(n: usize) -> Dashboard {
        let mut d = Dashboard::new(
            SourceMeta {
                host: "jack".into(),
                device: "stage rack".into(),
                sample_rate_hz: 48_000,
                channels: (1..=n).collect(),
            },
            "live",
            Ballistics::SamplePeak,
            1.0,
        );
        // The clips in the order they happened.
        for (channel, kind, start_s, level) in [
            (41, ClipKind::Over, 40.2, 0.0),
            (23, ClipKind::FlatTop, 58.2, -4.1),
        ] {
            d.apply(Update::ClipStarted {
                channel,
                kind,
                t_s: start_s,
                level_dbfs: Some(level),
                count: true,
            });
            d.apply(Update::Clip {
                channel,
                event: ClipEvent {
                    kind,
                    start_s,
                    end_s: start_s + 0.7,
                    level_dbfs: Some(level),
                    runs: 12,
                    samples: 640,
                },
            });
        }
        d.apply(Update::ClipStarted {
            channel: 7,
            kind: ClipKind::Over,
            t_s: 61.4,
            level_dbfs: Some(0.0),
            count: true,
        });
        let channels = (1..=n)
            .map(|ch| {
                let peak = if ch == 7 {
                    1.0
                } else {
                    10f64.powf(spread_db(ch) / 20.0)
                };
                MeterFrame {
                    channel: ch,
                    sample_peak: peak,
                    true_peak: peak * 1.02,
                    readings: [peak * 0.7; 4],
                }
            })
            .collect();
        d.apply(Update::Meters {
            t_s: 61.5,
            channels,
        });
        d.apply(Update::Tone {
            t_s: 61.0,
            channel: 3,
            distortion: Some(
                fingerprint(
                    "",
                    &[(2, -52.0), (3, -31.0), (4, -70.0), (5, -44.0), (7, -58.0)],
                )
                .distortion,
            ),
        });
        d.apply(Update::Health {
            xruns: 0,
            load: Some(0.043),
        });
        d.move_focus(2);
        d
    }

    /// Line `y` of a buffer, as text.
    fn row(buf: &Buffer, y: u16) -> String {
        (0..buf.area.width)
            .map(|x| buf[(x, y)].symbol().to_string())
            .collect()
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

    fn text_of(d: &Dashboard, w: u16, h: u16) -> String {
        text(&screen(d, w, h, PLAIN))
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

    /// The 64-channel feed on 80x24: compact cells (page 1 of 2), the focused channel's
    /// fingerprint, the clips list.
    #[test]
    fn whole_screen_64_channels_80x24() {
        let d = many_channels(64);
        insta::assert_snapshot!("channels_64_80x24", text_of(&d, 80, 24));
    }

    /// Side-by-side bars: A and B per harmonic on one scale, odd and even by glyph, levels and
    /// the difference B - A.
    #[test]
    fn compare_bars_side_by_side_with_differences() {
        let a = fingerprint("amp, 1 W", &[(2, -33.0), (3, -12.0), (4, -130.0)]);
        let b = fingerprint("amp, 10 W", &[(3, -60.0), (4, -87.0), (5, -24.0)]);
        let area = Rect::new(0, 0, 80, 10);
        let mut buf = Buffer::empty(area);
        (&CompareBars {
            a: &a,
            b: &b,
            theme: COLOUR,
        })
            .render(area, &mut buf);
        // (80 - 28) / 2 = 26 cells a bar: tag 0..4, A bar 4..30, A level 30..37, " │ " 37..40,
        // B bar 40..66, B level 66..73, difference 73..80.
        assert_eq!(CompareBars::bar_width(80), 26);
        let part = |y: u16, from: usize, to: usize| -> String {
            row(&buf, y).chars().skip(from).take(to - from).collect()
        };
        let count = |y, from, to, c: char| part(y, from, to).chars().filter(|&x| x == c).count();
        let header = row(&buf, 0);
        assert!(header.starts_with("H   A: amp, 1 W"), "{header}");
        assert_eq!(part(0, 37, 50), " │ B: amp, 10");
        assert!(header.ends_with("    B-A"), "{header}");
        // H2 (even): A at -33 dBc fills 87/120 of 26 = 18.85, so 19 cells of the even glyph;
        // B has no H2: an empty bar, "--", and no difference.
        assert_eq!(part(1, 0, 4), format!("{EVEN_GLYPH}2  "));
        assert_eq!(count(1, 4, 30, EVEN_GLYPH), 19);
        assert_eq!(count(1, 4, 30, ODD_GLYPH), 0);
        assert_eq!(part(1, 30, 40), "  -33.0 │ ");
        assert_eq!(part(1, 40, 66).trim(), "");
        assert_eq!(part(1, 66, 80), "     --     --");
        // H3 (odd): A at -12 dBc fills 0.9 of 26 = 23.4, so 23 cells; B at -60 dBc fills
        // 0.5, so 13; B - A = -48 dB.
        assert_eq!(part(2, 0, 4), format!("{ODD_GLYPH}3  "));
        assert_eq!(count(2, 4, 30, ODD_GLYPH), 23);
        assert_eq!(count(2, 40, 66, ODD_GLYPH), 13);
        assert_eq!(part(2, 66, 80), "  -60.0  -48.0");
        // H4: A below the -120 dBc floor draws nothing but keeps its figure; B at -87 dBc fills
        // 33/120 of 26 = 7.15 cells, 43 dB above A.
        assert_eq!(count(3, 4, 30, EVEN_GLYPH), 0);
        assert_eq!(part(3, 30, 37), " -130.0");
        assert_eq!(count(3, 40, 66, EVEN_GLYPH), 7);
        assert_eq!(part(3, 73, 80), "  +43.0");
        // H5: only B, at -24 dBc: 0.8 of 26 = 20.8, so 21 cells.
        assert_eq!(count(4, 40, 66, ODD_GLYPH), 21);
        // H10 on the last line; colours tell odd from even as well as the glyphs.
        assert_eq!(part(9, 0, 4), format!("{EVEN_GLYPH}10 "));
        assert_eq!(buf[(4, 2)].fg, Color::LightRed);
        assert_eq!(buf[(4, 1)].fg, Color::LightBlue);
        // NO_COLOR: the same glyphs, no colours.
        let mut plain = Buffer::empty(area);
        (&CompareBars {
            a: &a,
            b: &b,
            theme: PLAIN,
        })
            .render(area, &mut plain);
        for y in 0..10 {
            assert_eq!(row(&plain, y), row(&buf, y));
            assert!((0..80).all(|x| plain[(x, y)].fg == Color::Reset));
        }
        // Narrow and short areas: what fits, no panic.
        for (w, h) in [(1, 1), (20, 3), (28, 10), (30, 10), (40, 2)] {
            let r = Rect::new(0, 0, w, h);
            let mut small = Buffer::empty(r);
            (&CompareBars {
                a: &a,
                b: &b,
                theme: COLOUR,
            })
                .render(r, &mut small);
        }
    }

    /// A followed log's long path: the stream time stays on the title line, the file's name
    /// and the word "following" too; the source is cut before the mode is.
    #[test]
    fn long_titles_keep_the_clock_and_the_file_name() {
        let mut d = many_channels(2);
        d.mode =
            "following /var/log/brink/a-rather-long-folder-name/bench-2026-12-02.ndjson".into();
        d.meta.host = "file".into();
        d.meta.device = "pair.wav".into();
        let title = text_of(&d, 80, 24).lines().next().unwrap_or("").to_string();
        assert!(title.ends_with("meters: peak  1:01.5"), "{title}");
        // 80 less the badge (7), the right part (22) and the rate and channels (18) leaves 32
        // columns after a space: "following …" and the 23-character file name do not fit
        // together, and the file name wins.
        assert!(
            title.starts_with(" brink  …er-name/bench-2026-12-02.ndjson · 48000 Hz · 2 ch"),
            "{title}"
        );
        d.mode = "following /var/log/brink/a-rather-long-folder-name/bench.ndjson".into();
        let title = text_of(&d, 80, 24).lines().next().unwrap_or("").to_string();
        assert!(
            title.starts_with(" brink  following …der-name/bench.ndjson · 48000 Hz"),
            "{title}"
        );
        assert!(title.ends_with("meters: peak  1:01.5"), "{title}");
        // A shorter mode keeps it whole and cuts the source instead.
        // 51 columns less the mode (22), the rate and channels (18) and ": " leave 8 for the
        // source: seven characters and "…".
        d.mode = "following bench.ndjson".into();
        d.meta.device = "hw:CARD=USB,DEV=0 (a long device name)".into();
        let title = text_of(&d, 80, 24).lines().next().unwrap_or("").to_string();
        assert!(
            title.starts_with(" brink  following bench.ndjson: hw:CARD… · 48000 Hz · 2 ch "),
            "{title}"
        );
        assert!(title.ends_with("meters: peak  1:01.5"), "{title}");
        // What fits is left alone.
        assert_eq!(title_left("demo", "x", " · 1 Hz", 40), " demo: x · 1 Hz");
        assert_eq!(
            shorten_middle("following /a/b/c/d.ndjson", 20),
            "following …/d.ndjson"
        );
        assert_eq!(
            shorten_middle("following /a/long-name.ndjson", 20),
            "…/a/long-name.ndjson"
        );
        assert_eq!(shorten_middle("abcdefghij", 5), "…ghij");
        assert_eq!(shorten_middle("abc", 0), "…");
    }

    #[test]
    fn harmonic_bars_tell_odd_from_even_by_glyph() {
        let d = recorded_stage_box(2.5);
        let f = d.shown().channels[1]
            .tone
            .clone()
            .expect("vocal channel has a tone");
        let area = Rect::new(0, 0, 45, 8);
        let mut buf = Buffer::empty(area);
        (&HarmonicBars {
            fingerprint: &f,
            theme: PLAIN,
        })
            .render(area, &mut buf);
        let col = |k: u16| 5 + (k - 1) * 4;
        // H1 (0 dBc) is full height in the odd glyph; H3 present in the odd glyph.
        assert_eq!(buf[(col(1), 0)].symbol(), ODD_GLYPH.to_string());
        assert_eq!(buf[(col(3), 6)].symbol(), ODD_GLYPH.to_string());
        // Labels under the bars.
        assert_eq!(buf[(col(2), 7)].symbol(), "2");
        assert_eq!(buf[(col(10), 7)].symbol(), "1");
        let bal = balance_line(Some(-40.0), 40);
        assert!(bal.starts_with("odd ◀●"), "{bal}");
        assert!(balance_line(None, 40).ends_with("even --"));
    }
}
