//! Property tests (proptest): invariants that must hold for any small image
//! and any parameters, run through the public step grammar on gray rasters of
//! at most 24×24 samples. Case counts are kept small so the file runs in a few
//! seconds in a debug build.
//!
//! Tolerances are first-order f32 rounding bounds (Higham, "Accuracy and
//! Stability of Numerical Algorithms", §3.1: an n-term f32 dot product is off
//! by at most n·u·Σ|wᵢxᵢ|, u = 2⁻²⁴ = ε/2). A kernel whose taps were rounded
//! to f32 from an exactly normalised one sums to 1 within n·u. So one pass of
//! an n-tap normalised kernel over a constant c is off by at most
//! 2n·u·|c| = n·ε·|c|, and two passes by 2n·ε·|c|; one more ε·|c| covers the
//! final rounding. Where the arithmetic is the same operations in the same
//! order (flips of symmetric kernels folded in pairs, exact sample moves) the
//! check is bit-exact.

use proptest::prelude::*;

use pumice::pipeline::Step;
use pumice::raster::{Encoding, Layout, Plane, Raster};

const EPS: f32 = f32::EPSILON;
const BORDERS: [&str; 5] = ["reflect", "mirror", "replicate", "wrap", "constant"];

fn run(step: &str, p: Plane) -> Plane {
    let step = Step::parse(step).unwrap_or_else(|e| panic!("`{step}`: {e}"));
    let raster = Raster::new(vec![p], Layout::Gray, Encoding::Linear).unwrap();
    step.op.apply(raster).unwrap_or_else(|e| panic!("{e}")).into_planes().remove(0)
}

fn flip_h(p: &Plane) -> Plane {
    run("flip:horizontal", p.clone())
}

/// Taps of the sampled Gaussian of `sigma` with the 4σ truncation every
/// Gaussian here uses.
fn gauss_taps(sigma: f64) -> usize {
    2 * (4.0 * sigma + 0.5).floor() as usize + 1
}

fn image(max_side: usize) -> impl Strategy<Value = Plane> {
    (1..=max_side, 1..=max_side).prop_flat_map(|(w, h)| {
        prop::collection::vec(0.0f32..1.0, w * h).prop_map(move |v| Plane::from_vec(w, h, v).unwrap())
    })
}

fn worst(a: &Plane, b: &Plane) -> f32 {
    assert_eq!((a.width(), a.height()), (b.width(), b.height()));
    a.as_slice().iter().zip(b.as_slice()).map(|(x, y)| (x - y).abs()).fold(0.0, f32::max)
}

/// A neighbourhood step and the bound on its error over a constant `c`.
fn constant_cases(sigma: f64, radius: usize, amount: f64, border: &str, c: f32) -> Vec<(String, f32)> {
    let b = format!("border={border},fill={c}");
    let n = gauss_taps(sigma) as f32;
    let blur = (2.0 * n + 1.0) * EPS * c.abs();
    let rad = radius.min(3);
    vec![
        (format!("gauss:sigma={sigma},method=exact,{b}"), blur),
        // f32 running sums: a fresh window sum of 2m + 1 equal samples is off
        // by at most 2m·u·(2m + 1)·|c| (recursive summation), later steps add
        // c − c = 0 exactly, the output divides by at least 2m + 1 and rounds
        // about four times: (2m + 4)·u·|c| a pass, ten passes (`gauss` doc)
        (format!("gauss:sigma={},method=fast,{b}", sigma + 2.0), {
            let m = pumice::ops::filter::ExtendedBox::for_sigma(sigma + 2.0, 5).r as f32;
            10.0 * (2.0 * m + 4.0) * (EPS / 2.0) * c.abs()
        }),
        (format!("box:radius={radius},{b}"), 2.0 * EPS * c.abs()),
        // the median is one of the window's samples, all equal to c
        (format!("median:radius={rad},{b}"), 0.0),
        (format!("median:radius={rad},shape=disk,{b}"), 0.0),
        // in + amount·(in − blur): the blur's error scaled by amount, two more roundings
        (format!("sharpen:amount={amount},sigma={sigma},{b}"), amount as f32 * blur + 2.0 * EPS * c.abs()),
    ]
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 48, ..ProptestConfig::default() })]

    #[test]
    fn constant_images_stay_constant_under_every_blur_and_border(
        w in 1usize..=24, h in 1usize..=24, c in -2.0f32..2.0,
        sigma in 0.3f64..4.0, radius in 1usize..=6, amount in 0.0f64..3.0, border in 0usize..5,
    ) {
        let p = Plane::filled(w, h, c).unwrap();
        for (step, tol) in constant_cases(sigma, radius, amount, BORDERS[border], c) {
            let d = run(&step, p.clone()).as_slice().iter().map(|v| (v - c).abs()).fold(0.0, f32::max);
            prop_assert!(d <= tol, "{step} on {w}×{h} of {c}: off by {d:e} > {tol:e}");
        }
    }

    #[test]
    fn constant_images_stay_constant_under_convolve_and_resize(
        w in 1usize..=24, h in 1usize..=24, c in 0.0f32..2.0, border in 0usize..5,
        k in prop::collection::vec(0.05f64..1.0, 9),
        w2 in 1usize..=24, h2 in 1usize..=24, filter in 0usize..6,
    ) {
        let p = Plane::filled(w, h, c).unwrap();
        let m: Vec<String> = k.chunks(3).map(|r| r.iter().map(|v| format!("{v}")).collect::<Vec<_>>().join(" ")).collect();
        let step = format!("convolve:kernel={},normalize=true,border={},fill={c}", m.join(";"), BORDERS[border]);
        // 9 positive taps (or 3 + 3 when the matrix happens to be rank 1): one 9-term pass
        let tol = (2.0 * 9.0 + 1.0) * EPS * c;
        let d = run(&step, p.clone()).as_slice().iter().map(|v| (v - c).abs()).fold(0.0, f32::max);
        prop_assert!(d <= tol, "{step}: off by {d:e} > {tol:e}");

        let name = ["nearest", "box", "bilinear", "bicubic", "mitchell", "lanczos3"][filter];
        let step = format!("resize:width={w2},height={h2},fit=fill,filter={name}");
        // Weights renormalised per output sample; the taps per axis are at most
        // 2·3·max(scale, 1) + 2 (lanczos3's support 3, widened by the
        // downscaling factor), and Σ|w| ≤ 1.5 for the kernels with negative lobes.
        let taps = |from: usize, to: usize| 6.0 * (from as f32 / to as f32).max(1.0) + 2.0;
        let tol = 2.0 * (taps(w, w2) + taps(h, h2)) * 1.5 * EPS * c + EPS * c;
        let out = run(&step, p);
        prop_assert_eq!((out.width(), out.height()), (w2, h2));
        let d = out.as_slice().iter().map(|v| (v - c).abs()).fold(0.0, f32::max);
        prop_assert!(d <= tol, "{step} from {w}×{h}: off by {d:e} > {tol:e}");
    }

    #[test]
    fn filters_commute_with_a_horizontal_flip(
        p in image(24), sigma in 0.3f64..4.0, radius in 1usize..=4, border in 0usize..5,
    ) {
        let b = format!("border={},fill=0.25", BORDERS[border]);
        // Symmetric kernels are folded in pairs, k·(a + b), and a + b = b + a
        // exactly; the vertical pass is untouched by the flip: bit-exact.
        // The median selects a sample: exact. Sobel's x derivative is
        // −a + 0·c + b, which under the flip becomes exactly its negation.
        for step in [
            format!("gauss:sigma={sigma},method=exact,{b}"),
            format!("median:radius={radius},{b}"),
            format!("sobel:output=magnitude,{b}"),
            format!("sobel:output=y,{b}"),
            format!("canny:sigma={sigma},low=0.05,high=0.2,{b}"),
            format!("canny:sigma={sigma},{b}"),
        ] {
            let a = run(&step, flip_h(&p));
            let f = flip_h(&run(&step, p.clone()));
            prop_assert!(a == f, "{step}: differs by {:e}", worst(&a, &f));
        }
        let step = format!("sobel:output=x,{b}");
        let a = run(&step, flip_h(&p));
        let mut f = flip_h(&run(&step, p.clone()));
        f.as_mut_slice().iter_mut().for_each(|v| *v = -*v);
        prop_assert!(a == f, "{step}: differs by {:e}", worst(&a, &f));
        // Box: running sums in f64 visit the row in the other order; the sums
        // agree to ~1e-15 and may round to neighbouring f32 values: one ulp of
        // values below 1 is at most ε.
        let step = format!("box:radius={radius},{b}");
        let d = worst(&run(&step, flip_h(&p)), &flip_h(&run(&step, p.clone())));
        prop_assert!(d <= EPS, "{step}: differs by {d:e}");
    }

    #[test]
    fn normalised_kernels_preserve_the_mean_under_wrap(
        p in image(24), k in prop::collection::vec(0.05f64..1.0, 25), side in 0usize..2, sigma in 0.3f64..5.0,
    ) {
        let mean = |q: &Plane| q.as_slice().iter().map(|&v| f64::from(v)).sum::<f64>() / q.as_slice().len() as f64;
        let n = [3, 5][side];
        let m: Vec<String> = k[..n * n]
            .chunks(n)
            .map(|r| r.iter().map(|v| format!("{v}")).collect::<Vec<_>>().join(" "))
            .collect();
        // With wrap, every input sample receives the kernel's whole weight
        // (Σ K = 1) once the outputs are summed, whatever the image size, so the
        // mean is kept exactly in exact arithmetic. Each output is off by at most
        // (2n² + 1)·ε·M (one n²-term pass, M < 1 the largest sample), and so is the mean.
        let step = format!("convolve:kernel={},normalize=true,border=wrap", m.join(";"));
        let d = (mean(&run(&step, p.clone())) - mean(&p)).abs();
        prop_assert!(d <= (2 * n * n + 1) as f64 * f64::from(EPS), "{step}: mean moved by {d:e}");
        let step = format!("gauss:sigma={sigma},method=exact,border=wrap");
        let d = (mean(&run(&step, p.clone())) - mean(&p)).abs();
        let tol = (2 * gauss_taps(sigma) + 1) as f64 * f64::from(EPS);
        prop_assert!(d <= tol, "{step}: mean moved by {d:e} > {tol:e}");
    }

    #[test]
    fn the_fast_gaussian_stays_within_its_documented_bound(
        p in image(24), sigma in 2.0f64..10.0, border in 0usize..5,
    ) {
        // `gauss` doc and ops::filter::MAX_KERNEL_L1: for σ ≥ 2 the cascade's
        // 2-D kernel is within L1 0.044 of the exact (4σ) Gaussian, so for
        // samples in [0, M] the outputs differ by at most 0.022·M, plus the
        // cascade's f32 rounding (drift_bound); the exact path's own rounding
        // (2n+1)·ε·M is added. Any border rule maps every
        // tap to a sample in [0, M] (or the fill 0.25 < M's range here).
        let b = format!("border={},fill=0.25", BORDERS[border]);
        let fast = run(&format!("gauss:sigma={sigma},method=fast,{b}"), p.clone());
        let exact = run(&format!("gauss:sigma={sigma},method=exact,{b}"), p.clone());
        let m = p.as_slice().iter().fold(0.25f32, |a, &v| a.max(v));
        let tol = (pumice::ops::filter::MAX_KERNEL_L1 / 2.0 + pumice::ops::filter::drift_bound(sigma)) as f32 * m
            + (2 * gauss_taps(sigma) + 1) as f32 * EPS * m;
        let d = worst(&fast, &exact);
        prop_assert!(d <= tol, "sigma {sigma}, {b}: {d:e} > {tol:e}");
    }

    #[test]
    fn moves_undone_are_exact(p in image(24)) {
        for step in ["flip:horizontal", "flip:vertical", "flip:both", "transpose"] {
            let back = run(step, run(step, p.clone()));
            prop_assert!(back == p, "{step} twice");
        }
        let mut q = p.clone();
        for _ in 0..4 {
            q = run("rotate:90", q);
        }
        prop_assert!(q == p, "four quarter turns");
        let q = run("rotate:-90", run("rotate:90", p.clone()));
        prop_assert!(q == p, "a quarter turn and back");
    }

    #[test]
    fn invert_twice_is_exact_on_multiples_of_two_to_the_minus_24(
        w in 1usize..=24, h in 1usize..=24, codes in prop::collection::vec(0u32..=1 << 24, 576),
    ) {
        // 1 − v is exact for v = k·2⁻²⁴ in [0, 1] (the result is again such a
        // multiple, representable in f32's 24-bit significand), so inverting
        // twice gives v back bit for bit. For other values it need not: 1 − 1e-10
        // rounds to 1.
        let v: Vec<f32> = codes[..w * h].iter().map(|&k| k as f32 / (1u32 << 24) as f32).collect();
        let p = Plane::from_vec(w, h, v).unwrap();
        prop_assert!(run("invert", run("invert", p.clone())) == p);
    }
}
