//! The metrics of `collect --metrics`: the sites heard from, the records stored, copies and
//! stray messages dropped, when each site's last record was stored and how many of its
//! records are missing (holes in its `seq`, see [`crate::net::collect`]).

use crate::net::collect::Taken;
use crate::net::metrics::log::{FloatGauge, SiteLabels};
use crate::net::metrics::{register_all, Consistency, MetricsServer, PREFIX};
use anyhow::Result;
use prometheus_client::metrics::counter::Counter;
use prometheus_client::metrics::family::Family;
use prometheus_client::metrics::gauge::Gauge;
use prometheus_client::registry::Registry;
use std::net::SocketAddr;
use std::time::{SystemTime, UNIX_EPOCH};

/// The collector's metric families; clones share the values.
#[derive(Clone, Debug, Default)]
pub struct CollectGauges {
    sites: Gauge,
    stored: Family<SiteLabels, Counter>,
    duplicates: Family<SiteLabels, Counter>,
    malformed: Counter,
    last_record: Family<SiteLabels, FloatGauge>,
    missing: Family<SiteLabels, Gauge>,
}

impl CollectGauges {
    pub fn register(registry: &mut Registry) -> CollectGauges {
        let g = CollectGauges::default();
        register_all(
            registry,
            &[(
                "collect_sites",
                "Sites whose records this collector has stored since it started",
                &g.sites,
            )],
        );
        register_all(
            registry,
            &[
                ("collect_records_stored", "Records stored, per site (copies not counted)", &g.stored),
                ("collect_duplicate_records", "Records that came again and were dropped as copies (MQTT QoS 1 is at-least-once)", &g.duplicates),
            ],
        );
        register_all(
            registry,
            &[(
                "collect_malformed_messages",
                "Messages dropped because they were not records",
                &g.malformed,
            )],
        );
        register_all(
            registry,
            &[(
                "collect_last_record_timestamp_seconds",
                "When the site's last record was stored, in Unix seconds by this machine's clock",
                &g.last_record,
            )],
        );
        register_all(registry, &[("collect_missing_records", "Records of the site that never arrived: gaps in its runs' record numbers (seq) below the highest stored; late records fill them", &g.missing)]);
        g
    }

    /// What became of one message of `site`, which now misses `missing` records.
    pub fn taken(&self, site: &str, taken: &Taken, missing: u64) {
        let l = SiteLabels { site: site.to_string() };
        match taken {
            Taken::Written => {
                let new = self.stored.get(&l).is_none();
                if new {
                    self.sites.inc();
                }
                self.stored.get_or_create(&l).inc();
                let now =
                    SystemTime::now().duration_since(UNIX_EPOCH).map_or(0.0, |d| d.as_secs_f64());
                self.last_record.get_or_create(&l).set(now);
                self.missing.get_or_create(&l).set(i64::try_from(missing).unwrap_or(i64::MAX));
            }
            Taken::Duplicate => {
                self.duplicates.get_or_create(&l).inc();
            }
            Taken::Malformed => {
                self.malformed.inc();
            }
        }
    }
}

/// `collect --metrics`: the gauges, served until dropped.
pub struct CollectMetrics {
    pub gauges: CollectGauges,
    server: MetricsServer,
}

impl CollectMetrics {
    pub fn serve(addr: SocketAddr) -> Result<CollectMetrics> {
        let mut registry = Registry::with_prefix(PREFIX);
        let gauges = CollectGauges::register(&mut registry);
        // Each message sets values of its own: nothing to keep together.
        let server = MetricsServer::start(addr, registry, Consistency::default())?;
        Ok(CollectMetrics { gauges, server })
    }

    /// The address served (the port chosen, for port 0).
    pub fn addr(&self) -> SocketAddr {
        self.server.addr()
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::net::collect::Collector;
    use crate::net::metrics::exposition;
    use crate::net::metrics::tests::parse_exposition;

    /// Records of two sites through a real collector (files in a scratch folder): stored,
    /// copies, a hole and its late filling, a stray message; the exposition counts each.
    #[test]
    fn the_collector_counts_what_it_stores_and_what_is_missing() {
        let dir = std::env::temp_dir().join(format!("bw-collect-metrics-{}", std::process::id()));
        let _ = std::fs::remove_dir_all(&dir);
        let mut registry = Registry::with_prefix(PREFIX);
        let gauges = CollectGauges::register(&mut registry);
        let mut c = Collector::new(&dir).unwrap().with_metrics(gauges);
        let line = |seq: u64| format!("{{\"kind\":\"interval\",\"run\":\"r1\",\"seq\":{seq}}}");
        for seq in [0, 1, 1, 5, 6] {
            c.take("ridge-north", line(seq).as_bytes()).unwrap();
        }
        c.take("ridge-south", line(0).as_bytes()).unwrap();
        c.take("ridge-south", b"not a record").unwrap();
        let value = |name: &str, site: Option<&str>| {
            let s = parse_exposition(&exposition(&registry));
            let found: Vec<f64> = s
                .iter()
                .filter(|x| x.name == name && x.labels.get("site").map(String::as_str) == site)
                .map(|x| x.value)
                .collect();
            assert_eq!(found.len(), 1, "{name} {site:?}: {s:?}");
            found[0]
        };
        let north = Some("ridge-north");
        assert_eq!(value("bandwarden_collect_sites", None), 2.0);
        assert_eq!(value("bandwarden_collect_records_stored_total", north), 4.0);
        assert_eq!(value("bandwarden_collect_records_stored_total", Some("ridge-south")), 1.0);
        assert_eq!(value("bandwarden_collect_duplicate_records_total", north), 1.0);
        assert_eq!(value("bandwarden_collect_malformed_messages_total", None), 1.0);
        // seq 2, 3 and 4 never came; then 3 comes late.
        assert_eq!(value("bandwarden_collect_missing_records", north), 3.0);
        c.take("ridge-north", line(3).as_bytes()).unwrap();
        assert_eq!(value("bandwarden_collect_missing_records", north), 2.0);
        let now = SystemTime::now().duration_since(UNIX_EPOCH).unwrap().as_secs_f64();
        let last = value("bandwarden_collect_last_record_timestamp_seconds", north);
        assert!(last <= now && now - last < 60.0, "{last} {now}");
        let _ = std::fs::remove_dir_all(&dir);
    }
}
