//! The `cairn` command-line tool: parses the command line, runs it and maps
//! the outcome to the documented exit codes.

use std::process::ExitCode;

use cairn_host_check::cli::{self, Cli};
use clap::Parser;

fn main() -> ExitCode {
    let cli = Cli::parse();
    match cli::execute(cli) {
        Ok(code) => ExitCode::from(code),
        Err(failure) => {
            eprintln!("error: {}", failure.error);
            let mut source = failure.error.source();
            while let Some(e) = source {
                eprintln!("  caused by: {e}");
                source = e.source();
            }
            ExitCode::from(failure.code)
        }
    }
}
