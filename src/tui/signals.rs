//! SIGTERM, SIGINT and SIGHUP end the monitor cleanly: the UI loop sees a flag and leaves
//! through the normal path, which restores the terminal.
//!
//! When the terminal itself is gone (SIGHUP after an SSH drop or a closed window), the input
//! reader of the terminal library can spin on the dead descriptor and the loop never looks at the
//! flag again. So a watchdog gives the loop a moment, then restores what it can and exits with
//! the conventional status `128 + signal` (common practice for shells).

use super::term;
use signal_hook::consts::{SIGHUP, SIGINT, SIGTERM};
use signal_hook::iterator::{Handle, Signals};
use std::io;
use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::Arc;
use std::thread::JoinHandle;
use std::time::{Duration, Instant};

/// Time the UI loop gets to stop on its own after a signal.
pub const GRACE: Duration = Duration::from_millis(1500);

pub struct SignalWatch {
    stop: Arc<AtomicBool>,
    done: Arc<AtomicBool>,
    handle: Handle,
    thread: Option<JoinHandle<()>>,
}

impl SignalWatch {
    pub fn start() -> io::Result<SignalWatch> {
        let mut signals = Signals::new([SIGTERM, SIGINT, SIGHUP])?;
        let handle = signals.handle();
        let stop = Arc::new(AtomicBool::new(false));
        let done = Arc::new(AtomicBool::new(false));
        let (stop2, done2) = (stop.clone(), done.clone());
        let thread = std::thread::Builder::new().name("signals".into()).spawn(move || {
            for sig in signals.forever() {
                stop2.store(true, Ordering::SeqCst);
                let t0 = Instant::now();
                while !done2.load(Ordering::SeqCst) && t0.elapsed() < GRACE {
                    std::thread::sleep(Duration::from_millis(20));
                }
                if !done2.load(Ordering::SeqCst) {
                    term::restore();
                    std::process::exit(128 + sig);
                }
            }
        })?;
        Ok(SignalWatch { stop, done, handle, thread: Some(thread) })
    }

    /// The flag the UI loop checks.
    pub fn stop_flag(&self) -> &AtomicBool {
        &self.stop
    }
}

impl Drop for SignalWatch {
    /// The loop is over: stand the watchdog down and give the signals back.
    fn drop(&mut self) {
        self.done.store(true, Ordering::SeqCst);
        self.handle.close();
        if let Some(t) = self.thread.take() {
            let _ = t.join();
        }
    }
}
