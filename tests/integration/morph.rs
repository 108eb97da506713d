//! Cross-checks of the morphology and science operators: `erode`, `dilate`,
//! `open`, `close`, `tophat`, the rolling ball of `illumination` and `bin`
//! against committed fixtures (tests/reference/make_morph.py, listed in
//! fixtures/morph/manifest.toml: scipy.ndimage, scikit-image, numpy, each case
//! naming its reference function); `hotpixel` and `flatfield` on synthetic
//! images with known answers, through the library and the real binary.
//!
//! Tolerances:
//! * flat morphology: every output is an input sample, the fill, or (top-hats)
//!   one f32 subtraction that scipy also does in f32: 0, bit-exact;
//! * bin: sums of at most 16 f32 values on a 2⁻²⁴ grid below 1 are exact in
//!   f64, rounded to f32 once on both sides: 0;
//! * exact ball (apex and opening): 1e-6, from Pumice's f32 roundings (see the
//!   script: four roundings of values below 1.25);
//! * shrunk ball (auto shrink, R = 12 → s = 2, R = 50 → s = 4) against the exact
//!   opening: empirical bounds recorded per case, on the largest and on the mean
//!   difference (measured 0.106 / 0.0110 of full scale for R = 12 on the coins
//!   crop, 0.0106 / 0.0024 for R = 50; bounds about 15 % above). The block
//!   minimum lets the ball rest on the darkest pixel of each s×s block and the
//!   bilinear return to full size rounds off the background's sharp corners, so
//!   the largest differences sit at coin edges, where a small ball follows the
//!   image closely.

use std::path::{Path, PathBuf};

use pumice::io::{EncodeOptions, Format, encode};
use pumice::ops::science::{Flatfield, ball_apex};
use pumice::pipeline::Step;
use pumice::raster::{Encoding, Layout, NoteValue, Plane, Raster, SampleType};
use serde::Deserialize;

use crate::assert_planes_close;
use crate::harness::{Scratch, pumice, read_image, worst_difference};
use crate::reference::read_npy;

fn fixtures() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/reference/fixtures/morph")
}

#[derive(Debug, Deserialize)]
struct Manifest {
    numpy_version: String,
    scipy_version: String,
    skimage_version: String,
    case: Vec<Case>,
}

#[derive(Debug, Deserialize)]
struct Case {
    id: String,
    operator: String,
    reference: String,
    call: String,
    step: String,
    tolerance: f32,
    /// For the shrunk ball: the bound on the mean absolute difference.
    #[serde(default)]
    mean_tolerance: Option<f32>,
    input: String,
    output: String,
    shape: [usize; 2],
}

fn gray(p: Plane) -> Raster {
    Raster::new(vec![p], Layout::Gray, Encoding::Linear).unwrap()
}

/// Runs every case whose operator is in `operators`; returns how many ran.
fn check(operators: &[&str]) -> usize {
    let m: Manifest = crate::harness::read_manifest(&fixtures());
    let mut n = 0;
    println!("numpy {}, scipy {}, scikit-image {}", m.numpy_version, m.scipy_version, m.skimage_version);
    for c in m.case.iter().filter(|c| operators.contains(&c.operator.as_str())) {
        let input = read_npy(&fixtures().join(&c.input));
        let want = read_npy(&fixtures().join(&c.output));
        assert_eq!([input.height(), input.width()], c.shape, "{}: input shape", c.id);
        let got = if c.operator == "ball-apex" {
            let radius: f64 = c.id.split('-').nth(2).unwrap()[1..].parse().unwrap();
            ball_apex(&input, radius, radius / 255.0)
        } else {
            let step = Step::parse(&c.step).unwrap_or_else(|e| panic!("{}: `{}`: {e}", c.id, c.step));
            step.op.apply(gray(input)).unwrap_or_else(|e| panic!("{}: {e}", c.id)).into_planes().remove(0)
        };
        let (d, _, _) = worst_difference(&got, &want);
        if c.tolerance > 0.0 {
            let mean = got.as_slice().iter().zip(want.as_slice()).map(|(a, b)| (a - b).abs()).sum::<f32>()
                / got.as_slice().len() as f32;
            println!("  {:<36} worst {d:.2e} mean {mean:.2e} tolerance {:.0e}", c.id, c.tolerance);
            if let Some(bound) = c.mean_tolerance {
                assert!(mean <= bound, "{}: mean difference {mean} over {bound}", c.id);
            }
        }
        assert_planes_close!(got, want, c.tolerance, "{}: {} {}", c.id, c.reference, c.call);
        n += 1;
    }
    n
}

#[test]
fn flat_morphology_matches_scipy_ndimage() {
    // scipy.ndimage grey_erosion, grey_dilation, grey_opening, grey_closing,
    // white_tophat, black_tophat; footprints square, cross, skimage.morphology.disk.
    assert!(check(&["erode", "dilate", "open", "close", "tophat"]) > 300);
}

#[test]
fn rolling_ball_matches_scikit_image_and_scipy() {
    // skimage.restoration.rolling_ball (the apex trace) and the opening by the
    // ball from scipy.ndimage; exact to 1e-6, shrunk within the recorded bound.
    assert!(check(&["ball-apex", "ball", "ball-fast"]) >= 10);
}

#[test]
fn bin_matches_numpy_block_sums() {
    // numpy reshape-and-sum / mean, and block sums over the pixels present.
    assert!(check(&["bin"]) >= 18);
}

/// Seeded noise of spread ±`amp` around `level` (xorshift; no external source).
fn noisy(w: usize, h: usize, level: f32, amp: f32, seed: u64) -> Plane {
    let mut s = seed;
    Plane::from_fn(w, h, |_, _| {
        s ^= s << 13;
        s ^= s >> 7;
        s ^= s << 17;
        level + amp * ((s >> 40) as f32 / (1u64 << 24) as f32 - 0.5)
    })
    .unwrap()
}

#[test]
fn hotpixel_finds_every_planted_outlier_and_nothing_else() {
    // 200×150 noise of spread 0.02 around 0.4 with 37 planted hot and dead
    // pixels (none adjacent): exactly those are repaired (count exact), to
    // within the noise of the background.
    let (w, h) = (200, 150);
    let mut p = noisy(w, h, 0.4, 0.02, 7);
    let clean = p.clone();
    let spots: Vec<(usize, usize)> = (0..37).map(|i| ((i * 53 + 3) % w, (i * 29 + 1) % h)).collect();
    for (i, &(x, y)) in spots.iter().enumerate() {
        p.row_mut(y)[x] = if i % 3 == 0 { 0.0 } else { 1.0 };
    }
    let out = Step::parse("hotpixel:k=5").unwrap().op.apply(gray(p)).unwrap();
    assert_eq!(out.metadata.notes[0].name, "repaired samples");
    assert_eq!(out.metadata.notes[0].value, NoteValue::Number { value: 37.0, unit: "" });
    let q = &out.planes()[0];
    for y in 0..h {
        for x in 0..w {
            if spots.contains(&(x, y)) {
                assert!((q.get(x, y) - 0.4).abs() <= 0.01, "({x}, {y}) = {}", q.get(x, y));
            } else {
                assert_eq!(q.get(x, y), clean.get(x, y), "({x}, {y}) was changed");
            }
        }
    }
}

/// Coefficient of variation (standard deviation / mean) of a plane.
fn cv(p: &Plane) -> f64 {
    let v = p.as_slice();
    let n = v.len() as f64;
    let mean = v.iter().map(|&x| f64::from(x)).sum::<f64>() / n;
    let var = v.iter().map(|&x| (f64::from(x) - mean).powi(2)).sum::<f64>() / n;
    var.sqrt() / mean
}

/// A synthetic sensor: vignetting (cos⁴-like falloff to 55 % in the corners)
/// times a ±5 % pixel gain pattern, plus a dark offset 0.02 with a ±0.005 pattern.
fn sensor(w: usize, h: usize) -> (Plane, Plane, Plane, Plane) {
    let gain_noise = noisy(w, h, 1.0, 0.1, 3);
    let dark = noisy(w, h, 0.02, 0.01, 5);
    let gain = Plane::from_fn(w, h, |x, y| {
        let (u, v) = (x as f32 / w as f32 - 0.5, y as f32 / h as f32 - 0.5);
        let r2 = (u * u + v * v) * 2.0;
        (1.0 - 0.45 * r2) * gain_noise.get(x, y)
    })
    .unwrap();
    let expose = |signal: f32| Plane::from_fn(w, h, |x, y| dark.get(x, y) + signal * gain.get(x, y)).unwrap();
    // A uniform target of level 0.5 and a flat exposure of level 0.8.
    (expose(0.5), expose(0.8), dark.clone(), gain)
}

#[test]
fn flatfield_evens_out_a_vignetted_uniform_target() {
    // Before: the vignetting and gain pattern spread a uniform target by > 10 %;
    // after: the spread is f32 rounding only (the model is exact), far below 1 %.
    let (raw, flat, dark, _) = sensor(96, 64);
    let before = raw.as_slice().iter().zip(dark.as_slice()).map(|(r, d)| r - d).collect::<Vec<_>>();
    let before = Plane::from_vec(96, 64, before).unwrap();
    assert!(cv(&before) > 0.10, "before {}", cv(&before));
    let ff = Flatfield::from_planes(Some(vec![dark]), Some(vec![flat])).unwrap();
    let out = pumice::ops::Operator::apply(&ff, gray(raw)).unwrap();
    let after = cv(&out.planes()[0]);
    assert!(after < 0.01, "after {after}");
    assert!(after < 1e-5, "the exact model leaves rounding only: {after}");
    assert_eq!(out.metadata.notes[0].value, NoteValue::Number { value: 0.0, unit: "" });
}

fn write_f32_tiff(s: &Scratch, name: &str, p: Plane) -> PathBuf {
    let mut r = gray(p);
    r.metadata.source_sample = Some(SampleType::F32);
    let mut opts = EncodeOptions::new(Format::Tiff);
    opts.encoding = Encoding::Linear;
    opts.sample = Some(SampleType::F32);
    s.write(name, &encode(&r, &opts).unwrap())
}

#[test]
fn flatfield_reads_its_frames_and_reports_bad_pixels() {
    let s = Scratch::new();
    let (raw, mut flat, dark, _) = sensor(40, 30);
    flat.row_mut(3)[4] = 0.0; // a dead flat pixel: below its dark
    let raw_path = write_f32_tiff(&s, "raw.tif", raw);
    let flat_path = write_f32_tiff(&s, "flat.tif", flat);
    let dark_path = write_f32_tiff(&s, "dark.tif", dark);
    let small = write_f32_tiff(&s, "small.tif", Plane::filled(8, 8, 0.5).unwrap());
    let out = s.path("out.tif");
    let step = format!("flatfield:flat={},dark={}", flat_path.display(), dark_path.display());
    let run =
        pumice(&["run", raw_path.to_str().unwrap(), "-o", out.to_str().unwrap(), "-s", &step, "-v"]).ok();
    assert!(run.stderr().contains("flatfield: bad flat pixels = 1"), "{}", run.stderr());
    // The dead pixel is left at raw − dark; every other pixel is the even target.
    let corrected = read_image(&out);
    let rest: Vec<f32> = corrected.planes()[0]
        .as_slice()
        .iter()
        .enumerate()
        .filter(|(i, _)| *i != 3 * 40 + 4)
        .map(|(_, &v)| v)
        .collect();
    let rest = Plane::from_vec(rest.len(), 1, rest).unwrap();
    assert!(cv(&rest) < 0.01, "cv {}", cv(&rest));
    // A frame of another size fails the image, naming the frame.
    let bad = format!("flatfield:flat={}", small.display());
    pumice(&["run", raw_path.to_str().unwrap(), "-o", s.path("bad.tif").to_str().unwrap(), "-s", &bad])
        .expect_code(1)
        .stderr_has(&["small.tif", "8×8", "40×30"]);
    // A missing frame is refused when the step is built (usage error).
    pumice(&[
        "run",
        raw_path.to_str().unwrap(),
        "-o",
        s.path("x.tif").to_str().unwrap(),
        "-s",
        "flatfield:dark=nope.tif",
    ])
    .expect_code(2)
    .stderr_has(&["nope.tif"]);
}

#[test]
fn morphology_and_science_steps_run_from_the_command_line() {
    let s = Scratch::new();
    let input = crate::cli::small_png(&s, "in.png");
    for step in [
        "erode:2",
        "dilate:radius=1,shape=disk",
        "open:1,shape=cross,border=reflect",
        "close:1",
        "tophat:2,kind=black",
        "bin:2",
        "hotpixel",
        "illumination:radius=5",
        "illumination:method=paper,radius=4",
        "illumination:method=gauss,radius=3,mode=divide",
    ] {
        let out = s.path("out.png");
        pumice(&["run", input.to_str().unwrap(), "-o", out.to_str().unwrap(), "-s", step, "--overwrite"])
            .ok();
    }
    pumice(&[
        "run",
        input.to_str().unwrap(),
        "-o",
        s.path("o.png").to_str().unwrap(),
        "-s",
        "erode:shape=ring",
    ])
    .expect_code(2)
    .stderr_has(&["unknown shape `ring`", "square, cross, disk"]);
}
