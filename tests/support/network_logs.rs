//! Occupancy logs of a made-up monitoring network (the Wrenhollow Ridge sites), as `log` writes
//! them: a start record, the plan's channel records, one interval per channel per minute, the
//! emissions, now and then an interval whose input was lost and a `dropped` record, and a stop
//! record. Seeded, so every run writes the same bytes. Shared by tests/store_sqlite.rs and
//! examples/network_logs.rs (the generator of scripts/bench-report).

use std::io::{self, Write};
use time::format_description::FormatItem;
use time::macros::format_description;
use time::OffsetDateTime;

const STAMP: &[FormatItem<'static>] =
    format_description!("[year]-[month]-[day]T[hour]:[minute]:[second].[subsecond digits:3]Z");

/// One run of `log` at one site.
pub struct RunSpec {
    pub site: String,
    pub run: String,
    pub channels: usize,
    /// The run's first sample, seconds since the epoch (a whole minute).
    pub start_epoch: i64,
    pub minutes: u64,
    pub seed: u64,
    /// Write no clock times (`time_source` none), as a log of a file without a start time.
    pub no_clock: bool,
}

struct Rng(u64);

impl Rng {
    /// xorshift64*: enough for made-up data.
    fn next(&mut self) -> f64 {
        self.0 ^= self.0 >> 12;
        self.0 ^= self.0 << 25;
        self.0 ^= self.0 >> 27;
        (self.0.wrapping_mul(0x2545_F491_4F6C_DD1D) >> 11) as f64 / (1u64 << 53) as f64
    }
}

fn stamp(epoch: f64) -> String {
    let t = OffsetDateTime::from_unix_timestamp_nanos((epoch * 1e9).round() as i128).unwrap();
    t.format(STAMP).unwrap()
}

fn round(x: f64, decimals: i32) -> f64 {
    let k = 10f64.powi(decimals);
    (x * k).round() / k
}

/// Writes the run's log; returns the records written.
pub fn write_run(out: &mut impl Write, spec: &RunSpec) -> io::Result<u64> {
    let mut rng = Rng(spec.seed.wrapping_mul(0x9E37_79B9_7F4A_7C15) | 1);
    let mut seq = 0u64;
    let clock = |t: f64| -> String {
        if spec.no_clock {
            "null".into()
        } else {
            format!("\"{}\"", stamp(spec.start_epoch as f64 + t))
        }
    };
    let mut line = |out: &mut dyn Write, body: String| -> io::Result<()> {
        writeln!(out, "{{{body},\"run\":\"{}\",\"seq\":{seq}}}", spec.run)?;
        seq += 1;
        Ok(())
    };
    line(
        out,
        format!(
            "\"kind\":\"start\",\"version\":\"0.1.0\",\"site\":\"{}\",\"source\":\"rtl-tcp\",\
             \"sample_rate_hz\":1000000.0,\"center_hz\":433500000.0,\"fft_size\":4096,\
             \"window\":\"hann\",\"overlap\":0.5,\"rbw_hz\":366.211,\"dwell_s\":0.008192,\
             \"frames_per_sample\":4,\"interval_s\":60.0,\"hang_s\":0.032768,\"threshold_db\":10.0,\
             \"obw_percent\":99.0,\"floor_memory_s\":2.0,\"floor_smoothing_s\":0.5,\"t_start_s\":0.0,\
             \"start\":{},\"time_source\":\"{}\"",
            spec.site,
            clock(0.0),
            if spec.no_clock { "none" } else { "option" }
        ),
    )?;
    let centre = |c: usize| 433_050_000.0 + 25_000.0 * c as f64;
    for c in 0..spec.channels {
        line(
            out,
            format!(
                "\"kind\":\"channel\",\"channel\":\"ch{c}\",\"center_hz\":{:.1},\"width_hz\":12500.0,\"threshold_db\":10.0",
                centre(c)
            ),
        )?;
    }
    let samples = 7324u64; // 60 s of 8.192 ms measurement samples
    let floors: Vec<f64> = (0..spec.channels).map(|_| -150.0 + 4.0 * rng.next()).collect();
    for m in 0..spec.minutes {
        let (a, b) = (60.0 * m as f64, 60.0 * (m + 1) as f64);
        let hour = ((spec.start_epoch as f64 + a) / 3600.0).floor() as i64 % 24;
        let busy = if (7..19).contains(&hour) { 1.0 } else { 0.3 };
        for (c, floor) in floors.iter().enumerate() {
            let lost = rng.next() < 0.004;
            if lost {
                line(
                    out,
                    format!(
                        "\"kind\":\"interval\",\"channel\":\"ch{c}\",\"center_hz\":{:.1},\"width_hz\":12500.0,\
                         \"t_start_s\":{a:.6},\"t_end_s\":{b:.6},\"start\":{},\"end\":{},\"occupancy_pct\":null,\
                         \"mean_dbfs\":null,\"peak_dbfs\":null,\"noise_floor_dbfs_per_hz\":null,\"samples\":0,\
                         \"occupied_samples\":0.0,\"dropped_samples\":60000000,\"partial\":false,\
                         \"channel_floor_dbfs_per_hz\":null",
                        centre(c),
                        clock(a),
                        clock(b)
                    ),
                )?;
                continue;
            }
            let dropped = if rng.next() < 0.01 { (rng.next() * 2e6) as u64 } else { 0 };
            let pct = (busy * (c as f64 + 1.0) * 6.0 * rng.next()).min(100.0);
            let occupied = round(samples as f64 * pct / 100.0, 3);
            let noise = round(floor + 0.6 * rng.next(), 2);
            let mean = round(-95.0 + 30.0 * rng.next() * pct / 100.0, 2);
            let peak = round(mean + 3.0 + 10.0 * rng.next(), 2);
            line(
                out,
                format!(
                    "\"kind\":\"interval\",\"channel\":\"ch{c}\",\"center_hz\":{:.1},\"width_hz\":12500.0,\
                     \"t_start_s\":{a:.6},\"t_end_s\":{b:.6},\"start\":{},\"end\":{},\"occupancy_pct\":{:.3},\
                     \"mean_dbfs\":{mean},\"peak_dbfs\":{peak},\"noise_floor_dbfs_per_hz\":{noise},\
                     \"samples\":{samples},\"occupied_samples\":{occupied},\"dropped_samples\":{dropped},\
                     \"partial\":false,\"channel_floor_dbfs_per_hz\":{}",
                    centre(c),
                    clock(a),
                    clock(b),
                    100.0 * occupied / samples as f64,
                    round(noise - 0.3, 2)
                ),
            )?;
            if pct > 20.0 {
                let d = round(0.5 + 20.0 * rng.next(), 6);
                let t0 = a + (60.0 - d) * rng.next();
                line(
                    out,
                    format!(
                        "\"kind\":\"emission\",\"channel\":\"ch{c}\",\"center_hz\":{:.1},\"t_start_s\":{t0:.6},\
                         \"t_end_s\":{:.6},\"start\":{},\"end\":{},\"duration_s\":{d},\"peak_dbfs\":{peak},\
                         \"mean_dbfs\":{mean},\"obw_hz\":{:.1},\"samples\":{},\"partial\":false",
                        centre(c),
                        t0 + d,
                        clock(t0),
                        clock(t0 + d),
                        round(4000.0 + 4000.0 * rng.next(), 1),
                        (d / 0.008192) as u64
                    ),
                )?;
            }
        }
        if rng.next() < 0.002 {
            line(
                out,
                format!(
                    "\"kind\":\"dropped\",\"t_start_s\":{:.6},\"t_end_s\":{:.6},\"start\":{},\"end\":{},\
                     \"dropped_samples\":500000,\"gaps\":1,\"cause\":\"behind\"",
                    a + 10.0,
                    a + 10.5,
                    clock(a + 10.0),
                    clock(a + 10.5)
                ),
            )?;
        }
    }
    let end = 60.0 * spec.minutes as f64;
    line(
        out,
        format!(
            "\"kind\":\"stop\",\"t_end_s\":{end:.6},\"end\":{},\"reason\":\"terminated\",\
             \"iq_samples\":{},\"dropped_samples\":0",
            clock(end),
            (end * 1e6) as u64
        ),
    )?;
    Ok(seq)
}
