//! Row arithmetic for the filter engines: the few whole-row loops every linear
//! filter is built from, compiled for several instruction sets and chosen at run
//! time (the `multiversion` crate), so a portable binary still uses AVX2/AVX-512.
//! Each is a plain `zip` so the compiler vectorises it; none fuses multiply and
//! add, so results are the same on every CPU.

use multiversion::multiversion;

/// `acc[x] = w · a[x]`.
#[multiversion(targets("x86_64+avx512f+avx512bw+avx512vl+avx2+fma", "x86_64+avx2+fma"))]
pub fn scale(acc: &mut [f32], w: f32, a: &[f32]) {
    for (o, &s) in acc.iter_mut().zip(a) {
        *o = w * s;
    }
}

/// `acc[x] += w · a[x]`.
#[multiversion(targets("x86_64+avx512f+avx512bw+avx512vl+avx2+fma", "x86_64+avx2+fma"))]
pub fn add_scaled(acc: &mut [f32], w: f32, a: &[f32]) {
    for (o, &s) in acc.iter_mut().zip(a) {
        *o += w * s;
    }
}

/// `acc[x] += w · (a[x] + b[x])`: two taps of a symmetric kernel for one multiply.
#[multiversion(targets("x86_64+avx512f+avx512bw+avx512vl+avx2+fma", "x86_64+avx2+fma"))]
pub fn add_scaled_pair(acc: &mut [f32], w: f32, a: &[f32], b: &[f32]) {
    for ((o, &s), &t) in acc.iter_mut().zip(a).zip(b) {
        *o += w * (s + t);
    }
}

/// Rows resampled together, one per lane (see [`weighted_gather_lanes`]).
pub const LANES: usize = 8;

/// `out[x][r] = Σ_k weights[x·taps + k] · input[start[x] + k][r]` over
/// `k < count[x]`, for the [`LANES`] rows `r` held side by side: a resampling
/// pass along eight rows at once, each tap one multiply-add of a whole lane
/// vector by a broadcast weight (against a dot product per output sample along
/// one row, this is 3–4× fewer instructions for the dozen taps of a Lanczos-3
/// reduction). Taps are summed in order, the same on every CPU.
#[multiversion(targets("x86_64+avx512f+avx512bw+avx512vl+avx2+fma", "x86_64+avx2+fma"))]
pub fn weighted_gather_lanes(
    out: &mut [[f32; LANES]],
    input: &[[f32; LANES]],
    start: &[usize],
    count: &[usize],
    weights: &[f32],
    taps: usize,
) {
    for (((o, &s), &n), w) in out.iter_mut().zip(start).zip(count).zip(weights.chunks_exact(taps)) {
        let mut acc = [0.0f32; LANES];
        for (a, &wk) in input[s..s + n].iter().zip(&w[..n]) {
            for r in 0..LANES {
                acc[r] += wk * a[r];
            }
        }
        *o = acc;
    }
}
