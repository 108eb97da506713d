//! Colour maths: the sRGB transfer function and luma weights. Pure functions on
//! numbers and slices; nothing here knows about files or pipelines.

pub mod luma;
pub mod srgb;
