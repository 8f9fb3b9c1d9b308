//! `bandwarden collect`: gather what the sites of a monitoring network publish into one JSON
//! Lines file per site ([`crate::net::collect`]), until Ctrl-C or SIGTERM.

use crate::cli::CollectConfig;
use crate::messages::note;
use crate::net::collect::Collector;
use crate::net::metrics::collect::CollectMetrics;
use crate::net::subscribe::collect;
use crate::pipeline::stop::Escalation;
use crate::pipeline::StopSignals;
use anyhow::Result;
use std::process::ExitCode;

pub fn run(cfg: CollectConfig) -> Result<ExitCode> {
    let mut collector = Collector::new(&cfg.out)?;
    let metrics = cfg.metrics.map(CollectMetrics::serve).transpose()?;
    if let Some(m) = &metrics {
        note(&format!("metrics at http://{}/metrics", m.addr()));
        collector = collector.with_metrics(m.gauges.clone());
    }
    let signals = StopSignals::install(false, Escalation::SecondSignalExits)?;
    let stopped = || signals.reason().is_some();
    note(&format!(
        "collecting {} from {}:{} into {}",
        cfg.broker.collect_filter(),
        cfg.broker.host,
        cfg.broker.port,
        cfg.out.display()
    ));
    let result = collect(&cfg.broker, &cfg.client_id, &mut collector, &stopped, &mut |n| note(&n));
    collector.sync();
    note(&format!(
        "wrote {} records; dropped {} copies and {} messages that were not records",
        collector.written, collector.duplicates, collector.malformed
    ));
    for (site, run, from, to) in collector.holes() {
        note(&format!(
            "site {site}, run {run}: records {from}..{} never arrived; {} requests to the site went unanswered (its local log has them)",
            to - 1,
            collector.asks(&site, &run)
        ));
    }
    for silent in collector.silent_sites(std::time::Instant::now()) {
        note(&silent.note());
    }
    result?;
    Ok(ExitCode::SUCCESS)
}
