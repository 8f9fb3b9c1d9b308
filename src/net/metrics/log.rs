//! The metrics of `log --metrics`: per channel what the last interval record says, counters of
//! emissions, intervals, dropped and delivered samples, the open change alarms and when the
//! log last wrote.
//!
//! They are fed from the log's own records (a [`RecordTap`] after each line is written), so a
//! scrape always agrees with the log: the occupancy Prometheus stores for an interval is the
//! interval record's `occupancy_pct` / 100 (its 5 decimals). Only the count of delivered samples
//! comes from the run itself (a [`Consumer`] of its blocks).
//!
//! Names follow the Prometheus naming conventions: counters end in `_total`, times are
//! seconds (`_timestamp_seconds` for Unix times), rates hertz, shares `_ratio` (0..1). Levels
//! are dBFS, which has no Prometheus base unit, so the unit stays in the name (`_dbfs`,
//! `_dbfs_per_hz`) and in the help text.

use crate::net::metrics::{hold, register_all, Consistency, MetricsServer, PREFIX};
use crate::output::log::occupancy::RecordTap;
use crate::output::log::{AlarmRecord, IntervalRecord, Record, Stamped};
use crate::output::summary::zone::epoch_of;
use crate::pipeline::Consumer;
use crate::source::reader::Block;
use anyhow::Result;
use prometheus_client::encoding::EncodeLabelSet;
use prometheus_client::metrics::counter::Counter;
use prometheus_client::metrics::family::Family;
use prometheus_client::metrics::gauge::Gauge;
use prometheus_client::registry::Registry;
use std::io;
use std::net::SocketAddr;
use std::sync::atomic::AtomicU64;
use std::time::{SystemTime, UNIX_EPOCH};

/// A gauge of floating-point values.
pub type FloatGauge = Gauge<f64, AtomicU64>;

#[derive(Clone, Debug, Hash, PartialEq, Eq, EncodeLabelSet)]
pub struct SiteLabels {
    pub site: String,
}

#[derive(Clone, Debug, Hash, PartialEq, Eq, EncodeLabelSet)]
pub struct ChannelLabels {
    pub site: String,
    pub channel: String,
}

#[derive(Clone, Debug, Hash, PartialEq, Eq, EncodeLabelSet)]
pub struct CauseLabels {
    pub site: String,
    pub cause: String,
}

#[derive(Clone, Debug, Hash, PartialEq, Eq, EncodeLabelSet)]
pub struct AlarmLabels {
    pub site: String,
    pub channel: String,
    pub what: String,
}

/// The metric families of one site's log; clones share the values.
#[derive(Clone, Debug, Default)]
pub struct LogGauges {
    site: String,
    /// Held while one record's values are set (see [`Consistency`]).
    consistency: Consistency,
    occupancy: Family<ChannelLabels, FloatGauge>,
    power: Family<ChannelLabels, FloatGauge>,
    peak: Family<ChannelLabels, FloatGauge>,
    noise_floor: Family<ChannelLabels, FloatGauge>,
    channel_floor: Family<ChannelLabels, FloatGauge>,
    interval_end: Family<ChannelLabels, FloatGauge>,
    intervals: Family<ChannelLabels, Counter>,
    emissions: Family<ChannelLabels, Counter>,
    alarms: Family<AlarmLabels, Gauge>,
    dropped: Family<CauseLabels, Counter>,
    samples: Family<SiteLabels, Counter>,
    sample_rate: Family<SiteLabels, FloatGauge>,
    last_record: Family<SiteLabels, FloatGauge>,
}

impl LogGauges {
    /// The families of `site` (`""` when the log names none), registered in `registry`.
    pub fn register(registry: &mut Registry, site: Option<&str>) -> LogGauges {
        let g = LogGauges { site: site.unwrap_or_default().to_string(), ..LogGauges::default() };
        register_all(
            registry,
            &[
                ("channel_occupancy_ratio", "Channel occupancy of the last interval as a ratio 0..1 (occupied measurement samples / samples, ITU-R SM.1880); the log's occupancy_pct / 100; NaN when all the interval's input was lost", &g.occupancy),
                ("channel_power_dbfs", "Mean channel power over the last interval, in dBFS (decibels relative to full scale); NaN when unmeasured", &g.power),
                ("channel_peak_power_dbfs", "Highest channel power of one measurement sample in the last interval, in dBFS", &g.peak),
                ("channel_noise_floor_dbfs_per_hz", "Mean tracked noise floor (power density) over the last interval, in dBFS/Hz", &g.noise_floor),
                ("channel_quiet_floor_dbfs_per_hz", "The channel's own floor in the last interval: its mean power density over the samples no emission touched, in dBFS/Hz; NaN when every sample was occupied", &g.channel_floor),
                ("channel_interval_end_timestamp_seconds", "End of the last interval, in Unix seconds by the input's clock (absent while the time of the first sample is unknown)", &g.interval_end),
            ],
        );
        register_all(
            registry,
            &[
                ("channel_intervals", "Interval records written", &g.intervals),
                (
                    "channel_emissions",
                    "Emissions that ended (emission records written)",
                    &g.emissions,
                ),
            ],
        );
        register_all(
            registry,
            &[
                (
                    "input_sample_rate_hertz",
                    "Sample rate of the input, in hertz (samples per second)",
                    &g.sample_rate,
                ),
                (
                    "last_record_timestamp_seconds",
                    "When the log last wrote a record, in Unix seconds by this machine's clock",
                    &g.last_record,
                ),
            ],
        );
        register_all(registry, &[("alarm_open", "1 while a change alarm of log --alarms is open for the channel (or band) and kind of change, 0 once cleared", &g.alarms)]);
        register_all(registry, &[("input_dropped_samples", "Input samples missing from the measurement, by cause (behind, not_a_number, disconnected), as the log's dropped records count them", &g.dropped)]);
        register_all(
            registry,
            &[("input_samples", "IQ samples delivered to the measurement", &g.samples)],
        );
        g
    }

    fn channel(&self, channel: &str) -> ChannelLabels {
        ChannelLabels { site: self.site.clone(), channel: channel.to_string() }
    }

    fn site_labels(&self) -> SiteLabels {
        SiteLabels { site: self.site.clone() }
    }

    fn interval(&self, r: &IntervalRecord) {
        let l = self.channel(&r.channel);
        let or_nan = |v: Option<f64>| v.unwrap_or(f64::NAN);
        // The log's percentage has 3 decimals, so the ratio has 5; rounding again drops the
        // binary noise of the division (70.708 / 100 = 0.7070799999999999).
        let ratio = (or_nan(r.occupancy_pct) * 1e3).round() / 1e5;
        self.occupancy.get_or_create(&l).set(ratio);
        self.power.get_or_create(&l).set(or_nan(r.mean_dbfs));
        self.peak.get_or_create(&l).set(or_nan(r.peak_dbfs));
        self.noise_floor.get_or_create(&l).set(or_nan(r.noise_floor_dbfs_per_hz));
        self.channel_floor.get_or_create(&l).set(or_nan(r.channel_floor_dbfs_per_hz));
        if let Some(end) = r.end.as_deref().and_then(epoch_of) {
            self.interval_end.get_or_create(&l).set(end);
        }
        self.intervals.get_or_create(&l).inc();
    }

    fn alarm(&self, a: &AlarmRecord, open: bool) {
        let l = AlarmLabels {
            site: self.site.clone(),
            channel: a.channel.clone(),
            what: a.what.clone(),
        };
        self.alarms.get_or_create(&l).set(i64::from(open));
    }
}

impl RecordTap for LogGauges {
    fn record(&mut self, line: &Stamped) {
        let _whole = hold(&self.consistency);
        match &line.record {
            Record::Start(s) => {
                self.sample_rate.get_or_create(&self.site_labels()).set(s.sample_rate_hz);
            }
            // Every channel's counters exist from the start, at 0, so rates work from the
            // first scrape on.
            Record::Channel(c) => {
                let l = self.channel(&c.channel);
                self.intervals.get_or_create(&l).inc_by(0);
                self.emissions.get_or_create(&l).inc_by(0);
            }
            Record::Interval(r) => self.interval(r),
            Record::Emission(e) => {
                self.emissions.get_or_create(&self.channel(&e.channel)).inc();
            }
            Record::Dropped(d) => {
                let l = CauseLabels { site: self.site.clone(), cause: d.cause.clone() };
                self.dropped.get_or_create(&l).inc_by(d.dropped_samples);
            }
            Record::Alarm(a) => self.alarm(a, true),
            Record::Clear(a) => self.alarm(a, false),
            Record::Capture(_) | Record::Stop(_) => {}
        }
        let now = SystemTime::now().duration_since(UNIX_EPOCH).map_or(0.0, |d| d.as_secs_f64());
        self.last_record.get_or_create(&self.site_labels()).set(now);
    }
}

/// Counts the samples delivered to the measurement.
impl Consumer for LogGauges {
    fn block(&mut self, block: &Block) -> io::Result<()> {
        let n = block.samples.len() as u64;
        self.samples.get_or_create(&self.site_labels()).inc_by(n);
        Ok(())
    }
}

/// `log --metrics`: the gauges, served. Add [`LogMetrics::tap`] to the log and
/// [`LogMetrics::gauges`] to the run's consumers (they count the delivered samples).
pub struct LogMetrics {
    pub gauges: LogGauges,
    server: MetricsServer,
}

impl LogMetrics {
    /// Serves the metrics of `site` on `addr` from now on (until dropped).
    pub fn serve(addr: SocketAddr, site: Option<&str>) -> Result<LogMetrics> {
        let mut registry = Registry::with_prefix(PREFIX);
        let gauges = LogGauges::register(&mut registry, site);
        let server = MetricsServer::start(addr, registry, gauges.consistency.clone())?;
        Ok(LogMetrics { gauges, server })
    }

    /// What the log hands its records to.
    pub fn tap(&self) -> Box<dyn RecordTap> {
        Box::new(self.gauges.clone())
    }

    /// The address served (the port chosen, for port 0).
    pub fn addr(&self) -> SocketAddr {
        self.server.addr()
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::measure::occupancy::tests::{band, Keyed};
    use crate::net::metrics::exposition;
    use crate::net::metrics::tests::{parse_exposition, Sample};
    use crate::output::log::occupancy::tests::{setup, spec};
    use crate::output::log::occupancy::OccupancyLog;
    use crate::output::log::{LogFormat, LogWriter};
    use crate::pipeline::{Run, StopReason};
    use serde_json::Value;
    use time::format_description::well_known::Rfc3339;
    use time::OffsetDateTime;

    fn one<'a>(samples: &'a [Sample], name: &str, labels: &[(&str, &str)]) -> &'a Sample {
        let found: Vec<&Sample> = samples
            .iter()
            .filter(|s| {
                s.name == name
                    && s.labels.len() == labels.len()
                    && labels.iter().all(|(k, v)| s.labels.get(*k).map(String::as_str) == Some(v))
            })
            .collect();
        assert_eq!(found.len(), 1, "{name} {labels:?} in {samples:?}");
        found[0]
    }

    /// The busy channel keyed on for 0.35 s of every second, a gap of lost blocks, a second
    /// run of metrics: every gauge of the exposition is checked against the log's own last
    /// interval records and the counters against the numbers of records of each kind.
    #[test]
    fn the_exposition_says_what_the_last_interval_records_say() {
        let on = |i: u64| i % 200_000 < 70_000;
        let x = band(600_000, &[Keyed { offset_hz: 20e3, level_dbfs: -30.0, on: &on }], 5);
        let (setup, plan, info) = setup(1.0);
        let mut registry = Registry::with_prefix(PREFIX);
        let gauges = LogGauges::register(&mut registry, Some("wrenhollow-ridge"));
        let mut counted = gauges.clone();
        let writer = LogWriter::new(Vec::new(), LogFormat::JsonLines, true).unwrap();
        let mut log = OccupancyLog::new(writer, &plan, &setup).with_tap(Box::new(gauges));
        let t0 = OffsetDateTime::parse("2031-04-17T06:30:00Z", &Rfc3339).unwrap();
        let before = SystemTime::now().duration_since(UNIX_EPOCH).unwrap().as_secs_f64();
        let mut run = Run::new(spec(&setup, &info, Some(t0)), vec![&mut log, &mut counted]);
        for start in (0..600_000).step_by(10_000) {
            if (250_000..290_000).contains(&start) {
                continue;
            }
            run.feed(&Block::new(start as u64, x[start..start + 10_000].to_vec())).unwrap();
        }
        run.finish(StopReason::EndOfInput).unwrap();
        drop(run);
        let recs: Vec<Value> = String::from_utf8(log.into_writer().unwrap())
            .unwrap()
            .lines()
            .map(|l| serde_json::from_str(l).unwrap())
            .collect();
        let text = exposition(&registry);
        let samples = parse_exposition(&text);
        let site = ("site", "wrenhollow-ridge");
        for ch in ["busy", "idle"] {
            let iv: Vec<&Value> =
                recs.iter().filter(|r| r["kind"] == "interval" && r["channel"] == ch).collect();
            let last = iv.last().unwrap();
            let labels = [site, ("channel", ch)];
            let value = |name: &str| one(&samples, name, &labels).value;
            let pct = last["occupancy_pct"].as_f64().unwrap();
            let ratio = value("bandwarden_channel_occupancy_ratio");
            assert!((ratio - pct / 100.0).abs() < 1e-12, "{ch}: {ratio} for {pct} %");
            assert_eq!(value("bandwarden_channel_power_dbfs"), last["mean_dbfs"].as_f64().unwrap());
            assert_eq!(
                value("bandwarden_channel_peak_power_dbfs"),
                last["peak_dbfs"].as_f64().unwrap()
            );
            assert_eq!(
                value("bandwarden_channel_noise_floor_dbfs_per_hz"),
                last["noise_floor_dbfs_per_hz"].as_f64().unwrap()
            );
            let end = epoch_of(last["end"].as_str().unwrap()).unwrap();
            assert_eq!(value("bandwarden_channel_interval_end_timestamp_seconds"), end);
            assert_eq!(
                end,
                t0.unix_timestamp() as f64 + 3.0,
                "the partial last interval ends at 3 s"
            );
            assert_eq!(value("bandwarden_channel_intervals_total"), iv.len() as f64);
            let emissions =
                recs.iter().filter(|r| r["kind"] == "emission" && r["channel"] == ch).count();
            assert_eq!(value("bandwarden_channel_emissions_total"), emissions as f64);
        }
        // The keyed channel is busy part of the time, the other not at all: the values are
        // the signal's, not a constant.
        let busy =
            one(&samples, "bandwarden_channel_occupancy_ratio", &[site, ("channel", "busy")]);
        assert!(busy.value > 0.2 && busy.value < 0.6, "{}", busy.value);
        assert!(recs.iter().any(|r| r["kind"] == "emission" && r["channel"] == "busy"));
        let lost =
            one(&samples, "bandwarden_input_dropped_samples_total", &[site, ("cause", "behind")]);
        assert_eq!(lost.value, 40_000.0);
        let delivered = one(&samples, "bandwarden_input_samples_total", &[site]);
        assert_eq!(delivered.value, 560_000.0);
        let rate = one(&samples, "bandwarden_input_sample_rate_hertz", &[site]);
        assert_eq!(rate.value, recs[0]["sample_rate_hz"].as_f64().unwrap());
        let last = one(&samples, "bandwarden_last_record_timestamp_seconds", &[site]).value;
        let after = SystemTime::now().duration_since(UNIX_EPOCH).unwrap().as_secs_f64();
        assert!(before <= last && last <= after, "{before} {last} {after}");
        // Every family has its HELP and TYPE, and counters are typed as such.
        assert!(text.contains("# TYPE bandwarden_channel_emissions_total counter\n"), "{text}");
        assert!(text.contains("# TYPE bandwarden_channel_occupancy_ratio gauge\n"), "{text}");
        assert!(text.contains("# HELP bandwarden_channel_power_dbfs Mean channel power"), "{text}");
    }

    /// An alarm is 1 while open and 0 once its clear record comes; a lost interval is NaN.
    #[test]
    fn alarms_open_and_clear_and_an_unmeasured_interval_is_nan() {
        let mut registry = Registry::with_prefix(PREFIX);
        let mut gauges = LogGauges::register(&mut registry, None);
        let alarm = AlarmRecord {
            channel: "telem".into(),
            what: "busier".into(),
            t_start_s: 0.0,
            t_end_s: 60.0,
            start: None,
            end: None,
            since_s: 0.0,
            since: None,
            statistic: 6.0,
            threshold: 5.0,
            baseline: 3.0,
            present: 40.0,
            unit: "%".into(),
            method: "cusum".into(),
        };
        let stamped = |record| Stamped { record, run: "r".into(), seq: 0 };
        gauges.record(&stamped(Record::Alarm(alarm.clone())));
        let lost = IntervalRecord {
            channel: "telem".into(),
            center_hz: 433.6375e6,
            width_hz: 12.5e3,
            t_start_s: 0.0,
            t_end_s: 60.0,
            start: None,
            end: None,
            occupancy_pct: None,
            mean_dbfs: None,
            peak_dbfs: None,
            noise_floor_dbfs_per_hz: None,
            samples: 0,
            occupied_samples: 0.0,
            dropped_samples: 60_000_000,
            partial: false,
            channel_floor_dbfs_per_hz: None,
            mean_dbm: None,
            peak_dbm: None,
            noise_floor_dbm_per_hz: None,
            channel_floor_dbm_per_hz: None,
            observation_s: None,
            revisit_s: None,
            state: None,
        };
        gauges.record(&stamped(Record::Interval(lost)));
        let labels = [("site", ""), ("channel", "telem"), ("what", "busier")];
        let s = parse_exposition(&exposition(&registry));
        assert_eq!(one(&s, "bandwarden_alarm_open", &labels).value, 1.0);
        let telem = [("site", ""), ("channel", "telem")];
        assert!(one(&s, "bandwarden_channel_occupancy_ratio", &telem).value.is_nan());
        // No time known: no end stamp either.
        assert!(!s.iter().any(|x| x.name == "bandwarden_channel_interval_end_timestamp_seconds"));
        gauges.record(&stamped(Record::Clear(alarm)));
        let s = parse_exposition(&exposition(&registry));
        assert_eq!(one(&s, "bandwarden_alarm_open", &labels).value, 0.0);
    }
}
