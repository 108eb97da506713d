//! CLI checks (every operator listed, usable in one-off runs and recipes, bad
//! parameters refused on one line) and cross-checks of `box`, `median`,
//! `sobel`, `scharr`, `laplace` and `sharpen` against committed fixtures
//! (tests/reference/make_filters.py, listed in fixtures/filters/manifest.toml):
//! scipy.ndimage, OpenCV's Python bindings and scikit-image, each case naming its reference function. Every case runs the
//! recorded Pumice step through the public step grammar on a linear gray raster.
//!
//! Edge cases covered by the fixtures: 1×N and N×1 inputs (one direction is
//! all halo), a 2×2 input (every window is wider than the image), every border
//! rule scipy has (OpenCV's filters have no wrap rule, so scharr has four).
//!
//! Tolerance, derived as in reference.rs (Higham, "Accuracy and Stability of
//! Numerical Algorithms", §3.1: an n-term f32 dot product is off by at most
//! γₙ·Σ|wᵢxᵢ|, γₙ ≈ n·u, u = 2⁻²⁴), with the references exact in f64 and
//! rounded to f32 once:
//!
//! `tol = ε · Σ|K| · M · (taps + passes + 1)`, ε = f32::EPSILON = 2u,
//!
//! where M is the largest |input| (or |fill|), Σ|K| the sum of the absolute
//! 2-D weights and `taps`/`passes` what Pumice's engine does, both recorded per
//! case by the script:
//! * box: running sums in f64 (taps 0, one f32 rounding): ε·M·2;
//! * sobel/scharr x, y: Σ|K| = 8 / 32, 3 + 3 taps in 2 passes; magnitude adds
//!   both planes' errors and the square root's rounding (14 "taps");
//! * laplace: the 3×3 stencil by direct 2-D correlation, 9 taps; the LoG as two
//!   separable runs summed, Σ|K| = 2·Σ|g|·Σ|g''|, taps 2·(2r+1) + 1;
//! * median: the output is one of the input samples (or the fill), so the
//!   tolerance is 0 (Σ|K| recorded as 0): bit-exact agreement;
//! * sharpen: the blur's bound scaled by (1 + amount) plus the difference and
//!   sum (2 more roundings); compared after clamping Pumice to [0, 1], because
//!   skimage.filters.unsharp_mask clips its output to [0, 1].

use std::collections::BTreeMap;
use std::path::{Path, PathBuf};

use pumice::pipeline::Step;
use pumice::raster::{Encoding, Layout, Plane, Raster};
use serde::Deserialize;

use crate::assert_planes_close;
use crate::harness::worst_difference;
use crate::reference::read_npy;

fn fixtures() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/reference/fixtures/filters")
}

#[derive(Debug, Deserialize)]
struct Manifest {
    numpy_version: String,
    scipy_version: String,
    opencv_version: String,
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
    input: String,
    output: String,
    shape: [usize; 2],
    clip: bool,
    /// 255 when the input holds exact 8-bit codes (`Raster::levels`), else 0.
    levels: u32,
    sum_abs: f64,
    taps: usize,
    passes: usize,
}

fn manifest() -> Manifest {
    crate::harness::read_manifest(&fixtures())
}

fn run(case: &Case) -> (Plane, Plane, f32) {
    let input = read_npy(&fixtures().join(&case.input));
    let want = read_npy(&fixtures().join(&case.output));
    assert_eq!([input.height(), input.width()], case.shape, "{}: input shape", case.id);
    let step = Step::parse(&case.step).unwrap_or_else(|e| panic!("{}: `{}`: {e}", case.id, case.step));
    let max_in = input.as_slice().iter().fold(0.0f64, |a, &v| a.max(f64::from(v).abs()));
    // the fill values in the fixtures are 0 or 0.25, never above max_in's range [0, 1)
    let big_m = max_in.max(0.25);
    let tol = (f64::from(f32::EPSILON) * case.sum_abs * big_m * (case.taps + case.passes + 1) as f64) as f32;
    let mut raster = Raster::new(vec![input], Layout::Gray, Encoding::Linear).unwrap();
    raster.levels = (case.levels > 0).then_some(case.levels);
    let out = step.op.apply(raster).unwrap_or_else(|e| panic!("{}: {e}", case.id));
    let mut got = out.into_planes().remove(0);
    if case.clip {
        got.as_mut_slice().iter_mut().for_each(|v| *v = v.clamp(0.0, 1.0));
    }
    (got, want, tol)
}

/// Runs every case of `operator`, prints the worst difference per family next
/// to its tolerance (`--nocapture`), then asserts each case.
fn check_all(operator: &str, borders: &[&str]) {
    let m = manifest();
    let cases: Vec<&Case> = m.case.iter().filter(|c| c.operator == operator).collect();
    for border in borders {
        assert!(cases.iter().any(|c| c.step.contains(&format!("border={border}"))), "no {operator} {border}");
    }
    let results: Vec<_> = cases.iter().map(|c| (c, run(c))).collect();
    let mut families: BTreeMap<String, (f32, f32)> = BTreeMap::new();
    for (c, (got, want, tol)) in &results {
        let (d, _, _) = worst_difference(got, want);
        let family = c.id.rsplit_once('-').map_or(c.id.as_str(), |(f, _)| f).to_string();
        let e = families.entry(family).or_insert((0.0, f32::INFINITY));
        e.0 = e.0.max(d);
        e.1 = e.1.min(*tol);
    }
    println!(
        "{operator} (numpy {}, scipy {}, opencv {}, scikit-image {}):",
        m.numpy_version, m.scipy_version, m.opencv_version, m.skimage_version
    );
    for (family, (worst, tol)) in &families {
        println!("  {family:<36} worst {worst:.2e}  smallest tolerance {tol:.2e}");
    }
    for (c, (got, want, tol)) in &results {
        assert_planes_close!(got, want, *tol, "{}: {} {}", c.id, c.reference, c.call);
    }
}

const ALL: [&str; 5] = ["reflect", "mirror", "replicate", "wrap", "constant"];

#[test]
fn box_matches_scipy_uniform_filter() {
    // scipy.ndimage.uniform_filter, size 3 and 7, every mode; tolerance ε·M·2 (above).
    check_all("box", &ALL);
}

#[test]
fn sobel_matches_scipy_sobel() {
    // scipy.ndimage.sobel along axis 1 and 0, magnitude by numpy.hypot.
    check_all("sobel", &ALL);
}

#[test]
fn scharr_matches_opencv_scharr() {
    // cv2.Scharr (CV_64F), magnitude by cv2.magnitude; OpenCV has no wrap rule.
    check_all("scharr", &["reflect", "mirror", "replicate", "constant"]);
}

#[test]
fn laplace_matches_scipy_laplace_correlate_and_gaussian_laplace() {
    // scipy.ndimage.laplace (4 neighbours), scipy.ndimage.correlate (8-neighbour
    // stencil), scipy.ndimage.gaussian_laplace (sigma 1.5 and 3).
    check_all("laplace", &ALL);
}

#[test]
fn sharpen_matches_skimage_unsharp_mask() {
    // skimage.filters.unsharp_mask (mode reflect, clipped to [0, 1]).
    check_all("sharpen", &["reflect"]);
}

#[test]
fn median_matches_scipy_median_filter_and_opencv_median_blur() {
    // scipy.ndimage.median_filter (square r = 1, 2, 4; disk r = 1, 3; every mode)
    // and cv2.medianBlur (ksize 3, 5, 7 on 8-bit codes, border replicate): exact.
    check_all("median", &ALL);
}

/// The steps of this area as a user would type them, one per operator and method.
const ONE_OFF_STEPS: [&str; 11] = [
    "box:2",
    "median:1",
    "median:radius=3,shape=disk",
    "sharpen:amount=1.5,sigma=1,threshold=0.01",
    "sobel",
    "scharr:output=direction,on=channels",
    "laplace:neighbours=8",
    "laplace:sigma=1.5",
    "gauss:sigma=12",
    "gauss:sigma=1,method=fast",
    "gauss:sigma=30,method=exact,border=wrap",
];

#[test]
fn every_operator_is_listed_and_runs_from_the_command_line_and_a_recipe() {
    use crate::cli::small_png;
    use crate::harness::{Scratch, pumice};
    let list = pumice(&["ops"]).ok().stdout();
    for name in ["box", "median", "sharpen", "sobel", "scharr", "laplace"] {
        assert!(list.contains(name), "`pumice ops` lacks {name}\n{list}");
        let doc = pumice(&["ops", name]).ok().stdout();
        assert!(doc.contains("Domain") && doc.contains("Border") && doc.contains("Source"), "{name}: {doc}");
    }
    let s = Scratch::new();
    let input = small_png(&s, "in.png").display().to_string();
    for (i, step) in ONE_OFF_STEPS.iter().enumerate() {
        let out = s.path(&format!("out{i}.png")).display().to_string();
        pumice(&["run", &input, "-o", &out, "-s", step]).ok();
        assert!(std::path::Path::new(&out).exists(), "{step}: no output");
    }
    let recipe: String = ONE_OFF_STEPS[..4]
        .iter()
        .map(|step| {
            let (op, params) = step.split_once(':').unwrap_or((step, ""));
            let mut t = format!("[[step]]\nop = \"{op}\"\n");
            for kv in params.split(',').filter(|kv| !kv.is_empty()) {
                let (k, v) = kv.split_once('=').unwrap_or(("radius", kv));
                let v = if v.parse::<f64>().is_ok() { v.to_string() } else { format!("\"{v}\"") };
                t.push_str(&format!("{k} = {v}\n"));
            }
            t
        })
        .collect();
    s.write("r.toml", recipe.as_bytes());
    let r = s.path("r.toml").display().to_string();
    let checked = pumice(&["recipe", "check", &r]).ok().stdout();
    assert!(checked.contains("median:radius=3,shape=disk"), "{checked}");
    pumice(&["run", &input, "-o", &s.path("recipe.png").display().to_string(), "-r", &r]).ok();
}

#[test]
fn bad_parameters_are_usage_errors_on_one_line() {
    use crate::cli::small_png;
    use crate::harness::{Scratch, pumice};
    let s = Scratch::new();
    let input = small_png(&s, "in.png").display().to_string();
    let out = s.path("out.png").display().to_string();
    for (step, says) in [
        ("box:0", "radius"),
        ("box:2.5", "whole number"),
        ("median:radius=300", "radius"),
        ("median:1,shape=round", "expected one of square, disk"),
        ("sharpen:sigma=0", "sigma"),
        ("sharpen:amount=-1", "amount"),
        ("sobel:output=angle", "expected one of x, y, magnitude, direction"),
        ("laplace:neighbours=6", "expected one of 4, 8"),
        ("laplace:sigma=-1", "sigma"),
        ("gauss:2,method=quick", "expected one of auto, exact, fast"),
    ] {
        pumice(&["run", &input, "-o", &out, "-s", step]).expect_code(2).stderr_has(&[says]).one_line_error();
    }
    assert!(!std::path::Path::new(&out).exists());
}
