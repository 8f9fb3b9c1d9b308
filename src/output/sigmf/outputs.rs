//! Wiring of the SigMF outputs (`--record`, `--annotate`, `--capture`) shared by the commands
//! that take them: which dataset annotations point at, the checks before the run, the consumers
//! (in any order: the run's stages of the end close the recording before annotations read it),
//! and the closing notes.

use crate::messages::{note, sanitize};
use crate::output::sigmf::annotate::{AnnotateSummary, AnnotationWriter, Dataset, LogAnnotations};
use crate::output::sigmf::capture::CaptureSettings;
use crate::output::sigmf::capture::Captures;
use crate::output::sigmf::record::{RecordStatus, Recorder};
use crate::output::sigmf::write as sigmf_write;
use crate::output::sink;
use crate::pipeline::Consumer;
use crate::plan::Plan;
use crate::source::{sigmf, InputRequest, SourceInfo};
use anyhow::{bail, Context, Result};
use std::path::{Path, PathBuf};

/// The SigMF outputs of a command that finds emissions (`log`, `census`), validated.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct SigmfOut {
    /// `--record`: the input teed to this SigMF recording.
    pub record: Option<String>,
    /// `--annotate`: every emission as an annotation in this SigMF metadata file.
    pub annotate: Option<String>,
    pub capture: Option<CaptureSettings>,
}

/// The SigMF outputs of one run.
#[derive(Default)]
pub struct SigmfOutputs {
    pub recorder: Option<Recorder>,
    pub annotations: Option<LogAnnotations>,
    pub captures: Option<Captures>,
}

/// What the user asked for.
pub struct SigmfRequest<'a> {
    /// `--no-drop`: writers wait for the disk, as the reader waits for the processing.
    pub wait: bool,
    pub record: Option<&'a str>,
    pub annotate: Option<&'a str>,
    pub capture: Option<&'a CaptureSettings>,
}

impl<'a> SigmfRequest<'a> {
    /// The outputs a command's flags ask for.
    pub fn of(out: &'a SigmfOut, wait: bool) -> SigmfRequest<'a> {
        SigmfRequest {
            wait,
            record: out.record.as_deref(),
            annotate: out.annotate.as_deref(),
            capture: out.capture.as_ref(),
        }
    }
}

impl SigmfOutputs {
    /// Checks and creates the outputs. `inputs` are the files the run reads (never written
    /// over); `block_len` the reader's block size.
    pub fn new(
        req: SigmfRequest,
        input: &InputRequest,
        info: &SourceInfo,
        plan: &Plan,
        inputs: &[PathBuf],
        block_len: usize,
    ) -> Result<SigmfOutputs> {
        let mut out = SigmfOutputs::default();
        if let Some(r) = req.record {
            out.recorder = Some(recorder(r, input, info, block_len)?.waiting(req.wait));
        }
        if let Some(a) = req.annotate {
            let writer = out.annotation_writer(a, input, info, inputs)?;
            out.annotations = Some(LogAnnotations::new(writer, plan));
        }
        if let Some(c) = req.capture {
            let captures = Captures::new(c.clone(), plan, info.format, block_len)?;
            out.captures = Some(captures.waiting(req.wait));
        }
        Ok(out)
    }

    /// The writer for `--annotate path`: its annotations point at the recording when there is
    /// one, else at the input's dataset; it never writes over an input other than the metadata
    /// of the dataset it annotates (which the user named).
    pub fn annotation_writer(
        &self,
        path: &str,
        input: &InputRequest,
        info: &SourceInfo,
        inputs: &[PathBuf],
    ) -> Result<AnnotationWriter> {
        let dataset = match self.recorder.as_ref() {
            Some(rec) => {
                let meta = rec.meta_path().to_path_buf();
                Dataset::Recording { data: meta.with_extension("sigmf-data"), meta }
            }
            None => input_dataset(input, info)?,
        };
        let (meta, _) = sigmf_write::pair(path).map_err(anyhow::Error::msg)?;
        let is_own_meta = matches!(&dataset, Dataset::Sigmf { meta: m, .. } | Dataset::Recording { meta: m, .. } if same(m, &meta));
        if !is_own_meta {
            sink::refuse_overwrite(&meta.to_string_lossy(), "--annotate", inputs)?;
        }
        AnnotationWriter::new(path, dataset)
    }

    /// The consumers, in the order they must run: the recording first (the annotations of a
    /// recording read its finished metadata), captures before the log that writes their records.
    pub fn consumers(&mut self) -> Vec<&mut dyn Consumer> {
        let mut v: Vec<&mut dyn Consumer> = Vec::new();
        if let Some(r) = self.recorder.as_mut() {
            v.push(r);
        }
        if let Some(a) = self.annotations.as_mut() {
            v.push(a);
        }
        if let Some(c) = self.captures.as_mut() {
            v.push(c);
        }
        v
    }

    /// One closing note per output: what was written, and what is missing from it.
    pub fn report(&self) -> Result<()> {
        if let Some(r) = &self.recorder {
            let status = r.status();
            let s = status.lock().map_err(|_| anyhow::anyhow!("the recorder failed"))?;
            recorded_note(&s, r.meta_path())?;
        }
        if let Some(a) = &self.annotations {
            if let Some(s) = &a.summary {
                annotated_note(s, a.path());
            }
        }
        if let Some(c) = &self.captures {
            let n = &c.counts;
            let mut text = format!("saved {} captures ({} bytes of samples)", n.saved, n.bytes);
            clause(&mut text, n.skipped_disk_cap, "skipped: --capture-max-bytes reached");
            clause(&mut text, n.skipped_disk_behind, "skipped: the disk could not keep up");
            note(&text);
        }
        Ok(())
    }
}

/// What an annotation file came to.
pub fn annotated_note(s: &AnnotateSummary, path: &Path) {
    let mut text =
        format!("wrote {} annotations to '{}'", s.written, sanitize(&path.to_string_lossy()));
    if s.left_out > 0 {
        text.push_str(&format!(
            "; {} more emissions were left out (at most {} a file)",
            s.left_out,
            crate::output::sigmf::annotate::MAX_ANNOTATIONS
        ));
    }
    clause(&mut text, s.not_in_dataset, "emissions lie where the recording lost its samples");
    note(&text);
}

/// The recorder for `--record path`, which must not write over the input.
pub fn recorder(
    path: &str,
    input: &InputRequest,
    info: &SourceInfo,
    block_len: usize,
) -> Result<Recorder> {
    let (meta, data) = sigmf_write::pair(path).map_err(anyhow::Error::msg)?;
    let inputs = input.files();
    for p in [&meta, &data] {
        sink::refuse_overwrite(&p.to_string_lossy(), "--record", &inputs)?;
    }
    Recorder::create(path, info.format, block_len)
}

/// What a recording came to (also for `watch`, whose recorder runs on another thread); its
/// write error, if it stopped on one.
pub fn recorded_note(s: &RecordStatus, meta: &Path) -> Result<()> {
    if let Some(e) = &s.error {
        bail!("{e}");
    }
    let mut text = format!(
        "recorded {} samples to '{}' in {} capture segment(s)",
        s.samples_written,
        sanitize(&meta.to_string_lossy()),
        s.segments
    );
    clause(&mut text, s.lost_behind, "samples the source lost are gaps between segments");
    let behind = "samples were left out because the disk could not keep up (written down as gaps)";
    clause(&mut text, s.lost_recorder, behind);
    note(&text);
    Ok(())
}

/// `; N what` when `n` is not zero.
fn clause(text: &mut String, n: u64, what: &str) {
    if n > 0 {
        text.push_str(&format!("; {n} {what}"));
    }
}

fn same(a: &Path, b: &Path) -> bool {
    match (std::fs::canonicalize(a), std::fs::canonicalize(b)) {
        (Ok(x), Ok(y)) => x == y,
        _ => a == b,
    }
}

/// The dataset of the input, for annotations without `--record` (also for a command that
/// builds its own [`AnnotationWriter`], such as `census`).
pub fn input_dataset(input: &InputRequest, info: &SourceInfo) -> Result<Dataset> {
    let need_record = |what: &str| {
        anyhow::anyhow!("--annotate needs a dataset to point at, and {what}: add --record FILE.sigmf-meta (the annotations then point at the recording)")
    };
    let Some(path) = input.path.as_deref() else { bail!(need_record("the demo scene has none")) };
    if path == "-" {
        bail!(need_record("standard input leaves none"));
    }
    let lower = path.to_ascii_lowercase();
    if lower.ends_with(".sigmf") {
        bail!(need_record("a .sigmf archive holds its dataset inside the tar"));
    }
    if lower.ends_with(".wav") {
        bail!(need_record("a WAV file's samples sit behind its header"));
    }
    if lower.ends_with(".sigmf-meta") || lower.ends_with(".sigmf-data") {
        let (meta_path, data_path) = sigmf::paths(path);
        let text = std::fs::read_to_string(&meta_path)
            .with_context(|| format!("cannot read '{}'", sanitize(&meta_path)))?;
        let meta = sigmf::parse_meta(&text, &sanitize(&meta_path))?;
        let data = match &meta.dataset {
            Some(ds) => Path::new(&meta_path).parent().unwrap_or(Path::new("")).join(ds),
            None => PathBuf::from(data_path),
        };
        let offset = input.segment.and_then(|k| meta.captures.get(k)).map_or(0, |c| c.sample_start);
        return Ok(Dataset::Sigmf { meta: meta_path.into(), data, offset });
    }
    let format = info.format.context("the input's sample format is unknown")?;
    Ok(Dataset::Raw { data: path.into(), format })
}
