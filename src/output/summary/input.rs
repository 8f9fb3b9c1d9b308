//! The records of one log file, whether `log` wrote it as JSON Lines or as CSV (`log --csv`, told
//! by its header row), as JSON objects: the rest of the report reads both alike.
//!
//! A line that is not a record (a power cut mid-write leaves a partial last line; a CSV row with
//! fewer fields than the header) is skipped with a note naming the file and line.

use crate::output::log::CSV_COLUMNS;
use serde_json::{Map, Value};
use std::io::BufRead;

/// CSV columns that hold text; every other column holds a number or `true`/`false`.
const TEXT_COLUMNS: &[&str] = &[
    "kind",
    "channel",
    "start",
    "end",
    "reason",
    "cause",
    "source",
    "window",
    "time_source",
    "version",
    "site",
    "run",
    "status",
    "file",
    "what",
    "since",
    "unit",
    "method",
    "class",
    "designator",
    "state",
];

/// Columns holding JSON text (an object in the record).
const JSON_COLUMNS: &[&str] = &["class_params"];

/// Skipped lines of one file, reported as at most three notes and a count.
struct Skipped<'a> {
    shown: &'a str,
    count: u64,
    notes: &'a mut Vec<String>,
}

impl Skipped<'_> {
    fn line(&mut self, number: u64, len: usize) {
        self.count += 1;
        if self.count <= 3 {
            self.notes.push(format!(
                "{}: line {number} ({len} bytes) is not a log record; skipped",
                self.shown
            ));
        }
    }

    fn last_line(&mut self, number: u64, len: usize) {
        self.notes.push(format!(
            "{}: the last line ({number}, {len} bytes) is incomplete (cut off while written?); skipped",
            self.shown
        ));
    }

    fn finish(self) {
        if self.count > 3 {
            self.notes.push(format!(
                "{}: {} more lines were not log records; skipped",
                self.shown,
                self.count - 3
            ));
        }
    }
}

/// Calls `each` with every record of the log `name` read from `reader`; notes of skipped lines
/// go to `notes`.
pub fn read_records(
    name: &str,
    reader: impl BufRead,
    notes: &mut Vec<String>,
    mut each: impl FnMut(&Value),
) -> std::io::Result<()> {
    read_records_with_lines(name, reader, notes, |v, _| each(v))
}

/// As [`read_records`], with each record's line as written when the log is JSON Lines (`None`
/// for a CSV row), for those that keep the original text.
pub fn read_records_with_lines(
    name: &str,
    mut reader: impl BufRead,
    notes: &mut Vec<String>,
    mut each: impl FnMut(&Value, Option<&str>),
) -> std::io::Result<()> {
    let shown = crate::messages::sanitize(name);
    let mut skipped = Skipped { shown: &shown, count: 0, notes };
    let mut line = Vec::new();
    let mut number = 0u64;
    // A bad line is reported once the next one is read: only a bad *last* line is a cut-off one.
    let mut bad: Option<(u64, usize)> = None;
    let mut header: Option<Vec<String>> = None;
    loop {
        line.clear();
        if reader.read_until(b'\n', &mut line)? == 0 {
            break;
        }
        number += 1;
        if let Some((n, len)) = bad.take() {
            skipped.line(n, len);
        }
        let text = String::from_utf8_lossy(&line);
        let text = text.trim();
        if text.is_empty() {
            continue;
        }
        if number == 1 && text.starts_with("kind,") {
            header = Some(csv_fields(text).unwrap_or_default());
            continue;
        }
        let record = match &header {
            Some(columns) => csv_fields(text).and_then(|f| csv_record(columns, &f)),
            None => serde_json::from_str::<Value>(text).ok().filter(Value::is_object),
        };
        let json_line = header.is_none().then_some(text);
        match record {
            Some(v) => each(&v, json_line),
            None => bad = Some((number, line.len())),
        }
    }
    if let Some((n, len)) = bad {
        skipped.last_line(n, len);
    }
    skipped.finish();
    Ok(())
}

/// The fields of one CSV line (RFC 4180 quoting, as `log --csv` writes it).
fn csv_fields(line: &str) -> Option<Vec<String>> {
    let mut r =
        csv::ReaderBuilder::new().has_headers(false).flexible(true).from_reader(line.as_bytes());
    let rec = r.records().next()?.ok()?;
    Some(rec.iter().map(str::to_string).collect())
}

/// A CSV row as the JSON object the same record would have been; `None` for a row with fewer
/// fields than the header (cut off).
fn csv_record(columns: &[String], fields: &[String]) -> Option<Value> {
    if fields.len() < columns.len() || columns.first().map(String::as_str) != Some("kind") {
        return None;
    }
    let mut map = Map::new();
    for (col, field) in columns.iter().zip(fields) {
        let value = if field.is_empty() {
            Value::Null
        } else if JSON_COLUMNS.contains(&col.as_str()) {
            serde_json::from_str(field).unwrap_or_else(|_| Value::String(field.clone()))
        } else if TEXT_COLUMNS.contains(&col.as_str()) || !CSV_COLUMNS.contains(&col.as_str()) {
            Value::String(field.clone())
        } else if let Ok(b) = field.parse::<bool>() {
            Value::Bool(b)
        } else if let Ok(n) = field.parse::<u64>() {
            Value::from(n)
        } else {
            Value::from(field.parse::<f64>().ok()?)
        };
        map.insert(col.clone(), value);
    }
    Some(Value::Object(map))
}

#[cfg(test)]
mod tests {
    use super::*;

    fn all(text: &str) -> (Vec<Value>, Vec<String>) {
        let mut notes = Vec::new();
        let mut out = Vec::new();
        read_records("x.csv", text.as_bytes(), &mut notes, |v| out.push(v.clone())).unwrap();
        (out, notes)
    }

    #[test]
    fn csv_rows_read_as_records() {
        let head = CSV_COLUMNS.join(",");
        let mut row = vec![""; CSV_COLUMNS.len()];
        let at = |c: &str| CSV_COLUMNS.iter().position(|x| *x == c).unwrap();
        row[at("kind")] = "interval";
        row[at("channel")] = "\"12,5\"";
        row[at("samples")] = "245";
        row[at("occupied_samples")] = "15.964";
        row[at("partial")] = "false";
        let text = format!("{head}\n{}\n{}", row.join(","), &row.join(",")[..20]);
        let (records, notes) = all(&text);
        assert_eq!(records.len(), 1);
        let r = &records[0];
        assert_eq!(r["channel"], "12,5");
        assert_eq!(r["samples"].as_u64(), Some(245));
        assert_eq!(r["occupied_samples"].as_f64(), Some(15.964));
        assert_eq!(r["partial"], false);
        assert!(r["start"].is_null());
        assert!(notes[0].contains("incomplete"), "{notes:?}");
    }
}
