//! Operators: one module per family. Each operator is a small struct built from
//! checked parameters, declaring the domain its maths is right in. Operators
//! transform rasters; they do not read files, print or know about the command line.

pub mod colour;
pub mod edge;
pub mod filter;
pub mod geometry;
pub mod histogram;
pub mod morph;
pub mod params;
pub mod scan;
pub mod science;
pub mod threshold;
pub mod tone;

use crate::error::Error;
use crate::raster::{Plane, Raster};
use crate::tile;

/// The encoding an operator's maths assumes.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Domain {
    /// Mixes light: needs values proportional to light.
    Linear,
    /// Works on perceptual (sRGB-encoded) values.
    Encoded,
    /// Moves samples without mixing them: right in any encoding.
    Any,
}

impl Domain {
    pub fn name(self) -> &'static str {
        match self {
            Domain::Linear => "linear light",
            Domain::Encoded => "encoded (perceptual) values",
            Domain::Any => "any (samples are moved, not mixed)",
        }
    }
}

/// One step of a pipeline.
pub trait Operator: Send + Sync {
    /// The domain the operator's maths is right in.
    fn domain(&self) -> Domain;

    /// True when every output sample is a copy of an input sample (crops,
    /// flips, quarter turns), so exactness facts about the values carry over.
    fn moves_samples_only(&self) -> bool {
        false
    }

    /// The per-sample function, for operators whose output sample depends only
    /// on the input sample at the same place in the same colour plane. The
    /// pipeline fuses consecutive ones into a single pass over memory.
    fn sample_map(&self) -> Option<&dyn SampleMap> {
        None
    }

    /// The size of the output for an input of `width × height`, or an error
    /// when the operator cannot run on that size. Checked by the pipeline
    /// before any work, so an oversized result is refused before it is allocated.
    fn output_size(&self, width: usize, height: usize) -> Result<(usize, usize), Error> {
        Ok((width, height))
    }

    /// Runs the operator.
    fn apply(&self, raster: Raster) -> Result<Raster, Error>;

    /// Runs the operator on `raster` as it would be after `maps` (point
    /// functions the pipeline has not run yet, in order) were applied to its
    /// colour samples. By default that is one pass of the maps, then
    /// [`Operator::apply`]; an operator that reads each source sample once can
    /// apply the maps as it reads instead, saving that pass over memory, and
    /// must give the same result to the bit.
    fn apply_after_maps(&self, raster: Raster, maps: &[&dyn SampleMap]) -> Result<Raster, Error> {
        self.apply(apply_sample_maps(raster, maps))
    }
}

/// A function applied to each colour sample independently (alpha untouched).
pub trait SampleMap: Send + Sync {
    /// Maps every sample of `samples` in place. Each output sample depends on
    /// its own input sample only, so any split of a plane into slices gives
    /// the same result.
    fn map(&self, samples: &mut [f32]);

    /// The table this map looks samples up in, when it is exactly a lookup
    /// of codes `k / (N − 1)` (index `round(v · (N − 1))` clamped to the
    /// table, as [`crate::color::srgb::decode_in_place`] does): then an
    /// operator may look samples up while it moves them (see
    /// [`crate::ops::filter::rows::interleave_through_table`]) instead of
    /// calling [`SampleMap::map`]. None by default.
    fn code_table(&self) -> Option<CodeTable> {
        None
    }
}

/// A lookup table of a [`SampleMap`] over 8- or 16-bit codes.
#[derive(Clone, Copy)]
pub enum CodeTable {
    U8(&'static [f32; 256]),
    U16(&'static [f32; 65536]),
}

/// Samples per chunk when point functions run in parallel: 256 KiB of `f32`,
/// small enough to stay in L2 while several fused functions pass over it.
pub const POINT_CHUNK: usize = 1 << 16;

/// Applies `maps`, in order, to every colour sample of `raster` in one pass
/// per chunk of memory.
pub fn apply_sample_maps(mut raster: Raster, maps: &[&dyn SampleMap]) -> Raster {
    if !maps.is_empty() {
        tile::for_each_chunk(raster.colour_planes_mut(), POINT_CHUNK, |chunk| {
            for m in maps {
                m.map(chunk);
            }
        });
    }
    raster
}

/// Runs `filter` on every plane of `raster`, with alpha handled the way
/// neighbourhood operators need: colour is premultiplied by alpha before
/// filtering and divided by the filtered alpha afterwards (zero where the
/// filtered alpha is zero), so transparent pixels do not bleed their colour.
pub fn filter_planes(
    raster: Raster,
    filter: impl Fn(&Plane) -> Result<Plane, Error> + Sync,
) -> Result<Raster, Error> {
    filter_planes_indexed(raster, |_, p| filter(p))
}

/// [`filter_planes`] for filters that treat planes differently: `filter` also
/// gets the plane's index (the colour planes first, alpha last).
pub fn filter_planes_indexed(
    raster: Raster,
    filter: impl Fn(usize, &Plane) -> Result<Plane, Error> + Sync,
) -> Result<Raster, Error> {
    let layout = raster.layout();
    let colour = layout.colour_channels();
    let mut raster = raster;
    if layout.has_alpha() {
        let (colour_planes, alpha) = raster.planes_mut().split_at_mut(colour);
        for p in colour_planes.iter_mut() {
            multiply_in_place(p, &alpha[0]);
        }
    }
    let mut filtered = raster.map_planes(filter)?;
    if layout.has_alpha() {
        let (colour_planes, alpha) = filtered.planes_mut().split_at_mut(colour);
        for p in colour_planes.iter_mut() {
            divide_in_place(p, &alpha[0]);
        }
    }
    Ok(filtered)
}

fn multiply_in_place(p: &mut Plane, alpha: &Plane) {
    for (v, a) in p.as_mut_slice().iter_mut().zip(alpha.as_slice()) {
        *v *= a;
    }
}

fn divide_in_place(p: &mut Plane, alpha: &Plane) {
    for (v, a) in p.as_mut_slice().iter_mut().zip(alpha.as_slice()) {
        *v = if *a > 0.0 { *v / a } else { 0.0 };
    }
}
