//! `flatfield`: dark-frame subtraction and flat-field (gain) correction. The
//! frames are read and decoded when the step is built; `apply` only computes.

use std::path::Path;

use crate::error::{Error, ParamError};
use crate::io::{self, DecodeOptions, InputEncoding};
use crate::ops::params::{Kind, OpSpec, ParamSpec};
use crate::ops::{Domain, Operator};
use crate::raster::{Note, NoteValue, Plane, Raster};

/// The text of `pumice ops flatfield`, also the doc of [`Flatfield`].
macro_rules! flatfield_doc {
    () => {
        "Dark and flat frame correction of a sensor image, per colour plane, in f64.

```text
corrected = (raw − dark) / (flat − dark) · mean(flat − dark)
dark only:  corrected = raw − dark          flat only: dark = 0
mean(flat − dark) is over the pixels where flat − dark > 0 (one figure per plane)
where flat − dark ≤ 0 or is not finite (a dead flat pixel): corrected = raw − dark
```

The gain of each pixel is (flat − dark) / mean(flat − dark); dividing by it
evens out vignetting and pixel-to-pixel sensitivity while keeping the image's
overall level. Pixels with no usable gain are left uncorrected for gain (gain 1,
dark still subtracted) and counted: reported as `bad flat pixels` (`pumice run
-v`). A flat with no pixel above its dark (e.g. all zero) is an error.
The frames (`dark=FILE`, `flat=FILE`, either may be left out but not both) are
read once when the step is built, with the default decode limits. A relative
path in a recipe file is taken from the recipe's folder; on the command line
(`-s flatfield:dark=…`) from the working folder, and there it cannot hold a
comma (the step grammar's separator). Integer codes
map to [0, 1] like the image's. They are sensor data, so by default they are
taken as linear (`frames=linear`), which matches images read with
`--input-encoding linear`; `frames=srgb` decodes them through the IEC 61966-2-1
transfer like an sRGB image. Each frame must have the image's width, height and
colour channels (its alpha is ignored); otherwise the step fails naming the file.
Alpha of the image is left as it is. No border, no halo.
Domain: linear light (the correction is a linear model of the sensor).
Source: the standard CCD calibration, e.g. Howell, Handbook of CCD Astronomy
(2nd ed., 2006), ch. 4 (cited from memory)."
    };
}

/// A calibration frame: its planes, as read, and the file it came from.
#[derive(Debug)]
pub(super) struct Frame {
    pub(super) path: String,
    pub(super) planes: Vec<Plane>,
}

#[doc = flatfield_doc!()]
#[derive(Debug)]
pub struct Flatfield {
    dark: Option<Frame>,
    flat: Option<Frame>,
}

impl Flatfield {
    /// A correction from frames already in memory (colour planes only).
    pub fn from_planes(dark: Option<Vec<Plane>>, flat: Option<Vec<Plane>>) -> Result<Flatfield, ParamError> {
        let frame =
            |planes: Option<Vec<Plane>>| planes.map(|planes| Frame { path: "(in memory)".into(), planes });
        Flatfield::checked(frame(dark), frame(flat))
    }

    /// Reads the frames from files (`None` leaves one out).
    pub fn from_files(dark: Option<&Path>, flat: Option<&Path>, srgb: bool) -> Result<Flatfield, ParamError> {
        let read = |p: Option<&Path>| p.map(|p| read_frame(p, srgb)).transpose();
        Flatfield::checked(read(dark)?, read(flat)?)
    }

    fn checked(dark: Option<Frame>, flat: Option<Frame>) -> Result<Flatfield, ParamError> {
        if dark.is_none() && flat.is_none() {
            return Err(ParamError::new(
                "flatfield needs a dark frame, a flat frame or both (dark=FILE, flat=FILE)",
            ));
        }
        if let Some(f) = &flat
            && f.planes.iter().all(|p| p.as_slice().iter().all(|&v| v == 0.0))
        {
            return Err(ParamError::new(format!("flat frame {}: every sample is zero", f.path)));
        }
        Ok(Flatfield { dark, flat })
    }

    fn check_frame(frame: &Frame, raster: &Raster, what: &str) -> Result<(), Error> {
        let p = &frame.planes[0];
        let (w, h, c) = (raster.width(), raster.height(), raster.layout().colour_channels());
        if p.width() != w || p.height() != h || frame.planes.len() != c {
            return Err(Error::Step {
                step: "flatfield".into(),
                message: format!(
                    "{what} frame {} is {}×{} with {} colour channel(s), but the image is {w}×{h} with {c}",
                    frame.path,
                    p.width(),
                    p.height(),
                    frame.planes.len()
                ),
            });
        }
        Ok(())
    }
}

/// Reads one frame: bounded read, decode with the default limits, colour planes kept.
pub(super) fn read_frame(path: &Path, srgb: bool) -> Result<Frame, ParamError> {
    let name = path.display().to_string();
    let fail = |why: String| ParamError::new(format!("cannot read frame {name}: {why}"));
    let limits = io::Limits::DEFAULT;
    let bytes = io::file::read_input(&io::file::Location::Path(path.to_path_buf()), limits.max_bytes)
        .map_err(|e| fail(e.to_string()))?;
    let encoding = if srgb { InputEncoding::Srgb } else { InputEncoding::Linear };
    let opts = DecodeOptions { limits, encoding, keep_orientation: false, linear_light: false };
    let raster = io::decode(&bytes, &opts).map_err(|e| fail(e.to_string()))?;
    let levels = raster.levels;
    let colour = raster.layout().colour_channels();
    let mut planes = raster.into_planes();
    planes.truncate(colour);
    if srgb {
        for p in planes.iter_mut() {
            crate::color::srgb::decode_in_place(p.as_mut_slice(), levels);
        }
    }
    Ok(Frame { path: name, planes })
}

impl Operator for Flatfield {
    fn domain(&self) -> Domain {
        Domain::Linear
    }

    fn apply(&self, mut raster: Raster) -> Result<Raster, Error> {
        if let Some(d) = &self.dark {
            Flatfield::check_frame(d, &raster, "dark")?;
        }
        if let Some(f) = &self.flat {
            Flatfield::check_frame(f, &raster, "flat")?;
        }
        let mut bad = 0usize;
        for (i, p) in raster.colour_planes_mut().iter_mut().enumerate() {
            let dark = self.dark.as_ref().map(|d| d.planes[i].as_slice());
            let flat = self.flat.as_ref().map(|f| f.planes[i].as_slice());
            bad += correct_plane(p.as_mut_slice(), dark, flat).map_err(|message| Error::Step {
                step: "flatfield".into(),
                message: format!("{message} ({})", self.flat.as_ref().map_or("", |f| f.path.as_str())),
            })?;
        }
        if self.flat.is_some() {
            raster.metadata.notes.push(Note {
                operator: "flatfield",
                name: "bad flat pixels",
                value: NoteValue::Number { value: bad as f64, unit: "" },
            });
        }
        Ok(raster)
    }
}

/// Corrects one plane in place; returns the number of pixels without a usable gain.
fn correct_plane(raw: &mut [f32], dark: Option<&[f32]>, flat: Option<&[f32]>) -> Result<usize, String> {
    let dark_at = |i: usize| dark.map_or(0.0, |d| f64::from(d[i]));
    let Some(flat) = flat else {
        for (i, v) in raw.iter_mut().enumerate() {
            *v = (f64::from(*v) - dark_at(i)) as f32;
        }
        return Ok(0);
    };
    let gain = |i: usize| Some(f64::from(flat[i]) - dark_at(i)).filter(|g| g.is_finite() && *g > 0.0);
    let (mut sum, mut n) = (0.0f64, 0usize);
    for i in 0..raw.len() {
        if let Some(g) = gain(i) {
            sum += g;
            n += 1;
        }
    }
    if n == 0 {
        return Err("the flat frame is nowhere above the dark frame: no pixel has a usable gain".into());
    }
    let mean = sum / n as f64;
    for (i, v) in raw.iter_mut().enumerate() {
        let signal = f64::from(*v) - dark_at(i);
        *v = match gain(i) {
            Some(g) => signal / g * mean,
            None => signal,
        } as f32;
    }
    Ok(raw.len() - n)
}

pub static FLATFIELD: OpSpec = OpSpec {
    name: "flatfield",
    family: "science",
    summary: "dark and flat frame correction: (raw − dark) / (flat − dark) × mean(flat − dark)",
    doc: flatfield_doc!(),
    main: Some("flat"),
    params: &[
        ParamSpec {
            name: "flat",
            kind: Kind::File,
            default: Some("none"),
            help: "flat frame: an exposure of an even field (same size and channels as the image)",
        },
        ParamSpec {
            name: "dark",
            kind: Kind::File,
            default: Some("none"),
            help: "dark frame: an exposure with no light (same exposure time as the image)",
        },
        ParamSpec {
            name: "frames",
            kind: Kind::Choice(&["linear", "srgb"]),
            default: Some("linear"),
            help: "what the frames' values mean: linear sensor values (default) or sRGB-encoded",
        },
    ],
    build: |a| {
        Ok(Box::new(Flatfield::from_files(a.file("dark")?, a.file("flat")?, a.choice("frames")? == "srgb")?))
    },
};

#[cfg(test)]
mod tests {
    //! Edge cases decided here: no frames (refused), an all-zero flat
    //! (refused), flat ≤ dark at some pixels (gain 1, counted), a frame of the
    //! wrong size (refused naming it). Reference: the formula on hand values.
    use super::*;
    use crate::raster::{Encoding, Layout};

    fn plane(v: &[f32]) -> Plane {
        Plane::from_vec(v.len(), 1, v.to_vec()).unwrap()
    }

    #[test]
    fn formula_on_hand_values() {
        // raw 0.5 0.3 0.9 0.4, dark 0.1 everywhere, flat 0.5 0.3 0.1 0.7:
        // flat − dark = 0.4 0.2 (≤ 0: bad) 0.6, mean of the good = 0.4.
        let raw = plane(&[0.5, 0.3, 0.9, 0.4]);
        let r = Raster::new(vec![raw], Layout::Gray, Encoding::Linear).unwrap();
        let ff =
            Flatfield::from_planes(Some(vec![plane(&[0.1; 4])]), Some(vec![plane(&[0.5, 0.3, 0.1, 0.7])]))
                .unwrap();
        let out = ff.apply(r).unwrap();
        // (0.4/0.4)·0.4 = 0.4, (0.2/0.2)·0.4 = 0.4, 0.9 − 0.1 = 0.8 (bad), (0.3/0.6)·0.4 = 0.2
        let want = [0.4, 0.4, 0.8, 0.2];
        for (g, w) in out.planes()[0].as_slice().iter().zip(want) {
            assert!((g - w).abs() < 1e-6, "{g} vs {w}");
        }
        assert_eq!(out.metadata.notes[0].value, NoteValue::Number { value: 1.0, unit: "" });
    }

    #[test]
    fn bad_frames_are_refused() {
        assert!(Flatfield::from_planes(None, None).unwrap_err().0.contains("dark frame, a flat frame"));
        assert!(Flatfield::from_planes(None, Some(vec![plane(&[0.0; 3])])).unwrap_err().0.contains("zero"));
        let ff = Flatfield::from_planes(Some(vec![plane(&[0.5; 3])]), Some(vec![plane(&[0.2; 3])])).unwrap();
        let r = Raster::new(vec![plane(&[0.5; 3])], Layout::Gray, Encoding::Linear).unwrap();
        assert!(ff.apply(r.clone()).unwrap_err().to_string().contains("nowhere above"));
        let small = Flatfield::from_planes(Some(vec![plane(&[0.5; 2])]), None).unwrap();
        let e = small.apply(r).unwrap_err().to_string();
        assert!(e.contains("dark frame (in memory) is 2×1") && e.contains("3×1"), "{e}");
        let missing = Flatfield::from_files(None, Some(Path::new("no/such/flat.png")), false);
        assert!(missing.unwrap_err().0.contains("no/such/flat.png"));
    }
}
