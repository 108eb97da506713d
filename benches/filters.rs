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
//! bilateral σ=2, range 0.1, radius 4 (OpenCV d = 9) on the RGB image's
//! encoded f32 values (on=luma beside OpenCV's colour filter, which also shares
//! one weight across channels; on=channels beside OpenCV per plane); and, on a
//! 1000×1000 gray f32 crop with noise (its own table, NL_SIDE), nlmeans patch 7,
//! search 21, h 0.08 beside scikit-image's fast mode and OpenCV's
//! fastNlMeansDenoising (on 8-bit codes, a different algorithm: for context).

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

/// Side of the nlmeans workload.
const NL_SIDE: usize = 1000;

/// A 1000×1000 crop of the test image's green plane (encoded values) with
/// Gaussian-like noise of σ ≈ 0.05 from a fixed seed (sum of four uniforms).
fn noisy_gray(image: &Raster) -> Raster {
    let mut state = 0x2545_F491_4F6C_DD1Du64;
    let mut uniform = move || {
        state ^= state << 13;
        state ^= state >> 7;
        state ^= state << 17;
        (state >> 40) as f32 / (1u64 << 24) as f32 - 0.5
    };
    let g = &image.planes()[1];
    let p = Plane::from_fn(NL_SIDE, NL_SIDE, |x, y| {
        // four uniforms on [-1/2, 1/2): variance 4/12, so scale by 0.05 / sqrt(1/3)
        let n = (uniform() + uniform() + uniform() + uniform()) * 0.0866;
        g.get(x + 1000, y + 1000) + n
    })
    .unwrap();
    Raster::new(vec![p], Layout::Gray, Encoding::Srgb).unwrap()
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
    // bilateral works on encoded values: the sRGB test image as f32, no conversion
    let mut encoded = image.clone();
    encoded.levels = None;
    let bilateral: [(&str, &str, &Raster); 2] = [
        ("bilateral-luma", "bilateral:2,range=0.1,radius=4", &encoded),
        ("bilateral-channels", "bilateral:2,range=0.1,radius=4,on=channels", &encoded),
    ];
    let mut ours: Vec<(&str, f64)> = Vec::new();
    for (name, step, input) in workloads.into_iter().chain(bilateral) {
        if only.wants(name) {
            let p = Pipeline::parse(&[step]).unwrap();
            ours.push((name, median_with(|| input.clone(), |r| drop(p.run(r, DomainPolicy::Auto).unwrap()))));
        }
    }
    let noisy = noisy_gray(&image);
    let nl_mpix = (NL_SIDE * NL_SIDE) as f64 / 1e6;
    let mut ours_nl: Vec<(&str, f64)> = Vec::new();
    if only.wants("nlmeans") {
        let p = Pipeline::parse(&["nlmeans:0.08,patch=7,search=21"]).unwrap();
        ours_nl.push((
            "nlmeans",
            median_with(|| noisy.clone(), |r| drop(p.run(r, DomainPolicy::Auto).unwrap())),
        ));
    }
    if only.is_filtered() {
        for (name, secs) in &ours {
            println!("{name}: {:.1} Mpx/s ({:.1} ms)", mpix / secs, secs * 1000.0);
        }
        for (name, secs) in &ours_nl {
            println!("{name}: {:.2} Mpx/s ({:.1} ms, {NL_SIDE}×{NL_SIDE})", nl_mpix / secs, secs * 1000.0);
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

    let ep: Vec<&Plane> = encoded.planes().iter().collect();
    write_npy(&dir.join("rgb-encoded.npy"), "<f4", &[3, H, W], &f32_bytes(&ep));
    write_npy(&dir.join("noisy1000.npy"), "<f4", &[NL_SIDE, NL_SIDE], &f32_bytes(&[&noisy.planes()[0]]));

    let reference = common::reference_times("reference_filters.py", &[&dir]);
    print_table(mpix, &ours, &reference, &["cv2", "cv2u8", "scipy", "skimage"]);
    println!(
        "\nnlmeans on {NL_SIDE}×{NL_SIDE} gray f32 (cv2 = fastNlMeansDenoising on 8-bit codes, for context):"
    );
    print_table(nl_mpix, &ours_nl, &reference, &["skimage", "cv2"]);
    println!("(ratio = reference time / Pumice time: above 1 means Pumice is faster)");
}
