//! The command line: clap definitions (one file per subcommand) and the glue
//! that turns parsed arguments into library calls. No image maths here.

mod completions;
mod diff;
mod inspect;
mod json;
mod manual;
mod ops;
mod recipe;
mod run;
mod stack;

use clap::{Parser, Subcommand};

/// Exit codes, as `--help` lists them.
#[derive(Clone, Copy, Debug, PartialEq, Eq, PartialOrd, Ord)]
pub enum Exit {
    /// Everything was done.
    Done = 0,
    /// Some inputs failed (each is reported); the rest were written.
    InputFailed = 1,
    /// Bad usage or a bad recipe, found before any work; nothing was written.
    Usage = 2,
    /// Stopped by SIGINT or SIGTERM: finished files were kept, no partial file was left.
    Interrupted = 130,
}

const AFTER_HELP: &str = "\
Exit codes:
  0  all done
  1  some inputs failed (each is reported; the others were written)
  2  bad usage or bad recipe, found before any work (nothing written)
  130  interrupted (Ctrl-C or SIGTERM): finished outputs kept, no partial files

Run `pumice ops` for the operators and `pumice ops NAME` for one operator's
formula, parameters and source.";

/// Colour-correct, bit-depth-preserving raster image processing from the command line.
#[derive(Debug, Parser)]
#[command(name = "pumice", version, about, after_help = AFTER_HELP, propagate_version = true)]
pub struct Cli {
    #[command(subcommand)]
    pub command: Command,
}

#[derive(Debug, Subcommand)]
pub enum Command {
    /// Run steps on images (one file or a whole batch) and write the results
    Run(Box<run::RunArgs>),
    /// List the operators, or describe one
    Ops(ops::OpsArgs),
    /// Work with recipe files
    #[command(subcommand)]
    Recipe(recipe::RecipeCommand),
    /// Describe images: size, type, metadata, statistics, noise, histogram
    Inspect(inspect::InspectArgs),
    /// Compare two images: PSNR, SSIM, largest difference; exit code for scripts
    Diff(diff::DiffArgs),
    /// Print a shell completion script
    Completions(completions::CompletionsArgs),
    /// Print the manual page (roff)
    Manual,
    /// Combine frames of one size into one (mean, median, min, max, sigma-clip)
    Stack(stack::StackArgs),
}

/// Parses the command line and runs it; returns the process exit code.
pub fn main() -> Exit {
    let cli = Cli::parse();
    match cli.command {
        Command::Run(args) => run::run(*args),
        Command::Ops(args) => ops::run(args),
        Command::Recipe(cmd) => recipe::run(cmd),
        Command::Inspect(args) => inspect::run(args),
        Command::Diff(args) => diff::run(args),
        Command::Completions(args) => completions::run(args),
        Command::Manual => manual::run(),
        Command::Stack(args) => stack::run(args),
    }
}

/// Prints `pumice: message` to stderr.
pub(crate) fn report(message: impl std::fmt::Display) {
    eprintln!("pumice: {message}");
}
