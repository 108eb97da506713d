//! The batch engine end to end: a folder of synthetic 3000×2000 JPEGs →
//! `resize:width=1600` + `sharpen` → JPEG quality 85, with the release binary,
//! beside `reference_batch.py` (Pillow with a process pool of 2 workers) on the
//! same files in the same run. Prints images per second and peak memory.
//!
//! `cargo bench --bench batch` (200 files; `PUMICE_BENCH_BATCH_FILES=N` for another count).

#[path = "common.rs"]
mod common;

use std::path::Path;
use std::process::Command;
use std::time::Instant;

use pumice::io::{self, EncodeOptions, Format};

fn main() {
    let files: usize =
        std::env::var("PUMICE_BENCH_BATCH_FILES").ok().and_then(|v| v.parse().ok()).unwrap_or(200);
    let dir = common::data_dir().join("batch");
    let input = dir.join("in");
    let _ = std::fs::remove_dir_all(&dir);
    std::fs::create_dir_all(&input).unwrap();
    // One synthetic photo, encoded once, copied under `files` names: the work per
    // file is the same as for distinct photos of this size.
    let mut opts = EncodeOptions::new(Format::Jpeg);
    opts.quality = 90;
    let jpeg = io::encode(&common::test_image_sized(3000, 2000), &opts).unwrap();
    for i in 0..files {
        std::fs::write(input.join(format!("photo-{i:04}.jpg")), &jpeg).unwrap();
    }
    eprintln!("{files} JPEGs of 3000×2000 ({} KiB each) in {}", jpeg.len() / 1024, input.display());

    let (ours_s, ours_peak) = run_pumice(&input, &dir.join("out-pumice"), &dir.join("report.json"));
    let reference = common::reference_times("reference_batch.py", &[&input, &dir.join("out-pillow")]);
    println!(
        "workload: {files} × 3000×2000 JPEG → resize width 1600 (lanczos3, linear light) + sharpen → JPEG q85"
    );
    println!("{:<28} {:>10} {:>14}", "", "images/s", "peak memory");
    println!(
        "{:<28} {:>10.2} {:>10.0} MiB",
        "pumice run (-j 2)",
        files as f64 / ours_s,
        ours_peak / 1048576.0
    );
    if let (Some(t), Some(peak)) = (reference.get("pillow.batch"), reference.get("pillow.batch_peak_mib")) {
        println!("{:<28} {:>10.2} {:>10.0} MiB", "Pillow, pool of 2", files as f64 / t, peak);
        println!(
            "ratio (Pillow time / ours): {:.2}×; memory ours / Pillow's: {:.2}",
            t / ours_s,
            ours_peak / 1048576.0 / peak
        );
    } else {
        println!("Pillow reference not run (see stderr)");
    }
}

/// Runs the release binary over `input`; returns wall seconds and the peak
/// resident memory the run's report gives.
fn run_pumice(input: &Path, output: &Path, report: &Path) -> (f64, f64) {
    let start = Instant::now();
    let status = Command::new(env!("CARGO_BIN_EXE_pumice"))
        .arg("run")
        .arg(input)
        .arg("-o")
        .arg(output)
        .args([
            "-s",
            "resize:width=1600",
            "-s",
            "sharpen:amount=1,sigma=1",
            "--quality",
            "85",
            "-j",
            "2",
            "-q",
        ])
        .arg("--report")
        .arg(report)
        .status()
        .expect("run pumice");
    let seconds = start.elapsed().as_secs_f64();
    assert!(status.success(), "pumice run failed");
    let text = std::fs::read_to_string(report).unwrap();
    let peak = text
        .lines()
        .find_map(|l| l.trim().strip_prefix("\"peak_memory_bytes\": "))
        .and_then(|v| v.trim_end_matches(',').parse::<f64>().ok())
        .unwrap_or(f64::NAN);
    (seconds, peak)
}
