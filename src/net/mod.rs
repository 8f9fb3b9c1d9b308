//! The monitoring network, a transport layer above the outputs: the broker's address, TLS and
//! topics ([`mqtt`]), the on-disk queue of unacknowledged records ([`spool`]), the site's side
//! that publishes its log ([`publish`]) and the collector's side that subscribes ([`subscribe`])
//! and writes one file per site ([`collect`]); the Prometheus metrics of `log` and `collect`
//! ([`metrics`]).

pub mod collect;
pub mod metrics;
pub mod mqtt;
pub mod publish;
pub mod spool;
pub mod subscribe;
