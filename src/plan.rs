//! Channel plans: the named channels an operator wants measured, from a TOML file or flags.
//!
//! A plan exists so that `log` and `measure` speak of the same channels by name, and so that a
//! mistake in a plan (a typo, two channels overlapping, a channel outside what the receiver
//! captures) is caught before hours of logging, with the line of the plan that caused it.
//!
//! File format (`--plan FILE.toml`), one `[[channel]]` table per channel:
//!
//! ```toml
//! [[channel]]
//! name = "north-gate"        # unique; letters, digits and punctuation, no control characters
//! center = "433.100M"        # absolute Hz: a number (433100000) or a string with k/M/G
//! width = "25k"              # Hz, > 0
//! threshold_db = 8           # optional: occupancy threshold over the noise, dB
//! alarm_dbfs = -60            # optional: `watch` rings when the channel's power passes this
//! ```
//!
//! Keys other than these four inside a `[[channel]]` table are refused (a misspelt `centre`
//! would otherwise be ignored silently); other top-level tables and keys are ignored, so a plan may
//! carry a description of the site. Channels may touch but not overlap.
//!
//! On the command line, `--channel NAME=CENTER:WIDTH` adds a channel (repeatable); it combines
//! with `--plan`.

use crate::units::{format_hz, format_hz_within, parse_hz};
use anyhow::{bail, Context, Result};
use serde::Deserialize;
use std::fmt;
use toml::Spanned;

/// Highest accepted per-channel threshold: above this nothing short of a transmitter in the
/// receiver's antenna port would ever count as occupied, so it is surely a typo.
const MAX_THRESHOLD_DB: f64 = 100.0;

/// One channel of a plan, in absolute hertz.
#[derive(Clone, Debug, PartialEq)]
pub struct Channel {
    pub name: String,
    pub center_hz: f64,
    pub width_hz: f64,
    /// Overrides the run's `--threshold-db` for this channel.
    pub threshold_db: Option<f64>,
    /// `watch` alarm: channel power above this (dBFS) rings the bell once per onset.
    pub alarm_dbfs: Option<f64>,
    /// Where the channel was defined, for error messages.
    pub origin: Origin,
}

impl Channel {
    pub fn low_hz(&self) -> f64 {
        self.center_hz - self.width_hz / 2.0
    }

    pub fn high_hz(&self) -> f64 {
        self.center_hz + self.width_hz / 2.0
    }
}

/// Where a channel came from: a line of a plan file or a `--channel` flag.
#[derive(Clone, Debug, PartialEq)]
pub enum Origin {
    Plan { path: String, line: usize },
    Flag { text: String },
}

impl fmt::Display for Origin {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            Origin::Plan { path, line } => write!(f, "plan '{path}' line {line}"),
            Origin::Flag { text } => write!(f, "--channel '{text}'"),
        }
    }
}

/// A validated set of channels, in the order they were given.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct Plan {
    pub channels: Vec<Channel>,
}

impl Plan {
    /// Combines a plan file (if any) and `--channel` flags, and validates the result.
    pub fn from_parts(plan_path: Option<&str>, flags: &[Channel]) -> Result<Plan> {
        let mut channels = match plan_path {
            Some(path) => Plan::load(path)?.channels,
            None => Vec::new(),
        };
        channels.extend(flags.iter().cloned());
        let plan = Plan { channels };
        plan.validate()?;
        Ok(plan)
    }

    /// Reads and validates a plan file.
    pub fn load(path: &str) -> Result<Plan> {
        let shown = crate::messages::sanitize(path);
        let bytes = std::fs::read(path)
            .with_context(|| format!("cannot read plan '{shown}'; check the path"))?;
        let text = String::from_utf8(bytes).map_err(|e| {
            let line =
                line_of(&String::from_utf8_lossy(e.as_bytes()), e.utf8_error().valid_up_to());
            anyhow::anyhow!("plan '{shown}' line {line}: not UTF-8 text; a plan is a TOML file")
        })?;
        let plan = Plan::parse(&text, &shown)?;
        if plan.channels.is_empty() {
            bail!(
                "plan '{shown}' defines no channels; add [[channel]] tables with name, center and width"
            );
        }
        plan.validate()?;
        Ok(plan)
    }

    /// Parses the text of a plan file (`path` is only used in messages). Checks each channel on
    /// its own; [`Plan::validate`] checks them against each other.
    pub fn parse(text: &str, path: &str) -> Result<Plan> {
        let file: PlanFile = toml::from_str(text).map_err(|e| {
            let line = e.span().map_or(1, |s| line_of(text, s.start));
            match unclosed_quote(text).filter(|u| u.line <= line) {
                Some(u) => anyhow::anyhow!(
                    "plan '{path}' line {}: a quoted value is not closed; add the closing {} ({})",
                    u.line,
                    u.quote,
                    text.lines().nth(u.line - 1).unwrap_or("").trim()
                ),
                None => anyhow::anyhow!("plan '{path}' line {line}: {}", one_line(e.message())),
            }
        })?;
        let headers = table_header_lines(text);
        let mut channels = Vec::with_capacity(file.channel.len());
        for (i, entry) in file.channel.into_iter().enumerate() {
            let table_line =
                headers.get(i).copied().unwrap_or_else(|| line_of(text, entry.name.span().start));
            channels.push(entry.into_channel(text, path, table_line)?);
        }
        Ok(Plan { channels })
    }

    /// Checks the channels against each other: unique names, no overlap.
    pub fn validate(&self) -> Result<()> {
        for (i, c) in self.channels.iter().enumerate() {
            if let Some(first) = self.channels[..i].iter().find(|o| o.name == c.name) {
                bail!(
                    "{}: channel name '{}' is already used ({}); give each channel its own name",
                    c.origin,
                    c.name,
                    first.origin
                );
            }
        }
        let mut order: Vec<&Channel> = self.channels.iter().collect();
        order.sort_by(|a, b| a.low_hz().total_cmp(&b.low_hz()));
        for pair in order.windows(2) {
            let (a, b) = (pair[0], pair[1]);
            // Touching edges are fine; a millihertz of rounding in user input is forgiven.
            if a.high_hz() > b.low_hz() + 1e-3 {
                bail!(
                    "{}: channel '{}' ({} .. {}) overlaps channel '{}' ({} .. {}, {}); channels may touch but not overlap",
                    b.origin,
                    b.name,
                    format_hz(b.low_hz()),
                    format_hz(b.high_hz()),
                    a.name,
                    format_hz(a.low_hz()),
                    format_hz(a.high_hz()),
                    a.origin
                );
            }
        }
        Ok(())
    }

    /// Checks every channel lies inside the captured span `[low_hz, high_hz]`.
    pub fn check_span(&self, low_hz: f64, high_hz: f64) -> Result<()> {
        self.check_span_within(low_hz, high_hz, 1.0)
    }

    /// As [`Plan::check_span`] for a span whose edges are known to `resolution_hz` (the edges of
    /// an FFT's bins: the message shows no digit finer than a bin).
    pub fn check_span_within(&self, low_hz: f64, high_hz: f64, resolution_hz: f64) -> Result<()> {
        for c in &self.channels {
            if c.low_hz() < low_hz - 1e-3 || c.high_hz() > high_hz + 1e-3 {
                bail!(
                    "{}: channel '{}' ({} .. {}) lies outside the captured span {} .. {}; check the plan, --center and --rate",
                    c.origin,
                    c.name,
                    format_hz(c.low_hz()),
                    format_hz(c.high_hz()),
                    format_hz_within(low_hz, resolution_hz),
                    format_hz_within(high_hz, resolution_hz)
                );
            }
        }
        Ok(())
    }

    pub fn is_empty(&self) -> bool {
        self.channels.is_empty()
    }
}

/// Parses a channel given on the command line, `NAME=CENTER:WIDTH`, e.g.
/// `north-gate=433.1M:25k`.
pub fn parse_channel_flag(text: &str) -> Result<Channel, String> {
    let usage = "expected NAME=CENTER:WIDTH in Hz, e.g. north-gate=433.1M:25k";
    let shown = crate::messages::sanitize(text);
    let (name, band) = text.split_once('=').ok_or_else(|| format!("'{shown}': {usage}"))?;
    let (c, w) = band.split_once(':').ok_or_else(|| format!("'{shown}': {usage}"))?;
    check_name(name).map_err(|e| format!("'{shown}': {e}"))?;
    let center_hz = parse_hz(c).map_err(|e| format!("'{shown}': centre {e}"))?;
    let width_hz = parse_hz(w).map_err(|e| format!("'{shown}': width {e}"))?;
    check_width(width_hz).map_err(|e| format!("'{shown}': {e}"))?;
    Ok(Channel {
        name: name.trim().to_string(),
        center_hz,
        width_hz,
        threshold_db: None,
        alarm_dbfs: None,
        origin: Origin::Flag { text: shown },
    })
}

/// Highest accepted threshold, dB (see `MAX_THRESHOLD_DB`); a run's default threshold is checked
/// against it too.
pub fn check_threshold_db(threshold_db: f64) -> Result<()> {
    if !(threshold_db > 0.0 && threshold_db <= MAX_THRESHOLD_DB) {
        bail!(
            "--threshold-db {threshold_db} is out of range; choose a value above 0 and at most {MAX_THRESHOLD_DB} dB (10 is the default)"
        );
    }
    Ok(())
}

/// Default occupancy threshold over the noise in the channel, dB. See `measure::occupancy`.
pub const DEFAULT_THRESHOLD_DB: f64 = 10.0;

#[derive(Deserialize)]
struct PlanFile {
    #[serde(default)]
    channel: Vec<ChannelEntry>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct ChannelEntry {
    name: Spanned<String>,
    center: Spanned<HzValue>,
    width: Spanned<HzValue>,
    threshold_db: Option<Spanned<f64>>,
    alarm_dbfs: Option<Spanned<f64>>,
}

/// A frequency in a plan: a plain number of hertz or a string with an SI suffix.
#[derive(Deserialize)]
#[serde(untagged)]
enum HzValue {
    Number(f64),
    Text(String),
}

impl HzValue {
    fn hz(&self) -> Result<f64, String> {
        match self {
            HzValue::Number(v) if v.is_finite() => Ok(*v),
            HzValue::Number(v) => Err(format!("{v} is not a finite frequency")),
            HzValue::Text(t) => parse_hz(t),
        }
    }
}

impl ChannelEntry {
    fn into_channel(self, text: &str, path: &str, table_line: usize) -> Result<Channel> {
        let at = |span: std::ops::Range<usize>| line_of(text, span.start);
        let name = self.name.get_ref().trim().to_string();
        if let Err(e) = check_name(&name) {
            bail!("plan '{path}' line {}: {e}", at(self.name.span()));
        }
        let center_hz = self.center.get_ref().hz().map_err(|e| {
            anyhow::anyhow!(
                "plan '{path}' line {}: channel '{name}' center: {e}",
                at(self.center.span())
            )
        })?;
        let width_hz =
            self.width.get_ref().hz().and_then(|w| check_width(w).map(|_| w)).map_err(|e| {
                anyhow::anyhow!(
                    "plan '{path}' line {}: channel '{name}' width: {e}",
                    at(self.width.span())
                )
            })?;
        let threshold_db = match self.threshold_db {
            None => None,
            Some(t) => {
                let v = *t.get_ref();
                if !(v > 0.0 && v <= MAX_THRESHOLD_DB) {
                    bail!(
                        "plan '{path}' line {}: channel '{name}' threshold_db {v} is out of range; choose above 0 and at most {MAX_THRESHOLD_DB} dB",
                        at(t.span())
                    );
                }
                Some(v)
            }
        };
        let alarm_dbfs = match self.alarm_dbfs {
            None => None,
            Some(a) => {
                let v = *a.get_ref();
                if !(-300.0..=100.0).contains(&v) {
                    bail!(
                        "plan '{path}' line {}: channel '{name}' alarm_dbfs {v} is out of range; give a channel power in dBFS between -300 and 100",
                        at(a.span())
                    );
                }
                Some(v)
            }
        };
        Ok(Channel {
            name,
            center_hz,
            width_hz,
            threshold_db,
            alarm_dbfs,
            origin: Origin::Plan { path: path.to_string(), line: table_line },
        })
    }
}

fn check_name(name: &str) -> Result<(), String> {
    let name = name.trim();
    if name.is_empty() {
        return Err("the channel name is empty; give each channel a name".into());
    }
    if name.chars().any(char::is_control) {
        return Err("the channel name holds control characters; use printable text".into());
    }
    Ok(())
}

fn check_width(width_hz: f64) -> Result<(), String> {
    if width_hz > 0.0 && width_hz.is_finite() {
        Ok(())
    } else {
        Err(format!("width {width_hz} Hz must be greater than zero"))
    }
}

/// 1-based line number of byte offset `pos`.
fn line_of(text: &str, pos: usize) -> usize {
    let pos = pos.min(text.len());
    text.as_bytes()[..pos].iter().filter(|&&b| b == b'\n').count() + 1
}

/// Lines of the `[[channel]]` headers, in order (tables given inline have none).
fn table_header_lines(text: &str) -> Vec<usize> {
    text.lines()
        .enumerate()
        .filter(|(_, l)| {
            let t: String = l.chars().filter(|c| !c.is_whitespace()).collect();
            t.starts_with("[[channel]]")
        })
        .map(|(i, _)| i + 1)
        .collect()
}

/// A string of a TOML file that is opened and never closed.
#[derive(Debug, PartialEq)]
struct Unclosed {
    /// 1-based line of the opening quote.
    line: usize,
    /// The quote that closes it: `"`, `'`, `"""` or `'''`.
    quote: &'static str,
}

/// The first string in `text` left open, if any. toml's own message for it ("invalid basic
/// string", at the end of the line or of the file) names neither the cause nor the fix. The
/// scan follows TOML 1.0's four kinds of string (toml.io, "String"): basic and literal ones end
/// on their line, multi-line ones may end on a later line; `#` outside a string starts a comment.
fn unclosed_quote(text: &str) -> Option<Unclosed> {
    // An open multi-line string: its quote and the line it began on.
    let mut open: Option<(&'static str, usize)> = None;
    for (i, line) in text.lines().enumerate() {
        let mut rest = line;
        loop {
            if let Some((quote, _)) = open {
                match rest.find(quote) {
                    Some(end) => {
                        rest = &rest[end + quote.len()..];
                        open = None;
                    }
                    None => break,
                }
            }
            let Some(start) = rest.find(['"', '\'', '#']) else { break };
            let after = &rest[start..];
            if after.starts_with('#') {
                break;
            }
            if let Some(quote) = ["\"\"\"", "'''"].into_iter().find(|q| after.starts_with(q)) {
                open = Some((quote, i + 1));
                rest = &after[quote.len()..];
                continue;
            }
            let (quote, body) = after.split_at(1);
            match closing(body, quote == "\"") {
                Some(end) => rest = &body[end + 1..],
                None => {
                    let quote = if quote == "\"" { "\"" } else { "'" };
                    return Some(Unclosed { line: i + 1, quote });
                }
            }
        }
    }
    open.map(|(quote, line)| Unclosed { line, quote })
}

/// Byte offset in `body` of the quote that ends a one-line string (`"` for a basic string, where
/// `\` escapes the next character; `'` for a literal one).
fn closing(body: &str, basic: bool) -> Option<usize> {
    let mut escaped = false;
    for (i, c) in body.char_indices() {
        match c {
            '\\' if basic && !escaped => escaped = true,
            '"' if basic && !escaped => return Some(i),
            '\'' if !basic => return Some(i),
            _ => escaped = false,
        }
    }
    None
}

/// toml's messages may span lines; ours are one line.
fn one_line(msg: &str) -> String {
    msg.split_whitespace().collect::<Vec<_>>().join(" ")
}

#[cfg(test)]
mod tests {
    use super::*;

    const GOOD: &str = r#"
# An invented site.
site = "Kestrel Ridge"

[[channel]]
name = "north-gate"
center = "433.100M"
width = "25k"

[[channel]]
name = "weather"
center = 433300000
width = 12500.0
threshold_db = 6
"#;

    fn err(text: &str) -> String {
        match Plan::parse(text, "p.toml").and_then(|p| p.validate().map(|_| p)) {
            Ok(p) => panic!("accepted: {p:?}"),
            Err(e) => e.to_string(),
        }
    }

    #[test]
    fn a_good_plan_parses_with_lines_and_suffixes() {
        let p = Plan::parse(GOOD, "p.toml").unwrap();
        p.validate().unwrap();
        assert_eq!(p.channels.len(), 2);
        assert_eq!(p.channels[0].name, "north-gate");
        assert_eq!(p.channels[0].center_hz, 433.1e6);
        assert_eq!(p.channels[0].width_hz, 25e3);
        assert_eq!(p.channels[0].threshold_db, None);
        assert_eq!(p.channels[0].origin, Origin::Plan { path: "p.toml".into(), line: 5 });
        assert_eq!(p.channels[1].center_hz, 433.3e6);
        assert_eq!(p.channels[1].threshold_db, Some(6.0));
        assert_eq!(p.channels[1].origin.to_string(), "plan 'p.toml' line 10");
    }

    #[test]
    fn alarm_levels_parse_and_absurd_ones_name_their_line() {
        let p = Plan::parse(
            "[[channel]]\nname = \"a\"\ncenter = \"1M\"\nwidth = \"10k\"\nalarm_dbfs = -60\n",
            "p.toml",
        )
        .unwrap();
        assert_eq!(p.channels[0].alarm_dbfs, Some(-60.0));
        let e =
            err("[[channel]]\nname = \"a\"\ncenter = \"1M\"\nwidth = \"10k\"\nalarm_dbfs = 500\n");
        assert!(e.contains("line 5") && e.contains("alarm_dbfs 500"), "{e}");
    }

    #[test]
    fn zero_or_negative_width_names_its_line() {
        let e = err("[[channel]]\nname = \"a\"\ncenter = \"1M\"\nwidth = 0\n");
        assert!(e.contains("line 4") && e.contains("greater than zero"), "{e}");
        let e = err("[[channel]]\nname = \"a\"\ncenter = \"1M\"\nwidth = \"-5k\"\n");
        assert!(e.contains("line 4") && e.contains("greater than zero"), "{e}");
    }

    #[test]
    fn an_unclosed_quote_names_its_line_and_the_fix() {
        // The plan of the first table with its centre's closing quote left off.
        let e =
            err("# site\n[[channel]]\nname = \"north-gate\"\ncenter = \"433.1M\nwidth = \"25k\"\n");
        assert!(e.starts_with("plan 'p.toml' line 4: a quoted value is not closed"), "{e}");
        assert!(e.contains("add the closing \" (center = \"433.1M)"), "{e}");
        // A literal string, and a multi-line one that runs to the end of the file (toml points
        // at the end; the opening line is the one to mend).
        let e = err("[[channel]]\nname = 'a\ncenter = 1e6\nwidth = 1e3\n");
        assert!(e.contains("line 2: a quoted value is not closed; add the closing '"), "{e}");
        let e = err("[[channel]]\nname = \"\"\"a\ncenter = 1e6\nwidth = 1e3\n");
        assert!(e.contains("line 2: a quoted value is not closed; add the closing \"\"\""), "{e}");
    }

    #[test]
    fn closed_quotes_escapes_and_comments_are_not_taken_for_open_ones() {
        // TOML 1.0 (toml.io, "String"): \" does not end a basic string, a literal string has no
        // escapes, quotes inside a comment or inside the other kind of string are plain text.
        let text = concat!(
            "a = \"say \\\"hi\\\"\" # it's \"quoted\n",
            "b = 'C:\\dir\\' # \"\n",
            "c = \"it's\"\n",
            "d = '''two\nlines ' \" '''\n",
            "e = \"\"\"x\"\"\" f = 1\n",
        );
        assert_eq!(unclosed_quote(text), None);
        assert_eq!(unclosed_quote("x = 1\ny = \"a\\\"\n"), Some(Unclosed { line: 2, quote: "\"" }));
        // Another mistake before the open quote keeps toml's own message and line.
        let e = err("[[channel]]\nname = = 1\ncenter = \"1M\n");
        assert!(e.contains("line 2") && !e.contains("quoted value"), "{e}");
    }

    #[test]
    fn overlap_names_both_channels_and_lines() {
        let text = "[[channel]]\nname = \"a\"\ncenter = \"1M\"\nwidth = \"20k\"\n\n\
                    [[channel]]\nname = \"b\"\ncenter = \"1.015M\"\nwidth = \"20k\"\n";
        let e = err(text);
        assert!(e.contains("line 6") && e.contains("line 1") && e.contains("overlaps"), "{e}");
        // Touching is allowed.
        let ok = text.replace("1.015M", "1.02M");
        Plan::parse(&ok, "p").unwrap().validate().unwrap();
    }

    #[test]
    fn duplicate_names_are_refused() {
        let text = "[[channel]]\nname = \"a\"\ncenter = \"1M\"\nwidth = \"20k\"\n\
                    [[channel]]\nname = \"a\"\ncenter = \"2M\"\nwidth = \"20k\"\n";
        let e = err(text);
        assert!(e.contains("line 5") && e.contains("already used") && e.contains("line 1"), "{e}");
    }

    #[test]
    fn garbage_and_truncated_files_give_a_line() {
        let e = err("[[channel]]\nname = \"a\"\ncenter = \"1M\"\nwidth = \"2");
        assert!(e.starts_with("plan 'p.toml' line 4:"), "{e}");
        assert!(!e.contains('\n'), "one line: {e}");
        let e = err("\u{1}\u{2}garbage ][ = =\n");
        assert!(e.starts_with("plan 'p.toml' line 1:"), "{e}");
        let e = err("[[channel]]\nname = \"a\"\ncentre = \"1M\"\nwidth = \"20k\"\n");
        assert!(e.contains("centre"), "{e}");
        let e = err("[[channel]]\nname = \"a\"\nwidth = \"20k\"\n");
        assert!(e.contains("center"), "{e}");
        let e = err("[[channel]]\nname = \"a\"\ncenter = \"fast\"\nwidth = \"20k\"\n");
        assert!(e.contains("line 3") && e.contains("not a frequency"), "{e}");
        let e = err("[[channel]]\nname = \"\"\ncenter = \"1M\"\nwidth = \"20k\"\n");
        assert!(e.contains("line 2") && e.contains("empty"), "{e}");
        let e =
            err("[[channel]]\nname = \"a\"\ncenter = \"1M\"\nwidth = \"20k\"\nthreshold_db = -3\n");
        assert!(e.contains("line 5") && e.contains("threshold_db"), "{e}");
    }

    #[test]
    fn files_without_channels_or_text_are_refused() {
        let dir = std::env::temp_dir().join(format!("bw-plan-{}", std::process::id()));
        std::fs::create_dir_all(&dir).unwrap();
        let empty = dir.join("empty.toml");
        std::fs::write(&empty, "site = \"x\"\n").unwrap();
        let e = Plan::load(empty.to_str().unwrap()).unwrap_err().to_string();
        assert!(e.contains("defines no channels"), "{e}");
        let binary = dir.join("binary.toml");
        std::fs::write(&binary, b"[[channel]]\n\xff\xfe\x00\n").unwrap();
        let e = Plan::load(binary.to_str().unwrap()).unwrap_err().to_string();
        assert!(e.contains("line 2") && e.contains("not UTF-8"), "{e}");
        let e = Plan::load(dir.join("missing.toml").to_str().unwrap()).unwrap_err().to_string();
        assert!(e.contains("cannot read plan"), "{e}");
        std::fs::remove_dir_all(&dir).unwrap();
    }

    #[test]
    fn span_check_names_the_channel() {
        let p = Plan::parse(GOOD, "p.toml").unwrap();
        p.check_span(432e6, 434e6).unwrap();
        let e = p.check_span(433.2e6, 434e6).unwrap_err().to_string();
        assert!(e.contains("line 5") && e.contains("north-gate") && e.contains("outside"), "{e}");
        // The edges of 4096 bins of 1 MS/s around 433.6 MHz lie half a bin (122 Hz) below the
        // round numbers (arithmetic): shown to the 100 Hz a 244 Hz bin supports.
        let bin = 1e6 / 4096.0;
        let lo = 433.6e6 - 0.5e6 - bin / 2.0;
        let e = p.check_span_within(lo, lo + 1e6, bin).unwrap_err().to_string();
        assert!(e.contains("captured span 433.0999 MHz .. 434.0999 MHz;"), "{e}");
    }

    #[test]
    fn channel_flags_parse_and_combine() {
        let a = parse_channel_flag("north-gate=433.1M:25k").unwrap();
        assert_eq!((a.name.as_str(), a.center_hz, a.width_hz), ("north-gate", 433.1e6, 25e3));
        assert!(parse_channel_flag("433.1M:25k").unwrap_err().contains("NAME=CENTER:WIDTH"));
        assert!(parse_channel_flag("a=433.1M").unwrap_err().contains("NAME=CENTER:WIDTH"));
        assert!(parse_channel_flag("a=433.1M:0").unwrap_err().contains("greater than zero"));
        assert!(parse_channel_flag("=433.1M:1k").unwrap_err().contains("empty"));
        let b = parse_channel_flag("b=433.11M:10k").unwrap();
        let e = Plan::from_parts(None, &[a, b]).unwrap_err().to_string();
        assert!(e.contains("--channel 'b=433.11M:10k'") && e.contains("overlaps"), "{e}");
    }
}
