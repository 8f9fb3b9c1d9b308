//! The colour maps of the waterfall, shared by the pictures and the live monitor (which
//! quantises them to the terminal's depth in `tui::colour`): perceptually uniform maps sampled
//! from matplotlib (CC0) and a neutral grey ramp of our own.

/// The waterfall's colour maps, in cycling order.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum MapKind {
    Viridis,
    Magma,
    Inferno,
    Grey,
}

impl MapKind {
    pub const ALL: [MapKind; 4] =
        [MapKind::Viridis, MapKind::Magma, MapKind::Inferno, MapKind::Grey];

    pub fn next(self) -> MapKind {
        let i = MapKind::ALL.iter().position(|m| *m == self).unwrap_or(0);
        MapKind::ALL[(i + 1) % MapKind::ALL.len()]
    }

    pub fn name(self) -> &'static str {
        match self {
            MapKind::Viridis => "viridis",
            MapKind::Magma => "magma",
            MapKind::Inferno => "inferno",
            MapKind::Grey => "grey",
        }
    }

    /// Colour at `t` in 0..=1, interpolated between the table's entries.
    pub fn rgb(self, t: f64) -> [u8; 3] {
        let table: &[[u8; 3]] = match self {
            MapKind::Viridis => &VIRIDIS,
            MapKind::Magma => &MAGMA,
            MapKind::Inferno => &INFERNO,
            MapKind::Grey => &GREY,
        };
        let x = t.clamp(0.0, 1.0) * (table.len() - 1) as f64;
        let i = (x.floor() as usize).min(table.len() - 2);
        let f = x - i as f64;
        let mut out = [0u8; 3];
        for (c, o) in out.iter_mut().enumerate() {
            let v = table[i][c] as f64 * (1.0 - f) + table[i + 1][c] as f64 * f;
            *o = v.round() as u8;
        }
        out
    }
}

// Sampled from matplotlib 3.11.2 by scripts/colour-maps.py.
#[rustfmt::skip]
const VIRIDIS: [[u8; 3]; 33] = [
    [68, 1, 84], [71, 13, 96], [72, 24, 106], [72, 35, 116], [71, 45, 123], [69, 55, 129],
    [66, 64, 134], [62, 73, 137], [59, 82, 139], [55, 91, 141], [51, 99, 141], [47, 107, 142],
    [44, 114, 142], [41, 122, 142], [38, 130, 142], [35, 137, 142], [33, 145, 140], [31, 152, 139],
    [31, 160, 136], [34, 167, 133], [40, 174, 128], [50, 182, 122], [63, 188, 115], [78, 195, 107],
    [94, 201, 98], [112, 207, 87], [132, 212, 75], [152, 216, 62], [173, 220, 48], [194, 223, 35],
    [216, 226, 25], [236, 229, 27], [253, 231, 37],
];
#[rustfmt::skip]
const MAGMA: [[u8; 3]; 33] = [
    [0, 0, 4], [3, 3, 18], [10, 8, 34], [19, 13, 52], [29, 17, 71], [41, 17, 90],
    [54, 16, 107], [68, 15, 118], [81, 18, 124], [93, 23, 127], [106, 28, 129], [118, 33, 129],
    [131, 38, 129], [144, 42, 129], [156, 46, 127], [170, 51, 125], [183, 55, 121], [196, 60, 117],
    [208, 65, 111], [220, 72, 105], [231, 82, 99], [239, 93, 94], [245, 107, 92], [249, 121, 93],
    [252, 137, 97], [253, 152, 105], [254, 167, 114], [254, 182, 124], [254, 196, 136], [254, 211, 149],
    [253, 226, 163], [252, 240, 178], [252, 253, 191],
];
#[rustfmt::skip]
const INFERNO: [[u8; 3]; 33] = [
    [0, 0, 4], [4, 3, 18], [11, 7, 36], [21, 11, 55], [33, 12, 74], [47, 10, 91],
    [61, 9, 101], [74, 12, 107], [87, 16, 110], [100, 21, 110], [113, 25, 110], [125, 30, 109],
    [138, 34, 106], [151, 39, 102], [163, 44, 97], [176, 49, 91], [188, 55, 84], [199, 62, 76],
    [210, 70, 68], [219, 80, 59], [228, 90, 49], [235, 102, 40], [241, 115, 29], [246, 128, 19],
    [249, 142, 9], [251, 157, 7], [252, 172, 17], [251, 188, 33], [249, 203, 53], [245, 219, 76],
    [242, 234, 105], [243, 246, 138], [252, 255, 164],
];
/// Our own neutral map: a straight ramp from near-black to near-white.
const GREY: [[u8; 3]; 2] = [[18, 18, 18], [238, 238, 238]];

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn maps_run_dark_to_light_and_hit_their_ends() {
        for m in MapKind::ALL {
            let lum =
                |c: [u8; 3]| 0.2126 * c[0] as f64 + 0.7152 * c[1] as f64 + 0.0722 * c[2] as f64;
            let mut last = -1.0;
            for i in 0..=20 {
                let l = lum(m.rgb(i as f64 / 20.0));
                assert!(l > last, "{m:?} not monotonic in luminance at {i}");
                last = l;
            }
        }
        // First and last entries of matplotlib's viridis table (0.267004, 0.004874, 0.329415)
        // and (0.993248, 0.906157, 0.143936), scaled to 8 bits.
        assert_eq!(MapKind::Viridis.rgb(0.0), [68, 1, 84]);
        assert_eq!(MapKind::Viridis.rgb(1.0), [253, 231, 37]);
    }
}
