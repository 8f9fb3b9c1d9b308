//! Power in a band, occupied bandwidth and x-dB bandwidth (ITU-R SM.328).
//!
//! All three treat each PSD bin as a rectangle `bin_hz` wide centred on its frequency; a bin that
//! straddles a band edge contributes the fraction inside. Edges found inside a bin are placed by
//! linear interpolation, so results are not quantised to whole bins.

use crate::dsp::Spectrum;

/// A frequency interval in absolute hertz.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Edges {
    pub low_hz: f64,
    pub high_hz: f64,
}

impl Edges {
    pub fn width_hz(&self) -> f64 {
        self.high_hz - self.low_hz
    }
}

/// A run of consecutive PSD bins with their frequency geometry: `psd[j]` (FS²/Hz) is the density
/// of the bin centred on `center_hz + (first + j)·bin_hz`.
///
/// Measurements take this rather than a whole [`Spectrum`] so that a consumer holding only some
/// bins (the occupancy tracker keeps the summed PSD of each emission over its channel) measures
/// them in place, with no spectrum built around them.
#[derive(Clone, Copy, Debug)]
pub struct BinRun<'a> {
    pub psd: &'a [f64],
    /// Frequency of the spectrum's centre bin, hertz.
    pub center_hz: f64,
    /// Index of `psd[0]` counted from the centre bin (negative below it).
    pub first: i64,
    pub bin_hz: f64,
}

impl<'a> BinRun<'a> {
    /// Every bin of a spectrum.
    pub fn whole(spec: &'a Spectrum) -> BinRun<'a> {
        BinRun::part(spec, 0, &spec.psd)
    }

    /// `psd` laid over the spectrum's bins `from ..`, which it need not come from.
    pub fn part(spec: &Spectrum, from: usize, psd: &'a [f64]) -> BinRun<'a> {
        BinRun {
            psd,
            center_hz: spec.center_hz,
            first: from as i64 - (spec.fft_size / 2) as i64,
            bin_hz: spec.bin_hz(),
        }
    }

    /// The run's pieces inside `[lo, hi]`, lowest first: (piece low edge, piece high edge, power
    /// in FS²). Computed on the fly, so measuring allocates nothing.
    fn pieces(
        self,
        lo: f64,
        hi: f64,
    ) -> impl DoubleEndedIterator<Item = (f64, f64, f64)> + Clone + 'a {
        let b = self.bin_hz;
        let index = |f: f64| (f - self.center_hz) / b - self.first as f64;
        let first = (index(lo) - 0.5).floor().max(0.0) as i64;
        let last = (index(hi) + 0.5).ceil().min(self.psd.len() as f64 - 1.0) as i64;
        (first..=last).filter_map(move |j| {
            let c = self.center_hz + (self.first + j) as f64 * b;
            let (a, z) = ((c - b / 2.0).max(lo), (c + b / 2.0).min(hi));
            (z > a).then(|| (a, z, self.psd[j as usize] * (z - a)))
        })
    }
}

/// Channel power: the integral of the PSD over `[lo, hi]`, in FS² (10·log10 gives dBFS).
pub fn band_power(spec: &Spectrum, lo: f64, hi: f64) -> f64 {
    BinRun::whole(spec).pieces(lo, hi).map(|p| p.2).sum()
}

/// Occupied bandwidth per ITU-R SM.328: the band whose lower and upper outside parts each hold
/// `β/2` of the total power in `[lo, hi]`, with `β = 1 − percent/100`. `None` if the band holds
/// no power.
pub fn occupied_bandwidth(spec: &Spectrum, lo: f64, hi: f64, percent: f64) -> Option<Edges> {
    occupied_bandwidth_of(BinRun::whole(spec), lo, hi, percent)
}

/// [`occupied_bandwidth`] of a run of bins; bins of the band outside the run count as empty.
pub fn occupied_bandwidth_of(run: BinRun, lo: f64, hi: f64, percent: f64) -> Option<Edges> {
    let ps = run.pieces(lo, hi);
    let total: f64 = ps.clone().map(|p| p.2).sum();
    if total <= 0.0 {
        return None;
    }
    let outside = total * (1.0 - percent / 100.0) / 2.0;
    let edge = |iter: &mut dyn Iterator<Item = (f64, f64, f64)>, from_low: bool| {
        let mut cum = 0.0;
        for (a, z, p) in iter {
            if cum + p >= outside && p > 0.0 {
                let frac = (outside - cum) / p;
                return if from_low { a + frac * (z - a) } else { z - frac * (z - a) };
            }
            cum += p;
        }
        if from_low {
            hi
        } else {
            lo
        }
    };
    let low_hz = edge(&mut ps.clone(), true);
    let high_hz = edge(&mut ps.rev(), false);
    Some(Edges { low_hz, high_hz: high_hz.max(low_hz) })
}

/// x-dB bandwidth (ITU-R SM.328): the band outside which the PSD is everywhere at least `x_db`
/// below the highest PSD in `[lo, hi]`. Crossings are interpolated in dB between bin centres.
pub fn xdb_bandwidth(spec: &Spectrum, lo: f64, hi: f64, x_db: f64) -> Option<Edges> {
    let n = spec.fft_size;
    let first = spec.bin_of_freq(lo).ceil().max(0.0) as usize;
    let last = (spec.bin_of_freq(hi).floor() as usize).min(n - 1);
    if first > last {
        return None;
    }
    let range = &spec.psd[first..=last];
    let peak = range.iter().copied().fold(0.0f64, f64::max);
    if peak <= 0.0 {
        return None;
    }
    let thr = peak * 10f64.powf(-x_db / 10.0);
    let lo_i = first + range.iter().position(|&p| p >= thr)?;
    let hi_i = first + range.iter().rposition(|&p| p >= thr)?;
    let cross = |inside: usize, outside: usize| -> f64 {
        let (pi, po) = (spec.psd[inside].max(1e-300), spec.psd[outside].max(1e-300));
        let (li, lo_, lt) = (pi.log10(), po.log10(), thr.log10());
        let frac = if li > lo_ { ((li - lt) / (li - lo_)).clamp(0.0, 1.0) } else { 0.0 };
        spec.freq_of_bin(inside as f64 + frac * (outside as f64 - inside as f64))
    };
    let low_hz =
        if lo_i > first { cross(lo_i, lo_i - 1) } else { lo.max(spec.freq_of_bin(lo_i as f64)) };
    let high_hz =
        if hi_i < last { cross(hi_i, hi_i + 1) } else { hi.min(spec.freq_of_bin(hi_i as f64)) };
    Some(Edges { low_hz, high_hz })
}

#[cfg(test)]
pub(crate) mod tests {
    use super::*;
    use crate::dsp::WindowKind;

    /// A spectrum with a given PSD shape, rate 1 MHz, centre 100 MHz.
    pub(crate) fn spectrum_with(psd: Vec<f64>) -> Spectrum {
        let n = psd.len();
        let window = crate::dsp::Window::new(WindowKind::Rect, n);
        let geometry = std::sync::Arc::new(crate::dsp::Geometry::new(&window, 1e6, 100e6));
        Spectrum {
            geometry,
            psd,
            frames: 1,
            dof: 2.0,
            first_sample: 0,
            end_sample: n as u64,
            last_seen: None,
        }
    }

    #[test]
    fn flat_band_obw_is_the_percentage_of_its_width() {
        // A flat spectrum 200 bins wide: 99% OBW = 0.99 × width (SM.328 definition applied to a
        // uniform density: each outer 0.5% is 0.5% of the width).
        let mut psd = vec![0.0; 1024];
        for p in &mut psd[400..600] {
            *p = 1.0;
        }
        let s = spectrum_with(psd);
        let (lo, hi) = s.span_hz();
        let obw = occupied_bandwidth(&s, lo, hi, 99.0).unwrap();
        let width = 200.0 * s.bin_hz();
        assert!((obw.width_hz() - 0.99 * width).abs() < 1e-6 * width, "{:?}", obw);
        assert!((band_power(&s, lo, hi) - width).abs() < 1e-9 * width);
    }

    #[test]
    fn partial_bins_count_by_fraction() {
        let s = spectrum_with(vec![1.0; 100]);
        let b = s.bin_hz();
        let c = s.freq_of_bin(50.0);
        // A band 2.5 bins wide centred on a bin centre holds 2.5 bins' worth of power.
        assert!((band_power(&s, c - 1.25 * b, c + 1.25 * b) - 2.5 * b).abs() < 1e-9);
    }

    #[test]
    fn xdb_bandwidth_of_a_triangle() {
        // A triangle in dB: 0 dB at bin 500 falling 1 dB per bin; the 26 dB points are ±26 bins.
        let psd: Vec<f64> =
            (0..1024).map(|i| 10f64.powf(-((i as f64 - 500.0).abs()) / 10.0)).collect();
        let s = spectrum_with(psd);
        let (lo, hi) = s.span_hz();
        let e = xdb_bandwidth(&s, lo, hi, 26.0).unwrap();
        assert!((e.width_hz() - 52.0 * s.bin_hz()).abs() < 1e-6 * s.bin_hz(), "{e:?}");
    }
}
