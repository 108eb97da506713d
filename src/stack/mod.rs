//! Stacking: many frames of one size combined into one, pixel by pixel and
//! channel by channel (master dark and flat frames, averaged exposures).
//!
//! The stack works on the stored values as decoded (`code / max` for 8- and
//! 16-bit sources, the numbers themselves for float sources): there is no
//! sRGB conversion at all, because micrograph and camera frames are linear and
//! even for sRGB-labelled frames the combination is meant on the stored
//! values. The result keeps the first frame's encoding label, layout and
//! metadata, so writing it back does not convert either.
//!
//! Memory is bounded:
//! - `mean`, `min` and `max` stream: one frame is decoded at a time and folded
//!   into an accumulator (an `f64` sum for the mean, `f32` for min and max).
//! - `median` and `sigma-clip` need every frame's value at each pixel. Each
//!   decoded frame is spilled to an unnamed temporary file (deleted when
//!   closed, also if the process dies) in frame order, as 16-bit codes when
//!   every frame comes from an 8- or 16-bit source (exact: `round(v · max)`
//!   gives the code back) and as `f32` otherwise. The result is then made band
//!   by band: one run of rows of every frame is read back (one contiguous read
//!   per frame and channel) and combined. The band height is chosen so a band
//!   of all frames fits [`StackOptions::band_budget`] bytes. Peak memory is
//!   about one decoded frame, the result, and one band of all frames.

use std::fs::File;
use std::io::{self, BufReader, Read, Seek, SeekFrom, Write};
use std::path::{Path, PathBuf};

use rayon::prelude::*;

use crate::error::Error;
use crate::io::file::{self, Location};
use crate::io::{DecodeOptions, Format, TiffPages, decode};
use crate::ops::filter::network::{Comparator, compare_rows, selection_network};
use crate::raster::{Layout, Plane, Raster, SampleType};

/// How frames are combined at each pixel.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum Mode {
    /// Arithmetic mean, summed in `f64`.
    Mean,
    /// Median; for an even count the mean of the two middle values (as
    /// `numpy.median` defines it).
    Median,
    Min,
    Max,
    /// Kappa-sigma clipping about the median, then the mean of the kept values.
    ///
    /// Each round takes the median `m` and the population standard deviation
    /// `s` (divisor `n`, ddof = 0) of the values still kept and keeps those with
    /// `m − κ·s ≤ v ≤ m + κ·s`; rounds repeat until one rejects nothing or
    /// `iterations` rounds have run. This is the definition of
    /// `astropy.stats.sigma_clip` (astropy 6.x documentation: `cenfunc='median'`,
    /// `stdfunc='std'`, `sigma=κ`, `maxiters=iterations`), followed by the mean
    /// of the unmasked values. One addition: a round that would reject every
    /// value is not applied (the set before it is kept), so every pixel has a
    /// result.
    SigmaClip {
        kappa: f64,
        iterations: u32,
    },
}

impl Mode {
    pub const NAMES: [&'static str; 5] = ["mean", "median", "min", "max", "sigma-clip"];

    /// The mode called `name`, with the clipping parameters for `sigma-clip`.
    pub fn from_name(name: &str, kappa: f64, iterations: u32) -> Result<Mode, Error> {
        Ok(match name {
            "mean" => Mode::Mean,
            "median" => Mode::Median,
            "min" => Mode::Min,
            "max" => Mode::Max,
            "sigma-clip" => {
                if !(kappa.is_finite() && kappa > 0.0) {
                    return Err(usage(format!("--kappa must be a positive number, not {kappa}")));
                }
                if iterations == 0 {
                    return Err(usage("--iterations must be at least 1".into()));
                }
                Mode::SigmaClip { kappa, iterations }
            }
            other => {
                return Err(usage(format!(
                    "unknown mode `{other}`; expected one of {}",
                    Mode::NAMES.join(", ")
                )));
            }
        })
    }

    /// The sample type written by default: float for the averaging modes, the
    /// source's for modes that pick one of the values.
    pub fn default_sample(self, source: SampleType) -> SampleType {
        match self {
            Mode::Mean | Mode::SigmaClip { .. } => SampleType::F32,
            Mode::Median | Mode::Min | Mode::Max => source,
        }
    }
}

fn usage(message: String) -> Error {
    Error::Step { step: "stack".into(), message }
}

/// How to stack.
#[derive(Clone, Debug)]
pub struct StackOptions {
    pub mode: Mode,
    /// Limits and input encoding for each frame (the encoding only labels the
    /// result; no conversion is made).
    pub decode: DecodeOptions,
    /// The folder of the temporary band file for `median` and `sigma-clip`
    /// (`None`: the system's temporary folder).
    pub spill_dir: Option<PathBuf>,
    /// Bytes of one band of all frames held in memory at once.
    pub band_budget: usize,
}

impl StackOptions {
    /// 64 MiB per band of all frames: for 200 frames of 2048 16-bit pixels a
    /// row that is 80 rows per band.
    pub const DEFAULT_BAND_BUDGET: usize = 64 << 20;

    pub fn new(mode: Mode) -> StackOptions {
        StackOptions {
            mode,
            decode: DecodeOptions::default(),
            spill_dir: None,
            band_budget: Self::DEFAULT_BAND_BUDGET,
        }
    }
}

/// What went wrong, and with which frame.
#[derive(Debug, thiserror::Error)]
pub enum StackError {
    #[error("{frame}: {source}")]
    Frame { frame: String, source: Error },
    #[error(
        "{frame}: {what} is {found}, but the first frame ({first}) has {expected}; all frames must match"
    )]
    Mismatch { frame: String, first: String, what: &'static str, found: String, expected: String },
    #[error("no frames to stack")]
    Empty,
    #[error("temporary band file: {0}")]
    Spill(io::Error),
}

/// The combined frame.
#[derive(Debug)]
pub struct Stacked {
    /// The result, with the first frame's layout, encoding label and metadata.
    pub raster: Raster,
    /// How many frames went in.
    pub frames: usize,
}

/// What every frame must share with the first.
#[derive(Clone, Debug, PartialEq)]
struct Shape {
    width: usize,
    height: usize,
    layout: Layout,
    sample: SampleType,
}

impl Shape {
    fn of(r: &Raster) -> Shape {
        Shape {
            width: r.width(),
            height: r.height(),
            layout: r.layout(),
            sample: r.metadata.source_sample.unwrap_or(SampleType::F32),
        }
    }

    /// The first difference from `first`, as (what, found, expected).
    fn differs(&self, first: &Shape) -> Option<(&'static str, String, String)> {
        if (self.width, self.height) != (first.width, first.height) {
            let size = |s: &Shape| format!("{}×{}", s.width, s.height);
            return Some(("the size", size(self), size(first)));
        }
        if self.layout != first.layout {
            let channels = |s: &Shape| match s.layout.channels() {
                1 => format!("1 channel ({})", s.layout.name()),
                n => format!("{n} channels ({})", s.layout.name()),
            };
            return Some(("the channel count", channels(self), channels(first)));
        }
        if self.sample != first.sample {
            return Some(("the sample depth", self.sample.name().into(), first.sample.name().into()));
        }
        None
    }
}

/// Decodes every frame of `inputs` in order — each file one frame, or each
/// page of a (multi-page) TIFF one frame — and hands it to `visit` with its
/// name for messages. TIFF pages are read from the file one at a time.
pub fn visit_frames(
    inputs: &[PathBuf],
    opts: &DecodeOptions,
    mut visit: impl FnMut(&str, Raster) -> Result<(), StackError>,
) -> Result<(), StackError> {
    for path in inputs {
        let name = path.display().to_string();
        let fail = |source: Error| StackError::Frame { frame: name.clone(), source };
        if is_tiff(path).map_err(|e| fail(e.into()))? {
            let file = File::open(path).map_err(|e| fail(e.into()))?;
            for (k, page) in TiffPages::new(BufReader::new(file), opts).map_err(fail)?.enumerate() {
                let frame = if k == 0 { name.clone() } else { format!("{name}, page {}", k + 1) };
                let raster = page.map_err(|source| StackError::Frame { frame: frame.clone(), source })?;
                visit(&frame, raster)?;
            }
        } else {
            let bytes = file::read_input(&Location::Path(path.clone()), opts.limits.max_bytes)
                .map_err(|e| fail(e.into()))?;
            visit(&name, decode(&bytes, opts).map_err(fail)?)?;
        }
    }
    Ok(())
}

fn is_tiff(path: &Path) -> io::Result<bool> {
    let mut head = Vec::with_capacity(8);
    File::open(path)?.take(8).read_to_end(&mut head)?;
    Ok(Format::detect(&head) == Some(Format::Tiff))
}

/// Combines the frames of `inputs` (see [`visit_frames`]) with `opts.mode`.
/// Frames that differ from the first in size, channel count or sample depth
/// are refused, naming the frame.
pub fn stack_files(inputs: &[PathBuf], opts: &StackOptions) -> Result<Stacked, StackError> {
    let mut stacker = Stacker::new(opts);
    visit_frames(inputs, &opts.decode, |name, raster| stacker.add(name, &raster))?;
    stacker.finish()
}

/// Frames folded in one at a time (what [`stack_files`] does with decoded
/// files), for frames that come from elsewhere.
pub struct Stacker<'a> {
    opts: &'a StackOptions,
    /// The first frame's name, shape, and labels (encoding, metadata, colour
    /// model) on a 1×1 placeholder.
    first: Option<(String, Shape, Raster)>,
    combiner: Option<Combiner>,
    frames: usize,
}

impl<'a> Stacker<'a> {
    pub fn new(opts: &'a StackOptions) -> Stacker<'a> {
        Stacker { opts, first: None, combiner: None, frames: 0 }
    }

    /// Adds one frame; `name` names it in messages. A frame that differs from
    /// the first in size, channel count or sample depth is refused.
    pub fn add(&mut self, name: &str, raster: &Raster) -> Result<(), StackError> {
        let shape = Shape::of(raster);
        let frame_error = |source| StackError::Frame { frame: name.to_string(), source };
        match &self.first {
            None => {
                self.combiner = Some(Combiner::new(self.opts, &shape)?);
                let placeholder =
                    (0..shape.layout.channels()).map(|_| Plane::filled(1, 1, 0.0)).collect::<Result<_, _>>();
                let mut labels =
                    Raster::new(placeholder.map_err(frame_error)?, shape.layout, raster.encoding)
                        .map_err(frame_error)?;
                labels.metadata = raster.metadata.clone();
                labels.model = raster.model;
                self.first = Some((name.to_string(), shape, labels));
            }
            Some((first_name, first_shape, _)) => {
                if let Some((what, found, expected)) = shape.differs(first_shape) {
                    return Err(StackError::Mismatch {
                        frame: name.to_string(),
                        first: first_name.clone(),
                        what,
                        found,
                        expected,
                    });
                }
            }
        }
        self.frames += 1;
        self.combiner.as_mut().map_or(Ok(()), |c| c.add(raster))
    }

    /// The combined frame.
    pub fn finish(self) -> Result<Stacked, StackError> {
        let (Some((_, shape, labels)), Some(combiner)) = (self.first, self.combiner) else {
            return Err(StackError::Empty);
        };
        let planes = combiner.finish(self.opts, &shape, self.frames)?;
        let mut raster = labels
            .with_planes(planes, shape.layout)
            .map_err(|source| StackError::Frame { frame: "the result".into(), source })?;
        // Averages are not integer codes.
        raster.levels = None;
        Ok(Stacked { raster, frames: self.frames })
    }
}

/// Folds frames in, one at a time.
enum Combiner {
    Mean(Vec<Vec<f64>>),
    Extreme { max: bool, planes: Option<Vec<Vec<f32>>> },
    Spill(Spill),
}

impl Combiner {
    fn new(opts: &StackOptions, shape: &Shape) -> Result<Combiner, StackError> {
        let n = shape.width * shape.height;
        Ok(match opts.mode {
            Mode::Mean => Combiner::Mean(vec![vec![0.0; n]; shape.layout.channels()]),
            Mode::Min | Mode::Max => Combiner::Extreme { max: opts.mode == Mode::Max, planes: None },
            Mode::Median | Mode::SigmaClip { .. } => Combiner::Spill(Spill::new(opts, shape)?),
        })
    }

    fn add(&mut self, raster: &Raster) -> Result<(), StackError> {
        match self {
            Combiner::Mean(sums) => {
                for (sum, plane) in sums.iter_mut().zip(raster.planes()) {
                    sum.par_iter_mut()
                        .zip(plane.as_slice().par_iter())
                        .for_each(|(s, &v)| *s += f64::from(v));
                }
            }
            Combiner::Extreme { max, planes: acc } => match acc {
                None => *acc = Some(raster.planes().iter().map(|p| p.as_slice().to_vec()).collect()),
                Some(acc) => {
                    let max = *max;
                    for (a, plane) in acc.iter_mut().zip(raster.planes()) {
                        a.par_iter_mut().zip(plane.as_slice().par_iter()).for_each(|(a, &v)| {
                            *a = if max { a.max(v) } else { a.min(v) };
                        });
                    }
                }
            },
            Combiner::Spill(spill) => spill.write(raster).map_err(StackError::Spill)?,
        }
        Ok(())
    }

    fn finish(self, opts: &StackOptions, shape: &Shape, frames: usize) -> Result<Vec<Plane>, StackError> {
        let (w, h) = (shape.width, shape.height);
        let plane = |data: Vec<f32>| {
            Plane::from_vec(w, h, data)
                .map_err(|source| StackError::Frame { frame: "the result".into(), source })
        };
        match self {
            Combiner::Mean(sums) => {
                let n = frames as f64;
                sums.into_iter().map(|s| plane(s.into_par_iter().map(|v| (v / n) as f32).collect())).collect()
            }
            Combiner::Extreme { planes, .. } => planes.unwrap_or_default().into_iter().map(plane).collect(),
            Combiner::Spill(spill) => {
                let data = spill.combine(opts, shape, frames).map_err(StackError::Spill)?;
                data.into_iter().map(plane).collect()
            }
        }
    }
}

/// How frames are stored in the temporary file.
#[derive(Clone, Copy, Debug, PartialEq)]
enum Code {
    /// Integer codes `round(v · max)`, little-endian `u16`.
    U16 { max: f64 },
    /// The values, little-endian `f32`.
    F32,
}

impl Code {
    fn bytes(self) -> usize {
        match self {
            Code::U16 { .. } => 2,
            Code::F32 => 4,
        }
    }
}

/// The frames, spilled to an unnamed temporary file in frame order (planes in
/// order, rows in order).
struct Spill {
    file: File,
    code: Code,
}

impl Spill {
    fn new(opts: &StackOptions, shape: &Shape) -> Result<Spill, StackError> {
        let file = match &opts.spill_dir {
            Some(dir) => tempfile::tempfile_in(dir),
            None => tempfile::tempfile(),
        }
        .map_err(StackError::Spill)?;
        let code = match shape.sample.max_code() {
            Some(max) => Code::U16 { max: f64::from(max) },
            None => Code::F32,
        };
        Ok(Spill { file, code })
    }

    /// Appends one frame's planes, converted in parallel (one plane's bytes
    /// are held at a time).
    fn write(&mut self, raster: &Raster) -> io::Result<()> {
        const CHUNK: usize = 1 << 14;
        let mut buf = Vec::new();
        for plane in raster.planes() {
            let samples = plane.as_slice();
            buf.resize(samples.len() * self.code.bytes(), 0);
            let bytes = self.code.bytes();
            buf.par_chunks_mut(CHUNK * bytes).zip(samples.par_chunks(CHUNK)).for_each(
                |(out, row)| match self.code {
                    Code::U16 { max } => {
                        let m = max as f32;
                        // v · max is within rounding of a code in [0, max]: adding ½ and
                        // truncating rounds it to that code.
                        for (o, &v) in out.chunks_exact_mut(2).zip(row) {
                            o.copy_from_slice(&((v * m + 0.5) as u16).to_le_bytes());
                        }
                    }
                    Code::F32 => {
                        for (o, v) in out.chunks_exact_mut(4).zip(row) {
                            o.copy_from_slice(&v.to_le_bytes());
                        }
                    }
                },
            );
            self.file.write_all(&buf)?;
        }
        Ok(())
    }

    /// Reads the file back band by band and combines each pixel's values.
    fn combine(self, opts: &StackOptions, shape: &Shape, frames: usize) -> io::Result<Vec<Vec<f32>>> {
        let code = self.code;
        let mut file = self.file;
        let (w, h, channels) = (shape.width, shape.height, shape.layout.channels());
        let row_bytes = w * code.bytes();
        let plane_bytes = (row_bytes * h) as u64;
        let band_rows = (opts.band_budget / (frames * row_bytes).max(1)).clamp(1, h);
        let mut out: Vec<Vec<f32>> = (0..channels).map(|_| vec![0.0; w * h]).collect();
        // One band of one channel of every frame: [frame][row][column].
        let mut band = vec![0u8; frames * band_rows * row_bytes];
        let network = MedianNetwork::for_mode(opts.mode, code, frames);
        for (c, plane) in out.iter_mut().enumerate() {
            for (b, rows) in plane.chunks_mut(band_rows * w).enumerate() {
                let r0 = b * band_rows;
                let n_rows = rows.len() / w;
                let span = n_rows * row_bytes;
                for f in 0..frames {
                    let at = (f * channels + c) as u64 * plane_bytes + (r0 * row_bytes) as u64;
                    file.seek(SeekFrom::Start(at))?;
                    file.read_exact(&mut band[f * span..(f + 1) * span])?;
                }
                let band = &band[..frames * span];
                rows.par_chunks_mut(w).enumerate().for_each_init(Work::default, |work, (y, out_row)| {
                    let rows = FrameRows { band, span, offset: y * row_bytes, code };
                    match &network {
                        Some(net) => net.median_row(&rows, &mut work.codes, out_row),
                        None => combine_row(&rows, opts.mode, work, out_row),
                    }
                });
            }
        }
        Ok(out)
    }
}

/// Working space of one worker.
#[derive(Default)]
struct Work {
    /// One row of every frame, pixel-major: `[x · frames + f]`.
    values: Vec<f64>,
    codes: Vec<u16>,
    scratch: Vec<f64>,
}

/// One row of every frame inside a band read back from the spill: frames
/// are `span` bytes apart in `band`, and the row starts `offset` bytes into each.
struct FrameRows<'b> {
    band: &'b [u8],
    span: usize,
    offset: usize,
    code: Code,
}

impl FrameRows<'_> {
    fn frames(&self) -> usize {
        self.band.len() / self.span
    }

    /// The stored bytes of frame `f`'s row from pixel `x0`, `len` pixels.
    fn bytes(&self, f: usize, x0: usize, len: usize) -> &[u8] {
        let b = self.code.bytes();
        let start = f * self.span + self.offset + x0 * b;
        &self.band[start..start + len * b]
    }
}

/// The median of 16-bit codes across frames by a comparator network
/// ([`selection_network`]) run on blocks of pixels: each comparator is a
/// min/max over a block of codes of two frames, so the selection vectorises
/// instead of running once per pixel. Used up to [`MedianNetwork::MAX_FRAMES`]
/// frames (the network grows as n·log²n); gives the same numbers as
/// [`median_code`].
struct MedianNetwork {
    comparators: Vec<Comparator>,
    /// The slots holding sorted positions `(n − 1) / 2` and `n / 2` at the end.
    lower: usize,
    upper: usize,
    max: f64,
}

impl MedianNetwork {
    const MAX_FRAMES: usize = 256;
    /// Pixels per block: a block of every frame stays in the core's cache.
    const BLOCK: usize = 128;

    fn for_mode(mode: Mode, code: Code, frames: usize) -> Option<MedianNetwork> {
        let (Mode::Median, Code::U16 { max }) = (mode, code) else { return None };
        if frames == 0 || frames > Self::MAX_FRAMES {
            return None;
        }
        let (comparators, slots) = selection_network(frames, &[(frames - 1) / 2, frames / 2]);
        Some(MedianNetwork { comparators, lower: slots[0], upper: slots[1], max })
    }

    fn median_row(&self, rows: &FrameRows<'_>, block: &mut Vec<u16>, out: &mut [f32]) {
        const B: usize = MedianNetwork::BLOCK;
        let frames = rows.frames();
        block.resize(frames * B, 0);
        for (x0, out) in (0..out.len()).step_by(B).zip(out.chunks_mut(B)) {
            let len = out.len();
            for f in 0..frames {
                let slot = &mut block[f * B..f * B + len];
                for (c, b) in slot.iter_mut().zip(rows.bytes(f, x0, len).chunks_exact(2)) {
                    *c = u16::from_le_bytes([b[0], b[1]]);
                }
            }
            for c in &self.comparators {
                let (lo, hi) = block.split_at_mut(c.b * B);
                let (a, b) = (&mut lo[c.a * B..c.a * B + len], &mut hi[..len]);
                compare_rows(c, a, b);
            }
            let (lower, upper) = (&block[self.lower * B..][..len], &block[self.upper * B..][..len]);
            for ((o, &l), &u) in out.iter_mut().zip(lower).zip(upper) {
                *o = ((f64::from(l) + f64::from(u)) / 2.0 / self.max) as f32;
            }
        }
    }
}

/// Combines one row by gathering each pixel's values from every frame and
/// reducing them. The median of 16-bit codes selects among the codes
/// themselves (two bytes a value keep a row of all frames in cache); the rest
/// works in `f64`.
fn combine_row(rows: &FrameRows<'_>, mode: Mode, work: &mut Work, out: &mut [f32]) {
    let frames = rows.frames();
    let w = out.len();
    let row = |f: usize| rows.bytes(f, 0, w);
    match (rows.code, mode) {
        (Code::U16 { max }, Mode::Median) => {
            let codes = &mut work.codes;
            codes.clear();
            codes.resize(w * frames, 0);
            for f in 0..frames {
                for (x, b) in row(f).chunks_exact(2).enumerate() {
                    codes[x * frames + f] = u16::from_le_bytes([b[0], b[1]]);
                }
            }
            for (o, v) in out.iter_mut().zip(codes.chunks_exact_mut(frames)) {
                *o = (median_code(v) / max) as f32;
            }
        }
        _ => {
            let values = &mut work.values;
            values.clear();
            values.resize(w * frames, 0.0);
            for f in 0..frames {
                match rows.code {
                    Code::U16 { .. } => {
                        for (x, b) in row(f).chunks_exact(2).enumerate() {
                            values[x * frames + f] = f64::from(u16::from_le_bytes([b[0], b[1]]));
                        }
                    }
                    Code::F32 => {
                        for (x, b) in row(f).chunks_exact(4).enumerate() {
                            values[x * frames + f] = f64::from(f32::from_le_bytes([b[0], b[1], b[2], b[3]]));
                        }
                    }
                }
            }
            let scale = match rows.code {
                Code::U16 { max } => max,
                Code::F32 => 1.0,
            };
            for (o, v) in out.iter_mut().zip(values.chunks_exact_mut(frames)) {
                let r = match mode {
                    Mode::SigmaClip { kappa, iterations } => {
                        sigma_clipped_mean(v, kappa, iterations, &mut work.scratch)
                    }
                    _ => median(v),
                };
                *o = (r / scale) as f32;
            }
        }
    }
}

/// The median of integer codes (reordered), as [`median`] defines it.
fn median_code(v: &mut [u16]) -> f64 {
    let n = v.len();
    let (lower, mid, _) = v.select_nth_unstable(n / 2);
    let mid = f64::from(*mid);
    if n % 2 == 1 { mid } else { (f64::from(lower.iter().copied().max().unwrap_or(0)) + mid) / 2.0 }
}

/// The median of `v` (reordered); for an even count the mean of the two
/// middle values. NaN orders above every number (IEEE 754 totalOrder).
pub fn median(v: &mut [f64]) -> f64 {
    let n = v.len();
    let (lower, mid, _) = v.select_nth_unstable_by(n / 2, f64::total_cmp);
    let mid = *mid;
    if n % 2 == 1 {
        mid
    } else {
        let below = lower.iter().copied().max_by(f64::total_cmp).unwrap_or(mid);
        (below + mid) / 2.0
    }
}

/// Kappa-sigma clipping about the median (see [`Mode::SigmaClip`]), then the
/// mean of the kept values. `v` is reordered; `scratch` is working space.
pub fn sigma_clipped_mean(v: &mut [f64], kappa: f64, iterations: u32, scratch: &mut Vec<f64>) -> f64 {
    let mut kept = v.len();
    for _ in 0..iterations {
        let values = &mut v[..kept];
        let n = kept as f64;
        let mean = values.iter().sum::<f64>() / n;
        let std = (values.iter().map(|x| (x - mean) * (x - mean)).sum::<f64>() / n).sqrt();
        scratch.clear();
        scratch.extend_from_slice(values);
        let centre = median(scratch);
        let (lo, hi) = (centre - kappa * std, centre + kappa * std);
        // Move the kept values to the front, in order.
        let mut k = 0;
        for i in 0..kept {
            let x = v[i];
            if lo <= x && x <= hi {
                v[k] = x;
                k += 1;
            }
        }
        // k == 0: every value was rejected, and none was moved, so the set stays as it was.
        if k == kept || k == 0 {
            break;
        }
        kept = k;
    }
    v[..kept].iter().sum::<f64>() / kept as f64
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_median_network_equals_selection() {
        let mut state = 0x9E37_79B9_7F4A_7C15u64;
        let w = 300; // two whole blocks and a part
        for frames in [1usize, 2, 3, 4, 7, 8, 13, 50, 255, 256] {
            // Codes in a narrow range, so ties are common, with extremes mixed in.
            let band: Vec<u8> = (0..frames * w)
                .flat_map(|_| {
                    state ^= state << 13;
                    state ^= state >> 7;
                    state ^= state << 17;
                    let c = match state % 16 {
                        0 => 0,
                        1 => 65535,
                        _ => 30000 + (state >> 40) as u16 % 40,
                    };
                    c.to_le_bytes()
                })
                .collect();
            let code = Code::U16 { max: 65535.0 };
            let rows = FrameRows { band: &band, span: w * 2, offset: 0, code };
            let net = MedianNetwork::for_mode(Mode::Median, code, frames).unwrap();
            let (mut fast, mut slow) = (vec![0.0f32; w], vec![0.0f32; w]);
            net.median_row(&rows, &mut Vec::new(), &mut fast);
            combine_row(&rows, Mode::Median, &mut Work::default(), &mut slow);
            assert_eq!(fast, slow, "{frames} frames");
        }
        assert!(MedianNetwork::for_mode(Mode::Median, Code::U16 { max: 65535.0 }, 257).is_none());
        assert!(MedianNetwork::for_mode(Mode::Median, Code::F32, 50).is_none());
        assert!(MedianNetwork::for_mode(Mode::Mean, Code::U16 { max: 255.0 }, 50).is_none());
    }

    #[test]
    fn median_odd_and_even() {
        assert_eq!(median(&mut [3.0, 1.0, 2.0]), 2.0);
        assert_eq!(median(&mut [4.0, 1.0, 3.0, 2.0]), 2.5);
        assert_eq!(median(&mut [7.0]), 7.0);
    }

    #[test]
    fn sigma_clip_rejects_an_outlier_and_stops() {
        // Nine values near 10 and one at 1000: the median is 10.5, the std
        // about 297, so 1000 is kept at κ = 3.5 but rejected at κ = 3 (bound
        // 10.5 + 3·297.0 = 901.5), after which the rest stays.
        let data = [9.0, 10.0, 11.0, 10.0, 12.0, 9.0, 11.0, 10.0, 11.0, 1000.0];
        let mut s = Vec::new();
        let kept_all = sigma_clipped_mean(&mut data.clone(), 3.5, 5, &mut s);
        assert!((kept_all - data.iter().sum::<f64>() / 10.0).abs() < 1e-12);
        let clipped = sigma_clipped_mean(&mut data.clone(), 3.0, 5, &mut s);
        assert!((clipped - 93.0 / 9.0).abs() < 1e-12, "{clipped}");
    }

    #[test]
    fn sigma_clip_never_rejects_everything() {
        // Median 5 between 0 and 10, std 5: κ = 0.5 would keep nothing.
        let mut s = Vec::new();
        assert_eq!(sigma_clipped_mean(&mut [0.0, 10.0], 0.5, 5, &mut s), 5.0);
    }

    #[test]
    fn modes_parse_and_check_parameters() {
        assert_eq!(Mode::from_name("max", 3.0, 5).unwrap(), Mode::Max);
        assert!(Mode::from_name("sigma-clip", -1.0, 5).unwrap_err().to_string().contains("--kappa"));
        assert!(Mode::from_name("sigma-clip", 3.0, 0).unwrap_err().to_string().contains("--iterations"));
        assert!(Mode::from_name("average", 3.0, 5).unwrap_err().to_string().contains("sigma-clip"));
    }
}
