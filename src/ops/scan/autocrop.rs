//! `autocrop`: cuts away uniform borders, or crops to the content's bounding box.

use crate::error::{Error, ParamError};
use crate::ops::geometry::Rect;
use crate::ops::params::{Args, Kind, OpSpec, ParamSpec};
use crate::ops::{Domain, Operator};
use crate::raster::{Note, NoteValue, Plane, Raster};

/// The text of `pumice ops autocrop`, also the doc of [`Autocrop`].
macro_rules! autocrop_doc {
    () => {
        "Crops the image to what is not border.

```text
mode=border (default): each side's border colour B is the per-plane median of
    that side's outermost row or column; a side gives up its outer line while
    every sample of the line (within the rectangle left so far) is within
    tolerance of B on every colour plane: |in − B| ≤ tolerance.
    The four sides repeat until none changes, so a black film edge on
    the left and a white lid on top are both removed.
mode=content: the background B is the per-plane median of the four outermost
    lines; content = samples with |in − B| > tolerance on some colour plane;
    the result is their bounding box grown by margin pixels on each side
    (clipped to the image).
```

Paper margins as even as the tolerance are border too: keep the tolerance
below the paper's own variation (a few hundredths for a scan of real paper)
to remove only a lid or film edge, or use mode=content with a margin.
A uniform image (nothing but border, or no content) is kept whole, and a side
never takes the last row or column. NaN samples count as content. Alpha is
cut with the colour planes but not compared. The kept rectangle goes to the
run notes. Tolerance compares encoded (perceptual) values, so one tolerance
means the same on 8-bit, 16-bit and float sources.
Domain: encoded values (samples are moved, not mixed). Source: common practice."
    };
}

/// What `autocrop` removes.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum CropMode {
    /// Uniform borders, side by side.
    Border,
    /// Everything outside the content's bounding box, plus a margin.
    Content { margin: usize },
}

#[doc = autocrop_doc!()]
#[derive(Debug)]
pub struct Autocrop {
    mode: CropMode,
    tolerance: f32,
}

impl Autocrop {
    pub fn new(mode: CropMode, tolerance: f32) -> Result<Autocrop, ParamError> {
        if !(0.0..=1.0).contains(&tolerance) {
            return Err(ParamError::new(format!("tolerance must be within 0..1, got {tolerance}")));
        }
        Ok(Autocrop { mode, tolerance })
    }

    /// The rectangle the crop keeps, for the colour planes of `raster`.
    pub fn rect(&self, raster: &Raster) -> Rect {
        let planes = &raster.planes()[..raster.layout().colour_channels()];
        match self.mode {
            CropMode::Border => border_rect(planes, self.tolerance),
            CropMode::Content { margin } => content_rect(planes, self.tolerance, margin),
        }
    }
}

/// The samples of line `k` of one side: a row (`horizontal`) or a column, over `range`.
fn line(p: &Plane, horizontal: bool, k: usize, range: std::ops::Range<usize>) -> Vec<f32> {
    if horizontal { p.row(k)[range].to_vec() } else { range.map(|y| p.get(k, y)).collect() }
}

fn matches(
    planes: &[Plane],
    horizontal: bool,
    k: usize,
    range: std::ops::Range<usize>,
    b: &[f32],
    tol: f32,
) -> bool {
    planes
        .iter()
        .zip(b)
        .all(|(p, &b)| line(p, horizontal, k, range.clone()).iter().all(|&v| within(v, b, tol)))
}

/// |v − b| ≤ tol (false for NaN).
fn within(v: f32, b: f32, tol: f32) -> bool {
    (v - b).abs() <= tol
}

fn border_rect(planes: &[Plane], tol: f32) -> Rect {
    let (w, h) = (planes[0].width(), planes[0].height());
    let whole = Rect { x: 0, y: 0, width: w, height: h };
    let colour = |horizontal: bool, k: usize| -> Option<Vec<f32>> {
        let len = if horizontal { w } else { h };
        planes.iter().map(|p| super::median(&mut line(p, horizontal, k, 0..len))).collect()
    };
    let (Some(top), Some(bottom), Some(left), Some(right)) =
        (colour(true, 0), colour(true, h - 1), colour(false, 0), colour(false, w - 1))
    else {
        return whole;
    };
    // Half-open bounds of what is left.
    let (mut x0, mut x1, mut y0, mut y1) = (0, w, 0, h);
    loop {
        let before = (x0, x1, y0, y1);
        while y1 - y0 > 1 && matches(planes, true, y0, x0..x1, &top, tol) {
            y0 += 1;
        }
        while y1 - y0 > 1 && matches(planes, true, y1 - 1, x0..x1, &bottom, tol) {
            y1 -= 1;
        }
        while x1 - x0 > 1 && matches(planes, false, x0, y0..y1, &left, tol) {
            x0 += 1;
        }
        while x1 - x0 > 1 && matches(planes, false, x1 - 1, y0..y1, &right, tol) {
            x1 -= 1;
        }
        if (x0, x1, y0, y1) == before {
            break;
        }
    }
    // Nothing but border: keep the image whole rather than a sliver.
    if (x1 - x0 == 1 || y1 - y0 == 1) && (0..h).all(|y| matches(planes, true, y, 0..w, &top, tol)) {
        return whole;
    }
    Rect { x: x0, y: y0, width: x1 - x0, height: y1 - y0 }
}

fn content_rect(planes: &[Plane], tol: f32, margin: usize) -> Rect {
    let (w, h) = (planes[0].width(), planes[0].height());
    let whole = Rect { x: 0, y: 0, width: w, height: h };
    let background: Option<Vec<f32>> = planes
        .iter()
        .map(|p| {
            let mut edge = line(p, true, 0, 0..w);
            edge.extend(line(p, true, h - 1, 0..w));
            edge.extend(line(p, false, 0, 0..h));
            edge.extend(line(p, false, w - 1, 0..h));
            super::median(&mut edge)
        })
        .collect();
    let Some(background) = background else { return whole };
    let (mut x0, mut x1, mut y0, mut y1) = (w, 0, h, 0);
    for y in 0..h {
        for x in 0..w {
            // Not within tolerance, so NaN counts as content.
            let content = planes.iter().zip(&background).any(|(p, &b)| !within(p.get(x, y), b, tol));
            if content {
                x0 = x0.min(x);
                x1 = x1.max(x + 1);
                y0 = y0.min(y);
                y1 = y1.max(y + 1);
            }
        }
    }
    if x1 == 0 {
        return whole;
    }
    let (x0, y0) = (x0.saturating_sub(margin), y0.saturating_sub(margin));
    let (x1, y1) = ((x1 + margin).min(w), (y1 + margin).min(h));
    Rect { x: x0, y: y0, width: x1 - x0, height: y1 - y0 }
}

impl Operator for Autocrop {
    fn domain(&self) -> Domain {
        Domain::Encoded
    }

    fn moves_samples_only(&self) -> bool {
        true
    }

    fn apply(&self, raster: Raster) -> Result<Raster, Error> {
        let r = self.rect(&raster);
        let planes = raster.planes().iter().map(|p| r.cut(p)).collect::<Result<Vec<_>, _>>()?;
        let layout = raster.layout();
        let mut out = raster.with_planes(planes, layout)?;
        out.metadata.notes.push(Note {
            operator: "autocrop",
            name: "kept",
            value: NoteValue::Text(format!("{}×{} at x={}, y={}", r.width, r.height, r.x, r.y)),
        });
        Ok(out)
    }
}

pub static AUTOCROP: OpSpec = OpSpec {
    name: "autocrop",
    family: "scan",
    summary: "cut away uniform borders, or crop to the content with a margin",
    doc: autocrop_doc!(),
    main: Some("mode"),
    params: &[
        ParamSpec {
            name: "mode",
            kind: Kind::Choice(&["border", "content"]),
            default: Some("border"),
            help: "border: remove uniform edges; content: crop to what differs from the background",
        },
        ParamSpec {
            name: "tolerance",
            kind: Kind::real(0.0, 1.0),
            default: Some("0.05"),
            help: "largest difference from the border colour that still counts as border",
        },
        ParamSpec {
            name: "margin",
            kind: Kind::int(0.0, 1e6),
            default: Some("0"),
            help: "mode=content: pixels kept around the content",
        },
    ],
    build: build_autocrop,
};

fn build_autocrop(a: &Args) -> Result<Box<dyn Operator>, ParamError> {
    let mode = match a.choice("mode")? {
        "content" => CropMode::Content { margin: a.int("margin")? as usize },
        _ => CropMode::Border,
    };
    Ok(Box::new(Autocrop::new(mode, a.number("tolerance")? as f32)?))
}

#[cfg(test)]
mod tests {
    //! Edge cases: 1×1, uniform image (kept whole), borders of two colours on
    //! different sides, noisy borders within tolerance, content touching an
    //! edge, margin clipped at the image edge, NaN as content, colour input,
    //! alpha cut along.
    use super::*;
    use crate::raster::{Encoding, Layout};

    fn crop(step: &str, r: &Raster) -> Rect {
        let s = crate::pipeline::Step::parse(step).unwrap();
        let out = s.op.apply(r.clone()).unwrap();
        let NoteValue::Text(t) = &out.metadata.notes[0].value else { panic!() };
        let nums: Vec<usize> = t
            .split(|c: char| !c.is_ascii_digit())
            .filter(|s| !s.is_empty())
            .map(|s| s.parse().unwrap())
            .collect();
        assert_eq!((out.width(), out.height()), (nums[0], nums[1]));
        Rect { x: nums[2], y: nums[3], width: nums[0], height: nums[1] }
    }

    fn gray(p: Plane) -> Raster {
        Raster::new(vec![p], Layout::Gray, Encoding::Srgb).unwrap()
    }

    #[test]
    fn two_border_colours_and_noise_within_tolerance() {
        // Black film edge 7 px on the left, white lid 5 px on top (drawn over the
        // film edge's top), page content 0.6 with a dark mark inside.
        let p = Plane::from_fn(50, 40, |x, y| {
            let jitter = ((x * 13 + y * 7) % 5) as f32 * 0.01;
            if y < 5 {
                1.0 - jitter
            } else if x < 7 {
                jitter
            } else if (20..24).contains(&x) && (20..22).contains(&y) {
                0.1
            } else {
                0.6 + ((x + y) % 2) as f32 * 0.3
            }
        })
        .unwrap();
        assert_eq!(crop("autocrop", &gray(p)), Rect { x: 7, y: 5, width: 43, height: 35 });
    }

    #[test]
    fn content_box_with_margin() {
        let p = Plane::from_fn(
            60,
            30,
            |x, y| if (10..20).contains(&x) && (3..9).contains(&y) { 0.2 } else { 0.95 },
        )
        .unwrap();
        let r = gray(p);
        assert_eq!(crop("autocrop:content", &r), Rect { x: 10, y: 3, width: 10, height: 6 });
        assert_eq!(crop("autocrop:content,margin=4", &r), Rect { x: 6, y: 0, width: 18, height: 13 });
    }

    #[test]
    fn uniform_tiny_and_nan_images() {
        let flat = gray(Plane::filled(9, 4, 0.5).unwrap());
        assert_eq!(crop("autocrop", &flat), Rect { x: 0, y: 0, width: 9, height: 4 });
        assert_eq!(crop("autocrop:content", &flat), Rect { x: 0, y: 0, width: 9, height: 4 });
        let one = gray(Plane::filled(1, 1, 0.5).unwrap());
        assert_eq!(crop("autocrop", &one), Rect { x: 0, y: 0, width: 1, height: 1 });
        let mut v = vec![0.0f32; 25];
        v[12] = f32::NAN;
        let nan = gray(Plane::from_vec(5, 5, v).unwrap());
        assert_eq!(crop("autocrop", &nan), Rect { x: 2, y: 2, width: 1, height: 1 });
        assert_eq!(crop("autocrop:content", &nan), Rect { x: 2, y: 2, width: 1, height: 1 });
        assert!(crate::pipeline::Step::parse("autocrop:tolerance=2").is_err());
    }

    #[test]
    fn colour_planes_are_compared_and_alpha_is_cut_along() {
        // A red border 3 px wide around gray content, alpha 0 on the border.
        let mk = |c: usize| {
            Plane::from_fn(20, 16, move |x, y| {
                let border = x < 3 || y < 3 || x >= 17 || y >= 13;
                match (border, c) {
                    (true, 0) => 1.0,
                    (true, _) => 0.0,
                    (false, 3) => 0.5,
                    (false, _) => 0.4 + ((x * y) % 3) as f32 * 0.2,
                }
            })
            .unwrap()
        };
        let r = Raster::new((0..4).map(mk).collect(), Layout::Rgba, Encoding::Srgb).unwrap();
        assert_eq!(crop("autocrop", &r), Rect { x: 3, y: 3, width: 14, height: 10 });
        let out = crate::pipeline::Step::parse("autocrop").unwrap().op.apply(r).unwrap();
        assert!(out.planes()[3].as_slice().iter().all(|&a| a == 0.5));
    }
}
