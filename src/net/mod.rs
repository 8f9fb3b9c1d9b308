//! The monitoring network, a transport layer above the outputs: the broker's address, TLS and
//! topics ([`mqtt`]), the on-disk queue of unacknowledged records ([`spool`]), the site's side
//! that publishes its log ([`publish`]) and the collector's side that subscribes ([`subscribe`])
//! and writes one file per site ([`collect`]). End to end, the collector asks a site again for
//! what a forgetful broker lost ([`resend`]); the site answers ([`answer`]) from its spool or
//! its local log ([`lookup`]). The Prometheus metrics of `log` and `collect` ([`metrics`]).

pub mod answer;
pub mod collect;
pub mod lookup;
pub mod metrics;
pub mod mqtt;
pub mod publish;
pub mod resend;
pub mod spool;
pub mod subscribe;
