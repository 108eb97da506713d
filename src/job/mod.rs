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
    /// SHA-256 of the bytes written.
    pub output_sha256: String,
    /// What the steps measured (see [`Note`]).
    pub notes: Vec<Note>,
    pub elapsed: Duration,
}

/// A checked job, ready to run.
#[derive(Debug)]
pub struct Job<'a> {
    pub input: Location,
    pub output: Location,
    pub format: Format,
    pub pipeline: &'a Pipeline,
    pub options: &'a RunOptions,
    pub overwrite: bool,
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
        Ok(Job { input, output, format, pipeline, options, overwrite })
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
    pub fn run_unless(&self, cancelled: &dyn Fn() -> bool) -> Result<JobSummary, JobError> {
        let start = Instant::now();
        let check = |stage: Stage| {
            if cancelled() {
                let error = std::io::Error::new(std::io::ErrorKind::Interrupted, "interrupted").into();
                Err(JobError { stage, error })
            } else {
                Ok(())
            }
        };
        let o = self.options;
        let at = |stage: Stage| move |error: Error| JobError { stage: stage.clone(), error };
        let bytes =
            file::read_input(&self.input, o.limits.max_bytes).map_err(|e| at(Stage::Read)(e.into()))?;
        let decode_opts = DecodeOptions {
            limits: o.limits,
            encoding: o.input_encoding,
            keep_orientation: o.keep_orientation,
            linear_light: self.pipeline.first_encoding(o.domain) == Some(crate::raster::Encoding::Linear),
        };
        let input_sha256 = sha256_hex(&bytes);
        // A multi-page TIFF: every page through the steps, into one multi-page
        // TIFF. A chain of pages that cannot be walked counts as one page (the
        // first page's own errors are reported by decoding it).
        let pages = codec::page_count(&bytes).unwrap_or(1);
        if pages > 1 && self.format != Format::Tiff {
            return Err(at(Stage::Encode)(Error::Unsupported(format!(
                "`{}` has {pages} pages; a multi-page input is written to one multi-page TIFF \
                 (give a .tif output), or stack its pages with `pumice stack`",
                self.input.display()
            ))));
        }
        let mut processed = Vec::with_capacity(pages);
        for page in 0..pages {
            check(Stage::Decode)?;
            let mut raster = codec::decode_page(&bytes, page, &decode_opts).map_err(at(Stage::Decode))?;
            if let Some(size) = o.pixel_size {
                raster.metadata.resolution = Some(size.resolution());
            }
            check(Stage::Step {
                index: 1,
                name: self.pipeline.steps.first().map_or("none", |s| s.spec.name),
            })?;
            let file_encoding = raster.metadata.source_encoding.unwrap_or(raster.encoding);
            let input = (raster.width(), raster.height(), raster.layout(), raster.metadata.source_sample);
            let raster = self.pipeline.run(raster, o.domain).map_err(|f| JobError {
                stage: Stage::Step { index: f.index + 1, name: self.pipeline.steps[f.index].spec.name },
                error: f.error,
            })?;
            processed.push((raster, file_encoding, input));
        }
        drop(bytes);
        let Some((raster, file_encoding, (w, h, input_layout, input_sample))) = processed.first() else {
            return Err(at(Stage::Decode)(Error::Internal("no page decoded".into())));
        };
        let (raster, file_encoding) = (raster, *file_encoding);
        let (input_size, input_layout) = ((*w, *h), *input_layout);
        let input_sample = input_sample.unwrap_or(SampleType::F32);
        let encode_opts = EncodeOptions {
            format: self.format,
            sample: o.sample,
            encoding: file_encoding,
            quality: o.quality,
            chroma: o.chroma,
            background: o.background,
            keep_metadata: o.keep_metadata,
        };
        let output_sample = encode_opts.sample_for(raster).map_err(at(Stage::Encode))?;
        let encoded = if processed.len() > 1 {
            // Pages are written in the first page's file encoding.
            codec::encode_tiff_pages(&processed.iter().map(|p| &p.0).collect::<Vec<_>>(), &encode_opts)
        } else {
            codec::encode(raster, &encode_opts)
        }
        .map_err(at(Stage::Encode))?;
        check(Stage::Write)?;
        file::write_atomic(&self.output, &encoded, self.overwrite).map_err(|e| {
            let error = if e.kind() == std::io::ErrorKind::AlreadyExists {
                Error::Recipe(format!(
                    "`{}` appeared while working; add --overwrite to replace it",
                    self.output.display()
                ))
            } else {
                e.into()
            };
            JobError { stage: Stage::Write, error }
        })?;
        Ok(JobSummary {
            input_size,
            input_layout,
            input_sample,
            output_size: (raster.width(), raster.height()),
            output_sample,
            output_format: self.format,
            input_sha256,
            output_sha256: sha256_hex(&encoded),
            notes: raster.metadata.notes.clone(),
            elapsed: start.elapsed(),
        })
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
