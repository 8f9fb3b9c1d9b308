//! What every picture shares: the embedded font, the two file formats and their encoders, and
//! drawing's errors turned into ours.
//!
//! Pictures are drawn with `plotters` (axes, ticks, text, lines) on its bitmap back end for PNG
//! and its SVG back end for SVG, from the same drawing code, so both files have the same layout.
//! Text is set in DejaVu Sans, embedded in the program (`assets/fonts`, with its licence), so a
//! PNG looks the same on every machine and needs no system font; an SVG names the family
//! `sans-serif` and leaves the face to the viewer. Encoding is deterministic: the same picture
//! gives the same bytes (no time stamps, fixed compression).

use anyhow::{anyhow, bail, Result};
use plotters::prelude::*;
use plotters::style::FontStyle;
use std::sync::Once;

/// The face every picture's text is set in (Bitstream Vera licence, see `assets/fonts`).
const FONT: &[u8] = include_bytes!("../../../assets/fonts/DejaVuSans.ttf");
/// The family name the drawing code asks for.
pub const FAMILY: &str = "sans-serif";

/// Registers the embedded font with the drawing library, once per process.
pub fn register_font() {
    static ONCE: Once = Once::new();
    ONCE.call_once(|| {
        // The font is ours and known good; a failure would leave text undrawn, not crash.
        let _ = plotters::style::register_font(FAMILY, FontStyle::Normal, FONT);
    });
}

/// The file a picture is written as.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum PictureFormat {
    Png,
    Svg,
}

impl PictureFormat {
    /// From the file's extension (`.png`, `.svg`, any case).
    pub fn from_path(path: &str) -> Result<PictureFormat> {
        let lower = path.to_ascii_lowercase();
        if lower.ends_with(".png") {
            Ok(PictureFormat::Png)
        } else if lower.ends_with(".svg") {
            Ok(PictureFormat::Svg)
        } else {
            bail!(
                "cannot tell the picture format of '{}'; name the file .png or .svg",
                crate::messages::sanitize(path)
            )
        }
    }
}

/// Smallest and largest picture side accepted, pixels: below the lower bound the axes' labels no
/// longer fit; above the upper one a PNG grows past what viewers open comfortably.
pub const MIN_SIDE: u32 = 320;
pub const MAX_SIDE: u32 = 8000;

/// Draws on an RGB canvas and encodes it as PNG.
pub fn render_png(
    width: u32,
    height: u32,
    draw: impl FnOnce(&DrawingArea<BitMapBackend<'_>, plotters::coord::Shift>) -> Result<()>,
) -> Result<Vec<u8>> {
    register_font();
    let mut rgb = vec![255u8; width as usize * height as usize * 3];
    {
        let root = BitMapBackend::with_buffer(&mut rgb, (width, height)).into_drawing_area();
        draw(&root)?;
        root.present().map_err(drawing)?;
    }
    encode_png(width, height, &rgb)
}

/// Draws on an SVG canvas.
pub fn render_svg(
    width: u32,
    height: u32,
    draw: impl FnOnce(&DrawingArea<SVGBackend<'_>, plotters::coord::Shift>) -> Result<()>,
) -> Result<Vec<u8>> {
    register_font();
    let mut text = String::new();
    {
        let root = SVGBackend::with_string(&mut text, (width, height)).into_drawing_area();
        draw(&root)?;
        root.present().map_err(drawing)?;
    }
    Ok(text.into_bytes())
}

/// 8-bit RGB PNG, default compression, no time chunk: the same pixels give the same bytes.
pub fn encode_png(width: u32, height: u32, rgb: &[u8]) -> Result<Vec<u8>> {
    let mut out = Vec::new();
    {
        let mut enc = png::Encoder::new(&mut out, width, height);
        enc.set_color(png::ColorType::Rgb);
        enc.set_depth(png::BitDepth::Eight);
        let mut w = enc.write_header().map_err(|e| anyhow!("cannot encode the PNG: {e}"))?;
        w.write_image_data(rgb).map_err(|e| anyhow!("cannot encode the PNG: {e}"))?;
    }
    Ok(out)
}

/// A drawing error as ours.
pub fn drawing<E: std::fmt::Display>(e: E) -> anyhow::Error {
    anyhow!("cannot draw the picture: {e}")
}

/// A linear axis `low..high` whose ticks are the given values: the ticks of [`crate::output::picture::ticks`],
/// chosen for the reader (round clock times, round frequencies), not the library's own. Values
/// map to pixels as the library's own linear axes do.
#[derive(Clone, Debug)]
pub struct TickedAxis {
    pub low: f64,
    pub high: f64,
    pub ticks: Vec<f64>,
}

impl plotters::coord::ranged1d::Ranged for TickedAxis {
    type FormatOption = plotters::coord::ranged1d::DefaultFormatting;
    type ValueType = f64;

    fn map(&self, v: &f64, limit: (i32, i32)) -> i32 {
        let span = self.high - self.low;
        if span == 0.0 {
            return (limit.0 + limit.1) / 2;
        }
        let r = (v - self.low) / span;
        let len = (limit.1 - limit.0) as f64;
        let offset = if len >= 0.0 { (len * r + 1e-3).floor() } else { (len * r - 1e-3).ceil() };
        limit.0 + offset.clamp(-1e9, 1e9) as i32
    }

    fn key_points<Hint: plotters::coord::ranged1d::KeyPointHint>(&self, hint: Hint) -> Vec<f64> {
        if hint.weight().allow_light_points() && hint.max_num_points() < self.ticks.len() {
            return Vec::new();
        }
        self.ticks.clone()
    }

    fn range(&self) -> std::ops::Range<f64> {
        self.low..self.high
    }
}

/// Fills the pixel rectangle `x × y` of `root` with the colour map from its top (`t` = 1) to its
/// bottom (`t` = 0): pixel row `j` of `h` shows `t = 1 − (j + ½)/h`, so a colour bar beside a
/// linear axis shows at each height the colour of the value the axis gives there.
pub fn draw_gradient<DB: DrawingBackend>(
    root: &DrawingArea<DB, plotters::coord::Shift>,
    (x, y): (std::ops::Range<i32>, std::ops::Range<i32>),
    map: crate::output::picture::colour::MapKind,
) -> Result<()> {
    let (w, h) = ((x.end - x.start).max(1) as usize, (y.end - y.start).max(1) as usize);
    let mut rgb = vec![0u8; w * h * 3];
    for (j, line) in rgb.chunks_mut(w * 3).enumerate() {
        let c = map.rgb(1.0 - (j as f64 + 0.5) / h as f64);
        for px in line.chunks_mut(3) {
            px.copy_from_slice(&c);
        }
    }
    let element = plotters::element::BitMapElement::with_owned_buffer(
        (x.start, y.start),
        (w as u32, h as u32),
        rgb,
    )
    .ok_or_else(|| drawing("the colour bar has the wrong size"))?;
    root.draw(&element).map_err(drawing)
}
