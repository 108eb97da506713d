//! A small harness: temporary folders, a command builder that shows stdout and
//! stderr when an expectation fails, and plane comparisons that report the
//! worst pixel and where it is.

#![allow(dead_code)]

use std::path::{Path, PathBuf};
use std::process::{Command, Output};

use pumice::raster::Plane;

/// A temporary folder removed when dropped.
pub struct Scratch {
    dir: tempfile::TempDir,
}

impl Scratch {
    pub fn new() -> Scratch {
        Scratch { dir: tempfile::tempdir().expect("create a temporary folder") }
    }

    /// A path inside the folder.
    pub fn path(&self, name: &str) -> PathBuf {
        self.dir.path().join(name)
    }

    /// Writes `bytes` to `name` and returns its path.
    pub fn write(&self, name: &str, bytes: &[u8]) -> PathBuf {
        let p = self.path(name);
        std::fs::write(&p, bytes).expect("write a test file");
        p
    }

    /// The names of the files in the folder, sorted.
    pub fn names(&self) -> Vec<String> {
        let mut v: Vec<String> = std::fs::read_dir(self.dir.path())
            .expect("list the folder")
            .map(|e| e.expect("entry").file_name().to_string_lossy().into_owned())
            .collect();
        v.sort();
        v
    }
}

/// The result of one run of the binary.
pub struct Run {
    pub args: Vec<String>,
    pub output: Output,
}

impl Run {
    pub fn code(&self) -> i32 {
        self.output.status.code().unwrap_or(-1)
    }

    pub fn stdout(&self) -> String {
        String::from_utf8_lossy(&self.output.stdout).into_owned()
    }

    pub fn stderr(&self) -> String {
        String::from_utf8_lossy(&self.output.stderr).into_owned()
    }

    fn explain(&self) -> String {
        format!(
            "pumice {}\nexit code: {}\n--- stdout ---\n{}\n--- stderr ---\n{}",
            self.args.join(" "),
            self.code(),
            self.stdout(),
            self.stderr()
        )
    }

    /// Asserts the exit code and returns self.
    #[track_caller]
    pub fn expect_code(self, code: i32) -> Run {
        assert_eq!(self.code(), code, "unexpected exit code\n{}", self.explain());
        self
    }

    /// Asserts success.
    #[track_caller]
    pub fn ok(self) -> Run {
        self.expect_code(0)
    }

    /// Asserts that stderr contains every one of `parts`.
    #[track_caller]
    pub fn stderr_has(self, parts: &[&str]) -> Run {
        let err = self.stderr();
        for p in parts {
            assert!(err.contains(p), "stderr lacks {p:?}\n{}", self.explain());
        }
        self
    }

    /// Asserts stderr holds one line only (a clear, single-line error).
    #[track_caller]
    pub fn one_line_error(self) -> Run {
        let err = self.stderr();
        assert_eq!(err.trim_end().lines().count(), 1, "expected a one-line error\n{}", self.explain());
        assert!(err.starts_with("pumice: "), "error does not start with `pumice: `\n{}", self.explain());
        self
    }
}

/// Runs the binary with `args` and no standard input.
pub fn pumice<S: AsRef<std::ffi::OsStr>>(args: &[S]) -> Run {
    let mut cmd = Command::new(env!("CARGO_BIN_EXE_pumice"));
    cmd.args(args).stdin(std::process::Stdio::null());
    let output = cmd.output().expect("run the pumice binary");
    Run { args: args.iter().map(|a| a.as_ref().to_string_lossy().into_owned()).collect(), output }
}

/// Runs the binary with `args` and `stdin` as standard input.
pub fn pumice_with_stdin<S: AsRef<std::ffi::OsStr>>(args: &[S], stdin: &[u8]) -> Run {
    use std::io::Write;
    let mut child = Command::new(env!("CARGO_BIN_EXE_pumice"))
        .args(args)
        .stdin(std::process::Stdio::piped())
        .stdout(std::process::Stdio::piped())
        .stderr(std::process::Stdio::piped())
        .spawn()
        .expect("start the pumice binary");
    child.stdin.take().expect("stdin").write_all(stdin).expect("feed stdin");
    let output = child.wait_with_output().expect("wait for pumice");
    Run { args: args.iter().map(|a| a.as_ref().to_string_lossy().into_owned()).collect(), output }
}

/// The largest absolute difference between two planes and where it is.
pub fn worst_difference(a: &Plane, b: &Plane) -> (f32, usize, usize) {
    assert_eq!((a.width(), a.height()), (b.width(), b.height()), "planes differ in size");
    let mut worst = (0.0f32, 0, 0);
    for y in 0..a.height() {
        for (x, (p, q)) in a.row(y).iter().zip(b.row(y)).enumerate() {
            let d = (p - q).abs();
            if d > worst.0 || d.is_nan() {
                worst = (d, x, y);
            }
        }
    }
    worst
}

/// Asserts two planes agree within `tol` everywhere, naming the worst pixel.
#[macro_export]
macro_rules! assert_planes_close {
    ($a:expr, $b:expr, $tol:expr $(, $($ctx:tt)+)?) => {{
        let (d, x, y) = $crate::harness::worst_difference(&$a, &$b);
        let tol: f32 = $tol;
        assert!(
            d <= tol,
            "planes differ by {d:e} at (x={x}, y={y}): {} vs {} (tolerance {tol:e}){}",
            $a.get(x, y),
            $b.get(x, y),
            { let _ctx = String::new(); $( let _ctx = format!(" — {}", format!($($ctx)+)); )? _ctx }
        );
    }};
}

/// Reads an image file with the library's own decoder.
pub fn read_image(path: &Path) -> pumice::raster::Raster {
    let bytes = std::fs::read(path).expect("read the image");
    pumice::io::decode(&bytes, &pumice::io::DecodeOptions::default()).expect("decode the image")
}

/// Reads and parses `manifest.toml` in a fixture folder, naming the file on failure.
pub fn read_manifest<T: serde::de::DeserializeOwned>(folder: &Path) -> T {
    let path = folder.join("manifest.toml");
    let text = std::fs::read_to_string(&path).unwrap_or_else(|e| panic!("read {}: {e}", path.display()));
    toml::from_str(&text).unwrap_or_else(|e| panic!("parse {}: {e}", path.display()))
}
