//! `pumice completions SHELL`: a completion script from the clap definition.

use clap::{Args, CommandFactory};
use clap_complete::Shell;

use super::{Cli, Exit};

#[derive(Debug, Args)]
pub struct CompletionsArgs {
    /// The shell to complete for
    pub shell: Shell,
}

pub fn run(args: CompletionsArgs) -> Exit {
    clap_complete::generate(args.shell, &mut Cli::command(), "pumice", &mut std::io::stdout());
    Exit::Done
}
