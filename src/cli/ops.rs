//! `pumice ops [NAME]`: the operator list, or one operator's description.

use clap::Args;

use super::{Exit, report};
use pumice::ops::params::OpSpec;
use pumice::pipeline::registry::{self, OPERATORS};

/// Arguments of `pumice ops`.
#[derive(Debug, Args)]
pub struct OpsArgs {
    /// An operator to describe in full
    pub name: Option<String>,
}

pub fn run(args: OpsArgs) -> Exit {
    match args.name {
        None => {
            print!("{}", list());
            Exit::Done
        }
        Some(name) => match registry::find(&name) {
            Ok(spec) => {
                print!("{}", describe(spec));
                Exit::Done
            }
            Err(e) => {
                report(e);
                Exit::Usage
            }
        },
    }
}

/// One line per operator, grouped by family.
fn list() -> String {
    let mut out = String::new();
    let mut family = "";
    for spec in OPERATORS {
        if spec.family != family {
            family = spec.family;
            out.push_str(&format!("{family}\n"));
        }
        out.push_str(&format!("  {:<11} {}\n", spec.name, spec.summary));
    }
    out.push_str("\n`pumice ops NAME` shows an operator's formula, parameters and source.\n");
    out
}

/// The full description: doc text (without code fences), parameters, example.
fn describe(spec: &OpSpec) -> String {
    let mut out = format!("{} — {}\n\n", spec.name, spec.summary);
    for line in spec.doc.lines().filter(|l| !l.trim_start().starts_with("```")) {
        out.push_str(line);
        out.push('\n');
    }
    out.push_str("\nParameters:\n");
    if spec.params.is_empty() {
        out.push_str("  (none)\n");
    }
    for p in spec.params {
        let main = if spec.main == Some(p.name) { " (main: may be given without its name)" } else { "" };
        let default = p.default.map_or_else(|| "required".to_string(), |d| format!("default {d}"));
        out.push_str(&format!(
            "  {:<10} {}; {}{main}\n  {:<10} {}\n",
            p.name,
            p.kind.describe(),
            default,
            "",
            p.help
        ));
    }
    out
}
