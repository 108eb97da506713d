//! `bin`: N×N pixel binning by sum or mean (in f64, written back as f32).

use crate::error::{Error, ParamError};
use crate::ops::params::{Kind, OpSpec, ParamSpec};
use crate::ops::{Domain, Operator};
use crate::raster::{Plane, Raster, SampleType};
use crate::tile;

/// Largest bin size accepted.
pub const MAX_BIN: usize = 1024;

/// How a bin's samples are combined.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum BinMode {
    Sum,
    Mean,
}

/// The text of `pumice ops bin`, also the doc of [`Bin`].
macro_rules! bin_doc {
    () => {
        "N×N binning: each output pixel combines an N×N block of input pixels.

```text
sum:  out(X, Y) = Σ_{0≤i,j<N} in(N·X + i, N·Y + j)
mean: out(X, Y) = sum / (number of pixels in the block)
output size: floor(W/N) × floor(H/N)  (partial=drop)  or  ceil(W/N) × ceil(H/N)  (partial=include)
```

Sums are accumulated in f64 and rounded to f32 once, so they never wrap or
saturate. With mode=sum on integer data the values exceed full scale (up to N²):
the step marks the result as 32-bit float, so TIFF and OpenEXR outputs keep the
sums exactly; an integer-only format (PNG, JPEG) would clip them, so write TIFF
or EXR, or use mode=mean, which stays in range and keeps the source depth.
A partial last column or row (W or H not a multiple of N): dropped by default
(every output pixel then holds the same number of input pixels, like numpy's
reshape-and-sum); partial=include keeps it, its mean over the pixels present and
its sum of them only (so edge sums hold less light).
Alpha: alpha is averaged; colour is weighted by alpha (premultiplied sums, so
transparent pixels lend no colour): mean = Σ c·a / Σ a, sum = mean × pixels in the
block (0 where Σ a = 0). The resolution (pixel density) is divided by N.
Domain: linear light (sums of light).
Source: common practice in astronomical and microscope cameras (on-chip or
software binning); the definition of the block sum."
    };
}

#[doc = bin_doc!()]
#[derive(Debug)]
pub struct Bin {
    size: usize,
    mode: BinMode,
    include_partial: bool,
}

impl Bin {
    pub fn new(size: usize, mode: BinMode, include_partial: bool) -> Result<Bin, ParamError> {
        if !(1..=MAX_BIN).contains(&size) {
            return Err(ParamError::new(format!(
                "bin size must be a whole number in 1..={MAX_BIN}, got {size}"
            )));
        }
        Ok(Bin { size, mode, include_partial })
    }

    fn out_len(&self, n: usize) -> usize {
        if self.include_partial { n.div_ceil(self.size) } else { n / self.size }
    }
}

impl Operator for Bin {
    fn domain(&self) -> Domain {
        Domain::Linear
    }

    fn output_size(&self, width: usize, height: usize) -> Result<(usize, usize), Error> {
        let (w, h) = (self.out_len(width), self.out_len(height));
        if w == 0 || h == 0 {
            return Err(Error::Step {
                step: "bin".into(),
                message: format!(
                    "a {width}×{height} image holds no whole {n}×{n} block; use a smaller size or partial=include",
                    n = self.size
                ),
            });
        }
        Ok((w, h))
    }

    fn apply(&self, raster: Raster) -> Result<Raster, Error> {
        let (ow, oh) = self.output_size(raster.width(), raster.height())?;
        let layout = raster.layout();
        let colour = layout.colour_channels();
        let alpha = raster.alpha();
        let planes = raster
            .planes()
            .iter()
            .enumerate()
            .map(|(i, p)| {
                let weight = if i < colour { alpha } else { None };
                let mode = if i < colour { self.mode } else { BinMode::Mean };
                bin_plane(p, weight, self.size, (ow, oh), mode)
            })
            .collect();
        let sum = self.mode == BinMode::Sum && self.size > 1;
        let size = self.size as f64;
        let mut out = raster.with_planes(planes, layout)?;
        if sum {
            out.metadata.source_sample = Some(SampleType::F32);
        }
        if let Some(res) = out.metadata.resolution.as_mut() {
            res.x /= size;
            res.y /= size;
        }
        Ok(out)
    }
}

/// The binned plane: block sums of `src` (weighted by `weight` when given) in
/// f64, combined by `mode`.
fn bin_plane(
    src: &Plane,
    weight: Option<&Plane>,
    n: usize,
    (ow, oh): (usize, usize),
    mode: BinMode,
) -> Plane {
    let (w, h) = (src.width(), src.height());
    let mut out = Plane::zeros(ow, oh).unwrap_or_else(|_| unreachable!("size checked by output_size"));
    tile::for_each_band(&mut out, tile::band_rows(ow, 0), |oy0, band| {
        let mut sum = vec![0.0f64; ow];
        let mut wsum = vec![0.0f64; ow];
        let mut count = vec![0usize; ow];
        let cols = (ow * n).min(w);
        for (j, out_row) in band.chunks_exact_mut(ow).enumerate() {
            sum.fill(0.0);
            wsum.fill(0.0);
            count.fill(0);
            let y0 = (oy0 + j) * n;
            for y in y0..(y0 + n).min(h) {
                let row = &src.row(y)[..cols];
                match weight {
                    None => {
                        for (x, &v) in row.iter().enumerate() {
                            sum[x / n] += f64::from(v);
                            count[x / n] += 1;
                        }
                    }
                    Some(a) => {
                        for (x, (&v, &av)) in row.iter().zip(a.row(y)).enumerate() {
                            sum[x / n] += f64::from(v) * f64::from(av);
                            wsum[x / n] += f64::from(av);
                            count[x / n] += 1;
                        }
                    }
                }
            }
            for (x, o) in out_row.iter_mut().enumerate() {
                let c = count[x] as f64;
                let mean = match weight {
                    None => sum[x] / c,
                    Some(_) if wsum[x] > 0.0 => sum[x] / wsum[x],
                    Some(_) => 0.0,
                };
                *o = match (mode, weight) {
                    (BinMode::Sum, None) => sum[x],
                    (BinMode::Sum, Some(_)) => mean * c,
                    (BinMode::Mean, _) => mean,
                } as f32;
            }
        }
    });
    out
}

pub static BIN: OpSpec = OpSpec {
    name: "bin",
    family: "science",
    summary: "N×N binning: sum or mean of each block (smaller image, less noise)",
    doc: bin_doc!(),
    main: Some("size"),
    params: &[
        ParamSpec {
            name: "size",
            kind: Kind::int(1.0, MAX_BIN as f64),
            default: Some("2"),
            help: "block size N: each output pixel combines N×N input pixels",
        },
        ParamSpec {
            name: "mode",
            kind: Kind::Choice(&["sum", "mean"]),
            default: Some("mean"),
            help: "sum (values up to N² × full scale; written as float) or mean",
        },
        ParamSpec {
            name: "partial",
            kind: Kind::Choice(&["drop", "include"]),
            default: Some("drop"),
            help: "a partial last column or row: drop it, or include it (over the pixels present)",
        },
    ],
    build: |a| {
        let mode = if a.choice("mode")? == "sum" { BinMode::Sum } else { BinMode::Mean };
        Ok(Box::new(Bin::new(a.int("size")? as usize, mode, a.choice("partial")? == "include")?))
    },
};

#[cfg(test)]
mod tests {
    //! Edge cases decided here: size 1 (identity), size larger than the image
    //! (refused with drop, one pixel with include), partial blocks, alpha.
    //! Reference: hand sums.
    use super::*;
    use crate::raster::{Encoding, Layout};

    fn gray(w: usize, h: usize, f: impl FnMut(usize, usize) -> f32) -> Raster {
        Raster::new(vec![Plane::from_fn(w, h, f).unwrap()], Layout::Gray, Encoding::Linear).unwrap()
    }

    #[test]
    fn sums_and_means_by_hand() {
        // 5×3 of x + 10y; 2×2 blocks: (0,1,10,11) = 22, (2,3,12,13) = 30.
        let r = gray(5, 3, |x, y| (x + 10 * y) as f32);
        let s = Bin::new(2, BinMode::Sum, false).unwrap().apply(r.clone()).unwrap();
        assert_eq!((s.width(), s.height()), (2, 1));
        assert_eq!(s.planes()[0].as_slice(), &[22.0, 30.0]);
        assert_eq!(s.metadata.source_sample, Some(SampleType::F32));
        let m = Bin::new(2, BinMode::Mean, true).unwrap().apply(r.clone()).unwrap();
        assert_eq!((m.width(), m.height()), (3, 2));
        // Partial blocks: column 4 rows 0–1 = (4 + 14)/2; row 2 = (20 + 21)/2; corner = 24.
        assert_eq!(m.planes()[0].as_slice(), &[5.5, 7.5, 9.0, 20.5, 22.5, 24.0]);
        assert_eq!(Bin::new(1, BinMode::Sum, false).unwrap().apply(r.clone()).unwrap().planes(), r.planes());
        assert!(Bin::new(6, BinMode::Sum, false).unwrap().output_size(5, 3).is_err());
        assert_eq!(Bin::new(6, BinMode::Sum, true).unwrap().output_size(5, 3).unwrap(), (1, 1));
        assert!(Bin::new(0, BinMode::Sum, false).is_err());
    }

    #[test]
    fn sums_of_16_bit_codes_do_not_saturate() {
        // 64×64 full-scale samples sum to 4096 exactly (f64 sum, exact in f32).
        let r = gray(64, 64, |_, _| 1.0);
        let s = Bin::new(64, BinMode::Sum, false).unwrap().apply(r).unwrap();
        assert_eq!(s.planes()[0].as_slice(), &[4096.0]);
    }

    #[test]
    fn transparent_pixels_lend_no_colour() {
        let c = Plane::from_vec(2, 1, vec![1.0, 0.25]).unwrap();
        let a = Plane::from_vec(2, 1, vec![0.0, 1.0]).unwrap();
        let r = Raster::new(vec![c, a], Layout::GrayAlpha, Encoding::Linear).unwrap();
        let m = Bin::new(2, BinMode::Mean, true).unwrap().apply(r.clone()).unwrap();
        assert_eq!(m.planes()[0].as_slice(), &[0.25]);
        assert_eq!(m.planes()[1].as_slice(), &[0.5]);
        let s = Bin::new(2, BinMode::Sum, true).unwrap().apply(r).unwrap();
        assert_eq!(s.planes()[0].as_slice(), &[0.5]);
    }
}
