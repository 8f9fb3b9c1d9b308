//! `report --png`: occupancy as a heat map, one row per channel (per site and channel when the
//! logs come from several sites), one column per hour of the day in the report's zone (`--tz`),
//! in the order of [`LogSummary::hour_axis`] so a night reads left to right, or one per day when
//! the logs cover more than [`DAYS_FOR_DAY_COLUMNS`] days, or per hour from the start when they
//! have no clock times. A cell's colour is its occupancy on the colour map from 0 to 100 %, its
//! number the occupancy rounded to a whole percent; a cell where nothing was measured is grey
//! and empty, so a hole never passes for a quiet channel; a *thin* cell (measured for less than
//! [`THIN_SHARE`] of its length, seconds of an hour) is hatched grey with its colour only in a
//! band across its middle, so it does not read like a full hour.

use crate::output::picture::canvas::{drawing, render_png, TickedAxis, FAMILY};
use crate::output::picture::colour::MapKind;
use crate::output::summary::table::ordered;
use crate::output::summary::{floor, is_thin, LogSummary, Tally, THIN_SHARE};
use anyhow::Result;
use plotters::coord::Shift;
use plotters::prelude::*;
use plotters::style::text_anchor::{HPos, Pos, VPos};
use std::collections::BTreeMap;

/// Logs spanning more days than this are drawn one column per day.
pub const DAYS_FOR_DAY_COLUMNS: usize = 7;
const WIDTH: u32 = 1200;
const ROW_H: u32 = 30;
const NO_DATA: RGBColor = RGBColor(200, 200, 200);
const TEXT: RGBColor = RGBColor(20, 20, 20);
/// Width of the noise-floor column, pixels.
const SPARK_W: u32 = 230;
/// A row's sparkline spans at least this many dB, so a steady floor stays a flat line.
const SPARK_MIN_DB: f64 = 3.0;

/// What the columns are.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Columns {
    HourOfDay,
    HourFromStart,
    Day,
}

/// The heat map's cells: column keys, and per row (site / channel) a tally per key.
pub struct Grid {
    pub columns: Columns,
    pub keys: Vec<i64>,
    pub rows: Vec<(String, BTreeMap<i64, Tally>)>,
    /// Per row, the noise floor over time: (time s, mean floor dBFS/Hz), in time order.
    pub floors: Vec<Vec<(f64, f64)>>,
}

/// The cells of `summary`.
pub fn grid(summary: &LogSummary) -> Grid {
    let chans = ordered(summary);
    let several = summary.sites.len() > 1;
    let days: std::collections::BTreeSet<i64> =
        chans.iter().flat_map(|c| c.by_day().into_keys()).collect();
    let columns = if !summary.has_clock() {
        Columns::HourFromStart
    } else if days.len() > DAYS_FOR_DAY_COLUMNS {
        Columns::Day
    } else {
        Columns::HourOfDay
    };
    let rows: Vec<(String, BTreeMap<i64, Tally>)> = chans
        .iter()
        .map(|c| {
            let name = if several { format!("{} / {}", c.site, c.name) } else { c.name.clone() };
            let cells = if columns == Columns::Day { c.by_day() } else { c.by_hour_of_day() };
            (name, cells)
        })
        .collect();
    let keys = match columns {
        Columns::HourOfDay | Columns::HourFromStart => summary.hour_axis(),
        Columns::Day => days.into_iter().collect(),
    };
    let floors = chans.iter().map(|c| c.noise.series.points()).collect();
    Grid { columns, keys, rows, floors }
}

/// What the picture shows, for its title.
pub fn heatmap_title(summary: &LogSummary) -> String {
    let zone = summary.settings.zone.label();
    let what = match grid(summary).columns {
        Columns::HourOfDay => format!("by hour of day ({zone})"),
        Columns::HourFromStart => "by hour from the start of the run".to_string(),
        Columns::Day => format!("by day ({zone})"),
    };
    let sites = if summary.sites.len() > 1 {
        format!(", sites {}", summary.sites.join(", "))
    } else {
        summary.sites.first().map_or(String::new(), |s| format!(", {s}"))
    };
    format!("Channel occupancy {what}{sites}")
}

impl Columns {
    /// The length of one cell, seconds.
    fn cell_s(self) -> f64 {
        if self == Columns::Day {
            86_400.0
        } else {
            3_600.0
        }
    }
}

/// Draws the heat map as PNG.
pub fn draw_heatmap(summary: &LogSummary, map: MapKind, title: &str) -> Result<Vec<u8>> {
    let g = grid(summary);
    let height = (170 + ROW_H * g.rows.len() as u32).max(320);
    render_png(WIDTH, height, |root| draw_on(root, &g, summary, map, title))
}

fn column_label(columns: Columns, key: i64) -> String {
    match columns {
        Columns::HourOfDay | Columns::HourFromStart => format!("{key:02}"),
        Columns::Day => {
            let date = time::Date::from_julian_day(2_440_588 + key as i32).map_or_else(
                |_| key.to_string(),
                |d| format!("{:02}-{:02}", d.month() as u8, d.day()),
            );
            date
        }
    }
}

fn draw_on<DB: DrawingBackend>(
    root: &DrawingArea<DB, Shift>,
    g: &Grid,
    summary: &LogSummary,
    map: MapKind,
    title: &str,
) -> Result<()> {
    root.fill(&WHITE).map_err(drawing)?;
    let (top, rest) = root.split_vertically(40);
    top.draw(&Text::new(title.to_string(), (12, 10), (FAMILY, 19).into_font().color(&TEXT)))
        .map_err(drawing)?;
    let rest_h = rest.dim_in_pixel().1;
    let (main, footer) = rest.split_vertically(rest_h.saturating_sub(30));
    let (grid_area, bar_area) = main.split_horizontally(WIDTH - 110);
    let (grid_area, spark_area) = grid_area.split_horizontally(WIDTH - 110 - SPARK_W);
    let n_rows = g.rows.len().max(1) as f64;
    let n_cols = g.keys.len().max(1) as f64;
    let longest = g.rows.iter().map(|r| r.0.chars().count()).max().unwrap_or(4);
    let left = (longest as u32 * 8 + 20).clamp(60, 400);
    let zone = &summary.settings.zone;
    let x_desc = match g.columns {
        Columns::HourOfDay => format!("hour of day, {} (all days summed)", zone.label()),
        Columns::HourFromStart => {
            "hour from the start of the run (the log has no clock times)".to_string()
        }
        Columns::Day => format!("day, {} (month-day)", zone.label()),
    };
    let xt: Vec<f64> = (0..g.keys.len()).map(|i| i as f64 + 0.5).collect();
    let yt: Vec<f64> = (0..g.rows.len()).map(|i| i as f64 + 0.5).collect();
    let mut chart = ChartBuilder::on(&grid_area)
        .margin(10)
        .x_label_area_size(44)
        .y_label_area_size(left)
        .build_cartesian_2d(
            TickedAxis { low: 0.0, high: n_cols, ticks: xt },
            TickedAxis { low: 0.0, high: n_rows, ticks: yt },
        )
        .map_err(drawing)?;
    let col_label = |v: &f64| {
        g.keys.get(v.floor() as usize).map_or(String::new(), |k| column_label(g.columns, *k))
    };
    // Row 0 at the top.
    let row_label = |v: &f64| {
        let i = g.rows.len() as i64 - 1 - v.floor() as i64;
        usize::try_from(i).ok().and_then(|i| g.rows.get(i)).map_or(String::new(), |r| r.0.clone())
    };
    chart
        .configure_mesh()
        .disable_mesh()
        .x_desc(x_desc)
        .x_label_formatter(&col_label)
        .y_label_formatter(&row_label)
        .label_style((FAMILY, 13).into_font().color(&TEXT))
        .axis_desc_style((FAMILY, 13).into_font().color(&TEXT))
        .draw()
        .map_err(drawing)?;
    let (xr, _) = chart.plotting_area().get_pixel_range();
    let cell_w = (xr.end - xr.start) as f64 / n_cols;
    for (r, (_, cells)) in g.rows.iter().enumerate() {
        let y0 = n_rows - 1.0 - r as f64;
        for (c, key) in g.keys.iter().enumerate() {
            let rect = [(c as f64, y0), (c as f64 + 1.0, y0 + 1.0)];
            let tally = cells.get(key);
            let pct = tally.and_then(|t| t.pct());
            let thin = tally.is_some_and(|t| is_thin(t.seconds, g.columns.cell_s()));
            let fill = match pct {
                Some(p) => {
                    let [r, g, b] = map.rgb(p / 100.0);
                    RGBColor(r, g, b)
                }
                None => NO_DATA,
            };
            if thin && pct.is_some() {
                chart.draw_series([Rectangle::new(rect, NO_DATA.filled())]).map_err(drawing)?;
                chart.draw_series(hatch(c as f64, y0)).map_err(drawing)?;
                let band = [(c as f64, y0 + 0.3), (c as f64 + 1.0, y0 + 0.7)];
                chart.draw_series([Rectangle::new(band, fill.filled())]).map_err(drawing)?;
            } else {
                chart.draw_series([Rectangle::new(rect, fill.filled())]).map_err(drawing)?;
            }
            chart.draw_series([Rectangle::new(rect, WHITE.stroke_width(1))]).map_err(drawing)?;
            if let (Some(p), true) = (pct, cell_w >= 26.0) {
                let light = luminance(fill) < 110.0;
                let colour = if light { WHITE } else { BLACK };
                let style = (FAMILY, 12)
                    .into_font()
                    .color(&colour)
                    .pos(Pos::new(HPos::Center, VPos::Center));
                let at = (c as f64 + 0.5, y0 + 0.5);
                let label = if thin { format!("{p:.0}*") } else { format!("{p:.0}") };
                chart.draw_series([Text::new(label, at, style)]).map_err(drawing)?;
            }
        }
    }
    draw_floors(&spark_area, g)?;
    draw_legend(root, &bar_area, map)?;
    let note = format!(
        "channel occupancy = occupied / measured samples (ITU-R SM.1880), % · grey: not measured · hatched, *: under {:.0} % of the cell measured · {}{}",
        THIN_SHARE * 100.0,
        match summary.database {
            Some(_) => "from the database".to_string(),
            None => format!("{} file(s)", summary.files),
        },
        match (summary.first, summary.last) {
            (Some(a), Some(b)) => format!(" · {} to {} {}", zone.format(a), zone.format(b), zone.label()),
            _ => String::new(),
        }
    );
    footer
        .draw(&Text::new(note, (12, 6), (FAMILY, 13).into_font().color(&TEXT)))
        .map_err(drawing)?;
    Ok(())
}

/// Beside each row, its noise floor over the whole period as a sparkline (the same time axis
/// for every row, cut where the logs have a gap), each row on its own scale, whose lowest and
/// highest bucket means are written beside it.
fn draw_floors<DB: DrawingBackend>(area: &DrawingArea<DB, Shift>, g: &Grid) -> Result<()> {
    let n_rows = g.rows.len().max(1) as f64;
    let times = g.floors.iter().flatten().map(|p| p.0);
    let (t0, t1) = times.fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), t| (a.min(t), b.max(t)));
    let (t0, t1) = if t0 < t1 { (t0, t1) } else { (t0 - 1.0, t0 + 1.0) };
    // The line takes the left 60 % of the column, its range the rest.
    let line_end = t0 + (t1 - t0) / 0.6;
    let mut chart = ChartBuilder::on(area)
        .margin(10)
        .margin_left(8)
        .x_label_area_size(44)
        .build_cartesian_2d(
            TickedAxis { low: t0, high: line_end, ticks: vec![] },
            TickedAxis { low: 0.0, high: n_rows, ticks: vec![] },
        )
        .map_err(drawing)?;
    chart
        .configure_mesh()
        .disable_mesh()
        .disable_y_axis()
        .x_desc("noise floor, dBFS/Hz (row min..max)")
        .axis_desc_style((FAMILY, 13).into_font().color(&TEXT))
        .draw()
        .map_err(drawing)?;
    let line = RGBColor(40, 70, 160);
    for (r, points) in g.floors.iter().enumerate() {
        let y0 = n_rows - 1.0 - r as f64;
        let label = (t0 + (t1 - t0) * 1.04, y0 + 0.5);
        let style = (FAMILY, 11).into_font().color(&TEXT).pos(Pos::new(HPos::Left, VPos::Center));
        let Some((lo, hi)) = spark_range(points) else {
            chart.draw_series([Text::new("no floor logged", label, style)]).map_err(drawing)?;
            continue;
        };
        let mid = 0.5 * (lo + hi);
        let span = (hi - lo).max(SPARK_MIN_DB);
        let y = |v: f64| y0 + 0.5 + 0.7 * (v - mid) / span;
        for run in floor::runs(points) {
            if let [(t, v)] = run {
                chart.draw_series([Circle::new((*t, y(*v)), 2, line.filled())]).map_err(drawing)?;
            } else {
                let path: Vec<(f64, f64)> = run.iter().map(|&(t, v)| (t, y(v))).collect();
                chart
                    .draw_series([PathElement::new(path, line.stroke_width(1))])
                    .map_err(drawing)?;
            }
        }
        let text = format!("{lo:.1}..{hi:.1}");
        chart.draw_series([Text::new(text, label, style)]).map_err(drawing)?;
    }
    Ok(())
}

/// The lowest and highest point of a sparkline, or `None` when it has none.
fn spark_range(points: &[(f64, f64)]) -> Option<(f64, f64)> {
    let lo = points.iter().map(|p| p.1).min_by(f64::total_cmp)?;
    let hi = points.iter().map(|p| p.1).max_by(f64::total_cmp)?;
    Some((lo, hi))
}

/// Diagonal strokes across the cell whose lower left corner is (`x`, `y`).
fn hatch(x: f64, y: f64) -> Vec<PathElement<(f64, f64)>> {
    const STROKES: usize = 4;
    (1..2 * STROKES)
        .map(|k| {
            let d = k as f64 / STROKES as f64; // where the stroke meets the cell's edges
            let from = if d <= 1.0 { (x, y + d) } else { (x + d - 1.0, y + 1.0) };
            let to = if d <= 1.0 { (x + d, y) } else { (x + 1.0, y + d - 1.0) };
            PathElement::new(vec![from, to], RGBColor(150, 150, 150).stroke_width(1))
        })
        .collect()
}

fn luminance(c: RGBColor) -> f64 {
    0.2126 * c.0 as f64 + 0.7152 * c.1 as f64 + 0.0722 * c.2 as f64
}

fn draw_legend<DB: DrawingBackend>(
    root: &DrawingArea<DB, Shift>,
    area: &DrawingArea<DB, Shift>,
    map: MapKind,
) -> Result<()> {
    let ticks: Vec<f64> = (0..=5).map(|k| k as f64 * 20.0).collect();
    let mut chart = ChartBuilder::on(area)
        .margin(10)
        .margin_right(4)
        .x_label_area_size(44)
        .right_y_label_area_size(56)
        .build_cartesian_2d(0.0..1.0, TickedAxis { low: 0.0, high: 100.0, ticks })
        .map_err(drawing)?;
    chart
        .configure_mesh()
        .disable_mesh()
        .disable_x_axis()
        .y_desc("occupancy %")
        .y_label_formatter(&|v| format!("{v:.0}"))
        .label_style((FAMILY, 13).into_font().color(&TEXT))
        .axis_desc_style((FAMILY, 13).into_font().color(&TEXT))
        .draw()
        .map_err(drawing)?;
    crate::output::picture::canvas::draw_gradient(
        root,
        chart.plotting_area().get_pixel_range(),
        map,
    )
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::output::summary::Settings;

    /// Two hours of one-minute intervals of channel "gate" whose logged floor steps from
    /// -170 to -164 dBFS/Hz after the first hour; then a gap of an hour and a last half hour.
    fn stepped_log() -> String {
        let mut text = String::from(
            r#"{"kind":"start","site":"ridge","run":"r1","seq":0,"sample_rate_hz":1e6,"start":"2026-12-04T20:00:00Z","t_start_s":0.0,"interval_s":60.0}"#,
        );
        text.push('\n');
        let minutes = (0..120).chain(180..210);
        for (seq, m) in (1..).zip(minutes) {
            let t = 60.0 * m as f64;
            let floor = if m < 60 { -170.0 } else { -164.0 };
            text.push_str(&format!(
                r#"{{"kind":"interval","channel":"gate","center_hz":433.2625e6,"width_hz":12.5e3,"t_start_s":{t},"t_end_s":{},"duration_s":60.0,"samples":60000000,"occupied_samples":0,"occupancy_pct":0.0,"mean_dbfs":-60.0,"noise_floor_dbfs_per_hz":{floor},"dropped_samples":0,"run":"r1","seq":{seq}}}"#,
                t + 60.0
            ));
            text.push('\n');
        }
        text
    }

    #[test]
    fn the_floor_sparkline_comes_from_the_logged_floors() {
        let mut s = LogSummary::new(Settings::default());
        s.read("ridge.jsonl", stepped_log().as_bytes()).unwrap();
        let g = grid(&s);
        let points = &g.floors[0];
        // Every logged floor is one of the two levels, each bucket one side of the step: the
        // sparkline holds -170 before 21:00 UTC and -164 after, in time order.
        let step = 1_796_414_400.0 + 3600.0; // 2026-12-04T21:00:00Z, seconds since the epoch
        assert!(points.len() >= 100, "{}", points.len());
        assert!(points.windows(2).all(|w| w[0].0 < w[1].0));
        for &(t, v) in points {
            let want = if t < step { -170.0 } else { -164.0 };
            assert_eq!(v, want, "at {t}");
        }
        assert_eq!(spark_range(points), Some((-170.0, -164.0)));
        // The hour without intervals cuts the line in two.
        assert_eq!(floor::runs(points).len(), 2);
        let png = draw_heatmap(&s, MapKind::Viridis, "floor step").unwrap();
        assert!(png.starts_with(b"\x89PNG"));
        if let Ok(dir) = std::env::var("BW_KEEP_PICTURES") {
            std::fs::write(format!("{dir}/floor-step.png"), png).unwrap();
        }
    }
}
