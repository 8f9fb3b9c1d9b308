//! The plain values the widgets draw, built from the monitor's state each frame: the status
//! lines, the spectrum's traces, the table and the waterfall. Widgets never see [`App`].

use super::super::colour::Depth;
use super::super::layout::Screen;
use super::super::state::{Mode, TableMode};
use super::super::widgets::channels::ChannelPanel;
use super::super::widgets::status::{MarkerView, PlayState, SettingsView, SourceView, StatusView};
use super::super::widgets::table::{capacity, first_shown, SignalTable};
use super::super::widgets::waterfall::{label_interval, WaterfallPlot, PAIRS_ONLY_FROM_ROWS_PER_S};
use super::super::widgets::{ScreenView, SpectrumView, TableView};
use super::App;
use crate::units::db;
use ratatui::layout::Rect;

impl App {
    /// Everything a frame of `area` draws.
    pub fn screen_view(&self, area: Rect) -> ScreenView<'_> {
        let layout = Screen::split(area, self.plan_row());
        let plot_w = layout.map_or(0, |s| s.spectrum_plot.width as usize);
        ScreenView {
            layout,
            status: self.status_view(),
            spectrum: self.spectrum_view(plot_w),
            view: self.view,
            channels: &self.plan.marks,
            alarmed: self.plan.activity.channels.iter().map(|c| c.alarm_on).collect(),
            waterfall: if self.frame.external { None } else { self.waterfall_plot() },
            painted_waterfall: self.frame.external,
            table: self.table_view(layout.map_or(usize::MAX, |s| capacity(s.table))),
            help: self.help,
            files_dir: &self.files_dir,
            theme: self.look.theme,
        }
    }

    /// The three status lines.
    pub fn status_view(&self) -> StatusView {
        StatusView {
            source: self.source_view(),
            marker: self.marker_view(),
            settings: self.settings_view(),
        }
    }

    fn source_view(&self) -> SourceView {
        let s = &self.source;
        let view_hz = self.view.zip(self.span()).map(|(v, span)| {
            let zoomed = (v.width_hz() - span.width_hz()).abs() >= 1e-6 * span.width_hz();
            (if zoomed { v.width_hz() } else { span.width_hz() }, zoomed)
        });
        let state = if self.mode == Mode::Frozen {
            PlayState::Frozen
        } else if self.ended {
            PlayState::Ended
        } else {
            match (s.total_samples, self.stats.position_s) {
                (Some(total), Some(pos)) => {
                    let total_s = total as f64 / s.sample_rate_hz;
                    let pos_s = if s.looping && total_s > 0.0 { pos % total_s } else { pos };
                    PlayState::Playing { pos_s, total_s, speed: s.speed, looping: s.looping }
                }
                (None, Some(pos_s)) => PlayState::Live { pos_s },
                _ => PlayState::Waiting,
            }
        };
        SourceView {
            label: s.label.clone(),
            sample_rate_hz: s.sample_rate_hz,
            center_hz: s.center_hz,
            view_hz,
            state,
            time: self.shown_time(),
            dropped: s.live.then_some(self.stats.dropped),
            changes: self.changes.as_ref().map(|b| change_summary(&b.open())),
            sweep: self.sweep.map(|w| (w.steps, w.revisit_s)),
            theme: self.look.theme,
        }
    }

    /// The time of the row on show (the newest, or the time cursor's when scrolled back) and
    /// how far back it is.
    fn shown_time(&self) -> Option<(String, Option<f64>)> {
        let newest = self.history.total().checked_sub(1)?;
        let row = self.history.by_index(self.cursor.index.unwrap_or(newest))?;
        let label = self.times.long_label(row.end_sample);
        Some((label, self.cursor.index.map(|_| self.cursor_age_s())))
    }

    fn marker_view(&self) -> MarkerView {
        let m = &self.markers;
        let marker = m.at.and(m.reading);
        MarkerView {
            notice: self.alerts.notice.as_ref().map(|(text, _)| text.clone()),
            marker,
            channel: marker.and_then(|(f, _)| self.plan.channel_at(f)).map(|c| c.name.clone()),
            reference: m.reference.and(m.ref_reading),
            band: m.band,
            levels: self.levels,
            theme: self.look.theme,
        }
    }

    fn settings_view(&self) -> SettingsView {
        let (fft_size, window, rbw_hz) = match self.traces.current() {
            // A sweep's row has the panorama's bins; the FFT is one step's.
            Some(c) if self.sweep.is_some() => (self.settings.fft_size, c.window, Some(c.rbw_hz)),
            Some(c) => (c.fft_size, c.window, Some(c.rbw_hz)),
            None => (self.settings.fft_size, self.settings.window, None),
        };
        SettingsView {
            fft_size,
            window: window.to_string(),
            rbw_hz,
            floor_dbfs_per_hz: self.measured.floor_density.map(db),
            levels: self.levels,
            row_rate: self.sweep.map_or(self.settings.row_rate, |s| 1.0 / s.revisit_s),
            fps: self.stats.fps,
            rows_per_s: self.stats.rows_per_s,
            skipped: self.stats.skipped,
            map: (self.look.depth != Depth::Mono).then(|| self.look.palette.map.name()),
            theme: self.look.theme,
        }
    }

    /// The traces for a plot `width` columns wide, with the markers' columns.
    fn spectrum_view(&self, width: usize) -> SpectrumView {
        let col = |f: Option<f64>| {
            self.view.zip(f).and_then(|(v, f)| v.column_of(f, width)).map(|c| c as u16)
        };
        let traces = self.trace_columns(2 * width).unwrap_or_default();
        let message = traces[0].is_empty().then_some(if self.ended {
            "the input ended before one row"
        } else {
            "waiting for samples…"
        });
        SpectrumView {
            traces,
            levels: self.levels,
            marker_col: col(self.markers.at),
            ref_marker_col: col(self.markers.reference),
            floor_dbfs: self.measured.floor_dbfs,
            message,
            stale: self.stale_columns(2 * width),
        }
    }

    /// The table for an area of `cap` rows, scrolled as far as the marker's row asked.
    fn table_view(&self, cap: usize) -> TableView<'_> {
        let rows = match self.table.mode {
            TableMode::Signals => self.table.signals.len(),
            TableMode::Channels => self.plan.marks.len(),
        };
        let first = first_shown(rows, cap, self.table.first_row, None);
        match self.table.mode {
            TableMode::Signals => TableView::Signals(SignalTable {
                signals: &self.table.signals,
                first,
                channels: &self.plan.marks,
                levels: self.levels,
                sort: self.table.sort,
                marker_hz: self.markers.at,
                theme: &self.look.theme,
                kinds: self.kinds.as_ref().map(|_| self.kind_list.as_slice()),
            }),
            TableMode::Channels => TableView::Channels(ChannelPanel {
                channels: &self.plan.marks,
                first,
                activity: &self.plan.activity,
                levels: self.levels,
                times: &self.times,
                marker_hz: self.markers.at,
                theme: &self.look.theme,
            }),
        }
    }

    /// The waterfall as the painter and the widget see it.
    pub fn waterfall_plot(&self) -> Option<WaterfallPlot<'_>> {
        let rows_per_s = self.effective_row_rate();
        Some(WaterfallPlot {
            history: &self.history,
            view: self.view?,
            bottom_dbfs: self.levels.bottom_dbfs(),
            range_db: self.levels.range_db,
            palette: &self.look.palette,
            theme: &self.look.theme,
            label_every_s: label_interval(rows_per_s),
            times: &self.times,
            end: self.cursor.index.map_or(u64::MAX, |c| c + 1),
            // A sweep's lone newest row is shown at once: it is the newest look at the band.
            pairs_only: self.sweep.is_none() && rows_per_s >= PAIRS_ONLY_FROM_ROWS_PER_S,
        })
    }
}

/// The change alarms up, for the top line: none, the one, or the newest and how many more
/// (`▲ mast busier since 06:01:30Z +1`). Times keep the clock part of a UTC stamp.
pub(super) fn change_summary(open: &[crate::output::log::changes::OpenChange]) -> String {
    let Some(newest) = open.last() else { return "change alarms: none".into() };
    let since = newest.since.split_once('T').map_or(newest.since.as_str(), |(_, t)| t);
    let more = match open.len() {
        1 => String::new(),
        n => format!(" +{}", n - 1),
    };
    format!("▲ {} {} since {since}{more}", newest.channel, newest.what)
}

#[cfg(test)]
mod tests {
    use super::super::tests::{row, settings, summary};
    use super::*;
    use crate::tui::input::Intent;
    use crate::tui::state::SourceSummary;
    use std::time::Instant;

    #[test]
    fn the_status_view_holds_what_the_state_says() {
        // A 10 s file at 1.024 MS/s around 100 MHz, a tone at 100.1 MHz, zoomed in once, the
        // marker on the tone, frozen.
        let source = SourceSummary {
            total_samples: Some(10_240_000),
            live: false,
            speed: Some(2.0),
            ..summary()
        };
        let mut a =
            App::new(source, settings(), Depth::Mono, Some(-30.0), Vec::new(), Instant::now());
        for _ in 0..10 {
            a.push_row(row(100, 1e6));
        }
        a.measure();
        a.apply(Intent::MarkerToStrongest);
        a.apply(Intent::ZoomIn);
        let v = a.status_view();
        assert_eq!(v.source.label, "test");
        assert_eq!(v.source.view_hz, Some((512e3, true)));
        // The rows end at sample 1024: 1 ms into 10 s, at twice real time.
        assert_eq!(
            v.source.state,
            PlayState::Playing {
                pos_s: 1024.0 / 1.024e6,
                total_s: 10.0,
                speed: Some(2.0),
                looping: false
            }
        );
        assert_eq!(v.source.dropped, None, "a file drops nothing");
        let (f, level) = v.marker.marker.unwrap();
        assert!((f - 100.1e6).abs() < 1.0);
        assert_eq!(v.marker.notice, None);
        assert_eq!(v.marker.levels.unit(), "dBm");
        assert!((level - a.markers.reading.unwrap().1).abs() < 1e-12);
        assert_eq!(v.settings.fft_size, 1024);
        assert_eq!(v.settings.window, "hann");
        assert_eq!(v.settings.row_rate, 20.0);
        assert_eq!(v.settings.map, None, "no colour map in monochrome");
        let d = a.measured.floor_density.unwrap();
        assert!((v.settings.floor_dbfs_per_hz.unwrap() - db(d)).abs() < 1e-12);
        a.apply(Intent::Freeze);
        assert_eq!(a.status_view().source.state, PlayState::Frozen);
        // A key that says something puts its notice on the marker line.
        a.apply(Intent::TogglePlan);
        assert!(a.status_view().marker.notice.unwrap().contains("no channel plan"));
    }
}
