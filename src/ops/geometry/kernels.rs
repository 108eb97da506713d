//! Resampling kernels and the per-row / per-column weights built from them.

/// A resampling filter.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Filter {
    /// The nearest sample (no mixing).
    Nearest,
    /// Area average: the box of width 1, widened when reducing.
    Box,
    /// Linear interpolation: the triangle of radius 1.
    Bilinear,
    /// Catmull–Rom cubic (Mitchell–Netravali B = 0, C = ½; Keys 1981 with a = −½).
    Bicubic,
    /// Mitchell–Netravali cubic with B = C = ⅓ (Mitchell & Netravali 1988).
    Mitchell,
    /// Lanczos windowed sinc with three lobes.
    Lanczos3,
}

/// The filter names, as the `filter` parameter takes them.
pub const FILTER_NAMES: [&str; 6] = ["nearest", "box", "bilinear", "bicubic", "mitchell", "lanczos3"];

impl Filter {
    pub fn from_name(name: &str) -> Option<Filter> {
        Some(match name {
            "nearest" => Filter::Nearest,
            "box" => Filter::Box,
            "bilinear" => Filter::Bilinear,
            "bicubic" => Filter::Bicubic,
            "mitchell" => Filter::Mitchell,
            "lanczos3" => Filter::Lanczos3,
            _ => return None,
        })
    }

    /// The radius outside which the kernel is zero, at scale 1.
    pub fn support(self) -> f64 {
        match self {
            Filter::Nearest | Filter::Box => 0.5,
            Filter::Bilinear => 1.0,
            Filter::Bicubic | Filter::Mitchell => 2.0,
            Filter::Lanczos3 => 3.0,
        }
    }

    /// The kernel at `x` (in input samples at scale 1).
    ///
    /// ```text
    /// box:       1 for −½ ≤ x < ½
    /// bilinear:  1 − |x| for |x| < 1
    /// cubic(B, C), Mitchell & Netravali 1988, eq. 8:
    ///   |x| < 1:  ((12 − 9B − 6C)|x|³ + (−18 + 12B + 6C)|x|² + (6 − 2B)) / 6
    ///   |x| < 2:  ((−B − 6C)|x|³ + (6B + 30C)|x|² + (−12B − 48C)|x| + (8B + 24C)) / 6
    ///   bicubic: B = 0, C = ½;  mitchell: B = C = ⅓
    /// lanczos3:  sinc(x) · sinc(x/3) for |x| < 3, sinc(x) = sin(πx)/(πx)
    /// ```
    pub fn eval(self, x: f64) -> f64 {
        let a = x.abs();
        match self {
            Filter::Nearest | Filter::Box => {
                if (-0.5..0.5).contains(&x) {
                    1.0
                } else {
                    0.0
                }
            }
            Filter::Bilinear => (1.0 - a).max(0.0),
            Filter::Bicubic => cubic(a, 0.0, 0.5),
            Filter::Mitchell => cubic(a, 1.0 / 3.0, 1.0 / 3.0),
            Filter::Lanczos3 => {
                if a < 3.0 {
                    sinc(x) * sinc(x / 3.0)
                } else {
                    0.0
                }
            }
        }
    }
}

fn cubic(a: f64, b: f64, c: f64) -> f64 {
    if a < 1.0 {
        ((12.0 - 9.0 * b - 6.0 * c) * a * a * a + (-18.0 + 12.0 * b + 6.0 * c) * a * a + (6.0 - 2.0 * b))
            / 6.0
    } else if a < 2.0 {
        ((-b - 6.0 * c) * a * a * a
            + (6.0 * b + 30.0 * c) * a * a
            + (-12.0 * b - 48.0 * c) * a
            + (8.0 * b + 24.0 * c))
            / 6.0
    } else {
        0.0
    }
}

fn sinc(x: f64) -> f64 {
    if x == 0.0 {
        1.0
    } else {
        let px = std::f64::consts::PI * x;
        px.sin() / px
    }
}

/// The weights that map `in_len` samples to `out_len`: output `i` is
/// `Σ_k weights[i·taps + k] · in[start[i] + k]`.
///
/// ```text
/// scale = in / out,  widen = max(scale, 1),  radius = support · widen
/// centre(i) = (i + ½) · scale                   (sample j covers [j, j + 1))
/// taps j ∈ [⌊centre − radius + ½⌋, ⌊centre + radius + ½⌋) ∩ [0, in)
/// w(j) = k((j + ½ − centre) / widen) / Σ_j k(…)  (normalised, so constants stay constant)
/// ```
///
/// Taps that would fall outside the image are dropped and the rest
/// renormalised (the same window rule as Pillow's resampling). `Nearest` takes
/// the one sample whose cell holds the centre.
#[derive(Clone, Debug, PartialEq)]
pub struct Weights {
    pub taps: usize,
    pub start: Vec<usize>,
    pub count: Vec<usize>,
    pub weights: Vec<f32>,
}

impl Weights {
    pub fn new(in_len: usize, out_len: usize, filter: Filter) -> Weights {
        let scale = in_len as f64 / out_len as f64;
        if filter == Filter::Nearest {
            let start = (0..out_len).map(|i| (((i as f64 + 0.5) * scale) as usize).min(in_len - 1)).collect();
            return Weights { taps: 1, start, count: vec![1; out_len], weights: vec![1.0; out_len] };
        }
        let widen = scale.max(1.0);
        let radius = filter.support() * widen;
        let taps = (radius.ceil() as usize) * 2 + 1;
        let mut start = Vec::with_capacity(out_len);
        let mut count = Vec::with_capacity(out_len);
        let mut weights = vec![0.0f32; out_len * taps];
        let mut raw = vec![0.0f64; taps];
        for i in 0..out_len {
            let centre = (i as f64 + 0.5) * scale;
            let lo = ((centre - radius + 0.5).floor().max(0.0)) as usize;
            let hi = ((centre + radius + 0.5).floor() as usize).min(in_len).max(lo + 1).min(lo + taps);
            let n = hi - lo;
            let mut sum = 0.0;
            for (k, r) in raw.iter_mut().take(n).enumerate() {
                *r = filter.eval(((lo + k) as f64 + 0.5 - centre) / widen);
                sum += *r;
            }
            for k in 0..n {
                weights[i * taps + k] =
                    if sum != 0.0 { (raw[k] / sum) as f32 } else { (1.0 / n as f64) as f32 };
            }
            start.push(lo.min(in_len - n));
            count.push(n);
        }
        Weights { taps, start, count, weights }
    }

    /// The weights of output `i`, one per tap from `start[i]`.
    pub fn of(&self, i: usize) -> &[f32] {
        &self.weights[i * self.taps..i * self.taps + self.count[i]]
    }
}

#[cfg(test)]
mod tests {
    //! Edge cases: 1-sample inputs and outputs, large reductions, identity scale.
    use super::*;

    #[test]
    fn kernels_match_their_published_values() {
        // ../shared REFERENCES.md [K3]; Mitchell & Netravali 1988; Keys 1981 (a = −½).
        let m = Filter::Mitchell;
        for (x, want) in [(0.0, 8.0 / 9.0), (0.5, 0.534722), (1.0, 1.0 / 18.0), (1.5, -0.034722)] {
            assert!((m.eval(x) - want).abs() < 1e-6, "mitchell({x})");
        }
        let c = Filter::Bicubic;
        for (x, want) in [(0.0, 1.0), (0.5, 0.5625), (1.0, 0.0), (1.5, -0.0625)] {
            assert!((c.eval(x) - want).abs() < 1e-12, "catmull-rom({x})");
        }
        let l = Filter::Lanczos3;
        for (x, want) in [(0.5, 0.607927), (1.5, -0.135095), (2.5, 0.024317), (3.0, 0.0)] {
            assert!((l.eval(x) - want).abs() < 1e-6, "lanczos3({x})");
        }
    }

    #[test]
    fn weights_sum_to_one_at_every_phase() {
        for filter in [Filter::Box, Filter::Bilinear, Filter::Bicubic, Filter::Mitchell, Filter::Lanczos3] {
            for (n_in, n_out) in
                [(1, 1), (1, 7), (7, 1), (10, 3), (3, 10), (4000, 1000), (1000, 4000), (17, 17)]
            {
                let w = Weights::new(n_in, n_out, filter);
                for i in 0..n_out {
                    let s: f32 = w.of(i).iter().sum();
                    assert!((s - 1.0).abs() < 1e-5, "{filter:?} {n_in}→{n_out} output {i}: {s}");
                    assert!(w.start[i] + w.count[i] <= n_in);
                }
            }
        }
    }

    #[test]
    fn interpolating_kernels_at_scale_one_are_the_identity() {
        for filter in [Filter::Nearest, Filter::Box, Filter::Bilinear, Filter::Bicubic, Filter::Lanczos3] {
            let w = Weights::new(9, 9, filter);
            for i in 0..9 {
                let taps = w.of(i);
                let centre = i - w.start[i];
                for (k, &v) in taps.iter().enumerate() {
                    assert!((v - if k == centre { 1.0 } else { 0.0 }).abs() < 1e-7, "{filter:?} at {i}");
                }
            }
        }
    }
}
