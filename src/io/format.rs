//! The file formats Pumice reads and writes, found from content or file name.

use std::path::Path;

use crate::raster::SampleType;

/// A file format.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Format {
    Png,
    Jpeg,
    Tiff,
    Webp,
    Bmp,
    Gif,
    Exr,
}

impl Format {
    /// Formats Pumice can write, by the names `--format` takes.
    pub const WRITE_NAMES: [&'static str; 5] = ["png", "jpeg", "tiff", "webp", "exr"];

    pub fn name(self) -> &'static str {
        match self {
            Format::Png => "PNG",
            Format::Jpeg => "JPEG",
            Format::Tiff => "TIFF",
            Format::Webp => "WebP",
            Format::Bmp => "BMP",
            Format::Gif => "GIF",
            Format::Exr => "OpenEXR",
        }
    }

    /// The usual file-name extension of a format Pumice writes (`None` for read-only formats).
    pub fn extension(self) -> Option<&'static str> {
        match self {
            Format::Png => Some("png"),
            Format::Jpeg => Some("jpg"),
            Format::Tiff => Some("tif"),
            Format::Webp => Some("webp"),
            Format::Exr => Some("exr"),
            Format::Bmp | Format::Gif => None,
        }
    }

    /// The format a file name's extension names (case-insensitive).
    pub fn from_extension(ext: &str) -> Option<Format> {
        Some(match ext.to_ascii_lowercase().as_str() {
            "png" => Format::Png,
            "jpg" | "jpeg" | "jpe" => Format::Jpeg,
            "tif" | "tiff" => Format::Tiff,
            "webp" => Format::Webp,
            "bmp" => Format::Bmp,
            "gif" => Format::Gif,
            "exr" => Format::Exr,
            _ => return None,
        })
    }

    /// The format of `path`, from its extension.
    pub fn from_path(path: &Path) -> Option<Format> {
        path.extension().and_then(|e| e.to_str()).and_then(Format::from_extension)
    }

    /// The format of `bytes`, from the signature at their start.
    pub fn detect(bytes: &[u8]) -> Option<Format> {
        let starts = |sig: &[u8]| bytes.starts_with(sig);
        if starts(b"\x89PNG\r\n\x1a\n") {
            Some(Format::Png)
        } else if starts(&[0xFF, 0xD8, 0xFF]) {
            Some(Format::Jpeg)
        } else if starts(b"II*\0") || starts(b"MM\0*") {
            Some(Format::Tiff)
        } else if bytes.len() >= 12 && starts(b"RIFF") && &bytes[8..12] == b"WEBP" {
            Some(Format::Webp)
        } else if starts(b"BM") {
            Some(Format::Bmp)
        } else if starts(b"GIF87a") || starts(b"GIF89a") {
            Some(Format::Gif)
        } else if starts(&[0x76, 0x2F, 0x31, 0x01]) {
            Some(Format::Exr)
        } else {
            None
        }
    }

    /// The deepest sample type the format can store, or `None` if Pumice does not write it.
    pub fn deepest_sample(self) -> Option<SampleType> {
        match self {
            Format::Png => Some(SampleType::U16),
            Format::Tiff | Format::Exr => Some(SampleType::F32),
            Format::Jpeg | Format::Webp => Some(SampleType::U8),
            Format::Bmp | Format::Gif => None,
        }
    }

    /// True when Pumice can write `sample` in this format.
    pub fn can_write(self, sample: SampleType) -> bool {
        match self {
            Format::Png => matches!(sample, SampleType::U8 | SampleType::U16),
            Format::Tiff => true,
            Format::Jpeg | Format::Webp => sample == SampleType::U8,
            Format::Exr => sample == SampleType::F32,
            Format::Bmp | Format::Gif => false,
        }
    }

    /// True when the format stores an alpha channel.
    pub fn has_alpha(self) -> bool {
        !matches!(self, Format::Jpeg)
    }

    /// The sample type written when the user names none: the source's, or the
    /// nearest the format holds (deeper formats are never padded out: an 8-bit
    /// source stays 8-bit in TIFF; float sources get the deepest integer type
    /// where the format has no float).
    pub fn default_sample(self, source: SampleType) -> Option<SampleType> {
        let deepest = self.deepest_sample()?;
        Some(if self.can_write(source) {
            source
        } else if self == Format::Exr {
            SampleType::F32
        } else {
            deepest
        })
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn signatures_and_extensions() {
        assert_eq!(Format::detect(b"\x89PNG\r\n\x1a\nxxxx"), Some(Format::Png));
        assert_eq!(Format::detect(b"MM\0*...."), Some(Format::Tiff));
        assert_eq!(Format::detect(b"RIFF\0\0\0\0WEBPVP8 "), Some(Format::Webp));
        assert_eq!(Format::detect(b"hello"), None);
        assert_eq!(Format::from_path(Path::new("a/B.JPG")), Some(Format::Jpeg));
        assert_eq!(Format::from_path(Path::new("notes.txt")), None);
    }

    #[test]
    fn default_depths() {
        assert_eq!(Format::Png.default_sample(SampleType::F32), Some(SampleType::U16));
        assert_eq!(Format::Jpeg.default_sample(SampleType::U16), Some(SampleType::U8));
        assert_eq!(Format::Tiff.default_sample(SampleType::U8), Some(SampleType::U8));
        assert_eq!(Format::Exr.default_sample(SampleType::U8), Some(SampleType::F32));
        assert_eq!(Format::Gif.default_sample(SampleType::U8), None);
    }
}
