//! Summaries of the metadata a raster carries: the ICC profile's header and
//! description, a few EXIF fields, the physical pixel size. Reads bytes the
//! decoder kept; never modifies or re-serialises them.

use crate::raster::{Resolution, ResolutionUnit};

/// What an ICC profile says about itself.
#[derive(Clone, Debug, PartialEq)]
pub struct IccSummary {
    /// Bytes in the profile.
    pub size: usize,
    /// Profile version, e.g. `"4.3"` or `"2.1"` (header bytes 8–9).
    pub version: String,
    /// Device class signature, e.g. `"mntr"` (header bytes 12–15).
    pub class: String,
    /// Data colour space signature, e.g. `"RGB"` (header bytes 16–19, trailing spaces trimmed).
    pub colour_space: String,
    /// The profile description (`desc` tag), if present and readable.
    pub description: Option<String>,
}

fn be32(b: &[u8], at: usize) -> Option<u32> {
    Some(u32::from_be_bytes(b.get(at..at + 4)?.try_into().ok()?))
}

fn signature(b: &[u8], at: usize) -> String {
    b.get(at..at + 4).map(|s| String::from_utf8_lossy(s).trim_end().to_string()).unwrap_or_default()
}

/// Reads an ICC profile's header and its description, or `None` if `profile`
/// is too short to hold a header and tag table (ICC.1:2010, clause 7.2: a
/// 128-byte header; clause 7.3: a tag count and 12-byte entries of
/// signature, offset, size).
///
/// The description is the `desc` tag (ICC.1:2010 clause 9.2.41,
/// profileDescriptionTag) in either of its types:
/// - `mluc`, multiLocalizedUnicodeType (ICC.1:2010 clause 10.13): a record
///   count at byte 8, record size at 12, then records of language, country,
///   length and offset of a UTF-16BE string; the `en` record is chosen, else the first;
/// - `desc`, textDescriptionType of version 2 profiles (ICC.1:2001-04 clause
///   6.5.17): an ASCII count at byte 8 (including the terminating NUL) and
///   the ASCII text; the Unicode and ScriptCode parts after it are not read.
///
/// (The clause numbers are from memory, not checked against the documents;
/// the layouts were checked against Pillow's LittleCMS binding on a real
/// profile, tests/integration/measure.rs.)
pub fn icc_summary(profile: &[u8]) -> Option<IccSummary> {
    let count = be32(profile, 128)? as usize;
    let version = format!("{}.{}", profile[8], profile[9] >> 4);
    let description = (0..count.min(1024)).find_map(|i| {
        let entry = 132 + 12 * i;
        if profile.get(entry..entry + 4)? != b"desc" {
            return None;
        }
        let offset = be32(profile, entry + 4)? as usize;
        let size = be32(profile, entry + 8)? as usize;
        read_description(profile.get(offset..offset.checked_add(size)?)?)
    });
    Some(IccSummary {
        size: profile.len(),
        version,
        class: signature(profile, 12),
        colour_space: signature(profile, 16),
        description,
    })
}

fn read_description(tag: &[u8]) -> Option<String> {
    match tag.get(..4)? {
        b"mluc" => {
            let records = be32(tag, 8)? as usize;
            let record_size = be32(tag, 12)? as usize;
            if record_size < 12 {
                return None;
            }
            let record = |i: usize| -> Option<(&[u8], String)> {
                let at = 16 + i * record_size;
                let language = tag.get(at..at + 2)?;
                let length = be32(tag, at + 4)? as usize;
                let offset = be32(tag, at + 8)? as usize;
                let units: Vec<u16> = tag
                    .get(offset..offset.checked_add(length)?)?
                    .chunks_exact(2)
                    .map(|c| u16::from_be_bytes([c[0], c[1]]))
                    .collect();
                Some((language, String::from_utf16_lossy(&units).trim_end_matches('\0').to_string()))
            };
            let all: Vec<_> = (0..records.min(256)).filter_map(record).collect();
            let chosen = all.iter().find(|(lang, _)| *lang == b"en").or(all.first())?;
            Some(chosen.1.clone())
        }
        b"desc" => {
            let count = be32(tag, 8)? as usize;
            let text = tag.get(12..12usize.checked_add(count)?)?;
            let end = text.iter().position(|&c| c == 0).unwrap_or(text.len());
            Some(String::from_utf8_lossy(&text[..end]).into_owned())
        }
        _ => None,
    }
}

/// A few fields of an EXIF block (EXIF 2.32, CIPA DC-008-2019).
#[derive(Clone, Debug, Default, PartialEq)]
pub struct ExifSummary {
    /// Orientation, tag 0x0112 (§4.6.4 A), 1–8.
    pub orientation: Option<u16>,
    /// DateTimeOriginal, tag 0x9003 (§4.6.5 G): `YYYY:MM:DD HH:MM:SS` as written.
    pub date_time_original: Option<String>,
    /// XResolution, YResolution and ResolutionUnit, tags 0x011A, 0x011B,
    /// 0x0128 (§4.6.4 A): the density the camera or scanner recorded.
    pub resolution: Option<Resolution>,
}

/// Reads the summary fields of the primary image from a TIFF-structured EXIF
/// block with kamadak-exif; `None` if the block is not readable.
pub fn exif_summary(blob: &[u8]) -> Option<ExifSummary> {
    use exif::{In, Tag, Value};
    let exif = exif::Reader::new().read_raw(blob.to_vec()).ok()?;
    let field = |tag| exif.get_field(tag, In::PRIMARY);
    let rational = |tag| match field(tag).map(|f| &f.value) {
        Some(Value::Rational(v)) if !v.is_empty() && v[0].denom != 0 => Some(v[0].to_f64()),
        _ => None,
    };
    let orientation =
        field(Tag::Orientation).and_then(|f| f.value.get_uint(0)).filter(|v| (1..=8).contains(v));
    let date_time_original = match field(Tag::DateTimeOriginal).map(|f| &f.value) {
        Some(Value::Ascii(v)) if !v.is_empty() => {
            Some(String::from_utf8_lossy(&v[0]).trim_end_matches('\0').to_string())
        }
        _ => None,
    };
    let unit = match field(Tag::ResolutionUnit).and_then(|f| f.value.get_uint(0)) {
        Some(1) => ResolutionUnit::None,
        Some(3) => ResolutionUnit::Centimetre,
        // 2 (inch) is also the default when the tag is absent (§4.6.4 A).
        _ => ResolutionUnit::Inch,
    };
    let resolution = match (rational(Tag::XResolution), rational(Tag::YResolution)) {
        (Some(x), Some(y)) => Some(Resolution { x, y, unit }),
        _ => None,
    };
    Some(ExifSummary { orientation: orientation.map(|v| v as u16), date_time_original, resolution })
}

/// The size of one pixel in micrometres, `(width, height)`, or `None` when
/// the resolution has no unit. 1 inch = 25 400 µm (exact, 1959 agreement).
pub fn pixel_size_um(r: &Resolution) -> Option<(f64, f64)> {
    let (x, y) = r.per_metre()?;
    (x > 0.0 && y > 0.0).then(|| (1e6 / x, 1e6 / y))
}

#[cfg(test)]
mod tests {
    //! Edge cases: truncated profiles, a tag offset past the end, v2 and v4
    //! description types, mluc without an English record, garbage EXIF.
    use super::*;

    /// A profile with one `desc` tag holding `tag`.
    fn profile_with(tag: &[u8], version: u8) -> Vec<u8> {
        let mut p = vec![0u8; 128];
        p[8] = version;
        p[9] = 0x30;
        p[12..16].copy_from_slice(b"mntr");
        p[16..20].copy_from_slice(b"RGB ");
        p.extend_from_slice(&1u32.to_be_bytes());
        p.extend_from_slice(b"desc");
        p.extend_from_slice(&144u32.to_be_bytes());
        p.extend_from_slice(&(tag.len() as u32).to_be_bytes());
        p.extend_from_slice(tag);
        let n = p.len() as u32;
        p[0..4].copy_from_slice(&n.to_be_bytes());
        p
    }

    fn mluc(records: &[(&[u8; 2], &str)]) -> Vec<u8> {
        let mut t = b"mluc\0\0\0\0".to_vec();
        t.extend_from_slice(&(records.len() as u32).to_be_bytes());
        t.extend_from_slice(&12u32.to_be_bytes());
        let mut strings = Vec::new();
        let base = 16 + 12 * records.len();
        for (lang, text) in records {
            let units: Vec<u8> = text.encode_utf16().flat_map(u16::to_be_bytes).collect();
            t.extend_from_slice(*lang);
            t.extend_from_slice(b"US");
            t.extend_from_slice(&(units.len() as u32).to_be_bytes());
            t.extend_from_slice(&((base + strings.len()) as u32).to_be_bytes());
            strings.extend_from_slice(&units);
        }
        t.extend_from_slice(&strings);
        t
    }

    #[test]
    fn version_4_multilocalised_description() {
        let p = profile_with(&mluc(&[(b"de", "Bildschirm"), (b"en", "Display P3 ☼")]), 4);
        let s = icc_summary(&p).unwrap();
        assert_eq!(s.description.as_deref(), Some("Display P3 ☼"));
        assert_eq!((s.version.as_str(), s.class.as_str(), s.colour_space.as_str()), ("4.3", "mntr", "RGB"));
        let p = profile_with(&mluc(&[(b"fr", "Écran")]), 4);
        assert_eq!(icc_summary(&p).unwrap().description.as_deref(), Some("Écran"));
    }

    #[test]
    fn version_2_text_description() {
        let mut tag = b"desc\0\0\0\0".to_vec();
        tag.extend_from_slice(&13u32.to_be_bytes());
        tag.extend_from_slice(b"sRGB IEC6196\0");
        tag.extend_from_slice(&[0u8; 12]); // empty Unicode and ScriptCode parts
        let s = icc_summary(&profile_with(&tag, 2)).unwrap();
        assert_eq!(s.description.as_deref(), Some("sRGB IEC6196"));
        assert_eq!(s.version, "2.3");
    }

    #[test]
    fn malformed_profiles_give_no_description_and_no_panic() {
        assert_eq!(icc_summary(&[0u8; 100]), None);
        let mut p = profile_with(&mluc(&[(b"en", "x")]), 4);
        p[136..140].copy_from_slice(&u32::MAX.to_be_bytes()); // offset past the end
        assert_eq!(icc_summary(&p).unwrap().description, None);
        let mut t = mluc(&[(b"en", "x")]);
        t[12..16].copy_from_slice(&0u32.to_be_bytes()); // record size 0
        assert_eq!(icc_summary(&profile_with(&t, 4)).unwrap().description, None);
        assert_eq!(icc_summary(&profile_with(b"xyz", 4)).unwrap().description, None);
    }

    #[test]
    fn exif_orientation_and_garbage() {
        let blob = crate::io::exif::minimal_with_orientation(6, true);
        let s = exif_summary(&blob).unwrap();
        assert_eq!((s.orientation, s.date_time_original, s.resolution), (Some(6), None, None));
        assert_eq!(exif_summary(b"not exif"), None);
    }

    #[test]
    fn pixel_size_from_density() {
        // 300 dpi → 25400/300 = 84.667 µm; 10000 px/cm → 1 µm.
        let (x, _) = pixel_size_um(&Resolution { x: 300.0, y: 300.0, unit: ResolutionUnit::Inch }).unwrap();
        assert!((x - 84.666_666).abs() < 1e-5);
        let (x, _) = pixel_size_um(&Resolution { x: 1e4, y: 1e4, unit: ResolutionUnit::Centimetre }).unwrap();
        assert!((x - 1.0).abs() < 1e-12);
        assert_eq!(pixel_size_um(&Resolution { x: 1.0, y: 2.0, unit: ResolutionUnit::None }), None);
    }
}
