//! Publishing and collecting through a secured broker: a real Mosquitto on a loopback port that
//! asks for a user name and password (its own `mosquitto_passwd` makes the hashed file), and
//! one that speaks TLS only, with a certificate authority made for the test (rcgen). The right
//! credentials and authority deliver every record of the site's local log to the collector; a
//! wrong password is refused with a clear message, never a hang or a panic.
//!
//! Mosquitto and mosquitto_passwd come from the distribution's `mosquitto` package (`.ci/run`
//! installs it). Without them the tests fail in CI (`CI=true`) and are skipped with a note
//! elsewhere.

mod common;

use std::io::Read;
use std::net::TcpStream;
use std::path::{Path, PathBuf};
use std::process::{Child, Command, Output, Stdio};
use std::time::{Duration, Instant};

const BIN: &str = env!("CARGO_BIN_EXE_bandwarden");

fn find(names: &[&str]) -> Option<PathBuf> {
    names.iter().map(PathBuf::from).find(|p| p.exists())
}

/// Mosquitto and mosquitto_passwd, or `None` (after saying why) where the test may be skipped.
fn tools() -> Option<(PathBuf, PathBuf)> {
    let broker = find(&["/usr/sbin/mosquitto", "/usr/bin/mosquitto", "/usr/local/sbin/mosquitto"]);
    let passwd = find(&["/usr/bin/mosquitto_passwd", "/usr/local/bin/mosquitto_passwd"]);
    match (broker, passwd) {
        (Some(b), Some(p)) => Some((b, p)),
        _ if std::env::var("CI").is_ok_and(|v| v == "true") => {
            panic!("mosquitto or mosquitto_passwd is missing: .ci/run installs them with apt-get install -y mosquitto")
        }
        _ => {
            eprintln!(
                "note: mosquitto is not installed (apt-get install -y mosquitto); test skipped"
            );
            None
        }
    }
}

fn scratch(name: &str) -> PathBuf {
    let dir = std::env::temp_dir().join(format!("bw-net-{name}-{}", std::process::id()));
    let _ = std::fs::remove_dir_all(&dir);
    std::fs::create_dir_all(&dir).unwrap();
    // Started as root, Mosquitto drops to its own user, which must read the files made here.
    use std::os::unix::fs::PermissionsExt;
    std::fs::set_permissions(&dir, std::fs::Permissions::from_mode(0o755)).unwrap();
    dir
}

use common::{free_port, lines};

/// A broker with `extra` configuration lines on a free loopback port; killed on drop.
struct Broker {
    port: u16,
    child: Child,
}

impl Broker {
    fn start(bin: &Path, dir: &Path, extra: &str) -> Broker {
        let port = free_port();
        let conf = dir.join("mosquitto.conf");
        std::fs::write(&conf, format!("listener {port} 127.0.0.1\npersistence false\n{extra}"))
            .unwrap();
        let child = Command::new(bin)
            .arg("-c")
            .arg(&conf)
            .stdout(Stdio::null())
            .stderr(Stdio::null())
            .spawn()
            .unwrap();
        let deadline = Instant::now() + Duration::from_secs(10);
        while TcpStream::connect(("127.0.0.1", port)).is_err() {
            assert!(Instant::now() < deadline, "mosquitto does not listen on {port}: {extra}");
            std::thread::sleep(Duration::from_millis(50));
        }
        Broker { port, child }
    }
}

impl Drop for Broker {
    fn drop(&mut self) {
        let _ = self.child.kill();
        let _ = self.child.wait();
    }
}

/// A 1 s demo recording, logged with a record every 100 ms per channel (some 80 records).
fn recording(dir: &Path) -> PathBuf {
    let rec = dir.join("rec.cf32");
    let ok = Command::new(BIN)
        .args(["demo", "-o", rec.to_str().unwrap(), "--rate", "1M", "--seconds", "1"])
        .stderr(Stdio::null())
        .status()
        .unwrap();
    assert!(ok.success());
    rec
}

/// `log REC --publish URL` as site `site`, with `extra` flags and environment.
fn log(
    dir: &Path,
    rec: &Path,
    url: &str,
    site: &str,
    extra: &[&str],
    env: &[(&str, &str)],
) -> Output {
    let plan = concat!(env!("CARGO_MANIFEST_DIR"), "/recordings/wrenhollow-plan.toml");
    Command::new(BIN)
        .args(["log", rec.to_str().unwrap(), "--format", "cf32_le", "--rate", "1M"])
        .args(["--center", "433.5M", "--plan", plan, "--interval", "100ms", "--threads", "1"])
        .args(["--site", site, "--publish", url, "--publish-linger", "3s"])
        .args(["-o", dir.join(format!("{site}.jsonl")).to_str().unwrap()])
        .args(extra)
        .env_remove("BANDWARDEN_MQTT_PASSWORD")
        .envs(env.iter().copied())
        .stderr(Stdio::piped())
        .output()
        .unwrap()
}

/// Runs a collector until it has as many lines for `site` as the site's local log (at most
/// 10 s), stops it with SIGTERM, and returns the collected lines and its stderr.
fn collect_until(
    dir: &Path,
    collector: &mut Child,
    site: &str,
    want: usize,
) -> (Vec<String>, String) {
    let file = dir.join("collected").join(format!("{site}.jsonl"));
    let deadline = Instant::now() + Duration::from_secs(10);
    while lines(&file).len() < want && Instant::now() < deadline {
        std::thread::sleep(Duration::from_millis(100));
    }
    Command::new("kill").args(["-TERM", &collector.id().to_string()]).status().unwrap();
    let status = collector.wait().unwrap();
    let mut err = String::new();
    collector.stderr.take().unwrap().read_to_string(&mut err).unwrap();
    assert!(status.success(), "collect: {err}");
    (lines(&file), err)
}

#[test]
fn a_password_broker_takes_the_right_password_and_refuses_a_wrong_one_clearly() {
    let Some((mosquitto, passwd)) = tools() else { return };
    let dir = scratch("auth");
    // mosquitto_passwd writes salted hashes (Mosquitto's documented password file format).
    let pwfile = dir.join("passwd");
    for (i, (user, pass)) in
        [("ridge-north", "larch-7-quartz"), ("collector", "fen-22-heron")].iter().enumerate()
    {
        let create: &[&str] = if i == 0 { &["-c"] } else { &[] };
        let ok = Command::new(&passwd)
            .arg("-b")
            .args(create)
            .arg(&pwfile)
            .args([user, pass])
            .status()
            .unwrap();
        assert!(ok.success(), "mosquitto_passwd");
    }
    use std::os::unix::fs::PermissionsExt;
    std::fs::set_permissions(&pwfile, std::fs::Permissions::from_mode(0o644)).unwrap();
    let broker = Broker::start(
        &mosquitto,
        &dir,
        &format!("allow_anonymous false\npassword_file {}\n", pwfile.display()),
    );
    let url = format!("mqtt://127.0.0.1:{}/wrenhollow/auth", broker.port);
    let rec = recording(&dir);
    let site_pw = dir.join("site-password");
    std::fs::write(&site_pw, "larch-7-quartz\n").unwrap();

    // The collector's password comes from the environment, the site's from a file.
    let mut collector = Command::new(BIN)
        .args(["collect", &url, "--out", dir.join("collected").to_str().unwrap()])
        .args(["--mqtt-user", "collector"])
        .env("BANDWARDEN_MQTT_PASSWORD", "fen-22-heron")
        .stderr(Stdio::piped())
        .spawn()
        .unwrap();
    std::thread::sleep(Duration::from_millis(500));
    let site_args =
        ["--mqtt-user", "ridge-north", "--mqtt-password-file", site_pw.to_str().unwrap()];
    let out = log(&dir, &rec, &url, "ridge-north", &site_args, &[]);
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(out.status.success(), "{err}");
    let want = lines(&dir.join("ridge-north.jsonl"));
    assert!(want.len() > 50, "{} records", want.len());
    assert!(err.contains(&format!("published {} records", want.len())), "{err}");
    let (got, cerr) = collect_until(&dir, &mut collector, "ridge-north", want.len());
    assert_eq!(got, want, "the collected file is the local log\n{cerr}");

    // A wrong password: the log measures to the end (its local file is the record), says at
    // once why nothing was published, keeps the records in the spool, and fails (exit 1: a
    // setting to fix).
    std::fs::write(&site_pw, "larch-7-quartz-old\n").unwrap();
    let started = Instant::now();
    let out = log(&dir, &rec, &url, "ridge-north", &site_args, &[]);
    let err = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(1), "{err}");
    assert_eq!(lines(&dir.join("ridge-north.jsonl")).len(), want.len(), "the local log is whole");
    assert!(started.elapsed() < Duration::from_secs(15), "no hang: {:?}", started.elapsed());
    assert!(err.contains("refused the user name or password"), "{err}");
    assert!(err.contains("published 0 records"), "{err}");
    assert!(err.contains("wait in the spool"), "{err}");
    assert!(!err.contains("panicked"), "{err}");

    // A collector with a wrong password stops at once with the reason and a non-zero status.
    let started = Instant::now();
    let out = Command::new(BIN)
        .args(["collect", &url, "--out", dir.join("collected2").to_str().unwrap()])
        .args(["--mqtt-user", "collector"])
        .env("BANDWARDEN_MQTT_PASSWORD", "not-the-password")
        .stderr(Stdio::piped())
        .output()
        .unwrap();
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(!out.status.success() && out.status.code().is_some(), "{err}");
    assert!(err.contains("refused the user name or password"), "{err}");
    assert!(started.elapsed() < Duration::from_secs(15), "no hang: {:?}", started.elapsed());
    drop(broker);
    let _ = std::fs::remove_dir_all(&dir);
}

/// A CA and a broker certificate for 127.0.0.1 and localhost, as PEM files in `dir`:
/// (ca.pem, broker.pem, broker.key).
fn certificates(dir: &Path) -> (PathBuf, PathBuf, PathBuf) {
    use rcgen::{BasicConstraints, CertificateParams, DnType, IsCa, KeyPair};
    let ca_key = KeyPair::generate().unwrap();
    let mut ca = CertificateParams::new(Vec::<String>::new()).unwrap();
    ca.is_ca = IsCa::Ca(BasicConstraints::Unconstrained);
    ca.distinguished_name.push(DnType::CommonName, "Wrenhollow test authority");
    let ca_cert = ca.self_signed(&ca_key).unwrap();
    let key = KeyPair::generate().unwrap();
    let mut params =
        CertificateParams::new(vec!["127.0.0.1".to_string(), "localhost".to_string()]).unwrap();
    params.distinguished_name.push(DnType::CommonName, "wrenhollow broker");
    let cert = params.signed_by(&key, &ca_cert, &ca_key).unwrap();
    let paths = (dir.join("ca.pem"), dir.join("broker.pem"), dir.join("broker.key"));
    std::fs::write(&paths.0, ca_cert.pem()).unwrap();
    std::fs::write(&paths.1, cert.pem()).unwrap();
    std::fs::write(&paths.2, key.serialize_pem()).unwrap();
    use std::os::unix::fs::PermissionsExt;
    std::fs::set_permissions(&paths.2, std::fs::Permissions::from_mode(0o644)).unwrap();
    paths
}

#[test]
fn records_cross_a_tls_broker_with_the_test_authority() {
    let Some((mosquitto, _)) = tools() else { return };
    let dir = scratch("tls");
    let (ca, cert, key) = certificates(&dir);
    let broker = Broker::start(
        &mosquitto,
        &dir,
        &format!(
            "allow_anonymous true\ncafile {}\ncertfile {}\nkeyfile {}\n",
            ca.display(),
            cert.display(),
            key.display()
        ),
    );
    let url = format!("mqtts://127.0.0.1:{}/wrenhollow/tls", broker.port);
    let rec = recording(&dir);
    let ca_arg = ["--mqtt-ca", ca.to_str().unwrap()];
    let mut collector = Command::new(BIN)
        .args(["collect", &url, "--out", dir.join("collected").to_str().unwrap()])
        .args(ca_arg)
        .stderr(Stdio::piped())
        .spawn()
        .unwrap();
    std::thread::sleep(Duration::from_millis(500));
    let out = log(&dir, &rec, &url, "ridge-south", &ca_arg, &[]);
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(out.status.success(), "{err}");
    let want = lines(&dir.join("ridge-south.jsonl"));
    assert!(want.len() > 50, "{} records", want.len());
    assert!(err.contains(&format!("published {} records", want.len())), "{err}");
    let (got, cerr) = collect_until(&dir, &mut collector, "ridge-south", want.len());
    assert_eq!(got, want, "the collected file is the local log\n{cerr}");

    // An authority that did not sign the broker's certificate: refused, with the reason.
    let other = scratch("tls-other");
    let (other_ca, _, _) = certificates(&other);
    let out = Command::new(BIN)
        .args(["collect", &url, "--out", dir.join("collected2").to_str().unwrap()])
        .args(["--mqtt-ca", other_ca.to_str().unwrap()])
        .stderr(Stdio::piped())
        .output()
        .unwrap();
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(!out.status.success() && out.status.code().is_some(), "{err}");
    assert!(err.contains("TLS handshake failed"), "{err}");
    drop(broker);
    let _ = std::fs::remove_dir_all(&dir);
    let _ = std::fs::remove_dir_all(&other);
}
