//! 16-bit and float fidelity end to end, and calibration: no hidden 8-bit
//! step, values outside [0, 1] kept in float, pixel size carried and scaled.

use std::collections::BTreeSet;
use std::fs;

use pumice::io::{self, DecodeOptions, EncodeOptions, Format};
use pumice::raster::{Encoding, Layout, Plane, Raster, ResolutionUnit, SampleType};

use crate::harness::{Scratch, pumice};

/// A 256×256 16-bit linear gray TIFF holding every code 0–65535 once.
fn every_code_tiff(s: &Scratch) -> std::path::PathBuf {
    let p = Plane::from_fn(256, 256, |x, y| (y * 256 + x) as f32 / 65535.0).unwrap();
    let mut r = Raster::new(vec![p], Layout::Gray, Encoding::Linear).unwrap();
    r.metadata.source_sample = Some(SampleType::U16);
    let mut opts = EncodeOptions::new(Format::Tiff);
    opts.encoding = Encoding::Linear;
    opts.sample = Some(SampleType::U16);
    s.write("codes.tif", &io::encode(&r, &opts).unwrap())
}

fn codes(path: &std::path::Path) -> Vec<u32> {
    let r = io::decode(&fs::read(path).unwrap(), &DecodeOptions::default()).unwrap();
    assert_eq!(r.metadata.source_sample, Some(SampleType::U16), "{}", path.display());
    r.planes()[0].as_slice().iter().map(|v| (v * 65535.0).round() as u32).collect()
}

#[test]
fn a_16_bit_micrograph_through_a_no_op_recipe_is_bit_exact() {
    let s = Scratch::new();
    let input = every_code_tiff(&s);
    let recipe = s.write("noop.toml", b"[options]\ninput-encoding = \"linear\"\ndepth = \"16\"\n");
    let expected: Vec<u32> = (0..65536).collect();
    for (name, steps) in [
        ("none.tif", &[][..]),
        ("flips.tif", &["-s", "flip", "-s", "flip"]),
        ("turns.tif", &["-s", "rotate:180", "-s", "rotate:180"]),
    ] {
        let out = s.path(name);
        let mut args =
            vec!["run", input.to_str().unwrap(), "-o", out.to_str().unwrap(), "-r", recipe.to_str().unwrap()];
        args.extend_from_slice(steps);
        pumice(&args).ok();
        assert_eq!(codes(&out), expected, "{name}");
    }
    // Also as sRGB-encoded data through a linear-light step that changes nothing
    // (exposure of 0 stops): decoded to linear light and quantised back exactly.
    let out = s.path("exposure0.tif");
    pumice(&["run", input.to_str().unwrap(), "-o", out.to_str().unwrap(), "-s", "exposure:0"]).ok();
    assert_eq!(codes(&out), expected);
}

#[test]
fn a_window_keeps_every_16_bit_level_distinct_where_its_slope_allows() {
    let s = Scratch::new();
    let input = every_code_tiff(&s);
    let out = s.path("window.tif");
    pumice(&[
        "run",
        input.to_str().unwrap(),
        "-o",
        out.to_str().unwrap(),
        "--input-encoding",
        "linear",
        "-s",
        "window:low=16384,high=49151,units=code16,light=linear",
    ])
    .ok();
    let got = codes(&out);
    // Codes 16384..=49151 are stretched by 65535 / 32767 ≈ 2: each must land on
    // its own output code (common-sense requirement: a slope above 1 cannot merge levels).
    let inside: BTreeSet<u32> = got[16384..=49151].iter().copied().collect();
    assert_eq!(inside.len(), 49151 - 16384 + 1);
    assert!(got[..16384].iter().all(|&c| c == 0) && got[49152..].iter().all(|&c| c == 65535));
}

#[test]
fn float_values_outside_the_unit_range_survive_to_float_output() {
    let s = Scratch::new();
    let p = Plane::from_fn(8, 8, |x, y| (x as f32 - 2.0) * 0.75 + y as f32 * 0.01).unwrap();
    let r = Raster::new(vec![p.clone()], Layout::Gray, Encoding::Linear).unwrap();
    let mut opts = EncodeOptions::new(Format::Tiff);
    opts.encoding = Encoding::Linear;
    let input = s.write("f.tif", &io::encode(&r, &opts).unwrap());
    let out = s.path("f-out.tif");
    pumice(&[
        "run",
        input.to_str().unwrap(),
        "-o",
        out.to_str().unwrap(),
        "--depth",
        "f32",
        "-s",
        "exposure:1",
    ])
    .ok();
    let back = io::decode(&fs::read(&out).unwrap(), &DecodeOptions::default()).unwrap();
    for (a, b) in p.as_slice().iter().zip(back.planes()[0].as_slice()) {
        // One stop doubles linear light exactly (a power of two in f32).
        assert_eq!(*b, a * 2.0);
    }
}

#[test]
fn the_pixel_size_is_set_carried_and_scaled_by_resize() {
    let s = Scratch::new();
    let input = every_code_tiff(&s);
    let out = s.path("half.tif");
    pumice(&[
        "run",
        input.to_str().unwrap(),
        "-o",
        out.to_str().unwrap(),
        "--input-encoding",
        "linear",
        "--pixel-size",
        "0.65um",
        "-s",
        "resize:scale=0.5",
    ])
    .ok();
    let r = io::decode(&fs::read(&out).unwrap(), &DecodeOptions::default()).unwrap();
    let res = r.metadata.resolution.expect("resolution written");
    assert_eq!(res.unit, ResolutionUnit::Centimetre);
    // 0.65 µm pixels are 15384.6 per cm; halving the pixel count makes them 1.3 µm, 7692.3 per cm.
    assert!((res.x - 1.0 / 1.3e-4).abs() < 0.01, "{res:?}");
    pumice(&[
        "run",
        input.to_str().unwrap(),
        "-o",
        s.path("x.tif").to_str().unwrap(),
        "--pixel-size",
        "3 furlongs",
    ])
    .expect_code(2)
    .stderr_has(&["pixel size", "um"]);
}
