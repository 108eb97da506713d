//! `bilateral`: the edge-preserving average of Tomasi & Manduchi, over a disk
//! window, with range weights from a guide plane (luma, or each channel
//! itself). The weighted-sum engine here is also what alpha handling uses; the
//! weight function comes from `exptable`.

use multiversion::multiversion;
use rayon::prelude::*;

use super::exptable::ExpTable;
use crate::color::luma;
use crate::error::{Error, ParamError};
use crate::ops::params::{self, Kind, OpSpec, ParamSpec};
use crate::ops::{Domain, Operator};
use crate::raster::{Plane, Raster};
use crate::tile::{self, Border};

/// Samples of a row processed together: the dozen row buffers of one tap
/// (guide, values, weights, sums) then fit in a 48 KiB L1 data cache.
const PIECE: usize = 512;

/// Largest window radius accepted (explicit or from sigma).
pub const MAX_BILATERAL_RADIUS: usize = 100;

/// The text of `pumice ops bilateral`, also the doc of [`Bilateral`].
macro_rules! bilateral_doc {
    () => {
        "Bilateral filter: a Gaussian average that leaves out neighbours whose value differs.

```text
W    = {(i, j) : i² + j² ≤ r²},   r = radius, or ceil(2σ) when radius=0
w    = exp(-(i² + j²) / 2σ²) · exp(-(g(x+j, y+i) - g(x, y))² / 2ρ²)
out(x, y) = Σ_W w · in(x+j, y+i)  /  Σ_W w
σ = sigma (pixels), ρ = range (sample units: 0.1 is a tenth of full scale)
g = BT.709 luma of the colour (on=luma, the default; one weight for every
    channel, so edges stay where the eye sees them and colours do not shift
    apart), or each channel itself (on=channels)
```

The default radius ceil(2σ) keeps spatial weights down to exp(-2) = 0.135 at
the rim; give a radius for more. The range weight comes from a table of
exp(-u) with linear interpolation (step 1/512 in u = Δg²/2ρ², so within
5.5e-7 of the exact weight; 0 beyond u = 24), and the disk's spatial weights
are computed once. With alpha, colour is premultiplied while averaging (the
same weights applied to alpha, so transparent pixels lend no colour); the
guide is the straight colour. A NaN in a window makes that output NaN.
Domain: encoded values. The range term compares values as they look: a
difference of ρ is about as visible in the shadows as in the highlights,
which holds for sRGB-encoded values and not for linear light (where the same
ρ would smooth across every dark edge and keep noise in bright areas).
Force --domain linear for linear data such as micrographs.
Border: any rule (default reflect); needs r rows of halo.
Source: C. Tomasi and R. Manduchi, Bilateral filtering for gray and color
images, ICCV 1998, pp. 839–846 (a Gaussian closeness and a Gaussian
similarity function; the disk window is common practice)."
    };
}

/// What the range weights compare.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum RangeOn {
    /// The BT.709 luma of the colour planes, one weight for all channels.
    Luma,
    /// Each channel on its own.
    Channels,
}

#[doc = bilateral_doc!()]
#[derive(Debug)]
pub struct Bilateral {
    on: RangeOn,
    border: Border,
    radius: usize,
    /// `1 / 2ρ²`.
    range_coeff: f32,
    /// The window by rows: `(i, [(j, spatial weight)])`.
    taps: Vec<(isize, Vec<(isize, f32)>)>,
    table: ExpTable,
}

/// How the window sums become outputs.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub(super) enum Finish {
    /// `out_k = S_k / Σ w` for every value plane.
    Mean,
    /// Premultiplied values with the alpha plane last: `out_k = S_k / S_alpha`
    /// (0 where `S_alpha = 0`) for the others, and `S_alpha / Σ w` for alpha
    /// itself when `keep_alpha`.
    OverAlpha { keep_alpha: bool },
}

impl Bilateral {
    /// `radius = None` takes ceil(2σ).
    pub fn new(
        sigma: f64,
        range: f64,
        radius: Option<usize>,
        on: RangeOn,
        border: Border,
    ) -> Result<Bilateral, ParamError> {
        if !(sigma > 0.0 && sigma.is_finite()) {
            return Err(ParamError::new(format!("bilateral sigma must be a positive number, got {sigma}")));
        }
        if !(range > 0.0 && range.is_finite()) {
            return Err(ParamError::new(format!("bilateral range must be a positive number, got {range}")));
        }
        let radius = radius.unwrap_or_else(|| (2.0 * sigma).ceil() as usize);
        if radius == 0 || radius > MAX_BILATERAL_RADIUS {
            return Err(ParamError::new(format!(
                "bilateral radius must be a whole number in 1..={MAX_BILATERAL_RADIUS}, got {radius}"
            )));
        }
        let r = radius as isize;
        let taps = (-r..=r)
            .map(|i| {
                let half = ((r * r - i * i) as f64).sqrt().floor() as isize;
                let row = (-half..=half)
                    .map(|j| (j, (-((i * i + j * j) as f64) / (2.0 * sigma * sigma)).exp() as f32))
                    .collect();
                (i, row)
            })
            .collect();
        Ok(Bilateral {
            on,
            border,
            radius,
            range_coeff: (1.0 / (2.0 * range * range)) as f32,
            taps,
            table: ExpTable::new(),
        })
    }

    /// The window radius in use.
    pub fn radius(&self) -> usize {
        self.radius
    }

    /// The sum of the spatial weights over the window (the disk).
    pub fn spatial_sum(&self) -> f64 {
        self.taps.iter().flat_map(|(_, row)| row.iter().map(|&(_, w)| f64::from(w))).sum()
    }

    /// The window sums of `values` weighted by `guide`'s range weights,
    /// turned into outputs by `finish`. All planes share one size.
    fn weighted(&self, guide: &Plane, values: &[&Plane], finish: Finish) -> Vec<Plane> {
        let (w, h) = (guide.width(), guide.height());
        let r = self.radius;
        let n_out = match finish {
            Finish::Mean | Finish::OverAlpha { keep_alpha: true } => values.len(),
            Finish::OverAlpha { keep_alpha: false } => values.len() - 1,
        };
        let mut outs: Vec<Plane> = (0..n_out)
            .map(|_| Plane::zeros(w, h).unwrap_or_else(|_| unreachable!("same size as a valid plane")))
            .collect();
        let rows = tile::band_rows(w * (values.len() + 1), r);
        for_each_band_of(&mut outs, rows, |y0, band| {
            let n = band[0].len() / w;
            let gpad = padded_band(guide, y0, n, r, self.border);
            let vpads: Vec<Vec<f32>> = values.iter().map(|v| padded_band(v, y0, n, r, self.border)).collect();
            let pw = w + 2 * r;
            // Work on pieces of a row so that every row buffer a tap touches
            // stays in L1 across the whole window.
            let piece = PIECE.min(w);
            let mut wsum = vec![0.0f32; piece];
            let mut sums = vec![vec![0.0f32; piece]; values.len()];
            let mut u = vec![0.0f32; piece];
            let mut wrow = vec![0.0f32; piece];
            for i in 0..n {
                for x0 in (0..w).step_by(piece) {
                    let len = piece.min(w - x0);
                    let (wsum, u, wrow) = (&mut wsum[..len], &mut u[..len], &mut wrow[..len]);
                    wsum.fill(0.0);
                    sums.iter_mut().for_each(|s| s[..len].fill(0.0));
                    let centre = (i + r) * pw + r + x0;
                    let g0 = &gpad[centre..centre + len];
                    for (di, row) in &self.taps {
                        let base = ((i + r) as isize + di) as usize * pw + r + x0;
                        for &(dj, ws) in row {
                            let at = (base as isize + dj) as usize;
                            let gk = &gpad[at..at + len];
                            let c = self.range_coeff;
                            match (&mut sums[..], &vpads[..]) {
                                // the common layouts in one pass each
                                ([s], [v]) => {
                                    tap_one(&self.table, g0, gk, c, ws, wsum, &mut s[..len], &v[at..at + len])
                                }
                                ([s0, s1, s2], [v0, v1, v2]) => tap_three(
                                    &self.table,
                                    (g0, gk),
                                    c,
                                    ws,
                                    wsum,
                                    &mut s0[..len],
                                    &mut s1[..len],
                                    &mut s2[..len],
                                    (&v0[at..at + len], &v1[at..at + len], &v2[at..at + len]),
                                ),
                                _ => {
                                    range_u(g0, gk, c, u);
                                    self.table.eval_row(u, ws, wrow);
                                    add(wsum, wrow);
                                    for (s, vp) in sums.iter_mut().zip(&vpads) {
                                        add_product(&mut s[..len], wrow, &vp[at..at + len]);
                                    }
                                }
                            }
                        }
                    }
                    let piece_sums: Vec<&[f32]> = sums.iter().map(|s| &s[..len]).collect();
                    finish_row(finish, wsum, &piece_sums, band, i * w + x0..i * w + x0 + len);
                }
            }
        });
        outs
    }
}

/// Runs `kernel(y0, band)` for every band of `rows` full rows of the planes
/// `outs` (all one size) in parallel, where `band[k]` is plane k's mutable
/// slice of rows `y0 ..`: [`tile::for_each_band`] for several outputs at once.
pub(super) fn for_each_band_of<F>(outs: &mut [Plane], rows: usize, kernel: F)
where
    F: Fn(usize, &mut [&mut [f32]]) + Sync + Send,
{
    let (w, h) = (outs[0].width(), outs[0].height());
    let rows = rows.max(1);
    let mut chunks: Vec<_> = outs.iter_mut().map(|p| p.as_mut_slice().chunks_mut(rows * w)).collect();
    let bands: Vec<Vec<&mut [f32]>> =
        (0..h.div_ceil(rows)).map(|_| chunks.iter_mut().filter_map(|c| c.next()).collect()).collect();
    bands.into_par_iter().enumerate().for_each(|(b, mut band)| kernel(b * rows, &mut band));
}

/// Rows `y0 − r .. y0 + n + r` of `p`, each padded by `r` samples a side
/// under `border`, as one row-major block `(n + 2r) × (width + 2r)`.
pub(super) fn padded_band(p: &Plane, y0: usize, n: usize, r: usize, border: Border) -> Vec<f32> {
    let w = p.width();
    let pw = w + 2 * r;
    let const_row = vec![border.constant_value(); w];
    let mut out = vec![0.0f32; (n + 2 * r) * pw];
    for (k, dst) in out.chunks_exact_mut(pw).enumerate() {
        let y = (y0 + k) as isize - r as isize;
        tile::pad_row(tile::source_row(p, y, border).unwrap_or(&const_row), r, border, dst);
    }
    out
}

/// Writes row `span` of the outputs from the window sums (see [`Finish`]).
pub(super) fn finish_row<S: AsRef<[f32]>>(
    finish: Finish,
    wsum: &[f32],
    sums: &[S],
    band: &mut [&mut [f32]],
    span: std::ops::Range<usize>,
) {
    match finish {
        Finish::Mean => {
            for (out, s) in band.iter_mut().zip(sums) {
                for ((o, &s), &ws) in out[span.clone()].iter_mut().zip(s.as_ref()).zip(wsum) {
                    *o = s / ws;
                }
            }
        }
        Finish::OverAlpha { keep_alpha } => {
            let (alpha, colour) =
                sums.split_last().unwrap_or_else(|| unreachable!("alpha is among the values"));
            for (out, s) in band.iter_mut().zip(colour) {
                for ((o, &s), &a) in out[span.clone()].iter_mut().zip(s.as_ref()).zip(alpha.as_ref()) {
                    *o = if a > 0.0 { s / a } else { 0.0 };
                }
            }
            if keep_alpha && let Some(out) = band.get_mut(colour.len()) {
                for ((o, &a), &ws) in out[span].iter_mut().zip(alpha.as_ref()).zip(wsum) {
                    *o = a / ws;
                }
            }
        }
    }
}

/// One tap for one value plane, fused: `w = ws · exp(−(gk − g0)² · c)`,
/// `wsum += w`, `s += w · v` (the same arithmetic as the separate passes).
#[allow(clippy::too_many_arguments)]
#[multiversion(targets("x86_64+avx512f+avx512bw+avx512vl+avx2+fma", "x86_64+avx2+fma"))]
fn tap_one(
    table: &ExpTable,
    g0: &[f32],
    gk: &[f32],
    c: f32,
    ws: f32,
    wsum: &mut [f32],
    s: &mut [f32],
    v: &[f32],
) {
    for ((((a, &b), ws_acc), s), &v) in g0.iter().zip(gk).zip(wsum.iter_mut()).zip(s.iter_mut()).zip(v) {
        let d = b - a;
        let w = ws * table.eval(d * d * c);
        *ws_acc += w;
        *s += w * v;
    }
}

/// [`tap_one`] for three value planes sharing the weights.
#[allow(clippy::too_many_arguments)]
#[multiversion(targets("x86_64+avx512f+avx512bw+avx512vl+avx2+fma", "x86_64+avx2+fma"))]
fn tap_three(
    table: &ExpTable,
    (g0, gk): (&[f32], &[f32]),
    c: f32,
    ws: f32,
    wsum: &mut [f32],
    s0: &mut [f32],
    s1: &mut [f32],
    s2: &mut [f32],
    (v0, v1, v2): (&[f32], &[f32], &[f32]),
) {
    let sums = s0.iter_mut().zip(s1.iter_mut()).zip(s2.iter_mut());
    let vals = v0.iter().zip(v1).zip(v2);
    for ((((a, &b), ws_acc), ((s0, s1), s2)), ((&v0, &v1), &v2)) in
        g0.iter().zip(gk).zip(wsum.iter_mut()).zip(sums).zip(vals)
    {
        let d = b - a;
        let w = ws * table.eval(d * d * c);
        *ws_acc += w;
        *s0 += w * v0;
        *s1 += w * v1;
        *s2 += w * v2;
    }
}

/// `u[x] = (b[x] − a[x])² · c`.
#[multiversion(targets("x86_64+avx512f+avx512bw+avx512vl+avx2+fma", "x86_64+avx2+fma"))]
fn range_u(a: &[f32], b: &[f32], c: f32, u: &mut [f32]) {
    for ((u, &a), &b) in u.iter_mut().zip(a).zip(b) {
        let d = b - a;
        *u = d * d * c;
    }
}

/// `acc[x] += w[x]`.
#[multiversion(targets("x86_64+avx512f+avx512bw+avx512vl+avx2+fma", "x86_64+avx2+fma"))]
pub(super) fn add(acc: &mut [f32], w: &[f32]) {
    for (a, &w) in acc.iter_mut().zip(w) {
        *a += w;
    }
}

/// `acc[x] += w[x] · v[x]`.
#[multiversion(targets("x86_64+avx512f+avx512bw+avx512vl+avx2+fma", "x86_64+avx2+fma"))]
pub(super) fn add_product(acc: &mut [f32], w: &[f32], v: &[f32]) {
    for ((a, &w), &v) in acc.iter_mut().zip(w).zip(v) {
        *a += w * v;
    }
}

/// `p · alpha`, sample by sample.
pub(super) fn premultiplied(p: &Plane, alpha: &Plane) -> Plane {
    let data = p.as_slice().iter().zip(alpha.as_slice()).map(|(v, a)| v * a).collect();
    Plane::from_vec(p.width(), p.height(), data)
        .unwrap_or_else(|_| unreachable!("same size as a valid plane"))
}

impl Operator for Bilateral {
    fn domain(&self) -> Domain {
        Domain::Encoded
    }

    fn apply(&self, raster: Raster) -> Result<Raster, Error> {
        let layout = raster.layout();
        let planes = raster.planes();
        let alpha = raster.alpha();
        let out = if self.on == RangeOn::Luma && layout.colour_channels() == 3 {
            let (w, h) = (raster.width(), raster.height());
            let mut y = Plane::zeros(w, h)?;
            luma::weighted_sum(
                luma::BT709,
                planes[0].as_slice(),
                planes[1].as_slice(),
                planes[2].as_slice(),
                y.as_mut_slice(),
            );
            match alpha {
                None => self.weighted(&y, &[&planes[0], &planes[1], &planes[2]], Finish::Mean),
                Some(a) => {
                    let pre: Vec<Plane> = planes[..3].iter().map(|p| premultiplied(p, a)).collect();
                    self.weighted(&y, &[&pre[0], &pre[1], &pre[2], a], Finish::OverAlpha { keep_alpha: true })
                }
            }
        } else {
            let colour = &planes[..layout.colour_channels()];
            let mut out: Vec<Plane> = colour
                .iter()
                .map(|p| match alpha {
                    None => self.weighted(p, &[p], Finish::Mean),
                    Some(a) => {
                        self.weighted(p, &[&premultiplied(p, a), a], Finish::OverAlpha { keep_alpha: false })
                    }
                })
                .map(|mut v| v.remove(0))
                .collect();
            if let Some(a) = alpha {
                out.push(self.weighted(a, &[a], Finish::Mean).remove(0));
            }
            out
        };
        raster.with_planes(out, layout)
    }
}

pub static BILATERAL: OpSpec = OpSpec {
    name: "bilateral",
    family: "filter",
    summary: "edge-preserving smoothing: Gaussian in space and in value (Tomasi & Manduchi)",
    doc: bilateral_doc!(),
    main: Some("sigma"),
    params: &[
        ParamSpec {
            name: "sigma",
            kind: Kind::positive(0.0, 50.0),
            default: None,
            help: "spatial standard deviation in pixels",
        },
        ParamSpec {
            name: "range",
            kind: Kind::positive(0.0, 1e6),
            default: Some("0.1"),
            help: "range standard deviation in sample units (full scale is 1)",
        },
        ParamSpec {
            name: "radius",
            kind: Kind::int(0.0, MAX_BILATERAL_RADIUS as f64),
            default: Some("0"),
            help: "window radius in pixels (a disk); 0 takes ceil(2·sigma)",
        },
        ParamSpec {
            name: "on",
            kind: Kind::Choice(&["luma", "channels"]),
            default: Some("luma"),
            help: "range weights from the BT.709 luma (one weight for all channels) or each channel",
        },
        params::BORDER_PARAM,
        params::FILL_PARAM,
    ],
    build: |a| {
        let radius = match a.int("radius")? {
            0 => None,
            r => Some(r as usize),
        };
        let on = if a.choice("on")? == "channels" { RangeOn::Channels } else { RangeOn::Luma };
        Ok(Box::new(Bilateral::new(a.number("sigma")?, a.number("range")?, radius, on, params::border(a)?)?))
    },
};

#[cfg(test)]
mod tests {
    //! Edge cases: 1×1, 1×N, N×1, a window larger than the image, every
    //! border rule, a constant image, a step edge, alpha with a transparent
    //! hole, NaN samples, bad parameters (sigma ≤ 0, range ≤ 0, NaN, radius 0).
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

    /// The formula in f64 with the exact exponential.
    fn naive(p: &Plane, g: &Plane, sigma: f64, range: f64, r: usize, border: Border) -> Plane {
        let (w, h) = (p.width(), p.height());
        let at = |q: &Plane, x: isize, y: isize| match (border.index(x, w), border.index(y, h)) {
            (Some(x), Some(y)) => f64::from(q.get(x, y)),
            _ => f64::from(border.constant_value()),
        };
        let r = r as isize;
        Plane::from_fn(w, h, |x, y| {
            let (x, y) = (x as isize, y as isize);
            let g0 = at(g, x, y);
            let (mut s, mut ws) = (0.0, 0.0);
            for i in -r..=r {
                for j in -r..=r {
                    if i * i + j * j > r * r {
                        continue;
                    }
                    let d = at(g, x + j, y + i) - g0;
                    let wt = (-((i * i + j * j) as f64) / (2.0 * sigma * sigma)
                        - d * d / (2.0 * range * range))
                        .exp();
                    s += wt * at(p, x + j, y + i);
                    ws += wt;
                }
            }
            (s / ws) as f32
        })
        .unwrap()
    }

    fn gray(p: Plane) -> Raster {
        Raster::new(vec![p], Layout::Gray, Encoding::Srgb).unwrap()
    }

    fn worst(a: &Plane, b: &Plane) -> f32 {
        a.as_slice().iter().zip(b.as_slice()).map(|(x, y)| (x - y).abs()).fold(0.0, f32::max)
    }

    #[test]
    fn matches_the_exact_formula_on_every_border_and_shape() {
        let borders =
            [Border::Reflect, Border::Mirror, Border::Replicate, Border::Wrap, Border::Constant(0.25)];
        for (w, h) in [(1, 1), (1, 9), (9, 1), (2, 2), (23, 17)] {
            let p = noise(w, h, 7 + w as u32);
            for b in borders {
                for (sigma, range, radius) in [(1.0, 0.1, None), (2.0, 0.3, Some(5)), (0.8, 0.05, Some(1))] {
                    let f = Bilateral::new(sigma, range, radius, RangeOn::Channels, b).unwrap();
                    let got = f.apply(gray(p.clone())).unwrap().into_planes().remove(0);
                    let want = naive(&p, &p, sigma, range, f.radius(), b);
                    // table error per weight × Σ spatial weights × value spread (< 1),
                    // over Σ w ≥ 1 (the centre), plus f32 sums: see exptable::MAX_ERROR.
                    let tol = super::super::exptable::MAX_ERROR * f.spatial_sum() as f32 + 2e-6;
                    let d = worst(&got, &want);
                    assert!(d <= tol, "{w}×{h} {b:?} σ={sigma}: {d:e} > {tol:e}");
                }
            }
        }
    }

    #[test]
    fn luma_guides_every_channel() {
        let (w, h) = (19, 13);
        let planes: Vec<Plane> = (0..3).map(|c| noise(w, h, 100 + c)).collect();
        let mut y = Plane::zeros(w, h).unwrap();
        luma::weighted_sum(
            luma::BT709,
            planes[0].as_slice(),
            planes[1].as_slice(),
            planes[2].as_slice(),
            y.as_mut_slice(),
        );
        let f = Bilateral::new(1.5, 0.1, None, RangeOn::Luma, Border::Mirror).unwrap();
        let r = Raster::new(planes.clone(), Layout::Rgb, Encoding::Srgb).unwrap();
        let out = f.apply(r).unwrap();
        for (c, got) in out.planes().iter().enumerate() {
            let want = naive(&planes[c], &y, 1.5, 0.1, f.radius(), Border::Mirror);
            assert!(worst(got, &want) < 1e-4, "channel {c}");
        }
    }

    #[test]
    fn constants_survive_and_steps_stay_sharp() {
        let f = Bilateral::new(3.0, 0.05, None, RangeOn::Luma, Border::Reflect).unwrap();
        let c = f.apply(gray(Plane::filled(30, 9, 0.375).unwrap())).unwrap();
        assert!(c.planes()[0].as_slice().iter().all(|v| (v - 0.375).abs() < 1e-6));
        // a step of 1 is 20 range sigmas: u = 200, past the table, weight 0
        let step = Plane::from_fn(30, 9, |x, _| if x < 15 { 0.0 } else { 1.0 }).unwrap();
        let out = f.apply(gray(step.clone())).unwrap();
        assert_eq!(out.planes()[0], step);
    }

    #[test]
    fn transparent_pixels_lend_no_colour() {
        // A red hole at alpha 0 in a gray, opaque field: no red may leak out.
        let (w, h) = (9, 9);
        let hole = |x: usize, y: usize| x == 4 && y == 4;
        let r = Plane::from_fn(w, h, |x, y| if hole(x, y) { 1.0 } else { 0.5 }).unwrap();
        let g = Plane::filled(w, h, 0.5).unwrap();
        let a = Plane::from_fn(w, h, |x, y| if hole(x, y) { 0.0 } else { 1.0 }).unwrap();
        let raster = Raster::new(vec![r, g.clone(), g.clone(), a], Layout::Rgba, Encoding::Srgb).unwrap();
        for on in [RangeOn::Luma, RangeOn::Channels] {
            let f = Bilateral::new(2.0, 0.5, None, on, Border::Reflect).unwrap();
            let out = f.apply(raster.clone()).unwrap();
            for (x, y) in [(3, 4), (4, 3), (0, 0), (4, 4)] {
                assert!((out.planes()[0].get(x, y) - 0.5).abs() < 1e-6, "{on:?} red at {x},{y}");
            }
            assert!(out.planes()[3].get(4, 4) > 0.0 && out.planes()[3].get(4, 4) < 1.0);
        }
    }

    #[test]
    fn nan_stays_in_its_windows() {
        let mut p = noise(15, 15, 3);
        p.row_mut(7)[7] = f32::NAN;
        let f = Bilateral::new(1.0, 0.1, Some(2), RangeOn::Channels, Border::Reflect).unwrap();
        let out = f.apply(gray(p)).unwrap().into_planes().remove(0);
        assert!(out.get(7, 7).is_nan() && out.get(9, 7).is_nan());
        assert!(out.get(10, 7).is_finite() && out.get(0, 0).is_finite());
    }

    #[test]
    fn bad_parameters_are_refused() {
        let b = Border::Reflect;
        for (sigma, range) in
            [(0.0, 0.1), (-1.0, 0.1), (f64::NAN, 0.1), (1.0, 0.0), (1.0, f64::NAN), (f64::INFINITY, 0.1)]
        {
            assert!(Bilateral::new(sigma, range, None, RangeOn::Luma, b).is_err(), "{sigma} {range}");
        }
        let e = Bilateral::new(1.0, 0.1, Some(0), RangeOn::Luma, b).unwrap_err();
        assert!(e.0.contains("radius"), "{e}");
        assert!(Bilateral::new(1.0, 0.1, Some(MAX_BILATERAL_RADIUS + 1), RangeOn::Luma, b).is_err());
        assert_eq!(Bilateral::new(1.2, 0.1, None, RangeOn::Luma, b).unwrap().radius(), 3);
    }

    #[test]
    fn thread_count_does_not_change_the_result() {
        let p = noise(64, 200, 9);
        let f = Bilateral::new(2.0, 0.1, None, RangeOn::Channels, Border::Reflect).unwrap();
        let one = rayon::ThreadPoolBuilder::new().num_threads(1).build().unwrap();
        let a = one.install(|| f.apply(gray(p.clone())).unwrap());
        let three = rayon::ThreadPoolBuilder::new().num_threads(3).build().unwrap();
        let b = three.install(|| f.apply(gray(p)).unwrap());
        assert_eq!(a.planes(), b.planes());
    }
}
