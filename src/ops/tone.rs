//! Tone operators: point maps (`invert`, `gamma`, `window`, `exposure`) that
//! fuse into one pass, and whole-image ones (`stretch`) that run a reduce pass
//! (histograms, see `ops::histogram`) before their per-sample map. Colour
//! mixing belongs to `ops::colour`, thresholds to `ops::threshold`.

use rayon::prelude::*;

use crate::error::{Error, ParamError};
use crate::ops::histogram::{self, Binning};
use crate::ops::params::{Args, Kind, OpSpec, ParamSpec};
use crate::ops::{Domain, Operator, POINT_CHUNK, SampleMap, apply_sample_maps};
use crate::raster::Raster;
use crate::tile;

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

/// The `light` parameter of tone operators that may run on encoded values
/// (photos, the default) or on the raw linear values (micrographs).
const LIGHT_PARAM: ParamSpec = ParamSpec {
    name: "light",
    kind: Kind::Choice(&["encoded", "linear"]),
    default: Some("encoded"),
    help: "work on encoded (perceptual) values or on linear light",
};

fn light_domain(a: &Args) -> Result<Domain, ParamError> {
    Ok(if a.choice("light")? == "linear" { Domain::Linear } else { Domain::Encoded })
}

/// The text of `pumice ops window`, also the doc of [`Window`].
macro_rules! window_doc {
    () => {
        "Maps the value range [low, high] to full scale [0, 1], optionally with a
gamma; values outside the range are clipped; alpha is kept.

```text
t   = clamp((in - low) / (high - low), 0, 1)
out = t^(1/γ)
```

low and high are sample values as stored: integer sources read as code/max
(a 16-bit window from code 1000 to 5000 is low=0.015259,high=0.076295; or give
units=code16 and low=1000,high=5000). NaN stays NaN.
Domain: encoded values by default; light=linear works on linear values
(micrographs). Border: none (point operator). Source: common practice
(display windowing of medical and scientific images)."
    };
}

#[doc = window_doc!()]
#[derive(Debug)]
pub struct Window {
    low: f32,
    scale: f32,
    exponent: f32,
    domain: Domain,
}

impl Window {
    /// `low < high`, both finite; `gamma > 0`.
    pub fn new(low: f64, high: f64, gamma: f64, domain: Domain) -> Result<Window, ParamError> {
        if !(low.is_finite() && high.is_finite()) || low >= high {
            return Err(ParamError::new(format!("window needs low < high, got low={low}, high={high}")));
        }
        if !(gamma > 0.0 && gamma.is_finite()) {
            return Err(ParamError::new(format!("gamma must be positive, got {gamma}")));
        }
        Ok(Window {
            low: low as f32,
            scale: (1.0 / (high - low)) as f32,
            exponent: (1.0 / gamma) as f32,
            domain,
        })
    }
}

impl SampleMap for Window {
    fn map(&self, samples: &mut [f32]) {
        let (low, scale, e) = (self.low, self.scale, self.exponent);
        if e == 1.0 {
            samples.iter_mut().for_each(|s| *s = ((*s - low) * scale).clamp(0.0, 1.0));
        } else {
            samples.iter_mut().for_each(|s| *s = ((*s - low) * scale).clamp(0.0, 1.0).powf(e));
        }
    }
}

impl Operator for Window {
    fn domain(&self) -> Domain {
        self.domain
    }

    fn sample_map(&self) -> Option<&dyn SampleMap> {
        Some(self)
    }

    fn apply(&self, raster: Raster) -> Result<Raster, Error> {
        Ok(apply_sample_maps(raster, &[self]))
    }
}

pub static WINDOW: OpSpec = OpSpec {
    name: "window",
    family: "tone",
    summary: "map the value range [low, high] to full scale, optional gamma",
    doc: window_doc!(),
    main: None,
    params: &[
        ParamSpec { name: "low", kind: Kind::real(-1e30, 1e30), default: None, help: "value mapped to 0" },
        ParamSpec { name: "high", kind: Kind::real(-1e30, 1e30), default: None, help: "value mapped to 1" },
        ParamSpec {
            name: "gamma",
            kind: Kind::positive(0.0, 100.0),
            default: Some("1"),
            help: "γ after the window",
        },
        ParamSpec {
            name: "units",
            kind: Kind::Choice(&["value", "code8", "code16"]),
            default: Some("value"),
            help: "low/high as stored values, or as 8-bit (÷255) or 16-bit (÷65535) codes",
        },
        LIGHT_PARAM,
    ],
    build: build_window,
};

fn build_window(a: &Args) -> Result<Box<dyn Operator>, ParamError> {
    let div = match a.choice("units")? {
        "code8" => 255.0,
        "code16" => 65535.0,
        _ => 1.0,
    };
    Ok(Box::new(Window::new(
        a.number("low")? / div,
        a.number("high")? / div,
        a.number("gamma")?,
        light_domain(a)?,
    )?))
}

/// The text of `pumice ops exposure`, also the doc of [`Exposure`].
macro_rules! exposure_doc {
    () => {
        "Exposure change in photographic stops: each stop doubles (or halves) the
light; alpha is kept. Values are not clipped (the encoder clips on output).

```text
out = in · 2^stops
```

Domain: linear light (a stop is a factor of light, so it scales linear values).
Border: none (point operator). Source: common practice (photographic stops)."
    };
}

#[doc = exposure_doc!()]
#[derive(Debug)]
pub struct Exposure {
    factor: f32,
}

impl Exposure {
    pub fn new(stops: f64) -> Result<Exposure, ParamError> {
        if !stops.is_finite() || stops.abs() > 64.0 {
            return Err(ParamError::new(format!("stops must be within ±64, got {stops}")));
        }
        Ok(Exposure { factor: 2f64.powf(stops) as f32 })
    }
}

impl SampleMap for Exposure {
    fn map(&self, samples: &mut [f32]) {
        let f = self.factor;
        samples.iter_mut().for_each(|s| *s *= f);
    }
}

impl Operator for Exposure {
    fn domain(&self) -> Domain {
        Domain::Linear
    }

    fn sample_map(&self) -> Option<&dyn SampleMap> {
        Some(self)
    }

    fn apply(&self, raster: Raster) -> Result<Raster, Error> {
        Ok(apply_sample_maps(raster, &[self]))
    }
}

pub static EXPOSURE: OpSpec = OpSpec {
    name: "exposure",
    family: "tone",
    summary: "exposure change in stops (×2 per stop, linear light)",
    doc: exposure_doc!(),
    main: Some("stops"),
    params: &[ParamSpec {
        name: "stops",
        kind: Kind::real(-64.0, 64.0),
        default: None,
        help: "stops of exposure; +1 doubles the light",
    }],
    build: |a| Ok(Box::new(Exposure::new(a.number("stops")?)?)),
};

/// The text of `pumice ops stretch`, also the doc of [`Stretch`].
macro_rules! stretch_doc {
    () => {
        "Percentile contrast stretch: the low-th percentile goes to 0, the high-th
to 1, values beyond are clipped; alpha is kept.

```text
lo, hi = percentile(in, low), percentile(in, high)    (numpy's linear rule: rank p/100·(N-1))
out    = clamp((in - lo) / (hi - lo), 0, 1)
```

linked=false stretches each colour channel by its own percentiles (also
balances a colour cast); linked=true takes them from all colour channels
pooled, keeping the balance. Percentiles come from a histogram pass: exact for
8- and 16-bit sources (one bin per code), 65536 equal bins between the
minimum and maximum for float data (error at most one bin width). NaN and ±∞
are not counted and NaN stays NaN. A channel whose two percentiles are equal
(a constant image) is left unchanged.
Domain: encoded values by default; light=linear for linear data.
Border: none (whole-image reduce, then a point map). Source: common practice."
    };
}

#[doc = stretch_doc!()]
#[derive(Debug)]
pub struct Stretch {
    low: f64,
    high: f64,
    linked: bool,
    domain: Domain,
}

impl Stretch {
    /// Percentiles in percent, `0 ≤ low < high ≤ 100`.
    pub fn new(low: f64, high: f64, linked: bool, domain: Domain) -> Result<Stretch, ParamError> {
        if !(0.0..=100.0).contains(&low) || !(0.0..=100.0).contains(&high) {
            return Err(ParamError::new(format!(
                "percentiles must be within 0..100, got low={low}, high={high}"
            )));
        }
        if low >= high {
            return Err(ParamError::new(format!(
                "percentiles out of order: low={low} must be below high={high}"
            )));
        }
        Ok(Stretch { low, high, linked, domain })
    }

    /// The (lo, hi) values for the samples of `planes`, or `None` when they
    /// hold no finite sample.
    fn limits(&self, planes: &[&[f32]], levels: Option<u32>) -> Option<(f64, f64)> {
        let b = Binning::for_samples(planes, levels, histogram::FLOAT_BINS)?;
        let h = histogram::histogram(planes, &b);
        Some((histogram::percentile(&h, &b, self.low)?, histogram::percentile(&h, &b, self.high)?))
    }
}

/// `clamp((v − lo)/(hi − lo), 0, 1)` over `plane` in parallel; identity when hi ≤ lo.
fn map_range(plane: &mut [f32], lo: f64, hi: f64) {
    if hi <= lo {
        return;
    }
    let (lo, scale) = (lo as f32, (1.0 / (hi - lo)) as f32);
    plane.par_chunks_mut(POINT_CHUNK).for_each(|c| {
        c.iter_mut().for_each(|s| *s = ((*s - lo) * scale).clamp(0.0, 1.0));
    });
}

impl Operator for Stretch {
    fn domain(&self) -> Domain {
        self.domain
    }

    fn apply(&self, mut raster: Raster) -> Result<Raster, Error> {
        let levels = raster.levels;
        let planes = raster.colour_planes_mut();
        if self.linked {
            let all: Vec<&[f32]> = planes.iter().map(|p| p.as_slice()).collect();
            if let Some((lo, hi)) = self.limits(&all, levels) {
                planes.iter_mut().for_each(|p| map_range(p.as_mut_slice(), lo, hi));
            }
        } else {
            for p in planes.iter_mut() {
                if let Some((lo, hi)) = self.limits(&[p.as_slice()], levels) {
                    map_range(p.as_mut_slice(), lo, hi);
                }
            }
        }
        Ok(raster)
    }
}

pub static STRETCH: OpSpec = OpSpec {
    name: "stretch",
    family: "tone",
    summary: "percentile contrast stretch (0.5 % → 0, 99.5 % → 1)",
    doc: stretch_doc!(),
    main: None,
    params: &[
        ParamSpec {
            name: "low",
            kind: Kind::real(0.0, 100.0),
            default: Some("0.5"),
            help: "percentile mapped to 0",
        },
        ParamSpec {
            name: "high",
            kind: Kind::real(0.0, 100.0),
            default: Some("99.5"),
            help: "percentile mapped to 1",
        },
        ParamSpec {
            name: "linked",
            kind: Kind::Bool,
            default: Some("false"),
            help: "one pair of percentiles for all colour channels",
        },
        LIGHT_PARAM,
    ],
    build: |a| {
        Ok(Box::new(Stretch::new(a.number("low")?, a.number("high")?, a.bool("linked")?, light_domain(a)?)?))
    },
};

/// The text of `pumice ops equalize`, also the doc of [`Equalize`].
macro_rules! equalize_doc {
    () => {
        "Global histogram equalisation: each value becomes the fraction of samples
at or below it, so the output histogram is as flat as the data allow; alpha is kept.

```text
out = cdf(in) = #{samples ≤ in} / N                 (integer sources: exact, per code)
out = interp(in; bin centres, cdf at the bins)      (float data)
```

Binning: one bin per code for 8- and 16-bit sources (256 or 65536 bins, so a
16-bit image is not reduced to 8 bits); float data use 65536 equal bins between
the minimum and maximum finite sample and interpolate linearly between bin
centres (clamped at the ends). The darkest value maps to its own share
cdf(min) > 0, not to 0. NaN is not counted and stays NaN.
Colour input: lightness=luma (default) equalises the BT.709 luma
Y' = 0.2126 R' + 0.7152 G' + 0.0722 B' and scales R', G', B' by Y'new/Y', which
keeps hue and saturation (channels clip at 1; a black pixel becomes the gray
Y'new). lightness=lstar equalises CIE 1976 L* instead (D65 white, CIE 15:2004
§8.2.1, computed in f64 as `space:lab` does) as the float data L*/100, and
rebuilds R', G', B' from L*new = 100·cdf and the unchanged a*, b*, which keeps
hue h_ab and chroma C*ab (channels outside the sRGB gamut clip to 0..1).
per-channel=true equalises each channel on its own (lightness is then unused).
Gray input ignores lightness and per-channel.
Domain: encoded values. Border: none (whole-image reduce, then a point map).
Source: R. C. Gonzalez and R. E. Woods, Digital Image Processing, §3.3.1
(histogram equalisation); the cdf convention is scikit-image's
`exposure.equalize_hist`."
    };
}

#[doc = equalize_doc!()]
#[derive(Debug)]
pub struct Equalize {
    per_channel: bool,
    lightness: Lightness,
}

impl Equalize {
    pub fn new(per_channel: bool, lightness: Lightness) -> Equalize {
        Equalize { per_channel, lightness }
    }
}

/// Which lightness `equalize` and `clahe` change on colour input.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Lightness {
    /// BT.709 luma of the encoded values; R', G', B' scaled by Y'new/Y'.
    Luma,
    /// CIE 1976 L* (D65); rebuilt from L*new and the unchanged a*, b*.
    Lstar,
}

/// The `lightness` parameter shared by `equalize` and `clahe`.
const LIGHTNESS_PARAM: ParamSpec = ParamSpec {
    name: "lightness",
    kind: Kind::Choice(&["luma", "lstar"]),
    default: Some("luma"),
    help: "colour input: equalise the BT.709 luma or CIE L* (keeps hue and chroma)",
};

fn lightness(a: &Args) -> Result<Lightness, ParamError> {
    Ok(if a.choice("lightness")? == "lstar" { Lightness::Lstar } else { Lightness::Luma })
}

/// Runs `change` on the lightness of a colour raster, scaled to 0..1 (luma Y',
/// or L*/100), and rebuilds the colour from its result.
fn through_lightness(
    raster: Raster,
    op: &str,
    lightness: Lightness,
    change: impl FnOnce(&mut crate::raster::Plane) -> Result<(), Error>,
) -> Result<Raster, Error> {
    match lightness {
        Lightness::Luma => through_luma(raster, change),
        Lightness::Lstar => through_lstar(raster, op, change),
    }
}

/// The equalising map of one set of samples.
struct CdfMap {
    binning: Binning,
    /// cdf at each bin, as f32.
    cdf: Vec<f32>,
}

impl CdfMap {
    fn new(planes: &[&[f32]], levels: Option<u32>) -> Option<CdfMap> {
        let binning = Binning::for_samples(planes, levels, histogram::FLOAT_BINS)?;
        let counts = histogram::histogram(planes, &binning);
        let total = counts.iter().sum::<u64>() as f64;
        let mut run = 0u64;
        let cdf = counts
            .iter()
            .map(|&c| {
                run += c;
                (run as f64 / total) as f32
            })
            .collect();
        Some(CdfMap { binning, cdf })
    }

    /// The output of a sample that is not finite: NaN stays, +∞ → 1, −∞ → cdf of the first bin.
    #[inline]
    fn non_finite(&self, v: f32) -> f32 {
        if v.is_nan() {
            v
        } else if v > 0.0 {
            1.0
        } else {
            self.cdf[0]
        }
    }

    #[inline]
    fn apply(&self, v: f32) -> f32 {
        if !v.is_finite() {
            return self.non_finite(v);
        }
        match self.binning {
            Binning::Codes { n } => self.cdf[histogram::code_index(v, n)],
            Binning::Range { lo, hi, bins } => {
                let pos = (f64::from(v) - lo) / (hi - lo) * bins as f64 - 0.5;
                if pos <= 0.0 {
                    return self.cdf[0];
                }
                let i = pos.floor() as usize;
                if i + 1 >= bins {
                    return self.cdf[bins - 1];
                }
                let t = (pos - i as f64) as f32;
                self.cdf[i] + (self.cdf[i + 1] - self.cdf[i]) * t
            }
        }
    }

    fn apply_in_place(&self, plane: &mut [f32]) {
        match self.binning {
            // Codes a block at a time, then the table lookup; a block holding a
            // non-finite sample takes the per-sample path.
            Binning::Codes { n } => {
                let mut table = vec![self.cdf[n as usize]; 1 << 16];
                table[..self.cdf.len()].copy_from_slice(&self.cdf);
                let table: &[f32; 1 << 16] = match table.as_slice().try_into() {
                    Ok(t) => t,
                    Err(_) => unreachable!("the table has 65536 entries"),
                };
                plane.par_chunks_mut(POINT_CHUNK).for_each(|c| {
                    let mut codes = [0u16; histogram::CODE_BLOCK];
                    for block in c.chunks_mut(histogram::CODE_BLOCK) {
                        if histogram::codes_of_block(block, n, &mut codes) {
                            block.iter_mut().zip(&codes).for_each(|(s, &k)| *s = table[usize::from(k)]);
                        } else {
                            block.iter_mut().for_each(|s| *s = self.apply(*s));
                        }
                    }
                })
            }
            Binning::Range { .. } => {
                plane.par_chunks_mut(POINT_CHUNK).for_each(|c| c.iter_mut().for_each(|s| *s = self.apply(*s)))
            }
        }
    }
}

impl Operator for Equalize {
    fn domain(&self) -> Domain {
        Domain::Encoded
    }

    fn apply(&self, mut raster: Raster) -> Result<Raster, Error> {
        let levels = raster.levels;
        let colour = raster.layout().colour_channels();
        if colour == 1 || self.per_channel {
            for p in raster.colour_planes_mut() {
                if let Some(m) = CdfMap::new(&[p.as_slice()], levels) {
                    m.apply_in_place(p.as_mut_slice());
                }
            }
            return Ok(raster);
        }
        through_lightness(raster, "equalize", self.lightness, |y| {
            if let Some(m) = CdfMap::new(&[y.as_slice()], None) {
                m.apply_in_place(y.as_mut_slice());
            }
            Ok(())
        })
    }
}

/// Applies a lightness change to colour: computes the BT.709 luma Y' of the
/// three colour planes, lets `change` rewrite it in place, then scales R', G', B'
/// by Y'new/Y' (clipped at 1; where Y' = 0 the pixel becomes the gray Y'new).
fn through_luma(
    mut raster: Raster,
    change: impl FnOnce(&mut crate::raster::Plane) -> Result<(), Error>,
) -> Result<Raster, Error> {
    let (w, h) = (raster.width(), raster.height());
    let planes = raster.colour_planes_mut();
    let mut y = crate::raster::Plane::zeros(w, h)?;
    {
        let (r, g, b) = (planes[0].as_slice(), planes[1].as_slice(), planes[2].as_slice());
        y.as_mut_slice().par_chunks_mut(POINT_CHUNK).enumerate().for_each(|(i, c)| {
            let s = i * POINT_CHUNK..i * POINT_CHUNK + c.len();
            crate::color::luma::weighted_sum(
                crate::color::luma::BT709,
                &r[s.clone()],
                &g[s.clone()],
                &b[s],
                c,
            );
        });
    }
    let old = y.clone();
    change(&mut y)?;
    let (p0, rest) = planes.split_at_mut(1);
    let (p1, p2) = rest.split_at_mut(1);
    p0[0]
        .as_mut_slice()
        .par_chunks_mut(POINT_CHUNK)
        .zip(p1[0].as_mut_slice().par_chunks_mut(POINT_CHUNK))
        .zip(p2[0].as_mut_slice().par_chunks_mut(POINT_CHUNK))
        .zip(old.as_slice().par_chunks(POINT_CHUNK).zip(y.as_slice().par_chunks(POINT_CHUNK)))
        .for_each(|(((r, g), b), (old, new))| {
            for i in 0..old.len() {
                if old[i] > 0.0 {
                    let k = new[i] / old[i];
                    r[i] = (r[i] * k).min(1.0);
                    g[i] = (g[i] * k).min(1.0);
                    b[i] = (b[i] * k).min(1.0);
                } else if !old[i].is_nan() {
                    (r[i], g[i], b[i]) = (new[i], new[i], new[i]);
                }
            }
        });
    Ok(raster)
}

/// Applies a lightness change to colour through CIE L*a*b* (D65): converts each
/// pixel's R', G', B' to L*, a*, b* (`color::models`, f64), holds L*/100 in the
/// first plane and a*, b* in the other two, lets `change` rewrite the first
/// plane in place, then converts L*new = 100·value, a*, b* back to R', G', B'
/// clipped to 0..1. The raster must be in the RGB model.
fn through_lstar(
    mut raster: Raster,
    op: &str,
    change: impl FnOnce(&mut crate::raster::Plane) -> Result<(), Error>,
) -> Result<Raster, Error> {
    use crate::color::models::convert_pixel;
    use crate::raster::ColourModel::{Lab, Rgb};
    if raster.model != Rgb {
        return Err(Error::Step {
            step: op.into(),
            message: format!(
                "lightness=lstar takes L* from RGB; the image is in {} (add `space:rgb` first)",
                raster.model.name()
            ),
        });
    }
    let planes = raster.colour_planes_mut();
    let (p0, rest) = planes.split_at_mut(1);
    let (p1, p2) = rest.split_at_mut(1);
    let for_each_pixel =
        |p0: &mut [f32], p1: &mut [f32], p2: &mut [f32], f: &(dyn Fn([f32; 3]) -> [f32; 3] + Sync)| {
            p0.par_chunks_mut(POINT_CHUNK)
                .zip(p1.par_chunks_mut(POINT_CHUNK))
                .zip(p2.par_chunks_mut(POINT_CHUNK))
                .for_each(|((a, b), c)| {
                    for i in 0..a.len() {
                        [a[i], b[i], c[i]] = f([a[i], b[i], c[i]]);
                    }
                });
        };
    for_each_pixel(p0[0].as_mut_slice(), p1[0].as_mut_slice(), p2[0].as_mut_slice(), &|rgb| {
        let [l, a, b] = convert_pixel(Rgb, Lab, rgb, false);
        [l / 100.0, a, b]
    });
    change(&mut p0[0])?;
    for_each_pixel(p0[0].as_mut_slice(), p1[0].as_mut_slice(), p2[0].as_mut_slice(), &|[l, a, b]| {
        convert_pixel(Lab, Rgb, [l * 100.0, a, b], false).map(|v| v.clamp(0.0, 1.0))
    });
    Ok(raster)
}

pub static EQUALIZE: OpSpec = OpSpec {
    name: "equalize",
    family: "tone",
    summary: "global histogram equalisation (luma or L* of colour, or per channel)",
    doc: equalize_doc!(),
    main: None,
    params: &[
        ParamSpec {
            name: "per-channel",
            kind: Kind::Bool,
            default: Some("false"),
            help: "equalise R, G, B separately instead of the lightness",
        },
        LIGHTNESS_PARAM,
    ],
    build: |a| Ok(Box::new(Equalize::new(a.bool("per-channel")?, lightness(a)?))),
};

/// The text of `pumice ops clahe`, also the doc of [`Clahe`].
macro_rules! clahe_doc {
    () => {
        "Contrast-limited adaptive histogram equalisation: the image is cut into a
tiles×tiles grid; each tile gets its own clipped equalising map, and each
pixel's value is interpolated bilinearly between the maps of the four nearest
tile centres, so there are no seams; alpha is kept.

```text
h_t(b)   = histogram of tile t, bins equal bins over [0, 1] (b = floor(v·bins))
limit    = max(1, clip · pixels in the tile)          clip = 1 turns clipping off
h'_t(b)  = min(h_t(b), limit) + excess_t / bins       excess_t = Σ max(h_t(b) − limit, 0)
map_t(b) = Σ_{j ≤ b} h'_t(j) / pixels in the tile
out      = Σ over the 4 nearest tile centres of bilinear weight · map_t(b(in))
```

Tiles: tile i covers columns floor(i·W/tiles) .. floor((i+1)·W/tiles) (and the
same for rows); its centre is the middle of that span. Pixels outside the
outermost centres use the nearest centres (constant extrapolation). Values
outside [0, 1] fall in the end bins; NaN stays NaN. Colour input follows
`equalize`: the BT.709 luma is equalised and R', G', B' scaled by Y'new/Y',
or with lightness=lstar CIE L* (as L*/100) is equalised and the colour
rebuilt from L*new, a*, b*; or each channel with per-channel=true.
Domain: encoded values. Border: none (tiles cover the image; no halo).
Source: K. Zuiderveld, \"Contrast limited adaptive histogram equalization\",
Graphics Gems IV, pp. 474–485, 1994 (clip limit with even redistribution of
the excess in one pass; bilinear interpolation of tile mappings)."
    };
}

#[doc = clahe_doc!()]
#[derive(Debug)]
pub struct Clahe {
    tiles: usize,
    clip: f64,
    bins: usize,
    per_channel: bool,
    lightness: Lightness,
}

impl Clahe {
    pub fn new(
        tiles: usize,
        clip: f64,
        bins: usize,
        per_channel: bool,
        lightness: Lightness,
    ) -> Result<Clahe, ParamError> {
        if !(1..=256).contains(&tiles) {
            return Err(ParamError::new(format!("tiles must be within 1..256, got {tiles}")));
        }
        if !(clip > 0.0 && clip <= 1.0) {
            return Err(ParamError::new(format!("clip must be within (0, 1], got {clip}")));
        }
        if !(2..=65536).contains(&bins) {
            return Err(ParamError::new(format!("bins must be within 2..65536, got {bins}")));
        }
        Ok(Clahe { tiles, clip, bins, per_channel, lightness })
    }

    /// The tile spans along an axis of `n` samples: `min(tiles, n)` tiles.
    fn spans(&self, n: usize) -> Vec<(usize, usize)> {
        let t = self.tiles.min(n);
        (0..t).map(|i| (i * n / t, (i + 1) * n / t)).collect()
    }

    /// The tile's histogram of `p` over columns `x0..x1` and rows `y0..y1`, NaN
    /// not counted, and the count. Interleaved counters for a few bins, so a run
    /// of equal values does not wait on one counter.
    fn tile_histogram(
        &self,
        p: &crate::raster::Plane,
        (x0, x1): (usize, usize),
        (y0, y1): (usize, usize),
    ) -> (Vec<u64>, u64) {
        let bins = self.bins;
        let lanes = if bins <= 4096 { 4 } else { 1 };
        let stride = bins + 1;
        let mut counts = vec![0u64; lanes * stride];
        // Bins a block at a time, NaN to the spare last slot.
        let mut slots = [0u32; histogram::CODE_BLOCK];
        for y in y0..y1 {
            for segment in p.row(y)[x0..x1].chunks(histogram::CODE_BLOCK) {
                bins_of_segment(segment, bins, &mut slots);
                let mut groups = slots[..segment.len()].chunks_exact(lanes);
                for g in &mut groups {
                    for (lane, &b) in g.iter().enumerate() {
                        counts[lane * stride + b as usize] += 1;
                    }
                }
                for &b in groups.remainder() {
                    counts[b as usize] += 1;
                }
            }
        }
        let hist: Vec<u64> = (0..bins).map(|b| (0..lanes).map(|l| counts[l * stride + b]).sum()).collect();
        let n = hist.iter().sum();
        (hist, n)
    }

    /// The clipped, redistributed and accumulated map of one tile's histogram.
    fn tile_map(&self, hist: &[u64], n: u64) -> impl Iterator<Item = f32> {
        let bins = self.bins;
        let limit = (self.clip * n as f64).max(1.0);
        let mut excess = 0.0f64;
        let clipped: Vec<f64> = hist
            .iter()
            .map(|&c| {
                let c = c as f64;
                excess += (c - limit).max(0.0);
                c.min(limit)
            })
            .collect();
        let add = excess / bins as f64;
        let total = n.max(1) as f64;
        let mut run = 0.0f64;
        clipped.into_iter().map(move |c| {
            run += c + add;
            (run / total).min(1.0) as f32
        })
    }

    fn plane(&self, p: &mut crate::raster::Plane) {
        self.plane_with(p, None)
    }

    /// [`Clahe::plane`], with the choice of blending the maps once per row
    /// forced (`Some`) or left to the sizes (`None`).
    fn plane_with(&self, p: &mut crate::raster::Plane, blend_rows: Option<bool>) {
        let (w, h) = (p.width(), p.height());
        let (xs, ys) = (self.spans(w), self.spans(h));
        let bins = self.bins;
        // One map of `bins` values per tile, tiles row-major over the grid.
        let maps: Vec<f32> = {
            let src: &crate::raster::Plane = p;
            let per_tile: Vec<Vec<f32>> = (0..xs.len() * ys.len())
                .into_par_iter()
                .map(|t| {
                    let (hist, n) = self.tile_histogram(src, xs[t % xs.len()], ys[t / xs.len()]);
                    self.tile_map(&hist, n).collect()
                })
                .collect();
            per_tile.concat()
        };
        // For each coordinate: the two neighbouring tile centres and the weight of the second.
        let neighbours = |spans: &[(usize, usize)], n: usize| -> Vec<(usize, usize, f32)> {
            let centres: Vec<f64> = spans.iter().map(|&(a, b)| (a + b) as f64 / 2.0 - 0.5).collect();
            (0..n)
                .map(|i| {
                    let x = i as f64;
                    let k = centres.iter().rposition(|&c| c <= x);
                    match k {
                        None => (0, 0, 0.0),
                        Some(k) if k + 1 >= centres.len() => (k, k, 0.0),
                        Some(k) => (k, k + 1, ((x - centres[k]) / (centres[k + 1] - centres[k])) as f32),
                    }
                })
                .collect()
        };
        let (nx, ny) = (neighbours(&xs, w), neighbours(&ys, h));
        // Runs of columns between the same two tile centres: (first, end, left tile, right tile).
        let mut runs: Vec<(usize, usize, usize, usize)> = Vec::new();
        for (x, &(t0, t1, _)) in nx.iter().enumerate() {
            match runs.last_mut() {
                Some(r) if (r.2, r.3) == (t0, t1) => r.1 = x + 1,
                _ => runs.push((x, x + 1, t0, t1)),
            }
        }
        let fx: Vec<f32> = nx.iter().map(|n| n.2).collect();
        let tx = xs.len();
        let map = |ty: usize, t: usize| &maps[(ty * tx + t) * bins..(ty * tx + t + 1) * bins];
        // Each output sample depends on its own input sample and its position
        // only, so the maps are applied in place. Where a row has more samples
        // than its tile columns' maps have bins, the maps are first blended
        // between the two tile rows once for the row.
        let blend_rows = blend_rows.unwrap_or(tx * bins <= w);
        tile::for_each_band(p, tile::band_rows(w, 0), |y0, band| {
            let mut row_maps = if blend_rows { vec![0.0f32; tx * bins] } else { Vec::new() };
            for (by, row) in band.chunks_exact_mut(w).enumerate() {
                let (ty0, ty1, fy) = ny[y0 + by];
                if blend_rows {
                    for (t, out) in row_maps.chunks_exact_mut(bins).enumerate() {
                        blend_maps(out, map(ty0, t), map(ty1, t), fy);
                    }
                    let column = |t: usize| &row_maps[t * bins..(t + 1) * bins];
                    for &(xa, xb, t0, t1) in &runs {
                        interpolate_run_between(&mut row[xa..xb], &fx[xa..xb], column(t0), column(t1));
                    }
                } else {
                    for &(xa, xb, t0, t1) in &runs {
                        let maps = [map(ty0, t0), map(ty0, t1), map(ty1, t0), map(ty1, t1)];
                        interpolate_run(&mut row[xa..xb], &fx[xa..xb], maps, fy);
                    }
                }
            }
        });
    }
}

/// The bin of `v` among `last + 1` equal bins over [0, 1]: floor(v·bins)
/// clamped to 0..=last (values below 0 and NaN in bin 0, values from 1 up in
/// the last; clamping before the floor gives the same bin, as `last` is an
/// integer).
#[inline(always)]
fn unit_bin(v: f32, scale: f32, last: u32) -> u32 {
    histogram::floor_small((v * scale).max(0.0).min(last as f32))
}

/// The [`unit_bin`] of each sample of `segment` (at most
/// [`histogram::CODE_BLOCK`]) among `bins` bins, NaN to the spare slot `bins`.
/// Branch-free, so it compiles to vector instructions (run-time dispatch).
#[multiversion::multiversion(targets("x86_64+avx512f+avx512bw+avx512vl+avx2+fma", "x86_64+avx2+fma"))]
fn bins_of_segment(segment: &[f32], bins: usize, slots: &mut [u32; histogram::CODE_BLOCK]) {
    let (scale, last) = (bins as f32, (bins - 1) as u32);
    for (s, &v) in slots.iter_mut().zip(segment) {
        let b = unit_bin(v, scale, last);
        *s = if v.is_nan() { bins as u32 } else { b };
    }
}

/// One tile map interpolated between two tile rows: `out = top + (bottom −
/// top)·fy` per bin, the first half of [`interpolate_run`]'s arithmetic, so
/// [`interpolate_run_between`] on these gives the same result to the bit.
fn blend_maps(out: &mut [f32], top: &[f32], bottom: &[f32], fy: f32) {
    for ((o, &t), &b) in out.iter_mut().zip(top).zip(bottom) {
        *o = t + (b - t) * fy;
    }
}

/// Maps one run of a row, whose columns lie between the same two tile centres,
/// through the four tile maps `[top left, top right, bottom left, bottom
/// right]` (each `bins` long) with bilinear weights `fx` (per column) and `fy`:
/// left = m00 + (m10 − m00)·fy, right = m01 + (m11 − m01)·fy, out = left +
/// (right − left)·fx. Branch-free, so it compiles to vector gathers where the
/// CPU has them (run-time dispatch; no fused multiply-add, so every CPU gives
/// the same result).
#[multiversion::multiversion(targets("x86_64+avx512f+avx512bw+avx512vl+avx2+fma", "x86_64+avx2+fma"))]
fn interpolate_run(row: &mut [f32], fx: &[f32], maps: [&[f32]; 4], fy: f32) {
    let [m00, m01, m10, m11] = maps;
    let bins = m00.len();
    let (m01, m10, m11) = (&m01[..bins], &m10[..bins], &m11[..bins]);
    map_run(row, fx, bins, |b| (m00[b] + (m10[b] - m00[b]) * fy, m01[b] + (m11[b] - m01[b]) * fy));
}

/// [`interpolate_run`] with the maps of the left and right tile columns
/// already interpolated between the tile rows ([`blend_maps`]): two lookups
/// per sample instead of four.
#[multiversion::multiversion(targets("x86_64+avx512f+avx512bw+avx512vl+avx2+fma", "x86_64+avx2+fma"))]
fn interpolate_run_between(row: &mut [f32], fx: &[f32], left: &[f32], right: &[f32]) {
    let bins = left.len();
    let right = &right[..bins];
    map_run(row, fx, bins, |b| (left[b], right[b]));
}

/// The loop both interpolations share: each sample's bin `b` ([`unit_bin`]
/// among `bins`), its left and right map values `at(b)`, and out = left +
/// (right − left)·fx; NaN stays NaN. `at` is called with `b < bins` only.
#[inline(always)]
fn map_run(row: &mut [f32], fx: &[f32], bins: usize, at: impl Fn(usize) -> (f32, f32)) {
    let Some(last) = bins.checked_sub(1) else { return };
    let scale = bins as f32;
    for (o, &fx) in row.iter_mut().zip(fx) {
        let v = *o;
        // The min is a no-op (unit_bin stays within `last`) that shows the
        // compiler the index is in bounds.
        let (left, right) = at((unit_bin(v, scale, last as u32) as usize).min(last));
        let out = left + (right - left) * fx;
        *o = if v.is_nan() { v } else { out };
    }
}

impl Operator for Clahe {
    fn domain(&self) -> Domain {
        Domain::Encoded
    }

    fn apply(&self, mut raster: Raster) -> Result<Raster, Error> {
        if raster.layout().colour_channels() == 1 || self.per_channel {
            raster.colour_planes_mut().iter_mut().for_each(|p| self.plane(p));
            return Ok(raster);
        }
        through_lightness(raster, "clahe", self.lightness, |y| {
            self.plane(y);
            Ok(())
        })
    }
}

pub static CLAHE: OpSpec = OpSpec {
    name: "clahe",
    family: "tone",
    summary: "contrast-limited adaptive histogram equalisation (tile grid, clip limit)",
    doc: clahe_doc!(),
    main: None,
    params: &[
        ParamSpec {
            name: "tiles",
            kind: Kind::int(1.0, 256.0),
            default: Some("8"),
            help: "tiles along each side",
        },
        ParamSpec {
            name: "clip",
            kind: Kind::positive(0.0, 1.0),
            default: Some("0.01"),
            help: "largest share of a tile's pixels one bin may hold (1 = no clipping)",
        },
        ParamSpec {
            name: "bins",
            kind: Kind::int(2.0, 65536.0),
            default: Some("256"),
            help: "histogram bins",
        },
        ParamSpec {
            name: "per-channel",
            kind: Kind::Bool,
            default: Some("false"),
            help: "equalise R, G, B separately instead of the lightness",
        },
        LIGHTNESS_PARAM,
    ],
    build: |a| {
        Ok(Box::new(Clahe::new(
            a.int("tiles")? as usize,
            a.number("clip")?,
            a.int("bins")? as usize,
            a.bool("per-channel")?,
            lightness(a)?,
        )?))
    },
};

#[cfg(test)]
mod tests {
    //! Edge cases: gamma fixes 0 and 1 and keeps signs, γ = 1 identity, double
    //! invert exact; window: low ≥ high rejected, values outside clipped, NaN
    //! kept, code units; exposure: 0 stops identity, ±1 stop exact factors;
    //! stretch: percentiles out of order or outside 0..100 rejected, a 1×1 and a
    //! constant image unchanged, NaN ignored, alpha kept, linked versus per channel,
    //! exact percentiles on 8-bit codes; equalize: 1×1 and constant images go
    //! to 1, 16-bit codes keep their 65536 bins, the output histogram is flat,
    //! colour keeps its channel ratios (hue and saturation), NaN kept; clahe:
    //! one tile with no clipping equals equalize (up to the bin grid), a 1×1
    //! image, more tiles than pixels, bad tiles/clip rejected, constant tiles,
    //! no seams (interpolated maps are continuous), serial = parallel;
    //! lightness=lstar: hue and chroma kept where nothing clips, the L*
    //! histogram flat, gray input unaffected, a non-RGB model refused; the
    //! block-wise code path equals the per-sample map, NaN and ±∞ included.
    use super::*;
    use crate::raster::{Encoding, Layout, Plane};

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

    fn run(step: &str, r: Raster) -> Raster {
        crate::pipeline::Step::parse(step).unwrap().op.apply(r).unwrap()
    }

    fn step_err(step: &str) -> String {
        crate::pipeline::Step::parse(step).unwrap_err().to_string()
    }

    #[test]
    fn window_maps_clips_and_rejects_empty_ranges() {
        let w = Window::new(0.2, 0.6, 1.0, Domain::Encoded).unwrap();
        let mut s = [0.0f32, 0.2, 0.4, 0.6, 1.0, f32::NAN];
        w.map(&mut s);
        assert_eq!(&s[..5], &[0.0, 0.0, 0.5, 1.0, 1.0]);
        assert!(s[5].is_nan());
        let e = step_err("window:low=0.6,high=0.2");
        assert!(e.contains("low < high"), "{e}");
        assert!(step_err("window:low=0.5,high=0.5").contains("low < high"));
        // 16-bit codes: code 1000 → 0, 5000 → 1, 3000 → 0.5.
        let p = Plane::from_vec(3, 1, vec![1000.0 / 65535.0, 3000.0 / 65535.0, 5000.0 / 65535.0]).unwrap();
        let r = Raster::new(vec![p], Layout::Gray, Encoding::Linear).unwrap();
        let out = run("window:low=1000,high=5000,units=code16,light=linear", r);
        let got = out.planes()[0].as_slice();
        assert!(got[0].abs() < 1e-6 && (got[1] - 0.5).abs() < 1e-5 && (got[2] - 1.0).abs() < 1e-6, "{got:?}");
        // With γ = 2 the middle of the window becomes 0.5^(1/2).
        let mut m = [0.4f32];
        Window::new(0.2, 0.6, 2.0, Domain::Encoded).unwrap().map(&mut m);
        assert!((m[0] - 0.5f32.sqrt()).abs() < 1e-6);
    }

    #[test]
    fn exposure_scales_by_powers_of_two() {
        let mut s = [0.25f32, 1.0];
        Exposure::new(1.0).unwrap().map(&mut s);
        assert_eq!(s, [0.5, 2.0]);
        Exposure::new(-2.0).unwrap().map(&mut s);
        assert_eq!(s, [0.125, 0.5]);
        Exposure::new(0.0).unwrap().map(&mut s);
        assert_eq!(s, [0.125, 0.5]);
        assert_eq!(Exposure::new(1.0).unwrap().domain(), Domain::Linear);
        assert!(Exposure::new(f64::NAN).is_err());
    }

    fn codes_rgba(w: usize, h: usize, f: impl Fn(usize, usize, usize) -> u32) -> Raster {
        let planes = (0..4)
            .map(|c| {
                Plane::from_fn(w, h, |x, y| if c == 3 { 0.5 } else { f(c, x, y) as f32 / 255.0 }).unwrap()
            })
            .collect();
        let mut r = Raster::new(planes, Layout::Rgba, Encoding::Srgb).unwrap();
        r.levels = Some(255);
        r
    }

    #[test]
    fn stretch_rejects_bad_percentiles() {
        assert!(step_err("stretch:low=60,high=40").contains("out of order"));
        assert!(step_err("stretch:low=50,high=50").contains("out of order"));
        assert!(step_err("stretch:low=-1").contains("low"));
        assert!(step_err("stretch:high=101").contains("high"));
    }

    #[test]
    fn stretch_leaves_tiny_and_constant_images_alone() {
        let one = codes_rgba(1, 1, |c, _, _| 10 * c as u32);
        assert_eq!(run("stretch", one.clone()).planes(), one.planes());
        let flat = codes_rgba(5, 4, |_, _, _| 77);
        assert_eq!(run("stretch:low=0,high=100", flat.clone()).planes(), flat.planes());
    }

    #[test]
    fn stretch_matches_exact_percentiles_and_keeps_alpha() {
        // Codes 0..=199 in red, 50..=249 in green, constant in blue, 20×10 pixels.
        let r = codes_rgba(20, 10, |c, x, y| match c {
            0 => (y * 20 + x) as u32,
            1 => 50 + (y * 20 + x) as u32,
            _ => 9,
        });
        let out = run("stretch:low=10,high=90", r.clone());
        // numpy.percentile(arange(200), [10, 90]) = 19.9, 179.1 (rank p/100·199).
        for (c, offset) in [(0usize, 0.0f64), (1, 50.0)] {
            let (lo, hi) = ((19.9 + offset) / 255.0, (179.1 + offset) / 255.0);
            for (v, o) in r.planes()[c].as_slice().iter().zip(out.planes()[c].as_slice()) {
                let want = ((f64::from(*v) - lo) / (hi - lo)).clamp(0.0, 1.0);
                assert!((f64::from(*o) - want).abs() < 1e-5, "channel {c}: {o} vs {want}");
            }
        }
        assert_eq!(out.planes()[2], r.planes()[2]);
        assert_eq!(out.planes()[3], r.planes()[3]);
        // Linked: percentiles of all three channels pooled, so blue (constant 9) moves too.
        let linked = run("stretch:low=0,high=100,linked=true", r.clone());
        let blue = linked.planes()[2].get(0, 0);
        assert!((f64::from(blue) - 9.0 / 249.0).abs() < 1e-6, "{blue}");
        assert_eq!(linked.planes()[0].get(0, 0), 0.0);
        assert_eq!(linked.planes()[1].get(19, 9), 1.0);
    }

    #[test]
    fn stretch_ignores_nan_on_float_data() {
        let p = Plane::from_vec(4, 1, vec![0.2, f32::NAN, 0.4, 0.6]).unwrap();
        let r = Raster::new(vec![p], Layout::Gray, Encoding::Linear).unwrap();
        let out = run("stretch:low=0,high=100,light=linear", r);
        let s = out.planes()[0].as_slice();
        assert!(
            s[0].abs() < 1e-4 && s[1].is_nan() && (s[2] - 0.5).abs() < 1e-4 && (s[3] - 1.0).abs() < 1e-4,
            "{s:?}"
        );
    }

    #[test]
    fn equalize_edge_cases() {
        let one = codes_rgba(1, 1, |_, _, _| 40);
        let out = run("equalize", one);
        // cdf(the only value) = 1: the pixel's luma becomes 1 and the channels scale with it.
        assert!(out.planes()[..3].iter().all(|p| (p.get(0, 0) - 1.0).abs() < 1e-6));
        assert_eq!(out.planes()[3].get(0, 0), 0.5);
        let flat =
            Raster::new(vec![Plane::filled(4, 4, 0.3).unwrap()], Layout::Gray, Encoding::Srgb).unwrap();
        assert!(run("equalize", flat).planes()[0].as_slice().iter().all(|&v| v == 1.0));
        let nan = Raster::new(
            vec![Plane::from_vec(3, 1, vec![0.1, f32::NAN, 0.9]).unwrap()],
            Layout::Gray,
            Encoding::Srgb,
        )
        .unwrap();
        let out = run("equalize", nan);
        let s = out.planes()[0].as_slice();
        assert!((s[0] - 0.5).abs() < 1e-6 && s[1].is_nan() && s[2] == 1.0, "{s:?}");
    }

    #[test]
    fn equalize_code_path_equals_the_per_sample_map() {
        // 8-bit codes over more than one block, one block holding NaN and ±∞:
        // the block path and CdfMap::apply must agree sample for sample.
        let mut v: Vec<f32> = (0..3000u32).map(|i| ((i * 37) % 256) as f32 / 255.0).collect();
        v[2100] = f32::NAN;
        v[2101] = f32::INFINITY;
        v[2102] = f32::NEG_INFINITY;
        let map = CdfMap::new(&[&v], Some(255)).unwrap();
        let want: Vec<f32> = v.iter().map(|&s| map.apply(s)).collect();
        let mut got = v.clone();
        map.apply_in_place(&mut got);
        for (i, (g, w)) in got.iter().zip(&want).enumerate() {
            assert!(g == w || (g.is_nan() && w.is_nan()), "sample {i}: {g} vs {w}");
        }
        assert_eq!((got[2101], got[2102]), (1.0, map.cdf[0]));
    }

    #[test]
    fn equalize_keeps_sixteen_bit_precision_and_flattens() {
        // 65536 distinct 16-bit codes, each once, squeezed into the bottom quarter
        // by a square law: equalisation must give back k/65536 for the k-th code
        // (each code its own bin), which an 8-bit histogram could not.
        let codes: Vec<f32> = (0..65536u32).map(|k| k as f32 / 65535.0).collect();
        let squeezed: Vec<f32> = codes.iter().map(|v| v * v * 0.25).collect();
        let mut r = Raster::new(
            vec![Plane::from_vec(256, 256, codes.clone()).unwrap()],
            Layout::Gray,
            Encoding::Srgb,
        )
        .unwrap();
        r.levels = Some(65535);
        let out = run("equalize", r);
        for (k, v) in out.planes()[0].as_slice().iter().enumerate() {
            assert!((f64::from(*v) - (k + 1) as f64 / 65536.0).abs() < 1e-6, "code {k}: {v}");
        }
        // Float data (no codes): 65536 bins, interpolated; the output histogram in
        // 16 bins is flat to within one bin's share of the float binning.
        let f = Raster::new(vec![Plane::from_vec(256, 256, squeezed).unwrap()], Layout::Gray, Encoding::Srgb)
            .unwrap();
        let out = run("equalize", f);
        let mut h = [0usize; 16];
        for &v in out.planes()[0].as_slice() {
            h[((v * 16.0) as usize).min(15)] += 1;
        }
        let (lo, hi) = (*h.iter().min().unwrap(), *h.iter().max().unwrap());
        assert!(hi - lo <= 2 * 65536 / 256, "{h:?}");
    }

    #[test]
    fn equalize_colour_keeps_channel_ratios() {
        let r = codes_rgba(16, 8, |c, x, y| ((x * 8 + y) * (c + 1) % 200) as u32 + 20);
        let out = run("equalize", r.clone());
        for i in 0..128 {
            let a: Vec<f32> = (0..3).map(|c| r.planes()[c].as_slice()[i]).collect();
            let b: Vec<f32> = (0..3).map(|c| out.planes()[c].as_slice()[i]).collect();
            if b.iter().all(|&v| v < 1.0) {
                assert!((b[0] / b[1] - a[0] / a[1]).abs() < 1e-4 && (b[2] / b[1] - a[2] / a[1]).abs() < 1e-4);
            }
        }
        let per = run("equalize:per-channel=true", r);
        assert_eq!(per.planes()[3], codes_rgba(16, 8, |_, _, _| 0).planes()[3]);
        // Each channel on its own: its largest value maps to 1.
        assert!(per.planes()[..3].iter().all(|p| p.as_slice().contains(&1.0)));
    }

    /// L*, C*ab and hab of every pixel of an RGB raster (CIE 15:2004 §8.2.1 via color::models).
    fn lch_of(r: &Raster) -> Vec<[f32; 3]> {
        use crate::raster::ColourModel::{Lch, Rgb};
        let p = r.planes();
        (0..r.width() * r.height())
            .map(|i| {
                let c = [0, 1, 2].map(|k| p[k].as_slice()[i]);
                crate::color::models::convert_pixel(Rgb, Lch, c, false)
            })
            .collect()
    }

    /// A 64×64 image of 4096 distinct, weakly coloured codes (chroma up to about
    /// 12, so L* can move anywhere without leaving the sRGB gamut).
    fn pastel() -> Raster {
        codes_rgba(64, 64, |c, x, y| {
            let base = 40 + (x * 64 + y) * 170 / 4096;
            (base + [(x % 8) * 2, (y % 8) * 2, ((x + y) % 8) * 2][c]) as u32
        })
    }

    #[test]
    fn lstar_equalize_keeps_hue_and_chroma_and_flattens_lstar() {
        let r = pastel();
        let out = run("equalize:lightness=lstar", r.clone());
        assert_eq!(out.planes()[3], r.planes()[3], "alpha kept");
        let (before, after) = (lch_of(&r), lch_of(&out));
        // Hue and chroma: a*, b* are held as f32 between the two f64 conversions
        // and the output as f32 R', G', B' (relative error 2⁻²⁴, which the steep
        // Lab cube root near black magnifies): 1e-4 in C*ab and, for C*ab ≥ 1,
        // 0.01° in hue bound it ten times over (measured worst 9.1e-6 and 2.4e-4°).
        // Pixels pushed to L* near 0 or 100 leave the narrow gamut there and clip;
        // they are counted, not compared.
        let (mut dc, mut dh, mut clipped) = (0.0f32, 0.0f32, 0);
        for (i, (b, a)) in before.iter().zip(&after).enumerate() {
            if out.planes()[..3].iter().any(|p| !(p.as_slice()[i] > 0.0 && p.as_slice()[i] < 1.0)) {
                clipped += 1;
                continue;
            }
            dc = dc.max((a[1] - b[1]).abs());
            if b[1] >= 1.0 {
                let d = (a[2] - b[2]).abs();
                dh = dh.max(d.min(360.0 - d));
            }
        }
        assert!(dc < 1e-4 && dh < 0.01, "chroma moved by {dc}, hue by {dh}°");
        assert!(clipped < 4096 / 20, "{clipped} pixels clipped");
        eprintln!("worst chroma change {dc:e}, hue {dh:e}°, {clipped} clipped pixels");
        // L* histogram of the output in 10 bins of 10 L* each: the 4096 distinct
        // L* values each get their own rank, so each bin holds 409.6 ± a few
        // (ranks falling on bin edges, float binning of L*/100 in 65536 bins).
        let mut h = [0usize; 10];
        for a in &after {
            h[((a[0] / 10.0) as usize).min(9)] += 1;
        }
        let (lo, hi) = (*h.iter().min().unwrap(), *h.iter().max().unwrap());
        assert!(lo >= 405 && hi <= 414, "L* histogram {h:?}");
        // The input was far from flat in L*: most pixels in a few bins.
        let mut h0 = [0usize; 10];
        before.iter().for_each(|b| h0[((b[0] / 10.0) as usize).min(9)] += 1);
        assert!(h0.iter().filter(|&&c| c == 0).count() >= 2, "{h0:?}");
    }

    #[test]
    fn lstar_clahe_keeps_hue_and_chroma() {
        let r = pastel();
        let out = run("clahe:tiles=4,lightness=lstar", r.clone());
        let (before, after) = (lch_of(&r), lch_of(&out));
        let mut moved = 0;
        for (i, (b, a)) in before.iter().zip(&after).enumerate() {
            if out.planes()[..3].iter().any(|p| !(p.as_slice()[i] > 0.0 && p.as_slice()[i] < 1.0)) {
                continue;
            }
            assert!((a[1] - b[1]).abs() < 1e-4, "chroma {b:?} → {a:?}");
            if b[1] >= 1.0 {
                let d = (a[2] - b[2]).abs();
                assert!(d.min(360.0 - d) < 0.01, "hue {b:?} → {a:?}");
            }
            moved += usize::from((a[0] - b[0]).abs() > 1.0);
        }
        assert!(moved > 2000, "clahe changed L* of only {moved} pixels");
    }

    #[test]
    fn lightness_choice_does_not_touch_gray_or_non_rgb_models() {
        let p = Plane::from_fn(40, 30, |x, y| ((x * 7 + y * 3) % 256) as f32 / 255.0).unwrap();
        let mut g = Raster::new(vec![p], Layout::Gray, Encoding::Srgb).unwrap();
        g.levels = Some(255);
        for op in ["equalize", "clahe:tiles=3"] {
            let sep = if op.contains(':') { ',' } else { ':' };
            let a = run(&format!("{op}{sep}lightness=luma"), g.clone());
            let b = run(&format!("{op}{sep}lightness=lstar"), g.clone());
            assert_eq!(a.planes(), b.planes(), "{op}");
        }
        let mut lab = pastel();
        lab.model = crate::raster::ColourModel::Lab;
        let e = crate::pipeline::Step::parse("equalize:lightness=lstar").unwrap().op.apply(lab).unwrap_err();
        assert!(e.to_string().contains("space:rgb"), "{e}");
        // Saturated colours: where no channel clips, hue is kept too.
        let vivid = codes_rgba(32, 32, |c, x, y| ((x * 8 + y * 3 * (c + 1)) % 256) as u32);
        let out = run("equalize:lightness=lstar", vivid.clone());
        let (before, after) = (lch_of(&vivid), lch_of(&out));
        let mut kept = 0;
        for (i, (b, a)) in before.iter().zip(&after).enumerate() {
            let inside = out.planes()[..3].iter().all(|p| p.as_slice()[i] > 0.0 && p.as_slice()[i] < 1.0);
            if inside && b[1] >= 1.0 {
                let d = (a[2] - b[2]).abs();
                assert!(d.min(360.0 - d) < 0.01 && (a[1] - b[1]).abs() < 1e-4, "{b:?} → {a:?}");
                kept += 1;
            }
        }
        assert!(kept > 100, "{kept}");
    }

    #[test]
    fn clahe_with_one_unclipped_tile_is_binned_equalize() {
        // 256 bins on 8-bit codes: bin(code/255) = code except code 255 → 255, so
        // each code has its own bin and one unclipped tile gives cdf(code) exactly.
        let p = Plane::from_fn(40, 30, |x, y| ((x * 7 + y * 3) % 256) as f32 / 255.0).unwrap();
        let mut r = Raster::new(vec![p], Layout::Gray, Encoding::Srgb).unwrap();
        r.levels = Some(255);
        let a = run("clahe:tiles=1,clip=1", r.clone());
        let b = run("equalize", r);
        let (d, _, _) = worst(&a.planes()[0], &b.planes()[0]);
        assert!(d < 1e-6, "{d}");
    }

    #[test]
    fn clahe_edge_cases_and_errors() {
        let one = Raster::new(vec![Plane::filled(1, 1, 0.4).unwrap()], Layout::Gray, Encoding::Srgb).unwrap();
        assert_eq!(run("clahe", one).planes()[0].get(0, 0), 1.0);
        let small = Raster::new(
            vec![Plane::from_fn(3, 2, |x, y| (x + y) as f32 / 4.0).unwrap()],
            Layout::Gray,
            Encoding::Srgb,
        )
        .unwrap();
        let out = run("clahe:tiles=16", small);
        assert!(out.planes()[0].as_slice().iter().all(|v| (0.0..=1.0).contains(v)));
        assert!(step_err("clahe:tiles=0").contains("tiles"));
        assert!(step_err("clahe:clip=0").contains("clip"));
        assert!(step_err("clahe:bins=1").contains("bins"));
    }

    #[test]
    fn clahe_is_continuous_and_thread_independent() {
        let p =
            Plane::from_fn(200, 120, |x, y| (0.3 + 0.4 * ((x as f32 / 200.0) * (y as f32 / 120.0))).min(1.0))
                .unwrap();
        let r = Raster::new(vec![p], Layout::Gray, Encoding::Srgb).unwrap();
        let out = run("clahe:tiles=4,clip=0.02", r.clone());
        // A smooth ramp stays smooth: neighbouring outputs differ by a small step
        // (no seams at tile borders).
        let o = &out.planes()[0];
        for y in 0..120 {
            for x in 1..200 {
                assert!((o.get(x, y) - o.get(x - 1, y)).abs() < 0.05, "jump at ({x}, {y})");
            }
        }
        let serial = rayon::ThreadPoolBuilder::new().num_threads(1).build().unwrap();
        assert_eq!(serial.install(|| run("clahe:tiles=4,clip=0.02", r)).planes(), out.planes());
    }

    #[test]
    fn unit_bin_is_the_clamped_floor() {
        for bins in [2u32, 256, 65536] {
            let (scale, last) = (bins as f32, bins - 1);
            let mut values = vec![f32::NAN, f32::INFINITY, f32::NEG_INFINITY, -1.0, -0.0, 1.0, 7.5, f32::MAX];
            values.extend((0..=bins).flat_map(|k| {
                let v = k as f32 / bins as f32;
                [v, f32::from_bits(v.to_bits().saturating_sub(1)), f32::from_bits(v.to_bits() + 1)]
            }));
            for v in values {
                let expected =
                    if v.is_nan() { 0 } else { ((v * scale).floor().max(0.0).min(last as f32)) as u32 };
                assert_eq!(unit_bin(v, scale, last), expected, "{v} among {bins}");
            }
        }
    }

    #[test]
    fn clahe_blended_row_maps_equal_the_four_map_lookup() {
        // The two interpolation paths (maps blended once per row, or four
        // lookups per sample) share their arithmetic, so agree to the bit,
        // NaN and out-of-range samples included.
        let p = Plane::from_fn(230, 90, |x, y| match (x * 31 + y * 17) % 97 {
            0 => f32::NAN,
            1 => -0.5,
            2 => 1.5,
            k => k as f32 / 96.0,
        })
        .unwrap();
        for (tiles, bins) in [(4, 16), (5, 256), (1, 2)] {
            let op = Clahe::new(tiles, 0.03, bins, false, Lightness::Luma).unwrap();
            let (mut a, mut b) = (p.clone(), p.clone());
            op.plane_with(&mut a, Some(true));
            op.plane_with(&mut b, Some(false));
            assert!(a.as_slice().iter().zip(b.as_slice()).all(|(x, y)| x.to_bits() == y.to_bits()));
        }
    }

    fn worst(a: &Plane, b: &Plane) -> (f32, usize, usize) {
        let mut best = (0.0f32, 0, 0);
        for (i, (p, q)) in a.as_slice().iter().zip(b.as_slice()).enumerate() {
            if (p - q).abs() > best.0 {
                best = ((p - q).abs(), i % a.width(), i / a.width());
            }
        }
        best
    }
}
