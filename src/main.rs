//! The `pumice` binary: parses arguments, calls the library, maps results to
//! exit codes. All image work lives in the library.

#![deny(clippy::unwrap_used, clippy::expect_used)]

mod cli;

fn main() -> std::process::ExitCode {
    // Panics are caught per job and reported as one clear line; the default
    // hook's multi-line message would only repeat it. PUMICE_BACKTRACE=1 keeps it.
    if std::env::var_os("PUMICE_BACKTRACE").is_none() {
        std::panic::set_hook(Box::new(|_| {}));
    }
    std::process::ExitCode::from(cli::main() as u8)
}
