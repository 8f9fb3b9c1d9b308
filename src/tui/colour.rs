//! Colours for the monitor in the three depths a terminal may offer, and the waterfall's maps.
//!
//! The depth comes from the environment: `NO_COLOR` (any non-empty value, per the convention at
//! no-color.org) gives a monochrome screen, `COLORTERM=truecolor|24bit` gives 24-bit colour, and
//! anything else the 256-colour palette, which every terminal of the last decades has.
//!
//! The waterfall quantises levels to [`LEVELS`] steps. Fewer steps mean longer runs of cells that
//! share one colour, so fewer colour codes go over the wire; 32 steps of an 80 dB range are
//! 2.5 dB each, finer than the eye separates in a colour map.
//!
//! viridis, magma and inferno were published by their authors (Nathaniel J. Smith, Stefan van der
//! Walt, Eric Firing) under CC0. The tables below keep 33 of their 256 entries, sampled from
//! matplotlib 3.11.2 by `scripts/colour-maps.py`; we interpolate between them.

pub use crate::output::picture::colour::MapKind;
use ratatui::style::{Color, Modifier, Style};

/// Waterfall colour steps.
pub const LEVELS: usize = 32;

/// Monochrome waterfall ramp, from nothing to full; one character per cell.
pub const MONO_RAMP: [&str; 7] = [" ", "·", ":", "░", "▒", "▓", "█"];

/// How many colours the terminal can show.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Depth {
    TrueColour,
    Palette256,
    Mono,
}

impl Depth {
    /// Reads the depth from `COLORTERM` and `NO_COLOR` values.
    pub fn from_env(colorterm: Option<&str>, no_color: Option<&str>) -> Depth {
        if no_color.is_some_and(|v| !v.is_empty()) {
            return Depth::Mono;
        }
        match colorterm.map(str::to_ascii_lowercase).as_deref() {
            Some("truecolor") | Some("24bit") => Depth::TrueColour,
            _ => Depth::Palette256,
        }
    }

    /// Reads the depth from this process's environment.
    pub fn detect() -> Depth {
        let ct = std::env::var("COLORTERM").ok();
        let nc = std::env::var("NO_COLOR").ok();
        Depth::from_env(ct.as_deref(), nc.as_deref())
    }

    pub fn name(self) -> &'static str {
        match self {
            Depth::TrueColour => "24-bit",
            Depth::Palette256 => "256",
            Depth::Mono => "mono",
        }
    }
}

/// The waterfall's colours, quantised to the terminal's depth.
#[derive(Clone, Debug, PartialEq)]
pub struct Palette {
    pub depth: Depth,
    pub map: MapKind,
    colours: Vec<Color>,
}

impl Palette {
    pub fn new(depth: Depth, map: MapKind) -> Palette {
        let colours = (0..LEVELS)
            .map(|i| {
                let [r, g, b] = map.rgb(i as f64 / (LEVELS - 1) as f64);
                match depth {
                    Depth::TrueColour => Color::Rgb(r, g, b),
                    Depth::Palette256 => Color::Indexed(nearest_xterm256(r, g, b)),
                    Depth::Mono => Color::Reset,
                }
            })
            .collect();
        Palette { depth, map, colours }
    }

    /// Step of a level between `bottom` and `bottom + range` (dB), clamped to the map's ends.
    pub fn step(level_db: f32, bottom_db: f64, range_db: f64) -> u8 {
        if !level_db.is_finite() {
            return 0;
        }
        let t = (level_db as f64 - bottom_db) / range_db;
        (t * LEVELS as f64).floor().clamp(0.0, (LEVELS - 1) as f64) as u8
    }

    pub fn colour(&self, step: u8) -> Color {
        self.colours[(step as usize).min(LEVELS - 1)]
    }

    /// The monochrome character for a step.
    pub fn mono_symbol(step: u8) -> &'static str {
        let i = step as usize * MONO_RAMP.len() / LEVELS;
        MONO_RAMP[i.min(MONO_RAMP.len() - 1)]
    }
}

/// Colours of everything that is not the waterfall. They are palette indices even on a 24-bit
/// terminal: `38;5;n` is eight bytes shorter than `38;2;r;g;b`, and these few colours need no
/// more. In monochrome, traces differ by intensity and by glyph instead (see the spectrum).
///
/// The trace and marker colours are the Okabe–Ito set (Okabe & Ito 2008, "Color Universal
/// Design"), chosen so that each stays distinct to viewers with any of the common colour-vision
/// deficiencies (protan, deutan, tritan) and against both ends of the waterfall's maps: sky blue
/// for the average, orange for the current row, bluish green for the holds, reddish purple for
/// the marker and yellow for the reference marker, each taken to its nearest xterm-256 entry.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Theme {
    pub current: Style,
    pub average: Style,
    pub hold: Style,
    pub marker: Style,
    pub ref_marker: Style,
    pub grid: Style,
    pub label: Style,
    pub title: Style,
    pub warn: Style,
    pub plan: Style,
    pub header: Style,
    /// The noise floor's mark on the spectrum.
    pub floor: Style,
    /// No colours: traces are told apart by glyph.
    pub mono: bool,
}

/// The Okabe–Ito colours used for traces and markers (sRGB, from the published set).
pub const OKABE_ITO: [(&str, [u8; 3]); 5] = [
    ("sky blue", [86, 180, 233]),
    ("orange", [230, 159, 0]),
    ("bluish green", [0, 158, 115]),
    ("reddish purple", [204, 121, 167]),
    ("yellow", [240, 228, 66]),
];

impl Theme {
    pub fn new(depth: Depth) -> Theme {
        let plain = Style::new();
        if depth == Depth::Mono {
            return Theme {
                current: plain,
                average: plain.add_modifier(Modifier::BOLD),
                hold: plain.add_modifier(Modifier::DIM),
                marker: plain.add_modifier(Modifier::BOLD),
                ref_marker: plain,
                grid: plain.add_modifier(Modifier::DIM),
                label: plain,
                title: plain.add_modifier(Modifier::BOLD),
                warn: plain.add_modifier(Modifier::REVERSED),
                plan: plain,
                header: plain.add_modifier(Modifier::BOLD),
                floor: plain.add_modifier(Modifier::DIM),
                mono: true,
            };
        }
        let fg = |n: u8| plain.fg(Color::Indexed(n));
        let okabe = |i: usize| {
            let [r, g, b] = OKABE_ITO[i].1;
            plain.fg(Color::Indexed(nearest_xterm256(r, g, b)))
        };
        Theme {
            current: okabe(1),
            average: okabe(0),
            hold: okabe(2),
            marker: okabe(3),
            ref_marker: okabe(4),
            grid: fg(238),
            label: fg(250),
            title: fg(255).add_modifier(Modifier::BOLD),
            warn: fg(16).bg(Color::Indexed(214)),
            plan: fg(250),
            header: fg(252).add_modifier(Modifier::BOLD),
            floor: fg(110),
            mono: false,
        }
    }
}

/// The xterm 256-colour index closest to an RGB colour (squared distance in RGB, common
/// practice): the 6×6×6 cube at levels 0, 95, 135, 175, 215, 255 or the 24-step grey ramp
/// 8, 18, …, 238.
pub fn nearest_xterm256(r: u8, g: u8, b: u8) -> u8 {
    const CUBE: [i32; 6] = [0, 95, 135, 175, 215, 255];
    let near = |v: u8| -> usize {
        (0..6).min_by_key(|&i| (CUBE[i] - v as i32).abs()).expect("six levels")
    };
    let (ri, gi, bi) = (near(r), near(g), near(b));
    let dist = |cr: i32, cg: i32, cb: i32| {
        let (dr, dg, db) = (cr - r as i32, cg - g as i32, cb - b as i32);
        dr * dr + dg * dg + db * db
    };
    let cube_index = 16 + 36 * ri + 6 * gi + bi;
    let cube_d = dist(CUBE[ri], CUBE[gi], CUBE[bi]);
    let mean = (r as i32 + g as i32 + b as i32) / 3;
    let gi_ramp = ((mean - 8 + 5) / 10).clamp(0, 23);
    let grey = 8 + 10 * gi_ramp;
    let grey_d = dist(grey, grey, grey);
    if grey_d < cube_d {
        (232 + gi_ramp) as u8
    } else {
        cube_index as u8
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn depth_follows_the_environment() {
        assert_eq!(Depth::from_env(Some("truecolor"), None), Depth::TrueColour);
        assert_eq!(Depth::from_env(Some("24bit"), None), Depth::TrueColour);
        assert_eq!(Depth::from_env(Some("yes"), None), Depth::Palette256);
        assert_eq!(Depth::from_env(None, None), Depth::Palette256);
        // no-color.org: set and non-empty disables colour, whatever else is set.
        assert_eq!(Depth::from_env(Some("truecolor"), Some("1")), Depth::Mono);
        assert_eq!(Depth::from_env(Some("truecolor"), Some("")), Depth::TrueColour);
    }

    #[test]
    fn xterm_palette_matches_known_entries() {
        // The xterm 256-colour layout (common practice): 16 + 36r + 6g + b over the levels
        // 0/95/135/175/215/255, greys 232..=255 at 8 + 10k.
        assert_eq!(nearest_xterm256(0, 0, 0), 16);
        assert_eq!(nearest_xterm256(255, 255, 255), 231);
        assert_eq!(nearest_xterm256(255, 0, 0), 196);
        assert_eq!(nearest_xterm256(95, 135, 175), 16 + 36 + 2 * 6 + 3);
        assert_eq!(nearest_xterm256(128, 128, 128), 244);
        assert_eq!(nearest_xterm256(8, 8, 8), 232);
    }

    #[test]
    fn steps_clamp_and_quantise() {
        assert_eq!(Palette::step(-200.0, -100.0, 80.0), 0);
        assert_eq!(Palette::step(0.0, -100.0, 80.0), (LEVELS - 1) as u8);
        assert_eq!(Palette::step(-60.0, -100.0, 80.0), 16);
        assert_eq!(Palette::step(f32::NAN, -100.0, 80.0), 0);
        let p = Palette::new(Depth::TrueColour, MapKind::Viridis);
        assert_eq!(p.colour(0), Color::Rgb(68, 1, 84));
        let p = Palette::new(Depth::Palette256, MapKind::Grey);
        assert!(matches!(p.colour(31), Color::Indexed(i) if i >= 250 || i == 231));
        assert_eq!(Palette::mono_symbol(0), " ");
        assert_eq!(Palette::mono_symbol((LEVELS - 1) as u8), "█");
    }

    #[test]
    fn trace_colours_are_the_okabe_ito_set_and_stay_apart() {
        let t = Theme::new(Depth::Palette256);
        let styles = [t.average, t.current, t.hold, t.marker, t.ref_marker];
        let idx: Vec<u8> = styles
            .iter()
            .map(|s| match s.fg {
                Some(Color::Indexed(i)) => i,
                other => panic!("{other:?}"),
            })
            .collect();
        // Nearest xterm entries of sky blue (86,180,233), orange (230,159,0), bluish green
        // (0,158,115), reddish purple (204,121,167), yellow (240,228,66).
        assert_eq!(idx, vec![74, 178, 35, 175, 221]);
        for (i, a) in idx.iter().enumerate() {
            assert!(!idx[i + 1..].contains(a), "two traces share colour {a}");
        }
        assert!(Theme::new(Depth::Mono).mono && !t.mono);
    }
}
