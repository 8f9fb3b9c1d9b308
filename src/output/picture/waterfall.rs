//! A waterfall as a picture: the band over time with the averaged spectrum above it, axes with
//! units, a colour bar, the channel plan and outlined emissions, a title and a footer that says
//! how it was measured. [`draw_waterfall`] takes rows held by anyone (`snapshot`'s accumulator,
//! the live monitor's history) with their frequencies and times, so every picture of a waterfall
//! the program makes looks alike.
//!
//! # Layout and axis mapping
//! Title on top, footer at the bottom, the colour bar on the right; the spectrum panel takes the
//! upper quarter of the rest and the waterfall the remainder, both over the same frequency axis.
//! Inside the waterfall's plotting area of `w × h` pixels starting at `(x0, y0)`:
//! - **frequency** rises to the right: pixel column `i` shows `f = lo + (i + ½)·(hi − lo)/w`, so
//!   the tick labelled `f` stands at `x = x0 + (f − lo)/(hi − lo)·w`;
//! - **time** runs downward from the first sample: pixel row `j` averages the input samples
//!   `[a + j·L/h, a + (j + 1)·L/h)` (`a` the first, `L` the count), so the tick labelled `t`
//!   seconds after the start stands at `y = y0 + t·rate/L·h`. With a known start time (SigMF
//!   `core:datetime` or `--start`) the labels are UTC times of day, else seconds;
//! - **level** maps linearly onto the colour map between the scale's ends: `c = (L − low)/(high −
//!   low)`, clamped; the colour bar shows the same map with `low` at its bottom.
//!
//! A pixel row averages the rows that overlap its time span, in linear power and weighted by the
//! overlap; a pixel row where no sample was measured (input lost) is drawn as a grey checker, so a
//! hole never passes for a quiet band.

use crate::output::picture::canvas::{drawing, PictureFormat, TickedAxis, FAMILY};
use crate::output::picture::colour::MapKind;
use crate::output::picture::held_rows::{HeldRow, HeldRows};
use crate::output::picture::ticks::{
    freq_ticks, freq_unit, round_step, ticks_within, time_ticks, FreqUnit,
};
use crate::units::{db, undb};
use anyhow::Result;
use plotters::coord::Shift;
use plotters::element::BitMapElement;
use plotters::prelude::*;
use plotters::style::text_anchor::{HPos, Pos, VPos};
use time::OffsetDateTime;

/// A channel of the plan as a picture shows it.
#[derive(Clone, Debug, PartialEq)]
pub struct ChannelBand {
    pub name: String,
    pub low_hz: f64,
    pub high_hz: f64,
}

/// An emission to outline: its band and samples, and a label.
#[derive(Clone, Debug, PartialEq)]
pub struct Mark {
    pub low_hz: f64,
    pub high_hz: f64,
    pub first_sample: u64,
    pub end_sample: u64,
    /// Frequency of its strongest bin.
    pub peak_hz: f64,
    /// Its level as shown (`-36 dBFS`).
    pub level: String,
    /// Frequency and level (`433.1375 MHz -36 dBFS`): the label outside any plan channel.
    pub label: String,
}

impl Mark {
    /// The label to draw: the plan channel's name when the emission's peak lies in one
    /// (`ops -36 dBFS`), else frequency and level.
    pub fn label_in(&self, channels: &[ChannelBand]) -> String {
        if self.label.is_empty() {
            return String::new();
        }
        match channels.iter().find(|c| (c.low_hz..=c.high_hz).contains(&self.peak_hz)) {
            Some(c) => format!("{} {}", c.name, self.level),
            None => self.label.clone(),
        }
    }
}

/// Where a mark's label goes: the first of these places, tried in order, that stays inside the
/// plot and overlaps no other box and no label placed before it (labels are placed strongest
/// emission first). `bx` is the box in pixels (left, top, right, bottom), `w` the label's width;
/// a label is 13 px high. Returns the label's bounds.
fn place_label(
    bx: (i32, i32, i32, i32),
    w: i32,
    plot: (i32, i32, i32, i32),
    others: &[(i32, i32, i32, i32)],
    placed: &[(i32, i32, i32, i32)],
) -> Option<(i32, i32, i32, i32)> {
    const H: i32 = 13;
    let (l, t, r, b) = bx;
    let candidates = [
        (r + 2, t),         // right of the box, level with its top
        (l - 4 - w, t),     // left of it
        (l, b + 2),         // under it
        (l, t - H - 2),     // over it
        (r + 2, b - H),     // right, level with its bottom
        (l - 4 - w, b - H), // left, level with its bottom
    ];
    let overlaps = |a: &(i32, i32, i32, i32), o: &(i32, i32, i32, i32)| {
        !(a.2 < o.0 || o.2 < a.0 || a.3 < o.1 || o.3 < a.1)
    };
    candidates.into_iter().map(|(x, y)| (x, y, x + w + 2, y + H)).find(|c| {
        c.0 >= plot.0
            && c.2 <= plot.2
            && c.1 >= plot.1
            && c.3 <= plot.3
            && !others.iter().any(|o| overlaps(c, o))
            && !placed.iter().any(|p| overlaps(c, p))
    })
}

/// The rows to draw and where they lie.
#[derive(Clone, Copy, Debug)]
pub struct WaterfallView<'a> {
    /// Oldest first; each spans `low_hz..high_hz` in evenly spaced columns (dBFS in one RBW).
    pub rows: &'a [HeldRow],
    pub low_hz: f64,
    pub high_hz: f64,
    /// The averaged spectrum and the highest level per column, if known.
    pub average_db: Option<&'a [f32]>,
    pub peak_db: Option<&'a [f32]>,
}

impl<'a> WaterfallView<'a> {
    pub fn of(held: &'a HeldRows) -> WaterfallView<'a> {
        WaterfallView {
            rows: &held.rows,
            low_hz: held.low_hz,
            high_hz: held.high_hz,
            average_db: Some(&held.average_db),
            peak_db: Some(&held.peak_db),
        }
    }
}

/// The stretch of input the picture shows.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Timeline {
    pub rate_hz: f64,
    pub first_sample: u64,
    pub end_sample: u64,
    /// UTC time of `first_sample`, when known.
    pub start: Option<OffsetDateTime>,
}

impl Timeline {
    pub fn duration_s(&self) -> f64 {
        self.end_sample.saturating_sub(self.first_sample) as f64 / self.rate_hz
    }
}

/// How the picture looks.
#[derive(Clone, Debug)]
pub struct PictureSettings {
    pub width: u32,
    pub height: u32,
    pub map: MapKind,
    /// Ends of the colour scale in the unit shown (dBFS, or dBm with a reference offset); `None`
    /// chooses them from the data.
    pub scale: Option<(f64, f64)>,
    /// dB added to every level: dBFS becomes dBm for a calibrated receiver.
    pub ref_offset_db: Option<f64>,
    pub title: String,
    pub footer: Vec<String>,
    pub channels: Vec<ChannelBand>,
    pub marks: Vec<Mark>,
    /// Time runs upward, newest row at the top, as on the live monitor's screen (its `g`
    /// picture); otherwise down the page, oldest at the top, as a report reads (`snapshot`).
    pub newest_at_top: bool,
}

/// Pixels of the fixed parts of the layout.
const TITLE_H: u32 = 34;
const FOOTER_LINE_H: u32 = 17;
const LEFT_LABELS: u32 = 80;
const BOTTOM_LABELS: u32 = 46;
const BAR_W: u32 = 104;
const MARGIN: u32 = 12;
/// Room left of the level and time axes, so their rotated titles are not cut at the edge.
const AXIS_TITLE_MARGIN: u32 = 6;
/// Width of one character of a mark's label (11 px text), pixels, for keeping labels apart.
const MARK_CHAR_W: f64 = 6.2;
const TEXT: RGBColor = RGBColor(20, 20, 20);
const AVERAGE: RGBColor = RGBColor(20, 70, 160);
const PEAK: RGBColor = RGBColor(225, 120, 30);
const CHANNEL: RGBColor = RGBColor(40, 150, 90);

/// Draws a waterfall picture and encodes it.
pub fn draw_waterfall(
    view: &WaterfallView<'_>,
    timeline: &Timeline,
    settings: &PictureSettings,
    format: PictureFormat,
) -> Result<Vec<u8>> {
    let scale = settings.scale.unwrap_or_else(|| auto_scale(view, settings.ref_offset_db));
    let (w, h) = (settings.width, settings.height);
    match format {
        PictureFormat::Png => crate::output::picture::canvas::render_png(w, h, |root| {
            draw_on(root, view, timeline, settings, scale)
        }),
        PictureFormat::Svg => crate::output::picture::canvas::render_svg(w, h, |root| {
            draw_on(root, view, timeline, settings, scale)
        }),
    }
}

/// The colour scale from the data: from 10 dB under the median of the average (the noise) to
/// 3 dB over the highest level, in whole 5 dB, at least 30 dB wide.
pub fn auto_scale(view: &WaterfallView<'_>, ref_offset_db: Option<f64>) -> (f64, f64) {
    let off = ref_offset_db.unwrap_or(0.0);
    let mut levels: Vec<f32> = match view.average_db {
        Some(a) => a.iter().copied().filter(|v| v.is_finite()).collect(),
        None => view.rows.iter().flat_map(|r| r.level_db.iter().copied()).collect(),
    };
    levels.retain(|v| v.is_finite());
    if levels.is_empty() {
        return (-120.0 + off, -20.0 + off);
    }
    levels.sort_by(f32::total_cmp);
    let median = levels[levels.len() / 2] as f64;
    let top = match view.peak_db {
        Some(p) => p.iter().copied().filter(|v| v.is_finite()).fold(f32::MIN, f32::max),
        None => *levels.last().unwrap_or(&0.0),
    } as f64;
    let low = ((median - 10.0 + off) / 5.0).floor() * 5.0;
    let high = ((top.max(median) + 3.0 + off) / 5.0).ceil() * 5.0;
    (low, high.max(low + 30.0))
}

/// The colour of `level` (unit shown) on a scale `low..high`.
pub fn level_colour(map: MapKind, level: f64, (low, high): (f64, f64)) -> [u8; 3] {
    if !level.is_finite() {
        return map.rgb(0.0);
    }
    map.rgb((level - low) / (high - low))
}

fn draw_on<DB: DrawingBackend>(
    root: &DrawingArea<DB, Shift>,
    view: &WaterfallView<'_>,
    timeline: &Timeline,
    settings: &PictureSettings,
    scale: (f64, f64),
) -> Result<()> {
    root.fill(&WHITE).map_err(drawing)?;
    let footer_h = FOOTER_LINE_H * settings.footer.len() as u32 + 10;
    let (title, rest) = root.split_vertically(TITLE_H);
    let rest_h = rest.dim_in_pixel().1;
    let (main, footer) = rest.split_vertically(rest_h.saturating_sub(footer_h));
    let main_w = main.dim_in_pixel().0;
    let (plots, bar) = main.split_horizontally(main_w.saturating_sub(BAR_W));
    let spec_h = plots.dim_in_pixel().1 / 4;
    let (spec_area, wf_area) = plots.split_vertically(spec_h);
    let (_, bar_area) = bar.split_vertically(spec_h);

    title
        .draw(&Text::new(
            settings.title.clone(),
            (MARGIN as i32, 9),
            (FAMILY, 19).into_font().color(&TEXT),
        ))
        .map_err(drawing)?;
    for (k, line) in settings.footer.iter().enumerate() {
        let y = 4 + (k as u32 * FOOTER_LINE_H) as i32;
        footer
            .draw(&Text::new(
                line.clone(),
                (MARGIN as i32, y),
                (FAMILY, 13).into_font().color(&TEXT),
            ))
            .map_err(drawing)?;
    }
    let unit = freq_unit(view.high_hz);
    let level_unit = if settings.ref_offset_db.is_some() { "dBm" } else { "dBFS" };
    draw_spectrum(&spec_area, view, settings, scale, unit, level_unit)?;
    draw_image(root, &wf_area, view, timeline, settings, scale, unit)?;
    draw_bar(root, &bar_area, settings.map, scale, level_unit)?;
    Ok(())
}

fn label_font<'a>() -> TextStyle<'a> {
    (FAMILY, 13).into_font().color(&TEXT)
}

/// The grey of a stretch with no data (the waterfall's checker uses its two shades).
const NO_DATA: RGBColor = RGBColor(130, 130, 130);

/// The frequency ranges of a panorama's holes in `view` (columns whose average is NaN: never
/// in view), each as its columns' outer edges.
fn holes(view: &WaterfallView<'_>) -> Vec<(f64, f64)> {
    let Some(a) = view.average_db else { return Vec::new() };
    let step = (view.high_hz - view.low_hz) / a.len().max(1) as f64;
    let mut out: Vec<(f64, f64)> = Vec::new();
    for (i, v) in a.iter().enumerate() {
        if !v.is_nan() {
            continue;
        }
        let (x0, x1) = (view.low_hz + i as f64 * step, view.low_hz + (i + 1) as f64 * step);
        match out.last_mut() {
            Some(last) if (last.1 - x0).abs() < step * 1e-6 => last.1 = x1,
            _ => out.push((x0, x1)),
        }
    }
    out
}

fn draw_spectrum<DB: DrawingBackend>(
    area: &DrawingArea<DB, Shift>,
    view: &WaterfallView<'_>,
    settings: &PictureSettings,
    (low, high): (f64, f64),
    unit: FreqUnit,
    level_unit: &str,
) -> Result<()> {
    let xt: Vec<f64> =
        freq_ticks(view.low_hz, view.high_hz, unit, 10).into_iter().map(|t| t.0).collect();
    let yt = ticks_within(low, high, round_step(high - low, 4));
    let mut chart = ChartBuilder::on(area)
        .margin_top(8)
        .margin_bottom(10)
        .margin_left(AXIS_TITLE_MARGIN)
        .margin_right(MARGIN)
        .y_label_area_size(LEFT_LABELS)
        .build_cartesian_2d(
            TickedAxis { low: view.low_hz, high: view.high_hz, ticks: xt },
            TickedAxis { low, high, ticks: yt },
        )
        .map_err(drawing)?;
    chart
        .configure_mesh()
        .y_desc(format!("{level_unit} in RBW"))
        .y_label_formatter(&|v| format!("{v:.0}"))
        .label_style(label_font())
        .axis_desc_style(label_font())
        .light_line_style(WHITE)
        .bold_line_style(RGBColor(225, 225, 225))
        .draw()
        .map_err(drawing)?;
    for (k, ch) in settings.channels.iter().enumerate() {
        let band = [(ch.low_hz, low), (ch.high_hz, high)];
        chart.draw_series([Rectangle::new(band, CHANNEL.mix(0.15).filled())]).map_err(drawing)?;
        let y = high - (high - low) * if k % 2 == 0 { 0.03 } else { 0.13 };
        let at = (0.5 * (ch.low_hz + ch.high_hz), y);
        let style = (FAMILY, 12).into_font().color(&CHANNEL).pos(Pos::new(HPos::Center, VPos::Top));
        chart.draw_series([Text::new(ch.name.clone(), at, style)]).map_err(drawing)?;
    }
    let off = settings.ref_offset_db.unwrap_or(0.0);
    // The traces as runs of columns with a level: a panorama's hole (NaN, never in view)
    // breaks the line, so it shows as a gap, never as a floor.
    let columns = |levels: &[f32]| -> Vec<Vec<(f64, f64)>> {
        let n = levels.len().max(1) as f64;
        let step = (view.high_hz - view.low_hz) / n;
        let mut runs: Vec<Vec<(f64, f64)>> = vec![Vec::new()];
        for (i, &v) in levels.iter().enumerate() {
            if v.is_nan() {
                runs.push(Vec::new());
                continue;
            }
            let at = (view.low_hz + (i as f64 + 0.5) * step, (v as f64 + off).clamp(low, high));
            runs.last_mut().expect("one run at least").push(at);
        }
        runs.retain(|r| !r.is_empty());
        runs
    };
    let trace = |levels: &[f32], style: ShapeStyle| {
        columns(levels).into_iter().map(move |r| PathElement::new(r, style))
    };
    for (x0, x1) in holes(view) {
        chart
            .draw_series([Rectangle::new([(x0, low), (x1, high)], NO_DATA.mix(0.35).filled())])
            .map_err(drawing)?;
    }
    if let Some(p) = view.peak_db {
        chart
            .draw_series(trace(p, PEAK.stroke_width(1)))
            .map_err(drawing)?
            .label("highest")
            .legend(|(x, y)| PathElement::new([(x, y), (x + 18, y)], PEAK.stroke_width(2)));
    }
    if let Some(a) = view.average_db {
        chart
            .draw_series(trace(a, AVERAGE.stroke_width(1)))
            .map_err(drawing)?
            .label("average")
            .legend(|(x, y)| PathElement::new([(x, y), (x + 18, y)], AVERAGE.stroke_width(2)));
    }
    if view.peak_db.is_some() || view.average_db.is_some() {
        chart
            .configure_series_labels()
            .position(SeriesLabelPosition::UpperRight)
            .background_style(WHITE.mix(0.85))
            .border_style(RGBColor(180, 180, 180))
            .label_font(label_font())
            .draw()
            .map_err(drawing)?;
    }
    Ok(())
}

#[allow(clippy::too_many_arguments)]
fn draw_image<DB: DrawingBackend>(
    root: &DrawingArea<DB, Shift>,
    area: &DrawingArea<DB, Shift>,
    view: &WaterfallView<'_>,
    timeline: &Timeline,
    settings: &PictureSettings,
    scale: (f64, f64),
    unit: FreqUnit,
) -> Result<()> {
    let duration = timeline.duration_s().max(1e-9);
    let fticks = freq_ticks(view.low_hz, view.high_hz, unit, 10);
    let tticks = time_ticks(timeline.start, duration, 10);
    // Time runs downward: the chart's y is minus the seconds from the start; upward (newest
    // at the top): the seconds themselves.
    let up = settings.newest_at_top;
    let sign = if up { 1.0 } else { -1.0 };
    let yk: Vec<f64> = tticks.iter().map(|t| sign * t.0).collect();
    let (y_low, y_high) = if up { (0.0, duration) } else { (-duration, 0.0) };
    let mut chart = ChartBuilder::on(area)
        .margin_top(6)
        .margin_left(AXIS_TITLE_MARGIN)
        .margin_right(MARGIN)
        .y_label_area_size(LEFT_LABELS)
        .x_label_area_size(BOTTOM_LABELS)
        .build_cartesian_2d(
            TickedAxis {
                low: view.low_hz,
                high: view.high_hz,
                ticks: fticks.iter().map(|t| t.0).collect(),
            },
            TickedAxis { low: y_low, high: y_high, ticks: yk },
        )
        .map_err(drawing)?;
    let freq_label = |v: &f64| nearest_label(&fticks, *v);
    let time_label = |v: &f64| nearest_label(&tticks, sign * *v);
    let time_desc = match timeline.start {
        Some(t) => format!("time (UTC, {})", t.date()),
        None => "time (s from the first sample)".to_string(),
    };
    chart
        .configure_mesh()
        .disable_mesh()
        .x_desc(format!("frequency ({})", unit.name))
        .y_desc(time_desc)
        .x_label_formatter(&freq_label)
        .y_label_formatter(&time_label)
        .label_style(label_font())
        .axis_desc_style(label_font())
        .draw()
        .map_err(drawing)?;
    let (xr, yr) = chart.plotting_area().get_pixel_range();
    let (w, h) = ((xr.end - xr.start).max(1) as u32, (yr.end - yr.start).max(1) as u32);
    let mut rgb = waterfall_pixels(view, timeline, settings, scale, w, h);
    if up {
        flip_rows(&mut rgb, w as usize * 3);
    }
    let element = BitMapElement::with_owned_buffer((xr.start, yr.start), (w, h), rgb)
        .ok_or_else(|| drawing("the waterfall image has the wrong size"))?;
    root.draw(&element).map_err(drawing)?;
    let t = |sample: u64| {
        sign * (sample.saturating_sub(timeline.first_sample) as f64 / timeline.rate_hz)
    };
    let edge = WHITE.mix(0.45);
    for ch in &settings.channels {
        for f in [ch.low_hz, ch.high_hz] {
            chart
                .draw_series([PathElement::new([(f, y_low), (f, y_high)], edge.stroke_width(1))])
                .map_err(drawing)?;
        }
    }
    // Every box first, then the labels where they overlap no box and no other label (strongest
    // first, see `place_label`); a label with no free place is left out, its box stays.
    let boxes: Vec<(i32, i32, i32, i32)> = settings
        .marks
        .iter()
        .map(|m| {
            let (l, t0) = chart.backend_coord(&(m.low_hz, t(m.first_sample)));
            let (r, b) = chart.backend_coord(&(m.high_hz, t(m.end_sample)));
            (l.min(r), t0.min(b), l.max(r), t0.max(b))
        })
        .collect();
    for m in &settings.marks {
        let rect = [(m.low_hz, t(m.first_sample)), (m.high_hz, t(m.end_sample))];
        chart.draw_series([Rectangle::new(rect, WHITE.stroke_width(1))]).map_err(drawing)?;
    }
    let plot = (xr.start, yr.start, xr.end, yr.end);
    let mut placed: Vec<(i32, i32, i32, i32)> = Vec::new();
    for (k, m) in settings.marks.iter().enumerate() {
        let label = m.label_in(&settings.channels);
        if label.is_empty() {
            continue;
        }
        let text_w = (label.chars().count() as f64 * MARK_CHAR_W).ceil() as i32;
        // A box more than three labels wide is background to a label, not a neighbour: a wide
        // link would otherwise leave the narrow emissions beside it unlabelled.
        let others: Vec<_> = boxes
            .iter()
            .enumerate()
            .filter(|(j, b)| *j != k && b.2 - b.0 <= 3 * text_w)
            .map(|(_, b)| *b)
            .collect();
        let Some(at) = place_label(boxes[k], text_w, plot, &others, &placed) else {
            continue;
        };
        placed.push(at);
        let style = (FAMILY, 11).into_font().color(&WHITE);
        root.draw(&Text::new(label, (at.0 + 2, at.1 + 1), style)).map_err(drawing)?;
    }
    Ok(())
}

/// Turns an image of rows `stride` bytes long upside down.
fn flip_rows(rgb: &mut [u8], stride: usize) {
    let rows = rgb.len() / stride.max(1);
    for r in 0..rows / 2 {
        let (top, bottom) = rgb.split_at_mut((rows - 1 - r) * stride);
        top[r * stride..(r + 1) * stride].swap_with_slice(&mut bottom[..stride]);
    }
}

fn nearest_label(ticks: &[(f64, String)], v: f64) -> String {
    ticks
        .iter()
        .min_by(|a, b| (a.0 - v).abs().total_cmp(&(b.0 - v).abs()))
        .map(|t| t.1.clone())
        .unwrap_or_default()
}

/// The waterfall's pixels, `w × h` RGB, laid out as the module's docs say.
pub fn waterfall_pixels(
    view: &WaterfallView<'_>,
    timeline: &Timeline,
    settings: &PictureSettings,
    scale: (f64, f64),
    w: u32,
    h: u32,
) -> Vec<u8> {
    let (w, h) = (w as usize, h as usize);
    let mut rgb = vec![0u8; w * h * 3];
    let cols = view.rows.first().map_or(0, |r| r.level_db.len());
    let off = settings.ref_offset_db.unwrap_or(0.0);
    let span = timeline.end_sample.saturating_sub(timeline.first_sample) as f64;
    let mut power = vec![0.0f64; cols];
    // Each row's levels as linear power, converted once however many pixel rows it spans, and
    // let go once the pixel rows have passed it (`powf` per level and pixel row used to be
    // most of the picture's cost).
    let mut linear: Vec<Option<Vec<f64>>> = vec![None; view.rows.len()];
    let mut next = 0usize;
    for j in 0..h {
        let a = timeline.first_sample as f64 + span * j as f64 / h as f64;
        let b = timeline.first_sample as f64 + span * (j + 1) as f64 / h as f64;
        power.iter_mut().for_each(|p| *p = 0.0);
        let mut weight = 0.0;
        while next < view.rows.len() && (view.rows[next].end_sample as f64) <= a {
            linear[next] = None;
            next += 1;
        }
        let ahead = view.rows[next..].iter().take_while(|r| (r.first_sample as f64) < b);
        for (r, lin) in ahead.zip(&mut linear[next..]) {
            let overlap = (r.end_sample as f64).min(b) - (r.first_sample as f64).max(a);
            if overlap <= 0.0 || r.level_db.len() != cols {
                continue;
            }
            weight += overlap;
            let lin =
                lin.get_or_insert_with(|| r.level_db.iter().map(|&l| undb(l as f64)).collect());
            for (p, &x) in power.iter_mut().zip(lin.iter()) {
                *p += x * overlap;
            }
        }
        let line = &mut rgb[j * w * 3..(j + 1) * w * 3];
        for i in 0..w {
            let px = &mut line[i * 3..i * 3 + 3];
            if weight <= 0.0 || cols == 0 {
                let light = ((i / 4) + (j / 4)) % 2 == 0;
                px.copy_from_slice(if light { &[150, 150, 150] } else { &[115, 115, 115] });
                continue;
            }
            let c0 = i * cols / w;
            let c1 = ((i + 1) * cols / w).max(c0 + 1).min(cols);
            if power[c0..c1].iter().all(|p| p.is_nan()) {
                // A panorama's hole, never in view: the grey of "no data", never a floor.
                let light = ((i / 4) + (j / 4)) % 2 == 0;
                px.copy_from_slice(if light { &[150, 150, 150] } else { &[115, 115, 115] });
                continue;
            }
            let p = power[c0..c1].iter().copied().fold(0.0, f64::max) / weight;
            px.copy_from_slice(&level_colour(settings.map, db(p) + off, scale));
        }
    }
    rgb
}

fn draw_bar<DB: DrawingBackend>(
    root: &DrawingArea<DB, Shift>,
    area: &DrawingArea<DB, Shift>,
    map: MapKind,
    (low, high): (f64, f64),
    level_unit: &str,
) -> Result<()> {
    let ticks = ticks_within(low, high, round_step(high - low, 8));
    let mut chart = ChartBuilder::on(area)
        .margin_top(6)
        .margin_left(6)
        .margin_right(4)
        .x_label_area_size(BOTTOM_LABELS)
        .right_y_label_area_size(62)
        .build_cartesian_2d(0.0..1.0, TickedAxis { low, high, ticks })
        .map_err(drawing)?;
    chart
        .configure_mesh()
        .disable_mesh()
        .disable_x_axis()
        .y_desc(format!("{level_unit} in RBW"))
        .y_label_formatter(&|v| format!("{v:.0}"))
        .label_style(label_font())
        .axis_desc_style(label_font())
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

    fn overlaps(a: (i32, i32, i32, i32), b: (i32, i32, i32, i32)) -> bool {
        !(a.2 < b.0 || b.2 < a.0 || a.3 < b.1 || b.3 < a.1)
    }

    #[test]
    fn a_label_avoids_its_neighbours_boxes_and_the_plot_edge() {
        let plot = (0, 0, 1000, 600);
        // A box with a neighbour just to its right: the label goes to the left.
        let bx = (400, 100, 410, 200);
        let neighbour = (415, 50, 425, 300);
        let at = place_label(bx, 90, plot, &[neighbour], &[]).unwrap();
        assert!(!overlaps(at, neighbour) && !overlaps(at, bx), "{at:?}");
        assert!(at.2 <= bx.0, "{at:?}");
        // Hemmed in on both sides (the right neighbour ending above the box's bottom): under it.
        let right = (415, 50, 425, 190);
        let left = (300, 50, 395, 300);
        let at = place_label(bx, 90, plot, &[right, left], &[]).unwrap();
        assert!(at.1 > bx.3, "{at:?}");
        // At the right edge of the plot with no room: never outside it.
        let edge = (990, 100, 998, 200);
        let at = place_label(edge, 90, plot, &[], &[]).unwrap();
        assert!(at.2 <= plot.2 && at.0 >= plot.0, "{at:?}");
        // Boxed in on every side: no label.
        let all = [(300, 0, 399, 600), (411, 0, 600, 600), (400, 0, 410, 99), (400, 201, 410, 600)];
        assert_eq!(place_label(bx, 90, plot, &all, &[]), None);
    }

    #[test]
    fn a_mark_in_a_plan_channel_is_named_after_it() {
        let m = Mark {
            low_hz: 433.13e6,
            high_hz: 433.145e6,
            first_sample: 0,
            end_sample: 10,
            peak_hz: 433.1375e6,
            level: "-36 dBFS".into(),
            label: "433.1375 MHz -36 dBFS".into(),
        };
        let ops = ChannelBand { name: "ops".into(), low_hz: 433.13125e6, high_hz: 433.14375e6 };
        assert_eq!(m.label_in(std::slice::from_ref(&ops)), "ops -36 dBFS");
        let other = ChannelBand { name: "yard".into(), low_hz: 433.18e6, high_hz: 433.19e6 };
        assert_eq!(m.label_in(&[other]), "433.1375 MHz -36 dBFS");
    }
}
