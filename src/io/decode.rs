//! Decoding: bytes → [`Raster`]. Limits are checked from the header before any
//! large allocation; decoder panics are contained; integer samples map to
//! `[0, 1]` exactly (`code / max`); EXIF orientation is applied unless asked not to.

use std::io::Cursor;
use std::panic::{AssertUnwindSafe, catch_unwind};
use std::str::FromStr;

use image::{DynamicImage, ImageDecoder, ImageReader};
use rayon::prelude::*;

use super::format::Format;
use super::{exif, jpeg_markers};
use crate::color::srgb;
use crate::error::Error;
use crate::ops::geometry::Move;
use crate::raster::{
    Encoding, Layout, Metadata, Plane, Raster, Resolution, ResolutionUnit, SampleType, recycle,
};

/// Bounds on what one decode may take.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct Limits {
    /// Largest `width × height` accepted.
    pub max_pixels: u64,
    /// Largest buffer a decoder may allocate for the decoded samples, in bytes;
    /// also the largest input file read.
    pub max_bytes: u64,
}

impl Limits {
    /// 2²⁸ pixels (268 million; e.g. 16384 × 16384) — room for large scans and
    /// stitched micrographs — and 4 GiB of decoded samples.
    pub const DEFAULT: Limits = Limits { max_pixels: crate::raster::DEFAULT_MAX_PIXELS, max_bytes: 4 << 30 };

    fn check(&self, format: Format, width: u64, height: u64, bytes: u64) -> Result<(), Error> {
        let pixels = width.saturating_mul(height);
        if width == 0 || height == 0 {
            return Err(Error::Decode {
                format: format.name(),
                reason: format!("the header gives a size of {width}×{height}"),
            });
        }
        if pixels > self.max_pixels {
            return Err(Error::Limit(format!(
                "image is {width}×{height} = {pixels} pixels, over the limit of {} pixels",
                self.max_pixels
            )));
        }
        if bytes > self.max_bytes {
            return Err(Error::Limit(format!(
                "decoding needs {bytes} bytes, over the limit of {} bytes",
                self.max_bytes
            )));
        }
        Ok(())
    }
}

impl Default for Limits {
    fn default() -> Self {
        Limits::DEFAULT
    }
}

/// What the numbers in the input mean.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub enum InputEncoding {
    /// Float sources are linear; integer sources are sRGB.
    #[default]
    Auto,
    Srgb,
    Linear,
}

impl InputEncoding {
    pub const NAMES: [&'static str; 3] = ["auto", "srgb", "linear"];

    fn resolve(self, sample: SampleType) -> Encoding {
        match (self, sample) {
            (InputEncoding::Srgb, _) => Encoding::Srgb,
            (InputEncoding::Linear, _) | (InputEncoding::Auto, SampleType::F32) => Encoding::Linear,
            (InputEncoding::Auto, _) => Encoding::Srgb,
        }
    }
}

impl FromStr for InputEncoding {
    type Err = String;

    fn from_str(s: &str) -> Result<Self, Self::Err> {
        match s {
            "auto" => Ok(InputEncoding::Auto),
            "srgb" => Ok(InputEncoding::Srgb),
            "linear" => Ok(InputEncoding::Linear),
            _ => Err(format!("unknown input encoding `{s}`; expected one of {}", Self::NAMES.join(", "))),
        }
    }
}

/// How to decode.
#[derive(Clone, Copy, Debug, Default)]
pub struct DecodeOptions {
    pub limits: Limits,
    pub encoding: InputEncoding,
    /// Leave pixels as stored and keep the EXIF orientation (default: make them upright).
    pub keep_orientation: bool,
    /// Deliver sRGB-encoded sources as linear light (for a pipeline whose
    /// first step works in linear light): the conversion happens while the
    /// samples are split into planes, not as a pass of its own. The raster's
    /// `metadata.source_encoding` still says how the file was encoded.
    pub linear_light: bool,
}

/// Decodes one image (the first page or frame). The format comes from the bytes.
pub fn decode(bytes: &[u8], opts: &DecodeOptions) -> Result<Raster, Error> {
    let format = Format::detect(bytes).ok_or_else(|| unknown_format(bytes))?;
    let decoded = catch_unwind(AssertUnwindSafe(|| match format {
        Format::Png => decode_png(bytes, opts),
        Format::Tiff => decode_tiff(bytes, opts),
        Format::Jpeg => decode_jpeg(bytes, opts),
        _ => decode_generic(bytes, format, opts),
    }))
    .map_err(|_| malformed(format))??;
    finish(decoded, opts)
}

fn malformed(format: Format) -> Error {
    Error::Decode { format: format.name(), reason: "the decoder failed on malformed data".into() }
}

/// The number of pages (images) in a file: the length of a TIFF's chain of
/// image file directories (TIFF 6.0 §2), 1 for every other format.
pub fn page_count(bytes: &[u8]) -> Result<usize, Error> {
    match Format::detect(bytes) {
        None => return Err(unknown_format(bytes)),
        Some(Format::Tiff) => {}
        Some(_) => return Ok(1),
    }
    catch_unwind(AssertUnwindSafe(|| {
        let mut d = tiff_decoder(Cursor::new(bytes), &Limits::DEFAULT)?;
        let mut n = 1;
        while d.more_images() {
            d.next_image().map_err(tiff_error)?;
            n += 1;
        }
        Ok(n)
    }))
    .map_err(|_| malformed(Format::Tiff))?
}

/// Decodes page `page` (0-based) of a multi-page TIFF with the usual limits;
/// page 0 of any other format is its one image.
pub fn decode_page(bytes: &[u8], page: usize, opts: &DecodeOptions) -> Result<Raster, Error> {
    if Format::detect(bytes) != Some(Format::Tiff) {
        return match page {
            0 => decode(bytes, opts),
            _ => Err(Error::Decode {
                format: Format::detect(bytes).map_or("image", Format::name),
                reason: format!("there is no page {} in a single-image file", page + 1),
            }),
        };
    }
    let decoded = catch_unwind(AssertUnwindSafe(|| {
        let mut d = tiff_decoder(Cursor::new(bytes), &opts.limits)?;
        if page > 0 {
            d.seek_to_image(page).map_err(|e| match e {
                tiff::TiffError::FormatError(tiff::TiffFormatError::ImageFileDirectoryNotFound) => {
                    Error::Decode { format: "TIFF", reason: format!("there is no page {}", page + 1) }
                }
                other => tiff_error(other),
            })?;
        }
        decode_tiff_image(&mut d, opts)
    }))
    .map_err(|_| malformed(Format::Tiff))??;
    finish(decoded, opts)
}

/// The pages of a TIFF, decoded one at a time in file order from any seekable
/// reader (a file need not be read into memory whole), each with the usual
/// limits. After a page fails to decode the iterator ends.
pub struct TiffPages<R: std::io::Read + std::io::Seek> {
    decoder: tiff::decoder::Decoder<R>,
    opts: DecodeOptions,
    /// Pages handed out so far.
    visited: usize,
    failed: bool,
}

impl<R: std::io::Read + std::io::Seek> TiffPages<R> {
    /// Reads the TIFF header and the first image file directory.
    pub fn new(reader: R, opts: &DecodeOptions) -> Result<Self, Error> {
        let decoder = catch_unwind(AssertUnwindSafe(|| tiff_decoder(reader, &opts.limits)))
            .map_err(|_| malformed(Format::Tiff))??;
        Ok(TiffPages { decoder, opts: *opts, visited: 0, failed: false })
    }

    fn advance(&mut self) -> Option<Result<Raster, Error>> {
        if self.visited > 0 {
            if !self.decoder.more_images() {
                return None;
            }
            if let Err(e) = self.decoder.next_image() {
                return Some(Err(tiff_error(e)));
            }
        }
        self.visited += 1;
        Some(decode_tiff_image(&mut self.decoder, &self.opts).and_then(|d| finish(d, &self.opts)))
    }
}

impl<R: std::io::Read + std::io::Seek> Iterator for TiffPages<R> {
    type Item = Result<Raster, Error>;

    fn next(&mut self) -> Option<Self::Item> {
        if self.failed {
            return None;
        }
        let page = catch_unwind(AssertUnwindSafe(|| self.advance()))
            .unwrap_or_else(|_| Some(Err(malformed(Format::Tiff))));
        self.failed = matches!(page, Some(Err(_)));
        page
    }
}

fn unknown_format(bytes: &[u8]) -> Error {
    Error::Unsupported(format!(
        "not an image format Pumice reads (first bytes {}); it reads PNG, JPEG, TIFF, WebP, BMP, GIF and OpenEXR",
        hex_prefix(bytes)
    ))
}

/// Sets the encoding, levels and orientation of a freshly decoded image.
fn finish(decoded: Decoded, opts: &DecodeOptions) -> Result<Raster, Error> {
    let Decoded { mut raster, sample, orientation } = decoded;
    let file_encoding = opts.encoding.resolve(sample);
    raster.metadata.source_sample = Some(sample);
    raster.metadata.source_encoding = Some(file_encoding);
    let converted = raster.encoding == Encoding::Linear && file_encoding == Encoding::Srgb;
    if converted {
        raster.levels = None;
    } else {
        raster.encoding = file_encoding;
        raster.levels = sample.max_code();
        if opts.linear_light && file_encoding == Encoding::Srgb {
            // Decoders that build their own planes (CMYK JPEG) and float data said to be sRGB.
            let levels = raster.levels;
            for p in raster.colour_planes_mut() {
                srgb::decode_in_place(p.as_mut_slice(), levels);
            }
            raster.encoding = Encoding::Linear;
            raster.levels = None;
        }
    }
    let stored =
        orientation.or_else(|| raster.metadata.exif.as_deref().and_then(exif::orientation)).unwrap_or(1);
    if opts.keep_orientation || stored == 1 {
        raster.metadata.orientation = stored;
        Ok(raster)
    } else {
        let mut upright = match orientation_move(stored) {
            Some(m) => m.apply_raster(raster)?,
            None => raster,
        };
        upright.metadata.orientation = 1;
        Ok(upright)
    }
}

/// The move that makes an image stored with EXIF orientation `o` upright.
/// EXIF 2.32 (CIPA DC-008) §4.6.4 A, Orientation: where the 0th row and 0th
/// column of the stored image lie in the visual image.
pub fn orientation_move(o: u16) -> Option<Move> {
    match o {
        2 => Some(Move::FlipHorizontal), // 0th row top, 0th column right
        3 => Some(Move::Rotate180),      // bottom, right
        4 => Some(Move::FlipVertical),   // bottom, left
        5 => Some(Move::Transpose),      // left, top
        6 => Some(Move::RotateCw),       // right, top
        7 => Some(Move::Transverse),     // right, bottom
        8 => Some(Move::RotateCcw),      // left, bottom
        _ => None,
    }
}

struct Decoded {
    raster: Raster,
    sample: SampleType,
    /// An orientation the container itself records (TIFF tag 274).
    orientation: Option<u16>,
}

fn hex_prefix(bytes: &[u8]) -> String {
    if bytes.is_empty() {
        return "none: the file is empty".into();
    }
    bytes.iter().take(8).map(|b| format!("{b:02x}")).collect::<Vec<_>>().join(" ")
}

/// Samples of one interleaved buffer.
enum Samples<'a> {
    U8(&'a [u8]),
    U16(Vec<u16>),
    F32(&'a [f32]),
}

/// Splits interleaved samples into planes, mapping integer codes to `code / max`
/// (a division, so `round(value · max)` gives the code back exactly) — or, when
/// the options ask for linear light and the codes are sRGB-encoded, straight to
/// linear light through the per-code table of `color::srgb` (alpha stays
/// `code / max`), saving the separate conversion pass. Each plane is written
/// once, in parallel, without being zeroed first. The raster's encoding says
/// which of the two it holds.
fn planar(
    width: usize,
    height: usize,
    layout: Layout,
    samples: Samples<'_>,
    opts: &DecodeOptions,
) -> Result<Raster, Error> {
    let n = layout.channels();
    let needed = width * height * n;
    let available = match &samples {
        Samples::U8(s) => s.len(),
        Samples::U16(s) => s.len(),
        Samples::F32(s) => s.len(),
    };
    if available < needed {
        return Err(Error::Decode { format: "image", reason: "the decoder returned too few samples".into() });
    }
    let sample = match &samples {
        Samples::U8(_) => SampleType::U8,
        Samples::U16(_) => SampleType::U16,
        Samples::F32(_) => SampleType::F32,
    };
    let to_linear =
        opts.linear_light && sample != SampleType::F32 && opts.encoding.resolve(sample) == Encoding::Srgb;
    let colour = layout.colour_channels();
    let divide_u8: Vec<f32> = (0..256).map(|v| v as f32 / 255.0).collect();
    // Row `y` of channel `c` from the interleaved samples, through `f`.
    fn split<T: Copy + Sync>(
        s: &[T],
        (width, height, n, c): (usize, usize, usize, usize),
        f: impl Fn(T) -> f32 + Sync,
    ) -> Result<Plane, Error> {
        Plane::from_rows(width, height, |y, row| {
            let src = &s[y * width * n..(y + 1) * width * n];
            for (o, px) in row.iter_mut().zip(src.chunks_exact(n)) {
                *o = f(px[c]);
            }
        })
    }
    let planes = (0..n)
        .map(|c| {
            let linear = to_linear && c < colour;
            let at = (width, height, n, c);
            match &samples {
                Samples::U8(s) => {
                    let table: &[f32] = if linear { srgb::decode_table_u8() } else { &divide_u8 };
                    split(s, at, |v| table[usize::from(v)])
                }
                Samples::U16(s) if linear => {
                    let table = srgb::decode_table_u16();
                    split(s, at, |v| table[usize::from(v)])
                }
                Samples::U16(s) => split(s, at, |v| f32::from(v) / 65535.0),
                Samples::F32(s) => split(s, at, |v| v),
            }
        })
        .collect::<Result<Vec<_>, Error>>()?;
    Raster::new(planes, layout, if to_linear { Encoding::Linear } else { Encoding::Srgb })
}

fn layout_for(channels: usize) -> Option<Layout> {
    Some(match channels {
        1 => Layout::Gray,
        2 => Layout::GrayAlpha,
        3 => Layout::Rgb,
        4 => Layout::Rgba,
        _ => return None,
    })
}

fn png_error(e: png::DecodingError) -> Error {
    match e {
        png::DecodingError::LimitsExceeded => Error::Limit("PNG data exceed the memory limit".into()),
        other => Error::Decode { format: "PNG", reason: other.to_string() },
    }
}

fn decode_png(bytes: &[u8], opts: &DecodeOptions) -> Result<Decoded, Error> {
    let limits = &opts.limits;
    let png_limits = png::Limits { bytes: usize::try_from(limits.max_bytes).unwrap_or(usize::MAX) };
    let mut decoder = png::Decoder::new_with_limits(Cursor::new(bytes), png_limits);
    // Palettes and bit depths below 8 expand to 8-bit; tRNS becomes alpha; 16-bit stays 16-bit.
    decoder.set_transformations(png::Transformations::EXPAND);
    decoder.set_ignore_text_chunk(true);
    let (w, h) = {
        let info = decoder.read_header_info().map_err(png_error)?;
        (info.width, info.height)
    };
    limits.check(Format::Png, u64::from(w), u64::from(h), u64::from(w) * u64::from(h) * 8)?;
    let mut reader = decoder.read_info().map_err(png_error)?;
    let size = reader
        .output_buffer_size()
        .ok_or_else(|| Error::Limit("PNG frame is too large to address".into()))?;
    let mut buf = vec![0u8; size];
    let frame = reader.next_frame(&mut buf).map_err(png_error)?;
    reader.finish().map_err(png_error)?;
    let layout = layout_for(frame.color_type.samples())
        .ok_or_else(|| Error::Decode { format: "PNG", reason: "unexpected colour type".into() })?;
    let (width, height) = (frame.width as usize, frame.height as usize);
    buf.truncate(frame.buffer_size());
    let (samples, sample) = match frame.bit_depth {
        png::BitDepth::Sixteen => (
            Samples::U16(buf.chunks_exact(2).map(|b| u16::from_be_bytes([b[0], b[1]])).collect()),
            SampleType::U16,
        ),
        _ => (Samples::U8(&buf), SampleType::U8),
    };
    let mut raster = planar(width, height, layout, samples, opts)?;
    let info = reader.info();
    raster.metadata = Metadata {
        icc_profile: info.icc_profile.as_ref().map(|c| c.to_vec()),
        exif: info.exif_metadata.as_ref().map(|c| c.to_vec()),
        resolution: info.pixel_dims.map(|d| match d.unit {
            // pHYs in pixels per metre (PNG 3rd ed. §11.3.5.3); kept exact as pixels per centimetre.
            png::Unit::Meter => Resolution {
                x: f64::from(d.xppu) / 100.0,
                y: f64::from(d.yppu) / 100.0,
                unit: ResolutionUnit::Centimetre,
            },
            png::Unit::Unspecified => {
                Resolution { x: f64::from(d.xppu), y: f64::from(d.yppu), unit: ResolutionUnit::None }
            }
        }),
        ..Metadata::default()
    };
    Ok(Decoded { raster, sample, orientation: None })
}

fn tiff_error(e: tiff::TiffError) -> Error {
    match e {
        tiff::TiffError::LimitsExceeded => Error::Limit("TIFF data exceed the memory limit".into()),
        tiff::TiffError::UnsupportedError(u) => Error::Unsupported(format!("TIFF: {u}")),
        other => Error::Decode { format: "TIFF", reason: other.to_string() },
    }
}

fn decode_tiff(bytes: &[u8], opts: &DecodeOptions) -> Result<Decoded, Error> {
    let mut d = tiff_decoder(Cursor::new(bytes), &opts.limits)?;
    decode_tiff_image(&mut d, opts)
}

/// A TIFF decoder on `reader` with Pumice's limits, at the first image.
fn tiff_decoder<R: std::io::Read + std::io::Seek>(
    reader: R,
    limits: &Limits,
) -> Result<tiff::decoder::Decoder<R>, Error> {
    let mut tl = tiff::decoder::Limits::default();
    tl.decoding_buffer_size = usize::try_from(limits.max_bytes).unwrap_or(usize::MAX);
    tl.ifd_value_size = 64 << 20; // ICC profiles and EXIF blocks can pass the 1 MiB default
    Ok(tiff::decoder::Decoder::new(reader).map_err(tiff_error)?.with_limits(tl))
}

/// Decodes the decoder's current image.
fn decode_tiff_image<R: std::io::Read + std::io::Seek>(
    d: &mut tiff::decoder::Decoder<R>,
    opts: &DecodeOptions,
) -> Result<Decoded, Error> {
    let limits = &opts.limits;
    use tiff::ColorType as C;
    use tiff::decoder::DecodingResult;
    use tiff::tags::Tag;

    let (w, h) = d.dimensions().map_err(tiff_error)?;
    let colour = d.colortype().map_err(tiff_error)?;
    // PhotometricInterpretation (TIFF 6.0 §3, §6): 0 WhiteIsZero, 1 BlackIsZero, 2 RGB.
    let photometric = d.find_tag_unsigned::<u16>(Tag::PhotometricInterpretation).ok().flatten();
    let channels = match colour {
        C::Gray(_) => 1,
        C::GrayA(_) => 2,
        C::RGB(_) => 3,
        C::RGBA(_) => 4,
        // Gray or RGB with one extra sample (alpha), as some writers store it.
        C::Multiband { num_samples: 2, .. } if matches!(photometric, Some(0 | 1)) => 2,
        C::Multiband { num_samples: 4, .. } if photometric == Some(2) => 4,
        other => {
            return Err(Error::Unsupported(format!(
                "TIFF colour type {other:?}; Pumice reads gray and RGB, with or without alpha"
            )));
        }
    };
    let bits = u64::from(colour.bit_depth()).max(8);
    limits.check(
        Format::Tiff,
        u64::from(w),
        u64::from(h),
        u64::from(w) * u64::from(h) * channels * bits / 8,
    )?;
    let layout = layout_for(channels as usize).unwrap_or(Layout::Gray);
    // WhiteIsZero: gray codes run from white.
    let white_is_zero = photometric == Some(0);
    let orientation =
        d.find_tag_unsigned::<u16>(Tag::Orientation).ok().flatten().filter(|o| (1..=8).contains(o));
    let icc_profile = d.get_tag_u8_vec(Tag::IccProfile).ok();
    let resolution = tiff_resolution(d);
    let (width, height) = (w as usize, h as usize);
    let result = d.read_image().map_err(tiff_error)?;
    let (mut raster, sample) = match result {
        DecodingResult::U8(s) => (planar(width, height, layout, Samples::U8(&s), opts)?, SampleType::U8),
        DecodingResult::U16(s) => (planar(width, height, layout, Samples::U16(s), opts)?, SampleType::U16),
        DecodingResult::F32(s) => (planar(width, height, layout, Samples::F32(&s), opts)?, SampleType::F32),
        _ => {
            return Err(Error::Unsupported(format!(
                "TIFF with {} bits per sample of this type; Pumice reads 8- and 16-bit unsigned and 32-bit float",
                colour.bit_depth()
            )));
        }
    };
    if white_is_zero && layout.colour_channels() == 1 {
        raster.planes_mut()[0].as_mut_slice().iter_mut().for_each(|v| *v = 1.0 - *v);
    }
    raster.metadata = Metadata { icc_profile, resolution, ..Metadata::default() };
    Ok(Decoded { raster, sample, orientation })
}

/// XResolution, YResolution and ResolutionUnit (TIFF 6.0 §8: 1 none, 2 inch, 3 cm).
fn tiff_resolution<R: std::io::Read + std::io::Seek>(
    d: &mut tiff::decoder::Decoder<R>,
) -> Option<Resolution> {
    use tiff::decoder::ifd::Value;
    use tiff::tags::Tag;
    let rational = |v: Value| match v {
        Value::Rational(n, den) if den != 0 => Some(f64::from(n) / f64::from(den)),
        other => other.into_f64().ok(),
    };
    let x = rational(d.find_tag(Tag::XResolution).ok()??)?;
    let y = rational(d.find_tag(Tag::YResolution).ok()??)?;
    let unit = match d.find_tag_unsigned::<u16>(Tag::ResolutionUnit).ok().flatten().unwrap_or(2) {
        1 => ResolutionUnit::None,
        3 => ResolutionUnit::Centimetre,
        _ => ResolutionUnit::Inch,
    };
    (x > 0.0 && y > 0.0 && x.is_finite() && y.is_finite()).then_some(Resolution { x, y, unit })
}

fn image_error(format: Format, e: image::ImageError) -> Error {
    match e {
        image::ImageError::Limits(l) => Error::Limit(format!("{}: {l}", format.name())),
        image::ImageError::Unsupported(u) => Error::Unsupported(format!("{}: {u}", format.name())),
        other => Error::Decode { format: format.name(), reason: other.to_string() },
    }
}

fn decode_generic(bytes: &[u8], format: Format, opts: &DecodeOptions) -> Result<Decoded, Error> {
    let limits = &opts.limits;
    let image_format = match format {
        Format::Webp => image::ImageFormat::WebP,
        Format::Bmp => image::ImageFormat::Bmp,
        Format::Gif => image::ImageFormat::Gif,
        Format::Exr => image::ImageFormat::OpenExr,
        Format::Png | Format::Tiff | Format::Jpeg => {
            return Err(Error::Internal("PNG, TIFF and JPEG have their own decoders".into()));
        }
    };
    let err = |e| image_error(format, e);
    let mut decoder =
        ImageReader::with_format(Cursor::new(bytes), image_format).into_decoder().map_err(err)?;
    let (w, h) = decoder.dimensions();
    limits.check(format, u64::from(w), u64::from(h), decoder.total_bytes())?;
    let mut il = image::Limits::default();
    il.max_alloc = Some(limits.max_bytes);
    decoder.set_limits(il).map_err(err)?;
    let icc_profile = decoder.icc_profile().ok().flatten();
    let exif = decoder.exif_metadata().ok().flatten();
    let img = DynamicImage::from_decoder(decoder).map_err(err)?;
    let (width, height) = (w as usize, h as usize);
    let (raster, sample) = match img {
        DynamicImage::ImageLuma8(b) => {
            (planar(width, height, Layout::Gray, Samples::U8(b.as_raw()), opts)?, SampleType::U8)
        }
        DynamicImage::ImageLumaA8(b) => {
            (planar(width, height, Layout::GrayAlpha, Samples::U8(b.as_raw()), opts)?, SampleType::U8)
        }
        DynamicImage::ImageRgb8(b) => {
            (planar(width, height, Layout::Rgb, Samples::U8(b.as_raw()), opts)?, SampleType::U8)
        }
        DynamicImage::ImageRgba8(b) => {
            (planar(width, height, Layout::Rgba, Samples::U8(b.as_raw()), opts)?, SampleType::U8)
        }
        DynamicImage::ImageRgb32F(b) => {
            (planar(width, height, Layout::Rgb, Samples::F32(b.as_raw()), opts)?, SampleType::F32)
        }
        DynamicImage::ImageRgba32F(b) => {
            (planar(width, height, Layout::Rgba, Samples::F32(b.as_raw()), opts)?, SampleType::F32)
        }
        other => {
            let b = other.into_rgba32f();
            (planar(width, height, Layout::Rgba, Samples::F32(b.as_raw()), opts)?, SampleType::F32)
        }
    };
    let mut raster = raster;
    raster.metadata = Metadata { icc_profile, exif, ..Metadata::default() };
    Ok(Decoded { raster, sample, orientation: None })
}

/// JPEG: four-component (CMYK, YCCK) files take their own path.
fn decode_jpeg(bytes: &[u8], opts: &DecodeOptions) -> Result<Decoded, Error> {
    let headers = jpeg_markers::read(bytes);
    if headers.components == Some(4) {
        decode_cmyk_jpeg(bytes, &headers, &opts.limits)
    } else {
        decode_colour_jpeg(bytes, &headers, opts)
    }
}

/// zune-jpeg, set up leniently as the image crate sets it up. JPEG frame sizes
/// are 16-bit (ITU-T T.81 §B.2.2), so no frame is refused for its size here;
/// `Limits` decides.
fn zune_decoder(bytes: &[u8]) -> zune_jpeg::JpegDecoder<zune_core::bytestream::ZCursor<&[u8]>> {
    let options = zune_core::options::DecoderOptions::default()
        .set_strict_mode(false)
        .set_max_width(usize::from(u16::MAX))
        .set_max_height(usize::from(u16::MAX));
    zune_jpeg::JpegDecoder::new_with_options(zune_core::bytestream::ZCursor::new(bytes), options)
}

fn no_frame() -> Error {
    Error::Decode { format: "JPEG", reason: "no frame header".into() }
}

/// Decodes a gray, YCbCr or RGB JPEG to 8-bit gray or RGB samples with
/// zune-jpeg, into a zeroed buffer taken from `raster::recycle` (in a batch,
/// the pages of the previous photo's buffer; zeroed, so whatever a damaged
/// file leaves undecoded is black, never a stale photo), then into planes.
fn decode_colour_jpeg(
    bytes: &[u8],
    headers: &jpeg_markers::JpegHeaders,
    opts: &DecodeOptions,
) -> Result<Decoded, Error> {
    use zune_core::colorspace::ColorSpace;

    let mut d = zune_decoder(bytes);
    d.decode_headers().map_err(zune_error)?;
    let (width, height) = d.dimensions().ok_or_else(no_frame)?;
    let (layout, wanted) = match d.input_colorspace() {
        Some(ColorSpace::Luma) => (Layout::Gray, ColorSpace::Luma),
        Some(ColorSpace::LumaA) => (Layout::GrayAlpha, ColorSpace::LumaA),
        _ => (Layout::Rgb, ColorSpace::RGB),
    };
    // At most 65535² pixels of 3 bytes: no overflow on a 64-bit usize.
    let len = width * height * layout.channels();
    opts.limits.check(Format::Jpeg, width as u64, height as u64, len as u64)?;
    d.set_options(d.options().jpeg_set_out_colorspace(wanted));
    let icc_profile = d.icc_profile();
    let exif = d.exif().cloned();
    let mut buf = recycle::filled(len.div_ceil(4), 0.0);
    let samples = &mut bytemuck::cast_slice_mut::<f32, u8>(&mut buf)[..len];
    d.decode_into(samples).map_err(zune_error)?;
    if d.output_colorspace() != Some(wanted) {
        return Err(Error::Decode {
            format: "JPEG",
            reason: format!("the decoder did not return {wanted:?} samples"),
        });
    }
    let mut raster = planar(width, height, layout, Samples::U8(samples), opts)?;
    recycle::give(buf);
    raster.metadata = Metadata { icc_profile, exif, resolution: headers.resolution, ..Metadata::default() };
    Ok(Decoded { raster, sample: SampleType::U8, orientation: None })
}

/// How a four-component JPEG stores its samples, from its Adobe APP14 marker
/// (Adobe Technical Note #5116, §18).
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
enum CmykStorage {
    /// No Adobe marker: plain CMYK, stored 255 = full ink.
    Plain,
    /// Adobe marker, transform 0: CMYK stored inverted, 255 = no ink.
    Inverted,
    /// Adobe marker, transform 2: YCCK. The first three components are YCbCr of
    /// R = 255 − C, G = 255 − M, B = 255 − Y on the inverted stored values (the
    /// complement zune-jpeg's own YCCK → RGB conversion undoes too); K is stored
    /// inverted as it is.
    Ycck,
}

impl CmykStorage {
    fn from_headers(h: &jpeg_markers::JpegHeaders) -> Result<CmykStorage, Error> {
        match h.adobe_transform {
            None => Ok(CmykStorage::Plain),
            Some(0) => Ok(CmykStorage::Inverted),
            Some(2) => Ok(CmykStorage::Ycck),
            Some(t) => Err(Error::Unsupported(format!(
                "JPEG with four components whose Adobe marker gives colour transform {t}; \
                 Pumice reads transform 0 (CMYK) and 2 (YCCK)"
            ))),
        }
    }

    /// The decoder's name for the stored colour model.
    fn zune(self) -> zune_core::colorspace::ColorSpace {
        use zune_core::colorspace::ColorSpace;
        match self {
            CmykStorage::Plain | CmykStorage::Inverted => ColorSpace::CMYK,
            CmykStorage::Ycck => ColorSpace::YCCK,
        }
    }

    /// Ink amounts in `[0, 1]` (0 = none, 1 = full) from four decoded samples.
    fn inks(self, s: [u8; 4]) -> [f32; 4] {
        let v = s.map(|x| f32::from(x) / 255.0);
        match self {
            CmykStorage::Plain => v,
            CmykStorage::Inverted => v.map(|x| 1.0 - x),
            CmykStorage::Ycck => {
                // ITU-T T.871 §7, YCbCr → RGB (8-bit, chroma offset 128).
                let (y, cb, cr) = (f32::from(s[0]), f32::from(s[1]) - 128.0, f32::from(s[2]) - 128.0);
                let r = y + 1.402 * cr;
                let g = y - 0.344136 * cb - 0.714136 * cr;
                let b = y + 1.772 * cb;
                // Stored (inverted) C = 255 − R, so the ink is 1 − (255 − R)/255 = R/255.
                let ink = |x: f32| (x / 255.0).clamp(0.0, 1.0);
                [ink(r), ink(g), ink(b), 1.0 - v[3]]
            }
        }
    }
}

fn zune_error(e: zune_jpeg::errors::DecodeErrors) -> Error {
    match e {
        zune_jpeg::errors::DecodeErrors::Unsupported(u) => Error::Unsupported(format!("JPEG: {u:?}")),
        other => Error::Decode { format: "JPEG", reason: other.to_string() },
    }
}

/// Decodes a four-component JPEG: zune-jpeg gives the stored samples untouched
/// (output colour space CMYK, or YCCK for YCCK files), the Adobe APP14 marker
/// says how they are stored ([`CmykStorage`]), and the inks `C, M, Y, K` in
/// `[0, 1]` become RGB with
///
/// ```text
/// R = (1 − C)(1 − K),   G = (1 − M)(1 − K),   B = (1 − Y)(1 − K)
/// ```
///
/// rounded to the nearest 8-bit code (the source is 8-bit, so the raster keeps
/// exact `code / 255` samples). This is the common uncalibrated conversion: it
/// models no press, paper or dot gain, and a CMYK ICC profile in the file is not
/// applied — a known limitation; colours from such files are only approximate.
/// The profile is not carried either: it describes CMYK, and would mislabel the
/// RGB result in any output.
fn decode_cmyk_jpeg(
    bytes: &[u8],
    headers: &jpeg_markers::JpegHeaders,
    limits: &Limits,
) -> Result<Decoded, Error> {
    let storage = CmykStorage::from_headers(headers)?;
    let mut d = zune_decoder(bytes);
    d.decode_headers().map_err(zune_error)?;
    let (width, height) = d.dimensions().ok_or_else(no_frame)?;
    let (w, h) = (width as u64, height as u64);
    limits.check(Format::Jpeg, w, h, w.saturating_mul(h).saturating_mul(4))?;
    let components = d.info().map(|i| i.components);
    let found = d.input_colorspace();
    if components != Some(4) || found != Some(storage.zune()) {
        return Err(Error::Decode {
            format: "JPEG",
            reason: format!(
                "the headers disagree: the frame walk found 4 components and {}, the decoder read \
                 {components:?} components as {found:?}",
                match headers.adobe_transform {
                    None => "no Adobe marker".to_string(),
                    Some(t) => format!("Adobe transform {t}"),
                }
            ),
        });
    }
    d.set_options(d.options().jpeg_set_out_colorspace(storage.zune()));
    let exif = d.exif().cloned();
    let raw = d.decode().map_err(zune_error)?;
    if d.output_colorspace() != Some(storage.zune()) || raw.len() < width * height * 4 {
        return Err(Error::Decode {
            format: "JPEG",
            reason: "the decoder did not return the stored four-component samples".into(),
        });
    }
    let mut r = Plane::zeros(width, height)?;
    let mut g = Plane::zeros(width, height)?;
    let mut b = Plane::zeros(width, height)?;
    cmyk_rows(&raw, width, storage, [r.as_mut_slice(), g.as_mut_slice(), b.as_mut_slice()]);
    let mut raster = Raster::new(vec![r, g, b], Layout::Rgb, Encoding::Srgb)?;
    raster.metadata = Metadata { exif, resolution: headers.resolution, ..Metadata::default() };
    Ok(Decoded { raster, sample: SampleType::U8, orientation: None })
}

/// Fills the R, G, B planes from interleaved four-component samples, rows in parallel.
fn cmyk_rows(raw: &[u8], width: usize, storage: CmykStorage, [r, g, b]: [&mut [f32]; 3]) {
    let code = |x: f32| (x * 255.0).round() / 255.0;
    r.par_chunks_mut(width)
        .zip(g.par_chunks_mut(width))
        .zip(b.par_chunks_mut(width))
        .zip(raw.par_chunks(width * 4))
        .for_each(|(((r, g), b), src)| {
            for (x, px) in src.chunks_exact(4).enumerate() {
                let [c, m, y, k] = storage.inks([px[0], px[1], px[2], px[3]]);
                r[x] = code((1.0 - c) * (1.0 - k));
                g[x] = code((1.0 - m) * (1.0 - k));
                b[x] = code((1.0 - y) * (1.0 - k));
            }
        });
}

#[cfg(test)]
mod tests {
    //! Edge cases: empty input, unknown signature, headers over the pixel limit.
    use super::*;

    #[test]
    fn empty_and_unknown_bytes_are_clear_errors() {
        let e = decode(&[], &DecodeOptions::default()).unwrap_err().to_string();
        assert!(e.contains("empty"), "{e}");
        let e = decode(b"hello world", &DecodeOptions::default()).unwrap_err().to_string();
        assert!(e.contains("68 65 6c"), "{e}");
    }

    #[test]
    fn cmyk_storage_follows_the_adobe_marker() {
        let h = |t| jpeg_markers::JpegHeaders { adobe_transform: t, ..Default::default() };
        assert_eq!(CmykStorage::from_headers(&h(None)).unwrap(), CmykStorage::Plain);
        assert_eq!(CmykStorage::from_headers(&h(Some(0))).unwrap(), CmykStorage::Inverted);
        assert_eq!(CmykStorage::from_headers(&h(Some(2))).unwrap(), CmykStorage::Ycck);
        for t in [1, 3, 255] {
            let e = CmykStorage::from_headers(&h(Some(t))).unwrap_err().to_string();
            assert!(e.contains(&format!("colour transform {t}")), "{e}");
        }
    }

    #[test]
    fn inks_by_storage() {
        assert_eq!(CmykStorage::Plain.inks([255, 0, 51, 255]), [1.0, 0.0, 0.2, 1.0]);
        assert_eq!(CmykStorage::Inverted.inks([255, 0, 51, 255]), [0.0, 1.0, 0.8, 0.0]);
        // YCCK with no chroma (Cb = Cr = 128): R = G = B = Y (T.871 §7), so each ink is Y/255.
        let [c, m, y, k] = CmykStorage::Ycck.inks([51, 128, 128, 255]);
        assert!([c, m, y].iter().all(|&v| (v - 0.2).abs() < 1e-6), "{c} {m} {y}");
        assert_eq!(k, 0.0);
        // Full-scale chroma pushes R past 255; the ink is clamped to [0, 1].
        let [c, _, _, _] = CmykStorage::Ycck.inks([255, 128, 255, 0]);
        assert_eq!(c, 1.0);
    }

    #[test]
    fn cmyk_rows_apply_the_naive_formula_and_round_to_codes() {
        // Plain storage: white, full K, 50 % cyan on 20 % K.
        let raw = [0, 0, 0, 0, 0, 0, 0, 255, 128, 0, 0, 51];
        let (mut r, mut g, mut b) = (vec![0.0; 3], vec![0.0; 3], vec![0.0; 3]);
        cmyk_rows(&raw, 3, CmykStorage::Plain, [&mut r, &mut g, &mut b]);
        assert_eq!(r[..2], [1.0, 0.0]);
        assert_eq!((g[0], b[0], g[1], b[1]), (1.0, 1.0, 0.0, 0.0));
        // R = (1 − 128/255)(1 − 0.2) = 0.39843… → code 102 (round(101.6)); G = B = 0.8 → 204.
        assert_eq!((r[2] * 255.0, g[2] * 255.0, b[2] * 255.0), (102.0, 204.0, 204.0));
    }

    #[test]
    fn limits_refuse_before_allocating() {
        let l = Limits { max_pixels: 100, max_bytes: 1000 };
        assert!(l.check(Format::Png, 10, 10, 400).is_ok());
        assert!(matches!(l.check(Format::Png, 11, 10, 400), Err(Error::Limit(_))));
        assert!(matches!(l.check(Format::Png, 10, 10, 4000), Err(Error::Limit(_))));
        assert!(matches!(l.check(Format::Png, 0, 10, 0), Err(Error::Decode { .. })));
    }
}
