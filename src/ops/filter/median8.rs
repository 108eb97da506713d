//! The 8-bit engine of `median` for radius 1 and 2: the plane is turned into
//! u8 codes once, then comparator networks pruned for inputs that arrive in
//! sorted groups run on u8 lanes — for the square (`square`), each code row
//! sorted once across its neighbours and two output rows sharing the rows they
//! have in common; for the disk, each window column sorted once per output
//! row. The result is written back into the plane's own buffer. It does not
//! decide when it applies beyond checking that every sample is on the 255 grid.

mod square;

use std::sync::OnceLock;

use multiversion::multiversion;
use rayon::prelude::*;

use super::network::{Comparator, compare_rows, prune, selection_network, two};
use crate::raster::Plane;
use crate::tile::{self, Border};

/// The comparators that select the order statistics `ranks` of `Σ heights`
/// slots laid out as groups of the given heights, each group sorted ascending
/// on arrival, and the slot that holds each rank at the end.
///
/// Start from Batcher's network on all slots (pruned to the wanted ranks),
/// then drop every comparator that never exchanges its inputs on any 0/1
/// input whose groups are sorted, then prune again to the comparators the
/// outputs depend on. Dropping is safe because the set of inputs with sorted
/// groups is closed under monotone maps, so the zero–one principle (Knuth,
/// TAOCP vol. 3, §5.3.4, Theorem Z) holds on it: a network that selects the
/// ranks of every sorted-group 0/1 input selects them on every sorted-group
/// input. A 0/1 group of height h is sorted exactly when its top t ranks are
/// 1, t ∈ 0..=h, so there are ∏(h + 1) such inputs (6⁵ = 7776 for five groups
/// of five).
fn sorted_group_network(heights: &[usize], ranks: &[usize]) -> (Vec<Comparator>, Vec<usize>) {
    let n: usize = heights.iter().sum();
    let (full, outs) = selection_network(n, ranks);
    let mut swaps = vec![false; full.len()];
    for_each_sorted_input(heights, |wires| {
        for (c, swapped) in full.iter().zip(swaps.iter_mut()) {
            if wires[c.a] > wires[c.b] {
                wires.swap(c.a, c.b);
                *swapped = true;
            }
        }
    });
    let useful: Vec<(usize, usize)> =
        full.iter().zip(&swaps).filter(|&(_, &s)| s).map(|(c, _)| (c.a, c.b)).collect();
    (prune(&useful, n, &outs), outs)
}

/// A median network for a window whose columns arrive sorted.
///
/// The window is a list of columns `(offset, v)`: the column at horizontal
/// offset `offset − r` covers rows `−v ..= v`. Slots are laid out column by
/// column, and within a column by rank (smallest first), so a column of
/// `2v + 1` codes fills `2v + 1` consecutive slots.
#[derive(Debug)]
pub(super) struct ColumnNetwork {
    columns: Vec<(usize, usize)>,
    net: Vec<Comparator>,
    out: usize,
}

impl ColumnNetwork {
    /// Builds the network for `columns` (see the type's doc) by
    /// [`sorted_group_network`], the columns being the groups.
    fn new(columns: Vec<(usize, usize)>) -> ColumnNetwork {
        let heights: Vec<usize> = columns.iter().map(|&(_, v)| 2 * v + 1).collect();
        let n: usize = heights.iter().sum();
        let (net, outs) = sorted_group_network(&heights, &[n / 2]);
        ColumnNetwork { columns, net, out: outs[0] }
    }

    /// The cached network for the disk window of radius `r ∈ {1, 2}`, whose
    /// columns are `columns`.
    fn cached(r: usize, columns: &[(usize, usize)]) -> &'static ColumnNetwork {
        static NETS: [OnceLock<ColumnNetwork>; 2] = [OnceLock::new(), OnceLock::new()];
        let net = NETS[r - 1].get_or_init(|| ColumnNetwork::new(columns.to_vec()));
        debug_assert_eq!(net.columns, columns);
        net
    }
}

/// The networks of the square window of side `k = 2r + 1` when two output
/// rows share the work (the idea of sharing sorting work between neighbouring
/// outputs is that of A. Adams, "Fast median filters using separable sorting
/// networks", ACM TOG 40(4), 2021; cited from memory).
///
/// Every code row is sorted once across its `k` horizontal neighbours
/// (`row_sort`). Output rows `y` and `y + 1` have `2r` window rows in common;
/// of those `S = 2r·k` codes, only ranks `m − k ..= m` (`m = k²/2`, the
/// median's rank) can be the median once the other row's `k` codes join,
/// because those `k` can move it by at most `k` ranks. `shared` selects those
/// `k + 1` candidates, sorted, once for both rows; `last` then takes the
/// median of the candidates and the row each output has alone, both sorted.
/// By the zero–one principle: with `s` ones among the shared codes and `q`
/// among the row's own, the candidates hold `c = clamp(s − (m − k), 0, k + 1)`
/// ones, and `c + q ≥ k + 1` exactly when `s + q ≥ m + 1`, the window median
/// being 1.
///
/// The square engine runs these networks compiled in (`square`); this
/// generator stays as the test oracle its tables are checked against.
#[cfg(test)]
#[derive(Debug)]
struct PairNetwork {
    row_sort: Vec<Comparator>,
    row_ranks: Vec<usize>,
    shared: Vec<Comparator>,
    candidates: Vec<usize>,
    last: Vec<Comparator>,
    out: usize,
}

#[cfg(test)]
impl PairNetwork {
    fn new(r: usize) -> PairNetwork {
        let k = 2 * r + 1;
        let m = k * k / 2;
        let (row_sort, row_ranks) = selection_network(k, &(0..k).collect::<Vec<_>>());
        let (shared, candidates) = sorted_group_network(&vec![k; 2 * r], &(m - k..=m).collect::<Vec<_>>());
        let (last, outs) = sorted_group_network(&[k + 1, k], &[k]);
        PairNetwork { row_sort, row_ranks, shared, candidates, last, out: outs[0] }
    }
}

/// Calls `f` on every 0/1 input whose columns (of the given heights, slots
/// laid out as in [`ColumnNetwork`]) are sorted ascending.
fn for_each_sorted_input(heights: &[usize], mut f: impl FnMut(&mut [u8])) {
    let n: usize = heights.iter().sum();
    let mut ones = vec![0usize; heights.len()];
    let mut wires = vec![0u8; n];
    loop {
        let mut s = 0;
        for (&h, &t) in heights.iter().zip(&ones) {
            for k in 0..h {
                wires[s + k] = u8::from(k >= h - t);
            }
            s += h;
        }
        f(&mut wires);
        // next combination, odometer-style
        let mut c = 0;
        loop {
            if c == heights.len() {
                return;
            }
            ones[c] += 1;
            if ones[c] <= heights[c] {
                break;
            }
            ones[c] = 0;
            c += 1;
        }
    }
}

/// The window's columns from its rows `(row offset, half width)`: column `j`
/// reaches the farthest row whose half width covers `|j|`. Rows of a square or
/// disk are symmetric and their half widths shrink away from the centre, so
/// each column is a centred run of rows.
fn columns_of(window: &[(isize, usize)], r: usize) -> Vec<(usize, usize)> {
    (0..=2 * r)
        .map(|o| {
            let j = o.abs_diff(r);
            let v = window.iter().filter(|&&(_, half)| half >= j).map(|&(i, _)| i.unsigned_abs()).max();
            (o, v.unwrap_or(0))
        })
        .collect()
}

#[multiversion(targets("x86_64+avx512f+avx512bw+avx512vl+avx2+fma", "x86_64+avx2+fma"))]
fn codes_of(src: &[f32], dst: &mut [u8]) -> bool {
    // k = ⌊255·v + ½⌋ is the code when v is on the grid; the bit comparison
    // then proves it (and refuses −0, NaN and everything off the grid). For
    // k ∈ 0..=255, k + 2²³ is exact and its low mantissa byte is k: a cast that
    // vectorises (the saturating `as` casts do not).
    let mut bad = 0u32;
    for (d, &v) in dst.iter_mut().zip(src) {
        let k = (v * 255.0 + 0.5).floor();
        let in_range = (0.0..=255.0).contains(&k);
        bad |= u32::from(!in_range) | ((k / 255.0).to_bits() ^ v.to_bits());
        *d = (k + 8_388_608.0).to_bits() as u8;
    }
    bad == 0
}

#[multiversion(targets("x86_64+avx512f+avx512bw+avx512vl+avx2+fma", "x86_64+avx2+fma"))]
fn values_of(src: &[u8], dst: &mut [f32]) {
    for (d, &c) in dst.iter_mut().zip(src) {
        *d = f32::from(c) / 255.0;
    }
}

/// Runs `net` on the rows `slots`, each comparator a min/max over `len` lanes.
fn run_network(net: &[Comparator], slots: &mut [Vec<u8>], len: usize) {
    for c in net {
        let (a, b) = two(slots, c.a, c.b);
        let (a, b) = (&mut a[..len], &mut b[..len]);
        compare_rows(c, a, b);
    }
}

/// Code row `y` of the `w`-wide code plane `codes` (which may lie outside it)
/// copied into `padded` with `r` codes of halo each side under `border`.
fn padded_code_row(codes: &[u8], w: usize, y: isize, r: usize, border: Border, fill: u8, padded: &mut [u8]) {
    let h = codes.len() / w;
    let Some(sy) = border.index(y, h) else {
        padded.fill(fill);
        return;
    };
    let row = &codes[sy * w..(sy + 1) * w];
    padded[r..r + w].copy_from_slice(row);
    for i in 0..r {
        let (left, right) = (i as isize - r as isize, (w + i) as isize);
        padded[i] = border.index(left, w).map_or(fill, |j| row[j]);
        padded[r + w + i] = border.index(right, w).map_or(fill, |j| row[j]);
    }
}

/// Lanes per network run of the disk engine: its slots (13 for the radius-2
/// disk) of this many codes stay in L1.
const PIECE: usize = 1024;

/// The median of `p` over `window` (rows `(row offset, half width)`, radius
/// `r ∈ {1, 2}`, `disk` choosing the disk engine over the square's), written into
/// `p` itself. Returns false, with `p` untouched, when a sample or the border
/// fill is not exactly `k / 255`. `codes` is scratch, reused across planes.
pub(super) fn median_u8_in_place(
    p: &mut Plane,
    window: &[(isize, usize)],
    r: usize,
    disk: bool,
    border: Border,
    codes: &mut Vec<u8>,
) -> bool {
    debug_assert!((1..=2).contains(&r));
    let fill_value = [border.constant_value()];
    let mut fill = [0u8];
    if !codes_of(&fill_value, &mut fill) {
        return false;
    }
    let fill = fill[0];
    codes.resize(p.as_slice().len(), 0);
    const CHUNK: usize = 1 << 16;
    let on_grid = p
        .as_slice()
        .par_chunks(CHUNK)
        .zip(codes.par_chunks_mut(CHUNK))
        .map(|(src, dst)| codes_of(src, dst))
        .reduce(|| true, |a, b| a && b);
    if !on_grid {
        return false;
    }
    let codes: &[u8] = codes;
    if disk {
        disk_median(p, codes, window, r, border, fill);
    } else {
        square::square_median(p, codes, r, border, fill);
    }
    true
}

/// The disk window's median of the code plane `codes` into `p`: per output
/// row, each window column is sorted once, then [`ColumnNetwork`] runs on the
/// sorted columns.
fn disk_median(p: &mut Plane, codes: &[u8], window: &[(isize, usize)], r: usize, border: Border, fill: u8) {
    let w = p.width();
    let columns = columns_of(window, r);
    let network = ColumnNetwork::cached(r, &columns);
    // the column heights in use, each with the network that sorts it fully
    let mut halves: Vec<usize> = columns.iter().map(|&(_, v)| v).collect();
    halves.sort_unstable();
    halves.dedup();
    let sorters: Vec<(usize, Vec<Comparator>, Vec<usize>)> = halves
        .iter()
        .map(|&v| {
            let h = 2 * v + 1;
            let (net, out) = selection_network(h, &(0..h).collect::<Vec<_>>());
            (v, net, out)
        })
        .collect();
    let slot_count: usize = columns.iter().map(|&(_, v)| 2 * v + 1).sum();
    let padded_w = w + 2 * r;
    tile::for_each_band(p, tile::band_rows(w, r), |y0, band| {
        // sorted[i][k]: the rows of columns of half height halves[i], rank k
        let mut sorted: Vec<Vec<Vec<u8>>> =
            halves.iter().map(|&v| vec![vec![0u8; padded_w]; 2 * v + 1]).collect();
        let mut slots = vec![vec![0u8; PIECE.min(w)]; slot_count];
        for (i, out_row) in band.chunks_exact_mut(w).enumerate() {
            let y = (y0 + i) as isize;
            for (rows, (v, net, _)) in sorted.iter_mut().zip(&sorters) {
                for (k, row) in rows.iter_mut().enumerate() {
                    padded_code_row(codes, w, y + k as isize - *v as isize, r, border, fill, row);
                }
                run_network(net, rows, padded_w);
            }
            for x0 in (0..w).step_by(PIECE) {
                let len = PIECE.min(w - x0);
                let mut s = 0;
                for &(o, v) in &columns {
                    let idx = halves.binary_search(&v).unwrap_or_else(|_| unreachable!("listed above"));
                    let (rows, out) = (&sorted[idx], &sorters[idx].2);
                    for &slot in out {
                        slots[s][..len].copy_from_slice(&rows[slot][x0 + o..x0 + o + len]);
                        s += 1;
                    }
                }
                run_network(&network.net, &mut slots, len);
                values_of(&slots[network.out][..len], &mut out_row[x0..x0 + len]);
            }
        }
    });
}

#[cfg(test)]
mod tests {
    use super::*;

    fn window(r: usize, disk: bool) -> Vec<(isize, usize)> {
        let ri = r as isize;
        (-ri..=ri)
            .map(|i| (i, if disk { ((ri * ri - i * i) as f64).sqrt().floor() as usize } else { r }))
            .collect()
    }

    #[test]
    fn column_networks_select_the_median_of_every_sorted_column_zero_one_input() {
        // The zero–one principle on inputs with sorted columns (see
        // sorted_group_network), checked exhaustively: the middle output is 1
        // exactly when more than half the inputs are 1.
        for r in [1, 2] {
            let columns = columns_of(&window(r, true), r);
            let heights: Vec<usize> = columns.iter().map(|&(_, v)| 2 * v + 1).collect();
            let n: usize = heights.iter().sum();
            let net = ColumnNetwork::new(columns);
            let mut inputs = 0;
            for_each_sorted_input(&heights, |wires| {
                let ones = wires.iter().filter(|&&b| b == 1).count();
                run_bits(&net.net, wires);
                assert_eq!(wires[net.out] == 1, ones > n / 2, "r={r}");
                inputs += 1;
            });
            assert_eq!(inputs, heights.iter().map(|h| h + 1).product::<usize>());
            // sorting the columns first pays: fewer comparators than the plain median network
            assert!(net.net.len() < selection_network(n, &[n / 2]).0.len(), "r={r}");
        }
    }

    fn run_bits(net: &[Comparator], wires: &mut [u8]) {
        for c in net {
            let (lo, hi) = (wires[c.a].min(wires[c.b]), wires[c.a].max(wires[c.b]));
            (wires[c.a], wires[c.b]) = (lo, hi);
        }
    }

    #[test]
    fn pair_networks_select_the_median_of_every_sorted_row_zero_one_input() {
        // Every square window whose rows are sorted 0/1 codes: the 2r shared
        // rows through `shared`, the candidates with the output's own row
        // through `last`, against the majority. The zero–one principle (see
        // sorted_group_network) carries this to all codes.
        for r in [1, 2] {
            let k = 2 * r + 1;
            let nets = PairNetwork::new(r);
            let mut inputs = 0;
            for_each_sorted_input(&vec![k; 2 * r + 1], |wires| {
                let ones = wires.iter().filter(|&&b| b == 1).count();
                let (shared, own) = wires.split_at_mut(2 * r * k);
                run_bits(&nets.shared, shared);
                let mut last: Vec<u8> = nets.candidates.iter().map(|&c| shared[c]).collect();
                assert!(last.is_sorted(), "candidates arrive sorted");
                last.extend_from_slice(own);
                run_bits(&nets.last, &mut last);
                assert_eq!(last[nets.out] == 1, ones > k * k / 2, "r={r}");
                inputs += 1;
            });
            assert_eq!(inputs, (k + 1).pow(k as u32));
            // the row sort is a full sort: on every 0/1 input (zero–one
            // principle) its outputs are the ranks in order
            for bits in 0u32..1 << k {
                let mut codes: Vec<u8> = (0..k).map(|i| u8::from(bits >> i & 1 == 1)).collect();
                let mut want = codes.clone();
                want.sort_unstable();
                run_bits(&nets.row_sort, &mut codes);
                let ranked: Vec<u8> = nets.row_ranks.iter().map(|&s| codes[s]).collect();
                assert_eq!(ranked, want, "r={r} bits={bits:b}");
            }
            // sharing pays: per output, fewer comparators than one sorted-column network
            let columns = columns_of(&window(r, false), r);
            let one = ColumnNetwork::new(columns).net.len();
            let per_output = nets.row_sort.len() + nets.shared.len() / 2 + nets.last.len();
            assert!(per_output < one, "r={r}: {per_output} ≥ {one}");
        }
    }

    #[test]
    fn columns_follow_the_window_shape() {
        assert_eq!(columns_of(&window(2, false), 2), [(0, 2), (1, 2), (2, 2), (3, 2), (4, 2)]);
        assert_eq!(columns_of(&window(2, true), 2), [(0, 0), (1, 1), (2, 2), (3, 1), (4, 0)]);
        assert_eq!(columns_of(&window(1, true), 1), [(0, 0), (1, 1), (2, 0)]);
    }

    #[test]
    fn codes_are_taken_only_from_the_grid() {
        let all: Vec<f32> = (0..=255u8).map(|k| f32::from(k) / 255.0).collect();
        let mut codes = vec![0u8; 256];
        assert!(codes_of(&all, &mut codes));
        assert!(codes.iter().enumerate().all(|(k, &c)| usize::from(c) == k));
        for bad in [-0.0, 0.5, f32::NAN, f32::INFINITY, -1.0 / 255.0, 256.0 / 255.0, f32::from_bits(1)] {
            assert!(!codes_of(&[bad], &mut codes[..1]), "{bad}");
        }
    }
}
