//! The channel table of the demo scene: what is on the air, where, how strong and when.
//!
//! This table is the truth the scene is generated from, so tests, channel plans and recordings are
//! checked against it rather than against numbers copied by hand. Everything here is invented.

use super::schedule::Schedule;

/// The invented monitoring site the scene is set at.
pub const SITE_NAME: &str = "Wrenhollow Ridge";

/// Density of the receiver noise, white and Gaussian over the whole span, in dBFS/Hz. Its total
/// power grows with the sample rate (−95 dBFS/Hz is −31.2 dBFS over 2.4 MHz).
pub const NOISE_DENSITY_DBFS_PER_HZ: f64 = -95.0;

/// Power of the steady CW beacon, dBFS.
pub const BEACON_LEVEL_DBFS: f64 = -32.0;

/// Rise and fall time of a keyed transmitter (a smooth ramp inside the on-interval, so keying
/// does not splatter across the band).
pub const KEY_RAMP_S: f64 = 1e-3;

/// What a channel carries.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum Emission {
    /// Narrowband FM speech: a mix of three audio tones, swelling at a syllable rate, at up to
    /// `deviation_hz` peak deviation.
    Voice { deviation_hz: f64, tones_hz: [f64; 3], tone_weights: [f64; 3], syllable_hz: f64 },
    /// Continuous-phase 2-FSK bursts of pseudo-random bits at `baud`, tones at ±`shift_hz`.
    Data { baud: f64, shift_hz: f64 },
    /// An unmodulated carrier.
    Carrier,
    /// Band-limited Gaussian noise (a wideband digital link), `noise_width_hz` between its 3 dB
    /// points (6th-order Butterworth shape).
    Noise { noise_width_hz: f64 },
}

/// One channel of the scene.
#[derive(Clone, Debug, PartialEq)]
pub struct DemoChannel {
    /// Short site-style name, as a channel plan would list it.
    pub name: &'static str,
    /// Centre of the channel relative to the tuned centre frequency, Hz.
    pub offset_hz: f64,
    /// Width of the channel allocation (what a plan measures), Hz.
    pub width_hz: f64,
    /// Power while keyed, dBFS (for the noise link: its total power).
    pub level_dbfs: f64,
    pub emission: Emission,
    pub schedule: Schedule,
}

impl DemoChannel {
    /// True when the whole allocation lies inside the span `±rate/2`; channels that do not fit
    /// are left out of the scene (a low `--rate` simply shows fewer channels).
    pub fn fits(&self, sample_rate_hz: f64) -> bool {
        self.offset_hz.abs() + self.width_hz / 2.0 <= sample_rate_hz / 2.0
    }

    /// True when the transmitter is keyed at `t_s` seconds from the start of the scene.
    pub fn is_keyed(&self, t_s: f64) -> bool {
        self.schedule.is_keyed(t_s)
    }

    /// Absolute centre frequency when the receiver is tuned to `center_hz`.
    pub fn center_hz(&self, tuned_center_hz: f64) -> f64 {
        tuned_center_hz + self.offset_hz
    }
}

/// Voice keying patterns: a busy operations channel (60 %), a yard channel (25 %), a gate channel
/// (40 %) and a ferry channel that is rarely used (7.5 %).
const OPS: Schedule = Schedule::Cycle {
    period_s: 5.0,
    on_s: &[(0.10, 1.10), (1.40, 2.00), (2.30, 3.10), (3.70, 4.30)],
};
const YARD: Schedule = Schedule::Cycle { period_s: 4.0, on_s: &[(1.00, 2.00)] };
const GATE: Schedule = Schedule::Cycle { period_s: 2.5, on_s: &[(0.30, 1.30)] };
const FERRY: Schedule = Schedule::Cycle { period_s: 8.0, on_s: &[(2.40, 3.00)] };
/// Telemetry: a 40 ms and an 80 ms burst every 2.5 s, more than a second apart.
const TELEM: Schedule = Schedule::Cycle { period_s: 2.5, on_s: &[(0.40, 0.44), (1.65, 1.73)] };

const fn voice(tones_hz: [f64; 3], syllable_hz: f64) -> Emission {
    Emission::Voice { deviation_hz: 2.5e3, tones_hz, tone_weights: [0.5, 0.3, 0.2], syllable_hz }
}

/// Every channel of the scene, in order of frequency. Offsets are relative to the tuned centre;
/// all allocations lie within ±450 kHz, so a 1 MS/s recording holds the whole scene.
pub fn channels() -> Vec<DemoChannel> {
    vec![
        DemoChannel {
            name: "ops",
            offset_hz: -362.5e3,
            width_hz: 12.5e3,
            level_dbfs: -36.0,
            emission: voice([310.0, 820.0, 1480.0], 3.7),
            schedule: OPS,
        },
        DemoChannel {
            name: "yard",
            offset_hz: -312.5e3,
            width_hz: 12.5e3,
            level_dbfs: -31.0,
            emission: voice([260.0, 700.0, 1900.0], 4.3),
            schedule: YARD,
        },
        DemoChannel {
            name: "gate",
            offset_hz: -237.5e3,
            width_hz: 12.5e3,
            level_dbfs: -40.0,
            emission: voice([390.0, 1050.0, 2200.0], 3.1),
            schedule: GATE,
        },
        DemoChannel {
            name: "ferry",
            offset_hz: -175.0e3,
            width_hz: 12.5e3,
            level_dbfs: -45.0,
            emission: voice([340.0, 930.0, 1650.0], 4.9),
            schedule: FERRY,
        },
        DemoChannel {
            name: "beacon",
            offset_hz: 75.0e3,
            width_hz: 5e3,
            level_dbfs: BEACON_LEVEL_DBFS,
            emission: Emission::Carrier,
            schedule: Schedule::Always,
        },
        DemoChannel {
            name: "telem",
            offset_hz: 137.5e3,
            width_hz: 12.5e3,
            level_dbfs: -34.0,
            emission: Emission::Data { baud: 2400.0, shift_hz: 2e3 },
            schedule: TELEM,
        },
        DemoChannel {
            name: "backhaul",
            offset_hz: 325e3,
            width_hz: 250e3,
            level_dbfs: -30.0,
            emission: Emission::Noise { noise_width_hz: 200e3 },
            schedule: Schedule::Always,
        },
    ]
}

/// True when channel `index` (into [`channels`]) is keyed at `t_s` seconds from the start.
///
/// # Panics
/// If `index` is not a channel of the scene.
pub fn is_keyed(index: usize, t_s: f64) -> bool {
    channels()[index].is_keyed(t_s)
}

/// The channel called `name`, if the scene has one.
pub fn channel(name: &str) -> Option<DemoChannel> {
    channels().into_iter().find(|c| c.name == name)
}

#[cfg(test)]
mod tests {
    use super::*;

    // The numbers below restate the documented scene (module docs of `demo`); the table is the
    // truth and these checks keep the documentation honest.
    #[test]
    fn duty_cycles_are_as_documented() {
        let duty = |n: &str| channel(n).unwrap().schedule.duty();
        assert!((duty("ops") - 0.60).abs() < 1e-12);
        assert!((duty("yard") - 0.25).abs() < 1e-12);
        assert!((duty("gate") - 0.40).abs() < 1e-12);
        assert!((duty("ferry") - 0.075).abs() < 1e-12);
        assert!((duty("telem") - 0.048).abs() < 1e-12);
    }

    #[test]
    fn patterns_are_well_formed() {
        for c in channels() {
            if let Schedule::Cycle { period_s, on_s } = c.schedule {
                let mut last = 0.0;
                for (i, &(on, off)) in on_s.iter().enumerate() {
                    assert!(on < off && off <= period_s, "{}", c.name);
                    assert!(i == 0 || on > last, "{}: intervals overlap or touch", c.name);
                    last = off;
                }
                assert!(last - period_s < on_s[0].0, "{}: wraps into its first interval", c.name);
            }
        }
    }

    #[test]
    fn data_bursts_are_separate_emissions() {
        // Bursts of tens of milliseconds with gaps of at least 200 ms (so a logger with a
        // hang time below 200 ms sees each burst as its own emission), wrap-around included.
        let Schedule::Cycle { period_s, on_s } = channel("telem").unwrap().schedule else {
            panic!("telemetry is keyed");
        };
        for (i, &(on, off)) in on_s.iter().enumerate() {
            assert!((0.01..0.1).contains(&(off - on)));
            let next_on = on_s.get(i + 1).map_or(on_s[0].0 + period_s, |n| n.0);
            assert!(next_on - off >= 0.2);
        }
    }

    #[test]
    fn channels_do_not_overlap_and_fit_a_1_megasample_span() {
        let mut cs = channels();
        cs.sort_by(|a, b| a.offset_hz.total_cmp(&b.offset_hz));
        for w in cs.windows(2) {
            assert!(w[0].offset_hz + w[0].width_hz / 2.0 < w[1].offset_hz - w[1].width_hz / 2.0);
        }
        assert!(cs.iter().all(|c| c.fits(1e6)));
        assert!(!channel("backhaul").unwrap().fits(0.8e6));
    }

    #[test]
    fn index_lookup() {
        let beacon = channels().iter().position(|c| c.name == "beacon").unwrap();
        assert!(is_keyed(beacon, 123.4));
        let ferry = channels().iter().position(|c| c.name == "ferry").unwrap();
        assert!(is_keyed(ferry, 8.0 + 2.5) && !is_keyed(ferry, 8.0 + 3.5));
    }
}
