//! Geometry: `crop`, `pad`, `flip`, `transpose`, `rotate` (quarter turns exactly,
//! other angles by resampling) and `resize`. Quarter turns, flips, crops and
//! pads move samples without mixing them; resampling mixes light.

mod anchor;
pub mod kernels;
mod pad;
pub mod resize;
mod rotate;

pub use anchor::Anchor;
pub use pad::PAD;
pub use resize::RESIZE;
pub use rotate::Rotate;

use crate::error::{Error, ParamError};
use crate::ops::params::{Args, Kind, OpSpec, ParamSpec};
use crate::ops::{Domain, Operator};
use crate::raster::{Plane, Raster, transform};

/// The raster with an opaque alpha plane added if it has none.
fn with_alpha(raster: Raster) -> Result<Raster, Error> {
    if raster.layout().has_alpha() {
        return Ok(raster);
    }
    let layout = raster.layout().with_alpha(true);
    let mut planes = raster.planes().to_vec();
    planes.push(Plane::filled(raster.width(), raster.height(), 1.0)?);
    raster.with_planes(planes, layout)
}

/// One fill value per plane of `raster` for `colour` (sRGB-encoded; `None` is
/// transparent black), in the raster's encoding; a gray image takes the
/// colour's luminance (BT.709 weights on linear light). Alpha is 1 for a
/// colour, 0 for transparent.
fn fill_values(raster: &Raster, colour: Option<[f32; 3]>) -> Vec<f32> {
    use crate::color::{luma, srgb};
    use crate::raster::Encoding;
    let layout = raster.layout();
    let linear = colour.unwrap_or([0.0; 3]).map(srgb::decode);
    let values: Vec<f32> = if layout.colour_channels() == 1 {
        vec![luma::BT709.iter().zip(linear).map(|(w, c)| w * c).sum()]
    } else {
        linear.to_vec()
    };
    let mut out: Vec<f32> = values
        .into_iter()
        .map(|v| if raster.encoding == Encoding::Srgb { srgb::encode(v) } else { v })
        .collect();
    if layout.has_alpha() {
        out.push(if colour.is_some() { 1.0 } else { 0.0 });
    }
    out
}

/// A rectangle of pixels: top-left corner and size.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct Rect {
    pub x: usize,
    pub y: usize,
    pub width: usize,
    pub height: usize,
}

impl Rect {
    /// The samples of `p` inside the rectangle (which must lie inside `p`).
    pub fn cut(&self, p: &Plane) -> Result<Plane, Error> {
        let mut data = Vec::with_capacity(self.width * self.height);
        for y in self.y..self.y + self.height {
            data.extend_from_slice(&p.row(y)[self.x..self.x + self.width]);
        }
        Plane::from_vec(self.width, self.height, data)
    }
}

/// The text of `pumice ops crop`, also the doc of [`Crop`].
macro_rules! crop_doc {
    () => {
        "Keeps a rectangle of the image.

```text
region  = the image less the margins left, right, top, bottom
aspect given:  the largest rectangle of that aspect inside the region, placed by anchor
otherwise:     the rectangle at (x, y) of the region, width × height
               (0 means: to the region's right or bottom edge)
out(i, j) = in(x0 + i, y0 + j)
```

Examples: `crop:x=10,y=20,width=300,height=200`, `crop:left=40,right=40`,
`crop:aspect=4:3,anchor=top`. The rectangle must lie inside the image.
Resolution metadata is kept. Domain: any (samples are moved). Source: common practice."
    };
}

#[doc = crop_doc!()]
#[derive(Debug)]
pub struct Crop {
    x: usize,
    y: usize,
    width: usize,
    height: usize,
    margins: [usize; 4],
    aspect: Option<f64>,
    anchor: Anchor,
}

impl Crop {
    /// The rectangle kept from a `w × h` image.
    pub fn rect(&self, w: usize, h: usize) -> Result<Rect, Error> {
        let fail = |message: String| Error::Step { step: "crop".into(), message };
        let [left, right, top, bottom] = self.margins;
        if left + right >= w || top + bottom >= h {
            return Err(fail(format!(
                "the margins left={left} right={right} top={top} bottom={bottom} leave nothing of the {w}×{h} image"
            )));
        }
        let (rw, rh) = (w - left - right, h - top - bottom);
        if let Some(aspect) = self.aspect {
            // The largest width × height with width / height = aspect inside rw × rh.
            let (cw, ch) = if (rw as f64) / (rh as f64) > aspect {
                (((rh as f64) * aspect).round().max(1.0) as usize, rh)
            } else {
                (rw, ((rw as f64) / aspect).round().max(1.0) as usize)
            };
            let (cw, ch) = (cw.min(rw), ch.min(rh));
            let (ox, oy) = self.anchor.offset(rw - cw, rh - ch);
            return Ok(Rect { x: left + ox, y: top + oy, width: cw, height: ch });
        }
        let width = if self.width == 0 { rw.saturating_sub(self.x) } else { self.width };
        let height = if self.height == 0 { rh.saturating_sub(self.y) } else { self.height };
        if width == 0 || height == 0 || self.x + width > rw || self.y + height > rh {
            return Err(fail(format!(
                "the rectangle x={} y={} width={} height={} reaches ({}, {}), outside the {rw}×{rh} {}",
                self.x,
                self.y,
                width,
                height,
                self.x + width,
                self.y + height,
                if self.margins == [0; 4] {
                    "image".to_string()
                } else {
                    format!("region inside the margins of the {w}×{h} image")
                }
            )));
        }
        Ok(Rect { x: left + self.x, y: top + self.y, width, height })
    }
}

impl Operator for Crop {
    fn domain(&self) -> Domain {
        Domain::Any
    }

    fn moves_samples_only(&self) -> bool {
        true
    }

    fn output_size(&self, width: usize, height: usize) -> Result<(usize, usize), Error> {
        let r = self.rect(width, height)?;
        Ok((r.width, r.height))
    }

    fn apply(&self, raster: Raster) -> Result<Raster, Error> {
        let rect = self.rect(raster.width(), raster.height())?;
        let planes = raster.planes().iter().map(|p| rect.cut(p)).collect::<Result<Vec<_>, _>>()?;
        let layout = raster.layout();
        raster.with_planes(planes, layout)
    }
}

pub static CROP: OpSpec = OpSpec {
    name: "crop",
    family: "geometry",
    summary: "keep a rectangle: position and size, margins, or an aspect ratio",
    doc: crop_doc!(),
    main: None,
    params: &[
        ParamSpec {
            name: "x",
            kind: Kind::int(0.0, 1e9),
            default: Some("0"),
            help: "left edge inside the region, pixels",
        },
        ParamSpec {
            name: "y",
            kind: Kind::int(0.0, 1e9),
            default: Some("0"),
            help: "top edge inside the region, pixels",
        },
        ParamSpec {
            name: "width",
            kind: Kind::int(0.0, 1e9),
            default: Some("0"),
            help: "width, pixels (0: to the edge)",
        },
        ParamSpec {
            name: "height",
            kind: Kind::int(0.0, 1e9),
            default: Some("0"),
            help: "height, pixels (0: to the edge)",
        },
        ParamSpec {
            name: "left",
            kind: Kind::int(0.0, 1e9),
            default: Some("0"),
            help: "margin removed on the left",
        },
        ParamSpec {
            name: "right",
            kind: Kind::int(0.0, 1e9),
            default: Some("0"),
            help: "margin removed on the right",
        },
        ParamSpec {
            name: "top",
            kind: Kind::int(0.0, 1e9),
            default: Some("0"),
            help: "margin removed at the top",
        },
        ParamSpec {
            name: "bottom",
            kind: Kind::int(0.0, 1e9),
            default: Some("0"),
            help: "margin removed at the bottom",
        },
        ParamSpec {
            name: "aspect",
            kind: Kind::Aspect,
            default: Some("none"),
            help: "keep the largest rectangle of this aspect (W:H)",
        },
        anchor::ANCHOR_PARAM,
    ],
    build: build_crop,
};

fn build_crop(a: &Args) -> Result<Box<dyn Operator>, ParamError> {
    let aspect = a.number("aspect")?;
    let crop = Crop {
        x: a.int("x")? as usize,
        y: a.int("y")? as usize,
        width: a.int("width")? as usize,
        height: a.int("height")? as usize,
        margins: [
            a.int("left")? as usize,
            a.int("right")? as usize,
            a.int("top")? as usize,
            a.int("bottom")? as usize,
        ],
        aspect: (aspect > 0.0).then_some(aspect),
        anchor: Anchor::from_name(a.choice("anchor")?)?,
    };
    if crop.aspect.is_some() && (crop.width > 0 || crop.height > 0 || crop.x > 0 || crop.y > 0) {
        return Err(ParamError::new("give either aspect (with anchor) or x, y, width, height, not both"));
    }
    Ok(Box::new(crop))
}

/// An exact rearrangement of every plane.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Move {
    FlipHorizontal,
    FlipVertical,
    Rotate180,
    RotateCw,
    RotateCcw,
    Transpose,
    Transverse,
}

impl Move {
    /// True when the move exchanges width and height.
    pub fn swaps_sides(self) -> bool {
        matches!(self, Move::RotateCw | Move::RotateCcw | Move::Transpose | Move::Transverse)
    }

    /// Applies the move to one plane.
    pub fn apply_plane(self, p: Plane) -> Plane {
        let mut p = p;
        match self {
            Move::FlipHorizontal => transform::flip_horizontal(&mut p),
            Move::FlipVertical => transform::flip_vertical(&mut p),
            Move::Rotate180 => transform::rotate_180(&mut p),
            Move::RotateCw => return transform::rotate_90_cw(&p),
            Move::RotateCcw => return transform::rotate_90_ccw(&p),
            Move::Transpose => return transform::transpose(&p),
            Move::Transverse => return transform::transverse(&p),
        }
        p
    }

    /// Applies the move to every plane, exchanging x and y resolution when the sides swap.
    pub fn apply_raster(self, raster: Raster) -> Result<Raster, Error> {
        let layout = raster.layout();
        let mut meta = raster.metadata.clone();
        if self.swaps_sides() {
            meta.resolution = meta.resolution.map(|r| r.swapped());
        }
        let (encoding, levels) = (raster.encoding, raster.levels);
        let planes = raster.into_planes().into_iter().map(|p| self.apply_plane(p)).collect();
        let mut out = Raster::new(planes, layout, encoding)?;
        out.metadata = meta;
        out.levels = levels;
        Ok(out)
    }
}

/// The operator form of a [`Move`] (`flip`, `rotate`, `transpose`).
#[derive(Debug)]
pub struct Rearrange(pub Option<Move>);

impl Operator for Rearrange {
    fn domain(&self) -> Domain {
        Domain::Any
    }

    fn moves_samples_only(&self) -> bool {
        true
    }

    fn apply(&self, raster: Raster) -> Result<Raster, Error> {
        match self.0 {
            Some(m) => m.apply_raster(raster),
            None => Ok(raster),
        }
    }
}

/// The text of `pumice ops flip`.
macro_rules! flip_doc {
    () => {
        "Mirrors the image.

```text
horizontal: out(x, y) = in(w-1-x, y)
vertical:   out(x, y) = in(x, h-1-y)
both:       out(x, y) = in(w-1-x, h-1-y)   (the same as rotate:180)
```

Domain: any (samples are moved). Source: common practice."
    };
}

pub static FLIP: OpSpec = OpSpec {
    name: "flip",
    family: "geometry",
    summary: "mirror left-right, top-bottom or both",
    doc: flip_doc!(),
    main: Some("direction"),
    params: &[ParamSpec {
        name: "direction",
        kind: Kind::Choice(&["horizontal", "vertical", "both"]),
        default: Some("horizontal"),
        help: "horizontal mirrors left and right",
    }],
    build: |a| {
        let m = match a.choice("direction")? {
            "vertical" => Move::FlipVertical,
            "both" => Move::Rotate180,
            _ => Move::FlipHorizontal,
        };
        Ok(Box::new(Rearrange(Some(m))))
    },
};

/// The text of `pumice ops rotate`.
macro_rules! rotate_doc {
    () => {
        "Turns the image clockwise; multiples of 90° exactly (no resampling).

```text
 90: out(x, y) = in(y, h-1-x)        (output is h × w)
180: out(x, y) = in(w-1-x, h-1-y)
270: out(x, y) = in(w-1-y, x)        (output is h × w)
```

Negative angles turn anticlockwise (-90 = 270). Other angles resample by
inverse mapping about the centre:
(u, v) = (cos θ·dx + sin θ·dy, −sin θ·dx + cos θ·dy) from the output pixel's
offset (dx, dy) to the centre, interpolated with filter=nearest | bilinear |
bicubic (Catmull–Rom, default); expand=true grows the canvas to
⌈w|cos θ| + h|sin θ|⌉ × ⌈w|sin θ| + h|cos θ|⌉; uncovered corners get fill
(a colour, or transparent: an alpha channel is added).
Resolution metadata follows quarter turns. Domain: any for quarter turns and
nearest; linear light for interpolation (alpha premultiplied).
Source: common practice."
    };
}

pub static ROTATE: OpSpec = OpSpec {
    name: "rotate",
    family: "geometry",
    summary: "turn clockwise: quarter turns exactly, other angles by interpolation",
    doc: rotate_doc!(),
    main: Some("angle"),
    params: &[
        ParamSpec {
            name: "angle",
            kind: Kind::real(-360.0, 360.0),
            default: None,
            help: "degrees clockwise",
        },
        ParamSpec {
            name: "filter",
            kind: Kind::Choice(&["nearest", "bilinear", "bicubic"]),
            default: Some("bicubic"),
            help: "interpolation for angles that are not quarter turns",
        },
        ParamSpec {
            name: "expand",
            kind: Kind::Bool,
            default: Some("true"),
            help: "grow the canvas to hold the whole image",
        },
        ParamSpec {
            name: "fill",
            kind: Kind::Colour,
            default: Some("transparent"),
            help: "colour of the uncovered corners",
        },
    ],
    build: |a| {
        let angle = a.number("angle")?;
        if angle.rem_euclid(90.0) != 0.0 {
            return rotate::build(angle, a);
        }
        let m = match (angle.rem_euclid(360.0) / 90.0) as u32 {
            1 => Some(Move::RotateCw),
            2 => Some(Move::Rotate180),
            3 => Some(Move::RotateCcw),
            _ => None,
        };
        Ok(Box::new(Rearrange(m)))
    },
};

/// The text of `pumice ops transpose`.
macro_rules! transpose_doc {
    () => {
        "Exchanges rows and columns (mirror across the main diagonal).

```text
out(x, y) = in(y, x)     (output is h × w)
```

Domain: any (samples are moved). Source: common practice."
    };
}

pub static TRANSPOSE: OpSpec = OpSpec {
    name: "transpose",
    family: "geometry",
    summary: "exchange rows and columns",
    doc: transpose_doc!(),
    main: None,
    params: &[],
    build: |_| Ok(Box::new(Rearrange(Some(Move::Transpose)))),
};

#[cfg(test)]
mod tests {
    //! Edge cases: crop of the whole image, crop outside, rotate by 0/360/-90,
    //! resolution swapped by quarter turns.
    use super::*;
    use crate::raster::{Encoding, Layout, Resolution, ResolutionUnit};

    fn ramp(w: usize, h: usize) -> Raster {
        let p = Plane::from_fn(w, h, |x, y| (y * w + x) as f32).unwrap();
        Raster::new(vec![p], Layout::Gray, Encoding::Srgb).unwrap()
    }

    fn crop(text: &str) -> Crop {
        let step = crate::pipeline::Step::parse(text).unwrap();
        let args = &step.args;
        let aspect = args.number("aspect").unwrap();
        Crop {
            x: args.int("x").unwrap() as usize,
            y: args.int("y").unwrap() as usize,
            width: args.int("width").unwrap() as usize,
            height: args.int("height").unwrap() as usize,
            margins: ["left", "right", "top", "bottom"].map(|m| args.int(m).unwrap() as usize),
            aspect: (aspect > 0.0).then_some(aspect),
            anchor: Anchor::from_name(args.choice("anchor").unwrap()).unwrap(),
        }
    }

    #[test]
    fn crop_takes_the_rectangle_and_refuses_outside() {
        let c = crop("crop:x=1,y=1,width=2,height=1");
        assert_eq!(c.apply(ramp(4, 3)).unwrap().planes()[0].as_slice(), &[5.0, 6.0]);
        assert_eq!(crop("crop").apply(ramp(4, 3)).unwrap(), ramp(4, 3));
        let outside = crop("crop:x=3,width=2,height=1");
        assert!(outside.apply(ramp(4, 3)).unwrap_err().to_string().contains("outside the 4×3 image"));
    }

    #[test]
    fn crop_by_margins_and_aspect() {
        let r = crop("crop:left=1,right=1,top=1").rect(6, 4).unwrap();
        assert_eq!(r, Rect { x: 1, y: 1, width: 4, height: 3 });
        // 6×4 to 1:1 centred: 4×4 at x = 1.
        assert_eq!(crop("crop:aspect=1:1").rect(6, 4).unwrap(), Rect { x: 1, y: 0, width: 4, height: 4 });
        assert_eq!(
            crop("crop:aspect=1,anchor=right").rect(6, 4).unwrap(),
            Rect { x: 2, y: 0, width: 4, height: 4 }
        );
        assert_eq!(
            crop("crop:aspect=3:1,anchor=bottom").rect(6, 4).unwrap(),
            Rect { x: 0, y: 2, width: 6, height: 2 }
        );
        assert!(crop("crop:left=3,right=3").rect(6, 4).is_err());
        assert!(crate::pipeline::Step::parse("crop:aspect=4:3,width=2").is_err());
    }

    #[test]
    fn quarter_turns_swap_resolution() {
        let mut r = ramp(3, 2);
        r.metadata.resolution = Some(Resolution { x: 300.0, y: 150.0, unit: ResolutionUnit::Inch });
        let out = Move::RotateCw.apply_raster(r).unwrap();
        assert_eq!((out.width(), out.height()), (2, 3));
        assert_eq!(out.metadata.resolution.unwrap().x, 150.0);
    }
}
