//! `--annotate FILE.sigmf-meta`: every emission found, written back as a SigMF annotation that
//! any SigMF tool can show over the samples.
//!
//! The file is a new metadata file pointing at the dataset that holds the samples: the input's
//! (a SigMF recording's data, or a raw file, named in `core:dataset`, the standard's way to
//! describe a dataset that is not `NAME.sigmf-data`), or the recording `--record` makes. It keeps
//! the input's global fields, captures and annotations, and adds one annotation per emission:
//! `core:sample_start`/`core:sample_count` (dataset indices), `core:freq_lower_edge`/
//! `core:freq_upper_edge` (its 99 % occupied band, ITU-R SM.328, or the channel's edges when no
//! band could be measured), `core:label` (the channel), `core:comment` (levels, SNR and OBW in
//! words), and our fields under the `bandwarden` namespace: `mean_dbfs`, `peak_dbfs`, `snr_db`,
//! `obw_hz`, `channel_center_hz`, `partial`, and, when the emission was classified, `class`,
//! `class_confidence`, `class_params` and `designator` (also named in `core:comment`). The
//! input's own metadata is rewritten only when it is the file named.
//!
//! The annotations are held in memory until the end of the run (SigMF wants them sorted by
//! `core:sample_start`, and emissions end in another order than they start); at most
//! [`MAX_ANNOTATIONS`] are kept (about 40 MB of JSON), more are counted and said.
//!
//! [`AnnotationWriter`] takes a plain [`EmissionNote`], so any command that finds emissions
//! feeds it; [`LogAnnotations`] is the occupancy log's consumer that does.

use crate::measure::classify::Classification;
use crate::measure::occupancy::Event;
use crate::output::class_fields::ClassFields;
use crate::output::sigmf::write::{self as sigmf_write, NAMESPACE};
use crate::pipeline::{Consumer, RunEnd, RunInfo};
use crate::plan::Plan;
use crate::source::SampleFormat;
use crate::units::{db, format_hz};
use serde_json::{Map, Value};
use std::io;
use std::path::{Path, PathBuf};

/// Most annotations kept for one file.
pub const MAX_ANNOTATIONS: usize = 100_000;

/// One emission to annotate. Sample indices count the samples of the stream read (lost ones
/// included), as every event of a run does; the writer maps them to dataset indices.
#[derive(Clone, Debug, PartialEq)]
pub struct EmissionNote {
    pub sample_start: u64,
    pub sample_count: u64,
    pub freq_lower_edge_hz: f64,
    pub freq_upper_edge_hz: f64,
    /// The channel's or emitter's name (`core:label`).
    pub label: String,
    /// Free text for people (`core:comment`); see [`comment`].
    pub comment: String,
    pub mean_dbfs: Option<f64>,
    pub peak_dbfs: Option<f64>,
    pub snr_db: Option<f64>,
    pub obw_hz: Option<f64>,
    pub channel_center_hz: Option<f64>,
    /// Cut short by a gap or the end of the run.
    pub partial: bool,
    /// Its kind, when classified: `bandwarden:class` (with `class_confidence`, `class_params`
    /// and `designator`), and the designator in `core:comment`.
    pub class: Option<Box<Classification>>,
}

/// `mean −42.1 dBFS, peak −40.0 dBFS, SNR 23.4 dB, OBW 12.3 kHz`, from what is known.
pub fn comment(
    mean_dbfs: Option<f64>,
    peak_dbfs: Option<f64>,
    snr_db: Option<f64>,
    obw_hz: Option<f64>,
) -> String {
    let mut parts = Vec::new();
    if let Some(m) = mean_dbfs {
        parts.push(format!("mean {m:.1} dBFS"));
    }
    if let Some(p) = peak_dbfs {
        parts.push(format!("peak {p:.1} dBFS"));
    }
    if let Some(s) = snr_db {
        parts.push(format!("SNR {s:.1} dB"));
    }
    if let Some(w) = obw_hz {
        parts.push(format!("99% OBW {}", format_hz(w)));
    }
    parts.join(", ")
}

/// The dataset the annotations point at.
#[derive(Clone, Debug)]
pub enum Dataset {
    /// A SigMF recording read as input: its metadata is the base, and stream sample `i` is
    /// dataset sample `i + offset` (`offset`: the chosen segment's `core:sample_start`).
    Sigmf { meta: PathBuf, data: PathBuf, offset: u64 },
    /// A raw file of samples: the run's rate, centre and start describe it.
    Raw { data: PathBuf, format: SampleFormat },
    /// The recording `--record` makes, read when the run ends: its captures'
    /// `core:global_index` map stream samples to dataset samples.
    Recording { meta: PathBuf, data: PathBuf },
}

/// Collects annotations and writes the metadata file at the end.
pub struct AnnotationWriter {
    path: PathBuf,
    dataset: Dataset,
    notes: Vec<EmissionNote>,
    left_out: u64,
}

/// What the file came to.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct AnnotateSummary {
    pub written: usize,
    /// Emissions beyond [`MAX_ANNOTATIONS`].
    pub left_out: u64,
    /// Emissions whose samples are not in the dataset (the recording lost them).
    pub not_in_dataset: u64,
}

impl AnnotationWriter {
    /// Checks before the run that the file can point at the dataset: the dataset must lie in the
    /// annotation file's folder (`core:dataset` is a name relative to it), unless the file is the
    /// dataset's own metadata.
    pub fn new(path: &str, dataset: Dataset) -> anyhow::Result<AnnotationWriter> {
        let (path, _) = sigmf_write::pair(path).map_err(anyhow::Error::msg)?;
        let data = match &dataset {
            Dataset::Sigmf { data, .. }
            | Dataset::Raw { data, .. }
            | Dataset::Recording { data, .. } => data,
        };
        if !same_file_or_recording(&path, &dataset)
            && sigmf_write::relative_name(&path, data).is_none()
        {
            anyhow::bail!(
                "--annotate '{}' must lie in the folder of the dataset it describes ('{}'): SigMF names the dataset relative to the metadata file; write it there, or name the recording's own .sigmf-meta",
                crate::messages::sanitize(&path.to_string_lossy()),
                crate::messages::sanitize(&data.to_string_lossy())
            );
        }
        Ok(AnnotationWriter { path, dataset, notes: Vec::new(), left_out: 0 })
    }

    pub fn path(&self) -> &Path {
        &self.path
    }

    pub fn push(&mut self, note: EmissionNote) {
        if self.notes.len() < MAX_ANNOTATIONS {
            self.notes.push(note);
        } else {
            self.left_out += 1;
        }
    }

    /// Writes the metadata file (whole, through a rename).
    pub fn finish(&mut self, run: &RunInfo) -> io::Result<AnnotateSummary> {
        let mut meta = self.base(run)?;
        let map = self.mapping(&meta);
        let mut summary = AnnotateSummary { left_out: self.left_out, ..Default::default() };
        let list = meta
            .as_object_mut()
            .and_then(|m| {
                m.entry("annotations").or_insert_with(|| Value::Array(Vec::new()));
                m.get_mut("annotations")?.as_array_mut()
            })
            .ok_or_else(|| io::Error::other("the dataset's metadata has no annotation list"))?;
        for note in self.notes.drain(..) {
            match map.span(note.sample_start, note.sample_start + note.sample_count) {
                Some((start, count)) => {
                    list.push(Value::Object(annotation(&note, start, count)));
                    summary.written += 1;
                }
                None => summary.not_in_dataset += 1,
            }
        }
        list.sort_by_key(|a| a["core:sample_start"].as_u64().unwrap_or(0));
        if let Some(g) = meta["global"].as_object_mut() {
            sigmf_write::declare_extension(g);
            if summary.left_out > 0 {
                g.insert(format!("{NAMESPACE}:annotations_left_out"), summary.left_out.into());
            }
        }
        sigmf_write::write_meta(&self.path, &meta).map_err(|e| {
            io::Error::new(
                e.kind(),
                format!(
                    "cannot write the annotations '{}': {e}",
                    crate::messages::sanitize(&self.path.to_string_lossy())
                ),
            )
        })?;
        Ok(summary)
    }

    /// The metadata the annotations are added to, `core:dataset` set when it is not the
    /// dataset's own file.
    fn base(&self, run: &RunInfo) -> io::Result<Value> {
        let (mut meta, data) = match &self.dataset {
            Dataset::Sigmf { meta, data, .. } | Dataset::Recording { meta, data } => {
                let text = std::fs::read_to_string(meta).map_err(|e| {
                    io::Error::new(
                        e.kind(),
                        format!(
                            "cannot read '{}' to annotate it: {e}",
                            crate::messages::sanitize(&meta.to_string_lossy())
                        ),
                    )
                })?;
                (serde_json::from_str::<Value>(&text).map_err(io::Error::other)?, data)
            }
            Dataset::Raw { data, format } => {
                let src = &run.source;
                let mut g = sigmf_write::global(
                    *format,
                    src.sample_rate_hz,
                    &format!("emissions bandwarden found in {}", src.label),
                );
                g.insert("core:num_channels".into(), 1.into());
                let c =
                    sigmf_write::capture(0, 0, src.center_hz, sigmf_write::datetime(&run.clock, 0));
                (serde_json::json!({ "global": g, "captures": [c], "annotations": [] }), data)
            }
        };
        if !same_file_or_recording(&self.path, &self.dataset) {
            let name = sigmf_write::relative_name(&self.path, data).ok_or_else(|| {
                io::Error::other("the dataset is not in the annotation file's folder")
            })?;
            meta["global"]["core:dataset"] = name.into();
        }
        Ok(meta)
    }

    fn mapping(&self, meta: &Value) -> Mapping {
        match &self.dataset {
            Dataset::Sigmf { offset, .. } => Mapping::Offset(*offset),
            Dataset::Raw { .. } => Mapping::Offset(0),
            Dataset::Recording { .. } => {
                let caps = meta["captures"].as_array().cloned().unwrap_or_default();
                let pieces = caps
                    .iter()
                    .map(|c| {
                        let start = c["core:sample_start"].as_u64().unwrap_or(0);
                        (c["core:global_index"].as_u64().unwrap_or(start), start)
                    })
                    .collect::<Vec<_>>();
                let total = std::fs::metadata(match &self.dataset {
                    Dataset::Recording { data, .. } => data,
                    _ => unreachable!(),
                })
                .map(|m| m.len())
                .unwrap_or(0);
                let bps = meta["global"]["core:datatype"]
                    .as_str()
                    .and_then(|d| d.parse::<SampleFormat>().ok())
                    .map_or(8, |f| f.bytes_per_sample() as u64);
                Mapping::Pieces { pieces, total: total / bps }
            }
        }
    }
}

/// True when the annotation file is the dataset's own metadata (annotations added in place).
fn same_file_or_recording(path: &Path, dataset: &Dataset) -> bool {
    let meta = match dataset {
        Dataset::Sigmf { meta, .. } | Dataset::Recording { meta, .. } => meta,
        Dataset::Raw { .. } => return false,
    };
    if let (Ok(a), Ok(b)) = (std::fs::canonicalize(path), std::fs::canonicalize(meta)) {
        return a == b;
    }
    path == meta
}

/// Stream sample indices to dataset sample indices.
enum Mapping {
    Offset(u64),
    /// `(global_index, sample_start)` of each capture, in order, and the dataset's length.
    Pieces {
        pieces: Vec<(u64, u64)>,
        total: u64,
    },
}

impl Mapping {
    /// The dataset span `(start, count)` of stream samples `[from, to)`, clipped to the samples
    /// the dataset holds; `None` if it holds none of them.
    fn span(&self, from: u64, to: u64) -> Option<(u64, u64)> {
        match self {
            Mapping::Offset(o) => Some((from + o, to - from)).filter(|s| s.1 > 0),
            Mapping::Pieces { pieces, total } => {
                // Each capture k holds stream samples [g_k, g_k + len_k) at dataset [s_k, …).
                let mut first = None;
                let mut last = None;
                for (k, &(g, s)) in pieces.iter().enumerate() {
                    let len = pieces.get(k + 1).map_or(*total, |&(_, next)| next) - s;
                    let (a, b) = (from.max(g), to.min(g + len));
                    if a < b {
                        first.get_or_insert(s + (a - g));
                        last = Some(s + (b - g));
                    }
                }
                let (a, b) = (first?, last?);
                Some((a, b - a))
            }
        }
    }
}

/// The SigMF annotation of `n` over dataset samples `[start, start + count)`.
pub fn annotation(n: &EmissionNote, start: u64, count: u64) -> Map<String, Value> {
    let mut a = Map::new();
    a.insert("core:sample_start".into(), start.into());
    a.insert("core:sample_count".into(), count.into());
    a.insert("core:freq_lower_edge".into(), n.freq_lower_edge_hz.into());
    a.insert("core:freq_upper_edge".into(), n.freq_upper_edge_hz.into());
    a.insert("core:label".into(), n.label.clone().into());
    let comment = match &n.class {
        Some(c) if n.comment.is_empty() => format!("designator {}", c.designator),
        Some(c) => format!("{}, designator {}", n.comment, c.designator),
        None => n.comment.clone(),
    };
    a.insert("core:comment".into(), comment.into());
    a.insert("core:generator".into(), format!("bandwarden {}", env!("CARGO_PKG_VERSION")).into());
    let ours = [
        ("mean_dbfs", n.mean_dbfs),
        ("peak_dbfs", n.peak_dbfs),
        ("snr_db", n.snr_db),
        ("obw_hz", n.obw_hz),
        ("channel_center_hz", n.channel_center_hz),
    ];
    for (k, v) in ours {
        if let Some(v) = v.filter(|v| v.is_finite()) {
            a.insert(format!("{NAMESPACE}:{k}"), ((v * 100.0).round() / 100.0).into());
        }
    }
    a.insert(format!("{NAMESPACE}:partial"), n.partial.into());
    if let Some(c) = &n.class {
        if let Ok(Value::Object(fields)) = serde_json::to_value(ClassFields::of(c)) {
            for (k, v) in fields {
                a.insert(format!("{NAMESPACE}:{k}"), v);
            }
        }
    }
    a
}

/// The occupancy log's emissions as annotations.
pub struct LogAnnotations {
    writer: AnnotationWriter,
    plan: Plan,
    /// What the file came to, once written.
    pub summary: Option<AnnotateSummary>,
}

impl LogAnnotations {
    pub fn new(writer: AnnotationWriter, plan: &Plan) -> LogAnnotations {
        LogAnnotations { writer, plan: plan.clone(), summary: None }
    }

    pub fn path(&self) -> &Path {
        self.writer.path()
    }
}

/// An emission of the occupancy tracker as a note: edges from its occupied band (the channel's
/// when none was measured), label the channel's name.
pub fn note_of(e: &crate::measure::occupancy::EmissionSummary, plan: &Plan) -> EmissionNote {
    let ch = &plan.channels[e.channel];
    let (lo, hi) = match e.obw {
        Some(edges) => (edges.low_hz, edges.high_hz),
        None => (ch.center_hz - ch.width_hz / 2.0, ch.center_hz + ch.width_hz / 2.0),
    };
    let mean = db(e.mean_power);
    let peak = db(e.peak_power);
    let snr = (e.noise_power > 0.0).then(|| db(e.mean_power / e.noise_power));
    EmissionNote {
        sample_start: e.start_sample,
        sample_count: e.end_sample - e.start_sample,
        freq_lower_edge_hz: lo,
        freq_upper_edge_hz: hi,
        label: ch.name.clone(),
        comment: comment(Some(mean), Some(peak), snr, e.obw_hz),
        mean_dbfs: Some(mean),
        peak_dbfs: Some(peak),
        snr_db: snr,
        obw_hz: e.obw_hz,
        channel_center_hz: Some(ch.center_hz),
        partial: e.partial,
        class: e.class.clone(),
    }
}

impl Consumer for LogAnnotations {
    fn event(&mut self, event: &Event, _run: &RunInfo) -> io::Result<()> {
        if let Event::Emission(e) = event {
            self.writer.push(note_of(e, &self.plan));
        }
        Ok(())
    }

    fn finish(&mut self, _end: &RunEnd, run: &RunInfo) -> io::Result<()> {
        self.summary = Some(self.writer.finish(run)?);
        Ok(())
    }
}

#[cfg(test)]
mod tests;
