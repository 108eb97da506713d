//! Where a smaller rectangle sits inside a larger one (crops and pads).

use crate::error::ParamError;
use crate::ops::params::{Kind, ParamSpec};

/// A placement: fractions of the free space to the left and above.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Anchor {
    fx: f64,
    fy: f64,
}

/// The anchor names, as the `anchor` parameter takes them.
pub const ANCHOR_NAMES: [&str; 9] =
    ["center", "top", "bottom", "left", "right", "top-left", "top-right", "bottom-left", "bottom-right"];

/// The `anchor` parameter of crops and pads.
pub const ANCHOR_PARAM: ParamSpec = ParamSpec {
    name: "anchor",
    kind: Kind::Choice(&ANCHOR_NAMES),
    default: Some("center"),
    help: "where the kept (or original) rectangle sits",
};

impl Anchor {
    pub fn from_name(name: &str) -> Result<Anchor, ParamError> {
        let (fx, fy) = match name {
            "center" => (0.5, 0.5),
            "top" => (0.5, 0.0),
            "bottom" => (0.5, 1.0),
            "left" => (0.0, 0.5),
            "right" => (1.0, 0.5),
            "top-left" => (0.0, 0.0),
            "top-right" => (1.0, 0.0),
            "bottom-left" => (0.0, 1.0),
            "bottom-right" => (1.0, 1.0),
            other => return Err(ParamError::new(format!("unknown anchor `{other}`"))),
        };
        Ok(Anchor { fx, fy })
    }

    /// The offset of the rectangle given `free_x × free_y` pixels of free
    /// space; centring rounds down, so an odd spare pixel goes right or below.
    pub fn offset(&self, free_x: usize, free_y: usize) -> (usize, usize) {
        ((free_x as f64 * self.fx).floor() as usize, (free_y as f64 * self.fy).floor() as usize)
    }
}
