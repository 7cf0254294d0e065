//! Per-instruction cycle tables for the Cortex-M4F and a throughput model of
//! the Cortex-M7, each with the published source it comes from.

use super::classify::Class;

/// The core a cycle figure is for.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Core {
    /// Cortex-M4 with FPv4-SP.
    M4,
    /// Cortex-M7 with a single- and double-precision FPU.
    M7,
}

/// Pipeline refill after a taken branch with an immediate target (the P in
/// "1 + P", P = 1 to 3): Arm Cortex-M4 Technical Reference Manual (DDI 0439),
/// section 3.3, instruction timings (from memory, as in docs/references.md). We take
/// the usual case, 1.
pub const M4_REFILL_IMMEDIATE: u32 = 1;
/// Refill after a branch through a register or a load to the PC; the TRM
/// gives 1 to 3, and such branches normally take the longer refill (from
/// memory): we take 2.
pub const M4_REFILL_REGISTER: u32 = 2;

/// Cortex-M4F cycles of one executed instruction at zero wait states.
///
/// Sources, as listed in docs/references.md:
/// - FPU: Arm Cortex-M4 TRM (DDI 0439), FPU instruction timing table, as
///   reproduced in TI SWCU192 (CC13x2/CC26x2 TRM, 2021) Table 3-27:
///   VADD/VSUB/VMUL/VNMUL 1; VMLA/VMLS/VNMLA/VNMLS 3; VFMA family 3;
///   VDIV 14; VSQRT 14 (from memory); VLDR .F32 2, .F64 3; VSTR 2 (from
///   memory); VLDM/VPOP and VSTM/VPUSH 1 + N (from memory); VMOV core to FP
///   2, immediate or FP to FP 1; VMRS/VMSR, VCMP, VCVT, VABS, VNEG 1.
/// - Integer: Cortex-M4 TRM section 3.3 (same sources): ALU, MUL, MLA, UMULL
///   1; SDIV/UDIV 2 to 12 (we take 7, the middle, and say so in reports);
///   a write to the PC 1 + P; `STR` 1; LDR alone 2, pipelined behind a
///   neighbouring single load or store 1; LDM/STM 1 + N (from memory).
/// - IT: counted as 1, although the M4 can fold it into a preceding 16-bit
///   instruction (TRM section 3.3, from memory): an upper figure.
///
/// `taken` says whether a branch left its block for somewhere other than the
/// next instruction; `after_memory` whether the previous instruction in
/// the block was a single load or store.
pub fn m4_cycles(class: Class, taken: bool, after_memory: bool) -> u32 {
    match class {
        Class::FpAdd | Class::FpMul => 1,
        Class::FpMac | Class::FpFused => 3,
        Class::FpDiv | Class::FpSqrt => 14,
        Class::FpLoad | Class::FpStore => 2,
        Class::FpLoadDouble => 3,
        Class::FpLoadMulti(n) | Class::FpStoreMulti(n) => 1 + u32::from(n),
        Class::FpMoveCore => 2,
        Class::FpMove | Class::FpOther => 1,
        Class::IntAlu | Class::IntMul | Class::It | Class::Other => 1,
        Class::IntDiv => 7,
        Class::Load => {
            if after_memory {
                1
            } else {
                2
            }
        }
        Class::Store => 1,
        Class::LoadMulti(n) | Class::StoreMulti(n) => 1 + u32::from(n),
        Class::Branch => {
            if taken {
                1 + M4_REFILL_IMMEDIATE
            } else {
                1
            }
        }
        Class::BranchIndirect(n) => {
            // A register branch always changes the flow; a load into the PC
            // also pays for its loads.
            let load = if n > 0 { 1 + u32::from(n) } else { 1 };
            load + M4_REFILL_REGISTER
        }
    }
}

/// The Cortex-M7 latencies of LLVM's scheduling model (ARMScheduleM7.td),
/// f32 / f64: add 3 / 4, mul 3 / 7, VMLA and VFMA 6 / 11, VDIV 16 / 30,
/// VSQRT 16 / 30; f64 operations occupy both FP ports. Arm publishes no
/// per-instruction table for the M7.
///
/// The estimate built from it is a throughput bound: the M7 issues up to two
/// instructions per cycle, at most one of them a load or store and one an
/// FP operation (f64 ones take both ports), and divide and square root block
/// the FP unit for their latency. Dependency stalls are not modelled, so the
/// figure is optimistic; branch refills are taken as 1 cycle each (the M7's
/// predictor hides most of them; from memory).
#[derive(Debug, Clone, Copy, Default, PartialEq)]
pub struct M7Throughput {
    issue: f64,
    fp: f64,
    memory: f64,
    branch: f64,
}

impl M7Throughput {
    /// Adds `count` executions of an instruction of `class`.
    pub fn add(&mut self, class: Class, count: u64, taken: u64) {
        let c = count as f64;
        self.issue += c * 0.5;
        match class {
            Class::FpAdd | Class::FpMul | Class::FpMac | Class::FpFused | Class::FpOther => {
                self.fp += c;
            }
            Class::FpDiv | Class::FpSqrt => self.fp += c * 16.0,
            Class::FpLoad | Class::FpStore | Class::FpLoadDouble | Class::Load | Class::Store => {
                self.memory += c;
            }
            Class::FpLoadMulti(n)
            | Class::FpStoreMulti(n)
            | Class::LoadMulti(n)
            | Class::StoreMulti(n) => self.memory += c * f64::from(n).max(1.0) / 2.0,
            Class::BranchIndirect(n) => {
                self.memory += c * f64::from(n) / 2.0;
                self.branch += c;
            }
            Class::Branch => self.branch += taken as f64,
            Class::IntDiv => self.issue += c * 6.0,
            _ => {}
        }
    }

    /// The estimated cycles: the busiest resource plus branch refills.
    pub fn cycles(&self) -> f64 {
        self.issue.max(self.fp).max(self.memory) + self.branch
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::cost::classify::classify;

    /// Cycles of a straight-line listing on the M4, with the pipelining rule.
    fn listing_cycles(lines: &[(&str, &str)]) -> u32 {
        let mut prev_mem = false;
        let mut total = 0;
        for (m, o) in lines {
            let c = classify(m, o);
            total += m4_cycles(c, false, prev_mem);
            prev_mem = c.is_single_memory();
        }
        total
    }

    #[test]
    fn m4_fpu_table_values() {
        // TI SWCU192 Table 3-27 (Cortex-M4 TRM FPU timing): VADD 1, VMUL 1,
        // VMLA 3, VFMA 3, VDIV 14, VLDR 2, VPUSH of 16 words 17.
        assert_eq!(
            m4_cycles(classify("vadd.f32", "s0, s1, s2"), false, false),
            1
        );
        assert_eq!(
            m4_cycles(classify("vmul.f32", "s0, s1, s2"), false, false),
            1
        );
        assert_eq!(
            m4_cycles(classify("vmla.f32", "s0, s1, s2"), false, false),
            3
        );
        assert_eq!(
            m4_cycles(classify("vfma.f32", "s0, s1, s2"), false, false),
            3
        );
        assert_eq!(
            m4_cycles(classify("vdiv.f32", "s0, s1, s2"), false, false),
            14
        );
        assert_eq!(m4_cycles(classify("vldr", "s0, [r0]"), false, false), 2);
        assert_eq!(
            m4_cycles(
                classify("vpush", "{d8, d9, d10, d11, d12, d13, d14, d15}"),
                false,
                false
            ),
            17
        );
        assert_eq!(m4_cycles(classify("vmov", "r0, s0"), false, false), 2);
    }

    #[test]
    fn m4_multiply_add_costs_more_than_split_form() {
        // docs/references.md (measured here): without -C target-cpu=cortex-m4,
        // rustc emits VMLA (3 cycles) where VMUL + VADD (2 cycles) is cheaper.
        let fused = listing_cycles(&[("vmla.f32", "s0, s1, s2")]);
        let split = listing_cycles(&[("vmul.f32", "s3, s1, s2"), ("vadd.f32", "s0, s0, s3")]);
        assert_eq!((fused, split), (3, 2));
    }

    #[test]
    fn m4_integer_and_branch_rules() {
        // Cortex-M4 TRM 3.3 (from memory): consecutive LDRs pipeline, so
        // three loads cost 2 + 1 + 1; a taken immediate branch 1 + P = 2, not
        // taken 1; POP {r4, pc} loads two words then refills: 1 + 2 + 2.
        let loads = listing_cycles(&[
            ("ldr", "r0, [r1]"),
            ("ldr", "r2, [r1, #4]"),
            ("ldr", "r3, [r1, #8]"),
        ]);
        assert_eq!(loads, 4);
        assert_eq!(m4_cycles(Class::Branch, true, false), 2);
        assert_eq!(m4_cycles(Class::Branch, false, false), 1);
        assert_eq!(m4_cycles(classify("pop", "{r4, pc}"), true, false), 5);
        assert_eq!(m4_cycles(classify("bx", "lr"), true, false), 3);
        assert_eq!(
            m4_cycles(classify("push", "{r4, r5, r6, r7, lr}"), false, false),
            6
        );
    }

    #[test]
    fn m7_throughput_bound_is_below_the_m4_for_integer_code() {
        // Dual issue (LLVM ARMScheduleM7.td): four ALU operations issue in
        // two cycles; an FP divide holds the FP unit for 16.
        let mut t = M7Throughput::default();
        t.add(Class::IntAlu, 4, 0);
        assert!((t.cycles() - 2.0).abs() < 1e-12);
        let mut d = M7Throughput::default();
        d.add(Class::FpDiv, 1, 0);
        assert!((d.cycles() - 16.0).abs() < 1e-12);
    }
}
