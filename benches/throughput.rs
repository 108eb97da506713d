//! Throughput of the foundation's workloads on a 4000×3000 RGB image, in
//! megapixels per second (input pixels), beside reference libraries timed on
//! the same data in the same run by `benches/reference.py`.
//!
//! Run with `cargo bench --bench throughput`. The reference side needs Python
//! with the packages of `benches/requirements.txt`; set `PUMICE_BENCH_PYTHON`
//! to its interpreter (default: `.venv/bin/python` if present, else `python3`).
//! Without them only Pumice's figures are printed. Nothing here asserts a time.

#[path = "common.rs"]
mod common;

use common::{H, REPEATS, W, median, median_with, print_table};
use pumice::io::{self, Chroma, DecodeOptions, EncodeOptions, Format};
use pumice::pipeline::{DomainPolicy, Pipeline};

fn main() {
    let only = common::Only::from_args();
    let mpix = (W * H) as f64 / 1e6;
    println!("Pumice throughput, {W}×{H} RGB, {} threads, median of {REPEATS}", rayon::current_num_threads());
    let image = common::test_image();
    let data_dir = common::data_dir();
    let jpeg_opts = EncodeOptions { quality: 90, ..EncodeOptions::new(Format::Jpeg) };
    let png_bytes = io::encode(&image, &EncodeOptions::new(Format::Png)).unwrap();
    let jpeg_bytes = io::encode(&image, &jpeg_opts).unwrap();
    let (png_path, jpeg_path) = (data_dir.join("photo.png"), data_dir.join("photo.jpg"));
    std::fs::write(&png_path, &png_bytes).unwrap();
    std::fs::write(&jpeg_path, &jpeg_bytes).unwrap();

    let decode = DecodeOptions::default();
    let mut ours: Vec<(&str, f64)> = Vec::new();
    ours.push(("jpeg-decode", median(|| drop(io::decode(&jpeg_bytes, &decode).unwrap()))));
    ours.push(("jpeg-encode", median(|| drop(io::encode(&image, &jpeg_opts).unwrap()))));
    let jpeg_444 = EncodeOptions { chroma: Chroma::S444, ..jpeg_opts.clone() };
    ours.push(("jpeg-encode-444", median(|| drop(io::encode(&image, &jpeg_444).unwrap()))));
    ours.push(("png-decode", median(|| drop(io::decode(&png_bytes, &decode).unwrap()))));
    ours.push(("png-encode", median(|| drop(io::encode(&image, &EncodeOptions::new(Format::Png)).unwrap()))));

    // The alternative JPEG encoder considered: the image crate's own (baseline, 4:4:4 only).
    let interleaved: Vec<u8> =
        (0..W * H * 3).map(|i| (image.planes()[i % 3].as_slice()[i / 3] * 255.0).round() as u8).collect();
    let image_crate_jpeg = median(|| {
        let mut out = Vec::new();
        image::codecs::jpeg::JpegEncoder::new_with_quality(&mut out, 90)
            .encode(&interleaved, W as u32, H as u32, image::ExtendedColorType::Rgb8)
            .unwrap();
    });

    let srgb_to_linear = median(|| drop(common::to_linear(&image)));
    let linear = common::to_linear(&image);
    let encoded = image.clone();
    let workloads = [
        ("gauss-2", "gauss:2", &linear),
        ("gauss-8", "gauss:8", &linear),
        ("convolve-3x3", "convolve:kernel=0 -1 0;-1 5 -1;0 -1 0", &linear),
        (
            "convolve-5x5-separable",
            "convolve:kernel=1 4 6 4 1;4 16 24 16 4;6 24 36 24 6;4 16 24 16 4;1 4 6 4 1,normalize=true",
            &linear,
        ),
        ("gray", "gray", &linear),
        ("invert", "invert", &encoded),
        ("gamma", "gamma:2.2", &encoded),
        ("flip", "flip", &linear),
        ("rotate-90", "rotate:90", &linear),
        ("crop", "crop:x=1500,y=1000,width=1000,height=1000", &linear),
    ];
    for (name, step, input) in workloads {
        let p = Pipeline::parse(&[step]).unwrap();
        if only.wants(name) {
            ours.push((name, median_with(|| input.clone(), |r| drop(p.run(r, DomainPolicy::Auto).unwrap()))));
        }
    }
    if only.is_filtered() {
        for (name, secs) in &ours {
            if only.wants(name) {
                println!("{name}: {:.1} Mpx/s ({:.1} ms)", mpix / secs, secs * 1000.0);
            }
        }
        return;
    }

    let reference = common::reference_times("reference.py", &[&png_path, &jpeg_path]);
    print_table(mpix, &ours, &reference, &["cv2", "scipy", "numpy", "pillow"]);
    let decode_encode = ours[0].1 + ours[1].1;
    println!();
    println!("JPEG decode → encode (q90, 4:2:0): {:.1} Mpx/s", mpix / decode_encode);
    if let (Some(d), Some(e)) = (reference.get("cv2.jpeg-decode"), reference.get("cv2.jpeg-encode")) {
        println!(
            "  cv2 decode → encode: {:.1} Mpx/s (ratio {:.2}×)",
            mpix / (d + e),
            (d + e) / decode_encode
        );
    }
    println!(
        "JPEG encoders on the same pixels: jpeg-encoder 4:2:0 {:.1}, jpeg-encoder 4:4:4 {:.1}, image crate (4:4:4) {:.1} Mpx/s",
        mpix / ours[1].1,
        mpix / ours[2].1,
        mpix / image_crate_jpeg
    );
    println!("sRGB → linear by lookup table, 3 planes (with a copy): {:.1} Mpx/s", mpix / srgb_to_linear);
    println!("(ratio = reference time / Pumice time: above 1 means Pumice is faster)");
}
