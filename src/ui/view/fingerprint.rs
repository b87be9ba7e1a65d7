//! The focused channel's fingerprint: its harmonic bars ([`HarmonicBars`], odd and even by
//! glyph), its figures (fundamental, THD, THD+N, SINAD, fall-off), the odd/even balance line, the
//! character in words, and the onset line.

use ratatui::buffer::Buffer;
use ratatui::layout::{Constraint, Layout, Rect};
use ratatui::style::{Color, Modifier, Style};
use ratatui::text::{Line, Span};
use ratatui::widgets::{Block, Borders, Paragraph, Widget, Wrap};

use super::{num, truncate, Theme, BARS_FLOOR_DBC, EVEN_GLYPH, ODD_GLYPH};
use crate::ui::model::{ChannelView, Dashboard, Fingerprint, BAR_ORDERS};

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

pub(super) fn render_focus(d: &Dashboard, theme: Theme, area: Rect, buf: &mut Buffer) {
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

#[cfg(test)]
mod tests {
    use super::*;
    use crate::ui::view::fixtures::{recorded_stage_box, PLAIN};

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
