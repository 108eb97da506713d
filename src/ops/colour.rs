//! Colour operators: `gray`, `space` (colour models), `extract` (one channel)
//! and `balance` (white balance). Channel mixing of colour planes; alpha is
//! kept as it is. The model conversions themselves live in `color::models`.

use crate::color::luma;
use crate::error::{Error, ParamError};
use crate::ops::histogram::{self, Binning};
use crate::ops::params::{Args, Kind, OpSpec, ParamSpec};
use crate::ops::{Domain, Operator};
use crate::raster::{ColourModel, Encoding, Layout, Plane, Raster};
use crate::tile;
use rayon::prelude::*;

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

/// The text of `pumice ops space`, also the doc of [`Space`].
macro_rules! space_doc {
    () => {
        "Converts the colour planes to another colour model, so later steps work
on its channels; alpha is kept, gray input is taken as R = G = B.

```text
rgb    R', G', B' (sRGB-encoded, IEC 61966-2-1)
xyz    CIE 1931 XYZ, D65, Y = 1 for white: linearise, then the sRGB matrix (IEC 61966-2-1 §5.2)
lab    CIE 1976 L*a*b* (CIE 15:2004 §8.2.1), D65 white; L* in 0..100
lch    L*, C*ab = √(a*² + b*²), hab = atan2(b*, a*) in degrees 0..360
oklab  Oklab (B. Ottosson, 2020): L in 0..1
hsv    hue in degrees 0..360, saturation and value in 0..1, of the encoded R', G', B'
hsl    hue in degrees 0..360, saturation and lightness in 0..1, of the encoded R', G', B'
```

The raster records its model; `extract` names channels by it. Writing an
image file converts back to sRGB, except a 32-bit float TIFF, which keeps the
model's channels as they are. Conversions run in f64: HSV and HSL through
the `palette` crate, XYZ, L*a*b*, LCh and Oklab from the standards'
matrices (see `color::models`). While the raster is in a model other than rgb,
no linear/encoded conversion is applied before other steps: they see the
model's numbers. Conversions go through the `palette` crate in f32.
Domain: encoded values (the sRGB definition of each model starts from R', G', B').
Border: none (point operator). Source: the standards named above."
    };
}

#[doc = space_doc!()]
#[derive(Debug)]
pub struct Space {
    to: ColourModel,
}

impl Space {
    pub fn new(to: &str) -> Result<Space, ParamError> {
        let to = ColourModel::from_name(to).ok_or_else(|| {
            ParamError::new(format!(
                "unknown colour model `{to}`; expected one of {}",
                ColourModel::NAMES.join(", ")
            ))
        })?;
        Ok(Space { to })
    }
}

impl Operator for Space {
    fn domain(&self) -> Domain {
        Domain::Encoded
    }

    fn apply(&self, raster: Raster) -> Result<Raster, Error> {
        crate::color::models::convert(raster, self.to)
    }
}

pub static SPACE: OpSpec = OpSpec {
    name: "space",
    family: "colour",
    summary: "convert to a colour model: rgb, xyz, lab, lch, oklab, hsv, hsl",
    doc: space_doc!(),
    main: Some("to"),
    params: &[ParamSpec {
        name: "to",
        kind: Kind::Choice(&ColourModel::NAMES),
        default: None,
        help: "the colour model to convert to",
    }],
    build: |a| Ok(Box::new(Space::new(a.choice("to")?)?)),
};

/// The text of `pumice ops extract`, also the doc of [`Extract`].
macro_rules! extract_doc {
    () => {
        "Keeps one colour channel as a gray image; alpha is kept.

```text
out = channel c of the current colour model
```

channel is a name in the raster's current model (r g b; x y z; l a b; l c h;
h s v; h s l; after `space`) or an index 0, 1, 2. The values are kept as they
are (L* stays in 0..100, hue in degrees), so follow with `window` to map them
to 0..1 before writing an integer image. A gray image has the one channel 0
(or r, g, b). Domain: any (samples are copied). Border: none. Source: common practice."
    };
}

#[doc = extract_doc!()]
#[derive(Debug)]
pub struct Extract {
    channel: String,
}

impl Extract {
    pub fn new(channel: &str) -> Result<Extract, ParamError> {
        if channel.trim().is_empty() {
            return Err(ParamError::new("extract needs a channel name or index"));
        }
        Ok(Extract { channel: channel.trim().to_ascii_lowercase() })
    }

    fn index(&self, raster: &Raster) -> Result<usize, Error> {
        let n = raster.layout().colour_channels();
        let names = raster.model.channels();
        let bad = |why: String| Error::Step { step: "extract".into(), message: why };
        if let Ok(i) = self.channel.parse::<usize>() {
            return if i < n {
                Ok(i)
            } else {
                Err(bad(format!("channel index {i} is out of range; this image has channels 0..{}", n - 1)))
            };
        }
        if n == 1 && ["r", "g", "b"].contains(&self.channel.as_str()) {
            return Ok(0);
        }
        names.iter().position(|c| *c == self.channel).filter(|_| n == 3).ok_or_else(|| {
            bad(format!(
                "no channel `{}` in colour model {}; expected one of {} or an index",
                self.channel,
                raster.model.name(),
                if n == 3 { names.join(", ") } else { "0".into() }
            ))
        })
    }
}

impl Operator for Extract {
    fn domain(&self) -> Domain {
        Domain::Any
    }

    fn moves_samples_only(&self) -> bool {
        true
    }

    fn apply(&self, raster: Raster) -> Result<Raster, Error> {
        let i = self.index(&raster)?;
        let mut planes = vec![raster.planes()[i].clone()];
        if let Some(a) = raster.alpha() {
            planes.push(a.clone());
        }
        let layout = Layout::Gray.with_alpha(raster.layout().has_alpha());
        let was_rgb = raster.model == ColourModel::Rgb;
        let mut out = raster.with_planes(planes, layout)?;
        if !was_rgb {
            out.levels = None;
            out.encoding = Encoding::Srgb;
        }
        Ok(out)
    }
}

/// Every channel name of every model, and the indices: the accepted `channel` values
const CHANNEL_NAMES_ALL: [&str; 15] =
    ["0", "1", "2", "r", "g", "b", "x", "y", "z", "l", "a", "c", "h", "s", "v"];

pub static EXTRACT: OpSpec = OpSpec {
    name: "extract",
    family: "colour",
    summary: "one channel, by name in the current colour model or by index",
    doc: extract_doc!(),
    main: Some("channel"),
    params: &[ParamSpec {
        name: "channel",
        kind: Kind::Choice(&CHANNEL_NAMES_ALL),
        default: None,
        help: "channel name (r g b, x y z, l a b, l c h, h s v, h s l) or index 0..2",
    }],
    build: |a| Ok(Box::new(Extract::new(a.choice("channel")?)?)),
};

/// The text of `pumice ops balance`, also the doc of [`Balance`].
macro_rules! balance_doc {
    () => {
        "White balance: scales R, G and B by one gain each so a reference becomes
neutral; alpha is kept. Values are not clipped (the encoder clips on output).

```text
out_c = g_c · in_c                                      c ∈ {R, G, B}, linear light
gray-world:  m_c = mean of channel c over the image;    g_c = mean(m_R, m_G, m_B) / m_c
white-patch: p_c = percentile(channel c, percentile);   g_c = max(p_R, p_G, p_B) / p_c
rect:        m_c = mean of channel c over the rectangle; g_c = mean(m_R, m_G, m_B) / m_c
```

gray-world and rect keep the reference's mean brightness; white-patch lifts
the reference to its brightest channel, so a high percentile (default 99,
robust against a few clipped pixels) becomes neutral. Percentiles come from
65536 bins between the minimum and maximum (linear data are floats). The
rectangle is x, y, width, height in pixels and must lie inside the image.
A reference channel whose mean or percentile is not positive is an error.
Gray images are returned unchanged. NaN samples are not counted.
Domain: linear light (gains model the light source). Border: none.
Source: G. Buchsbaum, \"A spatial processor model for object colour
perception\", J. Franklin Inst. 310(1):1–26, 1980 (gray world); E. H. Land and
J. J. McCann, \"Lightness and retinex theory\", JOSA 61(1):1–11, 1971 (white patch)."
    };
}

/// Where the neutral reference comes from.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum Reference {
    GrayWorld,
    WhitePatch(f64),
    Rect { x: usize, y: usize, width: usize, height: usize },
}

#[doc = balance_doc!()]
#[derive(Debug)]
pub struct Balance {
    reference: Reference,
}

impl Balance {
    pub fn new(reference: Reference) -> Result<Balance, ParamError> {
        match reference {
            Reference::WhitePatch(p) if !(p > 0.0 && p <= 100.0) => {
                return Err(ParamError::new(format!("percentile must be within (0, 100], got {p}")));
            }
            Reference::Rect { width, height, .. } if width == 0 || height == 0 => {
                return Err(ParamError::new(
                    "method=rect needs a rectangle: x, y, width and height (width and height ≥ 1)",
                ));
            }
            _ => {}
        }
        Ok(Balance { reference })
    }

    fn gains(&self, raster: &Raster) -> Result<[f64; 3], Error> {
        let bad = |m: String| Error::Step { step: "balance".into(), message: m };
        let p = raster.planes();
        let (w, h) = (raster.width(), raster.height());
        let mean = |plane: &Plane, x0: usize, y0: usize, x1: usize, y1: usize| -> f64 {
            let (s, n) = (y0..y1)
                .into_par_iter()
                .map(|y| {
                    plane.row(y)[x0..x1]
                        .iter()
                        .filter(|v| !v.is_nan())
                        .fold((0.0f64, 0u64), |(s, n), &v| (s + f64::from(v), n + 1))
                })
                .reduce(|| (0.0, 0), |a, b| (a.0 + b.0, a.1 + b.1));
            if n == 0 { f64::NAN } else { s / n as f64 }
        };
        let (refs, keep_mean) = match self.reference {
            Reference::GrayWorld => ([0, 1, 2].map(|c| mean(&p[c], 0, 0, w, h)), true),
            Reference::Rect { x, y, width, height } => {
                if x.checked_add(width).is_none_or(|e| e > w) || y.checked_add(height).is_none_or(|e| e > h) {
                    return Err(bad(format!(
                        "rectangle x={x}, y={y}, width={width}, height={height} lies outside the {w}×{h} image"
                    )));
                }
                ([0, 1, 2].map(|c| mean(&p[c], x, y, x + width, y + height)), true)
            }
            Reference::WhitePatch(pct) => {
                let v = [0, 1, 2].map(|c| {
                    let s = [p[c].as_slice()];
                    Binning::for_samples(&s, None, histogram::FLOAT_BINS)
                        .and_then(|b| histogram::percentile(&histogram::histogram(&s, &b), &b, pct))
                        .unwrap_or(f64::NAN)
                });
                (v, false)
            }
        };
        if let Some(c) = refs.iter().position(|m| m.is_nan() || *m <= 0.0) {
            return Err(bad(format!(
                "the reference has no light in channel {} ({}); cannot balance",
                ["red", "green", "blue"][c],
                refs[c]
            )));
        }
        let target =
            if keep_mean { refs.iter().sum::<f64>() / 3.0 } else { refs.iter().copied().fold(0.0, f64::max) };
        Ok(refs.map(|m| target / m))
    }
}

impl Operator for Balance {
    fn domain(&self) -> Domain {
        Domain::Linear
    }

    fn apply(&self, mut raster: Raster) -> Result<Raster, Error> {
        if raster.layout().colour_channels() == 1 {
            return Ok(raster);
        }
        if raster.model != ColourModel::Rgb {
            return Err(Error::Step {
                step: "balance".into(),
                message: format!(
                    "balance works on RGB; the image is in {} (add `space:rgb` first)",
                    raster.model.name()
                ),
            });
        }
        let g = self.gains(&raster)?;
        for (plane, gain) in raster.colour_planes_mut().iter_mut().zip(g) {
            let gain = gain as f32;
            plane.as_mut_slice().par_chunks_mut(crate::ops::POINT_CHUNK).for_each(|c| {
                c.iter_mut().for_each(|v| *v *= gain);
            });
        }
        Ok(raster)
    }
}

pub static BALANCE: OpSpec = OpSpec {
    name: "balance",
    family: "colour",
    summary: "white balance: gray world, white patch (percentile) or a reference rectangle",
    doc: balance_doc!(),
    main: Some("method"),
    params: &[
        ParamSpec {
            name: "method",
            kind: Kind::Choice(&["gray-world", "white-patch", "rect"]),
            default: Some("gray-world"),
            help: "where the neutral reference comes from",
        },
        ParamSpec {
            name: "percentile",
            kind: Kind::positive(0.0, 100.0),
            default: Some("99"),
            help: "method=white-patch: the percentile taken as white",
        },
        ParamSpec {
            name: "x",
            kind: Kind::int(0.0, 1e9),
            default: Some("0"),
            help: "method=rect: left column",
        },
        ParamSpec { name: "y", kind: Kind::int(0.0, 1e9), default: Some("0"), help: "method=rect: top row" },
        ParamSpec {
            name: "width",
            kind: Kind::int(0.0, 1e9),
            default: Some("0"),
            help: "method=rect: width",
        },
        ParamSpec {
            name: "height",
            kind: Kind::int(0.0, 1e9),
            default: Some("0"),
            help: "method=rect: height",
        },
    ],
    build: build_balance,
};

fn build_balance(a: &Args) -> Result<Box<dyn Operator>, ParamError> {
    let reference = match a.choice("method")? {
        "white-patch" => Reference::WhitePatch(a.number("percentile")?),
        "rect" => Reference::Rect {
            x: a.int("x")? as usize,
            y: a.int("y")? as usize,
            width: a.int("width")? as usize,
            height: a.int("height")? as usize,
        },
        _ => Reference::GrayWorld,
    };
    Ok(Box::new(Balance::new(reference)?))
}

#[cfg(test)]
mod tests {
    //! Edge cases: gray input (unchanged), alpha kept; space: unknown colour
    //! model rejected, round trip through every model, 1×1 image; extract:
    //! unknown channel name or index out of range rejected, names follow the
    //! model, gray input; balance: rectangle outside the image or empty
    //! rejected, black reference rejected, gray world neutralises a cast,
    //! white patch and rect, gray input unchanged, non-RGB model rejected.
    use super::*;

    fn run(step: &str, r: Raster) -> Result<Raster, Error> {
        crate::pipeline::Step::parse(step)?.op.apply(r)
    }

    fn rgb_fn(w: usize, h: usize, f: impl Fn(usize, usize, usize) -> f32) -> Raster {
        let planes = (0..3).map(|c| Plane::from_fn(w, h, |x, y| f(c, x, y)).unwrap()).collect();
        Raster::new(planes, Layout::Rgb, Encoding::Linear).unwrap()
    }

    #[test]
    fn space_rejects_unknown_models_and_round_trips() {
        let e = crate::pipeline::Step::parse("space:to=cmyk").unwrap_err().to_string();
        assert!(e.contains("expected one of"), "{e}");
        assert!(Space::new("luv").unwrap_err().0.contains("unknown colour model"));
        let mut r = rgb_fn(5, 3, |c, x, y| ((c * 3 + x * 5 + y * 7) % 11) as f32 / 10.0);
        r.encoding = Encoding::Srgb;
        for m in ["xyz", "lab", "lch", "oklab", "hsv", "hsl"] {
            let there = run(&format!("space:{m}"), r.clone()).unwrap();
            assert_eq!(there.model.name(), m);
            let back = run("space:rgb", there).unwrap();
            for c in 0..3 {
                for (a, b) in back.planes()[c].as_slice().iter().zip(r.planes()[c].as_slice()) {
                    assert!((a - b).abs() < 1e-5, "{m}: {a} vs {b}");
                }
            }
        }
        let one = rgb_fn(1, 1, |_, _, _| 0.5);
        assert_eq!(run("space:lab", one).unwrap().width(), 1);
    }

    #[test]
    fn extract_by_name_and_index() {
        let mut r = rgb_fn(2, 2, |c, _, _| c as f32 * 0.25);
        r.encoding = Encoding::Srgb;
        assert_eq!(run("extract:g", r.clone()).unwrap().planes()[0].get(0, 0), 0.25);
        assert_eq!(run("extract:2", r.clone()).unwrap().planes()[0].get(1, 1), 0.5);
        let e = run("extract:l", r.clone()).unwrap_err().to_string();
        assert!(e.contains("no channel `l` in colour model rgb"), "{e}");
        let lab = run("space:lab", r.clone()).unwrap();
        let l = run("extract:l", lab).unwrap();
        assert_eq!((l.layout(), l.model), (Layout::Gray, ColourModel::Rgb));
        let want =
            crate::color::models::convert_pixel(ColourModel::Rgb, ColourModel::Lab, [0.0, 0.25, 0.5], false);
        assert_eq!(l.planes()[0].get(0, 0), want[0]);
        assert!(crate::pipeline::Step::parse("extract:q").is_err());
        let gray =
            Raster::new(vec![Plane::filled(1, 1, 0.3).unwrap()], Layout::Gray, Encoding::Srgb).unwrap();
        assert!(run("extract:1", gray.clone()).unwrap_err().to_string().contains("out of range"));
        assert_eq!(run("extract:0", gray).unwrap().planes()[0].get(0, 0), 0.3);
    }

    #[test]
    fn balance_neutralises_casts_and_checks_its_reference() {
        // A gray scene lit by a warm light: channel gains 1.2, 1.0, 0.7.
        let cast = [1.2f32, 1.0, 0.7];
        let r = rgb_fn(8, 6, |c, x, y| cast[c] * (0.1 + 0.05 * ((x + y) % 5) as f32));
        for step in ["balance", "balance:white-patch,percentile=100", "balance:rect,x=2,y=1,width=3,height=4"]
        {
            let out = run(step, r.clone()).unwrap();
            for i in 0..48 {
                let p: Vec<f32> = (0..3).map(|c| out.planes()[c].as_slice()[i]).collect();
                assert!((p[0] - p[1]).abs() < 1e-5 && (p[2] - p[1]).abs() < 1e-5, "{step}: {p:?}");
            }
        }
        let e = run("balance:rect,x=6,y=0,width=3,height=2", r.clone()).unwrap_err().to_string();
        assert!(e.contains("outside the 8×6 image"), "{e}");
        assert!(
            crate::pipeline::Step::parse("balance:rect")
                .unwrap_err()
                .to_string()
                .contains("needs a rectangle")
        );
        let black = rgb_fn(3, 3, |c, _, _| if c == 2 { 0.0 } else { 0.5 });
        assert!(run("balance", black).unwrap_err().to_string().contains("no light in channel blue"));
        let gray =
            Raster::new(vec![Plane::filled(2, 2, 0.3).unwrap()], Layout::Gray, Encoding::Linear).unwrap();
        assert_eq!(run("balance", gray.clone()).unwrap(), gray);
        let mut lab = r.clone();
        lab.model = ColourModel::Lab;
        assert!(run("balance", lab).unwrap_err().to_string().contains("space:rgb"));
    }

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
