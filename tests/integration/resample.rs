//! Resampling against reference libraries (committed fixtures from
//! tests/reference/make_resample.py) and the identities and linear-light
//! behaviour `resize` and `rotate` must have.

use std::path::PathBuf;

use pumice::pipeline::{DomainPolicy, Pipeline};
use pumice::raster::{Encoding, Layout, Plane, Raster};

use crate::reference::read_npy;

#[derive(serde::Deserialize)]
struct Manifest {
    case: Vec<Case>,
}

#[derive(serde::Deserialize)]
struct Case {
    kind: String,
    filter: String,
    width: Option<usize>,
    height: Option<usize>,
    angle: Option<f64>,
    input: String,
    output: String,
    reference: String,
    exact: Option<String>,
    margin: Option<usize>,
    reference_error: Option<f32>,
}

fn folder() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("tests/reference/fixtures/resample")
}

fn cases(kind: &str) -> Vec<Case> {
    let m: Manifest = crate::harness::read_manifest(&folder());
    m.case.into_iter().filter(|c| c.kind == kind).collect()
}

fn gray(p: Plane, encoding: Encoding) -> Raster {
    Raster::new(vec![p], Layout::Gray, encoding).unwrap()
}

fn run(step: &str, r: Raster, policy: DomainPolicy) -> Raster {
    Pipeline::parse(&[step]).unwrap().run(r, policy).unwrap()
}

#[test]
fn resize_matches_pillow_on_8_bit_codes() {
    // Pillow's resampling uses fixed-point weights and rounds to 8 bits after its
    // first (horizontal) pass; ours keeps f32 between passes. That intermediate
    // rounding moves a result by at most one code, so ±1 code is the tolerance.
    let cases = cases("pillow");
    assert!(cases.len() >= 16);
    for c in cases {
        let input = read_npy(&folder().join(&c.input));
        let want = read_npy(&folder().join(&c.output));
        let codes = Plane::from_fn(input.width(), input.height(), |x, y| input.get(x, y) / 255.0).unwrap();
        let mut r = gray(codes, Encoding::Srgb);
        r.levels = Some(255);
        let (w, h) = (c.width.unwrap(), c.height.unwrap());
        // Pillow works on the encoded values, hence --domain encoded.
        let out = run(
            &format!("resize:width={w},height={h},fit=fill,filter={}", c.filter),
            r,
            DomainPolicy::Encoded,
        );
        let got =
            Plane::from_fn(w, h, |x, y| (out.planes()[0].get(x, y).clamp(0.0, 1.0) * 255.0).round()).unwrap();
        crate::assert_planes_close!(got, want, 1.0, "{} vs {}", c.filter, c.reference);
    }
}

#[test]
fn box_reduction_matches_opencv_area_averaging() {
    for c in cases("area") {
        let input = read_npy(&folder().join(&c.input));
        let want = read_npy(&folder().join(&c.output));
        let (w, h) = (c.width.unwrap(), c.height.unwrap());
        let factor = input.width() / w;
        let out = run(
            &format!("resize:width={w},height={h},fit=fill,filter=box"),
            gray(input, Encoding::Linear),
            DomainPolicy::Auto,
        );
        // An average of f² samples in [0, 1] summed in f32 over two passes: at most
        // 2·f·ε of rounding (cv2.resize INTER_AREA accumulates in its own order).
        let tol = 2.0 * factor as f32 * f32::EPSILON + f32::EPSILON;
        crate::assert_planes_close!(out.planes()[0], want, tol, "{}", c.reference);
    }
}

#[test]
fn bilinear_upscaling_matches_scikit_image() {
    let cases = cases("skimage-up");
    assert_eq!(cases.len(), 2);
    for c in cases {
        let input = read_npy(&folder().join(&c.input));
        let want = read_npy(&folder().join(&c.output));
        let (w, h) = (c.width.unwrap(), c.height.unwrap());
        let step = format!("resize:width={w},height={h},fit=fill,filter=bilinear");
        let out = run(&step, gray(input, Encoding::Linear), DomainPolicy::Auto);
        // Same sample positions and two-tap weights; scikit-image interpolates in
        // double precision, Pumice in f32 over two passes: a few f32 steps of
        // rounding on values in [0, 1].
        crate::assert_planes_close!(out.planes()[0], want, 4.0 * f32::EPSILON, "{}", c.reference);
    }
}

#[test]
fn antialiased_reduction_reproduces_a_band_limited_pattern_as_closely_as_scikit_image() {
    let cases = cases("skimage-down");
    assert_eq!(cases.len(), 2);
    for c in cases {
        let input = read_npy(&folder().join(&c.input));
        let skimage = read_npy(&folder().join(&c.output));
        let exact = read_npy(&folder().join(c.exact.as_deref().unwrap()));
        let (w, h, m) = (c.width.unwrap(), c.height.unwrap(), c.margin.unwrap());
        let step = format!("resize:width={w},height={h},fit=fill,filter=lanczos3");
        let out = run(&step, gray(input, Encoding::Linear), DomainPolicy::Auto);
        let worst = |p: &Plane| {
            let mut worst = 0.0f32;
            for y in m..h - m {
                for x in m..w - m {
                    worst = worst.max((p.get(x, y) - exact.get(x, y)).abs());
                }
            }
            worst
        };
        let (ours, theirs) = (worst(&out.planes()[0]), worst(&skimage));
        // The manifest's figure is scikit-image's own deviation from the pattern.
        assert!((theirs - c.reference_error.unwrap()).abs() < 1e-6);
        assert!(
            ours <= theirs,
            "{w}×{h}: Pumice deviates from the pattern by {ours}, {} by {theirs}",
            c.reference
        );
    }
}

#[test]
fn rotation_matches_scikit_image() {
    for c in cases("rotate") {
        let input = read_npy(&folder().join(&c.input));
        let want = read_npy(&folder().join(&c.output));
        // scikit-image turns counter-clockwise for positive angles; Pumice clockwise.
        let step = format!("rotate:angle={},filter={},expand=false,fill=black", -c.angle.unwrap(), c.filter);
        let out = run(&step, gray(input, Encoding::Linear), DomainPolicy::Auto);
        assert_eq!(out.layout(), Layout::Gray);
        // Both interpolate in double precision at the same coordinates (they agree to
        // about 1e-12 pixel); values lie in [0, 1]. 1e-5 covers the f32 storage of the
        // result and the differing evaluation order, and is far below one 16-bit code.
        crate::assert_planes_close!(out.planes()[0], want, 1e-5, "{}", c.reference);
    }
}

#[test]
fn a_checkerboard_halved_in_linear_light_is_linear_half_gray() {
    // A one-pixel black and white checkerboard reduced 2× holds half the light:
    // linear 0.5, sRGB code 188 (IEC 61966-2-1; REFERENCES.md [K1]), not 128.
    let board = Plane::from_fn(8, 8, |x, y| ((x + y) % 2) as f32).unwrap();
    let mut r = gray(board, Encoding::Srgb);
    r.levels = Some(255);
    r.metadata.source_sample = Some(pumice::raster::SampleType::U8);
    let out = run("resize:scale=0.5,filter=box", r, DomainPolicy::Auto);
    let bytes = pumice::io::encode(&out, &pumice::io::EncodeOptions::new(pumice::io::Format::Png)).unwrap();
    let back = pumice::io::decode(&bytes, &pumice::io::DecodeOptions::default()).unwrap();
    for v in back.planes()[0].as_slice() {
        assert_eq!((v * 255.0).round(), 188.0);
    }
}

#[test]
fn quarter_turns_and_flips_are_exact() {
    let p = Plane::from_fn(7, 3, |x, y| (x * 3 + y) as f32 / 21.0).unwrap();
    let r = gray(p, Encoding::Linear);
    let four = Pipeline::parse(&["rotate:90", "rotate:90", "rotate:90", "rotate:90"])
        .unwrap()
        .run(r.clone(), DomainPolicy::Auto)
        .unwrap();
    assert_eq!(four, r);
    let twice = Pipeline::parse(&["flip:vertical", "flip:vertical"])
        .unwrap()
        .run(r.clone(), DomainPolicy::Auto)
        .unwrap();
    assert_eq!(twice, r);
}

#[test]
fn oversized_results_are_refused_before_allocation() {
    let r = gray(Plane::filled(100, 100, 0.5).unwrap(), Encoding::Linear);
    let mut p = Pipeline::parse(&["resize:scale=50"]).unwrap();
    p.max_pixels = 1_000_000;
    let e = p.run(r, DomainPolicy::Auto).unwrap_err();
    assert!(e.error.to_string().contains("5000×5000"), "{}", e.error);
}
