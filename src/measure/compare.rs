//! Comparing two rasters of the same size and layout: PSNR, SSIM, the largest
//! difference and where it is, the count of differing pixels. Values are
//! compared on the raster scale (`[0, 1]` for integer sources), where the
//! full scale of every sample type is 1.0. Nothing here prints or writes files.

use rayon::prelude::*;

use crate::color::luma::BT709;
use crate::raster::{Plane, Raster};

/// Why two rasters cannot be compared.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum CompareError {
    #[error("the images differ in size: {a_width}×{a_height} and {b_width}×{b_height}")]
    Size { a_width: usize, a_height: usize, b_width: usize, b_height: usize },
    #[error("the images differ in layout: {a} and {b}")]
    Layout { a: &'static str, b: &'static str },
}

/// The largest absolute difference of one sample and where it is.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Largest {
    pub value: f64,
    pub x: usize,
    pub y: usize,
    /// The plane index (alpha last).
    pub channel: usize,
}

/// Everything [`compare`] measures.
#[derive(Clone, Debug, PartialEq)]
pub struct Comparison {
    /// Mean squared error over every sample of every plane (alpha included).
    pub mse: f64,
    /// PSNR over all planes, dB; `+∞` for identical images.
    pub psnr: f64,
    /// PSNR of each plane, dB.
    pub psnr_per_channel: Vec<f64>,
    /// Mean SSIM on BT.709 luma, or the mean over planes with `per_channel`;
    /// `None` for images smaller than the SSIM window (11×11).
    pub ssim: Option<f64>,
    /// SSIM of each plane when asked for (`per_channel`), else empty.
    pub ssim_per_channel: Vec<f64>,
    pub largest: Largest,
    /// Pixels where any plane differs.
    pub differing_pixels: u64,
}

/// Checks that `a` and `b` can be compared sample by sample.
pub fn check_comparable(a: &Raster, b: &Raster) -> Result<(), CompareError> {
    if (a.width(), a.height()) != (b.width(), b.height()) {
        return Err(CompareError::Size {
            a_width: a.width(),
            a_height: a.height(),
            b_width: b.width(),
            b_height: b.height(),
        });
    }
    if a.layout() != b.layout() {
        return Err(CompareError::Layout { a: a.layout().name(), b: b.layout().name() });
    }
    Ok(())
}

/// Compares `a` (the reference) with `b`.
///
/// ```text
/// MSE  = mean((a − b)²)                 over the samples compared
/// PSNR = 10 · log10(L² / MSE)  dB,      L = 1 (full scale of every sample type)
/// ```
///
/// PSNR with L = 1 on the `[0, 1]` scale equals PSNR with L = 255 or 65535 on
/// the codes, i.e. `skimage.metrics.peak_signal_noise_ratio(a, b,
/// data_range=full scale)` (scikit-image 0.26.0). SSIM is [`ssim`] on the
/// BT.709 luma `0.2126 R + 0.7152 G + 0.0722 B` of the values as stored
/// (encoded, not linear light: SSIM models perceived structure), or on each
/// plane with `per_channel` (alpha included) and their mean; images smaller
/// than 11×11 get no SSIM (scikit-image refuses them too).
pub fn compare(a: &Raster, b: &Raster, per_channel: bool) -> Result<Comparison, CompareError> {
    check_comparable(a, b)?;
    let (w, h) = (a.width(), a.height());
    let errors: Vec<f64> = a.planes().iter().zip(b.planes()).map(|(p, q)| squared_error(p, q)).collect();
    let n = (w * h) as f64;
    let mse = errors.iter().sum::<f64>() / (n * errors.len() as f64);
    let (ssim, ssim_per_channel) = if per_channel {
        let each: Option<Vec<f64>> = a.planes().iter().zip(b.planes()).map(|(p, q)| ssim(p, q)).collect();
        match each {
            Some(each) => (Some(each.iter().sum::<f64>() / each.len() as f64), each),
            None => (None, Vec::new()),
        }
    } else {
        (ssim(&luma(a), &luma(b)), Vec::new())
    };
    let (largest, differing_pixels) = largest_difference(a.planes(), b.planes());
    Ok(Comparison {
        mse,
        psnr: psnr_of(mse),
        psnr_per_channel: errors.iter().map(|e| psnr_of(e / n)).collect(),
        ssim,
        ssim_per_channel,
        largest,
        differing_pixels,
    })
}

fn psnr_of(mse: f64) -> f64 {
    if mse == 0.0 { f64::INFINITY } else { 10.0 * (1.0 / mse).log10() }
}

/// Σ (a − b)² in f64, in fixed row chunks (independent of the thread count).
fn squared_error(a: &Plane, b: &Plane) -> f64 {
    let sums: Vec<f64> = a
        .as_slice()
        .par_chunks(1 << 16)
        .zip(b.as_slice().par_chunks(1 << 16))
        .map(|(p, q)| p.iter().zip(q).map(|(&x, &y)| (f64::from(x) - f64::from(y)).powi(2)).sum())
        .collect();
    sums.iter().sum()
}

/// The BT.709 luma of the colour planes (the plane itself for gray).
fn luma(r: &Raster) -> Plane {
    let p = r.planes();
    if r.layout().colour_channels() == 1 {
        return p[0].clone();
    }
    let data: Vec<f32> = p[0]
        .as_slice()
        .par_iter()
        .zip(p[1].as_slice())
        .zip(p[2].as_slice())
        .map(|((&r, &g), &b)| {
            (f64::from(BT709[0]) * f64::from(r)
                + f64::from(BT709[1]) * f64::from(g)
                + f64::from(BT709[2]) * f64::from(b)) as f32
        })
        .collect();
    Plane::from_vec(r.width(), r.height(), data)
        .unwrap_or_else(|_| unreachable!("same size as the source planes"))
}

/// The largest |a − b| (first in plane, row, column order on ties) and the
/// number of pixels where any plane differs.
fn largest_difference(a: &[Plane], b: &[Plane]) -> (Largest, u64) {
    let (w, h) = (a[0].width(), a[0].height());
    let rows: Vec<(Largest, u64)> = (0..h)
        .into_par_iter()
        .map(|y| {
            let mut best = Largest { value: 0.0, x: 0, y, channel: 0 };
            let mut differs = vec![false; w];
            for (c, (p, q)) in a.iter().zip(b).enumerate() {
                for (x, ((&u, &v), d)) in p.row(y).iter().zip(q.row(y)).zip(differs.iter_mut()).enumerate() {
                    let diff = (f64::from(u) - f64::from(v)).abs();
                    // NaN on one side only counts as a difference; NaN on both does not.
                    let unequal = u != v && !(u.is_nan() && v.is_nan());
                    *d |= unequal;
                    if diff > best.value || (unequal && diff.is_nan() && !best.value.is_nan()) {
                        best = Largest { value: diff, x, y, channel: c };
                    }
                }
            }
            (best, differs.iter().filter(|&&d| d).count() as u64)
        })
        .collect();
    let mut best = Largest { value: 0.0, x: 0, y: 0, channel: 0 };
    for (r, _) in &rows {
        if r.value > best.value || (r.value.is_nan() && !best.value.is_nan()) {
            best = *r;
        }
    }
    (best, rows.iter().map(|r| r.1).sum())
}

/// SSIM window side: a Gaussian of σ = 1.5 truncated at 3.5σ, radius
/// `⌊3.5·1.5 + 0.5⌋ = 5` (scikit-image 0.26.0, `structural_similarity`).
pub const SSIM_WINDOW: usize = 11;
const SSIM_RADIUS: usize = SSIM_WINDOW / 2;
const SSIM_SIGMA: f64 = 1.5;
/// Wang et al. 2004, §III-B: K1 = 0.01, K2 = 0.03.
const K1: f64 = 0.01;
const K2: f64 = 0.03;

/// The normalised 11-tap Gaussian window, `exp(−i²/(2σ²)) / Σ`, i = −5..5
/// (as `scipy.ndimage.gaussian_filter` builds it).
fn ssim_weights() -> [f64; SSIM_WINDOW] {
    let mut w = [0.0; SSIM_WINDOW];
    for (i, v) in w.iter_mut().enumerate() {
        let d = i as f64 - SSIM_RADIUS as f64;
        *v = (-0.5 * d * d / (SSIM_SIGMA * SSIM_SIGMA)).exp();
    }
    let sum: f64 = w.iter().sum();
    w.map(|v| v / sum)
}

/// Mean structural similarity of two planes of the same size with data range L = 1:
///
/// ```text
/// μx = G∗x, μy = G∗y, σx² = G∗x² − μx², σy² = G∗y² − μy², σxy = G∗xy − μx·μy
/// SSIM(p) = (2μxμy + C1)(2σxy + C2) / ((μx² + μy² + C1)(σx² + σy² + C2))
/// C1 = (K1·L)², C2 = (K2·L)², K1 = 0.01, K2 = 0.03
/// MSSIM  = mean of SSIM(p) over pixels at least 5 from every edge
/// ```
///
/// G is the separable 11×11 Gaussian of σ = 1.5 (population moments, no
/// sample-covariance correction). Source: Z. Wang, A. C. Bovik, H. R. Sheikh
/// and E. P. Simoncelli, "Image quality assessment: from error visibility to
/// structural similarity", IEEE TIP 13(4):600–612, 2004, eqs. 13–14 and
/// §III-C. The crop matches `skimage.metrics.structural_similarity(...,
/// gaussian_weights=True, sigma=1.5, use_sample_covariance=False)`
/// (scikit-image 0.26.0), which filters the whole image with border mode
/// `reflect` and then averages only pixels `(win − 1)/2 = 5` or more from the
/// edges: every window of those lies inside the image, so no border rule is
/// involved and only they are computed here. All arithmetic in f64; rows in
/// parallel, summed in row order (independent of the thread count). `None`
/// when the planes differ in size or either side is under 11 pixels.
pub fn ssim(a: &Plane, b: &Plane) -> Option<f64> {
    let (w, h) = (a.width(), a.height());
    if (w, h) != (b.width(), b.height()) || w < SSIM_WINDOW || h < SSIM_WINDOW {
        return None;
    }
    let g = ssim_weights();
    let (c1, c2) = (K1 * K1, K2 * K2);
    let r = SSIM_RADIUS;
    let row_sums: Vec<f64> = (r..h - r)
        .into_par_iter()
        .map(|y| {
            // Vertical pass: the five moment rows at y, for every column.
            let mut cols = vec![[0.0f64; 5]; w];
            for (k, &gk) in g.iter().enumerate() {
                let (ra, rb) = (a.row(y + k - r), b.row(y + k - r));
                for ((m, &u), &v) in cols.iter_mut().zip(ra).zip(rb) {
                    let (u, v) = (f64::from(u), f64::from(v));
                    m[0] += gk * u;
                    m[1] += gk * v;
                    m[2] += gk * u * u;
                    m[3] += gk * v * v;
                    m[4] += gk * u * v;
                }
            }
            // Horizontal pass and the SSIM map for the inner columns.
            let mut sum = 0.0;
            for x in r..w - r {
                let mut m = [0.0f64; 5];
                for (k, &gk) in g.iter().enumerate() {
                    let c = &cols[x + k - r];
                    for i in 0..5 {
                        m[i] += gk * c[i];
                    }
                }
                let [mx, my, xx, yy, xy] = m;
                let (vx, vy, vxy) = (xx - mx * mx, yy - my * my, xy - mx * my);
                sum += (2.0 * mx * my + c1) * (2.0 * vxy + c2) / ((mx * mx + my * my + c1) * (vx + vy + c2));
            }
            sum
        })
        .collect();
    Some(row_sums.iter().sum::<f64>() / ((w - 2 * r) * (h - 2 * r)) as f64)
}

#[cfg(test)]
mod tests {
    //! Edge cases: identical images (PSNR +∞, SSIM 1), an 11×11 image (one
    //! SSIM window), 10×N (too small for SSIM), size and layout mismatch, NaN samples,
    //! ties for the largest difference.
    use super::*;
    use crate::raster::{Encoding, Layout};

    fn gray(w: usize, h: usize, f: impl FnMut(usize, usize) -> f32) -> Raster {
        Raster::new(vec![Plane::from_fn(w, h, f).unwrap()], Layout::Gray, Encoding::Srgb).unwrap()
    }

    #[test]
    fn identical_images() {
        let a = gray(16, 12, |x, y| ((x * y) % 7) as f32 / 7.0);
        let c = compare(&a, &a, false).unwrap();
        assert_eq!(c.psnr, f64::INFINITY);
        assert!((c.ssim.unwrap() - 1.0).abs() < 1e-12);
        assert_eq!(c.differing_pixels, 0);
        assert_eq!(c.largest.value, 0.0);
    }

    #[test]
    fn psnr_of_a_constant_offset() {
        // MSE = 0.1² → PSNR = 20 dB exactly (by the definition).
        let a = gray(11, 11, |_, _| 0.5);
        let b = gray(11, 11, |_, _| 0.6);
        let c = compare(&a, &b, true).unwrap();
        assert!((c.psnr - 20.0).abs() < 1e-5, "{}", c.psnr);
        assert_eq!(c.differing_pixels, 121);
        assert_eq!(c.ssim_per_channel.len(), 1);
    }

    #[test]
    fn ssim_of_one_window_matches_the_formula() {
        // An 11×11 image has exactly one window: check it against direct sums.
        let a = gray(11, 11, |x, y| ((x * 3 + y * 5) % 11) as f32 / 10.0);
        let b = gray(11, 11, |x, y| ((x * 7 + y * 2) % 11) as f32 / 10.0);
        let g = ssim_weights();
        let (mut m, pa, pb) = ([0.0f64; 5], &a.planes()[0], &b.planes()[0]);
        for y in 0..11 {
            for x in 0..11 {
                let (u, v, wt) = (f64::from(pa.get(x, y)), f64::from(pb.get(x, y)), g[x] * g[y]);
                m = [m[0] + wt * u, m[1] + wt * v, m[2] + wt * u * u, m[3] + wt * v * v, m[4] + wt * u * v];
            }
        }
        let (vx, vy, vxy) = (m[2] - m[0] * m[0], m[3] - m[1] * m[1], m[4] - m[0] * m[1]);
        let expect = (2.0 * m[0] * m[1] + 1e-4) * (2.0 * vxy + 9e-4)
            / ((m[0] * m[0] + m[1] * m[1] + 1e-4) * (vx + vy + 9e-4));
        assert!((ssim(pa, pb).unwrap() - expect).abs() < 1e-12);
        assert_eq!(ssim(pa, &Plane::zeros(11, 10).unwrap()), None);
        assert!((g.iter().sum::<f64>() - 1.0).abs() < 1e-15);
    }

    #[test]
    fn refuses_what_it_cannot_compare() {
        let a = gray(12, 12, |_, _| 0.0);
        assert!(matches!(compare(&a, &gray(12, 13, |_, _| 0.0), false), Err(CompareError::Size { .. })));
        let rgb = Raster::new(vec![Plane::zeros(12, 12).unwrap(); 3], Layout::Rgb, Encoding::Srgb).unwrap();
        assert!(matches!(compare(&a, &rgb, false), Err(CompareError::Layout { .. })));
        let small = gray(10, 30, |_, _| 0.0);
        let c = compare(&small, &small, false).unwrap();
        assert_eq!((c.ssim, c.psnr), (None, f64::INFINITY));
    }

    #[test]
    fn largest_difference_finds_the_first_worst_sample() {
        let a = gray(12, 12, |_, _| 0.5);
        let b = gray(12, 12, |x, y| match (x, y) {
            (3, 4) | (9, 9) => 0.9,
            (1, 1) => 0.6,
            _ => 0.5,
        });
        let c = compare(&a, &b, false).unwrap();
        assert_eq!((c.largest.x, c.largest.y, c.largest.channel), (3, 4, 0));
        assert!((c.largest.value - 0.4).abs() < 1e-6);
        assert_eq!(c.differing_pixels, 3);
    }

    #[test]
    fn nan_on_one_side_differs() {
        let a = gray(11, 11, |_, _| 0.5);
        let b = gray(11, 11, |x, y| if (x, y) == (2, 3) { f32::NAN } else { 0.5 });
        let (largest, differing) = largest_difference(a.planes(), b.planes());
        assert_eq!(differing, 1);
        assert!(largest.value.is_nan());
        assert_eq!((largest.x, largest.y), (2, 3));
    }

    #[test]
    fn the_colour_default_uses_bt709_luma() {
        let planes = |v: [f32; 3]| v.iter().map(|&c| Plane::filled(11, 11, c).unwrap()).collect::<Vec<_>>();
        let a = Raster::new(planes([0.2, 0.4, 0.6]), Layout::Rgb, Encoding::Srgb).unwrap();
        let y = luma(&a);
        assert!((f64::from(y.get(0, 0)) - (0.2126 * 0.2 + 0.7152 * 0.4 + 0.0722 * 0.6)).abs() < 1e-7);
    }
}
