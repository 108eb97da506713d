//! Document-scan operators: `deskew` (measure and undo the skew of text and
//! ruled lines), `autocrop` (cut away uniform borders or crop to the content)
//! and `dust` (remove small specks by connected-component area). The
//! connected-component labelling and the area opening they rest on are in
//! [`label`], callable on their own. Illumination and morphology are not here.

mod autocrop;
mod deskew;
mod dust;
pub mod label;

pub use autocrop::{AUTOCROP, Autocrop, CropMode};
pub use deskew::{DESKEW, Deskew, SkewEstimate, measure_skew};
pub use dust::{DUST, Dust};

use std::borrow::Cow;

use crate::color::luma;
use crate::error::Error;
use crate::raster::{Plane, Raster};
use crate::tile;

/// The plane the scan operators look at: the gray plane itself (borrowed, not
/// copied), or the BT.709 weighted sum of R, G and B (ITU-R BT.709-6 §3.3) in
/// the raster's encoding.
pub fn gray_plane(raster: &Raster) -> Result<Cow<'_, Plane>, Error> {
    let p = raster.planes();
    if raster.layout().colour_channels() == 1 {
        return Ok(Cow::Borrowed(&p[0]));
    }
    let (w, h) = (raster.width(), raster.height());
    let mut gray = Plane::zeros(w, h)?;
    tile::for_each_band(&mut gray, tile::band_rows(w, 0), |y0, band| {
        let r = y0 * w..y0 * w + band.len();
        let s = |i: usize| &p[i].as_slice()[r.clone()];
        luma::weighted_sum(luma::BT709, s(0), s(1), s(2), band);
    });
    Ok(Cow::Owned(gray))
}

/// The median of `values` (the lower middle for an even count), NaN ignored;
/// `None` when nothing is left.
fn median(values: &mut Vec<f32>) -> Option<f32> {
    values.retain(|v| !v.is_nan());
    if values.is_empty() {
        return None;
    }
    let mid = (values.len() - 1) / 2;
    let (_, m, _) = values.select_nth_unstable_by(mid, f32::total_cmp);
    Some(*m)
}
