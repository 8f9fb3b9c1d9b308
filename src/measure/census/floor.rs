//! The noise floor of the census per part of the span, so that a later census can tell where
//! the floor rose (interference, a desensitised receiver) and not only that it did.
//!
//! The span is cut into [`FLOOR_PARTS`] equal parts. In each, the floor is the median of the
//! whole input's mean PSD over the bins no emitter's footprint touches, divided by the median of
//! a unit-mean Gamma distribution with the mean's degrees of freedom (the median of an averaged
//! noise bin lies below its mean; with ν degrees of freedom in all, the mean PSD of noise alone
//! is Gamma with shape ν/2, see [`crate::measure::stats`]). A part with fewer than a quarter of
//! its bins free has no figure: what lies under an emitter cannot be seen. The span's floor is
//! the median of the parts' figures, so a rise in a few parts does not move it.

use crate::measure::stats::gamma_quantile_unit_mean;
use crate::units::db;
use serde::{Deserialize, Serialize};

/// Parts of the span measured for the floor.
pub const FLOOR_PARTS: usize = 16;

/// Share of a part's bins that must be free of emitters for it to have a floor figure.
pub const MIN_FREE_SHARE: f64 = 0.25;

/// One part of the span.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct FloorPart {
    pub start_hz: f64,
    pub end_hz: f64,
    /// `None` when emitters cover most of it.
    #[serde(default)]
    pub dbfs_per_hz: Option<f64>,
}

/// The floor over the span and per part.
#[derive(Clone, Debug, Default, PartialEq, Serialize, Deserialize)]
pub struct FloorProfile {
    /// Median of the parts' figures.
    #[serde(default)]
    pub span_dbfs_per_hz: Option<f64>,
    #[serde(default)]
    pub parts: Vec<FloorPart>,
}

/// The span's cut and what the mean PSD was averaged from.
pub struct FloorInput<'a> {
    /// Mean PSD of the whole input, FS²/Hz, in fftshift order.
    pub mean_psd: &'a [f64],
    /// Bins some emitter's footprint covers.
    pub busy: &'a [bool],
    pub center_hz: f64,
    pub bin_hz: f64,
    /// Degrees of freedom of the mean PSD of one bin (the rows' summed).
    pub dof: f64,
}

/// The floor per part (see the module's doc).
pub fn floor_profile(f: &FloorInput) -> FloorProfile {
    let n = f.mean_psd.len();
    if n < FLOOR_PARTS || f.busy.len() != n {
        return FloorProfile::default();
    }
    let bias = gamma_quantile_unit_mean(0.5, (f.dof / 2.0).max(0.5));
    let freq = |i: f64| f.center_hz + (i - (n / 2) as f64) * f.bin_hz;
    let mut free: Vec<f64> = Vec::with_capacity(n / FLOOR_PARTS + 1);
    let parts: Vec<FloorPart> = (0..FLOOR_PARTS)
        .map(|k| {
            let (lo, hi) = (k * n / FLOOR_PARTS, (k + 1) * n / FLOOR_PARTS);
            free.clear();
            free.extend((lo..hi).filter(|&i| !f.busy[i]).map(|i| f.mean_psd[i]));
            let enough = free.len() as f64 >= MIN_FREE_SHARE * (hi - lo) as f64 && !free.is_empty();
            let dbfs_per_hz = enough.then(|| {
                free.sort_by(f64::total_cmp);
                db(free[free.len() / 2] / bias)
            });
            FloorPart {
                start_hz: freq(lo as f64 - 0.5),
                end_hz: freq(hi as f64 - 0.5),
                dbfs_per_hz,
            }
        })
        .collect();
    let mut values: Vec<f64> = parts.iter().filter_map(|p| p.dbfs_per_hz).collect();
    values.sort_by(f64::total_cmp);
    let span_dbfs_per_hz = (!values.is_empty()).then(|| values[values.len() / 2]);
    FloorProfile { span_dbfs_per_hz, parts }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::testkit::Rng;

    #[test]
    fn parts_read_their_own_floor_and_skip_emitters() {
        // Noise of density 1e-9 averaged over 200 rows of 4 dof each (Gamma, shape 400), one
        // part raised four times (6.02 dB), one part mostly covered by an emitter: each part
        // reads its own density to 0.1 dB (the median of 256 bins of Gamma(400) has a standard
        // error near 1.25·σ/√256 = 0.4 %, common practice for a sample median).
        let (n, dof) = (4096, 800.0);
        let mut rng = Rng::new(7);
        let mut psd: Vec<f64> = (0..n)
            .map(|_| (0..400).map(|_| rng.exponential(1.0)).sum::<f64>() / 400.0 * 1e-9)
            .collect();
        let part = n / FLOOR_PARTS;
        psd[3 * part..4 * part].iter_mut().for_each(|p| *p *= 4.0);
        let mut busy = vec![false; n];
        busy[8 * part..8 * part + part * 9 / 10].iter_mut().for_each(|b| *b = true);
        psd[8 * part..8 * part + part * 9 / 10].iter_mut().for_each(|p| *p *= 1e3);
        let f = floor_profile(&FloorInput {
            mean_psd: &psd,
            busy: &busy,
            center_hz: 1e6,
            bin_hz: 10.0,
            dof,
        });
        assert_eq!(f.parts.len(), FLOOR_PARTS);
        for (k, p) in f.parts.iter().enumerate() {
            match k {
                3 => assert!((p.dbfs_per_hz.unwrap() - (-90.0 + 6.02)).abs() < 0.1, "{p:?}"),
                8 => assert_eq!(p.dbfs_per_hz, None),
                _ => assert!((p.dbfs_per_hz.unwrap() + 90.0).abs() < 0.1, "{k} {p:?}"),
            }
        }
        assert!((f.span_dbfs_per_hz.unwrap() + 90.0).abs() < 0.1);
        // Parts tile the span: the first starts half a bin below bin 0.
        assert_eq!(f.parts[0].start_hz, 1e6 - 2048.5 * 10.0);
        assert_eq!(f.parts[0].end_hz, f.parts[1].start_hz);
    }
}
