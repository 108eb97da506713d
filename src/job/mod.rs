//! One job: one input through one pipeline to one output. Checks what can be
//! checked before any work (output format, existing output, input equal to
//! output), then reads, decodes, runs the steps, encodes and writes atomically.

pub mod options;
pub mod recipe;

use std::fmt;
use std::path::{Path, PathBuf};
use std::time::{Duration, Instant};

pub use options::RunOptions;

use crate::error::Error;
use crate::io::file::{self, Location};
use crate::io::{self as codec, DecodeOptions, EncodeOptions, Format};
use crate::pipeline::Pipeline;
use crate::raster::{Layout, Note, SampleType};

/// Which part of a job failed.
#[derive(Clone, Debug, PartialEq, Eq)]
pub enum Stage {
    /// Checking the plan before any work (a usage error).
    Plan,
    Read,
    Decode,
    /// Step `index` (1-based) of the pipeline, with its operator name.
    Step {
        index: usize,
        name: &'static str,
    },
    Encode,
    Write,
}

/// A failed job: where and why.
#[derive(Debug)]
pub struct JobError {
    pub stage: Stage,
    pub error: Error,
}

impl JobError {
    /// True when the failure is the caller's (detected before any work), not the input's.
    pub fn is_usage(&self) -> bool {
        self.stage == Stage::Plan
    }
}

impl fmt::Display for JobError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match &self.stage {
            Stage::Plan => write!(f, "{}", self.error),
            Stage::Read => write!(f, "reading: {}", self.error),
            Stage::Decode => write!(f, "decoding: {}", self.error),
            Stage::Step { index, name } => match &self.error {
                // Step errors already name the operator.
                Error::Step { message, .. } => write!(f, "step {index} ({name}): {message}"),
                other => write!(f, "step {index} ({name}): {other}"),
            },
            Stage::Encode => write!(f, "encoding: {}", self.error),
            Stage::Write => write!(f, "writing: {}", self.error),
        }
    }
}

impl std::error::Error for JobError {
    fn source(&self) -> Option<&(dyn std::error::Error + 'static)> {
        Some(&self.error)
    }
}

/// What a finished job did.
#[derive(Clone, Debug)]
pub struct JobSummary {
    pub input_size: (usize, usize),
    pub input_layout: Layout,
    pub input_sample: SampleType,
    pub output_size: (usize, usize),
    pub output_sample: SampleType,
    pub output_format: Format,
    /// SHA-256 (FIPS 180-4) of the input file's bytes, in lower-case hex.
    pub input_sha256: String,
    /// SHA-256 of the bytes written (of the first page's file when each page
    /// has its own).
    pub output_sha256: String,
    /// What the steps measured (see [`Note`]) on the first page.
    pub notes: Vec<Note>,
    /// One entry per page of a multi-page input (empty for a single image).
    pub pages: Vec<PageSummary>,
    pub elapsed: Duration,
}

/// A checked job, ready to run.
pub struct Job<'a> {
    pub input: Location,
    pub output: Location,
    pub format: Format,
    pub pipeline: &'a Pipeline,
    pub options: &'a RunOptions,
    pub overwrite: bool,
    /// Names one output file per page, instead of one multi-page TIFF.
    pub per_page: Option<PageNamer<'a>>,
}

impl fmt::Debug for Job<'_> {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.debug_struct("Job")
            .field("input", &self.input)
            .field("output", &self.output)
            .field("format", &self.format)
            .field("overwrite", &self.overwrite)
            .field("one_file_per_page", &self.per_page.is_some())
            .finish_non_exhaustive()
    }
}

impl<'a> Job<'a> {
    /// Checks a job before any work: the output format is known and writable at
    /// the requested depth, the output folder exists, the output does not exist
    /// (unless `overwrite`), and the output is not the input.
    pub fn plan(
        input: Location,
        output: Location,
        pipeline: &'a Pipeline,
        options: &'a RunOptions,
        overwrite: bool,
    ) -> Result<Job<'a>, JobError> {
        let fail = |m: String| JobError { stage: Stage::Plan, error: Error::Recipe(m) };
        let format =
            output_format(&output, options).map_err(|error| JobError { stage: Stage::Plan, error })?;
        if let Location::Path(out) = &output {
            let parent = match out.parent() {
                Some(p) if !p.as_os_str().is_empty() => p.to_path_buf(),
                _ => PathBuf::from("."),
            };
            if !parent.is_dir() {
                return Err(fail(format!("the output folder `{}` does not exist", parent.display())));
            }
            if let Location::Path(inp) = &input
                && same_file(inp, out)
            {
                return Err(fail(format!(
                    "the output `{}` is the input; Pumice never overwrites its input — choose another output name",
                    out.display()
                )));
            }
            if out.exists() && !overwrite {
                return Err(fail(format!(
                    "`{}` already exists; add --overwrite to replace it",
                    out.display()
                )));
            }
        }
        Ok(Job { input, output, format, pipeline, options, overwrite, per_page: None })
    }

    /// Writes one file per page (names from `names`, given the 1-based page)
    /// instead of one multi-page TIFF.
    pub fn one_file_per_page(self, names: PageNamer<'a>) -> Job<'a> {
        Job { per_page: Some(names), ..self }
    }

    /// Reads, decodes, runs the steps, encodes and writes. Nothing is written
    /// unless every stage before writing succeeded.
    pub fn run(&self) -> Result<JobSummary, JobError> {
        self.run_unless(&|| false)
    }

    /// [`Job::run`], giving up before decoding, before the steps and before
    /// writing when `cancelled()` has become true (a stage already under way
    /// finishes first). A cancelled job writes nothing and fails with an
    /// `Interrupted` I/O error at the stage it stopped before.
    ///
    /// A multi-page TIFF input sends every page through the steps, one page at
    /// a time (only one page's planes are held): into one multi-page TIFF, or
    /// with [`Job::one_file_per_page`] into one file per page. If a page fails,
    /// the page files this job wrote already are removed again, so an input
    /// leaves all its pages or none.
    pub fn run_unless(&self, cancelled: &dyn Fn() -> bool) -> Result<JobSummary, JobError> {
        let start = Instant::now();
        let o = self.options;
        let bytes =
            file::read_input(&self.input, o.limits.max_bytes).map_err(|e| at(Stage::Read)(e.into()))?;
        let input_sha256 = sha256_hex(&bytes);
        // A chain of pages that cannot be walked counts as one page (the first
        // page's own errors are reported by decoding it).
        let pages = codec::page_count(&bytes).unwrap_or(1);
        if pages > 1 && self.per_page.is_none() && self.format != Format::Tiff {
            return Err(at(Stage::Encode)(Error::Unsupported(format!(
                "`{}` has {pages} pages; a multi-page input is written to one multi-page TIFF \
                 (give a .tif output) or to one file per page (a name template with {{page}}), \
                 or its pages are stacked with `pumice stack`",
                self.input.display()
            ))));
        }
        let reader = PageReader { job: self, bytes: &bytes, cancelled };
        let first = reader.page(0)?;
        let encode_opts = EncodeOptions {
            format: self.format,
            sample: o.sample,
            // Every page is written in the first page's file encoding.
            encoding: first.file_encoding,
            quality: o.quality,
            chroma: o.chroma,
            background: o.background,
            keep_metadata: o.keep_metadata,
        };
        let output_sample = encode_opts.sample_for(&first.raster).map_err(at(Stage::Encode))?;
        let mut summary = JobSummary {
            input_size: first.input_size,
            input_layout: first.input_layout,
            input_sample: first.input_sample.unwrap_or(SampleType::F32),
            output_size: (first.raster.width(), first.raster.height()),
            output_sample,
            output_format: self.format,
            input_sha256,
            output_sha256: String::new(),
            notes: first.raster.metadata.notes.clone(),
            pages: Vec::new(),
            elapsed: Duration::ZERO,
        };
        if let Some(names) = self.per_page {
            summary.pages = self.write_pages(&reader, first, pages, &encode_opts, names)?;
            summary.output_sha256 =
                summary.pages.first().map(|p| p.output_sha256.clone()).unwrap_or_default();
        } else {
            let encoded = if pages > 1 {
                let mut first = Some(first);
                let mut records = Vec::with_capacity(pages);
                let encoded = codec::encode_tiff_pages_with(
                    pages,
                    &encode_opts,
                    |page| {
                        let done = match first.take() {
                            Some(f) => f,
                            None => reader.page(page)?,
                        };
                        records.push(PageSummary::of(&done.raster, None, String::new()));
                        Ok(std::borrow::Cow::Owned(done.raster))
                    },
                    at(Stage::Encode),
                )?;
                summary.pages = records;
                encoded
            } else {
                codec::encode(&first.raster, &encode_opts).map_err(at(Stage::Encode))?
            };
            check(cancelled, Stage::Write)?;
            self.write(&self.output, &encoded)?;
            summary.output_sha256 = sha256_hex(&encoded);
        }
        summary.elapsed = start.elapsed();
        Ok(summary)
    }

    /// Encodes and writes every page to its own file, removing the files
    /// written so far when a page fails.
    fn write_pages(
        &self,
        reader: &PageReader<'_>,
        first: DonePage,
        pages: usize,
        encode_opts: &EncodeOptions,
        names: PageNamer<'a>,
    ) -> Result<Vec<PageSummary>, JobError> {
        let mut written: Vec<PageSummary> = Vec::with_capacity(pages);
        let mut first = Some(first);
        let mut one = |page: usize| -> Result<PageSummary, JobError> {
            let done = match first.take() {
                Some(f) => f,
                None => reader.page(page)?,
            };
            let path = names(page + 1).map_err(at(Stage::Plan))?;
            let encoded = codec::encode(&done.raster, encode_opts).map_err(at(Stage::Encode))?;
            check(reader.cancelled, Stage::Write)?;
            let location = Location::Path(path.clone());
            self.write(&location, &encoded)?;
            Ok(PageSummary::of(&done.raster, Some(path), sha256_hex(&encoded)))
        };
        for page in 0..pages {
            match one(page) {
                Ok(p) => written.push(p),
                Err(e) => {
                    for p in &written {
                        if let Some(path) = &p.output {
                            let _ = std::fs::remove_file(path);
                        }
                    }
                    return Err(e);
                }
            }
        }
        Ok(written)
    }

    /// Writes `encoded` atomically to `to`.
    fn write(&self, to: &Location, encoded: &[u8]) -> Result<(), JobError> {
        file::write_atomic(to, encoded, self.overwrite).map_err(|e| {
            let error = if e.kind() == std::io::ErrorKind::AlreadyExists {
                Error::Recipe(format!(
                    "`{}` appeared while working; add --overwrite to replace it",
                    to.display()
                ))
            } else {
                e.into()
            };
            JobError { stage: Stage::Write, error }
        })
    }
}

/// Names the output file of a page (1-based).
pub type PageNamer<'a> = &'a (dyn Fn(usize) -> Result<PathBuf, Error> + Sync);

/// What one page of the output was.
#[derive(Clone, Debug)]
pub struct PageSummary {
    /// Its own file, when pages are written one file each.
    pub output: Option<PathBuf>,
    /// SHA-256 of that file (empty when the page is inside a multi-page file).
    pub output_sha256: String,
    pub output_size: (usize, usize),
    /// What the steps measured on this page.
    pub notes: Vec<Note>,
}

impl PageSummary {
    fn of(raster: &crate::raster::Raster, output: Option<PathBuf>, output_sha256: String) -> PageSummary {
        PageSummary {
            output,
            output_sha256,
            output_size: (raster.width(), raster.height()),
            notes: raster.metadata.notes.clone(),
        }
    }
}

/// One page through the steps.
struct DonePage {
    raster: crate::raster::Raster,
    /// How the file stored the samples (the output is written the same way).
    file_encoding: crate::raster::Encoding,
    input_size: (usize, usize),
    input_layout: Layout,
    input_sample: Option<SampleType>,
}

/// Decodes pages of one input and runs the steps on them.
struct PageReader<'j> {
    job: &'j Job<'j>,
    bytes: &'j [u8],
    cancelled: &'j dyn Fn() -> bool,
}

impl PageReader<'_> {
    fn page(&self, page: usize) -> Result<DonePage, JobError> {
        let (job, o) = (self.job, self.job.options);
        let decode_opts = DecodeOptions {
            limits: o.limits,
            encoding: o.input_encoding,
            keep_orientation: o.keep_orientation,
            linear_light: job.pipeline.first_encoding(o.domain) == Some(crate::raster::Encoding::Linear),
        };
        check(self.cancelled, Stage::Decode)?;
        let mut raster = codec::decode_page(self.bytes, page, &decode_opts).map_err(at(Stage::Decode))?;
        if let Some(size) = o.pixel_size {
            raster.metadata.resolution = Some(size.resolution());
        }
        check(
            self.cancelled,
            Stage::Step { index: 1, name: job.pipeline.steps.first().map_or("none", |s| s.spec.name) },
        )?;
        let file_encoding = raster.metadata.source_encoding.unwrap_or(raster.encoding);
        let (input_size, input_layout) = ((raster.width(), raster.height()), raster.layout());
        let input_sample = raster.metadata.source_sample;
        let raster = job.pipeline.run(raster, o.domain).map_err(|f| JobError {
            stage: Stage::Step { index: f.index + 1, name: job.pipeline.steps[f.index].spec.name },
            error: f.error,
        })?;
        Ok(DonePage { raster, file_encoding, input_size, input_layout, input_sample })
    }
}

/// Maps an error to a failure at `stage`.
fn at(stage: Stage) -> impl Fn(Error) -> JobError {
    move |error: Error| JobError { stage: stage.clone(), error }
}

/// Fails with an `Interrupted` error at `stage` once `cancelled()` is true.
fn check(cancelled: &dyn Fn() -> bool, stage: Stage) -> Result<(), JobError> {
    if cancelled() {
        let error = std::io::Error::new(std::io::ErrorKind::Interrupted, "interrupted").into();
        Err(JobError { stage, error })
    } else {
        Ok(())
    }
}

/// The format `output` will be written in (`--format`, else the extension),
/// checked to be one Pumice writes at the requested depth.
pub fn output_format(output: &Location, options: &RunOptions) -> Result<Format, Error> {
    let format = match (&options.format, output) {
        (Some(f), _) => *f,
        (None, Location::Path(p)) => Format::from_path(p).ok_or_else(|| {
            Error::Recipe(format!(
                "cannot tell the output format from `{}`; use an extension or --format ({})",
                p.display(),
                Format::WRITE_NAMES.join(", ")
            ))
        })?,
        (None, Location::Std) => {
            return Err(Error::Recipe(format!(
                "writing to standard output needs --format ({})",
                Format::WRITE_NAMES.join(", ")
            )));
        }
    };
    if format.deepest_sample().is_none() {
        return Err(Error::Recipe(format!(
            "Pumice does not write {}; choose one of {}",
            format.name(),
            Format::WRITE_NAMES.join(", ")
        )));
    }
    if let Some(s) = options.sample
        && !format.can_write(s)
    {
        return Err(Error::Recipe(format!(
            "{} cannot hold {} samples; choose another --depth or format",
            format.name(),
            s.name()
        )));
    }
    Ok(format)
}

/// SHA-256 (FIPS 180-4) of `bytes` as lower-case hex.
pub fn sha256_hex(bytes: &[u8]) -> String {
    use sha2::Digest;
    let digest = sha2::Sha256::digest(bytes);
    digest.iter().map(|b| format!("{b:02x}")).collect()
}

/// True when `a` and `b` name the same file (following links; `b` may not exist yet).
pub(crate) fn same_file(a: &Path, b: &Path) -> bool {
    let canon = |p: &Path| -> Option<PathBuf> {
        if let Ok(c) = p.canonicalize() {
            return Some(c);
        }
        let parent = match p.parent() {
            Some(d) if !d.as_os_str().is_empty() => d,
            _ => Path::new("."),
        };
        Some(parent.canonicalize().ok()?.join(p.file_name()?))
    };
    matches!((canon(a), canon(b)), (Some(x), Some(y)) if x == y)
}
