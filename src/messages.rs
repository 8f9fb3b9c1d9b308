//! Notes to the user and the start-up instant: the bottom layer every other module may use.
//!
//! Library code mostly returns notes and errors and lets the command print them; what is printed
//! goes through here so that every line carries the program's prefix and no text that came from a
//! file or a flag can move the cursor, change colours or reach the clipboard of the terminal.

use std::sync::OnceLock;
use std::time::Instant;

/// When the process started, for the start-up figure `watch` reports.
pub static STARTED: OnceLock<Instant> = OnceLock::new();

/// Whether standard output was closed when the process started (`>&-`).
static STDOUT_CLOSED: OnceLock<bool> = OnceLock::new();

/// Records the start of the process (the first call wins), and whether standard output was
/// closed (`>&-`) when it started. A closed descriptor 1 would be taken by the next file the
/// process opens; it is held on `/dev/null` instead, and remembered, so nothing is written to a
/// file by mistake and output meant for stdout is refused with a clear word.
pub fn mark_start() -> Instant {
    STDOUT_CLOSED.get_or_init(|| {
        use std::os::fd::{AsFd, AsRawFd, IntoRawFd};
        let closed = std::io::stdout().as_fd().try_clone_to_owned().is_err();
        if closed {
            if let Ok(null) = std::fs::OpenOptions::new().write(true).open("/dev/null") {
                if null.as_raw_fd() == 1 {
                    let _ = null.into_raw_fd();
                }
            }
        }
        closed
    });
    *STARTED.get_or_init(Instant::now)
}

/// True when standard output was closed at start-up: whatever is written there is lost.
pub fn stdout_closed() -> bool {
    STDOUT_CLOSED.get().copied().unwrap_or(false)
}

/// Prints a non-fatal note for the user on stderr, with the program's prefix.
pub fn note(text: &str) {
    line_to_stderr(&format!("bandwarden: {}", sanitize_message(text)));
}

/// Writes one line to stderr and ignores failure: a stderr closed under us (`2>&1 | head`) must
/// not turn a note into a panic that skips flushing the log, and there is nowhere else to say it.
pub fn line_to_stderr(line: &str) {
    use std::io::Write;
    let _ = writeln!(std::io::stderr().lock(), "{line}");
}

/// Removes control characters (including ESC) from text that came from a file, so metadata
/// cannot move the cursor or change colours when shown in a terminal.
pub fn sanitize(text: &str) -> String {
    text.chars().map(|c| if c.is_control() { '?' } else { c }).collect()
}

/// As [`sanitize`], but keeps line breaks and tabs, which messages use for layout.
pub fn sanitize_message(text: &str) -> String {
    text.chars().map(|c| if c.is_control() && c != '\n' && c != '\t' { '?' } else { c }).collect()
}

/// Prints each of `notes` (see [`note`]).
pub fn notes(notes: &[String]) {
    notes.iter().for_each(|n| note(n));
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn control_characters_never_pass() {
        // ESC (CSI), BEL and an OSC 52 clipboard request: the three ways a string can act on a
        // terminal (ECMA-48 control functions; common practice to strip them).
        let hostile = "a\x1b[2Jb\x07c\x1b]52;c;aGk=\x07d";
        assert!(!sanitize(hostile).chars().any(|c| c.is_control()));
        assert!(!sanitize_message(hostile).chars().any(|c| c.is_control() && c != '\n'));
        assert_eq!(sanitize_message("two\nlines"), "two\nlines");
    }
}
