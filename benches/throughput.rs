//! Throughput of the foundation's workloads on a 4000×3000 RGB image, in
//! megapixels per second (input pixels), beside reference libraries timed on
//! the same data in the same run by `benches/reference.py`.
//!
//! Run with `cargo bench --bench throughput`. The reference side needs Python
//! with the packages of `benches/requirements.txt`; set `PUMICE_BENCH_PYTHON`
//! to its interpreter (default: `.venv/bin/python` if present, else `python3`).
//! Without them only Pumice's figures are printed. Nothing here asserts a time.

use std::collections::BTreeMap;
use std::path::PathBuf;
use std::process::Command;
use std::time::Instant;

use pumice::io::{self, Chroma, DecodeOptions, EncodeOptions, Format};
use pumice::pipeline::{DomainPolicy, Pipeline};
use pumice::raster::{Encoding, Layout, Plane, Raster, SampleType};

const W: usize = 4000;
const H: usize = 3000;
const REPEATS: usize = 5;

/// A photo-like 8-bit RGB test image: smooth gradients, fine texture and noise
/// from a fixed seed, so codecs and filters do representative work.
fn test_image() -> Raster {
    let mut state = 0x9E37_79B9_7F4A_7C15u64;
    let mut noise = move || {
        state ^= state << 13;
        state ^= state >> 7;
        state ^= state << 17;
        (state >> 40) as f32 / (1u64 << 24) as f32 - 0.5
    };
    let planes = (0..3)
        .map(|c| {
            Plane::from_fn(W, H, |x, y| {
                let (u, v) = (x as f32 / W as f32, y as f32 / H as f32);
                let base = 0.5 + 0.3 * ((u * 6.0 + c as f32).sin() * (v * 4.0).cos());
                let texture = 0.08 * ((x as f32 * 0.21).sin() * (y as f32 * 0.17).cos());
                let code = ((base + texture + 0.04 * noise()).clamp(0.0, 1.0) * 255.0).round();
                code / 255.0
            })
            .unwrap()
        })
        .collect();
    let mut r = Raster::new(planes, Layout::Rgb, Encoding::Srgb).unwrap();
    r.levels = Some(255);
    r.metadata.source_sample = Some(SampleType::U8);
    r
}

/// The median of `REPEATS` timings of `f`, in seconds.
fn median(mut f: impl FnMut()) -> f64 {
    median_with(|| (), |()| f())
}

/// The median of `REPEATS` timings of `f(setup())`, timing `f` only.
fn median_with<T>(mut setup: impl FnMut() -> T, mut f: impl FnMut(T)) -> f64 {
    let mut t: Vec<f64> = (0..REPEATS)
        .map(|_| {
            let input = setup();
            let start = Instant::now();
            f(input);
            start.elapsed().as_secs_f64()
        })
        .collect();
    t.sort_by(f64::total_cmp);
    t[REPEATS / 2]
}

fn reference_times(png: &PathBuf, jpeg: &PathBuf) -> BTreeMap<String, f64> {
    let root = PathBuf::from(env!("CARGO_MANIFEST_DIR"));
    let python = std::env::var("PUMICE_BENCH_PYTHON").unwrap_or_else(|_| {
        let venv = root.join(".venv/bin/python");
        if venv.exists() { venv.display().to_string() } else { "python3".into() }
    });
    let out = Command::new(&python)
        .arg(root.join("benches/reference.py"))
        .arg("--png")
        .arg(png)
        .arg("--jpeg")
        .arg(jpeg)
        .output();
    match out {
        Ok(o) if o.status.success() => {
            eprint!("{}", String::from_utf8_lossy(&o.stderr));
            parse_flat_json(&String::from_utf8_lossy(&o.stdout))
        }
        Ok(o) => {
            eprintln!("reference script failed: {}", String::from_utf8_lossy(&o.stderr));
            BTreeMap::new()
        }
        Err(e) => {
            eprintln!("reference script not run ({python}: {e})");
            BTreeMap::new()
        }
    }
}

/// Parses `{"name": seconds, …}` as the reference script prints it.
fn parse_flat_json(text: &str) -> BTreeMap<String, f64> {
    text.trim()
        .trim_start_matches('{')
        .trim_end_matches('}')
        .split(',')
        .filter_map(|item| {
            let (k, v) = item.split_once(':')?;
            Some((k.trim().trim_matches('"').to_string(), v.trim().parse().ok()?))
        })
        .collect()
}

fn main() {
    // `cargo bench --bench throughput -- gauss` runs only workloads whose name contains `gauss`.
    let only: Vec<String> = std::env::args().skip(1).filter(|a| !a.starts_with("--")).collect();
    let wanted = |name: &str| only.is_empty() || only.iter().any(|o| name.contains(o.as_str()));
    let mpix = (W * H) as f64 / 1e6;
    println!("Pumice throughput, {W}×{H} RGB, {} threads, median of {REPEATS}", rayon::current_num_threads());
    let image = test_image();
    let data_dir = PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("target/bench-data");
    std::fs::create_dir_all(&data_dir).unwrap();
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

    let to_linear = |r: &Raster| {
        let mut r = r.clone();
        for p in r.planes_mut() {
            pumice::color::srgb::decode_in_place(p.as_mut_slice(), Some(255));
        }
        r.encoding = Encoding::Linear;
        r.levels = None;
        r
    };
    let srgb_to_linear = median(|| drop(to_linear(&image)));
    let linear = to_linear(&image);
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
        if wanted(name) {
            ours.push((name, median_with(|| input.clone(), |r| drop(p.run(r, DomainPolicy::Auto).unwrap()))));
        }
    }
    if !only.is_empty() {
        for (name, secs) in &ours {
            if wanted(name) {
                println!("{name}: {:.1} Mpx/s ({:.1} ms)", mpix / secs, secs * 1000.0);
            }
        }
        return;
    }

    let reference = reference_times(&png_path, &jpeg_path);
    println!();
    println!("{:<18} {:>12} {:>26} {:>8}", "workload", "Pumice Mpx/s", "reference Mpx/s", "ratio");
    for (name, secs) in &ours {
        let key = name.trim_end_matches("-444");
        let mut refs: Vec<(&str, f64)> = ["cv2", "scipy", "numpy", "pillow"]
            .iter()
            .filter_map(|lib| reference.get(&format!("{lib}.{key}")).map(|t| (*lib, *t)))
            .collect();
        if refs.is_empty() {
            refs.push(("-", f64::NAN));
        }
        for (i, (lib, t)) in refs.iter().enumerate() {
            let label = if i == 0 { *name } else { "" };
            let ours_cell = if i == 0 { format!("{:.1}", mpix / secs) } else { String::new() };
            println!(
                "{label:<18} {ours_cell:>12} {:>26} {:>8}",
                format!("{lib} {:.1}", mpix / t),
                if t.is_nan() { "-".into() } else { format!("{:.2}×", t / secs) }
            );
        }
    }
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
