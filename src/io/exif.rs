//! EXIF blocks (TIFF-structured, starting `II*\0` or `MM\0*`): reading the
//! orientation and rewriting it in place. Everything else is passed through
//! byte for byte; Pumice never re-serialises EXIF.

/// The Orientation tag (EXIF 2.32 / CIPA DC-008, §4.6.4 A, tag 0x0112).
const ORIENTATION: u16 = 0x0112;

/// The orientation (1–8) recorded in the primary image's IFD, if any.
/// Parsed with kamadak-exif; a value outside 1–8 counts as absent.
pub fn orientation(blob: &[u8]) -> Option<u16> {
    let exif = exif::Reader::new().read_raw(blob.to_vec()).ok()?;
    let field = exif.get_field(exif::Tag::Orientation, exif::In::PRIMARY)?;
    let v = field.value.get_uint(0)?;
    (1..=8).contains(&v).then_some(v as u16)
}

/// A copy of `blob` with its Orientation entry set to `value`, found by walking
/// IFD0. Returns the blob unchanged when it has no such entry (EXIF readers
/// then assume 1), and `None` when the blob is not a readable TIFF structure.
pub fn with_orientation(blob: &[u8], value: u16) -> Option<Vec<u8>> {
    let big = match blob.get(..4)? {
        b"II*\0" => false,
        b"MM\0*" => true,
        _ => return None,
    };
    let u16_at = |p: usize| -> Option<u16> {
        let b: [u8; 2] = blob.get(p..p + 2)?.try_into().ok()?;
        Some(if big { u16::from_be_bytes(b) } else { u16::from_le_bytes(b) })
    };
    let u32_at = |p: usize| -> Option<u32> {
        let b: [u8; 4] = blob.get(p..p + 4)?.try_into().ok()?;
        Some(if big { u32::from_be_bytes(b) } else { u32::from_le_bytes(b) })
    };
    let ifd = u32_at(4)? as usize;
    let count = usize::from(u16_at(ifd)?);
    let mut out = blob.to_vec();
    for i in 0..count {
        let entry = ifd + 2 + 12 * i;
        if u16_at(entry)? == ORIENTATION {
            // Type 3 (SHORT), count 1: the value sits in the first two bytes of the value field.
            if u16_at(entry + 2)? != 3 || u32_at(entry + 4)? != 1 {
                return None;
            }
            let bytes = if big { value.to_be_bytes() } else { value.to_le_bytes() };
            out[entry + 8..entry + 10].copy_from_slice(&bytes);
            return Some(out);
        }
    }
    Some(out)
}

/// A minimal EXIF block holding only an orientation, in the given byte order.
/// Used by tests and the demo generator to make oriented images.
pub fn minimal_with_orientation(value: u16, big_endian: bool) -> Vec<u8> {
    let w16 = |v: u16| if big_endian { v.to_be_bytes() } else { v.to_le_bytes() };
    let w32 = |v: u32| if big_endian { v.to_be_bytes() } else { v.to_le_bytes() };
    let mut b = Vec::new();
    b.extend_from_slice(if big_endian { b"MM\0*" } else { b"II*\0" });
    b.extend_from_slice(&w32(8));
    b.extend_from_slice(&w16(1)); // one entry
    b.extend_from_slice(&w16(ORIENTATION));
    b.extend_from_slice(&w16(3)); // SHORT
    b.extend_from_slice(&w32(1));
    b.extend_from_slice(&w16(value));
    b.extend_from_slice(&[0, 0]);
    b.extend_from_slice(&w32(0)); // no next IFD
    b
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn read_and_rewrite_in_both_byte_orders() {
        for big in [false, true] {
            let blob = minimal_with_orientation(6, big);
            assert_eq!(orientation(&blob), Some(6));
            let fixed = with_orientation(&blob, 1).unwrap();
            assert_eq!(orientation(&fixed), Some(1));
            assert_eq!(fixed.len(), blob.len());
        }
    }

    #[test]
    fn garbage_is_refused_not_panicked_on() {
        assert_eq!(orientation(b"nonsense"), None);
        assert_eq!(with_orientation(b"II*\0\xff\xff\xff\xff", 1), None);
        assert_eq!(with_orientation(b"xx", 1), None);
        let mut blob = minimal_with_orientation(3, false);
        blob.truncate(12);
        assert_eq!(with_orientation(&blob, 1), None);
    }
}
