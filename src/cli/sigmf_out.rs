//! Flags that write SigMF: `--record` (log, census, watch), `--annotate` and `--capture` (log,
//! census).

use super::common::parse_seconds;
use crate::output::log::rotation::{parse_rotate, Rotate};
pub use crate::output::sigmf::capture::CaptureSettings as CaptureConfig;
pub use crate::output::sigmf::outputs::SigmfOut;
use anyhow::{bail, Result};
use clap::Args;

/// The heading `--help` lists the SigMF flags under.
pub const SIGMF_HEADING: &str = "SigMF output";

/// `--record`, for every command that runs on live input.
#[derive(Args, Debug, Clone, Default)]
#[command(next_help_heading = SIGMF_HEADING)]
pub struct RecordArgs {
    /// Also record the input, as it is read, to this SigMF recording (FILE.sigmf-meta beside
    /// FILE.sigmf-data; replaced if it exists), in the input's datatype (cf32_le for the demo).
    #[arg(long, value_name = "FILE.sigmf-meta")]
    pub record: Option<String>,
}

impl RecordArgs {
    pub fn validate(self) -> Result<Option<String>> {
        if let Some(r) = &self.record {
            crate::output::sigmf::write::pair(r).map_err(anyhow::Error::msg)?;
        }
        Ok(self.record)
    }
}

/// `--annotate` and `--capture`, for the commands that find emissions.
#[derive(Args, Debug, Clone, Default)]
#[command(next_help_heading = SIGMF_HEADING)]
pub struct EmissionOutArgs {
    /// Write every emission as a SigMF annotation to this new metadata file, pointing at the
    /// input's dataset (or at --record's); name the input's own .sigmf-meta to add them there.
    #[arg(long, value_name = "FILE.sigmf-meta")]
    pub annotate: Option<String>,
    /// Save each emission's IQ as a SigMF recording in this directory (created if missing).
    #[arg(long, value_name = "DIR")]
    pub capture: Option<String>,
    /// Seconds of IQ kept before each emission's start in a capture.
    #[arg(long, value_name = "SECONDS", default_value = "0.5", allow_negative_numbers = true, value_parser = parse_seconds)]
    pub pre: f64,
    /// Seconds of IQ kept after each emission's end in a capture.
    #[arg(long, value_name = "SECONDS", default_value = "0.5", allow_negative_numbers = true, value_parser = parse_seconds)]
    pub post: f64,
    /// Longest emission a capture holds, in seconds (from its start; a longer one is cut there
    /// and marked truncated).
    #[arg(long, value_name = "SECONDS", default_value = "30", allow_negative_numbers = true, value_parser = parse_seconds)]
    pub capture_max_seconds: f64,
    /// Most bytes all captures of the run may take (e.g. 500M, 2G); when the next one might not
    /// fit, capturing stops (each skipped capture is logged).
    #[arg(long, value_name = "BYTES", default_value = "1G", allow_hyphen_values = true, value_parser = parse_bytes)]
    pub capture_max_bytes: u64,
}

impl SigmfOut {
    /// Validates the flags of a command that reads `input`: annotations of standard input
    /// need a recording to point at.
    pub fn validate(
        record: RecordArgs,
        emissions: EmissionOutArgs,
        input: &str,
    ) -> Result<SigmfOut> {
        let record = record.validate()?;
        let (annotate, capture) = emissions.validate()?;
        if annotate.is_some() && record.is_none() && input == "-" {
            bail!("--annotate needs a dataset to point at, and standard input leaves none: add --record FILE.sigmf-meta (the annotations then point at the recording)");
        }
        Ok(SigmfOut { record, annotate, capture })
    }
}

/// Longest pre- or post-trigger time: the pre-trigger ring is held in memory.
pub const MAX_PRE_POST_S: f64 = 60.0;

impl EmissionOutArgs {
    pub fn validate(self) -> Result<(Option<String>, Option<CaptureConfig>)> {
        if let Some(a) = &self.annotate {
            crate::output::sigmf::write::pair(a).map_err(anyhow::Error::msg)?;
        }
        for (flag, v) in [("--pre", self.pre), ("--post", self.post)] {
            if v > MAX_PRE_POST_S {
                bail!("{flag} {v} is too long: at most {MAX_PRE_POST_S} s (the samples are held in memory)");
            }
        }
        if self.capture_max_seconds <= 0.0 {
            bail!("--capture-max-seconds must be longer than zero (e.g. 30)");
        }
        let capture = self.capture.map(|dir| CaptureConfig {
            dir,
            pre_s: self.pre,
            post_s: self.post,
            max_s: self.capture_max_seconds,
            max_bytes: self.capture_max_bytes,
        });
        Ok((self.annotate, capture))
    }
}

/// A size in bytes: `500M`, `2G`, `1e9` (k/M/G are powers of 1000), 1k ..= 1000T.
pub fn parse_bytes(text: &str) -> Result<u64, String> {
    match parse_rotate(text) {
        Ok(Rotate::Bytes(b)) => Ok(b),
        _ => Err(format!(
            "'{}' is not a size: give bytes from 1k to 1000T (e.g. 500M, 2G)",
            crate::messages::sanitize(text)
        )),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn sizes_and_limits() {
        assert_eq!(parse_bytes("2G"), Ok(2_000_000_000));
        assert_eq!(parse_bytes("500M"), Ok(500_000_000));
        assert!(parse_bytes("daily").is_err());
        assert!(parse_bytes("12").is_err());
        let args = EmissionOutArgs { pre: 61.0, ..EmissionOutArgs::default() };
        assert!(args.validate().unwrap_err().to_string().contains("--pre"));
        let args = EmissionOutArgs {
            capture: Some("caps".into()),
            capture_max_seconds: 30.0,
            capture_max_bytes: 1_000_000,
            pre: 0.5,
            post: 0.25,
            annotate: None,
        };
        let (_, c) = args.validate().unwrap();
        assert_eq!(c.unwrap().post_s, 0.25);
        let bad = RecordArgs { record: Some("x.sigmf".into()) };
        assert!(bad.validate().unwrap_err().to_string().contains("archive"));
    }
}
