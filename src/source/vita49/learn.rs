//! A VITA 49 stream that retunes, read without `--hop-plan`: its sweep is learnt from the stream
//! itself before the run starts.
//!
//! **Why before.** A panorama's grid (its centres, hence its span and bins) must be fixed before
//! the first consumer starts: every consumer is sized from it. A hop plan gives it; without one
//! the source reads the stream ahead at open and holds what it reads, until one of:
//! - **the sweep closes**: the stream comes back to its first centre. The centres visited, in
//!   order, and how long each dwell lasted are then the plan (as `--hop-plan` would give them:
//!   the grid, the expected observation and revisit times), the context's bandwidth field the
//!   usable band of each step;
//! - **no retune within `--learn`** (default [`DEFAULT_LEARN`], of stream time): a fixed-tune
//!   stream, read as before (a retune later ends the input naming `--hop-plan`);
//! - **the stream falls quiet** for [`QUIET`] of wall time (or `--learn`, if shorter), or
//!   **ends** (a change of rate or format): the centres seen so far are the sweep when there are
//!   two or more (the last dwell as long as it was seen), else it was a fixed tuning.
//!
//! What was held is delivered first (the first sweep is measured too, from its first sample),
//! then the live stream. A later retune to a centre the sweep did not visit stops the run naming
//! it, as with a plan. Dwells may differ in length, the order need not be sorted, and a centre
//! visited twice in a sweep is one grid place seen twice; a sweep that comes back to its *first*
//! centre before its end is learnt as ending there (its later centres then stop the run: give
//! `--hop-plan` for such a sweep).
//!
//! **Bounds.** At most [`HOLD_BYTES`] of samples are held (8 bytes a sample): a sweep longer than
//! that is refused naming `--hop-plan`. A fixed-tune stream starts `--learn` late (1 s by
//! default) and is otherwise read as before; while the source holds, it keeps receiving, so the
//! socket is drained as fast as without learning and loss, reordering and duplicates are counted
//! exactly as in the live stream. The held samples are then delivered as fast as the run takes
//! them ([`SampleSource::replaying`](crate::source::SampleSource::replaying): the reader never
//! drops them as behind, nor times them), and each delivery first takes in, without waiting,
//! what the socket received meanwhile, so the kernel's buffer does not fill behind the replay
//! (up to as much as learning held: the run never lags the stream by more than the read-ahead).
//! A stop signal while learning ends the run before it starts (the
//! held samples are not measured; the message says how much).

use super::Vita49Source;
use crate::source::tuning::{keep_stream_band, same_centre, Step, Tuning, DEFAULT_USABLE};
use crate::source::{InputRequest, StoppedWhileOpening};
use crate::units::format_hz;
use anyhow::{bail, Result};
use num_complex::Complex32;
use std::collections::VecDeque;
use std::time::{Duration, Instant};

/// How long of a stream without `--hop-plan` is read ahead for a first retune, unless `--learn`.
pub const DEFAULT_LEARN: Duration = Duration::from_secs(1);
/// The most samples held while a sweep is learnt: 512 MiB (64 Mi complex samples, 3.4 s at
/// 20 MS/s, 67 s at 1 MS/s).
pub const HOLD_BYTES: usize = 512 << 20;
/// Wall time without a datagram after which the stream is taken as quiet (or `--learn`, if
/// shorter). A receiver streams continuously while it dwells and retunes in milliseconds, so a
/// pause this long means the sender stopped: what is held is then measured at once, and a run
/// stopped a moment later (a burst of packets, then Ctrl-C) has logged it instead of ending
/// with everything still held.
pub const QUIET: Duration = Duration::from_millis(250);
/// How long without a datagram ends the read-ahead as quiet: [`QUIET`] (or `--learn`, if
/// shorter) once samples are held; the whole `--learn` before any (a receiver announcing its
/// context before it streams).
fn quiet_after(wait: Duration, held_bytes: usize) -> Duration {
    if held_bytes > 0 {
        wait.min(QUIET)
    } else {
        wait
    }
}

/// Bytes a held sample takes (a complex pair of f32).
const SAMPLE_BYTES: usize = std::mem::size_of::<Complex32>();

/// How long to read ahead for `req` (`None`: no learning), or why the flags conflict.
pub(super) fn wanted(req: &InputRequest) -> Result<Option<Duration>> {
    if req.hop_plan.is_some() {
        if req.learn_s.is_some() {
            bail!(
                "--learn and --hop-plan both say where the stream is tuned: the plan lists the centres, --learn reads them from the stream; give one of the two"
            );
        }
        return Ok(None);
    }
    Ok(match req.learn_s {
        Some(s) if s <= 0.0 => None,
        Some(s) => Some(Duration::from_secs_f64(s)),
        None => Some(DEFAULT_LEARN),
    })
}

/// Samples read ahead, with what the source said about them when they were read.
struct Chunk {
    /// Samples lost just before them.
    lost: u64,
    /// Retunes handed out with them.
    retunes: Vec<Step>,
    samples: Vec<Complex32>,
    /// How many of `samples` were delivered.
    offset: usize,
}

/// What was read ahead, delivered before the live stream.
#[derive(Default)]
pub(super) struct Ahead {
    chunks: VecDeque<Chunk>,
    /// Samples in `chunks` (a chunk's until it is wholly delivered).
    held: usize,
    /// The most held while delivering: what learning held, so the run never lags the stream by
    /// more than the read-ahead did.
    cap: usize,
    /// The buffer samples are read into before they are held.
    scratch: Vec<Complex32>,
    /// The input ended while learning (a change of rate or format): its error, raised once what
    /// was held is delivered.
    pub ending: Option<anyhow::Error>,
}

impl Ahead {
    fn hold(&mut self, chunk: Chunk) {
        self.held += chunk.samples.len();
        self.chunks.push_back(chunk);
    }

    /// True while samples read ahead wait to be delivered.
    pub fn holds(&self) -> bool {
        !self.chunks.is_empty()
    }

    fn bytes(&self) -> usize {
        self.held * SAMPLE_BYTES
    }

    /// The next held samples into `out`, their losses added to `lost` and their retunes to
    /// `retunes` (as the live read hands them out); `None` when nothing is held.
    pub fn replay(
        &mut self,
        out: &mut [Complex32],
        lost: &mut u64,
        retunes: &mut Vec<Step>,
    ) -> Option<usize> {
        let chunk = self.chunks.front_mut()?;
        *lost += std::mem::take(&mut chunk.lost);
        // Before any the live stream has already reported (those come after what is held).
        retunes.splice(0..0, chunk.retunes.drain(..));
        let n = out.len().min(chunk.samples.len() - chunk.offset);
        out[..n].copy_from_slice(&chunk.samples[chunk.offset..chunk.offset + n]);
        chunk.offset += n;
        if chunk.offset == chunk.samples.len() {
            self.held -= chunk.samples.len();
            self.chunks.pop_front();
        }
        Some(n)
    }
}

/// The tuning timeline of the stream's start, retune by retune (see the module doc).
pub(super) struct Learner {
    timeline: Tuning,
    /// Samples without a retune that make a fixed tuning.
    wait: u64,
}

impl Learner {
    pub fn new(centre_hz: f64, wait: u64) -> Learner {
        Learner {
            timeline: Tuning {
                steps: vec![Step { start: 0, center_hz: centre_hz }],
                period: None,
                settle_samples: 0,
                usable: DEFAULT_USABLE,
                follows_stream: true,
            },
            wait,
        }
    }

    /// A retune of the stream; the learnt sweep when it brings the stream back to its first
    /// centre.
    pub fn retune(&mut self, step: &Step) -> Option<Tuning> {
        self.timeline.retune(step.clone());
        let steps = &self.timeline.steps;
        let back = steps.last().filter(|s| same_centre(s.center_hz, steps[0].center_hz))?;
        if steps.len() < 3 {
            return None;
        }
        let period = back.start;
        let mut plan = self.timeline.clone();
        plan.steps.pop();
        plan.period = Some(period);
        Some(plan)
    }

    /// True when the stream has stayed at its first centre through sample `end` for as long as
    /// it was to be watched.
    pub fn fixed(&self, end: u64) -> bool {
        self.timeline.steps.len() == 1 && end >= self.wait
    }

    /// The sweep as seen when learning ended before it closed, at sample `end`: the centres
    /// visited so far (a retune at or after `end` left out), `None` when that is one.
    pub fn so_far(&self, end: u64) -> Option<Tuning> {
        let mut plan = self.timeline.clone();
        plan.steps.retain(|s| s.start < end);
        plan.period = Some(end);
        (plan.centres().len() >= 2).then_some(plan)
    }

    /// The distinct centres seen so far.
    pub fn centres(&self) -> usize {
        self.timeline.centres().len()
    }
}

/// Why reading ahead stopped.
enum Ending {
    /// The stream came back to its first centre: this is its sweep.
    Closed(Tuning),
    /// No retune within the time watched.
    Fixed,
    /// Nothing arrived for the time watched.
    Quiet,
    /// The input ended (its error is held in [`Ahead::ending`]).
    Ended,
    /// A stop signal.
    Stopped,
}

impl Vita49Source {
    /// Reads the stream ahead until its tuning is known (module doc), holding what it reads;
    /// a learnt sweep becomes the source's tuning.
    pub(super) fn learn(&mut self, wait: Duration, notes: &mut Vec<String>) -> Result<()> {
        let rate = self.info.sample_rate_hz;
        let mut learner = Learner::new(self.info.center_hz, (wait.as_secs_f64() * rate) as u64);
        let ending = self.read_ahead(&mut learner, wait)?;
        self.ahead.cap = self.ahead.bytes();
        let end = self.next;
        let plan = match ending {
            Ending::Closed(plan) => Some(plan),
            Ending::Fixed => None,
            Ending::Quiet | Ending::Ended => learner.so_far(end),
            Ending::Stopped => {
                return Err(StoppedWhileOpening(format!(
                    "stopped by a signal while reading {} ahead to learn where it is tuned ({:.3} s of it held, not measured)",
                    self.info.label,
                    end as f64 / rate
                ))
                .into())
            }
        };
        let Some(mut plan) = plan else {
            self.stay_fixed();
            return Ok(());
        };
        keep_stream_band(&mut plan, &self.follow.unwrap_or_default(), rate);
        notes.push(self.learnt_note(&plan, end));
        self.info.tuning = Some(plan);
        Ok(())
    }

    /// Reads and holds until the learner has its answer (module doc).
    fn read_ahead(&mut self, learner: &mut Learner, wait: Duration) -> Result<Ending> {
        let mut buf = vec![Complex32::default(); 1 << 16];
        let mut heard = Instant::now();
        loop {
            let got = match self.read_within(&mut buf, false) {
                Ok(got) => got,
                Err(e) => {
                    self.ahead.ending = Some(e);
                    return Ok(Ending::Ended);
                }
            };
            match got {
                Some(0) => return Ok(Ending::Stopped),
                Some(n) => {
                    heard = Instant::now();
                    let retunes = self.hold_read(&buf[..n]);
                    let closed = retunes.iter().fold(None, |c, r| c.or(learner.retune(r)));
                    if let Some(plan) = closed {
                        return Ok(Ending::Closed(plan));
                    }
                }
                // Before the first samples (context packets only) the full `--learn` is waited.
                None if heard.elapsed() >= quiet_after(wait, self.ahead.bytes()) => {
                    return Ok(Ending::Quiet)
                }
                None => continue,
            }
            if learner.fixed(self.next) {
                return Ok(Ending::Fixed);
            }
            if self.ahead.bytes() >= HOLD_BYTES {
                if learner.centres() == 1 {
                    return Ok(Ending::Fixed);
                }
                bail!(
                    "{}: the stream retuned to {} centres in its first {:.3} s without coming back to its first, {}; bandwarden learns a sweep only when it comes back within {} MiB of samples read ahead; give --hop-plan FILE listing the centres it visits",
                    self.info.label,
                    learner.centres(),
                    self.next as f64 / self.info.sample_rate_hz,
                    format_hz(self.info.center_hz),
                    HOLD_BYTES >> 20
                );
            }
        }
    }

    /// While held samples are delivered: what the socket has received meanwhile joins them,
    /// without waiting, so the kernel's buffer does not fill behind the replay (up to as much
    /// as learning held: a run slower than the stream then lags it by no more than the
    /// read-ahead, and the socket keeps what it can; what it drops is found as `packet_lost`).
    pub(super) fn top_up(&mut self) -> Result<()> {
        if self.ahead.ending.is_some() || self.ahead.bytes() >= self.ahead.cap {
            return Ok(());
        }
        self.socket.set_nonblocking(true)?;
        let mut buf = std::mem::take(&mut self.ahead.scratch);
        buf.resize(1 << 16, Complex32::default());
        while self.ahead.bytes() < self.ahead.cap {
            match self.read_within(&mut buf, false) {
                Ok(Some(n)) if n > 0 => {
                    self.hold_read(&buf[..n]);
                }
                Ok(_) => break,
                Err(e) => {
                    self.ahead.ending = Some(e);
                    break;
                }
            }
        }
        self.ahead.scratch = buf;
        self.socket.set_nonblocking(false)?;
        Ok(())
    }

    /// Holds samples just read, with the losses before them and the retunes read with them;
    /// returns those retunes (for the learner).
    fn hold_read(&mut self, samples: &[Complex32]) -> Vec<Step> {
        let retunes = std::mem::take(&mut self.retuned);
        let lost = std::mem::take(&mut self.lost);
        let chunk = Chunk { lost, retunes: retunes.clone(), samples: samples.to_vec(), offset: 0 };
        self.ahead.hold(chunk);
        retunes
    }

    /// No sweep: the stream is read at one tuning, and a retune ends it (module doc of
    /// [`super`]); one already reported but not yet delivered does so too.
    fn stay_fixed(&mut self) {
        self.follow = None;
        if let Some(r) = self.retuned.drain(..).next() {
            self.counts.retunes += 1;
            self.changed =
                Some(format!("its centre from {} to {} Hz", self.info.center_hz, r.center_hz));
        }
    }

    /// The note that says what was learnt.
    fn learnt_note(&self, plan: &Tuning, end: u64) -> String {
        let rate = self.info.sample_rate_hz;
        let ends = plan.steps.iter().skip(1).map(|s| s.start).chain(plan.period);
        let steps: Vec<String> = plan
            .steps
            .iter()
            .zip(ends)
            .map(|(s, e)| {
                format!("{} {:.1} ms", format_hz(s.center_hz), (e - s.start) as f64 / rate * 1e3)
            })
            .collect();
        let closed = plan.period.is_some_and(|p| p < end);
        format!(
            "{}: the stream retuned without --hop-plan; its {}sweep was learnt from the first {:.3} s read ahead (measured too): {}",
            self.info.label,
            if closed { "" } else { "unfinished " },
            end as f64 / rate,
            steps.join(", ")
        )
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn step(start: u64, mhz: f64) -> Step {
        Step { start, center_hz: mhz * 1e6 }
    }

    #[test]
    fn a_sweep_closes_when_it_comes_back_to_its_first_centre() {
        // Unequal dwells, unsorted centres, one centre twice in the sweep.
        let mut l = Learner::new(145.0e6, 1000);
        assert!(l.retune(&step(300, 145.32)).is_none());
        assert!(l.retune(&step(500, 145.16)).is_none());
        assert!(l.retune(&step(900, 145.32)).is_none());
        assert!(!l.fixed(5000), "it retuned");
        let plan = l.retune(&step(1000, 145.0)).expect("back at the first centre");
        let starts: Vec<u64> = plan.steps.iter().map(|s| s.start).collect();
        assert_eq!(starts, vec![0, 300, 500, 900]);
        assert_eq!(plan.period, Some(1000));
        assert_eq!(plan.centres(), vec![145.0e6, 145.16e6, 145.32e6]);
        assert!(plan.follows_stream);
    }

    #[test]
    fn one_centre_for_the_time_watched_is_a_fixed_tuning() {
        let l = Learner::new(145.0e6, 1000);
        assert!(!l.fixed(999));
        assert!(l.fixed(1000));
        assert!(l.so_far(5000).is_none(), "one centre is no sweep");
    }

    #[test]
    fn a_sweep_cut_short_keeps_the_centres_seen() {
        let mut l = Learner::new(145.0e6, 1000);
        l.retune(&step(400, 145.16));
        l.retune(&step(800, 145.32));
        // Input ended at sample 800: the retune there brought no sample.
        let plan = l.so_far(800).unwrap();
        assert_eq!(plan.centres(), vec![145.0e6, 145.16e6]);
        assert_eq!(plan.period, Some(800));
        let plan = l.so_far(900).unwrap();
        assert_eq!(plan.centres().len(), 3);
    }

    #[test]
    fn held_samples_come_back_in_order_with_their_losses_and_retunes() {
        let mut a = Ahead::default();
        let x = |v: f32| Complex32::new(v, 0.0);
        a.hold(Chunk {
            lost: 0,
            retunes: vec![],
            samples: vec![x(1.0), x(2.0), x(3.0)],
            offset: 0,
        });
        a.hold(Chunk { lost: 5, retunes: vec![step(8, 1.0)], samples: vec![x(4.0)], offset: 0 });
        assert_eq!(a.bytes(), 4 * 8);
        let (mut lost, mut out) = (0, [x(0.0); 2]);
        // A retune the live stream reported meanwhile stays after the held ones.
        let mut retunes = vec![step(50, 2.0)];
        assert_eq!(a.replay(&mut out, &mut lost, &mut retunes), Some(2));
        assert_eq!(a.replay(&mut out, &mut lost, &mut retunes), Some(1));
        assert_eq!((out[0], lost), (x(3.0), 0));
        assert_eq!(a.replay(&mut out, &mut lost, &mut retunes), Some(1));
        assert_eq!((out[0], lost), (x(4.0), 5));
        assert_eq!(retunes, vec![step(8, 1.0), step(50, 2.0)]);
        assert_eq!(a.replay(&mut out, &mut lost, &mut retunes), None);
        assert!(!a.holds() && a.bytes() == 0, "nothing held once delivered");
    }

    #[test]
    fn learning_is_off_with_a_plan_or_zero_and_both_flags_conflict() {
        let req = |plan: bool, learn: Option<f64>| InputRequest {
            hop_plan: plan.then(|| "p.txt".to_string()),
            learn_s: learn,
            ..Default::default()
        };
        assert_eq!(wanted(&req(false, None)).unwrap(), Some(DEFAULT_LEARN));
        assert_eq!(wanted(&req(false, Some(0.0))).unwrap(), None);
        assert_eq!(wanted(&req(false, Some(2.5))).unwrap(), Some(Duration::from_millis(2500)));
        assert_eq!(wanted(&req(true, None)).unwrap(), None);
        let e = wanted(&req(true, Some(1.0))).unwrap_err().to_string();
        assert!(e.contains("--learn") && e.contains("--hop-plan"), "{e}");
    }

    #[test]
    fn quiet_is_short_once_samples_are_held() {
        let learn = Duration::from_secs(1);
        assert_eq!(quiet_after(learn, 0), learn);
        assert_eq!(quiet_after(learn, 8), QUIET);
        assert_eq!(quiet_after(Duration::from_millis(100), 8), Duration::from_millis(100));
    }
}
