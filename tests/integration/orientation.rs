//! EXIF orientation: all eight values must give the same upright pixels, and the
//! output must say orientation 1. The stored images are built here from the
//! meaning of each value in EXIF 2.32 (CIPA DC-008) §4.6.4 A, independently of
//! the library's own mapping: the value says which side of the visual image the
//! stored 0th row and 0th column lie on.

use crate::harness::{Scratch, pumice};

const W: usize = 5; // upright width
const H: usize = 3; // upright height

fn upright(x: usize, y: usize) -> u8 {
    (y * W + x) as u8 * 10
}

/// The stored image for orientation `o`: its size and the upright coordinates
/// each stored sample (column c, row r) shows.
fn stored(o: u16) -> (usize, usize, Vec<u8>) {
    // For each value: (0th row side, 0th column side) from the EXIF table.
    let (sw, sh) = if o >= 5 { (H, W) } else { (W, H) };
    let mut data = vec![0u8; sw * sh];
    for r in 0..sh {
        for c in 0..sw {
            let (x, y) = match o {
                1 => (c, r),                 // top, left
                2 => (W - 1 - c, r),         // top, right
                3 => (W - 1 - c, H - 1 - r), // bottom, right
                4 => (c, H - 1 - r),         // bottom, left
                5 => (r, c),                 // left, top
                6 => (W - 1 - r, c),         // right, top
                7 => (W - 1 - r, H - 1 - c), // right, bottom
                8 => (r, H - 1 - c),         // left, bottom
                _ => unreachable!(),
            };
            data[r * sw + c] = upright(x, y);
        }
    }
    (sw, sh, data)
}

fn png_with_exif(w: usize, h: usize, gray: &[u8], exif: Vec<u8>) -> Vec<u8> {
    let mut info = png::Info::with_size(w as u32, h as u32);
    info.color_type = png::ColorType::Grayscale;
    info.bit_depth = png::BitDepth::Eight;
    info.exif_metadata = Some(exif.into());
    let mut out = Vec::new();
    let mut w = png::Encoder::with_info(&mut out, info).unwrap().write_header().unwrap();
    w.write_image_data(gray).unwrap();
    w.finish().unwrap();
    out
}

fn read_png(bytes: &[u8]) -> (usize, usize, Vec<u8>, Option<Vec<u8>>) {
    let mut reader = png::Decoder::new(std::io::Cursor::new(bytes)).read_info().unwrap();
    let mut buf = vec![0; reader.output_buffer_size().unwrap()];
    let frame = reader.next_frame(&mut buf).unwrap();
    let exif = reader.info().exif_metadata.as_ref().map(|e| e.to_vec());
    (frame.width as usize, frame.height as usize, buf, exif)
}

#[test]
fn all_eight_orientations_come_out_upright() {
    let s = Scratch::new();
    let want: Vec<u8> = (0..H).flat_map(|y| (0..W).map(move |x| upright(x, y))).collect();
    for o in 1..=8u16 {
        for big_endian in [false, true] {
            let (sw, sh, data) = stored(o);
            let exif = pumice::io::exif::minimal_with_orientation(o, big_endian);
            s.write("in.png", &png_with_exif(sw, sh, &data, exif));
            let out = s.path("out.png");
            pumice(&[
                "run",
                &s.path("in.png").display().to_string(),
                "-o",
                &out.display().to_string(),
                "--overwrite",
            ])
            .ok();
            let (w, h, pixels, exif) = read_png(&std::fs::read(&out).unwrap());
            assert_eq!((w, h, pixels.as_slice()), (W, H, want.as_slice()), "orientation {o}");
            let exif = exif.expect("EXIF kept");
            assert_eq!(pumice::io::exif::orientation(&exif), Some(1), "orientation {o} not reset");
        }
    }
}

#[test]
fn keep_orientation_leaves_pixels_and_tag_alone() {
    let s = Scratch::new();
    let (sw, sh, data) = stored(6);
    s.write("in.png", &png_with_exif(sw, sh, &data, pumice::io::exif::minimal_with_orientation(6, false)));
    let out = s.path("out.png");
    pumice(&[
        "run",
        &s.path("in.png").display().to_string(),
        "-o",
        &out.display().to_string(),
        "--keep-orientation",
    ])
    .ok();
    let (w, h, pixels, exif) = read_png(&std::fs::read(&out).unwrap());
    assert_eq!((w, h, pixels), (sw, sh, data));
    assert_eq!(pumice::io::exif::orientation(&exif.unwrap()), Some(6));
}
