//! Exact pixel moves on planes: flips, quarter turns and transposes. These never
//! mix samples, so they are lossless and work in any encoding.

use super::Plane;

/// Mirrors left to right: `out(x, y) = in(w−1−x, y)`.
pub fn flip_horizontal(p: &mut Plane) {
    let h = p.height();
    for y in 0..h {
        p.row_mut(y).reverse();
    }
}

/// Mirrors top to bottom: `out(x, y) = in(x, h−1−y)`.
pub fn flip_vertical(p: &mut Plane) {
    let (w, h) = (p.width(), p.height());
    let data = p.as_mut_slice();
    for y in 0..h / 2 {
        let (top, bottom) = data.split_at_mut((h - 1 - y) * w);
        top[y * w..(y + 1) * w].swap_with_slice(&mut bottom[..w]);
    }
}

/// Half turn: `out(x, y) = in(w−1−x, h−1−y)`.
pub fn rotate_180(p: &mut Plane) {
    p.as_mut_slice().reverse();
}

/// Exchanges rows and columns: `out(x, y) = in(y, x)`; the result is `h × w`.
pub fn transpose(p: &Plane) -> Plane {
    remap_quarter(p, |x, y, _w, _h| (y, x))
}

/// Quarter turn clockwise: `out(x, y) = in(y, h−1−x)`; the result is `h × w`.
pub fn rotate_90_cw(p: &Plane) -> Plane {
    remap_quarter(p, |x, y, _w, h| (y, h - 1 - x))
}

/// Quarter turn anticlockwise: `out(x, y) = in(w−1−y, x)`; the result is `h × w`.
pub fn rotate_90_ccw(p: &Plane) -> Plane {
    remap_quarter(p, |x, y, w, _h| (w - 1 - y, x))
}

/// Flip across the anti-diagonal: `out(x, y) = in(w−1−y, h−1−x)`; the result is `h × w`.
pub fn transverse(p: &Plane) -> Plane {
    remap_quarter(p, |x, y, w, h| (w - 1 - y, h - 1 - x))
}

/// Builds the `h × w` plane whose sample `(x, y)` is `in(src(x, y, w, h))`.
/// Visits the output in 32×32 blocks so both the reads and the writes stay in cache.
fn remap_quarter(p: &Plane, src: impl Fn(usize, usize, usize, usize) -> (usize, usize)) -> Plane {
    const BLOCK: usize = 32;
    let (w, h) = (p.width(), p.height());
    let (ow, oh) = (h, w);
    let input = p.as_slice();
    let mut out = vec![0.0f32; ow * oh];
    for by in (0..oh).step_by(BLOCK) {
        for bx in (0..ow).step_by(BLOCK) {
            for y in by..(by + BLOCK).min(oh) {
                let row = &mut out[y * ow..(y + 1) * ow];
                for (x, o) in row.iter_mut().enumerate().take((bx + BLOCK).min(ow)).skip(bx) {
                    let (sx, sy) = src(x, y, w, h);
                    *o = input[sy * w + sx];
                }
            }
        }
    }
    // The size is that of the input with sides exchanged, so it is valid.
    Plane::from_vec(ow, oh, out).unwrap_or_else(|_| unreachable!("size of a valid plane, sides exchanged"))
}

#[cfg(test)]
mod tests {
    //! Edge cases: 1×1, 1×N and N×1 planes, odd heights for the vertical flip.
    use super::*;

    fn ramp(w: usize, h: usize) -> Plane {
        Plane::from_fn(w, h, |x, y| (y * w + x) as f32).unwrap()
    }

    #[test]
    fn quarter_turns_follow_their_formulas() {
        let p = ramp(3, 2); // rows: [0 1 2] [3 4 5]
        assert_eq!(rotate_90_cw(&p).as_slice(), &[3., 0., 4., 1., 5., 2.]);
        assert_eq!(rotate_90_ccw(&p).as_slice(), &[2., 5., 1., 4., 0., 3.]);
        assert_eq!(transpose(&p).as_slice(), &[0., 3., 1., 4., 2., 5.]);
        assert_eq!(transverse(&p).as_slice(), &[5., 2., 4., 1., 3., 0.]);
    }

    #[test]
    fn four_quarter_turns_and_double_flips_are_identities() {
        for (w, h) in [(1, 1), (1, 7), (7, 1), (5, 4), (33, 70)] {
            let p = ramp(w, h);
            let r = rotate_90_cw(&rotate_90_cw(&rotate_90_cw(&rotate_90_cw(&p))));
            assert_eq!(r, p);
            assert_eq!(rotate_90_ccw(&rotate_90_cw(&p)), p);
            let mut q = p.clone();
            flip_vertical(&mut q);
            flip_vertical(&mut q);
            flip_horizontal(&mut q);
            flip_horizontal(&mut q);
            assert_eq!(q, p);
        }
    }

    #[test]
    fn vertical_flip_handles_odd_heights() {
        let mut p = ramp(2, 3);
        flip_vertical(&mut p);
        assert_eq!(p.as_slice(), &[4., 5., 2., 3., 0., 1.]);
    }
}
