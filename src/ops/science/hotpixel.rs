//! `hotpixel`: finds samples that stand out from their 3×3 neighbourhood by
//! more than k robust standard deviations and replaces them by the
//! neighbourhood median; reports how many it repaired.

use crate::error::{Error, ParamError};
use crate::ops::params::{Kind, OpSpec, ParamSpec};
use crate::ops::{Domain, Operator};
use crate::raster::{Note, NoteValue, Plane, Raster};
use crate::tile::{self, Border};

/// The factor that turns a median absolute deviation into a standard deviation
/// for normally distributed data: 1 / Φ⁻¹(3/4) = 1.482602…
/// (Rousseeuw & Croux 1993, J. Amer. Statist. Assoc. 88(424), eq. 1.1).
pub const MAD_TO_SIGMA: f64 = 1.4826;

/// The factor that turns a mean absolute deviation into a standard deviation
/// for normal data: √(π/2) = 1.2533… (the mean of |X| for X ~ N(0, 1) is √(2/π)).
const MEAN_AD_TO_SIGMA: f64 = 1.253_314_137_315_500_3;

/// The text of `pumice ops hotpixel`, also the doc of [`Hotpixel`].
macro_rules! hotpixel_doc {
    () => {
        "Repairs outlier pixels (hot, dead or cosmic-ray hits) by the median of their neighbours.

```text
m(x)  = median of the 8 neighbours of x (the 3×3 window without its centre)
d(x)  = in(x) − m(x)
σ     = 1.4826 · median_x |d(x) − median_x d(x)|      (robust spread, whole plane)
out(x) = m(x)   if |d(x)| > k·σ      (or in(x) is NaN)
out(x) = in(x)  otherwise
```

The median of 8 values is the mean of the 4th and 5th smallest. σ is one figure
per colour plane, from every finite d(x): a median absolute deviation scaled by
1/Φ⁻¹(3/4) ≈ 1.4826 to estimate the standard deviation of normal noise
(Rousseeuw & Croux 1993, J. Amer. Statist. Assoc. 88(424)); a single pixel
cannot move it. Where the MAD is 0 (more than half of the plane exactly follows
its neighbours: flat or clipped areas of 8-bit images, synthetic data) σ falls
back to √(π/2) × the mean absolute deviation, the same estimate for normal noise
(the mean of |X| for X ~ N(0, 1) is √(2/π)), so flat areas do not make every
small difference an outlier (the zeros still pull this σ down: in a mostly flat
image, raise k if texture gets touched); if it is 0 too, only NaN samples are
repaired.
The default k = 5 is common practice, no published source.
With `dark=FILE` (a master dark frame, read once when the step is built, as
`flatfield` reads its frames: linear values, same size and colour channels as
the image), the pixels that stand out in the dark by the same rule — hot
pixels, whose dark current shows with no light — are repaired too, however
little they stand out in the image itself.
Reports `repaired samples` (summed over the colour planes; `pumice run -v`).
Border: mirror (the edge sample is not repeated, so a pixel never counts as its
own neighbour); needs 1 row of halo. Alpha is left as it is.
Domain: linear light (sensor values; the noise model is additive).
Source: median-based defect repair is common practice in astronomy and
microscopy; the robust threshold follows Rousseeuw & Croux (1993)."
    };
}

#[doc = hotpixel_doc!()]
#[derive(Debug)]
pub struct Hotpixel {
    k: f64,
    /// The pixels a master dark marks, per colour plane, and the dark's file.
    marked: Option<(String, Vec<Vec<bool>>)>,
}

impl Hotpixel {
    pub fn new(k: f64) -> Result<Hotpixel, ParamError> {
        if !(k.is_finite() && k > 0.0) {
            return Err(ParamError::new(format!("k must be a positive number, got {k}")));
        }
        Ok(Hotpixel { k, marked: None })
    }

    /// Also repairs the pixels that stand out in `dark` (its colour planes) by
    /// the same rule; `name` names the frame in errors.
    pub fn with_dark(self, name: String, dark: Vec<Plane>) -> Hotpixel {
        let marked = dark.iter().map(|p| outliers(p, self.k).1).collect();
        Hotpixel { marked: Some((name, marked)), ..self }
    }
}

impl Operator for Hotpixel {
    fn domain(&self) -> Domain {
        Domain::Linear
    }

    fn apply(&self, mut raster: Raster) -> Result<Raster, Error> {
        if let Some((name, marked)) = &self.marked {
            let (w, h, c) = (raster.width(), raster.height(), raster.layout().colour_channels());
            if marked.len() != c || marked.iter().any(|m| m.len() != w * h) {
                return Err(Error::Step {
                    step: "hotpixel".into(),
                    message: format!(
                        "dark frame {name} does not match the {w}×{h} image with {c} colour channel(s)"
                    ),
                });
            }
        }
        let mut repaired = 0usize;
        for (i, p) in raster.colour_planes_mut().iter_mut().enumerate() {
            let marked = self.marked.as_ref().map(|(_, m)| m[i].as_slice());
            repaired += repair_plane(p, self.k, marked);
        }
        raster.metadata.notes.push(Note {
            operator: "hotpixel",
            name: "repaired samples",
            value: NoteValue::Number { value: repaired as f64, unit: "" },
        });
        Ok(raster)
    }
}

/// The neighbour median of `p` and which samples stand out from it: NaN, or
/// `|in − median| > k·σ`.
fn outliers(p: &Plane, k: f64) -> (Plane, Vec<bool>) {
    let median = neighbour_median(p);
    let diff: Vec<f32> = p.as_slice().iter().zip(median.as_slice()).map(|(&v, &m)| v - m).collect();
    let limit = k * robust_sigma(&diff);
    let out =
        p.as_slice().iter().zip(&diff).map(|(v, &d)| v.is_nan() || f64::from(d.abs()) > limit).collect();
    (median, out)
}

/// Repairs `p` in place — the samples that stand out, and those `marked` (by a
/// master dark) — and returns how many it replaced.
pub fn repair_plane(p: &mut Plane, k: f64, marked: Option<&[bool]>) -> usize {
    let (median, stand_out) = outliers(p, k);
    let mut count = 0;
    for (i, (v, &m)) in p.as_mut_slice().iter_mut().zip(median.as_slice()).enumerate() {
        if stand_out[i] || marked.is_some_and(|d| d[i]) {
            *v = m;
            count += 1;
        }
    }
    count
}

/// 1.4826 × the median absolute deviation of the finite values of `d`, or,
/// where that is 0, √(π/2) × their mean absolute deviation.
fn robust_sigma(d: &[f32]) -> f64 {
    let mut finite: Vec<f32> = d.iter().copied().filter(|v| v.is_finite()).collect();
    if finite.is_empty() {
        return 0.0;
    }
    let centre = median_of(&mut finite);
    for v in finite.iter_mut() {
        *v = (*v - centre as f32).abs();
    }
    let mean = finite.iter().map(|&v| f64::from(v)).sum::<f64>() / finite.len() as f64;
    let mad = median_of(&mut finite);
    if mad > 0.0 { MAD_TO_SIGMA * mad } else { MEAN_AD_TO_SIGMA * mean }
}

/// The median of `v` (mean of the two middle values for an even count); reorders `v`.
fn median_of(v: &mut [f32]) -> f64 {
    let n = v.len();
    let (_, &mut hi, _) = v.select_nth_unstable_by(n / 2, f32::total_cmp);
    if n % 2 == 1 {
        return f64::from(hi);
    }
    let lo = v[..n / 2].iter().copied().fold(f32::NEG_INFINITY, f32::max);
    (f64::from(lo) + f64::from(hi)) / 2.0
}

/// The 19 comparators of a sorting network for 8 values (Knuth, TAOCP vol. 3,
/// §5.3.4, n = 8): after them, position i holds the i-th smallest.
const NET8: [(usize, usize); 19] = [
    (0, 2),
    (1, 3),
    (4, 6),
    (5, 7),
    (0, 4),
    (1, 5),
    (2, 6),
    (3, 7),
    (0, 1),
    (2, 3),
    (4, 5),
    (6, 7),
    (2, 4),
    (3, 5),
    (1, 4),
    (3, 6),
    (1, 2),
    (3, 4),
    (5, 6),
];

/// The median of each sample's 8 neighbours (mirror border): the mean of the
/// 4th and 5th smallest, by the sorting network run on whole rows at once (each
/// comparator is an element-wise min and max of two rows of neighbours).
fn neighbour_median(src: &Plane) -> Plane {
    let (w, h) = (src.width(), src.height());
    let mut out = Plane::zeros(w, h).unwrap_or_else(|_| unreachable!("same size as a valid plane"));
    // Offsets of the 8 neighbours: (row above/here/below, column shift in the padded row).
    const TAPS: [(usize, usize); 8] = [(0, 0), (0, 1), (0, 2), (1, 0), (1, 2), (2, 0), (2, 1), (2, 2)];
    tile::for_each_band(&mut out, tile::band_rows(w, 1), |y0, band| {
        let mut padded = [vec![0.0; w + 2], vec![0.0; w + 2], vec![0.0; w + 2]];
        let mut v: Vec<Vec<f32>> = vec![vec![0.0; w]; 8];
        for (j, out_row) in band.chunks_exact_mut(w).enumerate() {
            let y = (y0 + j) as isize;
            for (dy, p) in padded.iter_mut().enumerate() {
                let row = tile::source_row(src, y + dy as isize - 1, Border::Mirror)
                    .unwrap_or_else(|| unreachable!("mirror always names a row"));
                tile::pad_row(row, 1, Border::Mirror, p);
            }
            for (buf, &(dy, dx)) in v.iter_mut().zip(&TAPS) {
                buf.copy_from_slice(&padded[dy][dx..dx + w]);
            }
            for (a, b) in NET8 {
                let (lo, hi) = v.split_at_mut(b);
                for (p, q) in lo[a].iter_mut().zip(hi[0].iter_mut()) {
                    let (x, y) = (*p, *q);
                    // Two independent compare-and-selects, so each maps to one
                    // vector min or max instruction.
                    *p = if y < x { y } else { x };
                    *q = if x > y { x } else { y };
                }
            }
            for ((o, &a), &b) in out_row.iter_mut().zip(&v[3]).zip(&v[4]) {
                *o = 0.5 * (a + b);
            }
        }
    });
    out
}

pub static HOTPIXEL: OpSpec = OpSpec {
    name: "hotpixel",
    family: "science",
    summary: "repair outlier pixels by their neighbourhood median (counts them)",
    doc: hotpixel_doc!(),
    main: Some("k"),
    params: &[
        ParamSpec {
            name: "k",
            kind: Kind::positive(0.0, 1000.0),
            default: Some("5"),
            help: "threshold in robust standard deviations (1.4826 × MAD) of the difference from the median",
        },
        ParamSpec {
            name: "dark",
            kind: Kind::File,
            default: Some("none"),
            help: "master dark frame whose outliers (hot pixels) are repaired too (same size and channels)",
        },
    ],
    build: |a| {
        let hot = Hotpixel::new(a.number("k")?)?;
        Ok(Box::new(match a.file("dark")? {
            Some(path) => {
                let frame = super::flatfield::read_frame(path, false)?;
                hot.with_dark(frame.path, frame.planes)
            }
            None => hot,
        }))
    },
};

#[cfg(test)]
mod tests {
    //! Edge cases decided here: 1×1 planes (mirror makes the sample its own
    //! neighbour, so nothing stands out) and 1×N planes (the row above and
    //! below is the row itself), a MAD of 0 (the mean-deviation fallback), NaN
    //! (always repaired), outliers on the border and in corners. Reference: the sorting network against a
    //! sort; planted outliers on seeded noise.
    use super::*;
    use crate::ops::morph::tests::noise;
    use crate::raster::{Encoding, Layout};

    #[test]
    fn network_median_equals_the_sorted_median() {
        let p = noise(37, 23, 3);
        let m = neighbour_median(&p);
        let at = |x: isize, y: isize| {
            let (bx, by) = (Border::Mirror.index(x, 37).unwrap(), Border::Mirror.index(y, 23).unwrap());
            p.get(bx, by)
        };
        for y in 0..23isize {
            for x in 0..37isize {
                let mut s: Vec<f32> = [(-1, -1), (0, -1), (1, -1), (-1, 0), (1, 0), (-1, 1), (0, 1), (1, 1)]
                    .iter()
                    .map(|&(dx, dy)| at(x + dx, y + dy))
                    .collect();
                s.sort_by(f32::total_cmp);
                assert_eq!(m.get(x as usize, y as usize), 0.5 * (s[3] + s[4]), "({x}, {y})");
            }
        }
    }

    #[test]
    fn planted_outliers_are_found_exactly() {
        // Noise of spread 0.01 around 0.3, outliers ±0.5 at fixed places
        // (corners and edges included): every one found, nothing else touched.
        let (w, h) = (64, 48);
        let n = noise(w, h, 17);
        let mut p = Plane::from_fn(w, h, |x, y| 0.3 + 0.02 * (n.get(x, y) - 0.5)).unwrap();
        let clean = p.clone();
        let spots = [(0, 0), (63, 47), (0, 20), (31, 0), (10, 10), (40, 30), (63, 5), (20, 47)];
        for (i, &(x, y)) in spots.iter().enumerate() {
            p.row_mut(y)[x] += if i % 2 == 0 { 0.5 } else { -0.25 };
        }
        p.row_mut(25)[25] = f32::NAN;
        let mut r = Raster::new(vec![p], Layout::Gray, Encoding::Linear).unwrap();
        r = Hotpixel::new(5.0).unwrap().apply(r).unwrap();
        let note = &r.metadata.notes[0];
        assert_eq!(note.value, NoteValue::Number { value: spots.len() as f64 + 1.0, unit: "" });
        let out = &r.planes()[0];
        for y in 0..h {
            for x in 0..w {
                let planted = spots.contains(&(x, y)) || (x, y) == (25, 25);
                if planted {
                    assert!((out.get(x, y) - 0.3).abs() < 0.011, "({x}, {y}) = {}", out.get(x, y));
                } else {
                    assert_eq!(out.get(x, y), clean.get(x, y), "({x}, {y}) touched");
                }
            }
        }
    }

    #[test]
    fn a_master_dark_marks_hot_pixels_the_image_hides() {
        // Hot pixels at 0.05 above the dark's noise (spread 0.002): in the image
        // (noise spread 0.02) they are within 5σ, so only the dark finds them.
        let (w, h) = (40, 30);
        let (nd, ni) = (noise(w, h, 5), noise(w, h, 9));
        let hot = [(3, 4), (20, 15), (39, 29)];
        let dark = Plane::from_fn(w, h, |x, y| {
            0.01 + 0.004 * (nd.get(x, y) - 0.5) + if hot.contains(&(x, y)) { 0.05 } else { 0.0 }
        })
        .unwrap();
        let image = Plane::from_fn(w, h, |x, y| 0.4 + 0.04 * (ni.get(x, y) - 0.5)).unwrap();
        let gray = |p: &Plane| Raster::new(vec![p.clone()], Layout::Gray, Encoding::Linear).unwrap();
        let plain = Hotpixel::new(5.0).unwrap().apply(gray(&image)).unwrap();
        assert_eq!(plain.metadata.notes[0].value, NoteValue::Number { value: 0.0, unit: "" });
        let with_dark = Hotpixel::new(5.0).unwrap().with_dark("d.tif".into(), vec![dark.clone()]);
        let out = with_dark.apply(gray(&image)).unwrap();
        assert_eq!(out.metadata.notes[0].value, NoteValue::Number { value: hot.len() as f64, unit: "" });
        let median = neighbour_median(&image);
        for y in 0..h {
            for x in 0..w {
                let want = if hot.contains(&(x, y)) { median.get(x, y) } else { image.get(x, y) };
                assert_eq!(out.planes()[0].get(x, y), want, "({x}, {y})");
            }
        }
        // A dark of another size is refused, naming it.
        let small = Plane::filled(4, 3, 0.0).unwrap();
        let e = Hotpixel::new(5.0).unwrap().with_dark("d.tif".into(), vec![small]).apply(gray(&image));
        assert!(e.unwrap_err().to_string().contains("dark frame d.tif"));
    }

    #[test]
    fn tiny_and_flat_planes() {
        let mut one = Plane::filled(1, 1, 0.5).unwrap();
        assert_eq!(repair_plane(&mut one, 5.0, None), 0);
        // MAD 0; mean deviation 0.5/9, σ = 0.0696, 5σ = 0.35 < 0.5: repaired.
        let mut row = Plane::filled(9, 1, 0.5).unwrap();
        row.row_mut(0)[4] = 1.0;
        assert_eq!(repair_plane(&mut row, 5.0, None), 1);
        assert_eq!(row.row(0)[4], 0.5);
        // The fallback by hand: |d| = 0 (×6), 1, 1: MAD 0, mean 1/4, σ = √(π/2)/4.
        let sigma = robust_sigma(&[0.0, 0.0, 1.0, 0.0, 0.0, -1.0, 0.0, 0.0]);
        assert!((sigma - 0.25 * (std::f64::consts::PI / 2.0).sqrt()).abs() < 1e-12);
        assert!(Hotpixel::new(0.0).is_err());
    }
}
