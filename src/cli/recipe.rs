//! `pumice recipe check FILE`: validate a recipe without running it.

use std::path::PathBuf;

use clap::Subcommand;

use super::{Exit, report};
use pumice::job::recipe;

#[derive(Debug, Subcommand)]
pub enum RecipeCommand {
    /// Check a recipe and print its steps with every parameter spelt out
    Check {
        /// The recipe file (TOML)
        file: PathBuf,
    },
}

pub fn run(cmd: RecipeCommand) -> Exit {
    let RecipeCommand::Check { file } = cmd;
    let text = match std::fs::read_to_string(&file) {
        Ok(t) => t,
        Err(e) => {
            report(format!("{}: cannot read the recipe: {e}", file.display()));
            return Exit::Usage;
        }
    };
    match recipe::parse(&text, &file.display().to_string(), Some(super::run::recipe_folder(&file))) {
        Ok(r) => {
            println!("{}: ok, {} step(s)", file.display(), r.pipeline.steps.len());
            for (i, s) in r.pipeline.steps.iter().enumerate() {
                println!("  {}. {s}", i + 1);
            }
            Exit::Done
        }
        Err(e) => {
            report(e);
            Exit::Usage
        }
    }
}
