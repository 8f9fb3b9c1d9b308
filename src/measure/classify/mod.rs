//! What kind of emission is this? A modulation family (`cw`, `am`, `fm`, `fsk`, `psk`, `qam`,
//! `ofdm`, `pulsed`, `noise`, or `unknown`), its parameters and its ITU emission designator,
//! from one emission's raw samples, by published closed-form features (no trained model).
//!
//! Steps ([`classify`]):
//! 1. channelise ([`baseband`]): shift the emission to 0 Hz, low-pass it to 1.2–1.5 × its OBW
//!    and decimate to 4 × OBW (one forward FFT of the input, shared by the emissions classified
//!    from the same samples ([`classify_shared`]), and a short inverse one of the band's bins;
//!    at most [`MAX_INPUT_SAMPLES`] samples in and [`MAX_BASEBAND_SAMPLES`] out, which bounds
//!    the cost); the in-band noise power follows from
//!    the caller's noise PSD or from the spectrum outside the emission;
//! 2. decide down a hierarchy, each step on features that are closed-form and noise-corrected:
//!    - pulsed: on/off envelope, on under half the time ([`pulse`]);
//!    - constant envelope (normalised power variance near 0, [`cumulants::power_variance`]):
//!      cw (nearly all power in one spectral line), fsk (a symbol-rate line in the frequency's
//!      derivative and the frequency clustered on M equally spaced tones, [`fsk`]), else fm;
//!    - amplitude varying: am (a carrier line holding most of the power), ofdm (the cyclic
//!      prefix's correlation peak, [`ofdm`]), psk / qam (a symbol-rate line in |x|², then the
//!      Swami & Sadler cumulants at one sample per symbol after matched filtering and carrier
//!      offset removal, [`cumulants`], [`rate`]), noise (Gaussian envelope, no structure);
//!    - anything else, or features that sit between classes: `unknown`, with a note.
//!
//! A class is a guess from signal statistics, not the identification of a station or service.
//! Nothing here demodulates content. Limits: overlapping emitters in one band look like one
//! emission with mixed features; bursts shorter than the evidence asked for (see the notes) are
//! `unknown`; fading changes the envelope and can push constant-envelope emissions towards
//! the amplitude-varying classes.

mod analog;
mod baseband;
pub mod cumulants;
mod designator;
mod features;
mod fsk;
mod keyed;
mod ofdm;
mod pulse;
mod rate;
mod spectrum;

pub use baseband::{Forward, MAX_BASEBAND_SAMPLES, MAX_INPUT_SAMPLES};
pub use designator::{bandwidth_code, class_symbols, designator};
pub use features::EnvelopeFeatures;

use num_complex::Complex32;
use spectrum::above;

/// One emission's raw samples, as taken from the input (not yet shifted to baseband).
pub struct EmissionIq<'a> {
    pub samples: &'a [Complex32],
    /// Sample rate of `samples`, Hz.
    pub rate_hz: f64,
    /// Centre of the emission relative to the centre of `samples`' band, Hz (−rate/2..rate/2).
    pub offset_hz: f64,
    /// Its measured 99 % occupied bandwidth, Hz (from the spectrum: census / occupancy / peaks).
    pub obw_hz: f64,
    /// Noise power spectral density in the same units as the samples (|x|² per Hz, i.e. mean
    /// |x|² of noise-only samples divided by rate_hz), when the caller knows it (the tracked
    /// noise floor); None: the classifier estimates it.
    pub noise_psd: Option<f64>,
}

/// Modulation family (trade terms).
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash, serde::Serialize, serde::Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum Class {
    Cw,
    Am,
    Fm,
    Fsk,
    Psk,
    Qam,
    Ofdm,
    Pulsed,
    Noise,
    Unknown,
}

impl Class {
    pub const ALL: [Class; 10] = [
        Class::Cw,
        Class::Am,
        Class::Fm,
        Class::Fsk,
        Class::Psk,
        Class::Qam,
        Class::Ofdm,
        Class::Pulsed,
        Class::Noise,
        Class::Unknown,
    ];

    /// "cw", "am", …, as in JSON and logs.
    pub fn as_str(self) -> &'static str {
        match self {
            Class::Cw => "cw",
            Class::Am => "am",
            Class::Fm => "fm",
            Class::Fsk => "fsk",
            Class::Psk => "psk",
            Class::Qam => "qam",
            Class::Ofdm => "ofdm",
            Class::Pulsed => "pulsed",
            Class::Noise => "noise",
            Class::Unknown => "unknown",
        }
    }
}

impl std::fmt::Display for Class {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(self.as_str())
    }
}

/// Parameters that apply to the class; the others are None. serde skips None fields.
#[derive(Clone, Debug, Default, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct ClassParams {
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub symbol_rate_hz: Option<f64>,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub tones: Option<u32>,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub shift_hz: Option<f64>,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub psk_order: Option<u32>,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub deviation_hz: Option<f64>,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub mod_depth: Option<f64>,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub subcarrier_spacing_hz: Option<f64>,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub pulse_width_s: Option<f64>,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub pri_s: Option<f64>,
}

/// The classifier's answer for one emission.
#[derive(Clone, Debug, PartialEq)]
pub struct Classification {
    pub class: Class,
    /// 0..1
    pub confidence: f64,
    pub params: ClassParams,
    /// ITU RR Appendix 1 designator: bandwidth code of obw_hz + first symbol (+ 2nd/3rd where
    /// the class determines them), e.g. "16K0F", "2K40A", "12K5G".
    pub designator: String,
    /// When class is Unknown for lack of evidence: what it needed, in words
    /// (e.g. "needs 0.4 s or 200 symbols; had 0.05 s").
    pub note: Option<String>,
}

/// The features behind a classification, for reports and tuning (values are NaN where the step
/// that computes them was not reached).
#[derive(Clone, Debug, Default, PartialEq)]
pub struct Trace {
    /// Baseband rate and length after channelising.
    pub baseband_rate_hz: f64,
    pub baseband_samples: usize,
    /// Estimated SNR in the analysed band, dB.
    pub snr_db: f64,
    /// Whether the noise PSD came from the caller (else it was estimated off the emission).
    pub noise_given: bool,
    /// Normalised power variance with the noise taken off (0 constant envelope, 1 Gaussian).
    pub power_variance: f64,
    /// Share of the power in the strongest spectral line.
    pub carrier_fraction: f64,
    pub envelope: EnvelopeFeatures,
    /// Cumulants at one sample per symbol, when that step was reached.
    pub cumulants: Option<cumulants::Cumulants>,
    /// Shares of the z², z⁴, z⁸ lines at one sample per symbol.
    pub power_lines: [f64; 3],
    /// Strength and prominence of the cyclic-prefix correlation, when searched.
    pub cp: Option<(f64, f64)>,
    /// Prominence of the |x|² symbol-rate line, when found.
    pub envelope_line: Option<f64>,
    /// FSK separation, dwell and sharpness, when found.
    pub fsk: Option<(f64, f64, f64)>,
}

/// Fewest baseband samples (at 4 × OBW) worth analysing.
pub const MIN_BASEBAND: usize = 128;
/// Fewest symbols for the cumulants of a PSK or QAM emission: their estimates scatter by about
/// 0.6/√n, 0.04 at 200, a tenth of the gap between QPSK and 16QAM.
pub const MIN_SYMBOLS: usize = 200;
/// Fewest symbols to count FSK tones (eight per cluster for 8 tones).
pub const MIN_FSK_SYMBOLS: usize = 64;
/// Normalised power variance below which the envelope is taken as constant. Constant-envelope
/// emissions after the channel filter read 0.00–0.05; the least varying linear modulation here,
/// QPSK with root-raised-cosine shaping, reads about 0.2 (C42 = −0.8 at four samples per
/// symbol, design notes §7, gives 1 − 0.8 = 0.2); tone AM of depth 0.25 reads 0.12.
pub const CONSTANT_ENVELOPE: f64 = 0.12;
/// Share of power in one line above which a constant envelope is an unmodulated carrier (a
/// frequency modulation keeps J0(β)² in its carrier, under 0.9 for β > 0.47, Abramowitz &
/// Stegun table 9.1).
pub const CARRIER_ONLY: f64 = 0.9;
/// Share of power in the carrier line above which an amplitude-varying emission is AM (tone AM
/// of depth 1 keeps 2/3 there; suppressed-carrier emissions keep next to nothing).
pub const AM_CARRIER: f64 = 0.5;
/// Normalised power variance from which a carrier holding over [`CARRIER_ONLY`] of the power
/// is AM rather than CW: tone AM of depth m gives about 2m² (0.045 at m = 0.15); an
/// unmodulated carrier reads 0.003 or less at 20 dB SNR and below 0 at 10 dB (the noise
/// correction), angle modulations 0.02 or less in the scenes of tests/classify.rs.
pub const AM_MIN_VARIANCE: f64 = 0.04;

/// Classify one emission. Never panics (empty, NaN, tiny input → Unknown with a note).
/// Cost bounded: it uses at most [`MAX_INPUT_SAMPLES`] input samples and
/// [`MAX_BASEBAND_SAMPLES`] after decimation.
pub fn classify(input: &EmissionIq) -> Classification {
    classify_with_trace(input).0
}

/// As [`classify`], reading the input's forward transform from `forward`, which every emission
/// classified from the same `samples` (and rate) may share: the first to need it makes it (see
/// [`Forward`]). The answer is the one [`classify`] gives.
pub fn classify_shared(input: &EmissionIq, forward: &Forward) -> Classification {
    traced(input, forward).0
}

/// As [`classify`], with the features it decided on.
pub fn classify_with_trace(input: &EmissionIq) -> (Classification, Trace) {
    traced(input, &Forward::default())
}

fn traced(input: &EmissionIq, forward: &Forward) -> (Classification, Trace) {
    let mut trace = Trace {
        snr_db: f64::NAN,
        power_variance: f64::NAN,
        carrier_fraction: f64::NAN,
        power_lines: [f64::NAN; 3],
        ..Trace::default()
    };
    let d = decide(input, forward, &mut trace);
    let class = d.class;
    (
        Classification {
            class,
            confidence: if d.confidence.is_finite() { d.confidence.clamp(0.0, 1.0) } else { 0.0 },
            params: d.params,
            designator: designator(input.obw_hz, class),
            note: d.note,
        },
        trace,
    )
}

struct Decision {
    class: Class,
    confidence: f64,
    params: ClassParams,
    note: Option<String>,
}

fn unknown(note: impl Into<String>) -> Decision {
    Decision {
        class: Class::Unknown,
        confidence: 0.0,
        params: ClassParams::default(),
        note: Some(note.into()),
    }
}

fn found(class: Class, confidence: f64, params: ClassParams) -> Decision {
    Decision { class, confidence, params, note: None }
}

/// 0.5 at `value == edge`, towards 1 as `value` moves `scale` or more past it in the class's
/// direction (positive scale: above; negative: below).
fn margin(value: f64, edge: f64, scale: f64) -> f64 {
    (0.5 + 0.5 * ((value - edge) / scale).tanh()).clamp(0.0, 1.0)
}

fn seconds(s: f64) -> String {
    if s >= 0.1 {
        format!("{s:.2} s")
    } else {
        format!("{:.1} ms", s * 1e3)
    }
}

fn decide(input: &EmissionIq, forward: &Forward, trace: &mut Trace) -> Decision {
    let mut bb = match baseband::channelise(input, forward) {
        Ok(bb) => bb,
        Err(e) => return unknown(format!("cannot analyse: {e}")),
    };
    trace.baseband_rate_hz = bb.rate_hz;
    trace.baseband_samples = bb.x.len();
    trace.noise_given = bb.noise_given;
    if bb.x.len() < MIN_BASEBAND {
        let need = MIN_BASEBAND as f64 / bb.rate_hz;
        return unknown(format!(
            "needs {} ({MIN_BASEBAND} samples at 4 × OBW); had {}",
            seconds(need),
            seconds(bb.seconds)
        ));
    }
    let total = bb.x.iter().map(|v| v.norm_sqr()).sum::<f64>() / bb.x.len() as f64;
    if !above(total, 0.0) {
        return unknown("all samples are zero");
    }
    let noise = bb.noise_power;
    let signal = total - noise;
    let snr = signal / noise;
    trace.snr_db = 10.0 * snr.log10();
    if !above(signal, 0.0) || snr < 0.5 {
        return unknown(format!(
            "no emission stands out of the noise in its band ({:.1} dB SNR; needs 3 dB or more)",
            trace.snr_db
        ));
    }

    if let Some(p) = pulse::find(&bb.x, bb.rate_hz, noise) {
        let conf = if p.pri_s.is_some() { 0.9 } else { 0.6 };
        return found(
            Class::Pulsed,
            conf * margin(-p.off_ratio.log10(), 1.5, 0.5),
            ClassParams {
                pulse_width_s: Some(p.width_s),
                pri_s: p.pri_s,
                ..ClassParams::default()
            },
        );
    }
    // Not a pulse train: a keyed emission is analysed over its longest keyed-on stretch only.
    if let Some((a, b)) = keyed::on_stretch(&bb.x, noise) {
        let had = bb.seconds;
        bb.keep(a, b);
        trace.baseband_samples = bb.x.len();
        if bb.x.len() < MIN_BASEBAND {
            return unknown(format!(
                "keyed: on for {} at a stretch in {}; needs {} ({MIN_BASEBAND} samples at 4 × OBW)",
                seconds(bb.seconds),
                seconds(had),
                seconds(MIN_BASEBAND as f64 / bb.rate_hz)
            ));
        }
    }
    let bb = bb;
    let x = &bb.x;
    trace.envelope = features::envelope_features(x, bb.rate_hz);

    let rho = cumulants::power_variance(x, noise).unwrap_or(f64::NAN);
    let carrier = features::carrier_fraction(x, noise);
    trace.power_variance = rho;
    trace.carrier_fraction = carrier;
    if !rho.is_finite() {
        return unknown("the envelope statistics could not be computed");
    }
    let mut d = if rho < CONSTANT_ENVELOPE {
        constant_envelope(&bb, rho, carrier, trace)
    } else {
        varying_envelope(&bb, rho, carrier, !forward.one_thread, trace)
    };
    if d.class == Class::Am {
        if let Some(depth) = wide_am_depth(input, forward) {
            d.params.mod_depth = Some(depth);
        }
    }
    d
}

/// The 99 % OBW of full-carrier AM can be narrower than its sidebands (the carrier holds most of
/// the power: a voice-like message peaking at depth 0.5 puts 2 % or less in its sidebands), so
/// a channel filter at the OBW strips the message's upper tones and reads the depth low. Its
/// depth is measured on a band [`AM_WIDEN`] times as wide (the moment estimate takes the
/// wider band's noise off).
fn wide_am_depth(input: &EmissionIq, forward: &Forward) -> Option<f64> {
    let wide = EmissionIq { obw_hz: input.obw_hz * AM_WIDEN, ..*input };
    let mut bb = baseband::channelise(&wide, forward).ok()?;
    if let Some((a, b)) = keyed::on_stretch(&bb.x, bb.noise_power) {
        bb.keep(a, b);
    }
    // The message lies well within the OBW each side of the carrier: the 99 % OBW can be
    // narrower than the sidebands (above), but the highest tone of the AM scenes of
    // tests/classify.rs lies at 0.66 × OBW or less.
    analog::am_depth_lowpassed(&bb.x, bb.rate_hz, bb.noise_power, &bb.response, input.obw_hz)
}

/// How much wider than its OBW an AM emission's depth is measured.
pub const AM_WIDEN: f64 = 2.5;

fn constant_envelope(
    bb: &baseband::Baseband,
    rho: f64,
    carrier: f64,
    trace: &mut Trace,
) -> Decision {
    let ce = margin(-rho, -CONSTANT_ENVELOPE, 0.04);
    if carrier > CARRIER_ONLY && rho >= AM_MIN_VARIANCE {
        // A strong carrier whose envelope still varies: AM of small RMS depth (a voice-like
        // message of several tones peaking at depth 0.5 has an RMS depth near 0.17).
        return amplitude_modulated(bb, carrier, margin(rho, AM_MIN_VARIANCE, 0.01));
    }
    if carrier > CARRIER_ONLY {
        return found(
            Class::Cw,
            ce.min(margin(carrier, CARRIER_ONLY, 0.03)),
            ClassParams::default(),
        );
    }
    let fsk = fsk::analyse(&bb.x, bb.rate_hz, bb.obw_hz);
    trace.fsk = fsk.as_ref().map(|f| (f.separation, f.dwell, f.sharpness));
    // Random data on low-index continuous-phase FSK (MSK, GMSK): smooth transitions, but
    // neighbouring symbols repeat as data do, where an analog tone alternates.
    let smooth_keyed = |f: &fsk::Fsk| {
        f.sharpness < fsk::MIN_SHARPNESS
            && f.dwell >= fsk::MIN_DWELL
            && f.repeats >= fsk::MIN_REPEATS_TIMES_M / f.tones as f64
            && f.repeats <= 1.0 - fsk::MIN_REPEATS_TIMES_M / f.tones as f64
    };
    if let Some(mut f) = fsk.filter(|f| f.sharpness >= fsk::ANALOG_SHARPNESS || smooth_keyed(f)) {
        let smooth = smooth_keyed(&f);
        if smooth && f.symbol_shift_hz.is_finite() {
            f.shift_hz = f.symbol_shift_hz;
        } else if f.dwell < fsk::MIN_DWELL || f.sharpness < fsk::MIN_SHARPNESS {
            return unknown(format!(
                "frequency clusters on {} tones at {:.0} Bd, but dwells there only {:.0} % of the time (FSK {:.0} % or more) or moves between them gradually (sharpness {:.2}; FSK {} or more)",
                f.tones,
                f.symbol_rate_hz,
                100.0 * f.dwell,
                100.0 * fsk::MIN_DWELL,
                f.sharpness,
                fsk::MIN_SHARPNESS
            ));
        }
        if f.symbols < MIN_FSK_SYMBOLS {
            return unknown(format!(
                "looks like FSK; needs {MIN_FSK_SYMBOLS} symbols ({}) to count its tones; had {}",
                seconds(MIN_FSK_SYMBOLS as f64 / f.symbol_rate_hz),
                seconds(bb.seconds)
            ));
        }
        let keyed = if smooth {
            margin(f.repeats * f.tones as f64, fsk::MIN_REPEATS_TIMES_M, 0.2)
        } else {
            margin(f.sharpness, fsk::MIN_SHARPNESS, 0.05)
        };
        let conf = ce
            .min(margin(f.separation, fsk::MIN_SEPARATION, 2.0))
            .min(margin(f.dwell, fsk::MIN_DWELL, 0.1))
            .min(keyed);
        return found(
            Class::Fsk,
            conf,
            ClassParams {
                symbol_rate_hz: Some(f.symbol_rate_hz),
                tones: Some(f.tones),
                shift_hz: Some(f.shift_hz),
                ..ClassParams::default()
            },
        );
    }
    if let Some(d) = constant_envelope_psk(bb, ce) {
        return d;
    }
    if let Some((bit_rate, line)) = fsk::msk_lines(&bb.x, bb.rate_hz, bb.obw_hz) {
        return found(
            Class::Fsk,
            ce.min(margin(line, fsk::MSK_LINE, 0.05)),
            ClassParams {
                symbol_rate_hz: Some(bit_rate),
                tones: Some(2),
                shift_hz: Some(bit_rate / 2.0),
                ..ClassParams::default()
            },
        );
    }
    match analog::fm_deviation(&bb.x, bb.rate_hz, bb.obw_hz) {
        Some(dev) => found(
            Class::Fm,
            ce.min(margin(CARRIER_ONLY - carrier, 0.0, 0.1)),
            ClassParams { deviation_hz: Some(dev), ..ClassParams::default() },
        ),
        None => unknown("constant envelope, but too short to follow its frequency"),
    }
}

/// Share of the power of `x` raised to the `m`-th power (at unit magnitude) in its strongest line.
fn power_carrier(x: &[num_complex::Complex64], m: i32) -> f64 {
    let y: Vec<num_complex::Complex64> = x
        .iter()
        .map(|v| {
            let a = v.norm();
            if a > 0.0 {
                (v / a).powi(m)
            } else {
                num_complex::Complex64::new(0.0, 0.0)
            }
        })
        .collect();
    features::carrier_fraction(&y, 0.0)
}

/// Least share of x^M's power in one line for M-PSK, and most in the line of x^(M/2).
pub const PSK_LINE: f64 = 0.5;
pub const PSK_LOWER_LINE: f64 = 0.2;
/// The least share of x^M's line the noise may bring the test down to.
pub const PSK_LINE_FLOOR: f64 = 0.15;

/// Unfiltered PSK keeps a constant envelope. Raising it to the M-th power wipes M-ary phase
/// steps off and leaves a line (the M-th power method of carrier recovery, common practice),
/// while the (M/2)-th power leaves none. Angle modulation gives no such pair: FM of index β
/// raised to the M-th power keeps J0(Mβ)² of its power in the carrier (the Bessel expansion of
/// e^{jMβ sin}), which is never above one half where J0(Mβ/2)² is below a fifth; continuous-phase
/// FSK's lines split in two at least.
///
/// Noise spreads the phase by about σ² = N / 2S rad² (N, S the noise and signal power), which
/// keeps only e^(−M² σ²) of the M-th power's line (the characteristic function of a Gaussian
/// phase); the least share asked for is scaled by it, down to [`PSK_LINE_FLOOR`] (below that
/// the order is not judged).
fn constant_envelope_psk(bb: &baseband::Baseband, ce: f64) -> Option<Decision> {
    let total = bb.x.iter().map(|v| v.norm_sqr()).sum::<f64>() / bb.x.len().max(1) as f64;
    let phase_var = 0.5 * bb.noise_power / (total - bb.noise_power).max(f64::MIN_POSITIVE);
    let mut lower = power_carrier(&bb.x, 1);
    for m in [2u32, 4, 8] {
        let line = power_carrier(&bb.x, m as i32);
        let least = PSK_LINE * (-((m * m) as f64) * phase_var).exp();
        if least < PSK_LINE_FLOOR {
            break;
        }
        if line >= least && lower < PSK_LOWER_LINE {
            let symbol_rate = rate::transition_rate(&bb.x, bb.rate_hz, bb.obw_hz);
            let conf =
                ce.min(margin(line, least, 0.1)).min(margin(PSK_LOWER_LINE - lower, 0.0, 0.05));
            let params = ClassParams {
                psk_order: Some(m),
                symbol_rate_hz: symbol_rate,
                ..ClassParams::default()
            };
            return Some(found(Class::Psk, conf, params));
        }
        lower = line;
    }
    None
}

/// `threads`: whether its two long searches may run on two threads.
fn varying_envelope(
    bb: &baseband::Baseband,
    rho: f64,
    carrier: f64,
    threads: bool,
    trace: &mut Trace,
) -> Decision {
    if carrier > AM_CARRIER {
        return amplitude_modulated(bb, carrier, margin(rho, CONSTANT_ENVELOPE, 0.04));
    }
    // The two searches, each a long transform of the whole baseband, run side by side on a
    // long input: the emission classified last when the input ends has the other worker idle.
    let (cp, line) = alongside(
        || ofdm::cp_peak(&bb.x, bb.rate_hz, bb.obw_hz, bb.noise_power),
        || rate::envelope_line(&bb.x, bb.rate_hz, bb.obw_hz),
        threads && bb.x.len() >= ALONGSIDE_MIN,
    );
    trace.cp = cp.map(|c| (c.strength, c.prominence));
    trace.envelope_line = line.map(|l| l.prominence);
    let ofdm = cp
        .filter(|c| c.strength >= ofdm::MIN_STRENGTH && c.prominence >= ofdm::MIN_PROMINENCE)
        .map(|c| {
            // A Gaussian-like envelope (power variance near 1) backs the prefix up.
            let conf = margin(c.strength, ofdm::MIN_STRENGTH, 0.03)
                .min(margin(c.prominence, ofdm::MIN_PROMINENCE, 3.0))
                .min(margin(rho, 0.6, 0.15));
            let spacing = Some(1.0 / c.lag_s);
            found(
                Class::Ofdm,
                conf,
                ClassParams { subcarrier_spacing_hz: spacing, ..ClassParams::default() },
            )
        });
    // A symbol-rate line in |x|² is a single carrier's symbol clock, which OFDM lacks (its
    // symbol rate lies far below 0.4 × OBW); a PSK's self-correlation can still show a weak
    // prefix-like peak (BPSK at 20–30 dB: prominence 5–7.6 against 10–18 for the OFDM scenes
    // of tests/classify.rs). So the line is heard first, and the prefix only when the
    // symbols make no sense of it.
    if let Some(line) = line {
        let d = linear(bb, line.freq_hz, trace);
        if d.class != Class::Unknown || ofdm.is_none() {
            return d;
        }
    }
    if let Some(d) = ofdm {
        return d;
    }
    if (rho - 1.0).abs() < 0.3 {
        return found(
            Class::Noise,
            margin(0.3 - (rho - 1.0).abs(), 0.0, 0.1),
            ClassParams::default(),
        );
    }
    unknown(format!(
        "amplitude varies (power variance {rho:.2}) but with no carrier, symbol-rate line or cyclic prefix"
    ))
}

/// Baseband samples from which [`varying_envelope`]'s two searches run on two threads: below
/// it a thread's start (tens of µs) is a fair share of their cost.
pub const ALONGSIDE_MIN: usize = 1 << 14;

/// `(a(), b())`, with `b` on a thread of its own while `a` runs here when `parallel` (and here
/// after `a` when no thread can be started). Either way the answers are the same.
fn alongside<A, B: Send>(
    a: impl FnOnce() -> A,
    b: impl Fn() -> B + Sync,
    parallel: bool,
) -> (A, B) {
    if !parallel {
        return (a(), b());
    }
    std::thread::scope(|s| {
        let other = std::thread::Builder::new().spawn_scoped(s, &b).ok();
        let first = a();
        let second = match other.map(|h| h.join()) {
            Some(Ok(v)) => v,
            Some(Err(panic)) => std::panic::resume_unwind(panic),
            None => b(),
        };
        (first, second)
    })
}
/// AM: a carrier line holding most of the power and an envelope that varies (`varies`: how
/// sure of that, 0..1).
fn amplitude_modulated(bb: &baseband::Baseband, carrier: f64, varies: f64) -> Decision {
    let depth = analog::am_depth(&bb.x, bb.noise_power);
    found(
        Class::Am,
        margin(carrier, AM_CARRIER, 0.1).min(varies),
        ClassParams { mod_depth: depth, ..ClassParams::default() },
    )
}

/// Swami & Sadler 2000 table: (|C20|, |C40|, C42) at one sample per symbol.
const TABLE: [(Class, u32, [f64; 3]); 5] = [
    (Class::Psk, 2, [1.0, 2.0, -2.0]),
    (Class::Psk, 4, [0.0, 1.0, -1.0]),
    (Class::Psk, 8, [0.0, 0.0, -1.0]),
    (Class::Qam, 16, [0.0, 0.68, -0.68]),
    (Class::Qam, 64, [0.0, 0.619, -0.619]),
];
/// Farthest the measured cumulants may sit from their table entry.
pub const MAX_TABLE_DISTANCE: f64 = 0.35;
/// Least lead of the nearest entry over the nearest of another kind.
pub const MIN_TABLE_MARGIN: f64 = 0.08;

fn linear(bb: &baseband::Baseband, symbol_rate: f64, trace: &mut Trace) -> Decision {
    let s = rate::symbols(&bb.x, bb.rate_hz, symbol_rate, bb.noise_psd, &bb.response);
    if s.z.len() < MIN_SYMBOLS {
        return unknown(format!(
            "looks like a linear modulation at {symbol_rate:.0} Bd; needs {MIN_SYMBOLS} symbols ({}); had {}",
            seconds(MIN_SYMBOLS as f64 / symbol_rate),
            seconds(bb.seconds)
        ));
    }
    let lines: Vec<(f64, f64)> = [2, 4, 8]
        .iter()
        .map(|&m| rate::power_line(&s.z, symbol_rate, m).unwrap_or((0.0, 0.0)))
        .collect();
    trace.power_lines = [lines[0].0, lines[1].0, lines[2].0];
    let strongest = lines.iter().map(|l| l.0).fold(0.0, f64::max);
    let z = match [2.0, 4.0, 8.0]
        .iter()
        .zip(&lines)
        .find(|(_, l)| l.0 >= 0.5 * strongest && l.0 > 0.05)
    {
        Some((&m, &(_, f))) => rate::derotate(&s.z, symbol_rate, f / m),
        None => s.z.clone(),
    };
    let Some(c) = cumulants::normalised(&z, s.noise_power) else {
        return unknown("no signal power left at the symbol instants");
    };
    trace.cumulants = Some(c);
    let dist = |e: &[f64; 3]| {
        ((c.c20 - e[0]).powi(2) + (c.c40 - e[1]).powi(2) + (c.c42 - e[2]).powi(2)).sqrt()
    };
    let mut ranked: Vec<(f64, Class, u32)> =
        TABLE.iter().map(|(cl, o, e)| (dist(e), *cl, *o)).collect();
    ranked.sort_by(|a, b| a.0.total_cmp(&b.0));
    let (d1, class, order) = ranked[0];
    // The nearest entry of a different answer (both QAM orders are one answer: "qam").
    let d2 = ranked
        .iter()
        .find(|(_, cl, o)| *cl != class || (class == Class::Psk && *o != order))
        .map_or(f64::INFINITY, |r| r.0);
    if d1 > MAX_TABLE_DISTANCE || d2 - d1 < MIN_TABLE_MARGIN {
        return unknown(format!(
            "symbol-rate line at {symbol_rate:.0} Bd, but the cumulants (|C40| {:.2}, C42 {:.2}) sit between the PSK and QAM values",
            c.c40, c.c42
        ));
    }
    let conf =
        margin(MAX_TABLE_DISTANCE - d1, 0.0, 0.1).min(margin(d2 - d1, MIN_TABLE_MARGIN, 0.1));
    let mut params = ClassParams { symbol_rate_hz: Some(symbol_rate), ..ClassParams::default() };
    if class == Class::Psk {
        params.psk_order = Some(order);
    }
    found(class, conf, params)
}

#[cfg(test)]
mod tests;
