//! `pumice run`: inputs (files, folders, patterns or standard input) through
//! the steps to outputs (a file, a folder, a name template or standard output).

use std::io::Write;
use std::panic::{AssertUnwindSafe, catch_unwind};
use std::path::PathBuf;
use std::time::{Duration, Instant, SystemTime};

use clap::Args;
use clap::builder::PossibleValuesParser;

use super::{Exit, report};
use indicatif::{ProgressBar, ProgressState, ProgressStyle};
use pumice::batch::report::{RunHeader, Tally};
use pumice::batch::{
    self, Action, BatchOptions, Control, Existing, FileOutcome, OutputSpec, Plan, PlannedFile, Shard, Status,
};
use pumice::io::file::Location;
use pumice::io::{Chroma, Format, InputEncoding};
use pumice::job::options::{self, OptionOverrides, RunOptions};
use pumice::job::{Job, JobSummary, recipe};
use pumice::pipeline::{DomainPolicy, Pipeline, Step};
use signal_hook::consts::{SIGINT, SIGTERM};

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
    /// Input images, folders or quoted glob patterns (`-` reads standard input)
    #[arg(value_name = "INPUT", required = true)]
    pub inputs: Vec<PathBuf>,

    /// Output file, folder or name template (`-` writes standard output; then give --format)
    #[arg(short, long, value_name = "OUTPUT")]
    pub output: PathBuf,

    /// Look for images in sub-folders of folder inputs too (outputs mirror the sub-folders)
    #[arg(short = 'R', long)]
    pub recursive: bool,

    /// A step to run (repeatable), e.g. `gauss:sigma=2`
    #[arg(short = 's', long = "step", value_name = "STEP")]
    pub steps: Vec<String>,

    /// A TOML recipe with steps and run options
    #[arg(short, long, value_name = "FILE")]
    pub recipe: Option<PathBuf>,

    /// Replace outputs that exist
    #[arg(long, conflicts_with_all = ["skip_existing", "update"])]
    pub overwrite: bool,

    /// Leave outputs that exist and skip their inputs
    #[arg(long, conflicts_with = "update")]
    pub skip_existing: bool,

    /// Redo an input only when it or the recipe is newer than its output
    #[arg(long)]
    pub update: bool,

    /// Print what would be done, and do nothing
    #[arg(long)]
    pub dry_run: bool,

    /// Stop starting new inputs after the first failure
    #[arg(long)]
    pub fail_fast: bool,

    /// Write a JSON report of the run: every file, its outcome, and the run's steps and options
    #[arg(long, value_name = "FILE.json")]
    pub report: Option<PathBuf>,

    /// Write a processing record OUTPUT.record.json beside each output
    #[arg(long)]
    pub sidecar: bool,

    /// Process shard K of N (1 ≤ K ≤ N) of the inputs [default: from a Slurm array or Kubernetes Indexed Job, else all]
    #[arg(long, value_name = "K/N")]
    pub shard: Option<String>,

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

    /// Calibration: the side of one pixel, e.g. 0.65um (nm, um, mm, cm, in); replaces the file's resolution and is scaled by resize
    #[arg(long, value_name = "SIZE")]
    pub pixel_size: Option<String>,

    /// Refuse images with more pixels than this [default: 268435456]
    #[arg(long, value_name = "N")]
    pub max_pixels: Option<u64>,

    /// Worker threads, and images worked on at once [default: all cores]
    #[arg(short = 'j', long, value_name = "N", value_parser = clap::value_parser!(u16).range(1..))]
    pub threads: Option<u16>,

    /// Images worked on at once (memory grows with it) [default: as -j]
    #[arg(long, value_name = "N", value_parser = clap::value_parser!(u16).range(1..))]
    pub in_flight: Option<u16>,

    /// Print the steps as run and a line per file to stderr
    #[arg(short, long, conflicts_with = "quiet")]
    pub verbose: bool,

    /// No progress bar and no summary line (errors are still printed)
    #[arg(short, long)]
    pub quiet: bool,
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
            pixel_size: self.pixel_size.as_deref().map(options::parse_pixel_size).transpose()?,
        })
    }
}

pub fn run(args: RunArgs) -> Exit {
    if let Some(n) = args.threads {
        // Fails only if a pool exists already, which cannot happen this early.
        let _ = rayon::ThreadPoolBuilder::new().num_threads(usize::from(n)).build_global();
    }
    let setup = match Setup::read(&args) {
        Ok(s) => s,
        Err(message) => {
            report(message);
            return Exit::Usage;
        }
    };
    if args.verbose {
        for (i, s) in setup.pipeline.steps.iter().enumerate() {
            eprintln!("step {}: {s}", i + 1);
        }
    }
    let streams = args.output.as_os_str() == "-" || args.inputs.iter().any(|p| p.as_os_str() == "-");
    if streams { run_stream(&args, &setup) } else { run_batch(&args, &setup) }
}

/// The steps and options a run uses, from the recipe and the command line.
struct Setup {
    pipeline: Pipeline,
    options: RunOptions,
    recipe_modified: Option<SystemTime>,
}

impl Setup {
    fn read(args: &RunArgs) -> Result<Setup, String> {
        let mut options = RunOptions::default();
        let mut steps: Vec<Step> = Vec::new();
        let mut recipe_modified = None;
        if let Some(path) = &args.recipe {
            let text = std::fs::read_to_string(path)
                .map_err(|e| format!("{}: cannot read the recipe: {e}", path.display()))?;
            recipe_modified = std::fs::metadata(path).and_then(|m| m.modified()).ok();
            let r = recipe::parse(&text, &path.display().to_string(), Some(recipe_folder(path)))
                .map_err(|e| e.to_string())?;
            r.options.apply_to(&mut options);
            steps.extend(r.pipeline.steps);
        }
        args.overrides()?.apply_to(&mut options);
        options.keep_orientation |= args.keep_orientation;
        if let Some(n) = args.max_pixels {
            options.limits.max_pixels = n;
        }
        for text in &args.steps {
            steps.push(Step::parse(text).map_err(|e| e.to_string())?);
        }
        let mut pipeline = Pipeline::new(steps);
        pipeline.max_pixels = options.limits.max_pixels;
        Ok(Setup { pipeline, options, recipe_modified })
    }
}

/// The folder a recipe file is in (relative file parameters are read from there).
pub fn recipe_folder(recipe: &std::path::Path) -> &std::path::Path {
    recipe.parent().unwrap_or(std::path::Path::new(""))
}

/// One input from standard input or to standard output.
fn run_stream(args: &RunArgs, setup: &Setup) -> Exit {
    if args.inputs.len() != 1 {
        report("standard input or output (`-`) works with one input only");
        return Exit::Usage;
    }
    if args.report.is_some() || args.sidecar || args.dry_run || args.shard.is_some() {
        report("--report, --sidecar, --dry-run and --shard need files, not standard input or output");
        return Exit::Usage;
    }
    let input = Location::parse(&args.inputs[0]);
    let output = Location::parse(&args.output);
    let job = match Job::plan(input.clone(), output.clone(), &setup.pipeline, &setup.options, args.overwrite)
    {
        Ok(j) => j,
        Err(e) => {
            report(e);
            return Exit::Usage;
        }
    };
    match catch_unwind(AssertUnwindSafe(|| job.run())) {
        Ok(Ok(summary)) => {
            if args.verbose {
                eprintln!("{}", describe_done(&input.display(), &output.display(), &summary));
            }
            Exit::Done
        }
        Ok(Err(e)) => {
            report(format!("{}: {e}", input.display()));
            if e.is_usage() { Exit::Usage } else { Exit::InputFailed }
        }
        Err(_) => {
            report(format!("{}: {INTERNAL}", input.display()));
            Exit::InputFailed
        }
    }
}

const INTERNAL: &str = "internal error: a step failed unexpectedly; nothing was written (please report this)";

/// Files, folders and patterns to files, a folder or a template.
fn run_batch(args: &RunArgs, setup: &Setup) -> Exit {
    let started = SystemTime::now();
    let clock = Instant::now();
    let found = match batch::discover(&args.inputs, args.recursive) {
        Ok(f) => f,
        Err(e) => {
            report(e);
            return Exit::Usage;
        }
    };
    let several = args.inputs.len() > 1
        || args.inputs.iter().any(|p| p.is_dir() || (!p.exists() && batch::discover::is_pattern(p)));
    let output = match OutputSpec::parse(&args.output, several) {
        Ok(o) => o,
        Err(e) => {
            report(e);
            return Exit::Usage;
        }
    };
    let shard = match &args.shard {
        Some(text) => text.parse::<Shard>().map(Some),
        None => Shard::from_env(|k| std::env::var(k).ok()),
    };
    let shard = match shard {
        Ok(s) => s,
        Err(e) => {
            report(e);
            return Exit::Usage;
        }
    };
    let threads = args.threads.map_or_else(rayon::current_num_threads, usize::from);
    let batch_options = BatchOptions {
        existing: if args.overwrite {
            Existing::Overwrite
        } else if args.skip_existing {
            Existing::Skip
        } else if args.update {
            Existing::Update
        } else {
            Existing::Refuse
        },
        recipe_modified: setup.recipe_modified,
        shard,
        in_flight: args.in_flight.map_or(threads, usize::from),
        fail_fast: args.fail_fast,
        sidecar: args.sidecar,
    };
    let plan = match batch::plan(found, &output, &setup.options, &batch_options) {
        Ok(p) => p,
        Err(e) => {
            report(e);
            return Exit::Usage;
        }
    };
    if args.dry_run {
        print_plan(&plan);
        return Exit::Done;
    }
    let control = Control::default();
    for signal in [SIGINT, SIGTERM] {
        // A second signal while the first is being handled ends the process at once.
        let _ = signal_hook::flag::register_conditional_shutdown(signal, 130, control.cancel.clone());
        let _ = signal_hook::flag::register(signal, control.cancel.clone());
    }
    let bar = progress_bar(plan.files.len() as u64, args.quiet);
    let observe = |file: &PlannedFile, outcome: &FileOutcome| {
        bar.inc(1);
        match &outcome.status {
            Status::Failed(e) => bar.suspend(|| report(format!("{}: {e}", file.input.path.display()))),
            Status::Done(summary) if args.verbose => bar.suspend(|| {
                eprintln!(
                    "{}",
                    describe_done(
                        &file.input.path.display().to_string(),
                        &file.output.display().to_string(),
                        summary
                    )
                )
            }),
            _ => {}
        }
    };
    let outcomes = batch::run(&plan, &setup.pipeline, &setup.options, &batch_options, &control, &observe);
    bar.finish_and_clear();
    let interrupted = control.cancel.load(std::sync::atomic::Ordering::Relaxed);
    let tally = Tally::of(&outcomes);
    let mut exit = if interrupted {
        Exit::Interrupted
    } else if tally.failed > 0 || tally.not_run > 0 {
        Exit::InputFailed
    } else {
        Exit::Done
    };
    if let Some(path) = &args.report {
        let header = RunHeader { started, command: std::env::args().collect(), shard };
        let written = batch::report::write(
            path,
            &header,
            &plan,
            &outcomes,
            &setup.pipeline,
            &setup.options,
            clock.elapsed(),
        );
        if let Err(e) = written {
            report(format!("{}: cannot write the report: {e}", path.display()));
            exit = Exit::InputFailed.max(exit);
        }
    }
    if several && !args.quiet {
        eprintln!("pumice: {}", describe_tally(&tally, &plan, clock.elapsed(), interrupted));
    }
    exit
}

fn progress_bar(len: u64, quiet: bool) -> ProgressBar {
    if quiet || len < 2 {
        return ProgressBar::hidden();
    }
    // The default target (stderr) hides itself when stderr is not a terminal.
    let bar = ProgressBar::new(len);
    // `{rate}`: files per second with one decimal (indicatif's own `per_sec`
    // prints four, and a `.1` in a template is a colour, not a precision).
    if let Ok(style) = ProgressStyle::with_template("{bar:32} {pos}/{len} files  {rate}  eta {eta}") {
        bar.set_style(style.with_key("rate", |state: &ProgressState, out: &mut dyn std::fmt::Write| {
            let _ = write!(out, "{:.1} files/s", state.per_sec());
        }));
    }
    bar
}

fn print_plan(plan: &Plan) {
    let mut out = std::io::stdout().lock();
    for f in &plan.files {
        let action = match f.action {
            Action::Run { overwrite: false } => "write".to_string(),
            Action::Run { overwrite: true } => "replace".to_string(),
            Action::Skip(reason) => format!("skip ({})", reason.describe()),
        };
        let _ = writeln!(out, "{action}\t{}\t{}", f.input.path.display(), f.output.display());
    }
    let runs = plan.files.iter().filter(|f| matches!(f.action, Action::Run { .. })).count();
    let _ = writeln!(
        out,
        "{runs} to write, {} to skip, {} unsupported files ignored (dry run: nothing was written)",
        plan.files.len() - runs,
        plan.unsupported.len()
    );
}

fn describe_tally(t: &Tally, plan: &Plan, elapsed: Duration, interrupted: bool) -> String {
    let mut parts =
        vec![format!("{} done", t.done), format!("{} skipped", t.skipped), format!("{} failed", t.failed)];
    if t.not_run > 0 {
        parts.push(format!("{} not run", t.not_run));
    }
    if !plan.unsupported.is_empty() {
        parts.push(format!("{} unsupported files ignored", plan.unsupported.len()));
    }
    let end = if interrupted { " (interrupted)" } else { "" };
    format!("{} in {:.1} s{end}", parts.join(", "), elapsed.as_secs_f64())
}

fn describe_done(input: &str, output: &str, s: &JobSummary) -> String {
    let mut text = format!(
        "{input} → {output}: {}×{} {} {} → {}×{} {} {} in {:.0} ms",
        s.input_size.0,
        s.input_size.1,
        s.input_layout.name(),
        s.input_sample.name(),
        s.output_size.0,
        s.output_size.1,
        s.output_format.name(),
        s.output_sample.name(),
        s.elapsed.as_secs_f64() * 1000.0
    );
    if s.pages.is_empty() {
        for note in &s.notes {
            text.push_str(&format!("\n  {note}"));
        }
    }
    for (i, page) in s.pages.iter().enumerate() {
        match &page.output {
            Some(out) => text.push_str(&format!("\n  page {} → {}", i + 1, out.display())),
            None => text.push_str(&format!("\n  page {}", i + 1)),
        }
        for note in &page.notes {
            text.push_str(&format!("\n    {note}"));
        }
    }
    text
}
