//! The schema, one for SQLite and PostgreSQL, and its version.
//!
//! - `sites`: one row per site name; `runs`: one per run of `log` at a site (`run` of its
//!   records), with what its `start` record says (the clock at its time 0, its sample rate),
//!   how it stopped, and the run times its records reach;
//! - `channels`: one per channel name at a site;
//! - `records`: every record, once: (run, `seq`) UNIQUE, its kind, times, and its JSON line;
//! - `intervals`, `emissions`, `alarms`, `captures`: the fields of those records in columns,
//!   keyed by the record. `intervals` is stored in the order of (channel, hour, time), so a
//!   report sums each channel's hours in one pass without sorting, and has an index on time for
//!   `--from`/`--to`; a channel belongs to one site, so the channel is the (site, …) key.
//!
//! Interval columns are what `report` computes per interval ([`crate::output::summary`]):
//! `valid` (measured: samples > 0 and an occupancy), `measured_s` and `lost_s` (the span less
//! the dropped samples at the run's rate; of a panorama, `measured_s` is its `observation_s`, the
//! time the channel was in view), `occupied` (clamped to the samples), `power_w` (samples ×
//! linear mean power), so the database only adds them up. An interval of a panorama's channel
//! never in view (`state` "not_measured") is stored invalid with no time lost: the only invalid
//! interval whose `lost_s` is 0, which is how `report --db` tells it "not measured".
//!
//! `interval_hours` (version 2) holds the same sums per (channel, clock, hour): what `report`
//! reads for every whole hour, 60 times fewer rows than the intervals at one a minute. The
//! writer recomputes the hours a transaction touched from their intervals before it commits
//! ([`refresh_hours`]), so an hour is always the sum of its rows, however late or often they came.
//!
//! `schema_version` holds the version; [`migrate`] creates a new database, brings a version 1
//! database up (its hours summed once), and refuses one written by a newer bandwarden.

use super::{Backend, Dialect};
use anyhow::{bail, Result};

/// The columns an interval and an hour of intervals have alike: what `report` adds up.
const SUMMED: &str = "samples {int} NOT NULL,
    occupied {real} NOT NULL,
    measured_s {real} NOT NULL,
    lost_s {real} NOT NULL,
    dropped {int} NOT NULL,
    power_w {real},
    power_n {int} NOT NULL,
    peak_dbfs {real},";

/// A table's statement in the database's words, with the [`SUMMED`] columns.
fn ddl(d: super::Dialect, text: &str) -> String {
    d.ddl(&text.replace("{summed}", SUMMED))
}

/// The version this bandwarden writes.
pub const VERSION: i64 = 2;

/// Version 2: the intervals summed per (channel, clock, hour).
const V2: &str = "
CREATE TABLE interval_hours (
    channel_id {int} NOT NULL REFERENCES channels(id),
    clock {int} NOT NULL,
    hour_key {int} NOT NULL,
    n {int} NOT NULL,
    n_valid {int} NOT NULL,
    {summed}
    first_t {real},
    last_t {real},
    PRIMARY KEY (channel_id, clock, hour_key)
){clustered};
";

/// The sums of `interval_hours`, over rows of `intervals` (in the order of its columns).
pub const HOUR_SUMS: &str = "COUNT(*), SUM(valid), SUM(samples), SUM(occupied), \
     SUM(measured_s), SUM(lost_s), SUM(dropped), SUM(power_w), SUM(power_n), MAX(peak_dbfs), \
     MIN(CASE WHEN valid = 1 THEN t_epoch END), MAX(CASE WHEN valid = 1 THEN t_epoch + span_s END)";

/// `INSERT INTO interval_hours … SELECT` of the intervals matching `filter`.
fn sum_hours(filter: &str) -> String {
    format!(
        "INSERT INTO interval_hours (channel_id, clock, hour_key, n, n_valid, samples, occupied, \
         measured_s, lost_s, dropped, power_w, power_n, peak_dbfs, first_t, last_t) \
         SELECT channel_id, clock, hour_key, {HOUR_SUMS} FROM intervals{filter} \
         GROUP BY channel_id, clock, hour_key"
    )
}

/// Sums the given hours (channel, clock, hour) again from their intervals (an hour with none
/// left: no row): the hours a batch touched, after its rows. SQLite runs in this process, so
/// one hour at a time with two prepared statements costs no round trip, and measured about half
/// the time of the statements written for many hours at once (parsed each time, the hours'
/// rows grouped through a temporary tree); a server gets a few hundred hours a statement.
pub fn refresh_hours(db: &mut dyn Backend, keys: &[(i64, i64, i64)]) -> Result<()> {
    if db.dialect() == Dialect::Sqlite {
        for &key in keys {
            refresh_hour(db, key)?;
        }
        return Ok(());
    }
    for chunk in keys.chunks(400) {
        // The keys are the writer's own integers, written into the statement as literals.
        let values: Vec<String> =
            chunk.iter().map(|(c, k, h)| format!("({c}, {k}, {h})")).collect();
        let with =
            format!("WITH t (channel_id, clock, hour_key) AS (VALUES {})", values.join(", "));
        // Both statements in one go (one round trip to a server), not kept prepared: each is
        // written once.
        db.batch(&format!(
            "{with} DELETE FROM interval_hours WHERE (channel_id, clock, hour_key) IN \
             (SELECT channel_id, clock, hour_key FROM t); \
             {with} INSERT INTO interval_hours (channel_id, clock, hour_key, n, n_valid, \
             samples, occupied, measured_s, lost_s, dropped, power_w, power_n, peak_dbfs, \
             first_t, last_t) SELECT i.channel_id, i.clock, i.hour_key, {HOUR_SUMS} \
             FROM t JOIN intervals i ON i.channel_id = t.channel_id AND i.clock = t.clock \
             AND i.hour_key = t.hour_key GROUP BY i.channel_id, i.clock, i.hour_key"
        ))?;
    }
    Ok(())
}

/// Sums one hour of one channel again from its intervals (none left: no row), with statements
/// kept prepared: the hour's intervals are read in key order, grouped without sorting.
fn refresh_hour(db: &mut dyn Backend, (channel, clock, hour): (i64, i64, i64)) -> Result<()> {
    let key = [channel.into(), clock.into(), hour.into()];
    let filter = " WHERE channel_id = ?1 AND clock = ?2 AND hour_key = ?3";
    db.exec(&format!("DELETE FROM interval_hours{filter}"), &key)?;
    db.exec(&sum_hours(filter), &key)?;
    Ok(())
}

const V1: &str = "
CREATE TABLE sites (id {id}, name TEXT NOT NULL UNIQUE);
CREATE TABLE runs (
    id {id},
    site_id {int} NOT NULL REFERENCES sites(id),
    run TEXT NOT NULL,
    origin {real},
    rate_hz {real},
    has_start {int} NOT NULL DEFAULT 0,
    stop_reason TEXT,
    t_min {real},
    t_max {real},
    UNIQUE (site_id, run)
);
CREATE TABLE channels (
    id {id},
    site_id {int} NOT NULL REFERENCES sites(id),
    name TEXT NOT NULL,
    UNIQUE (site_id, name)
);
CREATE TABLE records (
    id {id},
    run_id {int} NOT NULL REFERENCES runs(id),
    seq {int} NOT NULL,
    kind TEXT NOT NULL,
    t_start_s {real} NOT NULL,
    t_end_s {real} NOT NULL,
    t_epoch {real},
    line TEXT NOT NULL,
    UNIQUE (run_id, seq)
);
CREATE INDEX records_not_intervals ON records (run_id, seq) WHERE kind <> 'interval';
CREATE TABLE intervals (
    channel_id {int} NOT NULL REFERENCES channels(id),
    clock {int} NOT NULL,
    hour_key {int} NOT NULL,
    t_key {real} NOT NULL,
    record_id {int} NOT NULL REFERENCES records(id),
    t_epoch {real},
    span_s {real} NOT NULL,
    valid {int} NOT NULL,
    {summed}
    noise {real},
    center_hz {real},
    width_hz {real},
    PRIMARY KEY (channel_id, clock, hour_key, t_key, record_id)
){clustered};
CREATE INDEX intervals_time ON intervals (t_epoch);
CREATE INDEX intervals_noise ON intervals (channel_id, noise, t_epoch);
CREATE TABLE emissions (
    record_id {int} PRIMARY KEY REFERENCES records(id),
    channel_id {int} NOT NULL REFERENCES channels(id),
    t_epoch {real},
    end_epoch {real},
    duration_s {real},
    peak_dbfs {real},
    mean_dbfs {real},
    obw_hz {real},
    class TEXT,
    designator TEXT
);
CREATE INDEX emissions_time ON emissions (channel_id, t_epoch);
CREATE TABLE alarms (
    record_id {int} PRIMARY KEY REFERENCES records(id),
    channel TEXT,
    kind TEXT NOT NULL,
    what TEXT,
    t_epoch {real},
    statistic {real},
    threshold {real},
    baseline {real},
    present {real},
    unit TEXT,
    method TEXT
);
CREATE TABLE captures (
    record_id {int} PRIMARY KEY REFERENCES records(id),
    channel TEXT,
    status TEXT,
    file TEXT,
    t_epoch {real},
    iq_samples {int},
    bytes {int},
    truncated {int}
);
";

/// Creates the schema in an empty database, or checks the version of an existing one.
pub fn migrate(db: &mut dyn Backend) -> Result<()> {
    let d = db.dialect();
    db.batch(&d.ddl("CREATE TABLE IF NOT EXISTS schema_version (version {int} NOT NULL);"))?;
    let version = db.rows("SELECT MAX(version) FROM schema_version", &[])?;
    match version.first().and_then(|r| r[0].i64()) {
        None => {
            db.batch("BEGIN")?;
            db.batch(&ddl(d, V1))?;
            db.batch(&ddl(d, V2))?;
            db.exec("INSERT INTO schema_version (version) VALUES (?1)", &[VERSION.into()])?;
            db.batch("COMMIT")
        }
        Some(1) => {
            db.batch("BEGIN")?;
            db.batch(&ddl(d, V2))?;
            db.exec(&sum_hours(""), &[])?;
            db.exec("INSERT INTO schema_version (version) VALUES (?1)", &[VERSION.into()])?;
            db.batch("COMMIT")
        }
        Some(VERSION) => Ok(()),
        Some(v) if v > VERSION => bail!(
            "the database has schema version {v}, written by a newer bandwarden (this one knows {VERSION}); use that version"
        ),
        Some(v) => bail!("the database has schema version {v}, which this bandwarden cannot migrate"),
    }
}
