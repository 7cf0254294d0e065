//! Replays the first 90 s of the tug's recorded shift through its
//! Joseph-form filter in f32 on a Cortex-M4F and prints the bits: a hash of
//! the covariance and state after every row (a checkpoint line every 500
//! rows), then the final covariance and state, for the host test that runs
//! the same rows through the same source.
#![no_std]
#![no_main]

use bramble_tug_probe::{SHIFT, run};
use cairn_probe::{Line, exit, print_bits};

#[cairn_probe::entry]
fn main() -> ! {
    let mut line = Line::new();
    line.text("tug-bits rows ").dec(SHIFT.len() as u32).send();
    let (tally, filter) = run::run(core::hint::black_box(SHIFT), 500, |row, trace| {
        Line::new()
            .text("chk ")
            .dec(row as u32)
            .text(" ")
            .hex(trace)
            .send();
    });
    print_bits("P", filter.covariance());
    print_bits("x", filter.state());
    line.text("trace ").hex(tally.trace).send();
    line.text("outcomes applied ")
        .dec(tally.applied)
        .text(" gated ")
        .dec(tally.gated)
        .text(" refused ")
        .dec(tally.refused)
        .send();
    exit(tally.refused == 0)
}
