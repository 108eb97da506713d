//! Tone operators that map each sample on its own: `invert` and `gamma`.
//! They work on encoded (perceptual) values and fuse into one pass.

use crate::error::{Error, ParamError};
use crate::ops::params::{Kind, OpSpec, ParamSpec};
use crate::ops::{Domain, Operator, SampleMap, apply_sample_maps};
use crate::raster::Raster;

/// The text of `pumice ops invert`, also the doc of [`Invert`].
macro_rules! invert_doc {
    () => {
        "Negative: each colour sample becomes its complement; alpha is kept.

```text
out = 1 - in
```

Domain: encoded values (the complement of what the eye sees).
Border: none (point operator). Source: common practice."
    };
}

#[doc = invert_doc!()]
#[derive(Debug)]
pub struct Invert;

impl SampleMap for Invert {
    fn map(&self, samples: &mut [f32]) {
        samples.iter_mut().for_each(|s| *s = 1.0 - *s);
    }
}

impl Operator for Invert {
    fn domain(&self) -> Domain {
        Domain::Encoded
    }

    fn sample_map(&self) -> Option<&dyn SampleMap> {
        Some(self)
    }

    fn apply(&self, raster: Raster) -> Result<Raster, Error> {
        Ok(apply_sample_maps(raster, &[self]))
    }
}

pub static INVERT: OpSpec = OpSpec {
    name: "invert",
    family: "tone",
    summary: "negative image (1 - value)",
    doc: invert_doc!(),
    main: None,
    params: &[],
    build: |_| Ok(Box::new(Invert)),
};

/// The text of `pumice ops gamma`, also the doc of [`Gamma`].
macro_rules! gamma_doc {
    () => {
        "Power-law tone curve on encoded values; alpha is kept.

```text
out = in^(1/γ)           for in ≥ 0
out = -((-in)^(1/γ))     for in < 0 (odd extension, so float data keep their sign)
```

γ > 1 lightens the mid-tones, γ < 1 darkens them; 0 and 1 stay fixed.
Domain: encoded values. Border: none (point operator). Source: common practice."
    };
}

#[doc = gamma_doc!()]
#[derive(Debug)]
pub struct Gamma {
    exponent: f32,
}

impl Gamma {
    pub fn new(gamma: f64) -> Result<Gamma, ParamError> {
        if !(gamma > 0.0 && gamma.is_finite()) {
            return Err(ParamError::new(format!("gamma must be positive, got {gamma}")));
        }
        Ok(Gamma { exponent: (1.0 / gamma) as f32 })
    }
}

impl SampleMap for Gamma {
    fn map(&self, samples: &mut [f32]) {
        let e = self.exponent;
        samples.iter_mut().for_each(|s| *s = s.abs().powf(e).copysign(*s));
    }
}

impl Operator for Gamma {
    fn domain(&self) -> Domain {
        Domain::Encoded
    }

    fn sample_map(&self) -> Option<&dyn SampleMap> {
        Some(self)
    }

    fn apply(&self, raster: Raster) -> Result<Raster, Error> {
        Ok(apply_sample_maps(raster, &[self]))
    }
}

pub static GAMMA: OpSpec = OpSpec {
    name: "gamma",
    family: "tone",
    summary: "power-law tone curve, out = in^(1/γ)",
    doc: gamma_doc!(),
    main: Some("gamma"),
    params: &[ParamSpec {
        name: "gamma",
        kind: Kind::positive(0.0, 100.0),
        default: None,
        help: "γ; above 1 lightens mid-tones",
    }],
    build: |a| Ok(Box::new(Gamma::new(a.number("gamma")?)?)),
};

#[cfg(test)]
mod tests {
    //! Edge cases: 0 and 1 fixed, negative samples, γ = 1 identity, double invert.
    use super::*;

    #[test]
    fn gamma_fixes_the_ends_and_keeps_signs() {
        let mut s = [0.0f32, 1.0, 0.25, -0.25];
        Gamma::new(2.0).unwrap().map(&mut s);
        assert_eq!(s, [0.0, 1.0, 0.5, -0.5]);
        let mut t = [0.3f32, 0.7];
        Gamma::new(1.0).unwrap().map(&mut t);
        assert_eq!(t, [0.3, 0.7]);
        assert!(Gamma::new(0.0).is_err());
    }

    #[test]
    fn invert_twice_is_identity_for_codes() {
        let mut s: Vec<f32> = (0..=255).map(|k| k as f32 / 255.0).collect();
        Invert.map(&mut s);
        Invert.map(&mut s);
        for (k, v) in s.iter().enumerate() {
            assert_eq!((v * 255.0).round() as usize, k);
        }
    }
}
