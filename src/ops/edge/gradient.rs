//! The fused 3×3 gradient: derivative and smoothing in one pass over row
//! bands, with no gx/gy planes stored — for `sobel`/`scharr` magnitude and
//! direction and for `canny`.

use crate::raster::Plane;
use crate::tile::{self, Border};

/// One row of a 3×3 gradient of `s` (the derivative taps −1, 0, 1 across
/// smoothing taps `t = [t0, t1, t0]`: Sobel or Scharr) and its magnitude, the
/// same sums in the same order as `correlate_separable` with those kernels (so
/// the results are bit-identical): the vertical passes `v = t1·b + t0·(a + c)`
/// and `d = −a + 0·b + c` over rows y − 1, y, y + 1, padded by one sample
/// under `border`, then `gx = −v[x−1] + 0·v[x] + v[x+1]`,
/// `gy = t1·d[x] + t0·(d[x−1] + d[x+1])`.
pub(super) struct GradientRows<'a> {
    s: &'a Plane,
    border: Border,
    smooth: [f32; 3],
    const_row: Vec<f32>,
    v: Vec<f32>,
    d: Vec<f32>,
    v_pad: Vec<f32>,
    d_pad: Vec<f32>,
}

impl<'a> GradientRows<'a> {
    pub(super) fn new(s: &'a Plane, border: Border, smooth: [f32; 3]) -> GradientRows<'a> {
        let w = s.width();
        GradientRows {
            s,
            border,
            smooth,
            const_row: vec![border.constant_value(); w],
            v: vec![0.0; w],
            d: vec![0.0; w],
            v_pad: vec![0.0; w + 2],
            d_pad: vec![0.0; w + 2],
        }
    }

    /// Writes row `y`'s gx, gy and magnitude.
    pub(super) fn row(&mut self, y: usize, gx: &mut [f32], gy: &mut [f32], mag: &mut [f32]) {
        let y = y as isize;
        let get = |dy: isize| tile::source_row(self.s, y + dy, self.border).unwrap_or(&self.const_row);
        let (a, b, c) = (get(-1), get(0), get(1));
        let [t0, t1, _] = self.smooth;
        for (((v, d), (&a, &b)), &c) in self.v.iter_mut().zip(self.d.iter_mut()).zip(a.iter().zip(b)).zip(c) {
            *v = t1 * b + t0 * (a + c);
            *d = -a + 0.0 * b + c;
        }
        // The horizontal halo under a constant rule is the fill times the
        // vertical taps' sum: the smoothing taps' sum, 0 for the derivative.
        let (vb, db) = match self.border {
            Border::Constant(f) => {
                (Border::Constant(f * self.smooth.iter().sum::<f32>()), Border::Constant(f * 0.0))
            }
            b => (b, b),
        };
        tile::pad_row(&self.v, 1, vb, &mut self.v_pad);
        tile::pad_row(&self.d, 1, db, &mut self.d_pad);
        let (vp, dp) = (&self.v_pad, &self.d_pad);
        for (x, ((gx, gy), m)) in gx.iter_mut().zip(gy.iter_mut()).zip(mag.iter_mut()).enumerate() {
            let h = -vp[x] + 0.0 * vp[x + 1] + vp[x + 2];
            let v = t1 * dp[x + 1] + t0 * (dp[x] + dp[x + 2]);
            *gx = h;
            *gy = v;
            *m = (h * h + v * v).sqrt();
        }
    }
}

/// The gradient magnitude `√(gx² + gy²)` of `s`, by bands.
pub(super) fn magnitude(s: &Plane, border: Border, smooth: [f32; 3]) -> Plane {
    fused(s, border, smooth, false)
}

/// The gradient direction `atan2(gy, gx)` of `s` (radians), by bands.
pub(super) fn direction(s: &Plane, border: Border, smooth: [f32; 3]) -> Plane {
    fused(s, border, smooth, true)
}

/// One band pass: gradient rows, then the magnitude, or the direction in its place.
fn fused(s: &Plane, border: Border, smooth: [f32; 3], direction: bool) -> Plane {
    let w = s.width();
    let mut out =
        Plane::for_overwrite(w, s.height()).unwrap_or_else(|_| unreachable!("same size as a valid plane"));
    tile::for_each_band(&mut out, tile::band_rows(w, 1), |y0, band| {
        let mut rows = GradientRows::new(s, border, smooth);
        let (mut gx, mut gy) = (vec![0.0; w], vec![0.0; w]);
        for (i, m) in band.chunks_exact_mut(w).enumerate() {
            rows.row(y0 + i, &mut gx, &mut gy, m);
            if direction {
                for ((m, &x), &y) in m.iter_mut().zip(&gx).zip(&gy) {
                    *m = y.atan2(x);
                }
            }
        }
    });
    out
}

#[cfg(test)]
mod tests {
    use super::super::{DERIVATIVE, SCHARR_SMOOTH, SOBEL_SMOOTH};
    use super::*;
    use crate::ops::filter::correlate_separable;
    use crate::ops::morph::tests::noise;

    #[test]
    fn magnitude_and_direction_equal_the_separable_passes_bit_for_bit() {
        let borders =
            [Border::Reflect, Border::Mirror, Border::Replicate, Border::Wrap, Border::Constant(0.3)];
        for smooth in [SOBEL_SMOOTH, SCHARR_SMOOTH] {
            for (w, h) in [(1, 1), (1, 6), (6, 1), (2, 2), (13, 9)] {
                let p = noise(w, h, 23);
                for b in borders {
                    let gx = correlate_separable(&p, &DERIVATIVE, &smooth, b);
                    let gy = correlate_separable(&p, &smooth, &DERIVATIVE, b);
                    let pairs = || gx.as_slice().iter().zip(gy.as_slice());
                    let mag: Vec<f32> = pairs().map(|(x, y)| (x * x + y * y).sqrt()).collect();
                    let dir: Vec<f32> = pairs().map(|(x, y)| y.atan2(*x)).collect();
                    assert_eq!(magnitude(&p, b, smooth).as_slice(), &mag[..], "{smooth:?} {b:?} {w}×{h}");
                    assert_eq!(direction(&p, b, smooth).as_slice(), &dir[..], "{smooth:?} {b:?} {w}×{h}");
                }
            }
        }
    }
}
