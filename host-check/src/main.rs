//! The `cairn` command-line tool: parses the command line, runs it and maps
//! the outcome to the documented exit codes.

use std::io::Write;
use std::process::ExitCode;

use cairn_host_check::cli::{self, Cli};
use cairn_host_check::output::printable;
use clap::Parser as _;

fn main() -> ExitCode {
    let cli = match Cli::try_parse() {
        Ok(cli) => cli,
        Err(e) if e.use_stderr() => {
            // A usage error: clap's message on stderr, exit 2 (bad input).
            let _ = e.print();
            return ExitCode::from(cli::EXIT_BAD_INPUT);
        }
        // --help and --version: on standard output like every other text,
        // so a full disk is reported and a closed pipe ends quietly.
        Err(e) => {
            return match cairn_host_check::output::print(&e.render().to_string()) {
                Ok(()) => ExitCode::SUCCESS,
                Err(f) => {
                    let _ = writeln!(std::io::stderr(), "error: {f}");
                    ExitCode::from(f.code)
                }
            };
        }
    };
    match cli::execute(cli) {
        Ok(code) => ExitCode::from(code),
        Err(failure) => {
            // Text from the input (names, file names) is shown with its
            // control characters escaped; a closed stderr is ignored.
            let mut err = std::io::stderr().lock();
            let _ = writeln!(err, "error: {}", printable(&failure.error.to_string()));
            let mut source = failure.error.source();
            while let Some(e) = source {
                let _ = writeln!(err, "  caused by: {}", printable(&e.to_string()));
                source = e.source();
            }
            ExitCode::from(failure.code)
        }
    }
}
