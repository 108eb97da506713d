//! Operators for scientific images (often linear, 16-bit, unevenly lit and
//! noisy): `bin` (N×N sums or means), `hotpixel` (outlier repair), `flatfield`
//! (dark and flat frame correction) and `illumination` (background estimation by
//! rolling ball, opening, blur or, for document scans, closing). Reading the
//! calibration frames happens when a step is built, never inside `apply`.

mod bin;
mod flatfield;
mod hotpixel;
mod illumination;

pub use bin::{BIN, Bin, BinMode};
pub use flatfield::{FLATFIELD, Flatfield};
pub use hotpixel::{HOTPIXEL, Hotpixel, MAD_TO_SIGMA};
pub use illumination::{
    Ball, ILLUMINATION, Illumination, Method, Options, ball_apex, ball_background, shrink_factor,
};
