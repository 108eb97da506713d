//! Reading and writing image files: format detection, bounded decoding into
//! planar `f32`, encoding with exact rounding, metadata carried across, and
//! atomic file writes. Operators and pipelines are not this module's business.

pub mod decode;
pub mod encode;
pub mod exif;
pub mod file;
pub mod format;
mod jpeg_markers;

pub use decode::{DecodeOptions, InputEncoding, Limits, TiffPages, decode, decode_page, page_count};
pub use encode::{Chroma, EncodeOptions, encode, encode_tiff_pages, encode_tiff_pages_with};
pub use format::Format;
