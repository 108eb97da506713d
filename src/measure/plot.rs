//! Drawing measurements as 8-bit RGB pictures: a histogram plot with axes,
//! ticks, labels and a legend, and a difference heatmap; PNG bytes through the
//! png crate. Writing the file is the caller's business.

use rayon::prelude::*;

use super::compare::check_comparable;
use super::font;
use crate::error::Error;
use crate::raster::Raster;

/// An RGB colour, 8 bits per channel.
pub type Rgb = [u8; 3];

/// An 8-bit RGB picture, row-major, 3 bytes per pixel.
#[derive(Clone, Debug, PartialEq)]
pub struct Canvas {
    pub width: usize,
    pub height: usize,
    pub pixels: Vec<u8>,
}

impl Canvas {
    pub fn new(width: usize, height: usize, fill: Rgb) -> Canvas {
        Canvas { width, height, pixels: fill.repeat(width * height) }
    }

    pub fn get(&self, x: usize, y: usize) -> Rgb {
        let i = 3 * (y * self.width + x);
        [self.pixels[i], self.pixels[i + 1], self.pixels[i + 2]]
    }

    /// Sets one pixel; points outside the canvas are ignored.
    pub fn set(&mut self, x: i64, y: i64, c: Rgb) {
        if x >= 0 && y >= 0 && (x as usize) < self.width && (y as usize) < self.height {
            let i = 3 * (y as usize * self.width + x as usize);
            self.pixels[i..i + 3].copy_from_slice(&c);
        }
    }

    fn rect(&mut self, x0: i64, y0: i64, x1: i64, y1: i64, c: Rgb) {
        for y in y0..=y1 {
            for x in x0..=x1 {
                self.set(x, y, c);
            }
        }
    }

    /// A line `thickness` pixels wide (Bresenham's algorithm, each point a square).
    fn line(&mut self, (x0, y0): (i64, i64), (x1, y1): (i64, i64), thickness: i64, c: Rgb) {
        let (dx, dy) = ((x1 - x0).abs(), -(y1 - y0).abs());
        let (sx, sy) = (if x0 < x1 { 1 } else { -1 }, if y0 < y1 { 1 } else { -1 });
        let (mut x, mut y, mut err) = (x0, y0, dx + dy);
        let lo = -(thickness - 1) / 2;
        loop {
            self.rect(x + lo, y + lo, x + lo + thickness - 1, y + lo + thickness - 1, c);
            if x == x1 && y == y1 {
                break;
            }
            let e2 = 2 * err;
            if e2 >= dy {
                err += dy;
                x += sx;
            }
            if e2 <= dx {
                err += dx;
                y += sy;
            }
        }
    }

    /// Draws `text` with its top-left corner at `(x, y)`, each font pixel `scale`² pixels.
    fn text(&mut self, x: i64, y: i64, text: &str, scale: i64, c: Rgb) {
        for (i, ch) in text.chars().enumerate() {
            let left = x + (i * font::ADVANCE) as i64 * scale;
            for gy in 0..font::GLYPH_HEIGHT {
                for gx in 0..font::GLYPH_WIDTH {
                    if font::is_set(ch, gx, gy) {
                        let (px, py) = (left + gx as i64 * scale, y + gy as i64 * scale);
                        self.rect(px, py, px + scale - 1, py + scale - 1, c);
                    }
                }
            }
        }
    }

    /// The picture as an 8-bit RGB PNG.
    pub fn to_png(&self) -> Result<Vec<u8>, Error> {
        let fail = |e: png::EncodingError| Error::Encode { format: "PNG", reason: e.to_string() };
        let mut out = Vec::new();
        let mut encoder = png::Encoder::new(&mut out, self.width as u32, self.height as u32);
        encoder.set_color(png::ColorType::Rgb);
        encoder.set_depth(png::BitDepth::Eight);
        let mut writer = encoder.write_header().map_err(fail)?;
        writer.write_image_data(&self.pixels).map_err(fail)?;
        writer.finish().map_err(fail)?;
        Ok(out)
    }
}

/// One curve of a histogram plot.
#[derive(Clone, Debug)]
pub struct Series {
    pub name: String,
    pub colour: Rgb,
    /// Counts of equal bins spanning the plot's x range.
    pub counts: Vec<u64>,
}

/// The usual colour of a channel called `name` in plots.
pub fn channel_colour(name: &str) -> Rgb {
    match name {
        "r" => [210, 40, 40],
        "g" => [30, 150, 50],
        "b" => [40, 80, 220],
        "alpha" => [150, 150, 150],
        _ => [20, 20, 20],
    }
}

const PLOT_WIDTH: usize = 800;
const PLOT_HEIGHT: usize = 500;
const LEFT: i64 = 100;
const RIGHT: i64 = 30;
const TOP: i64 = 50;
const BOTTOM: i64 = 70;
const SCALE: i64 = 2;
const INK: Rgb = [0, 0, 0];
const GRID: Rgb = [225, 225, 225];

/// A histogram plot, 800×500: one polyline per series through the bin
/// centres (the bins split `x_range` evenly; height ∝ count, linear from 0 to
/// the largest count of any series), x axis labelled `x_label` with a tick
/// and label at each of `x_ticks` (values inside `x_range`), y axis labelled
/// `count` with ticks at a round step (1, 2 or 5 × 10ᵏ), light grid lines and
/// a legend in the top right.
pub fn histogram_plot(series: &[Series], x_range: (f64, f64), x_ticks: &[f64], x_label: &str) -> Canvas {
    let mut c = Canvas::new(PLOT_WIDTH, PLOT_HEIGHT, [255, 255, 255]);
    let (x0, x1) = (LEFT, PLOT_WIDTH as i64 - RIGHT);
    let (y0, y1) = (TOP, PLOT_HEIGHT as i64 - BOTTOM);
    let glyph_h = font::GLYPH_HEIGHT as i64 * SCALE;
    let text_w = |t: &str| font::text_width(t) as i64 * SCALE;
    let peak = series.iter().flat_map(|s| s.counts.iter().copied()).max().unwrap_or(0).max(1);
    let step = round_step(peak as f64 / 5.0);
    let top = (peak as f64 / step).ceil() * step;
    let to_y = |v: f64| y1 - ((v / top) * (y1 - y0) as f64).round() as i64;
    // Grid and y ticks.
    let mut v = 0.0;
    while v <= top + step * 1e-9 {
        let y = to_y(v);
        c.line((x0, y), (x1, y), 1, GRID);
        c.line((x0 - 6, y), (x0, y), 1, INK);
        let label = count_label(v);
        c.text(x0 - 10 - text_w(&label), y - glyph_h / 2, &label, SCALE, INK);
        v += step;
    }
    // x ticks.
    let span = if x_range.1 > x_range.0 { x_range.1 - x_range.0 } else { 1.0 };
    for &v in x_ticks {
        let t = (v - x_range.0) / span;
        let x = x0 + (t * (x1 - x0) as f64).round() as i64;
        c.line((x, y0), (x, y1), 1, GRID);
        c.line((x, y1), (x, y1 + 6), 1, INK);
        let label = value_label(v);
        c.text(x - text_w(&label) / 2, y1 + 12, &label, SCALE, INK);
    }
    // Axes and their labels.
    c.line((x0, y0), (x0, y1), 2, INK);
    c.line((x0, y1), (x1, y1), 2, INK);
    c.text((x0 + x1) / 2 - text_w(x_label) / 2, y1 + 20 + glyph_h, x_label, SCALE, INK);
    c.text(x0 - text_w("count") / 2, y0 - 14 - glyph_h, "count", SCALE, INK);
    // Curves.
    for s in series {
        let n = s.counts.len().max(1);
        let points: Vec<(i64, i64)> = s
            .counts
            .iter()
            .enumerate()
            .map(|(i, &k)| {
                (x0 + (((i as f64 + 0.5) / n as f64) * (x1 - x0) as f64).round() as i64, to_y(k as f64))
            })
            .collect();
        for pair in points.windows(2) {
            c.line(pair[0], pair[1], 2, s.colour);
        }
        if let [only] = points[..] {
            c.line(only, only, 3, s.colour);
        }
    }
    // Legend: a line sample and the name per series, in a framed box.
    let widest = series.iter().map(|s| text_w(&s.name)).max().unwrap_or(0);
    let (bw, bh) = (widest + 60, series.len() as i64 * (glyph_h + 8) + 12);
    let (bx, by) = (x1 - bw - 10, y0 + 10);
    c.rect(bx, by, bx + bw, by + bh, [255, 255, 255]);
    for (x, y, x2, y2) in [
        (bx, by, bx + bw, by),
        (bx, by + bh, bx + bw, by + bh),
        (bx, by, bx, by + bh),
        (bx + bw, by, bx + bw, by + bh),
    ] {
        c.line((x, y), (x2, y2), 1, INK);
    }
    for (i, s) in series.iter().enumerate() {
        let y = by + 10 + i as i64 * (glyph_h + 8);
        c.line((bx + 10, y + glyph_h / 2), (bx + 40, y + glyph_h / 2), 3, s.colour);
        c.text(bx + 48, y, &s.name, SCALE, INK);
    }
    c
}

/// The round step (1, 2 or 5 × 10ᵏ) at or above `raw`.
fn round_step(raw: f64) -> f64 {
    let raw = raw.max(1.0);
    let magnitude = 10f64.powf(raw.log10().floor());
    [1.0, 2.0, 5.0, 10.0].iter().map(|m| m * magnitude).find(|&s| s >= raw).unwrap_or(10.0 * magnitude)
}

/// `1500000` → `1.5m`, `12000` → `12k`, `800` → `800`.
fn count_label(v: f64) -> String {
    let (scaled, suffix) = if v >= 1e6 {
        (v / 1e6, "m")
    } else if v >= 1e4 {
        (v / 1e3, "k")
    } else {
        (v, "")
    };
    let text = format!("{scaled:.2}");
    format!("{}{suffix}", text.trim_end_matches('0').trim_end_matches('.'))
}

/// A tick value with at most three decimals and no trailing zeros.
fn value_label(v: f64) -> String {
    let text = format!("{v:.3}");
    let trimmed = text.trim_end_matches('0').trim_end_matches('.');
    if trimmed == "-0" { "0".into() } else { trimmed.to_string() }
}

/// The heatmap colour ramp: `t ∈ [0, 1]` through black (0), purple (0.25),
/// red (0.5), orange (0.75) and white (1), linearly between these stops in
/// 8-bit sRGB codes.
pub fn ramp(t: f64) -> Rgb {
    const STOPS: [Rgb; 5] = [[0, 0, 0], [90, 20, 140], [210, 30, 40], [250, 160, 20], [255, 255, 255]];
    let t = if t.is_nan() { 1.0 } else { t.clamp(0.0, 1.0) } * 4.0;
    let i = (t.floor() as usize).min(3);
    let f = t - i as f64;
    let (a, b) = (STOPS[i], STOPS[i + 1]);
    [0, 1, 2].map(|k| (f64::from(a[k]) + f * (f64::from(b[k]) - f64::from(a[k]))).round() as u8)
}

/// The difference heatmap of two comparable rasters, one pixel per pixel:
///
/// ```text
/// d(x, y) = max over planes of |a − b|       (alpha included)
/// colour  = ramp(d / max d)                  (black everywhere when max d = 0)
/// ```
///
/// so the largest difference is white and equal pixels are black; a NaN
/// difference is drawn white.
pub fn heatmap(a: &Raster, b: &Raster) -> Result<Canvas, Error> {
    check_comparable(a, b).map_err(|e| Error::Unsupported(e.to_string()))?;
    let (w, h) = (a.width(), a.height());
    let diffs: Vec<f64> = (0..w * h)
        .into_par_iter()
        .map(|i| {
            a.planes().iter().zip(b.planes()).fold(0.0f64, |m, (p, q)| {
                let d = (f64::from(p.as_slice()[i]) - f64::from(q.as_slice()[i])).abs();
                if d.is_nan() || m.is_nan() { f64::NAN } else { m.max(d) }
            })
        })
        .collect();
    let peak = diffs.iter().copied().filter(|d| d.is_finite()).fold(0.0, f64::max);
    let pixels: Vec<u8> = diffs
        .par_iter()
        .flat_map_iter(|&d| ramp(if peak > 0.0 || d.is_nan() { d / peak } else { 0.0 }))
        .collect();
    Ok(Canvas { width: w, height: h, pixels })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::raster::{Encoding, Layout, Plane};

    #[test]
    fn ramp_ends_and_stops() {
        assert_eq!(ramp(0.0), [0, 0, 0]);
        assert_eq!(ramp(1.0), [255, 255, 255]);
        assert_eq!(ramp(0.5), [210, 30, 40]);
        assert_eq!(ramp(f64::NAN), [255, 255, 255]);
        assert_eq!(ramp(2.0), [255, 255, 255]);
    }

    #[test]
    fn labels_and_steps() {
        assert_eq!(round_step(3.2), 5.0);
        assert_eq!(round_step(120.0), 200.0);
        assert_eq!(round_step(0.1), 1.0);
        assert_eq!(count_label(1_500_000.0), "1.5m");
        assert_eq!(count_label(12_000.0), "12k");
        assert_eq!(count_label(800.0), "800");
        assert_eq!(value_label(0.25), "0.25");
        assert_eq!(value_label(255.0), "255");
    }

    #[test]
    fn the_plot_draws_curves_axes_and_text() {
        let series = vec![
            Series { name: "r".into(), colour: channel_colour("r"), counts: vec![0, 10, 40, 10, 0] },
            Series { name: "g".into(), colour: channel_colour("g"), counts: vec![5; 5] },
        ];
        let c = histogram_plot(&series, (-0.5, 255.5), &[0.0, 128.0, 255.0], "code");
        assert_eq!((c.width, c.height, c.pixels.len()), (800, 500, 800 * 500 * 3));
        let count = |col: Rgb| {
            (0..c.height)
                .flat_map(|y| (0..c.width).map(move |x| (x, y)))
                .filter(|&(x, y)| c.get(x, y) == col)
                .count()
        };
        assert!(count(channel_colour("r")) > 500, "red curve missing");
        assert!(count(channel_colour("g")) > 500, "green curve missing");
        // The axis corner is ink.
        assert_eq!(c.get(LEFT as usize, (PLOT_HEIGHT as i64 - BOTTOM) as usize), INK);
        let png = c.to_png().unwrap();
        assert_eq!(&png[..8], b"\x89PNG\r\n\x1a\n");
    }

    #[test]
    fn heatmap_scales_to_the_largest_difference() {
        let gray = |v: Vec<f32>| {
            Raster::new(vec![Plane::from_vec(2, 2, v).unwrap()], Layout::Gray, Encoding::Srgb).unwrap()
        };
        let c = heatmap(&gray(vec![0.0, 0.0, 0.0, 0.0]), &gray(vec![0.0, 0.1, 0.2, -0.2])).unwrap();
        assert_eq!((c.get(0, 0), c.get(0, 1), c.get(1, 1)), ([0, 0, 0], [255, 255, 255], [255, 255, 255]));
        assert_eq!(c.get(1, 0), ramp(0.5));
        let same = heatmap(&gray(vec![0.5; 4]), &gray(vec![0.5; 4])).unwrap();
        assert!(same.pixels.iter().all(|&b| b == 0));
        let big = Raster::new(vec![Plane::zeros(3, 2).unwrap()], Layout::Gray, Encoding::Srgb).unwrap();
        assert!(heatmap(&big, &gray(vec![0.0; 4])).is_err());
    }
}
