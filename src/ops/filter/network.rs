//! Comparator networks that select order statistics: Batcher's odd–even
//! merge sort, cut down to the comparators that given outputs depend on. Run
//! on whole rows (each "value" a row of samples, each comparator a min/max
//! over two rows), the work vectorises; `median` uses them for small windows
//! and `stack` for the median across frames.

use multiversion::multiversion;

/// One comparator of a network on value slots: `a ← min(a, b)`,
/// `b ← max(a, b)`, either half skipped when nothing downstream reads it.
#[derive(Clone, Copy, Debug)]
pub struct Comparator {
    pub a: usize,
    pub b: usize,
    pub keep_min: bool,
    pub keep_max: bool,
}

/// Batcher's odd–even merge sort on `2^k ≥ n` wires, with wires `n..` fixed
/// at +∞ and folded away (a comparator against +∞ on its high wire changes
/// nothing), pruned to the comparators that the sorted positions `outputs`
/// depend on. Returns the comparators in order and, for each output
/// position, the slot that holds that order statistic at the end.
pub fn selection_network(n: usize, outputs: &[usize]) -> (Vec<Comparator>, Vec<usize>) {
    let size = n.next_power_of_two();
    let mut pairs = Vec::new();
    // Batcher's odd–even merge sort (Knuth, TAOCP vol. 3, §5.3.4, exercise 32).
    let mut p = 1;
    while p < size {
        let mut k = p;
        while k >= 1 {
            for j in (k % p..size - k).step_by(2 * k) {
                for i in 0..k.min(size - j - k) {
                    if (i + j) / (2 * p) == (i + j + k) / (2 * p) {
                        pairs.push((i + j, i + j + k));
                    }
                }
            }
            k /= 2;
        }
        p *= 2;
    }
    // Fold away +∞ wires: `label[w]` is the value slot on wire w, or None for +∞.
    let mut label: Vec<Option<usize>> = (0..size).map(|w| (w < n).then_some(w)).collect();
    let mut ops = Vec::new();
    for (lo, hi) in pairs {
        match (label[lo], label[hi]) {
            (Some(a), Some(b)) => ops.push((a, b)),
            (None, Some(b)) => {
                label[lo] = Some(b);
                label[hi] = None;
            }
            _ => {} // the +∞ is already on the high wire
        }
    }
    // Each op writes min into slot a and max into slot b. Prune backwards.
    let out_slots: Vec<usize> = outputs
        .iter()
        .map(|&o| label[o].unwrap_or_else(|| unreachable!("wires below n hold values")))
        .collect();
    (prune(&ops, n, &out_slots), out_slots)
}

/// The comparators of `ops` (pairs `(a, b)` on `n` slots: min into `a`, max
/// into `b`, in order) that the slots `outputs` depend on, found backwards;
/// each keeps only the halves something downstream reads.
pub fn prune(ops: &[(usize, usize)], n: usize, outputs: &[usize]) -> Vec<Comparator> {
    let mut live = vec![false; n];
    for &s in outputs {
        live[s] = true;
    }
    let mut kept = Vec::new();
    for &(a, b) in ops.iter().rev() {
        let (keep_min, keep_max) = (live[a], live[b]);
        if keep_min || keep_max {
            kept.push(Comparator { a, b, keep_min, keep_max });
            live[a] = true;
            live[b] = true;
        }
    }
    kept.reverse();
    kept
}

/// A sample type the networks run on, with its minimum and maximum (for
/// f32, `f32::min` and `f32::max`: the samples must be finite, as a NaN
/// would be dropped).
pub trait Lane: Copy {
    fn lo(self, other: Self) -> Self;
    fn hi(self, other: Self) -> Self;
}

impl Lane for f32 {
    fn lo(self, other: f32) -> f32 {
        self.min(other)
    }
    fn hi(self, other: f32) -> f32 {
        self.max(other)
    }
}

impl Lane for u8 {
    fn lo(self, other: u8) -> u8 {
        self.min(other)
    }
    fn hi(self, other: u8) -> u8 {
        self.max(other)
    }
}

impl Lane for u16 {
    fn lo(self, other: u16) -> u16 {
        self.min(other)
    }
    fn hi(self, other: u16) -> u16 {
        self.max(other)
    }
}

/// Comparator `c` on whole rows: `a` is its slot `c.a` (gets the minima),
/// `b` its slot `c.b` (the maxima), lane by lane; a half nothing reads later
/// is skipped. Plain loops, so the compiler vectorises them.
#[multiversion(targets("x86_64+avx512f+avx512bw+avx512vl+avx2+fma", "x86_64+avx2+fma"))]
pub fn compare_rows<T: Lane>(c: &Comparator, a: &mut [T], b: &mut [T]) {
    match (c.keep_min, c.keep_max) {
        (true, true) => {
            for (x, y) in a.iter_mut().zip(b.iter_mut()) {
                let (lo, hi) = (x.lo(*y), x.hi(*y));
                *x = lo;
                *y = hi;
            }
        }
        (true, false) => {
            for (x, &y) in a.iter_mut().zip(b.iter()) {
                *x = x.lo(y);
            }
        }
        _ => {
            for (&x, y) in a.iter().zip(b.iter_mut()) {
                *y = y.hi(x);
            }
        }
    }
}

/// Two distinct slots of `slots`, mutably.
pub fn two<T>(slots: &mut [Vec<T>], a: usize, b: usize) -> (&mut Vec<T>, &mut Vec<T>) {
    debug_assert_ne!(a, b);
    if a < b {
        let (l, h) = slots.split_at_mut(b);
        (&mut l[a], &mut h[0])
    } else {
        let (l, h) = slots.split_at_mut(a);
        (&mut h[0], &mut l[b])
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Runs `net` on 32 zero–one inputs at once (bit t of each wire is input
    /// t): on one bit, min is AND and max is OR.
    fn run_bits(net: &[Comparator], wires: &mut [u32]) {
        for c in net {
            let (lo, hi) = (wires[c.a] & wires[c.b], wires[c.a] | wires[c.b]);
            wires[c.a] = lo;
            wires[c.b] = hi;
        }
    }

    #[test]
    fn both_middles_of_even_counts_are_selected() {
        // The zero–one principle (Knuth, TAOCP vol. 3, §5.3.4, Theorem Z),
        // exhaustively over all 2^n inputs: output position k holds 1 exactly
        // when more than n − 1 − k inputs are 1.
        for n in [2usize, 4, 6, 10, 12, 16, 20] {
            let (net, out) = selection_network(n, &[n / 2 - 1, n / 2]);
            let mut wires = vec![0u32; n];
            for base in (0..1u64 << n).step_by(32) {
                for (i, wire) in wires.iter_mut().enumerate() {
                    *wire = (0..32).fold(0, |acc, t| acc | ((((base + t) >> i) & 1) as u32) << t);
                }
                run_bits(&net, &mut wires);
                for (&slot, k) in out.iter().zip([n / 2 - 1, n / 2]) {
                    let want = (0..32).fold(0u32, |acc, t| {
                        let ones = ((base + t) & ((1 << n) - 1)).count_ones() as usize;
                        acc | u32::from(ones > n - 1 - k) << t
                    });
                    assert_eq!(wires[slot], want, "n={n} position {k} from input {base:b}");
                }
            }
        }
    }

    #[test]
    fn large_networks_select_like_sorting() {
        // Beyond exhaustive reach: random values, compared with a sort.
        let mut state = 0x2545_F491_4F6C_DD1Du64;
        for n in [33usize, 50, 64, 97, 200] {
            let outputs = [n / 2 - 1, n / 2];
            let (net, out) = selection_network(n, &outputs);
            for _ in 0..20 {
                let mut v: Vec<u16> = (0..n)
                    .map(|_| {
                        state ^= state << 13;
                        state ^= state >> 7;
                        state ^= state << 17;
                        (state >> 54) as u16
                    })
                    .collect();
                let mut sorted = v.clone();
                sorted.sort_unstable();
                for c in &net {
                    let (x, y) = (v[c.a], v[c.b]);
                    v[c.a] = x.min(y);
                    v[c.b] = x.max(y);
                }
                for (&slot, k) in out.iter().zip(outputs) {
                    assert_eq!(v[slot], sorted[k], "n={n} position {k}");
                }
            }
        }
    }
}
