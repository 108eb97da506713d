//! `rotate` by angles that are not quarter turns: inverse mapping with
//! interpolation (quarter turns are exact moves, in the parent module).

use super::kernels::Filter;
use crate::error::{Error, ParamError};
use crate::ops::params::Args;
use crate::ops::{Domain, Operator, filter_planes_indexed};
use crate::raster::{Plane, Raster};
use crate::tile;

/// Rotation about the image centre by any angle, clockwise as seen.
///
/// ```text
/// (dx, dy) = output pixel centre − output centre         (y down)
/// (u, v)   = (cos θ·dx + sin θ·dy, −sin θ·dx + cos θ·dy)  (the inverse rotation)
/// out(x, y) = Σ k(sx − i) k(sy − j) · in(i, j),  (sx, sy) = input centre + (u, v) − ½
/// ```
///
/// k is the nearest, bilinear or bicubic (Catmull–Rom) kernel; samples outside
/// the image are the fill (a colour, or transparent). Each row's source
/// positions are a start and a step (no trigonometry per pixel); where all of
/// a pixel's taps lie inside the image (most of each row) they are read
/// straight from the source rows, column sums first, in f32 with the
/// kernel's weights as polynomials, and only pixels near the edges test each
/// tap against the bounds. With expand the canvas
/// grows to hold the whole turned image: ⌈w|cos θ| + h|sin θ|⌉ × ⌈w|sin θ| + h|cos θ|⌉.
#[derive(Debug)]
pub struct Rotate {
    radians: f64,
    filter: Filter,
    expand: bool,
    fill: Option<[f32; 3]>,
}

/// Builds the operator for a non-quarter angle from `rotate`'s parameters.
pub fn build(angle: f64, a: &Args) -> Result<Box<dyn Operator>, ParamError> {
    let filter = Filter::from_name(a.choice("filter")?)
        .ok_or_else(|| ParamError::new("unknown filter; expected nearest, bilinear or bicubic"))?;
    Ok(Box::new(Rotate {
        radians: angle.to_radians(),
        filter,
        expand: a.bool("expand")?,
        fill: a.colour("fill")?,
    }))
}

impl Rotate {
    /// A turn by `degrees` clockwise with `filter` (nearest, bilinear or
    /// bicubic), for operators that turn images as one part of their work.
    pub fn new(degrees: f64, filter: Filter, expand: bool, fill: Option<[f32; 3]>) -> Rotate {
        Rotate { radians: degrees.to_radians(), filter, expand, fill }
    }

    fn size(&self, w: usize, h: usize) -> (usize, usize) {
        if !self.expand {
            return (w, h);
        }
        let (s, c) = (self.radians.sin().abs(), self.radians.cos().abs());
        let (wf, hf) = (w as f64, h as f64);
        // The tolerance keeps exact sizes (e.g. 45° of a square) from gaining a pixel to rounding.
        let side = |v: f64| ((v - 1e-6).ceil() as usize).max(1);
        (side(wf * c + hf * s), side(wf * s + hf * c))
    }

    fn sample(&self, src: &Plane, out_w: usize, out_h: usize, fill: f32) -> Result<Plane, Error> {
        // One copy of the loops per kernel, so the weights are inlined polynomials.
        match self.filter {
            Filter::Nearest => self.sample_nearest(src, out_w, out_h, fill),
            Filter::Bilinear => self.sample_taps(src, out_w, out_h, fill, |t| [1.0 - t, t]),
            Filter::Bicubic => self.sample_taps(src, out_w, out_h, fill, catmull_rom),
            Filter::Lanczos3 => {
                self.sample_taps(src, out_w, out_h, fill, |t| taps_of::<6>(Filter::Lanczos3, t))
            }
            f => self.sample_taps(src, out_w, out_h, fill, |t| taps_of::<4>(f, t)),
        }
    }

    /// The source position of output pixel (0, y) and its step per output column:
    /// (sx, sy) = start + x · step.
    fn row_start(&self, src: &Plane, out_w: usize, out_h: usize, y: usize) -> ([f64; 2], [f64; 2]) {
        let (s, c) = self.radians.sin_cos();
        let (icx, icy) = (src.width() as f64 / 2.0, src.height() as f64 / 2.0);
        let (ocx, ocy) = (out_w as f64 / 2.0, out_h as f64 / 2.0);
        let (dx, dy) = (0.5 - ocx, y as f64 + 0.5 - ocy);
        ([icx + c * dx + s * dy - 0.5, icy - s * dx + c * dy - 0.5], [c, -s])
    }

    fn sample_nearest(&self, src: &Plane, out_w: usize, out_h: usize, fill: f32) -> Result<Plane, Error> {
        let (w, h) = (src.width() as f64, src.height() as f64);
        let mut out = Plane::zeros(out_w, out_h)?;
        tile::for_each_band(&mut out, tile::band_rows(out_w, 0), |y0, band| {
            for (row_i, row) in band.chunks_exact_mut(out_w).enumerate() {
                let ([ax, ay], [kx, ky]) = self.row_start(src, out_w, out_h, y0 + row_i);
                for (x, o) in row.iter_mut().enumerate() {
                    let (i, j) = ((ax + kx * x as f64 + 0.5).floor(), (ay + ky * x as f64 + 0.5).floor());
                    *o = if i >= 0.0 && j >= 0.0 && i < w && j < h {
                        src.get(i as usize, j as usize)
                    } else {
                        fill
                    };
                }
            }
        });
        Ok(out)
    }

    /// Interpolation with `N` taps per axis: for a source position s, taps
    /// ⌊s⌋ + 1 − N/2 ..= ⌊s⌋ + N/2 with `weights(s − ⌊s⌋)`.
    ///
    /// Each row is split where its taps are all inside the source: there the
    /// taps are read straight from the source rows (no bounds tests per tap),
    /// and only the few pixels near the image's edges take the path that
    /// substitutes the fill for outside taps.
    fn sample_taps<const N: usize>(
        &self,
        src: &Plane,
        out_w: usize,
        out_h: usize,
        fill: f32,
        weights: impl Fn(f32) -> [f32; N] + Sync,
    ) -> Result<Plane, Error> {
        let (w, h) = (src.width(), src.height());
        let data = src.as_slice();
        let back = (N / 2 - 1) as isize;
        let mut out = Plane::zeros(out_w, out_h)?;
        tile::for_each_band(&mut out, tile::band_rows(out_w, 0), |y0, band| {
            for (row_i, row) in band.chunks_exact_mut(out_w).enumerate() {
                let ([ax, ay], [kx, ky]) = self.row_start(src, out_w, out_h, y0 + row_i);
                let (xa, xb) = interior(ax, ay, kx, ky, out_w, [w, h], N);
                let edge = |x: usize| -> f32 {
                    let (sx, sy) = (ax + kx * x as f64, ay + ky * x as f64);
                    let (fx, fy) = (sx.floor(), sy.floor());
                    let (wx, wy) = (weights((sx - fx) as f32), weights((sy - fy) as f32));
                    let (i0, j0) = (fx as isize - back, fy as isize - back);
                    let at = |i: isize, j: isize| -> f32 {
                        if i < 0 || j < 0 || i >= w as isize || j >= h as isize {
                            fill
                        } else {
                            data[j as usize * w + i as usize]
                        }
                    };
                    let mut acc = 0.0f32;
                    for (j, &wj) in wy.iter().enumerate() {
                        let r: f32 = wx
                            .iter()
                            .enumerate()
                            .map(|(k, a)| a * at(i0 + k as isize, j0 + j as isize))
                            .sum();
                        acc += wj * r;
                    }
                    acc
                };
                for x in (0..xa).chain(xb..out_w) {
                    row[x] = edge(x);
                }
                interior_span(&mut row[xa..xb], xa, [ax, ay], [kx, ky], data, w, &weights);
            }
        });
        Ok(out)
    }
}

/// Samples `out[k]` = output column `x0 + k` of a row whose taps are all
/// inside the source (see [`interior`]): straight reads of `N` samples from
/// `N` source rows, no tests per tap.
fn interior_span<const N: usize>(
    out: &mut [f32],
    x0: usize,
    [ax, ay]: [f64; 2],
    [kx, ky]: [f64; 2],
    data: &[f32],
    w: usize,
    weights: &impl Fn(f32) -> [f32; N],
) {
    let back = N / 2 - 1;
    for (k, o) in out.iter_mut().enumerate() {
        let x = (x0 + k) as f64;
        let (sx, sy) = (ax + kx * x, ay + ky * x);
        // Inside, 0 ≤ N/2 − 1 ≤ sx < w and likewise sy, so truncation is the floor
        // and the values fit an i32 (planes are smaller than 2³¹ samples a side).
        let (fx, fy) = (sx as i32, sy as i32);
        let wx = weights((sx - f64::from(fx)) as f32);
        let wy = weights((sy - f64::from(fy)) as f32);
        let base = (fy as usize - back) * w + fx as usize - back;
        let window = &data[base..base + (N - 1) * w + N];
        // Columns first (N lanes at once), then one dot product with the column weights.
        let mut columns = [0.0f32; N];
        for (j, &wj) in wy.iter().enumerate() {
            let taps = &window[j * w..j * w + N];
            for (c, &v) in columns.iter_mut().zip(taps) {
                *c += wj * v;
            }
        }
        *o = wx.iter().zip(&columns).map(|(a, b)| a * b).sum();
    }
}

/// Catmull–Rom weights (cubic with B = 0, C = ½) of the taps at distances
/// t + 1, t, 1 − t, 2 − t from the sample position, t in [0, 1).
fn catmull_rom(t: f32) -> [f32; 4] {
    let t2 = t * t;
    let t3 = t2 * t;
    [-0.5 * t3 + t2 - 0.5 * t, 1.5 * t3 - 2.5 * t2 + 1.0, -1.5 * t3 + 2.0 * t2 + 0.5 * t, 0.5 * t3 - 0.5 * t2]
}

/// The weights of `N` taps of `filter` around a sample at fraction `t` past a tap.
fn taps_of<const N: usize>(filter: Filter, t: f32) -> [f32; N] {
    let back = (N / 2 - 1) as f64;
    std::array::from_fn(|k| filter.eval(f64::from(t) + back - k as f64) as f32)
}

/// The output columns `xa..xb` of a row whose source positions
/// (ax + kx·x, ay + ky·x) have all `taps` taps inside a source of `size`:
/// s ≥ taps/2 − 1 and s < size − taps/2 on both axes. The bounds are solved
/// in real numbers and pulled one column inwards against rounding, then
/// checked with the same arithmetic the sampling uses.
fn interior(
    ax: f64,
    ay: f64,
    kx: f64,
    ky: f64,
    out_w: usize,
    size: [usize; 2],
    taps: usize,
) -> (usize, usize) {
    let lo = (taps / 2 - 1) as f64;
    let fits = |x: usize| {
        let (sx, sy) = (ax + kx * x as f64, ay + ky * x as f64);
        sx >= lo && sy >= lo && sx < (size[0] - taps / 2) as f64 && sy < (size[1] - taps / 2) as f64
    };
    if size[0] < taps || size[1] < taps {
        return (0, 0);
    }
    let (mut x0, mut x1) = (0.0f64, out_w as f64);
    for (a, k, n) in [(ax, kx, size[0]), (ay, ky, size[1])] {
        let hi = (n - taps / 2) as f64;
        if k == 0.0 {
            if !(a >= lo && a < hi) {
                return (0, 0);
            }
            continue;
        }
        // lo ≤ a + k·x < hi
        let (p, q) = ((lo - a) / k, (hi - a) / k);
        let (p, q) = if k > 0.0 { (p, q) } else { (q, p) };
        x0 = x0.max(p);
        x1 = x1.min(q);
    }
    if x1 <= x0 {
        return (0, 0);
    }
    let mut xa = ((x0.ceil() + 1.0).max(0.0) as usize).min(out_w);
    let mut xb = ((x1.floor() - 1.0).max(0.0) as usize).min(out_w);
    while xa < xb && !fits(xa) {
        xa += 1;
    }
    while xb > xa && !fits(xb - 1) {
        xb -= 1;
    }
    (xa, xb.max(xa))
}

impl Operator for Rotate {
    fn domain(&self) -> Domain {
        if self.filter == Filter::Nearest { Domain::Any } else { Domain::Linear }
    }

    fn output_size(&self, width: usize, height: usize) -> Result<(usize, usize), Error> {
        Ok(self.size(width, height))
    }

    fn apply(&self, raster: Raster) -> Result<Raster, Error> {
        let (ow, oh) = self.size(raster.width(), raster.height());
        let raster = if self.fill.is_none() { super::with_alpha(raster)? } else { raster };
        let fills = super::fill_values(&raster, self.fill);
        let layout = raster.layout();
        let n = layout.colour_channels();
        let alpha_fill = fills.last().copied().unwrap_or(1.0);
        // Colour planes arrive premultiplied by alpha, so their fill is too.
        filter_planes_indexed(raster, |i, p| {
            let fill = if layout.has_alpha() && i < n { fills[i] * alpha_fill } else { fills[i] };
            self.sample(p, ow, oh, fill)
        })
    }
}

#[cfg(test)]
mod tests {
    //! Edge cases: 1×1 images, transparent fill, expand sizes, a full turn;
    //! the split of each row into edge and interior pixels against a naive
    //! per-pixel sampler (every tap tested), at angles near 0°, 90° and 180°.
    use super::*;
    use crate::raster::{Encoding, Layout};

    fn rotate(text: &str, r: Raster) -> Raster {
        crate::pipeline::Step::parse(text).unwrap().op.apply(r).unwrap()
    }

    fn gray(w: usize, h: usize, f: impl FnMut(usize, usize) -> f32) -> Raster {
        Raster::new(vec![Plane::from_fn(w, h, f).unwrap()], Layout::Gray, Encoding::Linear).unwrap()
    }

    /// The definition: every output pixel from the inverse map in f64, every tap
    /// through `Filter::eval` and tested against the source's bounds.
    fn naive(src: &Plane, degrees: f64, filter: Filter, fill: f32) -> Vec<f32> {
        let (w, h) = (src.width() as isize, src.height() as isize);
        let (s, c) = degrees.to_radians().sin_cos();
        let (cx, cy) = (w as f64 / 2.0, h as f64 / 2.0);
        let radius = (filter.support().ceil() as isize).max(1);
        let mut out = Vec::new();
        for y in 0..h {
            for x in 0..w {
                let (dx, dy) = (x as f64 + 0.5 - cx, y as f64 + 0.5 - cy);
                let (sx, sy) = (cx + c * dx + s * dy - 0.5, cy - s * dx + c * dy - 0.5);
                let at = |i: isize, j: isize| {
                    if i < 0 || j < 0 || i >= w || j >= h { fill } else { src.get(i as usize, j as usize) }
                };
                if filter == Filter::Nearest {
                    out.push(at((sx + 0.5).floor() as isize, (sy + 0.5).floor() as isize));
                    continue;
                }
                let (i0, j0) = (sx.floor() as isize - radius + 1, sy.floor() as isize - radius + 1);
                let mut acc = 0.0f64;
                for j in j0..j0 + 2 * radius {
                    for i in i0..i0 + 2 * radius {
                        acc += filter.eval(sx - i as f64) * filter.eval(sy - j as f64) * f64::from(at(i, j));
                    }
                }
                out.push(acc as f32);
            }
        }
        out
    }

    #[test]
    fn edge_and_interior_pixels_equal_the_naive_sampler() {
        for (w, h) in [(1, 1), (2, 2), (5, 3), (3, 7), (41, 29)] {
            let src = Plane::from_fn(w, h, |x, y| ((x * 7 + y * 13) % 11) as f32 / 10.0).unwrap();
            for filter in
                [Filter::Nearest, Filter::Bilinear, Filter::Bicubic, Filter::Mitchell, Filter::Lanczos3]
            {
                for degrees in [0.0, 0.3, -1.7, 10.0, -33.0, 89.99, 90.5, 180.2, -135.0] {
                    let got = Rotate::new(degrees, filter, false, Some([0.25; 3]))
                        .sample(&src, w, h, 0.25)
                        .unwrap();
                    let want = naive(&src, degrees, filter, 0.25);
                    for (i, (a, b)) in got.as_slice().iter().zip(&want).enumerate() {
                        // f32 weights and sums of at most 36 taps of values in [0, 1].
                        assert!(
                            (a - b).abs() < 1e-5,
                            "{filter:?} {degrees}° {w}×{h} at ({}, {}): {a} vs {b}",
                            i % w,
                            i / w
                        );
                    }
                }
            }
        }
    }

    #[test]
    fn expand_sizes_and_kept_sizes() {
        let r = rotate("rotate:angle=30,fill=black", gray(40, 20, |_, _| 1.0));
        let (c, s) = (30f64.to_radians().cos(), 30f64.to_radians().sin());
        assert_eq!(r.width(), (40.0 * c + 20.0 * s).ceil() as usize);
        let kept = rotate("rotate:angle=30,expand=false,fill=black", gray(40, 20, |_, _| 1.0));
        assert_eq!((kept.width(), kept.height()), (40, 20));
        assert_eq!(kept.layout(), Layout::Gray);
        let t = rotate("rotate:angle=10", gray(1, 1, |_, _| 0.5));
        assert_eq!(t.layout(), Layout::GrayAlpha);
    }

    #[test]
    fn interior_of_a_constant_image_stays_constant_and_small_turns_match_quarter_turns() {
        let r = rotate("rotate:angle=17,expand=false,fill=black", gray(50, 50, |_, _| 0.75));
        assert!((r.planes()[0].get(25, 25) - 0.75).abs() < 1e-6);
        // 90° + a hair (not a quarter turn, so this path) equals the exact quarter turn.
        let src = gray(6, 4, |x, y| (x * 4 + y) as f32);
        let near = rotate("rotate:angle=90.0000001,filter=bilinear,fill=black", src.clone());
        let exact = rotate("rotate:90", src);
        assert_eq!((near.width(), near.height()), (exact.width(), exact.height()));
        for (a, b) in near.planes()[0].as_slice().iter().zip(exact.planes()[0].as_slice()) {
            assert!((a - b).abs() < 1e-4, "{a} vs {b}");
        }
    }
}
