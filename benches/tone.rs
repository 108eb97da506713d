//! Throughput of the tone and threshold operators beside reference libraries
//! (benches/reference_tone.py: OpenCV with 2 threads, scikit-image, numpy) on
//! the same 4000×3000 data, as ratios. `cargo bench --bench tone [-- NAME]`.

#[path = "common.rs"]
mod common;

use common::{H, REPEATS, W, median_with, print_table};
use pumice::pipeline::Step;
use pumice::raster::{Encoding, Layout, Plane, Raster};
use rayon::prelude::*;

/// The BT.709 luma of the test image as exact 8-bit codes (an 8-bit gray source).
fn luma_codes(image: &Raster) -> (Raster, Vec<u8>) {
    let p = image.planes();
    let codes: Vec<u8> = (0..W * H)
        .map(|i| {
            let y = 0.2126 * p[0].as_slice()[i] + 0.7152 * p[1].as_slice()[i] + 0.0722 * p[2].as_slice()[i];
            (y * 255.0).round().clamp(0.0, 255.0) as u8
        })
        .collect();
    let plane = Plane::from_vec(W, H, codes.iter().map(|&c| f32::from(c) / 255.0).collect()).unwrap();
    let mut r = Raster::new(vec![plane], Layout::Gray, Encoding::Srgb).unwrap();
    r.levels = Some(255);
    (r, codes)
}

/// Histogram equalisation done on the 8-bit codes themselves (u8 in, u8 out),
/// as a library holding bytes would: interleaved per-chunk histograms, then one
/// table lookup. Not the operator: it measures what the f32 planes cost
/// (the operator reads and writes 4 bytes per sample and converts each to its
/// code twice), beside OpenCV on the same bytes.
fn equalize_codes(codes: &mut [u8]) {
    const CHUNK: usize = 1 << 18;
    let hist = codes
        .par_chunks(CHUNK)
        .map(|c| {
            let mut lanes = [[0u32; 256]; 4];
            let mut quads = c.chunks_exact(4);
            for q in &mut quads {
                for (lane, &v) in q.iter().enumerate() {
                    lanes[lane][usize::from(v)] += 1;
                }
            }
            quads.remainder().iter().for_each(|&v| lanes[0][usize::from(v)] += 1);
            let mut h = [0u64; 256];
            for (i, t) in h.iter_mut().enumerate() {
                *t = lanes.iter().map(|l| u64::from(l[i])).sum();
            }
            h
        })
        .reduce(
            || [0u64; 256],
            |mut a, b| {
                a.iter_mut().zip(&b).for_each(|(x, y)| *x += y);
                a
            },
        );
    let total = hist.iter().sum::<u64>() as f64;
    let mut run = 0u64;
    let lut: Vec<u8> = hist
        .iter()
        .map(|&c| {
            run += c;
            (run as f64 / total * 255.0).round() as u8
        })
        .collect();
    codes.par_chunks_mut(CHUNK).for_each(|c| c.iter_mut().for_each(|v| *v = lut[usize::from(*v)]));
}

fn main() {
    let only = common::Only::from_args();
    let mpix = (W * H) as f64 / 1e6;
    println!("Pumice tone operators, {W}×{H}, {} threads, median of {REPEATS}", rayon::current_num_threads());
    let image = common::test_image();
    let (gray, codes) = luma_codes(&image);
    let gray_path = common::data_dir().join("luma-4000x3000.u8");
    std::fs::write(&gray_path, &codes).unwrap();
    let rgb_path = common::data_dir().join("rgb-4000x3000.u8");
    let interleaved: Vec<u8> =
        (0..W * H * 3).map(|i| (image.planes()[i % 3].as_slice()[i / 3] * 255.0).round() as u8).collect();
    std::fs::write(&rgb_path, &interleaved).unwrap();
    let workloads: [(&str, &str, &Raster); 6] = [
        ("equalize", "equalize", &gray),
        ("clahe-8x8", "clahe:tiles=8", &gray),
        ("space-lab", "space:lab", &image),
        ("stretch", "stretch", &gray),
        ("binarize-otsu", "binarize:otsu", &gray),
        ("binarize-sauvola-25", "binarize:sauvola,window=25", &gray),
    ];
    let mut ours = Vec::new();
    for (name, step, input) in workloads {
        if !only.wants(name) {
            continue;
        }
        let op = Step::parse(step).unwrap().op;
        let t = median_with(|| input.clone(), |r| drop(op.apply(r).unwrap()));
        ours.push((name, t));
    }
    if only.wants("equalize-u8-codes") {
        let t = median_with(|| codes.clone(), |mut c| equalize_codes(&mut c));
        ours.push(("equalize-u8-codes", t));
    }
    let reference = common::reference_times("reference_tone.py", &[&gray_path, &rgb_path]);
    print_table(mpix, &ours, &reference, &["cv2", "skimage", "colour", "numpy"]);
}
