//! Shared parts of the benchmarks: the test image, timing, the call to a
//! reference script, and the result table. Each bench includes this file with
//! `#[path = "common.rs"] mod common;`.

#![allow(dead_code)]

use std::collections::BTreeMap;
use std::path::{Path, PathBuf};
use std::process::Command;
use std::time::Instant;

use pumice::raster::{Encoding, Layout, Plane, Raster, SampleType};

pub const W: usize = 4000;
pub const H: usize = 3000;
pub const REPEATS: usize = 5;

/// A photo-like 8-bit RGB test image of `w × h`: smooth gradients, fine texture
/// and noise from a fixed seed, so codecs and filters do representative work.
pub fn test_image_sized(w: usize, h: usize) -> Raster {
    let mut state = 0x9E37_79B9_7F4A_7C15u64;
    let mut noise = move || {
        state ^= state << 13;
        state ^= state >> 7;
        state ^= state << 17;
        (state >> 40) as f32 / (1u64 << 24) as f32 - 0.5
    };
    let planes = (0..3)
        .map(|c| {
            Plane::from_fn(w, h, |x, y| {
                let (u, v) = (x as f32 / w as f32, y as f32 / h as f32);
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

/// The 4000×3000 test image.
pub fn test_image() -> Raster {
    test_image_sized(W, H)
}

/// The raster converted to linear light (as the pipeline would before a linear step).
pub fn to_linear(r: &Raster) -> Raster {
    let mut r = r.clone();
    let levels = r.levels;
    for p in r.planes_mut() {
        pumice::color::srgb::decode_in_place(p.as_mut_slice(), levels);
    }
    r.encoding = Encoding::Linear;
    r.levels = None;
    r
}

/// The median of `REPEATS` timings of `f`, in seconds.
pub fn median(mut f: impl FnMut()) -> f64 {
    median_with(|| (), |()| f())
}

/// The median of `REPEATS` timings of `f(setup())`, timing `f` only.
pub fn median_with<T>(mut setup: impl FnMut() -> T, mut f: impl FnMut(T)) -> f64 {
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

/// Workload filter from the command line: `cargo bench --bench NAME -- gauss`
/// keeps workloads whose name contains `gauss`.
pub struct Only(Vec<String>);

impl Only {
    pub fn from_args() -> Only {
        Only(std::env::args().skip(1).filter(|a| !a.starts_with("--")).collect())
    }

    pub fn wants(&self, name: &str) -> bool {
        self.0.is_empty() || self.0.iter().any(|o| name.contains(o.as_str()))
    }

    pub fn is_filtered(&self) -> bool {
        !self.0.is_empty()
    }
}

/// Folder for files the benchmarks write for the reference scripts.
pub fn data_dir() -> PathBuf {
    let d = PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("target/bench-data");
    std::fs::create_dir_all(&d).unwrap();
    d
}

/// Runs `benches/SCRIPT` with `args` and returns its `{"lib.workload": seconds}`.
/// The interpreter is `PUMICE_BENCH_PYTHON`, else `.venv/bin/python` if present,
/// else `python3`; a missing interpreter or package leaves the map empty.
pub fn reference_times(script: &str, args: &[&Path]) -> BTreeMap<String, f64> {
    let root = PathBuf::from(env!("CARGO_MANIFEST_DIR"));
    let python = std::env::var("PUMICE_BENCH_PYTHON").unwrap_or_else(|_| {
        let venv = root.join(".venv/bin/python");
        if venv.exists() { venv.display().to_string() } else { "python3".into() }
    });
    let out = Command::new(&python).arg(root.join("benches").join(script)).args(args).output();
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

/// Parses `{"name": seconds, …}` as the reference scripts print it.
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

/// Prints one row per workload (and per reference library that timed it):
/// Pumice's Mpx/s, the reference's Mpx/s, and the ratio reference time / ours.
/// `mpix` is the megapixels each workload counts; reference keys are `LIB.NAME`,
/// where a trailing `-VARIANT` of ours (e.g. `-444`) is ignored.
pub fn print_table(mpix: f64, ours: &[(&str, f64)], reference: &BTreeMap<String, f64>, libs: &[&str]) {
    println!();
    println!("{:<24} {:>12} {:>26} {:>8}", "workload", "Pumice Mpx/s", "reference Mpx/s", "ratio");
    for (name, secs) in ours {
        let key = name.trim_end_matches("-444");
        let mut refs: Vec<(&str, f64)> = libs
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
                "{label:<24} {ours_cell:>12} {:>26} {:>8}",
                format!("{lib} {:.1}", mpix / t),
                if t.is_nan() { "-".into() } else { format!("{:.2}×", t / secs) }
            );
        }
    }
}
