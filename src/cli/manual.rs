//! `pumice manual`: the man page, rendered from the clap definition.

use clap::CommandFactory;

use super::{Cli, Exit, report};

pub fn run() -> Exit {
    let mut page = Vec::new();
    let rendered = clap_mangen::Man::new(Cli::command()).render(&mut page);
    for sub in Cli::command().get_subcommands() {
        if rendered.is_err() {
            break;
        }
        let name = format!("pumice-{}", sub.get_name());
        let _ = clap_mangen::Man::new(sub.clone().name(name)).render(&mut page);
    }
    match rendered {
        Ok(()) => {
            use std::io::Write;
            let _ = std::io::stdout().write_all(&page);
            Exit::Done
        }
        Err(e) => {
            report(format!("cannot render the manual: {e}"));
            Exit::InputFailed
        }
    }
}
