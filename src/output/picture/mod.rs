//! Pictures: the waterfall (`snapshot`, the monitor's `g` key), `report`'s heat map, and what
//! they share: colour maps, the drawing canvas with its embedded font, axis ticks, rows held in
//! bounded memory and the emissions outlined on them.

pub mod canvas;
pub mod colour;
pub mod heatmap;
pub mod held_rows;
pub mod marks;
pub mod snapshot;
pub mod ticks;
pub mod waterfall;
