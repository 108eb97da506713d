//! The constant-time Gaussian behind `gauss:method=fast`: a cascade of
//! extended box filters run by running sums. Only the cascade lives here; the
//! choice between it and the exact kernel is `Gauss`'s.

use std::sync::atomic::{AtomicBool, Ordering};

use multiversion::multiversion;

use super::rows::{LANES, deinterleave, interleave};
use crate::raster::{Plane, all_finite};
use crate::tile::{self, Border};

/// Box passes in the cascade. Five keep the 2-D kernel within an L1 distance
/// of 0.044 of the exact Gaussian for every σ ≥ 2 (measured by the test
/// `cascade_kernel_is_within_the_documented_distance`), against 0.056 for four.
pub const PASSES: usize = 5;

/// Largest L1 distance between the 2-D cascade kernel and the exact (4σ
/// truncated) Gaussian for σ ≥ 2. For samples in `[0, M]` the outputs then
/// differ by at most `M · L1 / 2` (both kernels sum to 1, so the positive and
/// negative parts of their difference are equal): 0.022·M, plus the f32
/// rounding of [`drift_bound`] (under 0.0005·M for σ ≤ 64).
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

/// Output samples between restarts of a running sum: every `RESTART`
/// samples it is summed afresh over its window, which bounds the rounding
/// drift of the f32 sums (see [`drift_bound`]). At σ = 32 (m = 24) a restart
/// costs 49 additions per 256 samples, a few per cent of a pass.
const RESTART: usize = 256;

/// The largest difference, per unit of the largest sample magnitude M, the
/// f32 running sums can make to the cascade of `sigma` against exact
/// arithmetic. Per pass: the window sum of `2m + 1` samples rounds by at most
/// `2m·u·(2m + 1)·M` when summed afresh (recursive summation, u = 2⁻²⁴),
/// then each of at most `RESTART` steps rounds the difference of the entering
/// and leaving samples (≤ `2u·M`) and the sum (≤ `u·(2m + 1)·M`); the output
/// divides the sum by `c ≥ 2m + 1`, and its own few roundings add `4u·M`. A
/// later pass carries an earlier pass's error unchanged (its weights are
/// positive and sum to 1), so the bound is `2·PASSES` times that of one pass.
pub fn drift_bound(sigma: f64) -> f64 {
    let b = ExtendedBox::for_sigma(sigma, PASSES);
    let u = f64::from(f32::EPSILON) / 2.0;
    let n = 2.0 * b.r as f64 + 1.0;
    let per_pass = u * ((n - 1.0) + RESTART as f64 * (1.0 + 2.0 / n) + 4.0);
    2.0 * PASSES as f64 * per_pass
}

/// One pass in "valid" mode along N lines at once: `out[i] = Σ taps ·
/// inp[i .. i + 2r + 3]` lane by lane, `out.len() = inp.len() − 2r − 2`, by a
/// running sum (the sample entering the window added, the one leaving it
/// subtracted), summed afresh every [`RESTART`] samples.
#[multiversion(targets("x86_64+avx512f+avx512bw+avx512vl+avx2+fma", "x86_64+avx2+fma"))]
fn pass_lanes<const N: usize>(inp: &[[f32; N]], b: ExtendedBox, out: &mut [[f32; N]]) {
    let r = b.r;
    let (alpha, inv) = (b.alpha as f32, (1.0 / (2.0 * r as f64 + 1.0 + 2.0 * b.alpha)) as f32);
    for (c, chunk) in out.chunks_mut(RESTART).enumerate() {
        let i0 = c * RESTART;
        // the window of output i0: inputs i0 + 1 ..= i0 + 2r + 1 at weight 1
        let mut s = [0.0f32; N];
        for e in &inp[i0 + 1..i0 + 2 * r + 2] {
            for l in 0..N {
                s[l] += e[l];
            }
        }
        for (j, o) in chunk.iter_mut().enumerate() {
            let i = i0 + j;
            if j > 0 {
                let (add, sub) = (&inp[i + 2 * r + 1], &inp[i]);
                for l in 0..N {
                    s[l] += add[l] - sub[l];
                }
            }
            let (lo, hi) = (&inp[i], &inp[i + 2 * r + 2]);
            for l in 0..N {
                o[l] = (s[l] + alpha * (lo[l] + hi[l])) * inv;
            }
        }
    }
}

/// Runs the `PASSES` passes over `first` (lane vectors), ping-ponging
/// between `line` and `tmp` (each at least as long); returns the result,
/// `first.len() − PASSES·(2r + 2)` vectors long.
fn cascade_lanes<'a, const N: usize>(
    first: &[[f32; N]],
    line: &'a mut Vec<[f32; N]>,
    tmp: &'a mut Vec<[f32; N]>,
    b: ExtendedBox,
) -> &'a [[f32; N]] {
    let span = 2 * (b.r + 1);
    let mut len = first.len() - span;
    pass_lanes(first, b, &mut line[..len]);
    for _ in 1..PASSES {
        pass_lanes(&line[..len], b, &mut tmp[..len - span]);
        std::mem::swap(line, tmp);
        len -= span;
    }
    &line[..len]
}

/// The Gaussian of `src` by `PASSES` extended boxes along each axis, or
/// `None` if `src` (or a constant border's value) holds a NaN or an
/// infinity: a running sum would carry it past its window (the caller then
/// applies the cascade's kernel directly). The check rides on the vertical
/// pass's copy of the source, on data still in cache, so a finite plane is
/// read from memory once, not twice (σ = 32 on 4000×3000 RGB, one thread,
/// `perf`: a separate scan took 5 % of the step's samples, the check in the
/// copy takes 2 %).
///
/// The border rule is applied once, to the source (a halo of
/// `PASSES·(r+1)`), and the passes run in valid mode, so every rule means
/// what it means for the exact kernel. Everything is f32: running sums
/// summed afresh every [`RESTART`] samples (their rounding is bounded by
/// [`drift_bound`]).
///
/// Both axes run on lane vectors ([`pass_lanes`]): each band's columns are
/// taken [`COLUMNS`] at a time down the band and its halo (a lane vector is
/// then one row's adjacent samples, so no transposition is needed), then its
/// rows [`LANES`] at a time, interleaved. The vertical buffers hold
/// `GROUPS + 2` column groups of `band + 2·halo` rows, 64 bytes a row (670 KB
/// for σ = 32 and bands of 1500 rows: L2 and L3), and their size does not
/// depend on the image width, so bands can be tall and the halo, read once
/// per band, is a small overhead.
pub fn cascade_gauss(src: &Plane, b: ExtendedBox, border: Border) -> Option<Plane> {
    let (w, h) = (src.width(), src.height());
    let halo = PASSES * (b.r + 1);
    let const_row = vec![border.constant_value(); w];
    let left: Vec<Option<usize>> = (0..halo).map(|i| border.index(i as isize - halo as isize, w)).collect();
    let right: Vec<Option<usize>> = (0..halo).map(|i| border.index((w + i) as isize, w)).collect();
    let rows = tile::band_rows(w, 0).max(BAND_HALOS * halo);
    let mut out = Plane::for_overwrite(w, h).unwrap_or_else(|_| unreachable!("same size as a valid plane"));
    let non_finite = AtomicBool::new(false);
    tile::for_each_band(&mut out, rows, |y0, band| {
        if non_finite.load(Ordering::Relaxed) {
            return;
        }
        let nb = band.len() / w;
        // Vertical: the band's rows and halo, y0 − halo .. y0 + nb + halo.
        let m0 = nb + 2 * halo;
        let source: Vec<&[f32]> = (0..m0)
            .map(|k| {
                let y = (y0 + k) as isize - halo as isize;
                tile::source_row(src, y, border).unwrap_or(&const_row)
            })
            .collect();
        let mut firsts = vec![vec![[0.0f32; COLUMNS]; m0]; GROUPS];
        let (mut line, mut tmp) = (vec![[0.0f32; COLUMNS]; m0], vec![[0.0f32; COLUMNS]; m0]);
        for x0 in (0..w).step_by(COLUMNS * GROUPS) {
            // Groups of COLUMNS columns from x0 on, GROUPS of them (fewer at
            // the right edge), the last maybe short: its lanes past the
            // image keep finite values of an earlier group, never written back.
            let groups: Vec<(usize, usize)> = (x0..w.min(x0 + COLUMNS * GROUPS))
                .step_by(COLUMNS)
                .map(|xs| (xs, COLUMNS.min(w - xs)))
                .collect();
            for (k, row) in source.iter().enumerate() {
                for (first, &(xs, n)) in firsts.iter_mut().zip(&groups) {
                    copy_group(&mut first[k][..n], &row[xs..xs + n]);
                }
            }
            // every sample of the plane is copied by some band, and checked
            // here while still in cache (lanes past the image hold values
            // already checked); buffers past the edge groups are stale
            if !firsts[..groups.len()].iter().all(|first| all_finite(first.as_flattened())) {
                non_finite.store(true, Ordering::Relaxed);
                return;
            }
            for (first, &(xs, n)) in firsts.iter().zip(&groups) {
                let result = cascade_lanes(first, &mut line, &mut tmp, b);
                for (e, row) in result.iter().zip(band.chunks_exact_mut(w)) {
                    copy_group(&mut row[xs..xs + n], &e[..n]);
                }
            }
        }
        // Horizontal, a group of LANES rows at a time (lane l of element x is
        // row l of the group, column x − halo): pad by the rule (a constant
        // stays itself: the kernel sums to 1), then the passes in valid mode.
        // In the last group, lanes past its rows keep finite values of an
        // earlier group and are not written back.
        let wp = w + 2 * halo;
        let fill = [border.constant_value(); LANES];
        let mut group = vec![[0.0f32; LANES]; wp];
        let (mut line, mut tmp) = (vec![[0.0f32; LANES]; wp], vec![[0.0f32; LANES]; wp]);
        for rows in band.chunks_mut(LANES * w) {
            interleave(rows, w, &mut group[halo..halo + w]);
            for k in 0..halo {
                group[k] = left[k].map_or(fill, |j| group[halo + j]);
                group[halo + w + k] = right[k].map_or(fill, |j| group[halo + j]);
            }
            deinterleave(cascade_lanes(&group, &mut line, &mut tmp, b), rows, w);
        }
    });
    (!non_finite.into_inner()).then_some(out)
}

/// `dst.copy_from_slice(src)` for at most [`COLUMNS`] samples, a whole
/// group as one fixed-size move: a `memmove` call per row, for a length the
/// compiler cannot see, cost a fifth of the cascade.
#[inline(always)]
fn copy_group(dst: &mut [f32], src: &[f32]) {
    match (<&mut [f32; COLUMNS]>::try_from(&mut *dst), <&[f32; COLUMNS]>::try_from(src)) {
        (Ok(d), Ok(s)) => *d = *s,
        _ => dst.copy_from_slice(src),
    }
}

/// Columns the vertical passes take at once: one 64-byte cache line of each
/// row, two AVX2 vectors (two independent running sums) a step.
const COLUMNS: usize = 16;

/// Column groups taken from the source together, so each row is read
/// `GROUPS·COLUMNS` samples at a time: a strided read of one cache line per
/// row waits on memory for each (σ = 32 on 4000×3000 RGB, one thread: about
/// 225 ms at 4 groups, 250 ms at 1).
const GROUPS: usize = 4;

/// Least band height, in halos: the halo rows are passed through the
/// vertical cascade once per band, so taller bands waste less (σ = 32 on
/// 4000×3000 RGB, one thread: 195 ms at 12 halos, 220 ms at 4).
const BAND_HALOS: usize = 12;

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
    fn an_infinity_in_a_later_band_also_takes_the_direct_path() {
        // The check rides on the vertical copy band by band: an infinity far
        // from the first band must still be found, and then stay in its
        // window (a running sum would turn it into NaN past the window).
        use crate::ops::Operator;
        use crate::ops::filter::{Gauss, GaussMethod};
        use crate::raster::{Encoding, Layout, Raster};
        // 2000 wide: bands of 128 rows under the default band budget, so
        // row 350 lies in the third of four
        let (w, h, at) = (2000, 400, (1000, 350));
        let mut p = noise(w, h, 3);
        p.as_mut_slice()[at.1 * w + at.0] = f32::INFINITY;
        let b = ExtendedBox::for_sigma(2.0, PASSES);
        assert!(cascade_gauss(&p, b, Border::Reflect).is_none());
        let g = Gauss::with_method(2.0, 4.0, GaussMethod::Fast, Border::Reflect).unwrap();
        let r = Raster::new(vec![p], Layout::Gray, Encoding::Linear).unwrap();
        let out = g.apply(r).unwrap().into_planes().remove(0);
        let reach = PASSES * (b.r + 1);
        for (i, v) in out.as_slice().iter().enumerate() {
            let near = (i % w).abs_diff(at.0) <= reach && (i / w).abs_diff(at.1) <= reach;
            assert_eq!(!v.is_finite(), near, "x={} y={}: {v}", i % w, i / w);
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
        // 37 wide: a last, short column group; 3000×7: bands all halo
        for (w, h) in [(1, 1), (1, 9), (9, 1), (37, 23), (3000, 7)] {
            let p = noise(w, h, 31);
            for sigma in [2.0, 4.5] {
                let b = ExtendedBox::for_sigma(sigma, PASSES);
                let k: Vec<f32> = cascade_kernel(b).iter().map(|&v| v as f32).collect();
                for border in borders {
                    let got = cascade_gauss(&p, b, border).expect("finite");
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
    fn long_lines_stay_within_the_drift_bound() {
        // 1000 + noise: sums large beside their steps, the hard case for f32
        // running sums. Reference: the cascade kernel applied in f64, edge
        // samples repeated (Border::Replicate).
        let b = ExtendedBox::for_sigma(32.0, PASSES);
        let k = kernel64(b);
        let (n, rk) = (6000, k.len() / 2);
        let line: Vec<f32> = noise(n, 1, 5).as_slice().iter().map(|v| 1000.0 + v).collect();
        let at = |i: usize| f64::from(line[i.saturating_sub(rk).min(n - 1)]);
        let want: Vec<f64> =
            (0..n).map(|i| k.iter().enumerate().map(|(j, kj)| kj * at(i + j)).sum()).collect();
        let bound = drift_bound(32.0) * 1001.0;
        // the figure the MAX_KERNEL_L1 and `gauss` docs give
        assert!(drift_bound(64.0) < 5e-4);
        for (w, h) in [(n, 1), (1, n)] {
            let p = Plane::from_fn(w, h, |x, y| line[x + y]).unwrap();
            let got = cascade_gauss(&p, b, Border::Replicate).expect("finite");
            let worst =
                got.as_slice().iter().zip(&want).map(|(g, e)| (f64::from(*g) - e).abs()).fold(0.0, f64::max);
            assert!(worst <= bound, "{w}×{h}: {worst} > {bound}");
        }
    }

    #[test]
    fn fast_stays_within_its_stated_error_of_exact() {
        let p = noise(120, 90, 8);
        for sigma in [2.0, 6.0, 20.0] {
            let fast =
                cascade_gauss(&p, ExtendedBox::for_sigma(sigma, PASSES), Border::Reflect).expect("finite");
            let r = (4.0 * sigma + 0.5) as usize;
            let k = gaussian_kernel(sigma, r);
            let exact = correlate_separable(&p, &k, &k, Border::Reflect);
            let worst =
                fast.as_slice().iter().zip(exact.as_slice()).map(|(a, b)| (a - b).abs()).fold(0.0, f32::max);
            // samples in [0, 1): |fast − exact| ≤ MAX_KERNEL_L1 / 2 + drift (see the constant)
            let bound = MAX_KERNEL_L1 / 2.0 + drift_bound(sigma);
            assert!(f64::from(worst) <= bound, "σ={sigma}: {worst}");
        }
    }
}
