//! The `canny` edge detector: smoothing, Sobel gradient, non-maximum
//! suppression by interpolation along the gradient, and hysteresis. The
//! smoothing and the gradient are run by the filter engines; this module owns
//! the thinning, the threshold choice and the linking flood.

use super::gradient::{GradientRows, magnitude};
use super::{ON_NAMES, SOBEL_SMOOTH, edge_planes};
use crate::error::{Error, ParamError};
use crate::ops::filter::{correlate_separable, gaussian_kernel};
use crate::ops::params::{self, Kind, OpSpec, ParamSpec};
use crate::ops::threshold::otsu_threshold;
use crate::ops::{Domain, Operator};
use crate::raster::{Note, NoteValue, Plane, Raster};
use crate::tile::{self, Border};

/// The text of `pumice ops canny`, also the doc of [`Canny`].
macro_rules! canny_doc {
    () => {
        "Canny edge detector: a 0/1 map of thin, linked edges.

```text
s  = in ⋆ (g ⊗ g)      g: the sampled Gaussian of sigma, r = floor(4σ + 1/2), sum 1
                        (as gauss:method=exact; sigma=0 skips the smoothing)
gx = s ⋆ ([1 2 1]ᵀ ⊗ [-1 0 1]),  gy = s ⋆ ([-1 0 1]ᵀ ⊗ [1 2 1]),  m = √(gx² + gy²)
thinning: m(x, y) survives when m > 0 and m ≥ both neighbours along ±(gx, gy),
          each interpolated linearly between the two samples the direction
          passes between:  n = w·m(diagonal) + (1 − w)·m(axis),
          w = min(|gx|, |gy|) / max(|gx|, |gy|)
hysteresis: out = 1 on survivors with m ≥ high, and on survivors with m ≥ low
            8-connected to them through survivors with m ≥ low; else 0
```

Thresholds are in gradient-magnitude units: a step of height h in an
unsmoothed image gives m = 4h (the Sobel taps sum to 4 per side), less after
smoothing. With quantile=true, low and high are quantiles in [0, 1] of m over
the whole image (linear interpolation between order statistics). With high=0
(the default) both are chosen from the image: high is Otsu's threshold of the
thinned, non-zero magnitudes and low = high/2; a given low is then refused.
The thresholds used are reported as run notes (`pumice run -v`), one pair per
working plane.

The outermost rows and columns are never edges: their gradient depends on the
border rule rather than on the image. Images narrower or shorter than 3 give
no edges; NaN magnitudes never survive.
On colour input the detector works on BT.709 luma by default (on=luma, one
plane out); on=channels gives one edge map per colour plane. Alpha: colour is
premultiplied first; alpha is passed through.
Domain: encoded values. Edges of photos are where perceived brightness
changes, and encoded values are roughly perceptually uniform, so the same
thresholds find edges in shadows and in highlights (in linear light a shadow
edge is a small fraction of a highlight one); --domain linear works on light.
Border: any rule (default reflect) for the smoothing and the gradient; needs
r + 1 rows of halo, plus one row for the thinning.
Source: J. Canny, \"A computational approach to edge detection\", IEEE Trans.
PAMI 8(6):679–698, 1986; interpolated thinning and 8-connected hysteresis as
in scikit-image's feature.canny (0.26), which this matches on equal borders.
Automatic thresholds: Otsu, IEEE Trans. SMC 9(1):62–66, 1979, applied to the
magnitudes (common practice, no single source), with the 2:1 ratio Canny
recommends (from memory: the paper advises high:low of two or three to one)."
    };
}

/// How the hysteresis thresholds are given.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum Thresholds {
    /// High from Otsu's method on the thinned magnitudes, low = high / 2.
    Auto,
    /// Both in gradient-magnitude units.
    Magnitude { low: f32, high: f32 },
    /// Both quantiles in `[0, 1]` of the gradient magnitude.
    Quantile { low: f64, high: f64 },
}

#[doc = canny_doc!()]
#[derive(Debug)]
pub struct Canny {
    /// The smoothing kernel; empty for sigma = 0.
    kernel: Vec<f32>,
    thresholds: Thresholds,
    on_luma: bool,
    border: Border,
}

/// What one plane's detection found besides the map: the thresholds used.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Found {
    pub low: f32,
    pub high: f32,
}

impl Canny {
    pub fn new(
        sigma: f64,
        thresholds: Thresholds,
        on_luma: bool,
        border: Border,
    ) -> Result<Canny, ParamError> {
        if !(sigma.is_finite() && sigma >= 0.0) {
            return Err(ParamError::new(format!("sigma must be 0 (no smoothing) or positive, got {sigma}")));
        }
        match thresholds {
            Thresholds::Auto => {}
            Thresholds::Magnitude { low, high } => {
                if !(low.is_finite() && high.is_finite() && low >= 0.0) {
                    return Err(ParamError::new(format!(
                        "thresholds must be finite and not negative, got low={low}, high={high}"
                    )));
                }
                if low > high {
                    return Err(ParamError::new(format!(
                        "low threshold {low} is above the high threshold {high}; expected low ≤ high"
                    )));
                }
            }
            Thresholds::Quantile { low, high } => {
                if !((0.0..=1.0).contains(&low) && (0.0..=1.0).contains(&high)) {
                    return Err(ParamError::new(format!(
                        "quantile thresholds must be within 0..1, got low={low}, high={high}"
                    )));
                }
                if low > high {
                    return Err(ParamError::new(format!(
                        "low quantile {low} is above the high quantile {high}; expected low ≤ high"
                    )));
                }
            }
        }
        let kernel =
            if sigma > 0.0 { gaussian_kernel(sigma, (4.0 * sigma + 0.5).floor() as usize) } else { vec![] };
        Ok(Canny { kernel, thresholds, on_luma, border })
    }

    /// The edge map of one plane (exact 0 and 1) and the thresholds used.
    pub fn edges_plane(&self, p: &Plane) -> (Plane, Found) {
        let smoothed;
        let s = if self.kernel.is_empty() {
            p
        } else {
            smoothed = correlate_separable(p, &self.kernel, &self.kernel, self.border);
            &smoothed
        };
        // Samples below the low threshold can never be edges, so the thinning
        // skips them when low is known beforehand; the automatic choice needs
        // every survivor.
        let (thin, found) = match self.thresholds {
            Thresholds::Magnitude { low, high } => (suppress(s, self.border, low), Found { low, high }),
            Thresholds::Quantile { low, high } => {
                let (low, high) = quantiles(magnitude(s, self.border, SOBEL_SMOOTH).as_slice(), low, high);
                (suppress(s, self.border, low), Found { low, high })
            }
            Thresholds::Auto => {
                let thin = suppress(s, self.border, 0.0);
                let alive: Vec<f32> = thin.as_slice().iter().copied().filter(|&v| v > 0.0).collect();
                // No survivor: no threshold, and no edges.
                let high = otsu_threshold(&alive, None, 256).map_or(f32::INFINITY, |t| t as f32);
                (thin, Found { low: high / 2.0, high })
            }
        };
        (hysteresis(thin, found.low, found.high), found)
    }
}

/// Non-maximum suppression of the Sobel gradient of `s`: the magnitude where
/// it is a local maximum along the gradient direction (neighbours
/// interpolated, see the operator doc), 0 elsewhere and on the outermost rows
/// and columns, and below `low` (those never become edges). Runs by bands;
/// each band computes its gradient rows (and one row above and below) into a
/// ring of three, so no gradient plane is stored.
fn suppress(s: &Plane, border: Border, low: f32) -> Plane {
    let (w, h) = (s.width(), s.height());
    let mut out = Plane::zeros(w, h).unwrap_or_else(|_| unreachable!("same size as a valid plane"));
    if w < 3 || h < 3 {
        return out;
    }
    tile::for_each_band(&mut out, tile::band_rows(w, 1), |y0, band| {
        let mut rows = GradientRows::new(s, border, SOBEL_SMOOTH);
        // ring[k] holds row y with y % 3 == k: gx, gy, magnitude
        let mut ring: [[Vec<f32>; 3]; 3] = std::array::from_fn(|_| std::array::from_fn(|_| vec![0.0; w]));
        let mut fill = |y: usize, ring: &mut [[Vec<f32>; 3]; 3]| {
            let [gx, gy, m] = &mut ring[y % 3];
            rows.row(y, gx, gy, m);
        };
        let band_end = y0 + band.len() / w;
        let first = y0.max(1);
        if first < band_end && first < h - 1 {
            fill(first - 1, &mut ring);
            fill(first, &mut ring);
        }
        for (i, out_row) in band.chunks_exact_mut(w).enumerate() {
            let y = y0 + i;
            if y == 0 || y == h - 1 {
                continue;
            }
            fill(y + 1, &mut ring);
            let [rx, ry, mid] = &ring[y % 3];
            let (up, down) = (&ring[(y - 1) % 3][2], &ring[(y + 1) % 3][2]);
            thin_row(rx, ry, up, mid, down, low, out_row);
        }
    });
    out
}

/// Thins one interior row: `out[x] = mid[x]` where it survives and is at least
/// `low` (1 ≤ x < w − 1).
fn thin_row(rx: &[f32], ry: &[f32], up: &[f32], mid: &[f32], down: &[f32], low: f32, out: &mut [f32]) {
    let w = mid.len();
    for x in 1..w - 1 {
        let m = mid[x];
        if m.is_nan() || m <= 0.0 || m < low {
            continue;
        }
        let (dx, dy) = (rx[x], ry[x]);
        // The neighbour ahead along (dx, dy), one step on the major axis; the
        // opposite one mirrors it. Zero components point forwards: then the
        // weight w is 0 and the diagonal unused.
        let sx: isize = if dx < 0.0 { -1 } else { 1 };
        let sy: isize = if dy < 0.0 { -1 } else { 1 };
        let (ax, ay) = (dx.abs(), dy.abs());
        let row = |d: isize| {
            if d < 0 {
                up
            } else if d > 0 {
                down
            } else {
                mid
            }
        };
        let col = |d: isize| (x as isize + d) as usize;
        let (wt, ahead_axis, behind_axis) =
            if ay > ax { (ax / ay, row(sy)[x], row(-sy)[x]) } else { (ay / ax, mid[col(sx)], mid[col(-sx)]) };
        let ahead_diag = row(sy)[col(sx)];
        let behind_diag = row(-sy)[col(-sx)];
        if interpolate(wt, ahead_diag, ahead_axis) <= f64::from(m)
            && interpolate(wt, behind_diag, behind_axis) <= f64::from(m)
        {
            out[x] = m;
        }
    }
}

/// `w·diag + (1 − w)·axis`, the weight product in f32 and the rest in f64.
fn interpolate(w: f32, diag: f32, axis: f32) -> f64 {
    f64::from(diag * w) + f64::from(axis) * (1.0 - f64::from(w))
}

/// The `a`-th and `b`-th quantiles of `samples`, by linear interpolation
/// between the order statistics at `q·(n − 1)`; NaN samples sort last.
fn quantiles(samples: &[f32], a: f64, b: f64) -> (f32, f32) {
    let mut v = samples.to_vec();
    let n = v.len();
    let mut at = |q: f64| -> f32 {
        let pos = q * (n - 1) as f64;
        let i = (pos.floor() as usize).min(n - 1);
        let (_, &mut lo, upper) = v.select_nth_unstable_by(i, f32::total_cmp);
        let hi = upper.iter().copied().min_by(f32::total_cmp).unwrap_or(lo);
        (f64::from(lo) + (f64::from(hi) - f64::from(lo)) * (pos - i as f64)) as f32
    };
    (at(a), at(b))
}

/// Keeps the survivors of `thin` at or above `high` and those joined to them
/// through 8-connected survivors at or above `low` (a flood with an explicit
/// stack), and turns `thin` into the 0/1 map in place: kept samples are marked
/// −1 while flooding (so they are no longer candidates), then every sample is
/// mapped to 1 where marked and 0 elsewhere, by bands.
fn hysteresis(mut thin: Plane, low: f32, high: f32) -> Plane {
    let w = thin.width();
    let t = thin.as_mut_slice();
    let candidate = |v: f32| v > 0.0 && v >= low;
    let mut stack = Vec::new();
    for seed in 0..t.len() {
        if !(candidate(t[seed]) && t[seed] >= high) {
            continue;
        }
        t[seed] = -1.0;
        stack.push(seed);
        while let Some(i) = stack.pop() {
            // Survivors are never on the outermost ring, so all 8 neighbours exist.
            for j in [i - w - 1, i - w, i - w + 1, i - 1, i + 1, i + w - 1, i + w, i + w + 1] {
                if candidate(t[j]) {
                    t[j] = -1.0;
                    stack.push(j);
                }
            }
        }
    }
    tile::for_each_band(&mut thin, tile::band_rows(w, 0), |_, band| {
        band.iter_mut().for_each(|v| *v = if *v < 0.0 { 1.0 } else { 0.0 });
    });
    thin
}

impl Operator for Canny {
    fn domain(&self) -> Domain {
        Domain::Encoded
    }

    fn apply(&self, raster: Raster) -> Result<Raster, Error> {
        let mut notes = Vec::new();
        let mut result = raster.replace_planes(|planes, layout| {
            let (planes, alpha, layout) = edge_planes(planes, layout, self.on_luma);
            let mut out = Vec::with_capacity(planes.len() + 1);
            for p in &planes {
                let (edges, found) = self.edges_plane(p);
                out.push(edges);
                if matches!(self.thresholds, Thresholds::Magnitude { .. }) {
                    continue;
                }
                if found.high.is_finite() {
                    for (name, value) in [("low threshold", found.low), ("high threshold", found.high)] {
                        let value = NoteValue::Number { value: f64::from(value), unit: "" };
                        notes.push(Note { operator: "canny", name, value });
                    }
                } else {
                    let value = NoteValue::Text("none: no gradient survived the thinning".into());
                    notes.push(Note { operator: "canny", name: "thresholds", value });
                }
            }
            out.extend(alpha);
            Ok((out, layout))
        })?;
        result.levels = None;
        result.metadata.notes.extend(notes);
        Ok(result)
    }
}

pub static CANNY: OpSpec = OpSpec {
    name: "canny",
    family: "edge",
    summary: "Canny edges: smoothing, Sobel gradient, thinning, hysteresis (0/1 map)",
    doc: canny_doc!(),
    main: Some("sigma"),
    params: &[
        ParamSpec {
            name: "sigma",
            kind: Kind::real(0.0, 1000.0),
            default: Some("1"),
            help: "Gaussian smoothing in pixels before the gradient (0: none)",
        },
        ParamSpec {
            name: "low",
            kind: Kind::real(0.0, 1e30),
            default: Some("0"),
            help: "low hysteresis threshold (gradient magnitude, or a quantile with quantile=true)",
        },
        ParamSpec {
            name: "high",
            kind: Kind::real(0.0, 1e30),
            default: Some("0"),
            help: "high hysteresis threshold; 0: both chosen from the image (Otsu, low = high/2)",
        },
        ParamSpec {
            name: "quantile",
            kind: Kind::Bool,
            default: Some("false"),
            help: "read low and high as quantiles (0..1) of the gradient magnitude",
        },
        ParamSpec {
            name: "on",
            kind: Kind::Choice(&ON_NAMES),
            default: Some("luma"),
            help: "colour input: BT.709 luma (one map out) or each channel",
        },
        params::BORDER_PARAM,
        params::FILL_PARAM,
    ],
    build: |a| {
        let (low, high, quantile) = (a.number("low")?, a.number("high")?, a.bool("quantile")?);
        let thresholds = match (high == 0.0, quantile) {
            (true, true) => {
                return Err(ParamError::new("quantile=true needs `high` (a quantile in 0..1)"));
            }
            (true, false) if low > 0.0 => {
                return Err(ParamError::new(format!(
                    "low={low} needs `high` too; high=0 chooses both thresholds from the image"
                )));
            }
            (true, false) => Thresholds::Auto,
            (false, true) => Thresholds::Quantile { low, high },
            (false, false) => Thresholds::Magnitude { low: low as f32, high: high as f32 },
        };
        Ok(Box::new(Canny::new(
            a.number("sigma")?,
            thresholds,
            a.choice("on")? == "luma",
            params::border(a)?,
        )?))
    },
};

#[cfg(test)]
mod tests {
    //! Edge cases decided here: 1×1, 1×N, N×1 and 2×2 (no interior pixel, so
    //! no edges), a constant image (no gradient, no edges, automatic
    //! thresholds report none), NaN (never an edge, no panic), sigma 0 (no
    //! smoothing), low > high, negative sigma and quantiles outside 0..1
    //! (refused), a plateau of equal magnitudes across a symmetric step (both
    //! columns survive: the comparison is ≤). Reference for the thinning: a
    //! naive bilinear sample of the magnitude one step along the gradient.
    use super::super::DERIVATIVE;
    use super::*;
    use crate::raster::{Encoding, Layout};

    fn noise(w: usize, h: usize, seed: u32) -> Plane {
        let mut s = seed;
        Plane::from_fn(w, h, |_, _| {
            s = s.wrapping_mul(1664525).wrapping_add(1013904223);
            (s >> 8) as f32 / (1u32 << 24) as f32
        })
        .unwrap()
    }

    fn fixed(sigma: f64, low: f32, high: f32) -> Canny {
        Canny::new(sigma, Thresholds::Magnitude { low, high }, true, Border::Reflect).unwrap()
    }

    fn ones(p: &Plane) -> Vec<(usize, usize)> {
        let w = p.width();
        p.as_slice().iter().enumerate().filter(|(_, v)| **v == 1.0).map(|(i, _)| (i % w, i / w)).collect()
    }

    #[test]
    fn tiny_constant_and_nan_images_have_no_edges() {
        for (w, h) in [(1, 1), (1, 9), (9, 1), (2, 2), (2, 7)] {
            let (e, _) = fixed(1.0, 0.0, 0.01).edges_plane(&noise(w, h, 3));
            assert!(e.as_slice().iter().all(|&v| v == 0.0), "{w}×{h}");
        }
        let flat = Plane::filled(12, 10, 0.3).unwrap();
        let auto = Canny::new(1.0, Thresholds::Auto, true, Border::Reflect).unwrap();
        let (e, found) = auto.edges_plane(&flat);
        assert!(e.as_slice().iter().all(|&v| v == 0.0));
        assert!(found.high.is_infinite());
        let mut p = noise(15, 15, 5);
        p.row_mut(7)[7] = f32::NAN;
        let (e, _) = fixed(0.0, 0.0, 0.1).edges_plane(&p);
        assert_eq!(e.get(7, 7), 0.0);
        assert!(e.as_slice().iter().all(|&v| v == 0.0 || v == 1.0));
    }

    #[test]
    fn a_vertical_step_gives_the_two_columns_either_side() {
        // 0 left of x = 8, 1 from it: the step is symmetric about x = 7.5, so
        // unsmoothed, columns 7 and 8 have equal magnitude and both survive.
        // Smoothed, f32 rounding may tip the tie either way: one of the two.
        let p = Plane::from_fn(16, 12, |x, _| if x >= 8 { 1.0 } else { 0.0 }).unwrap();
        for sigma in [0.0, 1.0, 2.0] {
            let (e, _) = fixed(sigma, 0.1, 0.2).edges_plane(&p);
            let got = ones(&e);
            assert!(got.iter().all(|&(x, y)| (7..=8).contains(&x) && (1..11).contains(&y)), "{got:?}");
            for y in 1..11 {
                let n = got.iter().filter(|e| e.1 == y).count();
                assert!(if sigma == 0.0 { n == 2 } else { n >= 1 }, "sigma {sigma}, row {y}: {n}");
            }
        }
        // Unsmoothed, the Sobel magnitude of a unit step is 4 on both columns.
        let (e, _) = fixed(0.0, 3.9, 4.0).edges_plane(&p);
        assert_eq!(ones(&e).len(), 20);
        let (e, _) = fixed(0.0, 3.9, 4.01).edges_plane(&p);
        assert!(ones(&e).is_empty());
    }

    #[test]
    fn thinning_equals_a_naive_bilinear_sample_along_the_gradient() {
        let p = noise(23, 19, 11);
        let s = correlate_separable(&p, &gaussian_kernel(0.8, 3), &gaussian_kernel(0.8, 3), Border::Reflect);
        let gx = correlate_separable(&s, &DERIVATIVE, &SOBEL_SMOOTH, Border::Reflect);
        let gy = correlate_separable(&s, &SOBEL_SMOOTH, &DERIVATIVE, Border::Reflect);
        let mag = magnitude(&s, Border::Reflect, SOBEL_SMOOTH);
        let thin = suppress(&s, Border::Reflect, 0.0);
        let m = |x: f64, y: f64| {
            // bilinear interpolation of the magnitude (f64)
            let (x0, y0) = (x.floor(), y.floor());
            let (fx, fy) = (x - x0, y - y0);
            let g = |i: f64, j: f64| f64::from(mag.get((x0 + i) as usize, (y0 + j) as usize));
            let at = |i: f64, j: f64| {
                if (i == 1.0 && fx == 0.0) || (j == 1.0 && fy == 0.0) { 0.0 } else { g(i, j) }
            };
            (1.0 - fx) * (1.0 - fy) * g(0.0, 0.0)
                + fx * (1.0 - fy) * at(1.0, 0.0)
                + (1.0 - fx) * fy * at(0.0, 1.0)
                + fx * fy * at(1.0, 1.0)
        };
        let (mut decided, mut kept) = (0, 0);
        for y in 1..18 {
            for x in 1..22 {
                let (dx, dy) = (f64::from(gx.get(x, y)), f64::from(gy.get(x, y)));
                let c = f64::from(mag.get(x, y));
                let big = dx.abs().max(dy.abs());
                let (ux, uy) = (dx / big, dy / big);
                let ahead = m(x as f64 + ux, y as f64 + uy);
                let behind = m(x as f64 - ux, y as f64 - uy);
                // near-ties are left to rounding: decide only with a margin of 1e-5
                // (magnitudes here are below 6; f32 sums carry ~1e-6 of error)
                if (c - ahead).abs() < 1e-5 || (c - behind).abs() < 1e-5 {
                    continue;
                }
                decided += 1;
                let want = c > ahead && c > behind;
                kept += usize::from(want);
                assert_eq!(thin.get(x, y) > 0.0, want, "({x}, {y})");
            }
        }
        assert!(decided > 300 && kept > 30, "{decided} decided, {kept} kept");
        // Skipping samples below low drops exactly the survivors below low.
        let low = 0.8;
        let skipped = suppress(&s, Border::Reflect, low);
        let dropped: Vec<f32> = thin.as_slice().iter().map(|&v| if v < low { 0.0 } else { v }).collect();
        assert_eq!(skipped.as_slice(), &dropped[..]);
        assert!(dropped.iter().any(|&v| v > 0.0) && dropped.contains(&0.0));
        assert!((0..23).all(|x| thin.get(x, 0) == 0.0 && thin.get(x, 18) == 0.0));
    }

    #[test]
    fn fused_gradient_rows_equal_the_separable_engine_bit_for_bit() {
        let borders =
            [Border::Reflect, Border::Mirror, Border::Replicate, Border::Wrap, Border::Constant(0.3)];
        for (w, h) in [(1, 1), (1, 6), (6, 1), (2, 2), (13, 9)] {
            let p = noise(w, h, 17);
            for b in borders {
                let gx = correlate_separable(&p, &DERIVATIVE, &SOBEL_SMOOTH, b);
                let gy = correlate_separable(&p, &SOBEL_SMOOTH, &DERIVATIVE, b);
                let mut rows = GradientRows::new(&p, b, SOBEL_SMOOTH);
                let (mut rx, mut ry, mut rm) = (vec![0.0; w], vec![0.0; w], vec![0.0; w]);
                for y in 0..h {
                    rows.row(y, &mut rx, &mut ry, &mut rm);
                    assert_eq!(rx, gx.row(y), "{b:?} {w}×{h} gx row {y}");
                    assert_eq!(ry, gy.row(y), "{b:?} {w}×{h} gy row {y}");
                    let want: Vec<f32> = rx.iter().zip(&ry).map(|(x, y)| (x * x + y * y).sqrt()).collect();
                    assert_eq!(rm, want);
                }
                assert_eq!(magnitude(&p, b, SOBEL_SMOOTH).row(h - 1), &rm[..]);
            }
        }
    }

    #[test]
    fn hysteresis_keeps_weak_chains_touching_strong_ones() {
        #[rustfmt::skip]
        let t = Plane::from_vec(7, 6, vec![
            0.0, 0.0, 0.0, 0.0, 0.0, 0.0, 0.0,
            0.0, 0.9, 0.0, 0.0, 0.0, 0.3, 0.0,
            0.0, 0.0, 0.3, 0.0, 0.0, 0.3, 0.0,
            0.0, 0.0, 0.3, 0.1, 0.0, 0.0, 0.0,
            0.0, 0.0, 0.0, 0.0, 0.3, 0.0, 0.0,
            0.0, 0.0, 0.0, 0.0, 0.0, 0.0, 0.0,
        ]).unwrap();
        let e = hysteresis(t.clone(), 0.2, 0.5);
        // The strong 0.9 links the 0.3s at (2, 2) and (2, 3) (diagonal, then
        // straight); (4, 4) touches only the 0.1 at (3, 3), below low, so it
        // stays out until low drops under 0.1.
        assert_eq!(ones(&e), vec![(1, 1), (2, 2), (2, 3)]);
        let e = hysteresis(t.clone(), 0.05, 0.5);
        assert_eq!(ones(&e), vec![(1, 1), (2, 2), (2, 3), (3, 3), (4, 4)]);
        // The pair at (5, 1)-(5, 2) joins only once 0.3 counts as strong.
        let e = hysteresis(t, 0.2, 0.25);
        assert_eq!(ones(&e).len(), 6);
    }

    #[test]
    fn quantiles_interpolate_between_order_statistics() {
        let v: Vec<f32> = [5.0, 1.0, 4.0, 2.0, 3.0].to_vec();
        // numpy.percentile([1..5], [0, 25, 10, 100]) = 1, 2, 1.4, 5 (linear method)
        assert_eq!(quantiles(&v, 0.0, 0.25), (1.0, 2.0));
        let (a, b) = quantiles(&v, 0.1, 1.0);
        assert!((a - 1.4).abs() < 1e-6 && b == 5.0);
    }

    #[test]
    fn automatic_thresholds_find_a_square_and_serial_equals_parallel() {
        let mut p =
            Plane::from_fn(
                40,
                40,
                |x, y| if (10..30).contains(&x) && (10..30).contains(&y) { 0.8 } else { 0.2 },
            )
            .unwrap();
        let n = noise(40, 40, 7);
        for (v, r) in p.as_mut_slice().iter_mut().zip(n.as_slice()) {
            *v += 0.05 * (r - 0.5);
        }
        let c = Canny::new(1.5, Thresholds::Auto, true, Border::Reflect).unwrap();
        let (e, found) = c.edges_plane(&p);
        assert!(found.high > 0.0 && found.low == found.high / 2.0);
        // every edge lies within a pixel of the square's outline (x or y at 9 or 10, 29 or 30)
        let near = |v: usize| (9..=10).contains(&v) || (29..=30).contains(&v);
        let got = ones(&e);
        assert!(got.len() > 70, "{} edges", got.len());
        assert!(got.iter().all(|&(x, y)| near(x) || near(y)), "{got:?}");
        let one = rayon::ThreadPoolBuilder::new().num_threads(1).build().unwrap();
        let three = rayon::ThreadPoolBuilder::new().num_threads(3).build().unwrap();
        assert_eq!(one.install(|| c.edges_plane(&p)), three.install(|| c.edges_plane(&p)));
    }

    #[test]
    fn bad_parameters_are_refused_and_colour_goes_to_luma() {
        assert!(Canny::new(-1.0, Thresholds::Auto, true, Border::Reflect).unwrap_err().0.contains("sigma"));
        let e = Canny::new(1.0, Thresholds::Magnitude { low: 0.3, high: 0.2 }, true, Border::Reflect);
        assert!(e.unwrap_err().0.contains("low ≤ high"));
        let e = Canny::new(1.0, Thresholds::Quantile { low: 0.5, high: 1.5 }, true, Border::Reflect);
        assert!(e.unwrap_err().0.contains("0..1"));
        let planes: Vec<Plane> =
            (0..3).map(|i| noise(9, 8, i)).chain([Plane::filled(9, 8, 1.0).unwrap()]).collect();
        let r = Raster::new(planes, Layout::Rgba, Encoding::Srgb).unwrap();
        let out = fixed(1.0, 0.05, 0.1).apply(r.clone()).unwrap();
        assert_eq!(out.layout(), Layout::GrayAlpha);
        assert_eq!(out.planes()[1], r.planes()[3]);
        let out = Canny::new(1.0, Thresholds::Auto, false, Border::Reflect).unwrap().apply(r).unwrap();
        assert_eq!(out.layout(), Layout::Rgba);
        assert_eq!(out.metadata.notes.len(), 6);
    }
}
