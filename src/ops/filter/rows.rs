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

/// `out[x] = Σ_k weights[x·taps + k] · input[start[x] + k]` over
/// `k < count[x]`: one dot product per output sample (a resampling pass along
/// a row). Taps are summed in eight interleaved lanes (tap k into lane k mod 8,
/// the lanes then added pairwise), the rest one by one: the same order on every
/// CPU, and eight independent sums instead of one chain.
#[multiversion(targets("x86_64+avx512f+avx512bw+avx512vl+avx2+fma", "x86_64+avx2+fma"))]
pub fn weighted_gather(
    out: &mut [f32],
    input: &[f32],
    start: &[usize],
    count: &[usize],
    weights: &[f32],
    taps: usize,
) {
    for (((o, &s), &n), w) in out.iter_mut().zip(start).zip(count).zip(weights.chunks_exact(taps)) {
        let (a, w) = (&input[s..s + n], &w[..n]);
        let mut lanes = [0.0f32; 8];
        let (mut a8, mut w8) = (a.chunks_exact(8), w.chunks_exact(8));
        for (x, y) in (&mut a8).zip(&mut w8) {
            for i in 0..8 {
                lanes[i] += x[i] * y[i];
            }
        }
        let mut tail = 0.0f32;
        for (x, y) in a8.remainder().iter().zip(w8.remainder()) {
            tail += x * y;
        }
        *o = ((lanes[0] + lanes[4]) + (lanes[1] + lanes[5]))
            + ((lanes[2] + lanes[6]) + (lanes[3] + lanes[7]))
            + tail;
    }
}
