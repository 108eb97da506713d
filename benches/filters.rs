//! Throughput of the neighbourhood filters and edge operators on a 4000×3000
//! image, in megapixels per second, beside OpenCV and scipy timed on the same
//! data in the same run by `benches/reference_filters.py`.
//!
//! Run with `cargo bench --bench filters` (or `-- median` for some workloads).
//! The reference side needs the packages of `benches/requirements.txt`; set
//! `PUMICE_BENCH_PYTHON` to the interpreter. Nothing here asserts a time.
//!
//! Workloads: gauss σ = 2, 8, 32 (method=auto) and exact beside fast at
//! σ = 4, 6, 8 (the measurement behind `FAST_SIGMA`), box r=5 on RGB f32 (linear); median 5×5 on the 8-bit RGB image;
//! median r=15 (31×31) on a 16-bit gray image; Sobel magnitude on gray f32;
//! canny σ=1 (thresholds 0.1 / 0.2) on gray f32 taken as encoded values (its
//! domain, so no conversion is timed).

#[path = "common.rs"]
mod common;

use std::path::Path;

use common::{H, REPEATS, W, median_with, print_table};
use pumice::pipeline::{DomainPolicy, Pipeline};
use pumice::raster::{Encoding, Layout, Plane, Raster};

/// Writes a C-order `.npy` (format 1.0) with dtype `descr` and `shape`.
fn write_npy(path: &Path, descr: &str, shape: &[usize], data: &[u8]) {
    let dims: Vec<String> = shape.iter().map(|d| d.to_string()).collect();
    let mut header =
        format!("{{'descr': '{descr}', 'fortran_order': False, 'shape': ({}), }}", dims.join(", "));
    while (10 + header.len() + 1) % 64 != 0 {
        header.push(' ');
    }
    header.push('\n');
    let mut bytes = b"\x93NUMPY\x01\x00".to_vec();
    bytes.extend((header.len() as u16).to_le_bytes());
    bytes.extend(header.as_bytes());
    bytes.extend(data);
    std::fs::write(path, bytes).unwrap();
}

fn f32_bytes(planes: &[&Plane]) -> Vec<u8> {
    planes.iter().flat_map(|p| p.as_slice().iter().flat_map(|v| v.to_le_bytes())).collect()
}

fn main() {
    let only = common::Only::from_args();
    let mpix = (W * H) as f64 / 1e6;
    println!("Pumice filters, {W}×{H}, {} threads, median of {REPEATS}", rayon::current_num_threads());
    let image = common::test_image();
    let linear = common::to_linear(&image);
    let gray_plane = linear.planes()[1].clone();
    let gray = Raster::new(vec![gray_plane.clone()], Layout::Gray, Encoding::Linear).unwrap();
    // 16-bit gray: the green plane's codes spread over 16 bits with a little
    // deterministic texture, so the histogram sees many distinct codes.
    let g16 = Plane::from_fn(W, H, |x, y| {
        let base = image.planes()[1].get(x, y) * 65280.0;
        let tex = ((x * 31 + y * 17) % 255) as f32;
        (base + tex).round() / 65535.0
    })
    .unwrap();
    let gray_encoded = Raster::new(vec![gray_plane.clone()], Layout::Gray, Encoding::Srgb).unwrap();
    let mut gray16 = Raster::new(vec![g16.clone()], Layout::Gray, Encoding::Linear).unwrap();
    gray16.levels = Some(65535);

    let workloads: [(&str, &str, &Raster); 14] = [
        ("gauss-2", "gauss:2", &linear),
        ("gauss-8", "gauss:8", &linear),
        ("gauss-32", "gauss:32", &linear),
        // where method=auto switches: exact and fast side by side
        ("gauss-exact-4", "gauss:4,method=exact", &linear),
        ("gauss-fast-4", "gauss:4,method=fast", &linear),
        ("gauss-exact-6", "gauss:6,method=exact", &linear),
        ("gauss-fast-6", "gauss:6,method=fast", &linear),
        ("gauss-exact-8", "gauss:8,method=exact", &linear),
        ("gauss-fast-8", "gauss:8,method=fast", &linear),
        ("box-5", "box:5", &linear),
        ("median-5x5", "median:2", &image),
        ("median-r15-16bit", "median:15", &gray16),
        ("sobel-magnitude", "sobel:magnitude", &gray),
        ("canny-1", "canny:sigma=1,low=0.1,high=0.2", &gray_encoded),
    ];
    let mut ours: Vec<(&str, f64)> = Vec::new();
    for (name, step, input) in workloads {
        if only.wants(name) {
            let p = Pipeline::parse(&[step]).unwrap();
            ours.push((name, median_with(|| input.clone(), |r| drop(p.run(r, DomainPolicy::Auto).unwrap()))));
        }
    }
    if only.is_filtered() {
        for (name, secs) in &ours {
            println!("{name}: {:.1} Mpx/s ({:.1} ms)", mpix / secs, secs * 1000.0);
        }
        return;
    }

    let dir = common::data_dir().join("filters");
    std::fs::create_dir_all(&dir).unwrap();
    let lp: Vec<&Plane> = linear.planes().iter().collect();
    write_npy(&dir.join("rgb.npy"), "<f4", &[3, H, W], &f32_bytes(&lp));
    let rgb8: Vec<u8> =
        (0..W * H * 3).map(|i| (image.planes()[i % 3].as_slice()[i / 3] * 255.0).round() as u8).collect();
    write_npy(&dir.join("rgb8.npy"), "|u1", &[H, W, 3], &rgb8);
    write_npy(&dir.join("gray.npy"), "<f4", &[H, W], &f32_bytes(&[&gray_plane]));
    let g16_bytes: Vec<u8> =
        g16.as_slice().iter().flat_map(|v| ((v * 65535.0).round() as u16).to_le_bytes()).collect();
    write_npy(&dir.join("gray16.npy"), "<u2", &[H, W], &g16_bytes);
    let gray8: Vec<u8> = gray_plane.as_slice().iter().map(|v| (v * 255.0).round() as u8).collect();
    write_npy(&dir.join("gray8.npy"), "|u1", &[H, W], &gray8);

    let reference = common::reference_times("reference_filters.py", &[&dir]);
    print_table(mpix, &ours, &reference, &["cv2", "cv2u8", "scipy", "skimage"]);
    println!("(ratio = reference time / Pumice time: above 1 means Pumice is faster)");
}
