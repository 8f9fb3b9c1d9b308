//! The live terminal monitor behind `bandwarden watch`.
//!
//! Threads: the reader feeds the pipeline's run on its own thread
//! ([`crate::pipeline::latest::RowFeed`]), which sends one averaged spectrum per waterfall row to
//! this, the UI thread, over a small queue where the newest row wins. The UI never blocks the DSP.
//!
//! Each frame (paced by `--fps`) the UI takes every queued row, handles keys and the mouse,
//! redraws what changed through ratatui's cell diff, and brings the waterfall up to date with
//! the scrolling [`painter`]. The cost that matters over SSH is bytes per second; the README's
//! "Watching live" section has the figures and `scripts/ssh-bytes` measures them.

pub mod app;
pub mod channels;
pub mod colour;
pub mod history;
pub mod input;
pub mod layout;
pub mod painter;
pub mod state;
pub mod term;
pub mod timeline;
pub mod traces;
pub mod view;
pub mod widgets;

use app::App;
use crossbeam_channel::TryRecvError;
use crossterm::event::{self, Event};
use layout::Screen;
use painter::Painter;
use ratatui::layout::Rect;
use std::io::Write;
use std::sync::atomic::Ordering;
use std::time::{Duration, Instant};

use crate::pipeline::latest::RowFeed;
use crate::pipeline::stop::{Escalation, StopSignals};
use crate::source::reader::ReaderStats;

/// How the monitor draws.
#[derive(Clone, Copy, Debug)]
pub struct RunOptions {
    /// Frames per second at most.
    pub fps: f64,
    /// Scroll the waterfall with the terminal's scroll region (else: cell by cell).
    pub scroll_region: bool,
    pub mouse: bool,
}

/// A symbol no widget draws, marking every cell of the diff's previous picture as stale.
const STALE: &str = "\u{fffd}";

/// Time the UI loop gets to stop on its own after a signal: when the terminal itself is gone
/// (SIGHUP after an SSH drop or a closed window), the terminal library's input reader can spin on
/// the dead descriptor and the loop never looks at the flag again.
const GRACE: Duration = Duration::from_millis(1500);

/// Longest wait for input before checking the signal flag and the clock again.
const POLL_SLICE: Duration = Duration::from_millis(50);

/// Runs the monitor until the user quits or a signal (SIGTERM, SIGINT, SIGHUP) asks it to stop.
/// The terminal is restored on every way out, panics included.
pub fn run(
    mut app: App,
    dsp: &RowFeed,
    reader: &ReaderStats,
    opts: RunOptions,
) -> anyhow::Result<()> {
    // Drop order: the terminal guard first (restore), then the signal watchdog.
    let watch =
        StopSignals::install(true, Escalation::Watchdog { grace: GRACE, restore: term::restore })?;
    let started = Instant::now();
    let mut first_frame = None;
    let result = {
        let (mut term, _guard) = term::init(opts.mouse)?;
        event_loop(&mut term, &mut app, dsp, reader, opts, &watch, &mut first_frame)
    };
    // Open alarms end with the monitor, each with its record.
    app.close_alarms();
    // A failed alarm log was said on screen; it is an error of the run too.
    let result = match app.alarm_log_error() {
        Some(e) if result.is_ok() => {
            Err(anyhow::anyhow!("the alarm log could not be written: {e}"))
        }
        _ => result,
    };
    let process_start = *crate::messages::STARTED.get_or_init(|| started);
    // The terminal is restored now: leave one line on stderr saying what was seen and lost, so
    // that a session (or a script) can tell whether the monitor kept up.
    crate::messages::line_to_stderr(&format!(
        "bandwarden: watched {:.1} s: {} samples read, {} dropped, {} waterfall rows skipped; \
         first frame {} ms after start",
        started.elapsed().as_secs_f64(),
        reader.samples.load(Ordering::Relaxed),
        reader.dropped.load(Ordering::Relaxed),
        dsp.skipped.load(Ordering::Relaxed),
        first_frame.map_or("never drawn".to_string(), |t: Instant| {
            format!("{}", t.duration_since(process_start).as_millis())
        })
    ));
    result
}

fn event_loop(
    term: &mut term::Term,
    app: &mut App,
    dsp: &RowFeed,
    reader: &ReaderStats,
    opts: RunOptions,
    stop: &StopSignals,
    first_frame: &mut Option<Instant>,
) -> anyhow::Result<()> {
    let frame = Duration::from_secs_f64(1.0 / opts.fps);
    let mut painter = Painter::default();
    let mut drawn_mode = None;
    let mut out = Vec::with_capacity(1 << 16);
    let mut next = Instant::now();
    loop {
        // Input until the next frame is due.
        loop {
            if stop.reason().is_some() || app.quitting() {
                return Ok(());
            }
            let now = Instant::now();
            if now >= next {
                break;
            }
            if event::poll((next - now).min(POLL_SLICE))? {
                handle_event(app, event::read()?);
            }
        }
        let now = Instant::now();
        next = (next + frame).max(now);
        take_rows(app, dsp);
        app.set_losses(reader.dropped.load(Ordering::Relaxed), dsp.skipped.load(Ordering::Relaxed));
        if let Some(n) = reader.take_rate_note() {
            app.say_for(n, Duration::from_secs(60));
        }
        if let Some(p) = reader.problem() {
            // The input failed (a wrong --format): say so where notices go, for as long as the
            // screen stays up, instead of waiting for samples that will never come.
            app.hold_notice(format!("input stopped: {p}"));
        }
        app.tick(now);
        if let Some(s) = app.take_pending_settings() {
            dsp.apply(&s);
        }
        draw(term, app, &mut painter, &mut drawn_mode, &mut out, opts)?;
        // The first frame with spectrum data on it is the one a user waits for.
        if first_frame.is_none() && app.has_rows() {
            *first_frame = Some(Instant::now());
        }
        app.count_frame(now);
    }
}

fn handle_event(app: &mut App, ev: Event) {
    let intent = match ev {
        Event::Key(k) => input::intent_for_key(k, app.help_open()),
        Event::Mouse(m) => input::intent_for_mouse(m),
        _ => None,
    };
    if let Some(i) = intent {
        app.apply(i);
    }
}

/// Takes every queued row; notes the end of the input.
fn take_rows(app: &mut App, dsp: &RowFeed) {
    loop {
        match dsp.rows.try_recv() {
            Ok(row) => app.push_row(row),
            Err(TryRecvError::Empty) => return,
            Err(TryRecvError::Disconnected) => {
                app.input_ended();
                return;
            }
        }
    }
}

/// What decides whether the cell diff's and the painter's picture of the screen can be trusted:
/// the screen size, the layout and whether the help is open.
type DrawnMode = (Rect, Option<Screen>, bool);

fn draw(
    term: &mut term::Term,
    app: &mut App,
    painter: &mut Painter,
    drawn_mode: &mut Option<DrawnMode>,
    out: &mut Vec<u8>,
    opts: RunOptions,
) -> anyhow::Result<()> {
    // Resize now rather than inside `draw`, whose clearing would wipe the painter's lines.
    term.autoresize()?;
    let size = term.size()?;
    let area = Rect::new(0, 0, size.width, size.height);
    let screen = Screen::split(area, app.plan_row());
    app.set_screen(screen, opts.scroll_region && screen.is_some());
    let mode = (area, screen, app.help_open());
    if *drawn_mode != Some(mode) {
        // The layout moved or the help opened or closed: start from a blank screen, have the
        // painter draw every line and the cell diff send every cell (its idea of the screen
        // becomes cells that match nothing, so blanks over painted lines are sent too).
        term.backend_mut().write_all(b"\x1b[0m\x1b[2J")?;
        for cell in term.current_buffer_mut().content.iter_mut() {
            cell.set_symbol(STALE);
        }
        term.swap_buffers();
        painter.invalidate();
        *drawn_mode = Some(mode);
    }
    // The waterfall goes first, so the help overlay lands on top of it; while the help is open
    // the waterfall holds still (drawn once), which costs nothing over the wire.
    if let (true, Some(s), Some(plot)) = (app.waterfall_painted(), screen, app.waterfall_plot()) {
        if !app.help_open() || !painter.is_valid() {
            out.clear();
            painter.paint(out, s.waterfall, app.waterfall_epoch(), &plot);
            term.backend_mut().write_all(out)?;
        }
    }
    // An alarm onset rings the terminal's bell once.
    if app.take_bells() > 0 {
        term.backend_mut().write_all(b"\x07")?;
    }
    // Draws the rest and flushes everything as one write.
    term.draw(|f| f.render_widget(&app.screen_view(f.area()), f.area()))?;
    Ok(())
}
