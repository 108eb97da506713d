//! Noise estimate of one plane from its finest diagonal wavelet subband
//! (Donoho & Johnstone 1994). Computes the subband and its median; does not
//! denoise.

use rayon::prelude::*;

use crate::raster::Plane;

/// The Daubechies-2 (four-tap) analysis high-pass filter, as PyWavelets 1.9.0
/// lists it (`pywt.Wavelet('db2').dec_hi`); Daubechies, "Ten Lectures on
/// Wavelets" (SIAM 1992), table 6.1, N = 2, in PyWavelets' sign and order.
const DB2_HIGH: [f64; 4] =
    [-0.48296291314453416, 0.8365163037378079, -0.2241438680420134, -0.12940952255126037];

/// The 75th percentile of the standard normal distribution,
/// `scipy.stats.norm.ppf(0.75)` (scipy 1.17.1); often rounded to 0.6745.
const NORMAL_Q75: f64 = 0.6744897501960817;

/// The noise standard deviation of `plane`, on the plane's scale:
///
/// ```text
/// HH1   = finest diagonal detail subband of the 2-D db2 wavelet transform
///         (high-pass along rows and columns, downsampled by 2 each way,
///          half-sample symmetric extension at the edges)
/// sigma = median(|d| for d in HH1, d ≠ 0) / Φ⁻¹(0.75)
/// ```
///
/// Source: D. L. Donoho and I. M. Johnstone, "Ideal spatial adaptation by
/// wavelet shrinkage", Biometrika 81(3):425–455, 1994, §4.2. The transform
/// follows `pywt.dwtn(x, 'db2')` (mode `symmetric`: output length
/// `⌊(N + 3)/2⌋`, coefficient `o` = Σⱼ h[j]·x[2o + 1 − j]), and zero
/// coefficients are left out as `skimage.restoration.estimate_sigma`
/// (scikit-image 0.26.0) does, so flat regions do not pull the median to zero.
/// The estimate assumes white Gaussian noise and overestimates on images with
/// much fine texture. Computed in f64 with PyWavelets' operation order (along
/// columns first, then rows; taps in order); with `levels = Some(n)` (exact
/// codes) the samples are taken as `code / n` in f64, so the result equals
/// the float64 reference bit for bit. `None` when no coefficient is non-zero
/// (a plane of zeros) or a sample is not finite.
pub fn noise_sigma(plane: &Plane, levels: Option<u32>) -> Option<f64> {
    let (w, h) = (plane.width(), plane.height());
    if plane.as_slice().iter().any(|v| !v.is_finite()) {
        return None;
    }
    // Exact codes are read back as code / n in f64, the value a float64
    // reference sees, so near-zero coefficients come out the same.
    let n = levels.filter(|&n| (1..=65535).contains(&n)).map(f64::from);
    let value = |v: f32| match n {
        Some(n) => (f64::from(v) * n).round() / n,
        None => f64::from(v),
    };
    let (ow, oh) = ((w + 3) / 2, (h + 3) / 2);
    // Columns first, then rows (pywt.dwtn's axis order), each sum in tap order.
    let mut magnitudes: Vec<f64> = (0..oh)
        .into_par_iter()
        .flat_map_iter(|oy| {
            let mut column_pass = vec![0.0f64; w];
            for (j, &c) in DB2_HIGH.iter().enumerate() {
                let row = plane.row(symmetric(2 * oy + 1, j, h));
                column_pass.iter_mut().zip(row).for_each(|(a, &v)| *a += c * value(v));
            }
            (0..ow)
                .map(move |ox| {
                    let mut d = 0.0f64;
                    for (j, &c) in DB2_HIGH.iter().enumerate() {
                        d += c * column_pass[symmetric(2 * ox + 1, j, w)];
                    }
                    d
                })
                .filter(|&d| d != 0.0)
                .map(f64::abs)
        })
        .collect();
    median(&mut magnitudes).map(|m| m / NORMAL_Q75)
}

/// The index of `x[i − j]` under half-sample symmetric extension
/// (`… x1 x0 | x0 x1 … xN−1 | xN−1 xN−2 …`, repeating with period 2N).
fn symmetric(i: usize, j: usize, n: usize) -> usize {
    let period = 2 * n as isize;
    let k = (i as isize - j as isize).rem_euclid(period) as usize;
    if k < n { k } else { 2 * n - 1 - k }
}

/// The median (mean of the two middle values for an even count), or `None` if empty.
fn median(v: &mut [f64]) -> Option<f64> {
    let n = v.len();
    if n == 0 {
        return None;
    }
    let (_, &mut upper, _) = v.select_nth_unstable_by(n / 2, f64::total_cmp);
    if n % 2 == 1 {
        return Some(upper);
    }
    let lower = v[..n / 2].iter().copied().fold(f64::NEG_INFINITY, f64::max);
    Some((lower + upper) / 2.0)
}

#[cfg(test)]
mod tests {
    //! Edge cases: constant plane (no non-zero coefficient), 1×1 and 1×N
    //! planes (the extension wraps), NaN, even and odd medians.
    use super::*;

    #[test]
    fn symmetric_extension_repeats_the_edge_sample() {
        // x[-1] = x0, x[-2] = x1, x[N] = xN−1 for N = 3.
        let idx: Vec<usize> =
            [(0, 1), (0, 2), (3, 0), (4, 0)].iter().map(|&(i, j)| symmetric(i, j, 3)).collect();
        assert_eq!(idx, vec![0, 1, 2, 1]);
        assert_eq!(symmetric(0, 3, 1), 0);
    }

    #[test]
    fn the_filter_is_a_unit_norm_high_pass() {
        // Orthonormal wavelet: Σh = 0, Σh² = 1.
        assert!(DB2_HIGH.iter().sum::<f64>().abs() < 1e-12);
        assert!((DB2_HIGH.iter().map(|c| c * c).sum::<f64>() - 1.0).abs() < 1e-12);
    }

    #[test]
    fn medians() {
        assert_eq!(median(&mut [3.0, 1.0, 2.0]), Some(2.0));
        assert_eq!(median(&mut [4.0, 1.0, 3.0, 2.0]), Some(2.5));
        assert_eq!(median(&mut []), None);
    }

    #[test]
    fn constant_and_tiny_planes() {
        // The db2 taps sum to 0 only to rounding, so a constant gives a tiny
        // estimate; skimage.restoration.estimate_sigma (scikit-image 0.26.0)
        // returns the same 2.855388e-34 for this 9×7 plane of 0.25 in float64.
        let tiny = noise_sigma(&Plane::filled(9, 7, 0.25).unwrap(), None).unwrap();
        assert!((tiny / 2.8553880082348866e-34 - 1.0).abs() < 1e-6, "{tiny:e}");
        assert_eq!(noise_sigma(&Plane::zeros(9, 7).unwrap(), None), None);
        assert_eq!(noise_sigma(&Plane::zeros(1, 1).unwrap(), None), None);
        assert!(noise_sigma(&Plane::from_fn(5, 1, |x, _| (x % 2) as f32).unwrap(), None).is_some());
        assert_eq!(noise_sigma(&Plane::from_vec(2, 1, vec![f32::NAN, 0.0]).unwrap(), None), None);
    }

    #[test]
    fn white_gaussian_noise_of_known_sigma_is_recovered() {
        // Box–Muller normal deviates, σ = 0.05; 16384 coefficients give a
        // median with a relative standard error near 1.2 %, so 5 % is ~4 SE.
        let mut state = 12345u64;
        let mut uniform = move || {
            state = state.wrapping_mul(6364136223846793005).wrapping_add(1442695040888963407);
            ((state >> 11) as f64 + 0.5) / (1u64 << 53) as f64
        };
        let plane = Plane::from_fn(256, 256, |_, _| {
            let (u, v) = (uniform(), uniform());
            (0.05 * (-2.0 * u.ln()).sqrt() * (std::f64::consts::TAU * v).cos()) as f32
        })
        .unwrap();
        let est = noise_sigma(&plane, None).unwrap();
        assert!((est / 0.05 - 1.0).abs() < 0.05, "{est}");
    }
}
