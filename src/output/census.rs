//! The census as a pipeline consumer, and its three forms of output: a table, one JSON object,
//! and a channel plan in the TOML format `log --plan` reads.

use crate::dsp::Spectrum;
use crate::measure::calibration::Calibration;
use crate::measure::census::floor::FloorProfile;
use crate::measure::census::sweep::SweepFacts;
use crate::measure::census::{
    frequency_name, Attributed, Census, CensusEvent, CensusResult, Emission, EmitterFigures,
};
use crate::measure::classify::{Class, Classification};
use crate::measure::vote::{EmitterKind, Vote};
use crate::output::levels::level_unit;
use crate::output::log::CaptureRecord;
use crate::output::sigmf::annotate::{comment, AnnotateSummary, AnnotationWriter, EmissionNote};
use crate::output::sigmf::capture::Trigger;
use crate::pipeline::kinds::{Kinds, Span};
use crate::pipeline::{Consumer, Flow, GapCause, Letter, Post, RunEnd, RunInfo};
use crate::source::reader::Block;
use crate::units::round_dp as round;
use serde_json::json;
use std::collections::HashMap;
use std::fmt::Write as _;
use std::io;

/// Feeds every complete row to the census and measures it when the run ends; with
/// [`CensusConsumer::with_annotations`] writes every emission as a SigMF annotation, with
/// [`CensusConsumer::with_triggers`] tells the captures when emissions begin and end (a
/// [`Trigger`] letter each), and keeps the capture records that come back for `--json`.
pub struct CensusConsumer {
    census: Option<Census>,
    result: Option<CensusResult>,
    annotations: Option<AnnotationWriter>,
    /// What the annotation file came to, once written.
    pub annotated: Option<AnnotateSummary>,
    /// Where triggers go, when captures want them.
    triggers: Option<Post>,
    /// The capture records of the run, in the order they came.
    pub captures: Vec<CaptureRecord>,
    /// Names of the emissions open now, by track (their detected centre when they began).
    open: HashMap<u64, String>,
    /// The samples emissions are classified from, when asked for.
    kinds: Option<Kinds>,
    /// Every emission sent to be classified as it ended (start, end, centre and width Hz), in
    /// the order of [`Kinds::collect`]'s answers.
    sent: Vec<(u64, u64, f64, f64)>,
    /// Those emissions with their classes, once collected at the end of the run.
    classified: Vec<Classified>,
    /// Places in frequency already classified, and how much of them.
    places: Vec<Place>,
    /// Emissions still open that were classified once they had lasted long enough (by track
    /// id: their index in `sent`), or passed over then (`None`: their place had enough).
    early: HashMap<u64, Option<usize>>,
    /// RBW of the rows, for the noise density of an emission's band.
    rbw_hz: f64,
    /// Each emitter's kind (in the order of the result's emitters), once the run has finished.
    pub emitter_kinds: Vec<EmitterKind>,
}

/// An emission classified when it ended, before the census grouped it into an emitter.
#[derive(Clone, Debug)]
struct Classified {
    start: u64,
    end: u64,
    center_hz: f64,
    /// Width of the band it was classified in, Hz.
    width_hz: f64,
    class: Box<Classification>,
}

impl CensusConsumer {
    pub fn new(census: Census) -> CensusConsumer {
        CensusConsumer {
            census: Some(census),
            result: None,
            annotations: None,
            annotated: None,
            triggers: None,
            captures: Vec::new(),
            open: HashMap::new(),
            kinds: None,
            sent: Vec::new(),
            classified: Vec::new(),
            places: Vec::new(),
            early: HashMap::new(),
            rbw_hz: 0.0,
            emitter_kinds: Vec::new(),
        }
    }

    /// Classifies every emission as it ends, from the newest samples of the input (see
    /// [`crate::pipeline::kinds`]), and each emitter by the vote of its emissions
    /// ([`crate::measure::vote`]).
    pub fn with_kinds(mut self, rate_hz: f64, center_hz: f64) -> CensusConsumer {
        self.census = self.census.take().map(Census::with_events);
        self.kinds = Some(Kinds::new(rate_hz, center_hz));
        self
    }

    /// Writes each emission, labelled with its emitter's name, when the run ends.
    pub fn with_annotations(mut self, writer: AnnotationWriter) -> CensusConsumer {
        self.annotations = Some(writer);
        self
    }

    /// Sends a [`Trigger`] as each emission begins and ends (named from its detected centre, as
    /// emitters are; the final names are given only when the census ends).
    pub fn with_triggers(mut self) -> CensusConsumer {
        self.census = self.census.take().map(Census::with_events);
        self.triggers = Some(Post::default());
        self
    }

    /// The census, once the run has finished (`None` if no complete row was seen).
    pub fn result(&self) -> Option<&CensusResult> {
        self.result.as_ref()
    }

    /// The census's events since the last call, as triggers, and the emissions that ended
    /// classified.
    fn pass_events(&mut self) {
        let Some(c) = self.census.as_mut() else { return };
        for ev in c.take_events() {
            if let (CensusEvent::Closed { id, emission }, Some(k)) = (&ev, self.kinds.as_mut()) {
                let span = emission_span(emission, self.rbw_hz);
                if let Some(early) = self.early.remove(id) {
                    // Classified (or passed over) while it was open: it now counts for its
                    // whole length.
                    if let Some(sent) = early.and_then(|i| self.sent.get_mut(i)) {
                        (sent.0, sent.1) = (span.start, span.end);
                    }
                    continue;
                }
                let taken = k.cut(&span).map_or(0, |(a, b)| b - a);
                let full = k.take_max() as u64;
                if take_place(&mut self.places, (span.center_hz, span.obw_hz), taken, full) {
                    k.classify_later(&span);
                    self.sent.push((span.start, span.end, span.center_hz, span.obw_hz));
                }
            }
            let Some(q) = self.triggers.as_ref() else { continue };
            match ev {
                CensusEvent::Opened { id, start_sample, center_hz } => {
                    let label = frequency_name(center_hz);
                    self.open.insert(id, label.clone());
                    q.send(Trigger::Begin { key: id, label, start: start_sample });
                }
                CensusEvent::Closed { id, emission } => {
                    let centre = (emission.low_hz + emission.high_hz) / 2.0;
                    let label = self.open.remove(&id).unwrap_or_else(|| frequency_name(centre));
                    q.send(Trigger::End { key: id, note: emission_note(&emission, label, None) });
                }
            }
        }
    }

    /// Classifies each open emission of one full cut ([`Kinds::take_max`] samples) or more once
    /// its start has been in the history for [`EARLY_SHARE`] of the history's length, before it
    /// is dropped: from its first samples, as when it ends, but in the band measured so far (a
    /// long emission's detected band has long settled by then). A long emission was otherwise
    /// classified when it ended, from its newest samples, and those still open when the input
    /// ended were all classified at once (a 200 kHz link alone kept one worker busy for about
    /// 50 ms after the last row: the tail of a census). Emissions that end sooner are classified
    /// when they end, as before; so is one whose start left the history before a row came (a
    /// block longer than a quarter of the history, at low rates).
    fn classify_long(&mut self) {
        let (Some(c), Some(k)) = (self.census.as_ref(), self.kinds.as_mut()) else { return };
        let full = k.take_max() as u64;
        let long = (k.history().capacity() as f64 * EARLY_SHARE) as u64;
        let (first, end) = (k.history().first(), k.history().end());
        for (id, e) in c.open_emissions(full) {
            // Already handled; not yet held long enough; or its start is gone (it is then
            // classified when it ends).
            let start = e.sample_start;
            if self.early.contains_key(&id) || end.saturating_sub(start) < long || start < first {
                continue;
            }
            let span = emission_span(&e, self.rbw_hz);
            let span = Span { end: span.start + full, ..span };
            let taken = k.cut(&span).map_or(0, |(a, b)| b - a);
            let sent = &mut self.sent;
            let slot = take_place(&mut self.places, (span.center_hz, span.obw_hz), taken, full)
                .then(|| {
                    k.classify_later(&span);
                    sent.push((span.start, span.end, span.center_hz, span.obw_hz));
                    sent.len() - 1
                });
            self.early.insert(id, slot);
        }
    }

    /// Gives each emission of the result the classification of the one it grew from, and each
    /// emitter the vote of its emissions.
    fn settle_kinds(&mut self) -> Vec<Option<Box<Classification>>> {
        if let Some(k) = self.kinds.as_mut() {
            let answers = k.collect();
            self.classified = std::mem::take(&mut self.sent)
                .into_iter()
                .zip(answers)
                .map(|((start, end, center_hz, width_hz), c)| Classified {
                    start,
                    end,
                    center_hz,
                    width_hz,
                    class: Box::new(c),
                })
                .collect();
        }
        let Some(r) = self.result.as_ref().filter(|_| self.kinds.is_some()) else {
            return Vec::new();
        };
        let of_emission = match_classified(&r.emissions, &self.classified);
        // Each votes with its length times the share of its emitter's band it was seen in: a
        // piece of an emitter (one tone of an FSK, one sideband) says less about its kind than
        // an emission across its whole band.
        let mut votes = vec![Vote::default(); r.emitters.len()];
        for (c, e) in self.classified.iter().zip(&of_emission) {
            if let Some(e) = e {
                let emitter = r.emissions[*e].emitter;
                let obw = r.emitters[emitter].obw_hz;
                let share = if obw > 0.0 { (c.width_hz / obw).clamp(0.0, 1.0) } else { 1.0 };
                votes[emitter].add(&c.class, (c.end - c.start) as f64 * share);
            }
        }
        self.emitter_kinds =
            votes.iter().zip(&r.emitters).map(|(v, e)| v.result(e.obw_hz)).collect();
        // An emission joined from pieces takes the class of its longest piece.
        let mut per_emission: Vec<Option<(u64, &Classified)>> = vec![None; r.emissions.len()];
        for (c, e) in self.classified.iter().zip(&of_emission) {
            if let Some(e) = *e {
                let len = c.end - c.start;
                if per_emission[e].map_or(true, |(l, _)| len > l) {
                    per_emission[e] = Some((len, c));
                }
            }
        }
        per_emission.into_iter().map(|p| p.map(|(_, c)| c.class.clone())).collect()
    }
}

/// Share of the classifier's history a long open emission's start has been held before the
/// emission is classified (see `CensusConsumer::classify_long`): late enough that its band has
/// settled, early enough that its start is still held when the next rows come (a quarter of
/// the history is left, a second at 1 MS/s).
pub const EARLY_SHARE: f64 = 0.75;

/// Emissions classified at one place in frequency: an emitter's kind is the vote of its first
/// ones. Classifying each of a busy channel's hundreds of bursts would cost far more than the
/// census itself (about 70 ms per half second of 1 MS/s input) and tell little more.
pub const CLASSIFIED_PER_PLACE: u32 = 3;

/// A place in frequency whose emissions have been classified: its centre and width (of the
/// first emission there), how many emissions and how many samples of them.
#[derive(Clone, Copy, Debug)]
struct Place {
    centre_hz: f64,
    width_hz: f64,
    emissions: u32,
    samples: u64,
}

/// Whether the emission at `(centre, width)` Hz, of which the classifier would be given `taken`
/// samples, is still to be classified; counts it if so. A place is classified until it has had
/// [`CLASSIFIED_PER_PLACE`] emissions or, sooner, `full` samples in all (what one
/// classification takes at most, [`Kinds::take_max`]): the bursts of a keyed channel each add
/// evidence, while a long transmission has given all one classification can use by its first
/// emission, and a second or third cut of the same length (about 25 ms of a worker's time each
/// for a narrow FM voice channel at 1 MS/s) would tell the vote little more. The choice depends
/// only on the emissions' lengths, never on an answer, so a census comes out the same however
/// fast its workers run. Places are matched by centres within half the wider width.
fn take_place(places: &mut Vec<Place>, (centre, width): (f64, f64), taken: u64, full: u64) -> bool {
    match places.iter_mut().find(|p| (p.centre_hz - centre).abs() <= 0.5 * p.width_hz.max(width)) {
        Some(p) if p.emissions >= CLASSIFIED_PER_PLACE || p.samples >= full => false,
        Some(p) => {
            p.emissions += 1;
            p.samples += taken;
            true
        }
        None => {
            places.push(Place { centre_hz: centre, width_hz: width, emissions: 1, samples: taken });
            true
        }
    }
}

/// Where a census emission lay, for the classifier: its detected band's centre and width, and
/// the noise density its figures were measured against.
fn emission_span(e: &Emission, rbw_hz: f64) -> Span {
    let width = e.high_hz - e.low_hz;
    let noise_psd = Some(e.figures.noise / width.max(rbw_hz)).filter(|d| d.is_finite() && *d > 0.0);
    Span {
        start: e.sample_start,
        end: e.sample_start + e.sample_count,
        center_hz: 0.5 * (e.low_hz + e.high_hz),
        obw_hz: width,
        noise_psd,
    }
}

/// For each classified emission, the emission of the result it is part of: the one it overlaps
/// longest in time whose band holds its centre (`None`: the census left it out, or its pieces
/// were attributed elsewhere).
fn match_classified(emissions: &[Emission], classified: &[Classified]) -> Vec<Option<usize>> {
    classified
        .iter()
        .map(|c| {
            emissions
                .iter()
                .enumerate()
                .filter(|(_, e)| e.low_hz <= c.center_hz && c.center_hz <= e.high_hz)
                .map(|(i, e)| {
                    let end = e.sample_start + e.sample_count;
                    (i, end.min(c.end).saturating_sub(e.sample_start.max(c.start)))
                })
                .filter(|&(_, overlap)| overlap > 0)
                .max_by_key(|&(_, overlap)| overlap)
                .map(|(i, _)| i)
        })
        .collect()
}

/// A census emission as an annotation: its detected band, levels and OBW; `emitter_center_hz`
/// is its emitter's centre when known.
pub fn emission_note(e: &Emission, label: String, emitter_center_hz: Option<f64>) -> EmissionNote {
    let f = &e.figures;
    let (mean, peak, snr) = (f.mean_dbfs(), f.peak_dbfs(), f.snr_db());
    let obw = Some(e.high_hz - e.low_hz).filter(|w| w.is_finite() && *w > 0.0);
    EmissionNote {
        sample_start: e.sample_start,
        sample_count: e.sample_count,
        freq_lower_edge_hz: e.low_hz,
        freq_upper_edge_hz: e.high_hz,
        label,
        comment: comment(
            Some(mean).filter(|m| m.is_finite()),
            Some(peak).filter(|p| p.is_finite()),
            snr,
            obw,
        ),
        mean_dbfs: Some(mean),
        peak_dbfs: Some(peak),
        snr_db: snr,
        obw_hz: obw,
        channel_center_hz: emitter_center_hz,
        partial: f.partial,
        class: None,
    }
}

impl Consumer for CensusConsumer {
    fn connect(&mut self, post: &Post) {
        if let Some(t) = self.triggers.as_mut() {
            *t = post.clone();
        }
    }

    fn mail(&mut self, letter: &Letter, _run: &RunInfo) -> io::Result<()> {
        if let Some(c) = letter.read::<CaptureRecord>() {
            self.captures.push(c.clone());
        }
        Ok(())
    }

    fn block(&mut self, block: &Block) -> io::Result<()> {
        if let Some(k) = self.kinds.as_mut() {
            k.push(block.start, &block.samples);
        }
        Ok(())
    }

    fn row(&mut self, row: &Spectrum) -> io::Result<Flow> {
        self.rbw_hz = row.rbw_hz;
        if let Some(c) = self.census.as_mut() {
            c.push(row);
        }
        self.pass_events();
        self.classify_long();
        Ok(Flow::Continue)
    }

    fn gap(&mut self, _from: u64, _to: u64, _cause: GapCause, _run: &RunInfo) -> io::Result<()> {
        if let Some(c) = self.census.as_mut() {
            c.gap();
        }
        self.pass_events();
        Ok(())
    }

    /// Ends the emissions still open, so the captures they started are closed with them.
    fn ending(&mut self, end: &RunEnd, _run: &RunInfo) -> io::Result<()> {
        if let Some(c) = self.census.as_mut() {
            c.end_tracks(end.end_sample);
        }
        self.pass_events();
        Ok(())
    }

    fn finish(&mut self, end: &RunEnd, run: &RunInfo) -> io::Result<()> {
        if let Some(c) = self.census.take() {
            self.result = c.finish(end.end_sample);
        }
        let emission_kinds = self.settle_kinds();
        if let Some(mut w) = self.annotations.take() {
            if let Some(r) = &self.result {
                for (i, e) in r.emissions.iter().enumerate() {
                    let emitter = &r.emitters[e.emitter];
                    let mut note = emission_note(e, emitter.name.clone(), Some(emitter.center_hz));
                    note.class = emission_kinds.get(i).cloned().flatten();
                    w.push(note);
                }
            }
            self.annotated = Some(w.finish(run)?);
        }
        Ok(())
    }
}

/// The capture records of a run (one per emission captured or skipped) as a JSON list, as the
/// log writes them, for `census --json`.
pub fn capture_list(captures: &[CaptureRecord]) -> serde_json::Value {
    let list: Vec<serde_json::Value> =
        captures.iter().filter_map(|c| serde_json::to_value(c).ok()).collect();
    serde_json::Value::Array(list)
}

/// The census as exactly one JSON object (strongest emitter first).
pub fn to_json(r: &CensusResult) -> String {
    to_json_value(r).to_string()
}

/// The census as a JSON value, for a command to add to.
pub fn to_json_value(r: &CensusResult) -> serde_json::Value {
    let emitters: Vec<_> = r
        .emitters
        .iter()
        .map(|e| {
            let mut v = json!({
                "name": e.name,
                "center_hz": round(e.center_hz, 1),
                "obw_hz": round(e.obw_hz, 1),
                "first_s": round(e.first_s, 4),
                "last_s": round(e.last_s, 4),
                "emissions": e.emissions,
                "airtime_pct": round(e.airtime_pct, 2),
                "peak_dbfs": round(e.peak_dbfs, 2),
                "power_dbfs": round(e.power_dbfs, 2),
                "attributed": attributed_json(&e.attributed),
            });
            if let Some(o) = e.observation_s {
                v["observation_s"] = round(o, 4).into();
                v["airtime_s"] = round(e.airtime_s, 4).into();
            }
            v
        })
        .collect();
    let mut v = json!({
        "sample_rate_hz": r.sample_rate_hz,
        "center_hz": r.center_hz,
        "fft_size": r.fft_size,
        "rbw_hz": round(r.rbw_hz, 3),
        "duration_s": round(r.duration_s, 4),
        "noise_floor_dbfs_per_hz": round(r.noise_floor_dbfs_per_hz, 2),
        "floor": floor_json(&r.floor),
        "emitters": emitters,
    });
    if let Some(w) = &r.sweep {
        // The rows' bin count is the panorama's; the FFT is one step's.
        v["fft_size"] = w.fft_size.into();
        v["sweep"] = sweep_json(w);
    }
    v
}

/// The sweep a panorama census ran on, for `--json`.
fn sweep_json(w: &SweepFacts) -> serde_json::Value {
    json!({
        "span_hz": [round(w.low_hz, 1), round(w.high_hz, 1)],
        "steps": w.steps,
        "centres": w.centres,
        "bins": w.bins,
        "revisit_s": round(w.revisit_s, 6),
        "settle_s": round(w.settle_s, 6),
    })
}

/// The table's line on the sweep: what a panorama census covered and how often.
fn sweep_line(w: &SweepFacts) -> String {
    format!(
        "a sweep: {} .. {} MHz in {} steps ({} centres), revisited every {:.3} s, {:.1} ms settling skipped; airtime % is over the time each emitter was in view (observed s)\n",
        crate::units::format_num(w.low_hz / 1e6),
        crate::units::format_num(w.high_hz / 1e6),
        w.steps,
        w.centres,
        w.revisit_s,
        w.settle_s * 1e3
    )
}

/// What was attributed to an emitter, for `--json`: counts always, energies (dBc, relative to
/// the emitter's own energy on the air) where there was something.
fn attributed_json(a: &Attributed) -> serde_json::Value {
    json!({
        "transients": a.transients,
        "transient_energy_dbc": a.transient_energy_dbc().map(|v| round(v, 1)),
        "skirts": a.skirts,
        "skirt_energy_dbc": a.skirt_energy_dbc().map(|v| round(v, 1)),
    })
}

/// One line for the table's notes on what was attributed to emitter `e`, if anything.
fn attributed_note(e: &EmitterFigures) -> Option<String> {
    let a = &e.attributed;
    let mut parts = Vec::new();
    if a.transients > 0 {
        let energy = a.transient_energy_dbc().map_or(String::new(), |v| format!(", {v:.1} dBc"));
        parts.push(format!("{} keying transient(s){energy}", a.transients));
    }
    if a.skirts > 0 {
        let energy = a.skirt_energy_dbc().map_or(String::new(), |v| format!(", {v:.1} dBc"));
        parts.push(format!("{} out-of-band skirt(s) or line(s){energy}", a.skirts));
    }
    (!parts.is_empty()).then(|| format!("  {}: {}", e.name, parts.join("; ")))
}

/// The floor per part of the span: its edges (Hz, to 0.1 Hz) and density (dBFS/Hz, to 0.01 dB;
/// null where emitters cover the part).
fn floor_json(f: &FloorProfile) -> serde_json::Value {
    let parts: Vec<_> = f
        .parts
        .iter()
        .map(|p| {
            json!({
                "start_hz": round(p.start_hz, 1),
                "end_hz": round(p.end_hz, 1),
                "dbfs_per_hz": p.dbfs_per_hz.map(|v| round(v, 2)),
            })
        })
        .collect();
    json!({ "span_dbfs_per_hz": f.span_dbfs_per_hz.map(|v| round(v, 2)), "parts": parts })
}

/// Adds each emitter's kind to the census's JSON (`class`, `class_confidence`, `class_params`
/// with the parameters that apply, `designator`); `kinds` are in the order of its emitters.
pub fn add_kinds(v: &mut serde_json::Value, kinds: &[EmitterKind]) {
    let Some(list) = v.get_mut("emitters").and_then(|e| e.as_array_mut()) else { return };
    for (e, k) in list.iter_mut().zip(kinds) {
        let Some(obj) = e.as_object_mut() else { continue };
        obj.insert("class".into(), k.class.as_str().into());
        obj.insert("class_confidence".into(), round(k.confidence, 3).into());
        obj.insert(
            "class_params".into(),
            serde_json::to_value(super::class_fields::rounded(&k.params)).unwrap_or_default(),
        );
        obj.insert("designator".into(), k.designator.clone().into());
    }
}

/// Kind `unknown` for every emitter of `r` (none was classified).
pub fn unknown_kinds(r: &CensusResult) -> Vec<EmitterKind> {
    r.emitters.iter().map(|e| Vote::default().result(e.obw_hz)).collect()
}

/// Why a sweep's emitters have kind `unknown`: classifying takes an emitter's IQ from a dwell
/// that saw it, and the census of a sweep keeps none.
pub const SWEEP_KIND_REASON: &str = "a sweep: the IQ of the dwells that saw each emitter is not kept, so kinds are not classified (unknown); classify a single dwell on its own (a SigMF capture with --segment N, or a recording made at one centre)";

/// Adds the kinds a census reports to its JSON `v` and gives them back: those classified, or
/// for a sweep whose kinds were asked (`sweep`) `unknown` for every emitter of `r`, with
/// [`SWEEP_KIND_REASON`] beside each and said once on standard error.
pub fn settle_kinds(
    v: &mut serde_json::Value,
    r: &CensusResult,
    classified: &[EmitterKind],
    sweep: bool,
) -> Vec<EmitterKind> {
    let kinds = if sweep { unknown_kinds(r) } else { classified.to_vec() };
    add_kinds(v, &kinds);
    if sweep {
        add_kind_reason(v, SWEEP_KIND_REASON);
        crate::messages::note(SWEEP_KIND_REASON);
    }
    kinds
}

/// Says beside each emitter's kind why it was not classified.
pub fn add_kind_reason(v: &mut serde_json::Value, reason: &str) {
    let Some(list) = v.get_mut("emitters").and_then(|e| e.as_array_mut()) else { return };
    for e in list.iter_mut().filter_map(|e| e.as_object_mut()) {
        e.insert("class_reason".into(), reason.into());
    }
}

/// The kind column's word: the class's name, `?` for unknown.
pub fn kind_word(class: Class) -> &'static str {
    match class {
        Class::Unknown => "?",
        c => c.as_str(),
    }
}

/// The census as a table, strongest first, units in the header.
pub fn to_table(r: &CensusResult, label: &str) -> String {
    to_table_with_kinds(r, label, &[], None)
}

/// [`to_table`] with each emitter's kind and designator in two last columns (none when `kinds`
/// is empty). The rows are wider than 80 columns already; a narrow terminal wraps them, and
/// these columns come last so that the figures stay in place.
/// With a calibration, levels are dBm, each at its emitter's own frequency.
pub fn to_table_with_kinds(
    r: &CensusResult,
    label: &str,
    kinds: &[EmitterKind],
    cal: Option<&Calibration>,
) -> String {
    let unit = level_unit(cal);
    let at = |dbfs: f64, freq_hz: f64| dbfs + cal.map_or(0.0, |c| c.offset_db(freq_hz));
    let kind_cells = |i: usize| {
        kinds
            .get(i)
            .map_or(String::new(), |k| format!(" {:<6} {:<10}", kind_word(k.class), k.designator))
    };
    let mut s = String::new();
    let _ = writeln!(
        s,
        "census of {label}: {:.3} s, {} S/s around {} Hz, FFT {}, RBW {:.1} Hz, noise {:.1} {unit}/Hz",
        r.duration_s,
        crate::units::format_num(r.sample_rate_hz),
        crate::units::format_num(r.center_hz),
        r.sweep.as_ref().map_or(r.fft_size, |w| w.fft_size),
        r.rbw_hz,
        at(r.noise_floor_dbfs_per_hz, r.center_hz)
    );
    if let Some(w) = &r.sweep {
        s.push_str(&sweep_line(w));
    }
    let observed =
        |e: &EmitterFigures| e.observation_s.map_or(String::new(), |o| format!(" {o:>10.3}"));
    let observed_head =
        if r.sweep.is_some() { format!(" {:>10}", "observed s") } else { String::new() };
    if r.emitters.is_empty() {
        s.push_str("no emitters found\n");
        return s;
    }
    let _ = writeln!(
        s,
        "{:<14} {:>15} {:>10} {:>9} {:>9} {:>9} {:>9}{} {:>10} {:>10}{}",
        "name",
        "centre (MHz)",
        "OBW (kHz)",
        "first (s)",
        "last (s)",
        "emissions",
        "airtime %",
        observed_head,
        format!("peak {unit}"),
        format!("power {unit}"),
        if kinds.is_empty() {
            String::new()
        } else {
            format!(" {:<6} {:<10}", "kind", "designator")
        }
    );
    for (i, e) in r.emitters.iter().enumerate() {
        let _ = writeln!(
            s,
            "{:<14} {:>15.6} {:>10.3} {:>9.3} {:>9.3} {:>9} {:>9.2}{} {:>10.2} {:>10.2}{}",
            e.name,
            e.center_hz / 1e6,
            e.obw_hz / 1e3,
            e.first_s,
            e.last_s,
            e.emissions,
            e.airtime_pct,
            observed(e),
            at(e.peak_dbfs, e.center_hz),
            at(e.power_dbfs, e.center_hz),
            kind_cells(i)
        );
    }
    let notes: Vec<String> = r.emitters.iter().filter_map(attributed_note).collect();
    if !notes.is_empty() {
        let _ = writeln!(s, "attributed to the emitter that made them, not listed:");
        for n in notes {
            let _ = writeln!(s, "{n}");
        }
    }
    if r.emitters_dropped > 0 {
        let _ = writeln!(
            s,
            "({} further emissions found no room: too many emitters)",
            r.emitters_dropped
        );
    }
    s
}

/// Steps of the channel raster within one decade: 1-2-5 and the land-mobile 6.25/12.5/25 kHz
/// spacings (common practice), so a 7.7 kHz FM voice emitter gets 10 kHz and a 24.8 kHz link 25.
const RASTER: [f64; 6] = [1.0, 1.25, 2.0, 2.5, 5.0, 6.25];

/// The smallest raster step (…, 1 kHz, 1.25 kHz, 2 kHz, 2.5 kHz, 5 kHz, 6.25 kHz, 10 kHz, …)
/// at or above `hz`, at least 100 Hz.
pub fn raster_up(hz: f64) -> f64 {
    let mut decade = 100.0;
    loop {
        for k in RASTER {
            if decade * k >= hz {
                return decade * k;
            }
        }
        decade *= 10.0;
    }
}

/// The largest raster step below `hz` (`None` below 100 Hz).
fn raster_down(hz: f64) -> Option<f64> {
    let (mut best, mut w) = (None, 100.0);
    while w < hz {
        best = Some(w);
        w = raster_up(w * 1.000_001);
    }
    best
}

/// Channel widths for a plan: each emitter's OBW rounded up to the raster (`RASTER`). Where
/// that would overlap a neighbour, the distance between the two centres is shared in proportion
/// to their OBWs and the width is the largest raster step inside its share (or the share itself,
/// in whole hertz, when no step fits), so that with centres on whole hertz the plan's channels
/// never overlap and `log --plan` takes it. A width of 0 means no room is left.
pub fn plan_widths(emitters: &[EmitterFigures]) -> Vec<f64> {
    let obw = |i: usize| emitters[i].obw_hz.max(1.0);
    (0..emitters.len())
        .map(|i| {
            let limit = (0..emitters.len())
                .filter(|&j| j != i)
                .map(|j| {
                    let d = (emitters[j].center_hz - emitters[i].center_hz).abs();
                    2.0 * d * obw(i) / (obw(i) + obw(j))
                })
                .fold(f64::INFINITY, f64::min);
            let want = raster_up(obw(i));
            if want <= limit {
                want
            } else {
                // Two shares of one distance add up to twice it; whole hertz (rounded down)
                // keep the sum within it whatever the floating point does.
                raster_down(limit).filter(|&w| w >= obw(i)).unwrap_or(limit.floor())
            }
        })
        .collect()
}

/// `center_hz` moved onto the coarsest raster (a step of [`RASTER`] times a power of ten, from
/// 100 Hz to half the channel's `width_hz`) whose nearest point lies within 5 % of the width;
/// else on whole hertz. An estimated centre is a few tens of hertz off the assigned one (433
/// 187 495 Hz for a channel at 433.1875 MHz); channels are assigned on such a raster (common
/// practice), and a shift of 5 % of the width keeps the emission inside its channel.
fn raster_centre(center_hz: f64, width_hz: f64) -> f64 {
    let mut step = raster_down(width_hz / 2.0 * 1.000_001);
    while let Some(s) = step {
        let snapped = (center_hz / s).round() * s;
        if (snapped - center_hz).abs() <= 0.05 * width_hz {
            return snapped;
        }
        step = raster_down(s);
    }
    center_hz.round()
}

/// An emitter on the air less than this share of the time (percent)…
pub const SPUR_AIRTIME_PCT: f64 = 1.0;
/// …and this many dB or more below the strongest emitter's power is a spur, not a channel: a
/// plan written for `log` is for the users of the band, and a weak mark seen for a moment
/// (an intermodulation product, a harmonic of a burst, a receiver's own spur) would fill it.
pub const SPUR_BELOW_DB: f64 = 20.0;

/// The emitters a plan gets a channel for, with their centres on whole hertz (as the plan
/// writes them): spurs ([`SPUR_AIRTIME_PCT`], [`SPUR_BELOW_DB`]) are left out, and so is an
/// emitter whose centre another, stronger one already has. Returns them and how many were left
/// out.
fn plan_emitters(emitters: &[EmitterFigures]) -> (Vec<EmitterFigures>, usize) {
    let strongest = emitters.iter().map(|e| e.power_dbfs).fold(f64::NEG_INFINITY, f64::max);
    let mut kept: Vec<EmitterFigures> = Vec::with_capacity(emitters.len());
    for e in emitters {
        let spur = e.airtime_pct < SPUR_AIRTIME_PCT && e.power_dbfs <= strongest - SPUR_BELOW_DB;
        let center_hz = raster_centre(e.center_hz, raster_up(e.obw_hz.max(1.0)));
        if !spur && !kept.iter().any(|k| k.center_hz == center_hz) {
            kept.push(EmitterFigures { center_hz, ..e.clone() });
        }
    }
    let left_out = emitters.len() - kept.len();
    (kept, left_out)
}

/// A channel plan (the TOML `log --plan` reads): one channel per emitter, named after it.
pub fn to_plan(r: &CensusResult, source: &str) -> String {
    let mut s = format!(
        "# Channel plan from `bandwarden census` of {source}: one channel per emitter found,\n\
         # centred on its occupied band, its 99 % OBW rounded up to the channel raster.\n"
    );
    let (emitters, left_out) = plan_emitters(&r.emitters);
    let widths = plan_widths(&emitters);
    let channels: Vec<_> = emitters.iter().zip(widths).filter(|(_, w)| *w >= 1.0).collect();
    let left_out = left_out + emitters.len() - channels.len();
    if left_out > 0 {
        let _ = writeln!(
            s,
            "# Left out: {left_out} emitter(s) on the air under {SPUR_AIRTIME_PCT} % of the time and {SPUR_BELOW_DB} dB or more below the strongest, or with no room beside a stronger one."
        );
    }
    for (e, w) in channels {
        let _ = write!(
            s,
            "\n[[channel]]\nname = \"{}\"   # {:.2} dBFS on the air, {:.1} % of the time\ncenter = \"{}\"\nwidth = \"{}\"\n",
            e.name,
            e.power_dbfs,
            e.airtime_pct,
            crate::units::format_num(e.center_hz),
            crate::units::format_num(w)
        );
    }
    s
}

#[cfg(test)]
mod tests {
    use super::*;

    use crate::measure::census::EmitterFigures;
    use crate::plan::Plan;
    use crate::testkit::Rng;

    fn emitter(name: String, center_hz: f64, obw_hz: f64) -> EmitterFigures {
        EmitterFigures {
            name,
            center_hz,
            obw_hz,
            first_s: 0.0,
            last_s: 1.0,
            emissions: 1,
            airtime_pct: 50.0,
            airtime_s: 0.5,
            observation_s: None,
            peak_dbfs: -40.0,
            power_dbfs: -40.0,
            attributed: Default::default(),
        }
    }

    fn census_of(emitters: Vec<EmitterFigures>) -> CensusResult {
        CensusResult {
            sample_rate_hz: 2.4e6,
            center_hz: 433.5e6,
            fft_size: 4096,
            rbw_hz: 878.9,
            duration_s: 10.0,
            noise_floor_dbfs_per_hz: -120.0,
            floor: Default::default(),
            emitters,
            emissions: Vec::new(),
            emitters_dropped: 0,
            sweep: None,
        }
    }

    #[test]
    fn every_plan_written_loads_whatever_the_emitters() {
        // Random emitter sets, crowded on purpose (centres anywhere in 2.4 MHz, some only a few
        // hertz apart, widths from 50 Hz to 200 kHz, centres off the hertz): the plan must
        // parse and validate as `log --plan` does, and its channels must lie where the census
        // put them (each centre within 5 % of its width of its emitter's, or half a hertz).
        let mut rng = Rng::new(0x5eed_c0de);
        for case in 0..500 {
            let n = 1 + rng.below(12);
            let mut emitters = Vec::new();
            for k in 0..n {
                let center = if k > 0 && rng.below(4) == 0 {
                    emitters.last().map_or(433.5e6, |e: &EmitterFigures| e.center_hz)
                        + rng.uniform() * 20.0
                } else {
                    432.3e6 + rng.uniform() * 2.4e6
                };
                let obw = 50.0 * (4000f64).powf(rng.uniform());
                emitters.push(emitter(format!("e{k}"), center, obw));
            }
            let r = census_of(emitters);
            let text = to_plan(&r, "test");
            let plan = Plan::parse(&text, "census.toml")
                .and_then(|p| p.validate().map(|_| p))
                .unwrap_or_else(|e| panic!("case {case}: {e:#}\n{text}"));
            for c in &plan.channels {
                let e = r.emitters.iter().find(|e| e.name == c.name).unwrap();
                let shift = 0.5 + 0.05 * raster_up(e.obw_hz);
                assert!((c.center_hz - e.center_hz).abs() <= shift, "case {case}: {c:?} {e:?}");
            }
            // Only an emitter crowded by another may go without a channel: both moved onto one
            // raster point (each moves by at most 5 % of its width), or too close for a whole
            // hertz of share. None of these is a spur (all are on the air half the time).
            for e in &r.emitters {
                let crowded = r.emitters.iter().any(|o| {
                    let moves = 0.05 * (raster_up(o.obw_hz) + raster_up(e.obw_hz));
                    o.name != e.name
                        && (o.center_hz - e.center_hz).abs() < 2.0 + moves + o.obw_hz / e.obw_hz
                });
                let written = plan.channels.iter().any(|c| c.name == e.name);
                assert!(written || crowded, "case {case}: {e:?} left out\n{text}");
            }
        }
    }

    #[test]
    fn every_plan_written_after_attribution_loads() {
        // Random emitter sets as above, now with levels from -10 to -90 dBFS and emissions
        // drawn from a few shared keying schedules (so that weak ones are co-timed with strong
        // ones and adjacent to them often): the attribution must leave only emitters whose
        // attributed pieces point at a listed emitter far enough above them, and the plan of
        // what is listed must load.
        use crate::measure::census::attribute::{attribute, Fate, Piece, Scale, Span};
        use crate::units::undb;
        let mut rng = Rng::new(0xa77_1b07e);
        let scale = Scale::new(8192, 4096, 10_000_000, 366.0);
        let mut attributed = [0usize; 2];
        for case in 0..300 {
            let schedules: Vec<Vec<Span>> = (0..3)
                .map(|_| {
                    let (on, period) =
                        (1 + rng.below(400_000) as u64, 500_000 + rng.below(2_000_000) as u64);
                    let start = rng.below(500_000) as u64;
                    (0..)
                        .map(|k| start + k * period)
                        .take_while(|&a| a + on < 10_000_000)
                        .map(|a| Span { start: a, end: a + on })
                        .collect()
                })
                .collect();
            let n = 1 + rng.below(12);
            let mut emitters = Vec::new();
            let mut pieces = Vec::new();
            for k in 0..n {
                let center = 433.3e6 + rng.uniform() * 0.4e6;
                let obw = 50.0 * (4000f64).powf(rng.uniform());
                let dbfs = -10.0 - 80.0 * rng.uniform();
                emitters.push(EmitterFigures {
                    power_dbfs: dbfs,
                    peak_dbfs: dbfs - 10.0 * rng.uniform(),
                    ..emitter(format!("e{k}"), center, obw)
                });
                let e = &emitters[k];
                pieces.push(Piece {
                    center_hz: center,
                    obw_hz: obw,
                    power: undb(e.power_dbfs),
                    peak: undb(e.peak_dbfs),
                    emissions: schedules[rng.below(3)].clone(),
                });
            }
            let fate = attribute(&pieces, scale);
            for (i, f) in fate.iter().enumerate() {
                let above = |r: usize, db: f64| {
                    fate[r] == Fate::Own && emitters[r].power_dbfs >= emitters[i].power_dbfs + db
                };
                match f {
                    Fate::Own => {}
                    Fate::Skirt { root } => {
                        attributed[0] += 1;
                        assert!(above(*root, 10.0), "case {case}: {fate:?}")
                    }
                    Fate::Transient { parents } => {
                        attributed[1] += 1;
                        assert!(parents.iter().all(|&p| above(p, 20.0)), "case {case}: {fate:?}")
                    }
                }
            }
            let listed: Vec<EmitterFigures> = emitters
                .into_iter()
                .zip(&fate)
                .filter(|(_, f)| **f == Fate::Own)
                .map(|(e, _)| e)
                .collect();
            assert!(!listed.is_empty(), "case {case}: the strongest is always listed");
            let text = to_plan(&census_of(listed), "test");
            Plan::parse(&text, "census.toml")
                .and_then(|p| p.validate().map(|_| p))
                .unwrap_or_else(|e| panic!("case {case}: {e:#}\n{text}"));
        }
        // The sets are crowded enough that both rules fire.
        assert!(attributed[0] > 0 && attributed[1] > 0, "{attributed:?}");
    }

    #[test]
    fn centres_move_onto_the_raster_their_width_allows() {
        // The demo scene's channels (src/source/demo): 12.5 kHz land-mobile raster.
        assert_eq!(raster_centre(433_187_495.0, 5_000.0), 433_187_500.0);
        assert_eq!(raster_centre(433_825_026.0, 250_000.0), 433_825_000.0);
        // Too far from any raster point for a narrow channel: whole hertz.
        assert_eq!(raster_centre(433_574_956.4, 100.0), 433_574_956.0);
        assert_eq!(raster_centre(433_574_956.0, 1_000.0), 433_575_000.0);
    }

    #[test]
    fn weak_rare_spurs_get_no_channel() {
        let strong = emitter("strong".into(), 433.1e6, 10e3);
        let spur = |name: &str, airtime_pct: f64, power_dbfs: f64| EmitterFigures {
            airtime_pct,
            power_dbfs,
            ..emitter(name.into(), 433.3e6 + power_dbfs * -1e3, 2e3)
        };
        let r = census_of(vec![
            strong,
            // Under 1 % of the time and 20 dB or more below the strongest (-40 dBFS): left out.
            spur("spur", 0.5, -70.0),
            // Rare but strong, or weak but often on the air: channels.
            spur("rare-strong", 0.5, -45.0),
            spur("weak-busy", 30.0, -75.0),
        ]);
        let plan = Plan::parse(&to_plan(&r, "t"), "t.toml").unwrap();
        let names: Vec<&str> = plan.channels.iter().map(|c| c.name.as_str()).collect();
        assert_eq!(names, ["strong", "rare-strong", "weak-busy"]);
        assert!(to_plan(&r, "t").contains("# Left out: 1 emitter(s)"));
    }

    #[test]
    fn a_place_is_classified_until_it_has_given_three_emissions_or_one_full_cut() {
        let mut places = Vec::new();
        let full = 500_000;
        // A keyed channel's short bursts: three of them, then no more.
        let keyed: Vec<bool> =
            (0..5).map(|_| take_place(&mut places, (433.30e6, 12e3), 40_000, full)).collect();
        assert_eq!(keyed, [true, true, true, false, false]);
        // A long transmission: its first emission gave a full cut, so its next is not taken;
        // a wider one centred within half its width is the same place.
        assert!(take_place(&mut places, (433.40e6, 4e3), full, full));
        assert!(!take_place(&mut places, (433.4019e6, 4e3), 10_000, full));
        assert!(!take_place(&mut places, (433.404e6, 10e3), 10_000, full));
        // Short ones add up to a full cut before the third.
        assert!(take_place(&mut places, (433.60e6, 4e3), 300_000, full));
        assert!(take_place(&mut places, (433.60e6, 4e3), 200_000, full));
        assert!(!take_place(&mut places, (433.60e6, 4e3), 1, full));
        // A place just beyond half the width is a new one.
        assert!(take_place(&mut places, (433.4021e6, 4e3), full, full));
    }

    #[test]
    fn widths_round_up_to_one_two_five() {
        assert_eq!(raster_up(7683.0), 10_000.0);
        assert_eq!(raster_up(911.0), 1000.0);
        assert_eq!(raster_up(1000.0), 1000.0);
        assert_eq!(raster_up(24_831.0), 25_000.0);
        assert_eq!(raster_up(3047.0), 5000.0);
        assert_eq!(raster_up(11_000.0), 12_500.0);
        assert_eq!(raster_down(5000.0), Some(2500.0));
        assert_eq!(raster_down(50.0), None);
    }
}
