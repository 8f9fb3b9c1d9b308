//! The database on a real PostgreSQL server (from the distribution's packages; `.ci/run`
//! installs it), started here on a temporary folder and a free loopback port, with a password:
//! `import` and `report --db postgres://…` must give what `report` over the log files gives
//! (tests/support/reports.rs), and the collector must store every record once however often it
//! comes (counted by the server). Without PostgreSQL the test fails in CI (`CI=true`) and is
//! skipped with a note elsewhere.

#[path = "support/network_logs.rs"]
mod network_logs;
#[path = "support/reports.rs"]
mod reports;

mod common;

use bandwarden::net::collect::{Collector, Taken};
use bandwarden::store::write::{Batch, Writer};
use bandwarden::store::{open, DbUrl};
use std::net::TcpStream;
use std::path::{Path, PathBuf};
use std::process::Command;
use std::time::{Duration, Instant};

/// The newest PostgreSQL's programs (`/usr/lib/postgresql/VERSION/bin` on Debian).
fn pg_bin() -> Option<PathBuf> {
    let mut dirs: Vec<PathBuf> = std::fs::read_dir("/usr/lib/postgresql")
        .ok()?
        .filter_map(|e| Some(e.ok()?.path().join("bin")))
        .filter(|d| d.join("initdb").exists() && d.join("pg_ctl").exists())
        .collect();
    dirs.sort_by_key(|d| {
        d.parent().and_then(|v| v.file_name()?.to_str()?.parse::<u32>().ok()).unwrap_or(0)
    });
    dirs.pop()
}

fn is_root() -> bool {
    Command::new("id").arg("-u").output().is_ok_and(|o| o.stdout.starts_with(b"0\n"))
}

/// A server of its own; stopped when dropped.
struct Server {
    bin: PathBuf,
    data: PathBuf,
    port: u16,
    root: bool,
}

const USER: &str = "ridge";
const PASSWORD: &str = "wrenhollow-47-north";

impl Server {
    /// A program of PostgreSQL's: as the `postgres` user when run as root (the server refuses
    /// to run as root).
    fn cmd(&self, program: &str) -> Command {
        if self.root {
            let mut c = Command::new("runuser");
            c.args(["-u", "postgres", "--"]).arg(self.bin.join(program));
            c
        } else {
            Command::new(self.bin.join(program))
        }
    }

    fn start(bin: PathBuf) -> Server {
        let dir = std::env::temp_dir().join(format!("bandwarden-pg-{}", std::process::id()));
        let _ = std::fs::remove_dir_all(&dir);
        std::fs::create_dir_all(&dir).unwrap();
        let root = is_root();
        let pwfile = dir.join("pw");
        std::fs::write(&pwfile, format!("{PASSWORD}\n")).unwrap();
        if root {
            let ok = Command::new("chown").args(["-R", "postgres:"]).arg(&dir).status().unwrap();
            assert!(ok.success(), "chown postgres {}", dir.display());
        }
        let port = common::free_port();
        let server = Server { bin, data: dir.join("data"), port, root };
        let out = server
            .cmd("initdb")
            .args(["-D", server.data.to_str().unwrap(), "-U", USER, "--auth=scram-sha-256"])
            .arg(format!("--pwfile={}", pwfile.display()))
            .output()
            .unwrap();
        assert!(out.status.success(), "initdb: {}", String::from_utf8_lossy(&out.stderr));
        let options = format!(
            "-p {port} -c listen_addresses=127.0.0.1 -c unix_socket_directories={} -c fsync=off",
            dir.display()
        );
        let out = server
            .cmd("pg_ctl")
            .args(["-D", server.data.to_str().unwrap(), "-o", &options, "-w", "-t", "60", "-l"])
            .arg(dir.join("server.log"))
            .arg("start")
            .output()
            .unwrap();
        assert!(out.status.success(), "pg_ctl start: {}", String::from_utf8_lossy(&out.stderr));
        let deadline = Instant::now() + Duration::from_secs(30);
        while TcpStream::connect(("127.0.0.1", port)).is_err() {
            assert!(Instant::now() < deadline, "PostgreSQL does not listen on {port}");
            std::thread::sleep(Duration::from_millis(50));
        }
        server
    }

    fn url(&self, db: &str) -> String {
        format!("postgres://{USER}@127.0.0.1:{}/{db}", self.port)
    }
}

impl Drop for Server {
    fn drop(&mut self) {
        let _ = self
            .cmd("pg_ctl")
            .args(["-D", self.data.to_str().unwrap(), "-m", "immediate", "stop"])
            .output();
        if let Some(dir) = self.data.parent() {
            let _ = std::fs::remove_dir_all(dir);
        }
    }
}

/// PostgreSQL's programs, or `None` where the test may be skipped; in CI their absence fails.
fn pg_or_skip() -> Option<PathBuf> {
    let bin = pg_bin();
    if bin.is_none() {
        if std::env::var("CI").is_ok_and(|v| v == "true") {
            panic!("PostgreSQL is not installed: .ci/run installs it with apt-get install -y postgresql");
        }
        eprintln!(
            "note: PostgreSQL is not installed (apt-get install -y postgresql); test skipped"
        );
    }
    bin
}

fn scratch(name: &str) -> PathBuf {
    let dir = Path::new(env!("CARGO_TARGET_TMPDIR")).join("store-pg").join(name);
    let _ = std::fs::remove_dir_all(&dir);
    std::fs::create_dir_all(&dir).unwrap();
    dir
}

#[test]
fn postgres_stores_once_and_reports_as_the_logs() {
    let Some(bin) = pg_or_skip() else { return };
    let server = Server::start(bin);
    let dir = scratch("report");
    let pw = dir.join("db-password");
    std::fs::write(&pw, format!("{PASSWORD}\n")).unwrap();

    // A wrong password is refused with the server's reason.
    let out = common::bin()
        .args(["report", "--db", &server.url("postgres")])
        .env("BANDWARDEN_DB_PASSWORD", "not-it")
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(1));
    assert!(String::from_utf8_lossy(&out.stderr).contains("cannot connect"));

    // The collector: every record once, with copies and a restart, counted by the server.
    let url = DbUrl::parse(&server.url("postgres"), Some(PASSWORD.into())).unwrap();
    let spec = reports::spec("ridge", "20261203T220000Z-51", 40, 1_796_335_200, 4);
    let mut text = Vec::new();
    network_logs::write_run(&mut text, &spec).unwrap();
    let lines: Vec<&str> = std::str::from_utf8(&text).unwrap().lines().collect();
    for pass in 0..2 {
        let writer = Writer::new(open(&url).unwrap(), Batch::default());
        let mut c = Collector::open(None, Some(writer)).unwrap();
        for (i, l) in lines.iter().enumerate() {
            let want = if pass == 0 { Taken::Written } else { Taken::Duplicate };
            assert_eq!(c.take("ridge", l.as_bytes()).unwrap(), want, "pass {pass}, line {i}");
            if i % 5 == 0 {
                assert_eq!(c.take("ridge", l.as_bytes()).unwrap(), Taken::Duplicate);
            }
        }
        c.commit(true).unwrap();
    }
    let mut db = open(&url).unwrap();
    let n = |db: &mut Box<dyn bandwarden::store::Backend>, sql: &str| {
        db.rows(sql, &[]).unwrap()[0][0].i64().unwrap()
    };
    assert_eq!(n(&mut db, "SELECT COUNT(*) FROM records"), lines.len() as i64);
    assert_eq!(n(&mut db, "SELECT COUNT(*) FROM intervals"), 120);
    drop(db);

    // import and report --db, in a database of their own (password from a file).
    let mut admin = open(&url).unwrap();
    admin.batch("CREATE DATABASE network").unwrap();
    drop(admin);
    let logs = reports::network_logs(&dir);
    let pwflag = pw.display().to_string();
    reports::import_and_compare(&server.url("network"), &logs, &["--db-password-file", &pwflag]);

    // Copies in and across batches (COPY then INSERT … ON CONFLICT DO NOTHING), in a database
    // of their own.
    let mut admin = open(&url).unwrap();
    admin.batch("CREATE DATABASE batches").unwrap();
    drop(admin);
    let batches = DbUrl::parse(&server.url("batches"), Some(PASSWORD.into())).unwrap();
    let dir = scratch("batches");
    reports::copies_in_batches(
        &batches,
        &server.url("batches"),
        &["--db-password-file", &pwflag],
        &dir,
    );
}
