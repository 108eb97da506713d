//! `exp(−u)` for `u ≥ 0` from a lookup table with linear interpolation: the
//! weight function of the edge-preserving filters (`bilateral`, `nlmeans`),
//! evaluated once per pixel and neighbour, where a call to `exp` would
//! dominate the cost. It is not a general exponential.

use multiversion::multiversion;

/// Table entries per unit of `u`: the step is δ = 1/512.
pub const STEPS_PER_UNIT: usize = 512;

/// Beyond this `u` the weight is taken as 0 (`exp(−24) ≈ 3.8e−11`, below
/// half an f32 ulp of the weight 1 every window has at its centre).
pub const U_MAX: usize = 24;

const ENTRIES: usize = U_MAX * STEPS_PER_UNIT;

/// Worst absolute error of [`ExpTable::eval`] against `exp(−u)`: linear
/// interpolation of `f` on a step δ is off by at most `δ²/8 · max|f''|`
/// (the interpolation remainder), and `max|f''| = 1` at `u = 0`, so
/// δ²/8 = 4.77e−7; the f32 rounding of entries and of the
/// interpolation adds a few 1e−8 (checked densely in the tests).
pub const MAX_ERROR: f32 = 5.5e-7;

/// The table: `exp(−k·δ)` for `k = 0 … ENTRIES`, then a 0 so that any index
/// up to `ENTRIES` can read its right neighbour.
pub struct ExpTable {
    values: Box<[f32; ENTRIES + 2]>,
}

impl std::fmt::Debug for ExpTable {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("ExpTable").finish_non_exhaustive()
    }
}

impl ExpTable {
    pub fn new() -> ExpTable {
        let mut values = Box::new([0.0f32; ENTRIES + 2]);
        for (k, v) in values.iter_mut().enumerate().take(ENTRIES + 1) {
            *v = (-(k as f64) / STEPS_PER_UNIT as f64).exp() as f32;
        }
        // Entry ENTRIES + 1 stays 0, and so does everything past U_MAX.
        values[ENTRIES] = 0.0;
        ExpTable { values }
    }

    /// `exp(−u)` for one `u ≥ 0`, within [`MAX_ERROR`]; 0 from [`U_MAX`] on
    /// and for `+∞` or NaN.
    #[inline]
    pub fn eval(&self, u: f32) -> f32 {
        // `t` in [0, ENTRIES]: NaN and +∞ become ENTRIES through `min` (weight
        // 0), a negative u becomes 0.
        let t = (u * STEPS_PER_UNIT as f32).min(ENTRIES as f32).max(0.0);
        // i = round(t − 1/2) by the 1.5·2²³ trick (exact for t < 2²²): ⌊t⌋, or
        // t − 1 when t is a whole number, where frac = 1 gives the same value.
        // Plain bit arithmetic, so the loop vectorises (a float-to-int `as`
        // cast saturates, which the compiler does lane by lane).
        const MAGIC: f32 = 12_582_912.0;
        let i = ((t - 0.5 + MAGIC).to_bits().wrapping_sub(MAGIC.to_bits())).min(ENTRIES as u32) as usize;
        let frac = t - i as f32;
        let (a, b) = (self.values[i], self.values[i + 1]);
        a + frac * (b - a)
    }

    /// `out[x] = scale · exp(−u[x])`, vectorised where the CPU has gathers.
    pub fn eval_row(&self, u: &[f32], scale: f32, out: &mut [f32]) {
        eval_row(self, u, scale, out);
    }
}

impl Default for ExpTable {
    fn default() -> Self {
        ExpTable::new()
    }
}

#[multiversion(targets("x86_64+avx512f+avx512bw+avx512vl+avx2+fma", "x86_64+avx2+fma"))]
fn eval_row(table: &ExpTable, u: &[f32], scale: f32, out: &mut [f32]) {
    for (o, &u) in out.iter_mut().zip(u) {
        *o = scale * table.eval(u);
    }
}

#[cfg(test)]
mod tests {
    //! Edge cases: u = 0 (exactly 1), u at and past U_MAX, +∞, NaN.
    use super::*;

    #[test]
    fn matches_exp_within_the_stated_bound() {
        let t = ExpTable::new();
        let mut worst = 0.0f64;
        // 7 samples per table step across the whole range, and a little past it.
        for k in 0..(U_MAX + 1) * STEPS_PER_UNIT * 7 {
            let u = k as f32 / (7 * STEPS_PER_UNIT) as f32;
            let exact = if u >= U_MAX as f32 { 0.0 } else { (-f64::from(u)).exp() };
            worst = worst.max((f64::from(t.eval(u)) - exact).abs());
        }
        assert!(worst <= f64::from(MAX_ERROR), "worst {worst:e}");
        // the bound is not loose by more than a small factor
        assert!(worst > 0.5 * 4.77e-7, "worst {worst:e}");
    }

    #[test]
    fn ends_and_non_finite_inputs() {
        let t = ExpTable::new();
        assert_eq!(t.eval(0.0), 1.0);
        assert_eq!(t.eval(U_MAX as f32), 0.0);
        assert_eq!(t.eval(1e30), 0.0);
        assert_eq!(t.eval(f32::INFINITY), 0.0);
        assert_eq!(t.eval(f32::NAN), 0.0);
        let mut out = [9.0; 3];
        t.eval_row(&[0.0, 1.0, 100.0], 2.0, &mut out);
        assert_eq!(out[0], 2.0);
        assert!((out[1] - 2.0 * (-1.0f32).exp()).abs() < 2e-6);
        assert_eq!(out[2], 0.0);
    }
}
