//! A bounded walk over a JPEG's marker segments up to the first scan, for the
//! facts the decoder does not report: the JFIF pixel density, the component
//! count and the Adobe APP14 colour transform.

use crate::raster::{Resolution, ResolutionUnit};

/// What the headers of a JPEG say.
#[derive(Debug, Default, PartialEq)]
pub struct JpegHeaders {
    /// The JFIF APP0 density, when it has a unit (ITU-T T.871 §10.1: 1 = dpi, 2 = dots per cm).
    pub resolution: Option<Resolution>,
    /// The number of components in the frame header (1 gray, 3 colour, 4 CMYK/YCCK).
    pub components: Option<u8>,
    /// The colour-transform byte of an Adobe APP14 segment, when there is one
    /// (Adobe Technical Note #5116, "Supporting the DCT Filters in PostScript
    /// Level 2", §18): 0 = none (RGB or CMYK as stored), 1 = YCbCr, 2 = YCCK.
    /// The marker also tells that CMYK samples are stored inverted (255 = no ink).
    /// When a file holds several, the last one counts, as it does in zune-jpeg's
    /// `parse_app14`.
    pub adobe_transform: Option<u8>,
}

/// Reads the segments before the first scan. Malformed data simply end the walk:
/// the decoder proper reports what is wrong.
pub fn read(bytes: &[u8]) -> JpegHeaders {
    let mut out = JpegHeaders::default();
    let mut pos = 2; // after SOI
    while pos + 4 <= bytes.len() {
        if bytes[pos] != 0xFF {
            break;
        }
        let marker = bytes[pos + 1];
        if marker == 0xFF {
            pos += 1; // fill byte
            continue;
        }
        if marker == 0xDA || marker == 0xD9 {
            break; // start of scan, end of image
        }
        let len = usize::from(u16::from_be_bytes([bytes[pos + 2], bytes[pos + 3]]));
        let Some(seg) = bytes.get(pos + 4..pos + 2 + len) else { break };
        if len < 2 {
            break;
        }
        match marker {
            0xE0 if seg.len() >= 12 && seg.starts_with(b"JFIF\0") => {
                let unit = match seg[7] {
                    1 => Some(ResolutionUnit::Inch),
                    2 => Some(ResolutionUnit::Centimetre),
                    _ => None,
                };
                let x = u16::from_be_bytes([seg[8], seg[9]]);
                let y = u16::from_be_bytes([seg[10], seg[11]]);
                if let (Some(unit), true) = (unit, x > 0 && y > 0) {
                    out.resolution = Some(Resolution { x: f64::from(x), y: f64::from(y), unit });
                }
            }
            // APP14 "Adobe" (TN 5116 §18): "Adobe", version (2 bytes), flags0 (2),
            // flags1 (2), transform (1): 12 bytes after the length.
            0xEE if seg.len() >= 12 && seg.starts_with(b"Adobe") => {
                out.adobe_transform = Some(seg[11]);
            }
            // Start-of-frame markers C0–CF, except DHT (C4), JPG (C8) and DAC (CC).
            0xC0..=0xCF if !matches!(marker, 0xC4 | 0xC8 | 0xCC) && seg.len() >= 6 => {
                out.components = Some(seg[5]);
            }
            _ => {}
        }
        pos += 2 + len;
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn reads_density_and_components_and_survives_garbage() {
        let mut j = vec![0xFF, 0xD8];
        j.extend([0xFF, 0xE0, 0, 16]);
        j.extend(b"JFIF\0\x01\x02\x01\x01\x2c\x01\x2c\0\0");
        j.extend([0xFF, 0xC0, 0, 11, 8, 0, 1, 0, 1, 3, 1, 0x11, 0]);
        let h = read(&j);
        assert_eq!(h.resolution, Some(Resolution { x: 300.0, y: 300.0, unit: ResolutionUnit::Inch }));
        assert_eq!(h.components, Some(3));
        assert_eq!(h.adobe_transform, None);
        assert_eq!(read(&[0xFF, 0xD8, 0xFF, 0xE0, 0xFF]), JpegHeaders::default());
        assert_eq!(read(&[0xFF, 0xD8, 0xFF, 0xE0, 0, 200, 1, 2]), JpegHeaders::default());
    }

    /// An APP14 "Adobe" segment laid out as TN 5116 §18 gives it: "Adobe",
    /// version 100, flags0, flags1, transform.
    fn app14(transform: u8) -> Vec<u8> {
        let mut s = vec![0xFF, 0xEE, 0, 14];
        s.extend(b"Adobe");
        s.extend([0, 100, 0, 0, 0, 0, transform]);
        s
    }

    /// A frame header with four 1×1 components.
    fn sof_cmyk() -> Vec<u8> {
        let mut s = vec![0xFF, 0xC0, 0, 20, 8, 0, 16, 0, 16, 4];
        for id in [b'C', b'M', b'Y', b'K'] {
            s.extend([id, 0x11, 0]);
        }
        s
    }

    #[test]
    fn reads_the_adobe_transform_before_or_after_the_frame_header() {
        for transform in [0, 1, 2] {
            let mut j = vec![0xFF, 0xD8];
            j.extend(app14(transform));
            j.extend(sof_cmyk());
            j.extend([0xFF, 0xDA, 0, 2]);
            let h = read(&j);
            assert_eq!((h.components, h.adobe_transform), (Some(4), Some(transform)));
        }
        // After the frame header, and the last of several wins.
        let mut j = vec![0xFF, 0xD8];
        j.extend(app14(0));
        j.extend(sof_cmyk());
        j.extend(app14(2));
        assert_eq!(read(&j).adobe_transform, Some(2));
        // Fill bytes before a marker are skipped.
        let mut j = vec![0xFF, 0xD8, 0xFF, 0xFF];
        j.extend(app14(2));
        assert_eq!(read(&j).adobe_transform, Some(2));
    }

    #[test]
    fn other_app14_segments_and_short_ones_are_not_adobe_markers() {
        // A CMYK frame without any APP14: plain CMYK.
        let mut j = vec![0xFF, 0xD8];
        j.extend(sof_cmyk());
        assert_eq!(read(&j).adobe_transform, None);
        // APP14 from another writer.
        let mut j = vec![0xFF, 0xD8, 0xFF, 0xEE, 0, 14];
        j.extend(b"Other\0\0\0\0\0\0\0");
        j.extend(sof_cmyk());
        assert_eq!(read(&j), JpegHeaders { components: Some(4), ..JpegHeaders::default() });
        // "Adobe" with the transform byte missing (11 bytes of payload).
        let mut j = vec![0xFF, 0xD8, 0xFF, 0xEE, 0, 13];
        j.extend(b"Adobe\0\x64\0\0\0\0");
        j.extend(sof_cmyk());
        assert_eq!(read(&j).adobe_transform, None);
        // A segment whose length runs past the end of the data ends the walk.
        let mut j = vec![0xFF, 0xD8];
        j.extend(&app14(2)[..10]);
        assert_eq!(read(&j), JpegHeaders::default());
        // Markers after the start of scan are not read.
        let mut j = vec![0xFF, 0xD8];
        j.extend(sof_cmyk());
        j.extend([0xFF, 0xDA, 0, 2]);
        j.extend(app14(2));
        assert_eq!(read(&j).adobe_transform, None);
    }
}
