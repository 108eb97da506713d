//! CLI tests with the real binary: every bad-input case of the foundation gets a
//! one-line error, the right exit code, and nothing written.

use crate::harness::{Scratch, pumice};

/// A 4×3 8-bit RGB PNG written with the png crate directly.
pub fn small_png(s: &Scratch, name: &str) -> std::path::PathBuf {
    let mut bytes = Vec::new();
    {
        let mut enc = png::Encoder::new(&mut bytes, 4, 3);
        enc.set_color(png::ColorType::Rgb);
        enc.set_depth(png::BitDepth::Eight);
        let mut w = enc.write_header().unwrap();
        let data: Vec<u8> = (0..36).map(|i| (i * 7) as u8).collect();
        w.write_image_data(&data).unwrap();
    }
    s.write(name, &bytes)
}

#[test]
fn a_plain_run_writes_the_output() {
    let s = Scratch::new();
    let input = small_png(&s, "in.png");
    pumice(&[
        "run".as_ref(),
        input.as_os_str(),
        "-o".as_ref(),
        s.path("out.png").as_os_str(),
        "-s".as_ref(),
        "invert".as_ref(),
    ])
    .ok();
    assert_eq!(s.names(), ["in.png", "out.png"]);
}
