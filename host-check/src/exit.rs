//! The exit codes every subcommand shares and the failure that carries
//! one, below the command line and the commands alike.

use std::fmt;

/// Exit code when the variant to flash passes.
pub const EXIT_PASS: u8 = 0;
/// Exit code when the variant to flash fails.
pub const EXIT_FAIL: u8 = 1;
/// Exit code for bad input (spec, files, command line).
pub const EXIT_BAD_INPUT: u8 = 2;

/// A failure with its exit code.
#[derive(Debug)]
pub struct Failure {
    /// Exit code.
    pub code: u8,
    /// What went wrong.
    pub error: Box<dyn std::error::Error + Send + Sync>,
}

impl fmt::Display for Failure {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        self.error.fmt(f)
    }
}

/// A failure with exit code 2 (bad input).
pub fn bad(e: impl Into<Box<dyn std::error::Error + Send + Sync>>) -> Failure {
    Failure {
        code: EXIT_BAD_INPUT,
        error: e.into(),
    }
}

/// A plain message as an error.
#[derive(Debug)]
pub struct Message(pub String);
impl fmt::Display for Message {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(&self.0)
    }
}
impl std::error::Error for Message {}
