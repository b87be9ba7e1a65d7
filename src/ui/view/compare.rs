//! The A/B comparison: two stored fingerprints side by side ([`CompareBars`]: a line per
//! harmonic with both bars, both levels and the difference), their figures and characters.

use ratatui::buffer::Buffer;
use ratatui::layout::{Constraint, Layout, Rect};
use ratatui::style::{Color, Modifier, Style};
use ratatui::text::Line;
use ratatui::widgets::{Block, Borders, Paragraph, Widget, Wrap};

use super::{num, put, truncate, Theme, BARS_FLOOR_DBC, EVEN_GLYPH, ODD_GLYPH};
use crate::ui::model::{Dashboard, Fingerprint, BAR_ORDERS};

pub(super) fn render_compare(d: &Dashboard, theme: Theme, area: Rect, buf: &mut Buffer) {
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

#[cfg(test)]
mod tests {
    use ratatui::style::Color;

    use super::*;
    use crate::ui::view::fixtures::{fingerprint, row, COLOUR, PLAIN};

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
}
