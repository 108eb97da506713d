//! Cross-checks of `deskew`, `dust` and the connected-component labelling
//! against committed scipy and scikit-image fixtures
//! (tests/reference/make_scan.py writes them to tests/reference/fixtures/scan/),
//! and `autocrop` and the run notes through the real binary on images with
//! known borders.
//!
//! Tolerances:
//!
//! * deskew: the skew found must be within 0.05° of the angle scipy.ndimage.rotate
//!   turned the page by (issue 8 asks for an estimate to 0.05° and checks at 0.1°;
//!   measured errors: at most 0.025°, at the 0.3° page); the page of noise must
//!   report no skew.
//! * labelling: integer results, compared exactly: the same component count as
//!   scipy.ndimage.label (3×3 structure of ones) and skimage.measure.label
//!   (connectivity=2), and the same label image up to renumbering.
//! * dust: output samples are input samples (no arithmetic), so the result must
//!   equal skimage.morphology.remove_small_objects / area_closing /
//!   area_opening code for code.
//! * autocrop: the exact rectangle drawn.

use std::collections::HashMap;
use std::path::{Path, PathBuf};

use pumice::ops::scan::{label::label, measure_skew};
use pumice::pipeline::Step;
use pumice::raster::{Encoding, Layout, Plane, Raster};
use serde::Deserialize;

use crate::harness::{Scratch, pumice, read_image};

fn fixtures() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/reference/fixtures/scan")
}

#[derive(Debug, Deserialize)]
struct Manifest {
    scipy_version: String,
    skimage_version: String,
    case: Vec<Case>,
}

#[derive(Debug, Deserialize)]
struct Case {
    id: String,
    reference: String,
    kind: String,
    input: String,
    output: Option<String>,
    step: Option<String>,
    skew: Option<f64>,
    count_scipy: Option<usize>,
    count_skimage: Option<usize>,
}

fn manifest() -> Manifest {
    crate::harness::read_manifest(&fixtures())
}

fn cases(kind: &str) -> Vec<Case> {
    manifest().case.into_iter().filter(|c| c.kind == kind).collect()
}

/// The integer codes of a decoded 8- or 16-bit gray fixture.
fn codes(r: &Raster) -> Vec<u32> {
    let n = r.levels.expect("an integer fixture") as f32;
    r.planes()[0].as_slice().iter().map(|&v| (v * n).round() as u32).collect()
}

#[test]
fn manifest_is_from_the_pinned_libraries() {
    // tests/reference/requirements.txt pins scipy==1.17.1 and scikit-image==0.26.0.
    let m = manifest();
    assert_eq!((m.scipy_version.as_str(), m.skimage_version.as_str()), ("1.17.1", "0.26.0"));
}

#[test]
fn deskew_recovers_the_angles_scipy_turned_the_page_by() {
    let all = cases("deskew");
    assert_eq!(all.len(), 5, "skews −7.5, −1.2, 0.3, 2.75, 9");
    for case in all {
        let r = read_image(&fixtures().join(&case.input));
        let want = case.skew.unwrap();
        let e = measure_skew(&r.planes()[0], 10.0).unwrap();
        let got = e.degrees.unwrap_or_else(|| panic!("{}: no skew found ({e:?})", case.id));
        // Issue 8: an estimate to 0.05° of the turn made by the reference.
        assert!(
            (got - want).abs() <= 0.05,
            "{} ({}): found {got}, turned by {want}",
            case.id,
            case.reference
        );
    }
}

#[test]
fn a_page_of_noise_reports_no_skew_and_is_left_alone() {
    let s = Scratch::new();
    let input = fixtures().join("noise.png");
    let out = s.path("out.png");
    let run = pumice(&[
        "run".as_ref(),
        input.as_os_str(),
        "-o".as_ref(),
        out.as_os_str(),
        "-s".as_ref(),
        "deskew".as_ref(),
        "-v".as_ref(),
    ])
    .ok();
    assert!(run.stderr().contains("deskew: skew: no skew found"), "{}", run.stderr());
    assert_eq!(codes(&read_image(&out)), codes(&read_image(&input)));
}

#[test]
fn run_v_prints_the_skew_found() {
    let s = Scratch::new();
    let input = fixtures().join("page-skew+2.75.png");
    let out = s.path("out.png");
    let run = pumice(&[
        "run".as_ref(),
        input.as_os_str(),
        "-o".as_ref(),
        out.as_os_str(),
        "-s".as_ref(),
        "deskew".as_ref(),
        "-v".as_ref(),
    ])
    .ok();
    let line = run
        .stderr()
        .lines()
        .map(str::trim)
        .find(|l| l.starts_with("deskew: skew = "))
        .unwrap_or_default()
        .to_string();
    let value: f64 = line.trim_start_matches("deskew: skew = ").trim_end_matches(" degrees").parse().unwrap();
    assert!((value - 2.75).abs() <= 0.1, "{line}");
    // The straightened page measures straight (within the same 0.1°).
    let again = measure_skew(&read_image(&out).planes()[0], 10.0).unwrap();
    assert!(again.degrees.unwrap().abs() <= 0.1, "{again:?}");
}

#[test]
fn labels_match_scipy_and_scikit_image() {
    let all = cases("label");
    assert_eq!(all.len(), 3, "coins, text, page");
    for case in all {
        let mask_raster = read_image(&fixtures().join(&case.input));
        let mask: Vec<bool> = codes(&mask_raster).iter().map(|&c| c != 0).collect();
        let (w, h) = (mask_raster.width(), mask_raster.height());
        let ours = label(&mask, w, h).unwrap();
        assert_eq!(ours.count, case.count_scipy.unwrap(), "{}: scipy.ndimage.label count", case.id);
        assert_eq!(ours.count, case.count_skimage.unwrap(), "{}: skimage.measure.label count", case.id);
        let theirs = codes(&read_image(&fixtures().join(case.output.as_ref().unwrap())));
        // Equal up to renumbering: a one-to-one map between the label sets.
        let (mut fwd, mut back) = (HashMap::new(), HashMap::new());
        for (i, (&a, &b)) in ours.labels.iter().zip(&theirs).enumerate() {
            assert_eq!(a == 0, b == 0, "{}: background differs at ({}, {})", case.id, i % w, i / w);
            assert_eq!(
                *fwd.entry(a).or_insert(b),
                b,
                "{}: our label {a} splits at ({}, {})",
                case.id,
                i % w,
                i / w
            );
            assert_eq!(
                *back.entry(b).or_insert(a),
                a,
                "{}: their label {b} splits at ({}, {})",
                case.id,
                i % w,
                i / w
            );
        }
    }
}

#[test]
fn dust_matches_scikit_image_code_for_code() {
    let all = cases("dust");
    assert_eq!(all.len(), 7, "three masks, four gray filters");
    for case in all {
        let input = read_image(&fixtures().join(&case.input));
        let step = Step::parse(case.step.as_ref().unwrap()).unwrap();
        let out = step.op.apply(input.clone()).unwrap();
        let mut out = out;
        out.levels = input.levels;
        let want = codes(&read_image(&fixtures().join(case.output.as_ref().unwrap())));
        let got = codes(&out);
        let wrong = got.iter().zip(&want).filter(|(a, b)| a != b).count();
        assert_eq!(wrong, 0, "{} ({}): {wrong} samples differ", case.id, case.reference);
    }
}

/// Writes an 8-bit gray PNG of `w × h` from `f`.
fn gray_png(s: &Scratch, name: &str, w: usize, h: usize, f: impl Fn(usize, usize) -> u8) -> PathBuf {
    let data: Vec<u8> = (0..w * h).map(|i| f(i % w, i / w)).collect();
    let mut bytes = Vec::new();
    {
        let mut enc = png::Encoder::new(&mut bytes, w as u32, h as u32);
        enc.set_color(png::ColorType::Grayscale);
        enc.set_depth(png::BitDepth::Eight);
        enc.write_header().unwrap().write_image_data(&data).unwrap();
    }
    s.write(name, &bytes)
}

#[test]
fn autocrop_cuts_exactly_the_drawn_borders() {
    let s = Scratch::new();
    // A 200×150 page: black film edge of 13 px on the left and 6 px at the
    // bottom (noisy, codes 0..=9), white lid of 9 px on top, paper 200 with
    // ink marks; the paper rectangle is x 13..200, y 9..144.
    let page = |x: usize, y: usize| -> u8 {
        let n = ((x * 31 + y * 17) % 10) as u8;
        if y < 9 {
            255 - n
        } else if x < 13 || y >= 144 {
            n
        } else if (x + 3 * y) % 29 < 4 {
            30
        } else {
            200 + n
        }
    };
    let input = gray_png(&s, "page.png", 200, 150, page);
    let out = s.path("out.png");
    let run = pumice(&[
        "run".as_ref(),
        input.as_os_str(),
        "-o".as_ref(),
        out.as_os_str(),
        "-s".as_ref(),
        "autocrop:tolerance=0.05".as_ref(),
        "-v".as_ref(),
    ])
    .ok();
    assert!(run.stderr().contains("autocrop: kept: 187×135 at x=13, y=9"), "{}", run.stderr());
    let got = read_image(&out);
    let want: Vec<u32> = (9..144).flat_map(|y| (13..200).map(move |x| u32::from(page(x, y)))).collect();
    assert_eq!((got.width(), got.height()), (187, 135));
    assert_eq!(codes(&got), want);
}

#[test]
fn autocrop_content_box_and_margin_are_exact() {
    // Paper 0.9 with a dark block at x 40..71, y 25..38 and one mark at (90, 60).
    let p = Plane::from_fn(120, 80, |x, y| {
        if ((40..71).contains(&x) && (25..38).contains(&y)) || (x, y) == (90, 60) { 0.2 } else { 0.9 }
    })
    .unwrap();
    let r = Raster::new(vec![p], Layout::Gray, Encoding::Srgb).unwrap();
    let out = Step::parse("autocrop:content").unwrap().op.apply(r.clone()).unwrap();
    assert_eq!((out.width(), out.height()), (51, 36));
    assert_eq!(out.planes()[0].get(0, 0), 0.2);
    let out = Step::parse("autocrop:content,margin=25").unwrap().op.apply(r).unwrap();
    // x 15..116, y 0..80 (clipped at the top and bottom).
    assert_eq!((out.width(), out.height()), (101, 80));
    assert_eq!(out.planes()[0].get(25, 25), 0.2);
}

#[test]
fn inspect_reports_the_skew() {
    let input = fixtures().join("page-skew+2.75.png");
    let run = pumice(&["inspect".as_ref(), input.as_os_str(), "--skew".as_ref(), "--json".as_ref()]).ok();
    let v: serde_json::Value = serde_json::from_str(&run.stdout()).unwrap();
    let d = v[0]["skew"]["degrees_clockwise"].as_f64().unwrap();
    // The page was turned 2.75° by scipy.ndimage.rotate in make_scan.py.
    assert!((d - 2.75).abs() <= 0.1, "{d}");
    let text = pumice(&["inspect".as_ref(), input.as_os_str(), "--skew".as_ref()]).ok();
    assert!(text.stdout().contains("° clockwise"), "{}", text.stdout());
}

#[test]
fn paper_flattening_evens_out_the_paper_of_the_page_sample() {
    // skimage.data.page (an unevenly lit scan) and the paper mask make_scan.py
    // stores: samples skimage.filters.threshold_sauvola(window_size=25) puts above
    // their local threshold. The spread of the paper (population std of its 8-bit
    // codes) is 44.1 before; after dividing by a radius-20 closing it must fall by
    // at least 2.5× (measured 2.8×; the stated factor is ours, no published figure).
    let s = Scratch::new();
    let input = fixtures().join("page.png");
    let out = s.path("flat.png");
    pumice(&[
        "run",
        input.to_str().unwrap(),
        "-o",
        out.to_str().unwrap(),
        "-s",
        "illumination:method=paper,radius=20",
    ])
    .ok();
    let mask = read_image(&fixtures().join("page-paper-mask.png"));
    let spread = |p: &pumice::raster::Plane| {
        let v: Vec<f64> = p
            .as_slice()
            .iter()
            .zip(mask.planes()[0].as_slice())
            .filter(|(_, m)| **m > 0.5)
            .map(|(v, _)| f64::from(*v) * 255.0)
            .collect();
        let mean = v.iter().sum::<f64>() / v.len() as f64;
        (v.iter().map(|x| (x - mean).powi(2)).sum::<f64>() / v.len() as f64).sqrt()
    };
    let before = spread(&read_image(&input).planes()[0]);
    let after = spread(&read_image(&out).planes()[0]);
    assert!((before - 44.09).abs() < 0.01, "{before}");
    assert!(before / after >= 2.5, "{before} → {after}");
}
