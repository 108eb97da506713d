//! Throughput of the measurements behind `pumice inspect` and `pumice diff`
//! beside scikit-image and numpy (benches/reference_measure.py) on the same
//! 4000×3000 data, as ratios. `cargo bench --bench measure [-- NAME]`.

#[path = "common.rs"]
mod common;

use std::hint::black_box;

use common::{H, REPEATS, W, median, print_table};
use pumice::measure::{channel_stats, noise_sigma, ssim};
use pumice::raster::Plane;

/// The BT.709 luma of the test image as 8-bit codes, and a copy with seeded
/// noise (±12 codes, uniform), both as exact code/255 planes.
fn luma_pair(image: &pumice::raster::Raster) -> (Vec<u8>, Vec<u8>) {
    let p = image.planes();
    let mut state = 0x2545_F491_4F6C_DD1Du64;
    let clean: Vec<u8> = (0..W * H)
        .map(|i| {
            let y = 0.2126 * p[0].as_slice()[i] + 0.7152 * p[1].as_slice()[i] + 0.0722 * p[2].as_slice()[i];
            (y * 255.0).round().clamp(0.0, 255.0) as u8
        })
        .collect();
    let noisy = clean
        .iter()
        .map(|&c| {
            state ^= state << 13;
            state ^= state >> 7;
            state ^= state << 17;
            (f32::from(c) + ((state >> 40) % 25) as f32 - 12.0).clamp(0.0, 255.0) as u8
        })
        .collect();
    (clean, noisy)
}

fn plane_of(codes: &[u8]) -> Plane {
    Plane::from_vec(W, H, codes.iter().map(|&c| f32::from(c) / 255.0).collect()).unwrap()
}

fn main() {
    let only = common::Only::from_args();
    let mpix = (W * H) as f64 / 1e6;
    println!("Pumice measurements, {W}×{H}, {} threads, median of {REPEATS}", rayon::current_num_threads());
    let image = common::test_image();
    let (clean, noisy) = luma_pair(&image);
    let dir = common::data_dir();
    let (clean_path, noisy_path, rgb_path) =
        (dir.join("luma-4000x3000.u8"), dir.join("luma-noisy-4000x3000.u8"), dir.join("rgb-4000x3000.u8"));
    std::fs::write(&clean_path, &clean).unwrap();
    std::fs::write(&noisy_path, &noisy).unwrap();
    let interleaved: Vec<u8> =
        (0..W * H * 3).map(|i| (image.planes()[i % 3].as_slice()[i / 3] * 255.0).round() as u8).collect();
    std::fs::write(&rgb_path, &interleaved).unwrap();
    let (a, b) = (plane_of(&clean), plane_of(&noisy));
    let mut ours = Vec::new();
    if only.wants("ssim-luma") {
        ours.push((
            "ssim-luma",
            median(|| {
                black_box(ssim(&a, &b));
            }),
        ));
    }
    if only.wants("stats-rgb-u8") {
        ours.push((
            "stats-rgb-u8",
            median(|| {
                for p in image.planes() {
                    drop(channel_stats(p, Some(255)));
                }
            }),
        ));
    }
    if only.wants("stats-gray-f32") {
        ours.push(("stats-gray-f32", median(|| drop(channel_stats(&b, None)))));
    }
    if only.wants("noise-gray") {
        ours.push((
            "noise-gray",
            median(|| {
                black_box(noise_sigma(&b, Some(255)));
            }),
        ));
    }
    let reference = common::reference_times("reference_measure.py", &[&clean_path, &noisy_path, &rgb_path]);
    print_table(mpix, &ours, &reference, &["skimage", "numpy"]);
}
