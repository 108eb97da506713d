//! The tiling engine: splits an output plane into full-width row bands run in
//! parallel, and gives kernels their source rows with a halo under a border rule.
//! It knows nothing of what a kernel computes.

pub mod border;

pub use border::Border;

use std::sync::OnceLock;

use rayon::prelude::*;

use crate::raster::Plane;

/// Bytes of working set a band aims at by default: its output rows plus the
/// halo rows it reads. About half of the 2 MiB per-core L2 of the machines this
/// was measured on; see DEVELOPERS.md ("Band height") for the measurement.
pub const BAND_BYTES: usize = 1 << 20;

/// The band budget in force: [`BAND_BYTES`], or `PUMICE_BAND_BYTES` from the
/// environment (read once; for tuning on other machines).
pub fn band_bytes() -> usize {
    static BYTES: OnceLock<usize> = OnceLock::new();
    *BYTES.get_or_init(|| {
        std::env::var("PUMICE_BAND_BYTES")
            .ok()
            .and_then(|v| v.parse().ok())
            .filter(|&b| b > 0)
            .unwrap_or(BAND_BYTES)
    })
}

/// Rows per band for a plane `width` samples wide whose kernel reads `halo`
/// rows above and below: enough rows that the halo is a small overhead, few
/// enough that band and halo stay within [`band_bytes`], and at least one.
pub fn band_rows(width: usize, halo: usize) -> usize {
    let row_bytes = width.max(1) * std::mem::size_of::<f32>();
    let rows_in_budget = (band_bytes() / row_bytes).max(1);
    rows_in_budget.saturating_sub(2 * halo).max(8.min(rows_in_budget)).max(1)
}

/// Runs `kernel(y0, band)` for every band of `rows` rows of `out`, where `band`
/// is the mutable slice of rows `y0..y0 + band.len() / width`. Bands run in
/// parallel on the current rayon pool; each gets its own disjoint slice, so the
/// result does not depend on the number of threads.
pub fn for_each_band<F>(out: &mut Plane, rows: usize, kernel: F)
where
    F: Fn(usize, &mut [f32]) + Sync + Send,
{
    let width = out.width();
    let rows = rows.max(1);
    out.as_mut_slice().par_chunks_mut(rows * width).enumerate().for_each(|(i, band)| kernel(i * rows, band));
}

/// Applies `f` to every sample of `planes` in parallel bands of `chunk` samples.
pub fn for_each_chunk<F>(planes: &mut [Plane], chunk: usize, f: F)
where
    F: Fn(&mut [f32]) + Sync + Send,
{
    for plane in planes {
        plane.as_mut_slice().par_chunks_mut(chunk.max(1)).for_each(&f);
    }
}

/// Source row `y` (which may lie outside the plane) under `border`: a borrowed
/// row of the plane, or `None` where the rule is a constant.
pub fn source_row(plane: &Plane, y: isize, border: Border) -> Option<&[f32]> {
    border.index(y, plane.height()).map(|i| plane.row(i))
}

/// Copies `row` into `padded` with `radius` samples of halo on each side filled
/// by `border`; `padded` must hold `row.len() + 2·radius` samples.
pub fn pad_row(row: &[f32], radius: usize, border: Border, padded: &mut [f32]) {
    let n = row.len();
    debug_assert_eq!(padded.len(), n + 2 * radius);
    padded[radius..radius + n].copy_from_slice(row);
    let fill = border.constant_value();
    for i in 0..radius {
        let left = i as isize - radius as isize;
        let right = (n + i) as isize;
        padded[i] = border.index(left, n).map_or(fill, |j| row[j]);
        padded[radius + n + i] = border.index(right, n).map_or(fill, |j| row[j]);
    }
}

#[cfg(test)]
mod tests {
    //! Edge cases: bands on 1-row and 1-column planes, halos wider than the row.
    use super::*;

    #[test]
    fn bands_cover_every_row_once() {
        for (w, h, rows) in [(1, 1, 1), (5, 17, 4), (3, 8, 8), (2, 9, 100)] {
            let mut p = Plane::zeros(w, h).unwrap();
            for_each_band(&mut p, rows, |y0, band| {
                for (i, v) in band.iter_mut().enumerate() {
                    *v += (y0 + i / w) as f32 + 1.0;
                }
            });
            for y in 0..h {
                assert!(p.row(y).iter().all(|&v| v == y as f32 + 1.0));
            }
        }
    }

    #[test]
    fn band_height_stays_in_budget_and_positive() {
        assert!(band_rows(4000, 8) * 4000 * 4 <= band_bytes());
        assert!(band_rows(4000, 8) >= 8);
        assert_eq!(band_rows(1 << 20, 3), 1);
        assert!(band_rows(1, 0) > 0);
    }

    #[test]
    fn padding_follows_each_rule() {
        // ../shared REFERENCES.md, "Border rules, spelled out": samples a b c d.
        let row = [1.0, 2.0, 3.0, 4.0];
        let mut p = [0.0; 10];
        let cases = [
            (Border::Reflect, [3.0, 2.0, 1.0, 4.0, 3.0, 2.0]),
            (Border::Mirror, [4.0, 3.0, 2.0, 3.0, 2.0, 1.0]),
            (Border::Replicate, [1.0, 1.0, 1.0, 4.0, 4.0, 4.0]),
            (Border::Wrap, [2.0, 3.0, 4.0, 1.0, 2.0, 3.0]),
            (Border::Constant(9.0), [9.0; 6]),
        ];
        for (border, want) in cases {
            pad_row(&row, 3, border, &mut p);
            assert_eq!(&p[..3], &want[..3], "{border:?} left");
            assert_eq!(&p[3..7], &row);
            assert_eq!(&p[7..], &want[3..], "{border:?} right");
        }
    }
}
