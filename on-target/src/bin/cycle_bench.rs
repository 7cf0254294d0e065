//! Times the pose filter's predict and updates with the DWT cycle counter and
//! prints min / mean / max cycles per call over semihosting. Flash it on a
//! Cortex-M4F or M7 board with a debugger attached (semihosting needs one).
//!
//! Under QEMU it runs but cannot measure: QEMU 7.2 does not model the DWT
//! cycle counter, which reads 0 there; the binary says so. Use `cairn cost`
//! for an estimate without hardware.
#![no_std]
#![no_main]

use cairn_core::pose::Odometry;
use cairn_on_target::scenario::{self, Lcg};
use cairn_on_target::{Line, exit, probe};
use cortex_m::peripheral::DWT;
use cortex_m_rt::entry;
use nalgebra::{Vector1, Vector2};

/// Calls per operation.
const CALLS: u32 = 200;

struct Stats {
    min: u32,
    max: u32,
    total: u64,
    calls: u32,
}

impl Stats {
    const fn new() -> Self {
        Self {
            min: u32::MAX,
            max: 0,
            total: 0,
            calls: 0,
        }
    }
    fn add(&mut self, cycles: u32) {
        self.min = self.min.min(cycles);
        self.max = self.max.max(cycles);
        self.total += u64::from(cycles);
        self.calls += 1;
    }
    fn report(&self, name: &str, overhead: u32) {
        let mean = self
            .total
            .checked_div(u64::from(self.calls))
            .unwrap_or(0)
            .min(u64::from(u32::MAX)) as u32;
        Line::new()
            .text(name)
            .text(" cycles min ")
            .dec(self.min.saturating_sub(overhead))
            .text(" mean ")
            .dec(mean.saturating_sub(overhead))
            .text(" max ")
            .dec(self.max.saturating_sub(overhead))
            .text(" calls ")
            .dec(self.calls)
            .send();
    }
}

/// Cycles taken by `op`, read around it from the DWT counter.
#[inline(always)]
fn timed(op: impl FnOnce()) -> u32 {
    let start = DWT::cycle_count();
    op();
    DWT::cycle_count().wrapping_sub(start)
}

#[entry]
fn main() -> ! {
    let Some(mut cp) = cortex_m::Peripherals::take() else {
        exit(false)
    };
    cp.DCB.enable_trace();
    DWT::unlock();
    cp.DWT.set_cycle_count(0);
    cp.DWT.enable_cycle_counter();

    let models = scenario::models();
    let mut filter = scenario::initial_filter();
    let mut noise = Lcg(0x00c0_ffee);
    let (mut predict, mut position, mut heading) = (Stats::new(), Stats::new(), Stats::new());
    let mut overhead = u32::MAX;
    let mut refused = 0u32;
    for _ in 0..CALLS {
        overhead = overhead.min(timed(|| core::hint::black_box(())));
        let odo = Odometry {
            speed: 0.6 + 0.02 * noise.signed_unit(),
            yaw_rate: 0.1 + 0.01 * noise.signed_unit(),
        };
        predict.add(timed(|| {
            refused += u32::from(
                probe::pose_predict(&mut filter, &models.motion, &odo, scenario::DT).is_err(),
            );
        }));
        let x = *filter.state();
        let z = Vector2::new(
            x[0] + 0.05 * noise.signed_unit(),
            x[1] + 0.05 * noise.signed_unit(),
        );
        position.add(timed(|| {
            refused += u32::from(
                probe::pose_position_update(&mut filter, &models.beacon, &z, Some(13.82)).is_err(),
            );
        }));
        let z = Vector1::new(x[2] + 0.02 * noise.signed_unit());
        heading.add(timed(|| {
            refused += u32::from(
                probe::pose_heading_update(&mut filter, &models.compass, &z, Some(10.83)).is_err(),
            );
        }));
    }
    Line::new()
        .text("cairn cycle bench: pose filter, f32 Joseph, ")
        .dec(CALLS)
        .text(" calls each, counter overhead ")
        .dec(overhead)
        .text(" cycles subtracted")
        .send();
    predict.report("predict (odometry)", overhead);
    position.report("update (position fix, m = 2)", overhead);
    heading.report("update (heading fix, m = 1)", overhead);
    if predict.max == 0 {
        Line::new()
            .text("note: the DWT cycle counter reads 0, so nothing was measured. ")
            .text("QEMU does not model the DWT; run this on hardware.")
            .send();
    }
    exit(refused == 0)
}
