//! The in-memory image: planar `f32` channels, what the numbers mean (layout and
//! encoding) and the metadata carried from the source. No codec or operator logic.

pub(crate) mod huge_pages;
mod plane;
pub(crate) mod recycle;
pub mod transform;

pub use plane::Plane;
pub(crate) use plane::all_finite;

use crate::error::Error;

/// The default largest `width × height` Pumice will decode or create: 2²⁸
/// (268 million pixels, e.g. 16384 × 16384).
pub const DEFAULT_MAX_PIXELS: u64 = 1 << 28;

/// Which channels a raster holds, in storage order.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Layout {
    Gray,
    GrayAlpha,
    Rgb,
    Rgba,
}

impl Layout {
    /// Number of planes, alpha included.
    pub fn channels(self) -> usize {
        match self {
            Layout::Gray => 1,
            Layout::GrayAlpha => 2,
            Layout::Rgb => 3,
            Layout::Rgba => 4,
        }
    }

    /// Number of colour planes (alpha excluded): 1 or 3.
    pub fn colour_channels(self) -> usize {
        match self {
            Layout::Gray | Layout::GrayAlpha => 1,
            Layout::Rgb | Layout::Rgba => 3,
        }
    }

    pub fn has_alpha(self) -> bool {
        matches!(self, Layout::GrayAlpha | Layout::Rgba)
    }

    /// The layout with the same colour planes and alpha present or not.
    pub fn with_alpha(self, alpha: bool) -> Layout {
        match (self.colour_channels(), alpha) {
            (1, false) => Layout::Gray,
            (1, true) => Layout::GrayAlpha,
            (_, false) => Layout::Rgb,
            (_, true) => Layout::Rgba,
        }
    }

    pub fn name(self) -> &'static str {
        match self {
            Layout::Gray => "gray",
            Layout::GrayAlpha => "gray+alpha",
            Layout::Rgb => "rgb",
            Layout::Rgba => "rgba",
        }
    }
}

/// How sample values relate to light.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Encoding {
    /// Proportional to light (scene-linear or display-linear).
    Linear,
    /// Encoded with the IEC 61966-2-1 sRGB transfer function.
    Srgb,
}

impl Encoding {
    pub fn name(self) -> &'static str {
        match self {
            Encoding::Linear => "linear",
            Encoding::Srgb => "srgb",
        }
    }
}

/// What the three colour planes hold. `Rgb` (the default) is R, G, B in the
/// raster's `encoding`; the others are the results of the `space` operator and
/// hold that model's channels as numbers in the model's own units (for
/// example L* in 0..100). Gray rasters are always `Rgb`.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub enum ColourModel {
    #[default]
    Rgb,
    /// CIE 1931 XYZ, D65 white, Y = 1 for white.
    Xyz,
    /// CIE 1976 L*a*b*, D65 white.
    Lab,
    /// CIE LCh(ab): L*, chroma, hue in degrees 0..360, D65 white.
    Lch,
    /// Oklab (L in 0..1).
    Oklab,
    /// HSV of the sRGB-encoded values: hue in degrees 0..360, S and V in 0..1.
    Hsv,
    /// HSL of the sRGB-encoded values: hue in degrees 0..360, S and L in 0..1.
    Hsl,
}

impl ColourModel {
    pub const NAMES: [&'static str; 7] = ["rgb", "xyz", "lab", "lch", "oklab", "hsv", "hsl"];

    pub fn name(self) -> &'static str {
        Self::NAMES[self as usize]
    }

    /// The model called `name`, if any.
    pub fn from_name(name: &str) -> Option<ColourModel> {
        use ColourModel::*;
        [Rgb, Xyz, Lab, Lch, Oklab, Hsv, Hsl].into_iter().find(|m| m.name() == name)
    }

    /// The names of the three channels, in storage order.
    pub fn channels(self) -> [&'static str; 3] {
        match self {
            ColourModel::Rgb => ["r", "g", "b"],
            ColourModel::Xyz => ["x", "y", "z"],
            ColourModel::Lab | ColourModel::Oklab => ["l", "a", "b"],
            ColourModel::Lch => ["l", "c", "h"],
            ColourModel::Hsv => ["h", "s", "v"],
            ColourModel::Hsl => ["h", "s", "l"],
        }
    }
}

/// The sample type of a file: integer types map to `[0, 1]` on decode.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum SampleType {
    U8,
    U16,
    F32,
}

impl SampleType {
    /// The largest integer code, or `None` for floating point.
    pub fn max_code(self) -> Option<u32> {
        match self {
            SampleType::U8 => Some(255),
            SampleType::U16 => Some(65535),
            SampleType::F32 => None,
        }
    }

    pub fn name(self) -> &'static str {
        match self {
            SampleType::U8 => "8-bit",
            SampleType::U16 => "16-bit",
            SampleType::F32 => "32-bit float",
        }
    }
}

/// The unit of a resolution value.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum ResolutionUnit {
    /// Pixels per inch.
    Inch,
    /// Pixels per centimetre.
    Centimetre,
    /// No unit: the values give only the pixel aspect ratio.
    None,
}

/// Pixel density, horizontally and vertically, in `unit`.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Resolution {
    pub x: f64,
    pub y: f64,
    pub unit: ResolutionUnit,
}

impl Resolution {
    /// Pixels per metre (what PNG's `pHYs` stores), or `None` without a unit.
    pub fn per_metre(&self) -> Option<(f64, f64)> {
        // 1 inch = 0.0254 m exactly (international yard and pound agreement, 1959).
        match self.unit {
            ResolutionUnit::Inch => Some((self.x / 0.0254, self.y / 0.0254)),
            ResolutionUnit::Centimetre => Some((self.x * 100.0, self.y * 100.0)),
            ResolutionUnit::None => None,
        }
    }

    /// The same density with x and y exchanged (after a quarter turn or transpose).
    pub fn swapped(self) -> Resolution {
        Resolution { x: self.y, y: self.x, unit: self.unit }
    }
}

/// What was carried from the source file.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct Metadata {
    /// The embedded ICC profile, byte for byte.
    pub icc_profile: Option<Vec<u8>>,
    /// The EXIF block as a TIFF structure (starting `II*\0` or `MM\0*`).
    pub exif: Option<Vec<u8>>,
    /// The EXIF orientation (1–8) the pixels are stored in: 1 once decode made them upright.
    pub orientation: u16,
    pub resolution: Option<Resolution>,
    /// The sample type the source file stored, if it came from a file.
    pub source_sample: Option<SampleType>,
    /// How the source file's values were encoded (outputs are written the same
    /// way), if it came from a file; the planes may have been decoded to linear light.
    pub source_encoding: Option<Encoding>,
    /// Measurements steps made while running (a skew angle, a count of
    /// repaired pixels), in the order they were made, for `-v` and the run report.
    pub notes: Vec<Note>,
}

/// One measurement a step reported, e.g. `deskew` · `angle` · `-1.25` · `degrees`.
#[derive(Clone, Debug, PartialEq)]
pub struct Note {
    /// The operator that made it.
    pub operator: &'static str,
    /// What was measured, a short lower-case word or phrase.
    pub name: &'static str,
    pub value: NoteValue,
}

/// The value of a [`Note`].
#[derive(Clone, Debug, PartialEq)]
pub enum NoteValue {
    /// A number with its unit (empty for counts and ratios).
    Number { value: f64, unit: &'static str },
    /// A finding that is not a number, e.g. "no skew found".
    Text(String),
}

impl std::fmt::Display for Note {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        match &self.value {
            NoteValue::Number { value, unit: "" } => write!(f, "{}: {} = {value}", self.operator, self.name),
            NoteValue::Number { value, unit } => {
                write!(f, "{}: {} = {value} {unit}", self.operator, self.name)
            }
            NoteValue::Text(t) => write!(f, "{}: {}: {t}", self.operator, self.name),
        }
    }
}

/// An image: 1–4 planes of equal size, their layout and encoding, and metadata.
///
/// Invariants (checked by [`Raster::new`]): the number of planes matches the
/// layout and every plane has the same width and height.
#[derive(Clone, Debug, PartialEq)]
pub struct Raster {
    planes: Vec<Plane>,
    layout: Layout,
    /// The encoding of the colour planes; alpha is always linear coverage.
    pub encoding: Encoding,
    pub metadata: Metadata,
    /// What the colour planes hold; `Rgb` unless a `space` step changed it.
    pub model: ColourModel,
    /// `Some(n)` when every colour sample is known to be an exact multiple of
    /// `1/n` (an untouched 8- or 16-bit source), so transfer functions may use
    /// lookup tables indexed by the integer code.
    pub levels: Option<u32>,
}

impl Raster {
    pub fn new(planes: Vec<Plane>, layout: Layout, encoding: Encoding) -> Result<Self, Error> {
        if planes.len() != layout.channels() {
            return Err(Error::Internal(format!(
                "layout {} needs {} planes, got {}",
                layout.name(),
                layout.channels(),
                planes.len()
            )));
        }
        let (w, h) = (planes[0].width(), planes[0].height());
        if planes.iter().any(|p| p.width() != w || p.height() != h) {
            return Err(Error::Internal("planes of one raster differ in size".into()));
        }
        Ok(Raster {
            planes,
            layout,
            encoding,
            metadata: Metadata::default(),
            model: ColourModel::Rgb,
            levels: None,
        })
    }

    pub fn width(&self) -> usize {
        self.planes[0].width()
    }

    pub fn height(&self) -> usize {
        self.planes[0].height()
    }

    pub fn layout(&self) -> Layout {
        self.layout
    }

    pub fn planes(&self) -> &[Plane] {
        &self.planes
    }

    pub fn planes_mut(&mut self) -> &mut [Plane] {
        &mut self.planes
    }

    /// The colour planes (alpha excluded).
    pub fn colour_planes_mut(&mut self) -> &mut [Plane] {
        let n = self.layout.colour_channels();
        &mut self.planes[..n]
    }

    /// The alpha plane, if there is one.
    pub fn alpha(&self) -> Option<&Plane> {
        self.layout.has_alpha().then(|| &self.planes[self.planes.len() - 1])
    }

    /// Replaces the planes (and layout) while keeping encoding and metadata.
    pub fn with_planes(self, planes: Vec<Plane>, layout: Layout) -> Result<Raster, Error> {
        let mut out = Raster::new(planes, layout, self.encoding)?;
        out.metadata = self.metadata;
        out.levels = self.levels;
        out.model = if layout.colour_channels() == 3 { self.model } else { ColourModel::Rgb };
        Ok(out)
    }

    /// Replaces each plane by `f(index, plane)`, one plane at a time, each
    /// source plane dropped as soon as its result exists (so the next result
    /// can reuse its buffer); keeps layout, encoding and metadata.
    pub fn map_planes(
        self,
        mut f: impl FnMut(usize, &Plane) -> Result<Plane, Error>,
    ) -> Result<Raster, Error> {
        let _reuse = recycle::Scope::open();
        self.replace_planes(|sources, layout| {
            let out =
                sources.into_iter().enumerate().map(|(i, p)| f(i, &p)).collect::<Result<Vec<_>, _>>()?;
            Ok((out, layout))
        })
    }

    /// Hands the planes and layout to `f` by value and takes back the planes
    /// and layout it returns, keeping encoding and metadata (as
    /// [`Raster::with_planes`]): for a step that makes its result from planes
    /// it owns, so it can drop (or reuse) each source as soon as it is done.
    pub fn replace_planes(
        mut self,
        f: impl FnOnce(Vec<Plane>, Layout) -> Result<(Vec<Plane>, Layout), Error>,
    ) -> Result<Raster, Error> {
        let sources = std::mem::take(&mut self.planes);
        let (planes, layout) = f(sources, self.layout)?;
        self.with_planes(planes, layout)
    }

    /// Consumes the raster and returns its planes.
    pub fn into_planes(self) -> Vec<Plane> {
        self.planes
    }
}
