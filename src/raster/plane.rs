//! One channel of an image: `width × height` samples of `f32`, row-major, no padding.

use multiversion::multiversion;
use rayon::prelude::*;

use super::recycle;
use crate::error::Error;

/// One channel: `width × height` samples, stored row by row with no padding.
///
/// Invariants (checked by the constructors): `width ≥ 1`, `height ≥ 1` and
/// `data.len() == width * height`. Row `y` is `data[y * width..(y + 1) * width]`.
#[derive(Clone, Debug, PartialEq)]
pub struct Plane {
    width: usize,
    height: usize,
    data: Vec<f32>,
}

impl Plane {
    /// A plane filled with `value`.
    pub fn filled(width: usize, height: usize, value: f32) -> Result<Self, Error> {
        let len = checked_len(width, height)?;
        Ok(Plane { width, height, data: recycle::filled(len, value) })
    }

    /// A plane of zeros.
    pub fn zeros(width: usize, height: usize) -> Result<Self, Error> {
        Self::filled(width, height, 0.0)
    }

    /// A plane for a caller that writes every one of its samples before
    /// reading any: it may be a reused buffer (see [`recycle`]) still holding
    /// earlier samples, which saves the pass that would clear it.
    pub fn for_overwrite(width: usize, height: usize) -> Result<Self, Error> {
        let len = checked_len(width, height)?;
        Ok(Plane { width, height, data: recycle::for_overwrite(len) })
    }

    /// Wraps `data`, which must hold exactly `width * height` samples in row-major order.
    pub fn from_vec(width: usize, height: usize, data: Vec<f32>) -> Result<Self, Error> {
        let len = checked_len(width, height)?;
        if data.len() != len {
            return Err(Error::Internal(format!(
                "a {width}×{height} plane needs {len} samples, got {}",
                data.len()
            )));
        }
        Ok(Plane { width, height, data })
    }

    /// A plane whose row `y` is written by `f(y, row)`, rows in parallel.
    /// `f` must write every sample of its row: the buffer may be a reused one
    /// (see [`recycle`]) that still holds earlier samples.
    pub fn from_rows(
        width: usize,
        height: usize,
        f: impl Fn(usize, &mut [f32]) + Sync,
    ) -> Result<Self, Error> {
        let mut p = Self::for_overwrite(width, height)?;
        p.data.par_chunks_mut(width).enumerate().for_each(|(y, row)| f(y, row));
        Ok(p)
    }

    /// A plane whose sample at `(x, y)` is `f(x, y)`.
    pub fn from_fn(
        width: usize,
        height: usize,
        mut f: impl FnMut(usize, usize) -> f32,
    ) -> Result<Self, Error> {
        let len = checked_len(width, height)?;
        let mut data = Vec::with_capacity(len);
        for y in 0..height {
            for x in 0..width {
                data.push(f(x, y));
            }
        }
        Ok(Plane { width, height, data })
    }

    pub fn width(&self) -> usize {
        self.width
    }

    pub fn height(&self) -> usize {
        self.height
    }

    /// Row `y` as a slice of `width` samples. Panics if `y ≥ height`.
    pub fn row(&self, y: usize) -> &[f32] {
        &self.data[y * self.width..(y + 1) * self.width]
    }

    /// Row `y`, mutable. Panics if `y ≥ height`.
    pub fn row_mut(&mut self, y: usize) -> &mut [f32] {
        let w = self.width;
        &mut self.data[y * w..(y + 1) * w]
    }

    /// The sample at `(x, y)`. Panics outside the plane.
    pub fn get(&self, x: usize, y: usize) -> f32 {
        self.data[y * self.width + x]
    }

    /// All samples, row-major.
    pub fn as_slice(&self) -> &[f32] {
        &self.data
    }

    /// All samples, row-major, mutable.
    pub fn as_mut_slice(&mut self) -> &mut [f32] {
        &mut self.data
    }

    /// True when no sample is NaN or infinite (checked in parallel).
    pub fn all_finite(&self) -> bool {
        self.data.par_chunks(1 << 16).all(all_finite)
    }

    /// Consumes the plane and returns its samples.
    pub fn into_vec(mut self) -> Vec<f32> {
        std::mem::take(&mut self.data)
    }
}

/// While a step filters plane by plane, a dropped plane's buffer is kept for
/// the next plane of its size (see [`recycle`]): its pages are already
/// mapped, so no page faults.
impl Drop for Plane {
    fn drop(&mut self) {
        recycle::give(std::mem::take(&mut self.data));
    }
}

fn checked_len(width: usize, height: usize) -> Result<usize, Error> {
    if width == 0 || height == 0 {
        return Err(Error::Internal(format!("a plane must be at least 1×1, got {width}×{height}")));
    }
    width
        .checked_mul(height)
        .ok_or_else(|| Error::Internal(format!("a {width}×{height} plane does not fit in memory")))
}

/// True when every sample of `c` is finite: a fold without early exit
/// vectorises (the chunks of [`Plane::all_finite`] still stop early),
/// compiled per instruction set.
#[multiversion(targets("x86_64+avx512f+avx512bw+avx512vl+avx2+fma", "x86_64+avx2+fma"))]
pub fn all_finite(c: &[f32]) -> bool {
    c.iter().fold(true, |ok, v| ok & v.is_finite())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn rows_are_row_major() {
        let p = Plane::from_fn(3, 2, |x, y| (y * 10 + x) as f32).unwrap();
        assert_eq!(p.row(1), &[10.0, 11.0, 12.0]);
        assert_eq!(p.get(2, 0), 2.0);
    }

    #[test]
    fn constructors_check_the_invariants() {
        assert!(Plane::zeros(0, 5).is_err());
        assert!(Plane::from_vec(2, 2, vec![0.0; 3]).is_err());
        assert!(Plane::zeros(usize::MAX, 2).is_err());
    }
}
