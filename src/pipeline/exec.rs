//! Running a pipeline: converts between linear light and sRGB-encoded values only
//! when the next step needs the other domain, and runs each stretch of
//! consecutive point functions (domain conversions included) as one pass, or
//! hands it to the next step to run as it reads its source
//! ([`crate::ops::Operator::apply_after_maps`]).

use std::str::FromStr;

use super::Pipeline;
use crate::color::srgb;
use crate::error::Error;
use crate::ops::{CodeTable, Domain, SampleMap, apply_sample_maps};
use crate::raster::{Encoding, Raster};

/// Which domain steps work in.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub enum DomainPolicy {
    /// Each step in the domain it declares (DESIGN.md, "Colour correctness").
    #[default]
    Auto,
    /// Every step that mixes or maps values works in linear light.
    Linear,
    /// Every step that mixes or maps values works on encoded values.
    Encoded,
}

impl DomainPolicy {
    pub const NAMES: [&'static str; 3] = ["auto", "linear", "encoded"];

    fn encoding_for(self, domain: Domain) -> Option<Encoding> {
        match (self, domain) {
            (_, Domain::Any) => None,
            (DomainPolicy::Linear, _) | (DomainPolicy::Auto, Domain::Linear) => Some(Encoding::Linear),
            (DomainPolicy::Encoded, _) | (DomainPolicy::Auto, Domain::Encoded) => Some(Encoding::Srgb),
        }
    }
}

impl FromStr for DomainPolicy {
    type Err = String;

    fn from_str(s: &str) -> Result<Self, Self::Err> {
        match s {
            "auto" => Ok(DomainPolicy::Auto),
            "linear" => Ok(DomainPolicy::Linear),
            "encoded" => Ok(DomainPolicy::Encoded),
            _ => Err(format!("unknown domain `{s}`; expected one of {}", Self::NAMES.join(", "))),
        }
    }
}

/// sRGB → linear light, by lookup table when the samples are known codes.
struct ToLinear {
    levels: Option<u32>,
}

impl SampleMap for ToLinear {
    fn map(&self, samples: &mut [f32]) {
        srgb::decode_in_place(samples, self.levels);
    }

    fn code_table(&self) -> Option<CodeTable> {
        srgb::decode_code_table(self.levels?)
    }
}

/// Linear light → sRGB.
struct ToSrgb;

impl SampleMap for ToSrgb {
    fn map(&self, samples: &mut [f32]) {
        srgb::encode_in_place(samples);
    }
}

/// A failure while running step `index` (0-based).
#[derive(Debug)]
pub struct StepFailure {
    pub index: usize,
    pub error: Error,
}

impl Pipeline {
    /// The encoding the first step that is not [`Domain::Any`] works in, under
    /// `policy`: what a decoder may deliver at once instead of converting later.
    pub fn first_encoding(&self, policy: DomainPolicy) -> Option<Encoding> {
        self.steps.iter().find_map(|s| policy.encoding_for(s.op.domain()))
    }

    /// Runs every step on `raster`, in order.
    pub fn run(&self, raster: Raster, policy: DomainPolicy) -> Result<Raster, StepFailure> {
        let mut raster = raster;
        // Point functions waiting to run, in order; the conversions are owned here.
        let mut pending: Vec<Pending<'_>> = Vec::new();
        for (index, step) in self.steps.iter().enumerate() {
            // Channels of another colour model (after `space`) are not light
            // values: no transfer function applies to them.
            if let Some(target) = policy.encoding_for(step.op.domain())
                && target != raster.encoding
                && raster.model == crate::raster::ColourModel::Rgb
            {
                pending.push(match target {
                    Encoding::Linear => Pending::ToLinear(ToLinear { levels: raster.levels }),
                    Encoding::Srgb => Pending::ToSrgb(ToSrgb),
                });
                raster.encoding = target;
                raster.levels = None;
            }
            if let Some(map) = step.op.sample_map() {
                pending.push(Pending::Step(map));
                raster.levels = None;
                continue;
            }
            let (w, h) = step
                .op
                .output_size(raster.width(), raster.height())
                .map_err(|error| StepFailure { index, error })?;
            if (w as u64).saturating_mul(h as u64) > self.max_pixels {
                return Err(StepFailure {
                    index,
                    error: Error::Limit(format!(
                        "the result would be {w}×{h} = {} pixels, over the limit of {} pixels",
                        w as u128 * h as u128,
                        self.max_pixels
                    )),
                });
            }
            let keeps_levels = step.op.moves_samples_only();
            let levels = raster.levels;
            let maps: Vec<&dyn SampleMap> = pending.iter().map(Pending::as_map).collect();
            raster = step.op.apply_after_maps(raster, &maps).map_err(|error| StepFailure { index, error })?;
            drop(maps);
            pending.clear();
            raster.levels = if keeps_levels { levels } else { None };
        }
        Ok(flush(raster, &mut pending))
    }
}

enum Pending<'a> {
    ToLinear(ToLinear),
    ToSrgb(ToSrgb),
    Step(&'a dyn SampleMap),
}

impl Pending<'_> {
    fn as_map(&self) -> &dyn SampleMap {
        match self {
            Pending::ToLinear(m) => m,
            Pending::ToSrgb(m) => m,
            Pending::Step(m) => *m,
        }
    }
}

fn flush(raster: Raster, pending: &mut Vec<Pending<'_>>) -> Raster {
    let maps: Vec<&dyn SampleMap> = pending.iter().map(Pending::as_map).collect();
    let out = apply_sample_maps(raster, &maps);
    pending.clear();
    out
}

#[cfg(test)]
mod tests {
    //! Edge cases: empty pipelines, Any-domain steps keeping the encoding,
    //! conversions happening once, fused and unfused runs agreeing.
    use super::*;
    use crate::raster::{Layout, Plane};

    fn codes() -> Raster {
        let p = Plane::from_fn(256, 1, |x, _| x as f32 / 255.0).unwrap();
        let mut r = Raster::new(vec![p], Layout::Gray, Encoding::Srgb).unwrap();
        r.levels = Some(255);
        r
    }

    #[test]
    fn empty_pipeline_is_identity() {
        let out = Pipeline::default().run(codes(), DomainPolicy::Auto).unwrap();
        assert_eq!(out, codes());
    }

    #[test]
    fn linear_steps_convert_once_and_geometry_keeps_encoding() {
        let p = Pipeline::parse(&["flip", "gauss:0.5", "gauss:0.5"]).unwrap();
        let out = p.run(codes(), DomainPolicy::Auto).unwrap();
        assert_eq!(out.encoding, Encoding::Linear);
        let p = Pipeline::parse(&["flip"]).unwrap();
        let out = p.run(codes(), DomainPolicy::Auto).unwrap();
        assert_eq!((out.encoding, out.levels), (Encoding::Srgb, Some(255)));
    }

    #[test]
    fn fused_point_steps_equal_separate_runs() {
        let fused = Pipeline::parse(&["gamma:2.2", "invert", "gamma:0.8"]).unwrap();
        let a = fused.run(codes(), DomainPolicy::Auto).unwrap();
        let mut b = codes();
        for s in ["gamma:2.2", "invert", "gamma:0.8"] {
            b = Pipeline::parse(&[s]).unwrap().run(b, DomainPolicy::Auto).unwrap();
        }
        assert_eq!(a.planes(), b.planes());
    }

    #[test]
    fn encoded_step_after_linear_one_converts_back() {
        let p = Pipeline::parse(&["gauss:1", "invert"]).unwrap();
        let out = p.run(codes(), DomainPolicy::Auto).unwrap();
        assert_eq!(out.encoding, Encoding::Srgb);
        let forced = p.run(codes(), DomainPolicy::Linear).unwrap();
        assert_eq!(forced.encoding, Encoding::Linear);
    }
}
