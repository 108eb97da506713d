//! The constant-time Gaussian behind `gauss:method=fast`: a cascade of
//! extended box filters run by running sums. Only the cascade lives here; the
//! choice between it and the exact kernel is `Gauss`'s.

use multiversion::multiversion;

use super::rows::{LANES, deinterleave, interleave};
use crate::raster::Plane;
use crate::tile::{self, Border};

/// Box passes in the cascade. Five keep the 2-D kernel within an L1 distance
/// of 0.044 of the exact Gaussian for every σ ≥ 2 (measured by the test
/// `cascade_kernel_is_within_the_documented_distance`), against 0.056 for four.
pub const PASSES: usize = 5;

/// Largest L1 distance between the 2-D cascade kernel and the exact (4σ
/// truncated) Gaussian for σ ≥ 2. For samples in `[0, M]` the outputs then
/// differ by at most `M · L1 / 2` (both kernels sum to 1, so the positive and
/// negative parts of their difference are equal): 0.022·M.
pub const MAX_KERNEL_L1: f64 = 0.044;

/// One extended box: `2r + 1` taps of weight 1 and one tap of weight `alpha`
/// at each end, all divided by `2r + 1 + 2·alpha`.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct ExtendedBox {
    pub r: usize,
    pub alpha: f64,
}

impl ExtendedBox {
    /// The extended box whose `passes`-fold cascade has variance exactly σ²
    /// (Gwosdek, Grewenig, Bruhn & Weickert, "Theoretical foundations of
    /// Gaussian convolution by extended box filtering", SSVM 2011, eq. 11–13).
    pub fn for_sigma(sigma: f64, passes: usize) -> ExtendedBox {
        let s2 = sigma * sigma / passes as f64;
        let r = (0.5 * (12.0 * s2 + 1.0).sqrt() - 0.5).floor().max(0.0) as usize;
        let rf = r as f64;
        let alpha = (2.0 * rf + 1.0) * (rf * (rf + 1.0) - 3.0 * s2) / (6.0 * (s2 - (rf + 1.0) * (rf + 1.0)));
        ExtendedBox { r, alpha }
    }

    /// The 1-D taps, `2r + 3` of them.
    pub fn taps(&self) -> Vec<f64> {
        let norm = 2.0 * self.r as f64 + 1.0 + 2.0 * self.alpha;
        let mut k = vec![1.0 / norm; 2 * self.r + 3];
        k[0] = self.alpha / norm;
        k[2 * self.r + 2] = self.alpha / norm;
        k
    }
}

/// The cascade's 1-D kernel, `PASSES·(2r+2) + 1` taps, in f64.
pub fn kernel64(b: ExtendedBox) -> Vec<f64> {
    let t = b.taps();
    let mut k = vec![1.0];
    for _ in 0..PASSES {
        let mut n = vec![0.0; k.len() + t.len() - 1];
        for (i, a) in k.iter().enumerate() {
            for (j, c) in t.iter().enumerate() {
                n[i + j] += a * c;
            }
        }
        k = n;
    }
    k
}

/// The cascade's 1-D kernel rounded to f32 (for the direct path).
pub fn kernel(b: ExtendedBox) -> Vec<f32> {
    kernel64(b).iter().map(|&v| v as f32).collect()
}

/// One pass in "valid" mode along LANES lines at once: `out[i] = Σ taps ·
/// inp[i .. i + 2r + 3]` lane by lane, `out.len() = inp.len() − 2r − 2`, by a
/// running sum in f64 (the sample entering the window added, the one leaving
/// it subtracted).
#[multiversion(targets("x86_64+avx512f+avx512bw+avx512vl+avx2+fma", "x86_64+avx2+fma"))]
fn pass_lanes(inp: &[[f64; LANES]], b: ExtendedBox, out: &mut [[f64; LANES]]) {
    let r = b.r;
    let inv = 1.0 / (2.0 * r as f64 + 1.0 + 2.0 * b.alpha);
    let mut s = [0.0f64; LANES];
    for e in &inp[1..2 * r + 2] {
        for l in 0..LANES {
            s[l] += e[l];
        }
    }
    for (i, o) in out.iter_mut().enumerate() {
        if i > 0 {
            let (add, sub) = (&inp[i + 2 * r + 1], &inp[i]);
            for l in 0..LANES {
                s[l] += add[l] - sub[l];
            }
        }
        let (lo, hi) = (&inp[i], &inp[i + 2 * r + 2]);
        for l in 0..LANES {
            o[l] = (s[l] + b.alpha * (lo[l] + hi[l])) * inv;
        }
    }
}

/// Bytes of the two buffers of one column strip of the vertical passes: well
/// inside a core's L2 (2 MiB on the machines measured).
const STRIP_BYTES: usize = 1 << 20;

/// One pass down a strip of columns, valid mode: the `m` rows of `inp` give
/// the `m − 2r − 2` rows of `out`. `acc` holds the running column sums in f64
/// (the row entering the window added, the one leaving it subtracted, in one
/// sweep with the output row); the rows themselves are f32, which halves the
/// cache traffic of the passes and rounds each pass's result once, by at most
/// 2⁻²⁴ relative.
#[multiversion(targets("x86_64+avx512f+avx512bw+avx512vl+avx2+fma", "x86_64+avx2+fma"))]
fn vertical_pass(inp: &[&[f32]], b: ExtendedBox, acc: &mut [f64], out: &mut [&mut [f32]]) {
    let span = 2 * b.r + 2;
    let inv = 1.0 / (2.0 * b.r as f64 + 1.0 + 2.0 * b.alpha);
    // acc starts as rows 0 ..= 2r; output row i takes rows i + 1 ..= i + 2r + 1
    // at weight 1 and rows i and i + 2r + 2 at weight alpha.
    acc.fill(0.0);
    for row in &inp[..span - 1] {
        for (a, &v) in acc.iter_mut().zip(*row) {
            *a += f64::from(v);
        }
    }
    for (i, o) in out.iter_mut().enumerate() {
        let (lo, add, hi) = (inp[i], inp[i + span - 1], inp[i + span]);
        for ((((o, a), &l), &p), &u) in o.iter_mut().zip(acc.iter_mut()).zip(lo).zip(add).zip(hi) {
            *a += f64::from(p) - f64::from(l);
            *o = ((*a + b.alpha * (f64::from(l) + f64::from(u))) * inv) as f32;
        }
    }
}

/// The Gaussian of `src` by `PASSES` extended boxes along each axis. The
/// border rule is applied once, to the source (a halo of `PASSES·(r+1)`), and
/// the passes run in valid mode, so every rule means what it means for the
/// exact kernel. Running sums are in f64; between passes samples are f32.
///
/// Each band runs its vertical passes strip by strip into the output band,
/// then its horizontal passes on groups of LANES rows side by side, in
/// buffers of one group's size (no band-sized scratch, whose fresh pages
/// would cost as much as the passes).
pub fn cascade_gauss(src: &Plane, b: ExtendedBox, border: Border) -> Plane {
    let (w, h) = (src.width(), src.height());
    let halo = PASSES * (b.r + 1);
    let const_row = vec![border.constant_value(); w];
    let left: Vec<Option<usize>> = (0..halo).map(|i| border.index(i as isize - halo as isize, w)).collect();
    let right: Vec<Option<usize>> = (0..halo).map(|i| border.index((w + i) as isize, w)).collect();
    // Tall bands, so the halo (read once per band) stays a small overhead.
    let rows = tile::band_rows(w, 0).max(4 * halo);
    let mut out = Plane::for_overwrite(w, h).unwrap_or_else(|_| unreachable!("same size as a valid plane"));
    tile::for_each_band(&mut out, rows, |y0, band| {
        let nb = band.len() / w;
        // Vertical, one strip of columns at a time so a strip's two buffers
        // (rows y0 − halo .. y0 + nb + halo, shrinking by r + 1 a side per
        // pass) stay in the core's cache across the passes.
        let m0 = nb + 2 * halo;
        let strip = (STRIP_BYTES / (m0 * 2 * size_of::<f32>())).max(8).min(w);
        let mut cur = vec![0.0f32; m0 * strip];
        let mut next = vec![0.0f32; m0 * strip];
        let mut acc = vec![0.0f64; strip];
        let span = 2 * (b.r + 1);
        for x0 in (0..w).step_by(strip) {
            let sw = strip.min(w - x0);
            // the first pass reads the source rows, the last writes the band
            let source: Vec<&[f32]> = (0..m0)
                .map(|k| {
                    let y = (y0 + k) as isize - halo as isize;
                    &tile::source_row(src, y, border).unwrap_or(&const_row)[x0..x0 + sw]
                })
                .collect();
            let mut m = m0;
            for pass in 0..PASSES {
                {
                    let cur_rows: Vec<&[f32]>;
                    let inp: &[&[f32]] = if pass == 0 {
                        &source
                    } else {
                        cur_rows = cur[..m * sw].chunks_exact(sw).collect();
                        &cur_rows
                    };
                    let mut out: Vec<&mut [f32]> = if pass + 1 == PASSES {
                        band.chunks_exact_mut(w).map(|row| &mut row[x0..x0 + sw]).collect()
                    } else {
                        next[..(m - span) * sw].chunks_exact_mut(sw).collect()
                    };
                    vertical_pass(inp, b, &mut acc[..sw], &mut out);
                }
                std::mem::swap(&mut cur, &mut next);
                m -= span;
            }
        }
        // Horizontal, a group of LANES rows at a time (lane l of element x is
        // row l of the group, column x − halo, so each step of a running sum
        // is one vector operation for all of them): pad by the rule (a
        // constant stays itself: the kernel sums to 1), then the passes in
        // valid mode. In the last group, lanes past its rows keep finite
        // values of an earlier group and are not written back.
        let wp = w + 2 * halo;
        let fill = [f64::from(border.constant_value()); LANES];
        let mut group = vec![[0.0f64; LANES]; wp];
        let mut line = vec![[0.0f64; LANES]; wp];
        let mut tmp = vec![[0.0f64; LANES]; wp];
        for rows in band.chunks_mut(LANES * w) {
            interleave(rows, w, &mut group[halo..halo + w]);
            for k in 0..halo {
                group[k] = left[k].map_or(fill, |j| group[halo + j]);
                group[halo + w + k] = right[k].map_or(fill, |j| group[halo + j]);
            }
            let mut len = wp - 2 * (b.r + 1);
            pass_lanes(&group, b, &mut line[..len]);
            for _ in 1..PASSES {
                let n = len - 2 * (b.r + 1);
                pass_lanes(&line[..len], b, &mut tmp[..n]);
                std::mem::swap(&mut line, &mut tmp);
                len = n;
            }
            deinterleave(&line[..w], rows, w);
        }
    });
    out
}

#[cfg(test)]
mod tests {
    //! Edge cases decided here: 1×1, 1×N and N×1 (all halo in one direction),
    //! σ larger than the image (the rule repeats), every border rule (applied
    //! once to the source, as for the exact kernel). References: the 2-D
    //! cascade kernel built by convolving its taps (for the implementation)
    //! and the exact Gaussian (for the documented accuracy).
    use super::*;
    use crate::ops::filter::boxmean::tests::noise;
    use crate::ops::filter::{correlate_separable, gaussian_kernel};

    fn cascade_kernel(b: ExtendedBox) -> Vec<f64> {
        kernel64(b)
    }

    #[test]
    fn nan_takes_the_direct_path_and_stays_in_its_window() {
        use crate::ops::Operator;
        use crate::ops::filter::{Gauss, GaussMethod};
        use crate::raster::{Encoding, Layout, Raster};
        let mut p = noise(60, 1, 2);
        p.as_mut_slice()[30] = f32::NAN;
        let g = Gauss::with_method(2.0, 4.0, GaussMethod::Fast, Border::Reflect).unwrap();
        let r = Raster::new(vec![p], Layout::Gray, Encoding::Linear).unwrap();
        let out = g.apply(r).unwrap().into_planes().remove(0);
        let reach = 5 * (ExtendedBox::for_sigma(2.0, PASSES).r + 1);
        for (x, v) in out.as_slice().iter().enumerate() {
            assert_eq!(v.is_nan(), x.abs_diff(30) <= reach, "x={x}");
        }
    }

    #[test]
    fn auto_switches_at_the_measured_sigma_and_bad_sigma_is_refused() {
        use crate::ops::filter::{FAST_SIGMA, Gauss, GaussMethod};
        let g = |s, m| Gauss::with_method(s, 4.0, m, Border::Reflect).unwrap().fast.is_some();
        assert!(!g(FAST_SIGMA * 0.99, GaussMethod::Auto) && g(FAST_SIGMA, GaussMethod::Auto));
        assert!(g(0.5, GaussMethod::Fast) && !g(100.0, GaussMethod::Exact));
        assert!(Gauss::with_method(0.0, 4.0, GaussMethod::Fast, Border::Reflect).is_err());
    }

    #[test]
    fn the_cascade_has_the_exact_variance() {
        for sigma in [2.0, 3.3, 8.0, 17.5, 64.0] {
            let k = cascade_kernel(ExtendedBox::for_sigma(sigma, PASSES));
            let c = (k.len() / 2) as f64;
            let var: f64 = k.iter().enumerate().map(|(i, v)| v * (i as f64 - c).powi(2)).sum();
            assert!((var - sigma * sigma).abs() < 1e-9 * sigma * sigma, "σ={sigma}: variance {var}");
            assert!((k.iter().sum::<f64>() - 1.0).abs() < 1e-12);
        }
    }

    #[test]
    fn cascade_kernel_is_within_the_documented_distance() {
        // The figure MAX_KERNEL_L1 documents, recomputed: L1 distance of the
        // 2-D kernels (outer products) from the exact, 4σ-truncated Gaussian.
        let mut worst: f64 = 0.0;
        for tenths in (20..=640).step_by(7) {
            let sigma = tenths as f64 / 10.0;
            let kc = cascade_kernel(ExtendedBox::for_sigma(sigma, PASSES));
            let rc = kc.len() / 2;
            let r = rc.max((4.0 * sigma + 0.5) as usize);
            let ke: Vec<f64> = gaussian_kernel(sigma, r).iter().map(|&v| f64::from(v)).collect();
            let mut kf = vec![0.0; 2 * r + 1];
            kf[r - rc..=r + rc].copy_from_slice(&kc);
            let l1: f64 = (0..kf.len())
                .flat_map(|i| (0..kf.len()).map(move |j| (i, j)))
                .map(|(i, j)| (kf[i] * kf[j] - ke[i] * ke[j]).abs())
                .sum();
            worst = worst.max(l1);
        }
        assert!(worst <= MAX_KERNEL_L1, "worst L1 distance {worst}");
        assert!(worst > 0.02, "the bound is far looser than measured ({worst}); tighten the doc");
    }

    #[test]
    fn the_engine_applies_the_cascade_kernel_under_every_rule() {
        let borders =
            [Border::Reflect, Border::Mirror, Border::Replicate, Border::Wrap, Border::Constant(0.25)];
        // 3000×7 runs the vertical passes in two or three column strips
        for (w, h) in [(1, 1), (1, 9), (9, 1), (37, 23), (3000, 7)] {
            let p = noise(w, h, 31);
            for sigma in [2.0, 4.5] {
                let b = ExtendedBox::for_sigma(sigma, PASSES);
                let k: Vec<f32> = cascade_kernel(b).iter().map(|&v| v as f32).collect();
                for border in borders {
                    let got = cascade_gauss(&p, b, border);
                    let want = correlate_separable(&p, &k, &k, border);
                    for (g, e) in got.as_slice().iter().zip(want.as_slice()) {
                        // f32 taps and sums of ≤ 2·(2·5·(r+1)+1) terms: 1e-5 is common practice here
                        assert!((g - e).abs() < 1e-5, "{w}×{h} σ={sigma} {border:?}: {g} vs {e}");
                    }
                }
            }
        }
    }

    #[test]
    fn fast_stays_within_its_stated_error_of_exact() {
        let p = noise(120, 90, 8);
        for sigma in [2.0, 6.0, 20.0] {
            let fast = cascade_gauss(&p, ExtendedBox::for_sigma(sigma, PASSES), Border::Reflect);
            let r = (4.0 * sigma + 0.5) as usize;
            let k = gaussian_kernel(sigma, r);
            let exact = correlate_separable(&p, &k, &k, Border::Reflect);
            let worst =
                fast.as_slice().iter().zip(exact.as_slice()).map(|(a, b)| (a - b).abs()).fold(0.0, f32::max);
            // samples in [0, 1): |fast − exact| ≤ MAX_KERNEL_L1 / 2 (see the constant)
            assert!(f64::from(worst) <= MAX_KERNEL_L1 / 2.0 + 1e-6, "σ={sigma}: {worst}");
        }
    }
}
