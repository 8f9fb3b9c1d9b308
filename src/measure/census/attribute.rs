//! What belongs to another emitter: keying transients, out-of-band skirts and spectral lines.
//!
//! An emitter radiates outside its necessary band: ITU-R SM.329 and SM.1541 call these its
//! out-of-band and spurious domains. A detector sees them as weak emissions of their own: the
//! switching transients ("key clicks") of a hard-keyed transmitter, a short splash across the
//! band at each key-up and key-down; the sinc skirts of unfiltered OFDM, PSK or FSK; the side
//! lobes of a pulse train's line spectrum. Listed as emitters they would bury the real ones, so
//! the census attributes them to the emitter that made them and counts what it attributed.
//!
//! The rules, on the figures of every emitter once the input has ended, strongest first:
//! - **Skirt** (out-of-band, co-timed and adjacent): an emitter at least [`SKIRT_BELOW_DB`]
//!   under a stronger one both in power and in its peak in one RBW, on the air only while that
//!   one is ([`CO_TIMED`] of its airtime inside the stronger one's emissions), next to it or
//!   to one of the skirts it already has (the gap between the two bands no wider than twice the
//!   candidate, half that neighbour, or 4 RBW), and whose peak is no more than
//!   [`FALLING_DB`] above that neighbour's: the spectrum falls away from the emitter. A second
//!   emitter next to a strong one stands out of this slope (a carrier's peak rises above a
//!   wide emitter's density), or keys at other times, or has a comparable level.
//! - **Transient** (spurious, co-timed with an edge): an emitter at least [`TRANSIENT_BELOW_DB`]
//!   under a stronger one each of whose emissions is short (a few rows) and starts or ends
//!   within one FFT frame and one row of a key-up or key-down of a stronger emitter. Its
//!   emissions are counted on the emitter whose edge they follow (the one whose keying splash,
//!   falling with the square of the distance, is strongest there).
//!
//! Two emitters keyed at the same instants with comparable levels stay two: both rules ask for a
//! large difference in level.

/// An emitter as the attribution sees it.
#[derive(Clone, Debug)]
pub struct Piece {
    pub center_hz: f64,
    pub obw_hz: f64,
    /// Mean power while on the air and level in one RBW at the peak, FS².
    pub power: f64,
    pub peak: f64,
    /// Its emissions, `[start, end)` in samples, in time order.
    pub emissions: Vec<Span>,
}

/// One emission of a [`Piece`].
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Span {
    pub start: u64,
    pub end: u64,
}

impl Piece {
    /// The energy of its emission `x` at its power while on the air, FS² · samples (the
    /// emitter's figure, so that shares compare like with like).
    pub fn energy(&self, x: &Span) -> f64 {
        self.power * (x.end - x.start) as f64
    }
}

/// Timing and resolution the rules need.
#[derive(Clone, Copy, Debug)]
pub struct Scale {
    /// Samples: how far a transient may lie from the edge it follows (a frame and a row).
    pub edge_tolerance: u64,
    /// Samples: the longest a transient emission lasts.
    pub transient_max: u64,
    /// Length of the input, samples (edges at its ends are not key edges).
    pub duration: u64,
    pub rbw_hz: f64,
}

impl Scale {
    /// The tolerances for rows of `stride` samples from frames of `fft_size`: a transient
    /// splashes over the frames that hold the edge, and an emission's edges are timed to about
    /// a hop, so one frame and one row; it lasts at most that and two rows more.
    pub fn new(stride: u64, fft_size: usize, duration: u64, rbw_hz: f64) -> Scale {
        let tol = stride + fft_size as u64;
        Scale { edge_tolerance: tol, transient_max: tol + 2 * stride, duration, rbw_hz }
    }
}

/// A skirt is at least this far under its emitter's power, dB.
pub const SKIRT_BELOW_DB: f64 = 10.0;
/// A transient is at least this far under its emitter's power, dB.
pub const TRANSIENT_BELOW_DB: f64 = 20.0;
/// Share of a skirt's airtime that lies inside its emitter's emissions.
pub const CO_TIMED: f64 = 0.8;
/// A skirt's peak may exceed that of its nearer neighbour by this much (the scatter of an
/// averaged noise-subtracted level), dB.
pub const FALLING_DB: f64 = 3.0;

/// What became of one emitter.
#[derive(Clone, Debug, PartialEq)]
pub enum Fate {
    /// Listed as an emitter.
    Own,
    /// Out-of-band skirt or spectral line of emitter `root`.
    Skirt { root: usize },
    /// Switching transients; `parents[k]` is the emitter whose edge its emission `k` follows.
    Transient { parents: Vec<usize> },
}

/// A listed emitter and its skirts: (low Hz, high Hz, peak FS²) of each.
struct Group {
    members: Vec<(f64, f64, f64)>,
}

/// The fate of every piece (indices as given).
pub fn attribute(pieces: &[Piece], s: Scale) -> Vec<Fate> {
    let mut order: Vec<usize> = (0..pieces.len()).collect();
    order.sort_by(|&a, &b| pieces[b].power.total_cmp(&pieces[a].power));
    let mut fate = vec![Fate::Own; pieces.len()];
    let groups = skirts(pieces, &order, &mut fate, s);
    let edges: Vec<Vec<u64>> = pieces.iter().map(|p| key_edges(p, s.duration)).collect();
    for &i in &order {
        // An emitter with skirts of its own is no transient.
        if fate[i] != Fate::Own || groups.iter().any(|g| g.0 == i && g.1.members.len() > 1) {
            continue;
        }
        let roots: Vec<usize> =
            groups.iter().map(|g| g.0).filter(|&r| r != i && fate[r] == Fate::Own).collect();
        if let Some(parents) = transient_of(&pieces[i], pieces, &roots, &edges, s) {
            fate[i] = Fate::Transient { parents };
        }
    }
    fate
}

/// Finds the skirts, strongest piece first, to a fixed point: levels measured in noise do not
/// fall strictly outward, so a skirt can be met before the one between it and its emitter; it
/// is tried again once that one has joined. A piece that was taken for an emitter and then
/// turns out to be a skirt brings its own skirts along. Returns the groups of the emitters.
fn skirts(pieces: &[Piece], order: &[usize], fate: &mut [Fate], s: Scale) -> Vec<(usize, Group)> {
    let mut groups: Vec<(usize, Group)> = Vec::new();
    loop {
        let mut changed = false;
        for &i in order {
            if fate[i] != Fate::Own {
                continue;
            }
            let p = &pieces[i];
            let own = groups.iter().position(|g| g.0 == i);
            let Some(g) = skirt_of(p, pieces, &groups, s) else {
                if own.is_none() {
                    let (lo, hi) = band(p);
                    groups.push((i, Group { members: vec![(lo, hi, p.peak)] }));
                }
                continue;
            };
            let root = groups[g].0;
            let moved = match own {
                Some(k) => groups.remove(k).1.members,
                None => vec![(band(p).0, band(p).1, p.peak)],
            };
            let g = groups.iter().position(|x| x.0 == root).expect("still there");
            groups[g].1.members.extend(moved);
            for f in fate.iter_mut() {
                if *f == (Fate::Skirt { root: i }) {
                    *f = Fate::Skirt { root };
                }
            }
            fate[i] = Fate::Skirt { root };
            changed = true;
        }
        if !changed {
            return groups;
        }
    }
}

/// The occupied band of a piece, Hz.
fn band(p: &Piece) -> (f64, f64) {
    (p.center_hz - p.obw_hz / 2.0, p.center_hz + p.obw_hz / 2.0)
}

/// The group (index into `groups`) whose skirt `p` is, the nearest in frequency if several.
fn skirt_of(p: &Piece, pieces: &[Piece], groups: &[(usize, Group)], s: Scale) -> Option<usize> {
    let below = crate::units::undb(-SKIRT_BELOW_DB);
    let (lo, hi) = band(p);
    let gap = |m: &(f64, f64, f64)| (lo - m.1).max(m.0 - hi).max(0.0);
    groups
        .iter()
        .enumerate()
        .filter_map(|(g, (root, group))| {
            let r = &pieces[*root];
            let m = group.members.iter().min_by(|a, b| gap(a).total_cmp(&gap(b)))?;
            let ok = p.power <= r.power * below
                && p.peak <= r.peak * below
                && gap(m) <= (4.0 * s.rbw_hz).max(2.0 * p.obw_hz).max((m.1 - m.0) / 2.0)
                && p.peak <= m.2 * crate::units::undb(FALLING_DB)
                && co_timed(&p.emissions, &r.emissions, s.edge_tolerance) >= CO_TIMED;
            ok.then_some((g, gap(m)))
        })
        .min_by(|a, b| a.1.total_cmp(&b.1))
        .map(|(g, _)| g)
}

/// Share of the airtime of `a` that lies inside the emissions of `b` widened by `tol` samples
/// each side (both in time order).
fn co_timed(a: &[Span], b: &[Span], tol: u64) -> f64 {
    let total: u64 = a.iter().map(|x| x.end - x.start).sum();
    if total == 0 {
        return 0.0;
    }
    let mut inside = 0u64;
    let mut j = 0;
    for x in a {
        while j < b.len() && b[j].end + tol <= x.start {
            j += 1;
        }
        let mut k = j;
        while k < b.len() && b[k].start.saturating_sub(tol) < x.end {
            let (from, to) =
                (x.start.max(b[k].start.saturating_sub(tol)), x.end.min(b[k].end + tol));
            inside += to.saturating_sub(from);
            k += 1;
        }
    }
    inside.min(total) as f64 / total as f64
}

/// The key-ups and key-downs of a piece, in order: its emissions' edges, less those at the ends
/// of the input (the input's start or end is no key edge).
fn key_edges(p: &Piece, duration: u64) -> Vec<u64> {
    let mut e: Vec<u64> = p
        .emissions
        .iter()
        .flat_map(|x| [x.start, x.end])
        .filter(|&t| t > 0 && t < duration)
        .collect();
    e.sort_unstable();
    e
}

/// The emitter (one of `roots`) whose edge each emission of `p` follows, if every one follows
/// an edge and is short enough to be a transient.
fn transient_of(
    p: &Piece,
    pieces: &[Piece],
    roots: &[usize],
    edges: &[Vec<u64>],
    s: Scale,
) -> Option<Vec<usize>> {
    let below = crate::units::undb(-TRANSIENT_BELOW_DB);
    let near_edge = |r: usize, t: u64| {
        let e = &edges[r];
        let k = e.partition_point(|&x| x < t.saturating_sub(s.edge_tolerance));
        e.get(k).is_some_and(|&x| x <= t + s.edge_tolerance)
    };
    let strong: Vec<usize> =
        roots.iter().copied().filter(|&r| p.power <= pieces[r].power * below).collect();
    if strong.is_empty() || p.emissions.is_empty() {
        return None;
    }
    p.emissions
        .iter()
        .map(|x| {
            if x.end - x.start > s.transient_max {
                return None;
            }
            strong
                .iter()
                .copied()
                .filter(|&r| near_edge(r, x.start) || near_edge(r, x.end))
                .max_by(|&a, &b| splash(&pieces[a], p).total_cmp(&splash(&pieces[b], p)))
        })
        .collect()
}

/// How strongly the keying splash of `r` reaches `p`: its power over the square of the distance
/// (a rectangular key edge's spectrum falls as 1/f², common practice), the distance at least
/// its own width.
fn splash(r: &Piece, p: &Piece) -> f64 {
    let d = (r.center_hz - p.center_hz).abs().max(r.obw_hz).max(1.0);
    r.power / (d * d)
}

#[cfg(test)]
mod tests {
    use super::*;

    const MS: u64 = 250; // samples per millisecond at 250 kS/s

    fn scale() -> Scale {
        // Rows of 8.192 ms from FFT 4096 at 250 kS/s, 2 s of input.
        Scale::new(2048, 4096, 2000 * MS, 61.0 * 1.5)
    }

    fn piece(center_hz: f64, obw_hz: f64, dbfs: f64, peak_dbfs: f64, on: &[(u64, u64)]) -> Piece {
        let u = crate::units::undb;
        Piece {
            center_hz,
            obw_hz,
            power: u(dbfs),
            peak: u(peak_dbfs),
            emissions: on.iter().map(|&(a, b)| Span { start: a * MS, end: b * MS }).collect(),
        }
    }

    /// Bursts of `on` ms every `period` ms from `start`, `count` of them.
    fn bursts(start: u64, on: u64, period: u64, count: u64) -> Vec<(u64, u64)> {
        (0..count).map(|k| (start + k * period, start + k * period + on)).collect()
    }

    #[test]
    fn key_clicks_are_the_transients_of_the_keyed_emitter() {
        let keyed = bursts(100, 300, 500, 3);
        let clicks: Vec<(u64, u64)> = keyed.iter().map(|&(a, _)| (a - 4, a + 12)).collect();
        let pieces =
            [piece(-20e3, 8e3, -10.0, -16.0, &keyed), piece(30e3, 3e3, -55.0, -60.0, &clicks)];
        assert_eq!(attribute(&pieces, scale())[1], Fate::Transient { parents: vec![0, 0, 0] });
    }

    #[test]
    fn two_emitters_keyed_together_stay_two() {
        // Same instants, 3 dB apart, 40 kHz apart: neither rule applies.
        let keyed = bursts(50, 80, 180, 3);
        let pieces =
            [piece(-20e3, 300.0, -10.0, -10.0, &keyed), piece(20e3, 4e3, -13.0, -19.0, &keyed)];
        assert_eq!(attribute(&pieces, scale()), [Fate::Own, Fate::Own]);
    }

    #[test]
    fn side_lobes_chain_onto_their_emitter_while_they_fall() {
        let all = [(0, 2000)];
        let mut pieces = vec![piece(0.0, 10e3, -10.0, -20.0, &all)];
        for k in 1..6 {
            let level = -25.0 - 4.0 * k as f64;
            pieces.push(piece(2.5e3 + 5e3 * k as f64, 3.5e3, level, level - 10.0, &all));
        }
        // A real carrier beside it, steady too and 12 dB below, but standing out of the slope:
        // its peak in one RBW is above the wide emitter's.
        pieces.push(piece(-8e3, 200.0, -22.0, -22.0, &all));
        let fate = attribute(&pieces, scale());
        assert!(fate[1..6].iter().all(|f| *f == Fate::Skirt { root: 0 }), "{fate:?}");
        assert_eq!(fate[6], Fate::Own);
    }

    #[test]
    fn a_weak_emitter_keyed_at_other_times_is_no_skirt() {
        let pieces = [
            piece(0.0, 10e3, -10.0, -30.0, &bursts(0, 100, 400, 5)),
            piece(8e3, 3e3, -40.0, -50.0, &bursts(200, 100, 400, 5)),
        ];
        assert_eq!(attribute(&pieces, scale())[1], Fate::Own);
    }

    #[test]
    fn co_timing_counts_the_overlap_within_the_tolerance() {
        let s = |a: u64, b: u64| Span { start: a, end: b };
        assert_eq!(co_timed(&[s(10, 20)], &[s(0, 15)], 0), 0.5);
        assert_eq!(co_timed(&[s(10, 20)], &[s(0, 15)], 5), 1.0);
        assert_eq!(co_timed(&[s(10, 20), s(30, 40)], &[s(35, 50)], 0), 0.25);
        assert_eq!(co_timed(&[s(10, 20)], &[], 0), 0.0);
    }
}
