//! Runs the sled's 15-state Joseph-form filter in f32 on a Cortex-M4F over
//! a simulated 30 s tow and prints the bits: a hash of the covariance and
//! state after every operation (a checkpoint line every 250 steps), then the
//! final covariance and state, for the host test that runs the same source.
#![no_std]
#![no_main]

use cairn_probe::{Line, exit, print_bits};
use skerry_sled_probe::run::{self, STEPS};

#[cairn_probe::entry]
fn main() -> ! {
    let mut line = Line::new();
    line.text("sled-bits steps ").dec(STEPS).send();
    let (tally, filter) = run::run(core::hint::black_box(STEPS), 250, |step, trace| {
        Line::new()
            .text("chk ")
            .dec(step)
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
