//! Throughput of the morphology and science operators beside reference
//! libraries (benches/reference_morph.py: scipy.ndimage, scikit-image, numpy)
//! on the same 2048×2048 16-bit gray data, as ratios.
//! `cargo bench --bench morph [-- NAME]`.

#[path = "common.rs"]
mod common;

use common::{median_with, print_table};
use pumice::pipeline::Step;
use pumice::raster::{Encoding, Layout, Plane, Raster, SampleType};

const N: usize = 2048;

/// The BT.709 luma of the shared test image at 2048×2048 as 16-bit codes, linear.
fn codes16() -> (Raster, Vec<u16>) {
    let rgb = common::test_image_sized(N, N);
    let p = rgb.planes();
    let codes: Vec<u16> = (0..N * N)
        .map(|i| {
            let y = 0.2126 * p[0].as_slice()[i] + 0.7152 * p[1].as_slice()[i] + 0.0722 * p[2].as_slice()[i];
            (y * 65535.0).round().clamp(0.0, 65535.0) as u16
        })
        .collect();
    let plane = Plane::from_vec(N, N, codes.iter().map(|&c| f32::from(c) / 65535.0).collect()).unwrap();
    let mut r = Raster::new(vec![plane], Layout::Gray, Encoding::Linear).unwrap();
    r.levels = Some(65535);
    r.metadata.source_sample = Some(SampleType::U16);
    (r, codes)
}

/// Frame files for flatfield: a flat (vignetting) and a dark (offset) as 32-bit float TIFF.
fn frames(dir: &std::path::Path) -> (std::path::PathBuf, std::path::PathBuf) {
    let write = |name: &str, f: &dyn Fn(usize, usize) -> f32| {
        let p = Plane::from_fn(N, N, f).unwrap();
        let r = Raster::new(vec![p], Layout::Gray, Encoding::Linear).unwrap();
        let mut opts = pumice::io::EncodeOptions::new(pumice::io::Format::Tiff);
        opts.encoding = Encoding::Linear;
        opts.sample = Some(SampleType::F32);
        let path = dir.join(name);
        std::fs::write(&path, pumice::io::encode(&r, &opts).unwrap()).unwrap();
        path
    };
    let c = N as f32 / 2.0;
    let flat = write("flat-2048.tif", &|x, y| {
        let r2 = ((x as f32 - c).powi(2) + (y as f32 - c).powi(2)) / (c * c);
        0.8 * (1.0 - 0.3 * r2)
    });
    let dark = write("dark-2048.tif", &|x, y| 0.01 + 0.001 * ((x * 7 + y * 13) % 11) as f32);
    (flat, dark)
}

fn main() {
    let only = common::Only::from_args();
    let mpix = (N * N) as f64 / 1e6;
    println!("Pumice morphology and science, {N}×{N} 16-bit gray, {} threads", rayon::current_num_threads());
    let (image, codes) = codes16();
    let dir = common::data_dir();
    let path = dir.join("luma-2048x2048.u16");
    std::fs::write(&path, codes.iter().flat_map(|c| c.to_le_bytes()).collect::<Vec<u8>>()).unwrap();
    let (flat, dark) = frames(&dir);
    let flatfield = format!("flatfield:flat={},dark={}", flat.display(), dark.display());
    let workloads: Vec<(&str, String)> = vec![
        ("erode-square-15", "erode:7".into()),
        ("dilate-square-15", "dilate:7".into()),
        ("open-square-15", "open:7".into()),
        ("close-square-15", "close:7".into()),
        ("tophat-square-15", "tophat:7".into()),
        ("erode-disk-7", "erode:7,shape=disk".into()),
        ("bin-2-sum", "bin:2,mode=sum".into()),
        ("hotpixel", "hotpixel".into()),
        ("flatfield", flatfield),
        ("illumination-ball-50", "illumination:radius=50".into()),
        ("illumination-ball-15-exact", "illumination:radius=15,shrink=1".into()),
        ("illumination-paper-15", "illumination:method=paper,radius=15".into()),
    ];
    let mut ours = Vec::new();
    let mut names = Vec::new();
    for (name, step) in &workloads {
        if !only.wants(name) {
            continue;
        }
        let op = Step::parse(step).unwrap().op;
        let t = median_with(|| image.clone(), |r| drop(op.apply(r).unwrap()));
        ours.push((*name, t));
        names.push(std::path::PathBuf::from(name));
    }
    let mut args: Vec<&std::path::Path> = vec![&path, &flat, &dark];
    args.extend(names.iter().map(|n| n.as_path()));
    let reference = common::reference_times("reference_morph.py", &args);
    print_table(mpix, &ours, &reference, &["scipy", "skimage", "numpy"]);
}
