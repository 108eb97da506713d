//! Injected faults: a full disk (simulated by a file-size limit), a read-only
//! output folder, and two runs writing one folder at once. Each leaves no
//! partial file, reports what failed, and damages nothing.

use std::collections::BTreeSet;
use std::fs;
use std::path::Path;
use std::process::{Command, Stdio};

use crate::harness::Scratch;

/// An 8-bit RGB PNG of `w × h` noise (it does not compress, so its size is about 3·w·h).
fn noisy_png(w: u32, h: u32, seed: u32) -> Vec<u8> {
    let mut bytes = Vec::new();
    {
        let mut enc = png::Encoder::new(&mut bytes, w, h);
        enc.set_color(png::ColorType::Rgb);
        enc.set_depth(png::BitDepth::Eight);
        let mut wr = enc.write_header().unwrap();
        let mut state = seed.wrapping_mul(2_654_435_761).wrapping_add(1);
        let data: Vec<u8> = (0..w * h * 3)
            .map(|_| {
                // xorshift32 (Marsaglia 2003): noise that compresses badly.
                state ^= state << 13;
                state ^= state >> 17;
                state ^= state << 5;
                (state >> 24) as u8
            })
            .collect();
        wr.write_image_data(&data).unwrap();
    }
    bytes
}

fn names(dir: &Path) -> BTreeSet<String> {
    fs::read_dir(dir).map_or_else(
        |_| BTreeSet::new(),
        |rd| rd.map(|e| e.unwrap().file_name().to_string_lossy().into_owned()).collect(),
    )
}

fn assert_complete_images(dir: &Path) {
    for n in names(dir) {
        assert!(!n.starts_with('.'), "temporary file {n} left behind");
        let bytes = fs::read(dir.join(&n)).unwrap();
        pumice::io::decode(&bytes, &Default::default()).unwrap_or_else(|e| panic!("{n} is not whole: {e}"));
    }
}

#[test]
fn a_full_disk_leaves_no_partial_file_and_is_reported() {
    let s = Scratch::new();
    let input = s.path("in");
    fs::create_dir(&input).unwrap();
    // Two small images (a few hundred bytes) and two of ~190 KiB.
    fs::write(input.join("a-small.png"), noisy_png(8, 8, 1)).unwrap();
    fs::write(input.join("b-large.png"), noisy_png(256, 256, 2)).unwrap();
    fs::write(input.join("c-small.png"), noisy_png(8, 8, 3)).unwrap();
    fs::write(input.join("d-large.png"), noisy_png(256, 256, 4)).unwrap();
    let out = s.path("out");
    // RLIMIT_FSIZE of 64 blocks of 512 bytes (POSIX `ulimit -f`; 32 KiB): writes past it
    // fail with EFBIG, as on a full disk; SIGXFSZ is ignored so the write returns
    // the error instead of killing the process (setrlimit(2)).
    let script = format!(
        "ulimit -f 64 && trap '' XFSZ && exec '{}' run '{}' -o '{}' -s invert -j 1",
        env!("CARGO_BIN_EXE_pumice"),
        input.display(),
        out.display()
    );
    let result = Command::new("sh").arg("-c").arg(&script).stdin(Stdio::null()).output().unwrap();
    let err = String::from_utf8_lossy(&result.stderr);
    assert_eq!(result.status.code(), Some(1), "{err}");
    assert!(err.contains("b-large.png") && err.contains("d-large.png") && err.contains("writing"), "{err}");
    assert!(err.contains("2 done") && err.contains("2 failed"), "{err}");
    assert_eq!(names(&out), BTreeSet::from(["a-small.png".to_string(), "c-small.png".to_string()]));
    assert_complete_images(&out);
}

#[test]
fn a_read_only_output_folder_fails_every_file_cleanly() {
    use std::os::unix::fs::PermissionsExt;
    let s = Scratch::new();
    // Permission bits do not bind the superuser: as root, the run drops to the
    // unprivileged user 65534 with setpriv(1) (util-linux), for whom they do.
    let as_root = rustix::process::geteuid().is_root();
    if as_root {
        fs::set_permissions(s.path(""), fs::Permissions::from_mode(0o755)).unwrap();
    }
    let input = s.path("in");
    fs::create_dir(&input).unwrap();
    for i in 0..3 {
        fs::write(input.join(format!("f{i}.png")), noisy_png(8, 8, i)).unwrap();
    }
    let out = s.path("out");
    fs::create_dir(&out).unwrap();
    fs::set_permissions(&out, fs::Permissions::from_mode(0o555)).unwrap();
    let args = ["run", input.to_str().unwrap(), "-o", out.to_str().unwrap()];
    let mut cmd = if as_root {
        // A copy of the binary the unprivileged user can run wherever the build lives.
        let binary = s.path("pumice");
        fs::copy(env!("CARGO_BIN_EXE_pumice"), &binary).unwrap();
        fs::set_permissions(&binary, fs::Permissions::from_mode(0o755)).unwrap();
        let mut c = Command::new("setpriv");
        c.args(["--reuid=65534", "--regid=65534", "--clear-groups"]).arg(&binary);
        c
    } else {
        Command::new(env!("CARGO_BIN_EXE_pumice"))
    };
    let result = cmd.args(args).stdin(Stdio::null()).output().expect("run pumice (setpriv when root)");
    fs::set_permissions(&out, fs::Permissions::from_mode(0o755)).unwrap();
    let err = String::from_utf8_lossy(&result.stderr);
    assert_eq!(result.status.code(), Some(1), "{err}");
    for part in ["f0.png", "f2.png", "writing", "3 failed"] {
        assert!(err.contains(part), "{part}: {err}");
    }
    assert!(names(&out).is_empty());
}

#[test]
fn two_runs_writing_one_folder_at_once_corrupt_nothing() {
    let s = Scratch::new();
    let input = s.path("in");
    fs::create_dir(&input).unwrap();
    for i in 0..40 {
        fs::write(input.join(format!("f{i:02}.png")), noisy_png(48, 48, i)).unwrap();
    }
    let out = s.path("out");
    let spawn = |extra: &[&str]| {
        Command::new(env!("CARGO_BIN_EXE_pumice"))
            .args(["run", input.to_str().unwrap(), "-o", out.to_str().unwrap(), "-s", "gauss:1", "-q"])
            .args(extra)
            .stderr(Stdio::piped())
            .spawn()
            .unwrap()
    };
    // Replacing: both succeed, and every file is one run's complete output.
    let (a, b) = (spawn(&["--overwrite"]), spawn(&["--overwrite"]));
    let (a, b) = (a.wait_with_output().unwrap(), b.wait_with_output().unwrap());
    assert!(a.status.success() && b.status.success());
    assert_eq!(names(&out).len(), 40);
    assert_complete_images(&out);
    // Not replacing, into a fresh folder: for each file one run writes it and the
    // other reports that it appeared meanwhile (or that it already exists, if it
    // looked later) — nothing is written twice and nothing is half written.
    fs::remove_dir_all(&out).unwrap();
    let (a, b) = (spawn(&["--skip-existing"]), spawn(&["--skip-existing"]));
    let (a, b) = (a.wait_with_output().unwrap(), b.wait_with_output().unwrap());
    for r in [&a, &b] {
        let err = String::from_utf8_lossy(&r.stderr);
        assert!(r.status.code() == Some(0) || err.contains("appeared while working"), "{err}");
    }
    assert_eq!(names(&out).len(), 40);
    assert_complete_images(&out);
}
