//! Per-channel statistics of one plane at the source's precision: range, mean,
//! standard deviation, percentiles, clipped and non-finite counts. Integer
//! sources are summarised exactly from a histogram of their codes; float
//! sources from the samples themselves. Nothing here prints.

use rayon::prelude::*;

use crate::ops::histogram::{self, Binning};
use crate::raster::Plane;

/// The percentiles every summary reports, in percent.
pub const PERCENTILES: [f64; 5] = [1.0, 5.0, 50.0, 95.0, 99.0];

/// Samples per parallel chunk; fixed so sums do not depend on the thread count.
const CHUNK: usize = 1 << 16;

/// The statistics of one channel. Values are on the raster's scale (`[0, 1]`
/// for integer sources, where `value × full scale` is the code; float sources
/// as stored). NaN and ±∞ are counted in `non_finite` and left out of
/// everything else; the numeric fields are `NaN` when no sample is finite.
#[derive(Clone, Debug, PartialEq)]
pub struct ChannelStats {
    /// Finite samples counted.
    pub count: u64,
    pub min: f64,
    pub max: f64,
    pub mean: f64,
    /// Population standard deviation (divisor N, numpy's `ddof=0`).
    pub std: f64,
    /// `(p, value)` for each of [`PERCENTILES`], numpy's default `linear`
    /// definition (Hyndman & Fan 1996 type 7): with the finite samples sorted
    /// as `x[0] ≤ … ≤ x[N−1]`, rank `h = p/100 · (N − 1)`, value
    /// `x[⌊h⌋] + (h − ⌊h⌋)·(x[⌊h⌋+1] − x[⌊h⌋])`.
    pub percentiles: Vec<(f64, f64)>,
    /// Samples at or below 0 (black / no signal).
    pub at_zero: u64,
    /// Samples at or above full scale (1.0).
    pub at_full: u64,
    /// NaN and infinite samples.
    pub non_finite: u64,
}

/// Statistics of `plane`. `levels = Some(n)` says every sample is an exact
/// code `k / n` (an untouched 8- or 16-bit source): the summary then comes from
/// the code histogram and is exact up to the final f64 divisions. Otherwise
/// the samples are summed in f64 in fixed chunks (two passes: mean, then the
/// squared deviations) and the percentiles are exact order statistics found
/// by a two-level radix count (no copy, no sort). Parallel on
/// rayon; the result does not depend on the number of threads.
pub fn channel_stats(plane: &Plane, levels: Option<u32>) -> ChannelStats {
    let samples = plane.as_slice();
    // A raster with exact codes has no NaN; should one appear, the float path handles it.
    levels
        .filter(|&n| (1..=65535).contains(&n))
        .and_then(|n| from_codes(samples, n))
        .unwrap_or_else(|| from_samples(samples))
}

fn empty(non_finite: u64) -> ChannelStats {
    ChannelStats {
        count: 0,
        min: f64::NAN,
        max: f64::NAN,
        mean: f64::NAN,
        std: f64::NAN,
        percentiles: PERCENTILES.iter().map(|&p| (p, f64::NAN)).collect(),
        at_zero: 0,
        at_full: 0,
        non_finite,
    }
}

/// The summary from the code histogram, or `None` if some sample is not finite.
fn from_codes(samples: &[f32], n: u32) -> Option<ChannelStats> {
    let binning = Binning::Codes { n };
    let counts = histogram::histogram(&[samples], &binning);
    let total: u64 = counts.iter().sum();
    if total != samples.len() as u64 {
        return None;
    }
    let scale = f64::from(n);
    // Sums of code × count are exact in u128; only the final divisions round.
    let sum: u128 = counts.iter().enumerate().map(|(k, &c)| k as u128 * u128::from(c)).sum();
    let mean_code = sum as f64 / total as f64;
    let var_code = counts
        .iter()
        .enumerate()
        .filter(|(_, c)| **c > 0)
        .map(|(k, &c)| {
            let d = k as f64 - mean_code;
            d * d * c as f64
        })
        .sum::<f64>()
        / total as f64;
    let first = counts.iter().position(|&c| c > 0).unwrap_or(0);
    let last = counts.iter().rposition(|&c| c > 0).unwrap_or(0);
    Some(ChannelStats {
        count: total,
        min: first as f64 / scale,
        max: last as f64 / scale,
        mean: mean_code / scale,
        std: var_code.sqrt() / scale,
        percentiles: PERCENTILES
            .iter()
            .map(|&p| (p, histogram::percentile(&counts, &binning, p).unwrap_or(f64::NAN)))
            .collect(),
        at_zero: counts[0],
        at_full: counts[n as usize],
        non_finite: 0,
    })
}

/// Partial sums of one chunk: count, sum, min, max, at zero, at full scale.
#[derive(Clone, Copy)]
struct Partial {
    count: u64,
    sum: f64,
    min: f64,
    max: f64,
    at_zero: u64,
    at_full: u64,
}

fn from_samples(samples: &[f32]) -> ChannelStats {
    let partials: Vec<Partial> = samples
        .par_chunks(CHUNK)
        .map(|c| {
            let mut p = Partial {
                count: 0,
                sum: 0.0,
                min: f64::INFINITY,
                max: f64::NEG_INFINITY,
                at_zero: 0,
                at_full: 0,
            };
            for &v in c.iter().filter(|v| v.is_finite()) {
                let v = f64::from(v);
                p.count += 1;
                p.sum += v;
                p.min = p.min.min(v);
                p.max = p.max.max(v);
                p.at_zero += u64::from(v <= 0.0);
                p.at_full += u64::from(v >= 1.0);
            }
            p
        })
        .collect();
    let count: u64 = partials.iter().map(|p| p.count).sum();
    let non_finite = samples.len() as u64 - count;
    if count == 0 {
        return empty(non_finite);
    }
    let mean = partials.iter().map(|p| p.sum).sum::<f64>() / count as f64;
    let squares: Vec<f64> = samples
        .par_chunks(CHUNK)
        .map(|c| c.iter().filter(|v| v.is_finite()).map(|&v| (f64::from(v) - mean).powi(2)).sum())
        .collect();
    let percentiles = percentiles_by_radix(samples, &PERCENTILES);
    ChannelStats {
        count,
        min: partials.iter().map(|p| p.min).fold(f64::INFINITY, f64::min),
        max: partials.iter().map(|p| p.max).fold(f64::NEG_INFINITY, f64::max),
        mean,
        std: (squares.iter().sum::<f64>() / count as f64).sqrt(),
        percentiles: PERCENTILES.iter().copied().zip(percentiles).collect(),
        at_zero: partials.iter().map(|p| p.at_zero).sum(),
        at_full: partials.iter().map(|p| p.at_full).sum(),
        non_finite,
    }
}

/// The type-7 percentiles `ps` of the finite samples (at least one) of `x`
/// (see [`ChannelStats::percentiles`]), found exactly without sorting: each
/// finite f32 maps to a 32-bit key in the same order (sign bit flipped for
/// positives, all bits for negatives — the order of `f32::total_cmp`); one
/// parallel pass counts the keys' top 16 bits, which locates the bucket of
/// every wanted rank, and a second pass counts the low 16 bits of the keys in
/// those buckets, which gives each rank's exact key.
fn percentiles_by_radix(x: &[f32], ps: &[f64]) -> Vec<f64> {
    const BUCKET: usize = 1 << 16;
    let top = key_histogram(x, BUCKET, |k| Some((k >> 16) as usize));
    let last = top.iter().sum::<u64>() - 1;
    // (rank below, rank above, weight of the one above) per percentile.
    let ranks: Vec<(u64, u64, f64)> = ps
        .iter()
        .map(|&p| {
            let h = p / 100.0 * last as f64;
            let lo = h.floor() as u64;
            (lo, (lo + 1).min(last), h - lo as f64)
        })
        .collect();
    let located: Vec<(u64, (usize, u64))> =
        ranks.iter().flat_map(|&(lo, hi, _)| [lo, hi]).map(|r| (r, locate(&top, r))).collect();
    let mut buckets: Vec<usize> = located.iter().map(|&(_, (b, _))| b).collect();
    buckets.sort_unstable();
    buckets.dedup();
    let mut slot = vec![usize::MAX; BUCKET];
    for (i, &b) in buckets.iter().enumerate() {
        slot[b] = i;
    }
    let low = key_histogram(x, buckets.len() * BUCKET, |k| {
        let s = slot[(k >> 16) as usize];
        (s != usize::MAX).then(|| s * BUCKET + (k & 0xFFFF) as usize)
    });
    let value = |rank: u64| -> f64 {
        let (bucket, within) = located.iter().find(|l| l.0 == rank).map(|l| l.1).unwrap_or((0, 0));
        let s = slot[bucket];
        let (low_bits, _) = locate(&low[s * BUCKET..(s + 1) * BUCKET], within);
        f64::from(from_key(((bucket as u32) << 16) | low_bits as u32))
    };
    ranks
        .iter()
        .map(|&(lo, hi, frac)| {
            let a = value(lo);
            if frac == 0.0 { a } else { a + frac * (value(hi) - a) }
        })
        .collect()
}

/// An order-preserving key: `key(a) < key(b)` exactly when `a.total_cmp(&b)` is `Less`.
fn key(v: f32) -> u32 {
    let b = v.to_bits();
    if b >> 31 == 1 { !b } else { b | 0x8000_0000 }
}

fn from_key(k: u32) -> f32 {
    f32::from_bits(if k >> 31 == 1 { k & 0x7FFF_FFFF } else { !k })
}

/// Counts of the finite samples' keys in `bins` bins chosen by `bin` (`None` skips).
fn key_histogram(x: &[f32], bins: usize, bin: impl Fn(u32) -> Option<usize> + Sync) -> Vec<u64> {
    x.par_chunks(CHUNK)
        .fold(
            || vec![0u64; bins],
            |mut h, c| {
                for &v in c.iter().filter(|v| v.is_finite()) {
                    if let Some(i) = bin(key(v)) {
                        h[i] += 1;
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

/// The bin holding 0-based rank `rank` of the counted values, and the rank within it.
fn locate(counts: &[u64], rank: u64) -> (usize, u64) {
    let mut below = 0;
    for (i, &c) in counts.iter().enumerate() {
        if rank < below + c {
            return (i, rank - below);
        }
        below += c;
    }
    (counts.len() - 1, 0)
}

/// Counts of the finite samples of `plane` in `bins` equal bins over
/// `[lo, hi]` (values outside clamp to the end bins), for drawing histograms.
/// Parallel; independent of the thread count.
pub fn binned_counts(plane: &Plane, lo: f64, hi: f64, bins: usize) -> Vec<u64> {
    let binning = Binning::Range { lo, hi: if hi > lo { hi } else { lo + 1.0 }, bins: bins.max(1) };
    histogram::histogram(&[plane.as_slice()], &binning)
}

#[cfg(test)]
mod tests {
    //! Edge cases: a 1×1 plane, a constant plane, all samples NaN, NaN mixed
    //! in, clipped samples at both ends, codes versus the float path.
    use super::*;

    fn naive(values: &[f64]) -> (f64, f64) {
        let n = values.len() as f64;
        let mean = values.iter().sum::<f64>() / n;
        (mean, (values.iter().map(|v| (v - mean).powi(2)).sum::<f64>() / n).sqrt())
    }

    #[test]
    fn codes_and_float_paths_agree_with_a_naive_summary() {
        let plane = Plane::from_fn(37, 23, |x, y| ((x * 7 + y * 13) % 256) as f32 / 255.0).unwrap();
        let exact = channel_stats(&plane, Some(255));
        let float = channel_stats(&plane, None);
        let values: Vec<f64> = plane.as_slice().iter().map(|&v| f64::from(v)).collect();
        let (mean, std) = naive(&values);
        for s in [&exact, &float] {
            assert_eq!(s.count, 37 * 23);
            // The exact path uses k/255 in f64, the naive one the f32 sample: 2⁻²⁴ relative apart.
            assert!((s.mean - mean).abs() < 1e-7, "{} vs {mean}", s.mean);
            assert!((s.std - std).abs() < 1e-7, "{} vs {std}", s.std);
            assert_eq!(s.min, 0.0);
            assert_eq!(s.max, 1.0);
        }
        for (a, b) in exact.percentiles.iter().zip(&float.percentiles) {
            assert!((a.1 - b.1).abs() < 1e-7, "p{}: {} vs {}", a.0, a.1, b.1);
        }
        assert_eq!(exact.at_zero, float.at_zero);
        assert_eq!(exact.at_full, float.at_full);
    }

    #[test]
    fn keys_keep_the_total_order() {
        let v = [f32::NEG_INFINITY, -3e38, -1.0, -1e-40, -0.0, 0.0, 1e-40, 1.0, 3e38, f32::INFINITY];
        for w in v.windows(2) {
            assert!(key(w[0]) < key(w[1]), "{} {}", w[0], w[1]);
        }
        assert!(v.iter().all(|&x| from_key(key(x)).to_bits() == x.to_bits()));
    }

    #[test]
    fn type_7_percentiles_of_a_small_set() {
        // numpy.percentile([1, 2, 3, 4], [1, 50, 99]) = 1.03, 2.5, 3.97 (linear method).
        let x = [4.0f32, 1.0, 3.0, 2.0];
        let p = percentiles_by_radix(&x, &[1.0, 50.0, 99.0, 100.0]);
        for (got, want) in p.iter().zip([1.03, 2.5, 3.97, 4.0]) {
            assert!((got - want).abs() < 1e-12, "{got} vs {want}");
        }
        assert_eq!(percentiles_by_radix(&[5.0], &[0.0, 99.0]), vec![5.0, 5.0]);
    }

    #[test]
    fn radix_order_statistics_agree_with_sorting() {
        // Negative, positive, ±0, subnormal and huge values, many ties, NaN skipped.
        let mut state = 7u64;
        let mut values: Vec<f32> = (0..1001)
            .map(|_| {
                state = state.wrapping_mul(6364136223846793005).wrapping_add(1);
                ((state >> 45) % 300) as f32 / 7.0 - 20.0
            })
            .collect();
        values[..6].copy_from_slice(&[0.0, -0.0, 1e-40, -3e38, 3e38, 1e-3]);
        let with_nan: Vec<f32> = values.iter().copied().chain([f32::NAN, f32::INFINITY]).collect();
        let mut sorted = values.clone();
        sorted.sort_by(f32::total_cmp);
        let ps: Vec<f64> = (0..=200).map(|i| f64::from(i) / 2.0).collect();
        let got = percentiles_by_radix(&with_nan, &ps);
        for (&p, g) in ps.iter().zip(got) {
            let h = p / 100.0 * 1000.0;
            let (lo, frac) = (h.floor() as usize, h - h.floor());
            let (a, b) = (f64::from(sorted[lo]), f64::from(sorted[(lo + 1).min(1000)]));
            let want = if frac == 0.0 { a } else { a + frac * (b - a) };
            assert_eq!(g, want, "p{p}");
        }
    }

    #[test]
    fn non_finite_samples_are_counted_and_left_out() {
        let plane = Plane::from_vec(2, 2, vec![f32::NAN, 0.5, f32::INFINITY, 1.5]).unwrap();
        let s = channel_stats(&plane, Some(255));
        assert_eq!((s.count, s.non_finite, s.at_full), (2, 2, 1));
        assert_eq!((s.min, s.max, s.mean), (0.5, 1.5, 1.0));
        let all_nan = channel_stats(&Plane::filled(3, 1, f32::NAN).unwrap(), None);
        assert_eq!((all_nan.count, all_nan.non_finite), (0, 3));
        assert!(all_nan.mean.is_nan());
    }

    #[test]
    fn constant_and_single_sample_planes() {
        let s = channel_stats(&Plane::filled(1, 1, 0.0).unwrap(), Some(65535));
        assert_eq!((s.min, s.max, s.std, s.at_zero, s.at_full), (0.0, 0.0, 0.0, 1, 0));
        let s = channel_stats(&Plane::filled(4, 3, 1.0).unwrap(), None);
        assert_eq!((s.mean, s.std, s.at_full), (1.0, 0.0, 12));
        assert!(s.percentiles.iter().all(|&(_, v)| v == 1.0));
    }

    #[test]
    fn binned_counts_cover_every_finite_sample() {
        let plane = Plane::from_fn(10, 10, |x, _| x as f32 / 9.0).unwrap();
        let counts = binned_counts(&plane, 0.0, 1.0, 4);
        assert_eq!(counts.iter().sum::<u64>(), 100);
        assert_eq!(counts, vec![30, 20, 20, 30]);
    }
}
