//! Pairing the emitters of two inventories (see [`super`] for the rule).

use super::{BaselineEmitter, Thresholds};

/// Pairs `(before, after, moved)` by index, and the indices left alone on each side.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct Paired {
    pub pairs: Vec<(usize, usize, bool)>,
    pub gone: Vec<usize>,
    pub new: Vec<usize>,
}

/// Whether `b` and `a` are at the same place.
pub fn same_place(b: &BaselineEmitter, a: &BaselineEmitter, rbw: f64, t: &Thresholds) -> bool {
    (a.center_hz - b.center_hz).abs() <= 2.0 * rbw + t.move_share * b.obw_hz.max(a.obw_hz)
}

/// Whether `a` may be `b` moved: near enough, and alike in width, level and class.
fn may_have_moved(b: &BaselineEmitter, a: &BaselineEmitter, rbw: f64, t: &Thresholds) -> bool {
    let wide = b.obw_hz.max(a.obw_hz);
    let ratio = wide / b.obw_hz.min(a.obw_hz).max(f64::MIN_POSITIVE);
    let class_ok = match (b.class_name(), a.class_name()) {
        (Some(x), Some(y)) => x == y,
        _ => true,
    };
    (a.center_hz - b.center_hz).abs() <= t.move_within * wide + 10.0 * rbw
        && ratio < t.width_factor
        && (a.power_dbfs - b.power_dbfs).abs() < t.power_db
        && class_ok
}

/// Pairs closest first among the candidates `ok` allows, each emitter at most once.
fn greedy(
    b: &[&BaselineEmitter],
    a: &[&BaselineEmitter],
    free: (&mut [bool], &mut [bool]),
    ok: impl Fn(&BaselineEmitter, &BaselineEmitter) -> bool,
) -> Vec<(usize, usize)> {
    let mut cand: Vec<(f64, usize, usize)> = Vec::new();
    for (i, eb) in b.iter().enumerate().filter(|(i, _)| free.0[*i]) {
        for (j, ea) in a.iter().enumerate().filter(|(j, _)| free.1[*j]) {
            if ok(eb, ea) {
                cand.push(((ea.center_hz - eb.center_hz).abs(), i, j));
            }
        }
    }
    cand.sort_by(|x, y| x.0.total_cmp(&y.0));
    let mut out = Vec::new();
    for (_, i, j) in cand {
        if free.0[i] && free.1[j] {
            free.0[i] = false;
            free.1[j] = false;
            out.push((i, j));
        }
    }
    out
}

/// Pairs the emitters of `b` (the baseline) and `a` (today).
pub fn pair(b: &[&BaselineEmitter], a: &[&BaselineEmitter], rbw: f64, t: &Thresholds) -> Paired {
    let (mut fb, mut fa) = (vec![true; b.len()], vec![true; a.len()]);
    let same = greedy(b, a, (&mut fb, &mut fa), |x, y| same_place(x, y, rbw, t));
    let moved = greedy(b, a, (&mut fb, &mut fa), |x, y| may_have_moved(x, y, rbw, t));
    let mut pairs: Vec<(usize, usize, bool)> =
        same.into_iter().map(|(i, j)| (i, j, false)).collect();
    pairs.extend(moved.into_iter().map(|(i, j)| (i, j, true)));
    pairs.sort_by_key(|p| p.0);
    Paired {
        pairs,
        gone: (0..b.len()).filter(|&i| fb[i]).collect(),
        new: (0..a.len()).filter(|&j| fa[j]).collect(),
    }
}
