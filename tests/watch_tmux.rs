//! End to end, as a user sees it: the real binary runs `watch` in a tmux pane at 80×24 and at
//! 160×48 on a SigMF recording with a tone at a known frequency, a known start time
//! (`core:datetime`) and a two-channel plan. The signal table must show that frequency with its
//! power column; the time must be the recording's UTC time; the channel panel must list the
//! channels; the history must scroll back and come live again; the quit key (or SIGTERM) must end
//! the program with status 0, leave the alternate screen and mouse reporting, and give the shell
//! back. Skipped (with a message) where tmux is not installed; in CI (`CI=true`) a missing tmux
//! fails.
//!
//! At 80×24 and 120×40 the Wrenhollow Ridge recording with its seven-channel plan checks that
//! a small screen stays usable: every channel is reachable in the channel panel (it scrolls,
//! saying how many more there are), a key that does nothing here says why, the keys that change
//! the scale, the row rate and the colours show their effect on the settings line, and a long
//! error message keeps its head and its cause.

use bandwarden::source::sigmf::meta_json;
use bandwarden::source::SampleFormat;
use bandwarden::testkit::{keyed_band, Keyed};
use std::path::{Path, PathBuf};
use std::process::Command;
use std::time::{Duration, Instant};

const RATE_HZ: f64 = 1e6;
const CENTER_HZ: f64 = 100e6;
/// 125 kHz above the centre: bin 512 of a 4096-point FFT at 1 MS/s, so the table reads it
/// exactly.
const TONE_OFFSET_HZ: f64 = 125e3;
/// The recording's `core:datetime`; it is half a second long and loops, so every row is timed
/// within its first second.
const START: &str = "2031-04-17T06:30:00Z";

fn tmux_available() -> bool {
    Command::new("tmux").arg("-V").output().is_ok_and(|o| o.status.success())
}

/// True (and said) when tmux is not installed, so the test is skipped; in CI (`CI=true`) a
/// missing tmux fails instead.
fn tmux_missing() -> bool {
    if tmux_available() {
        return false;
    }
    assert!(
        std::env::var("CI").is_err(),
        "tmux is not installed; .ci/run installs it (apt-get install tmux)"
    );
    eprintln!("skipping the tmux end-to-end test: tmux is not installed");
    true
}

/// A tmux server of our own (its own socket), killed when dropped.
struct Tmux {
    socket: String,
}

impl Tmux {
    fn start(tag: &str, cols: u16, rows: u16) -> Tmux {
        let t = Tmux { socket: format!("bw-e2e-{}-{tag}", std::process::id()) };
        let size = (cols.to_string(), rows.to_string());
        t.cmd(&[
            "-f",
            "/dev/null",
            "new-session",
            "-d",
            "-s",
            "e2e",
            "-x",
            &size.0,
            "-y",
            &size.1,
            "sh",
        ])
        .env("PS1", "$ ")
        .env("ENV", "/dev/null")
        .env_remove("COLORTERM")
        .status()
        .expect("starting tmux");
        t
    }

    fn cmd(&self, args: &[&str]) -> Command {
        let mut c = Command::new("tmux");
        c.arg("-L").arg(&self.socket).args(args);
        c
    }

    /// Once the shell is up, runs `bandwarden watch ARGS` in it, then echoes `BW-DONE-` and
    /// its exit status.
    fn watch(&self, args: &str) {
        self.wait_for("the shell prompt", Duration::from_secs(10), |s| !s.trim().is_empty());
        let line = format!("{} watch {args}; echo BW-DONE-$?", env!("CARGO_BIN_EXE_bandwarden"));
        self.keys(&[&line, "Enter"]);
    }

    fn keys(&self, keys: &[&str]) {
        let mut args = vec!["send-keys", "-t", "e2e"];
        args.extend_from_slice(keys);
        assert!(self.cmd(&args).status().unwrap().success());
    }

    fn screen(&self) -> String {
        let out = self.cmd(&["capture-pane", "-p", "-t", "e2e"]).output().unwrap();
        String::from_utf8_lossy(&out.stdout).into_owned()
    }

    fn pane_flag(&self, name: &str) -> String {
        let fmt = format!("#{{{name}}}");
        let out = self.cmd(&["display-message", "-p", "-t", "e2e", &fmt]).output().unwrap();
        String::from_utf8_lossy(&out.stdout).trim().to_string()
    }

    /// Polls the screen until `pred` holds; the last screen is in the panic message otherwise.
    fn wait_for(&self, what: &str, timeout: Duration, pred: impl Fn(&str) -> bool) -> String {
        let t0 = Instant::now();
        loop {
            let s = self.screen();
            if pred(&s) {
                return s;
            }
            assert!(t0.elapsed() < timeout, "timed out waiting for {what}; screen:\n{s}");
            std::thread::sleep(Duration::from_millis(200));
        }
    }
}

impl Drop for Tmux {
    fn drop(&mut self) {
        let _ = self.cmd(&["kill-server"]).status();
    }
}

/// Writes half a second of a −20 dBFS tone in faint noise as a cf32_le SigMF pair.
fn write_recording(dir: &Path) -> PathBuf {
    std::fs::create_dir_all(dir).unwrap();
    let n = (RATE_HZ / 2.0) as usize;
    // −20 dBFS is an amplitude of 0.1; the noise is −60 dBFS in total.
    let tone = Keyed::steady(TONE_OFFSET_HZ, -20.0);
    let samples = keyed_band(n, RATE_HZ, 1e-6, &[tone], 0x2545_f491_4f6c_dd1d);
    let mut bytes = Vec::new();
    SampleFormat::Cf32Le.encode(&samples, &mut bytes);
    let data = dir.join("tone.sigmf-data");
    std::fs::write(&data, bytes).unwrap();
    let start =
        time::OffsetDateTime::parse(START, &time::format_description::well_known::Rfc3339).unwrap();
    let meta =
        meta_json(SampleFormat::Cf32Le, RATE_HZ, CENTER_HZ, Some(start), "tone for the tmux test");
    let meta_path = dir.join("tone.sigmf-meta");
    std::fs::write(&meta_path, meta).unwrap();
    meta_path
}

/// The frequency (MHz) in the first row of the signal table, if it is on screen.
fn first_signal_mhz(screen: &str) -> Option<f64> {
    screen.lines().find_map(|l| {
        let mut words = l.split_whitespace();
        (words.next() == Some("1")).then_some(())?;
        let f: f64 = words.next()?.parse().ok()?;
        (words.next() == Some("MHz")).then_some(f)
    })
}

/// The recording's UTC time on the source line and in the waterfall's gutter; the channel
/// panel (`t`) with both channels; the time cursor (`<`) and back to live (`End`).
fn check_time_channels_and_history(tmux: &Tmux) {
    let wait = Duration::from_secs(20);
    let s = tmux.wait_for("UTC time", wait, |s| s.contains("06:30:00 UTC"));
    // The gutter labels the first line of each minute `HH:MM` (here the only minute).
    assert!(s.lines().any(|l| l.starts_with("06:30 ")), "{s}");
    tmux.keys(&["t"]);
    let s = tmux.wait_for("the channel panel", wait, |s| s.contains("Busy 1m"));
    let tone = s.lines().find(|l| l.starts_with(" 1 tone")).unwrap_or_else(|| panic!("{s}"));
    assert!(tone.contains("100.125000 MHz") && tone.contains("now"), "{tone}");
    // The tone is a steady −20 dBFS carrier: its channel reads it (less than 0.5 dB of noise).
    let power: f64 = tone.split_whitespace().nth(4).unwrap().parse().unwrap();
    assert!((power + 20.0).abs() < 0.5, "{tone}");
    assert!(s.contains(" 2 quiet"), "{s}");
    tmux.keys(&["t"]);
    tmux.wait_for("the signal table again", wait, |s| s.contains("Power dBFS"));
    tmux.keys(&["<"]);
    tmux.wait_for("the time cursor", wait, |s| s.contains("◀ 06:30:0") && s.contains("back"));
    assert!(tmux.screen().contains("FROZEN"));
    tmux.keys(&["End"]);
    tmux.wait_for("live again", wait, |s| !s.contains("FROZEN") && !s.contains("◀"));
}

/// The repository's demo recording and plan (the Wrenhollow Ridge scene).
fn demo_files() -> (String, String) {
    let root = env!("CARGO_MANIFEST_DIR");
    (
        format!("{root}/recordings/wrenhollow-demo.sigmf-meta"),
        format!("{root}/recordings/wrenhollow-plan.toml"),
    )
}

/// The last two lines of the screen: the marker line and the settings line.
fn bottom(screen: &str) -> (String, String) {
    let lines: Vec<&str> = screen.lines().collect();
    let n = lines.len();
    (lines[n - 2].to_string(), lines[n - 1].to_string())
}

fn small_screen_at(cols: u16, rows: u16) {
    if tmux_missing() {
        return;
    }
    let wait = Duration::from_secs(20);
    let dir = std::env::temp_dir().join(format!("bw-e2e-ev-{}-{cols}x{rows}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    let (rec, plan) = demo_files();
    let tmux = Tmux::start(&format!("small-{cols}x{rows}"), cols, rows);
    tmux.watch(&format!("{rec} --plan {plan} --loop --evidence-dir {}", dir.display()));
    tmux.wait_for("the signal table", Duration::from_secs(60), |s| s.contains("Power dBFS"));
    // The channel panel: seven channels, fewer rows; n walks them all into view.
    tmux.keys(&["t"]);
    let s = tmux.wait_for("the channel panel", wait, |s| s.contains("Busy 1m"));
    assert!(s.contains("more"), "no hint of the hidden channels:\n{s}");
    let names = ["ops", "yard", "gate", "ferry", "beacon", "telem", "backhaul"];
    for (i, name) in names.iter().enumerate() {
        tmux.keys(&["n"]);
        let row = format!("{:>2} {name}", i + 1);
        tmux.wait_for(&format!("channel {name} on screen"), wait, |s| {
            s.lines().any(|l| l.starts_with(&row)) && bottom(s).0.contains(name)
        });
    }
    // `r` does nothing here, and says why.
    tmux.keys(&["r"]);
    tmux.wait_for("why r does nothing", wait, |s| {
        bottom(s).0.contains("r orders the signal table") && bottom(s).0.contains("plan's order")
    });
    // The keys that change the picture show it on the settings line, compact at 80 columns.
    let settings = bottom(&tmux.screen()).1;
    assert!(settings.contains("20 rows/s") && settings.contains(" auto"), "{settings}");
    tmux.keys(&["s"]);
    tmux.wait_for("the slower row rate", wait, |s| bottom(s).1.contains("15 rows/s"));
    tmux.keys(&["k"]);
    tmux.wait_for("the next colour map", wait, |s| !bottom(s).1.contains("viridis"));
    tmux.keys(&["PageDown"]);
    tmux.wait_for("the manual range", wait, |s| {
        let l = bottom(s).1;
        !l.contains(" auto") && l.contains("dB")
    });
    // A failed write says what and why, however long the path: the folder is gone.
    std::fs::remove_dir_all(&dir).unwrap();
    tmux.keys(&["e"]);
    let s =
        tmux.wait_for("the evidence error", wait, |s| bottom(s).0.contains("evidence not written"));
    let msg = bottom(&s).0;
    assert!(msg.trim_end().ends_with("No such file or directory (os error 2)"), "{msg}");
    tmux.keys(&["q"]);
    let back = tmux.wait_for("the shell after quitting", wait, |s| s.contains("BW-DONE-0"));
    assert!(!back.contains("Busy 1m"), "{back}");
}

#[test]
fn every_channel_and_message_is_readable_at_80x24() {
    small_screen_at(80, 24);
}

#[test]
fn every_channel_and_message_is_readable_at_120x40() {
    small_screen_at(120, 40);
}

/// How the test ends the monitor.
#[derive(Clone, Copy, PartialEq)]
enum End {
    QuitKey,
    Sigterm,
}

fn run_at(cols: u16, rows: u16, end: End) {
    let t0 = Instant::now();
    if tmux_missing() {
        return;
    }
    let dir = std::env::temp_dir().join(format!("bw-e2e-{}-{cols}x{rows}", std::process::id()));
    let rec = write_recording(&dir);
    let tmux = Tmux::start(&format!("{cols}x{rows}"), cols, rows);
    tmux.wait_for("the shell prompt", Duration::from_secs(10), |s| !s.trim().is_empty());
    let line = format!(
        "{} watch {} --loop --fft 4096 --channel tone=100.125M:10k --channel quiet=100.3M:10k; \
         echo BW-DONE-$?",
        env!("CARGO_BIN_EXE_bandwarden"),
        rec.display()
    );
    tmux.keys(&[&line, "Enter"]);
    let expect_mhz = (CENTER_HZ + TONE_OFFSET_HZ) / 1e6;
    let screen = tmux.wait_for("the tone in the signal table", Duration::from_secs(60), |s| {
        first_signal_mhz(s).is_some_and(|f| (f - expect_mhz).abs() < 0.5e-3)
    });
    assert!(screen.contains("Power dBFS") && screen.contains("Peak dBFS"), "{screen}");
    assert_eq!(tmux.pane_flag("alternate_on"), "1", "the monitor runs on the alternate screen");
    check_time_channels_and_history(&tmux);
    match end {
        End::QuitKey => tmux.keys(&["q"]),
        End::Sigterm => {
            // The monitor is the shell's only child; signal it by its process id.
            let shell = tmux.pane_flag("pane_pid");
            let children = std::fs::read_to_string(format!("/proc/{shell}/task/{shell}/children"))
                .expect("reading the shell's children from /proc");
            let pid =
                children.split_whitespace().next().expect("the shell has a child").to_string();
            assert!(Command::new("kill").args(["-TERM", &pid]).status().unwrap().success());
        }
    }
    // The echo's output, not the command line that contains it (which may wrap so that
    // `BW-DONE-$?` starts a line): the status is a number.
    let status_line = |s: &str| {
        s.lines()
            .find(|l| l.strip_prefix("BW-DONE-").is_some_and(|n| n.trim().parse::<i32>().is_ok()))
            .map(str::to_owned)
    };
    let back = tmux.wait_for("the shell after quitting", Duration::from_secs(20), |s| {
        status_line(s).is_some()
    });
    assert_eq!(status_line(&back).as_deref(), Some("BW-DONE-0"), "exit status:\n{back}");
    assert!(!back.contains("Power dBFS"), "the monitor is still on screen:\n{back}");
    assert_eq!(tmux.pane_flag("alternate_on"), "0", "alternate screen left on");
    assert_eq!(tmux.pane_flag("mouse_any_flag"), "0", "mouse reporting left on");
    assert_eq!(tmux.pane_flag("pane_current_command"), "sh", "the shell has the pane again");
    drop(tmux);
    let _ = std::fs::remove_dir_all(&dir);
    eprintln!("{cols}x{rows}: passed in {:.1} s", t0.elapsed().as_secs_f64());
}

#[test]
fn tone_is_found_and_quit_restores_the_terminal_at_80x24() {
    run_at(80, 24, End::QuitKey);
}

#[test]
fn tone_is_found_and_quit_restores_the_terminal_at_160x48() {
    run_at(160, 48, End::QuitKey);
}

#[test]
fn sigterm_also_restores_the_terminal() {
    run_at(100, 30, End::Sigterm);
}

/// Channel alarms in the demo scene (src/source/demo.rs is its truth): the steady beacon
/// (−32 dBFS) stays over a −50 dBFS threshold, so it is one alarm from the start until the monitor
/// closes; in the telemetry channel the noise (about −54 dBFS) stays under −45 dBFS and the bursts
/// (−34 dBFS, 40 and 80 ms, gaps over 1 s) each open an alarm that ends after the 300 ms
/// hold-off. Every opening has its end record.
#[test]
fn channel_alarms_open_once_and_end_after_the_hold_off() {
    if tmux_missing() {
        return;
    }
    let dir = std::env::temp_dir().join(format!("bw-e2e-alarms-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    let plan = dir.join("plan.toml");
    std::fs::write(
        &plan,
        "[[channel]]\nname = \"beacon\"\ncenter = \"433.575M\"\nwidth = \"5k\"\nalarm_dbfs = -50\n\n\
         [[channel]]\nname = \"telem\"\ncenter = \"433.6375M\"\nwidth = \"12.5k\"\nalarm_dbfs = -45\n",
    )
    .unwrap();
    let log = dir.join("alarms.jsonl");
    let _ = std::fs::remove_file(&log);
    let (rec, _) = demo_files();
    let tmux = Tmux::start("alarms", 120, 40);
    tmux.wait_for("the shell prompt", Duration::from_secs(10), |s| !s.trim().is_empty());
    let line = format!(
        "{} watch {rec} --loop --plan {} --alarm-log {} --alarm-hold 300ms; echo BW-DONE-$?",
        env!("CARGO_BIN_EXE_bandwarden"),
        plan.display(),
        log.display()
    );
    tmux.keys(&[&line, "Enter"]);
    tmux.wait_for("the signal table", Duration::from_secs(60), |s| s.contains("Power dBFS"));
    // Wait for two telemetry alarms to end, then quit.
    let t0 = Instant::now();
    while std::fs::read_to_string(&log).unwrap_or_default().matches("\"telem\"").count() < 4 {
        assert!(t0.elapsed() < Duration::from_secs(30), "too few telemetry alarms");
        std::thread::sleep(Duration::from_millis(200));
    }
    tmux.keys(&["q"]);
    tmux.wait_for("the shell after quitting", Duration::from_secs(20), |s| s.contains("BW-DONE-0"));
    let text = std::fs::read_to_string(&log).unwrap();
    let recs: Vec<serde_json::Value> =
        text.lines().map(|l| serde_json::from_str(l).unwrap()).collect();
    let of = |name: &str| -> Vec<&serde_json::Value> {
        recs.iter().filter(|r| r["channel"] == name).collect()
    };
    let beacon = of("beacon");
    assert_eq!(beacon.len(), 2, "{text}");
    assert_eq!(
        (beacon[0]["kind"].as_str(), beacon[1]["kind"].as_str()),
        (Some("alarm"), Some("alarm_end"))
    );
    assert_eq!(beacon[1]["ended"], "closed", "{text}");
    let telem = of("telem");
    for pair in telem.chunks(2) {
        assert_eq!(pair[0]["kind"], "alarm", "{text}");
        if let Some(end) = pair.get(1) {
            assert_eq!(end["kind"], "alarm_end", "{text}");
            // A burst of at most 80 ms: its first and last rows over lie well within 0.3 s.
            assert!(end["duration_s"].as_f64().unwrap() < 0.3, "{text}");
            let peak = end["peak_power_dbfs"].as_f64().unwrap();
            assert!(peak > -45.0 && peak < -25.0, "{text}");
        }
    }
    assert!(telem.iter().filter(|r| r["ended"] == "quiet").count() >= 2, "{text}");
    let _ = std::fs::remove_dir_all(&dir);
}

/// `watch --alarms` on the planted scene of `tests/reference/alarms/` (written by
/// `scripts/make-alarm-scenes.py`, seeded numpy; truth.json: a +6 dB floor step on `hut` from
/// 70 s): at 80×24 the top line must show the change alarm as it is raised, and the alarm log
/// must hold the same `alarm` record `log --alarms` writes.
#[test]
fn change_alarms_show_on_the_top_line_and_in_the_alarm_log_at_80x24() {
    if tmux_missing() {
        return;
    }
    let dir = Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/reference/alarms");
    let truth: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(dir.join("truth.json")).unwrap()).unwrap();
    let step = &truth["steps"][0];
    assert_eq!((step["channel"].as_str(), step["what"].as_str()), (Some("hut"), Some("floor_up")));
    let log = std::env::temp_dir().join(format!("bw-e2e-changes-{}.jsonl", std::process::id()));
    let _ = std::fs::remove_file(&log);
    let tmux = Tmux::start("changes", 80, 24);
    tmux.wait_for("the shell prompt", Duration::from_secs(10), |s| !s.trim().is_empty());
    // Ten times the recorded rate: the step comes 7 s after the start.
    let line = format!(
        "{} watch {} --format ci8 --rate 8k --center 433.5M --start {} --plan {} --fft 256 \
         --speed 10 --alarms --interval 1s --alarm-log {}; echo BW-DONE-$?",
        env!("CARGO_BIN_EXE_bandwarden"),
        dir.join("hilltop.ci8").display(),
        truth["start"].as_str().unwrap(),
        dir.join("plan.toml").display(),
        log.display()
    );
    tmux.keys(&[&line, "Enter"]);
    let s = tmux.wait_for("the floor alarm on the top line", Duration::from_secs(60), |s| {
        s.lines().next().is_some_and(|l| l.contains("▲ hut floor_up since 06:01:"))
    });
    let top = s.lines().next().unwrap();
    assert!(top.chars().count() <= 80, "{top}");
    tmux.keys(&["q"]);
    tmux.wait_for("the shell after quitting", Duration::from_secs(20), |s| s.contains("BW-DONE-0"));
    let records: Vec<serde_json::Value> = std::fs::read_to_string(&log)
        .unwrap()
        .lines()
        .map(|l| serde_json::from_str(l).unwrap())
        .collect();
    let alarm = records
        .iter()
        .find(|r| r["kind"] == "alarm" && r["channel"] == "hut" && r["what"] == "floor_up")
        .unwrap_or_else(|| panic!("no floor_up alarm for hut in {records:?}"));
    // Raised within a minute of the step (issue 23's goal), dated from it.
    let from = step["start_s"].as_f64().unwrap();
    let at = alarm["t_end_s"].as_f64().unwrap();
    assert!(at >= from && at - from <= 60.0, "{alarm}");
    assert!(alarm["since"].as_str().unwrap().starts_with("2031-04-17T06:01:"), "{alarm}");
    let _ = std::fs::remove_file(&log);
}

/// The channels named or numbered on the screen's plan row (the line starting " plan "), ranges
/// (`1-3`) and lists (`1,2`) expanded, in plan numbers (from 1), sorted.
fn plan_row_channels(screen: &str, names: &[&str]) -> Vec<usize> {
    let row =
        screen.lines().find(|l| l.starts_with(" plan ")).unwrap_or_else(|| panic!("{screen}"));
    let mut out = Vec::new();
    let tokens = row[" plan ".len()..]
        .split(|c: char| !(c.is_ascii_alphanumeric() || c == ',' || c == '-'))
        .filter(|t| !t.is_empty());
    for token in tokens {
        if let Some(i) = names.iter().position(|n| *n == token) {
            out.push(i + 1);
            continue;
        }
        for part in token.split(',') {
            let (a, b) = part.split_once('-').unwrap_or((part, part));
            let (a, b): (usize, usize) = (
                a.parse().unwrap_or_else(|_| panic!("{row}")),
                b.parse().unwrap_or_else(|_| panic!("{row}")),
            );
            out.extend(a..=b);
        }
    }
    out.sort_unstable();
    out
}

/// The Wrenhollow Ridge plan seen over 4 MHz (the recording read as 4 MS/s, so the full span is
/// four times its own): ops, yard, gate and ferry lie 50 to 75 kHz apart, one to three columns
/// at 80 columns, yet every channel is named or numbered exactly once on the plan row; zoomed in
/// twice, the same holds.
fn plan_row_at(cols: u16, rows: u16) {
    if tmux_missing() {
        return;
    }
    let (rec, plan) = demo_files();
    let names = ["ops", "yard", "gate", "ferry", "beacon", "telem", "backhaul"];
    let tmux = Tmux::start(&format!("plan-{cols}x{rows}"), cols, rows);
    tmux.wait_for("the shell prompt", Duration::from_secs(10), |s| !s.trim().is_empty());
    let line = format!(
        "{} watch {rec} --plan {plan} --rate 4M --speed 0.25 --loop; echo BW-DONE-$?",
        env!("CARGO_BIN_EXE_bandwarden"),
    );
    tmux.keys(&[&line, "Enter"]);
    let wait = Duration::from_secs(60);
    // The top line says "view …" once zoomed in (and "span 4 MHz" before, where it fits).
    let top = |s: &str| s.lines().next().unwrap_or("").to_string();
    let s = tmux.wait_for("the 4 MHz span", wait, |s| {
        top(s).contains("4 MS/s") && !top(s).contains("view") && s.contains(" plan ")
    });
    assert_eq!(plan_row_channels(&s, &names), (1..=7).collect::<Vec<_>>(), "{s}");
    // Zoomed in around the marker: the channels still in view, each once.
    tmux.keys(&["+", "+"]);
    let s = tmux.wait_for("the narrower span", wait, |s| top(s).contains("view 1 MHz"));
    let shown = plan_row_channels(&s, &names);
    let mut once = shown.clone();
    once.dedup();
    assert!(!shown.is_empty() && once == shown, "{s}");
    tmux.keys(&["q"]);
    tmux.wait_for("the shell after quitting", Duration::from_secs(20), |s| s.contains("BW-DONE-0"));
}

#[test]
fn every_plan_channel_is_numbered_once_on_a_crowded_plan_row_at_80x24() {
    plan_row_at(80, 24);
}

#[test]
fn every_plan_channel_is_numbered_once_on_a_crowded_plan_row_at_160x48() {
    plan_row_at(160, 48);
}

/// Four steps of a Wrenhollow Ridge sweep, 800 kHz apart (the default 80 % of 1 MS/s each):
/// they tile 445.6 .. 448.8 MHz.
const SWEEP_CENTRES: [f64; 4] = [446.0e6, 446.8e6, 447.6e6, 448.4e6];
const SWEEP_DWELL: usize = 50_000;

/// A SigMF recording of three sweeps, one capture per dwell, tones at 446.2 and 447.7 MHz. The
/// last sweep's first capture is 500 samples, shorter than one 1000-point frame: the last row's
/// lowest step (445.6 .. 446.4 MHz) keeps the second sweep's levels, seen some 300 ms before the
/// row's end, more than the revisit time (the recording's length over three sweeps, 183 ms).
fn write_sweep(dir: &Path) -> PathBuf {
    write_sweep_of(dir, &SWEEP_CENTRES, 3, Some(8))
}

/// A SigMF recording of `sweeps` sweeps of `centres`, one capture per dwell, tones at 446.2 and
/// 447.7 MHz where a step sees them; capture `short` (if any) is 500 samples.
fn write_sweep_of(dir: &Path, centres: &[f64], sweeps: usize, short: Option<usize>) -> PathBuf {
    std::fs::create_dir_all(dir).unwrap();
    let tones = [(446.2e6, -30.0), (447.7e6, -35.0)];
    let (mut bytes, mut captures, mut at) = (Vec::new(), Vec::new(), 0usize);
    for k in 0..sweeps * centres.len() {
        let c = centres[k % centres.len()];
        let n = if Some(k) == short { 500 } else { SWEEP_DWELL };
        let carriers: Vec<Keyed> = tones
            .iter()
            .filter(|(f, _)| (f - c).abs() < RATE_HZ / 2.0)
            .map(|&(f, l)| Keyed::steady(f - c, l))
            .collect();
        SampleFormat::Cf32Le
            .encode(&keyed_band(n, RATE_HZ, 1e-7, &carriers, k as u64 + 1), &mut bytes);
        captures.push(format!(r#"{{"core:sample_start": {at}, "core:frequency": {c}}}"#));
        at += n;
    }
    std::fs::write(dir.join("sweep.sigmf-data"), bytes).unwrap();
    let meta = format!(
        r#"{{"global": {{"core:datatype": "cf32_le", "core:sample_rate": {RATE_HZ}, "core:version": "1.0.0", "core:description": "Wrenhollow Ridge sweep"}}, "captures": [{}], "annotations": []}}"#,
        captures.join(",")
    );
    let path = dir.join("sweep.sigmf-meta");
    std::fs::write(&path, meta).unwrap();
    path
}

#[test]
fn a_sweep_is_drawn_whole_with_its_old_bins_marked_at_80x24() {
    if tmux_missing() {
        return;
    }
    let dir = std::env::temp_dir().join(format!("bw-e2e-sweep-{}", std::process::id()));
    let rec = write_sweep(&dir);
    let tmux = Tmux::start("sweep", 80, 24);
    tmux.watch(&format!("{} --fft 1000", rec.display()));
    let s = tmux.wait_for("the end of the sweep", Duration::from_secs(60), |s| {
        s.contains("end of input") && s.lines().skip(1).any(|l| l.contains('┊'))
    });
    // The header says it is a sweep, its steps and revisit time, and what the marker means.
    assert!(s.contains("sweep 4 steps, revisit 184 ms, ┊ older"), "{s}");
    // The whole panorama is drawn: the axis runs over the steps' union, 445.6 .. 448.8 MHz.
    let axis = s.lines().find(|l| l.trim_start().starts_with("MHz")).unwrap_or_default();
    assert!(axis.contains("446.0") && axis.contains("448.5"), "{s}");
    // The marker stands on the lowest step's columns only (its quarter of the plot, GUTTER
    // columns in), in every waterfall line that shows the last row.
    let marked: Vec<&str> = s.lines().filter(|l| l.contains('┊') && !l.contains("older")).collect();
    assert!(!marked.is_empty(), "{s}");
    for l in &marked {
        let cols: Vec<usize> =
            l.chars().enumerate().filter(|(_, c)| *c == '┊').map(|(i, _)| i).collect();
        let plot = 80 - 6;
        assert!(
            cols.iter().all(|&c| c >= 6 && c < 6 + plot / 4 + 1),
            "a mark outside the lowest step: {cols:?} in\n{s}"
        );
    }
    tmux.keys(&["q"]);
    tmux.wait_for("the shell after quitting", Duration::from_secs(20), |s| s.contains("BW-DONE-0"));
    drop(tmux);
    let _ = std::fs::remove_dir_all(&dir);
}

#[test]
fn a_sweep_with_a_hole_draws_no_trace_over_it_at_120x40() {
    if tmux_missing() {
        return;
    }
    // Steps at 446.0, 446.8 and 448.4 MHz: 445.6 .. 447.2 MHz, a hole, 448.0 .. 448.8 MHz.
    let dir = std::env::temp_dir().join(format!("bw-e2e-hole-{}", std::process::id()));
    let rec = write_sweep_of(&dir, &[446.0e6, 446.8e6, 448.4e6], 3, None);
    let tmux = Tmux::start("hole", 120, 40);
    tmux.watch(&format!("{} --fft 1000", rec.display()));
    let s = tmux.wait_for("the end of the sweep", Duration::from_secs(60), |s| {
        s.contains("end of input") && s.lines().skip(1).any(|l| l.contains('┊'))
    });
    // The spectrum's lines (after the header and its legend, down to the frequency axis): no
    // trace (braille dots) over the middle of the hole, 447.3 .. 447.9 MHz, a share 0.53 ..
    // 0.72 of the plot; the trace is drawn on either side of it.
    let lines: Vec<&str> = s.lines().collect();
    let axis = lines.iter().position(|l| l.trim_start().starts_with("MHz")).expect("an axis");
    let plot = 120 - 6;
    let (from, to) = (6 + plot * 53 / 100, 6 + plot * 72 / 100);
    let braille = |c: char| ('\u{2801}'..='\u{28ff}').contains(&c);
    let mut beside = 0;
    for l in lines[1..axis].iter().filter(|l| !l.contains("average")) {
        let chars: Vec<char> = l.chars().collect();
        let inside = chars.get(from..to.min(chars.len())).unwrap_or(&[]);
        assert!(!inside.iter().any(|&c| braille(c)), "a trace over the hole:\n{s}");
        beside += chars.iter().take(from).filter(|&&c| braille(c)).count();
    }
    assert!(beside > 0, "no trace beside the hole:\n{s}");
    tmux.keys(&["q"]);
    tmux.wait_for("the shell after quitting", Duration::from_secs(20), |s| s.contains("BW-DONE-0"));
    drop(tmux);
    let _ = std::fs::remove_dir_all(&dir);
}
