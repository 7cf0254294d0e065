//! Shared pieces of cairn's Cortex-M binaries: the no-panic link proof, a
//! formatting-free semihosting writer, the pose scenario and the cost probes.
//!
//! # The no-panic link proof
//! The panic handler below calls a function that no object file defines. If
//! any panic path survives optimisation in a binary of this crate, the handler
//! is linked in and the link fails with an undefined symbol,
//! `cairn_a_panic_path_survived`. A release build that links is therefore a
//! proof that the filter core, as used here, cannot panic.
#![no_std]
#![deny(missing_docs)]

use core::panic::PanicInfo;

pub mod probe;
pub mod scenario;

unsafe extern "Rust" {
    /// Deliberately never defined anywhere: see the crate documentation.
    fn cairn_a_panic_path_survived() -> !;
}

#[panic_handler]
fn on_panic(_info: &PanicInfo) -> ! {
    // SAFETY: never runs; a reachable call makes the link fail.
    unsafe { cairn_a_panic_path_survived() }
}

/// A fixed line buffer written to the host over semihosting, without
/// `core::fmt` (whose machinery carries panic paths).
pub struct Line {
    buf: [u8; 160],
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
            buf: [0; 160],
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
        let mut digits = [0u8; 8];
        for (i, d) in digits.iter_mut().enumerate() {
            let nibble = ((v >> (28 - 4 * i)) & 0xf) as u8;
            *d = if nibble < 10 {
                b'0' + nibble
            } else {
                b'a' + nibble - 10
            };
        }
        self.text(core::str::from_utf8(&digits).unwrap_or("????????"))
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
        let tail = digits.get(start..).unwrap_or(&[]);
        self.text(core::str::from_utf8(tail).unwrap_or("?"))
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
