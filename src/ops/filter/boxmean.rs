//! `box`: the mean over a square window by running sums. Only the window
//! arithmetic lives here; alpha and domain handling are `ops::filter_planes`'.

use super::engine::correlate_separable;
use crate::error::{Error, ParamError};
use crate::ops::params::{self, Kind, OpSpec, ParamSpec};
use crate::ops::{Domain, Operator, filter_planes};
use crate::raster::{Plane, Raster};
use crate::tile::{self, Border};

/// Largest `box` radius accepted (a window of 8193² samples).
pub const MAX_BOX_RADIUS: usize = 4096;

/// The text of `pumice ops box`, also the doc of [`BoxMean`].
macro_rules! box_doc {
    () => {
        "Mean over a (2r+1)×(2r+1) window, in constant time per pixel.

```text
out(x, y) = 1/(2r+1)² · Σ_{|i|≤r} Σ_{|j|≤r} in(x + j, y + i)
column sums S(x, y) = S(x, y-1) + in(x, y+r) - in(x, y-r-1)      (running, f64)
row sums    R(x, y) = R(x-1, y) + S(x+r, y) - S(x-r-1, y)         (running, f64)
out(x, y) = R(x, y) / (2r+1)²
```

The running sums are kept in f64 and restarted for every band of rows, so
rounding does not build up; each output is rounded to f32 once.
A plane holding NaN or infinity is filtered by a direct separable sum instead
(a running sum would carry the NaN past its window); a non-finite sample then
makes every output whose window contains it NaN or infinite, as a direct sum
does.
Radius beyond the image: allowed; the border rule repeats as far as needed.
Domain: linear light; alpha is premultiplied while filtering.
Border: any rule (default reflect); needs r rows of halo.
Source: the definition of the moving average; running sums are common practice
(the same result as scipy.ndimage.uniform_filter with size 2r+1)."
    };
}

#[doc = box_doc!()]
#[derive(Debug)]
pub struct BoxMean {
    radius: usize,
    border: Border,
}

impl BoxMean {
    pub fn new(radius: usize, border: Border) -> Result<BoxMean, ParamError> {
        if radius == 0 || radius > MAX_BOX_RADIUS {
            return Err(ParamError::new(format!(
                "box radius must be a whole number in 1..={MAX_BOX_RADIUS}, got {radius}"
            )));
        }
        Ok(BoxMean { radius, border })
    }
}

impl Operator for BoxMean {
    fn domain(&self) -> Domain {
        Domain::Linear
    }

    fn apply(&self, raster: Raster) -> Result<Raster, Error> {
        filter_planes(raster, |p| Ok(box_mean(p, self.radius, self.border)))
    }
}

/// The mean of `src` over a `(2r+1)²` window under `border`.
pub fn box_mean(src: &Plane, r: usize, border: Border) -> Plane {
    if !src.all_finite() {
        let k = vec![1.0 / (2 * r + 1) as f32; 2 * r + 1];
        return correlate_separable(src, &k, &k, border);
    }
    running_box(src, r, border)
}

/// Running-sum box mean; `src` must be finite.
fn running_box(src: &Plane, r: usize, border: Border) -> Plane {
    let (w, h) = (src.width(), src.height());
    let n = (2 * r + 1) as f64;
    let inv = 1.0 / (n * n);
    let const_row = vec![border.constant_value(); w];
    // Horizontal halo of the column sums: which column each padded position
    // reads, or the constant fill summed over a column of the window.
    let left: Vec<Option<usize>> = (0..r).map(|i| border.index(i as isize - r as isize, w)).collect();
    let right: Vec<Option<usize>> = (0..r).map(|i| border.index((w + i) as isize, w)).collect();
    let fill = f64::from(border.constant_value()) * n;
    let mut out = Plane::for_overwrite(w, h).unwrap_or_else(|_| unreachable!("same size as a valid plane"));
    tile::for_each_band(&mut out, tile::band_rows(w, r), |y0, band| {
        let row = |y: isize| tile::source_row(src, y, border).unwrap_or(&const_row);
        let mut col = vec![0.0f64; w];
        let y0 = y0 as isize;
        for dy in -(r as isize)..=r as isize {
            for (c, &v) in col.iter_mut().zip(row(y0 + dy)) {
                *c += f64::from(v);
            }
        }
        let mut padded = vec![0.0f64; w + 2 * r];
        for (i, out_row) in band.chunks_exact_mut(w).enumerate() {
            let y = y0 + i as isize;
            if i > 0 {
                let (add, sub) = (row(y + r as isize), row(y - r as isize - 1));
                for ((c, &a), &s) in col.iter_mut().zip(add).zip(sub) {
                    *c += f64::from(a) - f64::from(s);
                }
            }
            padded[r..r + w].copy_from_slice(&col);
            for i in 0..r {
                padded[i] = left[i].map_or(fill, |j| col[j]);
                padded[r + w + i] = right[i].map_or(fill, |j| col[j]);
            }
            let mut s: f64 = padded[..2 * r + 1].iter().sum();
            out_row[0] = (s * inv) as f32;
            for x in 1..w {
                s += padded[x + 2 * r] - padded[x - 1];
                out_row[x] = (s * inv) as f32;
            }
        }
    });
    out
}

pub static BOX: OpSpec = OpSpec {
    name: "box",
    family: "filter",
    summary: "mean over a square window (running sums)",
    doc: box_doc!(),
    main: Some("radius"),
    params: &[
        ParamSpec {
            name: "radius",
            kind: Kind::int(1.0, MAX_BOX_RADIUS as f64),
            default: None,
            help: "window radius r in pixels: the window is (2r+1)×(2r+1)",
        },
        params::BORDER_PARAM,
        params::FILL_PARAM,
    ],
    build: |a| Ok(Box::new(BoxMean::new(a.int("radius")? as usize, params::border(a)?)?)),
};

#[cfg(test)]
pub(crate) mod tests {
    //! Edge cases decided here: 1×1, 1×N and N×1 planes (halo only, by the
    //! border rule); radius larger than the image (the rule repeats, as
    //! `Border::index` defines); radius 0 (refused); NaN (propagates to every
    //! output whose window holds it, and no further). Reference: a naive sum
    //! in f64 over the window.
    use super::*;
    use crate::raster::{Encoding, Layout};

    fn naive(src: &Plane, r: usize, border: Border) -> Plane {
        let (w, h) = (src.width(), src.height());
        let r = r as isize;
        Plane::from_fn(w, h, |x, y| {
            let mut s = 0.0f64;
            for i in -r..=r {
                for j in -r..=r {
                    let v = match (border.index(x as isize + j, w), border.index(y as isize + i, h)) {
                        (Some(sx), Some(sy)) => src.get(sx, sy),
                        _ => border.constant_value(),
                    };
                    s += f64::from(v);
                }
            }
            (s / ((2 * r + 1) * (2 * r + 1)) as f64) as f32
        })
        .unwrap()
    }

    pub(crate) fn noise(w: usize, h: usize, seed: u32) -> Plane {
        let mut state = seed;
        Plane::from_fn(w, h, |_, _| {
            state = state.wrapping_mul(1664525).wrapping_add(1013904223);
            (state >> 8) as f32 / (1u32 << 24) as f32
        })
        .unwrap()
    }

    const BORDERS: [Border; 5] =
        [Border::Reflect, Border::Mirror, Border::Replicate, Border::Wrap, Border::Constant(0.25)];

    #[test]
    fn a_reused_buffer_holding_nan_leaves_no_trace() {
        // The output plane may be a recycled buffer with stale samples
        // (Plane::for_overwrite): every sample must be written. Planes this
        // large (over recycle::MIN_SAMPLES) are kept while a scope is open.
        let _reuse = crate::raster::recycle::Scope::open();
        let (w, h) = (1100, 1000);
        drop(Plane::filled(w, h, f32::NAN).unwrap());
        let out = box_mean(&Plane::filled(w, h, 0.5).unwrap(), 5, Border::Reflect);
        assert!(out.as_slice().iter().all(|&v| v == 0.5));
    }

    #[test]
    fn running_sums_equal_the_naive_mean() {
        for (w, h) in [(1, 1), (1, 9), (9, 1), (2, 3), (23, 17)] {
            let src = noise(w, h, 7);
            for b in BORDERS {
                for r in [1, 2, 5, 30] {
                    let got = box_mean(&src, r, b);
                    let want = naive(&src, r, b);
                    for (g, e) in got.as_slice().iter().zip(want.as_slice()) {
                        // both sum in f64 and round once: at most 1 ulp apart
                        assert!((g - e).abs() <= 1e-7, "{w}×{h} r={r} {b:?}: {g} vs {e}");
                    }
                }
            }
        }
    }

    #[test]
    fn constant_images_stay_constant_and_radius_zero_is_refused() {
        let p = Plane::filled(13, 4, 0.625).unwrap();
        for b in BORDERS {
            let want = if matches!(b, Border::Constant(_)) { None } else { Some(0.625) };
            if let Some(v) = want {
                assert!(box_mean(&p, 3, b).as_slice().iter().all(|&x| (x - v).abs() < 1e-7));
            }
        }
        assert!(BoxMean::new(0, Border::Reflect).unwrap_err().0.contains("radius"));
        assert!(BoxMean::new(MAX_BOX_RADIUS + 1, Border::Reflect).is_err());
    }

    #[test]
    fn nan_spreads_over_its_window_only() {
        let mut p = noise(15, 15, 3);
        p.row_mut(7)[7] = f32::NAN;
        let out = box_mean(&p, 2, Border::Reflect);
        for y in 0..15usize {
            for x in 0..15usize {
                let inside = x.abs_diff(7) <= 2 && y.abs_diff(7) <= 2;
                assert_eq!(out.get(x, y).is_nan(), inside, "({x}, {y})");
            }
        }
    }

    #[test]
    fn thread_count_does_not_change_the_result() {
        let src = noise(301, 257, 11);
        let run = |n| {
            let pool = rayon::ThreadPoolBuilder::new().num_threads(n).build().unwrap();
            pool.install(|| box_mean(&src, 4, Border::Mirror))
        };
        assert_eq!(run(1), run(3));
    }

    #[test]
    fn alpha_is_premultiplied() {
        // A transparent red pixel beside an opaque green one: the mean must not
        // take colour from the transparent one.
        let red = Plane::from_vec(2, 1, vec![1.0, 0.0]).unwrap();
        let green = Plane::from_vec(2, 1, vec![0.0, 1.0]).unwrap();
        let alpha = Plane::from_vec(2, 1, vec![0.0, 1.0]).unwrap();
        let r =
            Raster::new(vec![red, green, Plane::zeros(2, 1).unwrap(), alpha], Layout::Rgba, Encoding::Linear)
                .unwrap();
        let out = BoxMean::new(1, Border::Replicate).unwrap().apply(r).unwrap();
        assert!(out.planes()[0].as_slice().iter().all(|&v| v == 0.0));
        assert!(out.planes()[1].as_slice().iter().all(|&v| (v - 1.0).abs() < 1e-6));
    }
}
