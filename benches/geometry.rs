//! Resampling throughput beside Pillow, OpenCV (reference_geometry.py, same
//! files, same run) and the fast_image_resize crate (in this process), as
//! megapixels per second of **input** pixels, 2 threads.
//!
//! `cargo bench --bench geometry [-- FILTER]`. Pumice's figures are given two
//! ways: the full linear-light path (sRGB codes → linear by table → resize) and
//! the encoded-domain path (resize only, as the references do it).

#[path = "common.rs"]
mod common;

use fast_image_resize::images::Image;
use fast_image_resize::{FilterType, PixelType, ResizeAlg, ResizeOptions, Resizer};
use pumice::pipeline::{DomainPolicy, Pipeline};
use pumice::raster::Raster;

fn fir_planes(r: &Raster, w: u32, h: u32, filter: FilterType) {
    let options = ResizeOptions::new().resize_alg(ResizeAlg::Convolution(filter));
    let mut resizer = Resizer::new();
    for p in r.planes() {
        let bytes: Vec<u8> = p.as_slice().iter().flat_map(|v| v.to_ne_bytes()).collect();
        let src = Image::from_vec_u8(r.width() as u32, r.height() as u32, bytes, PixelType::F32).unwrap();
        let mut dst = Image::new(w, h, PixelType::F32);
        resizer.resize(&src, &mut dst, &options).unwrap();
    }
}

fn fir_u8x3(r: &Raster, w: u32, h: u32, filter: FilterType) -> impl FnMut() {
    let n = r.width() * r.height();
    let mut bytes = vec![0u8; n * 3];
    for (c, p) in r.planes().iter().enumerate() {
        for (i, v) in p.as_slice().iter().enumerate() {
            bytes[i * 3 + c] = (v * 255.0).round() as u8;
        }
    }
    let (sw, sh) = (r.width() as u32, r.height() as u32);
    move || {
        let src = Image::from_vec_u8(sw, sh, bytes.clone(), PixelType::U8x3).unwrap();
        let mut dst = Image::new(w, h, PixelType::U8x3);
        let options = ResizeOptions::new().resize_alg(ResizeAlg::Convolution(filter));
        Resizer::new().resize(&src, &mut dst, &options).unwrap();
    }
}

fn main() {
    let only = common::Only::from_args();
    println!(
        "Pumice resampling, RGB 8-bit source, {} threads, median of {}; Mpx/s of input pixels",
        rayon::current_num_threads(),
        common::REPEATS
    );
    let big = common::test_image();
    let small = common::test_image_sized(1000, 750);
    let dir = common::data_dir();
    let (big_png, small_png) = (dir.join("resize-big.png"), dir.join("resize-small.png"));
    let png = pumice::io::EncodeOptions::new(pumice::io::Format::Png);
    std::fs::write(&big_png, pumice::io::encode(&big, &png).unwrap()).unwrap();
    std::fs::write(&small_png, pumice::io::encode(&small, &png).unwrap()).unwrap();

    let workloads: [(&str, &Raster, u32, u32, &str, FilterType); 3] = [
        ("lanczos3-1000x750", &big, 1000, 750, "lanczos3", FilterType::Lanczos3),
        ("lanczos3-1333x1000", &big, 1333, 1000, "lanczos3", FilterType::Lanczos3),
        ("bicubic-up-4000x3000", &small, 4000, 3000, "bicubic", FilterType::CatmullRom),
    ];
    let mut ours = Vec::new();
    let mut fir = Vec::new();
    for (name, src, w, h, filter, fir_filter) in workloads {
        if !only.wants(name) {
            continue;
        }
        let mpix = (src.width() * src.height()) as f64 / 1e6;
        let step = format!("resize:width={w},height={h},fit=fill,filter={filter}");
        let p = Pipeline::parse(&[step.as_str()]).unwrap();
        let linear = common::median_with(|| src.clone(), |r| drop(p.run(r, DomainPolicy::Auto).unwrap()));
        let encoded = common::median_with(|| src.clone(), |r| drop(p.run(r, DomainPolicy::Encoded).unwrap()));
        let planes = common::median(|| fir_planes(src, w, h, fir_filter));
        let u8x3 = common::median(fir_u8x3(src, w, h, fir_filter));
        ours.push((name, mpix, linear, encoded));
        fir.push((name, mpix, planes, u8x3));
    }
    let reference = common::reference_times("reference_geometry.py", &[&big_png, &small_png]);
    println!();
    println!(
        "{:<22} {:>14} {:>14} {:>28} {:>18}",
        "workload", "ours linear", "ours encoded", "reference", "ratio (encoded)"
    );
    for ((name, mpix, linear, encoded), (_, _, fir_f32, fir_u8)) in ours.iter().zip(&fir) {
        println!("{name:<22} {:>14.1} {:>14.1}", mpix / linear, mpix / encoded);
        for lib in ["pillow", "cv2", "cv2-f32"] {
            if let Some(t) = reference.get(&format!("{lib}.{name}")) {
                println!(
                    "{:<22} {:>14} {:>14} {:>28} {:>18}",
                    "",
                    "",
                    "",
                    format!("{lib} {:.1}", mpix / t),
                    format!("{:.2}× ({:.2}× linear)", t / encoded, t / linear)
                );
            }
        }
        println!(
            "{:<22} {:>14} {:>14} {:>28} {:>18}",
            "",
            "",
            "",
            format!("fast_image_resize f32 {:.1}", mpix / fir_f32),
            format!("{:.2}×", fir_f32 / encoded)
        );
        println!(
            "{:<22} {:>14} {:>14} {:>28} {:>18}",
            "",
            "",
            "",
            format!("fast_image_resize u8x3 {:.1}", mpix / fir_u8),
            format!("{:.2}×", fir_u8 / encoded)
        );
    }
    println!("(ratio = reference time / Pumice time: above 1 means Pumice is faster)");
}
