//! Neighbourhood filters: `gauss`, `convolve`, `box` and `sharpen` (they mix
//! light, so they run in linear light, with alpha premultiplied while they
//! work), `median` (a rank filter, right in any domain), and the
//! edge-preserving `bilateral` and `nlmeans` (their weights compare encoded
//! values).

mod bilateral;
mod boxmean;
mod engine;
pub mod exptable;
mod fastgauss;
mod median;
mod median8;
pub(crate) mod network;
mod nlmeans;
pub(crate) mod rows;
mod sharpen;

pub use bilateral::{BILATERAL, Bilateral, MAX_BILATERAL_RADIUS, RangeOn};
pub use boxmean::{BOX, BoxMean, MAX_BOX_RADIUS, box_mean};
pub use engine::{correlate_2d, correlate_separable};
pub use fastgauss::{ExtendedBox, MAX_KERNEL_L1, cascade_gauss, drift_bound};
pub use median::{MAX_MEDIAN_RADIUS, MEDIAN, Median, Shape};
pub use nlmeans::{H_PER_SIGMA, MAX_PATCH, MAX_SEARCH, NLMEANS, NlMeans};
pub use sharpen::{SHARPEN, Sharpen};

use crate::error::{Error, ParamError};
use crate::ops::params::{self, Kind, OpSpec, ParamSpec};
use crate::ops::{Domain, Operator, filter_planes};
use crate::raster::Raster;
use crate::tile::Border;

/// The text of `pumice ops gauss`, also the doc of [`Gauss`].
macro_rules! gauss_doc {
    () => {
        "Gaussian blur: an exact separable kernel, or a constant-time cascade for large sigma.

```text
method=exact:
g(i) = exp(-i² / 2σ²) / Σⱼ exp(-j² / 2σ²),   i = -r … r,   r = floor(truncate·σ + 1/2)
out  = in ⊛ (g ⊗ g)    (vertical pass, then horizontal)
method=fast: five extended boxes along each axis, by running sums (f32,
             each summed afresh every 256 samples):
b(i) = 1/c for |i| ≤ m,  α/c for |i| = m + 1,  c = 2m + 1 + 2α
m, α chosen so that the five-fold cascade has variance exactly σ²
method=auto: exact below sigma 5.5, fast from 5.5 up (FAST_SIGMA)
```

Accuracy of fast: the 2-D cascade kernel is within an L1 distance of 0.044 of
the exact kernel (truncate 4) for every σ ≥ 2 (measured over σ = 2 … 64 in a
unit test), so for samples in [0, M] the two methods differ by at most
0.022·M (plus under 0.0005·M of f32 rounding for σ ≤ 64), and far less on
smooth images. Its cost per pixel does not grow with sigma; truncate does not
apply to it (its support is 5·(m+1) a side).

Domain: linear light; alpha is premultiplied while filtering.
Border: any rule (default reflect); needs r rows of halo.
Source: the sampled, renormalised Gaussian; the same kernel and truncation rule as
scipy.ndimage.gaussian_filter (common practice). Fast: extended box filtering,
Gwosdek, Grewenig, Bruhn & Weickert, SSVM 2011 (LNCS 6667, pp. 447–458)."
    };
}

#[doc = gauss_doc!()]
#[derive(Debug)]
pub struct Gauss {
    kernel: Vec<f32>,
    border: Border,
    /// The cascade, when it replaces the exact kernel.
    fast: Option<ExtendedBox>,
}

/// How `gauss` computes the blur.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum GaussMethod {
    Exact,
    Fast,
    /// Exact below [`FAST_SIGMA`], fast from it up.
    Auto,
}

/// The sigma from which `method=auto` takes the cascade. Measured with
/// `cargo bench --bench filters -- gauss` (4000×3000 RGB f32, 2 threads, one
/// run, AMD EPYC): exact 85 / 129 / 174 / 230 ms at σ = 2 / 4 / 6 / 8, fast
/// 114–120 ms at every σ (flat, as it should be). The exact kernel's cost
/// grows by about 22 ms per unit of σ here, so the two cross near σ = 3.5; the
/// switch is kept at 5.5, well above, because the exact kernel is the more
/// accurate (the cascade's documented error is 0.022·M) and the common small
/// blurs then match scipy.ndimage.gaussian_filter to rounding.
pub const FAST_SIGMA: f64 = 5.5;

impl Gauss {
    pub fn new(sigma: f64, truncate: f64, border: Border) -> Result<Gauss, ParamError> {
        if !(sigma > 0.0 && sigma.is_finite()) {
            return Err(ParamError::new(format!("sigma must be positive, got {sigma}")));
        }
        Gauss::with_method(sigma, truncate, GaussMethod::Exact, border)
    }

    /// A Gaussian computed by `method`.
    pub fn with_method(
        sigma: f64,
        truncate: f64,
        method: GaussMethod,
        border: Border,
    ) -> Result<Gauss, ParamError> {
        if !(sigma > 0.0 && sigma.is_finite()) {
            return Err(ParamError::new(format!("sigma must be positive, got {sigma}")));
        }
        let fast = match method {
            GaussMethod::Exact => false,
            GaussMethod::Fast => true,
            GaussMethod::Auto => sigma >= FAST_SIGMA,
        };
        let radius = (truncate * sigma + 0.5).floor() as usize;
        let kernel = if fast { Vec::new() } else { gaussian_kernel(sigma, radius) };
        Ok(Gauss { kernel, border, fast: fast.then(|| ExtendedBox::for_sigma(sigma, fastgauss::PASSES)) })
    }

    /// The normalised 1-D kernel, `2r + 1` taps.
    pub fn kernel(&self) -> &[f32] {
        &self.kernel
    }
}

/// The sampled Gaussian of `sigma` on `−radius..=radius`, normalised to sum 1
/// (computed in `f64`, then rounded).
pub fn gaussian_kernel(sigma: f64, radius: usize) -> Vec<f32> {
    let r = radius as isize;
    let raw: Vec<f64> = (-r..=r).map(|i| (-0.5 * (i * i) as f64 / (sigma * sigma)).exp()).collect();
    let sum: f64 = raw.iter().sum();
    raw.iter().map(|v| (v / sum) as f32).collect()
}

impl Operator for Gauss {
    fn domain(&self) -> Domain {
        Domain::Linear
    }

    fn apply(&self, raster: Raster) -> Result<Raster, Error> {
        filter_planes(raster, |p| {
            Ok(match self.fast {
                Some(b) => cascade_gauss(p, b, self.border).unwrap_or_else(|| {
                    // Running sums would carry a NaN past its window: apply the
                    // cascade's own kernel directly instead.
                    let k = fastgauss::kernel(b);
                    correlate_separable(p, &k, &k, self.border)
                }),
                None => correlate_separable(p, &self.kernel, &self.kernel, self.border),
            })
        })
    }
}

pub static GAUSS: OpSpec = OpSpec {
    name: "gauss",
    family: "filter",
    summary: "Gaussian blur (exact kernel, or a constant-time cascade for large sigma)",
    doc: gauss_doc!(),
    main: Some("sigma"),
    params: &[
        ParamSpec {
            name: "sigma",
            kind: Kind::positive(0.0, 1000.0),
            default: None,
            help: "standard deviation in pixels",
        },
        ParamSpec {
            name: "truncate",
            kind: Kind::positive(0.0, 20.0),
            default: Some("4"),
            help: "kernel radius in standard deviations (method=exact)",
        },
        params::BORDER_PARAM,
        params::FILL_PARAM,
        ParamSpec {
            name: "method",
            kind: Kind::Choice(&["auto", "exact", "fast"]),
            default: Some("auto"),
            help: "exact kernel, constant-time box cascade, or auto (fast from sigma 5.5)",
        },
    ],
    build: |a| {
        let method = match a.choice("method")? {
            "exact" => GaussMethod::Exact,
            "fast" => GaussMethod::Fast,
            _ => GaussMethod::Auto,
        };
        Ok(Box::new(Gauss::with_method(
            a.number("sigma")?,
            a.number("truncate")?,
            method,
            params::border(a)?,
        )?))
    },
};

/// Largest side of a `convolve` matrix.
pub const MAX_KERNEL_SIDE: usize = 31;

/// The text of `pumice ops convolve`, also the doc of [`Convolve`].
macro_rules! convolve_doc {
    () => {
        "Convolution with a matrix of odd size up to 31×31.

```text
out(x, y) = Σᵢⱼ K(i, j) · in(x - (j - rx), y - (i - ry))    (true convolution)
K ← K / ΣK    when normalize=true
```

Write the matrix with spaces between numbers and `;` between rows, in quotes:
`-s 'convolve:kernel=1 2 1;2 4 2;1 2 1,normalize=true'`.
A rank-1 matrix (an outer product of a column and a row, to 1e-6 of its largest
entry) runs as two 1-D passes.
Domain: linear light; alpha is premultiplied while filtering.
Border: any rule (default reflect); needs (rows - 1)/2 rows of halo.
Source: the definition of discrete 2-D convolution (as scipy.ndimage.convolve)."
    };
}

#[doc = convolve_doc!()]
#[derive(Debug)]
pub struct Convolve {
    shape: KernelShape,
    border: Border,
}

/// How a convolution kernel is applied, already turned by 180° for correlation.
#[derive(Debug, PartialEq)]
enum KernelShape {
    Separable { kx: Vec<f32>, ky: Vec<f32> },
    Full { k: Vec<f32>, kw: usize, kh: usize },
}

impl Convolve {
    pub fn new(m: &params::Matrix, normalize: bool, border: Border) -> Result<Convolve, ParamError> {
        if m.rows.is_multiple_of(2)
            || m.cols.is_multiple_of(2)
            || m.rows > MAX_KERNEL_SIDE
            || m.cols > MAX_KERNEL_SIDE
        {
            return Err(ParamError::new(format!(
                "the kernel must have an odd number of rows and columns, at most {MAX_KERNEL_SIDE}; got {}×{}",
                m.rows, m.cols
            )));
        }
        let mut data = m.data.clone();
        if normalize {
            let sum: f64 = data.iter().sum();
            if sum.abs() < 1e-12 {
                return Err(ParamError::new("the kernel sums to zero, so normalize=true cannot scale it"));
            }
            data.iter_mut().for_each(|v| *v /= sum);
        }
        // Turn by 180° so the engines' correlation computes convolution.
        data.reverse();
        let (kh, kw) = (m.rows, m.cols);
        let shape = match rank_one_factors(&data, kw, kh) {
            Some((kx, ky)) => KernelShape::Separable { kx, ky },
            None => KernelShape::Full { k: data.iter().map(|&v| v as f32).collect(), kw, kh },
        };
        Ok(Convolve { shape, border })
    }

    /// True when the kernel runs as two 1-D passes.
    pub fn is_separable(&self) -> bool {
        matches!(self.shape, KernelShape::Separable { .. })
    }
}

/// Splits a `kh × kw` matrix into column and row vectors with `K = ky ⊗ kx`
/// when it has rank 1 (every entry within 1e-6 of the largest one of the product).
fn rank_one_factors(k: &[f64], kw: usize, kh: usize) -> Option<(Vec<f32>, Vec<f32>)> {
    let (pivot, &pv) = k.iter().enumerate().max_by(|a, b| a.1.abs().total_cmp(&b.1.abs()))?;
    if pv == 0.0 {
        return None;
    }
    let (pr, pc) = (pivot / kw, pivot % kw);
    let ky: Vec<f64> = (0..kh).map(|i| k[i * kw + pc]).collect();
    let kx: Vec<f64> = (0..kw).map(|j| k[pr * kw + j] / pv).collect();
    let tol = 1e-6 * pv.abs();
    let rank_one = (0..kh).all(|i| (0..kw).all(|j| (k[i * kw + j] - ky[i] * kx[j]).abs() <= tol));
    rank_one.then(|| (kx.iter().map(|&v| v as f32).collect(), ky.iter().map(|&v| v as f32).collect()))
}

impl Operator for Convolve {
    fn domain(&self) -> Domain {
        Domain::Linear
    }

    fn apply(&self, raster: Raster) -> Result<Raster, Error> {
        filter_planes(raster, |p| {
            Ok(match &self.shape {
                KernelShape::Separable { kx, ky } => correlate_separable(p, kx, ky, self.border),
                KernelShape::Full { k, kw, kh } => correlate_2d(p, k, *kw, *kh, self.border),
            })
        })
    }
}

pub static CONVOLVE: OpSpec = OpSpec {
    name: "convolve",
    family: "filter",
    summary: "convolution with any odd-sized matrix (separable ones run as two passes)",
    doc: convolve_doc!(),
    main: Some("kernel"),
    params: &[
        ParamSpec {
            name: "kernel",
            kind: Kind::Matrix,
            default: None,
            help: "the matrix, rows separated by `;`",
        },
        ParamSpec {
            name: "normalize",
            kind: Kind::Bool,
            default: Some("false"),
            help: "divide the matrix by the sum of its entries",
        },
        params::BORDER_PARAM,
        params::FILL_PARAM,
    ],
    build: |a| Ok(Box::new(Convolve::new(a.matrix("kernel")?, a.bool("normalize")?, params::border(a)?)?)),
};

#[cfg(test)]
mod tests {
    //! Edge cases: even-sized and oversized matrices, zero-sum normalisation,
    //! asymmetric kernels (the 180° turn), constant images.
    use super::*;
    use crate::ops::params::parse_matrix;
    use crate::raster::{Encoding, Layout, Plane};

    #[test]
    fn gaussian_kernel_sums_to_one_and_is_symmetric() {
        let g = Gauss::new(2.0, 4.0, Border::Reflect).unwrap();
        assert_eq!(g.kernel().len(), 17); // r = floor(4·2 + 0.5) = 8
        let sum: f32 = g.kernel().iter().sum();
        assert!((sum - 1.0).abs() < 1e-6);
        assert!(g.kernel().iter().eq(g.kernel().iter().rev()));
    }

    #[test]
    fn a_constant_image_survives_any_blur() {
        let p = Plane::filled(20, 7, 0.375).unwrap();
        let r = Raster::new(vec![p], Layout::Gray, Encoding::Linear).unwrap();
        for b in [Border::Reflect, Border::Mirror, Border::Replicate, Border::Wrap] {
            let out = Gauss::new(3.0, 4.0, b).unwrap().apply(r.clone()).unwrap();
            assert!(out.planes()[0].as_slice().iter().all(|v| (v - 0.375).abs() < 1e-6));
        }
    }

    #[test]
    fn separable_matrices_are_detected() {
        let m = parse_matrix("1 2 1;2 4 2;1 2 1").unwrap();
        assert!(Convolve::new(&m, true, Border::Reflect).unwrap().is_separable());
        let m = parse_matrix("0 1 0;1 -4 1;0 1 0").unwrap();
        assert!(!Convolve::new(&m, false, Border::Reflect).unwrap().is_separable());
    }

    #[test]
    fn convolution_turns_the_kernel() {
        // An impulse convolved with K reproduces K itself (correlation would give it turned).
        let mut p = Plane::zeros(3, 3).unwrap();
        p.row_mut(1)[1] = 1.0;
        let r = Raster::new(vec![p], Layout::Gray, Encoding::Linear).unwrap();
        for text in ["1 2 3;4 5 6;7 8 10", "1 2 3;2 4 6;3 6 9"] {
            let m = parse_matrix(text).unwrap();
            let out = Convolve::new(&m, false, Border::Constant(0.0)).unwrap().apply(r.clone()).unwrap();
            for (got, want) in out.planes()[0].as_slice().iter().zip(&m.data) {
                assert!((f64::from(*got) - want).abs() < 1e-5, "{text}: {got} vs {want}");
            }
        }
    }

    #[test]
    fn bad_matrices_are_refused() {
        for text in ["1 2;3 4", "1 2 3 4"] {
            assert!(Convolve::new(&parse_matrix(text).unwrap(), false, Border::Reflect).is_err());
        }
        let big = vec!["1"; 33].join(" ");
        assert!(Convolve::new(&parse_matrix(&big).unwrap(), false, Border::Reflect).is_err());
        let zero = parse_matrix("1 -2 1").unwrap();
        assert!(Convolve::new(&zero, true, Border::Reflect).unwrap_err().0.contains("sums to zero"));
    }
}
