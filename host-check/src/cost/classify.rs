//! Instruction classes of ARMv7E-M Thumb-2 with FPv4-SP, read from
//! `llvm-objdump` mnemonics: the vocabulary of the cycle tables.

/// What an instruction does, as far as timing is concerned.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, PartialOrd, Ord)]
pub enum Class {
    /// VADD, VSUB (f32).
    FpAdd,
    /// VMUL, VNMUL (f32).
    FpMul,
    /// VMLA, VMLS, VNMLA, VNMLS: multiply then add, rounded twice.
    FpMac,
    /// VFMA, VFMS, VFNMA, VFNMS: fused multiply-add.
    FpFused,
    /// VDIV (f32).
    FpDiv,
    /// VSQRT (f32).
    FpSqrt,
    /// VLDR of one single (`s`) register.
    FpLoad,
    /// VLDR of one double (`d`) register.
    FpLoadDouble,
    /// VSTR of one register.
    FpStore,
    /// VLDM or VPOP; the payload is the number of 32-bit words.
    FpLoadMulti(u8),
    /// VSTM or VPUSH; the payload is the number of 32-bit words.
    FpStoreMulti(u8),
    /// VMOV between a core and an FP register (or a pair).
    FpMoveCore,
    /// VMOV between FP registers or of an immediate.
    FpMove,
    /// VCMP, VCVT, VABS, VNEG, VMRS, VMSR and the rest.
    FpOther,
    /// Integer data processing (ADD, MOV, CMP, shifts, bit fields, ...).
    IntAlu,
    /// Integer multiply and multiply-accumulate, 32 and 64 bit.
    IntMul,
    /// SDIV, UDIV.
    IntDiv,
    /// LDR and its byte, half-word and dual forms.
    Load,
    /// STR and its byte, half-word and dual forms.
    Store,
    /// LDM or POP without the PC; payload: registers.
    LoadMulti(u8),
    /// STM or PUSH; payload: registers.
    StoreMulti(u8),
    /// A branch with an immediate target (B, BL, CBZ, CBNZ, conditional B).
    Branch,
    /// A branch through a register or a load into the PC (BX, BLX, POP {..,pc},
    /// LDR pc); the payload is the number of words loaded (0 for BX/BLX).
    BranchIndirect(u8),
    /// IT: sets the condition of up to four following instructions.
    It,
    /// NOP, barriers, hints and anything else.
    Other,
}

impl Class {
    /// `true` for classes that may redirect the program counter.
    pub fn is_branch(self) -> bool {
        matches!(self, Class::Branch | Class::BranchIndirect(_))
    }

    /// `true` for single loads and stores, which the Cortex-M4 pipelines
    /// with a neighbouring single load or store.
    pub fn is_single_memory(self) -> bool {
        matches!(self, Class::Load | Class::Store)
    }
}

/// Counts the registers in a `{r4, r5, lr}` list; D registers count two words
/// when `words` is set.
fn register_words(operands: &str, words: bool) -> u8 {
    let Some(open) = operands.find('{') else {
        return 1;
    };
    let close = operands[open..]
        .find('}')
        .map_or(operands.len(), |c| open + c);
    let list = &operands[open + 1..close];
    let mut n = 0u32;
    for reg in list.split(',') {
        let reg = reg.trim();
        if reg.is_empty() {
            continue;
        }
        // A range such as d8-d15 (some printers use one).
        let count = match reg.split_once('-') {
            Some((a, b)) => {
                let a = a.trim_start_matches(|c: char| c.is_ascii_alphabetic());
                let b = b
                    .trim()
                    .trim_start_matches(|c: char| c.is_ascii_alphabetic());
                match (a.parse::<u32>(), b.parse::<u32>()) {
                    (Ok(x), Ok(y)) if y >= x => y - x + 1,
                    _ => 1,
                }
            }
            None => 1,
        };
        let per = if words && reg.starts_with('d') { 2 } else { 1 };
        n += count * per;
    }
    n.clamp(1, 255) as u8
}

/// The condition-code suffixes of ARM assembly.
const CONDITIONS: [&str; 16] = [
    "eq", "ne", "cs", "hs", "cc", "lo", "mi", "pl", "vs", "vc", "hi", "ls", "ge", "lt", "gt", "le",
];

/// Classifies an exact base mnemonic (no width, no condition), or `None`
/// when the name is not one of the special cases.
fn exact(base: &str, ops: &str) -> Option<Class> {
    let writes_pc = ops.split(',').next().is_some_and(|d| d.trim() == "pc");
    Some(match base {
        "b" | "bl" | "cbz" | "cbnz" => Class::Branch,
        "bx" | "blx" => Class::BranchIndirect(0),
        "tbb" | "tbh" => Class::BranchIndirect(1),
        "pop" | "ldm" | "ldmia" | "ldmdb" | "ldmfd" => {
            let n = register_words(ops, false);
            if ops.contains("pc") {
                Class::BranchIndirect(n)
            } else {
                Class::LoadMulti(n)
            }
        }
        "push" | "stm" | "stmia" | "stmdb" | "stmfd" => {
            Class::StoreMulti(register_words(ops, false))
        }
        "ldr" | "ldrb" | "ldrh" | "ldrsb" | "ldrsh" | "ldrd" | "ldrex" | "ldrt" => {
            if writes_pc {
                Class::BranchIndirect(1)
            } else {
                Class::Load
            }
        }
        "str" | "strb" | "strh" | "strd" | "strex" | "strt" => Class::Store,
        "mul" | "muls" | "mla" | "mls" | "umull" | "smull" | "umlal" | "smlal" | "smulbb"
        | "smlabb" | "smmul" | "smmla" | "umaal" => Class::IntMul,
        "sdiv" | "udiv" => Class::IntDiv,
        "nop" | "dsb" | "dmb" | "isb" | "bkpt" | "wfi" | "wfe" | "sev" | "cpsid" | "cpsie"
        | "mrs" | "msr" | "svc" | "udf" | "yield" => Class::Other,
        "mov" | "add" if writes_pc => Class::BranchIndirect(0),
        _ if base.len() <= 5
            && base.starts_with("it")
            && base[1..].chars().all(|c| c == 't' || c == 'e') =>
        {
            Class::It
        }
        _ => return None,
    })
}

/// Classifies one instruction from its `llvm-objdump` mnemonic and operands.
pub fn classify(mnemonic: &str, operands: &str) -> Class {
    let m = mnemonic.to_ascii_lowercase();
    let ops = operands.to_ascii_lowercase();
    if m.starts_with('v') {
        return classify_fp(&m, &ops);
    }
    let m = m
        .strip_suffix(".w")
        .or_else(|| m.strip_suffix(".n"))
        .unwrap_or(&m);
    if let Some(c) = exact(m, &ops) {
        return c;
    }
    // A conditional form (a branch such as `bhs`, or `movlt` inside an IT
    // block): strip the condition and try again.
    for cond in CONDITIONS {
        if let Some(stem) = m.strip_suffix(cond)
            && let Some(c) = exact(stem, &ops)
        {
            return c;
        }
    }
    Class::IntAlu
}

fn classify_fp(m: &str, ops: &str) -> Class {
    let base = m.split('.').next().unwrap_or(m);
    match base {
        "vadd" | "vsub" => Class::FpAdd,
        "vmul" | "vnmul" => Class::FpMul,
        "vmla" | "vmls" | "vnmla" | "vnmls" => Class::FpMac,
        "vfma" | "vfms" | "vfnma" | "vfnms" => Class::FpFused,
        "vdiv" => Class::FpDiv,
        "vsqrt" => Class::FpSqrt,
        "vldr" => {
            if ops.trim_start().starts_with('d') {
                Class::FpLoadDouble
            } else {
                Class::FpLoad
            }
        }
        "vstr" => Class::FpStore,
        "vldmia" | "vldmdb" | "vldm" | "vpop" => Class::FpLoadMulti(register_words(ops, true)),
        "vstmia" | "vstmdb" | "vstm" | "vpush" => Class::FpStoreMulti(register_words(ops, true)),
        "vmov" => {
            // A core register among the operands: a transfer across files.
            let core = ops.split(',').any(|o| {
                let o = o.trim();
                o.starts_with('r') || o == "lr" || o == "ip" || o == "sp" || o == "fp"
            });
            if core {
                Class::FpMoveCore
            } else {
                Class::FpMove
            }
        }
        _ => Class::FpOther,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn floating_point_classes() {
        assert_eq!(classify("vadd.f32", "s0, s1, s2"), Class::FpAdd);
        assert_eq!(classify("vsub.f32", "s0, s1, s2"), Class::FpAdd);
        assert_eq!(classify("vnmul.f32", "s19, s31, s20"), Class::FpMul);
        assert_eq!(classify("vmla.f32", "s0, s1, s2"), Class::FpMac);
        assert_eq!(classify("vmls.f32", "s0, s1, s2"), Class::FpMac);
        assert_eq!(classify("vfma.f32", "s0, s1, s2"), Class::FpFused);
        assert_eq!(classify("vdiv.f32", "s0, s1, s2"), Class::FpDiv);
        assert_eq!(classify("vsqrt.f32", "s0, s1"), Class::FpSqrt);
        assert_eq!(classify("vldr", "s22, [pc, #652]"), Class::FpLoad);
        assert_eq!(classify("vldr", "d8, [r0, #8]"), Class::FpLoadDouble);
        assert_eq!(classify("vstr", "s0, [sp, #4]"), Class::FpStore);
        assert_eq!(
            classify("vpush", "{d8, d9, d10, d11, d12, d13, d14, d15}"),
            Class::FpStoreMulti(16)
        );
        assert_eq!(classify("vpop", "{s16, s17}"), Class::FpLoadMulti(2));
        assert_eq!(classify("vmov", "r1, s24"), Class::FpMoveCore);
        assert_eq!(classify("vmov.f32", "s26, #5.000000e-01"), Class::FpMove);
        assert_eq!(classify("vmov.f32", "s0, s16"), Class::FpMove);
        assert_eq!(classify("vcmp.f32", "s0, #0"), Class::FpOther);
        assert_eq!(classify("vmrs", "APSR_nzcv, fpscr"), Class::FpOther);
    }

    #[test]
    fn integer_memory_and_branch_classes() {
        assert_eq!(classify("add.w", "r0, r1, r2"), Class::IntAlu);
        assert_eq!(classify("movs", "r2, #0"), Class::IntAlu);
        assert_eq!(classify("movlt", "r1, #1"), Class::IntAlu);
        assert_eq!(classify("addeq.w", "r0, r0, #1"), Class::IntAlu);
        assert_eq!(classify("cmp.w", "r1, #2139095040"), Class::IntAlu);
        assert_eq!(classify("bics", "r0, r1"), Class::IntAlu);
        assert_eq!(classify("umull", "r0, r1, r2, r3"), Class::IntMul);
        assert_eq!(classify("mls", "r0, r1, r2, r3"), Class::IntMul);
        assert_eq!(classify("udiv", "r0, r1, r2"), Class::IntDiv);
        assert_eq!(classify("ldr", "r0, [pc, #56]"), Class::Load);
        assert_eq!(classify("ldrd", "r0, r1, [sp]"), Class::Load);
        assert_eq!(classify("str", "r8, [sp, #-4]!"), Class::Store);
        assert_eq!(classify("strb.w", "r0, [r1, #3]"), Class::Store);
        assert_eq!(
            classify("push", "{r4, r5, r6, r7, lr}"),
            Class::StoreMulti(5)
        );
        assert_eq!(classify("pop", "{r4, r5}"), Class::LoadMulti(2));
        assert_eq!(classify("pop", "{r7, pc}"), Class::BranchIndirect(2));
        assert_eq!(
            classify("pop.w", "{r4, r5, r6, pc}"),
            Class::BranchIndirect(4)
        );
        assert_eq!(classify("bl", "0x89b0 <sinf>"), Class::Branch);
        assert_eq!(classify("b.w", "0x1000"), Class::Branch);
        assert_eq!(classify("beq", "0x412"), Class::Branch);
        assert_eq!(classify("bne.w", "0x412"), Class::Branch);
        assert_eq!(classify("bls", "0x412"), Class::Branch);
        assert_eq!(classify("ble", "0x412"), Class::Branch);
        assert_eq!(classify("cbz", "r0, 0x412"), Class::Branch);
        assert_eq!(classify("bx", "lr"), Class::BranchIndirect(0));
        assert_eq!(classify("blx", "r3"), Class::BranchIndirect(0));
        assert_eq!(classify("ldr", "pc, [sp], #4"), Class::BranchIndirect(1));
        assert_eq!(classify("it", "lt"), Class::It);
        assert_eq!(classify("itte", "ne"), Class::It);
        assert_eq!(classify("nop", ""), Class::Other);
        assert_eq!(classify("dsb", "sy"), Class::Other);
    }
}
