//! Evidence (`e`): the traces on show and the signal table written to two files in the folder
//! of `--evidence-dir` (default: the working directory), named with the UTC time of writing so
//! that successive presses never overwrite:
//!
//! - `bandwarden-20310417T063002Z.csv`: one line per FFT bin, `freq_hz,current_dbfs,
//!   average_dbfs,peak_hold_dbfs,min_hold_dbfs` (levels in dBFS of power in one RBW, as the
//!   spectrum draws them; the current trace is the time cursor's row when scrolled back);
//! - `bandwarden-20310417T063002Z.json`: the source, the analysis settings, the time of the row
//!   on show, the noise floor, the band between the markers and the signal table with every
//!   column the screen shows.
//!
//! Both go through [`crate::output::sink`], so a full disk or a missing directory is a clear
//! message on the marker line, never a lost screen.

use super::App;
use crate::output::sink;
use crate::pipeline::clock::rfc3339_ms;
use crate::units::{db, round_dp};
use anyhow::Result;
use std::io::Write;
use time::OffsetDateTime;

/// The stem of the evidence files for a moment: `bandwarden-YYYYMMDDTHHMMSSZ`.
pub fn file_stem(t: OffsetDateTime) -> String {
    let t = t.to_offset(time::UtcOffset::UTC);
    format!(
        "bandwarden-{:04}{:02}{:02}T{:02}{:02}{:02}Z",
        t.year(),
        t.month() as u8,
        t.day(),
        t.hour(),
        t.minute(),
        t.second()
    )
}

impl App {
    /// Writes the evidence files into `dir` named for `now`; returns their paths.
    pub fn write_evidence(&self, dir: &str, now: OffsetDateTime) -> Result<(String, String)> {
        let stem = format!("{dir}/{}", file_stem(now));
        let (csv, json) = (format!("{stem}.csv"), format!("{stem}.json"));
        let cur = self.traces.current().ok_or_else(|| anyhow::anyhow!("no spectrum yet"))?;
        let shown = self.cursor.spectrum.as_ref().unwrap_or(cur);
        let mut out = sink::open(&csv, false, "evidence")?.out;
        writeln!(out, "freq_hz,current_dbfs,average_dbfs,peak_hold_dbfs,min_hold_dbfs")?;
        let level = |p: f64, rbw: f64| db(p * rbw);
        let avg = self.traces.average_psd();
        let (hold, min) = (self.traces.hold_psd(), self.traces.min_hold_psd());
        for i in 0..cur.fft_size {
            let now_psd = shown.psd.get(i).copied().unwrap_or(f64::NAN);
            writeln!(
                out,
                "{:.3},{:.3},{:.3},{:.3},{:.3}",
                cur.freq_of_bin(i as f64),
                level(now_psd, shown.rbw_hz),
                level(avg[i], cur.rbw_hz),
                level(hold[i], cur.rbw_hz),
                level(min[i], cur.rbw_hz)
            )?;
        }
        out.flush()?;
        let row_end =
            self.cursor.index.and_then(|c| self.history.by_index(c)).map(|r| r.end_sample);
        let end = row_end.unwrap_or(shown.end_sample);
        let signals: Vec<serde_json::Value> = self
            .table
            .signals
            .iter()
            .map(|s| {
                serde_json::json!({
                    "freq_hz": round_dp(s.freq_hz, 1),
                    "power_dbfs": round_dp(s.power_dbfs, 2),
                    "peak_dbfs": round_dp(s.level_dbfs, 2),
                    "snr_db": round_dp(s.snr_db, 2),
                    "obw_hz": round_dp(s.obw.width_hz(), 1),
                    "obw_low_hz": round_dp(s.obw.low_hz, 1),
                    "obw_high_hz": round_dp(s.obw.high_hz, 1),
                    "channel": self.plan.channel_at(s.freq_hz).map(|c| c.name.clone()),
                })
            })
            .collect();
        let v = serde_json::json!({
            "kind": "evidence",
            "written": rfc3339_ms(now),
            "source": self.source.label,
            "sample_rate_hz": self.source.sample_rate_hz,
            "center_hz": self.source.center_hz,
            "fft_size": cur.fft_size,
            "window": cur.window.to_string(),
            "rbw_hz": cur.rbw_hz,
            "row_time": self.times.utc_at(end).and_then(rfc3339_ms),
            "row_input_s": self.times.clock.seconds(end),
            "scrolled_back": self.cursor.index.is_some(),
            "noise_floor_dbfs_per_hz": self.measured.floor_density.map(|d| round_dp(db(d), 2)),
            "ref_offset_db": self.levels.offset_db,
            "band": self.markers.band.map(|b| serde_json::json!({
                "low_hz": round_dp(b.low_hz, 1), "high_hz": round_dp(b.high_hz, 1),
                "power_dbfs": b.power_dbfs.map(|p| round_dp(p, 2)),
                "obw_hz": b.obw.map(|e| round_dp(e.width_hz(), 1)),
            })),
            "traces_csv": csv,
            "signals": signals,
        });
        let mut out = sink::open(&json, false, "evidence")?.out;
        serde_json::to_writer_pretty(&mut out, &v)?;
        writeln!(out)?;
        out.flush()?;
        Ok((csv, json))
    }

    /// `e`: writes the evidence into the files folder and says where (or what failed).
    pub(super) fn evidence_key(&mut self) {
        let msg = match self.write_evidence(&self.files_dir, OffsetDateTime::now_utc()) {
            Ok((csv, json)) => {
                format!("wrote {} and {}", self.shown_path(&csv), self.shown_path(&json))
            }
            Err(e) => format!("evidence not written: {e:#}"),
        };
        self.say(crate::messages::sanitize(&msg));
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::dsp::{Spectrum, Window, WindowKind};
    use crate::tui::app::tests::{settings, summary};
    use crate::tui::colour::Depth;
    use std::time::Instant;
    use time::format_description::well_known::Rfc3339;

    #[test]
    fn traces_and_table_are_written_under_the_utc_time() {
        let (source, settings) = (summary(), settings());
        let mut a = App::new(source, settings, Depth::Mono, None, Vec::new(), Instant::now());
        let mut power = vec![1.0; 1024];
        power[100] = 1e6;
        let w = Window::new(WindowKind::Hann, 1024);
        for _ in 0..10 {
            a.push_row(Spectrum::from_power_sum(&power, 1, 2.0, &w, 1.024e6, 100e6, 0, 1024));
        }
        a.measure();
        let dir = std::env::temp_dir().join(format!("bw-evidence-{}", std::process::id()));
        std::fs::create_dir_all(&dir).unwrap();
        let now = OffsetDateTime::parse("2031-04-17T06:30:02.5Z", &Rfc3339).unwrap();
        let (csv, json) = a.write_evidence(dir.to_str().unwrap(), now).unwrap();
        assert!(csv.ends_with("/bandwarden-20310417T063002Z.csv"), "{csv}");
        let text = std::fs::read_to_string(&csv).unwrap();
        let lines: Vec<&str> = text.lines().collect();
        assert_eq!(lines.len(), 1 + 1024);
        assert_eq!(lines[0], "freq_hz,current_dbfs,average_dbfs,peak_hold_dbfs,min_hold_dbfs");
        // FFT bin 100 is shifted to 612: 100.1 MHz, and reads what the traces hold there.
        let cur = a.traces.current().unwrap();
        let f: Vec<f64> = lines[613].split(',').map(|x| x.parse().unwrap()).collect();
        assert_eq!(f[0], 100.1e6);
        assert!((f[1] - db(cur.psd[612] * cur.rbw_hz)).abs() < 1e-3);
        assert!((f[2] - db(a.traces.average_psd()[612] * cur.rbw_hz)).abs() < 1e-3);
        let v: serde_json::Value =
            serde_json::from_str(&std::fs::read_to_string(&json).unwrap()).unwrap();
        assert_eq!(v["written"], "2031-04-17T06:30:02.500Z");
        assert_eq!(v["signals"].as_array().unwrap().len(), a.table.signals.len());
        // Rounded as the logs round: 0.1 Hz, 0.01 dB.
        let (freq, power) = (&v["signals"][0]["freq_hz"], &v["signals"][0]["power_dbfs"]);
        assert!((freq.as_f64().unwrap() - a.table.signals[0].freq_hz).abs() <= 0.05, "{freq}");
        assert!((power.as_f64().unwrap() - a.table.signals[0].power_dbfs).abs() <= 0.005);
        assert_eq!(power, &serde_json::json!(round_dp(a.table.signals[0].power_dbfs, 2)));
        let _ = std::fs::remove_dir_all(&dir);
        // A directory that does not exist is an error with the path, not a panic.
        let err = a.write_evidence("/nonexistent-bw-dir", now).unwrap_err();
        assert!(format!("{err:#}").contains("nonexistent-bw-dir"));
    }
}
