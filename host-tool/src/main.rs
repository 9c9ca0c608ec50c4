//! The `frothline` binary: see `frothline --help`.

use std::process::ExitCode;

fn main() -> ExitCode {
    match frothline_host::cli::run(std::env::args_os()) {
        Ok(()) => ExitCode::SUCCESS,
        Err(e) => {
            eprintln!("error: {e}");
            ExitCode::from(e.exit_code())
        }
    }
}
