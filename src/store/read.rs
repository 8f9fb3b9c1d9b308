//! `report --db`: the summary `report` prints, summed in the database.
//!
//! The intervals (nearly every record of a long watch) are added up by SQL, per channel and
//! hour, in the order the table stores them (channel, hour, time: no sort), and the noise floor's
//! median is taken from a count per value (an index on (channel, floor)). The other records
//! (run starts and stops, emissions in the window, alarms, drops) are few and are read by the
//! same code that reads the logs, in the order they were logged, so the two reports agree.

use super::{Backend, Dialect, Val};
use crate::output::summary::coverage::RunSum;
use crate::output::summary::floor::{FloorSeries, MAX_BUCKETS};
use crate::output::summary::{ChannelSum, HourKey, LogSummary, Settings, Tally};
use anyhow::{Context, Result};
use serde_json::Value;
use std::collections::HashMap;

/// `AND …` limiting `col` to the window, with its parameters from `first`.
fn window(settings: &Settings, col: &str, first: usize) -> (String, Vec<Val>) {
    let mut sql = String::new();
    let mut params = Vec::new();
    if let Some(f) = settings.from {
        params.push(Val::Real(f));
        sql += &format!(" AND {col} >= ?{}", first + params.len() - 1);
    }
    if let Some(t) = settings.to {
        params.push(Val::Real(t));
        sql += &format!(" AND {col} < ?{}", first + params.len() - 1);
    }
    (sql, params)
}

/// As [`window`] for the intervals table, also bounding its key (channel, clock, hour): only
/// rows with a clock lie in a window, and their hour lies between the window's, so SQLite seeks
/// each channel's hours instead of reading the time index and sorting (a day of a month: 8×
/// less time, measured with sqlite3 over 1 M intervals).
fn interval_window(settings: &Settings, first: usize) -> (String, Vec<Val>) {
    let (mut sql, mut params) = window(settings, "t_epoch", first);
    if params.is_empty() {
        return (sql, params);
    }
    sql += " AND clock = 1";
    let hour = |t: f64| Val::Int((t / 3600.0).floor() as i64);
    if let Some(f) = settings.from {
        params.push(hour(f));
        sql += &format!(" AND hour_key >= ?{}", first + params.len() - 1);
    }
    if let Some(t) = settings.to {
        params.push(hour(t));
        sql += &format!(" AND hour_key <= ?{}", first + params.len() - 1);
    }
    (sql, params)
}

/// One channel of the database: its site (as stored) and name.
struct Chan {
    site: String,
    name: String,
}

/// Sums the database as `report` sums logs; `floors`: also each channel's noise floor over
/// time, for the picture ([`floor_series`]: one more pass over the intervals).
pub fn summarise(
    db: &mut dyn Backend,
    settings: Settings,
    shown: &str,
    floors: bool,
) -> Result<LogSummary> {
    let mut s = LogSummary::new(settings.clone());
    s.database = Some(shown.to_string());
    runs_and_records(db, &mut s, &settings)?;
    let chans: HashMap<i64, Chan> = db
        .rows("SELECT c.id, s.name, c.name FROM channels c JOIN sites s ON s.id = c.site_id", &[])?
        .into_iter()
        .filter_map(|r| {
            let site = r[1].text()?.to_string();
            Some((r[0].i64()?, Chan { site, name: r[2].text()?.to_string() }))
        })
        .collect();
    let kept: Vec<i64> = chans
        .iter()
        .filter(|(_, c)| settings.sites.map(&c.site).is_some())
        .map(|(id, _)| *id)
        .collect();
    let windowed = settings.from.is_some() || settings.to.is_some();
    let only = if kept.len() == chans.len() && !windowed {
        String::new()
    } else {
        let mut kept = kept;
        kept.sort_unstable();
        let ids: Vec<String> = kept.iter().map(i64::to_string).collect();
        format!(" AND channel_id IN ({})", if ids.is_empty() { "-1".into() } else { ids.join(",") })
    };
    let counted = interval_sums(db, &mut s, &settings, &chans, &only)?;
    for id in counted {
        channel_ends(db, &mut s, &settings, id, &chans[&id], floors)?;
    }
    if settings.from.is_some() || settings.to.is_some() {
        let rows =
            db.rows(&format!("SELECT COUNT(*) FROM intervals WHERE t_epoch IS NULL{only}"), &[])?;
        s.unplaced += rows[0][0].i64().unwrap_or(0) as u64;
    }
    Ok(s)
}

/// Every run, and its records but the intervals (emissions only within the window), read in
/// the order logged; then each run widened to the times all its records reach.
fn runs_and_records(db: &mut dyn Backend, s: &mut LogSummary, settings: &Settings) -> Result<()> {
    let runs = db.rows(
        "SELECT u.id, s.name, u.run, u.origin, u.rate_hz, u.t_min, u.t_max FROM runs u \
         JOIN sites s ON s.id = u.site_id ORDER BY u.id",
        &[],
    )?;
    let mut by_id = HashMap::new();
    for r in &runs {
        let id = r[0].i64().context("a run without an id")?;
        let site = r[1].text().unwrap_or("").to_string();
        let reading =
            s.stored_run(&site, r[2].text().unwrap_or(""), r[3].f64(), r[4].f64().unwrap_or(0.0));
        by_id.insert(id, (site, reading));
    }
    let (w, params) = window(settings, "t_epoch", 1);
    let sql = format!(
        "SELECT run_id, line FROM records WHERE kind <> 'interval' \
         AND (kind <> 'emission' OR t_epoch IS NULL OR (1 = 1{w})) ORDER BY run_id, seq"
    );
    db.each(&sql, &params, &mut |row| {
        let (Some(id), Some(line)) = (row[0].i64(), row[1].text()) else { return Ok(()) };
        let Some((site, reading)) = by_id.get_mut(&id) else { return Ok(()) };
        let v: Value = serde_json::from_str(line).context("a stored record is not JSON")?;
        s.stored_record(&v, reading, site);
        Ok(())
    })?;
    for r in &runs {
        let (Some(site), Some(run)) = (r[1].text(), r[2].text()) else { continue };
        let (Some(t_min), Some(t_max)) = (r[5].f64(), r[6].f64()) else { continue };
        let Some(site) = settings.sites.map(site) else { continue };
        if !s.sites.contains(&site) {
            s.sites.push(site.clone());
        }
        let sum = s.runs.entry((site.clone(), run.to_string())).or_insert_with(|| RunSum {
            site,
            origin: r[3].f64(),
            t_start_s: f64::MAX,
            ..Default::default()
        });
        sum.reach(t_min, Some(t_max));
    }
    Ok(())
}

/// The hour key of a row: hours since the epoch (UTC) shifted into the zone, or the run's hour.
fn hour_expr(d: Dialect, offset_s: i32) -> String {
    if offset_s % 3600 == 0 {
        "hour_key".into()
    } else {
        format!(
            "CASE WHEN clock = 1 THEN {} ELSE hour_key END",
            d.floor(&format!("(t_epoch + {offset_s}) / 3600.0"))
        )
    }
}

/// The hours a window holds whole, `[lo, hi)` in hours since the epoch: those of hour keys
/// strictly after the hour of `--from` and before the hour of `--to`, so that every interval of
/// them lies in the window (as `t / 3600` never orders two times otherwise than `t` does).
fn whole_hours(settings: &Settings) -> (Option<i64>, Option<i64>) {
    let lo = settings.from.map(|f| (f / 3600.0).floor() as i64 + 1);
    let hi = settings.to.map(|t| (t / 3600.0).floor() as i64);
    (lo, hi)
}

/// The query of the intervals' sums per channel, clock and hour (columns: channel, clock, hour,
/// samples, occupied, measured, lost, dropped, power, power samples, peak, first and last valid
/// time, intervals, valid intervals), in (channel, clock, hour) order, and its parameters.
///
/// Whole hours come from `interval_hours`; the hours a window cuts, and every hour of a zone
/// whose offset is not whole hours (its hours are not the stored ones), from the intervals.
fn sums_query(d: Dialect, settings: &Settings, only: &str) -> (String, Vec<Val>) {
    let offset = settings.zone.offset_s;
    let raw_cols = |h: &str| {
        format!(
            "SELECT channel_id, clock, {h} AS h, CAST(SUM(samples) AS BIGINT), SUM(occupied), \
             SUM(measured_s), SUM(lost_s), CAST(SUM(dropped) AS BIGINT), SUM(power_w), \
             CAST(SUM(power_n) AS BIGINT), MAX(peak_dbfs), \
             MIN(CASE WHEN valid = 1 THEN t_epoch END), \
             MAX(CASE WHEN valid = 1 THEN t_epoch + span_s END), \
             COUNT(*), CAST(SUM(valid) AS BIGINT) FROM intervals"
        )
    };
    let (w, params) = interval_window(settings, 1);
    if offset % 3600 != 0 {
        let sql = format!(
            "{} WHERE 1 = 1{w}{only} GROUP BY channel_id, clock, h",
            raw_cols(&hour_expr(d, offset))
        );
        return (sql, params);
    }
    let stored = "SELECT channel_id, clock, hour_key AS h, samples, occupied, measured_s, lost_s, \
                  dropped, power_w, power_n, peak_dbfs, first_t, last_t, n, n_valid \
                  FROM interval_hours";
    if params.is_empty() {
        let sql = format!("{stored} WHERE 1 = 1{only} ORDER BY channel_id, clock, hour_key");
        return (sql, params);
    }
    let (lo, hi) = whole_hours(settings);
    let bound =
        |op: &str, h: Option<i64>| h.map_or(String::new(), |h| format!(" AND hour_key {op} {h}"));
    let inner = format!("{}{}", bound(">=", lo), bound("<", hi));
    let cut = match (lo, hi) {
        (Some(lo), Some(hi)) => format!(" AND (hour_key < {lo} OR hour_key >= {hi})"),
        (Some(lo), None) => format!(" AND hour_key < {lo}"),
        (None, Some(hi)) => format!(" AND hour_key >= {hi}"),
        (None, None) => String::new(),
    };
    let sql = format!(
        "SELECT * FROM ({stored} WHERE clock = 1{inner}{only} UNION ALL \
         {} WHERE 1 = 1{w}{cut}{only} GROUP BY channel_id, clock, hour_key) AS u ORDER BY 1, 2, 3",
        raw_cols("hour_key")
    );
    (sql, params)
}

/// The intervals summed per channel and hour into the summary; returns the channels counted.
fn interval_sums(
    db: &mut dyn Backend,
    s: &mut LogSummary,
    settings: &Settings,
    chans: &HashMap<i64, Chan>,
    only: &str,
) -> Result<Vec<i64>> {
    let offset = settings.zone.offset_s;
    let shift = if offset % 3600 == 0 { i64::from(offset / 3600) } else { 0 };
    let (sql, params) = sums_query(db.dialect(), settings, only);
    let mut counted = Vec::new();
    db.each(&sql, &params, &mut |r| {
        let id = r[0].i64().context("an interval without a channel")?;
        let Some(c) = chans.get(&id) else { return Ok(()) };
        let Some(site) = s.settings.sites.map(&c.site) else { return Ok(()) };
        if counted.last() != Some(&id) {
            counted.push(id);
        }
        s.records += r[13].i64().unwrap_or(0) as u64;
        if !s.sites.contains(&site) {
            s.sites.push(site.clone());
        }
        let ch = s.channels.entry((site.clone(), c.name.clone())).or_insert_with(|| ChannelSum {
            site,
            name: c.name.clone(),
            ..Default::default()
        });
        ch.dropped_samples += r[7].i64().unwrap_or(0) as u64;
        ch.lost_s += r[6].f64().unwrap_or(0.0);
        if r[14].i64().unwrap_or(0) == 0 {
            return Ok(()); // no interval of this hour was measured
        }
        let tally = Tally {
            samples: r[3].i64().unwrap_or(0) as u64,
            occupied: r[4].f64().unwrap_or(0.0),
            seconds: r[5].f64().unwrap_or(0.0),
        };
        ch.total.add(&tally);
        let h = r[2].i64().unwrap_or(0);
        let key =
            if r[1].i64() == Some(1) { HourKey::Clock(h + shift) } else { HourKey::FromStart(h) };
        ch.hours.entry(key).or_default().add(&tally);
        if let Some(p) = r[8].f64() {
            ch.power_weighted += p;
            ch.power_samples += r[9].i64().unwrap_or(0) as u64;
        }
        if let Some(p) = r[10].f64() {
            ch.peak_dbfs = Some(ch.peak_dbfs.map_or(p, |q| q.max(p)));
        }
        if let Some(t) = r[11].f64() {
            s.first = Some(s.first.map_or(t, |f| f.min(t)));
        }
        if let Some(t) = r[12].f64() {
            s.last = Some(s.last.map_or(t, |l| l.max(t)));
        }
        Ok(())
    })?;
    Ok(counted)
}

/// [`interval_window`] for the channel `id`, which is `?1`.
fn channel_window(settings: &Settings, id: i64) -> (String, Vec<Val>) {
    let (w, mut params) = interval_window(settings, 2);
    params.insert(0, Val::Int(id));
    (w, params)
}

/// A channel's noise floor (count per value, first and last in time) and its frequency and width
/// (from its last interval); `floors`: also its floor over time ([`floor_series`]).
fn channel_ends(
    db: &mut dyn Backend,
    s: &mut LogSummary,
    settings: &Settings,
    id: i64,
    c: &Chan,
    floors: bool,
) -> Result<()> {
    let Some(site) = settings.sites.map(&c.site) else { return Ok(()) };
    let (w, params) = channel_window(settings, id);
    let counts = db.rows(
        &format!(
            "SELECT noise, COUNT(*) FROM intervals WHERE channel_id = ?1 AND noise IS NOT NULL{w} \
             GROUP BY noise"
        ),
        &params,
    )?;
    let end = |order: &str, noise: bool| {
        format!(
            "SELECT t_key, noise, center_hz, width_hz FROM intervals WHERE channel_id = ?1{}{w} \
             ORDER BY clock {order}, hour_key {order}, t_key {order}, record_id {order} LIMIT 1",
            if noise { " AND noise IS NOT NULL" } else { "" }
        )
    };
    // A panorama's intervals never in view: invalid, with no time lost (see `IntervalCols`).
    let unseen = db.rows(
        &format!(
            "SELECT SUM(span_s) FROM intervals WHERE channel_id = ?1 AND valid = 0 \
             AND lost_s = 0 AND span_s > 0{w}"
        ),
        &params,
    )?;
    let first = db.rows(&end("ASC", true), &params)?;
    let last = db.rows(&end("DESC", true), &params)?;
    let latest = db.rows(&end("DESC", false), &params)?;
    let ch = s.channels.get_mut(&(site, c.name.clone())).context("a channel summed")?;
    ch.not_measured_s += unseen.first().and_then(|r| r[0].f64()).unwrap_or(0.0);
    for r in &counts {
        if let (Some(v), Some(n)) = (r[0].f64(), r[1].i64()) {
            ch.noise.count(v, n as u64);
        }
    }
    let pair = |rows: &[Vec<Val>]| Some((rows.first()?[0].f64()?, rows.first()?[1].f64()?));
    if let (Some(f), Some(l)) = (pair(&first), pair(&last)) {
        ch.noise.ends(f, l);
    }
    if let Some(r) = latest.first() {
        ch.center_hz = r[2].f64().or(ch.center_hz);
        ch.width_hz = r[3].f64().or(ch.width_hz);
    }
    if floors {
        ch.noise.series = floor_series(db, &w, &params)?;
    }
    Ok(())
}

/// A channel's noise floor over time, the buckets of [`FloorSeries`] summed in the database:
/// the same buckets as the logs give (the mean of each may differ in its last bit, as sums
/// added in another order do: a point moves by a pixel only if it lies on a pixel's edge).
///
/// The logs' width is the narrowest power of two (from 1 s) that holds the floors in
/// [`MAX_BUCKETS`] buckets. The span from the first floor to the last bounds it from above;
/// the floors are summed at an eighth of that bound, and at 1/64 of the width tried as long as
/// that width holds them in no more buckets than allowed (a smaller one might too), down to 1 s.
/// (`w`, `params`: the channel's window, [`channel_window`].)
fn floor_series(db: &mut dyn Backend, w: &str, params: &[Val]) -> Result<FloorSeries> {
    let filter = format!("FROM intervals WHERE channel_id = ?1 AND noise IS NOT NULL{w}");
    let span = db.rows(&format!("SELECT MIN(t_key), MAX(t_key) {filter}"), params)?;
    let (Some(t0), Some(t1)) = (span[0][0].f64(), span[0][1].f64()) else {
        return Ok(FloorSeries::default());
    };
    let mut bound = 1.0_f64;
    while (t1 / bound).floor() - (t0 / bound).floor() + 1.0 > MAX_BUCKETS as f64 {
        bound *= 2.0;
    }
    let mut width = (bound / 8.0).max(1.0);
    let d = db.dialect();
    Ok(loop {
        // A power of two written in full: the division by it is exact, as in the logs' reading.
        let bucket = d.floor(&format!("t_key / {width:?}"));
        let rows = db.rows(
            &format!("SELECT {bucket} AS b, SUM(noise), COUNT(*) {filter} GROUP BY b"),
            params,
        )?;
        let held = rows.len() <= MAX_BUCKETS;
        let sums = rows.iter().filter_map(|r| Some((r[0].i64()?, r[1].f64()?, r[2].i64()? as u64)));
        let series = FloorSeries::from_buckets(width, sums);
        if !held || width <= 1.0 {
            break series;
        }
        width = (width / 64.0).max(1.0);
    })
}
