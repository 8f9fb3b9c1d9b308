//! Sequential tests on standardised residuals: the two-sided CUSUM of Page and the EWMA chart of
//! Roberts, each with the rule that ends an alarm.
//!
//! Both take one residual `z` per interval, in units of its in-control spread (mean 0, spread 1
//! when nothing has changed), and say when the mean has left 0 and, once an alarm is up, when it
//! has come back.
//!
//! - **CUSUM** (Page, Biometrika 41, 1954): `S⁺ = max(0, S⁺ + z − k)`, `S⁻ = max(0, S⁻ − z − k)`,
//!   alarm when either exceeds `h`. With `k = 0.5`: `h = 5` gives an in-control average run length
//!   (ARL0) of about 465 intervals and about 10.4 at a shift of 1σ; `h = 4` gives 168 and 8.4.
//!   The change began, by Page's estimate, just after the statistic last left zero (`since`).
//!   After an alarm both sums restart at 0 and a *return* sum `R = max(0, R + k − d·z)` (d the
//!   alarm's sign) runs: it is the same test turned round (is the mean back at 0 rather than
//!   still shifted?), so the alarm clears after about as many intervals as it took to raise at a
//!   1σ shift (about 10), and a change that persists keeps it up for ARL0 intervals on average.
//! - **EWMA** (Roberts, Technometrics 1, 1959; run lengths from Lucas & Saccucci, Technometrics
//!   32(1), 1990): `E = λ z + (1 − λ) E`, alarm when `|E| > L σ_E` with the asymptotic
//!   `σ_E = sqrt(λ / (2 − λ))`. `λ = 0.1, L = 2.814` gives ARL0 500 and 10.3 at 1σ. `since` is
//!   the last time `E` stood on the centre line's other side (crossed zero). The alarm clears
//!   when `E` comes back within half the limit: a hysteresis that keeps an alarm from flickering
//!   while a shift near the limit lasts (at a lasting 1σ shift `E` sits at 1.55 limits).
//!
//! The run lengths hold for independent residuals; correlated ones (a floor tracked with memory,
//! occupancy of emissions longer than an interval) raise the false-alarm rate.

use serde::{Deserialize, Serialize};

/// Which test, with its parameters.
#[derive(Clone, Copy, Debug, PartialEq, Serialize, Deserialize)]
#[serde(tag = "method", rename_all = "snake_case")]
pub enum Method {
    /// Two-sided CUSUM: reference value `k` and decision interval `h`, in σ.
    Cusum { k: f64, h: f64 },
    /// EWMA: weight `lambda` of the newest residual, limit `l` in σ of the statistic.
    Ewma { lambda: f64, l: f64 },
}

/// Page's two-sided CUSUM, k = 0.5, h = 5: ARL0 ≈ 465, ARL(1σ) ≈ 10.4.
pub const DEFAULT_CUSUM: Method = Method::Cusum { k: 0.5, h: 5.0 };
/// Lucas & Saccucci's EWMA, λ = 0.1, L = 2.814: ARL0 500, ARL(1σ) 10.3.
pub const DEFAULT_EWMA: Method = Method::Ewma { lambda: 0.1, l: 2.814 };

impl Method {
    pub fn name(&self) -> &'static str {
        match self {
            Method::Cusum { .. } => "cusum",
            Method::Ewma { .. } => "ewma",
        }
    }

    /// The level the statistic must exceed to raise an alarm.
    pub fn threshold(&self) -> f64 {
        match *self {
            Method::Cusum { h, .. } => h,
            Method::Ewma { lambda, l } => l * (lambda / (2.0 - lambda)).sqrt(),
        }
    }

    /// The run lengths the literature gives for these parameters, `(ARL0, ARL at 1σ)`, when it
    /// gives them (the published defaults and CUSUM with h = 4).
    pub fn published_run_lengths(&self) -> Option<(f64, f64)> {
        let near = |a: f64, b: f64| (a - b).abs() < 1e-9;
        match *self {
            Method::Cusum { k, h } if near(k, 0.5) && near(h, 5.0) => Some((465.0, 10.4)),
            Method::Cusum { k, h } if near(k, 0.5) && near(h, 4.0) => Some((168.0, 8.4)),
            Method::Ewma { lambda, l } if near(lambda, 0.1) && near(l, 2.814) => {
                Some((500.0, 10.3))
            }
            _ => None,
        }
    }

    /// Checks the parameters: what is wrong and what to give instead.
    pub fn check(&self) -> Result<(), String> {
        let ok = |v: f64| v.is_finite() && v > 0.0;
        match *self {
            Method::Cusum { k, h } if !(ok(h) && k.is_finite() && k >= 0.0) => Err(format!(
                "CUSUM needs k ≥ 0 and h > 0 (in σ), got k = {k}, h = {h}; the defaults are k = 0.5, h = 5"
            )),
            Method::Ewma { lambda, l } if !(ok(l) && ok(lambda) && lambda <= 1.0) => Err(format!(
                "EWMA needs 0 < λ ≤ 1 and L > 0, got λ = {lambda}, L = {l}; the defaults are λ = 0.1, L = 2.814"
            )),
            _ => Ok(()),
        }
    }
}

/// Up or down.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Direction {
    Up,
    Down,
}

impl Direction {
    fn sign(self) -> f64 {
        match self {
            Direction::Up => 1.0,
            Direction::Down => -1.0,
        }
    }
}

/// What one step of a chart said.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum Verdict {
    /// Nothing new.
    Quiet,
    /// An alarm: the direction, the statistic that crossed, and the label of the first residual
    /// of the change, by the chart's estimate.
    Raised { direction: Direction, statistic: f64, since: f64 },
    /// The alarm ended: the statistic of the return test.
    Cleared { statistic: f64 },
}

/// One chart following one quantity.
#[derive(Clone, Debug)]
pub struct Chart {
    method: Method,
    /// CUSUM: S⁺ and S⁻; EWMA: E (in `up`; `down` unused).
    up: f64,
    down: f64,
    /// The label of the residual with which each statistic last left zero (EWMA: with which E
    /// last changed side).
    up_from: f64,
    down_from: f64,
    /// The alarm now up, and the return statistic (CUSUM).
    alarm: Option<Direction>,
    back: f64,
}

impl Chart {
    pub fn new(method: Method) -> Chart {
        Chart { method, up: 0.0, down: 0.0, up_from: 0.0, down_from: 0.0, alarm: None, back: 0.0 }
    }

    pub fn method(&self) -> Method {
        self.method
    }

    /// The alarm now up, if any.
    pub fn alarm(&self) -> Option<Direction> {
        self.alarm
    }

    /// The statistic as it stands, signed by direction (CUSUM: the larger sum; EWMA: E).
    pub fn statistic(&self) -> f64 {
        match self.method {
            Method::Cusum { .. } if self.down > self.up => -self.down,
            _ => self.up,
        }
    }

    /// Takes the next residual; `at` labels it (its time), for dating a change.
    pub fn push(&mut self, z: f64, at: f64) -> Verdict {
        match self.method {
            Method::Cusum { k, h } => self.cusum(z, at, k, h),
            Method::Ewma { lambda, l } => self.ewma(z, at, lambda, l),
        }
    }

    fn cusum(&mut self, z: f64, at: f64, k: f64, h: f64) -> Verdict {
        if let Some(d) = self.alarm {
            self.back = (self.back + k - d.sign() * z).max(0.0);
            if self.back > h {
                let statistic = self.back;
                self.alarm = None;
                self.back = 0.0;
                self.restart();
                return Verdict::Cleared { statistic };
            }
            return Verdict::Quiet;
        }
        if self.up == 0.0 {
            self.up_from = at;
        }
        if self.down == 0.0 {
            self.down_from = at;
        }
        self.up = (self.up + z - k).max(0.0);
        self.down = (self.down - z - k).max(0.0);
        let raised = if self.up > h {
            Some((Direction::Up, self.up, self.up_from))
        } else if self.down > h {
            Some((Direction::Down, self.down, self.down_from))
        } else {
            None
        };
        match raised {
            Some((direction, statistic, since)) => {
                self.alarm = Some(direction);
                self.restart();
                Verdict::Raised { direction, statistic, since }
            }
            None => Verdict::Quiet,
        }
    }

    fn ewma(&mut self, z: f64, at: f64, lambda: f64, l: f64) -> Verdict {
        let before = self.up;
        self.up = lambda * z + (1.0 - lambda) * self.up;
        if before == 0.0 || before.signum() != self.up.signum() {
            self.up_from = at;
        }
        let limit = l * (lambda / (2.0 - lambda)).sqrt();
        match self.alarm {
            Some(d) if d.sign() * self.up < 0.5 * limit => {
                self.alarm = None;
                Verdict::Cleared { statistic: self.up }
            }
            Some(_) => Verdict::Quiet,
            None if self.up.abs() > limit => {
                let direction = if self.up > 0.0 { Direction::Up } else { Direction::Down };
                self.alarm = Some(direction);
                Verdict::Raised { direction, statistic: self.up, since: self.up_from }
            }
            None => Verdict::Quiet,
        }
    }

    fn restart(&mut self) {
        self.up = 0.0;
        self.down = 0.0;
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::testkit::Rng;

    /// Mean number of residuals until the first alarm, over `runs` runs of N(shift, 1) residuals
    /// (seeded), each from a fresh chart.
    fn average_run_length(method: Method, shift: f64, runs: usize, seed: u64) -> f64 {
        let mut rng = Rng::new(seed);
        let mut total = 0u64;
        for _ in 0..runs {
            let mut chart = Chart::new(method);
            let mut n = 0u64;
            loop {
                n += 1;
                if let Verdict::Raised { .. } = chart.push(shift + rng.gauss(), n as f64) {
                    break;
                }
            }
            total += n;
        }
        total as f64 / runs as f64
    }

    /// Within 10 % of the published figure. The run length is close to geometric, so its spread
    /// is about its mean: with `runs` runs the standard error is mean/√runs (1.6 % at 4000 runs),
    /// and 10 % is six standard errors away for any seed.
    fn check(method: Method, shift: f64, published: f64) {
        let measured = average_run_length(method, shift, 4000, 0x5eed_a1a2);
        let err = (measured - published).abs() / published;
        println!("{method:?} at {shift}σ: ARL measured {measured:.1}, published {published}");
        assert!(
            err < 0.10,
            "{method:?} at {shift}σ: ARL {measured:.1}, published {published} ({:.1} %)",
            100.0 * err
        );
    }

    #[test]
    fn cusum_run_lengths_match_page() {
        // Page, Biometrika 41 (1954), two-sided, k = 0.5: h = 5 → ARL0 465, ARL(1σ) 10.4;
        // h = 4 → 168 and 8.4.
        check(DEFAULT_CUSUM, 0.0, 465.0);
        check(DEFAULT_CUSUM, 1.0, 10.4);
        check(DEFAULT_CUSUM, -1.0, 10.4);
        let h4 = Method::Cusum { k: 0.5, h: 4.0 };
        check(h4, 0.0, 168.0);
        check(h4, 1.0, 8.4);
    }

    #[test]
    fn ewma_run_lengths_match_lucas_and_saccucci() {
        // Lucas & Saccucci, Technometrics 32(1) 1990: λ = 0.1, L = 2.814 → ARL0 500, ARL(1σ) 10.3.
        check(DEFAULT_EWMA, 0.0, 500.0);
        check(DEFAULT_EWMA, 1.0, 10.3);
        check(DEFAULT_EWMA, -1.0, 10.3);
    }

    #[test]
    fn published_figures_are_the_ones_documented() {
        assert_eq!(DEFAULT_CUSUM.published_run_lengths(), Some((465.0, 10.4)));
        assert_eq!(DEFAULT_EWMA.published_run_lengths(), Some((500.0, 10.3)));
        assert_eq!(Method::Cusum { k: 0.3, h: 5.0 }.published_run_lengths(), None);
    }

    #[test]
    fn a_step_is_dated_where_the_sum_left_zero_and_clears_after_it_ends() {
        for method in [DEFAULT_CUSUM, DEFAULT_EWMA] {
            let mut chart = Chart::new(method);
            let mut raised = None;
            let mut cleared = None;
            // In control for 50 steps (exactly 0), shifted by 3σ for 30, back for 100.
            for step in 0..180u64 {
                let z = if (50..80).contains(&step) { 3.0 } else { 0.0 };
                match chart.push(z, step as f64) {
                    Verdict::Raised { direction, since, .. } => {
                        assert_eq!(direction, Direction::Up);
                        raised = Some((step, since));
                    }
                    Verdict::Cleared { .. } => cleared = Some(step),
                    Verdict::Quiet => {}
                }
            }
            let (at, since) = raised.expect("raised");
            assert!((50..54).contains(&at), "{method:?} raised at {at}");
            assert_eq!(since, 50.0, "{method:?}: the change began at step 50");
            let cleared = cleared.expect("cleared");
            assert!((80..130).contains(&cleared), "{method:?} cleared at {cleared}");
        }
    }

    #[test]
    fn bad_parameters_are_refused_with_the_defaults_named() {
        assert!(Method::Cusum { k: 0.5, h: 0.0 }.check().unwrap_err().contains("h = 5"));
        assert!(Method::Ewma { lambda: 1.5, l: 3.0 }.check().unwrap_err().contains("0.1"));
        assert!(DEFAULT_CUSUM.check().is_ok() && DEFAULT_EWMA.check().is_ok());
    }
}
