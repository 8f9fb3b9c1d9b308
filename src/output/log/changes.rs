//! `watch --alarms`: the change alarms of `log --alarms` ([`super::alarms`]) while watching.
//! The run's occupancy tracker measures each plan channel's intervals from the monitor's own
//! rows; every interval goes through the channel's change watch, the alarms up are kept on a
//! [`ChangeBoard`] the screen reads, and with `--alarm-log` every `alarm` and `clear` record is
//! appended to that file as one JSON line, the same record `log` writes.

use super::alarms::AlarmLog;
use super::occupancy::interval_record;
use super::Record;
use crate::measure::change::alarm::Settings;
use crate::measure::change::baseline::SiteBaseline;
use crate::measure::occupancy::{Event, Occupancy};
use crate::pipeline::latest::RowSettings;
use crate::pipeline::occupancy::{OccupancyRequest, OccupancySetup};
use crate::pipeline::{Consumer, RunInfo};
use crate::plan::{Plan, DEFAULT_THRESHOLD_DB};
use crate::source::SourceInfo;
use anyhow::{bail, Result};
use std::io::{self, Write};
use std::sync::{Arc, Mutex, PoisonError};

/// An alarm that is up.
#[derive(Clone, Debug, PartialEq)]
pub struct OpenChange {
    pub channel: String,
    /// `floor_up`, `busier`, … as in the log.
    pub what: String,
    /// When the change began, by the test: UTC when the input's time is known, else seconds
    /// into the input.
    pub since: String,
}

/// The alarms up, shared between the run's thread (which raises and clears them) and the
/// screen's (which shows them).
#[derive(Clone, Debug, Default)]
pub struct ChangeBoard(Arc<Mutex<Vec<OpenChange>>>);

impl ChangeBoard {
    /// The alarms up, oldest first.
    pub fn open(&self) -> Vec<OpenChange> {
        self.0.lock().unwrap_or_else(PoisonError::into_inner).clone()
    }

    fn apply(&self, r: &Record) {
        let mut open = self.0.lock().unwrap_or_else(PoisonError::into_inner);
        match r {
            Record::Alarm(a) => open.push(OpenChange {
                channel: a.channel.clone(),
                what: a.what.clone(),
                since: a.since.clone().unwrap_or_else(|| format!("{:.0} s", a.since_s)),
            }),
            Record::Clear(a) => open.retain(|o| !(o.channel == a.channel && o.what == a.what)),
            _ => {}
        }
    }
}

/// The consumer: intervals in, alarms on the board and in the alarm log out.
pub struct ChangeWatch {
    alarms: AlarmLog,
    plan: Plan,
    board: ChangeBoard,
    out: Option<Box<dyn Write + Send>>,
    /// The write that failed, if any; no more records are attempted after it.
    failed: Option<io::Error>,
}

/// What `watch --alarms` needs: the tracker for the run, the consumer and its board.
pub struct WatchChanges {
    pub tracker: Occupancy,
    pub consumer: ChangeWatch,
    pub board: ChangeBoard,
}

impl WatchChanges {
    /// Follows every channel of `plan` in `interval_s` intervals, each measurement sample one
    /// of the monitor's rows (`rows`), so the tracker and the screen share one analysis.
    pub fn new(
        info: &SourceInfo,
        rows: &RowSettings,
        plan: &Plan,
        settings: Settings,
        seed: Option<&SiteBaseline>,
        interval_s: f64,
        out: Option<Box<dyn Write + Send>>,
    ) -> Result<WatchChanges> {
        if plan.channels.is_empty() {
            bail!("--alarms follows the channels of a plan; give --plan FILE or --channel");
        }
        let rate = info.sample_rate_hz;
        let dsp = rows.dsp();
        let frames = rows.engine(rate).frames_per_output.unwrap_or(1);
        let request = OccupancyRequest {
            dwell_s: Some(frames as f64 * dsp.hop() as f64 / rate),
            threshold_db: DEFAULT_THRESHOLD_DB,
            interval_s,
            hang_s: HANG_S,
        };
        let setup = OccupancySetup::new(info, &dsp, plan, &request)?;
        let board = ChangeBoard::default();
        let consumer = ChangeWatch {
            alarms: AlarmLog::new(settings, plan, seed),
            plan: plan.clone(),
            board: board.clone(),
            out,
            failed: None,
        };
        Ok(WatchChanges { tracker: setup.tracker(), consumer, board })
    }
}

/// The alarm log for the change records (`--alarm-log`), opened to append; the screen is on
/// standard output, so `-` is refused.
pub fn open_change_log(path: Option<&str>) -> Result<Option<Box<dyn Write + Send>>> {
    let Some(path) = path else { return Ok(None) };
    if path == "-" {
        bail!("--alarm-log - would write into the screen; name a file");
    }
    let file = std::fs::OpenOptions::new().create(true).append(true).open(path).map_err(|e| {
        anyhow::anyhow!(
            "cannot open '{}' for the alarm log ({e}); check the directory exists and is writable",
            crate::messages::sanitize(path)
        )
    })?;
    Ok(Some(Box::new(file)))
}

/// How long a channel stays occupied after its power falls (as `log`'s default `--hang`).
const HANG_S: f64 = 0.025;

impl ChangeWatch {
    fn write(&mut self, r: &Record) {
        let Some(out) = self.out.as_mut().filter(|_| self.failed.is_none()) else { return };
        let line = serde_json::to_string(r).map_err(io::Error::other);
        let written = line.and_then(|l| writeln!(out, "{l}")).and_then(|_| out.flush());
        self.failed = written.err();
    }
}

impl Consumer for ChangeWatch {
    fn event(&mut self, event: &Event, run: &RunInfo) -> io::Result<()> {
        let Event::Interval(i) = event else { return Ok(()) };
        let Some(channel) = self.plan.channels.get(i.channel) else { return Ok(()) };
        let r = interval_record(i, channel, &run.clock, None);
        for change in self.alarms.interval(i.start_sample, &r, &run.clock) {
            self.board.apply(&change);
            self.write(&change);
        }
        Ok(())
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::output::log::AlarmRecord;

    fn record(channel: &str, what: &str, since: Option<&str>) -> AlarmRecord {
        AlarmRecord {
            channel: channel.into(),
            what: what.into(),
            t_start_s: 10.0,
            t_end_s: 11.0,
            start: None,
            end: None,
            since_s: 9.0,
            since: since.map(str::to_string),
            statistic: 5.5,
            threshold: 5.0,
            baseline: 15.0,
            present: 55.0,
            unit: "%".into(),
            method: "cusum".into(),
        }
    }

    #[test]
    fn the_board_holds_the_alarms_up_until_they_clear() {
        let b = ChangeBoard::default();
        b.apply(&Record::Alarm(record("mast", "busier", Some("2031-04-17T06:01:30Z"))));
        b.apply(&Record::Alarm(record("band", "floor_up", None)));
        let open = b.open();
        assert_eq!(open.len(), 2);
        assert_eq!(open[0].since, "2031-04-17T06:01:30Z");
        assert_eq!(open[1].since, "9 s");
        b.apply(&Record::Clear(record("mast", "busier", None)));
        assert_eq!(b.open(), vec![open[1].clone()]);
    }
}
