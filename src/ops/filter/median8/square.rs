//! The square window's 8-bit median with its networks compiled in: every
//! comparator is a min/max on a whole vector of 32 codes held in registers,
//! so a window's codes are loaded once and only the median is stored.
//!
//! The networks are `PairNetwork`'s, written out here as literal tables
//! (the compiler needs them fixed to keep the codes in registers); a test
//! checks each table against the generator, so they cannot drift apart.

use multiversion::multiversion;

use super::{padded_code_row, values_of};
use crate::raster::Plane;
use crate::tile::{self, Border};

/// Codes per vector: one 256-bit register of bytes.
const LANES: usize = 32;

/// One vector of codes, lane by lane; plain arrays, so the compiler maps
/// each min/max onto one vector instruction.
type Lanes = [u8; LANES];

#[inline(always)]
fn lo(a: Lanes, b: Lanes) -> Lanes {
    std::array::from_fn(|i| a[i].min(b[i]))
}

#[inline(always)]
fn hi(a: Lanes, b: Lanes) -> Lanes {
    std::array::from_fn(|i| a[i].max(b[i]))
}

/// One comparator on the vectors `$v`: `Both` halves, or only the `Min`
/// (into `$a`) or the `Max` (into `$b`) when nothing reads the other.
macro_rules! comparator {
    ($v:ident, $a:literal, $b:literal, Both) => {{
        let (x, y) = ($v[$a], $v[$b]);
        $v[$a] = lo(x, y);
        $v[$b] = hi(x, y);
    }};
    ($v:ident, $a:literal, $b:literal, Min) => {
        $v[$a] = lo($v[$a], $v[$b])
    };
    ($v:ident, $a:literal, $b:literal, Max) => {
        $v[$b] = hi($v[$a], $v[$b])
    };
}

/// The halves a table entry keeps, as `(keep_min, keep_max)`.
#[cfg(test)]
macro_rules! keeps {
    (Both) => {
        (true, true)
    };
    (Min) => {
        (true, false)
    };
    (Max) => {
        (false, true)
    };
}

/// A network on `$n` vectors: the function `$run` applying it, and (for the
/// test against the generator) its table of `(a, b, keep_min, keep_max)`.
macro_rules! fixed_network {
    ($table:ident, $run:ident, $n:literal; $(($a:literal $b:literal $keep:ident))*) => {
        #[cfg(test)]
        const $table: &[(usize, usize, (bool, bool))] = &[$(($a, $b, keeps!($keep))),*];

        #[inline(always)]
        fn $run(v: &mut [Lanes; $n]) {
            $(comparator!(v, $a, $b, $keep);)*
        }
    };
}

// Radius 1 (3×3): the networks of `PairNetwork::new(1)`.
fixed_network!(ROW_SORT_3, row_sort_3, 3; (0 1 Both) (0 2 Both) (1 2 Both));
fixed_network!(SHARED_3, shared_3, 6;
    (2 3 Both) (0 2 Max) (1 2 Both) (1 5 Both) (2 4 Both) (3 5 Min) (1 2 Both) (3 4 Both));
fixed_network!(LAST_3, last_3, 7;
    (0 4 Max) (1 5 Max) (2 6 Min) (2 4 Max) (3 5 Min) (3 4 Min));

// Radius 2 (5×5): the networks of `PairNetwork::new(2)`.
fixed_network!(ROW_SORT_5, row_sort_5, 5;
    (0 1 Both) (2 3 Both) (0 2 Both) (1 3 Both) (1 2 Both) (0 4 Both) (2 4 Both) (1 2 Both) (3 4 Both));
fixed_network!(SHARED_5, shared_5, 20;
    (4 5 Both) (14 15 Both) (5 7 Both) (8 10 Both) (9 11 Both) (12 14 Both) (5 6 Both) (9 10 Both)
    (13 14 Both) (0 4 Both) (1 5 Both) (2 6 Both) (8 12 Both) (10 14 Both) (11 15 Both) (2 4 Both)
    (3 5 Both) (10 12 Both) (11 13 Both) (1 2 Both) (3 4 Both) (5 6 Both) (9 10 Both) (11 12 Both)
    (13 14 Both) (0 8 Max) (1 9 Both) (2 10 Both) (3 11 Both) (4 12 Both) (5 13 Both) (6 14 Both)
    (7 15 Min) (4 8 Both) (5 9 Both) (6 10 Both) (7 11 Both) (2 4 Both) (3 5 Both) (6 8 Both)
    (7 9 Both) (10 12 Both) (11 13 Both) (1 2 Both) (3 4 Both) (5 6 Both) (7 8 Both) (9 10 Both)
    (11 12 Both) (13 14 Min) (1 17 Max) (2 18 Max) (3 19 Max) (8 16 Both) (9 17 Both) (10 18 Min)
    (11 19 Min) (4 8 Max) (5 9 Max) (6 10 Both) (7 11 Both) (12 16 Min) (13 17 Min) (6 8 Max)
    (7 9 Both) (10 12 Both) (11 13 Min) (7 8 Both) (9 10 Both) (11 12 Both));
fixed_network!(LAST_5, last_5, 11;
    (4 6 Both) (5 7 Min) (5 6 Both) (0 4 Max) (1 5 Both) (2 4 Both) (3 5 Both) (1 2 Max)
    (3 4 Both) (2 10 Max) (4 8 Max) (5 9 Min) (6 10 Min) (3 5 Max) (6 8 Min) (5 6 Min));

/// The compiled networks of one radius, on `K = 2r + 1` codes per row, `S =
/// 2r·K` shared codes and `L = 2K + 1` codes in the last stage (see
/// `PairNetwork`).
trait SquareNets<const K: usize, const S: usize, const L: usize> {
    /// The slots of `shared` holding the candidates, smallest first.
    const CANDIDATES: &'static [usize];
    /// The slot of `last` holding the median.
    const OUT: usize;
    /// Sorts a row's `K` horizontal neighbours; slot j ends with rank j.
    fn row_sort(v: &mut [Lanes; K]);
    fn shared(v: &mut [Lanes; S]);
    fn last(v: &mut [Lanes; L]);
    /// [`sort_row`] for this radius, compiled for the machine's vector width.
    fn sort_row_dispatch(padded: &[u8], sorted: &mut [Vec<u8>]);
    /// [`median_pair_row`] for this radius, compiled likewise.
    fn pair_row_dispatch(common: &[&[u8]; S], own: &[[&[u8]; K]; 2], pair: usize, medians: &mut [Vec<u8>; 2]);
}

/// Implements [`SquareNets`] for `$radius` from its compiled networks, with
/// the two entry points compiled per instruction set.
macro_rules! square_nets {
    ($radius:ident, $k:literal, $s:literal, $l:literal, $candidates:expr, $out:literal,
     $row_sort:ident, $shared:ident, $last:ident, $sort_row:ident, $pair_row:ident) => {
        struct $radius;

        impl SquareNets<$k, $s, $l> for $radius {
            const CANDIDATES: &'static [usize] = $candidates;
            const OUT: usize = $out;
            #[inline(always)]
            fn row_sort(v: &mut [Lanes; $k]) {
                $row_sort(v)
            }
            #[inline(always)]
            fn shared(v: &mut [Lanes; $s]) {
                $shared(v)
            }
            #[inline(always)]
            fn last(v: &mut [Lanes; $l]) {
                $last(v)
            }
            fn sort_row_dispatch(padded: &[u8], sorted: &mut [Vec<u8>]) {
                $sort_row(padded, sorted)
            }
            fn pair_row_dispatch(
                common: &[&[u8]; $s],
                own: &[[&[u8]; $k]; 2],
                pair: usize,
                medians: &mut [Vec<u8>; 2],
            ) {
                $pair_row(common, own, pair, medians)
            }
        }

        #[multiversion(targets("x86_64+avx512f+avx512bw+avx512vl+avx2+fma", "x86_64+avx2+fma"))]
        fn $sort_row(padded: &[u8], sorted: &mut [Vec<u8>]) {
            sort_row::<$k, $s, $l, $radius>(padded, sorted)
        }

        #[multiversion(targets("x86_64+avx512f+avx512bw+avx512vl+avx2+fma", "x86_64+avx2+fma"))]
        fn $pair_row(common: &[&[u8]; $s], own: &[[&[u8]; $k]; 2], pair: usize, medians: &mut [Vec<u8>; 2]) {
            median_pair_row::<$k, $s, $l, $radius>(common, own, pair, medians)
        }
    };
}

square_nets!(Radius1, 3, 6, 7, &[1, 2, 3, 4], 3, row_sort_3, shared_3, last_3, sort_row_3, pair_row_3);
square_nets!(
    Radius2,
    5,
    20,
    11,
    &[7, 8, 9, 10, 11, 12],
    5,
    row_sort_5,
    shared_5,
    last_5,
    sort_row_5,
    pair_row_5
);

/// The vector of codes `row[x0..x0 + LANES]`.
#[inline(always)]
fn load(row: &[u8], x0: usize) -> Lanes {
    let mut v = [0u8; LANES];
    v.copy_from_slice(&row[x0..x0 + LANES]);
    v
}

/// Sorts each code of the padded code row across its `K` horizontal
/// neighbours: `sorted[j][x]` is rank j of `padded[x..x + K]`.
#[inline(always)]
fn sort_row<const K: usize, const S: usize, const L: usize, N: SquareNets<K, S, L>>(
    padded: &[u8],
    sorted: &mut [Vec<u8>],
) {
    for x0 in (0..sorted[0].len()).step_by(LANES) {
        let mut v = [[0u8; LANES]; K];
        for (j, lanes) in v.iter_mut().enumerate() {
            *lanes = load(padded, x0 + j);
        }
        N::row_sort(&mut v);
        for (row, lanes) in sorted.iter_mut().zip(&v) {
            row[x0..x0 + LANES].copy_from_slice(lanes);
        }
    }
}

/// The median of the `w`-wide code plane `codes` over the square window of
/// side `K`, for the output rows `y0..` of `band`, two rows at a time.
fn median_band<const K: usize, const S: usize, const L: usize, N: SquareNets<K, S, L>>(
    codes: &[u8],
    w: usize,
    y0: usize,
    band: &mut [f32],
    border: Border,
    fill: u8,
) {
    let r = K / 2;
    let reach = r as isize;
    // rows are sorted in whole vectors: the tail past w is never stored
    let wide = w.next_multiple_of(LANES);
    // the ring holds the 2r + 2 code rows a pair of output rows reads
    let ring_len = 2 * r + 2;
    let slot_of = |c: isize| c.rem_euclid(ring_len as isize) as usize;
    let mut padded = vec![fill; wide + 2 * r];
    // ring[slot_of(c)][j]: rank j of code row c's horizontal neighbours;
    // held[slot] names the code row a slot holds
    let mut ring: Vec<Vec<Vec<u8>>> = vec![vec![vec![0u8; wide]; K]; ring_len];
    let mut held: Vec<Option<isize>> = vec![None; ring_len];
    let mut medians = [vec![0u8; wide], vec![0u8; wide]];
    let rows = band.len() / w;
    for i in (0..rows).step_by(2) {
        let y = (y0 + i) as isize;
        let pair = (rows - i).min(2);
        for c in y - reach..=y + reach + pair as isize - 1 {
            let slot = slot_of(c);
            if held[slot] != Some(c) {
                padded_code_row(codes, w, c, r, border, fill, &mut padded[..w + 2 * r]);
                N::sort_row_dispatch(&padded, &mut ring[slot]);
                held[slot] = Some(c);
            }
        }
        // the 2r rows both outputs read, then the row each reads alone
        let common: [&[u8]; S] =
            std::array::from_fn(|s| ring[slot_of(y - reach + 1 + (s / K) as isize)][s % K].as_slice());
        let own: [[&[u8]; K]; 2] =
            [y - reach, y + reach + 1].map(|c| std::array::from_fn(|j| ring[slot_of(c)][j].as_slice()));
        N::pair_row_dispatch(&common, &own, pair, &mut medians);
        for (out, codes) in band[i * w..(i + pair) * w].chunks_exact_mut(w).zip(&medians) {
            values_of(&codes[..w], out);
        }
    }
}

/// One pair of output rows: the shared network on the `common` rows' ranks,
/// then for each of the first `pair` outputs the last stage with its `own`
/// row's ranks, 32 columns at a time, the medians left as codes in `medians`.
/// (Converting them to values in a separate pass keeps the networks on whole
/// vectors: fused with the conversion, the compiler splits them in halves.)
#[inline(always)]
fn median_pair_row<const K: usize, const S: usize, const L: usize, N: SquareNets<K, S, L>>(
    common: &[&[u8]; S],
    own: &[[&[u8]; K]; 2],
    pair: usize,
    medians: &mut [Vec<u8>; 2],
) {
    for x0 in (0..medians[0].len()).step_by(LANES) {
        let mut v = [[0u8; LANES]; S];
        for (lanes, row) in v.iter_mut().zip(common) {
            *lanes = load(row, x0);
        }
        N::shared(&mut v);
        for (codes, own) in medians.iter_mut().zip(own).take(pair) {
            let mut l = [[0u8; LANES]; L];
            for (t, &c) in N::CANDIDATES.iter().enumerate() {
                l[t] = v[c];
            }
            for (j, row) in own.iter().enumerate() {
                l[K + 1 + j] = load(row, x0);
            }
            N::last(&mut l);
            codes[x0..x0 + LANES].copy_from_slice(&l[N::OUT]);
        }
    }
}

/// The median of the code plane `codes` over the square window of radius
/// `r ∈ {1, 2}`, written into `p` (of the same size) in parallel bands.
pub(super) fn square_median(p: &mut Plane, codes: &[u8], r: usize, border: Border, fill: u8) {
    let w = p.width();
    tile::for_each_band(p, tile::band_rows(w, r), |y0, band| {
        if r == 1 {
            median_band::<3, 6, 7, Radius1>(codes, w, y0, band, border, fill)
        } else {
            median_band::<5, 20, 11, Radius2>(codes, w, y0, band, border, fill)
        }
    });
}

#[cfg(test)]
mod tests {
    use super::super::PairNetwork;
    use super::*;

    fn table(net: &[super::super::Comparator]) -> Vec<(usize, usize, (bool, bool))> {
        net.iter().map(|c| (c.a, c.b, (c.keep_min, c.keep_max))).collect()
    }

    #[test]
    fn compiled_networks_are_the_generated_ones() {
        // If the generator changes, these tables must be written out again.
        for (r, row_sort, shared, last, candidates, out) in [
            (1, ROW_SORT_3, SHARED_3, LAST_3, Radius1::CANDIDATES, Radius1::OUT),
            (2, ROW_SORT_5, SHARED_5, LAST_5, Radius2::CANDIDATES, Radius2::OUT),
        ] {
            let nets = PairNetwork::new(r);
            assert_eq!(table(&nets.row_sort), row_sort, "r={r}");
            assert_eq!(nets.row_ranks, (0..2 * r + 1).collect::<Vec<_>>(), "r={r}: ranks in slot order");
            assert_eq!(table(&nets.shared), shared, "r={r}");
            assert_eq!(table(&nets.last), last, "r={r}");
            assert_eq!(nets.candidates, candidates, "r={r}");
            assert_eq!(nets.out, out, "r={r}");
        }
    }
}
