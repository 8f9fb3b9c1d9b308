//! What is usual: each channel's occupancy and noise floor by hour of week, as running means and
//! spreads (Welford's update), and the baseline file that keeps them between runs.
//!
//! # The baseline file (JSON, written by `report LOG… --save-baseline FILE`)
//!
//! ```text
//! {"format":"bandwarden-baseline","version":1,
//!  "sites":{"wrenhollow-ridge":{"channels":{
//!    "north-gate":{"all":{"occupancy":{"samples":1440,"mean":0.31,"spread":0.06,
//!                                      "lag1":0.12,"pairs":1439},
//!                         "floor_dbfs_per_hz":{"samples":1440,"mean":-112.4,"spread":0.3}},
//!                  "hours":{"0":{…},"1":{…},…}},
//!    "band":{"all":{"floor_dbfs_per_hz":{…}},"hours":{…}}}}}}
//! ```
//!
//! - `sites` → `channels` → the channel's name (`band`: the noise floor shared by the whole span);
//! - `all`: every interval; `hours`: one cell per hour of the week, `"0"` Monday 00:00–01:00 UTC
//!   to `"167"` Sunday 23:00–24:00 UTC (hours with no interval are absent);
//! - in a cell, each quantity has `samples` (intervals counted), `mean` and `spread` (sample
//!   standard deviation, n − 1):
//!   - `floor_dbfs_per_hz`: the channel's noise floor in dBFS/Hz per interval: the mean power
//!     density over the interval's samples in which the channel was not occupied (the log's
//!     `channel_floor_dbfs_per_hz`); `band`'s is the shared floor (`noise_floor_dbfs_per_hz`);
//!   - `occupancy`: the interval's occupied share `p` (0–1) on the arcsine-square-root scale,
//!     `asin(√p)` in radians, on which a proportion's spread hardly depends on its level
//!     (Fisher's variance-stabilising transform); the usual occupancy is `100·sin²(mean)` %;
//!   - `lag1` and `pairs`: the lag-1 autocorrelation of the quantity over consecutive
//!     intervals (bursts longer than an interval make neighbours alike) and the pairs it was
//!     measured on; absent in older files (read as 0).
//!
//! A file that is not one of these (another JSON, a log, a census) is refused with a message
//! that says what it is missing.

use serde::{Deserialize, Serialize};
use std::collections::BTreeMap;

/// Hours in a week; hour 0 is Monday 00:00 UTC.
pub const HOURS_PER_WEEK: u16 = 168;
/// The name of the band-wide noise floor's entry.
pub const BAND: &str = "band";
/// The file's `format` tag and version.
pub const FORMAT: &str = "bandwarden-baseline";
pub const VERSION: u32 = 1;

/// The hour of the week (0 = Monday 00:00–01:00 UTC) of an instant given in seconds since
/// 1970-01-01T00:00Z, which was a Thursday (hour 72).
pub fn hour_of_week(epoch_s: f64) -> u16 {
    let hours = (epoch_s / 3600.0).floor() as i64 + 72;
    hours.rem_euclid(HOURS_PER_WEEK as i64) as u16
}

/// Running mean, spread and lag-1 autocorrelation of one quantity.
#[derive(Clone, Copy, Debug, Default, Serialize, Deserialize)]
pub struct Moments {
    pub samples: u64,
    pub mean: f64,
    /// Sample standard deviation (n − 1); 0 below two samples.
    pub spread: f64,
    /// Lag-1 autocorrelation of the values in the order they were learnt (consecutive
    /// intervals), over `pairs` neighbouring pairs; 0 when unknown (files written before it).
    #[serde(default)]
    pub lag1: f64,
    #[serde(default)]
    pub pairs: u64,
    /// The value learnt last, the partner of the next one (not kept in files).
    #[serde(skip)]
    last: Option<f64>,
}

impl PartialEq for Moments {
    /// Equal in what they say (the last value seen is bookkeeping, not part of it).
    fn eq(&self, o: &Moments) -> bool {
        (self.samples, self.mean, self.spread, self.lag1, self.pairs)
            == (o.samples, o.mean, o.spread, o.lag1, o.pairs)
    }
}

impl Moments {
    /// Adds one value (Welford, Technometrics 4(3), 1962: stable in one pass), and its product
    /// with the previous value about the running mean for the lag-1 autocorrelation (the
    /// co-moment is kept as `lag1 · spread² · pairs`, exact from one push to the next).
    pub fn push(&mut self, x: f64) {
        let n = self.samples as f64;
        let m2 = self.spread * self.spread * (n - 1.0).max(0.0);
        let mean = self.mean + (x - self.mean) / (n + 1.0);
        let m2 = m2 + (x - self.mean) * (x - mean);
        let lag = self.last.map(|prev| {
            let sum = self.lag1 * self.spread * self.spread * self.pairs as f64;
            sum + (x - self.mean) * (prev - self.mean)
        });
        self.samples += 1;
        self.mean = mean;
        self.spread = if self.samples > 1 { (m2 / n).sqrt() } else { 0.0 };
        if let Some(sum) = lag {
            self.pairs += 1;
            let var = self.spread * self.spread;
            self.lag1 =
                if var > 0.0 { (sum / self.pairs as f64 / var).clamp(-1.0, 1.0) } else { 0.0 };
        }
        self.last = Some(x);
    }

    fn check(&self, at: &str) -> Result<(), String> {
        if !self.mean.is_finite() || !self.spread.is_finite() || self.spread < 0.0 {
            return Err(format!("{at}: mean and spread must be finite numbers, spread ≥ 0"));
        }
        if !(-1.0..=1.0).contains(&self.lag1) {
            return Err(format!("{at}: lag1 is an autocorrelation, between −1 and 1"));
        }
        Ok(())
    }
}

/// The two quantities followed.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Quantity {
    Floor,
    Occupancy,
}

/// What is known of one channel over some hours.
#[derive(Clone, Debug, Default, PartialEq, Serialize, Deserialize)]
pub struct Cell {
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub occupancy: Option<Moments>,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub floor_dbfs_per_hz: Option<Moments>,
}

impl Cell {
    pub fn get(&self, q: Quantity) -> Option<&Moments> {
        match q {
            Quantity::Floor => self.floor_dbfs_per_hz.as_ref(),
            Quantity::Occupancy => self.occupancy.as_ref(),
        }
    }

    fn slot(&mut self, q: Quantity) -> &mut Moments {
        match q {
            Quantity::Floor => self.floor_dbfs_per_hz.get_or_insert_with(Moments::default),
            Quantity::Occupancy => self.occupancy.get_or_insert_with(Moments::default),
        }
    }
}

/// One channel: over all hours and per hour of week.
#[derive(Clone, Debug, Default, PartialEq, Serialize, Deserialize)]
pub struct ChannelBaseline {
    pub all: Cell,
    #[serde(default)]
    pub hours: BTreeMap<u16, Cell>,
}

impl ChannelBaseline {
    /// Adds a value seen in `hour` (`None`: the time is unknown; only `all` learns it).
    pub fn learn(&mut self, hour: Option<u16>, q: Quantity, x: f64) {
        self.all.slot(q).push(x);
        if let Some(h) = hour {
            self.hours.entry(h).or_default().slot(q).push(x);
        }
    }

    /// What to compare with: the hour's cell once it holds `min_samples`, else all hours once
    /// they do, else nothing (still warming up).
    pub fn reference(&self, hour: Option<u16>, q: Quantity, min_samples: u64) -> Option<Moments> {
        let enough = |m: Option<&Moments>| m.copied().filter(|m| m.samples >= min_samples);
        hour.and_then(|h| enough(self.hours.get(&h).and_then(|c| c.get(q))))
            .or_else(|| enough(self.all.get(q)))
    }
}

/// One site's channels.
#[derive(Clone, Debug, Default, PartialEq, Serialize, Deserialize)]
pub struct SiteBaseline {
    pub channels: BTreeMap<String, ChannelBaseline>,
}

/// The baseline file.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct BaselineFile {
    pub format: String,
    pub version: u32,
    pub sites: BTreeMap<String, SiteBaseline>,
}

impl Default for BaselineFile {
    fn default() -> Self {
        BaselineFile { format: FORMAT.into(), version: VERSION, sites: BTreeMap::new() }
    }
}

impl BaselineFile {
    /// Reads a baseline file's text; the error says what is wrong (the caller adds the path).
    pub fn parse(text: &str) -> Result<BaselineFile, String> {
        if text.trim_start().starts_with("{\"kind\"") || text.trim_start().starts_with("kind,") {
            return Err("is an occupancy log, not a baseline; make one from logs with `bandwarden report LOG… --save-baseline FILE`".into());
        }
        let value: serde_json::Value = serde_json::from_str(text)
            .map_err(|e| format!("is not JSON ({e}); a baseline is written by `bandwarden report LOG… --save-baseline FILE`"))?;
        if value.get("format").and_then(|f| f.as_str()) != Some(FORMAT) {
            return Err(format!(
                "is not a baseline file (no \"format\":\"{FORMAT}\"); write one with `bandwarden report LOG… --save-baseline FILE`"
            ));
        }
        let version = value.get("version").and_then(|v| v.as_u64());
        if version != Some(VERSION as u64) {
            return Err(format!(
                "is a baseline of version {}, this bandwarden reads version {VERSION}; write it again with `report --save-baseline`",
                version.map_or("(none)".into(), |v| v.to_string())
            ));
        }
        let file: BaselineFile = serde_json::from_value(value).map_err(|e| {
            format!(
                "is a damaged baseline file ({e}); write it again with `report --save-baseline`"
            )
        })?;
        file.check()?;
        Ok(file)
    }

    fn check(&self) -> Result<(), String> {
        for (site, s) in &self.sites {
            for (name, ch) in &s.channels {
                let cells = std::iter::once((None, &ch.all))
                    .chain(ch.hours.iter().map(|(h, c)| (Some(h), c)));
                for (hour, cell) in cells {
                    if hour.is_some_and(|h| *h >= HOURS_PER_WEEK) {
                        return Err(format!("site '{site}', channel '{name}': hour {} is not an hour of the week (0–167)", hour.unwrap()));
                    }
                    for m in [&cell.occupancy, &cell.floor_dbfs_per_hz].into_iter().flatten() {
                        m.check(&format!("site '{site}', channel '{name}'"))?;
                    }
                }
            }
        }
        Ok(())
    }

    /// The site's baseline: `site` if named, else the only one the file holds.
    pub fn site(&self, site: Option<&str>) -> Result<SiteBaseline, String> {
        let names: Vec<&str> = self.sites.keys().map(String::as_str).collect();
        let chosen = match (site, names.as_slice()) {
            (Some(s), _) => s,
            (None, [only]) => only,
            (None, []) => return Err("holds no site".into()),
            (None, _) => {
                return Err(format!(
                    "holds several sites ({}): name one with --site",
                    names.join(", ")
                ))
            }
        };
        self.sites
            .get(chosen)
            .cloned()
            .ok_or_else(|| format!("holds no site '{chosen}' (it holds: {})", names.join(", ")))
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::testkit::Rng;

    #[test]
    fn hours_of_the_week_start_on_monday_utc() {
        // 1970-01-01 was a Thursday (common knowledge); 2031-04-14 is a Monday (calendar).
        assert_eq!(hour_of_week(0.0), 72);
        assert_eq!(hour_of_week(1_933_891_200.0), 0, "2031-04-14T00:00Z");
        assert_eq!(hour_of_week(1_933_891_200.0 + 167.5 * 3600.0), 167);
        assert_eq!(hour_of_week(-1.0), 71);
    }

    #[test]
    fn running_moments_equal_the_two_pass_ones() {
        let mut rng = Rng::new(7);
        let xs: Vec<f64> = (0..500).map(|_| -110.0 + 2.0 * rng.gauss()).collect();
        let mut m = Moments::default();
        xs.iter().for_each(|&x| m.push(x));
        let mean = xs.iter().sum::<f64>() / 500.0;
        let var = xs.iter().map(|x| (x - mean).powi(2)).sum::<f64>() / 499.0;
        assert_eq!(m.samples, 500);
        assert!((m.mean - mean).abs() < 1e-9 && (m.spread - var.sqrt()).abs() < 1e-9);
    }

    #[test]
    fn the_running_lag_one_autocorrelation_is_that_of_the_series() {
        // An AR(1) series x[t] = φ x[t−1] + e[t] has lag-1 autocorrelation φ (Box & Jenkins,
        // Time Series Analysis, 1970, chapter 3); the running estimate against the two-pass one.
        let mut rng = Rng::new(8);
        let mut xs = vec![0.0f64];
        for _ in 0..20_000 {
            let last = *xs.last().unwrap();
            xs.push(0.6 * last + rng.gauss());
        }
        let mut m = Moments::default();
        xs.iter().for_each(|&x| m.push(x));
        let n = xs.len() as f64;
        let mean = xs.iter().sum::<f64>() / n;
        let var = xs.iter().map(|x| (x - mean).powi(2)).sum::<f64>() / (n - 1.0);
        let c1 = xs.windows(2).map(|w| (w[0] - mean) * (w[1] - mean)).sum::<f64>() / (n - 1.0);
        assert!((m.lag1 - c1 / var).abs() < 0.01, "{} {}", m.lag1, c1 / var);
        assert!((m.lag1 - 0.6).abs() < 0.03, "{}", m.lag1);
        assert_eq!(m.pairs, 20_000);
    }

    #[test]
    fn the_hour_is_used_once_it_has_enough_else_all_hours() {
        let mut b = ChannelBaseline::default();
        for i in 0..40 {
            b.learn(Some(if i < 30 { 5 } else { 6 }), Quantity::Floor, i as f64);
        }
        assert_eq!(b.reference(Some(5), Quantity::Floor, 30).unwrap().samples, 30);
        assert_eq!(b.reference(Some(6), Quantity::Floor, 30).unwrap().samples, 40);
        assert_eq!(b.reference(None, Quantity::Floor, 41), None);
        assert_eq!(b.reference(None, Quantity::Occupancy, 1), None);
    }

    #[test]
    fn a_file_round_trips_and_other_json_is_refused() {
        let mut f = BaselineFile::default();
        let mut ch = ChannelBaseline::default();
        ch.learn(Some(3), Quantity::Occupancy, 0.2);
        ch.learn(Some(3), Quantity::Occupancy, 0.4);
        f.sites.entry("wrenhollow-ridge".into()).or_default().channels.insert("gate".into(), ch);
        let text = serde_json::to_string(&f).unwrap();
        assert_eq!(BaselineFile::parse(&text).unwrap(), f);
        assert!(f.site(None).is_ok() && f.site(Some("elsewhere")).is_err());
        assert!(BaselineFile::parse("{\"kind\":\"start\"}")
            .unwrap_err()
            .contains("not a baseline"));
        assert!(BaselineFile::parse("not json").unwrap_err().contains("not JSON"));
        let bad = text.replace("\"version\":1", "\"version\":9");
        assert!(BaselineFile::parse(&bad).unwrap_err().contains("version 9"));
        let bad = text.replace("\"3\"", "\"200\"");
        assert!(BaselineFile::parse(&bad).unwrap_err().contains("hour 200"));
    }
}
