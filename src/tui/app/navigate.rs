//! Moving about: the time cursor through the history, the marker from signal to signal and
//! channel to channel, the table's order and mode, and the band between the markers.

use super::super::timeline::TimeMode;
use super::super::widgets::table::row_at;
use super::{App, BandReading, Mode, TableMode, NO_PLAN};
use crate::measure::{band_power, occupied_bandwidth};
use crate::units::db;

impl App {
    /// Holds the display still with the time cursor on the newest row.
    pub(super) fn freeze(&mut self) {
        if self.mode == Mode::Frozen {
            return;
        }
        self.mode = Mode::Frozen;
        self.cursor.index = self.history.total().checked_sub(1);
        self.cursor.spectrum = None;
    }

    /// Back to the live display.
    pub(super) fn resume(&mut self) {
        if self.mode != Mode::Frozen {
            return;
        }
        self.mode = Mode::Live;
        self.cursor.index = None;
        self.cursor.spectrum = None;
        self.frame.epoch += 1;
    }

    /// Moves the time cursor by `lines` waterfall lines (two rows each; negative is back in
    /// time), freezing the display first. The cursor's row feeds the spectrum and the table.
    pub(super) fn move_cursor(&mut self, lines: i64) {
        if self.history.is_empty() {
            return;
        }
        self.freeze();
        let newest = self.history.total() - 1;
        let oldest = self.history.oldest_index();
        let at = self.cursor.index.unwrap_or(newest) as i64 + 2 * lines;
        let at = at.clamp(oldest as i64, newest as i64) as u64;
        if Some(at) == self.cursor.index {
            let end = if lines < 0 { "oldest row kept" } else { "newest row" };
            self.say(format!("at the {end}; space goes live"));
        }
        self.cursor.index = Some(at);
        self.cursor.spectrum = self.history.by_index(at).and_then(|r| r.to_spectrum());
        if self.cursor.spectrum.is_none() {
            self.say("rows of FFTs above 8192 bins are kept reduced: the spectrum keeps the frozen traces");
        }
        self.measure();
        self.refresh_readings();
    }

    /// How far back the time cursor is, seconds of input (0 when live).
    pub fn cursor_age_s(&self) -> f64 {
        let (Some(c), Some(newest)) = (
            self.cursor.index,
            self.history.total().checked_sub(1).and_then(|i| self.history.by_index(i)),
        ) else {
            return 0.0;
        };
        self.history.by_index(c).map_or(0.0, |r| newest.time_s - r.time_s)
    }

    pub(super) fn toggle_utc(&mut self) {
        self.times.mode = match self.times.mode {
            TimeMode::Utc => TimeMode::Relative,
            TimeMode::Relative => TimeMode::Utc,
        };
        if self.times.mode == TimeMode::Utc && !self.times.is_utc() {
            self.say("the start time of this input is unknown (give --start); times stay relative");
        }
        self.frame.epoch += 1;
    }

    pub(super) fn next_sort(&mut self) {
        self.table.sort = self.table.sort.next();
        self.table.sort.apply(&mut self.table.signals);
    }

    pub(super) fn toggle_channels(&mut self) {
        if self.plan.marks.is_empty() {
            self.say(NO_PLAN);
            return;
        }
        self.table.mode = match self.table.mode {
            TableMode::Signals => TableMode::Channels,
            TableMode::Channels => TableMode::Signals,
        };
    }

    /// Puts the marker on `freq_hz`, bringing it into view.
    fn marker_to(&mut self, freq_hz: f64) {
        self.markers.at = Some(freq_hz);
        if let (Some(v), Some(span)) = (self.view, self.span()) {
            if !(v.lo_hz..v.hi_hz).contains(&freq_hz) {
                self.set_view(v.centred_on(freq_hz, span));
            }
        }
    }

    pub(super) fn marker_to_strongest(&mut self) {
        let best = self.table.signals.iter().max_by(|a, b| a.power_dbfs.total_cmp(&b.power_dbfs));
        match best.map(|s| s.freq_hz) {
            Some(f) => self.marker_to(f),
            None => self.say("no signal stands clear of the noise"),
        }
    }

    /// The table row the marker sits on (within its occupied band), if any.
    pub fn signal_under_marker(&self) -> Option<usize> {
        let m = self.markers.at?;
        self.table.signals.iter().position(|s| m >= s.obw.low_hz && m <= s.obw.high_hz)
    }

    /// Marker to the next (`+1`) or previous (`-1`) row of the table, in the table's order;
    /// from no row, to the first or the last.
    pub(super) fn step_signal(&mut self, dir: i64) {
        let n = self.table.signals.len() as i64;
        if n == 0 {
            self.say("no signal stands clear of the noise");
            return;
        }
        let i = match self.signal_under_marker() {
            Some(i) => (i as i64 + dir).rem_euclid(n),
            None if dir > 0 => 0,
            None => n - 1,
        };
        let f = self.table.signals[i as usize].freq_hz;
        self.marker_to(f);
    }

    /// A click on a row of the table moves the marker to that signal or channel.
    pub(super) fn click_table(&mut self, x: u16, y: u16) {
        let Some(s) = self.frame.screen else { return };
        let rows = match self.table.mode {
            TableMode::Signals => self.table.signals.len(),
            TableMode::Channels => self.plan.marks.len(),
        };
        let Some(i) = row_at(s.table, rows, x, y) else { return };
        let f = match self.table.mode {
            TableMode::Signals => self.table.signals[i].freq_hz,
            TableMode::Channels => self.plan.marks[i].center_hz,
        };
        self.marker_to(f);
        self.refresh_readings();
    }

    /// Power and 99 % OBW between the two markers, on the trace the table measures.
    pub(super) fn band_reading(&self) -> Option<BandReading> {
        let (a, b) = (self.markers.at?, self.markers.reference?);
        let (lo, hi) = (a.min(b), a.max(b));
        if hi - lo <= 0.0 {
            return None;
        }
        let spec = self.cursor.spectrum.clone().or_else(|| self.traces.average_spectrum())?;
        let p = band_power(&spec, lo, hi);
        Some(BandReading {
            low_hz: lo,
            high_hz: hi,
            power_dbfs: db(p),
            obw: occupied_bandwidth(&spec, lo, hi, 99.0),
        })
    }
}
