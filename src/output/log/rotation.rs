//! Starting a new log file at a boundary, for runs of weeks: every UTC day, every hour, or when
//! the file reaches a size.
//!
//! The file a record belongs in follows the time of the record's first sample (the run's
//! sample-exact clock; the wall clock when the start time is unknown), so a replay of a recording
//! splits the same way as the live run did. Files only ever move forward: an emission that began
//! before midnight but ended after it is written to the file that is open, never to an older
//! one, so no record is lost or written twice. Each file starts with the run's `start` and
//! `channel` records (and a CSV header), so it can be read on its own; the noise tracker and
//! everything else in the run go on untouched. A file of the same name is appended to.
//!
//! Names: the key goes before the extension of `-o`: `site.jsonl` becomes
//! `site.2026-12-02.jsonl` (daily), `site.2026-12-02T06.jsonl` (hourly) or
//! `site.2026-12-02T06-48-59.001.jsonl` (by size: the time of the file's first record, numbered
//! within the second).

use crate::output::log::{LogFormat, LogWriter};
use std::io::{self, Write};
use time::macros::format_description;
use time::{OffsetDateTime, UtcOffset};

/// When to start a new file.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Rotate {
    Daily,
    Hourly,
    /// When the file holds at least this many bytes.
    Bytes(u64),
}

/// `daily`, `hourly`, or a size such as `100M` (bytes, with k/M/G as powers of 1000).
pub fn parse_rotate(text: &str) -> Result<Rotate, String> {
    match text.trim() {
        "daily" => return Ok(Rotate::Daily),
        "hourly" => return Ok(Rotate::Hourly),
        _ => {}
    }
    let t = text.trim();
    let (num, mult) = match t.char_indices().last() {
        Some((i, 'k' | 'K')) => (&t[..i], 1e3),
        Some((i, 'M')) => (&t[..i], 1e6),
        Some((i, 'G')) => (&t[..i], 1e9),
        _ => (t, 1.0),
    };
    let bytes = num.trim().parse::<f64>().ok().map(|v| v * mult);
    match bytes {
        Some(b) if (1e3..=1e15).contains(&b) => Ok(Rotate::Bytes(b as u64)),
        _ => Err(format!(
            "'{}' is not a rotation: use daily, hourly, or a size from 1k to 1000T bytes (e.g. 100M)",
            crate::messages::sanitize(text)
        )),
    }
}

/// Opens the next file of a rotated log: `(writer, whether the file was empty)`.
pub type Opener<W> = Box<dyn FnMut(&str) -> io::Result<(W, bool)>>;

/// The files of one rotated log.
pub struct Rotation<W: Write> {
    policy: Rotate,
    path: String,
    format: LogFormat,
    open: Opener<W>,
    key: Option<String>,
}

impl<W: Write> Rotation<W> {
    pub fn new(policy: Rotate, path: &str, format: LogFormat, open: Opener<W>) -> Rotation<W> {
        Rotation { policy, path: path.to_string(), format, open, key: None }
    }

    /// The writer of the next file when a record of time `at` must start one (`written`: bytes
    /// in the current file, `None` before the first).
    pub fn next_file(
        &mut self,
        at: OffsetDateTime,
        written: Option<u64>,
    ) -> io::Result<Option<LogWriter<W>>> {
        let Some(key) = self.due(at, written) else { return Ok(None) };
        let name = rotated_name(&self.path, &key);
        self.key = Some(key);
        let (out, empty) = (self.open)(&name)?;
        LogWriter::new(out, self.format, empty).map(Some)
    }

    fn due(&self, at: OffsetDateTime, written: Option<u64>) -> Option<String> {
        let at = at.to_offset(UtcOffset::UTC);
        let key = match self.policy {
            Rotate::Daily => at.format(format_description!("[year]-[month]-[day]")),
            Rotate::Hourly => at.format(format_description!("[year]-[month]-[day]T[hour]")),
            Rotate::Bytes(_) => at
                .format(format_description!("[year]-[month]-[day]T[hour]-[minute]-[second]"))
                .map(|k| format!("{k}.001")),
        }
        .ok()?;
        let Some(current) = &self.key else { return Some(key) };
        match self.policy {
            // Forward only (the keys sort as times do).
            Rotate::Daily | Rotate::Hourly => (key > *current).then_some(key),
            Rotate::Bytes(limit) => {
                let base = |k: &str| k.rsplit_once('.').map_or(k, |(b, _)| b).to_string();
                if written.unwrap_or(0) < limit {
                    None
                } else if base(&key) > base(current) {
                    Some(key)
                } else {
                    // A second file within the same second: number it.
                    Some(next_numbered(current))
                }
            }
        }
    }
}

/// `site.jsonl` + `KEY` → `site.KEY.jsonl`; `site` → `site.KEY`.
pub fn rotated_name(path: &str, key: &str) -> String {
    let (dir, file) = path.rsplit_once('/').map_or(("", path), |(d, f)| (d, f));
    let dir = if path.contains('/') { format!("{dir}/") } else { String::new() };
    match file.rsplit_once('.') {
        Some((stem, ext)) if !stem.is_empty() => format!("{dir}{stem}.{key}.{ext}"),
        _ => format!("{dir}{file}.{key}"),
    }
}

/// The next name within one second: `KEY.002`, `KEY.003`, … (zero-padded, so the files sort in
/// the order they were written).
fn next_numbered(key: &str) -> String {
    match key.rsplit_once('.') {
        Some((base, n)) if n.chars().all(|c| c.is_ascii_digit()) => {
            format!("{base}.{:03}", n.parse::<u64>().unwrap_or(1) + 1)
        }
        _ => format!("{key}.002"),
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use time::format_description::well_known::Rfc3339;

    fn at(text: &str) -> OffsetDateTime {
        OffsetDateTime::parse(text, &Rfc3339).unwrap()
    }

    #[test]
    fn sizes_and_names() {
        assert_eq!(parse_rotate("daily"), Ok(Rotate::Daily));
        assert_eq!(parse_rotate("100M"), Ok(Rotate::Bytes(100_000_000)));
        assert!(parse_rotate("0").is_err() && parse_rotate("weekly").is_err());
        assert_eq!(rotated_name("logs/site.jsonl", "2026-12-02"), "logs/site.2026-12-02.jsonl");
        assert_eq!(rotated_name("site", "K"), "site.K");
        assert_eq!(rotated_name("/var/log/a.b/site", "K"), "/var/log/a.b/site.K");
    }

    #[test]
    fn daily_files_follow_utc_days_and_only_move_forward() {
        let opened = std::rc::Rc::new(std::cell::RefCell::new(Vec::new()));
        let log = opened.clone();
        let open: Opener<Vec<u8>> = Box::new(move |name: &str| {
            log.borrow_mut().push(name.to_string());
            Ok((Vec::new(), true))
        });
        let mut r = Rotation::new(Rotate::Daily, "site.jsonl", LogFormat::JsonLines, open);
        // 23:30 at UTC+2 is 21:30 UTC: still the 1st.
        assert!(r.next_file(at("2026-05-01T23:30:00+02:00"), None).unwrap().is_some());
        assert!(r.next_file(at("2026-05-01T23:59:59Z"), Some(10)).unwrap().is_none());
        assert!(r.next_file(at("2026-05-02T00:00:00Z"), Some(10)).unwrap().is_some());
        // An emission that began before midnight, written after: stays in the open file.
        assert!(r.next_file(at("2026-05-01T23:59:58Z"), Some(10)).unwrap().is_none());
        assert_eq!(*opened.borrow(), ["site.2026-05-01.jsonl", "site.2026-05-02.jsonl"]);
        assert_eq!(next_numbered("2026-05-01T00-00-00"), "2026-05-01T00-00-00.002");
        assert_eq!(next_numbered("2026-05-01T00-00-00.009"), "2026-05-01T00-00-00.010");
    }
}
