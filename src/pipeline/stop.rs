//! Why a run stopped, and the signals that stop it.
//!
//! The first SIGINT, SIGTERM or SIGHUP (and SIGQUIT where a command asks for it) sets a flag the drive loop
//! reads between blocks, so the run ends through its normal path: open intervals and emissions are
//! written, logs flushed, the terminal restored. What a second signal, or a loop that does not
//! come back, does is the command's choice ([`Escalation`]): a log exits at once on a second
//! signal; the live monitor, whose terminal input may spin on a dead descriptor after an SSH drop,
//! restores the terminal itself after a grace period and exits. Either way the status is
//! `128 + signal` (common practice for shells).

use anyhow::{Context, Result};
use signal_hook::consts::{SIGHUP, SIGINT, SIGQUIT, SIGTERM};
use signal_hook::iterator::{Handle, Signals};
use std::sync::atomic::{AtomicBool, AtomicI32, Ordering};
use std::sync::Arc;
use std::thread::JoinHandle;
use std::time::{Duration, Instant};

/// Why a run ended, as written in the log's `stop` record.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum StopReason {
    EndOfInput,
    /// `--seconds` reached, or a consumer asked to stop.
    Limit,
    /// SIGINT.
    Interrupted,
    /// SIGTERM, SIGHUP (the session that started us is gone) or SIGQUIT.
    Terminated,
    /// The operator closed the live monitor.
    Closed,
    InputError,
}

impl StopReason {
    pub fn as_str(self) -> &'static str {
        match self {
            StopReason::EndOfInput => "end_of_input",
            StopReason::Limit => "limit",
            StopReason::Interrupted => "interrupted",
            StopReason::Terminated => "terminated",
            StopReason::Closed => "closed",
            StopReason::InputError => "input_error",
        }
    }

    /// True when the run was stopped from outside, by a signal or by the operator closing the
    /// monitor, rather than by its input or its own limits.
    pub fn is_signal(self) -> bool {
        matches!(self, StopReason::Interrupted | StopReason::Terminated | StopReason::Closed)
    }
}

/// What happens after the first signal if the run does not end by itself.
#[derive(Clone, Copy, Debug)]
pub enum Escalation {
    /// A second signal exits at once.
    SecondSignalExits,
    /// After `grace` without [`StopSignals`] being dropped, call `restore` and exit.
    Watchdog { grace: Duration, restore: fn() },
}

/// Installed signal handlers and the flag they set; dropping it gives the signals back.
pub struct StopSignals {
    caught: Arc<AtomicI32>,
    /// Set with the first signal, for a source that waits before the run begins.
    stopped: Arc<AtomicBool>,
    done: Arc<AtomicBool>,
    handle: Handle,
    thread: Option<JoinHandle<()>>,
}

impl StopSignals {
    /// Catches SIGINT, SIGTERM and SIGHUP (the SSH session or terminal that started us is gone:
    /// the run must still end cleanly), and SIGQUIT when `quit` is set (the monitor, which must
    /// restore the terminal rather than leave it raw with a core dump).
    pub fn install(quit: bool, escalation: Escalation) -> Result<StopSignals> {
        let mut list = vec![SIGINT, SIGTERM, SIGHUP];
        if quit {
            list.push(SIGQUIT);
        }
        let mut signals = Signals::new(&list).context("cannot install the signal handlers")?;
        let handle = signals.handle();
        let caught = Arc::new(AtomicI32::new(0));
        let done = Arc::new(AtomicBool::new(false));
        let stopped = Arc::new(AtomicBool::new(false));
        let (caught2, done2, stopped2) = (caught.clone(), done.clone(), stopped.clone());
        let thread = std::thread::Builder::new()
            .name("signals".into())
            .spawn(move || {
                for sig in signals.forever() {
                    let first =
                        caught2.compare_exchange(0, sig, Ordering::SeqCst, Ordering::SeqCst);
                    stopped2.store(true, Ordering::SeqCst);
                    match escalation {
                        Escalation::SecondSignalExits => {
                            if first.is_err() {
                                std::process::exit(128 + sig);
                            }
                        }
                        Escalation::Watchdog { grace, restore } => {
                            let t0 = Instant::now();
                            while !done2.load(Ordering::SeqCst) && t0.elapsed() < grace {
                                std::thread::sleep(Duration::from_millis(20));
                            }
                            if !done2.load(Ordering::SeqCst) {
                                restore();
                                std::process::exit(128 + sig);
                            }
                        }
                    }
                }
            })
            .context("cannot start the signal thread")?;
        Ok(StopSignals { caught, stopped, done, handle, thread: Some(thread) })
    }

    /// A flag set by the first signal caught (a source waiting to start looks at it).
    pub fn flag(&self) -> Arc<AtomicBool> {
        self.stopped.clone()
    }

    /// The reason a caught signal gives, if one came.
    pub fn reason(&self) -> Option<StopReason> {
        match self.caught.load(Ordering::SeqCst) {
            0 => None,
            SIGINT => Some(StopReason::Interrupted),
            _ => Some(StopReason::Terminated),
        }
    }

    /// The name of the signal caught, for messages.
    pub fn signal_name(&self) -> &'static str {
        match self.caught.load(Ordering::SeqCst) {
            SIGINT => "SIGINT",
            SIGTERM => "SIGTERM",
            SIGHUP => "SIGHUP",
            SIGQUIT => "SIGQUIT",
            _ => "a signal",
        }
    }
}

impl Drop for StopSignals {
    /// The run is over: stand the watchdog down and give the signals back.
    fn drop(&mut self) {
        self.done.store(true, Ordering::SeqCst);
        self.handle.close();
        if let Some(t) = self.thread.take() {
            let _ = t.join();
        }
    }
}
