//! Throughput of the scan operators on an A4 page at 300 dpi (2480×3508, 8-bit
//! gray, an invented page of text-like blocks turned by 1.7°), beside
//! scipy.ndimage and scikit-image (benches/reference_scan.py) on the same
//! bytes, as ratios, and the turn deskew makes beside OpenCV's warpAffine.
//! Deskew has no reference; its time is printed in ms.
//! `cargo bench --bench scan [-- NAME]`.

#[path = "common.rs"]
mod common;

use common::{REPEATS, median, median_with, print_table};
use pumice::ops::scan::label::label;
use pumice::pipeline::Step;
use pumice::raster::{Encoding, Layout, Plane, Raster};

const PAGE_W: usize = 2480;
const PAGE_H: usize = 3508;

/// The page's 8-bit codes: paper 235 with a slow shading, rows of ink blocks
/// (code 30) and ruled lines, turned clockwise by 1.7°, with a few specks.
fn page_codes() -> Vec<u8> {
    let (s, c) = 1.7f64.to_radians().sin_cos();
    let (cx, cy) = (PAGE_W as f64 / 2.0, PAGE_H as f64 / 2.0);
    let mut state = 0x2545_F491_4F6C_DD1Du64;
    let mut codes = vec![0u8; PAGE_W * PAGE_H];
    for (i, code) in codes.iter_mut().enumerate() {
        let (x, y) = ((i % PAGE_W) as f64 + 0.5, (i / PAGE_W) as f64 + 0.5);
        let (dx, dy) = (x - cx, y - cy);
        let (u, v) = (c * dx + s * dy + cx, -s * dx + c * dy + cy);
        let line = ((v - 250.0) / 60.0).floor();
        let in_row = (v - 250.0).rem_euclid(60.0) < 28.0 && line >= 0.0 && v < PAGE_H as f64 - 300.0;
        let word = ((u - 200.0) / 130.0).floor();
        let in_word = (u - 200.0).rem_euclid(130.0) < 110.0 - (line * 37.0 + word * 11.0).rem_euclid(60.0)
            && u > 200.0
            && u < PAGE_W as f64 - 200.0;
        let rule = ((v - 180.0).abs() < 3.0 || (v - (PAGE_H as f64 - 220.0)).abs() < 3.0)
            && u > 150.0
            && u < PAGE_W as f64 - 150.0;
        state ^= state << 13;
        state ^= state >> 7;
        state ^= state << 17;
        let speck = state.is_multiple_of(20_000);
        *code =
            if (in_row && in_word) || rule || speck { 30 } else { 235 - (y / PAGE_H as f64 * 12.0) as u8 };
    }
    codes
}

fn gray_raster(codes: &[u8]) -> Raster {
    let p = Plane::from_vec(PAGE_W, PAGE_H, codes.iter().map(|&c| f32::from(c) / 255.0).collect()).unwrap();
    let mut r = Raster::new(vec![p], Layout::Gray, Encoding::Srgb).unwrap();
    r.levels = Some(255);
    r
}

fn main() {
    let only = common::Only::from_args();
    let mpix = (PAGE_W * PAGE_H) as f64 / 1e6;
    println!(
        "Pumice scan operators, {PAGE_W}×{PAGE_H} 8-bit page, {} threads, median of {REPEATS}",
        rayon::current_num_threads()
    );
    let codes = page_codes();
    let page = gray_raster(&codes);
    // The binarised page: ink = 1 (codes below the midpoint), as binarize:fixed,foreground=dark makes it.
    let ink: Vec<u8> = codes.iter().map(|&c| u8::from(c < 128)).collect();
    let mask: Vec<bool> = ink.iter().map(|&m| m == 1).collect();
    let mut binary = gray_raster(&ink.iter().map(|&m| m * 255).collect::<Vec<_>>());
    binary.levels = Some(255);
    let page_path = common::data_dir().join("page-2480x3508.u8");
    let ink_path = common::data_dir().join("ink-2480x3508.u8");
    std::fs::write(&page_path, &codes).unwrap();
    std::fs::write(&ink_path, &ink).unwrap();

    let found = pumice::ops::scan::measure_skew(&page.planes()[0], 10.0).unwrap();
    println!(
        "deskew finds {:?} on the page turned by 1.7° (confidence {:.2})",
        found.degrees, found.confidence
    );
    let mut ours = Vec::new();
    for (name, step) in [
        ("deskew-measure", "deskew:apply=false"),
        ("deskew", "deskew"),
        ("deskew-bilinear", "deskew:filter=bilinear"),
    ] {
        if only.wants(name) {
            let op = Step::parse(step).unwrap().op;
            let t = median_with(|| page.clone(), |r| drop(op.apply(r).unwrap()));
            println!("{name:<24} {:>8.1} ms", t * 1e3);
            ours.push((name, t));
        }
    }
    // The turn alone, as deskew makes it: −1.7° on the page in linear light, size kept, paper fill.
    let linear = common::to_linear(&page);
    for (name, step) in [
        ("rotate-bicubic", "rotate:angle=-1.7,filter=bicubic,expand=false,fill=white"),
        ("rotate-bilinear", "rotate:angle=-1.7,filter=bilinear,expand=false,fill=white"),
    ] {
        if only.wants(name) {
            let op = Step::parse(step).unwrap().op;
            ours.push((name, median_with(|| linear.clone(), |r| drop(op.apply(r).unwrap()))));
        }
    }
    if only.wants("label") {
        ours.push(("label", median(|| drop(label(&mask, PAGE_W, PAGE_H).unwrap()))));
    }
    for (name, step, input) in
        [("dust-binary", "dust:12,polarity=light", &binary), ("dust-gray", "dust:12", &page)]
    {
        if only.wants(name) {
            let op = Step::parse(step).unwrap().op;
            ours.push((name, median_with(|| input.clone(), |r| drop(op.apply(r).unwrap()))));
        }
    }
    let reference = common::reference_times("reference_scan.py", &[&page_path, &ink_path]);
    print_table(mpix, &ours, &reference, &["cv2", "scipy", "skimage"]);
}
