//! Where each part of the monitor goes on a screen of any size from 80×24 up.
//!
//! From the top: the source line, the spectrum (level labels in a left gutter), the frequency
//! axis, the channel-plan row when shown, the waterfall, the signal table, the marker line and
//! the settings line. The waterfall spans the full width because it scrolls with the terminal's
//! own scroll region, which moves whole lines; its gutter carries time labels that scroll along.
//! The spectrum and the waterfall share the same plot columns, so a signal lines up in both.

use ratatui::layout::Rect;

/// Width of the left gutter (level labels, time labels, the axis unit).
pub const GUTTER: u16 = 6;
/// Smallest screen the monitor draws on; below it a message asks for more room.
pub const MIN_WIDTH: u16 = 40;
pub const MIN_HEIGHT: u16 = 14;

#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct Screen {
    pub status: Rect,
    /// The spectrum including its gutter.
    pub spectrum: Rect,
    /// The spectrum's plot area (right of the gutter).
    pub spectrum_plot: Rect,
    pub axis: Rect,
    pub plan: Option<Rect>,
    /// Full-width waterfall lines, gutter included.
    pub waterfall: Rect,
    pub table: Rect,
    pub marker: Rect,
    pub footer: Rect,
}

impl Screen {
    /// Lays out `area`; `None` when it is too small to be useful.
    pub fn split(area: Rect, plan_row: bool) -> Option<Screen> {
        if area.width < MIN_WIDTH || area.height < MIN_HEIGHT {
            return None;
        }
        let h = area.height;
        let fixed = 4 + u16::from(plan_row); // status, axis, marker, footer (+ plan)
        let table_rows = (h / 8).clamp(3, 10);
        let table = table_rows + 1;
        let rest = h - fixed - table;
        let spectrum = (rest * 2 / 5).max(3);
        let waterfall = rest - spectrum;
        let row = |y: u16, height: u16| Rect::new(area.x, area.y + y, area.width, height);
        let mut y = 0;
        let mut take = |height: u16| {
            let r = row(y, height);
            y += height;
            r
        };
        let status = take(1);
        let spectrum_r = take(spectrum);
        let axis = take(1);
        let plan = plan_row.then(|| take(1));
        let waterfall_r = take(waterfall);
        let table_r = take(table);
        let marker = take(1);
        let footer = take(1);
        let plot = Rect::new(
            spectrum_r.x + GUTTER,
            spectrum_r.y,
            spectrum_r.width - GUTTER,
            spectrum_r.height,
        );
        Some(Screen {
            status,
            spectrum: spectrum_r,
            spectrum_plot: plot,
            axis,
            plan,
            waterfall: waterfall_r,
            table: table_r,
            marker,
            footer,
        })
    }

    /// The waterfall's plot area (right of the gutter), aligned with the spectrum's.
    pub fn waterfall_plot(&self) -> Rect {
        let w = self.waterfall;
        Rect::new(w.x + GUTTER, w.y, w.width - GUTTER, w.height)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn check(width: u16, height: u16, plan: bool) -> Screen {
        let s = Screen::split(Rect::new(0, 0, width, height), plan).unwrap();
        let mut parts =
            vec![s.status, s.spectrum, s.axis, s.waterfall, s.table, s.marker, s.footer];
        if let Some(p) = s.plan {
            parts.insert(3, p);
        }
        // Stacked without gaps or overlap, filling the screen.
        let mut y = 0;
        for p in &parts {
            assert_eq!(p.y, y);
            assert_eq!(p.width, width);
            y += p.height;
        }
        assert_eq!(y, height);
        assert_eq!(s.spectrum_plot.x, s.waterfall_plot().x);
        assert_eq!(s.spectrum_plot.width, s.waterfall_plot().width);
        s
    }

    #[test]
    fn fits_from_80x24_to_300x100() {
        let small = check(80, 24, false);
        assert_eq!(small.spectrum.height, 6);
        assert_eq!(small.waterfall.height, 10);
        assert_eq!(small.table.height, 4);
        let big = check(160, 48, true);
        assert!(big.waterfall.height >= 20, "{big:?}");
        check(300, 100, true);
        check(MIN_WIDTH, MIN_HEIGHT, true);
        assert!(Screen::split(Rect::new(0, 0, 39, 24), false).is_none());
        assert!(Screen::split(Rect::new(0, 0, 80, 13), false).is_none());
    }
}
