//! `bandwarden collect`: gather what the sites of a monitoring network publish into one JSON
//! Lines file per site and/or a database ([`crate::net::collect`]), until Ctrl-C or SIGTERM.

use crate::cli::CollectConfig;
use crate::messages::note;
use crate::net::collect::Collector;
use crate::net::metrics::collect::CollectMetrics;
use crate::net::subscribe::collect;
use crate::pipeline::stop::Escalation;
use crate::pipeline::StopSignals;
use crate::store::write::{Batch, Writer};
use anyhow::Result;
use std::process::ExitCode;

pub fn run(cfg: CollectConfig) -> Result<ExitCode> {
    let db = match &cfg.db {
        Some(url) => Some(Writer::new(crate::store::open(url)?, Batch::default())),
        None => None,
    };
    let mut collector = Collector::open(cfg.out.as_deref(), db)?;
    let metrics = cfg.metrics.map(CollectMetrics::serve).transpose()?;
    if let Some(m) = &metrics {
        note(&format!("metrics at http://{}/metrics", m.addr()));
        collector = collector.with_metrics(m.gauges.clone());
    }
    let signals = StopSignals::install(false, Escalation::SecondSignalExits)?;
    let stopped = || signals.reason().is_some();
    let into: Vec<String> = cfg
        .out
        .iter()
        .map(|o| o.display().to_string())
        .chain(cfg.db.iter().map(|d| d.shown()))
        .collect();
    note(&format!(
        "collecting {} from {}:{} into {}",
        cfg.broker.collect_filter(),
        cfg.broker.host,
        cfg.broker.port,
        into.join(" and ")
    ));
    let result = collect(&cfg.broker, &cfg.client_id, &mut collector, &stopped, &mut |n| note(&n));
    let committed = collector.commit(true);
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
    committed?;
    Ok(ExitCode::SUCCESS)
}
