//! `watch` refuses bad settings, plans and inputs through the real binary with one `bandwarden:`
//! line before it touches the terminal, and says plainly when there is no terminal to draw on.

use std::process::{Command, Output};

fn watch(args: &[&str]) -> Output {
    Command::new(env!("CARGO_BIN_EXE_bandwarden")).arg("watch").args(args).output().unwrap()
}

fn refused(o: &Output, needles: &[&str]) {
    let err = String::from_utf8_lossy(&o.stderr);
    assert_eq!(o.status.code(), Some(1), "stderr: {err}");
    assert!(err.starts_with("bandwarden: "), "unprefixed: {err}");
    assert!(!err.contains("panicked"), "{err}");
    assert_eq!(err.lines().count(), 1, "one line: {err}");
    for n in needles {
        assert!(err.contains(n), "stderr lacks '{n}': {err}");
    }
    assert!(o.stdout.is_empty(), "nothing drawn");
}

#[test]
fn bad_settings_name_the_range() {
    refused(&watch(&["--fps", "0"]), &["--fps 0", "1 ..= 60"]);
    refused(&watch(&["--row-rate", "500"]), &["--row-rate", "0.1 ..= 200"]);
    refused(&watch(&["--fft", "8"]), &["FFT size 8"]);
}

#[test]
fn plans_are_checked_before_the_screen() {
    refused(&watch(&["--plan", "/nonexistent/site.toml"]), &["cannot read plan", "site.toml"]);
    // The demo scene spans 432.3 .. 434.7 MHz: a channel at 100 MHz is a mistake.
    refused(&watch(&["--channel", "far=100M:25k"]), &["'far'", "outside the captured span"]);
}

#[test]
fn the_evidence_folder_is_checked_before_the_screen() {
    refused(
        &watch(&["--evidence-dir", "/nonexistent/evidence"]),
        &["--evidence-dir /nonexistent/evidence", "no such folder"],
    );
    let file = std::env::temp_dir().join(format!("bw-not-a-folder-{}", std::process::id()));
    std::fs::write(&file, b"x").unwrap();
    refused(&watch(&["--evidence-dir", file.to_str().unwrap()]), &["is not a folder"]);
    let _ = std::fs::remove_file(&file);
}

#[test]
fn bad_inputs_are_reported_before_the_screen() {
    refused(&watch(&["/nonexistent/capture.sigmf-meta"]), &["capture.sigmf-meta"]);
    refused(&watch(&["-"]), &["stdin needs --format"]);
}

#[test]
fn without_a_terminal_watch_says_so_and_plain_bandwarden_reports() {
    // Under `cargo test` standard output is a pipe.
    refused(&watch(&[]), &["standard output is not one", "bandwarden measure"]);
    let o = Command::new(env!("CARGO_BIN_EXE_bandwarden")).output().unwrap();
    assert!(o.status.success());
    let err = String::from_utf8_lossy(&o.stderr);
    assert!(err.starts_with("bandwarden: standard output is not a terminal"), "{err}");
    assert!(!o.stdout.is_empty(), "the report is printed");
}
