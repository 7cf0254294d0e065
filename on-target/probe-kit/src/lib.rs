//! # cairn-probe
//!
//! The harness a firmware project applies to its own filter to get three
//! answers on a Cortex-M4F (QEMU's `mps2-an386`): what each predict and
//! update costs (`cairn cost --probe`), whether the target's f32 bits are the
//! host's, and whether any panic path survives in the code it will flash.
//!
//! ## The probe symbol contract
//! An operation `NAME` is priced when the ELF holds a function symbol named
//! exactly `cairn_probe__NAME` (see [`PROBE_PREFIX`]), never inlined, that
//! performs one call of the operation; the binary calls each probe a fixed
//! number of times and then prints, over semihosting,
//!
//! ```text
//! cairn probe: calls <N> failures <F>
//! cairn probe: operations <NAME> <NAME> ...
//! ```
//!
//! and exits with success when `F` is 0 ([`finish`] does both). `cairn cost`
//! attributes every instruction executed between a probe's entry and the
//! return to its caller (callees included) to that probe, and lists the
//! operations in the announced order. [`probe!`], [`predict_probe!`] and
//! [`update_probe!`] write such functions. The full contract, with the
//! commands, is in the repository's `docs/target-probes.md`.
//!
//! ## The no-panic link proof
//! This crate's panic handler calls a function that no object file defines,
//! `cairn_a_panic_path_survived`. If any panic path survives optimisation in
//! a binary that uses the harness, the handler is linked in and the release
//! link fails naming that symbol: a release build that links proves that
//! the filter, as the binary uses it, cannot panic.
#![no_std]
#![deny(missing_docs)]

use core::panic::PanicInfo;

pub use cairn_core;
pub use cortex_m_rt::entry;

/// The prefix of every probe symbol: `cairn_probe__` then the operation's
/// name (letters, digits and underscores).
pub const PROBE_PREFIX: &str = "cairn_probe__";

unsafe extern "Rust" {
    /// Deliberately never defined anywhere: see the crate documentation.
    fn cairn_a_panic_path_survived() -> !;
}

#[panic_handler]
fn on_panic(_info: &PanicInfo) -> ! {
    // SAFETY: never runs; a reachable call makes the link fail.
    unsafe { cairn_a_panic_path_survived() }
}

/// Defines a probe: a never-inlined function exported as
/// `cairn_probe__NAME`, callable from the binary as `NAME`. Any signature
/// and any filter form (Joseph, conventional, U-D, a hand-written step).
///
/// ```ignore
/// cairn_probe::probe! {
///     /// One radio fix.
///     fn radio(f: &mut Kalman<f32, 5, Joseph>, m: &RadioFix<f32>, z: &Vector2<f32>)
///         -> Result<Outcome<f32>, FilterError> {
///         f.update_with(m, z, Some(13.82))
///     }
/// }
/// ```
#[macro_export]
macro_rules! probe {
    ($(#[$meta:meta])* fn $name:ident($($arg:ident: $ty:ty),* $(,)?) $(-> $ret:ty)? $body:block) => {
        $(#[$meta])*
        #[inline(never)]
        #[unsafe(export_name = concat!("cairn_probe__", stringify!($name)))]
        pub fn $name($($arg: $ty),*) $(-> $ret)? $body
    };
}

/// Defines the probe of a predict through a process model:
/// `predict_probe!(NAME, FILTER, MODEL, N)` makes
/// `fn NAME(filter: &mut FILTER, model: &MODEL, input: &MODEL::Input, dt: f32)
/// -> Result<(), FilterError>`, for any filter that implements
/// [`cairn_core::Estimator`] (`Kalman` in either covariance form, `UdKalman`).
#[macro_export]
macro_rules! predict_probe {
    ($(#[$meta:meta])* $name:ident, $filter:ty, $model:ty, $n:expr) => {
        $crate::probe! {
            $(#[$meta])*
            fn $name(
                filter: &mut $filter,
                model: &$model,
                input: &<$model as $crate::cairn_core::ProcessModel<f32, { $n }>>::Input,
                dt: f32,
            ) -> Result<(), $crate::cairn_core::FilterError> {
                $crate::cairn_core::Estimator::<f32, { $n }>::predict_with(filter, model, input, dt)
            }
        }
    };
}

/// Defines the probe of an update through a measurement model:
/// `update_probe!(NAME, FILTER, MODEL, N, M)` makes
/// `fn NAME(filter: &mut FILTER, model: &MODEL, z: &SVector<f32, M>,
/// gate: Option<f32>) -> Result<Outcome<f32>, FilterError>`.
#[macro_export]
macro_rules! update_probe {
    ($(#[$meta:meta])* $name:ident, $filter:ty, $model:ty, $n:expr, $m:expr) => {
        $crate::probe! {
            $(#[$meta])*
            fn $name(
                filter: &mut $filter,
                model: &$model,
                z: &$crate::cairn_core::nalgebra::SVector<f32, { $m }>,
                gate: Option<f32>,
            ) -> Result<$crate::cairn_core::Outcome<f32>, $crate::cairn_core::FilterError> {
                $crate::cairn_core::Estimator::<f32, { $n }>::update_with(filter, model, z, gate)
            }
        }
    };
}

/// A fixed line buffer written to the host over semihosting, without
/// `core::fmt` (whose machinery carries panic paths).
pub struct Line {
    buf: [u8; 240],
    len: usize,
}

impl Default for Line {
    fn default() -> Self {
        Self::new()
    }
}

impl Line {
    /// An empty line.
    pub const fn new() -> Self {
        Self {
            buf: [0; 240],
            len: 0,
        }
    }

    /// Appends bytes; what does not fit is dropped.
    pub fn text(&mut self, s: &str) -> &mut Self {
        for &b in s.as_bytes() {
            if let Some(slot) = self.buf.get_mut(self.len) {
                *slot = b;
                self.len += 1;
            }
        }
        self
    }

    /// Appends a word as eight lower-case hex digits.
    pub fn hex(&mut self, v: u32) -> &mut Self {
        for i in 0..8 {
            let nibble = ((v >> (28 - 4 * i)) & 0xf) as u8;
            let d = if nibble < 10 {
                b'0' + nibble
            } else {
                b'a' + nibble - 10
            };
            if let Some(slot) = self.buf.get_mut(self.len) {
                *slot = d;
                self.len += 1;
            }
        }
        self
    }

    /// Appends a word in decimal.
    pub fn dec(&mut self, mut v: u32) -> &mut Self {
        let mut digits = [0u8; 10];
        let mut start = digits.len();
        loop {
            start -= 1;
            if let Some(d) = digits.get_mut(start) {
                *d = b'0' + (v % 10) as u8;
            }
            v /= 10;
            if v == 0 || start == 0 {
                break;
            }
        }
        for &d in digits.get(start..).unwrap_or(&[]) {
            if let Some(slot) = self.buf.get_mut(self.len) {
                *slot = d;
                self.len += 1;
            }
        }
        self
    }

    /// Writes the line and a newline to the host's standard output, then
    /// empties the buffer. Output errors are ignored: there is nowhere to
    /// report them.
    pub fn send(&mut self) {
        self.text("\n");
        if let Ok(mut out) = cortex_m_semihosting::hio::hstdout() {
            let _ = out.write_all(self.buf.get(..self.len).unwrap_or(&[]));
        }
        self.len = 0;
    }
}

/// Prints the cost probe's closing lines (the contract above) and ends the
/// run: success when no call failed.
pub fn finish(calls: u32, failures: u32, operations: &[&str]) -> ! {
    let mut line = Line::new();
    line.text("cairn probe: calls ")
        .dec(calls)
        .text(" failures ")
        .dec(failures)
        .send();
    line.text("cairn probe: operations");
    for name in operations {
        line.text(" ").text(name);
    }
    line.send();
    exit(failures == 0)
}

/// Ends the QEMU run (or halts a debugger session) with a status.
pub fn exit(success: bool) -> ! {
    use cortex_m_semihosting::debug;
    debug::exit(if success {
        debug::EXIT_SUCCESS
    } else {
        debug::EXIT_FAILURE
    });
    loop {
        cortex_m::asm::bkpt();
    }
}

/// Prints a matrix's or vector's f32 bit patterns, one line per column
/// (column-major, as nalgebra stores them): `KEY <column> <hex> ...`.
pub fn print_bits<const R: usize, const C: usize>(
    key: &str,
    m: &cairn_core::nalgebra::SMatrix<f32, R, C>,
) {
    let mut line = Line::new();
    for (j, column) in m.column_iter().enumerate() {
        line.text(key).text(" ").dec(j as u32);
        for v in column.iter() {
            line.text(" ").hex(v.to_bits());
        }
        line.send();
    }
}
