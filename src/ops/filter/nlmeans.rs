//! `nlmeans`: non-local means with a flat patch, computed shift by shift with
//! running sums of squared differences so that the cost per pixel does not
//! depend on the patch size. Alpha handling and the band split are shared with
//! `bilateral`; the weight function comes from `exptable`.

use multiversion::multiversion;

use super::bilateral::{Finish, add, add_product, finish_row, for_each_band_of, padded_band, premultiplied};
use super::exptable::ExpTable;
use crate::error::{Error, ParamError};
use crate::ops::params::{self, Kind, OpSpec, ParamSpec};
use crate::ops::{Domain, Operator};
use crate::raster::{Plane, Raster};
use crate::tile::{self, Border};

/// Largest patch side accepted.
pub const MAX_PATCH: usize = 31;
/// Largest search window side accepted.
pub const MAX_SEARCH: usize = 101;
/// `h` taken when only the noise `sigma` is given: `h = H_PER_SIGMA · sigma`.
pub const H_PER_SIGMA: f64 = 0.8;

/// The text of `pumice ops nlmeans`, also the doc of [`NlMeans`].
macro_rules! nlmeans_doc {
    () => {
        "Non-local means: each pixel becomes the average of pixels whose surroundings look alike.

```text
P(p)  = the patch × patch square around p (s = patch side, n = colour channels)
D(p, q) = 1/(n·s²) · Σ_c Σ_{k ∈ square} (in_c(p + k) - in_c(q + k))²
w(p, q) = exp(-max(D(p, q) - 2σ², 0) / h²)
out(p) = Σ_q w(p, q) · in(q)  /  Σ_q w(p, q),   q in the search × search square around p
h = strength; when h=0, h = 0.8·sigma
```

σ = sigma is the noise standard deviation (0: no correction); subtracting
2σ², the expected distance between two noisy copies of one patch, makes the
weights depend on the image rather than on the noise. The flat patch weight
and the form of the correction are those of the fast algorithm below; h =
0.8σ is scikit-image's suggested starting point for it (common practice, from
the denoise_nl_means documentation). Colour: the distance sums every colour
channel (divided by n), so one weight serves all channels. With alpha, colour
is premultiplied while averaging and distances use the straight colour.
Computed per shift q - p: the squared-difference image, then its box sum over
the patch by running sums (f64, restarted for every band of rows), so the
cost is search² operations per pixel whatever the patch size. The weight
comes from a table of exp(-u) with linear interpolation (within 5.5e-7; 0
from u = 24 on). Needs finite samples: NaN or infinity is refused with an
error (a running sum would spread it along the whole column).
Domain: encoded values. The sRGB encoding compresses bright values, which
evens out photon noise (whose σ grows with the light) much as a square root
does, so one sigma fits the whole image; use --domain linear for linear data
whose noise is the same everywhere.
Border: any rule (default reflect); needs search/2 + patch/2 rows of halo.
Source: A. Buades, B. Coll and J.-M. Morel, A non-local algorithm for image
denoising, CVPR 2005, vol. 2, pp. 60–65; the shift-by-shift computation with
integral images: J. Darbon, A. Cunha, T. F. Chan, S. Osher and G. J. Jensen,
Fast nonlocal filtering applied to electron cryomicroscopy, ISBI 2008,
pp. 1331–1334; the 2σ² correction: Buades, Coll & Morel, Non-Local Means
Denoising, Image Processing On Line 1 (2011), pp. 208–212."
    };
}

#[doc = nlmeans_doc!()]
#[derive(Debug)]
pub struct NlMeans {
    patch_radius: usize,
    search_radius: usize,
    /// `1 / h²`.
    inv_h2: f32,
    /// `2σ²`.
    noise_offset: f32,
    border: Border,
    table: ExpTable,
}

impl NlMeans {
    /// `patch` and `search` are odd sides; `h = 0` takes 0.8·`sigma`.
    pub fn new(
        patch: usize,
        search: usize,
        h: f64,
        sigma: f64,
        border: Border,
    ) -> Result<NlMeans, ParamError> {
        if patch.is_multiple_of(2) || !(1..=MAX_PATCH).contains(&patch) {
            return Err(ParamError::new(format!("nlmeans patch must be odd, 1..={MAX_PATCH}, got {patch}")));
        }
        if search.is_multiple_of(2) || !(3..=MAX_SEARCH).contains(&search) {
            return Err(ParamError::new(format!(
                "nlmeans search must be odd, 3..={MAX_SEARCH}, got {search}"
            )));
        }
        if !(sigma.is_finite() && sigma >= 0.0) {
            return Err(ParamError::new(format!("nlmeans sigma must be zero or more, got {sigma}")));
        }
        if !(h.is_finite() && h >= 0.0) {
            return Err(ParamError::new(format!(
                "nlmeans h must be positive (or 0 to take 0.8·sigma), got {h}"
            )));
        }
        let h = if h == 0.0 { H_PER_SIGMA * sigma } else { h };
        if h <= 0.0 {
            return Err(ParamError::new(
                "nlmeans needs a strength: give h, or the noise sigma (h = 0.8·sigma)",
            ));
        }
        Ok(NlMeans {
            patch_radius: patch / 2,
            search_radius: search / 2,
            inv_h2: (1.0 / (h * h)) as f32,
            noise_offset: (2.0 * sigma * sigma) as f32,
            border,
            table: ExpTable::new(),
        })
    }

    /// The weighted averages of `values` (`None`: the guides themselves) with
    /// weights from the patches of `guides` (the straight colour planes),
    /// turned into outputs by `finish`.
    fn weighted(&self, guides: &[&Plane], values: Option<&[&Plane]>, finish: Finish) -> Vec<Plane> {
        let n_values = values.map_or(guides.len(), |v| v.len());
        let (w, h) = (guides[0].width(), guides[0].height());
        let (pr, sr) = (self.patch_radius, self.search_radius);
        let halo = pr + sr;
        let n_out = match finish {
            Finish::Mean | Finish::OverAlpha { keep_alpha: true } => n_values,
            Finish::OverAlpha { keep_alpha: false } => n_values - 1,
        };
        let mut outs: Vec<Plane> = (0..n_out)
            .map(|_| Plane::zeros(w, h).unwrap_or_else(|_| unreachable!("same size as a valid plane")))
            .collect();
        let planes_held = guides.len() + n_values + 2;
        // At least a few patch heights per band, so the rows of squared
        // differences above and below the band stay a small overhead.
        let rows = tile::band_rows(w * planes_held, halo).max(4 * (2 * pr + 1));
        // 1/(n·s²): the mean over channels and patch samples.
        let inv_count = 1.0 / (guides.len() * (2 * pr + 1) * (2 * pr + 1)) as f64;
        for_each_band_of(&mut outs, rows, |y0, band| {
            let n = band[0].len() / w;
            let pw = w + 2 * halo;
            let gpads: Vec<Vec<f32>> =
                guides.iter().map(|g| padded_band(g, y0, n, halo, self.border)).collect();
            let vpads: Vec<Vec<f32>> = values
                .iter()
                .flat_map(|v| v.iter())
                .map(|v| padded_band(v, y0, n, halo, self.border))
                .collect();
            let vpads: &[Vec<f32>] = if values.is_some() { &vpads } else { &gpads };
            // squared differences for rows y0 - pr .. y0 + n + pr, columns -pr .. w + pr
            let ew = w + 2 * pr;
            let mut e = vec![0.0f32; (n + 2 * pr) * ew];
            let mut colsum = vec![0.0f64; ew];
            let mut dist = vec![0.0f32; w];
            let mut wrow = vec![0.0f32; w];
            let mut wsum = vec![0.0f32; n * w];
            let mut sums = vec![vec![0.0f32; n * w]; n_values];
            let (sr_i, halo_i) = (sr as isize, halo as isize);
            for ty in -sr_i..=sr_i {
                for tx in -sr_i..=sr_i {
                    for (rr, erow) in e.chunks_exact_mut(ew).enumerate() {
                        // padded row of y = y0 - pr + rr is rr + sr; column of x = -pr is sr
                        let a0 = (rr + sr) * pw + sr;
                        let b0 = ((rr + sr) as isize + ty) as usize * pw + (sr as isize + tx) as usize;
                        erow.fill(0.0);
                        for g in &gpads {
                            add_squared_difference(erow, &g[a0..a0 + ew], &g[b0..b0 + ew]);
                        }
                    }
                    colsum.fill(0.0);
                    for erow in e.chunks_exact(ew).take(2 * pr) {
                        add_f64(&mut colsum, erow);
                    }
                    for i in 0..n {
                        add_f64(&mut colsum, &e[(i + 2 * pr) * ew..(i + 2 * pr + 1) * ew]);
                        if i > 0 {
                            sub_f64(&mut colsum, &e[(i - 1) * ew..i * ew]);
                        }
                        box_row(&colsum, 2 * pr + 1, inv_count, &mut dist);
                        let span = i * w..(i + 1) * w;
                        let at = ((i + halo) as isize + ty) as usize * pw + (halo_i + tx) as usize;
                        if let ([s], [v]) = (&mut sums[..], vpads) {
                            // gray: the weight and both sums in one pass
                            accumulate_one(
                                &self.table,
                                &dist,
                                (self.noise_offset, self.inv_h2),
                                &mut wsum[span.clone()],
                                &mut s[span.clone()],
                                &v[at..at + w],
                            );
                            continue;
                        }
                        weight_u(&mut dist, self.noise_offset, self.inv_h2);
                        self.table.eval_row(&dist, 1.0, &mut wrow);
                        add(&mut wsum[span.clone()], &wrow);
                        for (s, v) in sums.iter_mut().zip(vpads) {
                            add_product(&mut s[span.clone()], &wrow, &v[at..at + w]);
                        }
                    }
                }
            }
            for i in 0..n {
                let span = i * w..(i + 1) * w;
                let row_sums: Vec<&[f32]> = sums.iter().map(|s| &s[span.clone()]).collect();
                finish_row(finish, &wsum[span.clone()], &row_sums, band, span);
            }
        });
        outs
    }
}

/// `e[x] += (a[x] − b[x])²`.
#[multiversion(targets("x86_64+avx512f+avx512bw+avx512vl+avx2+fma", "x86_64+avx2+fma"))]
fn add_squared_difference(e: &mut [f32], a: &[f32], b: &[f32]) {
    for ((e, &a), &b) in e.iter_mut().zip(a).zip(b) {
        let d = a - b;
        *e += d * d;
    }
}

/// `s[x] += f64(e[x])`.
#[multiversion(targets("x86_64+avx512f+avx512bw+avx512vl+avx2+fma", "x86_64+avx2+fma"))]
fn add_f64(s: &mut [f64], e: &[f32]) {
    for (s, &e) in s.iter_mut().zip(e) {
        *s += f64::from(e);
    }
}

/// `s[x] -= f64(e[x])`.
#[multiversion(targets("x86_64+avx512f+avx512bw+avx512vl+avx2+fma", "x86_64+avx2+fma"))]
fn sub_f64(s: &mut [f64], e: &[f32]) {
    for (s, &e) in s.iter_mut().zip(e) {
        *s -= f64::from(e);
    }
}

/// `out[x] = scale · Σ_{k < len} col[x + k]` by a running sum (f64).
fn box_row(col: &[f64], len: usize, scale: f64, out: &mut [f32]) {
    let mut s: f64 = col[..len - 1].iter().sum();
    for ((o, &add), &drop) in out.iter_mut().zip(&col[len - 1..]).zip(col) {
        s += add;
        *o = (s * scale) as f32;
        s -= drop;
    }
}

/// `d[x] ← max(d[x] − offset, 0) · inv_h2`: the argument of the weight's exponential.
#[multiversion(targets("x86_64+avx512f+avx512bw+avx512vl+avx2+fma", "x86_64+avx2+fma"))]
fn weight_u(d: &mut [f32], offset: f32, inv_h2: f32) {
    for d in d.iter_mut() {
        *d = (*d - offset).max(0.0) * inv_h2;
    }
}

/// One shift on one value plane, fused: `w = exp(−max(d − offset, 0) · inv_h2)`,
/// `wsum += w`, `s += w · v` (the same arithmetic as the separate passes).
#[multiversion(targets("x86_64+avx512f+avx512bw+avx512vl+avx2+fma", "x86_64+avx2+fma"))]
fn accumulate_one(
    table: &ExpTable,
    dist: &[f32],
    (offset, inv_h2): (f32, f32),
    wsum: &mut [f32],
    s: &mut [f32],
    v: &[f32],
) {
    for (((&d, ws), s), &v) in dist.iter().zip(wsum.iter_mut()).zip(s.iter_mut()).zip(v) {
        let w = table.eval((d - offset).max(0.0) * inv_h2);
        *ws += w;
        *s += w * v;
    }
}

/// The position of the first sample that is NaN or infinite.
fn first_non_finite(p: &Plane) -> Option<(usize, usize)> {
    let w = p.width();
    p.as_slice().iter().position(|v| !v.is_finite()).map(|i| (i % w, i / w))
}

impl Operator for NlMeans {
    fn domain(&self) -> Domain {
        Domain::Encoded
    }

    fn apply(&self, raster: Raster) -> Result<Raster, Error> {
        let layout = raster.layout();
        let planes = raster.planes();
        for (c, p) in planes.iter().enumerate() {
            if let Some((x, y)) = first_non_finite(p) {
                return Err(Error::Step {
                    step: "nlmeans".into(),
                    message: format!(
                        "needs finite samples, found {} in channel {c} at x={x}, y={y}",
                        p.get(x, y)
                    ),
                });
            }
        }
        let colour: Vec<&Plane> = planes[..layout.colour_channels()].iter().collect();
        let out = match raster.alpha() {
            None => self.weighted(&colour, None, Finish::Mean),
            Some(a) => {
                let pre: Vec<Plane> = colour.iter().map(|p| premultiplied(p, a)).collect();
                let mut values: Vec<&Plane> = pre.iter().collect();
                values.push(a);
                self.weighted(&colour, Some(&values), Finish::OverAlpha { keep_alpha: true })
            }
        };
        raster.with_planes(out, layout)
    }
}

pub static NLMEANS: OpSpec = OpSpec {
    name: "nlmeans",
    family: "filter",
    summary: "non-local means denoising (patch similarity over a search window)",
    doc: nlmeans_doc!(),
    main: Some("h"),
    params: &[
        ParamSpec {
            name: "h",
            kind: Kind::real(0.0, 1e6),
            default: Some("0"),
            help: "strength in sample units (full scale is 1); 0 takes 0.8·sigma",
        },
        ParamSpec {
            name: "sigma",
            kind: Kind::real(0.0, 1e6),
            default: Some("0"),
            help: "noise standard deviation in sample units; 2·sigma² is taken off every patch distance",
        },
        ParamSpec {
            name: "patch",
            kind: Kind::int(1.0, MAX_PATCH as f64),
            default: Some("7"),
            help: "patch side in pixels (odd)",
        },
        ParamSpec {
            name: "search",
            kind: Kind::int(3.0, MAX_SEARCH as f64),
            default: Some("21"),
            help: "search window side in pixels (odd)",
        },
        params::BORDER_PARAM,
        params::FILL_PARAM,
    ],
    build: |a| {
        Ok(Box::new(NlMeans::new(
            a.int("patch")? as usize,
            a.int("search")? as usize,
            a.number("h")?,
            a.number("sigma")?,
            params::border(a)?,
        )?))
    },
};

#[cfg(test)]
mod tests {
    //! Edge cases: 1×1, 1×N, N×1, search and patch windows larger than the
    //! image, every border rule, patch 1, a constant image, the 2σ² offset,
    //! colour and alpha, NaN and infinity (refused), bad parameters.
    use super::*;
    use crate::raster::{Encoding, Layout};

    fn noise(w: usize, h: usize, seed: u32) -> Plane {
        let mut state = seed;
        Plane::from_fn(w, h, |_, _| {
            state = state.wrapping_mul(1664525).wrapping_add(1013904223);
            (state >> 8) as f32 / (1u32 << 24) as f32
        })
        .unwrap()
    }

    /// The formula in f64, patch by patch, with the exact exponential.
    fn naive(
        planes: &[Plane],
        patch: usize,
        search: usize,
        h: f64,
        sigma: f64,
        border: Border,
    ) -> Vec<Plane> {
        let (w, hh) = (planes[0].width(), planes[0].height());
        let at = |p: &Plane, x: isize, y: isize| match (border.index(x, w), border.index(y, hh)) {
            (Some(x), Some(y)) => f64::from(p.get(x, y)),
            _ => f64::from(border.constant_value()),
        };
        let (pr, sr) = ((patch / 2) as isize, (search / 2) as isize);
        let count = (planes.len() * patch * patch) as f64;
        let mut outs: Vec<Vec<f32>> = vec![Vec::new(); planes.len()];
        for y in 0..hh as isize {
            for x in 0..w as isize {
                let mut ws = 0.0;
                let mut s = vec![0.0; planes.len()];
                for ty in -sr..=sr {
                    for tx in -sr..=sr {
                        let mut d = 0.0;
                        for p in planes {
                            for i in -pr..=pr {
                                for j in -pr..=pr {
                                    let e = at(p, x + j, y + i) - at(p, x + tx + j, y + ty + i);
                                    d += e * e;
                                }
                            }
                        }
                        let wt = (-((d / count - 2.0 * sigma * sigma).max(0.0)) / (h * h)).exp();
                        ws += wt;
                        for (s, p) in s.iter_mut().zip(planes) {
                            *s += wt * at(p, x + tx, y + ty);
                        }
                    }
                }
                for (o, s) in outs.iter_mut().zip(&s) {
                    o.push((s / ws) as f32);
                }
            }
        }
        outs.into_iter().map(|v| Plane::from_vec(w, hh, v).unwrap()).collect()
    }

    fn worst(a: &Plane, b: &Plane) -> f32 {
        a.as_slice().iter().zip(b.as_slice()).map(|(x, y)| (x - y).abs()).fold(0.0, f32::max)
    }

    fn raster(planes: Vec<Plane>, layout: Layout) -> Raster {
        Raster::new(planes, layout, Encoding::Srgb).unwrap()
    }

    // Tolerance against the exact formula: each weight is within the table's
    // 5.5e-7 (exptable::MAX_ERROR), and f32 rounding of the distance (a mean
    // of squares below 1, ~1e-7 relative) moves u = D/h² by ~1e-7·u, so a
    // weight by ~1e-7·u·e^-u ≤ 4e-8; over search² weights, with Σw ≥ 1 (the
    // centre) and values in [0, 1): search²·6e-7, plus the f32 sums.
    fn tolerance(search: usize) -> f32 {
        (search * search) as f32 * 6e-7 + 1e-6
    }

    #[test]
    fn matches_the_exact_formula_on_every_border_and_shape() {
        let borders =
            [Border::Reflect, Border::Mirror, Border::Replicate, Border::Wrap, Border::Constant(0.25)];
        for (w, h) in [(1, 1), (1, 7), (8, 1), (2, 2), (13, 11)] {
            let p = noise(w, h, 11 + w as u32);
            for b in borders {
                for (patch, search, hh, sigma) in [(3, 5, 0.2, 0.0), (1, 3, 0.1, 0.0), (5, 7, 0.15, 0.1)] {
                    let f = NlMeans::new(patch, search, hh, sigma, b).unwrap();
                    let got = f.apply(raster(vec![p.clone()], Layout::Gray)).unwrap().into_planes().remove(0);
                    let want = naive(std::slice::from_ref(&p), patch, search, hh, sigma, b).remove(0);
                    let d = worst(&got, &want);
                    assert!(d <= tolerance(search), "{w}×{h} {b:?} patch {patch}: {d:e}");
                }
            }
        }
    }

    #[test]
    fn colour_distances_sum_over_channels() {
        let planes: Vec<Plane> = (0..3).map(|c| noise(12, 10, 40 + c)).collect();
        let f = NlMeans::new(3, 5, 0.2, 0.0, Border::Mirror).unwrap();
        let out = f.apply(raster(planes.clone(), Layout::Rgb)).unwrap();
        let want = naive(&planes, 3, 5, 0.2, 0.0, Border::Mirror);
        for (c, (g, w)) in out.planes().iter().zip(&want).enumerate() {
            assert!(worst(g, w) <= tolerance(5), "channel {c}");
        }
    }

    #[test]
    fn constants_survive_and_sigma_sets_h() {
        let f = NlMeans::new(7, 21, 0.0, 0.05, Border::Reflect).unwrap();
        assert!((f.inv_h2 - 1.0 / (0.04f32 * 0.04)).abs() < 1e-2);
        let out = f.apply(raster(vec![Plane::filled(30, 25, 0.625).unwrap()], Layout::Gray)).unwrap();
        assert!(out.planes()[0].as_slice().iter().all(|v| (v - 0.625).abs() < 1e-6));
    }

    #[test]
    fn transparent_pixels_lend_no_colour() {
        let (w, h) = (9, 9);
        let hole = |x: usize, y: usize| x == 4 && y == 4;
        let r = Plane::from_fn(w, h, |x, y| if hole(x, y) { 1.0 } else { 0.5 }).unwrap();
        let g = Plane::filled(w, h, 0.5).unwrap();
        let a = Plane::from_fn(w, h, |x, y| if hole(x, y) { 0.0 } else { 1.0 }).unwrap();
        let f = NlMeans::new(3, 7, 10.0, 0.0, Border::Reflect).unwrap();
        let out = f.apply(raster(vec![r, g.clone(), g, a], Layout::Rgba)).unwrap();
        for (x, y) in [(3, 4), (4, 3), (0, 0), (4, 4)] {
            assert!((out.planes()[0].get(x, y) - 0.5).abs() < 1e-6, "red at {x},{y}");
        }
    }

    #[test]
    fn non_finite_samples_are_refused_by_position() {
        for bad in [f32::NAN, f32::INFINITY] {
            let mut p = noise(6, 5, 1);
            p.row_mut(3)[2] = bad;
            let f = NlMeans::new(3, 5, 0.1, 0.0, Border::Reflect).unwrap();
            let e = f.apply(raster(vec![p], Layout::Gray)).unwrap_err().to_string();
            assert!(e.contains("finite") && e.contains("x=2, y=3"), "{e}");
        }
    }

    #[test]
    fn bad_parameters_are_refused() {
        let b = Border::Reflect;
        assert!(NlMeans::new(4, 21, 0.1, 0.0, b).unwrap_err().0.contains("odd"));
        assert!(NlMeans::new(7, 20, 0.1, 0.0, b).unwrap_err().0.contains("odd"));
        assert!(NlMeans::new(7, 1, 0.1, 0.0, b).is_err());
        assert!(NlMeans::new(0, 21, 0.1, 0.0, b).is_err());
        assert!(NlMeans::new(7, 21, 0.0, 0.0, b).unwrap_err().0.contains("give h"));
        assert!(NlMeans::new(7, 21, f64::NAN, 0.0, b).is_err());
        assert!(NlMeans::new(7, 21, 0.1, f64::NAN, b).is_err());
        assert!(NlMeans::new(7, 21, -0.1, 0.0, b).is_err());
    }

    #[test]
    fn thread_count_does_not_change_the_result() {
        let p = noise(40, 90, 5);
        let f = NlMeans::new(5, 9, 0.2, 0.0, Border::Reflect).unwrap();
        let one = rayon::ThreadPoolBuilder::new().num_threads(1).build().unwrap();
        let a = one.install(|| f.apply(raster(vec![p.clone()], Layout::Gray)).unwrap());
        let three = rayon::ThreadPoolBuilder::new().num_threads(3).build().unwrap();
        let b = three.install(|| f.apply(raster(vec![p], Layout::Gray)).unwrap());
        assert_eq!(a.planes(), b.planes());
    }
}
