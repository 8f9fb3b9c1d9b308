//! A Mosquitto broker of the test's own, on a free loopback port and a scratch folder, for the
//! tests of the monitoring network. Mosquitto comes from the distribution's packages (`.ci/run`
//! installs it); without it a test fails in CI (`CI=true`) and is skipped with a note elsewhere.

use std::io::{Read, Write};
use std::net::{Shutdown, TcpListener, TcpStream};
use std::path::{Path, PathBuf};
use std::process::{Child, Command, Stdio};
use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::{Arc, Mutex};
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
    while TcpStream::connect(("127.0.0.1", port)).is_err() {
        assert!(Instant::now() < deadline, "nothing listens on port {port}");
        std::thread::sleep(Duration::from_millis(50));
    }
}

/// Sends `sig` (e.g. `TERM`) to a child.
pub fn signal(child: &Child, sig: &str) {
    Command::new("kill").args([&format!("-{sig}"), &child.id().to_string()]).status().unwrap();
}

/// Whether a broker keeps its state across a restart.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Persistence {
    /// `persistence true`, saved every second into the test's folder, and no cap on queued
    /// messages (Mosquitto's default of 1000 would drop records while the collector is away):
    /// a restart keeps the collector's session and queue.
    Kept,
    /// `persistence false`: what the broker had queued for the collector, and the collector's
    /// subscription itself, are gone when it comes back.
    Forgotten,
}

/// A Mosquitto broker of the test's own on a free loopback port, restartable.
pub struct Broker {
    bin: PathBuf,
    conf: PathBuf,
    pub port: u16,
    persistence: Persistence,
    child: Option<Child>,
}

impl Broker {
    pub fn start(bin: PathBuf, dir: &Path, persistence: Persistence) -> Broker {
        let port = super::free_port();
        let conf = dir.join("mosquitto.conf");
        let mut text = format!("listener {port} 127.0.0.1\nallow_anonymous true\n");
        match persistence {
            Persistence::Forgotten => text += "persistence false\n",
            Persistence::Kept => {
                // Started as root, Mosquitto drops to its own user (`mosquitto` in the
                // distribution's package) before it saves its state: that user must be able to
                // write the folder, or the restart loses the collector's session and with it
                // the records queued for it.
                let store = dir.join("store");
                std::fs::create_dir_all(&store).unwrap();
                let mode = std::os::unix::fs::PermissionsExt::from_mode(0o777);
                std::fs::set_permissions(&store, mode).unwrap();
                text += &format!(
                    "persistence true\npersistence_location {}/\nmax_queued_messages 0\nautosave_interval 1\n",
                    store.display()
                );
            }
        }
        std::fs::write(&conf, text).unwrap();
        let mut b = Broker { bin, conf, port, persistence, child: None };
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

    /// SIGTERM, and wait for it to be gone (a persistent broker saves its state first: checked).
    pub fn stop(&mut self) {
        if let Some(mut c) = self.child.take() {
            signal(&c, "TERM");
            let _ = c.wait();
        }
        if self.persistence == Persistence::Kept {
            let db = self.conf.with_file_name("store").join("mosquitto.db");
            assert!(
                db.exists(),
                "the broker saved no persistent state in {}: a restart would lose the collector's queue",
                db.display()
            );
        }
    }
}

impl Drop for Broker {
    fn drop(&mut self) {
        if let Some(mut c) = self.child.take() {
            let _ = c.kill();
            let _ = c.wait();
        }
    }
}

/// A TCP relay between clients and the broker whose link can be cut: open connections are
/// shut and new ones refused until it is mended.
pub struct Relay {
    pub port: u16,
    cut: Arc<AtomicBool>,
    open: Arc<Mutex<Vec<TcpStream>>>,
}

impl Relay {
    pub fn start(target: u16) -> Relay {
        let listener = TcpListener::bind("127.0.0.1:0").unwrap();
        let port = listener.local_addr().unwrap().port();
        let cut = Arc::new(AtomicBool::new(false));
        let open: Arc<Mutex<Vec<TcpStream>>> = Arc::default();
        let (cut2, open2) = (cut.clone(), open.clone());
        std::thread::spawn(move || {
            for conn in listener.incoming() {
                let Ok(a) = conn else { continue };
                if cut2.load(Ordering::SeqCst) {
                    continue;
                }
                let Ok(b) = TcpStream::connect(("127.0.0.1", target)) else { continue };
                let mut list = open2.lock().unwrap();
                list.push(a.try_clone().unwrap());
                list.push(b.try_clone().unwrap());
                pipe(a.try_clone().unwrap(), b.try_clone().unwrap());
                pipe(b, a);
            }
        });
        Relay { port, cut, open }
    }

    pub fn cut(&self) {
        self.cut.store(true, Ordering::SeqCst);
        for s in self.open.lock().unwrap().drain(..) {
            let _ = s.shutdown(Shutdown::Both);
        }
    }

    pub fn mend(&self) {
        self.cut.store(false, Ordering::SeqCst);
    }
}

fn pipe(mut from: TcpStream, mut to: TcpStream) {
    std::thread::spawn(move || {
        let mut buf = [0u8; 16384];
        while let Ok(n) = from.read(&mut buf) {
            if n == 0 || to.write_all(&buf[..n]).is_err() {
                break;
            }
        }
        let _ = to.shutdown(Shutdown::Both);
    });
}

/// A site: the paced demo scene piped into `log --publish` (with `extra` flags).
pub fn site(
    name: &str,
    dir: &Path,
    port: u16,
    (seconds, seed): (u32, u32),
    extra: &[&str],
) -> (Child, Child, PathBuf) {
    let log = dir.join(format!("{name}.jsonl"));
    let mut demo = Command::new(super::BIN)
        .args(["demo", "-o", "-", "--rate", "1M", "--format", "cf32_le", "--realtime"])
        .args(["--seconds", &seconds.to_string(), "--seed", &seed.to_string()])
        .stdout(Stdio::piped())
        .spawn()
        .unwrap();
    let plan = concat!(env!("CARGO_MANIFEST_DIR"), "/recordings/wrenhollow-plan.toml");
    let logger = Command::new(super::BIN)
        .args(["log", "-", "--format", "cf32_le", "--rate", "1M", "--center", "433.5M"])
        .args(["--plan", plan, "--interval", "1s", "--threads", "1", "--site", name])
        .args(["--publish", &format!("mqtt://127.0.0.1:{port}/wrenhollow/net")])
        .args(["--publish-linger", "30s", "-o", log.to_str().unwrap()])
        .args(extra)
        .stdin(demo.stdout.take().unwrap())
        .stderr(Stdio::piped())
        .spawn()
        .unwrap();
    (demo, logger, log)
}

/// A child that is killed if the test ends early (a failed assertion), so that no collector
/// outlives its test holding the test's output open.
pub struct Reaped(pub Child);

impl Drop for Reaped {
    fn drop(&mut self) {
        if let Ok(None) = self.0.try_wait() {
            let _ = self.0.kill();
            let _ = self.0.wait();
        }
    }
}
