//! Cross-checks of `bilateral` and `nlmeans` against committed fixtures
//! (tests/reference/make_denoise.py, listed in fixtures/denoise/manifest.toml),
//! each case naming its reference: OpenCV's `cv2.bilateralFilter` on float32
//! data, non-local means written out in numpy, and scikit-image's
//! `denoise_nl_means(fast_mode=True)`. Every case runs the recorded step
//! through the public step grammar on an sRGB-encoded raster (both operators
//! work on encoded values, so no conversion is made), and the CLI refuses bad
//! parameters on one line.
//!
//! Tolerances (u = 2⁻²⁴, so f32::EPSILON = 2u; M = the largest |input|):
//! * bilateral against OpenCV: both sides compute Σ w·v / Σ w with range
//!   weights from an interpolated table. A weight error δ changes the output
//!   by Σ δₖ (vₖ − out) / Σ w ≤ δ·Σws·spread, because Σ w ≥ 1 (the centre
//!   has weight 1) and |vₖ − out| ≤ spread (max − min of the input). Pumice's
//!   δ is exptable::MAX_ERROR = 5.5e-7; OpenCV's is h²/(8ρ²) with h = spread/4096
//!   (its bins; the interpolation remainder of exp(−Δ²/2ρ²), |f''| ≤ 1/ρ²),
//!   computed by the script. The two f32 sums of `taps` terms add a relative
//!   error of at most taps·ε each (Higham, "Accuracy and Stability of
//!   Numerical Algorithms", §3.1): `tol = (δ_p + δ_cv)·Σws·spread + 2·taps·ε·M`.
//!   Measured OpenCV against the exact formula in f64: 3.7e-7 … 6.5e-7
//!   (recorded per case).
//! * nlmeans against the numpy formula: the same argument over search²
//!   weights, each within δ_p plus 1e-7 for the f32 rounding of the distance,
//!   and f32 sums of search² terms: `tol = search²·(δ_p + 1e-7)·spread +
//!   2·search²·ε·M`.
//! * nlmeans against scikit-image: the script reproduces scikit-image's result
//!   (to 1e-15) by a numpy emulation and then changes it, one step at a time,
//!   into Pumice's formula (exact exp instead of Schraudolph's approximation;
//!   no cutoff at u > 5; the symmetric s × s box instead of scikit-image's
//!   (s−1) × (s−1) box divided by s²), recording how far each step moves the
//!   result. By the triangle inequality the difference to scikit-image is at
//!   most the sum of those steps plus the formula tolerance above; it is
//!   printed beside that bound. The requirement is checked as well:
//!   the PSNR gain over the noisy input within 0.5 dB of scikit-image's.

use std::path::{Path, PathBuf};

use pumice::ops::filter::exptable::MAX_ERROR;
use pumice::pipeline::Step;
use pumice::raster::{Encoding, Layout, Plane, Raster};
use serde::Deserialize;

use crate::assert_planes_close;
use crate::harness::{pumice, worst_difference};
use crate::reference::read_npy;

fn fixtures() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/reference/fixtures/denoise")
}

#[derive(Debug, Deserialize)]
struct Manifest {
    numpy_version: String,
    opencv_version: String,
    skimage_version: String,
    case: Vec<Case>,
}

#[derive(Debug, Deserialize)]
struct Case {
    id: String,
    operator: String,
    reference: String,
    call: String,
    step: String,
    input: String,
    clean: String,
    output: String,
    channels: usize,
    #[serde(default)]
    spatial_sum: f64,
    #[serde(default)]
    taps: usize,
    #[serde(default)]
    reference_weight_error: f64,
    #[serde(default)]
    search: usize,
    #[serde(default)]
    psnr_reference: f64,
    #[serde(default)]
    psnr_noisy: f64,
    #[serde(default)]
    change_exact_exp: f64,
    #[serde(default)]
    change_no_cutoff: f64,
    #[serde(default)]
    change_symmetric_box: f64,
}

fn manifest() -> Manifest {
    crate::harness::read_manifest(&fixtures())
}

/// Splits planes stacked along the rows (`channels · H × W`) apart.
fn unstack(p: &Plane, channels: usize) -> Vec<Plane> {
    let (w, h) = (p.width(), p.height() / channels);
    (0..channels)
        .map(|c| Plane::from_vec(w, h, p.as_slice()[c * w * h..(c + 1) * w * h].to_vec()).unwrap())
        .collect()
}

fn load(name: &str, channels: usize) -> Vec<Plane> {
    unstack(&read_npy(&fixtures().join(name)), channels)
}

fn run(case: &Case) -> Vec<Plane> {
    let input = load(&case.input, case.channels);
    let layout = if case.channels == 3 { Layout::Rgb } else { Layout::Gray };
    let raster = Raster::new(input, layout, Encoding::Srgb).unwrap();
    let step = Step::parse(&case.step).unwrap_or_else(|e| panic!("{}: `{}`: {e}", case.id, case.step));
    step.op.apply(raster).unwrap_or_else(|e| panic!("{}: {e}", case.id)).into_planes()
}

/// (largest |input|, max − min over every plane's own range).
fn magnitude_and_spread(planes: &[Plane]) -> (f64, f64) {
    let mut m = 0.0f64;
    let mut spread = 0.0f64;
    for p in planes {
        let (lo, hi) =
            p.as_slice().iter().fold((f32::INFINITY, f32::NEG_INFINITY), |(l, h), &v| (l.min(v), h.max(v)));
        m = m.max(f64::from(lo.abs().max(hi.abs())));
        spread = spread.max(f64::from(hi - lo));
    }
    (m, spread)
}

fn psnr(a: &Plane, clean: &Plane) -> f64 {
    let mse: f64 = a
        .as_slice()
        .iter()
        .zip(clean.as_slice())
        .map(|(x, y)| (f64::from(*x) - f64::from(*y)).powi(2))
        .sum::<f64>()
        / a.as_slice().len() as f64;
    10.0 * (1.0 / mse).log10()
}

fn cases(operator: &str) -> (Manifest, Vec<usize>) {
    let m = manifest();
    let idx: Vec<usize> = (0..m.case.len()).filter(|&i| m.case[i].operator == operator).collect();
    assert!(!idx.is_empty(), "no {operator} cases");
    println!("(numpy {}, opencv {}, scikit-image {})", m.numpy_version, m.opencv_version, m.skimage_version);
    (m, idx)
}

const EPS: f64 = f32::EPSILON as f64;

#[test]
fn bilateral_matches_opencv_bilateral_filter() {
    let (m, idx) = cases("bilateral");
    for &i in &idx {
        let c = &m.case[i];
        let input = load(&c.input, c.channels);
        let (big_m, spread) = magnitude_and_spread(&input);
        let tol = (f64::from(MAX_ERROR) + c.reference_weight_error) * c.spatial_sum * spread
            + 2.0 * c.taps as f64 * EPS * big_m;
        let got = run(c);
        let want = load(&c.output, c.channels);
        for (g, w) in got.iter().zip(&want) {
            let (d, _, _) = worst_difference(g, w);
            println!("  {:<44} worst {d:.2e}  tolerance {tol:.2e}", c.id);
            assert_planes_close!(g, w, tol as f32, "{}: {} {}", c.id, c.reference, c.call);
        }
    }
}

#[test]
fn nlmeans_matches_the_formula_written_out_in_numpy() {
    let (m, idx) = cases("nlmeans");
    for &i in &idx {
        let c = &m.case[i];
        let input = load(&c.input, c.channels);
        let (big_m, spread) = magnitude_and_spread(&input);
        let n = (c.search * c.search) as f64;
        let tol = n * (f64::from(MAX_ERROR) + 1e-7) * spread + 2.0 * n * EPS * big_m;
        let got = run(c);
        let want = load(&c.output, c.channels);
        for (g, w) in got.iter().zip(&want) {
            let (d, _, _) = worst_difference(g, w);
            println!("  {:<44} worst {d:.2e}  tolerance {tol:.2e}", c.id);
            assert_planes_close!(g, w, tol as f32, "{}: {} {}", c.id, c.reference, c.call);
        }
    }
}

#[test]
fn nlmeans_denoises_as_well_as_scikit_image() {
    let (m, idx) = cases("nlmeans-skimage");
    for &i in &idx {
        let c = &m.case[i];
        let input = load(&c.input, 1);
        let (big_m, spread) = magnitude_and_spread(&input);
        let clean = load(&c.clean, 1).remove(0);
        let got = run(c).remove(0);
        let want = load(&c.output, 1).remove(0);
        let gain = psnr(&got, &clean) - c.psnr_noisy;
        let reference_gain = c.psnr_reference - c.psnr_noisy;
        let n = (c.search * c.search) as f64;
        let formula_tol = n * (f64::from(MAX_ERROR) + 1e-7) * spread + 2.0 * n * EPS * big_m;
        let bound = formula_tol + c.change_exact_exp + c.change_no_cutoff + c.change_symmetric_box;
        let (d, x, y) = worst_difference(&got, &want);
        println!(
            "  {:<44} PSNR gain {gain:.2} dB (scikit-image {reference_gain:.2} dB); largest difference {d:.4} at ({x}, {y}), bound {bound:.4}",
            c.id
        );
        // the requirement: within 0.5 dB of scikit-image's gain
        assert!((gain - reference_gain).abs() <= 0.5, "{}: gain {gain} vs {reference_gain}", c.id);
        assert!(gain > 3.0, "{}: nlmeans hardly denoised ({gain} dB)", c.id);
        assert!(f64::from(d) <= bound, "{}: {d} beyond the bound {bound} ({})", c.id, c.call);
    }
}

#[test]
fn bad_parameters_are_refused_on_one_line() {
    use crate::cli::small_png;
    use crate::harness::Scratch;
    let s = Scratch::new();
    let input = small_png(&s, "in.png").display().to_string();
    let out = s.path("out.png").display().to_string();
    for (step, says) in [
        ("bilateral:sigma=0", "sigma"),
        ("bilateral:sigma=nan", "sigma"),
        ("bilateral:2,range=0", "range"),
        ("bilateral:2,radius=-1", "radius"),
        ("bilateral:2,on=rgb", "expected one of luma, channels"),
        ("nlmeans", "give h"),
        ("nlmeans:0.1,patch=4", "odd"),
        ("nlmeans:0.1,search=1", "search"),
        ("nlmeans:h=nan", "`h`"),
    ] {
        pumice(&["run", &input, "-o", &out, "-s", step]).expect_code(2).stderr_has(&[says]).one_line_error();
    }
    assert!(!std::path::Path::new(&out).exists());
}

#[test]
fn ops_shows_the_formula_and_source() {
    let out = pumice(&["ops", "bilateral"]).ok().stdout();
    for part in ["Tomasi", "exp(-(i² + j²) / 2σ²)", "Domain: encoded", "ceil(2σ)"] {
        assert!(out.contains(part), "`pumice ops bilateral` lacks {part}:\n{out}");
    }
    let out = pumice(&["ops", "nlmeans"]).ok().stdout();
    for part in ["Buades", "Darbon", "2σ²", "0.8·sigma", "Domain: encoded"] {
        assert!(out.contains(part), "`pumice ops nlmeans` lacks {part}:\n{out}");
    }
}

/// A 16-bit source stays 16-bit through both operators on the command line:
/// the written PNG has 16-bit samples, thousands of distinct codes (an 8-bit
/// path would leave at most 256, all multiples of 257), and every code is
/// within 1 of the same step run in-process on the decoded planes and rounded
/// to 16 bits (1 code: the encoder's round-half-up against `f32::round`).
#[test]
fn sixteen_bit_sources_keep_sixteen_bits() {
    use pumice::pipeline::{DomainPolicy, Pipeline};
    let s = crate::harness::Scratch::new();
    let (w, h) = (96u32, 64u32);
    let mut state = 0x9E37_79B9u32;
    let codes: Vec<u16> = (0..w * h)
        .map(|i| {
            state ^= state << 13;
            state ^= state >> 17;
            state ^= state << 5;
            let ramp = 4000.0 + 50_000.0 * f64::from(i % w) / f64::from(w);
            (ramp + f64::from(state % 3001) - 1500.0) as u16
        })
        .collect();
    let mut bytes = Vec::new();
    {
        let mut enc = png::Encoder::new(&mut bytes, w, h);
        enc.set_color(png::ColorType::Grayscale);
        enc.set_depth(png::BitDepth::Sixteen);
        let data: Vec<u8> = codes.iter().flat_map(|c| c.to_be_bytes()).collect();
        enc.write_header().unwrap().write_image_data(&data).unwrap();
    }
    let input = s.write("in.png", &bytes);
    for step in ["bilateral:2,range=0.05", "nlmeans:0.03,patch=5,search=11"] {
        let out = s.path("out.png");
        crate::harness::pumice(&[
            "run".as_ref(),
            input.as_os_str(),
            "-o".as_ref(),
            out.as_os_str(),
            "--overwrite".as_ref(),
            "-s".as_ref(),
            step.as_ref(),
        ])
        .ok();
        let decoder = png::Decoder::new(std::io::Cursor::new(std::fs::read(&out).unwrap()));
        let mut reader = decoder.read_info().unwrap();
        let mut buf = vec![0u8; reader.output_buffer_size().unwrap()];
        let info = reader.next_frame(&mut buf).unwrap();
        assert_eq!(info.bit_depth, png::BitDepth::Sixteen, "{step}: output depth");
        let got: Vec<u16> =
            buf[..info.buffer_size()].chunks_exact(2).map(|b| u16::from_be_bytes([b[0], b[1]])).collect();
        let distinct: std::collections::BTreeSet<u16> = got.iter().copied().collect();
        assert!(distinct.len() > 1000, "{step}: only {} distinct codes", distinct.len());
        assert!(got.iter().any(|c| c % 257 != 0), "{step}: every code is an 8-bit one");
        let raster = crate::harness::read_image(&input);
        let want = Pipeline::parse(&[step]).unwrap().run(raster, DomainPolicy::Auto).unwrap();
        for (i, (&g, &v)) in got.iter().zip(want.planes()[0].as_slice()).enumerate() {
            let e = (v.clamp(0.0, 1.0) * 65535.0).round() as i32;
            assert!((i32::from(g) - e).abs() <= 1, "{step}: sample {i}: wrote {g}, in-process {e}");
        }
        assert_ne!(got, codes, "{step}: the step changed nothing");
    }
}
