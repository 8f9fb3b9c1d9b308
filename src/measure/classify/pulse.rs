//! Pulses: an envelope that is on for under half of the time and off (at the noise) between.
//! Width at the 50 % amplitude points (IEEE Std 181 reference levels, common practice); pulse
//! repetition interval from the rising edges, fitted over the whole train so a missed pulse
//! does not count as an interval.

use super::features::moving_average;
use super::spectrum::{above, quantile};
use num_complex::Complex64;

#[derive(Clone, Debug, PartialEq)]
pub struct Pulses {
    pub width_s: f64,
    /// None when the rising edges do not fall on a regular grid.
    pub pri_s: Option<f64>,
    pub count: usize,
    pub duty: f64,
    /// Median power between pulses over the pulse power.
    pub off_ratio: f64,
}

/// The train of pulses in `x`, when there are at least three whole ones, the envelope is on less
/// than half of the time, the pulses stand 13 dB or more above the noise and the level between
/// them is 15 dB or more below the pulses.
pub fn find(x: &[Complex64], rate_hz: f64, noise_power: f64) -> Option<Pulses> {
    let n = x.len();
    if n < 16 {
        return None;
    }
    let raw: Vec<f64> = x.iter().map(|v| v.norm()).collect();
    // Light smoothing decides on and off; the edges are interpolated on the raw envelope
    // (smoothing the power would move its 50 % points outwards).
    let p: Vec<f64> = x.iter().map(|v| v.norm_sqr()).collect();
    let p = moving_average(&p, 3);
    let on_level = quantile(&p, 0.995);
    if !above(on_level, 20.0 * noise_power.max(0.0)) || !above(on_level, 0.0) {
        return None;
    }
    // 50 % amplitude is a quarter of the power; a little hysteresis against noise.
    let (up, down) = (0.25 * on_level, 0.2 * on_level);
    let amp = |i: usize| raw[i];
    let half = 0.5 * on_level.sqrt();
    // Fractional crossing of the 50 % amplitude between samples i − 1 and i.
    let cross = |i: usize| -> f64 {
        let (a, b) = (amp(i - 1), amp(i));
        if (b - a).abs() > 0.0 {
            (i - 1) as f64 + ((half - a) / (b - a)).clamp(0.0, 1.0)
        } else {
            i as f64
        }
    };
    let mut on = p[0] > up;
    let mut start: Option<f64> = None;
    let mut pulses: Vec<(f64, f64)> = Vec::new();
    let mut on_samples = 0usize;
    for (i, &pi) in p.iter().enumerate().skip(1) {
        if on {
            on_samples += 1;
        }
        if !on && pi > up {
            on = true;
            start = Some(cross(i));
        } else if on && pi < down {
            on = false;
            if let Some(s) = start.take() {
                pulses.push((s, cross(i)));
            }
        }
    }
    let duty = on_samples as f64 / n as f64;
    if pulses.len() < 3 || duty >= 0.5 {
        return None;
    }
    let off = off_samples(&p, &pulses);
    let off_ratio = quantile(&off, 0.5) / on_level;
    if off_ratio > 10f64.powf(-1.5) {
        return None;
    }
    let widths: Vec<f64> = pulses.iter().map(|&(s, e)| e - s).collect();
    let width_s = quantile(&widths, 0.5) / rate_hz;
    let rises: Vec<f64> = pulses.iter().map(|&(s, _)| s).collect();
    Some(Pulses {
        width_s,
        pri_s: regular_interval(&rises).map(|v| v / rate_hz),
        count: pulses.len(),
        duty,
        off_ratio,
    })
}

/// The samples of `p` more than two samples away from every pulse `(start, end)`. The pulses
/// come in time order and do not overlap, so one sweep over both finds them (a noisy envelope
/// can hold thousands of "pulses", and testing every sample against every pulse cost more than
/// all the rest of the classification).
fn off_samples(p: &[f64], pulses: &[(f64, f64)]) -> Vec<f64> {
    let mut next = 0;
    let mut off = Vec::with_capacity(p.len());
    for (i, &v) in p.iter().enumerate() {
        let t = i as f64;
        // Pulses ending more than two samples before this one are past for every later sample.
        while next < pulses.len() && t > pulses[next].1 + 2.0 {
            next += 1;
        }
        if pulses.get(next).map_or(true, |&(s, _)| t < s - 2.0) {
            off.push(v);
        }
    }
    off
}

/// The interval of a regular train of edges (missing edges allowed): each edge gets its whole
/// number of median intervals from the first, then a least-squares line through (number, time).
/// None if an edge falls more than a tenth of an interval off the grid.
fn regular_interval(edges: &[f64]) -> Option<f64> {
    let gaps: Vec<f64> = edges.windows(2).map(|w| w[1] - w[0]).collect();
    let guess = quantile(&gaps, 0.5);
    if !above(guess, 0.0) {
        return None;
    }
    let k: Vec<f64> = edges.iter().map(|e| ((e - edges[0]) / guess).round()).collect();
    let m = edges.len() as f64;
    let mk = k.iter().sum::<f64>() / m;
    let me = edges.iter().sum::<f64>() / m;
    let skk: f64 = k.iter().map(|v| (v - mk).powi(2)).sum();
    let ske: f64 = k.iter().zip(edges).map(|(a, e)| (a - mk) * (e - me)).sum();
    if !above(skk, 0.0) {
        return None;
    }
    let slope = ske / skk;
    let worst =
        k.iter().zip(edges).map(|(a, e)| (e - me - slope * (a - mk)).abs()).fold(0.0, f64::max);
    (worst <= 0.1 * slope).then_some(slope)
}
