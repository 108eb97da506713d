//! `pumice stack`: frames of one size combined into one TIFF.

use std::path::PathBuf;
use std::time::Instant;

use clap::Args;
use clap::builder::PossibleValuesParser;

use super::{Exit, report};
use pumice::io::file::{self, Location};
use pumice::io::{EncodeOptions, Format, InputEncoding, encode};
use pumice::raster::SampleType;
use pumice::stack::{Mode, StackOptions, stack_files};

const STACK_HELP: &str = "\
Each input file is one frame; each page of a multi-page TIFF is one frame.
All frames must have the same size, channel count and sample depth.

The stack works on the stored values: no sRGB conversion is made, whatever
--input-encoding says (it only labels the result). Modes:
  mean        arithmetic mean (summed in 64-bit floating point)
  median      the middle value; for an even count the mean of the two middle ones
  min, max    the smallest or largest value
  sigma-clip  kappa-sigma clipping about the median (population standard
              deviation), repeated until nothing more is rejected or
              --iterations rounds have run, then the mean of the kept values

Memory: mean, min and max read one frame at a time. median and sigma-clip
spill the frames to a temporary file (16-bit codes for 8/16-bit sources; in
--temp-dir, default the system's temporary folder) and combine them band by
band, so about one frame plus one band of all frames is in memory.

The output is a TIFF, written in 32-bit float for mean and sigma-clip and in
the source's depth for median, min and max unless --depth says otherwise.

Examples:
  pumice stack dark-*.tif -o master-dark.tif --mode median --input-encoding linear
  pumice stack flats.tif -o master-flat.tif --mode sigma-clip --kappa 2.5";

/// Arguments of `pumice stack`.
#[derive(Debug, Args)]
#[command(after_help = STACK_HELP)]
pub struct StackArgs {
    /// Frames: image files, or multi-page TIFFs whose pages are frames
    #[arg(value_name = "INPUT", required = true)]
    pub inputs: Vec<PathBuf>,

    /// The output TIFF
    #[arg(short, long, value_name = "OUTPUT.tif")]
    pub output: PathBuf,

    /// How to combine the frames at each pixel
    #[arg(long, value_parser = PossibleValuesParser::new(Mode::NAMES))]
    pub mode: String,

    /// sigma-clip: reject values more than KAPPA standard deviations from the median
    #[arg(long, default_value_t = 3.0)]
    pub kappa: f64,

    /// sigma-clip: at most this many rounds of rejection
    #[arg(long, default_value_t = 5)]
    pub iterations: u32,

    /// Output sample depth [default: f32 for mean and sigma-clip, the source's for the others]
    #[arg(long, value_parser = PossibleValuesParser::new(["8", "16", "f32"]))]
    pub depth: Option<String>,

    /// What the stored numbers mean (a label carried to the output; no conversion is made)
    #[arg(long, value_parser = PossibleValuesParser::new(InputEncoding::NAMES), default_value = "auto")]
    pub input_encoding: String,

    /// Folder for the temporary frame file of median and sigma-clip [default: the system's]
    #[arg(long, value_name = "DIR")]
    pub temp_dir: Option<PathBuf>,

    /// Replace the output if it exists
    #[arg(long)]
    pub overwrite: bool,

    /// Print the frame count, time taken and peak memory
    #[arg(short, long)]
    pub verbose: bool,
}

pub fn run(args: StackArgs) -> Exit {
    match stack(&args) {
        Ok(()) => Exit::Done,
        Err((exit, message)) => {
            report(message);
            exit
        }
    }
}

fn stack(args: &StackArgs) -> Result<(), (Exit, String)> {
    let usage = |m: String| (Exit::Usage, m);
    let mode = Mode::from_name(&args.mode, args.kappa, args.iterations).map_err(|e| usage(e.to_string()))?;
    let format = Format::from_path(&args.output);
    if format != Some(Format::Tiff) {
        return Err(usage(format!(
            "stack writes TIFF; `{}` does not end in .tif or .tiff",
            args.output.display()
        )));
    }
    if !args.overwrite && args.output.exists() {
        return Err(usage(format!(
            "`{}` already exists; add --overwrite to replace it",
            args.output.display()
        )));
    }
    let mut opts = StackOptions::new(mode);
    opts.decode.encoding = args.input_encoding.parse().map_err(usage)?;
    opts.spill_dir = args.temp_dir.clone();
    let started = Instant::now();
    let stacked = stack_files(&args.inputs, &opts).map_err(|e| (Exit::InputFailed, e.to_string()))?;
    let source = stacked.raster.metadata.source_sample.unwrap_or(SampleType::F32);
    let mut encode_opts = EncodeOptions::new(Format::Tiff);
    encode_opts.sample = Some(match args.depth.as_deref() {
        Some("8") => SampleType::U8,
        Some("16") => SampleType::U16,
        Some(_) => SampleType::F32,
        None => mode.default_sample(source),
    });
    // The values are written as they are: the file's encoding is the result's own.
    encode_opts.encoding = stacked.raster.encoding;
    let out = Location::Path(args.output.clone());
    let bytes = encode(&stacked.raster, &encode_opts)
        .map_err(|e| (Exit::InputFailed, format!("{}: {e}", out.display())))?;
    file::write_atomic(&out, &bytes, args.overwrite).map_err(|e| {
        if e.kind() == std::io::ErrorKind::AlreadyExists {
            usage(format!("`{}` already exists; add --overwrite to replace it", out.display()))
        } else {
            (Exit::InputFailed, format!("{}: {e}", out.display()))
        }
    })?;
    if args.verbose {
        let peak = pumice::batch::report::peak_memory_bytes()
            .map_or_else(|| "unknown".to_string(), |b| format!("{:.0} MiB", b as f64 / 1048576.0));
        eprintln!(
            "pumice: stacked {} frames ({}) into {} in {:.2} s; peak memory {peak}",
            stacked.frames,
            args.mode,
            out.display(),
            started.elapsed().as_secs_f64()
        );
    }
    Ok(())
}
