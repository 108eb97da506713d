//! Four-component JPEGs against fixtures made with Pillow and a small YCCK
//! encoder (tests/reference/make_cmyk.py explains how each file is made):
//! the Adobe APP14 marker decides the polarity, YCCK goes through YCbCr → RGB
//! first, and every flat patch decodes to the naive uncalibrated formula
//! R = (1−C)(1−K), G = (1−M)(1−K), B = (1−Y)(1−K).
//!
//! `cargo test --test integration cmyk -- --nocapture` prints the measured
//! differences.

use std::path::PathBuf;

use pumice::Error;
use pumice::io::{self, DecodeOptions, Limits};
use pumice::raster::{Layout, Raster, Resolution, ResolutionUnit, SampleType};
use serde::Deserialize;
use zune_core::bytestream::ZCursor;
use zune_core::colorspace::ColorSpace;
use zune_core::options::DecoderOptions;

use crate::harness::{Scratch, pumice, read_image};

/// Largest error of one decoded stored sample, in 8-bit codes. Quality 100
/// makes every quantiser step 1 (make_cmyk.py asserts it from the DQT
/// segment), and a flat 8×8 block keeps only its DC coefficient, stored to
/// within 1/16 code (ITU-T T.81 §A.3.3: DC = 8·(v − 128)); what is left is the
/// decoder's integer IDCT rounding, about one code (from memory, not a
/// published bound). ±2 codes covers both with a code to spare. For the YCCK
/// file the YCbCr rounding the script reports must also fit (checked below).
const STORED_CODES: f32 = 2.0;

/// With every ink off by at most e = STORED_CODES / 255, (1−c)(1−k) is off by
/// at most 2e + e² (expand the product); the decoder then rounds to the
/// nearest 8-bit code, ½ code more.
fn rgb_tolerance() -> f32 {
    let e = STORED_CODES / 255.0;
    2.0 * e + e * e + 0.5 / 255.0
}

#[derive(Deserialize)]
struct Manifest {
    pillow: String,
    patch_size: usize,
    ycck_cmy_rounding: f32,
    file: Vec<FixtureFile>,
    patch: Vec<Patch>,
    icc_stand_in: String,
}

#[derive(Deserialize)]
struct FixtureFile {
    name: String,
    adobe_transform: String,
    stored: String,
    width: usize,
    height: usize,
}

#[derive(Deserialize)]
struct Patch {
    name: String,
    ink: [u8; 4],
}

fn dir() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("tests/reference/fixtures/cmyk")
}

fn bytes(name: &str) -> Vec<u8> {
    std::fs::read(dir().join(name)).unwrap_or_else(|e| panic!("read fixture {name}: {e}"))
}

fn manifest() -> Manifest {
    crate::harness::read_manifest(&dir())
}

/// The naive formula on inks given as 8-bit codes.
fn expected_rgb(ink: [u8; 4]) -> [f32; 3] {
    let [c, m, y, k] = ink.map(|v| f32::from(v) / 255.0);
    [(1.0 - c) * (1.0 - k), (1.0 - m) * (1.0 - k), (1.0 - y) * (1.0 - k)]
}

/// Worst difference of `r` from the patch row, over every pixel and channel:
/// (difference, patch name, channel).
fn worst_against_patches(r: &Raster, m: &Manifest) -> (f32, String, usize) {
    let mut worst = (0.0f32, String::new(), 0);
    for (c, plane) in r.planes().iter().enumerate() {
        for y in 0..plane.height() {
            for (x, &v) in plane.row(y).iter().enumerate() {
                let p = &m.patch[x / m.patch_size];
                let d = (v - expected_rgb(p.ink)[c]).abs();
                if d > worst.0 || d.is_nan() {
                    worst = (d, p.name.clone(), c);
                }
            }
        }
    }
    worst
}

fn decode(bytes: &[u8]) -> Result<Raster, Error> {
    io::decode(bytes, &DecodeOptions::default())
}

#[test]
fn every_patch_decodes_to_the_naive_formula() {
    let m = manifest();
    assert!(m.ycck_cmy_rounding < STORED_CODES, "YCCK rounding {} codes", m.ycck_cmy_rounding);
    let tol = rgb_tolerance();
    for f in m.file.iter().filter(|f| f.name != "adobe-metadata.jpg") {
        let r = decode(&bytes(&f.name)).unwrap_or_else(|e| panic!("{}: {e}", f.name));
        assert_eq!(r.layout(), Layout::Rgb, "{}", f.name);
        assert_eq!((r.width(), r.height()), (f.width, f.height), "{}", f.name);
        assert_eq!(r.metadata.source_sample, Some(SampleType::U8), "{}", f.name);
        assert_eq!(r.levels, Some(255), "{}", f.name);
        let (d, patch, c) = worst_against_patches(&r, &m);
        println!(
            "{} (Adobe transform {}, stored {}; Pillow {}): worst {:.3} codes, patch {patch}, channel {c} \
             (tolerance {:.3})",
            f.name,
            f.adobe_transform,
            f.stored,
            m.pillow,
            d * 255.0,
            tol * 255.0
        );
        assert!(d <= tol, "{}: {patch} channel {c} off by {} codes", f.name, d * 255.0);
        // Samples are exact 8-bit codes, as `levels = 255` promises.
        for p in r.planes() {
            assert!(p.as_slice().iter().all(|v| ((v * 255.0).round() - v * 255.0).abs() < 1e-3));
        }
    }
}

/// The stored samples straight from zune-jpeg (no colour conversion), one per pixel.
fn stored(bytes: &[u8], colour: ColorSpace) -> Vec<[u8; 4]> {
    let opts = DecoderOptions::default().jpeg_set_out_colorspace(colour);
    let mut d = zune_jpeg::JpegDecoder::new_with_options(ZCursor::new(bytes), opts);
    let raw = d.decode().expect("zune-jpeg decodes the fixture");
    assert_eq!(d.output_colorspace(), Some(colour));
    raw.chunks_exact(4).map(|p| [p[0], p[1], p[2], p[3]]).collect()
}

/// The polarity make_cmyk.py found in the bytes, seen again through a second
/// decoder: Pillow's file stores 255 − ink, the stripped one stores the ink.
#[test]
fn the_files_store_the_polarity_the_script_says() {
    let m = manifest();
    for f in &m.file {
        let colour = if f.adobe_transform == "2" { ColorSpace::YCCK } else { ColorSpace::CMYK };
        let px = stored(&bytes(&f.name), colour);
        let mut worst = 0i32;
        for (i, s) in px.iter().enumerate() {
            let x = i % f.width;
            // adobe-metadata.jpg is stored sideways only in its EXIF; the pixels are the same row.
            let ink = m.patch[x / m.patch_size].ink;
            let want = ink.map(|v| if f.stored == "inverted" { 255 - v } else { v });
            let channels = if colour == ColorSpace::YCCK { 3..4 } else { 0..4 };
            for c in channels {
                worst = worst.max((i32::from(s[c]) - i32::from(want[c])).abs());
            }
        }
        println!("{}: stored samples within {worst} codes of {} ink", f.name, f.stored);
        assert!(worst as f32 <= STORED_CODES, "{}: {worst} codes", f.name);
    }
}

#[test]
fn exif_and_density_are_kept_and_orientation_applied() {
    let m = manifest();
    let b = bytes("adobe-metadata.jpg");
    let upright = decode(&b).unwrap();
    // Orientation 6 (EXIF 2.32 §4.6.4 A): stored rows become columns.
    assert_eq!((upright.width(), upright.height()), (16, 112));
    assert_eq!(upright.metadata.orientation, 1);
    // The file carries a (stand-in) CMYK profile; it no longer describes the RGB
    // pixels, so decoding drops it rather than let outputs be mislabelled.
    assert!(b.windows(m.icc_stand_in.len()).any(|w| w == m.icc_stand_in.as_bytes()));
    assert_eq!(upright.metadata.icc_profile, None);
    assert!(
        upright.metadata.exif.as_deref().is_some_and(|e| e.starts_with(b"II*\0") || e.starts_with(b"MM\0*"))
    );
    // make_cmyk.py saves with dpi=(300, 300): a JFIF APP0 density in dots per inch.
    assert_eq!(
        upright.metadata.resolution,
        Some(Resolution { x: 300.0, y: 300.0, unit: ResolutionUnit::Inch })
    );
    let stored =
        io::decode(&b, &DecodeOptions { keep_orientation: true, ..DecodeOptions::default() }).unwrap();
    assert_eq!((stored.width(), stored.height(), stored.metadata.orientation), (112, 16, 6));
    let (d, patch, c) = worst_against_patches(&stored, &m);
    assert!(d <= rgb_tolerance(), "{patch} channel {c} off by {} codes", d * 255.0);
}

#[test]
fn limits_are_checked_before_decoding() {
    let b = bytes("adobe-cmyk.jpg");
    let (w, h) = (112u64, 16u64);
    let with = |limits| io::decode(&b, &DecodeOptions { limits, ..DecodeOptions::default() });
    let e = with(Limits { max_pixels: w * h - 1, max_bytes: 1 << 30 }).unwrap_err();
    assert!(matches!(e, Error::Limit(_)), "{e}");
    // The four-component buffer the decoder allocates: w × h × 4 bytes.
    let e = with(Limits { max_pixels: 1 << 28, max_bytes: w * h * 4 - 1 }).unwrap_err();
    assert!(matches!(e, Error::Limit(_)), "{e}");
    assert!(with(Limits { max_pixels: w * h, max_bytes: w * h * 4 }).is_ok());
}

/// `bytes` with the Adobe APP14 transform byte (TN 5116 §18: 11 bytes after
/// "Adobe") replaced.
fn with_transform(mut bytes: Vec<u8>, transform: u8) -> Vec<u8> {
    let at = bytes.windows(5).position(|w| w == b"Adobe").expect("an Adobe marker");
    bytes[at + 11] = transform;
    bytes
}

/// The message `decode` gives when it caught a decoder panic.
const CAUGHT_PANIC: &str = "the decoder failed on malformed data";

#[test]
fn unknown_adobe_transforms_are_clear_errors() {
    for t in [1u8, 3, 255] {
        let e = decode(&with_transform(bytes("adobe-cmyk.jpg"), t)).unwrap_err();
        let msg = e.to_string();
        assert!(matches!(e, Error::Unsupported(_)), "{msg}");
        assert!(msg.contains(&format!("colour transform {t}")), "{msg}");
    }
    // A transform that contradicts the data still decodes (the marker is believed):
    // YCCK data read as inverted CMYK give other colours, but no error.
    let r = decode(&with_transform(bytes("adobe-ycck.jpg"), 0)).unwrap();
    assert_eq!((r.width(), r.height()), (112, 16));
}

#[test]
fn truncated_and_damaged_files_give_errors_not_panics() {
    for name in ["adobe-cmyk.jpg", "plain-cmyk.jpg", "adobe-ycck.jpg", "adobe-metadata.jpg"] {
        let b = bytes(name);
        let scan = b.windows(2).position(|w| w == [0xFF, 0xDA]).expect("a scan");
        for cut in (0..b.len()).step_by(3) {
            match decode(&b[..cut]) {
                Err(e) => assert!(!e.to_string().contains(CAUGHT_PANIC), "{name} cut at {cut}: {e}"),
                Ok(_) => assert!(cut > scan, "{name} cut at {cut}, before the scan, decoded"),
            }
        }
        // Damage in the entropy-coded data: any result but a panic.
        for at in (scan + 20..b.len() - 2).step_by(5) {
            let mut d = b.clone();
            d[at] ^= 0x5A;
            if let Err(e) = decode(&d) {
                assert!(!e.to_string().contains(CAUGHT_PANIC), "{name} damaged at {at}: {e}");
            }
        }
    }
}

#[test]
fn the_cli_writes_what_the_library_decodes() {
    let s = Scratch::new();
    for name in ["adobe-cmyk.jpg", "plain-cmyk.jpg", "adobe-ycck.jpg"] {
        let out = s.path(&format!("{name}.png"));
        pumice(&["run".as_ref(), dir().join(name).as_os_str(), "-o".as_ref(), out.as_os_str()]).ok();
        let written = read_image(&out);
        let direct = decode(&bytes(name)).unwrap();
        assert_eq!(written.layout(), Layout::Rgb, "{name}");
        for (a, b) in written.planes().iter().zip(direct.planes()) {
            crate::assert_planes_close!(a, b, 0.0, "{name}: PNG holds the decoded codes exactly");
        }
    }
    let bad = s.write("bad.jpg", &with_transform(bytes("adobe-cmyk.jpg"), 1));
    pumice(&["run".as_ref(), bad.as_os_str(), "-o".as_ref(), s.path("bad.png").as_os_str()])
        .expect_code(1)
        .one_line_error()
        .stderr_has(&["bad.jpg", "colour transform 1"]);
    assert!(!s.path("bad.png").exists());
}
