//! Drawing the dashboard: pure functions from [`Dashboard`] to a ratatui buffer, generic over the
//! backend so tests draw into `TestBackend` exactly as the terminal does.
//!
//! Screen, top to bottom: a title line; the meters (one line per channel: level bar with
//! peak-hold marker, peak, true peak, headroom, clip lamp); the focused channel's harmonic bars
//! and figures (or the A/B comparison); the recent clips; a status line. Meaning never rests on
//! colour alone: odd and even harmonics differ by glyph, the lamps by symbol and word.

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
    let shown = d.shown();
    let n = shown.channels.len() as u16;
    // Rows: title 1, meters (header + lines), middle (≥ 10), clips (≥ 2), status 1.
    let spare = area.height.saturating_sub(1 + 1 + 10 + 2 + 1);
    let meter_lines = n.clamp(1, spare.max(1));
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
    render_meters(d, theme, meters, buf);
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
        " meters: {}  {}{} ",
        d.ballistics.label(),
        if d.is_frozen() { "FROZEN  " } else { "" },
        clock(d.shown().now_s)
    );
    let source = if m.host == d.mode || m.host == "file" {
        m.device.clone()
    } else {
        format!("{}: {}", m.host, m.device)
    };
    let tail = format!(" · {} Hz · {} ch", m.sample_rate_hz, m.channels.len());
    let badge = " brink ";
    let room = (area.width as usize).saturating_sub(
        badge.len() + right.chars().count() + tail.chars().count() + d.mode.len() + 3,
    );
    let source: String = if source.chars().count() > room {
        let mut s: String = source.chars().take(room.saturating_sub(1)).collect();
        s.push('…');
        s
    } else {
        source
    };
    let left = format!(" {}: {source}{tail}", d.mode);
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

fn render_meters(d: &Dashboard, theme: Theme, area: Rect, buf: &mut Buffer) {
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
    let block = Block::default()
        .borders(Borders::TOP)
        .title(Line::from(" compare A | B ").style(theme.fg(Color::Cyan)));
    let inner = block.inner(area);
    block.render(area, buf);
    let [a, b] = [&d.snapshots[0], &d.snapshots[1]];
    if a.is_none() || b.is_none() {
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
    }
    let (Some(a), Some(b)) = (a, b) else {
        return;
    };
    let mut lines = vec![Line::from(vec![
        Span::styled(
            format!("{:<4}", "H"),
            Style::default().add_modifier(Modifier::BOLD),
        ),
        Span::styled(
            format!(
                "{:>8} {:>8} {:>7}   A: {}  B: {}",
                "A dBc", "B dBc", "B-A", a.label, b.label
            ),
            Style::default().add_modifier(Modifier::BOLD),
        ),
    ])];
    for k in 2..=BAR_ORDERS {
        let (la, lb) = (a.level_dbc(k), b.level_dbc(k));
        let diff = la.zip(lb).map(|(x, y)| y - x);
        let tag = if k % 2 == 1 { ODD_GLYPH } else { EVEN_GLYPH };
        lines.push(Line::from(format!(
            "{tag}{k:<3}{} {} {}",
            num(la, 8, 1),
            num(lb, 8, 1),
            diff.map_or_else(|| format!("{:>7}", "--"), |v| format!("{v:>+7.1}"))
        )));
    }
    let (da, db) = (&a.distortion, &b.distortion);
    lines.push(Line::from(format!(
        "THD {} / {} %   odd/even {} / {} dB   fall-off {} / {}",
        num(da.thd_pct, 1, 2),
        num(db.thd_pct, 1, 2),
        num(da.odd_even_db, 1, 0),
        num(db.odd_even_db, 1, 0),
        num(da.falloff_db_per_octave, 1, 1),
        num(db.falloff_db_per_octave, 1, 1)
    )));
    lines.push(Line::from(format!("A: {}", a.character())));
    lines.push(Line::from(format!("B: {}", b.character())));
    Paragraph::new(lines).render(inner, buf);
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
    let (input, style) = match &s.input {
        InputStatus::Ok => ("input ok".to_string(), theme.fg(Color::Green)),
        InputStatus::Lost(r) => (
            format!("INPUT LOST ({r}), retrying"),
            theme.fg(Color::Red).add_modifier(Modifier::BOLD),
        ),
        InputStatus::Ended(r) => (format!("input ended ({r})"), theme.fg(Color::Yellow)),
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
    use crate::analysis::report::ClipEvent;
    use crate::live::engine::{Engine, EngineSettings, MeterFrame};
    use crate::live::session::SourceMeta;
    use crate::ui::feed::from_live;
    use crate::ui::model::Update;
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
            crate::watch::render_scene("stage-box-soundcheck.wav").expect("scene");
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
