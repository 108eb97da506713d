//! Colour operators: `gray`. Channel mixing of colour planes; alpha is kept as it is.

use crate::color::luma;
use crate::error::{Error, ParamError};
use crate::ops::params::{Args, Kind, OpSpec, ParamSpec};
use crate::ops::{Domain, Operator};
use crate::raster::{Layout, Plane, Raster};
use crate::tile;

/// The text of `pumice ops gray`, also the doc of [`Gray`].
macro_rules! gray_doc {
    () => {
        "Converts colour to one gray channel; alpha is kept.

```text
Y = wr·R + wg·G + wb·B
bt709: (0.2126, 0.7152, 0.0722)   ITU-R BT.709-6 §3.3 (also the sRGB primaries' luminance)
bt601: (0.299, 0.587, 0.114)      ITU-R BT.601-7 §2.5.1
mean:  (1/3, 1/3, 1/3)
red | green | blue: that channel alone
```

Domain: with light=linear (default) the weights apply to linear light, giving
relative luminance Y, so a gray patch keeps its brightness. With light=encoded
they apply to the sRGB-encoded values, giving luma Y' as BT.709 defines it (and
as most libraries compute gray). A gray image passes through unchanged.
Border: none (point operator)."
    };
}

#[doc = gray_doc!()]
#[derive(Debug)]
pub struct Gray {
    weights: [f32; 3],
    domain: Domain,
}

impl Gray {
    pub fn new(weights: &str, light: &str) -> Result<Gray, ParamError> {
        let weights = match weights {
            "bt709" => luma::BT709,
            "bt601" => luma::BT601,
            "mean" => luma::MEAN,
            "red" => [1.0, 0.0, 0.0],
            "green" => [0.0, 1.0, 0.0],
            "blue" => [0.0, 0.0, 1.0],
            other => return Err(ParamError::new(format!("unknown weights `{other}`"))),
        };
        let domain = if light == "encoded" { Domain::Encoded } else { Domain::Linear };
        Ok(Gray { weights, domain })
    }
}

impl Operator for Gray {
    fn domain(&self) -> Domain {
        self.domain
    }

    fn apply(&self, raster: Raster) -> Result<Raster, Error> {
        let layout = raster.layout();
        if layout.colour_channels() == 1 {
            return Ok(raster);
        }
        let (w, h) = (raster.width(), raster.height());
        let p = raster.planes();
        let mut gray = Plane::zeros(w, h)?;
        let rows = tile::band_rows(w, 0);
        tile::for_each_band(&mut gray, rows, |y0, band| {
            let start = y0 * w;
            let range = start..start + band.len();
            let (r, g, b) =
                (&p[0].as_slice()[range.clone()], &p[1].as_slice()[range.clone()], &p[2].as_slice()[range]);
            luma::weighted_sum(self.weights, r, g, b, band);
        });
        let mut planes = vec![gray];
        if let Some(a) = raster.alpha() {
            planes.push(a.clone());
        }
        let out_layout = Layout::Gray.with_alpha(layout.has_alpha());
        raster.with_planes(planes, out_layout)
    }
}

pub static GRAY: OpSpec = OpSpec {
    name: "gray",
    family: "colour",
    summary: "colour to gray: BT.709 (default), BT.601, mean or one channel",
    doc: gray_doc!(),
    main: Some("weights"),
    params: &[
        ParamSpec {
            name: "weights",
            kind: Kind::Choice(&["bt709", "bt601", "mean", "red", "green", "blue"]),
            default: Some("bt709"),
            help: "channel weights",
        },
        ParamSpec {
            name: "light",
            kind: Kind::Choice(&["linear", "encoded"]),
            default: Some("linear"),
            help: "weigh linear light (luminance) or encoded values (luma)",
        },
    ],
    build: build_gray,
};

fn build_gray(a: &Args) -> Result<Box<dyn Operator>, ParamError> {
    Ok(Box::new(Gray::new(a.choice("weights")?, a.choice("light")?)?))
}

#[cfg(test)]
mod tests {
    //! Edge cases: gray input (unchanged), alpha kept.
    use super::*;
    use crate::raster::Encoding;

    fn rgba(r: f32, g: f32, b: f32, a: f32) -> Raster {
        let planes = [r, g, b, a].iter().map(|&v| Plane::filled(2, 1, v).unwrap()).collect();
        Raster::new(planes, Layout::Rgba, Encoding::Linear).unwrap()
    }

    #[test]
    fn weights_and_alpha() {
        let out = Gray::new("bt709", "linear").unwrap().apply(rgba(1.0, 0.0, 0.0, 0.5)).unwrap();
        assert_eq!(out.layout(), Layout::GrayAlpha);
        // ITU-R BT.709-6 §3.3: red weight 0.2126.
        assert_eq!(out.planes()[0].get(0, 0), 0.2126);
        assert_eq!(out.planes()[1].get(1, 0), 0.5);
        let out = Gray::new("green", "linear").unwrap().apply(rgba(0.1, 0.7, 0.3, 1.0)).unwrap();
        assert_eq!(out.planes()[0].get(0, 0), 0.7);
    }

    #[test]
    fn gray_input_is_unchanged() {
        let r = Raster::new(vec![Plane::filled(3, 3, 0.2).unwrap()], Layout::Gray, Encoding::Srgb).unwrap();
        assert_eq!(Gray::new("bt601", "encoded").unwrap().apply(r.clone()).unwrap(), r);
    }
}
