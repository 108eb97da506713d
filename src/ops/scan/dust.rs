//! `dust`: removes specks smaller than an area, dark or light, keeping tones.

use super::label::{self, Structures};
use crate::error::{Error, ParamError};
use crate::ops::params::{Args, Kind, OpSpec, ParamSpec};
use crate::ops::{Domain, Operator};
use crate::raster::{Note, NoteValue, Plane, Raster};

/// The text of `pumice ops dust`, also the doc of [`Dust`].
macro_rules! dust_doc {
    () => {
        "Removes specks: connected groups of at most max-area pixels (8-connected)
that are darker (polarity=dark, the default: dust on paper) or lighter
(polarity=light: holes in ink, dust on film) than everything around them.
Each speck takes the value of its surroundings, so tones are kept.

```text
polarity=dark:  out = φ(in), the area closing with area A = max-area + 1
polarity=light: out = γ(in), the area opening with area A = max-area + 1
γ(f)(p) = max { t : p lies in a component of {f ≥ t} with ≥ A pixels }
φ(f)(p) = min { t : p lies in a component of {f ≤ t} with ≥ A pixels }
```

On a two-level plane (a binarised page: only two distinct values) this is
exactly: label the 8-connected components of the speck-coloured pixels, and
give every component of at most max-area pixels the other value; that path
uses the run-based two-pass labelling (pumice::ops::scan::label::label). Other planes
use the union-find area filter (label::area_filter). Each colour plane is
filtered on its own; alpha is kept. Output samples are input samples, so the
result is the same in any encoding and exact codes stay exact. NaN samples
separate components and are kept. The run notes count the samples changed;
on a noisy gray page that count includes the noise dips smaller than the
area, which the closing flattens as well (by a code or two).
Domain: any (samples are moved, not mixed). No halo: whole-image operator.
Sources: L. Vincent, \"Morphological area openings and closings for
grey-scale images\", NATO Shape in Picture workshop, 1993; A. Meijster and
M. H. F. Wilkinson, IEEE TPAMI 24(4):484–494, 2002 (union-find algorithm);
A. Rosenfeld and J. L. Pfaltz, J. ACM 13(4), 1966 and L. He, Y. Chao and
K. Suzuki, IEEE Trans. Image Processing 17(5), 2008 (run-based labelling,
from memory)."
    };
}

#[doc = dust_doc!()]
#[derive(Debug)]
pub struct Dust {
    max_area: usize,
    structures: Structures,
}

impl Dust {
    pub fn new(max_area: usize, structures: Structures) -> Result<Dust, ParamError> {
        if max_area == 0 {
            return Err(ParamError::new("max-area must be at least 1 pixel"));
        }
        Ok(Dust { max_area, structures })
    }

    /// The plane with its specks removed.
    pub fn filter_plane(&self, p: &Plane, levels: Option<u32>) -> Result<Plane, Error> {
        match two_values(p.as_slice()) {
            Some((lo, hi)) => self.binary(p, lo, hi),
            None => label::area_filter(p, self.max_area + 1, self.structures, levels),
        }
    }

    /// The two-level path: label the speck-coloured pixels, recolour the small components.
    fn binary(&self, p: &Plane, lo: f32, hi: f32) -> Result<Plane, Error> {
        let (speck, other) = match self.structures {
            Structures::Dark => (lo, hi),
            Structures::Bright => (hi, lo),
        };
        let mask: Vec<bool> = p.as_slice().iter().map(|&v| v == speck).collect();
        let l = label::label(&mask, p.width(), p.height())?;
        let areas = l.areas();
        let out = p
            .as_slice()
            .iter()
            .zip(&l.labels)
            .map(|(&v, &k)| if k != 0 && areas[k as usize] <= self.max_area as u64 { other } else { v })
            .collect();
        Plane::from_vec(p.width(), p.height(), out)
    }
}

/// The two distinct non-NaN values of `v` (low, high) when it holds exactly two.
fn two_values(v: &[f32]) -> Option<(f32, f32)> {
    let mut it = v.iter().copied().filter(|s| !s.is_nan());
    let a = it.next()?;
    let mut b = None;
    for s in it {
        if s == a {
            continue;
        }
        match b {
            None => b = Some(s),
            Some(b) if b == s => {}
            Some(_) => return None,
        }
    }
    b.map(|b| (a.min(b), a.max(b)))
}

impl Operator for Dust {
    fn domain(&self) -> Domain {
        Domain::Any
    }

    fn moves_samples_only(&self) -> bool {
        true
    }

    fn apply(&self, raster: Raster) -> Result<Raster, Error> {
        let n = raster.layout().colour_channels();
        let levels = raster.levels;
        let mut changed = 0u64;
        let mut planes = Vec::with_capacity(raster.planes().len());
        for (i, p) in raster.planes().iter().enumerate() {
            if i < n {
                let out = self.filter_plane(p, levels)?;
                changed += p.as_slice().iter().zip(out.as_slice()).filter(|(a, b)| a != b).count() as u64;
                planes.push(out);
            } else {
                planes.push(p.clone());
            }
        }
        let layout = raster.layout();
        let mut out = raster.with_planes(planes, layout)?;
        out.metadata.notes.push(Note {
            operator: "dust",
            name: "samples changed",
            value: NoteValue::Number { value: changed as f64, unit: "" },
        });
        Ok(out)
    }
}

pub static DUST: OpSpec = OpSpec {
    name: "dust",
    family: "scan",
    summary: "remove dark or light specks up to an area, keeping tones (area opening)",
    doc: dust_doc!(),
    main: Some("max-area"),
    params: &[
        ParamSpec {
            name: "max-area",
            kind: Kind::int(1.0, 1e8),
            default: Some("12"),
            help: "largest speck removed, in pixels",
        },
        ParamSpec {
            name: "polarity",
            kind: Kind::Choice(&["dark", "light"]),
            default: Some("dark"),
            help: "dark specks on light ground, or light specks on dark ground",
        },
    ],
    build: build_dust,
};

fn build_dust(a: &Args) -> Result<Box<dyn Operator>, ParamError> {
    let structures = if a.choice("polarity")? == "light" { Structures::Bright } else { Structures::Dark };
    Ok(Box::new(Dust::new(a.int("max-area")? as usize, structures)?))
}

#[cfg(test)]
mod tests {
    //! Edge cases: 1×1 and constant planes (unchanged), a two-level page (the
    //! labelling path) against the area-filter path, specks exactly at
    //! max-area (removed) and one pixel larger (kept), light polarity, tones of
    //! a gray page kept, alpha kept, NaN kept, serial and parallel identical.
    use super::*;
    use crate::raster::{Encoding, Layout};

    fn run(step: &str, r: Raster) -> Raster {
        crate::pipeline::Step::parse(step).unwrap().op.apply(r).unwrap()
    }

    fn gray(p: Plane) -> Raster {
        Raster::new(vec![p], Layout::Gray, Encoding::Srgb).unwrap()
    }

    /// Paper 0.9 with dark squares of side 1..=5 at known places and a long dark bar.
    fn page(paper: f32, ink: f32) -> Plane {
        Plane::from_fn(60, 30, |x, y| {
            let square = (1..=5).any(|s| {
                let x0 = s * 10;
                (x0..x0 + s).contains(&x) && (5..5 + s).contains(&y)
            });
            let bar = (5..55).contains(&x) && (20..23).contains(&y);
            if square || bar { ink } else { paper }
        })
        .unwrap()
    }

    #[test]
    fn removes_specks_up_to_max_area_and_keeps_larger_ones() {
        // Squares have areas 1, 4, 9, 16, 25; max-area 9 removes the first three.
        let out = run("dust:max-area=9", gray(page(0.9, 0.1)));
        let p = &out.planes()[0];
        assert_eq!(p.get(10, 5), 0.9);
        assert_eq!(p.get(31, 6), 0.9);
        assert_eq!(p.get(41, 6), 0.1);
        assert_eq!(p.get(50, 5), 0.1);
        assert_eq!(p.get(30, 21), 0.1);
        assert_eq!(out.metadata.notes[0].value, NoteValue::Number { value: 14.0, unit: "" });
    }

    #[test]
    fn the_labelling_path_equals_the_area_filter() {
        let mut s = 99u32;
        let p = Plane::from_fn(80, 50, |_, _| {
            s = s.wrapping_mul(1_664_525).wrapping_add(1_013_904_223);
            if (s >> 24) < 90 { 0.0 } else { 1.0 }
        })
        .unwrap();
        for (max_area, structures) in [(1, Structures::Dark), (6, Structures::Dark), (20, Structures::Bright)]
        {
            let d = Dust::new(max_area, structures).unwrap();
            let fast = d.filter_plane(&p, None).unwrap();
            let exact = label::area_filter(&p, max_area + 1, structures, None).unwrap();
            assert_eq!(fast, exact, "max-area {max_area}");
        }
    }

    #[test]
    fn gray_tones_are_kept_and_light_specks_removed() {
        // A gradient page with a 2×2 dark speck of 0.3 and a light speck on a dark block.
        let p = Plane::from_fn(40, 20, |x, y| {
            if (10..12).contains(&x) && (10..12).contains(&y) {
                0.3
            } else if (25..35).contains(&x) && (5..15).contains(&y) {
                if x == 30 && y == 10 { 0.95 } else { 0.2 }
            } else {
                0.6 + x as f32 * 0.005
            }
        })
        .unwrap();
        let out = run("dust:4", gray(p.clone()));
        let q = &out.planes()[0];
        // The speck rises to the lowest level where it joins its surroundings: its darkest neighbour.
        assert_eq!(q.get(10, 10), 0.6 + 9.0 * 0.005);
        assert_eq!(q.get(0, 0), p.get(0, 0));
        assert_eq!(q.get(30, 10), 0.95, "light specks stay under polarity=dark");
        let light = run("dust:4,polarity=light", gray(p));
        assert_eq!(light.planes()[0].get(30, 10), 0.2);
        assert_eq!(light.planes()[0].get(10, 10), 0.3);
    }

    #[test]
    fn tiny_constant_alpha_and_bad_parameters() {
        let one = run("dust", gray(Plane::filled(1, 1, 0.5).unwrap()));
        assert_eq!(one.planes()[0].get(0, 0), 0.5);
        let flat = run("dust", gray(Plane::filled(7, 3, 0.2).unwrap()));
        assert!(flat.planes()[0].as_slice().iter().all(|&v| v == 0.2));
        let alpha = Plane::filled(60, 30, 0.5).unwrap();
        let r = Raster::new(vec![page(1.0, 0.0), alpha.clone()], Layout::GrayAlpha, Encoding::Srgb).unwrap();
        let out = run("dust:4", r);
        assert_eq!(out.planes()[1], alpha);
        assert_eq!(out.planes()[0].get(10, 5), 1.0);
        assert!(crate::pipeline::Step::parse("dust:0").is_err());
        assert!(crate::pipeline::Step::parse("dust:polarity=grey").is_err());
    }

    #[test]
    fn exact_codes_stay_exact() {
        let mut r = gray(Plane::from_fn(30, 20, |x, y| ((x * 7 + y * 3) % 256) as f32 / 255.0).unwrap());
        r.levels = Some(255);
        let p = crate::pipeline::Pipeline::parse(&["dust:5"]).unwrap();
        let out = p.run(r, crate::pipeline::DomainPolicy::Auto).unwrap();
        assert_eq!(out.levels, Some(255));
        for &v in out.planes()[0].as_slice() {
            assert_eq!((v * 255.0).round() / 255.0, v);
        }
    }
}
