//! Keys and mouse to intents. One table drives both the key handling and the help overlay, so
//! the help can never list a key that does nothing, nor miss one that does something.

use crossterm::event::{
    KeyCode, KeyEvent, KeyEventKind, KeyModifiers, MouseButton, MouseEvent, MouseEventKind,
};

/// What the user wants, independent of the key that asked for it.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Intent {
    Quit,
    ToggleHelp,
    CloseHelp,
    Freeze,
    MarkerLeft(u16),
    MarkerRight(u16),
    MarkerToStrongest,
    MarkerToNext,
    MarkerToPrev,
    SetRefMarker,
    ClearRefMarker,
    ZoomIn,
    ZoomOut,
    PanLeft,
    PanRight,
    FullSpan,
    CentreOnMarker,
    FftLarger,
    FftSmaller,
    WindowNext,
    WindowPrev,
    RefUp,
    RefDown,
    RangeWider,
    RangeNarrower,
    AutoRange,
    ResetHold,
    NextColourMap,
    TogglePlan,
    RowsSlower,
    RowsFaster,
    /// Time cursor back / forward by this many waterfall lines (freezes the display).
    TimeBack(u16),
    TimeForward(u16),
    /// Leave the history and go live.
    TimeLive,
    ToggleUtc,
    SortNext,
    ToggleChannels,
    /// Arm / clear the alarm of the marker's channel.
    ToggleAlarm,
    /// Write the traces and the table to files.
    WriteEvidence,
    /// Write a waterfall picture (PNG) of the history.
    WritePicture,
    /// Marker to the screen cell clicked (column, row).
    PointAt(u16, u16),
    /// Reference marker to the screen cell clicked.
    PointRefAt(u16, u16),
}

/// A key as the table names it.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Key {
    Char(char),
    Code(KeyCode),
    Shifted(KeyCode),
}

/// One line of the help overlay and the keys behind it.
pub struct HelpRow {
    pub keys: &'static str,
    pub what: &'static str,
    pub bindings: &'static [(Key, Intent)],
}

use Intent as I;
use Key::{Char as C, Code, Shifted};

/// Every key binding, in the order the help overlay lists them.
pub const HELP: &[HelpRow] = &[
    HelpRow {
        keys: "q  ?",
        what: "quit (also Ctrl-C); ? this help (Esc closes it)",
        bindings: &[(C('q'), I::Quit), (C('?'), I::ToggleHelp)],
    },
    HelpRow {
        keys: "space",
        what: "freeze / resume (input goes on, history keeps filling)",
        bindings: &[(C(' '), I::Freeze)],
    },
    HelpRow {
        keys: ", . < >",
        what: "time cursor back / forward a line (< > ten lines)",
        bindings: &[
            (C(','), I::TimeBack(1)),
            (C('.'), I::TimeForward(1)),
            (C('<'), I::TimeBack(10)),
            (C('>'), I::TimeForward(10)),
        ],
    },
    HelpRow {
        keys: "End  u",
        what: "leave the history, live again; u: UTC / input time",
        bindings: &[(Code(KeyCode::End), I::TimeLive), (C('u'), I::ToggleUtc)],
    },
    HelpRow {
        keys: "← →",
        what: "move the marker a column (Shift: ten)",
        bindings: &[
            (Code(KeyCode::Left), I::MarkerLeft(1)),
            (Code(KeyCode::Right), I::MarkerRight(1)),
            (Shifted(KeyCode::Left), I::MarkerLeft(10)),
            (Shifted(KeyCode::Right), I::MarkerRight(10)),
        ],
    },
    HelpRow {
        keys: "n  p  b",
        what: "marker to next / previous table row; b: strongest",
        bindings: &[
            (C('n'), I::MarkerToNext),
            (C('p'), I::MarkerToPrev),
            (C('b'), I::MarkerToStrongest),
        ],
    },
    HelpRow {
        keys: "r  t",
        what: "signals by frequency / by power; t: signals / channels",
        bindings: &[(C('r'), I::SortNext), (C('t'), I::ToggleChannels)],
    },
    HelpRow {
        keys: "A  e  g",
        what: "alarm on the marker's channel; e: evidence; g: picture",
        bindings: &[
            (C('A'), I::ToggleAlarm),
            (C('e'), I::WriteEvidence),
            (C('g'), I::WritePicture),
        ],
    },
    HelpRow {
        keys: "m  M",
        what: "drop / lift the reference marker (Δ and band readout)",
        bindings: &[(C('m'), I::SetRefMarker), (C('M'), I::ClearRefMarker)],
    },
    HelpRow {
        keys: "+  -",
        what: "zoom in / out around the marker",
        bindings: &[(C('+'), I::ZoomIn), (C('='), I::ZoomIn), (C('-'), I::ZoomOut)],
    },
    HelpRow {
        keys: "[  ]",
        what: "pan down / up in frequency by a quarter view",
        bindings: &[(C('['), I::PanLeft), (C(']'), I::PanRight)],
    },
    HelpRow {
        keys: "0  c",
        what: "whole span / centre the view on the marker",
        bindings: &[(C('0'), I::FullSpan), (C('c'), I::CentreOnMarker)],
    },
    HelpRow {
        keys: "f F w W",
        what: "FFT ×2 / ÷2 (finer / coarser RBW); next / previous window",
        bindings: &[
            (C('f'), I::FftLarger),
            (C('F'), I::FftSmaller),
            (C('w'), I::WindowNext),
            (C('W'), I::WindowPrev),
        ],
    },
    HelpRow {
        keys: "↑ ↓ PgUp PgDn",
        what: "reference level ±5 dB; dynamic range ±10 dB",
        bindings: &[
            (Code(KeyCode::Up), I::RefUp),
            (Code(KeyCode::Down), I::RefDown),
            (Code(KeyCode::PageUp), I::RangeWider),
            (Code(KeyCode::PageDown), I::RangeNarrower),
        ],
    },
    HelpRow {
        keys: "a  x",
        what: "automatic scale on / off; x: restart peak and min hold",
        bindings: &[(C('a'), I::AutoRange), (C('x'), I::ResetHold)],
    },
    HelpRow {
        keys: "k  o",
        what: "next colour map; o: channel-plan row on / off",
        bindings: &[(C('k'), I::NextColourMap), (C('o'), I::TogglePlan)],
    },
    HelpRow {
        keys: "s  S",
        what: "waterfall slower / faster (rows per second)",
        bindings: &[(C('s'), I::RowsSlower), (C('S'), I::RowsFaster)],
    },
];

/// The mouse line of the help overlay (mouse events are not in the key table).
pub const MOUSE_HELP: (&str, &str) =
    ("click", "left: marker (table row: its signal); right: ref marker");

/// The intent of a key event, if any. `help_open` makes Esc close the help instead of quitting.
pub fn intent_for_key(ev: KeyEvent, help_open: bool) -> Option<Intent> {
    if ev.kind == KeyEventKind::Release {
        return None;
    }
    if ev.modifiers.contains(KeyModifiers::CONTROL) {
        return matches!(ev.code, KeyCode::Char('c') | KeyCode::Char('C')).then_some(Intent::Quit);
    }
    if ev.code == KeyCode::Esc {
        return Some(if help_open { Intent::CloseHelp } else { Intent::Quit });
    }
    let shifted = ev.modifiers.contains(KeyModifiers::SHIFT);
    HELP.iter().flat_map(|row| row.bindings.iter()).find_map(|(key, intent)| {
        let hit = match *key {
            Key::Char(c) => ev.code == KeyCode::Char(c),
            Key::Code(code) => ev.code == code && !shifted,
            Key::Shifted(code) => ev.code == code && shifted,
        };
        hit.then_some(*intent)
    })
}

/// The intent of a mouse event, if any.
pub fn intent_for_mouse(ev: MouseEvent) -> Option<Intent> {
    match ev.kind {
        MouseEventKind::Down(MouseButton::Left) | MouseEventKind::Drag(MouseButton::Left) => {
            Some(Intent::PointAt(ev.column, ev.row))
        }
        MouseEventKind::Down(MouseButton::Right) => Some(Intent::PointRefAt(ev.column, ev.row)),
        _ => None,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn key(code: KeyCode, mods: KeyModifiers) -> KeyEvent {
        KeyEvent::new(code, mods)
    }

    #[test]
    fn every_binding_resolves_to_its_own_intent() {
        for row in HELP {
            for (k, intent) in row.bindings {
                let ev = match *k {
                    Key::Char(c) if c.is_ascii_uppercase() => {
                        key(KeyCode::Char(c), KeyModifiers::SHIFT)
                    }
                    Key::Char(c) => key(KeyCode::Char(c), KeyModifiers::NONE),
                    Key::Code(code) => key(code, KeyModifiers::NONE),
                    Key::Shifted(code) => key(code, KeyModifiers::SHIFT),
                };
                assert_eq!(intent_for_key(ev, false), Some(*intent), "{}", row.keys);
            }
        }
    }

    /// Every intent a key can ask for. The match below stops compiling when a variant is added,
    /// as a reminder to list it here (and so in the help).
    fn keyed_intents() -> Vec<Intent> {
        let all = vec![
            I::Quit,
            I::ToggleHelp,
            I::Freeze,
            I::MarkerLeft(1),
            I::MarkerRight(1),
            I::MarkerToStrongest,
            I::MarkerToNext,
            I::MarkerToPrev,
            I::SetRefMarker,
            I::ClearRefMarker,
            I::ZoomIn,
            I::ZoomOut,
            I::PanLeft,
            I::PanRight,
            I::FullSpan,
            I::CentreOnMarker,
            I::FftLarger,
            I::FftSmaller,
            I::WindowNext,
            I::WindowPrev,
            I::RefUp,
            I::RefDown,
            I::RangeWider,
            I::RangeNarrower,
            I::AutoRange,
            I::ResetHold,
            I::NextColourMap,
            I::TogglePlan,
            I::RowsSlower,
            I::RowsFaster,
            I::TimeBack(1),
            I::TimeForward(1),
            I::TimeLive,
            I::ToggleUtc,
            I::SortNext,
            I::ToggleChannels,
            I::ToggleAlarm,
            I::WriteEvidence,
            I::WritePicture,
        ];
        for i in &all {
            match i {
                I::CloseHelp | I::PointAt(..) | I::PointRefAt(..) => unreachable!(),
                I::Quit | I::ToggleHelp | I::Freeze | I::MarkerLeft(_) | I::MarkerRight(_) => {}
                I::MarkerToStrongest | I::MarkerToNext | I::SetRefMarker | I::ClearRefMarker => {}
                I::MarkerToPrev | I::TimeBack(_) | I::TimeForward(_) | I::TimeLive => {}
                I::ToggleUtc | I::SortNext | I::ToggleChannels | I::ToggleAlarm => {}
                I::WriteEvidence | I::WritePicture => {}
                I::ZoomIn | I::ZoomOut | I::PanLeft | I::PanRight | I::FullSpan => {}
                I::CentreOnMarker | I::FftLarger | I::FftSmaller | I::WindowNext => {}
                I::WindowPrev | I::RefUp | I::RefDown | I::RangeWider | I::RangeNarrower => {}
                I::AutoRange | I::ResetHold | I::NextColourMap | I::TogglePlan => {}
                I::RowsSlower | I::RowsFaster => {}
            }
        }
        all
    }

    #[test]
    fn the_help_lists_every_keyed_intent() {
        let bound: Vec<Intent> = HELP.iter().flat_map(|r| r.bindings.iter().map(|b| b.1)).collect();
        for i in keyed_intents() {
            assert!(bound.contains(&i), "{i:?} has no key, so the help cannot list it");
        }
    }

    #[test]
    fn the_readme_documents_every_key_row() {
        let readme = include_str!(concat!(env!("CARGO_MANIFEST_DIR"), "/README.md"));
        for row in HELP {
            assert!(readme.contains(row.what), "README.md does not describe: {}", row.what);
        }
        assert!(readme.contains(MOUSE_HELP.1));
    }

    #[test]
    fn no_key_is_bound_twice() {
        let keys: Vec<Key> = HELP.iter().flat_map(|r| r.bindings.iter().map(|b| b.0)).collect();
        for (i, k) in keys.iter().enumerate() {
            assert!(!keys[i + 1..].contains(k), "{k:?} bound twice");
        }
    }

    #[test]
    fn quitting_and_help() {
        let ctrl_c = key(KeyCode::Char('c'), KeyModifiers::CONTROL);
        assert_eq!(intent_for_key(ctrl_c, false), Some(Intent::Quit));
        assert_eq!(intent_for_key(ctrl_c, true), Some(Intent::Quit));
        // Plain c centres; other Ctrl chords do nothing.
        assert_eq!(
            intent_for_key(key(KeyCode::Char('c'), KeyModifiers::NONE), false),
            Some(Intent::CentreOnMarker)
        );
        assert_eq!(intent_for_key(key(KeyCode::Char('f'), KeyModifiers::CONTROL), false), None);
        let esc = key(KeyCode::Esc, KeyModifiers::NONE);
        assert_eq!(intent_for_key(esc, true), Some(Intent::CloseHelp));
        assert_eq!(intent_for_key(esc, false), Some(Intent::Quit));
        let mut release = key(KeyCode::Char('q'), KeyModifiers::NONE);
        release.kind = KeyEventKind::Release;
        assert_eq!(intent_for_key(release, false), None);
    }

    #[test]
    fn shift_arrows_move_ten() {
        assert_eq!(
            intent_for_key(key(KeyCode::Right, KeyModifiers::SHIFT), false),
            Some(Intent::MarkerRight(10))
        );
        assert_eq!(
            intent_for_key(key(KeyCode::Left, KeyModifiers::NONE), false),
            Some(Intent::MarkerLeft(1))
        );
    }

    #[test]
    fn clicks_place_markers() {
        let ev = |kind| MouseEvent { kind, column: 7, row: 3, modifiers: KeyModifiers::NONE };
        assert_eq!(
            intent_for_mouse(ev(MouseEventKind::Down(MouseButton::Left))),
            Some(Intent::PointAt(7, 3))
        );
        assert_eq!(
            intent_for_mouse(ev(MouseEventKind::Down(MouseButton::Right))),
            Some(Intent::PointRefAt(7, 3))
        );
        assert_eq!(intent_for_mouse(ev(MouseEventKind::Moved)), None);
    }
}
