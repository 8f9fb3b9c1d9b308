//! Moving about: the time cursor through the history, the marker from signal to signal and
//! channel to channel, the table's order and mode, and the band between the markers.

use super::super::timeline::TimeMode;
use super::super::widgets::table::{capacity, first_shown, row_at};
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
        if self.table.mode == TableMode::Channels {
            self.say("r orders the signal table (t shows it); channels keep the plan's order");
            return;
        }
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
        self.table.first_row = 0;
        self.keep_marked_row_in_view();
    }

    /// Rows in the table as it is shown now (signals or channels).
    fn table_rows(&self) -> usize {
        match self.table.mode {
            TableMode::Signals => self.table.signals.len(),
            TableMode::Channels => self.plan.marks.len(),
        }
    }

    /// The row of the table on show that the marker is on, if any.
    pub(super) fn marked_row(&self) -> Option<usize> {
        match self.table.mode {
            TableMode::Signals => self.signal_under_marker(),
            TableMode::Channels => {
                let m = self.markers.at?;
                self.plan.marks.iter().position(|c| c.contains(m))
            }
        }
    }

    /// Rows the table area held on the last frame (all of them before the first).
    pub(super) fn table_capacity(&self) -> usize {
        self.frame.screen.map_or(usize::MAX, |s| capacity(s.table))
    }

    /// Scrolls the table so that the marker's row is on show.
    pub(super) fn keep_marked_row_in_view(&mut self) {
        let (rows, cap) = (self.table_rows(), self.table_capacity());
        self.table.first_row = first_shown(rows, cap, self.table.first_row, self.marked_row());
    }

    /// Puts the marker on `freq_hz`, bringing it into view, and its table row too.
    fn marker_to(&mut self, freq_hz: f64) {
        self.markers.at = Some(freq_hz);
        if let (Some(v), Some(span)) = (self.view, self.span()) {
            if !(v.lo_hz..v.hi_hz).contains(&freq_hz) {
                self.set_view(v.centred_on(freq_hz, span));
            }
        }
        self.keep_marked_row_in_view();
    }

    /// `b`: the marker to the strongest signal, or in the channel panel to the channel with
    /// the most power now.
    pub(super) fn marker_to_strongest(&mut self) {
        let best = match self.table.mode {
            TableMode::Signals => self
                .table
                .signals
                .iter()
                .max_by(|a, b| a.power_dbfs.total_cmp(&b.power_dbfs))
                .map(|s| s.freq_hz),
            TableMode::Channels => self
                .plan
                .marks
                .iter()
                .zip(&self.plan.activity.channels)
                .filter_map(|(c, st)| Some((c.center_hz, st.power_dbfs?)))
                .max_by(|a, b| a.1.total_cmp(&b.1))
                .map(|(f, _)| f),
        };
        match best {
            Some(f) => self.marker_to(f),
            None if self.table.mode == TableMode::Channels => {
                self.say("no channel has been measured yet")
            }
            None => self.say("no signal stands clear of the noise"),
        }
    }

    /// The table row the marker sits on (within its occupied band), if any.
    pub fn signal_under_marker(&self) -> Option<usize> {
        let m = self.markers.at?;
        self.table.signals.iter().position(|s| m >= s.obw.low_hz && m <= s.obw.high_hz)
    }

    /// Marker to the next (`+1`) or previous (`-1`) row of the table on show (signals or
    /// channels), in its order; from no row, to the first or the last.
    pub(super) fn step_row(&mut self, dir: i64) {
        let n = self.table_rows() as i64;
        if n == 0 {
            self.say("no signal stands clear of the noise");
            return;
        }
        let i = match self.marked_row() {
            Some(i) => (i as i64 + dir).rem_euclid(n),
            None if dir > 0 => 0,
            None => n - 1,
        } as usize;
        let f = match self.table.mode {
            TableMode::Signals => self.table.signals[i].freq_hz,
            TableMode::Channels => self.plan.marks[i].center_hz,
        };
        self.marker_to(f);
    }

    /// A click on a row of the table moves the marker to that signal or channel.
    pub(super) fn click_table(&mut self, x: u16, y: u16) {
        let Some(s) = self.frame.screen else { return };
        let (rows, cap) = (self.table_rows(), capacity(s.table));
        let first = first_shown(rows, cap, self.table.first_row, None);
        let Some(i) = row_at(s.table, rows, first, x, y) else { return };
        let f = match self.table.mode {
            TableMode::Signals => self.table.signals[i].freq_hz,
            TableMode::Channels => self.plan.marks[i].center_hz,
        };
        self.marker_to(f);
        self.refresh_readings();
    }

    /// Power and 99 % OBW between the two markers, on the trace the table measures, with the
    /// noise taken off as the table does: the power less the noise in the band (floor density
    /// × width), the OBW of the bins less the floor (ITU-R SM.328 over what stands above it).
    pub(super) fn band_reading(&self) -> Option<BandReading> {
        let (a, b) = (self.markers.at?, self.markers.reference?);
        let (lo, hi) = (a.min(b), a.max(b));
        if hi - lo <= 0.0 {
            return None;
        }
        let mut spec = self.cursor.spectrum.clone().or_else(|| self.traces.average_spectrum())?;
        let floor = self.measured.floor_density.unwrap_or(0.0);
        let above = band_power(&spec, lo, hi) - floor * (hi - lo);
        for p in &mut spec.psd {
            *p = (*p - floor).max(0.0);
        }
        Some(BandReading {
            low_hz: lo,
            high_hz: hi,
            power_dbfs: (above > 0.0).then(|| db(above)),
            obw: occupied_bandwidth(&spec, lo, hi, 99.0),
        })
    }
}
