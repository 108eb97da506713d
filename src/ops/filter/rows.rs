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

/// `out[x] = Σ_{k < window} line[x + k]` for `x < out.len()` (needs
/// `line.len() ≥ out.len() + window − 1`), by running sums in f64: each step
/// adds the sample entering the window and subtracts the one leaving it. The
/// row is cut into four pieces whose sums run side by side, so the core
/// overlaps four dependency chains instead of waiting on one; each piece
/// starts from a direct sum, so rounding does not carry across pieces.
pub fn running_sums(line: &[f64], window: usize, out: &mut [f64]) {
    const PIECES: usize = 4;
    let n = out.len();
    assert!(window >= 1 && line.len() + 1 >= n + window, "running_sums: line too short");
    if n < 16 * PIECES {
        if n > 0 {
            running_sums_from(line, window, out, 0, n);
        }
        return;
    }
    let piece = n.div_ceil(PIECES);
    let starts: [usize; PIECES] = std::array::from_fn(|c| c * piece);
    let mut sums: [f64; PIECES] = starts.map(|x0| line[x0..x0 + window].iter().sum());
    for (c, &x0) in starts.iter().enumerate() {
        out[x0] = sums[c];
    }
    // The last piece is the shortest; run all four together over its length.
    let shared = n - starts[PIECES - 1];
    for i in 1..shared {
        for c in 0..PIECES {
            let x = starts[c] + i;
            sums[c] += line[x + window - 1] - line[x - 1];
            out[x] = sums[c];
        }
    }
    for c in 0..PIECES - 1 {
        for x in starts[c] + shared..starts[c] + piece {
            sums[c] += line[x + window - 1] - line[x - 1];
            out[x] = sums[c];
        }
    }
}

/// One running sum over `out[x0 .. x0 + len]`.
fn running_sums_from(line: &[f64], window: usize, out: &mut [f64], x0: usize, len: usize) {
    let mut s: f64 = line[x0..x0 + window].iter().sum();
    out[x0] = s;
    for x in x0 + 1..x0 + len {
        s += line[x + window - 1] - line[x - 1];
        out[x] = s;
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn running_sums_equal_direct_sums_for_every_length() {
        let line: Vec<f64> = (0..400).map(|i| ((i * 7919) % 257) as f64 / 257.0 - 0.3).collect();
        for window in [1, 2, 5, 11, 64] {
            for n in [0, 1, 3, 63, 64, 65, 67, 100, 400 - window + 1] {
                let mut out = vec![f64::NAN; n];
                running_sums(&line[..n + window - 1], window, &mut out);
                for (x, &got) in out.iter().enumerate() {
                    let want: f64 = line[x..x + window].iter().sum();
                    // f64 running sums of ≤ 400 steps on values < 1: 1e-12 is ample
                    assert!((got - want).abs() < 1e-12, "window {window}, n {n}, x {x}: {got} vs {want}");
                }
            }
        }
    }
}
