//! The help overlay: every key from the binding table, the mouse, where `e` and `g` write
//! (`--evidence-dir`), and what the traces are.

use super::super::colour::Theme;
use super::super::input::{HELP, MOUSE_HELP};
use super::spectrum::SpectrumPlot;
use ratatui::buffer::Buffer;
use ratatui::layout::Rect;
use ratatui::text::{Line, Span};
use ratatui::widgets::{Block, Borders, Clear, Widget};

/// Width of the keys column.
const KEYS_W: usize = 13;

pub struct HelpOverlay<'a> {
    pub theme: &'a Theme,
    /// The folder `e` and `g` write into.
    pub files_dir: &'a str,
}

impl HelpOverlay<'_> {
    /// The overlay's lines: one per binding row, the mouse, and a legend of the traces.
    pub fn lines(&self) -> Vec<Line<'static>> {
        let t = self.theme;
        let row = |keys: &str, what: &str| {
            Line::from(vec![
                Span::styled(format!(" {keys:<KEYS_W$} "), t.header),
                Span::styled(what.to_string(), t.label),
            ])
        };
        let mut lines: Vec<Line<'static>> = HELP.iter().map(|r| row(r.keys, r.what)).collect();
        lines.push(row(MOUSE_HELP.0, MOUSE_HELP.1));
        let dir = match self.files_dir {
            "." => "the working directory".to_string(),
            d => crate::messages::sanitize(d),
        };
        lines.push(row("files", &format!("e and g write into {dir} (--evidence-dir)")));
        let mut legend = vec![Span::styled(format!(" {:<KEYS_W$} ", "traces"), t.header)];
        for (text, style) in SpectrumPlot::legend_of(t) {
            legend.push(Span::styled(format!("{text}  "), style));
        }
        legend.push(Span::styled("│ marker", t.marker));
        lines.push(Line::from(legend));
        lines
    }
}

impl Widget for &HelpOverlay<'_> {
    fn render(self, area: Rect, buf: &mut Buffer) {
        let lines = self.lines();
        let inner_w = lines.iter().map(Line::width).max().unwrap_or(0) + 2;
        let w = (inner_w as u16 + 2).min(area.width);
        let h = (lines.len() as u16 + 2).min(area.height);
        let popup = Rect::new(area.x + (area.width - w) / 2, area.y + (area.height - h) / 2, w, h);
        Clear.render(popup, buf);
        let block = Block::default()
            .borders(Borders::ALL)
            .border_style(self.theme.grid)
            .title(Span::styled(" keys ", self.theme.title))
            .title_bottom(Span::styled(" Esc or ? closes ", self.theme.label));
        let inner = block.inner(popup);
        block.render(popup, buf);
        for (i, line) in lines.iter().enumerate().take(inner.height as usize) {
            buf.set_line(inner.x, inner.y + i as u16, line, inner.width);
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::tui::colour::Depth;
    use crate::tui::widgets::text_lines;

    #[test]
    fn every_key_row_is_on_screen_at_80x24() {
        let theme = Theme::new(Depth::Palette256);
        let mut buf = Buffer::empty(Rect::new(0, 0, 80, 24));
        (&HelpOverlay { theme: &theme, files_dir: "/srv/evidence" }).render(buf.area, &mut buf);
        let screen = text_lines(&buf).join("\n");
        for row in HELP {
            let expect = format!(" {:<KEYS_W$} {}", row.keys, row.what);
            assert!(screen.contains(&expect), "missing: {expect}\n{screen}");
        }
        assert!(screen.contains(MOUSE_HELP.1));
        assert!(screen.contains("e and g write into /srv/evidence (--evidence-dir)"), "{screen}");
        assert!(screen.contains("┌ keys "));
        assert!(screen.contains("Esc or ? closes"));
    }
}
