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
//! * paper flattening: the spread of scikit-image's page and text samples over
//!   their stored paper masks falls by the factors in the manifest (ours, set
//!   below the measured drops; see the test).

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
    measure: Option<String>,
    factor: Option<f64>,
    std_before: Option<f64>,
    mean_before: Option<f64>,
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
fn paper_flattening_evens_out_the_paper_of_the_page_and_text_samples() {
    // skimage.data.page (a scan lit unevenly from one side) and skimage.data.text
    // (a dim photograph of handwriting on gray paper, the paper at code 135), each
    // with the paper mask make_scan.py stores: the samples
    // skimage.filters.threshold_sauvola(window_size=25) puts above their local
    // threshold. Spread = population std of the 8-bit codes on the paper;
    // relative spread = std / mean. The required factors are ours (no published
    // figure), set below what was measured:
    //   page, radius 20:                  std 44.1 → 15.8 (2.80×), required 2.5×
    //   text, radius 10:                  std / mean 0.097 → 0.060 (1.61×), required 1.4×
    //                                     (std 13.1 → 14.2: the paper goes from 135
    //                                     to 236, and that gain multiplies its grain)
    //   text, radius 10, keep-offset:     std 13.1 → 8.5 (1.54×), required 1.4×
    let all = cases("paper");
    assert_eq!(all.len(), 3, "page once, text twice");
    let s = Scratch::new();
    for case in all {
        let input = fixtures().join(&case.input);
        let out = s.path(&format!("{}.png", case.id));
        let step = case.step.as_deref().unwrap();
        pumice(&["run", input.to_str().unwrap(), "-o", out.to_str().unwrap(), "-s", step]).ok();
        let mask = read_image(&fixtures().join(case.output.as_ref().unwrap()));
        let spread = |r: &Raster| {
            let v: Vec<f64> = codes(r)
                .iter()
                .zip(mask.planes()[0].as_slice())
                .filter(|(_, m)| **m > 0.5)
                .map(|(&c, _)| f64::from(c))
                .collect();
            let mean = v.iter().sum::<f64>() / v.len() as f64;
            let std = (v.iter().map(|x| (x - mean).powi(2)).sum::<f64>() / v.len() as f64).sqrt();
            (std, mean)
        };
        let (std0, mean0) = spread(&read_image(&input));
        // The same codes as numpy's, summed in another order: 1e-9 relative.
        assert!((std0 / case.std_before.unwrap() - 1.0).abs() < 1e-9, "{}: std {std0}", case.id);
        assert!((mean0 / case.mean_before.unwrap() - 1.0).abs() < 1e-9, "{}: mean {mean0}", case.id);
        let (std1, mean1) = spread(&read_image(&out));
        let drop = match case.measure.as_deref() {
            Some("std") => std0 / std1,
            Some("relative") => (std0 / mean0) / (std1 / mean1),
            other => panic!("{}: unknown measure {other:?}", case.id),
        };
        assert!(
            drop >= case.factor.unwrap(),
            "{} ({step}): std {std0:.2} → {std1:.2}, mean {mean0:.1} → {mean1:.1}, drop {drop:.2}×",
            case.id
        );
    }
}
