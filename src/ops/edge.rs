//! Edge operators: `sobel`, `scharr` (first derivatives) and `laplace` (second
//! derivatives, optionally of a Gaussian). They are correlations run by the
//! filter engines; this module chooses the kernels, reduces colour to luma and
//! combines the derivative planes. Thinning and thresholding edges is `canny`'s
//! (in `edge/canny.rs`).

use crate::color::luma;
use crate::error::{Error, ParamError};
use crate::ops::filter::{correlate_2d, correlate_separable, gaussian_kernel};
use crate::ops::params::{self, Kind, OpSpec, ParamSpec};
use crate::ops::{Domain, Operator};
use crate::raster::{Layout, Plane, Raster, recycle};
use crate::tile::Border;

mod canny;
mod gradient;

pub use canny::{CANNY, Canny, Found, Thresholds};

/// What a gradient operator writes.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum GradientOutput {
    /// `gx`, positive where values grow to the right.
    X,
    /// `gy`, positive where values grow downwards (with the row index).
    Y,
    /// `√(gx² + gy²)`.
    Magnitude,
    /// `atan2(gy, gx)` in radians, in `(−π, π]`.
    Direction,
}

impl GradientOutput {
    pub const NAMES: [&'static str; 4] = ["x", "y", "magnitude", "direction"];

    pub fn from_name(name: &str) -> Result<GradientOutput, ParamError> {
        Ok(match name {
            "x" => GradientOutput::X,
            "y" => GradientOutput::Y,
            "magnitude" => GradientOutput::Magnitude,
            "direction" => GradientOutput::Direction,
            other => {
                return Err(ParamError::new(format!(
                    "unknown output `{other}`; expected one of {}",
                    Self::NAMES.join(", ")
                )));
            }
        })
    }
}

/// Which planes an edge operator differentiates.
const ON_NAMES: [&str; 2] = ["luma", "channels"];

/// The planes an edge operator works on, from a raster's `planes` and
/// `layout`: colour premultiplied by alpha, and reduced to BT.709 luma when
/// `on_luma` and there are three colour planes. Returns them with the alpha
/// plane (kept as it is) and the layout of the result.
fn edge_planes(mut planes: Vec<Plane>, layout: Layout, on_luma: bool) -> (Vec<Plane>, Option<Plane>, Layout) {
    let alpha = if layout.has_alpha() { planes.pop() } else { None };
    let mut colour = planes;
    if let Some(a) = &alpha {
        for p in &mut colour {
            for (v, &a) in p.as_mut_slice().iter_mut().zip(a.as_slice()) {
                *v *= a;
            }
        }
    }
    if on_luma && colour.len() == 3 {
        let (w, h) = (colour[0].width(), colour[0].height());
        let mut y = Plane::zeros(w, h).unwrap_or_else(|_| unreachable!("same size as a valid plane"));
        luma::weighted_sum(
            luma::BT709,
            colour[0].as_slice(),
            colour[1].as_slice(),
            colour[2].as_slice(),
            y.as_mut_slice(),
        );
        return (vec![y], alpha, Layout::Gray.with_alpha(layout.has_alpha()));
    }
    (colour, alpha, layout)
}

/// Runs `f` on each working plane (each source dropped once its result
/// exists, so the next result can reuse its buffer) and reassembles the raster.
fn run_edge(raster: Raster, on_luma: bool, f: impl Fn(&Plane) -> Plane) -> Result<Raster, Error> {
    let _reuse = recycle::Scope::open();
    raster.replace_planes(|planes, layout| {
        let (planes, alpha, layout) = edge_planes(planes, layout, on_luma);
        let mut out: Vec<Plane> = planes.into_iter().map(|p| f(&p)).collect();
        out.extend(alpha);
        Ok((out, layout))
    })
}

macro_rules! gradient_doc {
    ($name:literal, $smooth:literal, $scale:literal, $source:literal) => {
        concat!(
            "Image gradient by the ",
            $name,
            " operator: x or y derivative, magnitude or direction.

```text
gx = in ⋆ (s ⊗ d),   gy = in ⋆ (d ⊗ s)      (⋆: correlation; column ⊗ row)
d = [-1 0 1],  s = ",
            $smooth,
            "
output=x: gx   output=y: gy   output=magnitude: √(gx² + gy²)
output=direction: atan2(gy, gx) in radians, (−π, π]
```

The kernels are not normalised (as in most libraries): a ramp rising by 1 per
pixel gives gx = ",
            $scale,
            ". x grows to the right and y downwards.
On colour input the operator differentiates BT.709 luma by default (on=luma)
and writes one gray plane; on=channels differentiates each colour plane.
Negative values (x, y, direction) and values above 1 are kept in f32; the
encoder clamps them when it writes an integer format. NaN propagates to every
output whose 3×3 window holds it.
Domain: linear light (a linear filter); --domain encoded differentiates the
encoded values instead. Alpha: colour is premultiplied before differentiating;
alpha is passed through.
Border: any rule (default reflect); needs 1 row of halo.
Source: ",
            $source
        )
    };
}

/// The text of `pumice ops sobel`.
macro_rules! sobel_doc {
    () => {
        gradient_doc!(
            "Sobel",
            "[1 2 1]",
            "8",
            "I. Sobel and G. Feldman, \"A 3×3 isotropic gradient operator for image \
processing\" (1968), as given in Gonzalez & Woods, Digital Image Processing, §10.2; \
the same kernels as scipy.ndimage.sobel."
        )
    };
}

/// The text of `pumice ops scharr`.
macro_rules! scharr_doc {
    () => {
        gradient_doc!(
            "Scharr",
            "[3 10 3]",
            "32",
            "H. Scharr, \"Optimale Operatoren in der digitalen Bildverarbeitung\", \
PhD thesis, Heidelberg, 2000 (the rotation-optimised 3×3 derivative); the same \
kernels as OpenCV's Scharr."
        )
    };
}

/// A 3×3 gradient operator (Sobel or Scharr: they differ in the smoothing taps).
#[derive(Debug)]
pub struct Gradient {
    smooth: [f32; 3],
    output: GradientOutput,
    on_luma: bool,
    border: Border,
}

/// Sobel's smoothing taps.
pub const SOBEL_SMOOTH: [f32; 3] = [1.0, 2.0, 1.0];
/// Scharr's smoothing taps.
pub const SCHARR_SMOOTH: [f32; 3] = [3.0, 10.0, 3.0];
const DERIVATIVE: [f32; 3] = [-1.0, 0.0, 1.0];

#[doc = sobel_doc!()]
pub fn sobel(output: GradientOutput, on_luma: bool, border: Border) -> Gradient {
    Gradient { smooth: SOBEL_SMOOTH, output, on_luma, border }
}

#[doc = scharr_doc!()]
pub fn scharr(output: GradientOutput, on_luma: bool, border: Border) -> Gradient {
    Gradient { smooth: SCHARR_SMOOTH, output, on_luma, border }
}

impl Gradient {
    /// The chosen output of one plane.
    pub fn gradient_plane(&self, p: &Plane) -> Plane {
        let gx = || correlate_separable(p, &DERIVATIVE, &self.smooth, self.border);
        let gy = || correlate_separable(p, &self.smooth, &DERIVATIVE, self.border);
        match self.output {
            GradientOutput::X => gx(),
            GradientOutput::Y => gy(),
            // One fused pass (the same sums as the two separable ones).
            GradientOutput::Magnitude => gradient::magnitude(p, self.border, self.smooth),
            GradientOutput::Direction => gradient::direction(p, self.border, self.smooth),
        }
    }
}

impl Operator for Gradient {
    fn domain(&self) -> Domain {
        Domain::Linear
    }

    fn apply(&self, raster: Raster) -> Result<Raster, Error> {
        run_edge(raster, self.on_luma, |p| self.gradient_plane(p))
    }
}

const GRADIENT_PARAMS: &[ParamSpec] = &[
    ParamSpec {
        name: "output",
        kind: Kind::Choice(&GradientOutput::NAMES),
        default: Some("magnitude"),
        help: "x or y derivative, gradient magnitude, or direction (radians)",
    },
    ParamSpec {
        name: "on",
        kind: Kind::Choice(&ON_NAMES),
        default: Some("luma"),
        help: "colour input: differentiate BT.709 luma (one plane out) or each channel",
    },
    params::BORDER_PARAM,
    params::FILL_PARAM,
];

fn gradient_args(a: &params::Args) -> Result<(GradientOutput, bool, Border), ParamError> {
    Ok((GradientOutput::from_name(a.choice("output")?)?, a.choice("on")? == "luma", params::border(a)?))
}

pub static SOBEL: OpSpec = OpSpec {
    name: "sobel",
    family: "edge",
    summary: "Sobel gradient: x, y, magnitude or direction",
    doc: sobel_doc!(),
    main: Some("output"),
    params: GRADIENT_PARAMS,
    build: |a| {
        let (o, l, b) = gradient_args(a)?;
        Ok(Box::new(sobel(o, l, b)))
    },
};

pub static SCHARR: OpSpec = OpSpec {
    name: "scharr",
    family: "edge",
    summary: "Scharr gradient: x, y, magnitude or direction",
    doc: scharr_doc!(),
    main: Some("output"),
    params: GRADIENT_PARAMS,
    build: |a| {
        let (o, l, b) = gradient_args(a)?;
        Ok(Box::new(scharr(o, l, b)))
    },
};

/// The text of `pumice ops laplace`, also the doc of [`Laplace`].
macro_rules! laplace_doc {
    () => {
        "Laplacian: the sum of second derivatives, by a 3×3 stencil or of a Gaussian.

```text
neighbours=4:  out = in ⋆ [0 1 0; 1 -4 1; 0 1 0]
neighbours=8:  out = in ⋆ [1 1 1; 1 -8 1; 1 1 1]
sigma > 0 (Laplacian of Gaussian, the stencil is then not used):
  out = in ⋆ (g ⊗ g'') + in ⋆ (g'' ⊗ g)
  g(i)   = exp(-i²/2σ²) / Σⱼ exp(-j²/2σ²)              i = -r … r, r = floor(4σ + 1/2)
  g''(i) = (i²/σ⁴ - 1/σ²) · g(i)
```

On colour input the operator works on BT.709 luma by default (on=luma) and
writes one gray plane; on=channels filters each colour plane. Negative values
are kept in f32 (the encoder clamps them for integer formats). NaN propagates
to every output whose window holds it.
Domain: linear light (a linear filter). Alpha: colour is premultiplied;
alpha is passed through.
Border: any rule (default reflect); needs 1 row of halo, or r with sigma.
Source: the discrete Laplacian (Gonzalez & Woods, Digital Image Processing,
§3.6); the Laplacian of Gaussian of Marr & Hildreth, \"Theory of edge
detection\", Proc. R. Soc. Lond. B 207 (1980) 187–217, sampled as
scipy.ndimage.gaussian_laplace samples it."
    };
}

#[doc = laplace_doc!()]
#[derive(Debug)]
pub struct Laplace {
    kind: LaplaceKind,
    on_luma: bool,
    border: Border,
}

#[derive(Debug)]
enum LaplaceKind {
    Stencil([f32; 9]),
    Gaussian { g: Vec<f32>, d2: Vec<f32> },
}

impl Laplace {
    /// `neighbours` is 4 or 8; `sigma` = 0 means the plain stencil, > 0 the
    /// Laplacian of Gaussian.
    pub fn new(neighbours: u32, sigma: f64, on_luma: bool, border: Border) -> Result<Laplace, ParamError> {
        if !(sigma.is_finite() && sigma >= 0.0) {
            return Err(ParamError::new(format!("sigma must be 0 (plain stencil) or positive, got {sigma}")));
        }
        let kind = if sigma > 0.0 {
            let r = (4.0 * sigma + 0.5).floor() as usize;
            let g = gaussian_kernel(sigma, r);
            let s2 = sigma * sigma;
            let d2 = g
                .iter()
                .enumerate()
                .map(|(k, &v)| {
                    let i = k as f64 - r as f64;
                    ((i * i / (s2 * s2) - 1.0 / s2) * f64::from(v)) as f32
                })
                .collect();
            LaplaceKind::Gaussian { g, d2 }
        } else {
            match neighbours {
                4 => LaplaceKind::Stencil([0.0, 1.0, 0.0, 1.0, -4.0, 1.0, 0.0, 1.0, 0.0]),
                8 => LaplaceKind::Stencil([1.0, 1.0, 1.0, 1.0, -8.0, 1.0, 1.0, 1.0, 1.0]),
                n => return Err(ParamError::new(format!("neighbours must be 4 or 8, got {n}"))),
            }
        };
        Ok(Laplace { kind, on_luma, border })
    }

    pub fn laplace_plane(&self, p: &Plane) -> Plane {
        match &self.kind {
            LaplaceKind::Stencil(k) => correlate_2d(p, k, 3, 3, self.border),
            LaplaceKind::Gaussian { g, d2 } => {
                let (mut a, b) = rayon::join(
                    || correlate_separable(p, d2, g, self.border),
                    || correlate_separable(p, g, d2, self.border),
                );
                for (x, &y) in a.as_mut_slice().iter_mut().zip(b.as_slice()) {
                    *x += y;
                }
                a
            }
        }
    }
}

impl Operator for Laplace {
    fn domain(&self) -> Domain {
        Domain::Linear
    }

    fn apply(&self, raster: Raster) -> Result<Raster, Error> {
        run_edge(raster, self.on_luma, |p| self.laplace_plane(p))
    }
}

pub static LAPLACE: OpSpec = OpSpec {
    name: "laplace",
    family: "edge",
    summary: "Laplacian: 4- or 8-neighbour stencil, or Laplacian of Gaussian (sigma)",
    doc: laplace_doc!(),
    main: Some("sigma"),
    params: &[
        ParamSpec {
            name: "sigma",
            kind: Kind::real(0.0, 1000.0),
            default: Some("0"),
            help: "0: the plain stencil; above 0: Laplacian of a Gaussian of this sigma",
        },
        ParamSpec {
            name: "neighbours",
            kind: Kind::Choice(&["4", "8"]),
            default: Some("4"),
            help: "stencil when sigma=0: 4 (edge neighbours) or 8 (with the diagonals)",
        },
        ParamSpec {
            name: "on",
            kind: Kind::Choice(&ON_NAMES),
            default: Some("luma"),
            help: "colour input: filter BT.709 luma (one plane out) or each channel",
        },
        params::BORDER_PARAM,
        params::FILL_PARAM,
    ],
    build: |a| {
        let n = if a.choice("neighbours")? == "8" { 8 } else { 4 };
        Ok(Box::new(Laplace::new(n, a.number("sigma")?, a.choice("on")? == "luma", params::border(a)?)?))
    },
};

#[cfg(test)]
mod tests {
    //! Edge cases decided here: 1×1 (every derivative of a lone sample under a
    //! repeating rule is 0), 1×N and N×1 (the missing direction is all halo),
    //! sigma larger than the image (the rule repeats), NaN (propagates over the
    //! 3×3 or Gaussian window), neighbours other than 4/8 and negative sigma
    //! (refused), colour input (luma by default, one plane out; alpha passed
    //! through). Reference: naive sums over the window with `Border::index`.
    use super::*;
    use crate::raster::Encoding;

    fn noise(w: usize, h: usize) -> Plane {
        let mut s = 99u32;
        Plane::from_fn(w, h, |_, _| {
            s = s.wrapping_mul(1664525).wrapping_add(1013904223);
            (s >> 8) as f32 / (1u32 << 24) as f32
        })
        .unwrap()
    }

    fn at(p: &Plane, x: isize, y: isize, b: Border) -> f64 {
        match (b.index(x, p.width()), b.index(y, p.height())) {
            (Some(x), Some(y)) => f64::from(p.get(x, y)),
            _ => f64::from(b.constant_value()),
        }
    }

    const BORDERS: [Border; 5] =
        [Border::Reflect, Border::Mirror, Border::Replicate, Border::Wrap, Border::Constant(0.0)];

    #[test]
    fn sobel_and_scharr_equal_the_naive_stencils() {
        for (w, h) in [(1, 1), (1, 7), (7, 1), (12, 9)] {
            let p = noise(w, h);
            for b in BORDERS {
                for smooth in [SOBEL_SMOOTH, SCHARR_SMOOTH] {
                    let g = |o| Gradient { smooth, output: o, on_luma: true, border: b }.gradient_plane(&p);
                    let (gx, gy, mag, dir) = (
                        g(GradientOutput::X),
                        g(GradientOutput::Y),
                        g(GradientOutput::Magnitude),
                        g(GradientOutput::Direction),
                    );
                    for y in 0..h {
                        for x in 0..w {
                            let (xi, yi) = (x as isize, y as isize);
                            let mut ex = 0.0;
                            let mut ey = 0.0;
                            for k in -1..=1isize {
                                let s = f64::from(smooth[(k + 1) as usize]);
                                ex += s * (at(&p, xi + 1, yi + k, b) - at(&p, xi - 1, yi + k, b));
                                ey += s * (at(&p, xi + k, yi + 1, b) - at(&p, xi + k, yi - 1, b));
                            }
                            // 16 |taps| × 1 at most, f32 rounding: ≤ 1e-5 (common practice)
                            assert!((f64::from(gx.get(x, y)) - ex).abs() < 1e-5, "{b:?} gx");
                            assert!((f64::from(gy.get(x, y)) - ey).abs() < 1e-5, "{b:?} gy");
                            assert!((f64::from(mag.get(x, y)) - ex.hypot(ey)).abs() < 2e-5);
                            if ex.hypot(ey) > 1e-3 {
                                let d = (f64::from(dir.get(x, y)) - ey.atan2(ex)).abs();
                                assert!(d < 1e-3 || (d - 2.0 * std::f64::consts::PI).abs() < 1e-3);
                            }
                        }
                    }
                }
            }
        }
    }

    #[test]
    fn a_ramp_gives_the_documented_scale_and_signs() {
        let p = Plane::from_fn(9, 9, |x, y| x as f32 + 0.5 * y as f32).unwrap();
        let s = sobel(GradientOutput::X, true, Border::Replicate).gradient_plane(&p);
        assert_eq!(s.get(4, 4), 8.0);
        let s = scharr(GradientOutput::Y, true, Border::Replicate).gradient_plane(&p);
        assert_eq!(s.get(4, 4), 16.0); // 0.5 per row × 2 × (3 + 10 + 3)
    }

    #[test]
    fn laplace_stencils_and_log_equal_naive_sums() {
        let p = noise(11, 8);
        for b in BORDERS {
            for n in [4, 8] {
                let out = Laplace::new(n, 0.0, true, b).unwrap().laplace_plane(&p);
                for y in 0..8isize {
                    for x in 0..11isize {
                        let mut e = -(n as f64) * at(&p, x, y, b);
                        for (dx, dy) in [(1, 0), (-1, 0), (0, 1), (0, -1), (1, 1), (1, -1), (-1, 1), (-1, -1)]
                            .iter()
                            .take(n as usize)
                        {
                            e += at(&p, x + dx, y + dy, b);
                        }
                        assert!((f64::from(out.get(x as usize, y as usize)) - e).abs() < 1e-5);
                    }
                }
            }
        }
        // LoG: the separable sum equals the naive 2-D sum of g''(i)g(j) + g(i)g''(j).
        let l = Laplace::new(4, 1.3, true, Border::Mirror).unwrap();
        let LaplaceKind::Gaussian { g, d2 } = &l.kind else { panic!("not a LoG") };
        let r = (g.len() / 2) as isize;
        let out = l.laplace_plane(&p);
        for (x, y) in [(0isize, 0isize), (5, 4), (10, 7)] {
            let mut e = 0.0;
            for i in -r..=r {
                for j in -r..=r {
                    let (gi, gj) = (f64::from(g[(i + r) as usize]), f64::from(g[(j + r) as usize]));
                    let (di, dj) = (f64::from(d2[(i + r) as usize]), f64::from(d2[(j + r) as usize]));
                    e += (di * gj + gi * dj) * at(&p, x + j, y + i, Border::Mirror);
                }
            }
            assert!((f64::from(out.get(x as usize, y as usize)) - e).abs() < 1e-5);
        }
    }

    #[test]
    fn lone_samples_and_constants_have_no_derivative() {
        for b in [Border::Reflect, Border::Mirror, Border::Replicate, Border::Wrap] {
            let one = Plane::filled(1, 1, 0.4).unwrap();
            assert_eq!(sobel(GradientOutput::Magnitude, true, b).gradient_plane(&one).get(0, 0), 0.0);
            let flat = Plane::filled(6, 5, 0.4).unwrap();
            let log = Laplace::new(4, 9.0, true, b).unwrap().laplace_plane(&flat);
            // Σg'' is 0 in exact arithmetic; f32 taps leave ≲ 1e-6 (common practice).
            assert!(log.as_slice().iter().all(|v| v.abs() < 1e-5), "{b:?}");
        }
    }

    #[test]
    fn colour_goes_to_luma_with_alpha_kept_and_nan_propagates() {
        let planes: Vec<Plane> =
            (0..3).map(|_| noise(5, 4)).chain([Plane::filled(5, 4, 0.5).unwrap()]).collect();
        let r = Raster::new(planes, Layout::Rgba, Encoding::Linear).unwrap();
        let out = sobel(GradientOutput::X, true, Border::Reflect).apply(r.clone()).unwrap();
        assert_eq!(out.layout(), Layout::GrayAlpha);
        assert_eq!(out.planes()[1], r.planes()[3]);
        let out = sobel(GradientOutput::X, false, Border::Reflect).apply(r).unwrap();
        assert_eq!(out.layout(), Layout::Rgba);
        let mut p = noise(9, 9);
        p.row_mut(4)[4] = f32::NAN;
        let out = Laplace::new(8, 0.0, true, Border::Reflect).unwrap().laplace_plane(&p);
        assert!(out.get(3, 3).is_nan() && out.get(5, 5).is_nan() && !out.get(2, 2).is_nan());
        assert!(Laplace::new(6, 0.0, true, Border::Reflect).is_err());
        assert!(Laplace::new(4, -1.0, true, Border::Reflect).is_err());
        assert!(GradientOutput::from_name("angle").unwrap_err().0.contains("magnitude"));
    }
}
