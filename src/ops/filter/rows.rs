//! Row arithmetic for the filter engines: the few whole-row loops every linear
//! filter is built from, compiled for several instruction sets and chosen at run
//! time (the `multiversion` crate), so a portable binary still uses AVX2/AVX-512.
//! Each is a plain `zip` so the compiler vectorises it; none fuses multiply and
//! add, so results are the same on every CPU.

use multiversion::multiversion;

use crate::color::srgb;
use crate::ops::CodeTable;

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

/// Columns [`weighted_rows`] sums at once: eight 256-bit vectors, held in
/// registers while the rows are read.
const SUM_BLOCK: usize = 64;

/// `out[x] = Σ_k weights[k] · rows[k][x]` (`rows` non-empty, one per weight,
/// each at least as long as `out`), summed in order: the first product, then
/// each next one added, the same arithmetic as [`scale`] then [`add_scaled`]
/// row by row, but in one pass over `out`.
#[multiversion(targets("x86_64+avx512f+avx512bw+avx512vl+avx2+fma", "x86_64+avx2+fma"))]
pub fn weighted_rows(out: &mut [f32], weights: &[f32], rows: &[&[f32]]) {
    let w = out.len();
    let full = w - w % SUM_BLOCK;
    for x0 in (0..full).step_by(SUM_BLOCK) {
        let block = |row: &[f32]| {
            let mut v = [0.0f32; SUM_BLOCK];
            v.copy_from_slice(&row[x0..x0 + SUM_BLOCK]);
            v
        };
        let first = block(rows[0]);
        let mut acc = [0.0f32; SUM_BLOCK];
        for (a, &s) in acc.iter_mut().zip(&first) {
            *a = weights[0] * s;
        }
        for (row, &wk) in rows[1..].iter().zip(&weights[1..]) {
            let v = block(row);
            for (a, &s) in acc.iter_mut().zip(&v) {
                *a += wk * s;
            }
        }
        out[x0..x0 + SUM_BLOCK].copy_from_slice(&acc);
    }
    for (x, o) in out.iter_mut().enumerate().skip(full) {
        let mut a = weights[0] * rows[0][x];
        for (row, &wk) in rows[1..].iter().zip(&weights[1..]) {
            a += wk * row[x];
        }
        *o = a;
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
        let (input, w) = (&input[s..s + n], &w[..n]);
        let mut acc = [[0.0f32; LANES]; 4];
        let mut quads = input.chunks_exact(4).zip(w.chunks_exact(4));
        for (a, wk) in &mut quads {
            for j in 0..4 {
                for r in 0..LANES {
                    acc[j][r] += wk[j] * a[j][r];
                }
            }
        }
        let done = n - n % 4;
        for (j, (a, &wk)) in input[done..].iter().zip(&w[done..]).enumerate() {
            for r in 0..LANES {
                acc[j][r] += wk * a[r];
            }
        }
        for r in 0..LANES {
            o[r] = (acc[0][r] + acc[1][r]) + (acc[2][r] + acc[3][r]);
        }
    }
}

/// `lanes[x][l] = rows[l·w + x]` for the rows of `rows` (`w` samples each, at
/// most LANES rows); lanes past them are left alone. A full group is read
/// LANES columns at a time, so each lane vector is written whole.
#[multiversion(targets("x86_64+avx512f+avx512bw+avx512vl+avx2+fma", "x86_64+avx2+fma"))]
pub fn interleave(rows: &[f32], w: usize, lanes: &mut [[f32; LANES]]) {
    let lanes = &mut lanes[..w];
    if rows.len() == LANES * w {
        let r: [&[f32]; LANES] = std::array::from_fn(|l| &rows[l * w..(l + 1) * w]);
        for (x, e) in lanes.iter_mut().enumerate() {
            *e = std::array::from_fn(|l| r[l][x]);
        }
    } else {
        for (l, row) in rows.chunks_exact(w).enumerate() {
            for (e, &v) in lanes.iter_mut().zip(row) {
                e[l] = v;
            }
        }
    }
}

/// [`interleave`] with each sample looked up in `table` on the way:
/// `lanes[x][l] = table[round(rows[l·w + x] · (N − 1))]`, the index clamped
/// to the table, exactly as [`SampleMap::map`] of a map whose
/// [`SampleMap::code_table`] this is. Indices are computed a block of each
/// row at a time in vector registers; the loads that follow fill the lane
/// vectors directly, so the lookup takes the place of the interleave's
/// shuffles rather than adding a pass (on a linear-light 4000×3000 RGB → 1000×750
/// reduction the separate lookup was a fifth of the time, `perf`).
///
/// [`SampleMap::map`]: crate::ops::SampleMap::map
/// [`SampleMap::code_table`]: crate::ops::SampleMap::code_table
pub fn interleave_through_table(rows: &[f32], w: usize, lanes: &mut [[f32; LANES]], table: CodeTable) {
    match table {
        CodeTable::U8(t) => interleave_looked_up::<256>(rows, w, lanes, t),
        CodeTable::U16(t) => interleave_looked_up::<65536>(rows, w, lanes, t),
    }
}

fn interleave_looked_up<const N: usize>(
    rows: &[f32],
    w: usize,
    lanes: &mut [[f32; LANES]],
    table: &[f32; N],
) {
    const BLOCK: usize = 256;
    let n = rows.len() / w.max(1);
    let mut indices = [[0u16; BLOCK]; LANES];
    for (b, block) in lanes[..w].chunks_mut(BLOCK).enumerate() {
        let x0 = b * BLOCK;
        for (l, idx) in indices.iter_mut().enumerate().take(n) {
            srgb::table_indices::<N>(&rows[l * w + x0..l * w + x0 + block.len()], idx);
        }
        let at = |l: usize, x: usize| table[usize::from(indices[l][x]) & (N - 1)];
        if n == LANES {
            for (x, e) in block.iter_mut().enumerate() {
                *e = std::array::from_fn(|l| at(l, x));
            }
        } else {
            for (x, e) in block.iter_mut().enumerate() {
                for (l, v) in e.iter_mut().enumerate().take(n) {
                    *v = at(l, x);
                }
            }
        }
    }
}

/// `rows[l·w + x] = lanes[x][l]`, for the rows of `rows`: a
/// block of columns at a time, so the block's lanes stay in L1 while each row
/// takes its part.
#[multiversion(targets("x86_64+avx512f+avx512bw+avx512vl+avx2+fma", "x86_64+avx2+fma"))]
pub fn deinterleave(lanes: &[[f32; LANES]], rows: &mut [f32], w: usize) {
    const BLOCK: usize = 64;
    for (b, block) in lanes[..w].chunks(BLOCK).enumerate() {
        for (l, row) in rows.chunks_exact_mut(w).enumerate() {
            for (o, e) in row[b * BLOCK..].iter_mut().zip(block) {
                *o = e[l];
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn interleave_through_a_table_equals_interleave_then_the_lookup() {
        // 8- and 16-bit tables; full and short groups; widths across the
        // index block of 256; samples between codes, out of range, ±∞ and NaN.
        let odd = [f32::NAN, f32::INFINITY, f32::NEG_INFINITY, -0.2, 1.7, 0.5 / 255.0, 0.999_9];
        for levels in [255, 65535] {
            let table = srgb::decode_code_table(levels).unwrap();
            for w in [1, 255, 256, 257, 600] {
                for n in [1, 5, LANES] {
                    let rows: Vec<f32> = (0..n * w)
                        .map(|i| if i % 13 == 0 { odd[i / 13 % odd.len()] } else { (i % 301) as f32 / 300.0 })
                        .collect();
                    let mut want = vec![[-1.0f32; LANES]; w];
                    interleave(&rows, w, &mut want);
                    let looked_up: Vec<f32> = want
                        .iter()
                        .flat_map(|e| {
                            let mut e = *e;
                            srgb::decode_in_place(&mut e[..n], Some(levels));
                            e
                        })
                        .collect();
                    let mut got = vec![[-1.0f32; LANES]; w];
                    interleave_through_table(&rows, w, &mut got, table);
                    let bits = |v: &[f32]| v.iter().map(|x| x.to_bits()).collect::<Vec<_>>();
                    assert_eq!(
                        bits(got.as_flattened()),
                        bits(&looked_up),
                        "levels {levels}, w {w}, {n} rows"
                    );
                }
            }
        }
    }

    #[test]
    fn weighted_rows_is_scale_then_add_scaled_bit_for_bit() {
        // across the block boundary and in the tail, for 1 to 7 rows
        let mut state = 0x9E37_79B9u32;
        let mut next = move || {
            state ^= state << 13;
            state ^= state >> 17;
            state ^= state << 5;
            (state >> 8) as f32 / (1 << 24) as f32 - 0.5
        };
        for w in [1, 7, 63, 64, 65, 130, 200] {
            for n in 1..=7 {
                let data: Vec<Vec<f32>> = (0..n).map(|_| (0..w).map(|_| next()).collect()).collect();
                let weights: Vec<f32> = (0..n).map(|_| next()).collect();
                let rows: Vec<&[f32]> = data.iter().map(|r| r.as_slice()).collect();
                let mut want = vec![0.0f32; w];
                scale(&mut want, weights[0], rows[0]);
                for k in 1..n {
                    add_scaled(&mut want, weights[k], rows[k]);
                }
                let mut got = vec![f32::NAN; w];
                weighted_rows(&mut got, &weights, &rows);
                assert_eq!(
                    got.iter().map(|v| v.to_bits()).collect::<Vec<_>>(),
                    want.iter().map(|v| v.to_bits()).collect::<Vec<_>>(),
                    "w={w} n={n}"
                );
            }
        }
    }
}
