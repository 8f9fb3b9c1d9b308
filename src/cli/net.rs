//! Flags of the monitoring network: publishing the log (`log --publish`) and collecting it
//! (`collect`), and how both reach the broker (credentials, TLS).

use crate::net::lookup::LocalLog;
use crate::net::mqtt::{check_site, parse_url, read_password, Broker, TlsFiles, PASSWORD_ENV};
use crate::net::publish::PublishConfig;
use crate::net::spool::SpoolLimits;
use crate::output::log::rotation::{parse_rotate, Rotate};
use crate::units::parse_duration;
use anyhow::{bail, Result};
use clap::Args;
use std::path::PathBuf;
use std::time::Duration;

/// How to log in to the broker.
#[derive(Args, Debug, Clone, Default)]
#[command(next_help_heading = "Broker")]
pub struct BrokerArgs {
    /// User name at the broker (one per site is best: the broker's ACL can then limit each site
    /// to its own topics).
    #[arg(long, value_name = "NAME")]
    pub mqtt_user: Option<String>,
    /// File whose first line is the broker password (else BANDWARDEN_MQTT_PASSWORD is read; a
    /// password is never taken from the command line, where other users can see it).
    #[arg(long, value_name = "FILE")]
    pub mqtt_password_file: Option<PathBuf>,
    /// PEM file of the authority that signed the broker's certificate (needed for mqtts://).
    #[arg(long, value_name = "FILE")]
    pub mqtt_ca: Option<PathBuf>,
    /// PEM certificate of this client, for brokers that ask for one (with --mqtt-key).
    #[arg(long, value_name = "FILE", requires = "mqtt_key")]
    pub mqtt_cert: Option<PathBuf>,
    /// PEM private key of --mqtt-cert.
    #[arg(long, value_name = "FILE", requires = "mqtt_cert")]
    pub mqtt_key: Option<PathBuf>,
}

impl BrokerArgs {
    /// The broker of `url` with these credentials and TLS files.
    pub fn broker(&self, url: &str) -> Result<Broker> {
        let mut b = parse_url(url)?;
        match (&mut b.tls, &self.mqtt_ca) {
            (Some(tls), Some(ca)) => {
                *tls = TlsFiles {
                    ca: ca.clone(),
                    client_cert: self.mqtt_cert.clone().zip(self.mqtt_key.clone()),
                }
            }
            (Some(_), None) => bail!(
                "mqtts:// needs --mqtt-ca FILE: the PEM certificate of the authority that signed the broker's"
            ),
            (None, Some(_)) => bail!("--mqtt-ca applies to mqtts:// addresses; use mqtts://HOST/PREFIX for TLS"),
            (None, None) => {}
        }
        b.username = self.mqtt_user.clone();
        b.password = read_password(self.mqtt_password_file.as_deref())?;
        if b.password.is_some() && b.username.is_none() {
            bail!("a broker password was given ({PASSWORD_ENV} or --mqtt-password-file) but no --mqtt-user");
        }
        Ok(b)
    }
}

/// `log --publish` and its companions.
#[derive(Args, Debug, Clone, Default)]
#[command(next_help_heading = "Publishing")]
pub struct PublishArgs {
    /// Also publish every record to an MQTT broker, mqtt://HOST[:PORT]/PREFIX (or mqtts:// for
    /// TLS), on PREFIX/SITE/KIND with QoS 1; needs --site.
    #[arg(long, value_name = "URL")]
    pub publish: Option<String>,
    /// Name of this monitoring site (letters, digits, . - _): a topic level, the collector's file
    /// name, and a field of the start record.
    #[arg(long, value_name = "NAME")]
    pub site: Option<String>,
    /// Directory of records waiting for the broker's acknowledgement [default: -o FILE with
    /// .spool added].
    #[arg(long, value_name = "DIR")]
    pub spool: Option<PathBuf>,
    /// Most the spool may hold on disk (e.g. 256M); when full, its oldest records leave it
    /// (said on stderr): they stay in the local log and are resent from it when the collector
    /// asks.
    #[arg(long, visible_alias = "spool-max", value_name = "SIZE", default_value = "256M", allow_hyphen_values = true, value_parser = parse_spool_size)]
    pub spool_max_bytes: u64,
    /// Records older than this leave the spool unsent (said on stderr; e.g. 7d, 12h): they stay
    /// in the local log and are resent from it when the collector asks.
    #[arg(long, value_name = "DURATION", default_value = "7d", allow_hyphen_values = true, value_parser = parse_duration)]
    pub spool_max_age: Duration,
    /// At the end, how long to wait for the broker to take what is still spooled (the rest is
    /// sent by the next run on the same spool).
    #[arg(long, value_name = "DURATION", default_value = "10s", allow_hyphen_values = true, value_parser = parse_duration)]
    pub publish_linger: Duration,
    #[command(flatten)]
    pub broker: BrokerArgs,
}

fn parse_spool_size(text: &str) -> Result<u64, String> {
    match parse_rotate(text) {
        Ok(Rotate::Bytes(b)) => Ok(b),
        _ => Err(format!(
            "'{}' is not a size: give bytes with k, M or G, e.g. 256M",
            crate::messages::sanitize(text)
        )),
    }
}

impl PublishArgs {
    /// `None` without --publish; `out` is the log's -o, `csv` and `rotated` its shape (a JSON
    /// Lines log in a file is where resend requests find what the spool no longer has).
    pub fn validate(&self, out: &str, csv: bool, rotated: bool) -> Result<Option<PublishConfig>> {
        if let Some(site) = &self.site {
            check_site(site)?;
        }
        let Some(url) = &self.publish else {
            // --site alone still names the site in the start record.
            if self.spool.is_some() {
                bail!("--spool applies with --publish only");
            }
            return Ok(None);
        };
        let site = self.site.clone().ok_or_else(|| {
            anyhow::anyhow!("--publish needs --site NAME (the site's name under the topic prefix)")
        })?;
        let spool_dir = match (&self.spool, out) {
            (Some(d), _) => d.clone(),
            (None, "-") => bail!("--publish with the log on stdout needs --spool DIR (where unacknowledged records wait)"),
            (None, file) => PathBuf::from(format!("{file}.spool")),
        };
        if self.spool_max_bytes < 64_000 {
            bail!("--spool-max-bytes must be at least 64k");
        }
        if self.spool_max_age < Duration::from_secs(1) {
            bail!("--spool-max-age must be at least 1s (e.g. 7d, 12h)");
        }
        // The local log answers the collector's resend requests; a CSV log or stdout cannot.
        let local_log =
            (out != "-" && !csv).then(|| LocalLog { path: PathBuf::from(out), rotated });
        Ok(Some(PublishConfig {
            broker: self.broker.broker(url)?,
            site,
            spool_dir,
            spool: SpoolLimits { max_bytes: self.spool_max_bytes, max_age: self.spool_max_age },
            local_log,
            linger: self.publish_linger,
        }))
    }
}

/// `bandwarden collect` flags.
#[derive(Args, Debug)]
pub struct CollectArgs {
    /// The broker and topic prefix the sites publish under: mqtt://HOST[:PORT]/PREFIX or
    /// mqtts://…
    #[arg(value_name = "URL")]
    pub url: String,
    /// Directory of the per-site logs (SITE.jsonl), created if missing; existing files are
    /// continued, and their records are not written again. --out, --db or both.
    #[arg(long, value_name = "DIR")]
    pub out: Option<PathBuf>,
    /// Client id at the broker; the broker keeps this collector's queue under it while it is
    /// away (a persistent session), so keep it the same from run to run.
    #[arg(long, value_name = "ID")]
    pub client_id: Option<String>,
    #[command(flatten)]
    pub broker: BrokerArgs,
    #[command(flatten)]
    pub metrics: super::metrics::MetricsArgs,
    #[command(flatten)]
    pub public: super::metrics::PublicArgs,
    /// Also (or instead of --out) store every record once in this database.
    #[command(flatten)]
    pub db: crate::cli::db::DbArgs,
}

/// A validated `collect`.
#[derive(Clone, Debug)]
pub struct CollectConfig {
    pub broker: Broker,
    pub out: Option<PathBuf>,
    pub db: Option<crate::store::DbUrl>,
    pub client_id: String,
    /// `--metrics`: where to serve the Prometheus metrics.
    pub metrics: Option<std::net::SocketAddr>,
}

impl CollectArgs {
    pub fn validate(self) -> Result<CollectConfig> {
        let broker = self.broker.broker(&self.url)?;
        let client_id = self.client_id.unwrap_or_else(|| {
            format!(
                "bandwarden-collect-{}",
                crate::net::mqtt::topic_level(&broker.prefix).replace('/', "_")
            )
        });
        if client_id.is_empty() || client_id.len() > 23 * 8 {
            bail!("--client-id must be 1 to 184 characters");
        }
        let metrics = self.metrics.validate(self.public.check(&self.metrics)?)?;
        let db = self.db.validate()?;
        if self.out.is_none() && db.is_none() {
            bail!("collect needs somewhere to put the records: --out DIR, --db URL, or both");
        }
        Ok(CollectConfig { broker, out: self.out, db, client_id, metrics })
    }
}
