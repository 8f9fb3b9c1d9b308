//! The monitor's state and what each intent does to it; no terminal code, so it is tested
//! directly.
//!
//! Levels are kept in dBFS of power in one RBW (so a tone reads its own level); a reference
//! offset only changes what is printed. Measurements (noise floor, signal table, automatic
//! scale) run on the average trace a few times a second, not on every row: the table must be
//! readable and the monitor light. They run on this, the UI thread, because they measure the
//! monitor's own average trace (or the time cursor's row), which the DSP thread never sees; the
//! rows the feed sends are single rows, not that average.
//!
//! Every `impl App` lives in this module: here the rows, the clock and the intents; in
//! [`navigate`] moving about; in [`evidence`] and [`picture`] the files `e` and `g` write; in
//! [`views`] the plain values the widgets draw.

mod evidence;
mod navigate;
mod parts;
mod picture;
mod views;

use super::channels::AlarmEvent;
use super::colour::Depth;
use super::history::{History, Row, HISTORY_BYTES};
use super::input::Intent;
use super::layout::Screen;
pub use super::state::{
    AlarmLog, BandReading, ChannelMark, Levels, Mode, SortKey, SourceSummary, Stats, SweepSummary,
    TableMode,
};
use super::timeline::TimeBase;
use super::traces::Traces;
use super::view::{column_max, BinGrid, View, MIN_VIEW_BINS};
use crate::dsp::{Spectrum, Window, WindowKind};
use crate::measure::classify::Class;
use crate::measure::{find_signals, spectrum_floor, Detection};
use crate::output::log::changes::ChangeBoard;
use crate::pipeline::kinds::LiveKinds;
use crate::pipeline::latest::RowSettings;
use crate::units::{db, format_rows_per_s};
use parts::{Alerts, FrameInfo, Look, Markers, Measured, PlanState, TableState, TimeCursor};
use std::time::{Duration, Instant};

/// How often the table, the noise floor, the marker readings and the automatic scale are
/// refreshed: often enough to follow the band, seldom enough to read, and light (refining a
/// peak between bins evaluates the window's response many times).
pub const MEASURE_EVERY: Duration = Duration::from_millis(500);
/// Signals measured for the table (the screen shows as many as fit).
pub const MAX_SIGNALS: usize = 12;
/// FFT sizes reachable with the keys.
pub const FFT_KEYS_MIN: usize = 64;
pub const FFT_KEYS_MAX: usize = 65536;
/// Row rates reachable with the keys, rows per second: down to one row in ten seconds, so the
/// waterfall can cover a quarter of an hour (each row averages every frame of its time).
pub const ROW_RATES: [f64; 11] = [0.1, 0.2, 0.5, 1.0, 2.0, 5.0, 10.0, 15.0, 20.0, 30.0, 50.0];
/// How long a notice stays on the marker line.
pub const NOTICE_FOR: Duration = Duration::from_secs(4);
/// What `o` and `t` say without a plan.
pub const NO_PLAN: &str = "no channel plan: start with --plan FILE or --channel NAME=CENTER:WIDTH";

/// Limits of the dynamic range, dB.
pub const RANGE_MIN_DB: f64 = 20.0;
pub const RANGE_MAX_DB: f64 = 200.0;
/// Limits of the reference level (the top of the scale), dBFS: a full-scale tone is 0 dBFS, and
/// the noise of the largest FFT in one RBW lies well above the bottom a 200 dB range leaves.
pub const REF_MIN_DBFS: f64 = -200.0;
pub const REF_MAX_DBFS: f64 = 30.0;

/// The live monitor's state. Fields are grouped by what they are about and private: the event
/// loop talks to it through intents and a few methods, the widgets through plain views.
pub struct App {
    mode: Mode,
    help: bool,
    source: SourceSummary,
    /// What the DSP was last asked for, and a request not yet taken by the feed.
    settings: RowSettings,
    pending_settings: Option<RowSettings>,
    view: Option<View>,
    levels: Levels,
    markers: Markers,
    look: Look,
    plan: PlanState,
    traces: Traces,
    history: History,
    table: TableState,
    measured: Measured,
    times: TimeBase,
    cursor: TimeCursor,
    alerts: Alerts,
    stats: Stats,
    /// The input has ended (and is not looping).
    ended: bool,
    frame: FrameInfo,
    /// Where `e` and `g` write (`--evidence-dir`).
    files_dir: String,
    /// The live classifier of the listed signals, and the kinds it found (centre, OBW, class).
    kinds: Option<LiveKinds>,
    kind_list: Vec<(f64, f64, Class)>,
    /// The change alarms up (`--alarms`), raised and cleared on the run's thread.
    changes: Option<ChangeBoard>,
    /// Of a sweep: what the header says, and when a bin is stale.
    sweep: Option<SweepSummary>,
}

impl App {
    pub fn new(
        source: SourceSummary,
        settings: RowSettings,
        depth: Depth,
        offset_db: Option<f64>,
        channels: Vec<ChannelMark>,
        now: Instant,
    ) -> App {
        let wrap = source.looping.then_some(source.total_samples).flatten();
        let times = TimeBase::new(source.clock.clone(), wrap);
        App {
            mode: Mode::Live,
            help: false,
            source,
            settings,
            pending_settings: None,
            view: None,
            levels: Levels { top_dbfs: 0.0, range_db: 100.0, auto: true, offset_db },
            markers: Markers::default(),
            look: Look::new(depth),
            plan: PlanState::new(channels),
            traces: Traces::default(),
            history: History::new(HISTORY_BYTES),
            table: TableState::default(),
            measured: Measured::default(),
            times,
            cursor: TimeCursor::default(),
            alerts: Alerts::default(),
            stats: Stats::new(now),
            ended: false,
            frame: FrameInfo::default(),
            files_dir: ".".into(),
            kinds: None,
            kind_list: Vec::new(),
            changes: None,
            sweep: None,
        }
    }

    /// The input is a sweep stitched into a panorama: the header says so, and bins not seen
    /// for longer than its revisit time are drawn stale.
    pub fn with_sweep(mut self, sweep: SweepSummary) -> App {
        self.sweep = Some(sweep);
        self
    }

    /// Of a sweep's row: per bin, whether it was not seen within a revisit time of the row's
    /// end; `None` for a receiver that stays put.
    fn stale_bins(&self, s: &Spectrum) -> Option<Vec<bool>> {
        let (sweep, seen) = (self.sweep?, s.last_seen.as_ref()?);
        Some(seen.iter().map(|&t| s.end_sample.saturating_sub(t) > sweep.stale_after).collect())
    }

    /// Per column of `ncols` across the view, whether the current row's bins there are stale
    /// (empty when none is).
    pub fn stale_columns(&self, ncols: usize) -> Vec<bool> {
        let (Some(cur), Some(view)) = (self.traces.current(), self.view) else { return Vec::new() };
        let Some(stale) = self.stale_bins(cur).filter(|s| s.iter().any(|x| *x)) else {
            return Vec::new();
        };
        let map = grid_of(cur).column_map(&view, ncols);
        map.into_iter().map(|r| stale.get(r).is_some_and(|s| s.iter().any(|x| *x))).collect()
    }

    /// Shows the change alarms up on `board` (`--alarms`) on the top line.
    pub fn with_changes(mut self, board: ChangeBoard) -> App {
        self.changes = Some(board);
        self
    }

    /// Records alarm onsets to `log` (`--alarm-log`).
    pub fn with_alarm_log(mut self, log: AlarmLog) -> App {
        self.plan.alarm_log = Some(log);
        self
    }

    /// Writes the files of `e` and `g` into `dir` (`--evidence-dir`).
    /// Shows each listed signal's kind, found by `kinds` off the screen's thread.
    pub fn with_kinds(mut self, kinds: LiveKinds) -> App {
        self.kinds = Some(kinds);
        self
    }

    pub fn with_files_dir(mut self, dir: &str) -> App {
        self.files_dir = dir.to_string();
        self
    }

    /// A file written into the files folder as the user knows it: its name alone in the
    /// working directory, else the path.
    fn shown_path(&self, path: &str) -> String {
        path.strip_prefix("./").unwrap_or(path).to_string()
    }

    /// Tells signals from noise as `detection` says (`--false-alarm`).
    pub fn with_detection(mut self, detection: Detection) -> App {
        self.measured.detection = detection;
        self
    }

    /// The frequency window on show, once a row has arrived.
    pub fn view(&self) -> Option<View> {
        self.view
    }

    /// The vertical scale.
    pub fn levels(&self) -> Levels {
        self.levels
    }

    /// The spectrum traces.
    pub fn traces(&self) -> &Traces {
        &self.traces
    }

    /// The waterfall's colours.
    pub fn palette(&self) -> &super::colour::Palette {
        &self.look.palette
    }

    /// Whether the user (or a signal) asked to quit.
    pub fn quitting(&self) -> bool {
        self.mode == Mode::Quit
    }

    /// Whether the help overlay is open (Esc then closes it rather than quitting).
    pub fn help_open(&self) -> bool {
        self.help
    }

    /// The input ended (the feed closed its queue).
    pub fn input_ended(&mut self) {
        self.ended = true;
    }

    /// The loss counters for the status lines: samples the reader dropped, rows the feed skipped.
    pub fn set_losses(&mut self, dropped: u64, skipped: u64) {
        self.stats.dropped = dropped;
        self.stats.skipped = skipped;
    }

    /// Counts a drawn frame (for the frame rate on the settings line).
    pub fn count_frame(&mut self, now: Instant) {
        self.stats.count_frame(now);
    }

    /// Where the parts of the screen are this frame, and whether the painter draws the
    /// waterfall.
    pub fn set_screen(&mut self, screen: Option<Screen>, painted_waterfall: bool) {
        self.frame.screen = screen;
        self.frame.external = painted_waterfall;
    }

    /// Bumped whenever every waterfall line must be drawn again.
    pub fn waterfall_epoch(&self) -> u64 {
        self.frame.epoch
    }

    /// Whether the painter draws the waterfall (its cells are then left alone).
    pub fn waterfall_painted(&self) -> bool {
        self.frame.external
    }

    /// Terminal bells to ring now (alarm onsets); counted down to zero.
    pub fn take_bells(&mut self) -> u32 {
        std::mem::take(&mut self.alerts.bells)
    }

    /// The error that stopped the alarm log, if one did.
    /// The channel-alarm hold-off, seconds of input.
    pub fn with_alarm_hold(mut self, hold_s: f64) -> App {
        self.plan.activity.hold_s = hold_s;
        self
    }

    /// Ends every open channel alarm as the monitor closes, with its record.
    pub fn close_alarms(&mut self) {
        let ended = self.plan.activity.end_alarms(None);
        self.log_alarms(&ended, self.last_row_end(), "closed");
    }

    /// Records alarm events; says once on screen when the alarm log fails.
    fn log_alarms(&mut self, events: &[AlarmEvent], end: u64, why_ended: &str) {
        if events.is_empty() {
            return;
        }
        if let Some(e) = self.plan.log_alarms(events, end, &self.times, why_ended) {
            self.say(format!("alarm log: {e}; no more records are written"));
        }
    }

    /// The end sample of the newest row taken (0 before the first).
    fn last_row_end(&self) -> u64 {
        self.stats.position_s.map_or(0, |s| (s * self.times.clock.rate).round() as u64)
    }

    pub fn alarm_log_error(&mut self) -> Option<String> {
        self.plan.alarm_log.as_mut().and_then(|l| l.failed.take())
    }

    /// Settings the DSP thread should switch to, once.
    pub fn take_pending_settings(&mut self) -> Option<RowSettings> {
        self.pending_settings.take()
    }

    /// Whether any spectrum has arrived yet.
    pub fn has_rows(&self) -> bool {
        self.stats.rows > 0
    }

    /// Takes a new row from the DSP.
    /// Takes a new row from the DSP. Frozen, the row still goes into the history and the
    /// channel panel (nothing is lost), but not into the traces on show.
    pub fn push_row(&mut self, spec: Spectrum) {
        // Times at the input's rate: a panorama's rows have the sweep's span as their rate.
        let time_s = spec.end_sample as f64 / self.source.sample_rate_hz;
        self.stats.position_s = Some(time_s);
        self.stats.rows += 1;
        self.stats.rows_total += 1;
        let mut row = Row::from_spectrum(&spec);
        row.time_s = time_s;
        if let Some(stale) = self.stale_bins(&spec) {
            row = row.with_stale(&stale);
        }
        self.history.push(row);
        let rate = self.source.sample_rate_hz;
        let floor = self.measured.floor_density;
        let events = self.plan.activity.push(&spec, rate, &self.plan.marks, floor);
        if events.iter().any(|e| matches!(e, AlarmEvent::Onset { .. })) {
            self.alerts.bells += 1;
        }
        self.log_alarms(&events, spec.end_sample, "quiet");
        if self.mode == Mode::Frozen {
            return;
        }
        let (lo, hi) = spec.span_hz();
        let span = View::new(lo, hi);
        if self.traces.push(spec) {
            self.measured.window = None;
            self.view = Some(self.view.map_or(span, |v| v.inside(span)));
        }
    }

    /// A notice that stays while the screen is up (the input failed: nothing else will come).
    pub fn hold_notice(&mut self, text: impl Into<String>) {
        self.say_for(text, Duration::from_secs(86_400));
    }

    /// Shows `text` on the marker line for `how_long`.
    pub fn say_for(&mut self, text: impl Into<String>, how_long: Duration) {
        self.alerts.notice = Some((text.into(), Instant::now() + how_long));
    }

    /// Shows `text` on the marker line for a few seconds.
    pub fn say(&mut self, text: impl Into<String>) {
        self.alerts.notice = Some((text.into(), Instant::now() + NOTICE_FOR));
    }

    /// The captured span, once a row has arrived.
    pub fn span(&self) -> Option<View> {
        self.traces.current().map(|s| {
            let (lo, hi) = s.span_hz();
            View::new(lo, hi)
        })
    }

    /// Periodic work: measurements when due.
    pub fn tick(&mut self, now: Instant) {
        if self.alerts.notice.as_ref().is_some_and(|(_, until)| now >= *until) {
            self.alerts.notice = None;
        }
        let due = self.measured.last.map_or(true, |t| now.duration_since(t) >= MEASURE_EVERY);
        if due && self.mode == Mode::Live && self.traces.current().is_some() {
            self.measure();
            self.measured.last = Some(now);
        }
    }

    /// Noise floor, signal table and (when on) the automatic scale, from the average trace (or,
    /// scrolled back, from the time cursor's row).
    pub fn measure(&mut self) {
        let Some(avg) = self.cursor.spectrum.clone().or_else(|| self.traces.average_spectrum())
        else {
            return;
        };
        let window = match self.measured.window.take() {
            Some(w) if w.kind == avg.window && w.len() == avg.fft_size => w,
            _ => Window::new(avg.window, avg.fft_size),
        };
        let floor = spectrum_floor(&avg);
        self.table.signals =
            find_signals(&avg, &window, floor, MAX_SIGNALS, self.measured.detection);
        self.table.sort.apply(&mut self.table.signals);
        if let Some(k) = &self.kinds {
            k.want(self.table.signals.iter().map(|s| (s.freq_hz, s.obw.width_hz())));
            self.kind_list = k.latest();
        }
        self.keep_marked_row_in_view();
        self.measured.window = Some(window);
        let floor_dbfs = db(floor * avg.rbw_hz);
        self.measured.floor_dbfs = Some(floor_dbfs);
        self.measured.floor_density = Some(floor);
        if self.levels.auto {
            let peak = self.visible_peak_dbfs(&avg).unwrap_or(floor_dbfs);
            self.auto_scale(floor_dbfs, peak);
        }
        self.refresh_readings();
    }

    /// Reads both markers again.
    pub fn refresh_readings(&mut self) {
        self.markers.reading = self.markers.at.and_then(|m| self.reading(m));
        self.markers.ref_reading = self.markers.reference.and_then(|m| self.reading(m));
        self.markers.band = self.band_reading();
    }

    /// Largest level of the average in view, dBFS in one RBW.
    fn visible_peak_dbfs(&self, avg: &Spectrum) -> Option<f64> {
        let view = self.view?;
        let grid = grid_of(avg);
        let r = grid.bins_in(view.lo_hz, view.hi_hz);
        let max = avg.psd[r].iter().copied().fold(0.0, f64::max);
        (max > 0.0).then(|| db(max * avg.rbw_hz))
    }

    /// Puts the bottom of the scale 10 dB under the noise and the top 5 dB over the strongest
    /// signal (at least 40 dB above the noise), on 5 dB steps. The scale stays put while the
    /// targets stay inside it with less than 8 dB to spare (a 5 dB step plus 3 dB of
    /// hysteresis), so the colours do not flicker; every change redraws the waterfall.
    pub fn auto_scale(&mut self, floor_dbfs: f64, peak_dbfs: f64) {
        const SLACK_DB: f64 = 8.0;
        let want_bottom = floor_dbfs - 10.0;
        let want_top = (peak_dbfs + 5.0).max(floor_dbfs + 40.0);
        let l = &mut self.levels;
        let (top, bottom) = (l.top_dbfs, l.bottom_dbfs());
        let fits = want_top <= top
            && want_top >= top - SLACK_DB
            && want_bottom >= bottom
            && want_bottom <= bottom + SLACK_DB;
        if fits {
            return;
        }
        let top = (want_top / 5.0).ceil() * 5.0;
        let range = (top - (want_bottom / 5.0).floor() * 5.0).clamp(RANGE_MIN_DB, RANGE_MAX_DB);
        if (top, range) != (l.top_dbfs, l.range_db) {
            l.top_dbfs = top;
            l.range_db = range;
            self.frame.epoch += 1;
        }
    }

    /// Width of the plot in columns (from the last frame; a guess before the first).
    pub fn plot_width(&self) -> usize {
        self.frame.screen.map_or(74, |s| s.spectrum_plot.width as usize).max(1)
    }

    /// Applies an intent.
    pub fn apply(&mut self, intent: Intent) {
        let markers = (self.markers.at, self.markers.reference);
        self.apply_inner(intent);
        if (self.markers.at, self.markers.reference) != markers {
            self.refresh_readings();
        }
    }

    fn apply_inner(&mut self, intent: Intent) {
        match intent {
            Intent::Quit => self.mode = Mode::Quit,
            Intent::ToggleHelp => self.help = !self.help,
            Intent::CloseHelp => self.help = false,
            Intent::Freeze => {
                if self.mode == Mode::Frozen {
                    self.resume();
                } else {
                    self.freeze();
                }
            }
            Intent::TimeBack(lines) => self.move_cursor(-(lines as i64)),
            Intent::TimeForward(lines) => self.move_cursor(lines as i64),
            Intent::TimeLive => self.resume(),
            Intent::ToggleUtc => self.toggle_utc(),
            Intent::SortNext => self.next_sort(),
            Intent::ToggleChannels => self.toggle_channels(),
            Intent::ToggleAlarm => {
                let before: Vec<bool> =
                    self.plan.marks.iter().map(|m| m.alarm_dbfs.is_some()).collect();
                let msg = self.plan.toggle_alarm(self.markers.at, self.measured.floor_density);
                // A threshold cleared ends its channel's open alarm.
                let cleared = self
                    .plan
                    .marks
                    .iter()
                    .zip(before)
                    .position(|(m, b)| b && m.alarm_dbfs.is_none());
                if let Some(i) = cleared {
                    let ended = self.plan.activity.end_alarms(Some(i));
                    self.log_alarms(&ended, self.last_row_end(), "cleared");
                }
                self.say(msg);
            }
            Intent::WriteEvidence => self.evidence_key(),
            Intent::WritePicture => self.picture_key(),
            Intent::MarkerLeft(n) => self.step_marker(-(n as i64)),
            Intent::MarkerRight(n) => self.step_marker(n as i64),
            Intent::MarkerToStrongest => self.marker_to_strongest(),
            Intent::MarkerToNext => self.step_row(1),
            Intent::MarkerToPrev => self.step_row(-1),
            Intent::SetRefMarker => self.markers.reference = self.markers.at,
            Intent::ClearRefMarker => self.markers.reference = None,
            Intent::ZoomIn => self.zoom(0.5),
            Intent::ZoomOut => self.zoom(2.0),
            Intent::PanLeft => self.pan(-0.25),
            Intent::PanRight => self.pan(0.25),
            Intent::FullSpan => {
                if let Some(span) = self.span() {
                    self.set_view(span);
                }
            }
            Intent::CentreOnMarker => {
                if let (Some(v), Some(span), Some(m)) = (self.view, self.span(), self.markers.at) {
                    self.set_view(v.centred_on(m, span));
                }
            }
            Intent::FftLarger => self.change_fft(true),
            Intent::FftSmaller => self.change_fft(false),
            Intent::WindowNext => self.change_window(1),
            Intent::WindowPrev => self.change_window(WindowKind::ALL.len() - 1),
            Intent::RefUp => self.manual_scale(5.0, 0.0),
            Intent::RefDown => self.manual_scale(-5.0, 0.0),
            Intent::RangeWider => self.manual_scale(0.0, 10.0),
            Intent::RangeNarrower => self.manual_scale(0.0, -10.0),
            Intent::AutoRange => {
                self.levels.auto = !self.levels.auto;
                if self.levels.auto {
                    // Move to the automatic scale now, whatever the hysteresis says.
                    self.levels.top_dbfs = f64::INFINITY;
                    self.measure();
                    if !self.levels.top_dbfs.is_finite() {
                        self.levels.top_dbfs = 0.0;
                    }
                }
            }
            Intent::ResetHold => self.traces.reset_hold(),
            Intent::NextColourMap => {
                self.look.next_map();
                self.frame.epoch += 1;
            }
            Intent::TogglePlan => {
                if self.plan.marks.is_empty() {
                    self.say(NO_PLAN);
                } else {
                    self.plan.visible = !self.plan.visible;
                }
            }
            Intent::RowsSlower => self.change_row_rate(false),
            Intent::RowsFaster => self.change_row_rate(true),
            Intent::PointAt(x, y) => {
                if let Some(col) = self.plot_column_at(x, y) {
                    self.markers.at = self.snap_to_column(col);
                } else {
                    self.click_table(x, y);
                }
            }
            Intent::PointRefAt(x, y) => {
                if let Some(col) = self.plot_column_at(x, y) {
                    self.markers.reference = self.snap_to_column(col);
                }
            }
        }
    }

    pub(super) fn set_view(&mut self, v: View) {
        if self.view != Some(v) {
            self.view = Some(v);
            self.frame.epoch += 1;
        }
    }

    fn zoom(&mut self, factor: f64) {
        let (Some(v), Some(span), Some(cur)) = (self.view, self.span(), self.traces.current())
        else {
            return;
        };
        let anchor = self.markers.at.filter(|m| (v.lo_hz..v.hi_hz).contains(m));
        let min_width = MIN_VIEW_BINS * cur.bin_hz();
        let next = v.zoom(factor, anchor.unwrap_or(v.centre_hz()), span, min_width);
        if next == v {
            self.say(if factor < 1.0 {
                "narrowest view already (16 FFT bins); f makes the bins finer"
            } else {
                "whole span already"
            });
        }
        self.set_view(next);
    }

    fn pan(&mut self, fraction: f64) {
        if let (Some(v), Some(span)) = (self.view, self.span()) {
            self.set_view(v.pan(fraction, span));
        }
    }

    /// ↑ ↓ PgUp PgDn: moves the reference level by `top` dB or the range by `range` dB, within
    /// their limits (saying so at a limit), and turns the automatic scale off.
    fn manual_scale(&mut self, top: f64, range: f64) {
        let l = &mut self.levels;
        l.auto = false;
        let want_top = l.top_dbfs + top;
        let want_range = l.range_db + range;
        l.top_dbfs = want_top.clamp(REF_MIN_DBFS, REF_MAX_DBFS);
        l.range_db = want_range.clamp(RANGE_MIN_DB, RANGE_MAX_DB);
        let (top_now, range_now) = (l.top_dbfs, l.range_db);
        self.frame.epoch += 1;
        if want_top != top_now {
            let end = if top > 0.0 { "highest" } else { "lowest" };
            let shown = self.levels.shown(top_now);
            self.say(format!("reference level {shown:.0} {} is the {end}", self.levels.unit()));
        } else if want_range != range_now {
            let end = if range > 0.0 { "widest" } else { "narrowest" };
            self.say(format!("range {range_now:.0} dB is the {end}"));
        }
    }

    fn change_fft(&mut self, larger: bool) {
        // Exactly twice or half, as the help says, whatever the size (`--fft 3000` → 6000).
        let n = self.settings.fft_size;
        let next = if larger { n * 2 } else { n / 2 };
        let next = next.clamp(FFT_KEYS_MIN.min(n), FFT_KEYS_MAX.max(n));
        let next = if (FFT_KEYS_MIN..=FFT_KEYS_MAX).contains(&next) { next } else { n };
        if next != n {
            self.request(RowSettings { fft_size: next, ..self.settings });
        } else {
            self.say(format!(
                "FFT size {n} is the {} the keys reach",
                if larger { "largest" } else { "smallest" }
            ));
        }
    }

    fn change_window(&mut self, step: usize) {
        let all = WindowKind::ALL;
        let i = all
            .iter()
            .position(|w| {
                std::mem::discriminant(w) == std::mem::discriminant(&self.settings.window)
            })
            .unwrap_or(0);
        self.request(RowSettings { window: all[(i + step) % all.len()], ..self.settings });
    }

    fn change_row_rate(&mut self, faster: bool) {
        let r = self.settings.row_rate;
        let next = if faster {
            ROW_RATES.iter().copied().find(|&x| x > r + 1e-9)
        } else {
            ROW_RATES.iter().rev().copied().find(|&x| x < r - 1e-9)
        };
        match next {
            Some(row_rate) => self.request(RowSettings { row_rate, ..self.settings }),
            None => self.say(format!(
                "{} the {} row rate the keys reach",
                format_rows_per_s(r),
                if faster { "fastest" } else { "slowest" }
            )),
        }
    }

    fn request(&mut self, s: RowSettings) {
        self.settings = s;
        self.pending_settings = Some(s);
    }

    fn step_marker(&mut self, by: i64) {
        let Some(v) = self.view else { return };
        let w = self.plot_width();
        let col =
            self.markers.at.and_then(|m| v.column_of(m, w)).map_or(w as i64 / 2, |c| c as i64 + by);
        self.markers.at = self.snap_to_column(col.clamp(0, w as i64 - 1) as usize);
    }

    /// The frequency of the strongest bin of the average trace within column `col`, so the
    /// marker sits on what the column shows.
    pub fn snap_to_column(&self, col: usize) -> Option<f64> {
        let v = self.view?;
        let w = self.plot_width();
        let (lo, hi) = v.column_edges(col, w);
        let Some(cur) = self.traces.current() else { return Some(0.5 * (lo + hi)) };
        let grid = grid_of(cur);
        let avg = self.traces.average_psd();
        let bins = grid.bins_in(lo, hi);
        let best = bins.clone().max_by(|&a, &b| avg[a].total_cmp(&avg[b]));
        Some(best.map_or(0.5 * (lo + hi), |b| grid.freq(b)))
    }

    /// The plot column under a screen cell, in the spectrum or the waterfall.
    fn plot_column_at(&self, x: u16, y: u16) -> Option<usize> {
        let s = self.frame.screen?;
        let inside = |r: ratatui::layout::Rect| {
            x >= r.x && x < r.x + r.width && y >= r.y && y < r.y + r.height
        };
        if inside(s.spectrum_plot) || inside(s.waterfall_plot()) {
            Some((x - s.spectrum_plot.x) as usize)
        } else {
            None
        }
    }

    /// Frequency and level (dBFS in one RBW, from the average trace) at a marker. On a peak that
    /// stands clear of the noise, the reading is refined between bins with the window's own
    /// response, as the signal table is, so a tone reads its level wherever it falls between
    /// bins (no scalloping loss; Harris 1978 gives 1.42 dB for Hann half-way between bins).
    pub fn reading(&self, freq_hz: f64) -> Option<(f64, f64)> {
        let cur = self.traces.current()?;
        let grid = grid_of(cur);
        let bin = grid.nearest(freq_hz)?;
        let avg = self.traces.average_psd();
        let p0 = avg[bin];
        let raw = (grid.freq(bin), db(p0 * cur.rbw_hz));
        let pm = if bin > 0 { avg[bin - 1] } else { 0.0 };
        let pp = avg.get(bin + 1).copied().unwrap_or(0.0);
        let clear = self
            .measured
            .floor_dbfs
            .is_some_and(|f| raw.1 >= f + self.measured.detection.min_snr_db);
        let window = self
            .measured
            .window
            .as_ref()
            .filter(|w| w.kind == cur.window && w.len() == cur.fft_size);
        match window {
            Some(w) if clear && p0 >= pm && p0 >= pp => {
                let (delta, gain) = w.tone_offset(pm, p0, pp);
                Some((grid.freq(bin) + delta * grid.bin_hz, db(p0 * cur.rbw_hz / gain.max(1e-12))))
            }
            _ => Some(raw),
        }
    }

    /// Trace levels (dBFS in one RBW) for `ncols` columns of the view: current, average, peak
    /// hold, minimum hold.
    pub fn trace_columns(&self, ncols: usize) -> Option<[Vec<f64>; 4]> {
        let cur = self.traces.current()?;
        let view = self.view?;
        let map = grid_of(cur).column_map(&view, ncols);
        let to_db = |v: Vec<f64>, rbw: f64| -> Vec<f64> {
            v.into_iter()
                .map(|p| if p.is_finite() { db(p * rbw) } else { f64::NEG_INFINITY })
                .collect()
        };
        // Scrolled back, the current trace is the time cursor's row.
        let shown = self.cursor.spectrum.as_ref().unwrap_or(cur);
        let shown_map = grid_of(shown).column_map(&view, ncols);
        let mut traces = [
            to_db(column_max(&shown.psd, &shown_map), shown.rbw_hz),
            to_db(column_max(self.traces.average_psd(), &map), cur.rbw_hz),
            to_db(column_max(self.traces.hold_psd(), &map), cur.rbw_hz),
            to_db(column_max(self.traces.min_hold_psd(), &map), cur.rbw_hz),
        ];
        // A panorama's hole was never in view: no level, so no trace there (a gap, not a floor).
        if let Some(seen) = cur.last_seen.as_ref() {
            for (c, r) in map.iter().enumerate() {
                if seen.get(r.clone()).is_some_and(|b| !b.is_empty() && b.iter().all(|&s| s == 0)) {
                    traces.iter_mut().for_each(|t| t[c] = f64::NEG_INFINITY);
                }
            }
        }
        Some(traces)
    }

    /// Whether the channel-plan row is on screen.
    pub fn plan_row(&self) -> bool {
        self.plan.visible && !self.plan.marks.is_empty()
    }

    /// Rows per second the DSP delivers (the request, limited by the frames the input has).
    pub fn effective_row_rate(&self) -> f64 {
        // A sweep gives one row a sweep, whatever the rate asked for.
        if let Some(s) = self.sweep {
            return 1.0 / s.revisit_s;
        }
        let cfg = self.settings.engine(self.source.sample_rate_hz);
        self.source.sample_rate_hz / cfg.hop() as f64 / cfg.frames_per_output.unwrap_or(1) as f64
    }
}

/// The bin grid of a spectrum (fftshift order).
pub fn grid_of(s: &Spectrum) -> BinGrid {
    BinGrid { first_hz: s.freq_of_bin(0.0), bin_hz: s.bin_hz(), len: s.fft_size }
}

#[cfg(test)]
pub(crate) mod tests {
    use super::*;
    use crate::dsp::Window;

    /// A live 1.024 MS/s source at 100 MHz with no start time.
    pub(crate) fn summary() -> SourceSummary {
        SourceSummary {
            label: "test".into(),
            sample_rate_hz: 1.024e6,
            center_hz: 100e6,
            total_samples: None,
            live: true,
            speed: None,
            looping: false,
            clock: crate::pipeline::clock::Clock::new(1.024e6, None),
        }
    }

    /// 1024-point Hann rows at 20 rows/s.
    pub(crate) fn settings() -> RowSettings {
        RowSettings {
            fft_size: 1024,
            window: WindowKind::Hann,
            overlap: 0.5,
            row_rate: 20.0,
            threads: 1,
        }
    }

    /// A row with a flat floor of `floor` (FS²/Hz, before scaling) and a tone in FFT bin `k`.
    pub(crate) fn row(k: usize, tone: f64) -> Spectrum {
        let n = 1024;
        let mut power = vec![1.0; n];
        power[k] = tone;
        let w = Window::new(WindowKind::Hann, n);
        Spectrum::from_power_sum(&power, 1, 2.0, &w, 1.024e6, 100e6, 0, n as u64)
    }

    fn app() -> App {
        let t = Instant::now();
        let mut a = App::new(summary(), settings(), Depth::TrueColour, None, Vec::new(), t);
        a.push_row(row(100, 1e6));
        a
    }

    #[test]
    fn the_first_row_shows_the_whole_span() {
        let a = app();
        let v = a.view.unwrap();
        assert!((v.lo_hz - (100e6 - 512e3 - 500.0)).abs() < 1e-6);
        assert!((v.width_hz() - 1.024e6).abs() < 1e-6);
    }

    #[test]
    fn marker_snaps_to_the_peak_of_its_column() {
        let mut a = app();
        // 1 kHz bins, 74 columns of 13.8 kHz. FFT bin 100 is shifted to 612: 100.1 MHz.
        let tone = 100e6 + 100e3;
        let col = a.view.unwrap().column_of(tone, 74).unwrap();
        a.markers.at = Some(a.view.unwrap().column_centre(col - 1, 74));
        a.apply(Intent::MarkerRight(1));
        assert_eq!(a.markers.at, Some(tone));
        let (f, level) = a.reading(tone).unwrap();
        assert_eq!(f, tone);
        let cur = a.traces.current().unwrap();
        assert!((level - db(cur.psd[612] * cur.rbw_hz)).abs() < 1e-9);
    }

    #[test]
    fn the_marker_reads_a_tone_between_bins_at_its_level() {
        // A −30 dBFS tone half-way between bins (bin 100.5 of 1024 at 1.024 MS/s) in faint
        // noise: the raw bin reads low by Hann's scalloping loss, 1.42 dB (Harris 1978, table
        // 1); the marker's refined reading must be within 0.1 dB of the tone and its frequency.
        use crate::dsp::{Engine, EngineConfig};
        use crate::testkit::{keyed_band, Keyed};
        let (rate, n) = (1.024e6, 1024);
        let f = 100.5 * rate / n as f64;
        let faint = crate::units::undb(-90.0);
        let x = keyed_band(n * 64, rate, faint, &[Keyed::steady(f, -30.0)], 7);
        let cfg = EngineConfig {
            fft_size: n,
            window: WindowKind::Hann,
            overlap: 0.5,
            frames_per_output: Some(16),
        };
        let mut e = Engine::new(cfg, rate, 100e6);
        let mut a_ = App::new(summary(), settings(), Depth::Mono, None, Vec::new(), Instant::now());
        e.push(0, &x, &mut |sp| a_.push_row(sp.clone()));
        a_.measure();
        let tone_hz = 100e6 + f;
        let (_, raw) = {
            let cur = a_.traces.current().unwrap();
            let k = grid_of(cur).nearest(tone_hz).unwrap();
            (k, db(a_.traces.average_psd()[k] * cur.rbw_hz))
        };
        assert!((raw + 30.0 + 1.42).abs() < 0.1, "raw bin {raw}");
        let (rf, level) = a_.reading(tone_hz).unwrap();
        assert!((level + 30.0).abs() < 0.1, "marker {level}");
        assert!((rf - tone_hz).abs() < 0.05 * rate / n as f64, "marker at {rf}");
    }

    #[test]
    fn zoom_centres_on_the_marker_and_full_span_returns() {
        let mut a = app();
        a.markers.at = Some(100.2e6);
        let e0 = a.frame.epoch;
        a.apply(Intent::ZoomIn);
        let v = a.view.unwrap();
        assert!((v.width_hz() - 0.512e6).abs() < 1e-3);
        assert!(v.lo_hz < 100.2e6 && v.hi_hz > 100.2e6);
        assert!(a.frame.epoch > e0, "zoom redraws the waterfall");
        a.apply(Intent::FullSpan);
        assert_eq!(a.view, a.span());
    }

    #[test]
    fn fft_and_window_keys_ask_the_dsp() {
        let mut a = app();
        a.apply(Intent::FftLarger);
        assert_eq!(a.take_pending_settings().unwrap().fft_size, 2048);
        assert_eq!(a.take_pending_settings(), None);
        a.apply(Intent::FftSmaller);
        a.apply(Intent::FftSmaller);
        assert_eq!(a.take_pending_settings().unwrap().fft_size, 512);
        a.apply(Intent::WindowNext);
        assert_eq!(a.take_pending_settings().unwrap().window, WindowKind::Hamming);
        a.apply(Intent::WindowPrev);
        a.apply(Intent::WindowPrev);
        assert_eq!(a.settings.window, WindowKind::Rect);
        a.apply(Intent::RowsSlower);
        assert_eq!(a.take_pending_settings().unwrap().row_rate, 15.0);
    }

    #[test]
    fn measurement_finds_the_tone_and_scales_automatically() {
        let mut a = app();
        for _ in 0..10 {
            a.push_row(row(100, 1e6));
        }
        a.measure();
        assert_eq!(a.table.signals.len(), 1);
        assert!((a.table.signals[0].freq_hz - 100.1e6).abs() < 1.0);
        let cur = a.traces.current().unwrap();
        // The floor is flat: 1.0 per bin before scaling, i.e. cur.psd away from the tone.
        let floor = db(cur.psd[0] * cur.rbw_hz);
        assert!((a.measured.floor_dbfs.unwrap() - floor).abs() < 0.01);
        let l = a.levels;
        assert!(l.bottom_dbfs() <= floor - 10.0 && l.bottom_dbfs() > floor - 15.0);
        assert!(l.top_dbfs >= floor + 60.0 + 5.0, "top {} floor {floor}", l.top_dbfs);
        // Small changes do not move the scale (nor redraw the waterfall), repeatedly.
        let (before, epoch) = (a.levels, a.frame.epoch);
        for _ in 0..3 {
            a.auto_scale(floor + 2.0, floor + 61.0);
            a.measure();
        }
        assert_eq!((a.levels, a.frame.epoch), (before, epoch));
        // A signal that needs more room moves the top.
        a.auto_scale(floor, floor + 75.0);
        assert!(a.levels.top_dbfs >= floor + 80.0 && a.frame.epoch == epoch + 1);
    }

    #[test]
    fn manual_scale_turns_auto_off() {
        let mut a = app();
        a.apply(Intent::RefDown);
        assert!(!a.levels.auto);
        assert_eq!(a.levels.top_dbfs, -5.0);
        a.apply(Intent::RangeNarrower);
        assert_eq!(a.levels.range_db, 90.0);
        for _ in 0..20 {
            a.apply(Intent::RangeNarrower);
        }
        assert_eq!(a.levels.range_db, RANGE_MIN_DB);
    }

    #[test]
    fn frozen_display_keeps_its_picture_and_the_history_keeps_filling() {
        let mut a = app();
        a.apply(Intent::Freeze);
        let total = a.history.total();
        let end = a.traces.current().unwrap().end_sample;
        a.push_row(row(5, 1e6));
        assert_eq!(a.history.total(), total + 1, "nothing is lost while frozen");
        assert_eq!(a.traces.current().unwrap().end_sample, end, "the traces hold still");
        assert_eq!(a.cursor.index, Some(total - 1));
        assert_eq!(a.waterfall_plot().unwrap().end, total, "the waterfall holds still");
        a.apply(Intent::Freeze);
        a.push_row(row(5, 1e6));
        assert_eq!(a.history.total(), total + 2);
        assert_eq!(a.waterfall_plot().unwrap().end, u64::MAX, "live: every row");
    }

    #[test]
    fn the_time_cursor_walks_back_and_feeds_the_table() {
        // 20 rows with a tone in bin 100, then 20 with it in bin 300: scrolled back past the
        // change, the table finds the old tone; live again, the new one.
        let t = Instant::now();
        let mut a = App::new(summary(), settings(), Depth::Mono, None, Vec::new(), t);
        for i in 0..40 {
            a.push_row(row(if i < 20 { 100 } else { 300 }, 1e6));
        }
        let has = |a: &App, f: f64| a.table.signals.iter().any(|s| (s.freq_hz - f).abs() < 1.0);
        a.measure();
        assert!(has(&a, 100.3e6));
        a.apply(Intent::TimeBack(10));
        assert_eq!(a.mode, Mode::Frozen);
        assert_eq!(a.cursor.index, Some(19));
        // The cursor's row alone: the old tone only.
        assert!(has(&a, 100.1e6) && !has(&a, 100.3e6), "{:?}", a.table.signals);
        assert_eq!(a.waterfall_plot().unwrap().shown_rows(), 20);
        // The current trace is the cursor's row: its peak is at the old tone.
        let cols = a.trace_columns(1024).unwrap();
        let peak = (0..1024).max_by(|&x, &y| cols[0][x].total_cmp(&cols[0][y])).unwrap();
        assert_eq!(peak, 612);
        // Far back stops at the oldest row kept; forward and End come back.
        a.apply(Intent::TimeBack(100));
        assert_eq!(a.cursor.index, Some(0));
        assert!(a.alerts.notice.is_none(), "a move that moves says nothing");
        a.apply(Intent::TimeBack(1));
        assert!(a.alerts.notice.as_ref().unwrap().0.contains("oldest row"));
        a.apply(Intent::TimeForward(1));
        assert_eq!(a.cursor.index, Some(2));
        a.apply(Intent::TimeLive);
        assert_eq!((a.mode, a.cursor.index), (Mode::Live, None));
        a.measure();
        assert!(has(&a, 100.3e6));
    }

    #[test]
    fn n_and_p_walk_the_table_in_its_order() {
        let t = Instant::now();
        let mut a = App::new(summary(), settings(), Depth::Mono, None, Vec::new(), t);
        let n = 1024;
        let mut power = vec![1.0; n];
        // FFT bins 100, 200, 300 → 100.1, 100.2, 100.3 MHz; the middle one strongest.
        power[100] = 1e5;
        power[200] = 1e7;
        power[300] = 1e6;
        let w = Window::new(WindowKind::Hann, n);
        let spec = Spectrum::from_power_sum(&power, 1, 2.0, &w, 1.024e6, 100e6, 0, n as u64);
        for _ in 0..10 {
            a.push_row(spec.clone());
        }
        a.measure();
        let f: Vec<f64> = a.table.signals.iter().map(|s| (s.freq_hz / 1e3).round()).collect();
        assert_eq!(f, vec![100_100.0, 100_200.0, 100_300.0], "by frequency");
        let mhz = |a: &App| (a.markers.at.unwrap() / 1e3).round();
        a.apply(Intent::MarkerToNext);
        assert_eq!(mhz(&a), 100_100.0);
        a.apply(Intent::MarkerToNext);
        assert_eq!(mhz(&a), 100_200.0);
        a.measure(); // a new measurement keeps the order, so the walk goes on
        a.apply(Intent::MarkerToNext);
        assert_eq!(mhz(&a), 100_300.0);
        a.apply(Intent::MarkerToNext);
        assert_eq!(mhz(&a), 100_100.0, "wraps");
        a.apply(Intent::MarkerToPrev);
        assert_eq!(mhz(&a), 100_300.0);
        a.apply(Intent::MarkerToStrongest);
        assert_eq!(mhz(&a), 100_200.0);
        a.apply(Intent::SortNext);
        let f: Vec<f64> = a.table.signals.iter().map(|s| (s.freq_hz / 1e3).round()).collect();
        assert_eq!(f, vec![100_200.0, 100_300.0, 100_100.0], "by power");
        a.apply(Intent::MarkerToNext);
        assert_eq!(mhz(&a), 100_300.0);
    }

    #[test]
    fn keys_at_their_limits_say_so() {
        let mut a = app();
        a.apply(Intent::TogglePlan);
        assert!(a.alerts.notice.as_ref().unwrap().0.contains("no channel plan"));
        a.alerts.notice = None;
        a.apply(Intent::ZoomOut);
        assert!(a.alerts.notice.as_ref().unwrap().0.contains("whole span"));
        a.settings.fft_size = FFT_KEYS_MAX;
        a.apply(Intent::FftLarger);
        assert!(a.alerts.notice.as_ref().unwrap().0.contains("65536 is the largest"));
        a.settings.row_rate = ROW_RATES[0];
        a.apply(Intent::RowsSlower);
        assert!(a.alerts.notice.as_ref().unwrap().0.contains("slowest"), "{:?}", a.alerts.notice);
        // Notices go after a while.
        a.tick(Instant::now() + NOTICE_FOR);
        assert!(a.alerts.notice.is_none());
    }

    #[test]
    fn the_band_between_the_markers_reads_power_and_obw() {
        let mut a = app();
        for _ in 0..10 {
            a.push_row(row(100, 1e6));
        }
        a.measure();
        a.markers.at = Some(100.05e6);
        a.apply(Intent::SetRefMarker);
        a.markers.at = Some(100.15e6);
        a.refresh_readings();
        let b = a.markers.band.unwrap();
        assert_eq!((b.low_hz, b.high_hz), (100.05e6, 100.15e6));
        // The same function `measure --band` uses, on the same trace, less the noise in the
        // band (floor density × width) as the signal table takes it off.
        let avg = a.traces.average_spectrum().unwrap();
        let floor = a.measured.floor_density.unwrap();
        let total = crate::measure::band_power(&avg, 100.05e6, 100.15e6);
        let want = db(total - floor * 0.1e6);
        assert!((b.power_dbfs.unwrap() - want).abs() < 1e-9);
        // With the floor taken off bin by bin, the band holds the tone's bin alone (ITU-R
        // SM.328: 0.5 % outside each edge): both edges fall inside that bin, 0.5 % of its power
        // in from each side, so the OBW is just under one bin wide.
        let obw = b.obw.unwrap().width_hz();
        assert!(obw > 980.0 && obw < 1000.0, "{obw}");
        // A band of noise alone reads as such, not as a level.
        a.markers.reference = Some(100.3e6);
        a.markers.at = Some(100.4e6);
        a.refresh_readings();
        assert_eq!(a.markers.band.unwrap().power_dbfs, None);
    }

    #[test]
    fn the_reference_level_has_limits_and_fft_keys_double_exactly() {
        let mut a = app();
        for _ in 0..60 {
            a.apply(Intent::RefUp);
        }
        assert_eq!(a.levels.top_dbfs, REF_MAX_DBFS);
        assert!(a.alerts.notice.as_ref().unwrap().0.contains("is the highest"));
        for _ in 0..100 {
            a.apply(Intent::RefDown);
        }
        assert_eq!(a.levels.top_dbfs, REF_MIN_DBFS);
        // An FFT size that is no power of two doubles and halves exactly.
        a.settings.fft_size = 3000;
        a.apply(Intent::FftLarger);
        assert_eq!(a.take_pending_settings().unwrap().fft_size, 6000);
        a.apply(Intent::FftSmaller);
        a.apply(Intent::FftSmaller);
        assert_eq!(a.take_pending_settings().unwrap().fft_size, 1500);
    }

    #[test]
    fn r_in_the_channel_panel_says_why_and_n_walks_the_channels() {
        let t = Instant::now();
        let channels: Vec<ChannelMark> = (0..7)
            .map(|i| ChannelMark::new(&format!("ch{i}"), 100e6 + i as f64 * 50e3, 12.5e3))
            .collect();
        let mut a = App::new(summary(), settings(), Depth::Mono, None, channels, t);
        a.push_row(row(100, 1e6));
        // The table area of an 80×24 screen with a plan row: three rows under the header.
        let screen = Screen::split(ratatui::layout::Rect::new(0, 0, 80, 24), true);
        a.set_screen(screen, false);
        a.apply(Intent::ToggleChannels);
        a.apply(Intent::SortNext);
        assert!(a.alerts.notice.as_ref().unwrap().0.contains("channels keep the plan's order"));
        // n walks every channel, and the table scrolls so the marked one is on show.
        for i in 0..7 {
            a.apply(Intent::MarkerToNext);
            assert_eq!(a.markers.at, Some(100e6 + i as f64 * 50e3));
            let first = a.table.first_row;
            assert!((first..first + 3).contains(&i), "row {i} hidden from {first}");
        }
        a.apply(Intent::MarkerToNext);
        assert_eq!(a.table.first_row, 0, "wrapped to the first");
    }

    #[test]
    fn reference_offset_changes_units_only() {
        let l = Levels { top_dbfs: -10.0, range_db: 80.0, auto: false, offset_db: Some(-30.0) };
        assert_eq!(l.unit(), "dBm");
        assert_eq!(l.shown(-50.0), -80.0);
    }
}
