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

/// A sample type rows are interleaved into: f32 itself, or f64 for running
/// sums.
pub trait LaneSample: Copy {
    fn from_f32(v: f32) -> Self;
    fn to_f32(self) -> f32;
}

impl LaneSample for f32 {
    fn from_f32(v: f32) -> f32 {
        v
    }
    fn to_f32(self) -> f32 {
        self
    }
}

impl LaneSample for f64 {
    fn from_f32(v: f32) -> f64 {
        f64::from(v)
    }
    fn to_f32(self) -> f32 {
        self as f32
    }
}

/// `lanes[x][l] = rows[l·w + x]` for the rows of `rows` (`w` samples each, at
/// most LANES rows); lanes past them are left alone. A full group is read
/// LANES columns at a time, so each lane vector is written whole.
#[multiversion(targets("x86_64+avx512f+avx512bw+avx512vl+avx2+fma", "x86_64+avx2+fma"))]
pub fn interleave<T: LaneSample>(rows: &[f32], w: usize, lanes: &mut [[T; LANES]]) {
    let lanes = &mut lanes[..w];
    if rows.len() == LANES * w {
        let r: [&[f32]; LANES] = std::array::from_fn(|l| &rows[l * w..(l + 1) * w]);
        for (x, e) in lanes.iter_mut().enumerate() {
            *e = std::array::from_fn(|l| T::from_f32(r[l][x]));
        }
    } else {
        for (l, row) in rows.chunks_exact(w).enumerate() {
            for (e, &v) in lanes.iter_mut().zip(row) {
                e[l] = T::from_f32(v);
            }
        }
    }
}

/// `rows[l·w + x] = lanes[x][l]` (rounded to f32), for the rows of `rows`: a
/// block of columns at a time, so the block's lanes stay in L1 while each row
/// takes its part.
#[multiversion(targets("x86_64+avx512f+avx512bw+avx512vl+avx2+fma", "x86_64+avx2+fma"))]
pub fn deinterleave<T: LaneSample>(lanes: &[[T; LANES]], rows: &mut [f32], w: usize) {
    const BLOCK: usize = 64;
    for (b, block) in lanes[..w].chunks(BLOCK).enumerate() {
        for (l, row) in rows.chunks_exact_mut(w).enumerate() {
            for (o, e) in row[b * BLOCK..].iter_mut().zip(block) {
                *o = e[l].to_f32();
            }
        }
    }
}
