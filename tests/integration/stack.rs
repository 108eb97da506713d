//! `pumice stack` and multi-page TIFF against the numpy fixtures of
//! tests/reference/make_stack.py (numpy 2.4.6, see its manifest): each mode on
//! 15 (or 14) 16-bit frames given as files and as the pages of one TIFF,
//! band by band with a small band budget, and the refusals (mismatched or
//! broken frames, an existing output) that leave nothing written.

use std::path::{Path, PathBuf};

use pumice::io::{self, DecodeOptions, EncodeOptions, Format};
use pumice::raster::{Encoding, Layout, Plane, Raster, SampleType};
use pumice::stack::{Mode, StackOptions, stack_files};

use crate::assert_planes_close;
use crate::harness::{Scratch, pumice, read_image, read_manifest};
use crate::reference::read_npy;

#[derive(serde::Deserialize)]
struct Manifest {
    height: usize,
    width: usize,
    case: Vec<Case>,
}

#[derive(serde::Deserialize)]
struct Case {
    id: String,
    mode: String,
    frames: usize,
    output: String,
    kappa: Option<f64>,
    iterations: Option<u32>,
}

fn fixtures() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/reference/fixtures/stack")
}

/// The fixture frames as rasters of `code / 65535`, labelled as 16-bit linear sources.
fn frames(m: &Manifest) -> Vec<Raster> {
    let all = read_npy(&fixtures().join("frames.npy"));
    (0..all.height() / m.height)
        .map(|k| {
            let data: Vec<f32> =
                (0..m.height).flat_map(|y| all.row(k * m.height + y).iter().map(|c| c / 65535.0)).collect();
            raster(m.width, m.height, data, SampleType::U16)
        })
        .collect()
}

fn raster(w: usize, h: usize, data: Vec<f32>, sample: SampleType) -> Raster {
    let mut r =
        Raster::new(vec![Plane::from_vec(w, h, data).unwrap()], Layout::Gray, Encoding::Linear).unwrap();
    r.metadata.source_sample = Some(sample);
    r
}

fn tiff_options(sample: SampleType) -> EncodeOptions {
    let mut o = EncodeOptions::new(Format::Tiff);
    o.sample = Some(sample);
    o.encoding = Encoding::Linear;
    o
}

/// Writes each frame as a 16-bit TIFF and returns the paths.
fn write_frames(dir: &Scratch, frames: &[Raster]) -> Vec<PathBuf> {
    frames
        .iter()
        .enumerate()
        .map(|(k, f)| {
            dir.write(&format!("f{k:02}.tif"), &io::encode(f, &tiff_options(SampleType::U16)).unwrap())
        })
        .collect()
}

fn mode_args(case: &Case) -> Vec<String> {
    let mut a = vec!["--mode".to_string(), case.mode.clone()];
    if let (Some(k), Some(i)) = (case.kappa, case.iterations) {
        a.extend(["--kappa".into(), k.to_string(), "--iterations".into(), i.to_string()]);
    }
    a
}

/// Tolerance on [0, 1] values for the averaging modes: the fixture is
/// f32(mean of codes / 65535) from float64; Pumice sums f32 samples
/// `code / 65535` (each within half an f32 ulp) in f64 and rounds once to f32,
/// so the two differ by at most about two f32 ulps at 1.0 (2.4e-7). Derived
/// from the rounding steps, not a published figure.
const AVERAGE_TOL: f32 = 2.5e-7;

#[test]
fn every_mode_matches_numpy() {
    let m: Manifest = read_manifest(&fixtures());
    let frames = frames(&m);
    let dir = Scratch::new();
    let paths = write_frames(&dir, &frames);
    for case in &m.case {
        let expected = read_npy(&fixtures().join(&case.output));
        let out = dir.path(&format!("{}.tif", case.id));
        let mut args: Vec<String> = paths[..case.frames].iter().map(|p| p.display().to_string()).collect();
        args.extend(["-o".into(), out.display().to_string(), "--depth".into(), "f32".into()]);
        args.extend(mode_args(case));
        let mut full = vec!["stack".to_string()];
        full.extend(args);
        pumice(&full).ok();
        let got = read_image(&out);
        assert_eq!(got.metadata.source_sample, Some(SampleType::F32), "{}", case.id);
        // Median, min and max pick codes (or average two): exact up to the
        // final rounding of code / 65535 to f32, one ulp at 1.0 (1.2e-7).
        let tol = if matches!(case.mode.as_str(), "mean" | "sigma-clip") { AVERAGE_TOL } else { 1.2e-7 };
        assert_planes_close!(got.planes()[0], expected, tol, "{}", case.id);
    }
}

#[test]
fn picking_modes_keep_the_source_depth_and_codes() {
    let m: Manifest = read_manifest(&fixtures());
    let dir = Scratch::new();
    let paths = write_frames(&dir, &frames(&m));
    for case in m.case.iter().filter(|c| c.id == "median" || c.id == "min" || c.id == "max") {
        let out = dir.path(&format!("{}-16.tif", case.id));
        let mut args = vec!["stack".to_string()];
        args.extend(paths.iter().map(|p| p.display().to_string()));
        args.extend(["-o".into(), out.display().to_string()]);
        args.extend(mode_args(case));
        pumice(&args).ok();
        let got = read_image(&out);
        assert_eq!(got.metadata.source_sample, Some(SampleType::U16), "{}", case.id);
        let expected = read_npy(&fixtures().join(&case.output));
        // Odd count: every result is a code, so the 16-bit file holds it exactly.
        let codes = |p: &Plane| p.as_slice().iter().map(|v| (v * 65535.0).round() as u32).collect::<Vec<_>>();
        assert_eq!(codes(&got.planes()[0]), codes(&expected), "{}", case.id);
    }
}

#[test]
fn pages_of_one_tiff_are_frames() {
    let m: Manifest = read_manifest(&fixtures());
    let frames = frames(&m);
    let refs: Vec<&Raster> = frames.iter().collect();
    let bytes = io::encode_tiff_pages(&refs, &tiff_options(SampleType::U16)).unwrap();
    // The page API: count, random access, streaming.
    assert_eq!(io::page_count(&bytes).unwrap(), 15);
    let seventh = io::decode_page(&bytes, 6, &DecodeOptions::default()).unwrap();
    assert_eq!(seventh.planes()[0], frames[6].planes()[0]);
    let e = io::decode_page(&bytes, 15, &DecodeOptions::default()).unwrap_err().to_string();
    assert!(e.contains("no page 16"), "{e}");
    let streamed: Vec<Raster> = io::TiffPages::new(std::io::Cursor::new(&bytes), &DecodeOptions::default())
        .unwrap()
        .map(Result::unwrap)
        .collect();
    assert_eq!(streamed.len(), 15);
    assert!(streamed.iter().zip(&frames).all(|(a, b)| a.planes()[0] == b.planes()[0]));
    // decode() keeps returning the first page.
    assert_eq!(read_first(&bytes).planes()[0], frames[0].planes()[0]);

    let dir = Scratch::new();
    let stack_path = dir.write("stack.tif", &bytes);
    let files = write_frames(&dir, &frames);
    for mode in ["median", "sigma-clip", "mean"] {
        let from_pages = dir.path(&format!("pages-{mode}.tif"));
        pumice(&[
            "stack",
            &stack_path.display().to_string(),
            "-o",
            &from_pages.display().to_string(),
            "--mode",
            mode,
        ])
        .ok();
        // Several multi-page files, or pages and files mixed, are frames in order too.
        let mixed = dir.path(&format!("mixed-{mode}.tif"));
        let mut args = vec!["stack".to_string(), stack_path.display().to_string()];
        args.extend(files.iter().map(|p| p.display().to_string()));
        args.extend(["-o".into(), mixed.display().to_string(), "--mode".into(), mode.into()]);
        pumice(&args).ok();
        let case = m.case.iter().find(|c| c.mode == mode && c.frames == 15).unwrap();
        let expected = read_npy(&fixtures().join(&case.output));
        assert_planes_close!(read_image(&from_pages).planes()[0], expected, AVERAGE_TOL, "{mode} from pages");
        // Doubling every frame changes neither the mean, the median nor the
        // population standard deviation, so no mode's result.
        assert_planes_close!(read_image(&mixed).planes()[0], expected, AVERAGE_TOL, "{mode} mixed");
    }
}

fn read_first(bytes: &[u8]) -> Raster {
    io::decode(bytes, &DecodeOptions::default()).unwrap()
}

#[test]
fn several_pages_of_different_kinds_round_trip() {
    let a = raster(3, 2, vec![0.0, 0.25, 0.5, 0.75, 1.0, 0.5], SampleType::F32);
    let mut b = Raster::new(
        (0..3).map(|c| Plane::filled(2, 4, c as f32 / 3.0).unwrap()).collect(),
        Layout::Rgb,
        Encoding::Linear,
    )
    .unwrap();
    b.metadata.source_sample = Some(SampleType::U8);
    let mut opts = EncodeOptions::new(Format::Tiff);
    opts.encoding = Encoding::Linear;
    let bytes = io::encode_tiff_pages(&[&a, &b], &opts).unwrap();
    let lin = DecodeOptions { encoding: io::InputEncoding::Linear, ..DecodeOptions::default() };
    let pages: Vec<Raster> =
        io::TiffPages::new(std::io::Cursor::new(&bytes), &lin).unwrap().map(Result::unwrap).collect();
    assert_eq!(pages.len(), 2);
    assert_eq!(pages[0].planes(), a.planes());
    assert_eq!(pages[0].metadata.source_sample, Some(SampleType::F32));
    assert_eq!((pages[1].width(), pages[1].height(), pages[1].layout()), (2, 4, Layout::Rgb));
    assert_eq!(pages[1].metadata.source_sample, Some(SampleType::U8));
    assert_eq!(pages[1].planes()[2].get(1, 3), 170.0 / 255.0); // round(2/3 · 255) = 170
    let e = io::encode_tiff_pages(&[&a], &EncodeOptions::new(Format::Png)).unwrap_err().to_string();
    assert!(e.contains("only TIFF"), "{e}");
}

#[test]
fn bands_of_any_height_give_the_same_result() {
    let m: Manifest = read_manifest(&fixtures());
    let dir = Scratch::new();
    let paths = write_frames(&dir, &frames(&m));
    for case in m.case.iter().filter(|c| c.frames == 15 && (c.mode == "median" || c.mode == "sigma-clip")) {
        let mode =
            Mode::from_name(&case.mode, case.kappa.unwrap_or(3.0), case.iterations.unwrap_or(5)).unwrap();
        let expected = read_npy(&fixtures().join(&case.output));
        // 1, 5 and all 24 rows per band (15 frames × 64 bytes a row).
        for budget in [1, 15 * 64 * 5, usize::MAX / 2] {
            let opts = StackOptions {
                band_budget: budget,
                spill_dir: Some(dir.path("")),
                ..StackOptions::new(mode)
            };
            let got = stack_files(&paths, &opts).unwrap();
            assert_eq!(got.frames, 15);
            assert_planes_close!(
                got.raster.planes()[0],
                expected,
                AVERAGE_TOL,
                "{} budget {budget}",
                case.id
            );
        }
    }
    // The temporary frame file is gone.
    assert_eq!(dir.names().iter().filter(|n| !n.ends_with(".tif")).count(), 0, "{:?}", dir.names());
}

#[test]
fn eight_bit_and_float_frames_stack_too() {
    let dir = Scratch::new();
    let codes = [[10u8, 200, 30, 40], [20, 100, 30, 255], [30, 0, 60, 0]];
    let mut paths = Vec::new();
    for (k, c) in codes.iter().enumerate() {
        let r = raster(2, 2, c.iter().map(|&v| f32::from(v) / 255.0).collect(), SampleType::U8);
        paths
            .push(dir.write(&format!("u8-{k}.tif"), &io::encode(&r, &tiff_options(SampleType::U8)).unwrap()));
    }
    let out = dir.path("median8.tif");
    let mut args = vec!["stack".to_string()];
    args.extend(paths.iter().map(|p| p.display().to_string()));
    args.extend(["-o".into(), out.display().to_string(), "--mode".into(), "median".into()]);
    pumice(&args).ok();
    let got = read_image(&out);
    assert_eq!(got.metadata.source_sample, Some(SampleType::U8));
    let expected: Vec<f32> = [20u8, 100, 30, 40].iter().map(|&v| f32::from(v) / 255.0).collect();
    assert_eq!(got.planes()[0].as_slice(), &expected[..]);
    // Float frames: values beyond [0, 1] and negative ones are kept.
    let floats = [[-1.0f32, 2.0, 0.5, 7.0], [3.0, 2.0, 0.25, -7.0]];
    let paths: Vec<PathBuf> = floats
        .iter()
        .enumerate()
        .map(|(k, v)| {
            let r = raster(2, 2, v.to_vec(), SampleType::F32);
            dir.write(&format!("f-{k}.tif"), &io::encode(&r, &tiff_options(SampleType::F32)).unwrap())
        })
        .collect();
    let opts = StackOptions::new(Mode::Median);
    let got = stack_files(&paths, &opts).unwrap();
    assert_eq!(got.raster.planes()[0].as_slice(), &[1.0, 2.0, 0.375, 0.0]);
}

#[test]
fn mismatched_or_broken_frames_are_refused_and_nothing_is_written() {
    let dir = Scratch::new();
    let good = raster(4, 3, vec![0.5; 12], SampleType::U16);
    let a = dir.write("a.tif", &io::encode(&good, &tiff_options(SampleType::U16)).unwrap());
    let wide = raster(5, 3, vec![0.5; 15], SampleType::U16);
    let b_size = dir.write("b-size.tif", &io::encode(&wide, &tiff_options(SampleType::U16)).unwrap());
    let b_depth = dir.write("b-depth.tif", &io::encode(&good, &tiff_options(SampleType::U8)).unwrap());
    let rgb = Raster::new(
        (0..3).map(|_| Plane::filled(4, 3, 0.5).unwrap()).collect(),
        Layout::Rgb,
        Encoding::Linear,
    )
    .unwrap();
    let b_channels = dir.write("b-channels.tif", &io::encode(&rgb, &tiff_options(SampleType::U16)).unwrap());
    let broken = dir.write("broken.tif", b"II*\0garbage, not a TIFF directory");
    let cases: [(&Path, &[&str]); 4] = [
        (&b_size, &["b-size.tif", "the size is 5×3", "4×3"]),
        (&b_depth, &["b-depth.tif", "sample depth is 8-bit", "16-bit"]),
        (&b_channels, &["b-channels.tif", "3 channels", "1 channel"]),
        (&broken, &["broken.tif", "TIFF"]),
    ];
    for (bad, expect) in cases {
        for mode in ["mean", "median"] {
            let out = dir.path("out.tif");
            let a = a.display().to_string();
            let bad = bad.display().to_string();
            pumice(&["stack", &a, &bad, "-o", &out.display().to_string(), "--mode", mode])
                .expect_code(1)
                .stderr_has(expect)
                .one_line_error();
            assert!(!out.exists(), "{mode}: an output was written for {bad}");
        }
    }
    let missing = dir.path("missing.tif").display().to_string();
    pumice(&["stack", &a.display().to_string(), &missing, "-o", "x.tif", "--mode", "max"])
        .expect_code(1)
        .stderr_has(&["missing.tif"]);
    // An existing output is left alone unless --overwrite.
    let out = dir.path("exists.tif");
    std::fs::write(&out, b"keep me").unwrap();
    let (a, o) = (a.display().to_string(), out.display().to_string());
    pumice(&["stack", &a, "-o", &o, "--mode", "max"])
        .expect_code(2)
        .stderr_has(&["already exists", "--overwrite"]);
    assert_eq!(std::fs::read(&out).unwrap(), b"keep me");
    pumice(&["stack", &a, "-o", &o, "--mode", "max", "--overwrite"]).ok();
    assert_eq!(read_image(&out).width(), 4);
    // Only TIFF is written; bad clipping parameters are usage errors.
    pumice(&["stack", &a, "-o", &dir.path("o.png").display().to_string(), "--mode", "max"])
        .expect_code(2)
        .stderr_has(&["TIFF"]);
    pumice(&[
        "stack",
        &a,
        "-o",
        &dir.path("o.tif").display().to_string(),
        "--mode",
        "sigma-clip",
        "--kappa",
        "0",
    ])
    .expect_code(2)
    .stderr_has(&["--kappa"]);
    assert!(!dir.path("o.tif").exists() && !dir.path("o.png").exists());
}

#[test]
fn run_processes_every_page_of_a_multi_page_tiff() {
    let pages: Vec<Raster> = (0..3)
        .map(|k| {
            raster(3, 2, (0..6).map(|i| (1000 * k + 17 * i) as f32 / 65535.0).collect(), SampleType::U16)
        })
        .collect();
    let dir = Scratch::new();
    let refs: Vec<&Raster> = pages.iter().collect();
    let input =
        dir.write("pages.tif", &io::encode_tiff_pages(&refs, &tiff_options(SampleType::U16)).unwrap());
    let out = dir.path("inverted.tif");
    pumice(&["run", &input.display().to_string(), "-o", &out.display().to_string(), "-s", "invert"]).ok();
    let bytes = std::fs::read(&out).unwrap();
    assert_eq!(io::page_count(&bytes).unwrap(), 3);
    for (k, page) in pages.iter().enumerate() {
        let got = io::decode_page(&bytes, k, &DecodeOptions::default()).unwrap();
        assert_eq!(got.metadata.source_sample, Some(SampleType::U16));
        let codes: Vec<u32> =
            got.planes()[0].as_slice().iter().map(|v| (v * 65535.0).round() as u32).collect();
        let expected: Vec<u32> =
            page.planes()[0].as_slice().iter().map(|v| 65535 - (v * 65535.0).round() as u32).collect();
        assert_eq!(codes, expected, "page {}", k + 1);
    }
    // Another format cannot hold the pages: refused, nothing written.
    let png = dir.path("inverted.png");
    pumice(&["run", &input.display().to_string(), "-o", &png.display().to_string(), "-s", "invert"])
        .expect_code(1)
        .stderr_has(&["3 pages", ".tif"]);
    assert!(!png.exists());
}

#[test]
fn a_page_template_writes_one_file_per_page_and_a_failing_page_leaves_none() {
    let page = |k: usize, w: usize, h: usize| {
        raster(w, h, (0..w * h).map(|i| (1000 * k + 17 * i) as f32 / 65535.0).collect(), SampleType::U16)
    };
    let dir = Scratch::new();
    let pages = [page(0, 3, 2), page(1, 3, 2), page(2, 3, 2)];
    let input = dir.write(
        "plate.tif",
        &io::encode_tiff_pages(&pages.iter().collect::<Vec<_>>(), &tiff_options(SampleType::U16)).unwrap(),
    );
    let template = dir.path("{stem}-{page:02}.png").display().to_string();
    let report = dir.path("report.json");
    pumice(&[
        "run",
        &input.display().to_string(),
        "-o",
        &template,
        "-s",
        "invert",
        "--report",
        &report.display().to_string(),
        "--sidecar",
    ])
    .ok();
    for (k, page) in pages.iter().enumerate() {
        let out = dir.path(&format!("plate-{:02}.png", k + 1));
        let got = read_image(&out);
        assert_eq!(got.metadata.source_sample, Some(SampleType::U16), "{}", out.display());
        let codes: Vec<u32> =
            got.planes()[0].as_slice().iter().map(|v| (v * 65535.0).round() as u32).collect();
        let expected: Vec<u32> =
            page.planes()[0].as_slice().iter().map(|v| 65535 - (v * 65535.0).round() as u32).collect();
        assert_eq!(codes, expected, "page {}", k + 1);
        assert!(dir.path(&format!("plate-{:02}.png.record.json", k + 1)).exists());
    }
    let text = std::fs::read_to_string(&report).unwrap();
    let json: serde_json::Value = serde_json::from_str(&text).unwrap();
    let entry = &json["files"][0];
    assert_eq!(entry["pages"].as_array().unwrap().len(), 3, "{text}");
    assert!(entry["pages"][2]["output"].as_str().unwrap().ends_with("plate-03.png"));
    assert_eq!(entry["pages"][2]["output_sha256"].as_str().unwrap().len(), 64);

    // Page 3 is too small for the crop: the input fails and leaves no page file.
    let pages = [page(0, 3, 2), page(1, 3, 2), page(2, 2, 1)];
    let input = dir.write(
        "uneven.tif",
        &io::encode_tiff_pages(&pages.iter().collect::<Vec<_>>(), &tiff_options(SampleType::U16)).unwrap(),
    );
    pumice(&["run", &input.display().to_string(), "-o", &template, "-s", "crop:width=3,height=2"])
        .expect_code(1)
        .stderr_has(&["uneven.tif", "crop"]);
    for k in 1..=3 {
        assert!(!dir.path(&format!("uneven-{k:02}.png")).exists(), "page {k} left behind");
    }
}
