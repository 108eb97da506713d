//! Cross-checks of `gauss` and `convolve` against committed scipy.ndimage
//! fixtures (tests/reference/: made by make_fixtures.py, listed in
//! manifest.toml). Each case is built through the public step grammar and run
//! on a linear gray raster, so no colour conversion takes part.
//!
//! Tolerance, derived rather than tuned (standard floating-point error
//! analysis, e.g. Higham, "Accuracy and Stability of Numerical Algorithms",
//! §3.1 on inner products: an n-term dot product computed in floating point is
//! off by at most γₙ·Σ|wᵢ·xᵢ|, γₙ = n·u/(1 − n·u), u = 2⁻²⁴ for f32):
//!
//! * one pass of n taps over samples bounded by M, with weights w: the
//!   accumulation costs ≤ n·u·Σ|w|·M (the folded pairs `w·(a + b)` of symmetric
//!   kernels add one rounding per pair but half the additions, still ≤ n
//!   roundings per term), and rounding the weights themselves to f32 costs
//!   ≤ u·Σ|w|·M;
//! * a separable run (vertical pass, then horizontal) carries the first pass's
//!   error through the second, scaled by Σ|kx|, so the bounds add with
//!   Σ|kx|·Σ|ky| = Σ|K|: (nx + ny + 2)·u·Σ|K|·M;
//! * the reference is exact to ~1e-16 in f64, then rounded to f32: ≤ u·Σ|K|·M.
//!
//! So `tol = ε · Σ|K| · M · (taps + passes + 1)` with ε = f32::EPSILON = 2u,
//! which leaves a factor of 2 for the second-order terms of γₙ. M is the
//! largest |sample| of the input or of the constant fill. For `gauss`, Σ|K| = 1
//! and taps = 2·(2r + 1), r = floor(truncate·σ + 0.5) (scipy.ndimage's
//! gaussian_filter1d radius rule); for `convolve`, taps = kw + kh and 2 passes
//! when the matrix is an outer product (Pumice then runs it separably), else
//! kw·kh taps in 1 pass.

use std::collections::BTreeMap;
use std::path::{Path, PathBuf};

use pumice::pipeline::Step;
use pumice::raster::{Encoding, Layout, Plane, Raster};
use serde::Deserialize;

use crate::assert_planes_close;
use crate::harness::worst_difference;

fn fixtures() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/reference/fixtures")
}

#[derive(Debug, Deserialize)]
struct Manifest {
    numpy_version: String,
    scipy_version: String,
    kernels: BTreeMap<String, Vec<Vec<f64>>>,
    case: Vec<Case>,
}

#[derive(Debug, Deserialize)]
struct Case {
    id: String,
    operator: String,
    reference: String,
    call: String,
    mode: String,
    border: String,
    cval: f64,
    input: String,
    output: String,
    shape: [usize; 2],
    sigma: Option<f64>,
    truncate: Option<f64>,
    kernel: Option<String>,
}

fn manifest() -> Manifest {
    crate::harness::read_manifest(&fixtures())
}

/// Reads a `.npy` file holding a 2-D little-endian `f32` array in C order
/// (format version 1.0) as a plane `shape[1]` wide and `shape[0]` high. Panics,
/// naming the file, on anything else.
pub fn read_npy(path: &Path) -> Plane {
    let bytes = std::fs::read(path).unwrap_or_else(|e| panic!("read {}: {e}", path.display()));
    parse_npy(&bytes).unwrap_or_else(|e| panic!("{}: {e}", path.display()))
}

fn parse_npy(bytes: &[u8]) -> Result<Plane, String> {
    if bytes.len() < 10 || &bytes[..6] != b"\x93NUMPY" {
        return Err("not a .npy file (no \\x93NUMPY magic)".into());
    }
    if (bytes[6], bytes[7]) != (1, 0) {
        return Err(format!("npy format version {}.{}, only 1.0 is read", bytes[6], bytes[7]));
    }
    let header_len = u16::from_le_bytes([bytes[8], bytes[9]]) as usize;
    let data = bytes.get(10 + header_len..).ok_or("header runs past the end of the file")?;
    let header = std::str::from_utf8(&bytes[10..10 + header_len]).map_err(|_| "header is not text")?;
    let descr = header_value(header, "descr")?;
    if descr != "'<f4'" {
        return Err(format!("dtype {descr}, only '<f4' (little-endian float32) is read"));
    }
    let order = header_value(header, "fortran_order")?;
    if order != "False" {
        return Err(format!("fortran_order is {order}, only C order is read"));
    }
    let shape = header_value(header, "shape")?;
    let dims: Vec<usize> = shape
        .trim_start_matches('(')
        .trim_end_matches(')')
        .split(',')
        .map(str::trim)
        .filter(|s| !s.is_empty())
        .map(|s| s.parse().map_err(|_| format!("bad shape {shape}")))
        .collect::<Result<_, _>>()?;
    let [rows, cols] = dims[..] else {
        return Err(format!("shape {shape}, only 2-D arrays are read"));
    };
    if data.len() != rows * cols * 4 {
        return Err(format!("shape {shape} needs {} data bytes, found {}", rows * cols * 4, data.len()));
    }
    let samples = data.chunks_exact(4).map(|b| f32::from_le_bytes([b[0], b[1], b[2], b[3]])).collect();
    Plane::from_vec(cols, rows, samples).map_err(|e| e.to_string())
}

/// The text of `key`'s value in a header like `{'descr': '<f4', 'shape': (3, 4), }`.
fn header_value<'a>(header: &'a str, key: &str) -> Result<&'a str, String> {
    let quoted = format!("'{key}':");
    let start = header.find(&quoted).ok_or_else(|| format!("header lacks {key}: {header}"))? + quoted.len();
    let rest = header[start..].trim_start();
    // The value ends at the first comma outside parentheses.
    let mut depth = 0;
    for (i, c) in rest.char_indices() {
        match c {
            '(' => depth += 1,
            ')' => depth -= 1,
            ',' | '}' if depth == 0 => return Ok(rest[..i].trim()),
            _ => {}
        }
    }
    Err(format!("header value of {key} does not end: {header}"))
}

/// The step text that builds the case's operator.
fn step_text(case: &Case, m: &Manifest) -> String {
    match case.operator.as_str() {
        "gauss" => format!(
            "gauss:sigma={},truncate={},border={},fill={}",
            case.sigma.expect("gauss case without sigma"),
            case.truncate.expect("gauss case without truncate"),
            case.border,
            case.cval
        ),
        "convolve" => {
            let rows: Vec<String> = kernel(case, m)
                .iter()
                .map(|r| r.iter().map(|v| v.to_string()).collect::<Vec<_>>().join(" "))
                .collect();
            format!("convolve:kernel={},border={},fill={}", rows.join(";"), case.border, case.cval)
        }
        other => panic!("{}: unknown operator {other}", case.id),
    }
}

fn kernel<'a>(case: &Case, m: &'a Manifest) -> &'a Vec<Vec<f64>> {
    let name = case.kernel.as_ref().expect("convolve case without kernel");
    m.kernels.get(name).unwrap_or_else(|| panic!("{}: kernel {name} is not in the manifest", case.id))
}

/// True when every 2×2 minor vanishes: `K` is an outer product (rank ≤ 1).
/// Exact here, because the fixture kernels are dyadic rationals.
fn is_outer_product(k: &[Vec<f64>]) -> bool {
    let (h, w) = (k.len(), k[0].len());
    (0..h).all(|i| (0..h).all(|p| (0..w).all(|j| (0..w).all(|q| k[i][j] * k[p][q] == k[i][q] * k[p][j]))))
}

/// The error bound of the module comment for one case.
fn tolerance(case: &Case, m: &Manifest, input: &Plane) -> f32 {
    let max_in = input.as_slice().iter().fold(0.0f64, |a, &v| a.max(f64::from(v).abs()));
    let big_m = if case.border == "constant" { max_in.max(case.cval.abs()) } else { max_in };
    let (sum_abs, taps, passes) = match case.operator.as_str() {
        "gauss" => {
            // scipy.ndimage.gaussian_filter1d: radius = int(truncate * sd + 0.5)
            let r = (case.truncate.unwrap() * case.sigma.unwrap() + 0.5).floor() as usize;
            (1.0, 2 * (2 * r + 1), 2)
        }
        _ => {
            let k = kernel(case, m);
            let sum_abs: f64 = k.iter().flatten().map(|v| v.abs()).sum();
            let (kh, kw) = (k.len(), k[0].len());
            if is_outer_product(k) { (sum_abs, kw + kh, 2) } else { (sum_abs, kw * kh, 1) }
        }
    };
    (f64::from(f32::EPSILON) * sum_abs * big_m * (taps + passes + 1) as f64) as f32
}

/// Runs one case through the public API and returns (result, reference, tolerance).
fn run(case: &Case, m: &Manifest) -> (Plane, Plane, f32) {
    let input = read_npy(&fixtures().join(&case.input));
    let want = read_npy(&fixtures().join(&case.output));
    assert_eq!([input.height(), input.width()], case.shape, "{}: input shape", case.id);
    let text = step_text(case, m);
    let step = Step::parse(&text).unwrap_or_else(|e| panic!("{}: `{text}` does not parse: {e}", case.id));
    let tol = tolerance(case, m, &input);
    let raster = Raster::new(vec![input], Layout::Gray, Encoding::Linear).unwrap();
    let out = step.op.apply(raster).unwrap_or_else(|e| panic!("{}: {e}", case.id));
    assert_eq!(out.encoding, Encoding::Linear);
    let got = out.into_planes().remove(0);
    (got, want, tol)
}

/// Runs every case of `operator`, prints the worst difference per family next to
/// its tolerance (shown with `--nocapture`), then asserts each case.
fn check_all(operator: &str, reference: &str) {
    let m = manifest();
    let cases: Vec<&Case> = m.case.iter().filter(|c| c.operator == operator).collect();
    // Guard against a truncated manifest passing vacuously: every border rule appears.
    for border in ["reflect", "mirror", "replicate", "wrap", "constant"] {
        assert!(cases.iter().any(|c| c.border == border), "no {operator} case with border={border}");
    }
    let results: Vec<_> = cases.iter().map(|c| (c, run(c, &m))).collect();
    // Family: the case id without its input name (operator, parameters, border).
    let mut families: BTreeMap<String, (f32, f32, String)> = BTreeMap::new();
    for (c, (got, want, tol)) in &results {
        let (d, _, _) = worst_difference(got, want);
        let family = c.id.rsplit_once('-').map_or(c.id.as_str(), |(f, _)| f).to_string();
        let entry = families.entry(family).or_insert((0.0, f32::INFINITY, String::new()));
        if d >= entry.0 {
            entry.0 = d;
            entry.2 = c.id.clone();
        }
        entry.1 = entry.1.min(*tol);
    }
    println!("{reference} (scipy {}, numpy {}):", m.scipy_version, m.numpy_version);
    for (family, (worst, tol, id)) in &families {
        println!("  {family:<40} worst {worst:.2e}  smallest tolerance {tol:.2e}  ({id})");
    }
    for (c, (got, want, tol)) in &results {
        assert_eq!(c.reference, reference, "{}: unexpected reference function", c.id);
        assert_planes_close!(got, want, *tol, "{}: {} {} (mode={})", c.id, c.reference, c.call, c.mode);
    }
}

#[test]
fn gauss_matches_scipy_gaussian_filter() {
    // scipy.ndimage.gaussian_filter (version in manifest.toml), modes reflect,
    // mirror, nearest, wrap, constant(cval=0.25); tolerance derived above.
    check_all("gauss", "scipy.ndimage.gaussian_filter");
}

#[test]
fn convolve_matches_scipy_convolve() {
    // scipy.ndimage.convolve (version in manifest.toml), origin 0, the same five
    // modes; tolerance derived above.
    check_all("convolve", "scipy.ndimage.convolve");
}

#[test]
fn npy_reader_refuses_what_it_cannot_read() {
    fn npy(version: (u8, u8), header: &str, data: &[u8]) -> Vec<u8> {
        let mut v = b"\x93NUMPY".to_vec();
        v.extend([version.0, version.1]);
        v.extend((header.len() as u16).to_le_bytes());
        v.extend(header.as_bytes());
        v.extend(data);
        v
    }
    let ok = "{'descr': '<f4', 'fortran_order': False, 'shape': (1, 2), }\n";
    let p = parse_npy(&npy((1, 0), ok, &[0, 0, 128, 63, 0, 0, 0, 64])).unwrap();
    assert_eq!(p.as_slice(), &[1.0, 2.0]); // 0x3f800000 = 1.0, 0x40000000 = 2.0 (IEEE 754 binary32)
    let cases = [
        (npy((2, 0), ok, &[0; 8]), "version 2.0"),
        (npy((1, 0), &ok.replace("<f4", "<f8"), &[0; 8]), "only '<f4'"),
        (npy((1, 0), &ok.replace("False", "True"), &[0; 8]), "only C order"),
        (npy((1, 0), &ok.replace("(1, 2)", "(2,)"), &[0; 8]), "only 2-D"),
        (npy((1, 0), ok, &[0; 4]), "needs 8 data bytes"),
        (b"PK\x03\x04".to_vec(), "not a .npy file"),
    ];
    for (bytes, want) in cases {
        let err = parse_npy(&bytes).unwrap_err();
        assert!(err.contains(want), "{err:?} lacks {want:?}");
    }
}
