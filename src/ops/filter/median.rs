//! `median`: the exact median over a square or disk window, with four engines
//! that give the same result — for radius 1 and 2 a pruned comparator network
//! run on whole rows, on bytes for 8-bit sources (`median8`) or on f32, a
//! sliding histogram for 8/16-bit sources (larger radii) and selection
//! (everything else). It does not quantise f32 data.

use super::median8;
use super::network::{Comparator, compare_rows, selection_network, two};
use crate::error::{Error, ParamError};
use crate::ops::params::{self, Kind, OpSpec, ParamSpec};
use crate::ops::{Domain, Operator, filter_planes};
use crate::raster::{Plane, Raster};
use crate::tile::{self, Border};

/// Largest `median` radius accepted.
pub const MAX_MEDIAN_RADIUS: usize = 255;

/// The text of `pumice ops median`, also the doc of [`Median`].
macro_rules! median_doc {
    () => {
        "Median over a square or disk window.

```text
W = {(i, j) : |i|, |j| ≤ r}            shape=square, (2r+1)² samples
W = {(i, j) : i² + j² ≤ r²}            shape=disk
out(x, y) = the middle value of the sorted in(x + j, y + i), (i, j) ∈ W
```

W always holds an odd number of samples, so the median is one of them.
Engines (all exact, tested against each other): radius 1–2 on an untouched
8-bit source (every sample and the fill exactly k/255), the codes as bytes,
with comparator networks pruned to the comparators that can still exchange
when their inputs arrive in sorted groups (found by the zero–one principle,
Knuth, TAOCP vol. 3, §5.3.4), run on 32 or more codes per instruction — for
the square, each code row sorted once across its neighbours, and two output
rows sharing the selection of candidates from the rows they have in common
(for 5×5, 60 comparators per output instead of 94); for the disk, each window
column sorted once per output row; radius 1–2 otherwise, the
same kind of network on f32 rows; radius ≥ 3 on an untouched
8- or 16-bit source, a sliding histogram of the integer codes (Huang, Yang &
Tang, IEEE Trans. ASSP 27(1), 1979: each step right removes one column of the
window and adds another, and the middle is found by a 256-bin coarse count
then the fine bins); otherwise selection (introselect) per pixel. f32 data is
never quantised. NaN counts as larger than every number (IEEE 754 totalOrder).
Domain: any. The median of an odd count is one of the samples and the sRGB
transfer is strictly increasing, so the median commutes with it: the result
is the same in linear light and encoded values, and no conversion is made
(which keeps 8/16-bit sources on the exact histogram path). With alpha, colour
is premultiplied while filtering, as for every neighbourhood operator.
Border: any rule (default reflect); needs r rows of halo.
Source: the median filter (Tukey; Huang 1979), as scipy.ndimage.median_filter."
    };
}

/// The window shape.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Shape {
    Square,
    Disk,
}

#[doc = median_doc!()]
#[derive(Debug)]
pub struct Median {
    radius: usize,
    shape: Shape,
    border: Border,
}

impl Median {
    pub fn new(radius: usize, shape: Shape, border: Border) -> Result<Median, ParamError> {
        if radius == 0 || radius > MAX_MEDIAN_RADIUS {
            return Err(ParamError::new(format!(
                "median radius must be a whole number in 1..={MAX_MEDIAN_RADIUS}, got {radius}"
            )));
        }
        Ok(Median { radius, shape, border })
    }

    /// The window as (row offset, half width) pairs: row `i` covers `|j| ≤ half`.
    fn rows(&self) -> Vec<(isize, usize)> {
        let r = self.radius as isize;
        (-r..=r)
            .map(|i| {
                let half = match self.shape {
                    Shape::Square => self.radius,
                    Shape::Disk => ((r * r - i * i) as f64).sqrt().floor() as usize,
                };
                (i, half)
            })
            .collect()
    }

    /// The median of one plane. `levels` is the raster's promise that samples
    /// are exact `k / levels`; it is checked before the 8-bit engine or the
    /// histogram trusts it.
    pub fn median_plane(&self, p: &Plane, levels: Option<u32>) -> Plane {
        if levels == Some(255) && self.radius <= 2 {
            let mut out = p.clone();
            if self.median_u8_in_place(&mut out, &mut Vec::new()) {
                return out;
            }
        }
        self.median_plane_f32(p, levels)
    }

    /// The 8-bit engine, in place: false (and `p` untouched) when it does not
    /// apply (radius above 2, or a sample or the fill off the 255 grid).
    fn median_u8_in_place(&self, p: &mut Plane, codes: &mut Vec<u8>) -> bool {
        self.radius <= 2
            && median8::median_u8_in_place(
                p,
                &self.rows(),
                self.radius,
                self.shape == Shape::Disk,
                self.border,
                codes,
            )
    }

    /// [`Median::median_plane`] without the 8-bit engine.
    fn median_plane_f32(&self, p: &Plane, levels: Option<u32>) -> Plane {
        let finite = p.as_slice().iter().all(|v| v.is_finite());
        let window = self.rows();
        if finite && self.radius <= 2 {
            return network_median(p, &window, self.radius, self.border);
        }
        if let Some(n) = levels.filter(|&n| (1..=65535).contains(&n))
            && on_grid(p, n)
            && on_grid_value(self.border.constant_value(), n)
        {
            return histogram_median(p, &window, self.radius, self.border, n);
        }
        select_median(p, &window, self.radius, self.border)
    }
}

fn on_grid_value(v: f32, n: u32) -> bool {
    let k = (f64::from(v) * f64::from(n)).round();
    (0.0..=f64::from(n)).contains(&k) && (k as f32 / n as f32) == v
}

/// True when every sample is exactly `k / n` as the decoders compute it.
fn on_grid(p: &Plane, n: u32) -> bool {
    p.as_slice().iter().all(|&v| on_grid_value(v, n))
}

impl Operator for Median {
    fn domain(&self) -> Domain {
        Domain::Any
    }

    fn apply(&self, mut raster: Raster) -> Result<Raster, Error> {
        if raster.layout().has_alpha() {
            return filter_planes(raster, |p| Ok(self.median_plane(p, None)));
        }
        // Without alpha each plane is filtered on its own, so the 8-bit
        // engine can write into the plane's buffer (no fresh output plane).
        let levels = raster.levels;
        let mut codes = Vec::new();
        for p in raster.planes_mut() {
            if levels != Some(255) || !self.median_u8_in_place(p, &mut codes) {
                *p = self.median_plane_f32(p, levels);
            }
        }
        Ok(raster)
    }
}

/// The source rows `y − r ..= y + r`, each padded by `r` samples each side.
fn padded_rows(p: &Plane, y: isize, r: usize, border: Border, const_row: &[f32], out: &mut [Vec<f32>]) {
    for (k, buf) in out.iter_mut().enumerate() {
        let row = tile::source_row(p, y + k as isize - r as isize, border).unwrap_or(const_row);
        tile::pad_row(row, r, border, buf);
    }
}

/// Selection per pixel: gathers the window and takes its middle by totalOrder.
fn select_median(p: &Plane, window: &[(isize, usize)], r: usize, border: Border) -> Plane {
    let w = p.width();
    let const_row = vec![border.constant_value(); w];
    let count: usize = window.iter().map(|(_, h)| 2 * h + 1).sum();
    let mut out = Plane::zeros(w, p.height()).unwrap_or_else(|_| unreachable!("same size as a valid plane"));
    tile::for_each_band(&mut out, tile::band_rows(w, r), |y0, band| {
        let mut rows = vec![vec![0.0f32; w + 2 * r]; 2 * r + 1];
        let mut buf = Vec::with_capacity(count);
        for (i, out_row) in band.chunks_exact_mut(w).enumerate() {
            padded_rows(p, (y0 + i) as isize, r, border, &const_row, &mut rows);
            for (x, o) in out_row.iter_mut().enumerate() {
                buf.clear();
                for &(di, half) in window {
                    let row = &rows[(di + r as isize) as usize];
                    buf.extend_from_slice(&row[x + r - half..=x + r + half]);
                }
                let (_, m, _) = buf.select_nth_unstable_by(count / 2, f32::total_cmp);
                *o = *m;
            }
        }
    });
    out
}

/// The network that selects the middle (index `n / 2`) of `n` values, and the
/// slot that holds it at the end.
fn median_network(n: usize) -> (Vec<Comparator>, usize) {
    let (net, out) = selection_network(n, &[n / 2]);
    (net, out[0])
}

/// The network engine: every window sample is a whole shifted row, and each
/// comparator is a min/max over rows, so the work vectorises. Needs finite
/// samples (`f32::min` would drop a NaN).
fn network_median(p: &Plane, window: &[(isize, usize)], r: usize, border: Border) -> Plane {
    let w = p.width();
    let const_row = vec![border.constant_value(); w];
    let count: usize = window.iter().map(|(_, h)| 2 * h + 1).sum();
    let (net, out_slot) = median_network(count);
    let mut out = Plane::zeros(w, p.height()).unwrap_or_else(|_| unreachable!("same size as a valid plane"));
    // Process the row in pieces so the slots stay in L1/L2.
    const PIECE: usize = 512;
    tile::for_each_band(&mut out, tile::band_rows(w, r), |y0, band| {
        let mut rows = vec![vec![0.0f32; w + 2 * r]; 2 * r + 1];
        let mut slots = vec![vec![0.0f32; PIECE.min(w)]; count];
        for (i, out_row) in band.chunks_exact_mut(w).enumerate() {
            padded_rows(p, (y0 + i) as isize, r, border, &const_row, &mut rows);
            for x0 in (0..w).step_by(PIECE) {
                let len = PIECE.min(w - x0);
                let mut s = 0;
                for &(di, half) in window {
                    let row = &rows[(di + r as isize) as usize];
                    for j in (r - half)..=(r + half) {
                        slots[s][..len].copy_from_slice(&row[x0 + j..x0 + j + len]);
                        s += 1;
                    }
                }
                for c in &net {
                    let (a, b) = two(&mut slots, c.a, c.b);
                    let (a, b) = (&mut a[..len], &mut b[..len]);
                    compare_rows(c, a, b);
                }
                out_row[x0..x0 + len].copy_from_slice(&slots[out_slot][..len]);
            }
        }
    });
    out
}

/// The histogram engine for samples that are exact `k / n`, `n ≤ 65535`.
fn histogram_median(p: &Plane, window: &[(isize, usize)], r: usize, border: Border, n: u32) -> Plane {
    let w = p.width();
    let scale = n as f32;
    let to_code = |v: f32| (f64::from(v) * f64::from(n)).round() as u16;
    let fill = to_code(border.constant_value());
    let count: u32 = window.iter().map(|(_, h)| 2 * *h as u32 + 1).sum();
    let half = count / 2;
    let mut out = Plane::zeros(w, p.height()).unwrap_or_else(|_| unreachable!("same size as a valid plane"));
    tile::for_each_band(&mut out, tile::band_rows(w, r), |y0, band| {
        let mut rows = vec![vec![0.0f32; w + 2 * r]; 2 * r + 1];
        let mut codes = vec![vec![fill; w + 2 * r]; 2 * r + 1];
        let const_row = vec![border.constant_value(); w];
        let mut fine = vec![0u32; 65536];
        let mut coarse = vec![0u32; 256];
        for (i, out_row) in band.chunks_exact_mut(w).enumerate() {
            padded_rows(p, (y0 + i) as isize, r, border, &const_row, &mut rows);
            for (c, rrow) in codes.iter_mut().zip(&rows) {
                for (c, &v) in c.iter_mut().zip(rrow) {
                    *c = to_code(v);
                }
            }
            fine.fill(0);
            coarse.fill(0);
            for &(di, hw) in window {
                for &c in &codes[(di + r as isize) as usize][r - hw..=r + hw] {
                    fine[c as usize] += 1;
                    coarse[(c >> 8) as usize] += 1;
                }
            }
            for (x, o) in out_row.iter_mut().enumerate() {
                if x > 0 {
                    for &(di, hw) in window {
                        let row = &codes[(di + r as isize) as usize];
                        let (old, new) = (row[x + r - hw - 1], row[x + r + hw]);
                        fine[old as usize] -= 1;
                        coarse[(old >> 8) as usize] -= 1;
                        fine[new as usize] += 1;
                        coarse[(new >> 8) as usize] += 1;
                    }
                }
                // The middle sample has `half` samples below it.
                let mut below = 0;
                let mut hi = 0;
                while below + coarse[hi] <= half {
                    below += coarse[hi];
                    hi += 1;
                }
                let mut code = hi << 8;
                while below + fine[code] <= half {
                    below += fine[code];
                    code += 1;
                }
                *o = code as f32 / scale;
            }
        }
    });
    out
}

pub static MEDIAN: OpSpec = OpSpec {
    name: "median",
    family: "filter",
    summary: "median over a square or disk window (exact)",
    doc: median_doc!(),
    main: Some("radius"),
    params: &[
        ParamSpec {
            name: "radius",
            kind: Kind::int(1.0, MAX_MEDIAN_RADIUS as f64),
            default: None,
            help: "window radius r: a (2r+1)×(2r+1) square, or the disk i² + j² ≤ r²",
        },
        ParamSpec {
            name: "shape",
            kind: Kind::Choice(&["square", "disk"]),
            default: Some("square"),
            help: "window shape",
        },
        params::BORDER_PARAM,
        params::FILL_PARAM,
    ],
    build: |a| {
        let shape = if a.choice("shape")? == "disk" { Shape::Disk } else { Shape::Square };
        Ok(Box::new(Median::new(a.int("radius")? as usize, shape, params::border(a)?)?))
    },
};

#[cfg(test)]
mod tests {
    //! Edge cases decided here: 1×1, 1×N and N×1 planes (the window is mostly
    //! halo, filled by the border rule), radius larger than the image (the rule
    //! repeats), radius 0 (refused), NaN (ordered above +∞ by totalOrder, on
    //! the selection engine), values off the 8/16-bit grid despite `levels`
    //! (the histogram is not used), a constant fill off the grid (likewise).
    //! Reference: sorting the whole window.
    use super::*;
    use crate::ops::filter::boxmean::tests::noise;

    fn naive(p: &Plane, m: &Median) -> Plane {
        let window = m.rows();
        Plane::from_fn(p.width(), p.height(), |x, y| {
            let mut v = Vec::new();
            for &(di, half) in &window {
                for dj in -(half as isize)..=half as isize {
                    let sx = m.border.index(x as isize + dj, p.width());
                    let sy = m.border.index(y as isize + di, p.height());
                    v.push(match (sx, sy) {
                        (Some(sx), Some(sy)) => p.get(sx, sy),
                        _ => m.border.constant_value(),
                    });
                }
            }
            v.sort_by(f32::total_cmp);
            v[v.len() / 2]
        })
        .unwrap()
    }

    const BORDERS: [Border; 5] =
        [Border::Reflect, Border::Mirror, Border::Replicate, Border::Wrap, Border::Constant(0.25)];

    #[test]
    fn networks_select_the_median_of_every_zero_one_input() {
        // The zero–one principle (Knuth, TAOCP vol. 3, §5.3.4, Theorem Z): a
        // comparator network that selects correctly on every 0/1 input does so
        // on every input. Checked exhaustively (all 2^n inputs) for every window
        // size the network engine uses, 32 inputs at a time: on one bit, min is
        // AND and max is OR.
        for n in [5usize, 9, 13, 25] {
            let (net, out) = median_network(n);
            let mut wires = vec![0u32; n];
            for base in (0..1u64 << n).step_by(32) {
                for (i, wire) in wires.iter_mut().enumerate() {
                    *wire = (0..32).fold(0, |acc, t| acc | ((((base + t) >> i) & 1) as u32) << t);
                }
                for c in &net {
                    let (lo, hi) = (wires[c.a] & wires[c.b], wires[c.a] | wires[c.b]);
                    wires[c.a] = lo;
                    wires[c.b] = hi;
                }
                let want = (0..32)
                    .fold(0u32, |acc, t| acc | u32::from((base + t).count_ones() as usize > n / 2) << t);
                assert_eq!(wires[out], want, "n={n} from input {base:b}");
            }
        }
        // pruning pays: far fewer comparators than the full sort
        assert!(median_network(9).0.len() < 25 && median_network(25).0.len() < 160);
    }

    #[test]
    fn every_engine_equals_sorting() {
        for (w, h) in [(1, 1), (1, 9), (9, 1), (2, 3), (31, 17)] {
            let p = noise(w, h, 17);
            let codes = Plane::from_fn(w, h, |x, y| (p.get(x, y) * 255.0).round() / 255.0).unwrap();
            for b in BORDERS {
                for shape in [Shape::Square, Shape::Disk] {
                    for r in [1, 2, 3, 6] {
                        let m = Median::new(r, shape, b).unwrap();
                        assert_eq!(m.median_plane(&p, None), naive(&p, &m), "{w}×{h} r={r} {shape:?} {b:?}");
                        let grid = Border::Constant(64.0 / 255.0);
                        let m =
                            Median::new(r, shape, if matches!(b, Border::Constant(_)) { grid } else { b })
                                .unwrap();
                        assert_eq!(
                            histogram_median(&codes, &m.rows(), r, m.border, 255),
                            naive(&codes, &m),
                            "histogram {w}×{h} r={r} {shape:?} {b:?}"
                        );
                        assert_eq!(
                            select_median(&p, &m.rows(), r, m.border),
                            naive(&p, &m),
                            "selection {w}×{h} r={r}"
                        );
                    }
                }
            }
        }
    }

    #[test]
    fn the_eight_bit_engine_equals_sorting() {
        // tiny and odd sizes (the window mostly halo), a row wider than one
        // piece of lanes, every border rule (the fill on the grid), both shapes
        let grid = Border::Constant(64.0 / 255.0);
        for (w, h) in [(1, 1), (1, 9), (9, 1), (2, 3), (5, 4), (31, 17), (1100, 7)] {
            let p = noise(w, h, 23);
            let codes = Plane::from_fn(w, h, |x, y| (p.get(x, y) * 255.0).round() / 255.0).unwrap();
            for b in [Border::Reflect, Border::Mirror, Border::Replicate, Border::Wrap, grid] {
                for shape in [Shape::Square, Shape::Disk] {
                    for r in [1, 2] {
                        let m = Median::new(r, shape, b).unwrap();
                        let mut got = codes.clone();
                        assert!(m.median_u8_in_place(&mut got, &mut Vec::new()), "engine refused {w}×{h}");
                        let want = naive(&codes, &m);
                        assert!(
                            got.as_slice()
                                .iter()
                                .zip(want.as_slice())
                                .all(|(a, b)| a.to_bits() == b.to_bits()),
                            "{w}×{h} r={r} {shape:?} {b:?}"
                        );
                    }
                }
            }
        }
    }

    #[test]
    fn the_eight_bit_engine_sees_every_code_and_refuses_off_grid_data() {
        // all 256 codes, in every order the window can hold them (random)
        let mut state = 0x9E37_79B9_7F4A_7C15u64;
        let p = Plane::from_fn(257, 203, |_, _| {
            state ^= state << 13;
            state ^= state >> 7;
            state ^= state << 17;
            f32::from((state >> 56) as u8) / 255.0
        })
        .unwrap();
        for shape in [Shape::Square, Shape::Disk] {
            let m = Median::new(2, shape, Border::Reflect).unwrap();
            let mut got = p.clone();
            assert!(m.median_u8_in_place(&mut got, &mut Vec::new()));
            assert_eq!(got, naive(&p, &m));
        }
        // one sample off the grid, or a fill off the grid: refused, plane untouched
        let m = Median::new(1, Shape::Square, Border::Reflect).unwrap();
        let mut off = p.clone();
        off.row_mut(100)[7] = 0.3;
        let before = off.clone();
        assert!(!m.median_u8_in_place(&mut off, &mut Vec::new()));
        assert_eq!(off, before);
        assert_eq!(m.median_plane(&off, Some(255)), naive(&off, &m));
        let m = Median::new(2, Shape::Disk, Border::Constant(0.25)).unwrap();
        assert!(!m.median_u8_in_place(&mut p.clone(), &mut Vec::new()));
        assert_eq!(m.median_plane(&p, Some(255)), naive(&p, &m));
    }

    #[test]
    fn sixteen_bit_codes_use_the_histogram_exactly() {
        let p = Plane::from_fn(40, 30, |x, y| ((x * 7919 + y * 104_729) % 65536) as f32 / 65535.0).unwrap();
        let m = Median::new(4, Shape::Disk, Border::Mirror).unwrap();
        assert!(on_grid(&p, 65535));
        assert_eq!(m.median_plane(&p, Some(65535)), naive(&p, &m));
        // off-grid values with a false `levels` promise still give the exact median
        let q = noise(20, 20, 5);
        assert_eq!(m.median_plane(&q, Some(255)), naive(&q, &m));
    }

    #[test]
    fn nan_is_ordered_above_everything_and_bad_radii_are_refused() {
        let mut p = noise(9, 9, 1);
        p.row_mut(4)[4] = f32::NAN;
        let m = Median::new(1, Shape::Square, Border::Reflect).unwrap();
        let got = m.median_plane(&p, None);
        assert_eq!(got.as_slice().iter().filter(|v| v.is_nan()).count(), 0);
        for (a, b) in got.as_slice().iter().zip(naive(&p, &m).as_slice()) {
            assert_eq!(a.to_bits(), b.to_bits());
        }
        assert!(Median::new(0, Shape::Square, Border::Reflect).unwrap_err().0.contains("radius"));
        assert!(Median::new(MAX_MEDIAN_RADIUS + 1, Shape::Disk, Border::Reflect).is_err());
    }

    #[test]
    fn thread_count_does_not_change_the_result() {
        let src = noise(203, 157, 11);
        let run = |n, r| {
            let pool = rayon::ThreadPoolBuilder::new().num_threads(n).build().unwrap();
            pool.install(|| Median::new(r, Shape::Square, Border::Wrap).unwrap().median_plane(&src, None))
        };
        assert_eq!(run(1, 2), run(3, 2));
        assert_eq!(run(1, 3), run(2, 3));
    }
}
