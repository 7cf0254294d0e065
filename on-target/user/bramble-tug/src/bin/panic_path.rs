//! A probe that keeps a panic path on purpose: a row picked by an index the
//! optimiser cannot bound. Its release link must fail on the harness's
//! undefined `cairn_a_panic_path_survived`, which shows the no-panic proof
//! of the other probes discriminates. Built only with `--features
//! panic-path`.
#![no_std]
#![no_main]

use bramble_tug_probe::{SHIFT, run};
use core::hint::black_box;

#[cairn_probe::entry]
fn main() -> ! {
    let mut filter = run::initial_filter();
    let m = run::models();
    // Indexing, not `get`: out of range this panics.
    let row = SHIFT[black_box(SHIFT.len() + 1)];
    let u = bramble_tug::ImuSample {
        gyro: f32::from_bits(row[2]),
        accel: f32::from_bits(row[3]),
    };
    let ok = filter.predict_with(&m.motion, &u, 0.01).is_ok();
    cairn_probe::exit(ok)
}
