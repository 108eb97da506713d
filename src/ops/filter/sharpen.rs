//! `sharpen`: unsharp masking on top of the exact Gaussian. The blur itself is
//! `gauss`'s engine; this module only forms and thresholds the difference.

use super::engine::correlate_separable;
use super::gaussian_kernel;
use crate::error::{Error, ParamError};
use crate::ops::params::{self, Kind, OpSpec, ParamSpec};
use crate::ops::{Domain, Operator, filter_planes};
use crate::raster::{Plane, Raster};
use crate::tile::Border;

/// The text of `pumice ops sharpen`, also the doc of [`Sharpen`].
macro_rules! sharpen_doc {
    () => {
        "Unsharp masking: adds back the detail a Gaussian blur removes.

```text
d   = in - G_σ ⊛ in                       (G_σ: gauss's kernel, truncate 4)
out = in + amount · d    where |d| ≥ threshold
out = in                 where |d| < threshold
```

Values are not clipped (linear light above 1 is kept; the encoder clamps when
it writes an integer format). NaN propagates through the blur to every output
whose window holds it.
Domain: linear light; alpha is premultiplied while filtering.
Border: any rule (default reflect); needs r = floor(4σ + 1/2) rows of halo.
Source: unsharp masking, a darkroom technique carried into digital image
processing (Gonzalez & Woods, Digital Image Processing, §3.6, \"unsharp
masking and highboost filtering\"); the threshold is common practice."
    };
}

#[doc = sharpen_doc!()]
#[derive(Debug)]
pub struct Sharpen {
    kernel: Vec<f32>,
    amount: f32,
    threshold: f32,
    border: Border,
}

impl Sharpen {
    pub fn new(amount: f64, sigma: f64, threshold: f64, border: Border) -> Result<Sharpen, ParamError> {
        if !(sigma > 0.0 && sigma.is_finite()) {
            return Err(ParamError::new(format!("sigma must be positive, got {sigma}")));
        }
        if !(amount.is_finite() && amount >= 0.0) {
            return Err(ParamError::new(format!("amount must be zero or more, got {amount}")));
        }
        if !(threshold.is_finite() && threshold >= 0.0) {
            return Err(ParamError::new(format!("threshold must be zero or more, got {threshold}")));
        }
        let radius = (4.0 * sigma + 0.5).floor() as usize;
        Ok(Sharpen {
            kernel: gaussian_kernel(sigma, radius),
            amount: amount as f32,
            threshold: threshold as f32,
            border,
        })
    }

    fn sharpen_plane(&self, p: &Plane) -> Plane {
        let mut blurred = correlate_separable(p, &self.kernel, &self.kernel, self.border);
        let (amount, threshold) = (self.amount, self.threshold);
        for (b, &v) in blurred.as_mut_slice().iter_mut().zip(p.as_slice()) {
            let d = v - *b;
            // A NaN difference fails the comparison and propagates through
            // `v + amount · d`; written as a select, the loop vectorises.
            *b = if d.abs() < threshold { v } else { v + amount * d };
        }
        blurred
    }
}

impl Operator for Sharpen {
    fn domain(&self) -> Domain {
        Domain::Linear
    }

    fn apply(&self, raster: Raster) -> Result<Raster, Error> {
        filter_planes(raster, |p| Ok(self.sharpen_plane(p)))
    }
}

pub static SHARPEN: OpSpec = OpSpec {
    name: "sharpen",
    family: "filter",
    summary: "unsharp masking (amount, sigma, threshold)",
    doc: sharpen_doc!(),
    main: Some("amount"),
    params: &[
        ParamSpec {
            name: "amount",
            kind: Kind::real(0.0, 100.0),
            default: Some("1"),
            help: "how much of the detail to add back (0 leaves the image as it is)",
        },
        ParamSpec {
            name: "sigma",
            kind: Kind::positive(0.0, 1000.0),
            default: Some("1"),
            help: "standard deviation of the blur, in pixels",
        },
        ParamSpec {
            name: "threshold",
            kind: Kind::real(0.0, 1e30),
            default: Some("0"),
            help: "differences smaller than this are left alone (sample units)",
        },
        params::BORDER_PARAM,
        params::FILL_PARAM,
    ],
    build: |a| {
        Ok(Box::new(Sharpen::new(
            a.number("amount")?,
            a.number("sigma")?,
            a.number("threshold")?,
            params::border(a)?,
        )?))
    },
};

#[cfg(test)]
mod tests {
    //! Edge cases decided here: 1×1 (the blur of a lone sample under a
    //! repeating rule is itself, so nothing changes), 1×N and N×1, sigma larger
    //! than the image (the rule repeats), amount 0 (identity), threshold above
    //! every difference (identity), NaN (propagates over the blur window),
    //! sigma ≤ 0 or a negative amount (refused).
    use super::*;
    use crate::ops::filter::boxmean::tests::noise;

    #[test]
    fn amount_zero_and_huge_threshold_are_identities() {
        let p = noise(19, 7, 5);
        assert_eq!(Sharpen::new(0.0, 2.0, 0.0, Border::Reflect).unwrap().sharpen_plane(&p), p);
        assert_eq!(Sharpen::new(3.0, 2.0, 10.0, Border::Reflect).unwrap().sharpen_plane(&p), p);
    }

    #[test]
    fn equals_the_formula_against_gauss() {
        let p = noise(23, 11, 9);
        for (w, h) in [(1, 1), (1, 8), (8, 1)] {
            let q = noise(w, h, 2);
            let s = Sharpen::new(1.5, 30.0, 0.0, Border::Mirror).unwrap();
            let out = s.sharpen_plane(&q);
            assert!(out.as_slice().iter().all(|v| v.is_finite()));
        }
        let s = Sharpen::new(1.5, 1.2, 0.05, Border::Wrap).unwrap();
        let blur = correlate_separable(&p, &s.kernel, &s.kernel, Border::Wrap);
        let out = s.sharpen_plane(&p);
        let mut changed = 0;
        for ((o, &v), &b) in out.as_slice().iter().zip(p.as_slice()).zip(blur.as_slice()) {
            let d = v - b;
            let want = if d.abs() >= 0.05 { v + 1.5 * d } else { v };
            assert_eq!(*o, want);
            changed += usize::from(*o != v);
        }
        assert!(changed > 0 && changed < p.as_slice().len());
    }

    #[test]
    fn lone_sample_and_constant_image_are_unchanged() {
        let one = Plane::filled(1, 1, 0.3).unwrap();
        let s = Sharpen::new(2.0, 1.0, 0.0, Border::Reflect).unwrap();
        assert!((s.sharpen_plane(&one).get(0, 0) - 0.3).abs() < 1e-6);
        let flat = Plane::filled(9, 9, 0.7).unwrap();
        assert!(s.sharpen_plane(&flat).as_slice().iter().all(|v| (v - 0.7).abs() < 1e-6));
    }

    #[test]
    fn nan_propagates_and_bad_parameters_are_refused() {
        let mut p = noise(11, 11, 4);
        p.row_mut(5)[5] = f32::NAN;
        let out = Sharpen::new(1.0, 0.5, 0.1, Border::Reflect).unwrap().sharpen_plane(&p);
        assert!(out.get(5, 5).is_nan() && out.get(6, 5).is_nan());
        assert!(!out.get(0, 0).is_nan()); // r = floor(4·0.5 + 0.5) = 2 < 5
        assert!(Sharpen::new(1.0, 0.0, 0.0, Border::Reflect).unwrap_err().0.contains("sigma"));
        assert!(Sharpen::new(-1.0, 1.0, 0.0, Border::Reflect).unwrap_err().0.contains("amount"));
        assert!(Sharpen::new(1.0, 1.0, f64::NAN, Border::Reflect).is_err());
    }
}
