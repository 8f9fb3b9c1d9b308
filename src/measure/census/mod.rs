//! A census of the band without a plan: every emission found row by row, followed across rows,
//! and grouped into emitters (the same place in frequency), each with its own figures.
//!
//! **Detection.** Each row (one measurement sample, an average of a few FFT frames) goes through
//! the shared detector [`find_signals`] against the tracked noise floor
//! ([`NoiseTracker`], as the occupancy log uses). Detections whose footprints (their occupied
//! band widened by one main lobe, 2·ENBW bins, on each side) touch are one emission: the lines of
//! an FM signal, the two tones of FSK.
//!
//! **Tracking.** A detection whose footprint overlaps an open track continues it; a track missed
//! for more than `hang_rows` rows ends, and becomes an emission. Its edges are placed inside their
//! rows by the share of the full energy the edge rows reached ([`track`]), so timing is finer
//! than a row: about one FFT hop.
//!
//! **Grouping.** A new emission joins the emitter whose detected centre lies within
//! `2·RBW + 25 %` of the wider of the two detected widths, else starts a new emitter. An emitter
//! sums the PSD of every row in which one of its emissions was open; at the end, that sum less
//! the noise is its own averaged spectrum, on which its centre (the middle of its 99 % occupied
//! band, ITU-R SM.328), occupied bandwidth, peak in one RBW and power while on the air are
//! measured. An emitter detected in fewer than [`MIN_DETECTED_ROWS`] rows is dropped as a
//! likely false alarm of the detector.
//!
//! **Attribution.** One emitter, one row: what an emitter radiates outside its necessary band
//! (ITU-R SM.329 / SM.1541: its out-of-band and spurious domains) is detected too, as weak
//! emitters of its own, and is attributed to it instead of being listed ([`attribute`]):
//! - *keying transients*: an emitter 20 dB or more under a stronger one, each of whose
//!   emissions is short and starts or ends within a frame and a row of a key-up or key-down of
//!   the stronger one, is that one's transients ("key clicks");
//! - *skirts and lines*: an emitter 10 dB or more under a stronger one (in power and in its
//!   peak), on the air only while that one is, next to it or to a skirt it already has, and no
//!   higher than that neighbour (the spectrum falls away from it), is its out-of-band skirt
//!   (unfiltered OFDM, PSK, FSK) or a side lobe of its line spectrum (a pulse train).
//!
//! Each emitter reports what it took ([`Attributed`]: counts and energy relative to its own),
//! so nothing is hidden. An emitter with skirts is measured again over its band widened by
//! them (its 99 % OBW then holds its out-of-band power, as SM.328 counts it) and centred on the
//! middle of its 10 dB band, its body, so that a pulse train is centred on its pulses' carrier
//! rather than on a lopsided set of lines. Two emitters that key at the same instants stay two
//! unless one is far under the other.
//!
//! Per row the work is the detector (whose result is bounded by `max_signals`) and a pass over
//! the open tracks and emitters; buffers are kept, and emitters are capped at `max_emitters`.

pub mod attribute;
pub mod emitter;
pub mod floor;
pub mod sweep;
pub mod track;

use crate::dsp::{Spectrum, Window};
use crate::measure::noise::tracker::NoiseTracker;
use crate::measure::occupancy::Timing;
use crate::measure::signals::{find_signals, Detection};
use crate::units::{db, undb};
use attribute::{Fate, Piece, Scale, Span};
use emitter::EmitterAcc;
use floor::{floor_profile, FloorInput, FloorProfile};
use sweep::{SweepFacts, SweepView};
use track::Track;

/// Emitters seen in fewer rows than this are dropped as false alarms of the detector (noise
/// crosses a per-bin threshold of 10⁻⁶ about once in 250 rows of 4096 bins; twice at the same
/// place is rare).
pub const MIN_DETECTED_ROWS: u64 = 2;

/// How the census is run.
#[derive(Clone, Debug)]
pub struct CensusSettings {
    pub detection: Detection,
    /// Timing of the rows (stride, overhang) and of the noise tracker.
    pub timing: Timing,
    /// Rows an emission may be missed before it ends.
    pub hang_rows: u32,
    /// Most signals taken from one row.
    pub max_signals: usize,
    /// Most emitters kept; further ones are counted in [`CensusResult::emitters_dropped`].
    pub max_emitters: usize,
}

/// The figures of one emitter.
#[derive(Clone, Debug, PartialEq)]
pub struct EmitterFigures {
    /// Generated from its frequency (unique in one census).
    pub name: String,
    /// Middle of its 99 % occupied band, absolute Hz.
    pub center_hz: f64,
    pub obw_hz: f64,
    /// Start of its first emission and end of its last, seconds from the first sample.
    pub first_s: f64,
    pub last_s: f64,
    pub emissions: u64,
    /// Airtime over the time observed (a sweep: over the time it was in view).
    pub airtime_pct: f64,
    pub airtime_s: f64,
    /// Of a sweep: the time it was in view ([`sweep`]); `None` for a receiver that stays put,
    /// which observes every emitter the whole input.
    pub observation_s: Option<f64>,
    /// Level in one RBW at its peak (a sinusoid's level for a narrow emitter), while on the air.
    pub peak_dbfs: f64,
    /// Mean channel power while on the air, noise taken off.
    pub power_dbfs: f64,
    /// What was found around it and attributed to it rather than listed ([`attribute`]).
    pub attributed: Attributed,
}

/// The weak emissions attributed to an emitter: its keying transients and its out-of-band
/// skirts or spectral lines (ITU-R SM.329 / SM.1541: its spurious and out-of-band domains).
#[derive(Clone, Copy, Debug, Default, PartialEq)]
pub struct Attributed {
    /// Transient emissions that followed its key-ups and key-downs.
    pub transients: u64,
    /// Their energy over the emitter's own energy on the air (a ratio; 0 without transients).
    pub transient_share: f64,
    /// Emitters that were its skirts or side lobes, now measured as part of it.
    pub skirts: u64,
    /// Their energy over the emitter's own energy on the air, skirts included (a ratio).
    pub skirt_share: f64,
}

impl Attributed {
    /// Whether anything was attributed.
    pub fn any(&self) -> bool {
        self.transients > 0 || self.skirts > 0
    }

    /// The transients' energy relative to the emitter's, dBc (`None` without transients).
    pub fn transient_energy_dbc(&self) -> Option<f64> {
        (self.transients > 0 && self.transient_share > 0.0).then(|| db(self.transient_share))
    }

    /// The skirts' energy relative to the emitter's, dBc (`None` without skirts).
    pub fn skirt_energy_dbc(&self) -> Option<f64> {
        (self.skirts > 0 && self.skirt_share > 0.0).then(|| db(self.skirt_share))
    }
}

/// One emission, for annotating a recording.
#[derive(Clone, Debug, PartialEq)]
pub struct Emission {
    /// Index into [`CensusResult::emitters`].
    pub emitter: usize,
    pub sample_start: u64,
    pub sample_count: u64,
    /// Detected band edges, absolute Hz.
    pub low_hz: f64,
    pub high_hz: f64,
    pub figures: EmissionFigures,
}

/// Levels of one emission, from the band energy of its rows (noise taken off).
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct EmissionFigures {
    /// Mean power while on the air (rows wholly inside it), FS².
    pub mean: f64,
    /// Highest power of one row, FS².
    pub peak: f64,
    /// Noise power in its occupied band (at least one RBW wide), FS².
    pub noise: f64,
    /// Cut by lost samples, or by the start or end of the input.
    pub partial: bool,
}

impl EmissionFigures {
    pub fn mean_dbfs(&self) -> f64 {
        db(self.mean)
    }

    pub fn peak_dbfs(&self) -> f64 {
        db(self.peak)
    }

    /// Mean power over the noise in the same band; `None` without a noise figure.
    pub fn snr_db(&self) -> Option<f64> {
        (self.noise > 0.0 && self.mean > 0.0).then(|| db(self.mean / self.noise))
    }
}

/// What the census saw happen, in the order it saw it (when asked for, see
/// [`Census::with_events`]): for consumers that act while the input runs, such as captures.
#[derive(Clone, Debug, PartialEq)]
pub enum CensusEvent {
    /// A new emission was detected. `start_sample` is the earliest its start can be placed (one
    /// row before the row that found it), `center_hz` its detected centre so far.
    Opened { id: u64, start_sample: u64, center_hz: f64 },
    /// The emission ended (after the hang time, a gap, or the end of the input).
    Closed { id: u64, emission: Emission },
}

/// The whole census.
#[derive(Clone, Debug, PartialEq)]
pub struct CensusResult {
    pub sample_rate_hz: f64,
    pub center_hz: f64,
    pub fft_size: usize,
    pub rbw_hz: f64,
    pub duration_s: f64,
    pub noise_floor_dbfs_per_hz: f64,
    /// The floor per part of the span, outside the emitters ([`floor`]).
    pub floor: FloorProfile,
    /// Strongest (most power while on the air) first.
    pub emitters: Vec<EmitterFigures>,
    pub emissions: Vec<Emission>,
    pub emitters_dropped: u64,
    /// Of a panorama: the sweep it ran on (`sample_rate_hz` is then the receiver's rate).
    pub sweep: Option<SweepFacts>,
}

/// The numbers an emitter's figures are measured with.
#[derive(Clone, Debug)]
pub struct Layout {
    pub sample_rate_hz: f64,
    pub center_hz: f64,
    pub fft_size: usize,
    pub bin_hz: f64,
    pub rbw_hz: f64,
    pub stride: u64,
    pub duration_samples: u64,
    pub obw_percent: f64,
}

/// A closed emission before the emitters are sorted.
#[derive(Clone, Debug)]
struct Closed {
    emitter: usize,
    start: u64,
    end: u64,
    low_hz: f64,
    high_hz: f64,
    figures: EmissionFigures,
}

/// Detections of one row merged by footprint: bins, detected edges, power and centre.
#[derive(Clone, Copy, Debug)]
struct Cluster {
    lo: usize,
    hi: usize,
    low_hz: f64,
    high_hz: f64,
    power: f64,
    centre_weighted: f64,
}

/// The census, fed row by row.
pub struct Census {
    settings: CensusSettings,
    noise: NoiseTracker,
    window: Option<Window>,
    layout: Option<Layout>,
    prev: Vec<f64>,
    row: u64,
    last_span_end: u64,
    floor_sum: f64,
    /// Every row's PSD summed, and their degrees of freedom, for the floor per part.
    psd_sum: Vec<f64>,
    dof_sum: f64,
    tracks: Vec<Track>,
    clusters: Vec<Cluster>,
    emitters: Vec<EmitterAcc>,
    closed: Vec<Closed>,
    emitters_dropped: u64,
    /// Events kept for [`Census::take_events`], when asked for.
    events: Option<Vec<CensusEvent>>,
    next_track: u64,
    /// Noise density of the latest row, FS²/Hz.
    density: f64,
    /// Of a panorama: the sweep, and the span of every row (one a sweep) for its view times.
    sweep: Option<SweepView>,
    row_spans: Vec<(u64, u64)>,
}

impl Census {
    pub fn new(settings: CensusSettings) -> Census {
        let noise = NoiseTracker::new(settings.timing.floor_alpha, settings.timing.floor_rows);
        Census {
            settings,
            noise,
            window: None,
            layout: None,
            prev: Vec::new(),
            row: 0,
            last_span_end: 0,
            floor_sum: 0.0,
            psd_sum: Vec::new(),
            dof_sum: 0.0,
            tracks: Vec::new(),
            clusters: Vec::new(),
            emitters: Vec::new(),
            closed: Vec::new(),
            emitters_dropped: 0,
            events: None,
            next_track: 0,
            density: 0.0,
            sweep: None,
            row_spans: Vec::new(),
        }
    }

    /// Runs on the wide rows of a panorama (one a sweep): airtime and duty are counted over
    /// the time each emitter was in view ([`sweep`]), and times read at the receiver's rate.
    pub fn with_sweep(mut self, view: SweepView) -> Census {
        self.sweep = Some(view);
        self
    }

    /// Keeps a [`CensusEvent`] for every emission that opens or closes; the caller drains them
    /// with [`Census::take_events`] after each row (they are not bounded otherwise).
    pub fn with_events(mut self) -> Census {
        self.events = Some(Vec::new());
        self
    }

    /// The events since the last call, oldest first.
    pub fn take_events(&mut self) -> impl Iterator<Item = CensusEvent> + '_ {
        self.events.iter_mut().flat_map(|v| v.drain(..))
    }

    /// Takes one complete row.
    pub fn push(&mut self, row: &Spectrum) {
        if self.window.is_none() {
            self.window = Some(Window::new(row.window, row.fft_size));
            self.prev = row.psd.clone();
            self.psd_sum = vec![0.0; row.psd.len()];
            self.layout = Some(Layout {
                sample_rate_hz: self.sweep.as_ref().map_or(row.sample_rate_hz, |v| v.rate_hz),
                center_hz: row.center_hz,
                fft_size: row.fft_size,
                bin_hz: row.bin_hz(),
                rbw_hz: row.rbw_hz,
                stride: self.settings.timing.stride,
                duration_samples: 0,
                obw_percent: self.settings.detection.obw_percent,
            });
        }
        let density = self.noise.push(row);
        self.density = density;
        self.floor_sum += density;
        self.psd_sum.iter_mut().zip(&row.psd).for_each(|(s, p)| *s += p);
        self.dof_sum += row.dof;
        let span = self.settings.timing.row_span(row);
        self.last_span_end = span.1;
        if self.sweep.is_some() {
            self.row_spans.push(span);
        }
        let window = self.window.as_ref().expect("set above");
        let found =
            find_signals(row, window, density, self.settings.max_signals, self.settings.detection);
        self.cluster(row, &found);
        self.assign(row, span, density);
        let r = self.row;
        for t in &mut self.tracks {
            let e = energy(row, &row.psd, (t.lo, t.hi), density);
            t.take(r, span, e);
            self.emitters[t.emitter].add_row(r, &row.psd, density);
        }
        let hang = self.settings.hang_rows;
        let mut i = 0;
        while i < self.tracks.len() {
            if self.tracks[i].missed > hang {
                let t = self.tracks.swap_remove(i);
                self.close(&t, None, false);
            } else {
                i += 1;
            }
        }
        self.prev.copy_from_slice(&row.psd);
        self.row += 1;
    }

    /// Samples were lost: every open emission ends where it was last seen.
    pub fn gap(&mut self) {
        for t in std::mem::take(&mut self.tracks) {
            self.close(&t, None, true);
        }
    }

    /// Merges the row's detections into clusters by footprint.
    fn cluster(&mut self, row: &Spectrum, found: &[crate::measure::Signal]) {
        let n = row.fft_size;
        let guard = (2.0 * row.enbw_bins).ceil();
        self.clusters.clear();
        for s in found {
            let lo = (row.bin_of_freq(s.obw.low_hz) - guard).round().clamp(0.0, (n - 1) as f64);
            let hi = (row.bin_of_freq(s.obw.high_hz) + guard).round().clamp(lo, (n - 1) as f64);
            let power = crate::units::undb(s.power_dbfs);
            self.clusters.push(Cluster {
                lo: lo as usize,
                hi: hi as usize,
                low_hz: s.obw.low_hz,
                high_hz: s.obw.high_hz,
                power,
                centre_weighted: power * s.freq_hz,
            });
        }
        self.clusters.sort_unstable_by_key(|c| c.lo);
        let mut kept = 0;
        for i in 0..self.clusters.len() {
            let c = self.clusters[i];
            if kept > 0 && c.lo <= self.clusters[kept - 1].hi {
                let k = &mut self.clusters[kept - 1];
                k.hi = k.hi.max(c.hi);
                k.low_hz = k.low_hz.min(c.low_hz);
                k.high_hz = k.high_hz.max(c.high_hz);
                k.power += c.power;
                k.centre_weighted += c.centre_weighted;
            } else {
                self.clusters[kept] = c;
                kept += 1;
            }
        }
        self.clusters.truncate(kept);
    }

    /// Gives every cluster of the row to an open track, a new track of a known emitter, or a new
    /// emitter.
    fn assign(&mut self, row: &Spectrum, span: (u64, u64), density: f64) {
        for ci in 0..self.clusters.len() {
            let c = self.clusters[ci];
            let centre = c.centre_weighted / c.power.max(f64::MIN_POSITIVE);
            let open = self.tracks.iter().position(|t| t.lo <= c.hi && c.lo <= t.hi);
            let ti = match open {
                Some(ti) => ti,
                None => {
                    let Some(em) = self.emitter_for(centre, c, row.rbw_hz, row.fft_size) else {
                        continue;
                    };
                    match self.tracks.iter().position(|t| t.emitter == em) {
                        Some(ti) => ti,
                        None => {
                            let mut t = Track::new(em, (c.lo, c.hi), self.row, span);
                            t.id = self.next_track;
                            self.next_track += 1;
                            if let Some(ev) = self.events.as_mut() {
                                // The extent can reach back one row length before this row.
                                let start_sample = span.0.saturating_sub(span.1 - span.0);
                                ev.push(CensusEvent::Opened {
                                    id: t.id,
                                    start_sample,
                                    center_hz: centre,
                                });
                            }
                            if self.row > 0 {
                                t.e_before = energy(row, &self.prev, (c.lo, c.hi), density);
                                self.emitters[em].add_row(self.row - 1, &self.prev, density);
                            }
                            self.tracks.push(t);
                            self.tracks.len() - 1
                        }
                    }
                }
            };
            let t = &mut self.tracks[ti];
            t.extend((c.lo, c.hi), (c.low_hz, c.high_hz));
            let e = &mut self.emitters[t.emitter];
            e.detected(centre, c.power, (c.low_hz, c.high_hz));
            e.lo = e.lo.min(t.lo);
            e.hi = e.hi.max(t.hi);
        }
    }

    /// The emitter a new emission at `centre` belongs to, made if none is near; `None` once the
    /// cap is reached.
    fn emitter_for(&mut self, centre: f64, c: Cluster, rbw: f64, bins: usize) -> Option<usize> {
        let width = c.high_hz - c.low_hz;
        let near =
            self.emitters.iter().enumerate().filter(|(_, e)| e.is_near(centre, width, rbw)).min_by(
                |a, b| (a.1.centre() - centre).abs().total_cmp(&(b.1.centre() - centre).abs()),
            );
        if let Some((i, _)) = near {
            return Some(i);
        }
        if self.emitters.len() >= self.settings.max_emitters {
            self.emitters_dropped += 1;
            return None;
        }
        self.emitters.push(EmitterAcc::new(bins, (c.lo, c.hi)));
        Some(self.emitters.len() - 1)
    }

    /// Ends track `t`; `cut` when lost samples or the end of the input ended it.
    fn close(&mut self, t: &Track, input_end: Option<u64>, cut: bool) {
        self.emitters[t.emitter].detected_rows += t.detected as u64;
        let emission = self.emission_of(t, input_end, cut);
        let closed = Closed {
            emitter: t.emitter,
            start: emission.sample_start,
            end: emission.sample_start + emission.sample_count,
            low_hz: t.low_hz,
            high_hz: t.high_hz,
            figures: emission.figures,
        };
        if let Some(ev) = self.events.as_mut() {
            ev.push(CensusEvent::Closed { id: t.id, emission });
        }
        self.closed.push(closed);
    }

    /// Track `t` as an emission ending where it was last seen (or at `input_end`), its band the
    /// union of its detections so far, its noise that of the latest row.
    fn emission_of(&self, t: &Track, input_end: Option<u64>, cut: bool) -> Emission {
        let x = t.extent(t.first_row == 0, input_end);
        let rbw = self.layout.as_ref().map_or(0.0, |l| l.rbw_hz);
        Emission {
            emitter: t.emitter,
            sample_start: x.start,
            sample_count: x.end - x.start,
            low_hz: t.low_hz,
            high_hz: t.high_hz,
            figures: EmissionFigures {
                mean: t.full_energy(),
                peak: t.e_peak,
                noise: self.density * (t.high_hz - t.low_hz).max(rbw),
                partial: cut || t.first_row == 0 || input_end.is_some(),
            },
        }
    }

    /// The emissions still open that have lasted `min_samples` or more, by track id (as in
    /// [`CensusEvent`]), each as if it had ended where it was last seen: for a consumer that
    /// acts on a long emission before it ends (the classifier, which takes only its first
    /// part). `emitter` is an index of the census so far, not yet of the result.
    pub fn open_emissions(&self, min_samples: u64) -> impl Iterator<Item = (u64, Emission)> + '_ {
        self.tracks
            .iter()
            // The extent reaches at most one row before the first row that saw it.
            .filter(move |t| {
                let row = t.first_span.1 - t.first_span.0;
                t.last_span.1.saturating_sub(t.first_span.0) + row >= min_samples
            })
            .map(|t| (t.id, self.emission_of(t, None, false)))
            .filter(move |(_, e)| e.sample_count >= min_samples)
    }

    /// Closes every open emission at the end of the input, `end` (one past its last sample):
    /// those still seen in the last row run to `end`. [`Census::finish`] does this too; call it
    /// first to take the events of these closes.
    pub fn end_tracks(&mut self, end: u64) {
        let Some(last_row) = self.row.checked_sub(1) else { return };
        for t in std::mem::take(&mut self.tracks) {
            let to_end = (t.last_row == last_row).then_some(self.input_end(end));
            self.close(&t, to_end, false);
        }
    }

    /// Where the input ends for the figures: `end`, or past it the span of the last row (a row
    /// stands for a stride of input); a sweep's row spans a whole sweep, and its time out of
    /// view past the input's end would be counted as in view.
    fn input_end(&self, end: u64) -> u64 {
        if self.sweep.is_some() {
            end
        } else {
            end.max(self.last_span_end)
        }
    }

    /// Ends the census at sample `end` (one past the last sample of the input) and measures every
    /// emitter. Emissions still open in the last row run to `end`.
    pub fn finish(mut self, end: u64) -> Option<CensusResult> {
        self.end_tracks(end);
        let mut layout = self.layout.take()?;
        layout.duration_samples = self.input_end(end);
        let window = self.window.take()?;
        let floor = self.floor_profile(&layout);
        let home = self.merge_neighbours(layout.rbw_hz);
        let closed = self.join_emissions(&home);
        let measured: Vec<(usize, EmitterFigures)> = self
            .emitters
            .iter()
            .enumerate()
            .filter(|&(i, e)| home[i] == i && e.detected_rows >= MIN_DETECTED_ROWS)
            .filter_map(|(i, e)| e.figures(&layout, &window, false).map(|f| (i, f)))
            .collect();
        let mut ranked = self.attribute(measured, &closed, &layout, &window);
        ranked.sort_by(|a, b| b.1.power_dbfs.total_cmp(&a.1.power_dbfs));
        let mut index = vec![usize::MAX; self.emitters.len()];
        for (k, (i, _)) in ranked.iter().enumerate() {
            index[*i] = k;
        }
        let mut emitters: Vec<EmitterFigures> = ranked.into_iter().map(|(_, f)| f).collect();
        name_emitters(&mut emitters);
        let mut emissions: Vec<Emission> = closed
            .iter()
            .filter(|c| index[c.emitter] != usize::MAX)
            .map(|c| Emission {
                emitter: index[c.emitter],
                sample_start: c.start,
                sample_count: c.end - c.start,
                low_hz: c.low_hz,
                high_hz: c.high_hz,
                figures: c.figures,
            })
            .collect();
        emissions.sort_by_key(|e| e.sample_start);
        if let Some(v) = &self.sweep {
            v.apply(&mut emitters, &emissions, &self.row_spans, layout.duration_samples);
        }
        Some(CensusResult {
            sample_rate_hz: layout.sample_rate_hz,
            center_hz: layout.center_hz,
            fft_size: layout.fft_size,
            rbw_hz: layout.rbw_hz,
            duration_s: layout.duration_samples as f64 / layout.sample_rate_hz,
            noise_floor_dbfs_per_hz: db(self.floor_sum / self.row as f64),
            floor,
            emitters,
            emissions,
            emitters_dropped: self.emitters_dropped,
            sweep: self.sweep.as_ref().map(SweepView::facts),
        })
    }
}

impl Census {
    /// Attributes keying transients and out-of-band skirts to the emitters that made them
    /// ([`attribute`]): returns the emitters that remain, a skirted one measured again over its
    /// band widened by its skirts and centred on its x-dB band (a pulse train's line spectrum or
    /// a lopsided skirt moves the middle of its 99 % band).
    fn attribute(
        &mut self,
        measured: Vec<(usize, EmitterFigures)>,
        closed: &[Closed],
        layout: &Layout,
        window: &Window,
    ) -> Vec<(usize, EmitterFigures)> {
        let mut at = vec![usize::MAX; self.emitters.len()];
        for (k, (i, _)) in measured.iter().enumerate() {
            at[*i] = k;
        }
        let mut pieces: Vec<Piece> = measured
            .iter()
            .map(|(_, f)| Piece {
                center_hz: f.center_hz,
                obw_hz: f.obw_hz,
                power: undb(f.power_dbfs),
                peak: undb(f.peak_dbfs),
                emissions: Vec::new(),
            })
            .collect();
        for c in closed.iter().filter(|c| at[c.emitter] != usize::MAX) {
            let span = Span { start: c.start, end: c.end };
            pieces[at[c.emitter]].emissions.push(span);
        }
        let scale =
            Scale::new(layout.stride, layout.fft_size, layout.duration_samples, layout.rbw_hz);
        let fate = attribute::attribute(&pieces, scale);
        let mut found = vec![(Attributed::default(), 0.0, 0.0); measured.len()];
        for (k, f) in fate.iter().enumerate() {
            match f {
                Fate::Own => {}
                Fate::Skirt { root } => {
                    let (lo, hi) =
                        (self.emitters[measured[k].0].lo, self.emitters[measured[k].0].hi);
                    let r = &mut self.emitters[measured[*root].0];
                    (r.lo, r.hi) = (r.lo.min(lo), r.hi.max(hi));
                    found[*root].0.skirts += 1;
                    found[*root].2 +=
                        pieces[k].emissions.iter().map(|x| pieces[k].energy(x)).sum::<f64>();
                }
                Fate::Transient { parents } => {
                    for (&p, x) in parents.iter().zip(&pieces[k].emissions) {
                        found[p].0.transients += 1;
                        found[p].1 += pieces[k].energy(x);
                    }
                }
            }
        }
        let mut kept = Vec::with_capacity(measured.len());
        for (k, (i, f)) in measured.into_iter().enumerate() {
            if fate[k] != Fate::Own {
                continue;
            }
            let (mut attributed, transient_e, skirt_e) = found[k];
            let f = if attributed.skirts > 0 {
                self.emitters[i].figures(layout, window, true).unwrap_or(f)
            } else {
                f
            };
            let own = undb(f.power_dbfs) * self.emitters[i].airtime as f64;
            if own > 0.0 {
                attributed.transient_share = transient_e / own;
                attributed.skirt_share = skirt_e / own;
            }
            kept.push((i, EmitterFigures { attributed, ..f }));
        }
        kept
    }

    /// The floor per part of the span, outside every emitter's footprint (those later dropped
    /// as false alarms too: a bin that may hold a weak emission is left out).
    fn floor_profile(&self, layout: &Layout) -> FloorProfile {
        let rows = self.row.max(1) as f64;
        let mean: Vec<f64> = self.psd_sum.iter().map(|s| s / rows).collect();
        let mut busy = vec![false; mean.len()];
        for e in &self.emitters {
            busy[e.lo..=e.hi.min(mean.len().saturating_sub(1))].iter_mut().for_each(|b| *b = true);
        }
        floor_profile(&FloorInput {
            mean_psd: &mean,
            busy: &busy,
            center_hz: layout.center_hz,
            bin_hz: layout.bin_hz,
            dof: self.dof_sum,
        })
    }

    /// Folds emitters that ended up at one place into the one seen in most rows; returns, for
    /// every emitter, the one it now lives in.
    fn merge_neighbours(&mut self, rbw: f64) -> Vec<usize> {
        let mut order: Vec<usize> = (0..self.emitters.len()).collect();
        order.sort_by_key(|&i| std::cmp::Reverse(self.emitters[i].detected_rows));
        let mut home: Vec<usize> = (0..self.emitters.len()).collect();
        let mut kept: Vec<usize> = Vec::new();
        for i in order {
            let e = &self.emitters[i];
            match kept
                .iter()
                .copied()
                .find(|&k| self.emitters[k].is_near(e.centre(), e.width(), rbw))
            {
                Some(k) => {
                    let e = self.emitters[i].clone();
                    self.emitters[k].absorb(&e);
                    home[i] = k;
                }
                None => kept.push(i),
            }
        }
        home
    }

    /// The emissions with each moved to the emitter it now lives in, and those of one emitter
    /// that overlap in time joined (a fragment and the emission it belonged to); the emitters'
    /// counts, airtime and first/last are recounted from them.
    fn join_emissions(&mut self, home: &[usize]) -> Vec<Closed> {
        let mut closed = std::mem::take(&mut self.closed);
        for c in &mut closed {
            c.emitter = home[c.emitter];
        }
        closed.sort_by_key(|c| (c.emitter, c.start));
        let mut joined: Vec<Closed> = Vec::with_capacity(closed.len());
        for c in closed {
            match joined.last_mut().filter(|l| l.emitter == c.emitter && c.start <= l.end) {
                Some(l) => {
                    l.figures = joined_figures(l, &c);
                    l.end = l.end.max(c.end);
                    l.low_hz = l.low_hz.min(c.low_hz);
                    l.high_hz = l.high_hz.max(c.high_hz);
                }
                None => joined.push(c),
            }
        }
        for e in &mut self.emitters {
            (e.emissions, e.airtime, e.first, e.last) = (0, 0, u64::MAX, 0);
        }
        for c in &joined {
            let e = &mut self.emitters[c.emitter];
            e.emissions += 1;
            e.airtime += c.end - c.start;
            e.first = e.first.min(c.start);
            e.last = e.last.max(c.end);
        }
        joined
    }
}

/// The figures of two overlapping pieces of one emission joined: mean and noise weighted by
/// length, the higher peak.
fn joined_figures(a: &Closed, b: &Closed) -> EmissionFigures {
    let (la, lb) = ((a.end - a.start).max(1) as f64, (b.end - b.start).max(1) as f64);
    let (fa, fb) = (a.figures, b.figures);
    let w = |x: f64, y: f64| (x * la + y * lb) / (la + lb);
    EmissionFigures {
        mean: w(fa.mean, fb.mean),
        peak: fa.peak.max(fb.peak),
        noise: w(fa.noise, fb.noise),
        partial: fa.partial || fb.partial,
    }
}

/// Band energy of bins `lo..=hi` of `psd` less the noise in them, FS².
fn energy(row: &Spectrum, psd: &[f64], (lo, hi): (usize, usize), density: f64) -> f64 {
    let sum: f64 = psd[lo..=hi].iter().sum();
    (sum - density * (hi + 1 - lo) as f64) * row.bin_hz()
}

/// The name of an emitter at `center_hz` before `-2`, `-3`… are added: `f` and the centre in
/// kHz to 0.1 kHz (`f433137.5`). Also the name of an emission while the input runs.
pub fn frequency_name(center_hz: f64) -> String {
    format!("f{:.1}", center_hz / 1e3)
}

/// Names from frequency: `f` and the centre in kHz to 0.1 kHz (`f433137.5`), with `-2`, `-3`…
/// where two would read the same.
fn name_emitters(emitters: &mut [EmitterFigures]) {
    let mut used: Vec<String> = Vec::with_capacity(emitters.len());
    for e in emitters.iter_mut() {
        let base = frequency_name(e.center_hz);
        let mut name = base.clone();
        let mut k = 2;
        while used.contains(&name) {
            name = format!("{base}-{k}");
            k += 1;
        }
        used.push(name.clone());
        e.name = name;
    }
}
