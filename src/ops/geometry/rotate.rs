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
/// the image are the fill (a colour, or transparent). With expand the canvas
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
        // One copy of the loop per kernel, so the kernel's `match` is decided once.
        match self.filter {
            Filter::Bilinear => self.sample_with(src, out_w, out_h, fill, |x| Filter::Bilinear.eval(x)),
            Filter::Bicubic => self.sample_with(src, out_w, out_h, fill, |x| Filter::Bicubic.eval(x)),
            f => self.sample_with(src, out_w, out_h, fill, |x| f.eval(x)),
        }
    }

    fn sample_with(
        &self,
        src: &Plane,
        out_w: usize,
        out_h: usize,
        fill: f32,
        kernel: impl Fn(f64) -> f64 + Sync,
    ) -> Result<Plane, Error> {
        let (w, h) = (src.width(), src.height());
        let (s, c) = self.radians.sin_cos();
        let (icx, icy) = (w as f64 / 2.0, h as f64 / 2.0);
        let (ocx, ocy) = (out_w as f64 / 2.0, out_h as f64 / 2.0);
        let radius: isize = match self.filter {
            Filter::Nearest => 0,
            Filter::Bilinear => 1,
            _ => 2,
        };
        let taps = 2 * radius as usize;
        let at = |i: isize, j: isize| -> f32 {
            if i < 0 || j < 0 || i >= w as isize || j >= h as isize {
                fill
            } else {
                src.get(i as usize, j as usize)
            }
        };
        let mut out = Plane::zeros(out_w, out_h)?;
        tile::for_each_band(&mut out, tile::band_rows(out_w, 0), |y0, band| {
            for (row_i, row) in band.chunks_exact_mut(out_w).enumerate() {
                let dy = (y0 + row_i) as f64 + 0.5 - ocy;
                for (x, o) in row.iter_mut().enumerate() {
                    let dx = x as f64 + 0.5 - ocx;
                    let sx = icx + c * dx + s * dy - 0.5;
                    let sy = icy - s * dx + c * dy - 0.5;
                    if radius == 0 {
                        *o = at((sx + 0.5).floor() as isize, (sy + 0.5).floor() as isize);
                        continue;
                    }
                    // The taps are columns i0.. and rows j0..; the column weights are the
                    // same for every row, and inside the image the row is read as a slice.
                    let (i0, j0) = (sx.floor() as isize - radius + 1, sy.floor() as isize - radius + 1);
                    let mut wx = [0.0f64; 4];
                    for (k, wk) in wx[..taps].iter_mut().enumerate() {
                        *wk = kernel(sx - (i0 + k as isize) as f64);
                    }
                    let inside = i0 >= 0
                        && j0 >= 0
                        && i0 + taps as isize <= w as isize
                        && j0 + taps as isize <= h as isize;
                    let mut acc = 0.0f64;
                    for j in j0..j0 + taps as isize {
                        let wy = kernel(sy - j as f64);
                        if wy == 0.0 {
                            continue;
                        }
                        if inside {
                            let row = &src.row(j as usize)[i0 as usize..i0 as usize + taps];
                            for (wk, &v) in wx[..taps].iter().zip(row) {
                                acc += wk * wy * f64::from(v);
                            }
                        } else {
                            for (k, wk) in wx[..taps].iter().enumerate() {
                                acc += wk * wy * f64::from(at(i0 + k as isize, j));
                            }
                        }
                    }
                    *o = acc as f32;
                }
            }
        });
        Ok(out)
    }
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
    //! Edge cases: 1×1 images, transparent fill, expand sizes, a full turn.
    use super::*;
    use crate::raster::{Encoding, Layout};

    fn rotate(text: &str, r: Raster) -> Raster {
        crate::pipeline::Step::parse(text).unwrap().op.apply(r).unwrap()
    }

    fn gray(w: usize, h: usize, f: impl FnMut(usize, usize) -> f32) -> Raster {
        Raster::new(vec![Plane::from_fn(w, h, f).unwrap()], Layout::Gray, Encoding::Linear).unwrap()
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
