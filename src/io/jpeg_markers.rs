//! A bounded walk over a JPEG's marker segments up to the first scan, for the
//! facts the decoder does not report: the JFIF pixel density and the component count.

use crate::raster::{Resolution, ResolutionUnit};

/// What the headers of a JPEG say.
#[derive(Debug, Default, PartialEq)]
pub struct JpegHeaders {
    /// The JFIF APP0 density, when it has a unit (ITU-T T.871 §10.1: 1 = dpi, 2 = dots per cm).
    pub resolution: Option<Resolution>,
    /// The number of components in the frame header (1 gray, 3 colour, 4 CMYK/YCCK).
    pub components: Option<u8>,
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
        assert_eq!(read(&[0xFF, 0xD8, 0xFF, 0xE0, 0xFF]), JpegHeaders::default());
        assert_eq!(read(&[0xFF, 0xD8, 0xFF, 0xE0, 0, 200, 1, 2]), JpegHeaders::default());
    }
}
