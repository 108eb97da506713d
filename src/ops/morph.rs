//! Grey-level morphology with flat structuring elements: `erode`, `dilate`,
//! `open`, `close` and `tophat`. Squares run in constant time per pixel
//! (separable running minimum and maximum with block prefix and suffix arrays);
//! crosses and disks as a union of row spans. Non-flat elements (the rolling
//! ball) live in `science::illumination`.

use crate::error::{Error, ParamError};
use crate::ops::params::{Args, Kind, OpSpec, ParamSpec};
use crate::ops::{Domain, Operator};
use crate::raster::{Plane, Raster};
use crate::tile::{self, Border};

/// Largest element radius accepted (a window of 2049² samples).
pub const MAX_MORPH_RADIUS: usize = 1024;

/// The shape of a flat structuring element of radius `r`.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Shape {
    /// The (2r+1)×(2r+1) square.
    Square,
    /// The centre row and column of the square (a plus sign).
    Cross,
    /// Offsets with dx² + dy² ≤ r² (the same set as `skimage.morphology.disk(r)`).
    Disk,
}

impl Shape {
    pub const NAMES: [&'static str; 3] = ["square", "cross", "disk"];

    fn from_name(name: &str) -> Option<Shape> {
        match name {
            "square" => Some(Shape::Square),
            "cross" => Some(Shape::Cross),
            "disk" => Some(Shape::Disk),
            _ => None,
        }
    }
}

/// A flat structuring element: a shape and a radius.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct Element {
    pub shape: Shape,
    pub radius: usize,
}

impl Element {
    /// The half-width of the element's row at `dy = i − r`, for `i` in `0..=2r`:
    /// the row covers `−a ≤ dx ≤ a`.
    pub fn half_widths(&self) -> Vec<usize> {
        let r = self.radius;
        (0..=2 * r)
            .map(|i| {
                let dy = i.abs_diff(r);
                match self.shape {
                    Shape::Square => r,
                    Shape::Cross if dy == 0 => r,
                    Shape::Cross => 0,
                    Shape::Disk => {
                        // The largest a with a² + dy² ≤ r², in exact integers.
                        let rest = r * r - dy * dy;
                        let mut a = (rest as f64).sqrt() as usize;
                        while a * a > rest {
                            a -= 1;
                        }
                        while (a + 1) * (a + 1) <= rest {
                            a += 1;
                        }
                        a
                    }
                }
            })
            .collect()
    }
}

/// Minimum or maximum: the two orders of grey-level morphology.
pub(crate) trait Extreme: Copy + Send + Sync + 'static {
    /// The value that never wins (+∞ for the minimum).
    const IDENTITY: f32;
    /// The winner of `a` (never NaN in the running arrays) and a sample `b`;
    /// a NaN `b` loses. One compare-and-select, so it maps to a single min or
    /// max instruction.
    fn pick(a: f32, b: f32) -> f32;
}

#[derive(Clone, Copy, Debug)]
pub(crate) struct Min;
#[derive(Clone, Copy, Debug)]
pub(crate) struct Max;

impl Extreme for Min {
    const IDENTITY: f32 = f32::INFINITY;
    #[inline(always)]
    fn pick(a: f32, b: f32) -> f32 {
        if b < a { b } else { a }
    }
}

impl Extreme for Max {
    const IDENTITY: f32 = f32::NEG_INFINITY;
    #[inline(always)]
    fn pick(a: f32, b: f32) -> f32 {
        if b > a { b } else { a }
    }
}

/// The border of one min or max pass: `None` (outside samples take no part)
/// becomes a constant that never wins.
fn resolve<E: Extreme>(outside: Option<Border>) -> Border {
    outside.unwrap_or(Border::Constant(E::IDENTITY))
}

/// Grey-level erosion of `src`: the minimum over the element.
pub fn erode_plane(src: &Plane, element: Element, outside: Option<Border>) -> Plane {
    flat::<Min>(src, element, resolve::<Min>(outside))
}

/// Grey-level dilation of `src`: the maximum over the element.
pub fn dilate_plane(src: &Plane, element: Element, outside: Option<Border>) -> Plane {
    flat::<Max>(src, element, resolve::<Max>(outside))
}

fn flat<E: Extreme>(src: &Plane, element: Element, border: Border) -> Plane {
    let r = element.radius;
    if r == 0 {
        return src.clone();
    }
    match element.shape {
        Shape::Square => square::<E>(src, r, border),
        Shape::Cross | Shape::Disk => span_union::<E>(src, &element.half_widths(), border),
    }
}

/// Running extreme of window `k` over `p` (`p.len() = out.len() + k − 1`):
/// `out[x] = E(p[x..x + k])`, by the van Herk / Gil–Werman block arrays:
/// `g` is the extreme from the start of each block of `k`, `h` to its end, and
/// `out[x] = E(h[x], g[x + k − 1])` — three comparisons per sample for any `k`.
fn running<E: Extreme>(p: &[f32], k: usize, out: &mut [f32], g: &mut Vec<f32>, h: &mut Vec<f32>) {
    debug_assert_eq!(p.len(), out.len() + k - 1);
    if k == 1 {
        out.copy_from_slice(p);
        return;
    }
    g.resize(p.len(), 0.0);
    h.resize(p.len(), 0.0);
    for (gc, pc) in g.chunks_mut(k).zip(p.chunks(k)) {
        let mut acc = E::IDENTITY;
        for (gv, &pv) in gc.iter_mut().zip(pc) {
            acc = E::pick(acc, pv);
            *gv = acc;
        }
    }
    for (hc, pc) in h.chunks_mut(k).zip(p.chunks(k)) {
        let mut acc = E::IDENTITY;
        for (hv, &pv) in hc.iter_mut().zip(pc).rev() {
            acc = E::pick(acc, pv);
            *hv = acc;
        }
    }
    for ((o, &a), &b) in out.iter_mut().zip(h.iter()).zip(&g[k - 1..]) {
        *o = E::pick(a, b);
    }
}

/// Element-wise `acc = E(acc, row)`.
#[inline]
fn pick_rows<E: Extreme>(acc: &mut [f32], row: &[f32]) {
    for (a, &v) in acc.iter_mut().zip(row) {
        *a = E::pick(*a, v);
    }
}

/// Columns per strip of the vertical pass: the block arrays of a strip
/// (2 × (band + 2r) rows of 256 samples) stay in L2 where whole rows would not.
const STRIP: usize = 256;

/// The extreme over the (2r+1)² square, one band at a time: the running
/// extreme of width 2r+1 along each source row the band needs (its rows and r
/// of halo above and below, under `border`), kept in a band buffer, then the
/// running extreme of height 2r+1 down the columns of that buffer — the same
/// block arrays as [`running`], with row segments as the elements (so the
/// inner loops run along contiguous samples), one strip of [`STRIP`] columns at
/// a time. No full-size intermediate plane; the halo rows are recomputed by
/// neighbouring bands (2r per band).
fn square<E: Extreme>(src: &Plane, r: usize, border: Border) -> Plane {
    let w = src.width();
    let k = 2 * r + 1;
    let const_row = vec![border.constant_value(); w];
    let mut out =
        Plane::zeros(w, src.height()).unwrap_or_else(|_| unreachable!("same size as a valid plane"));
    tile::for_each_band(&mut out, tile::band_rows(w, r), |y0, band| {
        let n = band.len() / w;
        let m = n + 2 * r;
        // Horizontal pass. A constant row stays constant; its running extreme
        // holds no NaN, so the vertical arrays may start as copies of rows.
        let (mut padded, mut g, mut h) = (vec![0.0; w + 2 * r], Vec::new(), Vec::new());
        let mut rows = vec![0.0; m * w];
        for (i, row) in rows.chunks_exact_mut(w).enumerate() {
            match tile::source_row(src, y0 as isize - r as isize + i as isize, border) {
                Some(s) => {
                    tile::pad_row(s, r, border, &mut padded);
                    running::<E>(&padded, k, row, &mut g, &mut h);
                }
                None => row.copy_from_slice(&const_row),
            }
        }
        // Vertical pass over the band buffer.
        let sw = STRIP.min(w);
        let mut g = vec![0.0; m * sw];
        let mut h = vec![0.0; m * sw];
        let row = |i: usize| &rows[i * w..(i + 1) * w];
        for x0 in (0..w).step_by(sw) {
            let x1 = (x0 + sw).min(w);
            let s = x1 - x0;
            for i in 0..m {
                let (before, rest) = g.split_at_mut(i * sw);
                let gi = &mut rest[..s];
                gi.copy_from_slice(&row(i)[x0..x1]);
                if i % k != 0 {
                    pick_rows::<E>(gi, &before[(i - 1) * sw..(i - 1) * sw + s]);
                }
            }
            for i in (0..m).rev() {
                let (head, after) = h.split_at_mut((i + 1) * sw);
                let hi = &mut head[i * sw..i * sw + s];
                hi.copy_from_slice(&row(i)[x0..x1]);
                if i % k != k - 1 && i + 1 < m {
                    pick_rows::<E>(hi, &after[..s]);
                }
            }
            for (j, out_row) in band.chunks_exact_mut(w).enumerate() {
                let o = &mut out_row[x0..x1];
                o.copy_from_slice(&h[j * sw..j * sw + s]);
                pick_rows::<E>(o, &g[(j + k - 1) * sw..(j + k - 1) * sw + s]);
            }
        }
    });
    out
}

/// The extreme over an element given as row half-widths (`half[i]` for
/// `dy = i − r`): for each distinct half-width `a`, the running extreme of
/// width 2a+1 of every source row the band needs, then each output row takes
/// the extreme of the rows `y + dy` whose half-width is `a`. Exact; costs
/// O(distinct half-widths + 2r + 1) per sample.
fn span_union<E: Extreme>(src: &Plane, half: &[usize], border: Border) -> Plane {
    let w = src.width();
    let r = half.len() / 2;
    let widest = half.iter().copied().max().unwrap_or(0);
    let mut widths = half.to_vec();
    widths.sort_unstable();
    widths.dedup();
    let const_row = vec![border.constant_value(); w];
    let pw = w + 2 * widest;
    let mut out =
        Plane::zeros(w, src.height()).unwrap_or_else(|_| unreachable!("same size as a valid plane"));
    tile::for_each_band(&mut out, tile::band_rows(w, r), |y0, band| {
        let n = band.len() / w;
        let m = n + 2 * r;
        let mut padded = vec![0.0; m * pw];
        for (i, p) in padded.chunks_exact_mut(pw).enumerate() {
            let y = y0 as isize - r as isize + i as isize;
            tile::pad_row(tile::source_row(src, y, border).unwrap_or(&const_row), widest, border, p);
        }
        band.fill(E::IDENTITY);
        let (mut line, mut g, mut h) = (vec![0.0; m * w], Vec::new(), Vec::new());
        for &a in &widths {
            for (p, l) in padded.chunks_exact(pw).zip(line.chunks_exact_mut(w)) {
                running::<E>(&p[widest - a..widest + w + a], 2 * a + 1, l, &mut g, &mut h);
            }
            for (dy, _) in half.iter().enumerate().filter(|(_, h)| **h == a) {
                for (j, out_row) in band.chunks_exact_mut(w).enumerate() {
                    pick_rows::<E>(out_row, &line[(j + dy) * w..(j + dy + 1) * w]);
                }
            }
        }
    });
    out
}

/// Which morphological operation a step runs.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Operation {
    Erode,
    Dilate,
    Open,
    Close,
    /// `in − open(in)`: bright details smaller than the element.
    WhiteTophat,
    /// `close(in) − in`: dark details smaller than the element.
    BlackTophat,
}

/// Runs `pass` on every plane of `raster`: colour samples of fully
/// transparent pixels take no part (they are set to the pass's identity
/// first, and a result that is still ±∞ — nothing opaque in reach — becomes 0);
/// alpha is filtered as a plane of its own.
fn each_plane<E: Extreme>(raster: Raster, pass: impl Fn(&Plane) -> Plane + Sync) -> Result<Raster, Error> {
    let layout = raster.layout();
    let alpha = raster.alpha();
    let colour = layout.colour_channels();
    let filtered = raster
        .planes()
        .iter()
        .enumerate()
        .map(|(i, p)| match alpha {
            Some(a) if i < colour => {
                let mut masked = p.clone();
                for (v, &av) in masked.as_mut_slice().iter_mut().zip(a.as_slice()) {
                    if av <= 0.0 {
                        *v = E::IDENTITY;
                    }
                }
                let mut out = pass(&masked);
                for v in out.as_mut_slice() {
                    if v.is_infinite() && *v == E::IDENTITY {
                        *v = 0.0;
                    }
                }
                out
            }
            _ => pass(p),
        })
        .collect();
    raster.with_planes(filtered, layout)
}

/// The text of `pumice ops erode|dilate|open|close|tophat`, also the doc of [`Morph`].
macro_rules! morph_doc {
    () => {
        "Grey-level morphology with a flat structuring element B (square, cross or disk of radius r).

```text
erode(f)(x)  = min_{b ∈ B} f(x + b)
dilate(f)(x) = max_{b ∈ B} f(x + b)
open(f)      = dilate(erode(f))           removes bright details smaller than B
close(f)     = erode(dilate(f))           removes dark details smaller than B
tophat white = f − open(f)                tophat black = close(f) − f
square: B = {|dx| ≤ r, |dy| ≤ r}   cross: {dy = 0, |dx| ≤ r} ∪ {dx = 0, |dy| ≤ r}
disk:   B = {dx² + dy² ≤ r²}
```

Square: separable running min/max in constant time per pixel (three comparisons
per sample and pass for any r): per block of 2r+1 samples a prefix array g and a
suffix array h, out(x) = min(h(x − r), g(x + r)) (van Herk 1992, Pattern
Recognition Letters 13(7); Gil & Werman 1993, IEEE PAMI 15(5)); per band of rows,
the horizontal pass fills a band buffer and the vertical pass runs down 256-column
strips of it with whole row segments as elements, so nothing full-size is stored
between the passes. Cross and disk: exact, as a union of row spans — for each
distinct row half-width a the running min/max of width 2a+1 (same block arrays),
then the min/max over the element's rows; O(r) per pixel.
Border: `ignore` (default): samples outside the image take no part (as if the
outside were +∞ for the minimum and −∞ for the maximum); or any border rule
(reflect, mirror, replicate, wrap, constant with `fill`, which is then a value in
the raster's current encoding). NaN samples take no part unless the whole
neighbourhood is NaN. Needs r rows of halo (2r for open, close, tophat).
Alpha: colour samples of fully transparent pixels take no part (a neighbourhood
with no opaque pixel gives 0); alpha is eroded or dilated as its own plane.
Domain: erode, dilate, open and close are any: min and max commute with every
increasing curve (the sRGB transfer included), so the result is the same sample
whichever encoding the step sees, and output samples are copies of input
samples. tophat subtracts, and a difference of encoded values is not a
difference of light: it runs in linear light (the excess or deficit of light
over the local background).
Source: Serra, Image Analysis and Mathematical Morphology (1982); Soille,
Morphological Image Analysis (2003), ch. 3–4 (definitions and top-hats)."
    };
}

#[doc = morph_doc!()]
#[derive(Debug)]
pub struct Morph {
    operation: Operation,
    element: Element,
    outside: Option<Border>,
}

impl Morph {
    pub fn new(operation: Operation, element: Element, outside: Option<Border>) -> Result<Morph, ParamError> {
        if element.radius > MAX_MORPH_RADIUS {
            return Err(ParamError::new(format!(
                "radius must be a whole number in 0..={MAX_MORPH_RADIUS}, got {}",
                element.radius
            )));
        }
        Ok(Morph { operation, element, outside })
    }

    fn erode(&self, r: Raster) -> Result<Raster, Error> {
        each_plane::<Min>(r, |p| erode_plane(p, self.element, self.outside))
    }

    fn dilate(&self, r: Raster) -> Result<Raster, Error> {
        each_plane::<Max>(r, |p| dilate_plane(p, self.element, self.outside))
    }
}

impl Operator for Morph {
    fn domain(&self) -> Domain {
        match self.operation {
            Operation::WhiteTophat | Operation::BlackTophat => Domain::Linear,
            _ => Domain::Any,
        }
    }

    fn moves_samples_only(&self) -> bool {
        !matches!(self.operation, Operation::WhiteTophat | Operation::BlackTophat)
            && !matches!(self.outside, Some(Border::Constant(_)))
    }

    fn apply(&self, raster: Raster) -> Result<Raster, Error> {
        match self.operation {
            Operation::Erode => self.erode(raster),
            Operation::Dilate => self.dilate(raster),
            Operation::Open => self.dilate(self.erode(raster)?),
            Operation::Close => self.erode(self.dilate(raster)?),
            Operation::WhiteTophat => {
                let opened = self.dilate(self.erode(raster.clone())?)?;
                Ok(difference(raster, &opened, false))
            }
            Operation::BlackTophat => {
                let closed = self.erode(self.dilate(raster.clone())?)?;
                Ok(difference(raster, &closed, true))
            }
        }
    }
}

/// `raster − other` (or `other − raster` when `flip`) on the colour planes;
/// alpha stays the input's.
fn difference(mut raster: Raster, other: &Raster, flip: bool) -> Raster {
    let colour = raster.layout().colour_channels();
    for (p, q) in raster.planes_mut()[..colour].iter_mut().zip(other.planes()) {
        for (a, &b) in p.as_mut_slice().iter_mut().zip(q.as_slice()) {
            *a = if flip { b - *a } else { *a - b };
        }
    }
    raster
}

/// The `border` parameter of the morphology steps: `ignore` or a border rule.
pub const MORPH_BORDER_PARAM: ParamSpec = ParamSpec {
    name: "border",
    kind: Kind::Choice(&["ignore", "reflect", "mirror", "replicate", "wrap", "constant"]),
    default: Some("ignore"),
    help: "samples outside the image: ignore (take no part) or a border rule",
};

const SHAPE_PARAM: ParamSpec = ParamSpec {
    name: "shape",
    kind: Kind::Choice(&Shape::NAMES),
    default: Some("square"),
    help: "structuring element: square (2r+1)², cross (centre row and column) or disk (dx²+dy² ≤ r²)",
};

const RADIUS_PARAM: ParamSpec = ParamSpec {
    name: "radius",
    kind: Kind::int(0.0, MAX_MORPH_RADIUS as f64),
    default: Some("1"),
    help: "element radius r in pixels (0 leaves the image unchanged)",
};

const FILL_PARAM: ParamSpec = crate::ops::params::FILL_PARAM;

/// Reads `shape` and `radius`.
pub fn element(args: &Args) -> Result<Element, ParamError> {
    let name = args.choice("shape")?;
    let shape =
        Shape::from_name(name).ok_or_else(|| ParamError::new(format!("internal: unknown shape `{name}`")))?;
    Ok(Element { shape, radius: args.int("radius")? as usize })
}

/// Reads `border` and `fill`: `None` for `ignore`.
pub fn outside(args: &Args) -> Result<Option<Border>, ParamError> {
    match args.choice("border")? {
        "ignore" => Ok(None),
        name => Border::from_name(name, args.number("fill")? as f32)
            .map(Some)
            .ok_or_else(|| ParamError::new(format!("internal: unknown border `{name}`"))),
    }
}

fn build(operation: Operation, args: &Args) -> Result<Box<dyn Operator>, ParamError> {
    Ok(Box::new(Morph::new(operation, element(args)?, outside(args)?)?))
}

const PARAMS: &[ParamSpec] = &[RADIUS_PARAM, SHAPE_PARAM, MORPH_BORDER_PARAM, FILL_PARAM];

pub static ERODE: OpSpec = OpSpec {
    name: "erode",
    family: "morph",
    summary: "grey-level erosion: minimum over a square, cross or disk",
    doc: morph_doc!(),
    main: Some("radius"),
    params: PARAMS,
    build: |a| build(Operation::Erode, a),
};

pub static DILATE: OpSpec = OpSpec {
    name: "dilate",
    family: "morph",
    summary: "grey-level dilation: maximum over a square, cross or disk",
    doc: morph_doc!(),
    main: Some("radius"),
    params: PARAMS,
    build: |a| build(Operation::Dilate, a),
};

pub static OPEN: OpSpec = OpSpec {
    name: "open",
    family: "morph",
    summary: "opening (erode, then dilate): removes bright details smaller than the element",
    doc: morph_doc!(),
    main: Some("radius"),
    params: PARAMS,
    build: |a| build(Operation::Open, a),
};

pub static CLOSE: OpSpec = OpSpec {
    name: "close",
    family: "morph",
    summary: "closing (dilate, then erode): removes dark details smaller than the element",
    doc: morph_doc!(),
    main: Some("radius"),
    params: PARAMS,
    build: |a| build(Operation::Close, a),
};

pub static TOPHAT: OpSpec = OpSpec {
    name: "tophat",
    family: "morph",
    summary: "top-hat: bright (white) or dark (black) details smaller than the element",
    doc: morph_doc!(),
    main: Some("radius"),
    params: &[
        RADIUS_PARAM,
        SHAPE_PARAM,
        ParamSpec {
            name: "kind",
            kind: Kind::Choice(&["white", "black"]),
            default: Some("white"),
            help: "white: in − open(in) (bright details); black: close(in) − in (dark details)",
        },
        MORPH_BORDER_PARAM,
        FILL_PARAM,
    ],
    build: |a| {
        let op = if a.choice("kind")? == "black" { Operation::BlackTophat } else { Operation::WhiteTophat };
        build(op, a)
    },
};

#[cfg(test)]
pub(crate) mod tests {
    //! Edge cases decided here: 1×1, 1×N and N×1 planes; radius larger than
    //! the image (every border rule repeats as `Border::index` defines; `ignore`
    //! gives the extreme of what is in reach); radius 0 (identity); NaN (takes
    //! no part). Reference: a naive loop over the element's offsets.
    use super::*;
    use crate::raster::{Encoding, Layout};

    /// Seeded uniform noise in [0, 1) (a linear congruential generator).
    pub(crate) fn noise(w: usize, h: usize, seed: u32) -> Plane {
        let mut state = seed;
        Plane::from_fn(w, h, |_, _| {
            state = state.wrapping_mul(1664525).wrapping_add(1013904223);
            (state >> 8) as f32 / (1u32 << 24) as f32
        })
        .unwrap()
    }

    fn naive(src: &Plane, el: Element, outside: Option<Border>, max: bool) -> Plane {
        let (w, h) = (src.width(), src.height());
        let half = el.half_widths();
        let r = el.radius as isize;
        Plane::from_fn(w, h, |x, y| {
            let mut acc = if max { f32::NEG_INFINITY } else { f32::INFINITY };
            for dy in -r..=r {
                let a = half[(dy + r) as usize] as isize;
                for dx in -a..=a {
                    let (sx, sy) = (x as isize + dx, y as isize + dy);
                    let v = match outside {
                        None => {
                            if sx < 0 || sy < 0 || sx >= w as isize || sy >= h as isize {
                                continue;
                            }
                            src.get(sx as usize, sy as usize)
                        }
                        Some(b) => match (b.index(sx, w), b.index(sy, h)) {
                            (Some(i), Some(j)) => src.get(i, j),
                            _ => b.constant_value(),
                        },
                    };
                    acc = if max { acc.max(v) } else { acc.min(v) };
                }
            }
            acc
        })
        .unwrap()
    }

    const OUTSIDE: [Option<Border>; 6] = [
        None,
        Some(Border::Reflect),
        Some(Border::Mirror),
        Some(Border::Replicate),
        Some(Border::Wrap),
        Some(Border::Constant(0.5)),
    ];

    #[test]
    fn every_shape_and_border_equals_the_naive_extreme() {
        for (w, h) in [(1, 1), (1, 7), (7, 1), (3, 2), (29, 23)] {
            let src = noise(w, h, 5);
            for shape in [Shape::Square, Shape::Cross, Shape::Disk] {
                for radius in [0, 1, 2, 5, 9] {
                    let el = Element { shape, radius };
                    for outside in OUTSIDE {
                        let e = erode_plane(&src, el, outside);
                        assert_eq!(e, naive(&src, el, outside, false), "erode {w}×{h} {el:?} {outside:?}");
                        let d = dilate_plane(&src, el, outside);
                        assert_eq!(d, naive(&src, el, outside, true), "dilate {w}×{h} {el:?} {outside:?}");
                    }
                }
            }
        }
    }

    #[test]
    fn disk_rows_match_the_integer_circle() {
        // dx² + dy² ≤ r², the definition of skimage.morphology.disk (0.26).
        let half = Element { shape: Shape::Disk, radius: 5 }.half_widths();
        assert_eq!(half, [0, 3, 4, 4, 4, 5, 4, 4, 4, 3, 0]);
    }

    #[test]
    fn running_extreme_for_every_window_and_length() {
        for n in 1..20 {
            for k in 1..12 {
                let p: Vec<f32> = noise(n + k - 1, 1, (n * 31 + k) as u32).into_vec();
                let mut out = vec![0.0; n];
                running::<Min>(&p, k, &mut out, &mut Vec::new(), &mut Vec::new());
                for x in 0..n {
                    let want = p[x..x + k].iter().copied().fold(f32::INFINITY, f32::min);
                    assert_eq!(out[x], want, "n={n} k={k} x={x}");
                }
            }
        }
    }

    #[test]
    fn nan_takes_no_part_and_thread_count_does_not_matter() {
        let mut p = noise(40, 30, 9);
        p.row_mut(10)[10] = f32::NAN;
        let el = Element { shape: Shape::Square, radius: 2 };
        let e = erode_plane(&p, el, None);
        assert!(e.as_slice().iter().all(|v| v.is_finite()));
        let run = |n| {
            let pool = rayon::ThreadPoolBuilder::new().num_threads(n).build().unwrap();
            pool.install(|| erode_plane(&noise(301, 257, 4), Element { shape: Shape::Disk, radius: 6 }, None))
        };
        assert_eq!(run(1), run(3));
    }

    #[test]
    fn opening_and_closing_bracket_the_image_and_tophats_are_non_negative() {
        let src = noise(37, 41, 2);
        let raster = Raster::new(vec![src.clone()], Layout::Gray, Encoding::Linear).unwrap();
        let el = Element { shape: Shape::Disk, radius: 3 };
        let run = |op| Morph::new(op, el, None).unwrap().apply(raster.clone()).unwrap().planes()[0].clone();
        let (open, close) = (run(Operation::Open), run(Operation::Close));
        for ((&o, &c), &v) in open.as_slice().iter().zip(close.as_slice()).zip(src.as_slice()) {
            assert!(o <= v && v <= c);
        }
        // Opening is idempotent (Serra 1982): open(open(f)) = open(f).
        let again = Morph::new(Operation::Open, el, None)
            .unwrap()
            .apply(Raster::new(vec![open.clone()], Layout::Gray, Encoding::Linear).unwrap())
            .unwrap();
        assert_eq!(again.planes()[0], open);
        assert!(run(Operation::WhiteTophat).as_slice().iter().all(|&v| v >= 0.0));
        assert!(run(Operation::BlackTophat).as_slice().iter().all(|&v| v >= 0.0));
    }

    #[test]
    fn transparent_pixels_lend_no_colour() {
        // Opaque grey 0.5 beside a transparent pixel whose colour is 0: the
        // erosion of the colour must stay 0.5 where anything opaque is in reach.
        let colour = Plane::from_vec(3, 1, vec![0.5, 0.0, 0.5]).unwrap();
        let alpha = Plane::from_vec(3, 1, vec![1.0, 0.0, 1.0]).unwrap();
        let r = Raster::new(vec![colour, alpha], Layout::GrayAlpha, Encoding::Linear).unwrap();
        let el = Element { shape: Shape::Square, radius: 1 };
        let out = Morph::new(Operation::Erode, el, None).unwrap().apply(r.clone()).unwrap();
        assert_eq!(out.planes()[0].as_slice(), &[0.5, 0.5, 0.5]);
        assert_eq!(out.planes()[1].as_slice(), &[0.0, 0.0, 0.0]);
        let out = Morph::new(Operation::Dilate, el, None).unwrap().apply(r).unwrap();
        assert_eq!(out.planes()[0].as_slice(), &[0.5, 0.5, 0.5]);
        assert_eq!(out.planes()[1].as_slice(), &[1.0, 1.0, 1.0]);
    }

    #[test]
    fn radius_over_the_limit_is_refused() {
        let el = Element { shape: Shape::Square, radius: MAX_MORPH_RADIUS + 1 };
        assert!(Morph::new(Operation::Erode, el, None).unwrap_err().0.contains("radius"));
    }
}
