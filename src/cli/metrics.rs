//! `--metrics`, shared by `log` and `collect`; its address must be on loopback unless
//! `--listen-public` (the input's flag in `log`, one of its own in `collect`).

use crate::net::metrics::listen_address;
use anyhow::{bail, Result};
use clap::Args;
use std::net::SocketAddr;

#[derive(Args, Debug, Default)]
pub struct MetricsArgs {
    /// Serve Prometheus metrics at http://ADDR:PORT/metrics (text format 0.0.4), e.g.
    /// 127.0.0.1:9477; port 0 takes a free port and says which. Loopback only unless
    /// --listen-public.
    #[arg(long, value_name = "ADDR:PORT")]
    pub metrics: Option<String>,
}

impl MetricsArgs {
    /// The address to serve on, if any; beyond loopback only when `public`.
    pub fn validate(&self, public: bool) -> Result<Option<SocketAddr>> {
        self.metrics.as_deref().map(|text| listen_address(text, public)).transpose()
    }
}

/// `--listen-public` of a command whose only listener is `--metrics`.
#[derive(Args, Debug, Default)]
pub struct PublicArgs {
    /// Let --metrics listen on an address beyond this machine (e.g. 0.0.0.0:9477); the metrics
    /// have no password or TLS, so guard the port with a firewall.
    #[arg(long)]
    pub listen_public: bool,
}

impl PublicArgs {
    /// Refuses `--listen-public` without `--metrics`, which it is for.
    pub fn check(&self, metrics: &MetricsArgs) -> Result<bool> {
        if self.listen_public && metrics.metrics.is_none() {
            bail!("--listen-public is for --metrics: give --metrics ADDR:PORT too");
        }
        Ok(self.listen_public)
    }
}
