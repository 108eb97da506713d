//! Batch runs with the real binary: folders of good and bad files, reports,
//! shards, templates and collisions, existing outputs, and interruption.

use std::collections::BTreeSet;
use std::fs;
use std::path::{Path, PathBuf};
use std::process::{Command, Stdio};
use std::time::{Duration, Instant};

use serde_json::Value;

use crate::harness::{Scratch, pumice};

/// An 8-bit gray PNG of `w × h` whose samples depend on `seed`.
fn png_bytes(w: u32, h: u32, seed: u32) -> Vec<u8> {
    let mut bytes = Vec::new();
    {
        let mut enc = png::Encoder::new(&mut bytes, w, h);
        enc.set_color(png::ColorType::Grayscale);
        enc.set_depth(png::BitDepth::Eight);
        let mut wr = enc.write_header().unwrap();
        let data: Vec<u8> = (0..w * h).map(|i| ((i * 31 + seed * 17) % 251) as u8).collect();
        wr.write_image_data(&data).unwrap();
    }
    bytes
}

fn write(path: &Path, bytes: &[u8]) {
    fs::create_dir_all(path.parent().unwrap()).unwrap();
    fs::write(path, bytes).unwrap();
}

fn args(list: &[&dyn AsRef<std::ffi::OsStr>]) -> Vec<std::ffi::OsString> {
    list.iter().map(|a| a.as_ref().to_os_string()).collect()
}

fn read_json(path: &Path) -> Value {
    serde_json::from_str(&fs::read_to_string(path).unwrap()).unwrap()
}

/// Every file below `dir`, relative, sorted.
fn tree(dir: &Path) -> BTreeSet<String> {
    fn walk(root: &Path, d: &Path, out: &mut BTreeSet<String>) {
        for e in fs::read_dir(d).unwrap() {
            let p = e.unwrap().path();
            if p.is_dir() {
                walk(root, &p, out);
            } else {
                out.insert(p.strip_prefix(root).unwrap().to_string_lossy().into_owned());
            }
        }
    }
    let mut out = BTreeSet::new();
    if dir.exists() {
        walk(dir, dir, &mut out);
    }
    out
}

/// A folder tree of 300 good PNGs in three sub-folders plus bad files of every kind.
fn mixed_folder(s: &Scratch) -> (PathBuf, BTreeSet<String>, BTreeSet<String>) {
    let root = s.path("in");
    let mut good = BTreeSet::new();
    for i in 0..300u32 {
        let rel = format!("day{}/cell-{i:03}.png", i % 3);
        write(&root.join(&rel), &png_bytes(6, 5, i));
        good.insert(rel);
    }
    let whole = png_bytes(16, 16, 1);
    let mut bad = BTreeSet::new();
    for (rel, bytes) in [
        ("day0/zero.png", Vec::new()),
        ("day1/truncated.png", whole[..whole.len() / 2].to_vec()),
        ("day2/corrupt.tif", b"II*\0garbage that is not a TIFF directory".to_vec()),
        ("day2/text-named.jpg", b"just some words".to_vec()),
    ] {
        write(&root.join(rel), &bytes);
        bad.insert(rel.to_string());
    }
    write(&root.join("day0/readme.txt"), b"notes, not an image");
    write(&root.join("day1/.hidden.png"), &whole);
    (root, good, bad)
}

#[test]
fn a_folder_tree_with_bad_files_writes_every_good_one_and_reports_every_bad_one() {
    let s = Scratch::new();
    let (root, good, bad) = mixed_folder(&s);
    let out = s.path("out");
    let report = s.path("report.json");
    let run = pumice(&args(&[&"run", &root, &"-R", &"-o", &out, &"-s", &"invert", &"--report", &report]));
    let run = run.expect_code(1).stderr_has(&["300 done", "4 failed", "1 unsupported"]);
    for b in &bad {
        assert!(run.stderr().contains(b.as_str()), "{b} not reported");
    }
    assert_eq!(tree(&out), good, "exactly the good files are written, in mirrored folders");
    let r = read_json(&report);
    assert_eq!(r["summary"]["done"], 300);
    assert_eq!(r["summary"]["failed"], 4);
    assert_eq!(r["summary"]["unsupported"], 1);
    let files = r["files"].as_array().unwrap();
    assert_eq!(files.len(), 304);
    for f in files {
        let input = f["input"].as_str().unwrap();
        if f["status"] == "done" {
            assert_eq!(f["input_image"]["width"], 6);
            assert_eq!(f["output_image"]["depth"], "8-bit");
            assert_eq!(f["input_sha256"].as_str().unwrap().len(), 64);
        } else {
            assert_eq!(f["status"], "failed", "{input}");
            assert!(!f["error"].as_str().unwrap().is_empty());
        }
    }
    assert_eq!(r["run"]["steps"][0], "invert");
    assert_eq!(r["run"]["options"]["depth"], "source");
    assert!(r["run"]["started"].as_str().unwrap().ends_with('Z'));
    // Inputs sorted by path, a stable order.
    let inputs: Vec<&str> = files.iter().map(|f| f["input"].as_str().unwrap()).collect();
    let mut sorted = inputs.clone();
    sorted.sort();
    assert_eq!(inputs, sorted);
}

#[test]
fn shards_together_cover_every_input_exactly_once() {
    let s = Scratch::new();
    let root = s.path("in");
    for i in 0..60u32 {
        write(&root.join(format!("f{i:02}.png")), &png_bytes(3, 3, i));
    }
    for n in [1u32, 3, 7] {
        let mut seen = Vec::new();
        for k in 1..=n {
            let out = s.path(&format!("out-{n}"));
            let report = s.path(&format!("r-{n}-{k}.json"));
            let shard = format!("{k}/{n}");
            pumice(&args(&[&"run", &root, &"-o", &out, &"--shard", &shard, &"--report", &report, &"-q"]))
                .ok();
            let r = read_json(&report);
            assert_eq!(r["run"]["shard"]["count"], n);
            for f in r["files"].as_array().unwrap() {
                seen.push(f["input"].as_str().unwrap().to_string());
            }
        }
        seen.sort();
        let before = seen.len();
        seen.dedup();
        assert_eq!((before, seen.len()), (60, 60), "n = {n}");
        assert_eq!(tree(&s.path(&format!("out-{n}"))).len(), 60);
    }
}

#[test]
fn the_shard_comes_from_a_cluster_array_environment() {
    let s = Scratch::new();
    let root = s.path("in");
    for i in 0..20u32 {
        write(&root.join(format!("f{i:02}.png")), &png_bytes(3, 3, i));
    }
    let mut total = 0;
    for index in 0..4 {
        let report = s.path(&format!("k{index}.json"));
        let out = s.path("out");
        let status = Command::new(env!("CARGO_BIN_EXE_pumice"))
            .args(args(&[&"run", &root, &"-o", &out, &"--report", &report, &"-q"]))
            .env("JOB_COMPLETION_INDEX", index.to_string())
            .env("PUMICE_SHARD_COUNT", "4")
            .status()
            .unwrap();
        assert!(status.success());
        let r = read_json(&report);
        assert_eq!(r["run"]["shard"]["index"], index + 1);
        total += r["files"].as_array().unwrap().len();
    }
    assert_eq!(total, 20);
}

#[test]
fn templates_collisions_and_dry_runs() {
    let s = Scratch::new();
    write(&s.path("in/a/scan.png"), &png_bytes(4, 4, 1));
    write(&s.path("in/b/scan.png"), &png_bytes(4, 4, 2));
    let input = s.path("in");
    // Both map to out/scan.tif: refused before anything runs.
    let flat = s.path("out/{stem}.tif");
    pumice(&args(&[&"run", &input, &"-R", &"-o", &flat]))
        .expect_code(2)
        .stderr_has(&["would both be written to", "{dir}"]);
    assert!(!s.path("out").exists());
    let template = s.path("out/{parent}-{stem}-{n:03}.{ext}");
    let dry = pumice(&args(&[&"run", &input, &"-R", &"-o", &template, &"--dry-run"])).ok();
    assert!(dry.stdout().contains("out/a-scan-001.png"), "{}", dry.stdout());
    assert!(dry.stdout().contains("out/b-scan-002.png"));
    assert!(!s.path("out").exists(), "a dry run writes nothing");
    pumice(&args(&[&"run", &input, &"-R", &"-o", &template, &"-q"])).ok();
    assert_eq!(tree(&s.path("out")), BTreeSet::from(["a-scan-001.png".into(), "b-scan-002.png".into()]));
    let unknown = s.path("o/{size}.png");
    pumice(&args(&[&"run", &input, &"-R", &"-o", &unknown]))
        .expect_code(2)
        .stderr_has(&["unknown field `{size}`"]);
    // One file cannot take several inputs.
    let one = s.path("one.png");
    pumice(&args(&[&"run", &input, &"-R", &"-o", &one])).expect_code(2).stderr_has(&["name template"]);
}

#[test]
fn existing_outputs_are_refused_skipped_or_updated() {
    let s = Scratch::new();
    let input = s.path("in");
    for i in 0..3u32 {
        write(&input.join(format!("f{i}.png")), &png_bytes(4, 4, i));
    }
    let out = s.path("out");
    pumice(&args(&[&"run", &input, &"-o", &out, &"-q"])).ok();
    let before = fs::read(out.join("f1.png")).unwrap();
    pumice(&args(&[&"run", &input, &"-o", &out, &"-s", &"invert"]))
        .expect_code(2)
        .stderr_has(&["already exists", "--overwrite"]);
    assert_eq!(fs::read(out.join("f1.png")).unwrap(), before, "nothing was touched");
    let report = s.path("r.json");
    pumice(&args(&[&"run", &input, &"-o", &out, &"-s", &"invert", &"--skip-existing", &"--report", &report]))
        .ok();
    assert_eq!(read_json(&report)["summary"]["skipped"], 3);
    assert_eq!(fs::read(out.join("f1.png")).unwrap(), before);
    // --update redoes only the input that changed after its output.
    std::thread::sleep(Duration::from_millis(20));
    write(&input.join("f1.png"), &png_bytes(4, 4, 9));
    pumice(&args(&[&"run", &input, &"-o", &out, &"--update", &"--report", &report])).ok();
    let r = read_json(&report);
    assert_eq!((r["summary"]["done"].as_u64(), r["summary"]["skipped"].as_u64()), (Some(1), Some(2)));
    assert_ne!(fs::read(out.join("f1.png")).unwrap(), before);
    pumice(&args(&[&"run", &input, &"-o", &out, &"-s", &"invert", &"--overwrite", &"-q"])).ok();
    // The earlier outputs inside the input folder are not taken as inputs.
    let nested = input.join("done");
    pumice(&args(&[&"run", &input, &"-R", &"-o", &nested, &"-q"])).ok();
    let report2 = s.path("r2.json");
    pumice(&args(&[&"run", &input, &"-R", &"-o", &nested, &"--update", &"--report", &report2])).ok();
    assert_eq!(read_json(&report2)["summary"]["planned"], 3);
}

#[test]
fn sidecars_record_the_processing() {
    let s = Scratch::new();
    write(&s.path("in/x.png"), &png_bytes(5, 5, 3));
    let out = s.path("out");
    pumice(&args(&[&"run", &s.path("in"), &"-o", &out, &"-s", &"gauss:1", &"--sidecar", &"-q"])).ok();
    let rec = read_json(&out.join("x.png.record.json"));
    assert_eq!(rec["run"]["tool"], "pumice");
    assert!(rec["run"]["steps"][0].as_str().unwrap().starts_with("gauss:sigma=1"));
    assert_eq!(
        rec["input_sha256"].as_str().unwrap(),
        pumice::job::sha256_hex(&fs::read(s.path("in/x.png")).unwrap())
    );
    assert_eq!(
        rec["output_sha256"].as_str().unwrap(),
        pumice::job::sha256_hex(&fs::read(out.join("x.png")).unwrap())
    );
}

/// A batch slow enough to interrupt: 120 images of 256×256 blurred with σ = 6, one at a time.
fn slow_batch(s: &Scratch) -> (PathBuf, PathBuf, Vec<std::ffi::OsString>) {
    let input = s.path("in");
    for i in 0..120u32 {
        write(&input.join(format!("f{i:03}.png")), &png_bytes(256, 256, i));
    }
    let out = s.path("out");
    let a = args(&[&"run", &input, &"-o", &out, &"-s", &"gauss:6", &"-j", &"1", &"-q"]);
    (input, out, a)
}

/// Every file in `out` is a complete image and there are no temporaries.
fn assert_only_complete_outputs(out: &Path) -> BTreeSet<String> {
    let names = tree(out);
    for n in &names {
        assert!(n.ends_with(".png") && !n.starts_with('.'), "stray file {n}");
        let bytes = fs::read(out.join(n)).unwrap();
        pumice::io::decode(&bytes, &Default::default()).unwrap_or_else(|e| panic!("{n} is partial: {e}"));
    }
    names
}

fn wait_for_outputs(out: &Path, at_least: usize) {
    let start = Instant::now();
    while tree(out).len() < at_least {
        assert!(start.elapsed() < Duration::from_secs(60), "the batch made no progress");
        std::thread::sleep(Duration::from_millis(5));
    }
}

#[test]
fn a_killed_batch_leaves_no_partial_files_and_update_finishes_it() {
    let s = Scratch::new();
    let (_, out, a) = slow_batch(&s);
    let mut child =
        Command::new(env!("CARGO_BIN_EXE_pumice")).args(&a).stderr(Stdio::null()).spawn().unwrap();
    wait_for_outputs(&out, 3);
    child.kill().unwrap(); // SIGKILL
    child.wait().unwrap();
    let first = assert_only_complete_outputs(&out);
    assert!(first.len() < 120, "the batch finished before it was killed; make it slower");
    let kept: Vec<(String, Vec<u8>)> =
        first.iter().map(|n| (n.clone(), fs::read(out.join(n)).unwrap())).collect();
    let report = s.path("r.json");
    let mut again = a.clone();
    again.extend(args(&[&"--update", &"--report", &report]));
    pumice(&again).ok();
    let r = read_json(&report);
    assert_eq!(r["summary"]["skipped"].as_u64(), Some(first.len() as u64), "nothing done is redone");
    assert_eq!(r["summary"]["done"].as_u64(), Some(120 - first.len() as u64));
    assert_eq!(assert_only_complete_outputs(&out).len(), 120);
    for (n, bytes) in kept {
        assert_eq!(fs::read(out.join(&n)).unwrap(), bytes, "{n} was rewritten");
    }
}

#[test]
fn an_interrupted_batch_stops_promptly_and_still_writes_its_report() {
    let s = Scratch::new();
    let (_, out, mut a) = slow_batch(&s);
    let report = s.path("r.json");
    a.extend(args(&[&"--report", &report]));
    let child = Command::new(env!("CARGO_BIN_EXE_pumice")).args(&a).stderr(Stdio::piped()).spawn().unwrap();
    wait_for_outputs(&out, 2);
    let sent = Instant::now();
    rustix::process::kill_process(rustix::process::Pid::from_child(&child), rustix::process::Signal::INT)
        .unwrap();
    let result = child.wait_with_output().unwrap();
    assert!(sent.elapsed() < Duration::from_secs(5), "took {:?} to stop", sent.elapsed());
    assert_eq!(result.status.code(), Some(130));
    let written = assert_only_complete_outputs(&out);
    let r = read_json(&report);
    assert_eq!(r["summary"]["done"].as_u64(), Some(written.len() as u64));
    assert_eq!(r["files"].as_array().unwrap().len(), 120, "the report lists every planned file");
    assert!(r["summary"]["not_run"].as_u64().unwrap() > 0);
}

/// The progress bar appears only on a terminal: under a pseudo-terminal
/// (Python's `pty.spawn`, the standard library's, as the terminal) stderr
/// shows the bar with its count and rate and the summary; through a pipe,
/// and with `--quiet` on the terminal, there is no bar.
#[test]
fn progress_bar_is_drawn_on_a_terminal_only() {
    let s = Scratch::new();
    for i in 0..40 {
        write(&s.path(&format!("in/f{i:02}.png")), &png_bytes(48, 32, i));
    }
    let on_terminal = |extra: &[&str], out: &str| {
        let mut cmd = Command::new("python3");
        cmd.args(["-c", "import pty, sys; pty.spawn(sys.argv[1:])", env!("CARGO_BIN_EXE_pumice"), "run"])
            .arg(s.path("in"))
            .arg("-o")
            .arg(s.path(out))
            .args(["-s", "gauss:2"])
            .args(extra)
            .stdin(Stdio::null());
        let output = cmd.output().expect("run python3 (needed by this test for a pseudo-terminal)");
        assert!(output.status.success(), "{output:?}");
        String::from_utf8_lossy(&output.stdout).into_owned()
    };
    let shown = on_terminal(&[], "out/");
    assert!(shown.contains("/40 files") && shown.contains(" files/s"), "no bar on a terminal:\n{shown}");
    assert!(shown.contains("40 done, 0 skipped, 0 failed"), "no summary:\n{shown}");
    assert_eq!(tree(&s.path("out")).len(), 40);
    let quiet = on_terminal(&["--quiet"], "quiet/");
    assert!(!quiet.contains("files/s") && !quiet.contains("done,"), "--quiet still draws:\n{quiet}");
    let piped = pumice(&args(&[&"run", &s.path("in"), &"-o", &s.path("piped/"), &"-s", &"gauss:2"])).ok();
    assert!(!piped.stderr().contains("files/s") && piped.stderr().contains("40 done"), "{}", piped.stderr());
}
