//! Histograms for whole-image tone operators: how samples are binned (exact
//! integer codes, or a documented binning of float data), the parallel reduce
//! pass (per-chunk histograms merged) and percentiles read from the counts. It
//! does not map samples; the operators do that in their second pass.

use rayon::prelude::*;

/// Bins used for float data (sources without known integer codes): 65536
/// equal bins between the smallest and largest finite sample, so a float
/// image is resolved as finely as a 16-bit one.
pub const FLOAT_BINS: usize = 65536;

/// Samples per parallel chunk of the reduce pass.
const CHUNK: usize = 1 << 18;

/// How sample values map to histogram bins.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum Binning {
    /// Exact codes `k / n`, `k = 0..=n`: one bin per code (`n + 1` bins).
    Codes { n: u32 },
    /// `bins` equal bins over `[lo, hi]` (`hi > lo`); bin `i` holds
    /// `lo + i·w ≤ v < lo + (i + 1)·w`, `w = (hi − lo)/bins`, the top edge in the last bin.
    Range { lo: f64, hi: f64, bins: usize },
}

impl Binning {
    /// The binning for `planes`: exact codes when `levels` says every sample is
    /// a code `k / n`; otherwise `float_bins` bins over the finite range of the
    /// samples (a single bin when they are all equal). `None` when no sample is finite.
    pub fn for_samples(planes: &[&[f32]], levels: Option<u32>, float_bins: usize) -> Option<Binning> {
        if let Some(n) = levels.filter(|&n| (1..=65535).contains(&n)) {
            return Some(Binning::Codes { n });
        }
        let (lo, hi) = finite_range(planes)?;
        let (lo, hi) = (f64::from(lo), f64::from(hi));
        Some(if hi > lo {
            Binning::Range { lo, hi, bins: float_bins.max(1) }
        } else {
            Binning::Range { lo, hi: lo + 1.0, bins: 1 }
        })
    }

    pub fn bins(&self) -> usize {
        match *self {
            Binning::Codes { n } => n as usize + 1,
            Binning::Range { bins, .. } => bins,
        }
    }

    /// The bin of a finite sample `v` (values outside the range clamp to the end bins).
    #[inline]
    pub fn index(&self, v: f32) -> usize {
        match *self {
            // f32 is exact enough: a stored code k/n (n ≤ 65535) is off by at most
            // 2⁻²⁴ relative, so v·n is within 0.01 of k and rounds to it (checked
            // for every 16-bit code in the tests).
            Binning::Codes { n } => code_index(v, n),
            Binning::Range { lo, hi, bins } => {
                let t = (f64::from(v) - lo) / (hi - lo) * bins as f64;
                (t.floor().max(0.0) as usize).min(bins - 1)
            }
        }
    }

    /// The value bin `i` stands for: the code itself, or the bin's centre.
    pub fn center(&self, i: usize) -> f64 {
        match *self {
            Binning::Codes { n } => i as f64 / f64::from(n),
            Binning::Range { lo, hi, bins } => lo + (i as f64 + 0.5) * (hi - lo) / bins as f64,
        }
    }

    /// The lower edge of bin `i` and the bin width (zero for exact codes).
    fn edge_and_width(&self, i: usize) -> (f64, f64) {
        match *self {
            Binning::Codes { n } => (i as f64 / f64::from(n), 0.0),
            Binning::Range { lo, hi, bins } => {
                let w = (hi - lo) / bins as f64;
                (lo + i as f64 * w, w)
            }
        }
    }
}

/// The code `k` of a sample `k / n`: `round(v·n)` clamped to `0..=n`.
#[inline(always)]
pub fn code_index(v: f32, n: u32) -> usize {
    (((v * n as f32) + 0.5).max(0.0) as usize).min(n as usize)
}

/// Samples per block of [`codes_of_block`].
pub const CODE_BLOCK: usize = 1024;

/// Writes [`code_index`]`(v, n)` of each sample of `samples` (at most
/// [`CODE_BLOCK`]) to `codes` and says whether every sample was finite. The
/// loop has no branches, so it compiles to vector instructions; the callers
/// fall back to their per-sample path for a block holding NaN or ±∞.
#[multiversion::multiversion(targets("x86_64+avx512f+avx512bw+avx512vl+avx2+fma", "x86_64+avx2+fma"))]
pub fn codes_of_block(samples: &[f32], n: u32, codes: &mut [u16; CODE_BLOCK]) -> bool {
    let nf = n as f32;
    let mut finite = true;
    for (c, &v) in codes.iter_mut().zip(samples) {
        // Equal to code_index for every f32: clamping to 0..=n before the
        // truncation gives the same integer as clamping after it, NaN included
        // (NaN.max(0) = 0), and the truncation of t ≥ 0 is its floor.
        *c = floor_small(((v * nf) + 0.5).max(0.0).min(nf)) as u16;
        finite &= v.is_finite();
    }
    finite
}

/// ⌊t⌋ of `0 ≤ t < 2²²` by float arithmetic alone: adding 2²³ rounds t to the
/// nearest integer and leaves it in the low mantissa bits; one is taken off
/// where that rounded up. Unlike a saturating float-to-integer cast it
/// compiles to plain vector instructions in the loops that call it.
#[inline(always)]
pub fn floor_small(t: f32) -> u32 {
    const MAGIC: f32 = 8_388_608.0;
    let nearest = (t + MAGIC) - MAGIC;
    let floor = if nearest > t { nearest - 1.0 } else { nearest };
    (floor + MAGIC).to_bits() & 0x7F_FFFF
}

/// The smallest and largest finite sample of `planes`, or `None` if there is none.
pub fn finite_range(planes: &[&[f32]]) -> Option<(f32, f32)> {
    fn merge(a: Option<(f32, f32)>, b: Option<(f32, f32)>) -> Option<(f32, f32)> {
        match (a, b) {
            (Some((a0, a1)), Some((b0, b1))) => Some((a0.min(b0), a1.max(b1))),
            (x, None) | (None, x) => x,
        }
    }
    planes
        .iter()
        .map(|p| {
            p.par_chunks(CHUNK)
                .map(|c| c.iter().filter(|v| v.is_finite()).fold(None, |acc, &v| merge(acc, Some((v, v)))))
                .reduce(|| None, merge)
        })
        .fold(None, merge)
}

/// Counts of the finite samples of `planes` under `binning` (NaN and ±∞ skipped),
/// computed as per-chunk histograms merged; the result does not depend on the
/// number of threads.
pub fn histogram(planes: &[&[f32]], binning: &Binning) -> Vec<u64> {
    let chunks: Vec<&[f32]> = planes.iter().flat_map(|p| p.chunks(CHUNK)).collect();
    match *binning {
        Binning::Codes { n } if n < SMALL_CODES => small_code_histogram(&chunks, n),
        _ => any_histogram(&chunks, binning),
    }
}

/// Code counts below which [`histogram`] keeps interleaved per-chunk counters.
const SMALL_CODES: u32 = 4096;

/// Interleaved counters per chunk of the code histogram.
const LANES: usize = 4;

/// [`histogram`] for exact codes `k / n` with `n < SMALL_CODES` (8-bit sources):
/// each chunk counts into `LANES` interleaved u32 histograms (one chunk holds
/// fewer than 2³² samples), so a run of equal codes does not wait on one
/// counter, and non-finite samples go to a spare last bin that is dropped.
/// Codes are computed a block at a time ([`codes_of_block`]).
fn small_code_histogram(chunks: &[&[f32]], n: u32) -> Vec<u64> {
    let bins = n as usize + 1;
    let stride = bins + 1;
    let slot = |v: f32| if v.is_finite() { code_index(v, n) } else { bins };
    chunks
        .par_iter()
        .fold(
            || (vec![0u64; bins], vec![0u32; LANES * stride]),
            |(mut total, mut lanes), chunk| {
                lanes.iter_mut().for_each(|c| *c = 0);
                let mut codes = [0u16; CODE_BLOCK];
                for block in chunk.chunks(CODE_BLOCK) {
                    if codes_of_block(block, n, &mut codes) {
                        let mut quads = codes[..block.len()].chunks_exact(LANES);
                        for q in &mut quads {
                            for (lane, &c) in q.iter().enumerate() {
                                lanes[lane * stride + usize::from(c)] += 1;
                            }
                        }
                        for &c in quads.remainder() {
                            lanes[usize::from(c)] += 1;
                        }
                    } else {
                        block.iter().for_each(|&v| lanes[slot(v)] += 1);
                    }
                }
                for (i, t) in total.iter_mut().enumerate() {
                    *t += (0..LANES).map(|l| u64::from(lanes[l * stride + i])).sum::<u64>();
                }
                (total, lanes)
            },
        )
        .map(|(total, _)| total)
        .reduce(
            || vec![0u64; bins],
            |mut a, b| {
                a.iter_mut().zip(&b).for_each(|(x, y)| *x += y);
                a
            },
        )
}

/// [`histogram`] for any binning, one counter per bin.
fn any_histogram(chunks: &[&[f32]], binning: &Binning) -> Vec<u64> {
    let bins = binning.bins();
    chunks
        .par_iter()
        .fold(
            || vec![0u64; bins],
            |mut h, chunk| {
                for &v in chunk.iter() {
                    if v.is_finite() {
                        h[binning.index(v)] += 1;
                    }
                }
                h
            },
        )
        .reduce(
            || vec![0u64; bins],
            |mut a, b| {
                a.iter_mut().zip(&b).for_each(|(x, y)| *x += y);
                a
            },
        )
}

/// The value with 0-based rank `r` (as a real number) in the sorted samples
/// the histogram counts. Exact for [`Binning::Codes`]; for ranges, the rank's
/// position spread evenly across its bin (error at most one bin width).
fn value_at_rank(counts: &[u64], binning: &Binning, r: u64) -> f64 {
    let mut below = 0u64;
    for (i, &c) in counts.iter().enumerate() {
        if c > 0 && r < below + c {
            let (edge, w) = binning.edge_and_width(i);
            if w == 0.0 {
                return edge;
            }
            return edge + w * ((r - below) as f64 + 0.5) / c as f64;
        }
        below += c;
    }
    // Only reached with an empty histogram; the callers check for that.
    binning.center(counts.len().saturating_sub(1))
}

/// The `p`-th percentile (`0 ≤ p ≤ 100`) of the counted samples, with the
/// linear interpolation between closest ranks that `numpy.percentile` uses by
/// default (rank `p/100 · (N − 1)`). `None` for an empty histogram.
pub fn percentile(counts: &[u64], binning: &Binning, p: f64) -> Option<f64> {
    let total: u64 = counts.iter().sum();
    if total == 0 {
        return None;
    }
    let rank = p / 100.0 * (total - 1) as f64;
    let r0 = rank.floor() as u64;
    let frac = rank - r0 as f64;
    let v0 = value_at_rank(counts, binning, r0);
    if frac == 0.0 {
        return Some(v0);
    }
    let v1 = value_at_rank(counts, binning, (r0 + 1).min(total - 1));
    Some(v0 + (v1 - v0) * frac)
}

#[cfg(test)]
mod tests {
    //! Edge cases: no finite sample, a constant plane (one bin), NaN skipped,
    //! percentiles at 0 and 100, values on the top edge of a range, every
    //! 8- and 16-bit code in its own bin, values outside 0..1 in the end bins.
    use super::*;

    #[test]
    fn floor_small_is_the_floor() {
        // Integers, halves (where rounding to nearest goes up or to even),
        // the float just below each, and the top of the range.
        let mut values = vec![0.0f32, 1e-30, 0.49999997, 4_194_303.0, 4_194_303.5];
        for k in (0..70_000u32).step_by(7).chain([65_535, 65_536]) {
            let k = k as f32;
            for t in [k, k + 0.5, k + 0.25, k + 0.75] {
                values.extend([t, f32::from_bits(t.to_bits().saturating_sub(1))]);
            }
        }
        for t in values {
            assert_eq!(floor_small(t), t.floor() as u32, "{t}");
        }
    }

    #[test]
    fn codes_give_exact_percentiles_like_numpy() {
        // numpy.percentile([0, 1, 2, 3] / 3, 50) = 1.5 / 3 (linear method, by hand).
        let s = [0.0f32, 1.0 / 3.0, 2.0 / 3.0, 1.0];
        let b = Binning::for_samples(&[&s], Some(3), FLOAT_BINS).unwrap();
        let h = histogram(&[&s], &b);
        assert_eq!(h, vec![1, 1, 1, 1]);
        assert!((percentile(&h, &b, 50.0).unwrap() - 0.5).abs() < 1e-12);
        assert_eq!(percentile(&h, &b, 0.0), Some(0.0));
        assert_eq!(percentile(&h, &b, 100.0), Some(1.0));
    }

    #[test]
    fn every_code_lands_in_its_own_bin() {
        for n in [255u32, 65535] {
            let b = Binning::Codes { n };
            for k in 0..=n {
                assert_eq!(b.index(k as f32 / n as f32), k as usize, "code {k} of {n}");
            }
            assert_eq!(b.index(-0.2), 0);
            assert_eq!(b.index(1.7), n as usize);
        }
    }

    #[test]
    fn block_codes_equal_code_index_and_the_fast_histogram_equals_the_plain_one() {
        // Every 8-bit code, its neighbouring f32 values, values outside 0..1 and
        // the non-finite ones, in blocks of every kind (all finite, some not).
        let mut s: Vec<f32> = Vec::new();
        for k in 0..=255u32 {
            let v = k as f32 / 255.0;
            s.extend([v, f32::from_bits(v.to_bits() + 1), v - 0.5 / 255.0, v + 0.499 / 255.0]);
        }
        s.extend([-3.0, -0.0, 1.5, 1e30, -1e30]);
        let finite_part = s.len();
        s.extend([f32::NAN, f32::INFINITY, f32::NEG_INFINITY, 0.5]);
        let mut codes = [0u16; CODE_BLOCK];
        for block in s.chunks(CODE_BLOCK) {
            codes_of_block(block, 255, &mut codes);
            for (v, c) in block.iter().zip(codes) {
                assert_eq!(usize::from(c), code_index(*v, 255), "{v}");
            }
        }
        assert!(codes_of_block(&s[..finite_part.min(CODE_BLOCK)], 255, &mut codes));
        assert!(!codes_of_block(&s[finite_part..], 255, &mut codes));
        // The same counts through the interleaved code path and the one-counter path,
        // here for a plane of 3 chunks with NaN and ±∞ in some blocks.
        let big: Vec<f32> = (0..3 * CHUNK + 17).map(|i| s[(i * 7919) % s.len()]).collect();
        let chunks: Vec<&[f32]> = big.chunks(CHUNK).collect();
        let b = Binning::Codes { n: 255 };
        assert_eq!(small_code_histogram(&chunks, 255), any_histogram(&chunks, &b));
        assert_eq!(histogram(&[&big], &b), any_histogram(&chunks, &b));
    }

    #[test]
    fn float_binning_skips_non_finite_and_handles_constants() {
        let s = [0.25f32, f32::NAN, 0.25, f32::INFINITY];
        let b = Binning::for_samples(&[&s], None, FLOAT_BINS).unwrap();
        assert_eq!(b.bins(), 1);
        let h = histogram(&[&s], &b);
        assert_eq!(h, vec![2]);
        assert!(Binning::for_samples(&[&[f32::NAN]], None, 16).is_none());
        let t = [0.0f32, 1.0, 2.0];
        let b = Binning::for_samples(&[&t], None, 4).unwrap();
        assert_eq!(b.index(2.0), 3);
        assert_eq!(b.index(0.0), 0);
        assert_eq!(histogram(&[&t], &b), vec![1, 0, 1, 1]);
    }

    #[test]
    fn float_percentiles_are_within_one_bin_of_the_exact_value() {
        let s: Vec<f32> = (0..10_001).map(|i| (i as f32 * 0.37).sin() * 3.0).collect();
        let b = Binning::for_samples(&[&s], None, 1024).unwrap();
        let h = histogram(&[&s], &b);
        let mut sorted = s.clone();
        sorted.sort_by(f32::total_cmp);
        let width = 6.0 / 1024.0;
        for p in [0.5, 10.0, 50.0, 99.5] {
            let rank = p / 100.0 * 10_000.0;
            let (i, f) = (rank as usize, rank - (rank as usize) as f64);
            let exact = f64::from(sorted[i]) * (1.0 - f) + f64::from(sorted[(i + 1).min(10_000)]) * f;
            let got = percentile(&h, &b, p).unwrap();
            assert!((got - exact).abs() <= width, "p{p}: {got} vs {exact}");
        }
    }
}
