//! `resize`: separable resampling to a new size, antialiased when reducing.

use super::kernels::{FILTER_NAMES, Filter, Weights};
use super::{Anchor, Rect};
use crate::error::{Error, ParamError};
use crate::ops::filter::rows;
use crate::ops::params::{Args, Kind, OpSpec, ParamSpec};
use crate::ops::{Domain, Operator, SampleMap, apply_sample_maps, filter_planes};
use crate::raster::{Plane, Raster};
use crate::tile;

/// How a target box is filled when both width and height are given (the CSS
/// `object-fit` words).
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Fit {
    /// Fit inside the box, keeping the aspect ratio (the result may be smaller on one side).
    Contain,
    /// Cover the box, keeping the aspect ratio, then crop the overflow centred.
    Cover,
    /// Stretch to the box exactly.
    Fill,
}

/// What size to make.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum Target {
    Scale(f64),
    Width(usize),
    Height(usize),
    Box { width: usize, height: usize, fit: Fit },
}

/// The text of `pumice ops resize`, also the doc of [`Resize`].
macro_rules! resize_doc {
    () => {
        "Resamples the image to a new size.

```text
target:  width=W | height=H (the other side keeps the aspect ratio) | scale=F (0.5 or 50%)
         | width=W,height=H with fit=contain (inside the box) | cover (fill it, crop the
           overflow centred) | fill (stretch)
out(i)  = Σⱼ w(i, j) · in(j),  separable: columns, then rows (or rows first when cheaper)
w(i, j) = k((j + ½ − c) / s) / Σⱼ k(…),  c = (i + ½)·in/out,  s = max(in/out, 1)
```

Reducing widens the kernel by the reduction factor s (antialiasing); the
weights are normalised, so a constant image stays constant. Taps beyond the
edge are dropped and the rest renormalised.
Filters: nearest (no mixing), box (area average), bilinear, bicubic
(Catmull–Rom; Keys 1981, a = −½), mitchell (Mitchell & Netravali 1988,
B = C = ⅓), lanczos3 (default: the sharpest of these with little ringing, the
common choice for photographs).
Domain: linear light (nearest: any); alpha is premultiplied while mixing.
Resolution metadata is scaled with the image, so the physical size is kept.
Source: Mitchell & Netravali, SIGGRAPH '88; Keys, IEEE Trans. ASSP 29(6), 1981;
common practice for the windowing."
    };
}

#[doc = resize_doc!()]
#[derive(Debug)]
pub struct Resize {
    target: Target,
    filter: Filter,
}

impl Resize {
    pub fn new(target: Target, filter: Filter) -> Resize {
        Resize { target, filter }
    }

    /// The size the image is resampled to, and the centred crop that follows
    /// (only for `fit=cover`), for a `w × h` input.
    fn plan(&self, w: usize, h: usize) -> ((usize, usize), Option<Rect>) {
        let side = |v: f64| (v.round() as usize).max(1);
        let (wf, hf) = (w as f64, h as f64);
        match self.target {
            Target::Scale(s) => ((side(wf * s), side(hf * s)), None),
            Target::Width(tw) => ((tw, side(hf * tw as f64 / wf)), None),
            Target::Height(th) => ((side(wf * th as f64 / hf), th), None),
            Target::Box { width, height, fit: Fit::Fill } => ((width, height), None),
            Target::Box { width, height, fit: Fit::Contain } => {
                let f = (width as f64 / wf).min(height as f64 / hf);
                ((side(wf * f).min(width), side(hf * f).min(height)), None)
            }
            Target::Box { width, height, fit: Fit::Cover } => {
                let f = (width as f64 / wf).max(height as f64 / hf);
                let (rw, rh) = (side(wf * f).max(width), side(hf * f).max(height));
                let (x, y) =
                    Anchor::from_name("center").map(|a| a.offset(rw - width, rh - height)).unwrap_or((0, 0));
                ((rw, rh), Some(Rect { x, y, width, height }))
            }
        }
    }
}

/// Resampling of `w × h` planes to `out_w × out_h`, with the weights of both
/// passes computed once for all the planes of an image.
pub struct Resampler {
    wx: Weights,
    wy: Weights,
    w: usize,
    h: usize,
    out_w: usize,
    out_h: usize,
}

impl Resampler {
    pub fn new(w: usize, h: usize, out_w: usize, out_h: usize, filter: Filter) -> Resampler {
        let (wx, wy) = (Weights::new(w, out_w, filter), Weights::new(h, out_h, filter));
        Resampler { wx, wy, w, h, out_w, out_h }
    }

    /// Whether rows are resampled first (fewer multiply-adds that way, or as
    /// many): then each source sample is read once, by [`horizontal`].
    fn rows_first(&self) -> bool {
        let (w, h, out_w, out_h) = (self.w, self.h, self.out_w, self.out_h);
        // Multiply-adds of each order.
        let horizontal_first = h * out_w * self.wx.taps + out_h * out_w * self.wy.taps;
        let vertical_first = out_h * w * self.wy.taps + out_h * out_w * self.wx.taps;
        horizontal_first <= vertical_first
    }

    /// Resamples one plane (of the size given to [`Resampler::new`]), taking
    /// the cheaper order of the two passes. `maps` (point functions, in order)
    /// are applied to the source samples as they are read; they must be empty
    /// unless rows go first ([`Resampler::rows_first`]).
    pub fn plane(&self, src: &Plane, maps: &[&dyn SampleMap]) -> Result<Plane, Error> {
        let (wx, wy, out_w, out_h) = (&self.wx, &self.wy, self.out_w, self.out_h);
        if self.rows_first() {
            rows_then_columns(src, wx, wy, out_w, out_h, maps)
        } else {
            debug_assert!(maps.is_empty(), "point functions are applied only by the row pass");
            let mid = vertical(src, wy, out_h)?;
            horizontal(&mid, wx, out_w)
        }
    }
}

/// Resamples rows, then columns, without an intermediate plane: each
/// parallel piece of output rows keeps the row-resampled source rows it reads
/// in a small ring (a few [`rows::LANES`]-row groups, in cache) and makes each
/// group when its first output row needs it. Against resampling every row into
/// a plane first, this saves that plane's allocation, its page faults, and a
/// write and a read of it (36 MB on a 4000×3000 RGB → 1000×750 reduction). A
/// piece recomputes at most the rows its first output row reaches back to,
/// plus a group's alignment. The arithmetic is that of [`horizontal`] then
/// [`vertical`], sample for sample, so the result is the same to the bit.
fn rows_then_columns(
    src: &Plane,
    wx: &Weights,
    wy: &Weights,
    out_w: usize,
    out_h: usize,
    maps: &[&dyn SampleMap],
) -> Result<Plane, Error> {
    use rayon::prelude::*;
    use rows::LANES;
    let (w, h) = (src.width(), src.height());
    let mut out = Plane::for_overwrite(out_w, out_h)?;
    // Two pieces per thread, so a thread slowed by the host holds up less.
    let piece = out_h.div_ceil(2 * rayon::current_num_threads()).max(1);
    // Groups in the ring: enough for any output row's taps wherever they fall
    // against the group boundaries.
    let slots = wy.taps.div_ceil(LANES) + 1;
    let group_len = LANES * out_w;
    out.as_mut_slice().par_chunks_mut(piece * out_w).enumerate().for_each(|(p, band)| {
        let y0 = p * piece;
        let first = wy.start[y0];
        let mut lanes = vec![[0.0f32; LANES]; w];
        let mut resampled = vec![[0.0f32; LANES]; out_w];
        let mut ring = vec![0.0f32; slots * group_len];
        // Groups of source rows first + LANES·g.. made so far.
        let mut made = 0;
        for (i, row) in band.chunks_exact_mut(out_w).enumerate() {
            let y = y0 + i;
            let end = wy.start[y] + wy.count[y];
            while first + made * LANES < end {
                let g0 = first + made * LANES;
                let n = LANES.min(h - g0);
                let slot = &mut ring[(made % slots) * group_len..][..n * out_w];
                read_group(&src.as_slice()[g0 * w..(g0 + n) * w], w, &mut lanes, maps);
                rows::weighted_gather_lanes(
                    &mut resampled,
                    &lanes,
                    &wx.start,
                    &wx.count,
                    &wx.weights,
                    wx.taps,
                );
                rows::deinterleave(&resampled, slot, out_w);
                made += 1;
            }
            let ring = &ring;
            let source_row = |r: usize| {
                let (g, k) = ((r - first) / LANES, (r - first) % LANES);
                &ring[(g % slots) * group_len + k * out_w..][..out_w]
            };
            let taps: Vec<&[f32]> = (wy.start[y]..end).map(source_row).collect();
            rows::weighted_rows(row, wy.of(y), &taps);
        }
    });
    Ok(out)
}

/// Interleaves a group of source rows (`w` samples each, at most
/// [`rows::LANES`]) into `lanes` with `maps` applied: a first map that is a
/// table lookup runs as the samples are interleaved, the rest on the lanes.
fn read_group(rows: &[f32], w: usize, lanes: &mut [[f32; rows::LANES]], maps: &[&dyn SampleMap]) {
    let rest = match maps.split_first() {
        Some((first, rest)) if let Some(table) = first.code_table() => {
            rows::interleave_through_table(rows, w, lanes, table);
            rest
        }
        _ => {
            rows::interleave(rows, w, lanes);
            maps
        }
    };
    // Lanes past the last row (in a last, short group) hold stale values;
    // mapping them is harmless, as they are never written out.
    rest.iter().for_each(|m| m.map(lanes.as_flattened_mut()));
}

/// Resamples every row to `out_w` samples, [`rows::LANES`] rows at a time:
/// they are interleaved into lane vectors, resampled together, and written
/// back (the second pass when columns go first).
fn horizontal(src: &Plane, wx: &Weights, out_w: usize) -> Result<Plane, Error> {
    use rows::LANES;
    let w = src.width();
    let mut out = Plane::for_overwrite(out_w, src.height())?;
    tile::for_each_band(&mut out, tile::band_rows(out_w, 0).next_multiple_of(LANES), |y0, band| {
        let mut lanes = vec![[0.0f32; LANES]; w];
        let mut resampled = vec![[0.0f32; LANES]; out_w];
        for (g, group) in band.chunks_mut(out_w * LANES).enumerate() {
            let y = y0 + g * LANES;
            let n = group.len() / out_w;
            rows::interleave(&src.as_slice()[y * w..(y + n) * w], w, &mut lanes);
            rows::weighted_gather_lanes(&mut resampled, &lanes, &wx.start, &wx.count, &wx.weights, wx.taps);
            rows::deinterleave(&resampled, group, out_w);
        }
    });
    Ok(out)
}

/// Resamples every column to `out_h` samples, as weighted sums of whole rows
/// (one pass per output row, see [`rows::weighted_rows`], which writes every
/// sample of the row, so the plane needs no clearing first).
fn vertical(src: &Plane, wy: &Weights, out_h: usize) -> Result<Plane, Error> {
    let w = src.width();
    let mut out = Plane::for_overwrite(w, out_h)?;
    tile::for_each_band(&mut out, tile::band_rows(w, 0), |y0, band| {
        let mut taps: Vec<&[f32]> = Vec::with_capacity(wy.taps);
        for (i, row) in band.chunks_exact_mut(w).enumerate() {
            let y = y0 + i;
            let weights = wy.of(y);
            taps.clear();
            taps.extend((0..weights.len()).map(|k| src.row(wy.start[y] + k)));
            rows::weighted_rows(row, weights, &taps);
        }
    });
    Ok(out)
}

impl Operator for Resize {
    fn domain(&self) -> Domain {
        if self.filter == Filter::Nearest { Domain::Any } else { Domain::Linear }
    }

    fn moves_samples_only(&self) -> bool {
        self.filter == Filter::Nearest
    }

    fn output_size(&self, width: usize, height: usize) -> Result<(usize, usize), Error> {
        let ((w, h), crop) = self.plan(width, height);
        Ok(crop.map_or((w, h), |r| (r.width, r.height)))
    }

    fn apply(&self, raster: Raster) -> Result<Raster, Error> {
        self.resize(raster, &[])
    }

    fn apply_after_maps(&self, raster: Raster, maps: &[&dyn SampleMap]) -> Result<Raster, Error> {
        self.resize(raster, maps)
    }
}

impl Resize {
    /// Resizes the raster as it is after `maps`. Pending point functions (the
    /// conversion to linear light, for one) are applied as the row pass reads
    /// its source when rows go first and there is no alpha to premultiply
    /// after them; otherwise in a pass of their own first.
    fn resize(&self, raster: Raster, maps: &[&dyn SampleMap]) -> Result<Raster, Error> {
        let (w, h) = (raster.width(), raster.height());
        let ((rw, rh), crop) = self.plan(w, h);
        let mut meta = raster.metadata.clone();
        // Density scales with the image, so width / density (the physical size) is kept.
        if let Some(r) = meta.resolution.as_mut() {
            r.x *= rw as f64 / w as f64;
            r.y *= rh as f64 / h as f64;
        }
        let filter = self.filter;
        let resampler = Resampler::new(w, h, rw, rh, filter);
        let fuses = filter != Filter::Nearest && !raster.layout().has_alpha() && resampler.rows_first();
        let (raster, maps) = if fuses { (raster, maps) } else { (apply_sample_maps(raster, maps), &[][..]) };
        let resized = if filter == Filter::Nearest {
            let layout = raster.layout();
            let planes =
                raster.planes().iter().map(|p| resampler.plane(p, maps)).collect::<Result<_, _>>()?;
            raster.with_planes(planes, layout)?
        } else {
            filter_planes(raster, |p| resampler.plane(p, maps))?
        };
        let mut out = match crop {
            Some(rect) => {
                let layout = resized.layout();
                let planes = resized.planes().iter().map(|p| rect.cut(p)).collect::<Result<Vec<_>, _>>()?;
                resized.with_planes(planes, layout)?
            }
            None => resized,
        };
        out.metadata = meta;
        Ok(out)
    }
}

pub static RESIZE: OpSpec = OpSpec {
    name: "resize",
    family: "geometry",
    summary: "resample to a width, height, scale or box (contain, cover, fill), antialiased",
    doc: resize_doc!(),
    main: None,
    params: &[
        ParamSpec {
            name: "width",
            kind: Kind::int(0.0, 1e6),
            default: Some("0"),
            help: "target width, pixels (0: from height)",
        },
        ParamSpec {
            name: "height",
            kind: Kind::int(0.0, 1e6),
            default: Some("0"),
            help: "target height, pixels (0: from width)",
        },
        ParamSpec {
            name: "scale",
            kind: Kind::Ratio { max: 100.0 },
            default: Some("1"),
            help: "scale factor (0.5 or 50%) when no width or height is given",
        },
        ParamSpec {
            name: "fit",
            kind: Kind::Choice(&["contain", "cover", "fill"]),
            default: Some("contain"),
            help: "with width and height: fit inside, cover and crop, or stretch",
        },
        ParamSpec {
            name: "filter",
            kind: Kind::Choice(&FILTER_NAMES),
            default: Some("lanczos3"),
            help: "resampling filter",
        },
    ],
    build: build_resize,
};

fn build_resize(a: &Args) -> Result<Box<dyn Operator>, ParamError> {
    let (w, h) = (a.int("width")? as usize, a.int("height")? as usize);
    let scale = a.number("scale")?;
    let fit = match a.choice("fit")? {
        "cover" => Fit::Cover,
        "fill" => Fit::Fill,
        _ => Fit::Contain,
    };
    let target = match (w, h) {
        (0, 0) => Target::Scale(scale),
        _ if scale != 1.0 => return Err(ParamError::new("give either scale or width/height, not both")),
        (w, 0) => Target::Width(w),
        (0, h) => Target::Height(h),
        (width, height) => Target::Box { width, height, fit },
    };
    let filter = Filter::from_name(a.choice("filter")?).ok_or_else(|| {
        ParamError::new(format!("unknown filter; expected one of {}", FILTER_NAMES.join(", ")))
    })?;
    Ok(Box::new(Resize::new(target, filter)))
}

#[cfg(test)]
mod tests {
    //! Edge cases: 1×1 in and out, same size, extreme aspect, cover crop,
    //! constant images, resolution scaling, scale with width refused.
    use super::*;
    use crate::raster::{Encoding, Layout, Resolution, ResolutionUnit};

    fn gray(w: usize, h: usize, f: impl FnMut(usize, usize) -> f32) -> Raster {
        Raster::new(vec![Plane::from_fn(w, h, f).unwrap()], Layout::Gray, Encoding::Linear).unwrap()
    }

    fn resize(text: &str, r: Raster) -> Raster {
        crate::pipeline::Step::parse(text).unwrap().op.apply(r).unwrap()
    }

    #[test]
    fn sizes_follow_the_target() {
        let r = || gray(40, 30, |x, y| (x + y) as f32);
        assert_eq!(resize("resize:width=20", r()).planes()[0].height(), 15);
        assert_eq!(resize("resize:height=3", r()).planes()[0].width(), 4);
        assert_eq!(resize("resize:scale=50%", r()).width(), 20);
        let contain = resize("resize:width=10,height=10", r());
        assert_eq!((contain.width(), contain.height()), (10, 8));
        let cover = resize("resize:width=10,height=10,fit=cover", r());
        assert_eq!((cover.width(), cover.height()), (10, 10));
        let fill = resize("resize:width=7,height=50,fit=fill", r());
        assert_eq!((fill.width(), fill.height()), (7, 50));
        assert!(crate::pipeline::Step::parse("resize:width=10,scale=2").is_err());
        let tiny = resize("resize:width=1,height=1,fit=fill", r());
        assert_eq!((tiny.width(), tiny.height()), (1, 1));
    }

    #[test]
    fn constant_images_stay_constant_and_same_size_is_identity() {
        for f in FILTER_NAMES {
            let out =
                resize(&format!("resize:width=13,height=29,fit=fill,filter={f}"), gray(40, 30, |_, _| 0.25));
            assert!(out.planes()[0].as_slice().iter().all(|v| (v - 0.25).abs() < 1e-6), "{f}");
            if f != "mitchell" {
                let src = gray(9, 7, |x, y| (x * 7 + y * 3) as f32 / 100.0);
                let same = resize(&format!("resize:scale=1,filter={f}"), src.clone());
                for (a, b) in same.planes()[0].as_slice().iter().zip(src.planes()[0].as_slice()) {
                    assert!((a - b).abs() < 1e-6, "{f}: {a} vs {b}");
                }
            }
        }
    }

    #[test]
    fn reused_buffers_holding_nan_leave_no_trace() {
        // Both passes write into planes that may be recycled buffers with
        // stale samples (Plane::for_overwrite); a scope keeps planes this large.
        let _reuse = crate::raster::recycle::Scope::open();
        let (w, h) = (1100, 1000);
        for (sw, sh) in [(2 * w, 2 * h), (2 * w, h), (w, 2 * h)] {
            drop(Plane::filled(sw, sh, f32::NAN).unwrap());
        }
        let out = resize("resize:scale=2,filter=lanczos3", gray(w, h, |_, _| 0.25));
        assert!(out.planes()[0].as_slice().iter().all(|v| (v - 0.25).abs() < 1e-6));
    }

    #[test]
    fn the_ring_of_resampled_rows_equals_an_intermediate_plane() {
        // Reductions (many taps), enlargements (a tap group serves several
        // output rows), a height that leaves a short last group, one output
        // row, and pieces of one row; 1 and 3 threads split the rows differently.
        let src = Plane::from_fn(53, 47, |x, y| ((x * 7 + y * 11) % 23) as f32 / 22.0 - 0.3).unwrap();
        let cases = [
            (20, 11, Filter::Lanczos3),
            (53, 200, Filter::Bicubic),
            (9, 3, Filter::Mitchell),
            (60, 1, Filter::Bilinear),
            (100, 94, Filter::Box),
            (53, 47, Filter::Lanczos3),
        ];
        for threads in [1, 3] {
            let pool = rayon::ThreadPoolBuilder::new().num_threads(threads).build().unwrap();
            for (out_w, out_h, filter) in cases {
                let (wx, wy) = (Weights::new(53, out_w, filter), Weights::new(47, out_h, filter));
                let bits = |p: &Plane| p.as_slice().iter().map(|v| v.to_bits()).collect::<Vec<_>>();
                let ring = |maps: &[&dyn SampleMap]| {
                    bits(&pool.install(|| rows_then_columns(&src, &wx, &wy, out_w, out_h, maps).unwrap()))
                };
                let two_passes = |maps: &[&dyn SampleMap]| {
                    let mapped = apply_sample_maps(
                        Raster::new(vec![src.clone()], Layout::Gray, Encoding::Srgb).unwrap(),
                        maps,
                    );
                    bits(
                        &vertical(&horizontal(&mapped.planes()[0], &wx, out_w).unwrap(), &wy, out_h).unwrap(),
                    )
                };
                // A plain map; a table map (looked up while interleaving), then another.
                let plain: [&dyn SampleMap; 1] = [&SquarePlus];
                let tabled: [&dyn SampleMap; 2] = [&SrgbCodes, &SquarePlus];
                for maps in [&plain[..], &tabled[..]] {
                    let what = format!("{out_w}×{out_h} {filter:?}, {} maps, {threads} threads", maps.len());
                    assert_eq!(ring(maps), two_passes(maps), "{what}");
                }
            }
        }
    }

    /// sRGB decoding of 8-bit codes by table, offering its table.
    struct SrgbCodes;

    impl SampleMap for SrgbCodes {
        fn map(&self, samples: &mut [f32]) {
            crate::color::srgb::decode_in_place(samples, Some(255));
        }

        fn code_table(&self) -> Option<crate::ops::CodeTable> {
            crate::color::srgb::decode_code_table(255)
        }
    }

    /// A point function for the tests: v ↦ v² + 0.1.
    struct SquarePlus;

    impl SampleMap for SquarePlus {
        fn map(&self, samples: &mut [f32]) {
            samples.iter_mut().for_each(|v| *v = *v * *v + 0.1);
        }
    }

    #[test]
    fn point_functions_applied_while_reading_equal_a_pass_of_their_own() {
        // Rows first (fused: the maps run on the interleaved lanes, a short
        // last group of rows included), columns first, with alpha, and nearest.
        let planes = |n: usize| {
            (0..n)
                .map(|c| Plane::from_fn(37, 29, |x, y| ((x * 5 + y * 3 + c) % 17) as f32 / 16.0).unwrap())
                .collect()
        };
        let cases = [
            ("resize:width=11,height=20,fit=fill", Layout::Rgb),
            ("resize:width=90,height=13,fit=fill,filter=bicubic", Layout::Rgb),
            ("resize:width=12,height=70,fit=fill", Layout::Rgb),
            ("resize:width=11,height=9,fit=fill", Layout::Rgba),
            ("resize:width=11,height=9,fit=fill,filter=nearest", Layout::Rgb),
        ];
        assert!(Resampler::new(37, 29, 11, 20, Filter::Lanczos3).rows_first());
        assert!(!Resampler::new(37, 29, 90, 13, Filter::Bicubic).rows_first());
        for (step, layout) in cases {
            let r = Raster::new(planes(layout.channels()), layout, Encoding::Linear).unwrap();
            let op = crate::pipeline::Step::parse(step).unwrap().op;
            let maps: [&dyn SampleMap; 2] = [&SquarePlus, &SquarePlus];
            let fused = op.apply_after_maps(r.clone(), &maps).unwrap();
            let separate = op.apply(apply_sample_maps(r, &maps)).unwrap();
            for (a, b) in fused.planes().iter().zip(separate.planes()) {
                assert!(
                    a.as_slice().iter().zip(b.as_slice()).all(|(x, y)| x.to_bits() == y.to_bits()),
                    "{step}"
                );
            }
        }
    }

    #[test]
    fn nearest_doubling_then_halving_returns_the_original() {
        let src = gray(7, 5, |x, y| (x * 10 + y) as f32);
        let up = resize("resize:scale=2,filter=nearest", src.clone());
        let down = resize("resize:scale=0.5,filter=nearest", up);
        assert_eq!(down.planes(), src.planes());
        // Box reduction of a nearest doubling also returns it exactly.
        let up = resize("resize:scale=2,filter=nearest", src.clone());
        assert_eq!(resize("resize:scale=0.5,filter=box", up).planes(), src.planes());
    }

    #[test]
    fn resolution_keeps_the_physical_size() {
        let mut r = gray(40, 30, |_, _| 0.0);
        r.metadata.resolution = Some(Resolution { x: 300.0, y: 300.0, unit: ResolutionUnit::Inch });
        let out = resize("resize:width=20", r);
        assert_eq!(out.metadata.resolution.unwrap().x, 150.0);
    }
}
