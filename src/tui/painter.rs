//! Draws the waterfall straight to the terminal, scrolling it with the terminal's own scroll
//! region instead of rewriting every cell.
//!
//! A waterfall that moves down one line changes every one of its cells, so a cell-by-cell diff
//! sends the whole area each time: hundreds of kilobytes a second at 160×48. Instead we set the
//! scroll region to the waterfall's lines (DECSTBM, `CSI top;bottom r`), put the cursor on its top
//! line and send Reverse Index (`ESC M`) once per new line: the terminal moves the picture down
//! itself, and we only write the new top line. Both sequences are VT100, understood by every
//! terminal emulator in use and by tmux and screen. The cells of the waterfall are marked to be
//! skipped by the cell diff, so the two never fight over them.
//!
//! Lines are encoded with the fewest colour codes: a code only when the colour changes, the
//! foreground ignored under a space and both colours in one sequence.

use super::history::pairs;
use super::widgets::waterfall::WaterfallPlot;
use ratatui::buffer::Cell;
use ratatui::layout::Rect;
use ratatui::style::{Color, Modifier};
use std::io::Write;

/// What is on the terminal now.
#[derive(Clone, Copy, Debug, PartialEq)]
struct Drawn {
    area: Rect,
    epoch: u64,
    total: u64,
}

/// Keeps track of what the terminal shows of the waterfall and brings it up to date.
#[derive(Debug, Default)]
pub struct Painter {
    drawn: Option<Drawn>,
}

impl Painter {
    /// Forgets what is on screen; the next paint draws every line.
    pub fn invalidate(&mut self) {
        self.drawn = None;
    }

    /// Whether the terminal shows what the painter last drew.
    pub fn is_valid(&self) -> bool {
        self.drawn.is_some()
    }

    /// Appends to `out` what brings the terminal's waterfall `area` up to date with `plot`;
    /// `epoch` changes whenever every line must be drawn again.
    pub fn paint(&mut self, out: &mut Vec<u8>, area: Rect, epoch: u64, plot: &WaterfallPlot<'_>) {
        if area.height == 0 || area.width == 0 {
            return;
        }
        let total = plot.shown_rows();
        let lines: Vec<u16> = match self.drawn {
            Some(d) if d.area == area && d.epoch == epoch && total >= d.total => {
                if d.total == total {
                    return;
                }
                let scroll = pairs(total) - pairs(d.total);
                if scroll >= area.height as u64 {
                    (0..area.height).collect()
                } else {
                    let scroll = scroll as u16;
                    if scroll > 0 {
                        scroll_down(out, area, scroll);
                    }
                    // New lines, and the line whose pair was half drawn if it is now complete.
                    let partial = u16::from(d.total % 2 == 1);
                    (0..scroll + partial).collect()
                }
            }
            _ => (0..area.height).collect(),
        };
        let mut enc = Encoder::default();
        out.extend_from_slice(b"\x1b[0m");
        for y in lines {
            let cells = plot.line_cells(y, area.width);
            enc.line(out, area.x, area.y + y, &cells);
        }
        out.extend_from_slice(b"\x1b[0m");
        self.drawn = Some(Drawn { area, epoch, total });
    }
}

/// Moves the lines of `area` down by `n`, leaving `n` blank lines at its top.
fn scroll_down(out: &mut Vec<u8>, area: Rect, n: u16) {
    let top = area.y + 1;
    let bottom = area.y + area.height;
    // Reset colours first: the blank lines take the current background.
    let _ = write!(out, "\x1b[0m\x1b[{top};{bottom}r\x1b[{top};1H");
    for _ in 0..n {
        out.extend_from_slice(b"\x1bM");
    }
    // Back to the whole screen (this also homes the cursor).
    out.extend_from_slice(b"\x1b[r");
}

/// Writes cells with the minimum of SGR codes, remembering the current attributes.
#[derive(Debug)]
pub struct Encoder {
    fg: Color,
    bg: Color,
    modifier: Modifier,
}

impl Default for Encoder {
    fn default() -> Self {
        Encoder { fg: Color::Reset, bg: Color::Reset, modifier: Modifier::empty() }
    }
}

impl Encoder {
    /// Moves to (`x`, `y`) and writes `cells`. The attributes must be reset when this encoder
    /// starts (the caller writes `CSI 0 m`).
    pub fn line(&mut self, out: &mut Vec<u8>, x: u16, y: u16, cells: &[Cell]) {
        let _ = write!(out, "\x1b[{};{}H", y + 1, x + 1);
        for cell in cells {
            self.cell(out, cell);
        }
    }

    fn cell(&mut self, out: &mut Vec<u8>, cell: &Cell) {
        let symbol = cell.symbol();
        let mut params: Vec<String> = Vec::new();
        if cell.modifier != self.modifier {
            params.push("0".into());
            self.fg = Color::Reset;
            self.bg = Color::Reset;
            self.modifier = cell.modifier;
            for (m, code) in
                [(Modifier::BOLD, "1"), (Modifier::DIM, "2"), (Modifier::REVERSED, "7")]
            {
                if cell.modifier.contains(m) {
                    params.push(code.into());
                }
            }
        }
        // Under a space the foreground does not show, so it need not change.
        if cell.fg != self.fg && symbol != " " {
            params.push(sgr_colour(cell.fg, false));
            self.fg = cell.fg;
        }
        if cell.bg != self.bg {
            params.push(sgr_colour(cell.bg, true));
            self.bg = cell.bg;
        }
        if !params.is_empty() {
            let _ = write!(out, "\x1b[{}m", params.join(";"));
        }
        out.extend_from_slice(symbol.as_bytes());
    }
}

/// SGR parameters for a colour.
fn sgr_colour(c: Color, background: bool) -> String {
    let base = if background { 40 } else { 30 };
    match c {
        Color::Reset => format!("{}", base + 9),
        Color::Rgb(r, g, b) => format!("{};2;{r};{g};{b}", base + 8),
        Color::Indexed(i) => format!("{};5;{i}", base + 8),
        Color::Black => format!("{base}"),
        Color::Red => format!("{}", base + 1),
        Color::Green => format!("{}", base + 2),
        Color::Yellow => format!("{}", base + 3),
        Color::Blue => format!("{}", base + 4),
        Color::Magenta => format!("{}", base + 5),
        Color::Cyan => format!("{}", base + 6),
        Color::Gray => format!("{}", base + 7),
        Color::DarkGray => format!("{}", base + 60),
        Color::LightRed => format!("{}", base + 61),
        Color::LightGreen => format!("{}", base + 62),
        Color::LightYellow => format!("{}", base + 63),
        Color::LightBlue => format!("{}", base + 64),
        Color::LightMagenta => format!("{}", base + 65),
        Color::LightCyan => format!("{}", base + 66),
        Color::White => format!("{}", base + 67),
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::tui::colour::{Depth, MapKind, Palette, Theme};
    use crate::tui::history::{History, Row};
    use crate::tui::layout::GUTTER;
    use crate::tui::timeline::TimeBase;
    use crate::tui::view::{BinGrid, View};

    /// A tiny terminal: applies our own output (CUP, SGR, DECSTBM, RI) to a grid of cells, so
    /// the tests check what a terminal would show, not the bytes.
    struct Screen {
        w: usize,
        cells: Vec<Vec<(String, Color, Color)>>,
        x: usize,
        y: usize,
        fg: Color,
        bg: Color,
        region: (usize, usize),
    }

    impl Screen {
        fn new(w: usize, h: usize) -> Screen {
            Screen {
                w,
                cells: vec![vec![(" ".into(), Color::Reset, Color::Reset); w]; h],
                x: 0,
                y: 0,
                fg: Color::Reset,
                bg: Color::Reset,
                region: (0, h - 1),
            }
        }

        fn feed(&mut self, bytes: &[u8]) {
            let text = std::str::from_utf8(bytes).unwrap();
            let mut chars = text.chars().peekable();
            while let Some(c) = chars.next() {
                if c != '\x1b' {
                    self.cells[self.y][self.x] = (c.to_string(), self.fg, self.bg);
                    self.x = (self.x + 1).min(self.w - 1);
                    continue;
                }
                if chars.peek() == Some(&'M') {
                    chars.next();
                    if self.y == self.region.0 {
                        let (t, b) = self.region;
                        self.cells.remove(b);
                        let blank = vec![(" ".into(), Color::Reset, self.bg); self.w];
                        self.cells.insert(t, blank);
                    } else {
                        self.y -= 1;
                    }
                    continue;
                }
                assert_eq!(chars.next(), Some('['));
                let mut params = String::new();
                let fin = loop {
                    let c = chars.next().unwrap();
                    if c.is_ascii_alphabetic() {
                        break c;
                    }
                    params.push(c);
                };
                let nums: Vec<usize> = params
                    .split(';')
                    .filter(|s| !s.is_empty())
                    .map(|s| s.parse().unwrap())
                    .collect();
                match fin {
                    'H' => {
                        self.y = nums[0] - 1;
                        self.x = nums[1] - 1;
                    }
                    'r' => {
                        let h = self.cells.len();
                        self.region =
                            if nums.is_empty() { (0, h - 1) } else { (nums[0] - 1, nums[1] - 1) };
                        self.x = 0;
                        self.y = 0;
                    }
                    'm' => self.sgr(&nums),
                    other => panic!("unexpected sequence {other}"),
                }
            }
        }

        fn sgr(&mut self, p: &[usize]) {
            let mut i = 0;
            if p.is_empty() {
                self.fg = Color::Reset;
                self.bg = Color::Reset;
            }
            while i < p.len() {
                match p[i] {
                    0 => {
                        self.fg = Color::Reset;
                        self.bg = Color::Reset;
                    }
                    39 => self.fg = Color::Reset,
                    49 => self.bg = Color::Reset,
                    38 | 48 => {
                        let is_fg = p[i] == 38;
                        let c = if p[i + 1] == 2 {
                            i += 4;
                            Color::Rgb(p[i - 2] as u8, p[i - 1] as u8, p[i] as u8)
                        } else {
                            i += 2;
                            Color::Indexed(p[i] as u8)
                        };
                        if is_fg {
                            self.fg = c;
                        } else {
                            self.bg = c;
                        }
                    }
                    _ => {}
                }
                i += 1;
            }
        }
    }

    fn row(peak: usize, t: f64) -> Row {
        let mut level_db = vec![-80.0f32; 16];
        level_db[peak] = 0.0;
        Row::new(BinGrid { first_hz: 0.0, bin_hz: 1.0, len: 16 }, &level_db, t)
    }

    /// What a cell looks like on screen (colours under a space do not matter for the fg).
    fn look(c: &(String, Color, Color)) -> (String, Option<Color>, Color) {
        (c.0.clone(), (c.0 != " ").then_some(c.1), c.2)
    }

    fn check_same(screen: &Screen, plot: &WaterfallPlot<'_>, area: Rect) {
        for y in 0..area.height {
            let want = plot.line_cells(y, area.width);
            for (x, cell) in want.iter().enumerate() {
                let got = &screen.cells[(area.y + y) as usize][(area.x as usize) + x];
                let want = (cell.symbol().to_string(), cell.fg, cell.bg);
                assert_eq!(look(got), look(&want), "line {y} column {x}");
            }
        }
    }

    #[test]
    fn scrolling_shows_the_same_picture_as_a_full_redraw() {
        let area = Rect::new(0, 2, GUTTER + 16, 5);
        let palette = Palette::new(Depth::TrueColour, MapKind::Viridis);
        let theme = Theme::new(Depth::TrueColour);
        let mut history = History::new(1 << 20);
        let times = TimeBase::relative(1.0);
        let mut screen = Screen::new(area.width as usize, 9);
        let mut painter = Painter::default();
        // Rows arrive one, two or three at a time; after each batch the screen must match.
        let mut t = 0.0;
        for batch in [1usize, 1, 2, 3, 1, 1, 5, 1, 20, 1] {
            for _ in 0..batch {
                history.push(row((t * 10.0) as usize % 16, t));
                t += 0.3;
            }
            let plot = WaterfallPlot {
                history: &history,
                view: View::new(-0.5, 15.5),
                bottom_dbfs: -80.0,
                range_db: 80.0,
                palette: &palette,
                theme: &theme,
                label_every_s: 1.0,
                times: &times,
                end: u64::MAX,
                pairs_only: batch % 2 == 0,
            };
            let mut out = Vec::new();
            painter.paint(&mut out, area, 0, &plot);
            screen.feed(&out);
            check_same(&screen, &plot, area);
            // The lines outside the region are untouched.
            assert!(screen.cells[0].iter().chain(&screen.cells[8]).all(|c| c.0 == " "));
        }
    }

    #[test]
    fn one_new_line_costs_one_line() {
        let area = Rect::new(0, 0, GUTTER + 16, 10);
        let palette = Palette::new(Depth::TrueColour, MapKind::Viridis);
        let theme = Theme::new(Depth::TrueColour);
        let mut history = History::new(1 << 20);
        for i in 0..20 {
            history.push(row(i % 16, i as f64 * 0.05));
        }
        let mut painter = Painter::default();
        fn plot<'a>(h: &'a History, p: &'a Palette, t: &'a Theme) -> WaterfallPlot<'a> {
            static TIMES: std::sync::OnceLock<TimeBase> = std::sync::OnceLock::new();
            WaterfallPlot {
                times: TIMES.get_or_init(|| TimeBase::relative(1.0)),
                end: u64::MAX,
                history: h,
                view: View::new(-0.5, 15.5),
                bottom_dbfs: -80.0,
                range_db: 80.0,
                palette: p,
                theme: t,
                label_every_s: 60.0,
                pairs_only: false,
            }
        }
        let mut full = Vec::new();
        painter.paint(&mut full, area, 0, &plot(&history, &palette, &theme));
        history.push(row(3, 1.0));
        let mut step = Vec::new();
        painter.paint(&mut step, area, 0, &plot(&history, &palette, &theme));
        assert!(step.len() * 5 < full.len(), "{} vs {}", step.len(), full.len());
        assert!(step.starts_with(b"\x1b[0m\x1b[1;10r\x1b[1;1H\x1bM\x1b[r"));
        // Nothing new, nothing written; a new epoch draws everything again.
        let mut none = Vec::new();
        painter.paint(&mut none, area, 0, &plot(&history, &palette, &theme));
        assert!(none.is_empty());
        let mut again = Vec::new();
        painter.paint(&mut again, area, 1, &plot(&history, &palette, &theme));
        assert!(again.len() > step.len() * 5);
    }

    #[test]
    fn encoder_writes_colour_codes_only_on_change() {
        let mut cells = vec![Cell::EMPTY; 4];
        for c in cells.iter_mut() {
            c.set_symbol("▀").set_fg(Color::Indexed(1)).set_bg(Color::Indexed(2));
        }
        cells[3].set_symbol(" ").set_fg(Color::Indexed(9)).set_bg(Color::Indexed(2));
        let mut out = Vec::new();
        Encoder::default().line(&mut out, 0, 0, &cells);
        assert_eq!(String::from_utf8(out).unwrap(), "\x1b[1;1H\x1b[38;5;1;48;5;2m▀▀▀ ");
    }
}
