//! Exact geometry: `crop`, `flip`, `rotate` by quarter turns and `transpose`.
//! Samples are moved, never mixed, so these work in any encoding and are lossless.

use crate::error::{Error, ParamError};
use crate::ops::params::{Args, Kind, OpSpec, ParamSpec};
use crate::ops::{Domain, Operator};
use crate::raster::{Plane, Raster, transform};

/// The text of `pumice ops crop`, also the doc of [`Crop`].
macro_rules! crop_doc {
    () => {
        "Keeps the rectangle of `width × height` pixels whose top-left corner is (x, y).

```text
out(i, j) = in(x + i, y + j),   0 ≤ i < width, 0 ≤ j < height
```

The rectangle must lie inside the image. Resolution metadata is kept.
Domain: any (samples are moved). Source: common practice."
    };
}

#[doc = crop_doc!()]
#[derive(Debug)]
pub struct Crop {
    x: usize,
    y: usize,
    width: usize,
    height: usize,
}

impl Operator for Crop {
    fn domain(&self) -> Domain {
        Domain::Any
    }

    fn moves_samples_only(&self) -> bool {
        true
    }

    fn apply(&self, raster: Raster) -> Result<Raster, Error> {
        let (w, h) = (raster.width(), raster.height());
        if self.x + self.width > w || self.y + self.height > h {
            return Err(Error::Step {
                step: "crop".into(),
                message: format!(
                    "the rectangle x={} y={} width={} height={} reaches ({}, {}), outside the {w}×{h} image",
                    self.x,
                    self.y,
                    self.width,
                    self.height,
                    self.x + self.width,
                    self.y + self.height
                ),
            });
        }
        let planes = raster
            .planes()
            .iter()
            .map(|p| {
                let mut data = Vec::with_capacity(self.width * self.height);
                for y in self.y..self.y + self.height {
                    data.extend_from_slice(&p.row(y)[self.x..self.x + self.width]);
                }
                Plane::from_vec(self.width, self.height, data)
            })
            .collect::<Result<Vec<_>, _>>()?;
        let layout = raster.layout();
        raster.with_planes(planes, layout)
    }
}

pub static CROP: OpSpec = OpSpec {
    name: "crop",
    family: "geometry",
    summary: "keep a rectangle (x, y, width, height)",
    doc: crop_doc!(),
    main: None,
    params: &[
        ParamSpec { name: "x", kind: Kind::int(0.0, 1e9), default: Some("0"), help: "left edge, pixels" },
        ParamSpec { name: "y", kind: Kind::int(0.0, 1e9), default: Some("0"), help: "top edge, pixels" },
        ParamSpec { name: "width", kind: Kind::int(1.0, 1e9), default: None, help: "width, pixels" },
        ParamSpec { name: "height", kind: Kind::int(1.0, 1e9), default: None, help: "height, pixels" },
    ],
    build: build_crop,
};

fn build_crop(a: &Args) -> Result<Box<dyn Operator>, ParamError> {
    Ok(Box::new(Crop {
        x: a.int("x")? as usize,
        y: a.int("y")? as usize,
        width: a.int("width")? as usize,
        height: a.int("height")? as usize,
    }))
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
        "Turns the image clockwise by a multiple of 90°, exactly (no resampling).

```text
 90: out(x, y) = in(y, h-1-x)        (output is h × w)
180: out(x, y) = in(w-1-x, h-1-y)
270: out(x, y) = in(w-1-y, x)        (output is h × w)
```

Negative angles turn anticlockwise (-90 = 270). Angles that are not multiples
of 90° need resampling, which this build does not offer yet: they are refused.
Resolution metadata follows the turn. Domain: any (samples are moved).
Source: common practice."
    };
}

pub static ROTATE: OpSpec = OpSpec {
    name: "rotate",
    family: "geometry",
    summary: "turn clockwise by 90, 180 or 270 degrees, exactly",
    doc: rotate_doc!(),
    main: Some("angle"),
    params: &[ParamSpec {
        name: "angle",
        kind: Kind::real(-360.0, 360.0),
        default: None,
        help: "degrees clockwise; a multiple of 90",
    }],
    build: |a| {
        let angle = a.number("angle")?;
        if angle.rem_euclid(90.0) != 0.0 {
            return Err(ParamError::new(format!(
                "rotation by {angle}° needs resampling, which is not available yet; use a multiple of 90 (90, 180, 270)"
            )));
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

    #[test]
    fn crop_takes_the_rectangle_and_refuses_outside() {
        let c = Crop { x: 1, y: 1, width: 2, height: 1 };
        assert_eq!(c.apply(ramp(4, 3)).unwrap().planes()[0].as_slice(), &[5.0, 6.0]);
        let whole = Crop { x: 0, y: 0, width: 4, height: 3 };
        assert_eq!(whole.apply(ramp(4, 3)).unwrap(), ramp(4, 3));
        let outside = Crop { x: 3, y: 0, width: 2, height: 1 };
        assert!(outside.apply(ramp(4, 3)).unwrap_err().to_string().contains("outside the 4×3 image"));
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
