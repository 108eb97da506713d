//! `pumice run`: one input, a list of steps, one output.

use std::panic::{AssertUnwindSafe, catch_unwind};
use std::path::PathBuf;

use clap::Args;
use clap::builder::PossibleValuesParser;

use super::{Exit, report};
use pumice::io::file::Location;
use pumice::io::{Chroma, Format, InputEncoding};
use pumice::job::options::{self, OptionOverrides, RunOptions};
use pumice::job::{Job, recipe};
use pumice::pipeline::{DomainPolicy, Pipeline, Step};

const RUN_HELP: &str = "\
Steps are `NAME` or `NAME:PARAM=VALUE,PARAM=VALUE…`; an operator's main
parameter may be given without its name (`gauss:2` is `gauss:sigma=2`).
Matrices use spaces between numbers and `;` between rows, so quote them:
  -s 'convolve:kernel=1 2 1;2 4 2;1 2 1,normalize=true'
Recipe steps run first, then -s steps, in the order given.

Input encoding (--input-encoding auto): float files (32-bit TIFF, OpenEXR) are
linear light; 8- and 16-bit files are sRGB-encoded. Scientific cameras write
linear integer data: say --input-encoding linear for them. Each step works in
the domain its maths needs (linear light for blurs, encoded values for tone
curves) and Pumice converts only when needed; the output is written in the
input's encoding.

Examples:
  pumice run photo.jpg -o small.png -s gauss:1.5 -s gray
  pumice run cells.tif -o cells-clean.tif --input-encoding linear -r clean.toml";

/// Arguments of `pumice run`.
#[derive(Debug, Args)]
#[command(after_help = RUN_HELP)]
pub struct RunArgs {
    /// Input image (`-` reads standard input)
    #[arg(value_name = "INPUT")]
    pub input: PathBuf,

    /// Output image (`-` writes standard output; then give --format)
    #[arg(short, long, value_name = "OUTPUT")]
    pub output: PathBuf,

    /// A step to run (repeatable), e.g. `gauss:sigma=2`
    #[arg(short = 's', long = "step", value_name = "STEP")]
    pub steps: Vec<String>,

    /// A TOML recipe with steps and run options
    #[arg(short, long, value_name = "FILE")]
    pub recipe: Option<PathBuf>,

    /// Replace the output if it exists
    #[arg(long)]
    pub overwrite: bool,

    /// Output format (default: from the output's extension)
    #[arg(long, value_parser = PossibleValuesParser::new(Format::WRITE_NAMES))]
    pub format: Option<String>,

    /// Output sample depth (default: the source's, or the deepest the format holds)
    #[arg(long, value_parser = PossibleValuesParser::new(options::DEPTH_NAMES))]
    pub depth: Option<String>,

    /// JPEG quality, 1–100 [default: 90]
    #[arg(long, value_parser = clap::value_parser!(u8).range(1..=100))]
    pub quality: Option<u8>,

    /// JPEG chroma subsampling [default: 420]
    #[arg(long, value_parser = PossibleValuesParser::new(Chroma::NAMES))]
    pub chroma: Option<String>,

    /// Colour to flatten alpha onto when the format has none: white, black, gray or #rrggbb [default: white]
    #[arg(long, value_name = "COLOUR")]
    pub background: Option<String>,

    /// Carry ICC profile, EXIF and resolution to the output, or drop them [default: keep]
    #[arg(long, value_parser = PossibleValuesParser::new(options::META_NAMES))]
    pub meta: Option<String>,

    /// Leave pixels as stored and keep the EXIF orientation (default: make them upright)
    #[arg(long)]
    pub keep_orientation: bool,

    /// What input values mean: auto (float = linear, integer = sRGB), srgb or linear [default: auto]
    #[arg(long, value_parser = PossibleValuesParser::new(InputEncoding::NAMES))]
    pub input_encoding: Option<String>,

    /// Force every step to work in one domain instead of each step's own [default: auto]
    #[arg(long, value_parser = PossibleValuesParser::new(DomainPolicy::NAMES))]
    pub domain: Option<String>,

    /// Refuse images with more pixels than this [default: 268435456]
    #[arg(long, value_name = "N")]
    pub max_pixels: Option<u64>,

    /// Worker threads [default: all cores]
    #[arg(short = 'j', long, value_name = "N", value_parser = clap::value_parser!(u16).range(1..))]
    pub threads: Option<u16>,

    /// Print the steps as run and a summary to stderr
    #[arg(short, long)]
    pub verbose: bool,
}

impl RunArgs {
    /// The options the command line sets (values were checked by clap's parsers).
    fn overrides(&self) -> Result<OptionOverrides, String> {
        Ok(OptionOverrides {
            input_encoding: self.input_encoding.as_deref().map(str::parse).transpose()?,
            sample: self.depth.as_deref().map(options::parse_depth).transpose()?,
            keep_metadata: self.meta.as_deref().map(options::parse_meta).transpose()?,
            format: self.format.as_deref().map(options::parse_format).transpose()?,
            quality: self.quality,
            chroma: self.chroma.as_deref().map(str::parse).transpose()?,
            domain: self.domain.as_deref().map(str::parse).transpose()?,
            background: self.background.as_deref().map(options::parse_colour).transpose()?,
        })
    }
}

pub fn run(args: RunArgs) -> Exit {
    if let Some(n) = args.threads {
        // Fails only if a pool exists already, which cannot happen this early.
        let _ = rayon::ThreadPoolBuilder::new().num_threads(usize::from(n)).build_global();
    }
    let mut options = RunOptions::default();
    let mut steps: Vec<Step> = Vec::new();
    if let Some(path) = &args.recipe {
        let text = match std::fs::read_to_string(path) {
            Ok(t) => t,
            Err(e) => {
                report(format!("{}: cannot read the recipe: {e}", path.display()));
                return Exit::Usage;
            }
        };
        match recipe::parse(&text, &path.display().to_string()) {
            Ok(r) => {
                r.options.apply_to(&mut options);
                steps.extend(r.pipeline.steps);
            }
            Err(e) => {
                report(e);
                return Exit::Usage;
            }
        }
    }
    match args.overrides() {
        Ok(o) => o.apply_to(&mut options),
        Err(e) => {
            report(e);
            return Exit::Usage;
        }
    }
    options.keep_orientation |= args.keep_orientation;
    if let Some(n) = args.max_pixels {
        options.limits.max_pixels = n;
    }
    for text in &args.steps {
        match Step::parse(text) {
            Ok(s) => steps.push(s),
            Err(e) => {
                report(e);
                return Exit::Usage;
            }
        }
    }
    let mut pipeline = Pipeline::new(steps);
    pipeline.max_pixels = options.limits.max_pixels;
    let input = Location::parse(&args.input);
    let output = Location::parse(&args.output);
    let job = match Job::plan(input.clone(), output.clone(), &pipeline, &options, args.overwrite) {
        Ok(j) => j,
        Err(e) => {
            report(e);
            return Exit::Usage;
        }
    };
    if args.verbose {
        for (i, s) in pipeline.steps.iter().enumerate() {
            eprintln!("step {}: {s}", i + 1);
        }
    }
    match catch_unwind(AssertUnwindSafe(|| job.run())) {
        Ok(Ok(summary)) => {
            if args.verbose {
                eprintln!(
                    "{} → {}: {}×{} {} {} → {}×{} {} {} in {:.0} ms",
                    input.display(),
                    output.display(),
                    summary.input_size.0,
                    summary.input_size.1,
                    summary.input_layout.name(),
                    summary.input_sample.name(),
                    summary.output_size.0,
                    summary.output_size.1,
                    summary.output_format.name(),
                    summary.output_sample.name(),
                    summary.elapsed.as_secs_f64() * 1000.0
                );
                for note in &summary.notes {
                    eprintln!("{note}");
                }
            }
            Exit::Done
        }
        Ok(Err(e)) => {
            report(format!("{}: {e}", input.display()));
            if e.is_usage() { Exit::Usage } else { Exit::InputFailed }
        }
        Err(_) => {
            report(format!(
                "{}: internal error: a step failed unexpectedly; nothing was written (please report this)",
                input.display()
            ));
            Exit::InputFailed
        }
    }
}
