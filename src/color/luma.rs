//! Luma weights: how much red, green and blue contribute to one gray value.

/// ITU-R BT.709-6, item 3.2/3.3: `Y = 0.2126 R + 0.7152 G + 0.0722 B`.
/// These are also the relative-luminance weights of the sRGB primaries (IEC 61966-2-1).
pub const BT709: [f32; 3] = [0.2126, 0.7152, 0.0722];

/// ITU-R BT.601-7, item 2.5.1: `Y = 0.299 R + 0.587 G + 0.114 B`.
pub const BT601: [f32; 3] = [0.299, 0.587, 0.114];

/// Equal weights: the plain mean of the three channels.
pub const MEAN: [f32; 3] = [1.0 / 3.0, 1.0 / 3.0, 1.0 / 3.0];

/// `out[i] = w[0]·r[i] + w[1]·g[i] + w[2]·b[i]`.
pub fn weighted_sum(w: [f32; 3], r: &[f32], g: &[f32], b: &[f32], out: &mut [f32]) {
    for (((o, &r), &g), &b) in out.iter_mut().zip(r).zip(g).zip(b) {
        *o = w[0] * r + w[1] * g + w[2] * b;
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn weights_are_the_published_ones_and_sum_to_one() {
        // ITU-R BT.709-6 §3.3 and ITU-R BT.601-7 §2.5.1.
        assert_eq!(BT709, [0.2126, 0.7152, 0.0722]);
        assert_eq!(BT601, [0.299, 0.587, 0.114]);
        for w in [BT709, BT601, MEAN] {
            assert!((w.iter().sum::<f32>() - 1.0).abs() < 1e-6);
        }
    }

    #[test]
    fn pure_green_gives_the_reference_values() {
        // ../shared REFERENCES.md [K2]: (0,255,0) → 182.38 (BT.709), 149.69 (BT.601),
        // recomputed here from the weights: 255·0.7152 and 255·0.587.
        let mut out = [0.0];
        weighted_sum(BT709, &[0.0], &[255.0], &[0.0], &mut out);
        assert!((out[0] - 182.376).abs() < 1e-3);
        weighted_sum(BT601, &[0.0], &[255.0], &[0.0], &mut out);
        assert!((out[0] - 149.685).abs() < 1e-3);
    }
}
