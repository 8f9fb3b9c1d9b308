//! The occupancy log as a pipeline consumer: the run's settings, then every interval, emission
//! and gap as it becomes final, then why the run stopped. The record schema is in [`crate::output::log`].

use crate::measure::calibration::Calibration;
use crate::measure::occupancy::{
    Event, IntervalSummary, FLOOR_MEMORY_S, FLOOR_SMOOTHING_S, OBW_PERCENT,
};
use crate::measure::panorama::{view_times, Grid, ViewTimes};
use crate::output::class_fields::ClassFields;
use crate::output::levels::round_to;
use crate::output::log::alarms::AlarmLog;
use crate::output::log::rotation::Rotation;
use crate::output::log::{
    CaptureRecord, ChannelRecord, DroppedRecord, EmissionRecord, IntervalRecord, LogWriter,
    PanoramaSetup, Record, Stamped, StartRecord, StopRecord,
};
use crate::pipeline::clock::rfc3339_ms;
use crate::pipeline::occupancy::OccupancySetup;
use crate::pipeline::stitch::grid_of;
use crate::pipeline::{Consumer, GapCause, Letter, RunEnd, RunInfo};
use crate::plan::Plan;
use crate::source::reader::Block;
use crate::source::tuning::Tuning;
use crate::units::db;
use std::io::{self, Write};
use time::OffsetDateTime;

/// The log's record of one interval of the plan channel `l`.
pub fn interval_record(
    i: &IntervalSummary,
    l: &crate::plan::Channel,
    c: &crate::pipeline::clock::Clock,
    calibration: Option<&Calibration>,
) -> IntervalRecord {
    // An interval whose input was all lost, or of a panorama's channel never in view, has no
    // level and no occupancy.
    let measured = i.samples > 0 && i.in_view;
    let mean_dbfs = measured.then(|| round_to(db(i.mean_power), 2));
    let peak_dbfs = measured.then(|| round_to(db(i.peak_power), 2));
    let floor = measured.then(|| round_to(db(i.noise_density), 2));
    let channel_floor =
        (measured && i.quiet_samples > 0).then(|| round_to(db(i.quiet_power / l.width_hz), 2));
    // dBm twins at the channel's centre, when calibrated.
    let dbm = |v: Option<f64>| {
        let cal = calibration?;
        v.map(|v| round_to(v + cal.offset_db(l.center_hz), 2))
    };
    IntervalRecord {
        channel: l.name.clone(),
        center_hz: l.center_hz,
        width_hz: l.width_hz,
        t_start_s: c.seconds(i.start_sample),
        t_end_s: c.seconds(i.end_sample),
        start: c.stamp(i.start_sample),
        end: c.stamp_end(i.end_sample),
        occupancy_pct: measured.then(|| round_to(i.occupancy_pct(), 3)),
        mean_dbfs,
        peak_dbfs,
        noise_floor_dbfs_per_hz: floor,
        // A panorama's channel never in view had no sample measured.
        samples: if i.in_view { i.samples } else { 0 },
        // Shares to a thousandth of a sample: finer says nothing.
        occupied_samples: (i.occupied * 1000.0).round() / 1000.0,
        dropped_samples: i.dropped_samples,
        partial: i.partial,
        channel_floor_dbfs_per_hz: channel_floor,
        mean_dbm: dbm(mean_dbfs),
        peak_dbm: dbm(peak_dbfs),
        noise_floor_dbm_per_hz: dbm(floor),
        channel_floor_dbm_per_hz: dbm(channel_floor),
        observation_s: None,
        revisit_s: None,
        state: None,
    }
}

/// Whatever else takes every record the log writes, in order, once each (a publisher). It is
/// called after the line is in the local file, which stays the source of truth; it must not
/// block (the run waits for it).
pub trait RecordTap {
    fn record(&mut self, line: &Stamped);
}

/// Writes the log of one run, into one file or a rotated series ([`crate::output::log::rotation`]).
pub struct OccupancyLog<W: Write> {
    writer: Option<LogWriter<W>>,
    rotation: Option<Rotation<W>>,
    /// The `start` and `channel` records, which open every file of a rotated log.
    headers: Vec<Stamped>,
    plan: Plan,
    setup: OccupancySetup,
    site: Option<String>,
    run_id: String,
    next_seq: u64,
    /// Whatever else takes every record (a publisher, the metrics), in the order added.
    taps: Vec<Box<dyn RecordTap>>,
    /// Gaps not yet written, at most one per cause (see [`GAP_MERGE_S`]).
    pending_gaps: Vec<PendingGap>,
    /// The run, as told at its start, for writing gathered gaps between its calls.
    run_info: Option<RunInfo>,
    /// Of a panorama, per plan channel: how long it is in view (see [`ViewTimes`]).
    views: Vec<Option<ViewTimes>>,
    /// Change alarms (`--alarms`): fed every interval record.
    alarms: Option<AlarmLog>,
    /// dBFS → dBm: with it every level gets a `_dbm` twin.
    calibration: Option<Calibration>,
}

/// Gaps of one cause that begin within this many seconds of input of the first one are written
/// as one `dropped` record (their lost samples summed, their number in `gaps`). A NaN now and then
/// in a float input, or a network link going up and down, would otherwise write a line per hole:
/// this way a log holds at most one `dropped` record per cause per second of input, whatever
/// the input, and a record is written at most about a second (of input) after its gap began.
pub const GAP_MERGE_S: f64 = 1.0;

/// Gaps of one cause gathered for one `dropped` record.
#[derive(Clone, Copy, Debug)]
struct PendingGap {
    cause: GapCause,
    from: u64,
    to: u64,
    lost: u64,
    gaps: u64,
}

/// An id for a run of the log: its UTC start time to the second and the process id.
pub fn new_run_id() -> String {
    let now = OffsetDateTime::now_utc();
    format!(
        "{:04}{:02}{:02}T{:02}{:02}{:02}Z-{}",
        now.year(),
        u8::from(now.month()),
        now.day(),
        now.hour(),
        now.minute(),
        now.second(),
        std::process::id()
    )
}

impl<W: Write> OccupancyLog<W> {
    pub fn new(writer: LogWriter<W>, plan: &Plan, setup: &OccupancySetup) -> OccupancyLog<W> {
        OccupancyLog { writer: Some(writer), ..OccupancyLog::unopened(None, plan, setup) }
    }

    /// A log whose files are opened by `rotation` as the run goes on.
    pub fn rotating(rotation: Rotation<W>, plan: &Plan, setup: &OccupancySetup) -> OccupancyLog<W> {
        OccupancyLog::unopened(Some(rotation), plan, setup)
    }

    fn unopened(
        rotation: Option<Rotation<W>>,
        plan: &Plan,
        setup: &OccupancySetup,
    ) -> OccupancyLog<W> {
        OccupancyLog {
            writer: None,
            rotation,
            headers: Vec::new(),
            plan: plan.clone(),
            setup: setup.clone(),
            site: None,
            run_id: new_run_id(),
            next_seq: 0,
            taps: Vec::new(),
            pending_gaps: Vec::new(),
            run_info: None,
            views: Vec::new(),
            alarms: None,
            calibration: None,
        }
    }

    /// Adds levels in dBm beside the dBFS ones, and names the calibration in the start record.
    pub fn with_calibration(mut self, calibration: Option<Calibration>) -> Self {
        self.calibration = calibration;
        self
    }

    /// `dbfs` (already rounded) in dBm at `freq_hz`, rounded alike; `None` without a
    /// calibration.
    fn dbm(&self, dbfs: Option<f64>, freq_hz: f64) -> Option<f64> {
        let cal = self.calibration.as_ref()?;
        dbfs.map(|v| round_to(v + cal.offset_db(freq_hz), 2))
    }

    /// Names the site in the start record.
    pub fn with_site(mut self, site: Option<String>) -> Self {
        self.site = site;
        self
    }

    /// Follows every interval with the change alarms of `alarms`, whose records go into the log.
    pub fn with_alarms(mut self, alarms: AlarmLog) -> Self {
        self.alarms = Some(alarms);
        self
    }

    /// Hands every record to `tap` too, after it is written (after any taps added before).
    pub fn with_tap(mut self, tap: Box<dyn RecordTap>) -> Self {
        self.taps.push(tap);
        self
    }

    /// The record with the next id.
    fn stamp(&mut self, record: Record) -> Stamped {
        let seq = self.next_seq;
        self.next_seq += 1;
        Stamped { record, run: self.run_id.clone(), seq }
    }

    /// Writes a line into the open file (`None` when no file is open) and hands it to the tap.
    fn put(&mut self, line: &Stamped) -> io::Result<()> {
        match self.writer.as_mut() {
            Some(w) => w.write(line)?,
            None => return Err(io::Error::other("the log has no file open")),
        }
        for t in &mut self.taps {
            t.record(line);
        }
        Ok(())
    }

    /// The writer of the (last) file.
    pub fn into_writer(self) -> Option<W> {
        self.writer.map(LogWriter::into_inner)
    }

    /// Writes a record whose first sample is `sample` (`None`: the closing record, which stays
    /// in the open file), starting a new file first when the rotation says so.
    fn emit(&mut self, record: Record, sample: Option<u64>, run: &RunInfo) -> io::Result<()> {
        if let Some(sample) = sample {
            self.rotate_if_due(sample, run)?;
        }
        let line = self.stamp(record);
        self.put(&line)
    }

    /// Opens the next file of a rotated log, headers first, when a record at `sample` is due
    /// in one (the first call always opens one).
    fn rotate_if_due(&mut self, sample: u64, run: &RunInfo) -> io::Result<()> {
        let Some(rotation) = self.rotation.as_mut() else { return Ok(()) };
        let at = run.clock.time(sample).unwrap_or_else(OffsetDateTime::now_utc);
        let written = self.writer.as_ref().map(LogWriter::bytes_written);
        if let Some(mut next) = rotation.next_file(at, written)? {
            for h in &self.headers {
                next.write(h)?;
            }
            self.writer = Some(next);
        }
        Ok(())
    }

    fn start_record(&self, run: &RunInfo) -> StartRecord {
        let s = &self.setup;
        let src = &run.source;
        let panorama = match (&src.tuning, grid_of(src, s.engine.fft_size)) {
            (Some(t), Ok(Some(grid))) => Some(panorama_setup(t, &grid, src.sample_rate_hz)),
            _ => None,
        };
        // A sweep's start record names where the receiver began: the first step's centre (a raw
        // stream's own `--center` means nothing once a hop plan gives absolute centres).
        let center_hz = match (&panorama, src.tuning.as_ref().and_then(|t| t.steps.first())) {
            (Some(_), Some(first)) => first.center_hz,
            _ => src.center_hz,
        };
        StartRecord {
            version: env!("CARGO_PKG_VERSION").to_string(),
            site: self.site.clone(),
            source: run.source.label.clone(),
            sample_rate_hz: s.sample_rate_hz,
            center_hz,
            fft_size: s.engine.fft_size,
            window: s.engine.window.to_string(),
            overlap: s.engine.overlap,
            rbw_hz: round_to(s.rbw_hz, 3),
            dwell_s: s.dwell_s(),
            frames_per_sample: s.engine.frames_per_output.unwrap_or(1),
            interval_s: s.interval_s,
            hang_s: s.hang_s,
            threshold_db: s.default_threshold_db,
            obw_percent: OBW_PERCENT,
            floor_memory_s: FLOOR_MEMORY_S,
            floor_smoothing_s: FLOOR_SMOOTHING_S,
            t_start_s: 0.0,
            start: run.clock.start.and_then(rfc3339_ms),
            time_source: run.time_source.as_str().to_string(),
            calibration: self.calibration.as_ref().map(|c| c.origin.clone()),
            level_offset_db: self.calibration.as_ref().map(|c| round_to(c.offset_db(center_hz), 3)),
            panorama,
        }
    }

    /// The record of an event; `None` for the start of an emission (its record comes when it
    /// ends).
    fn record(&self, event: &Event, run: &RunInfo) -> Option<Record> {
        let c = &run.clock;
        match event {
            Event::Interval(i) => {
                let l = &self.plan.channels[i.channel];
                let mut r = interval_record(i, l, c, self.calibration.as_ref());
                match self.views.get(i.channel) {
                    Some(Some(v)) if i.in_view => {
                        // One measurement sample per sweep: each is one sweep's visits.
                        r.observation_s =
                            Some(round_to(i.samples as f64 * v.observation_per_sweep_s, 6));
                        r.revisit_s = v.revisit_s.map(|s| round_to(s, 6));
                        r.state = Some("measured".into());
                    }
                    // A panorama's channel never in view: no observation time at all.
                    Some(_) => {
                        r.observation_s = Some(0.0);
                        r.state = Some("not_measured".into());
                    }
                    None => {}
                }
                Some(Record::Interval(r))
            }
            Event::Emission(e) => {
                let l = &self.plan.channels[e.channel];
                let peak_dbfs = round_to(db(e.peak_power), 2);
                let mean_dbfs = round_to(db(e.mean_power), 2);
                Some(Record::Emission(EmissionRecord {
                    channel: l.name.clone(),
                    center_hz: l.center_hz,
                    t_start_s: c.seconds(e.start_sample),
                    t_end_s: c.seconds(e.end_sample),
                    start: c.stamp(e.start_sample),
                    end: c.stamp_end(e.end_sample),
                    duration_s: (e.end_sample - e.start_sample) as f64 / c.rate,
                    peak_dbfs,
                    mean_dbfs,
                    peak_dbm: self.dbm(Some(peak_dbfs), l.center_hz),
                    mean_dbm: self.dbm(Some(mean_dbfs), l.center_hz),
                    obw_hz: e.obw_hz.map(|w| round_to(w, 1)),
                    samples: e.samples,
                    partial: e.partial,
                    classified: e.class.as_deref().map(ClassFields::of),
                }))
            }
            Event::Opened(_) => None,
        }
    }
}

/// The start record's account of a panorama run (see [`PanoramaSetup`]).
fn panorama_setup(t: &Tuning, grid: &Grid, rate_hz: f64) -> PanoramaSetup {
    let (lo, hi) = grid.span_hz();
    let ends = t.steps.iter().skip(1).map(|s| Some(s.start)).chain([t.period]);
    let dwell_s = t
        .steps
        .iter()
        .zip(ends)
        .filter_map(|(s, end)| end.map(|e| round_to((e - s.start) as f64 / rate_hz, 9)))
        .collect();
    let timeline = match (t.follows_stream, t.period) {
        (true, _) => "stream",
        (false, Some(_)) => "hop_plan",
        (false, None) => "captures",
    };
    PanoramaSetup {
        span_low_hz: round_to(lo, 2),
        span_high_hz: round_to(hi, 2),
        step_centers_hz: grid.centres(),
        dwell_s,
        settle_s: round_to(t.settle_samples as f64 / rate_hz, 9),
        usable: t.usable,
        timeline: timeline.to_string(),
        holes_hz: grid.holes_hz().iter().map(|&(a, b)| [round_to(a, 2), round_to(b, 2)]).collect(),
    }
}

impl<W: Write> Consumer for OccupancyLog<W> {
    fn start(&mut self, run: &RunInfo) -> io::Result<()> {
        self.run_info = Some(run.clone());
        let src = &run.source;
        if let (Some(t), Ok(Some(grid))) = (&src.tuning, grid_of(src, self.setup.engine.fft_size)) {
            self.views = self
                .plan
                .channels
                .iter()
                .map(|c| view_times(t, &grid, src.sample_rate_hz, c.low_hz(), c.high_hz()))
                .collect();
        }
        let mut headers = vec![Record::Start(self.start_record(run))];
        for (c, def) in self.plan.channels.iter().zip(&self.setup.channels) {
            headers.push(Record::Channel(ChannelRecord {
                channel: c.name.clone(),
                center_hz: c.center_hz,
                width_hz: c.width_hz,
                threshold_db: def.threshold_db,
            }));
        }
        self.headers = headers.into_iter().map(|h| self.stamp(h)).collect();
        if self.rotation.is_some() {
            // Opening the first file writes the headers.
            self.rotate_if_due(0, run)?;
        } else {
            for h in &self.headers {
                if let Some(w) = self.writer.as_mut() {
                    w.write(h)?;
                }
            }
        }
        for t in &mut self.taps {
            for h in &self.headers {
                t.record(h);
            }
        }
        Ok(())
    }

    fn event(&mut self, event: &Event, run: &RunInfo) -> io::Result<()> {
        let Some(rec) = self.record(event, run) else { return Ok(()) };
        let first = match event {
            Event::Interval(i) => i.start_sample,
            Event::Emission(e) => e.start_sample,
            Event::Opened(o) => o.start_sample,
        };
        let changes = match (&rec, self.alarms.as_mut()) {
            (Record::Interval(r), Some(a)) => a.interval(first, r, &run.clock),
            _ => Vec::new(),
        };
        self.emit(rec, Some(first), run)?;
        for change in changes {
            self.emit(change, Some(first), run)?;
        }
        Ok(())
    }

    /// The records other consumers send for the log (a capture saved or skipped): written after
    /// the log's own records of the same step, in the order they came.
    fn mail(&mut self, letter: &Letter, run: &RunInfo) -> io::Result<()> {
        let Some(c) = letter.read::<CaptureRecord>() else { return Ok(()) };
        let sample = (c.t_start_s * run.clock.rate).round() as u64;
        self.emit(Record::Capture(c.clone()), Some(sample), run)
    }

    fn block(&mut self, block: &Block) -> io::Result<()> {
        if self.pending_gaps.is_empty() {
            return Ok(());
        }
        // The run's settings as they were at its start: what a record's time needs.
        let Some(run) = self.run_info.take() else { return Ok(()) };
        let result = self.write_gaps(Some(block.start), &run);
        self.run_info = Some(run);
        result
    }

    fn gap(&mut self, from: u64, to: u64, cause: GapCause, run: &RunInfo) -> io::Result<()> {
        let window = merge_window(run);
        match self.pending_gaps.iter_mut().find(|g| g.cause == cause) {
            Some(g) if from < g.from.saturating_add(window) => {
                g.to = to;
                g.lost += to - from;
                g.gaps += 1;
            }
            _ => {
                self.write_gaps(Some(from), run)?;
                self.pending_gaps.push(PendingGap { cause, from, to, lost: to - from, gaps: 1 });
            }
        }
        Ok(())
    }

    fn finish(&mut self, end: &RunEnd, run: &RunInfo) -> io::Result<()> {
        self.write_gaps(None, run)?;
        let c = &run.clock;
        let rec = Record::Stop(StopRecord {
            t_end_s: c.seconds(end.end_sample),
            end: c.stamp_end(end.end_sample),
            reason: end.reason.as_str().into(),
            iq_samples: end.end_sample,
            dropped_samples: end.dropped_samples,
        });
        self.emit(rec, None, run)
    }
}

impl<W: Write> OccupancyLog<W> {
    /// Writes the gathered gaps whose merge window has passed at sample `now` (all of them when
    /// `now` is `None`: the run ends).
    fn write_gaps(&mut self, now: Option<u64>, run: &RunInfo) -> io::Result<()> {
        let window = merge_window(run);
        let due = |g: &PendingGap| now.map_or(true, |t| t >= g.from.saturating_add(window));
        while let Some(k) = self.pending_gaps.iter().position(due) {
            let g = self.pending_gaps.remove(k);
            let c = &run.clock;
            let rec = Record::Dropped(DroppedRecord {
                t_start_s: c.seconds(g.from),
                t_end_s: c.seconds(g.to),
                start: c.stamp(g.from),
                end: c.stamp_end(g.to),
                dropped_samples: g.lost,
                gaps: g.gaps,
                cause: g.cause.as_str().into(),
            });
            self.emit(rec, Some(g.from), run)?;
        }
        Ok(())
    }
}

/// [`GAP_MERGE_S`] in samples of the run's input.
fn merge_window(run: &RunInfo) -> u64 {
    ((GAP_MERGE_S * run.clock.rate).round() as u64).max(1)
}

#[cfg(test)]
pub(crate) mod tests {
    use super::*;
    use crate::dsp::{DspConfig, WindowKind};
    use crate::measure::occupancy::tests::{band, Keyed, CENTER, FS};
    use crate::output::log::LogFormat;
    use crate::pipeline::occupancy::OccupancyRequest;
    use crate::pipeline::{Run, RunSpec, StopReason, TimeSource};
    use crate::plan::parse_channel_flag;
    use crate::source::reader::Block;
    use crate::source::SourceInfo;
    use serde_json::Value;
    use time::format_description::well_known::Rfc3339;
    use time::OffsetDateTime;

    pub(crate) fn setup(interval_s: f64) -> (OccupancySetup, Plan, SourceInfo) {
        let info = SourceInfo { live: true, ..SourceInfo::synthetic(FS, CENTER) };
        let dsp = DspConfig { fft_size: 512, window: WindowKind::Hann, overlap: 0.5, threads: 1 };
        let channels =
            ["busy=100.02M:10k", "idle=99.95M:10k"].map(|c| parse_channel_flag(c).unwrap());
        let plan = Plan::from_parts(None, &channels).unwrap();
        let req = OccupancyRequest {
            dwell_s: None,
            threshold_db: crate::plan::DEFAULT_THRESHOLD_DB,
            interval_s,
            hang_s: 0.025,
        };
        (OccupancySetup::new(&info, &dsp, &plan, &req).unwrap(), plan, info)
    }

    pub(crate) fn spec(
        setup: &OccupancySetup,
        info: &SourceInfo,
        start: Option<OffsetDateTime>,
    ) -> RunSpec {
        let mut spec = RunSpec::new(info.clone(), setup.engine.clone(), 1);
        spec.tracker = Some(setup.tracker());
        spec.start_time = start;
        spec.time_source = TimeSource::Option;
        spec
    }

    fn lines(bytes: Vec<u8>) -> Vec<Value> {
        String::from_utf8(bytes)
            .unwrap()
            .lines()
            .map(|l| serde_json::from_str(l).expect("every line is one JSON object"))
            .collect()
    }

    #[test]
    fn a_gap_in_block_indices_is_logged_exactly_and_times_follow_the_sample_count() {
        let on = |_: u64| true;
        let x = band(600_000, &[Keyed { offset_hz: 20e3, level_dbfs: -30.0, on: &on }], 2);
        let (setup, plan, info) = setup(1.0);
        let writer = LogWriter::new(Vec::new(), LogFormat::JsonLines, true).unwrap();
        let mut log = OccupancyLog::new(writer, &plan, &setup);
        let t0 = OffsetDateTime::parse("2026-05-01T08:00:00Z", &Rfc3339).unwrap();
        let mut run = Run::new(spec(&setup, &info, Some(t0)), vec![&mut log]);
        // Blocks of 10 000 samples; the ones covering 250 000 .. 290 000 never arrive.
        for start in (0..600_000).step_by(10_000) {
            if (250_000..290_000).contains(&start) {
                continue;
            }
            let block = Block::new(start as u64, x[start..start + 10_000].to_vec());
            run.feed(&block).unwrap();
        }
        run.lost_tail(600_000).unwrap();
        run.finish(StopReason::EndOfInput).unwrap();
        drop(run);
        let recs = lines(log.into_writer().unwrap());
        let kinds: Vec<&str> = recs.iter().map(|r| r["kind"].as_str().unwrap()).collect();
        assert_eq!(&kinds[..3], ["start", "channel", "channel"]);
        assert_eq!(*kinds.last().unwrap(), "stop");
        assert_eq!(recs[0]["time_source"], "option");
        let dropped: Vec<&Value> = recs.iter().filter(|r| r["kind"] == "dropped").collect();
        assert_eq!(dropped.len(), 1);
        assert_eq!(dropped[0]["dropped_samples"], 40_000);
        assert_eq!(dropped[0]["t_start_s"], 1.25);
        assert_eq!(dropped[0]["start"], "2026-05-01T08:00:01.250Z");
        assert_eq!(dropped[0]["end"], "2026-05-01T08:00:01.450Z");
        // The busy channel's emission is cut by the gap: two partial pieces, then the last one
        // cut by the end of input.
        let em: Vec<&Value> = recs.iter().filter(|r| r["kind"] == "emission").collect();
        assert_eq!(em.len(), 2, "{em:?}");
        assert!(em.iter().all(|e| e["channel"] == "busy" && e["partial"] == true));
        // Intervals of 1 s: [0,1) full, [1,2) full with the gap counted, [2,3) partial.
        let iv: Vec<&Value> =
            recs.iter().filter(|r| r["kind"] == "interval" && r["channel"] == "busy").collect();
        assert_eq!(iv.len(), 3);
        assert_eq!(iv[1]["dropped_samples"], 40_000);
        assert_eq!(iv[1]["t_end_s"], 2.0);
        assert_eq!(iv[1]["end"], "2026-05-01T08:00:02.000Z");
        assert_eq!(iv[2]["partial"], true);
        assert_eq!(iv[2]["t_end_s"], 3.0);
        assert!(iv.iter().all(|i| i["occupancy_pct"] == 100.0));
        let idle: Vec<&Value> =
            recs.iter().filter(|r| r["kind"] == "interval" && r["channel"] == "idle").collect();
        assert!(idle.iter().all(|i| i["occupancy_pct"] == 0.0));
        let stop = recs.last().unwrap();
        assert_eq!(stop["iq_samples"], 600_000);
        assert_eq!(stop["dropped_samples"], 40_000);
        assert_eq!(stop["reason"], "end_of_input");
    }

    /// What every classified record holds, whatever the classifier answers: a class of the
    /// set, a confidence in 0..1, an object of parameters, and a designator that begins with
    /// the bandwidth code of the OBW next to it (ITU RR Appendix 1).
    pub(crate) fn assert_class_fields(r: &Value, obw_key: &str) {
        use crate::measure::classify::bandwidth_code;
        const CLASSES: [&str; 10] =
            ["cw", "am", "fm", "fsk", "psk", "qam", "ofdm", "pulsed", "noise", "unknown"];
        assert!(CLASSES.contains(&r["class"].as_str().unwrap_or("-")), "{r}");
        let c = r["class_confidence"].as_f64().unwrap_or(-1.0);
        assert!((0.0..=1.0).contains(&c), "{r}");
        assert!(r["class_params"].is_object(), "{r}");
        let code = bandwidth_code(r[obw_key].as_f64().unwrap());
        let d = r["designator"].as_str().unwrap();
        assert!(d.starts_with(&code) && d.len() > code.len(), "{d} for {code}: {r}");
    }

    #[test]
    fn emission_records_carry_their_class_and_designator() {
        let on = |i: u64| (100_000..400_000).contains(&i);
        let x = band(600_000, &[Keyed { offset_hz: 20e3, level_dbfs: -30.0, on: &on }], 3);
        let (setup, plan, info) = setup(1.0);
        let writer = LogWriter::new(Vec::new(), LogFormat::JsonLines, true).unwrap();
        let mut log = OccupancyLog::new(writer, &plan, &setup);
        let mut spec = spec(&setup, &info, None);
        spec.classify = true;
        let mut run = Run::new(spec, vec![&mut log]);
        for start in (0..600_000).step_by(10_000) {
            run.feed(&Block::new(start as u64, x[start..start + 10_000].to_vec())).unwrap();
        }
        run.finish(StopReason::EndOfInput).unwrap();
        drop(run);
        let recs = lines(log.into_writer().unwrap());
        let em: Vec<&Value> = recs.iter().filter(|r| r["kind"] == "emission").collect();
        assert_eq!(em.len(), 1, "{em:?}");
        assert_class_fields(em[0], "obw_hz");
    }

    #[test]
    fn scattered_nan_samples_make_one_dropped_record_per_second_with_the_count_summed() {
        let on = |_: u64| true;
        let n = 3 * FS as usize + 1000;
        let mut x = band(n, &[Keyed { offset_hz: 20e3, level_dbfs: -30.0, on: &on }], 4);
        // A NaN every 97 samples: thousands of one-sample holes.
        let mut holes = 0u64;
        for i in (50..n).step_by(97) {
            x[i].re = f32::NAN;
            holes += 1;
        }
        let (setup, plan, info) = setup(1.0);
        let writer = LogWriter::new(Vec::new(), LogFormat::JsonLines, true).unwrap();
        let mut log = OccupancyLog::new(writer, &plan, &setup);
        let mut run = Run::new(spec(&setup, &info, None), vec![&mut log]);
        for start in (0..n).step_by(10_000) {
            let end = (start + 10_000).min(n);
            run.feed(&Block::new(start as u64, x[start..end].to_vec())).unwrap();
        }
        let end = run.finish(StopReason::EndOfInput).unwrap();
        drop(run);
        let recs = lines(log.into_writer().unwrap());
        let dropped: Vec<&Value> = recs.iter().filter(|r| r["kind"] == "dropped").collect();
        // The holes span a little over 3 s of input: one record per second, the last one at
        // the end of the run.
        assert_eq!(dropped.len(), 4, "{dropped:?}");
        let lost: u64 = dropped.iter().map(|r| r["dropped_samples"].as_u64().unwrap()).sum();
        let gaps: u64 = dropped.iter().map(|r| r["gaps"].as_u64().unwrap()).sum();
        assert_eq!((lost, gaps), (holes, holes));
        assert_eq!(end.dropped_samples, holes);
        for r in &dropped {
            assert_eq!(r["cause"], "not_a_number");
            let span = r["t_end_s"].as_f64().unwrap() - r["t_start_s"].as_f64().unwrap();
            assert!(span <= GAP_MERGE_S + 1.0 / FS, "{r}");
        }
        assert_eq!(recs.last().unwrap()["kind"], "stop", "gathered gaps come before the stop");
    }

    #[test]
    fn an_interval_whose_input_was_all_lost_still_has_its_records() {
        let on = |_: u64| true;
        let x = band(200_000, &[Keyed { offset_hz: 20e3, level_dbfs: -30.0, on: &on }], 3);
        // Intervals of 0.1 s: input for [0, 0.1) and [0.35, 0.4) only; the run goes on to 0.5 s.
        let interval = 0.1;
        let (setup, plan, info) = setup(interval);
        let per = (FS * interval) as u64;
        let writer = LogWriter::new(Vec::new(), LogFormat::JsonLines, true).unwrap();
        let mut log = OccupancyLog::new(writer, &plan, &setup);
        let mut run = Run::new(spec(&setup, &info, None), vec![&mut log]);
        run.feed(&Block::new(0, x[..per as usize].to_vec())).unwrap();
        let resume = (3.5 * per as f64) as usize;
        run.feed(&Block::new(resume as u64, x[resume..4 * per as usize].to_vec())).unwrap();
        run.lost_tail(5 * per).unwrap();
        run.finish(StopReason::EndOfInput).unwrap();
        drop(run);
        let recs = lines(log.into_writer().unwrap());
        let busy: Vec<&Value> =
            recs.iter().filter(|r| r["kind"] == "interval" && r["channel"] == "busy").collect();
        let starts: Vec<f64> = busy.iter().map(|r| r["t_start_s"].as_f64().unwrap()).collect();
        assert_eq!(starts.len(), 5, "one record per interval: {starts:?}");
        for (i, r) in busy.iter().enumerate() {
            assert!((starts[i] - i as f64 * interval).abs() < 1e-9);
            let lost = r["dropped_samples"].as_u64().unwrap();
            if i == 1 || i == 2 || i == 4 {
                assert_eq!(r["samples"], 0, "{r}");
                assert_eq!(lost, per, "{r}");
                assert!(r["occupancy_pct"].is_null() && r["mean_dbfs"].is_null(), "{r}");
            }
        }
        assert_eq!(busy[0]["occupancy_pct"], 100.0);
        let stop = recs.last().unwrap();
        assert_eq!(stop["iq_samples"], 5 * per);
    }

    #[test]
    fn an_empty_run_still_writes_start_and_stop() {
        let (setup, plan, info) = setup(60.0);
        let writer = LogWriter::new(Vec::new(), LogFormat::JsonLines, true).unwrap();
        let mut log = OccupancyLog::new(writer, &plan, &setup);
        let mut run = Run::new(spec(&setup, &info, None), vec![&mut log]);
        run.finish(StopReason::Interrupted).unwrap();
        drop(run);
        let recs = lines(log.into_writer().unwrap());
        let kinds: Vec<&str> = recs.iter().map(|r| r["kind"].as_str().unwrap()).collect();
        assert_eq!(kinds, ["start", "channel", "channel", "stop"]);
        assert_eq!(recs[0]["time_source"], "none");
        assert_eq!(recs[3]["reason"], "interrupted");
    }
}
