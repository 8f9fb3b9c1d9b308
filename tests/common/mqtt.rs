//! A Mosquitto broker of the test's own, on a free loopback port and a scratch folder, for the
//! tests of the monitoring network. Mosquitto comes from the distribution's packages (`.ci/run`
//! installs it); without it a test fails in CI (`CI=true`) and is skipped with a note elsewhere.

use std::path::{Path, PathBuf};
use std::process::{Child, Command, Stdio};
use std::time::{Duration, Instant};

/// Where the distribution puts Mosquitto.
pub fn mosquitto() -> Option<PathBuf> {
    ["/usr/sbin/mosquitto", "/usr/bin/mosquitto", "/usr/local/sbin/mosquitto"]
        .iter()
        .map(PathBuf::from)
        .find(|p| p.exists())
}

/// Mosquitto, or `None` where the test may be skipped (a note says so); in CI its absence fails.
pub fn mosquitto_or_skip() -> Option<PathBuf> {
    let bin = mosquitto();
    if bin.is_none() {
        if std::env::var("CI").is_ok_and(|v| v == "true") {
            panic!(
                "mosquitto is not installed: .ci/run installs it with apt-get install -y mosquitto"
            );
        }
        eprintln!("note: mosquitto is not installed (apt-get install -y mosquitto); test skipped");
    }
    bin
}

/// Waits (up to 10 s) until something listens on `port`.
pub fn wait_for_port(port: u16) {
    let deadline = Instant::now() + Duration::from_secs(10);
    while std::net::TcpStream::connect(("127.0.0.1", port)).is_err() {
        assert!(Instant::now() < deadline, "nothing listens on port {port}");
        std::thread::sleep(Duration::from_millis(50));
    }
}

/// Sends `sig` (e.g. `TERM`) to a child.
pub fn signal(child: &Child, sig: &str) {
    Command::new("kill").args([&format!("-{sig}"), &child.id().to_string()]).status().unwrap();
}

/// A broker that keeps nothing across a restart (`persistence false`): what it had queued for
/// the collector, and the collector's subscription itself, are gone when it comes back.
pub struct ForgetfulBroker {
    bin: PathBuf,
    conf: PathBuf,
    pub port: u16,
    child: Option<Child>,
}

impl ForgetfulBroker {
    pub fn start(bin: PathBuf, dir: &Path) -> ForgetfulBroker {
        let port = super::free_port();
        let conf = dir.join("mosquitto.conf");
        let text = format!("listener {port} 127.0.0.1\nallow_anonymous true\npersistence false\n");
        std::fs::write(&conf, text).unwrap();
        let mut b = ForgetfulBroker { bin, conf, port, child: None };
        b.run();
        b
    }

    pub fn run(&mut self) {
        let child = Command::new(&self.bin)
            .arg("-c")
            .arg(&self.conf)
            .stdout(Stdio::null())
            .stderr(Stdio::null())
            .spawn()
            .expect("starting mosquitto");
        self.child = Some(child);
        wait_for_port(self.port);
    }

    /// SIGTERM, and wait for it to be gone.
    pub fn stop(&mut self) {
        if let Some(mut c) = self.child.take() {
            signal(&c, "TERM");
            let _ = c.wait();
        }
    }
}

impl Drop for ForgetfulBroker {
    fn drop(&mut self) {
        if let Some(mut c) = self.child.take() {
            let _ = c.kill();
            let _ = c.wait();
        }
    }
}
