//! Encoding: [`Raster`] → bytes of one file format. Converts to the file's
//! encoding with exact rounding to the nearest code, flattens alpha where the
//! format has none, and carries ICC, EXIF (orientation rewritten) and resolution
//! where the format holds them. Output depends only on the input: no timestamps.

use std::io::Cursor;
use std::str::FromStr;

use rayon::prelude::*;

use super::exif;
use super::format::Format;
use crate::color::srgb::{self, Quantiser};
use crate::error::Error;
use crate::raster::{ColourModel, Encoding, Layout, Plane, Raster, Resolution, ResolutionUnit, SampleType};

/// JPEG chroma subsampling.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub enum Chroma {
    /// Full-resolution colour.
    S444,
    /// Colour halved horizontally.
    S422,
    /// Colour halved both ways (the common default of JPEG encoders).
    #[default]
    S420,
}

impl Chroma {
    pub const NAMES: [&'static str; 3] = ["444", "422", "420"];
}

impl FromStr for Chroma {
    type Err = String;

    fn from_str(s: &str) -> Result<Self, Self::Err> {
        match s {
            "444" => Ok(Chroma::S444),
            "422" => Ok(Chroma::S422),
            "420" => Ok(Chroma::S420),
            _ => Err(format!("unknown chroma subsampling `{s}`; expected one of {}", Self::NAMES.join(", "))),
        }
    }
}

/// How to encode.
#[derive(Clone, Debug)]
pub struct EncodeOptions {
    pub format: Format,
    /// The sample type to write; `None` takes [`Format::default_sample`] of the source's.
    pub sample: Option<SampleType>,
    /// What the file's values mean (EXR is always linear).
    pub encoding: Encoding,
    /// JPEG quality, 1–100.
    pub quality: u8,
    pub chroma: Chroma,
    /// The colour alpha is flattened onto when the format has no alpha, as
    /// sRGB-encoded values in `[0, 1]`.
    pub background: [f32; 3],
    /// Carry ICC profile, EXIF and resolution.
    pub keep_metadata: bool,
}

impl EncodeOptions {
    pub fn new(format: Format) -> EncodeOptions {
        EncodeOptions {
            format,
            sample: None,
            encoding: Encoding::Srgb,
            quality: 90,
            chroma: Chroma::default(),
            background: [1.0, 1.0, 1.0],
            keep_metadata: true,
        }
    }

    /// The sample type that will be written for `raster`.
    pub fn sample_for(&self, raster: &Raster) -> Result<SampleType, Error> {
        let source = raster.metadata.source_sample.unwrap_or(SampleType::F32);
        let sample = match self.sample {
            Some(s) => s,
            None => self.format.default_sample(source).ok_or_else(|| self.cannot_write())?,
        };
        if !self.format.can_write(sample) {
            return Err(Error::Encode {
                format: self.format.name(),
                reason: format!("{} samples cannot be written in {}", sample.name(), self.format.name()),
            });
        }
        Ok(sample)
    }

    fn cannot_write(&self) -> Error {
        Error::Unsupported(format!(
            "Pumice does not write {}; choose one of {}",
            self.format.name(),
            Format::WRITE_NAMES.join(", ")
        ))
    }
}

/// A raster made ready for one format: in RGB unless the format keeps other
/// colour models, flattened when the format has no alpha.
struct Prepared<'a> {
    raster: std::borrow::Cow<'a, Raster>,
    sample: SampleType,
    /// The encoding of the file's values.
    file_encoding: Encoding,
}

fn prepare<'a>(raster: &'a Raster, opts: &EncodeOptions) -> Result<Prepared<'a>, Error> {
    use std::borrow::Cow;
    let sample = opts.sample_for(raster)?;
    // A raster in another colour model (after `space`) is written as sRGB,
    // except to a float TIFF, which keeps the model's channels as they are.
    let raw = opts.format == Format::Tiff && sample == SampleType::F32;
    let raster = if raster.model != ColourModel::Rgb && !raw {
        Cow::Owned(crate::color::models::convert(raster.clone(), ColourModel::Rgb)?)
    } else {
        Cow::Borrowed(raster)
    };
    let file_encoding = if raster.model != ColourModel::Rgb {
        raster.encoding
    } else if opts.format == Format::Exr {
        Encoding::Linear
    } else {
        opts.encoding
    };
    let raster = if raster.layout().has_alpha() && !opts.format.has_alpha() {
        Cow::Owned(flatten(&raster, opts.background)?)
    } else {
        raster
    };
    Ok(Prepared { raster, sample, file_encoding })
}

/// Encodes `raster` in the options' format.
pub fn encode(raster: &Raster, opts: &EncodeOptions) -> Result<Vec<u8>, Error> {
    let Prepared { raster, sample, file_encoding } = prepare(raster, opts)?;
    let raster = raster.as_ref();
    let meta = opts.keep_metadata.then_some(&raster.metadata);
    let exif = meta
        .and_then(|m| m.exif.as_deref())
        .and_then(|e| exif::with_orientation(e, raster.metadata.orientation));
    let icc = meta.and_then(|m| m.icc_profile.clone());
    let resolution = meta.and_then(|m| m.resolution);
    let (w, h) = (raster.width(), raster.height());
    let fail = |reason: String| Error::Encode { format: opts.format.name(), reason };
    match opts.format {
        Format::Png => {
            let (data, depth) = match sample {
                SampleType::U8 => (interleave_u8(raster, file_encoding), png::BitDepth::Eight),
                _ => (
                    interleave_u16(raster, file_encoding).iter().flat_map(|v| v.to_be_bytes()).collect(),
                    png::BitDepth::Sixteen,
                ),
            };
            let colour = match raster.layout() {
                Layout::Gray => png::ColorType::Grayscale,
                Layout::GrayAlpha => png::ColorType::GrayscaleAlpha,
                Layout::Rgb => png::ColorType::Rgb,
                Layout::Rgba => png::ColorType::Rgba,
            };
            let mut info = png::Info::with_size(dim_u32(w)?, dim_u32(h)?);
            info.color_type = colour;
            info.bit_depth = depth;
            info.icc_profile = icc.map(Into::into);
            info.exif_metadata = exif.map(Into::into);
            info.pixel_dims = resolution.and_then(|r| r.per_metre()).map(|(x, y)| png::PixelDimensions {
                xppu: x.round() as u32,
                yppu: y.round() as u32,
                unit: png::Unit::Meter,
            });
            let mut out = Vec::new();
            let mut encoder = png::Encoder::with_info(&mut out, info).map_err(|e| fail(e.to_string()))?;
            encoder.set_compression(png::Compression::Fast);
            let mut writer = encoder.write_header().map_err(|e| fail(e.to_string()))?;
            writer.write_image_data(&data).map_err(|e| fail(e.to_string()))?;
            writer.finish().map_err(|e| fail(e.to_string()))?;
            Ok(out)
        }
        Format::Jpeg => {
            use jpeg_encoder::{ColorType, Encoder, PixelDensity, PixelDensityUnit, SamplingFactor};
            let data = interleave_u8(raster, file_encoding);
            let colour =
                if raster.layout().colour_channels() == 1 { ColorType::Luma } else { ColorType::Rgb };
            let (jw, jh) = (u16::try_from(w), u16::try_from(h));
            let (Ok(jw), Ok(jh)) = (jw, jh) else {
                return Err(fail(format!("JPEG holds at most 65535×65535 pixels; the image is {w}×{h}")));
            };
            let mut out = Vec::new();
            let mut enc = Encoder::new(&mut out, opts.quality.clamp(1, 100));
            enc.set_sampling_factor(match opts.chroma {
                Chroma::S444 => SamplingFactor::R_4_4_4,
                Chroma::S422 => SamplingFactor::R_4_2_2,
                Chroma::S420 => SamplingFactor::R_4_2_0,
            });
            if let Some((x, y, unit)) = resolution.and_then(jfif_density) {
                enc.set_density(PixelDensity {
                    density: (x, y),
                    unit: if unit == ResolutionUnit::Inch {
                        PixelDensityUnit::Inches
                    } else {
                        PixelDensityUnit::Centimeters
                    },
                });
            }
            if let Some(icc) = icc {
                enc.add_icc_profile(&icc).map_err(|e| fail(e.to_string()))?;
            }
            if let Some(exif) = exif {
                enc.add_exif_metadata(&exif).map_err(|e| fail(e.to_string()))?;
            }
            enc.encode(&data, jw, jh, colour).map_err(|e| fail(e.to_string()))?;
            Ok(out)
        }
        Format::Tiff => encode_tiff_pages(&[raster], opts),
        Format::Webp => {
            use image::ImageEncoder;
            let data = interleave_u8(raster, file_encoding);
            let colour = match raster.layout() {
                Layout::Gray => image::ExtendedColorType::L8,
                Layout::GrayAlpha => image::ExtendedColorType::La8,
                Layout::Rgb => image::ExtendedColorType::Rgb8,
                Layout::Rgba => image::ExtendedColorType::Rgba8,
            };
            let mut out = Vec::new();
            let mut enc = image::codecs::webp::WebPEncoder::new_lossless(&mut out);
            if let Some(icc) = icc {
                enc.set_icc_profile(icc).map_err(|e| fail(e.to_string()))?;
            }
            if let Some(exif) = exif {
                enc.set_exif_metadata(exif).map_err(|e| fail(e.to_string()))?;
            }
            enc.write_image(&data, dim_u32(w)?, dim_u32(h)?, colour).map_err(|e| fail(e.to_string()))?;
            Ok(out)
        }
        Format::Exr => {
            use image::ImageEncoder;
            let rgb =
                if raster.layout().colour_channels() == 1 { expand_gray(raster)? } else { raster.clone() };
            let data = interleave_f32(&rgb, Encoding::Linear);
            let colour = if rgb.layout().has_alpha() {
                image::ExtendedColorType::Rgba32F
            } else {
                image::ExtendedColorType::Rgb32F
            };
            let mut out = Cursor::new(Vec::new());
            let enc = image::codecs::openexr::OpenExrEncoder::new(&mut out);
            let bytes: Vec<u8> = data.iter().flat_map(|v| v.to_ne_bytes()).collect();
            enc.write_image(&bytes, dim_u32(w)?, dim_u32(h)?, colour).map_err(|e| fail(e.to_string()))?;
            Ok(out.into_inner())
        }
        Format::Bmp | Format::Gif => Err(opts.cannot_write()),
    }
}

fn dim_u32(v: usize) -> Result<u32, Error> {
    u32::try_from(v)
        .map_err(|_| Error::Encode { format: "image", reason: format!("side of {v} pixels is too large") })
}

/// JFIF stores integer densities: the unit (inch or cm) whose rounding is the
/// more exact, or `None` without a unit or out of range.
fn jfif_density(r: Resolution) -> Option<(u16, u16, ResolutionUnit)> {
    let (cm_x, cm_y) = match r.unit {
        ResolutionUnit::Inch => (r.x / 2.54, r.y / 2.54),
        ResolutionUnit::Centimetre => (r.x, r.y),
        ResolutionUnit::None => return None,
    };
    let (in_x, in_y) = (cm_x * 2.54, cm_y * 2.54);
    let err = |a: f64| if a > 0.0 { (a.round() - a).abs() / a } else { f64::INFINITY };
    let (x, y, unit) = if err(in_x) <= err(cm_x) {
        (in_x, in_y, ResolutionUnit::Inch)
    } else {
        (cm_x, cm_y, ResolutionUnit::Centimetre)
    };
    let fits = |v: f64| v.round() >= 1.0 && v.round() <= f64::from(u16::MAX);
    (fits(x) && fits(y)).then(|| (x.round() as u16, y.round() as u16, unit))
}

/// Composites colour over `background` in linear light: `c = c·a + bg·(1 − a)`.
/// A gray image takes the background's luminance (BT.709 weights on linear light).
fn flatten(raster: &Raster, background: [f32; 3]) -> Result<Raster, Error> {
    let layout = raster.layout();
    let alpha = raster.alpha().ok_or_else(|| Error::Internal("flatten without alpha".into()))?;
    let n = layout.colour_channels();
    let bg_linear = background.map(srgb::decode);
    let bg: Vec<f32> = if n == 1 {
        vec![crate::color::luma::BT709.iter().zip(bg_linear).map(|(w, b)| w * b).sum()]
    } else {
        bg_linear.to_vec()
    };
    let planes = raster.planes()[..n]
        .iter()
        .zip(bg)
        .map(|(p, bg)| {
            let mut data = p.as_slice().to_vec();
            if raster.encoding == Encoding::Srgb {
                srgb::decode_in_place(&mut data, raster.levels);
            }
            for (v, a) in data.iter_mut().zip(alpha.as_slice()) {
                let a = a.clamp(0.0, 1.0);
                *v = *v * a + bg * (1.0 - a);
            }
            Plane::from_vec(p.width(), p.height(), data)
        })
        .collect::<Result<Vec<_>, _>>()?;
    let mut out = Raster::new(planes, layout.with_alpha(false), Encoding::Linear)?;
    out.metadata = raster.metadata.clone();
    Ok(out)
}

/// A gray raster with its gray plane repeated as red, green and blue.
fn expand_gray(raster: &Raster) -> Result<Raster, Error> {
    let p = raster.planes();
    let mut planes = vec![p[0].clone(), p[0].clone(), p[0].clone()];
    if let Some(a) = raster.alpha() {
        planes.push(a.clone());
    }
    let layout = Layout::Rgb.with_alpha(raster.layout().has_alpha());
    raster.clone().with_planes(planes, layout)
}

/// Interleaves all planes row by row in parallel, mapping colour samples with
/// `colour` and alpha samples with `alpha`. Each plane's row is converted in a
/// tight loop first and then scattered, so the conversion vectorises.
fn interleave<T, C, A>(raster: &Raster, colour: C, alpha: A) -> Vec<T>
where
    T: Copy + Default + Send + Sync,
    C: Fn(f32) -> T + Sync,
    A: Fn(f32) -> T + Sync,
{
    let (w, n) = (raster.width(), raster.layout().channels());
    let n_colour = raster.layout().colour_channels();
    let planes = raster.planes();
    let mut out = vec![T::default(); w * raster.height() * n];
    out.par_chunks_mut(w * n).enumerate().for_each(|(y, row)| {
        let mut converted = vec![T::default(); w];
        for (c, plane) in planes.iter().enumerate() {
            if c < n_colour {
                converted.iter_mut().zip(plane.row(y)).for_each(|(o, &v)| *o = colour(v));
            } else {
                converted.iter_mut().zip(plane.row(y)).for_each(|(o, &v)| *o = alpha(v));
            }
            if n == 1 {
                row.copy_from_slice(&converted);
            } else {
                for (px, &v) in row.chunks_exact_mut(n).zip(&converted) {
                    px[c] = v;
                }
            }
        }
    });
    out
}

/// `round(clamp(v, 0, 1) · max)` with halves rounded up, NaN as 0. The cast
/// truncates, which is the floor for the non-negative value it sees.
#[inline]
fn quantise(v: f32, max: f32) -> u32 {
    // A NaN stays NaN through `clamp`, and the cast maps NaN to 0.
    (v.clamp(0.0, 1.0) * max + 0.5) as u32
}

/// Samples as `max`-level codes in `file` encoding, written by `put`.
fn interleave_codes<T>(raster: &Raster, file: Encoding, max: u32, put: impl Fn(u32) -> T + Sync) -> Vec<T>
where
    T: Copy + Default + Send + Sync,
{
    let m = max as f32;
    let alpha = |a: f32| put(quantise(a, m));
    match (raster.encoding, file) {
        (Encoding::Linear, Encoding::Srgb) => {
            let q = if max == 255 { Quantiser::u8() } else { Quantiser::u16() };
            interleave(raster, |v| put(q.code(v)), alpha)
        }
        (Encoding::Srgb, Encoding::Linear) => {
            interleave(raster, |v| put(quantise(srgb::decode(v), m)), alpha)
        }
        _ => interleave(raster, |v| put(quantise(v, m)), alpha),
    }
}

fn interleave_u8(raster: &Raster, file: Encoding) -> Vec<u8> {
    interleave_codes(raster, file, 255, |c| c as u8)
}

fn interleave_u16(raster: &Raster, file: Encoding) -> Vec<u16> {
    interleave_codes(raster, file, 65535, |c| c as u16)
}

fn interleave_f32(raster: &Raster, file: Encoding) -> Vec<f32> {
    match (raster.encoding, file) {
        (Encoding::Linear, Encoding::Srgb) => interleave(raster, srgb::encode, |a| a),
        (Encoding::Srgb, Encoding::Linear) => interleave(raster, srgb::decode, |a| a),
        _ => interleave(raster, |v| v, |a| a),
    }
}

/// Encodes several rasters as the pages of one TIFF (TIFF 6.0 §2: one image
/// file directory per page, chained in order), each as [`encode`] would write
/// it alone: its own size, layout, sample type and metadata. The options'
/// format must be TIFF.
pub fn encode_tiff_pages(rasters: &[&Raster], opts: &EncodeOptions) -> Result<Vec<u8>, Error> {
    encode_tiff_pages_with(rasters.len(), opts, |i| Ok(std::borrow::Cow::Borrowed(rasters[i])), |e| e)
}

/// [`encode_tiff_pages`] with the pages made one at a time by `page(i)`
/// (0-based, in order), so only one page's planes need to exist at once.
/// Errors of `page` are returned as they are; encoding errors go through
/// `encode_error`.
pub fn encode_tiff_pages_with<'r, E>(
    pages: usize,
    opts: &EncodeOptions,
    mut page: impl FnMut(usize) -> Result<std::borrow::Cow<'r, Raster>, E>,
    encode_error: impl Fn(Error) -> E,
) -> Result<Vec<u8>, E> {
    use tiff::encoder::{Compression, DeflateLevel, TiffEncoder};
    let fail = |e: tiff::TiffError| encode_error(Error::Encode { format: "TIFF", reason: e.to_string() });
    if opts.format != Format::Tiff {
        return Err(encode_error(Error::Encode {
            format: opts.format.name(),
            reason: "only TIFF holds several pages in one file".into(),
        }));
    }
    if pages == 0 {
        return Err(encode_error(Error::Encode { format: "TIFF", reason: "no pages to write".into() }));
    }
    let mut out = Cursor::new(Vec::new());
    let mut enc =
        TiffEncoder::new(&mut out).map_err(fail)?.with_compression(Compression::Deflate(DeflateLevel::Fast));
    for i in 0..pages {
        let raster = page(i)?;
        let Prepared { raster, sample, file_encoding } = prepare(&raster, opts).map_err(&encode_error)?;
        let meta = opts.keep_metadata.then_some(&raster.metadata);
        let icc = meta.and_then(|m| m.icc_profile.clone());
        let resolution = meta.and_then(|m| m.resolution);
        enc = encode_tiff_page(enc, &raster, sample, file_encoding, icc, resolution).map_err(fail)?;
    }
    Ok(out.into_inner())
}

/// Writes one TIFF page with Deflate compression (horizontal predictor for
/// integers), the ICC profile (tag 34675), resolution (tags 282, 283, 296) and
/// a non-upright orientation (tag 274). Alpha is an extra sample marked
/// unassociated (ExtraSamples = 2, TIFF 6.0 §18), as Pumice stores it. EXIF is
/// not written.
fn encode_tiff_page<W: std::io::Write + std::io::Seek>(
    enc: tiff::encoder::TiffEncoder<W>,
    raster: &Raster,
    sample: SampleType,
    file: Encoding,
    icc: Option<Vec<u8>>,
    resolution: Option<Resolution>,
) -> Result<tiff::encoder::TiffEncoder<W>, tiff::TiffError> {
    use tiff::encoder::{Predictor, colortype};
    use tiff::tags::ExtraSamples;
    let (w, h) = (raster.width() as u32, raster.height() as u32);
    let predictor = if sample == SampleType::F32 { Predictor::None } else { Predictor::Horizontal };
    let mut enc = enc.with_predictor(predictor);
    let orientation = raster.metadata.orientation;
    let alpha = raster.layout().has_alpha();

    macro_rules! write {
        ($ct:ty, $data:expr) => {{
            let data = $data;
            let mut image = enc.new_image::<$ct>(w, h)?;
            if alpha {
                image
                    .encoder()
                    .write_tag(tiff::tags::Tag::ExtraSamples, ExtraSamples::UnassociatedAlpha.to_u16())?;
            }
            if let Some(icc) = &icc {
                image.encoder().write_tag(tiff::tags::Tag::IccProfile, &icc[..])?;
            }
            if orientation != 1 {
                image.encoder().write_tag(tiff::tags::Tag::Orientation, orientation)?;
            }
            if let Some(r) = resolution {
                let unit = match r.unit {
                    ResolutionUnit::Inch => tiff::tags::ResolutionUnit::Inch,
                    ResolutionUnit::Centimetre => tiff::tags::ResolutionUnit::Centimeter,
                    ResolutionUnit::None => tiff::tags::ResolutionUnit::None,
                };
                image.resolution_unit(unit);
                image.x_resolution(rational(r.x));
                image.y_resolution(rational(r.y));
            }
            image.write_data(&data)?;
        }};
    }

    match (raster.layout(), sample) {
        (Layout::Gray, SampleType::U8) => write!(colortype::Gray8, interleave_u8(raster, file)),
        (Layout::Gray, SampleType::U16) => write!(colortype::Gray16, interleave_u16(raster, file)),
        (Layout::Gray, SampleType::F32) => write!(colortype::Gray32Float, interleave_f32(raster, file)),
        (Layout::GrayAlpha, SampleType::U8) => {
            write!(tiff_gray_alpha::GrayAlpha8, interleave_u8(raster, file))
        }
        (Layout::GrayAlpha, SampleType::U16) => {
            write!(tiff_gray_alpha::GrayAlpha16, interleave_u16(raster, file))
        }
        (Layout::GrayAlpha, SampleType::F32) => {
            write!(tiff_gray_alpha::GrayAlpha32Float, interleave_f32(raster, file))
        }
        (Layout::Rgb, SampleType::U8) => write!(colortype::RGB8, interleave_u8(raster, file)),
        (Layout::Rgb, SampleType::U16) => write!(colortype::RGB16, interleave_u16(raster, file)),
        (Layout::Rgb, SampleType::F32) => write!(colortype::RGB32Float, interleave_f32(raster, file)),
        (Layout::Rgba, SampleType::U8) => write!(colortype::RGBA8, interleave_u8(raster, file)),
        (Layout::Rgba, SampleType::U16) => write!(colortype::RGBA16, interleave_u16(raster, file)),
        (Layout::Rgba, SampleType::F32) => write!(colortype::RGBA32Float, interleave_f32(raster, file)),
    }
    Ok(enc)
}

/// Gray-with-alpha sample layouts for the TIFF encoder, which has none of its
/// own. (Its extra-sample route predicts across the two samples of a pixel as
/// if they were one, which readers then undo wrongly.)
mod tiff_gray_alpha {
    use tiff::encoder::colortype::ColorType;
    use tiff::tags::{PhotometricInterpretation, SampleFormat};

    /// Horizontal differencing (TIFF 6.0 §14) over pixels of two samples.
    fn predict<T: Copy + Sub>(row: &[T], result: &mut Vec<T>) {
        result.extend_from_slice(&row[..row.len().min(2)]);
        result.extend(row.iter().zip(row.iter().skip(2)).map(|(prev, cur)| cur.wrapping_minus(*prev)));
    }

    /// Wrapping subtraction, for the predictor.
    pub trait Sub {
        fn wrapping_minus(self, other: Self) -> Self;
    }

    impl Sub for u8 {
        fn wrapping_minus(self, other: Self) -> Self {
            self.wrapping_sub(other)
        }
    }

    impl Sub for u16 {
        fn wrapping_minus(self, other: Self) -> Self {
            self.wrapping_sub(other)
        }
    }

    pub struct GrayAlpha8;
    impl ColorType for GrayAlpha8 {
        type Inner = u8;
        const TIFF_VALUE: PhotometricInterpretation = PhotometricInterpretation::BlackIsZero;
        const BITS_PER_SAMPLE: &'static [u16] = &[8, 8];
        const SAMPLE_FORMAT: &'static [SampleFormat] = &[SampleFormat::Uint; 2];
        fn horizontal_predict(row: &[u8], result: &mut Vec<u8>) {
            predict(row, result)
        }
    }

    pub struct GrayAlpha16;
    impl ColorType for GrayAlpha16 {
        type Inner = u16;
        const TIFF_VALUE: PhotometricInterpretation = PhotometricInterpretation::BlackIsZero;
        const BITS_PER_SAMPLE: &'static [u16] = &[16, 16];
        const SAMPLE_FORMAT: &'static [SampleFormat] = &[SampleFormat::Uint; 2];
        fn horizontal_predict(row: &[u16], result: &mut Vec<u16>) {
            predict(row, result)
        }
    }

    pub struct GrayAlpha32Float;
    impl ColorType for GrayAlpha32Float {
        type Inner = f32;
        const TIFF_VALUE: PhotometricInterpretation = PhotometricInterpretation::BlackIsZero;
        const BITS_PER_SAMPLE: &'static [u16] = &[32, 32];
        const SAMPLE_FORMAT: &'static [SampleFormat] = &[SampleFormat::IEEEFP; 2];
        /// Float data are written without a predictor, so this only copies.
        fn horizontal_predict(row: &[f32], result: &mut Vec<f32>) {
            result.extend_from_slice(row);
        }
    }
}

/// A TIFF RATIONAL for `v`: exact for whole numbers, else to 1/10000.
fn rational(v: f64) -> tiff::encoder::Rational {
    if v.fract() == 0.0 && v <= f64::from(u32::MAX) {
        tiff::encoder::Rational { n: v as u32, d: 1 }
    } else {
        tiff::encoder::Rational { n: (v * 10000.0).round().min(f64::from(u32::MAX)) as u32, d: 10000 }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn jfif_density_picks_the_exact_unit() {
        // ../shared REFERENCES.md [K8]: 300 dpi = 118.11 px/cm; PNG stores 11811 px/m.
        let from_png = Resolution { x: 118.11, y: 118.11, unit: ResolutionUnit::Centimetre };
        assert_eq!(jfif_density(from_png), Some((300, 300, ResolutionUnit::Inch)));
        let per_cm = Resolution { x: 61.0, y: 61.0, unit: ResolutionUnit::Centimetre };
        assert_eq!(jfif_density(per_cm).map(|d| d.2), Some(ResolutionUnit::Centimetre));
        assert_eq!(jfif_density(Resolution { x: 1.0, y: 1.0, unit: ResolutionUnit::None }), None);
    }

    #[test]
    fn quantise_rounds_half_up_and_clamps() {
        assert_eq!(quantise(0.5 / 255.0, 255.0), 1);
        assert_eq!(quantise(0.49 / 255.0, 255.0), 0);
        assert_eq!(quantise(-3.0, 255.0), 0);
        assert_eq!(quantise(7.0, 255.0), 255);
        assert_eq!(quantise(f32::NAN, 65535.0), 0);
        assert_eq!(quantise(f32::INFINITY, 65535.0), 65535);
        for k in 0..=255u32 {
            assert_eq!(quantise(k as f32 / 255.0, 255.0), k);
        }
    }
}
