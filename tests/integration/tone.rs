//! Cross-checks of `stretch`, `equalize`, `binarize` and `space` against
//! committed scikit-image, numpy and colour-science fixtures (tests/reference/make_tone.py writes them to
//! tests/reference/fixtures/tone/ and lists them in manifest.toml). Each case is
//! built through the public step grammar and run on a gray raster of exact
//! 8-bit codes (code/255, `levels = 255`, as the decoder makes them) or of float
//! data.
//!
//! Tolerances, derived rather than tuned:
//!
//! * Otsu: the threshold must be the same bin (for 8-bit input the same code,
//!   compared exactly; for float data within 1e-6 of a bin width), and then the
//!   0/1 image must be identical.
//! * Sauvola: scikit-image computes T in float64 from float64 inputs, Pumice in
//!   float64 from the f32 samples code/255 (relative error ≤ 2⁻²⁴) with band-local
//!   summed-area tables. A pixel may therefore differ only where it is a near tie,
//!   |x − T| ≤ 1e-6 (a few f32 ulps of values ≤ 1); the test counts such pixels
//!   and fails on any other difference.
//! * stretch: the percentiles are exact on codes, so the only error is the f32
//!   map `(v − lo)·(1/(hi − lo))`: ≤ 4 roundings of values ≤ 1/(hi − lo), so
//!   tol = 4·ε·(1 + |lo|)/(hi − lo), ε = f32::EPSILON (standard floating-point
//!   error analysis, one rounding per operation).

use std::path::{Path, PathBuf};

use pumice::pipeline::Step;
use pumice::raster::{Encoding, Layout, Plane, Raster};
use serde::Deserialize;

use crate::harness::worst_difference;
use crate::reference::read_npy;

fn fixtures() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/reference/fixtures/tone")
}

#[derive(Debug, Deserialize)]
struct Manifest {
    skimage_version: String,
    case: Vec<Case>,
}

#[derive(Debug, Deserialize)]
struct Case {
    id: String,
    reference: String,
    step: String,
    input: String,
    scale: f64,
    output: String,
    threshold: Option<f64>,
    bin_width: Option<f64>,
    thresholds: Option<String>,
    low_value: Option<f64>,
    high_value: Option<f64>,
    whitepoint_x: Option<f64>,
    whitepoint_y: Option<f64>,
}

fn manifest() -> Manifest {
    crate::harness::read_manifest(&fixtures())
}

/// The case's input as Pumice's decoder would give it.
fn input(case: &Case) -> Raster {
    let p = read_npy(&fixtures().join(&case.input));
    if case.scale == 255.0 {
        let data = p.as_slice().iter().map(|&c| c / 255.0).collect();
        let p = Plane::from_vec(p.width(), p.height(), data).unwrap();
        let mut r = Raster::new(vec![p], Layout::Gray, Encoding::Srgb).unwrap();
        r.levels = Some(255);
        r
    } else {
        Raster::new(vec![p], Layout::Gray, Encoding::Srgb).unwrap()
    }
}

fn run(case: &Case) -> (Raster, Plane) {
    let step = Step::parse(&case.step).unwrap_or_else(|e| panic!("{}: {e}", case.id));
    let r = input(case);
    let out = step.op.apply(r).unwrap_or_else(|e| panic!("{}: {e}", case.id));
    (out, read_npy(&fixtures().join(&case.output)))
}

#[test]
fn manifest_is_from_the_pinned_scikit_image() {
    // tests/reference/requirements.txt pins scikit-image==0.26.0.
    assert_eq!(manifest().skimage_version, "0.26.0");
}

#[test]
fn otsu_threshold_matches_scikit_image_to_the_bin() {
    let m = manifest();
    let mut n = 0;
    for case in m.case.iter().filter(|c| c.id.ends_with("-otsu")) {
        let want_t = case.threshold.unwrap();
        let r = input(case);
        let levels = r.levels;
        let samples = r.planes()[0].as_slice();
        let t = pumice::ops::threshold::otsu_threshold(samples, levels, 256).unwrap();
        match case.bin_width {
            // 8-bit: the same code exactly (skimage.filters.threshold_otsu on uint8).
            None => assert_eq!(t * 255.0, want_t, "{}: {}", case.id, case.reference),
            Some(w) => assert!((t - want_t).abs() <= 1e-6 * w, "{}: {t} vs {want_t} (bin {w})", case.id),
        }
        let (out, want) = run(case);
        assert_eq!(out.planes()[0], want, "{}: 0/1 image differs", case.id);
        n += 1;
    }
    assert_eq!(n, 5, "cases: camera, coins, moon, page and float");
}

#[test]
fn sauvola_matches_scikit_image_except_at_ties() {
    let m = manifest();
    let mut n = 0;
    for case in m.case.iter().filter(|c| c.thresholds.is_some()) {
        let (out, want) = run(case);
        let t = read_npy(&fixtures().join(case.thresholds.as_ref().unwrap()));
        let x = input(case);
        let mut ties = 0;
        for i in 0..want.as_slice().len() {
            let (got, exp) = (out.planes()[0].as_slice()[i], want.as_slice()[i]);
            if got != exp {
                let d = (x.planes()[0].as_slice()[i] - t.as_slice()[i]).abs();
                assert!(d <= 1e-6, "{}: pixel {i} differs and is no tie (|x − T| = {d})", case.id);
                ties += 1;
            }
        }
        assert!(ties * 1000 < want.as_slice().len(), "{}: {ties} tie pixels", case.id);
        eprintln!("{}: {ties} pixels differ, all ties", case.id);
        n += 1;
    }
    assert_eq!(n, 3);
}

#[test]
fn stretch_matches_numpy_percentile_and_rescale_intensity() {
    let m = manifest();
    let mut n = 0;
    for case in m.case.iter().filter(|c| c.low_value.is_some()) {
        let (out, want) = run(case);
        let (lo, hi) = (case.low_value.unwrap(), case.high_value.unwrap());
        let tol = (4.0 * f64::from(f32::EPSILON) * (1.0 + lo.abs()) / (hi - lo)) as f32;
        let (d, x, y) = worst_difference(&out.planes()[0], &want);
        assert!(d <= tol, "{}: worst difference {d} at ({x}, {y}) > {tol} ({})", case.id, case.reference);
        eprintln!("{}: worst difference {d:e} (tolerance {tol:e})", case.id);
        n += 1;
    }
    assert_eq!(n, 5);
}

/// equalize against skimage.exposure.equalize_hist. On 8-bit codes both compute
/// cdf(code) = #{≤ code}/N exactly and round it once to f32: tol = ε/2 (one
/// rounding of a value ≤ 1). On float data both use 65536 bins between min and
/// max, but numpy decides the bin of a sample on a bin edge with its own
/// rounding, so a sample may land in the neighbouring bin; that moves the cdf by
/// 1/N per sample. tol = 4/N (up to four such samples, an assumption checked
/// by this test) plus the f32 interpolation (3 roundings).
#[test]
fn equalize_matches_scikit_image_equalize_hist() {
    let m = manifest();
    let mut n = 0;
    for case in m.case.iter().filter(|c| c.id.ends_with("-equalize")) {
        let (out, want) = run(case);
        let count = want.as_slice().len() as f32;
        let tol = if case.scale == 255.0 { f32::EPSILON / 2.0 } else { 4.0 / count + 3.0 * f32::EPSILON };
        let (d, x, y) = worst_difference(&out.planes()[0], &want);
        assert!(d <= tol, "{}: worst difference {d:e} at ({x}, {y}) > {tol:e} ({})", case.id, case.reference);
        eprintln!("{}: worst difference {d:e} (tolerance {tol:e})", case.id);
        n += 1;
    }
    assert_eq!(n, 3);
}

/// space against colour-science on a 9×9×9 grid of sRGB colours (black, white,
/// the primaries and secondaries among them): every channel within 1e-4, the
/// bound the issue sets (palette and colour-science both compute in f64 from the
/// same derived matrix; the rest is f32 storage, ≤ 100·2⁻²⁴ ≈ 6e-6 for L*).
/// White's chromaticity must be D65's published (0.3127, 0.3290) (CIE 15:2004,
/// Table T.3, to 4 digits as IEC 61966-2-1 gives it).
#[test]
fn space_matches_colour_science_on_a_grid() {
    let m = manifest();
    let mut n = 0;
    let mut worst_all = Vec::new();
    for case in m.case.iter().filter(|c| c.id.starts_with("srgb-grid-")) {
        let grid = read_npy(&fixtures().join(&case.input));
        let want = read_npy(&fixtures().join(&case.output));
        let count = grid.height();
        let planes = (0..3).map(|c| Plane::from_fn(count, 1, |i, _| grid.get(c, i)).unwrap()).collect();
        let r = Raster::new(planes, Layout::Rgb, Encoding::Srgb).unwrap();
        let out = Step::parse(&case.step).unwrap().op.apply(r).unwrap();
        let (mut worst, mut at) = (0.0f32, (0, 0));
        for i in 0..count {
            for c in 0..3 {
                let d = (out.planes()[c].get(i, 0) - want.get(c, i)).abs();
                if d > worst {
                    worst = d;
                    at = (i, c);
                }
            }
        }
        eprintln!(
            "{}: worst difference {worst:e} at colour {}, channel {} (tolerance 1e-4)",
            case.id, at.0, at.1
        );
        worst_all.push((case.id.clone(), worst));
        if case.id.ends_with("xyz") {
            let last = count - 1; // sRGB (1, 1, 1)
            let xyz: Vec<f32> = (0..3).map(|c| out.planes()[c].get(last, 0)).collect();
            let s: f32 = xyz.iter().sum();
            for (got, published) in [(xyz[0] / s, 0.3127f32), (xyz[1] / s, 0.3290)] {
                assert!((got - published).abs() < 1e-4, "white chromaticity {got} vs {published}");
            }
            assert!((f64::from(xyz[0] / s) - case.whitepoint_x.unwrap()).abs() < 1e-4);
            assert!((f64::from(xyz[1] / s) - case.whitepoint_y.unwrap()).abs() < 1e-4);
        }
        n += 1;
    }
    assert_eq!(n, 3);
    assert!(worst_all.iter().all(|(_, w)| *w <= 1e-4), "{worst_all:?}");
}

/// A raster left in another colour model is written as sRGB (here PNG, back to
/// the same 8-bit codes), while a 32-bit float TIFF keeps the model's channels.
#[test]
fn encoding_after_space_converts_back_unless_float_tiff() {
    use pumice::io::{self, DecodeOptions, EncodeOptions, Format};
    use pumice::raster::{ColourModel, SampleType};
    let planes = (0..3)
        .map(|c| Plane::from_fn(16, 4, |x, y| ((x * 13 + y * 29 + c * 71) % 256) as f32 / 255.0).unwrap());
    let mut r = Raster::new(planes.collect(), Layout::Rgb, Encoding::Srgb).unwrap();
    r.levels = Some(255);
    let lab = pumice::pipeline::Pipeline::new(vec![Step::parse("space:lab").unwrap()])
        .run(r.clone(), pumice::pipeline::DomainPolicy::Auto)
        .unwrap();
    assert_eq!(lab.model, ColourModel::Lab);
    let png = io::encode(&lab, &EncodeOptions::new(Format::Png)).unwrap();
    let back = io::decode(&png, &DecodeOptions::default()).unwrap();
    assert_eq!(back.planes(), r.planes(), "PNG of a Lab raster holds the original sRGB codes");
    let tiff_opts = EncodeOptions { sample: Some(SampleType::F32), ..EncodeOptions::new(Format::Tiff) };
    let tiff = io::encode(&lab, &tiff_opts).unwrap();
    let raw = io::decode(&tiff, &DecodeOptions::default()).unwrap();
    for c in 0..3 {
        assert_eq!(raw.planes()[c], lab.planes()[c], "float TIFF keeps channel {c} of Lab");
    }
}
