//! One kind for an emitter from the kinds of its emissions: each emission classified on its own
//! ([`crate::measure::classify`]) votes with its confidence times its length (the census
//! scales the length by the share of the emitter's band the emission covered), so a long clear
//! transmission across the emitter's band outweighs a short doubtful one or a piece of it.
//!
//! - Emissions classed `unknown` (too short, features that disagree) do not vote: they say
//!   nothing about the emitter. An emitter with no other vote is `unknown`, confidence 0.
//! - The winner is the class with the largest sum of confidence × length.
//! - Its confidence is that sum over the total length of the emissions that voted: the mean
//!   confidence of the winner's emissions, lowered by the share of airtime that voted for
//!   something else.
//! - Its parameters are the medians, parameter by parameter, over the winner's emissions.
//! - Its designator is the bandwidth code of the emitter's own OBW and the winner's symbol.

use crate::measure::classify::{designator, Class, ClassParams, Classification};

/// The kind of one emitter.
#[derive(Clone, Debug, PartialEq)]
pub struct EmitterKind {
    pub class: Class,
    pub confidence: f64,
    pub params: ClassParams,
    pub designator: String,
}

/// The votes of one emitter's emissions.
#[derive(Clone, Debug, Default)]
pub struct Vote<'a> {
    votes: Vec<(&'a Classification, f64)>,
}

impl<'a> Vote<'a> {
    /// An emission of `length` (samples or seconds; any unit, the same for all) classed `c`.
    pub fn add(&mut self, c: &'a Classification, length: f64) {
        if c.class != Class::Unknown && length > 0.0 && c.confidence.is_finite() {
            self.votes.push((c, length));
        }
    }

    /// The emitter's kind; `obw_hz` is its own occupied bandwidth.
    pub fn result(&self, obw_hz: f64) -> EmitterKind {
        let total: f64 = self.votes.iter().map(|(_, l)| l).sum();
        let score = |class: Class| -> f64 {
            self.votes
                .iter()
                .filter(|(c, _)| c.class == class)
                .map(|(c, l)| c.confidence.clamp(0.0, 1.0) * l)
                .sum()
        };
        let winner = self
            .votes
            .iter()
            .map(|(c, _)| (c.class, score(c.class)))
            .max_by(|a, b| a.1.total_cmp(&b.1));
        let Some((class, s)) = winner.filter(|_| total > 0.0) else {
            return EmitterKind {
                class: Class::Unknown,
                confidence: 0.0,
                params: ClassParams::default(),
                designator: designator(obw_hz, Class::Unknown),
            };
        };
        let theirs: Vec<&ClassParams> =
            self.votes.iter().filter(|(c, _)| c.class == class).map(|(c, _)| &c.params).collect();
        EmitterKind {
            class,
            confidence: (s / total).clamp(0.0, 1.0),
            params: median_params(&theirs),
            designator: designator(obw_hz, class),
        }
    }
}

/// Each parameter's median over the sets that have it (`None` where none has).
fn median_params(all: &[&ClassParams]) -> ClassParams {
    let f = |get: fn(&ClassParams) -> Option<f64>| median(all.iter().filter_map(|p| get(p)));
    let n = |get: fn(&ClassParams) -> Option<u32>| {
        median(all.iter().filter_map(|p| get(p)).map(f64::from)).map(|m| m.round() as u32)
    };
    ClassParams {
        symbol_rate_hz: f(|p| p.symbol_rate_hz),
        tones: n(|p| p.tones),
        shift_hz: f(|p| p.shift_hz),
        psk_order: n(|p| p.psk_order),
        deviation_hz: f(|p| p.deviation_hz),
        mod_depth: f(|p| p.mod_depth),
        subcarrier_spacing_hz: f(|p| p.subcarrier_spacing_hz),
        pulse_width_s: f(|p| p.pulse_width_s),
        pri_s: f(|p| p.pri_s),
    }
}

/// The median of the finite values (the mean of the middle two of an even count).
fn median(values: impl Iterator<Item = f64>) -> Option<f64> {
    let mut v: Vec<f64> = values.filter(|x| x.is_finite()).collect();
    if v.is_empty() {
        return None;
    }
    v.sort_by(f64::total_cmp);
    let m = v.len() / 2;
    Some(if v.len() % 2 == 1 { v[m] } else { 0.5 * (v[m - 1] + v[m]) })
}

#[cfg(test)]
mod tests {
    use super::*;

    fn c(class: Class, confidence: f64, params: ClassParams) -> Classification {
        Classification { class, confidence, params, designator: String::new(), note: None }
    }

    fn fsk(rate: f64, tones: u32) -> ClassParams {
        ClassParams { symbol_rate_hz: Some(rate), tones: Some(tones), ..Default::default() }
    }

    #[test]
    fn the_longest_surest_class_wins_with_its_share_as_confidence() {
        let a = c(Class::Fsk, 0.9, fsk(1200.0, 2));
        let b = c(Class::Fsk, 0.6, fsk(1210.0, 2));
        let d = c(Class::Fsk, 0.8, fsk(1190.0, 4));
        let e = c(Class::Psk, 1.0, ClassParams { psk_order: Some(2), ..Default::default() });
        let u = c(Class::Unknown, 0.0, ClassParams::default());
        let mut v = Vote::default();
        v.add(&a, 2.0);
        v.add(&b, 1.0);
        v.add(&d, 1.0);
        v.add(&e, 1.0);
        v.add(&u, 50.0);
        let k = v.result(2.4e3);
        // fsk: 0.9·2 + 0.6 + 0.8 = 3.2 of 5 voting; psk 1.0. Unknown does not vote.
        assert_eq!(k.class, Class::Fsk);
        assert!((k.confidence - 3.2 / 5.0).abs() < 1e-12);
        // Medians over the fsk emissions only: rates 1190, 1200, 1210; tones 2, 2, 4.
        assert_eq!(k.params, fsk(1200.0, 2));
        assert_eq!(k.designator, "2K40F");
    }

    #[test]
    fn an_emitter_with_no_vote_is_unknown() {
        let u = c(Class::Unknown, 0.7, ClassParams::default());
        let mut v = Vote::default();
        v.add(&u, 10.0);
        let k = v.result(12.5e3);
        assert_eq!((k.class, k.confidence), (Class::Unknown, 0.0));
        assert_eq!(k.designator, "12K5X");
        assert_eq!(Vote::default().result(400.0).designator, "400HX");
    }

    #[test]
    fn medians_of_even_counts_and_missing_parameters() {
        assert_eq!(median([4.0, 1.0, 3.0, 2.0].into_iter()), Some(2.5));
        assert_eq!(median([f64::NAN].into_iter()), None);
        let p = median_params(&[&fsk(100.0, 2), &ClassParams::default()]);
        assert_eq!(p, fsk(100.0, 2));
    }
}
