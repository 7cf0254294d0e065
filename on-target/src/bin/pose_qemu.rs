//! Runs the pose scenario and the nine-state run in f32 on a Cortex-M4F
//! (QEMU's `mps2-an386`) and prints the covariance and state as bit patterns
//! over semihosting, for the host test that compares them with its own f32
//! run.
//! `cargo run --release --bin pose_qemu` in `on-target/`.
#![no_std]
#![no_main]

use cairn_on_target::{Line, exit, scenario};
use cortex_m_rt::entry;

#[entry]
fn main() -> ! {
    let s = scenario::run(core::hint::black_box(scenario::STEPS));
    let mut line = Line::new();
    line.text("cairn-pose steps ").dec(scenario::STEPS).send();
    line.text("P");
    for v in s.p {
        line.text(" ").hex(v);
    }
    line.send();
    line.text("x");
    for v in s.x {
        line.text(" ").hex(v);
    }
    line.send();
    line.text("trace ").hex(s.trace).send();
    line.text("outcomes applied ")
        .dec(s.applied)
        .text(" gated ")
        .dec(s.gated)
        .text(" refused ")
        .dec(s.refused)
        .send();
    let l = scenario::run_linear(core::hint::black_box(scenario::LINEAR_STEPS));
    line.text("linear-trace");
    for v in l.traces {
        line.text(" ").hex(v);
    }
    line.send();
    line.text("linear-refused ").dec(l.refused).send();
    exit(s.refused == 0 && l.refused == 0)
}
