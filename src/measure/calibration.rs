//! Levels in dBm: what turns a dBFS reading into power at the antenna port, and the noise
//! figure a terminated input implies.
//!
//! A receiver's samples say nothing absolute: 0 dBFS is whatever power drives its converter to
//! full scale, and that changes with its gain, frequency and temperature. A calibration is the
//! number of dB to add to a dBFS level to get dBm at the antenna port, measured by feeding a
//! generator tone of known power (`bandwarden calibrate --tone`). Several tones give an offset
//! per frequency, interpolated linearly in between and held flat beyond the outermost points.
//! A density in dBFS/Hz becomes dBm/Hz by the same offset (the offset is a gain; it does not
//! depend on the bandwidth measured).
//!
//! With the input terminated in a matched load at room temperature, the calibrated floor is the
//! receiver's own noise referred to its input, N0 (dBm/Hz). The available noise density of a
//! 290 K source is kT (−173.98 dBm/Hz), so the noise figure is NF = N0 − kT (Friis, Proc. IRE
//! 32(7), 1944: F = (N_out / G) / (k T0 B)). This is the "gain method" NF = N0,out − (−174) − G
//! with the gain G already inside the calibration offset (G = −offset: dBFS per dBm).

use crate::dsp::Spectrum;
use anyhow::{bail, Context, Result};
use serde::{Deserialize, Serialize};
use std::path::Path;

/// Boltzmann's constant, J/K (SI 2019, exact).
pub const BOLTZMANN_J_PER_K: f64 = 1.380_649e-23;

/// The standard noise temperature T0 of IEEE and Friis, K.
pub const T0_K: f64 = 290.0;

/// kT at `temperature_k` in dBm/Hz: 10·log10(k·T / 1 mW).
pub fn kt_dbm_per_hz(temperature_k: f64) -> f64 {
    10.0 * (BOLTZMANN_J_PER_K * temperature_k / 1e-3).log10()
}

/// The noise figure (dB) of a receiver whose input-referred noise density with a matched
/// 290 K termination is `n0_dbm_per_hz`: NF = N0 − kT0 (Friis 1944).
pub fn noise_figure_db(n0_dbm_per_hz: f64) -> f64 {
    n0_dbm_per_hz - kt_dbm_per_hz(T0_K)
}

/// One measured point: at `freq_hz`, `offset_db` turns dBFS into dBm.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct CalPoint {
    pub freq_hz: f64,
    pub offset_db: f64,
    /// The generator's level, dBm (what the point was measured from; informative).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub tone_dbm: Option<f64>,
    /// The tone as read, dBFS (informative).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub measured_dbfs: Option<f64>,
}

impl CalPoint {
    /// A point known only by its offset (typed, or in tests).
    pub fn new(freq_hz: f64, offset_db: f64) -> CalPoint {
        CalPoint { freq_hz, offset_db, tone_dbm: None, measured_dbfs: None }
    }
}

/// dBFS → dBm at the antenna port, per frequency.
#[derive(Clone, Debug, PartialEq)]
pub struct Calibration {
    /// Sorted by frequency, at least one.
    points: Vec<CalPoint>,
    /// Where it came from, for the start record and the screen: `--ref-offset -21.5` or
    /// `file cal.toml`.
    pub origin: String,
}

/// The file as written by `calibrate` (TOML).
#[derive(Serialize, Deserialize)]
struct CalFile {
    #[serde(rename = "point")]
    points: Vec<CalPoint>,
}

/// Largest offset accepted, dB: converters span about 150 dB of full scale between the
/// weakest and strongest receivers in use, so anything beyond is a typing error.
pub const MAX_OFFSET_DB: f64 = 200.0;

impl Calibration {
    /// One offset at every frequency (`--ref-offset`).
    pub fn flat(offset_db: f64) -> Result<Calibration> {
        check_offset(offset_db, "--ref-offset")?;
        Ok(Calibration {
            points: vec![CalPoint::new(0.0, offset_db)],
            origin: format!("--ref-offset {offset_db}"),
        })
    }

    /// The flat offset a stream's own reference level implies (see [`from_stream`]).
    pub fn reference_level(level_dbm: f64) -> Result<Calibration> {
        check_offset(level_dbm, "the stream's reference level")?;
        Ok(Calibration {
            points: vec![CalPoint::new(0.0, level_dbm)],
            origin: "vita49 reference level".to_string(),
        })
    }

    /// From measured points (any order; one per frequency).
    pub fn from_points(mut points: Vec<CalPoint>, origin: String) -> Result<Calibration> {
        if points.is_empty() {
            bail!("{origin}: a calibration needs at least one point");
        }
        for p in &points {
            if !p.freq_hz.is_finite() {
                bail!("{origin}: a point's freq_hz is not a number; measure it again");
            }
            check_offset(p.offset_db, &origin)?;
        }
        points.sort_by(|a, b| a.freq_hz.total_cmp(&b.freq_hz));
        if let Some(w) = points.windows(2).find(|w| w[0].freq_hz == w[1].freq_hz) {
            bail!("{origin}: two points at {} Hz; keep one tone per frequency", w[0].freq_hz);
        }
        Ok(Calibration { points, origin })
    }

    /// Reads a calibration file written by `bandwarden calibrate`.
    pub fn load(path: &Path) -> Result<Calibration> {
        let shown = crate::messages::sanitize(&path.display().to_string());
        let text = std::fs::read_to_string(path).with_context(|| {
            format!("cannot read the calibration file '{shown}'; check --calibration")
        })?;
        let file: CalFile = toml::from_str(&text).map_err(|e| {
            anyhow::anyhow!(
                "the calibration file '{shown}' is not one `bandwarden calibrate` writes: {}",
                e.message()
            )
        })?;
        Calibration::from_points(file.points, format!("file {shown}"))
    }

    /// The file's text (TOML), with a comment saying what the numbers mean.
    pub fn to_toml(&self) -> String {
        let file = CalFile { points: self.points.clone() };
        format!(
            "# bandwarden calibration: add offset_db to a level in dBFS to get dBm at the antenna\n\
             # port (linear in between points, flat beyond). Valid for the receiver, gain and\n\
             # sample rate it was measured with.\n{}",
            toml::to_string(&file).expect("points are plain numbers")
        )
    }

    pub fn points(&self) -> &[CalPoint] {
        &self.points
    }

    /// dB to add to a dBFS level (or dBFS/Hz density) measured at `freq_hz`.
    pub fn offset_db(&self, freq_hz: f64) -> f64 {
        let p = &self.points;
        let first = &p[0];
        let last = &p[p.len() - 1];
        if p.len() == 1 || !freq_hz.is_finite() || freq_hz <= first.freq_hz {
            return first.offset_db;
        }
        if freq_hz >= last.freq_hz {
            return last.offset_db;
        }
        let i = p.partition_point(|q| q.freq_hz <= freq_hz);
        let (a, b) = (&p[i - 1], &p[i]);
        let t = (freq_hz - a.freq_hz) / (b.freq_hz - a.freq_hz);
        a.offset_db + t * (b.offset_db - a.offset_db)
    }
}

/// The run's calibration: the one the flags give (`--calibration`, `--ref-offset`) or else the
/// stream's own reference level, with a note for the user saying which and why.
///
/// VITA-49.0 §7.1.5.9 (from memory): the Reference Level field is the power in dBm at the
/// stream's Reference Point that corresponds to a full-scale sample (0 dBFS), so dBm = dBFS +
/// reference level, the same flat offset as `--ref-offset`. The Gain field (§7.1.5.10) gives
/// the gain of the stages between the reference point and the converter; since the reference
/// level already refers to the reference point, that gain is inside it and is not added again
/// (it is only named in the start note). A calibration the user measured or typed knows the
/// actual antenna port, so the flags win over the stream.
pub fn from_stream(
    given: Option<Calibration>,
    stream_level_dbm: Option<f64>,
) -> Result<(Option<Calibration>, Option<String>)> {
    match (given, stream_level_dbm) {
        (Some(c), Some(level)) => {
            let note = format!(
                "levels in dBm from {}, not from the stream's reference level of {level:.2} dBm",
                c.origin
            );
            Ok((Some(c), Some(note)))
        }
        (None, Some(level)) => {
            let cal = Calibration::reference_level(level)?;
            let note = format!(
                "levels in dBm from the stream's VITA 49 reference level ({level:.2} dBm at 0 dBFS); --ref-offset or --calibration overrides it"
            );
            Ok((Some(cal), Some(note)))
        }
        (given, None) => Ok((given, None)),
    }
}

fn check_offset(offset_db: f64, what: &str) -> Result<()> {
    if !(offset_db.is_finite() && offset_db.abs() <= MAX_OFFSET_DB) {
        bail!("{what}: an offset of {offset_db} dB is not a calibration; it must be a number of dB within ±{MAX_OFFSET_DB}");
    }
    Ok(())
}

/// A tone's power (dBFS) read from an averaged spectrum: the highest bin within `search_hz` of
/// `freq_hz`, as a sinusoid's power (its PSD times the window's ENBW). With a flat-top window
/// the scalloping loss is below 0.01 dB (Heinzel, Rüdiger & Schilling 2002, table for HFT/SFT
/// windows, from memory), so no interpolation between bins is needed.
pub fn tone_dbfs(spec: &Spectrum, freq_hz: f64, search_hz: f64) -> Option<f64> {
    let lo = spec.bin_of_freq(freq_hz - search_hz).ceil().max(0.0) as usize;
    let hi = (spec.bin_of_freq(freq_hz + search_hz).floor() as usize).min(spec.fft_size - 1);
    if spec.bin_of_freq(freq_hz + search_hz) < 0.0 || lo > hi {
        return None;
    }
    let best = (lo..=hi).max_by(|&a, &b| spec.psd[a].total_cmp(&spec.psd[b]))?;
    let p = spec.tone_power(best);
    (p > 0.0).then(|| 10.0 * p.log10())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn kt_at_290_kelvin_is_the_textbook_value() {
        // kT0 = −173.98 dBm/Hz, commonly rounded to −174 dBm/Hz (Friis 1944; any receiver text).
        assert!((kt_dbm_per_hz(290.0) - (-173.98)).abs() < 0.005, "{}", kt_dbm_per_hz(290.0));
        // A 3 dB NF receiver has an input-referred floor of −171 dBm/Hz (textbook arithmetic).
        assert!((noise_figure_db(-170.98) - 3.0).abs() < 0.005);
    }

    #[test]
    fn offsets_interpolate_between_points_and_hold_beyond() {
        let pt = CalPoint::new;
        let c =
            Calibration::from_points(vec![pt(440e6, -20.0), pt(430e6, -24.0)], "t".into()).unwrap();
        assert_eq!(c.offset_db(420e6), -24.0);
        assert_eq!(c.offset_db(450e6), -20.0);
        assert!((c.offset_db(432.5e6) - (-23.0)).abs() < 1e-9);
        let back = Calibration::load_str(&c.to_toml()).unwrap();
        assert_eq!(back.points(), c.points());
        assert!(Calibration::from_points(vec![pt(1.0, 1.0), pt(1.0, 2.0)], "t".into()).is_err());
        assert!(Calibration::flat(f64::NAN).is_err());
        assert!(Calibration::flat(250.0).is_err());
    }

    #[test]
    fn a_stream_reference_level_calibrates_unless_a_flag_is_given() {
        // VITA-49.0 §7.1.5.9 (from memory): dBm = dBFS + reference level.
        let (c, note) = from_stream(None, Some(-20.0)).unwrap();
        let c = c.unwrap();
        assert_eq!((c.offset_db(433.92e6), c.origin.as_str()), (-20.0, "vita49 reference level"));
        assert!(note.unwrap().contains("-20.00 dBm"));
        let (c, note) = from_stream(Some(Calibration::flat(-31.0).unwrap()), Some(-20.0)).unwrap();
        assert_eq!(c.unwrap().offset_db(0.0), -31.0);
        assert!(note.unwrap().contains("not from the stream's reference level"));
        assert_eq!(from_stream(None, None).unwrap(), (None, None));
        assert!(from_stream(None, Some(f64::NAN)).is_err());
    }

    impl Calibration {
        fn load_str(text: &str) -> Result<Calibration> {
            let file: CalFile = toml::from_str(text)?;
            Calibration::from_points(file.points, "t".into())
        }
    }
}
