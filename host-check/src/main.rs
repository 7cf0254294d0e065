//! The `cairn` command-line tool.

fn main() {}
