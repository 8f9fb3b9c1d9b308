//! What publishing and collecting share about the broker: its address (`mqtt://HOST[:PORT]/PREFIX`
//! or `mqtts://…` for TLS), credentials, TLS settings, and the topic layout.
//!
//! Topics (MQTT 3.1.1, OASIS standard):
//! - `PREFIX/SITE/KIND` (`start`, `channel`, `interval`, `emission`, `dropped`, `capture`, `alarm`, `clear`, `stop`): every
//!   record of the site's log, QoS 1, as the same JSON line the local file holds.
//! - `PREFIX/SITE/latest/CHANNEL`: the last interval of each channel, retained, so a dashboard
//!   that connects sees the band's state at once.
//! - `PREFIX/SITE/status`: `{"kind":"status","site":…,"state":"online"|"offline",…}`, retained;
//!   the broker publishes the offline one itself (the will) when the site vanishes.
//!
//! A collector subscribes to `PREFIX/+/+`: records and status, not the `latest` copies.
//!
//! The MQTT client is `rumqttc`: maintained, pure Rust (no C library to build on a site's small
//! computer), with a blocking API that fits a thread of its own, and TLS through rustls.

use anyhow::{bail, Context, Result};
use rumqttc::{MqttOptions, TlsConfiguration, Transport};
use std::path::PathBuf;
use std::sync::Arc;
use std::time::Duration;

/// Where the broker is and how to talk to it.
#[derive(Clone, Debug, PartialEq)]
pub struct Broker {
    pub host: String,
    pub port: u16,
    /// Topic prefix (may hold `/`), without leading or trailing `/`.
    pub prefix: String,
    pub tls: Option<TlsFiles>,
    pub username: Option<String>,
    /// Read from a file or the environment, never from the command line.
    pub password: Option<String>,
}

/// PEM files for TLS: the authority that signed the broker's certificate (the system's roots are
/// not read: a monitoring network names its own), and optionally this client's own certificate.
#[derive(Clone, Debug, PartialEq)]
pub struct TlsFiles {
    pub ca: PathBuf,
    pub client_cert: Option<(PathBuf, PathBuf)>,
}

/// Environment variable that may hold the broker password.
pub const PASSWORD_ENV: &str = "BANDWARDEN_MQTT_PASSWORD";

/// Parses `mqtt://HOST[:PORT]/PREFIX` or `mqtts://HOST[:PORT]/PREFIX` (default ports 1883 and
/// 8883, IANA). TLS files and credentials are added by the caller.
pub fn parse_url(url: &str) -> Result<Broker> {
    let fix = "give mqtt://HOST[:PORT]/PREFIX, e.g. mqtt://127.0.0.1:1883/wrenhollow";
    let (tls, rest) = if let Some(r) = url.strip_prefix("mqtt://") {
        (false, r)
    } else if let Some(r) = url.strip_prefix("mqtts://") {
        (true, r)
    } else {
        bail!("'{}' is not an MQTT address: {fix}", crate::messages::sanitize(url));
    };
    let (hostport, prefix) = rest.split_once('/').unwrap_or((rest, ""));
    let prefix = prefix.trim_end_matches('/');
    if prefix.is_empty() {
        bail!("'{}' has no topic prefix after the host: {fix}", crate::messages::sanitize(url));
    }
    check_topic_part("the topic prefix", prefix, true)?;
    let default_port = if tls { 8883 } else { 1883 };
    let (host, port) = match hostport.rsplit_once(':') {
        Some((h, p)) if !h.ends_with(']') || h.starts_with('[') => (
            h,
            p.parse::<u16>().ok().filter(|p| *p > 0).with_context(|| {
                format!("the port '{}' is not 1 ..= 65535: {fix}", crate::messages::sanitize(p))
            })?,
        ),
        _ => (hostport, default_port),
    };
    let host = host.trim_start_matches('[').trim_end_matches(']');
    if host.is_empty() {
        bail!("'{}' names no broker host: {fix}", crate::messages::sanitize(url));
    }
    let tls = tls.then(|| TlsFiles { ca: PathBuf::new(), client_cert: None });
    Ok(Broker {
        host: host.to_string(),
        port,
        prefix: prefix.to_string(),
        tls,
        username: None,
        password: None,
    })
}

/// A site name becomes a topic level and a file name: letters, digits, `.`, `-`, `_`, not
/// starting with `.`, at most 64 characters.
pub fn check_site(site: &str) -> Result<()> {
    let ok = !site.is_empty()
        && site.len() <= 64
        && !site.starts_with('.')
        && site.chars().all(|c| c.is_ascii_alphanumeric() || matches!(c, '.' | '-' | '_'));
    if !ok {
        bail!(
            "the site name '{}' must be 1 to 64 letters, digits, '.', '-' or '_' (not starting with '.'), e.g. wrenhollow-ridge",
            crate::messages::sanitize(site)
        );
    }
    Ok(())
}

/// Topic text may not hold the wildcards `+` `#` or NUL (MQTT 3.1.1 §4.7); a single level may not
/// hold `/` either.
fn check_topic_part(what: &str, text: &str, slashes: bool) -> Result<()> {
    if text.contains(['+', '#', '\0']) || (!slashes && text.contains('/')) || text.starts_with('/')
    {
        bail!(
            "{what} '{}' may not hold '+', '#' or a leading '/'",
            crate::messages::sanitize(text)
        );
    }
    Ok(())
}

/// A channel name as one topic level: `/`, `+`, `#` and control characters become `_`.
pub fn topic_level(name: &str) -> String {
    name.chars()
        .map(|c| if matches!(c, '/' | '+' | '#') || c.is_control() { '_' } else { c })
        .collect()
}

/// Reads the broker password: from `file` if given (its first line), else from
/// [`PASSWORD_ENV`].
pub fn read_password(file: Option<&std::path::Path>) -> Result<Option<String>> {
    read_secret(file, PASSWORD_ENV)
}

/// A password: the first line of `file`, else the environment variable `env` (also for the
/// database's, [`crate::store::PASSWORD_ENV`]).
pub fn read_secret(file: Option<&std::path::Path>, env: &str) -> Result<Option<String>> {
    if let Some(f) = file {
        let text = std::fs::read_to_string(f)
            .with_context(|| format!("cannot read the password file '{}'", f.display()))?;
        let line = text.lines().next().unwrap_or("").to_string();
        if line.is_empty() {
            bail!("the password file '{}' is empty", f.display());
        }
        return Ok(Some(line));
    }
    Ok(std::env::var(env).ok().filter(|p| !p.is_empty()))
}

impl Broker {
    /// Client options for this broker; `keep_alive` also bounds how long a dead link goes
    /// unnoticed (the broker publishes the will after 1.5 × keep-alive, MQTT 3.1.1 §3.1.2.10).
    pub fn options(&self, client_id: &str) -> Result<MqttOptions> {
        let mut o = MqttOptions::new(client_id, self.host.clone(), self.port);
        o.set_keep_alive(Duration::from_secs(10));
        o.set_max_packet_size(1 << 20, 1 << 20);
        if let Some(user) = &self.username {
            o.set_credentials(user.clone(), self.password.clone().unwrap_or_default());
        }
        if let Some(tls) = &self.tls {
            o.set_transport(Transport::Tls(TlsConfiguration::Rustls(Arc::new(
                tls.client_config()?,
            ))));
        }
        Ok(o)
    }

    /// The topic of records of `kind` from `site`.
    pub fn topic(&self, site: &str, kind: &str) -> String {
        format!("{}/{site}/{kind}", self.prefix)
    }

    /// What a collector subscribes to.
    pub fn collect_filter(&self) -> String {
        format!("{}/+/+", self.prefix)
    }

    /// Site and kind of a topic under the prefix, if it is one of ours.
    pub fn split_topic<'t>(&self, topic: &'t str) -> Option<(&'t str, &'t str)> {
        let rest = topic.strip_prefix(self.prefix.as_str())?.strip_prefix('/')?;
        let (site, kind) = rest.split_once('/')?;
        (!kind.contains('/')).then_some((site, kind))
    }
}

impl TlsFiles {
    fn client_config(&self) -> Result<rustls::ClientConfig> {
        let provider = Arc::new(rustls::crypto::ring::default_provider());
        let mut roots = rustls::RootCertStore::empty();
        for cert in read_certs(&self.ca)? {
            roots.add(cert).with_context(|| {
                format!("'{}' holds a certificate rustls cannot use", self.ca.display())
            })?;
        }
        let builder = rustls::ClientConfig::builder_with_provider(provider)
            .with_safe_default_protocol_versions()
            .context("TLS settings")?
            .with_root_certificates(roots);
        Ok(match &self.client_cert {
            None => builder.with_no_client_auth(),
            Some((cert, key)) => {
                let key_pem = std::fs::read(key)
                    .with_context(|| format!("cannot read the key '{}'", key.display()))?;
                let key = rustls_pemfile::private_key(&mut key_pem.as_slice())
                    .ok()
                    .flatten()
                    .with_context(|| format!("'{}' holds no private key in PEM", key.display()))?;
                builder.with_client_auth_cert(read_certs(cert)?, key).context("the client key")?
            }
        })
    }
}

fn read_certs(path: &std::path::Path) -> Result<Vec<rustls::pki_types::CertificateDer<'static>>> {
    let pem = std::fs::read(path).with_context(|| format!("cannot read '{}'", path.display()))?;
    let certs: Vec<_> = rustls_pemfile::certs(&mut pem.as_slice()).filter_map(|c| c.ok()).collect();
    if certs.is_empty() {
        bail!("'{}' holds no PEM certificate", path.display());
    }
    Ok(certs)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn broker_addresses_parse_with_default_ports() {
        let b = parse_url("mqtt://127.0.0.1/wrenhollow").unwrap();
        assert_eq!((b.host.as_str(), b.port, b.prefix.as_str()), ("127.0.0.1", 1883, "wrenhollow"));
        assert!(b.tls.is_none());
        let b = parse_url("mqtts://broker.example:9000/net/ridge/").unwrap();
        assert_eq!((b.port, b.prefix.as_str()), (9000, "net/ridge"));
        assert!(b.tls.is_some());
        assert_eq!(parse_url("mqtts://h/p").unwrap().port, 8883);
        assert_eq!(parse_url("mqtt://[::1]:1999/p").unwrap().host, "::1");
        for bad in [
            "http://h/p",
            "mqtt://h",
            "mqtt://h/",
            "mqtt://:1883/p",
            "mqtt://h:0/p",
            "mqtt://h/a/#",
        ] {
            assert!(parse_url(bad).is_err(), "{bad}");
        }
    }

    #[test]
    fn topics_split_back_into_site_and_kind() {
        let b = parse_url("mqtt://h/net/x").unwrap();
        assert_eq!(b.topic("ridge", "interval"), "net/x/ridge/interval");
        assert_eq!(b.split_topic("net/x/ridge/interval"), Some(("ridge", "interval")));
        assert_eq!(b.split_topic("net/x/ridge/latest/gate"), None);
        assert_eq!(b.split_topic("other/ridge/stop"), None);
        assert_eq!(topic_level("a/b+c#d"), "a_b_c_d");
        assert!(check_site("wrenhollow-ridge_2").is_ok());
        for bad in ["", ".hidden", "a/b", "a b", "x+"] {
            assert!(check_site(bad).is_err(), "{bad}");
        }
    }
}
