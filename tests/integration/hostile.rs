//! Hostile and degenerate files, made here (nothing is downloaded): headers
//! that claim enormous images, truncations at many offsets, empty files, wrong
//! extensions, absurd TIFF strip tables, float data full of NaN and infinity,
//! and 1-pixel-wide or 65535-pixel-wide images. Each gives a clear error (or
//! the documented result) quickly and in bounded memory, and never a panic.

use std::fs;
use std::panic::{AssertUnwindSafe, catch_unwind};
use std::time::{Duration, Instant};

use pumice::io::{self, DecodeOptions, EncodeOptions, Format};
use pumice::raster::{Encoding, Layout, Plane, Raster};
use serde_json::Value;

use crate::harness::{Scratch, pumice};

/// CRC-32 as PNG uses it (ISO 3309 / ITU-T V.42 polynomial, reflected;
/// PNG specification, ISO/IEC 15948, Annex D).
fn crc32(bytes: &[u8]) -> u32 {
    let mut c = 0xffff_ffffu32;
    for &b in bytes {
        c ^= u32::from(b);
        for _ in 0..8 {
            c = if c & 1 != 0 { 0xedb8_8320 ^ (c >> 1) } else { c >> 1 };
        }
    }
    !c
}

fn png_chunk(out: &mut Vec<u8>, kind: &[u8; 4], data: &[u8]) {
    out.extend_from_slice(&(data.len() as u32).to_be_bytes());
    let mut body = kind.to_vec();
    body.extend_from_slice(data);
    out.extend_from_slice(&body);
    out.extend_from_slice(&crc32(&body).to_be_bytes());
}

/// A PNG whose header claims `w × h` 8-bit RGB pixels, with a tiny IDAT.
fn png_claiming(w: u32, h: u32) -> Vec<u8> {
    let mut out = b"\x89PNG\r\n\x1a\n".to_vec();
    let mut ihdr = Vec::new();
    ihdr.extend_from_slice(&w.to_be_bytes());
    ihdr.extend_from_slice(&h.to_be_bytes());
    ihdr.extend_from_slice(&[8, 2, 0, 0, 0]);
    png_chunk(&mut out, b"IHDR", &ihdr);
    png_chunk(&mut out, b"IDAT", &[0x78, 0x9c, 0x03, 0x00, 0x00, 0x00, 0x00, 0x01]);
    png_chunk(&mut out, b"IEND", &[]);
    out
}

/// A little-endian baseline TIFF: 8-bit gray `w × h`, one IFD with the given
/// strip table (`strips` entries claimed, the offsets array pointing at `offsets_at`).
fn tiff_claiming(w: u32, h: u32, strips: u32, rows_per_strip: u32) -> Vec<u8> {
    let mut out = b"II*\0".to_vec();
    out.extend_from_slice(&8u32.to_le_bytes());
    let entries: [(u16, u16, u32, u32); 8] = [
        (256, 4, 1, w),              // ImageWidth, LONG
        (257, 4, 1, h),              // ImageLength
        (258, 3, 1, 8),              // BitsPerSample
        (259, 3, 1, 1),              // Compression: none
        (262, 3, 1, 1),              // PhotometricInterpretation: BlackIsZero
        (273, 4, strips, 200),       // StripOffsets (count `strips`, array at 200)
        (278, 4, 1, rows_per_strip), // RowsPerStrip
        (279, 4, strips, 200),       // StripByteCounts
    ];
    out.extend_from_slice(&(entries.len() as u16).to_le_bytes());
    for (tag, kind, count, value) in entries {
        out.extend_from_slice(&tag.to_le_bytes());
        out.extend_from_slice(&kind.to_le_bytes());
        out.extend_from_slice(&count.to_le_bytes());
        out.extend_from_slice(&value.to_le_bytes());
    }
    out.extend_from_slice(&0u32.to_le_bytes());
    out.resize(216, 0);
    out
}

/// A JPEG whose frame header (SOF0) claims `w × h` with three components, then ends.
fn jpeg_claiming(w: u16, h: u16) -> Vec<u8> {
    let mut out = vec![0xFF, 0xD8];
    // DQT: one table of 64 ones.
    out.extend_from_slice(&[0xFF, 0xDB, 0x00, 0x43, 0x00]);
    out.extend_from_slice(&[1u8; 64]);
    out.extend_from_slice(&[0xFF, 0xC0, 0x00, 0x11, 0x08]);
    out.extend_from_slice(&h.to_be_bytes());
    out.extend_from_slice(&w.to_be_bytes());
    out.extend_from_slice(&[3, 1, 0x22, 0, 2, 0x11, 0, 3, 0x11, 0]);
    out.extend_from_slice(&[0xFF, 0xD9]);
    out
}

/// Runs `pumice run FILE -o OUT --report R` and returns (exit code, stderr,
/// the run's peak memory in bytes, wall time).
fn run_hostile(s: &Scratch, name: &str, bytes: &[u8], steps: &[&str]) -> (i32, String, u64, Duration) {
    let input = s.write(name, bytes);
    let out = s.path(&format!("out-{name}.png"));
    let report = s.path(&format!("report-{name}.json"));
    let mut args =
        vec!["run".to_string(), input.display().to_string(), "-o".into(), out.display().to_string()];
    args.extend(["--report".to_string(), report.display().to_string()]);
    for st in steps {
        args.extend(["-s".to_string(), st.to_string()]);
    }
    let start = Instant::now();
    let run = pumice(&args);
    let elapsed = start.elapsed();
    let r: Value = serde_json::from_str(&fs::read_to_string(&report).unwrap()).unwrap();
    let peak = r["summary"]["peak_memory_bytes"].as_u64().unwrap_or(0);
    (run.code(), run.stderr(), peak, elapsed)
}

/// 256 MiB: the bound the hostile headers must stay under (a generous one: the
/// binary itself takes a few MiB).
const MEMORY_BOUND: u64 = 256 << 20;
/// Not a speed requirement: a hang detector, far above the milliseconds these take.
const HANG_BOUND: Duration = Duration::from_secs(20);

#[test]
fn headers_claiming_huge_images_are_refused_fast_in_bounded_memory() {
    let s = Scratch::new();
    let cases: Vec<(&str, Vec<u8>)> = vec![
        ("bomb.png", png_claiming(100_000, 100_000)),
        ("bomb.tif", tiff_claiming(100_000, 100_000, 1, 100_000)),
        ("bomb.jpg", jpeg_claiming(65_500, 65_500)),
        ("wide.png", png_claiming(u32::MAX >> 1, 1)),
        ("strips.tif", tiff_claiming(1000, 1000, 1 << 30, 1)),
        ("zero-size.png", png_claiming(0, 0)),
    ];
    for (name, bytes) in cases {
        let (code, err, peak, took) = run_hostile(&s, name, &bytes, &[]);
        eprintln!(
            "{name}: exit {code} in {took:?}, peak {} MiB: {}",
            peak >> 20,
            err.lines().next().unwrap_or("")
        );
        assert_eq!(code, 1, "{name}: {err}");
        assert!(err.contains(name), "{name}: the error names the file: {err}");
        assert!(peak > 0 && peak < MEMORY_BOUND, "{name}: peak {peak} bytes");
        assert!(took < HANG_BOUND, "{name}: {took:?}");
        assert!(!s.path(&format!("out-{name}.png")).exists());
    }
}

fn valid_files() -> Vec<(&'static str, Vec<u8>)> {
    let planes = (0..3)
        .map(|c| Plane::from_fn(40, 30, |x, y| ((x * 5 + y * 3 + c * 50) % 256) as f32 / 255.0).unwrap())
        .collect();
    let r = Raster::new(planes, Layout::Rgb, Encoding::Srgb).unwrap();
    [("png", Format::Png), ("tif", Format::Tiff), ("jpg", Format::Jpeg), ("webp", Format::Webp)]
        .into_iter()
        .map(|(ext, f)| (ext, io::encode(&r, &EncodeOptions::new(f)).unwrap()))
        .collect()
}

#[test]
fn truncations_at_many_offsets_never_panic() {
    let mut tried = 0;
    for (ext, bytes) in valid_files() {
        let step = (bytes.len() / 97).max(1);
        for cut in (0..bytes.len()).step_by(step) {
            tried += 1;
            let outcome =
                catch_unwind(AssertUnwindSafe(|| io::decode(&bytes[..cut], &DecodeOptions::default())));
            match outcome {
                Err(_) => panic!("{ext} cut at {cut} of {} panicked", bytes.len()),
                // Documented: a JPEG cut inside its entropy-coded data decodes with
                // the missing blocks filled, as JPEG decoders do; the other formats refuse,
                // except that a WebP whose RIFF pad byte (RIFF: chunks are padded to
                // even length) alone is cut off is still whole.
                Ok(Ok(_)) => assert!(
                    ext == "jpg" || (ext == "webp" && cut + 1 == bytes.len() && bytes.len() % 2 == 0),
                    "{ext} cut at {cut} of {} decoded",
                    bytes.len()
                ),
                Ok(Err(e)) => assert!(!e.to_string().is_empty()),
            }
        }
    }
    assert!(tried > 300);
}

#[test]
fn empty_mislabelled_and_truncated_files_get_one_line_errors() {
    let s = Scratch::new();
    let files = valid_files();
    let png = &files[0].1;
    let jpeg = &files[2].1;
    for (name, bytes, expect) in [
        ("empty.png", Vec::new(), "empty"),
        ("cut.png", png[..png.len() / 2].to_vec(), "PNG"),
        ("cut-header.tif", files[1].1[..10].to_vec(), "TIFF"),
        ("words.jpg", b"plain text in a file called .jpg".to_vec(), "not an image format"),
    ] {
        let (code, err, _, _) = run_hostile(&s, name, &bytes, &[]);
        assert_eq!(code, 1, "{name}: {err}");
        assert!(err.contains(name) && err.contains(expect), "{name}: {err}");
        assert_eq!(err.trim_end().lines().count(), 1, "{name}: {err}");
    }
    // A PNG named .jpg is read as the PNG it is: the content decides.
    let (code, err, _, _) = run_hostile(&s, "really-a-png.jpg", png, &["invert"]);
    assert_eq!(code, 0, "{err}");
    let (code, err, _, _) = run_hostile(&s, "really-a-jpeg.tif", jpeg, &["invert"]);
    assert_eq!(code, 0, "{err}");
}

#[test]
fn float_data_full_of_nan_and_infinity_has_a_documented_result() {
    let s = Scratch::new();
    let special = [f32::NAN, f32::INFINITY, f32::NEG_INFINITY, 0.5, -2.0, 7.0];
    let plane = Plane::from_fn(6, 4, |x, y| special[(x + y) % special.len()]).unwrap();
    let r = Raster::new(vec![plane], Layout::Gray, Encoding::Linear).unwrap();
    let mut opts = EncodeOptions::new(Format::Tiff);
    opts.encoding = Encoding::Linear;
    let tiff = io::encode(&r, &opts).unwrap();
    let input = s.write("special.tif", &tiff);
    // Into float TIFF: the values survive untouched by a geometric step.
    let out = s.path("special-out.tif");
    pumice(&["run", input.to_str().unwrap(), "-o", out.to_str().unwrap(), "-s", "flip"]).ok();
    let back = io::decode(&fs::read(&out).unwrap(), &DecodeOptions::default()).unwrap();
    let row: Vec<f32> = back.planes()[0].row(0).to_vec();
    assert!(row[5].is_nan() && row[4] == f32::INFINITY && row[1] == -2.0, "{row:?}");
    // Into 16-bit PNG: NaN is written as 0 and the infinities are clipped like
    // any other out-of-range value (README, Formats and metadata).
    let png = s.path("special-flip.png");
    pumice(&["run", input.to_str().unwrap(), "-o", png.to_str().unwrap(), "-s", "flip"]).ok();
    let back = io::decode(&fs::read(&png).unwrap(), &DecodeOptions::default()).unwrap();
    let codes: Vec<u32> = back.planes()[0].row(0).iter().map(|v| (v * 65535.0).round() as u32).collect();
    assert_eq!(codes, [65535, 0, 32768, 0, 65535, 0]);
    // Through blurs and tone steps, where NaN spreads: still written, never a crash.
    let png = s.path("special-out.png");
    pumice(&["run", input.to_str().unwrap(), "-o", png.to_str().unwrap(), "-s", "gauss:1", "-s", "stretch"])
        .ok();
    let back = io::decode(&fs::read(&png).unwrap(), &DecodeOptions::default()).unwrap();
    assert!(back.planes()[0].as_slice().iter().all(|v| v.is_finite() && (0.0..=1.0).contains(v)));
}

#[test]
fn one_pixel_and_very_wide_images_run_through_every_family() {
    let s = Scratch::new();
    for (w, h) in [(1usize, 1usize), (1, 9), (9, 1), (65_535, 1), (1, 65_535)] {
        let p = Plane::from_fn(w, h, |x, y| ((x + y) % 7) as f32 / 6.0).unwrap();
        let r = Raster::new(vec![p.clone(), p.clone(), p], Layout::Rgb, Encoding::Srgb).unwrap();
        let name = format!("img-{w}x{h}.png");
        let input = s.write(&name, &io::encode(&r, &EncodeOptions::new(Format::Png)).unwrap());
        for steps in [
            &["gauss:2", "sharpen"][..],
            &["median:2", "sobel"],
            &["resize:scale=0.5"],
            &["resize:width=3,height=3,fit=cover"],
            &["rotate:angle=33"],
            &["equalize", "clahe", "binarize:method=otsu"],
            &["space:to=lab", "space:to=rgb"],
        ] {
            let out = s.path("out.png");
            let mut args =
                vec!["run".to_string(), input.display().to_string(), "-o".into(), out.display().to_string()];
            args.push("--overwrite".into());
            for st in steps {
                args.extend(["-s".to_string(), st.to_string()]);
            }
            let run = pumice(&args);
            // Success, or a one-line refusal (e.g. halving a 1-pixel side); never a crash.
            assert!(matches!(run.code(), 0 | 1), "{name} {steps:?}: {}", run.stderr());
            if run.code() == 1 {
                assert_eq!(run.stderr().trim_end().lines().count(), 1, "{name} {steps:?}: {}", run.stderr());
            }
        }
    }
}
