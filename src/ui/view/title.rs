//! The title line: the badge, the mode and the source (cut to fit), and on the right the meter
//! ballistics, the freeze and lost-input marks and the stream time.

use ratatui::buffer::Buffer;
use ratatui::layout::Rect;
use ratatui::style::{Color, Modifier, Style};
use ratatui::text::{Line, Span};
use ratatui::widgets::Widget;

use super::Theme;
use crate::ui::model::{clock, Dashboard, InputStatus};

pub(super) fn render_title(d: &Dashboard, theme: Theme, area: Rect, buf: &mut Buffer) {
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

#[cfg(test)]
mod tests {
    use super::*;
    use crate::ui::view::fixtures::{many_channels, text_of};

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
}
