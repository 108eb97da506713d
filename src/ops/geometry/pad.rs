//! `pad`: grow the canvas to a size, an aspect ratio or by margins.

use super::Anchor;
use super::anchor::ANCHOR_PARAM;
use crate::error::{Error, ParamError};
use crate::ops::params::{Args, Kind, OpSpec, ParamSpec};
use crate::ops::{Domain, Operator};
use crate::raster::{Layout, Plane, Raster};
use crate::tile::Border;

/// The text of `pumice ops pad`, also the doc of [`Pad`].
macro_rules! pad_doc {
    () => {
        "Grows the canvas around the image.

```text
size  = image + margins (left, right, top, bottom)
then  grown to width × height (0: keep), or to the aspect W:H, placing the image by anchor
out(X, Y) = in(X − x0, Y − y0) inside the image, else the border rule:
            constant → fill (a colour, or transparent: an alpha channel is added)
            reflect | mirror | replicate | wrap → samples of the image, as the rule says
```

Padding never shrinks: a target smaller than the image is an error (use crop).
Domain: any (samples are moved; a fill colour is converted to the image's
encoding). Resolution metadata is kept. Source: common practice."
    };
}

#[doc = pad_doc!()]
#[derive(Debug)]
pub struct Pad {
    width: usize,
    height: usize,
    aspect: Option<f64>,
    margins: [usize; 4],
    anchor: Anchor,
    fill: Option<[f32; 3]>,
    border: Option<Border>,
}

impl Pad {
    /// The canvas size and the image's offset in it, for a `w × h` image.
    fn plan(&self, w: usize, h: usize) -> Result<(usize, usize, usize, usize), Error> {
        let [left, right, top, bottom] = self.margins;
        // The image with its margins, then the canvas it is placed in.
        let (bw, bh) = (w + left + right, h + top + bottom);
        let (mut cw, mut ch) = (bw, bh);
        if let Some(a) = self.aspect {
            if (cw as f64) / (ch as f64) < a {
                cw = ((ch as f64) * a).round() as usize;
            } else {
                ch = ((cw as f64) / a).round() as usize;
            }
        }
        let tw = if self.width == 0 { cw } else { self.width };
        let th = if self.height == 0 { ch } else { self.height };
        if tw < cw || th < ch {
            return Err(Error::Step {
                step: "pad".into(),
                message: format!(
                    "pad cannot shrink the {cw}×{ch} image (with margins) to {tw}×{th}; use crop"
                ),
            });
        }
        let (ox, oy) = self.anchor.offset(tw - bw, th - bh);
        Ok((tw, th, left + ox, top + oy))
    }
}

impl Operator for Pad {
    fn domain(&self) -> Domain {
        Domain::Any
    }

    fn output_size(&self, width: usize, height: usize) -> Result<(usize, usize), Error> {
        self.plan(width, height).map(|(w, h, _, _)| (w, h))
    }

    fn apply(&self, raster: Raster) -> Result<Raster, Error> {
        let (w, h) = (raster.width(), raster.height());
        let (tw, th, ox, oy) = self.plan(w, h)?;
        let transparent = self.border.is_none() && self.fill.is_none();
        let raster = if transparent { super::with_alpha(raster)? } else { raster };
        let fills = super::fill_values(&raster, self.fill);
        let layout: Layout = raster.layout();
        let planes = raster
            .planes()
            .iter()
            .zip(fills)
            .map(|(p, fill)| {
                let border = self.border.unwrap_or(Border::Constant(fill));
                Plane::from_fn(tw, th, |x, y| {
                    let sx = border.index(x as isize - ox as isize, w);
                    let sy = border.index(y as isize - oy as isize, h);
                    match (sx, sy) {
                        (Some(sx), Some(sy)) => p.get(sx, sy),
                        _ => border.constant_value(),
                    }
                })
            })
            .collect::<Result<Vec<_>, _>>()?;
        raster.with_planes(planes, layout)
    }
}

pub static PAD: OpSpec = OpSpec {
    name: "pad",
    family: "geometry",
    summary: "grow the canvas to a size, aspect ratio or by margins, with a colour or a border rule",
    doc: pad_doc!(),
    main: None,
    params: &[
        ParamSpec {
            name: "width",
            kind: Kind::int(0.0, 1e6),
            default: Some("0"),
            help: "canvas width, pixels (0: keep)",
        },
        ParamSpec {
            name: "height",
            kind: Kind::int(0.0, 1e6),
            default: Some("0"),
            help: "canvas height, pixels (0: keep)",
        },
        ParamSpec {
            name: "aspect",
            kind: Kind::Aspect,
            default: Some("none"),
            help: "grow to this aspect (W:H)",
        },
        ParamSpec {
            name: "left",
            kind: Kind::int(0.0, 1e6),
            default: Some("0"),
            help: "margin added on the left",
        },
        ParamSpec {
            name: "right",
            kind: Kind::int(0.0, 1e6),
            default: Some("0"),
            help: "margin added on the right",
        },
        ParamSpec {
            name: "top",
            kind: Kind::int(0.0, 1e6),
            default: Some("0"),
            help: "margin added at the top",
        },
        ParamSpec {
            name: "bottom",
            kind: Kind::int(0.0, 1e6),
            default: Some("0"),
            help: "margin added at the bottom",
        },
        ANCHOR_PARAM,
        ParamSpec {
            name: "fill",
            kind: Kind::Colour,
            default: Some("white"),
            help: "colour of the new area, or transparent",
        },
        ParamSpec {
            name: "border",
            kind: Kind::Choice(&["constant", "reflect", "mirror", "replicate", "wrap"]),
            default: Some("constant"),
            help: "constant uses fill; the others extend the image",
        },
    ],
    build: build_pad,
};

fn build_pad(a: &Args) -> Result<Box<dyn Operator>, ParamError> {
    let aspect = a.number("aspect")?;
    let border = match a.choice("border")? {
        "constant" => None,
        name => Border::from_name(name, 0.0),
    };
    Ok(Box::new(Pad {
        width: a.int("width")? as usize,
        height: a.int("height")? as usize,
        aspect: (aspect > 0.0).then_some(aspect),
        margins: [
            a.int("left")? as usize,
            a.int("right")? as usize,
            a.int("top")? as usize,
            a.int("bottom")? as usize,
        ],
        anchor: Anchor::from_name(a.choice("anchor")?)?,
        fill: a.colour("fill")?,
        border,
    }))
}

#[cfg(test)]
mod tests {
    //! Edge cases: 1×1 images, targets smaller than the image, transparent fill
    //! adding alpha, border rules.
    use super::*;
    use crate::raster::Encoding;

    fn pad(text: &str, r: Raster) -> Result<Raster, Error> {
        crate::pipeline::Step::parse(text).unwrap().op.apply(r)
    }

    fn ramp(w: usize, h: usize) -> Raster {
        let p = Plane::from_fn(w, h, |x, y| (y * w + x) as f32 / 10.0).unwrap();
        Raster::new(vec![p], Layout::Gray, Encoding::Srgb).unwrap()
    }

    #[test]
    fn pads_to_size_aspect_and_margins() {
        let out = pad("pad:width=5,height=3,fill=black", ramp(3, 1)).unwrap();
        assert_eq!((out.width(), out.height()), (5, 3));
        assert_eq!(out.planes()[0].row(1), &[0.0, 0.0, 0.1, 0.2, 0.0]);
        let centred = pad("pad:aspect=1:1", ramp(4, 2)).unwrap();
        assert_eq!(centred.planes()[0].row(1)[1], 0.1, "centred: one row above");
        let out = pad("pad:aspect=1:1,anchor=top", ramp(4, 2)).unwrap();
        assert_eq!((out.width(), out.height()), (4, 4));
        assert_eq!(out.planes()[0].row(0)[1], 0.1);
        assert_eq!(out.planes()[0].row(3)[1], 1.0, "white fill");
        let out = pad("pad:left=2,border=reflect", ramp(3, 1)).unwrap();
        assert_eq!(out.planes()[0].row(0), &[0.1, 0.0, 0.0, 0.1, 0.2]);
        assert!(pad("pad:width=2", ramp(3, 1)).unwrap_err().to_string().contains("use crop"));
    }

    #[test]
    fn transparent_fill_adds_alpha() {
        let out = pad("pad:left=1,fill=transparent", ramp(1, 1)).unwrap();
        assert_eq!(out.layout(), Layout::GrayAlpha);
        assert_eq!(out.planes()[1].as_slice(), &[0.0, 1.0]);
    }
}
