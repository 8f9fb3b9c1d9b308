//! `snapshot` pictures checked pixel by pixel against a scene whose truth is known in closed form,
//! reading the picture the way a person does: through its axis labels.
//!
//! The scene (generated here with the test kit): complex white noise of −60 dBFS over 250 kS/s
//! at 100 MHz, a steady tone exactly on an FFT bin centre at −20 dBFS, and a −25 dBFS tone keyed
//! on from 1.0 s to 1.5 s, with `--start` 2031-04-17T06:30:00Z. The expected pixel positions
//! come from the labels the picture itself prints (their coordinates in the SVG drawn with the
//! same layout), fitted as straight lines (the axis mapping documented in `output::picture`),
//! never from the drawing code's variables; the colours come from the PNG.

mod common;

use bandwarden::testkit::{keyed_band, Keyed};
use bandwarden::units::undb;
use std::path::{Path, PathBuf};
use std::process::Command;

const RATE: f64 = 250_000.0;
const CENTER: f64 = 100e6;
const FFT: usize = 1024;
/// 154 bins above the centre: a bin centre, so the peak bin holds the whole tone (no
/// scalloping; Harris 1978).
const TONE_HZ: f64 = 154.0 * RATE / FFT as f64;
const TONE_DBFS: f64 = -20.0;
const BURST_HZ: f64 = -50_000.0;
const BURST_DBFS: f64 = -25.0;
const BURST_ON_S: (f64, f64) = (1.0, 1.5);
const SECONDS: f64 = 3.0;

fn bin() -> &'static str {
    common::BIN
}

fn scratch(name: &str) -> PathBuf {
    let dir = Path::new(env!("CARGO_TARGET_TMPDIR")).join("pictures");
    std::fs::create_dir_all(&dir).unwrap();
    dir.join(name)
}

/// The scene as cf32_le, written once per test process.
fn scene() -> PathBuf {
    static WRITTEN: std::sync::OnceLock<PathBuf> = std::sync::OnceLock::new();
    WRITTEN.get_or_init(write_scene).clone()
}

fn write_scene() -> PathBuf {
    let path = scratch("scene.cf32");
    let n = (SECONDS * RATE) as usize;
    let on = |i: u64| {
        let t = i as f64 / RATE;
        t >= BURST_ON_S.0 && t < BURST_ON_S.1
    };
    let always = |_: u64| true;
    let tones = [
        Keyed { offset_hz: TONE_HZ, level_dbfs: TONE_DBFS, on: &always },
        Keyed { offset_hz: BURST_HZ, level_dbfs: BURST_DBFS, on: &on },
    ];
    let x = keyed_band(n, RATE, undb(-60.0), &tones, 7);
    let mut bytes = Vec::with_capacity(n * 8);
    for s in &x {
        bytes.extend_from_slice(&s.re.to_le_bytes());
        bytes.extend_from_slice(&s.im.to_le_bytes());
    }
    std::fs::write(&path, bytes).unwrap();
    path
}

fn snapshot(input: &Path, out: &Path) {
    let st = Command::new(bin())
        .arg("snapshot")
        .arg(input)
        .args(["--format", "cf32_le", "--rate", "250k", "--center", "100M"])
        .args(["--start", "2031-04-17T06:30:00Z", "--fft", "1024", "--scale", "-100:-10"])
        .args(["--width", "900", "--height", "700", "--threads", "1", "-o"])
        .arg(out)
        .output()
        .unwrap();
    assert!(st.status.success(), "{}", String::from_utf8_lossy(&st.stderr));
}

/// `(x, y, anchor, text)` of every text element of an SVG written by the program.
fn svg_texts(svg: &str) -> Vec<(f64, f64, String, String)> {
    let attr = |tag: &str, name: &str| -> Option<String> {
        let at = tag.find(&format!(" {name}=\""))? + name.len() + 3;
        Some(tag[at..].split('"').next()?.to_string())
    };
    svg.split("<text ")
        .skip(1)
        .filter_map(|chunk| {
            let (tag, rest) = chunk.split_once('>')?;
            let tag = &format!(" {tag}");
            if tag.contains("rotate(") {
                return None;
            }
            let text = rest.split("</text>").next()?.trim().to_string();
            let x = attr(tag, "x")?.parse().ok()?;
            let y = attr(tag, "y")?.parse().ok()?;
            Some((x, y, attr(tag, "text-anchor")?, text))
        })
        .collect()
}

/// Least-squares line `pixel = a + b·value` through `(value, pixel)` points.
fn fit(points: &[(f64, f64)]) -> (f64, f64) {
    assert!(points.len() >= 2, "too few labels: {points:?}");
    let n = points.len() as f64;
    let (sx, sy) = points.iter().fold((0.0, 0.0), |a, p| (a.0 + p.0, a.1 + p.1));
    let (mx, my) = (sx / n, sy / n);
    let sxy: f64 = points.iter().map(|p| (p.0 - mx) * (p.1 - my)).sum();
    let sxx: f64 = points.iter().map(|p| (p.0 - mx).powi(2)).sum();
    let b = sxy / sxx;
    (my - b * mx, b)
}

struct Png {
    w: usize,
    h: usize,
    rgb: Vec<u8>,
}

impl Png {
    fn read(path: &Path) -> Png {
        let decoder = png::Decoder::new(std::fs::File::open(path).unwrap());
        let mut reader = decoder.read_info().unwrap();
        let mut buf = vec![0; reader.output_buffer_size()];
        let info = reader.next_frame(&mut buf).unwrap();
        assert_eq!(info.color_type, png::ColorType::Rgb);
        Png { w: info.width as usize, h: info.height as usize, rgb: buf }
    }
    fn at(&self, x: usize, y: usize) -> [u8; 3] {
        let i = (y * self.w + x) * 3;
        [self.rgb[i], self.rgb[i + 1], self.rgb[i + 2]]
    }
    fn luminance(&self, x: usize, y: usize) -> f64 {
        let [r, g, b] = self.at(x, y);
        0.2126 * r as f64 + 0.7152 * g as f64 + 0.0722 * b as f64
    }
}

fn clock_seconds(label: &str) -> Option<f64> {
    let mut p = label.split(':');
    let (h, m, s) = (p.next()?, p.next()?, p.next()?);
    Some(h.parse::<f64>().ok()? * 3600.0 + m.parse::<f64>().ok()? * 60.0 + s.parse::<f64>().ok()?)
}

#[test]
fn tone_burst_and_colour_sit_where_the_labels_say() {
    let input = scene();
    let (png_path, svg_path) = (scratch("scene.png"), scratch("scene.svg"));
    snapshot(&input, &png_path);
    snapshot(&input, &svg_path);
    let texts = svg_texts(&std::fs::read_to_string(&svg_path).unwrap());
    let img = Png::read(&png_path);
    assert_eq!((img.w, img.h), (900, 700));

    // Frequency labels (MHz) stand centred under the waterfall at their tick.
    let freq: Vec<(f64, f64)> = texts
        .iter()
        .filter(|t| t.2 == "middle" && t.3.contains('.') && !t.3.contains(':'))
        .filter_map(|t| Some((t.3.parse::<f64>().ok()? * 1e6, t.0)))
        .filter(|p| (p.0 - CENTER).abs() < RATE)
        .collect();
    let (fa, fb) = fit(&freq);
    let x_of = |hz: f64| fa + fb * hz;
    // Time labels (UTC) stand left of the waterfall at their tick.
    let time: Vec<(f64, f64)> = texts
        .iter()
        .filter_map(|t| Some((clock_seconds(&t.3)? - (6.0 * 3600.0 + 30.0 * 60.0), t.1)))
        .collect();
    let (ta, tb) = fit(&time);
    let y_of = |s: f64| ta + tb * s;
    let (top, bottom) = (y_of(0.0).ceil() as usize + 2, y_of(SECONDS).floor() as usize - 2);
    let (left, right) =
        (x_of(CENTER - RATE / 2.0) as usize + 2, x_of(CENTER + RATE / 2.0) as usize - 2);

    // The steady tone is the brightest column, at the x its frequency has on the axis.
    let column = |x: usize| (top..bottom).map(|y| img.luminance(x, y)).sum::<f64>();
    let sums: Vec<(usize, f64)> = (left..right).map(|x| (x, column(x))).collect();
    let top_sum = sums.iter().map(|s| s.1).fold(0.0, f64::max);
    // Neighbouring pixel columns showing the same data column tie: take the middle of the tie.
    let ties: Vec<f64> =
        sums.iter().filter(|s| s.1 >= 0.999 * top_sum).map(|s| s.0 as f64).collect();
    let brightest = ties.iter().sum::<f64>() / ties.len() as f64;
    let expect = x_of(CENTER + TONE_HZ);
    assert!((brightest - expect).abs() <= 1.0, "tone at x {brightest}, axis says {expect:.1}");

    // The burst lights its column from the y of 1.0 s to the y of 1.5 s.
    let xb = x_of(CENTER + BURST_HZ).round() as usize;
    let lit: Vec<usize> = (top..bottom)
        .filter(|&y| (xb - 1..=xb + 1).map(|x| img.luminance(x, y)).fold(0.0, f64::max) > 120.0)
        .collect();
    let (on, off) = (*lit.first().unwrap() as f64, *lit.last().unwrap() as f64);
    let (e_on, e_off) = (y_of(BURST_ON_S.0), y_of(BURST_ON_S.1));
    assert!((on - e_on).abs() <= 3.0, "burst starts at y {on}, axis says {e_on:.1}");
    assert!((off - e_off).abs() <= 3.0, "burst ends at y {off}, axis says {e_off:.1}");

    // The colour bar: its labels (right of it) give level → y; the tone's pixel
    // colour is found on the bar at the height labelled with the tone's level.
    let bar: Vec<(f64, f64)> = texts
        .iter()
        .filter(|t| t.2 != "middle" && t.0 > right as f64)
        .filter_map(|t| Some((t.3.parse::<f64>().ok()?, t.1)))
        .collect();
    let (ba, bb) = fit(&bar);
    // The bar stands left of its labels (past the tick marks).
    let label_x = bar_label_x(&texts, right as f64);
    let bx = (label_x - 20.0) as usize;
    // The tone's own pixel: the brightest within two pixels of where the axis puts it (its
    // neighbours show the window's skirt, 6 dB down for Hann one bin away; Harris 1978).
    let mid = (top + bottom) / 2;
    let tx = (expect.round() as usize - 2..=expect.round() as usize + 2)
        .max_by(|&a, &b| img.luminance(a, mid).total_cmp(&img.luminance(b, mid)))
        .unwrap();
    let tone_colour = img.at(tx, mid);
    let dist = |c: [u8; 3]| {
        c.iter().zip(tone_colour).map(|(a, b)| (*a as f64 - b as f64).powi(2)).sum::<f64>()
    };
    let (y_lo, y_hi) = (ba + bb * -10.0, ba + bb * -100.0);
    let y_match = (y_lo.ceil() as usize..y_hi.floor() as usize)
        .min_by(|&a, &b| dist(img.at(bx, a)).total_cmp(&dist(img.at(bx, b))))
        .unwrap();
    let level = (y_match as f64 - ba) / bb;
    assert!((level - TONE_DBFS).abs() <= 1.0, "the tone's colour reads {level:.2} dBFS on the bar");
}

fn bar_label_x(texts: &[(f64, f64, String, String)], right: f64) -> f64 {
    let numeric = |t: &&(f64, f64, String, String)| t.3.parse::<f64>().is_ok();
    texts
        .iter()
        .filter(|t| t.2 != "middle" && t.0 > right)
        .filter(numeric)
        .map(|t| t.0)
        .fold(f64::MAX, f64::min)
}

#[test]
fn the_same_input_gives_the_same_bytes() {
    let input = scene();
    for ext in ["png", "svg"] {
        let (a, b) = (scratch(&format!("d1.{ext}")), scratch(&format!("d2.{ext}")));
        snapshot(&input, &a);
        snapshot(&input, &b);
        assert!(std::fs::read(&a).unwrap() == std::fs::read(&b).unwrap(), "{ext} differs");
    }
}
