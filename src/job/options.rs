//! Run options: how inputs are read and outputs written, as a recipe file or the
//! command line gives them. Parsing of the small value types lives here too.

use crate::io::{Chroma, Format, InputEncoding, Limits};
use crate::pipeline::DomainPolicy;
use crate::raster::{Resolution, ResolutionUnit, SampleType};

/// Everything about a run except its steps.
#[derive(Clone, Debug, PartialEq)]
pub struct RunOptions {
    pub input_encoding: InputEncoding,
    /// The output sample type; `None` keeps the source's (see [`Format::default_sample`]).
    pub sample: Option<SampleType>,
    pub keep_metadata: bool,
    /// The output format; `None` takes it from the output file's extension.
    pub format: Option<Format>,
    pub quality: u8,
    pub chroma: Chroma,
    pub domain: DomainPolicy,
    /// sRGB-encoded colour that alpha is flattened onto for formats without alpha.
    pub background: [f32; 3],
    pub keep_orientation: bool,
    /// Calibration that replaces the file's resolution (`--pixel-size`).
    pub pixel_size: Option<PixelSize>,
    pub limits: Limits,
}

impl Default for RunOptions {
    fn default() -> Self {
        RunOptions {
            input_encoding: InputEncoding::Auto,
            sample: None,
            keep_metadata: true,
            format: None,
            quality: 90,
            chroma: Chroma::default(),
            domain: DomainPolicy::Auto,
            background: [1.0, 1.0, 1.0],
            keep_orientation: false,
            pixel_size: None,
            limits: Limits::DEFAULT,
        }
    }
}

impl RunOptions {
    /// The options as recipe `[options]` keys and values (see `job::recipe`),
    /// plus the decode limits, for reports that let a run be repeated.
    pub fn describe(&self) -> Vec<(&'static str, String)> {
        let encoding = match self.input_encoding {
            InputEncoding::Auto => "auto",
            InputEncoding::Srgb => "srgb",
            InputEncoding::Linear => "linear",
        };
        let depth = match self.sample {
            None => "source",
            Some(SampleType::U8) => "8",
            Some(SampleType::U16) => "16",
            Some(SampleType::F32) => "f32",
        };
        let chroma = match self.chroma {
            Chroma::S444 => "444",
            Chroma::S422 => "422",
            Chroma::S420 => "420",
        };
        let domain = match self.domain {
            DomainPolicy::Auto => "auto",
            DomainPolicy::Linear => "linear",
            DomainPolicy::Encoded => "encoded",
        };
        let [r, g, b] = self.background.map(|v| (v.clamp(0.0, 1.0) * 255.0).round() as u8);
        vec![
            ("input-encoding", encoding.into()),
            ("depth", depth.into()),
            ("meta", if self.keep_metadata { "keep" } else { "drop" }.into()),
            ("format", self.format.and_then(Format::extension).unwrap_or("from-extension").into()),
            ("quality", self.quality.to_string()),
            ("chroma", chroma.into()),
            ("domain", domain.into()),
            ("background", format!("#{r:02x}{g:02x}{b:02x}")),
            ("keep-orientation", self.keep_orientation.to_string()),
            ("pixel-size", self.pixel_size.map_or_else(|| "from-file".into(), |p| p.to_string())),
            ("max-pixels", self.limits.max_pixels.to_string()),
        ]
    }
}

/// Option values a recipe or the command line may set; unset ones keep what
/// was there (defaults, then recipe, then command line).
#[derive(Clone, Debug, Default, PartialEq)]
pub struct OptionOverrides {
    pub input_encoding: Option<InputEncoding>,
    pub sample: Option<Option<SampleType>>,
    pub keep_metadata: Option<bool>,
    pub format: Option<Format>,
    pub quality: Option<u8>,
    pub chroma: Option<Chroma>,
    pub domain: Option<DomainPolicy>,
    pub background: Option<[f32; 3]>,
    pub pixel_size: Option<PixelSize>,
}

impl OptionOverrides {
    /// Writes every set value into `options`.
    pub fn apply_to(&self, options: &mut RunOptions) {
        if let Some(v) = self.input_encoding {
            options.input_encoding = v;
        }
        if let Some(v) = self.sample {
            options.sample = v;
        }
        if let Some(v) = self.keep_metadata {
            options.keep_metadata = v;
        }
        if let Some(v) = self.format {
            options.format = Some(v);
        }
        if let Some(v) = self.quality {
            options.quality = v;
        }
        if let Some(v) = self.chroma {
            options.chroma = v;
        }
        if let Some(v) = self.domain {
            options.domain = v;
        }
        if let Some(v) = self.background {
            options.background = v;
        }
        if let Some(v) = self.pixel_size {
            options.pixel_size = Some(v);
        }
    }
}

/// Output depth names: `source` keeps the source's.
pub const DEPTH_NAMES: [&str; 4] = ["source", "8", "16", "f32"];

/// Parses an output depth; `source` is `None`.
pub fn parse_depth(s: &str) -> Result<Option<SampleType>, String> {
    match s {
        "source" => Ok(None),
        "8" => Ok(Some(SampleType::U8)),
        "16" => Ok(Some(SampleType::U16)),
        "f32" => Ok(Some(SampleType::F32)),
        _ => Err(format!("unknown depth `{s}`; expected one of {}", DEPTH_NAMES.join(", "))),
    }
}

/// Metadata policy names.
pub const META_NAMES: [&str; 2] = ["keep", "drop"];

/// Parses a metadata policy: `keep` is true.
pub fn parse_meta(s: &str) -> Result<bool, String> {
    match s {
        "keep" => Ok(true),
        "drop" => Ok(false),
        _ => Err(format!("unknown metadata policy `{s}`; expected one of {}", META_NAMES.join(", "))),
    }
}

/// Parses an output format name as `--format` takes it.
pub fn parse_format(s: &str) -> Result<Format, String> {
    match Format::from_extension(s) {
        Some(f) if f.deepest_sample().is_some() => Ok(f),
        _ => Err(format!("unknown output format `{s}`; expected one of {}", Format::WRITE_NAMES.join(", "))),
    }
}

pub use crate::color::parse_colour;

/// The side of one (square) pixel in the object, as a calibration: `0.65um`.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct PixelSize {
    /// The size in `unit`.
    pub value: f64,
    pub unit: LengthUnit,
}

/// Units a pixel size may be given in.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum LengthUnit {
    Nanometre,
    Micrometre,
    Millimetre,
    Centimetre,
    Inch,
}

impl LengthUnit {
    /// The unit's symbol as `--pixel-size` takes it.
    pub fn symbol(self) -> &'static str {
        match self {
            LengthUnit::Nanometre => "nm",
            LengthUnit::Micrometre => "um",
            LengthUnit::Millimetre => "mm",
            LengthUnit::Centimetre => "cm",
            LengthUnit::Inch => "in",
        }
    }

    /// Centimetres per unit (SI prefixes; 1 in = 2.54 cm exactly, 1959 agreement).
    fn in_cm(self) -> f64 {
        match self {
            LengthUnit::Nanometre => 1e-7,
            LengthUnit::Micrometre => 1e-4,
            LengthUnit::Millimetre => 0.1,
            LengthUnit::Centimetre => 1.0,
            LengthUnit::Inch => 2.54,
        }
    }
}

impl PixelSize {
    /// The resolution metadata it stands for: pixels per inch for a size in
    /// inches, else pixels per centimetre (the unit TIFF and PNG can store).
    pub fn resolution(self) -> Resolution {
        match self.unit {
            LengthUnit::Inch => {
                Resolution { x: 1.0 / self.value, y: 1.0 / self.value, unit: ResolutionUnit::Inch }
            }
            u => {
                let per_cm = 1.0 / (self.value * u.in_cm());
                Resolution { x: per_cm, y: per_cm, unit: ResolutionUnit::Centimetre }
            }
        }
    }
}

impl std::fmt::Display for PixelSize {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        write!(f, "{}{}", self.value, self.unit.symbol())
    }
}

/// Parses a pixel size: a positive number and a unit, `nm`, `um` (or `µm`),
/// `mm`, `cm` or `in`, e.g. `0.65um`.
pub fn parse_pixel_size(s: &str) -> Result<PixelSize, String> {
    let t = s.trim();
    let split =
        t.find(|c: char| !(c.is_ascii_digit() || c == '.' || c == 'e' || c == 'E' || c == '-' || c == '+'));
    let bad = || {
        format!("pixel size `{s}`: expected a positive number and a unit (nm, um, mm, cm, in), e.g. 0.65um")
    };
    let (number, unit) = t.split_at(split.ok_or_else(bad)?);
    let value: f64 = number.parse().map_err(|_| bad())?;
    let unit = match unit.trim() {
        "nm" => LengthUnit::Nanometre,
        "um" | "µm" | "μm" => LengthUnit::Micrometre,
        "mm" => LengthUnit::Millimetre,
        "cm" => LengthUnit::Centimetre,
        "in" => LengthUnit::Inch,
        _ => return Err(bad()),
    };
    if !(value.is_finite() && value > 0.0) {
        return Err(bad());
    }
    Ok(PixelSize { value, unit })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn small_values_parse() {
        assert_eq!(parse_depth("16"), Ok(Some(SampleType::U16)));
        assert!(parse_depth("12").unwrap_err().contains("source, 8, 16, f32"));
        assert_eq!(parse_format("tif"), Ok(Format::Tiff));
        assert!(parse_format("gif").is_err());
        assert_eq!(parse_meta("drop"), Ok(false));
        let p = parse_pixel_size("0.65um").unwrap();
        // 0.65 µm = 6.5e-5 cm, so 1 / 6.5e-5 = 15384.6 pixels per cm.
        assert!((p.resolution().x - 15384.615).abs() < 1e-3);
        assert_eq!(parse_pixel_size("2 µm").unwrap().unit, LengthUnit::Micrometre);
        assert_eq!(parse_pixel_size("0.01in").unwrap().resolution().x.round(), 100.0);
        for bad in ["0.65", "um", "-1um", "0um", "3 furlongs"] {
            assert!(parse_pixel_size(bad).is_err(), "{bad}");
        }
    }
}
