//! The IEC 61966-2-1:1999 sRGB transfer function, both ways: the exact formula
//! for `f32` data, lookup tables for 8- and 16-bit codes, and an exact quantiser
//! from linear light to 8- or 16-bit sRGB codes.
//!
//! ```text
//! decode (encoded c → linear l):  l = c / 12.92                    if c ≤ 0.04045
//!                                 l = ((c + 0.055) / 1.055)^2.4    otherwise
//! encode (linear l → encoded c):  c = 12.92 · l                    if l ≤ 0.0031308
//!                                 c = 1.055 · l^(1/2.4) − 0.055    otherwise
//! ```
//!
//! Values below zero are mapped by odd symmetry (`f(−x) = −f(x)`) and values above
//! one follow the same power law, as the extended-range sRGB of IEC 61966-2-2
//! (scRGB) does, so float data outside `[0, 1]` survive a round trip.

use std::sync::OnceLock;

use multiversion::multiversion;

use crate::ops::CodeTable;

const DECODE_BREAK: f64 = 0.04045;
const ENCODE_BREAK: f64 = 0.0031308;
const SLOPE: f64 = 12.92;
const OFFSET: f64 = 0.055;
const GAMMA: f64 = 2.4;

/// Encoded sRGB value → linear light, in double precision (IEC 61966-2-1, §5.2).
pub fn decode_f64(c: f64) -> f64 {
    let a = c.abs();
    let l = if a <= DECODE_BREAK { a / SLOPE } else { ((a + OFFSET) / (1.0 + OFFSET)).powf(GAMMA) };
    l.copysign(c)
}

/// Linear light → encoded sRGB value, in double precision (IEC 61966-2-1, §5.3).
pub fn encode_f64(l: f64) -> f64 {
    let a = l.abs();
    let c = if a <= ENCODE_BREAK { a * SLOPE } else { (1.0 + OFFSET) * a.powf(1.0 / GAMMA) - OFFSET };
    c.copysign(l)
}

/// Encoded sRGB value → linear light.
pub fn decode(c: f32) -> f32 {
    decode_f64(f64::from(c)) as f32
}

/// Linear light → encoded sRGB value.
pub fn encode(l: f32) -> f32 {
    encode_f64(f64::from(l)) as f32
}

/// `table[k] = decode(k / max)` for every code `k` of a `max`-level source.
fn build_decode_table(max: u32) -> Vec<f32> {
    (0..=max).map(|k| decode_f64(f64::from(k) / f64::from(max)) as f32).collect()
}

/// The decode table for 8-bit codes (256 entries).
pub fn decode_table_u8() -> &'static [f32] {
    static TABLE: OnceLock<Vec<f32>> = OnceLock::new();
    TABLE.get_or_init(|| build_decode_table(255))
}

/// The decode table for 16-bit codes (65536 entries).
pub fn decode_table_u16() -> &'static [f32] {
    static TABLE: OnceLock<Vec<f32>> = OnceLock::new();
    TABLE.get_or_init(|| build_decode_table(65535))
}

/// The decode table for `levels` (255 or 65535), if there is one: the lookup
/// [`decode_in_place`] does for those levels.
pub fn decode_code_table(levels: u32) -> Option<CodeTable> {
    match levels {
        255 => decode_table_u8().try_into().ok().map(CodeTable::U8),
        65535 => decode_table_u16().try_into().ok().map(CodeTable::U16),
        _ => None,
    }
}

/// Decodes encoded samples to linear light in place. When `levels` is `Some(n)`
/// and a table exists for `n`, each sample is taken to be an exact code `k/n` and
/// looked up (`k = round(c·n)`), which equals the formula to within its `f32` rounding.
pub fn decode_in_place(samples: &mut [f32], levels: Option<u32>) {
    match levels.and_then(decode_code_table) {
        Some(CodeTable::U8(table)) => lookup(samples, table),
        Some(CodeTable::U16(table)) => lookup(samples, table),
        None => samples.iter_mut().for_each(|s| *s = decode(*s)),
    }
}

/// `s ← table[round(s · (N − 1))]`, for `N` a power of two up to 2¹⁶, a
/// block of samples at a time: their indices first ([`table_indices`], vector
/// arithmetic), then one plain load per sample. Vector gathers are left out on
/// purpose: they made this pass slower than the loads one by one on a Xeon
/// (`perf`: 15 % of a linear-light resize) and on a Zen 4 (36 M samples on one
/// thread: loads 16 ms, AVX2 gathers 18 ms, AVX-512 gathers 20 ms; a
/// 256-entry lookup by eight AVX-512 two-table permutes took 13.6 ms, too
/// little a gain for the hand-written intrinsics it needs).
fn lookup<const N: usize>(samples: &mut [f32], table: &[f32; N]) {
    const BLOCK: usize = 256;
    let mut indices = [0u16; BLOCK];
    for block in samples.chunks_mut(BLOCK) {
        table_indices::<N>(block, &mut indices);
        for (s, &k) in block.iter_mut().zip(&indices) {
            *s = table[usize::from(k) & (N - 1)];
        }
    }
}

/// The table index `round(s · (N − 1))` of each sample. Clamping to
/// `[0, N − 1]` before rounding maps NaN and negative values to code 0
/// (`f32::max` drops a NaN) and caps the rest. For an integer `k < 2²³`,
/// `k + 2²³` is exact and its low mantissa bits are `k`: an index computed in
/// vector registers (a saturating `as` cast is not).
#[multiversion(targets("x86_64+avx512f+avx512bw+avx512vl+avx2+fma", "x86_64+avx2+fma"))]
pub(crate) fn table_indices<const N: usize>(samples: &[f32], indices: &mut [u16; 256]) {
    debug_assert!(N.is_power_of_two() && N <= 1 << 16);
    let scale = (N - 1) as f32;
    for (k, &s) in indices.iter_mut().zip(samples) {
        let r = (s * scale + 0.5).max(0.0).min(scale).floor();
        *k = (r + 8_388_608.0).to_bits() as u16;
    }
}

/// Encodes linear samples to sRGB in place with the formula.
pub fn encode_in_place(samples: &mut [f32]) {
    samples.iter_mut().for_each(|s| *s = encode(*s));
}

/// Maps linear light straight to the nearest 8- or 16-bit sRGB code:
/// `code(l) = round(encode(clamp(l, 0, 1)) · max)`, with halves rounded up.
///
/// Because `encode` is increasing, `code(l) ≥ k + 1` exactly when
/// `l ≥ t[k] = decode((k + ½) / max)`. The quantiser keeps those thresholds and a
/// coarse index over `l` that gives a starting code a few steps below the answer;
/// it then steps up past every threshold `l` reaches. When a bin of the index
/// holds at most [`Quantiser::FIXED_STEPS`] thresholds (8-bit output: one),
/// the steps are a fixed count of compare-and-adds with no data-dependent
/// branch, which halves the cost of quantising a photo (the branch of a
/// stepping loop that runs zero or one time is mispredicted about half the
/// time). The test
/// `quantiser_matches_the_formula_at_every_threshold` checks it against the formula.
pub struct Quantiser {
    /// `thresholds[k]` for `k < max`, then `+∞` (no `l` steps past `max`).
    thresholds: Vec<f32>,
    /// `start[b]` = the code for `l = b / bins`.
    start: Vec<u32>,
    bins: usize,
    /// The most thresholds in one bin: `max(start[b + 1] − start[b])`.
    steps: u32,
}

impl Quantiser {
    fn new(max: u32, bins: usize) -> Quantiser {
        let scale = f64::from(max);
        // True when the exact code of `l` is above `k`.
        let above = |l: f32, k: u32| encode_f64(f64::from(l)) * scale >= f64::from(k) + 0.5;
        let thresholds: Vec<f32> = (0..max)
            .map(|k| {
                // Start from the rounded inverse, then move to the smallest f32 whose
                // exact code is above k, so the comparison below is exact for every f32.
                let mut t = decode_f64((f64::from(k) + 0.5) / scale) as f32;
                while above(t.next_down(), k) {
                    t = t.next_down();
                }
                while !above(t, k) {
                    t = t.next_up();
                }
                t
            })
            .chain([f32::INFINITY])
            .collect();
        let mut start = Vec::with_capacity(bins + 1);
        let mut code = 0u32;
        for b in 0..=bins {
            let l = b as f32 / bins as f32;
            while code < max && l >= thresholds[code as usize] {
                code += 1;
            }
            start.push(code);
        }
        let steps = start.windows(2).map(|w| w[1] - w[0]).max().unwrap_or(0);
        Quantiser { thresholds, start, bins, steps }
    }

    /// The largest code (255 or 65535).
    #[cfg(test)]
    fn max_code(&self) -> u32 {
        (self.thresholds.len() - 1) as u32
    }

    /// Bins holding at most this many thresholds are stepped through without branching.
    pub const FIXED_STEPS: u32 = 2;

    /// The quantiser for 8-bit output.
    pub fn u8() -> &'static Quantiser {
        static Q: OnceLock<Quantiser> = OnceLock::new();
        Q.get_or_init(|| Quantiser::new(255, 4096))
    }

    /// The quantiser for 16-bit output.
    pub fn u16() -> &'static Quantiser {
        static Q: OnceLock<Quantiser> = OnceLock::new();
        Q.get_or_init(|| Quantiser::new(65535, 65536))
    }

    /// The code for linear value `l` (NaN gives 0).
    #[inline]
    pub fn code(&self, l: f32) -> u32 {
        let l = if l.is_nan() { 0.0 } else { l.clamp(0.0, 1.0) };
        // Truncation of a value in [0, bins] picks the bin whose start is ≤ l.
        // `bins` is a power of two, so the product is exact.
        let mut code = self.start[(l * self.bins as f32) as usize];
        if self.steps <= Self::FIXED_STEPS {
            for _ in 0..self.steps {
                code += u32::from(l >= self.thresholds[code as usize]);
            }
        } else {
            while l >= self.thresholds[code as usize] {
                code += 1;
            }
        }
        code
    }
}

#[cfg(test)]
mod tests {
    //! Edge cases: the breakpoints, negative values, values above one, NaN, and
    //! every 8- and 16-bit code.
    use super::*;

    #[test]
    fn published_check_values() {
        // ../shared REFERENCES.md [K1], IEC 61966-2-1:1999 §5.2/§5.3.
        assert!((decode_f64(128.0 / 255.0) - 0.215861).abs() < 1e-6);
        assert!((encode_f64(0.5) - 0.735357).abs() < 1e-6);
        assert!((encode_f64(0.18) * 255.0 - 117.65).abs() < 0.01);
        assert_eq!(Quantiser::u8().code(0.5), 188);
    }

    #[test]
    fn formula_constants_and_continuity_at_the_breakpoints() {
        // IEC 61966-2-1:1999 §5.2: slope 12.92 below 0.04045 (encoded) / 0.0031308 (linear).
        assert_eq!(decode_f64(0.04), 0.04 / 12.92);
        assert_eq!(encode_f64(0.003), 0.003 * 12.92);
        // Both pieces meet at the breakpoint to within the rounding of the published constants.
        let below = DECODE_BREAK / SLOPE;
        let above = ((DECODE_BREAK + OFFSET) / 1.055).powf(2.4);
        assert!((below - above).abs() < 1e-7, "{below} vs {above}");
        let below = ENCODE_BREAK * SLOPE;
        let above = 1.055 * ENCODE_BREAK.powf(1.0 / 2.4) - 0.055;
        assert!((below - above).abs() < 1e-7, "{below} vs {above}");
        assert_eq!(decode_f64(0.0), 0.0);
        assert!((decode_f64(1.0) - 1.0).abs() < 1e-15);
    }

    #[test]
    fn monotone_and_inverse_of_each_other() {
        let mut last = f64::NEG_INFINITY;
        for i in -1000..=2000 {
            let c = f64::from(i) / 1000.0;
            let l = decode_f64(c);
            assert!(l > last, "decode is not increasing at {c}");
            last = l;
            assert!((encode_f64(l) - c).abs() < 1e-12, "round trip at {c}");
        }
    }

    #[test]
    fn tables_equal_the_formula() {
        for (max, table) in [(255u32, decode_table_u8()), (65535, decode_table_u16())] {
            assert_eq!(table.len(), max as usize + 1);
            for (k, &v) in table.iter().enumerate() {
                // The table divides in f64, so it equals the double-precision formula rounded once.
                assert_eq!(v, decode_f64(k as f64 / f64::from(max)) as f32, "code {k} of {max}");
            }
        }
    }

    #[test]
    fn table_lookup_clamps_and_spans_blocks() {
        // Over several blocks of indices: codes, NaN and values outside 0..1
        // (code 0 and the top code), for both tables.
        for (max, table) in [(255u32, decode_table_u8()), (65535, decode_table_u16())] {
            let samples: Vec<f32> = (0..1000)
                .map(|i| match i % 7 {
                    0 => f32::NAN,
                    1 => -0.5,
                    2 => 3.0,
                    _ => ((i * 37) as u32 % (max + 1)) as f32 / max as f32,
                })
                .collect();
            let mut out = samples.clone();
            decode_in_place(&mut out, Some(max));
            for (&s, &v) in samples.iter().zip(&out) {
                let k = if s.is_nan() { 0.0 } else { (s * max as f32).round().clamp(0.0, max as f32) };
                assert_eq!(v, table[k as usize], "{s} of {max}");
            }
        }
    }

    #[test]
    fn table_path_equals_formula_path() {
        let mut a: Vec<f32> = (0..=255).map(|k| k as f32 / 255.0).collect();
        let mut b = a.clone();
        decode_in_place(&mut a, Some(255));
        decode_in_place(&mut b, None);
        // The formula path starts from the f32 value k/255 (½ ulp off); the power law
        // scales relative error by its exponent 2.4, and the result is rounded once
        // more (½ ulp): 1.7 ulp at most, so 2ε relative.
        for (x, y) in a.iter().zip(&b) {
            assert!((x - y).abs() <= 2.0 * f32::EPSILON * y.abs(), "{x} vs {y}");
        }
    }

    #[test]
    fn quantiser_matches_the_formula_at_every_threshold() {
        // 8-bit output takes the branch-free path (one threshold per bin), 16-bit the stepping loop.
        assert_eq!(Quantiser::u8().steps, 1);
        assert!(Quantiser::u16().steps > Quantiser::FIXED_STEPS);
        for q in [Quantiser::u8(), Quantiser::u16()] {
            let top = q.max_code();
            let max = f64::from(top);
            let exact = |l: f32| (encode_f64(f64::from(l).clamp(0.0, 1.0)) * max + 0.5).floor() as u32;
            for k in 0..top {
                let t = q.thresholds[k as usize];
                // Just below, at, and just above every threshold.
                for l in [t.next_down(), t, t.next_up()] {
                    assert_eq!(q.code(l), exact(l), "l = {l:e}, max = {max}");
                }
            }
            assert_eq!(q.code(-1.0), 0);
            assert_eq!(q.code(2.0), top);
            assert_eq!(q.code(f32::NAN), 0);
        }
    }

    #[test]
    fn every_code_survives_decode_then_quantise() {
        for (max, q) in [(255u32, Quantiser::u8()), (65535, Quantiser::u16())] {
            let mut s: Vec<f32> = (0..=max).map(|k| k as f32 / max as f32).collect();
            decode_in_place(&mut s, Some(max));
            for (k, &l) in s.iter().enumerate() {
                assert_eq!(q.code(l), k as u32);
            }
        }
    }
}
