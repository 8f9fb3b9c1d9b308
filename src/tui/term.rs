//! The terminal's life: raw mode, the alternate screen and mouse reporting on the way in, and
//! all of it undone on the way out, whether by the quit key, an error, a panic or a signal.
//!
//! Output goes through a 64 KiB buffer that is flushed once per frame, so a frame leaves in one
//! write (one packet over SSH where it fits) instead of many small ones.

use crossterm::event::{DisableMouseCapture, EnableMouseCapture};
use crossterm::execute;
use crossterm::terminal::{
    disable_raw_mode, enable_raw_mode, EnterAlternateScreen, LeaveAlternateScreen,
};
use ratatui::backend::CrosstermBackend;
use ratatui::Terminal;
use std::io::{self, BufWriter, Stdout, Write};
use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::Once;

pub type Term = Terminal<CrosstermBackend<BufWriter<Stdout>>>;

/// Set while the terminal is in our hands, so restoring twice is harmless.
static ACTIVE: AtomicBool = AtomicBool::new(false);
static HOOK: Once = Once::new();

/// Takes over the terminal. The returned guard gives it back when dropped.
pub fn init(mouse: bool) -> io::Result<(Term, Guard)> {
    install_panic_hook();
    ACTIVE.store(true, Ordering::SeqCst);
    let guard = Guard;
    enable_raw_mode()?;
    execute!(io::stdout(), EnterAlternateScreen)?;
    if mouse {
        execute!(io::stdout(), EnableMouseCapture)?;
    }
    let backend = CrosstermBackend::new(BufWriter::with_capacity(1 << 16, io::stdout()));
    let term = Terminal::new(backend)?;
    Ok((term, guard))
}

/// Gives the terminal back when dropped (also on an early return with `?`).
pub struct Guard;

impl Drop for Guard {
    fn drop(&mut self) {
        restore();
    }
}

/// Undoes everything [`init`] did: scroll region, colours, mouse, alternate screen, raw mode,
/// cursor. Safe to call more than once.
pub fn restore() {
    if !ACTIVE.swap(false, Ordering::SeqCst) {
        return;
    }
    let mut out = io::stdout();
    // Whole-screen scroll region and plain attributes, in case a frame was cut short.
    let _ = out.write_all(b"\x1b[r\x1b[0m");
    let _ = execute!(out, DisableMouseCapture);
    let _ = disable_raw_mode();
    let _ = execute!(out, LeaveAlternateScreen, crossterm::cursor::Show);
    let _ = out.flush();
}

/// Restores the terminal before the panic message is printed, so it is readable.
fn install_panic_hook() {
    HOOK.call_once(|| {
        let previous = std::panic::take_hook();
        std::panic::set_hook(Box::new(move |info| {
            restore();
            previous(info);
        }));
    });
}
