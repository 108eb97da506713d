//! `pumice stack` on 16-bit micrograph-like frames of 2048×2048 (50 by
//! default; `PUMICE_BENCH_STACK_FRAMES=N` for another count), beside
//! `reference_stack.py` (numpy.median / numpy.mean along axis 0 on the whole
//! stack preloaded in memory as uint16) in the same run.
//!
//! Workloads:
//! - `median-preloaded`, `mean-preloaded`, `sigma-clip-preloaded`: the library's
//!   `Stacker` fed frames already decoded in memory (for median and sigma-clip
//!   this includes spilling them to the temporary file and reading it back
//!   band by band) — the like-for-like comparison with numpy on a preloaded stack.
//! - `median-files`: the release binary end to end, decoding the TIFF files,
//!   once; its peak resident memory (VmHWM) is printed beside numpy's.
//!
//! `cargo bench --bench stack [-- median]`

#[path = "common.rs"]
mod common;

use std::io::Write;
use std::path::Path;
use std::process::Command;
use std::time::Instant;

use pumice::io::{self, EncodeOptions, Format};
use pumice::raster::{Encoding, Layout, Plane, Raster, SampleType};
use pumice::stack::{Mode, StackOptions, Stacker};

const SIDE: usize = 2048;

/// Frame `k`: a smooth pattern with seeded noise and a few saturated hot pixels, 16-bit codes.
fn frame(k: usize) -> Raster {
    let mut state = 0x9E37_79B9_7F4A_7C15u64 ^ (k as u64).wrapping_mul(0xA24B_AED4_963E_E407);
    let mut noise = move || {
        state ^= state << 13;
        state ^= state >> 7;
        state ^= state << 17;
        (state >> 40) as f32 / (1u64 << 24) as f32 - 0.5
    };
    let plane = Plane::from_fn(SIDE, SIDE, |x, y| {
        let (u, v) = (x as f32 / SIDE as f32, y as f32 / SIDE as f32);
        let base = 0.3 + 0.1 * ((u * 9.0).sin() * (v * 7.0).cos());
        let n = noise();
        let value = if n > 0.4999 { 1.0 } else { base + 0.02 * n };
        (value.clamp(0.0, 1.0) * 65535.0).round() / 65535.0
    })
    .unwrap();
    let mut r = Raster::new(vec![plane], Layout::Gray, Encoding::Linear).unwrap();
    r.metadata.source_sample = Some(SampleType::U16);
    r
}

fn main() {
    let only = common::Only::from_args();
    let frames: usize =
        std::env::var("PUMICE_BENCH_STACK_FRAMES").ok().and_then(|v| v.parse().ok()).unwrap_or(50);
    let dir = common::data_dir().join("stack");
    let _ = std::fs::remove_dir_all(&dir);
    std::fs::create_dir_all(dir.join("frames")).unwrap();
    let mut opts = EncodeOptions::new(Format::Tiff);
    opts.sample = Some(SampleType::U16);
    opts.encoding = Encoding::Linear;
    let raw_path = dir.join("stack.u16");
    let mut raw = std::io::BufWriter::new(std::fs::File::create(&raw_path).unwrap());
    let mut loaded = Vec::with_capacity(frames);
    for k in 0..frames {
        let f = frame(k);
        std::fs::write(dir.join(format!("frames/f{k:03}.tif")), io::encode(&f, &opts).unwrap()).unwrap();
        for v in f.planes()[0].as_slice() {
            raw.write_all(&((v * 65535.0).round() as u16).to_le_bytes()).unwrap();
        }
        loaded.push(f);
    }
    raw.flush().unwrap();
    drop(raw);
    eprintln!("{frames} frames of {SIDE}×{SIDE} 16-bit in {}", dir.display());

    let mpix = (frames * SIDE * SIDE) as f64 / 1e6;
    let mut ours = Vec::new();
    for (name, mode) in [
        ("median-preloaded", Mode::Median),
        ("mean-preloaded", Mode::Mean),
        ("sigma-clip-preloaded", Mode::SigmaClip { kappa: 3.0, iterations: 5 }),
    ] {
        if !only.wants(name) {
            continue;
        }
        let mut o = StackOptions::new(mode);
        o.spill_dir = Some(dir.clone());
        let t = common::median(|| {
            let mut s = Stacker::new(&o);
            for (k, f) in loaded.iter().enumerate() {
                s.add(&format!("frame {k}"), f).unwrap();
            }
            std::hint::black_box(s.finish().unwrap());
        });
        ours.push((name, t));
    }
    drop(loaded);
    let (files_s, files_peak) =
        if only.wants("median-files") { run_pumice(&dir) } else { (f64::NAN, f64::NAN) };
    if files_s.is_finite() {
        ours.push(("median-files", files_s));
    }
    let side = SIDE.to_string();
    let n = frames.to_string();
    let reference =
        common::reference_times("reference_stack.py", &[&raw_path, Path::new(&n), Path::new(&side)]);
    println!("workload: {frames} frames × {SIDE}×{SIDE} 16-bit; Mpx/s counts frame pixels ({mpix:.0} Mpx)");
    common::print_table(mpix, &ours, &reference, &["numpy"]);
    if let Some(t) = reference.get("numpy.median-preloaded") {
        println!("median from files (decode included) vs numpy on the preloaded stack: {:.2}×", t / files_s);
    }
    println!(
        "peak memory: pumice stack --mode median from files {:.0} MiB; numpy (stack + median) {} MiB",
        files_peak,
        reference.get("numpy.peak_mib").map_or("-".into(), |m| format!("{m:.0}"))
    );
    let _ = std::fs::remove_file(&raw_path);
}

/// Runs the release binary on the frame files once; returns wall seconds and
/// the peak resident memory it reports (VmHWM).
fn run_pumice(dir: &Path) -> (f64, f64) {
    let mut inputs: Vec<_> =
        std::fs::read_dir(dir.join("frames")).unwrap().map(|e| e.unwrap().path()).collect();
    inputs.sort();
    let start = Instant::now();
    let out = Command::new(env!("CARGO_BIN_EXE_pumice"))
        .arg("stack")
        .args(&inputs)
        .arg("-o")
        .arg(dir.join("median.tif"))
        .args(["--mode", "median", "--overwrite", "-v", "--temp-dir"])
        .arg(dir)
        .output()
        .expect("run pumice");
    let seconds = start.elapsed().as_secs_f64();
    let stderr = String::from_utf8_lossy(&out.stderr);
    assert!(out.status.success(), "pumice stack failed: {stderr}");
    let peak = stderr
        .split("peak memory ")
        .nth(1)
        .and_then(|s| s.split_whitespace().next())
        .and_then(|v| v.parse::<f64>().ok())
        .unwrap_or(f64::NAN);
    (seconds, peak)
}
