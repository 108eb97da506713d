//! The linear-filter engines: separable (two 1-D passes) and direct 2-D
//! correlation, run over row bands with a halo and a border rule.
//!
//! Both compute correlation, `out(x, y) = Σᵢⱼ k(i, j) · in(x + j − rx, y + i − ry)`;
//! convolution is correlation with the kernel turned by 180°, which the caller does.

use super::rows;
use crate::raster::Plane;
use crate::tile::{self, Border};

/// True when `k[i] == k[n−1−i]` for every `i`, so taps can be folded in pairs.
fn is_symmetric(k: &[f32]) -> bool {
    k.iter().eq(k.iter().rev())
}

/// `acc = Σᵢ k[i] · row(i − r)` for an odd kernel of radius `r`.
fn vertical<'a>(acc: &mut [f32], k: &[f32], row: impl Fn(isize) -> &'a [f32]) {
    let r = k.len() / 2;
    if is_symmetric(k) {
        rows::scale(acc, k[r], row(0));
        for i in 1..=r {
            rows::add_scaled_pair(acc, k[r + i], row(-(i as isize)), row(i as isize));
        }
    } else {
        rows::scale(acc, k[0], row(-(r as isize)));
        for (i, &w) in k.iter().enumerate().skip(1) {
            rows::add_scaled(acc, w, row(i as isize - r as isize));
        }
    }
}

/// `out[x] = Σᵢ k[i] · padded[x + i]`, where `padded` carries `r` samples of halo each side.
fn horizontal(padded: &[f32], k: &[f32], out: &mut [f32]) {
    let r = k.len() / 2;
    let w = out.len();
    if is_symmetric(k) {
        rows::scale(out, k[r], &padded[r..r + w]);
        for i in 1..=r {
            rows::add_scaled_pair(out, k[r + i], &padded[r - i..r - i + w], &padded[r + i..r + i + w]);
        }
    } else {
        rows::scale(out, k[0], &padded[..w]);
        for (i, &wt) in k.iter().enumerate().skip(1) {
            rows::add_scaled(out, wt, &padded[i..i + w]);
        }
    }
}

/// Correlates `src` with the rank-1 kernel `ky ⊗ kx` (both of odd length): a
/// vertical pass then a horizontal one, row by row within each band, so the
/// intermediate row stays in L1. With a constant border the horizontal halo is
/// `value · Σ ky`, which makes the result equal the direct 2-D correlation.
pub fn correlate_separable(src: &Plane, kx: &[f32], ky: &[f32], border: Border) -> Plane {
    let (w, h) = (src.width(), src.height());
    let rx = kx.len() / 2;
    let ry = ky.len() / 2;
    let hborder = match border {
        Border::Constant(v) => Border::Constant(v * ky.iter().sum::<f32>()),
        b => b,
    };
    let const_row = vec![border.constant_value(); w];
    let mut out = Plane::for_overwrite(w, h).unwrap_or_else(|_| unreachable!("same size as a valid plane"));
    tile::for_each_band(&mut out, tile::band_rows(w, ry), |y0, band| {
        let mut acc = vec![0.0f32; w];
        let mut padded = vec![0.0f32; w + 2 * rx];
        for (i, out_row) in band.chunks_exact_mut(w).enumerate() {
            let y = (y0 + i) as isize;
            vertical(&mut acc, ky, |dy| tile::source_row(src, y + dy, border).unwrap_or(&const_row));
            tile::pad_row(&acc, rx, hborder, &mut padded);
            horizontal(&padded, kx, out_row);
        }
    });
    out
}

/// Correlates `src` with the `kh × kw` kernel `k` (row-major, both sides odd)
/// directly: `kh · kw` row passes per output row.
pub fn correlate_2d(src: &Plane, k: &[f32], kw: usize, kh: usize, border: Border) -> Plane {
    let (w, h) = (src.width(), src.height());
    let (rx, ry) = (kw / 2, kh / 2);
    let const_row = vec![border.constant_value(); w];
    let mut out = Plane::zeros(w, h).unwrap_or_else(|_| unreachable!("same size as a valid plane"));
    tile::for_each_band(&mut out, tile::band_rows(w, ry), |y0, band| {
        let mut padded = vec![0.0f32; w + 2 * rx];
        for (i, out_row) in band.chunks_exact_mut(w).enumerate() {
            let y = (y0 + i) as isize;
            out_row.fill(0.0);
            for ky in 0..kh {
                let row = tile::source_row(src, y + ky as isize - ry as isize, border).unwrap_or(&const_row);
                tile::pad_row(row, rx, border, &mut padded);
                for kx in 0..kw {
                    rows::add_scaled(out_row, k[ky * kw + kx], &padded[kx..kx + w]);
                }
            }
        }
    });
    out
}

#[cfg(test)]
mod tests {
    //! Edge cases: kernels larger than the image, 1×N and N×1 planes, every
    //! border rule, asymmetric kernels. The reference is a naive 2-D sum.
    use super::*;

    fn naive(src: &Plane, k: &[f32], kw: usize, kh: usize, border: Border) -> Plane {
        let (w, h) = (src.width(), src.height());
        Plane::from_fn(w, h, |x, y| {
            let mut s = 0.0f64;
            for i in 0..kh {
                for j in 0..kw {
                    let sy = border.index(y as isize + i as isize - (kh / 2) as isize, h);
                    let sx = border.index(x as isize + j as isize - (kw / 2) as isize, w);
                    let v = match (sx, sy) {
                        (Some(sx), Some(sy)) => src.get(sx, sy),
                        _ => border.constant_value(),
                    };
                    s += f64::from(k[i * kw + j]) * f64::from(v);
                }
            }
            s as f32
        })
        .unwrap()
    }

    fn noise(w: usize, h: usize) -> Plane {
        let mut state = 12345u32;
        Plane::from_fn(w, h, |_, _| {
            state = state.wrapping_mul(1664525).wrapping_add(1013904223);
            (state >> 8) as f32 / (1u32 << 24) as f32
        })
        .unwrap()
    }

    fn assert_close(a: &Plane, b: &Plane, tol: f32) {
        for (i, (x, y)) in a.as_slice().iter().zip(b.as_slice()).enumerate() {
            assert!((x - y).abs() <= tol, "sample {i}: {x} vs {y}");
        }
    }

    const BORDERS: [Border; 5] =
        [Border::Reflect, Border::Mirror, Border::Replicate, Border::Wrap, Border::Constant(0.25)];

    #[test]
    fn separable_equals_naive_2d_for_every_border() {
        let kx = [0.1f32, 0.2, 0.4, 0.2, 0.1];
        let ky = [0.5f32, 1.0, -0.25];
        let k2: Vec<f32> = ky.iter().flat_map(|a| kx.iter().map(move |b| a * b)).collect();
        for (w, h) in [(1, 1), (1, 9), (9, 1), (2, 2), (17, 11)] {
            let src = noise(w, h);
            for b in BORDERS {
                let fast = correlate_separable(&src, &kx, &ky, b);
                assert_close(&fast, &naive(&src, &k2, 5, 3, b), 1e-5);
            }
        }
    }

    #[test]
    fn direct_2d_equals_naive() {
        let k = [1.0f32, 0.0, -1.0, 2.0, 0.5, -2.0, 1.0, 0.0, -3.0];
        for (w, h) in [(1, 1), (1, 6), (6, 1), (13, 7)] {
            let src = noise(w, h);
            for b in BORDERS {
                assert_close(&correlate_2d(&src, &k, 3, 3, b), &naive(&src, &k, 3, 3, b), 1e-5);
            }
        }
    }

    #[test]
    fn identity_kernel_is_a_no_op() {
        let src = noise(31, 5);
        assert_eq!(correlate_separable(&src, &[0.0, 1.0, 0.0], &[1.0], Border::Reflect), src);
        assert_eq!(
            correlate_2d(&src, &[0.0, 0.0, 0.0, 0.0, 1.0, 0.0, 0.0, 0.0, 0.0], 3, 3, Border::Wrap),
            src
        );
    }
}
