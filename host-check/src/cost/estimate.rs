//! Attributes QEMU's executed blocks to the probe calls that ran them and
//! turns the dynamic instruction mix into cycles and operation counts.

use std::collections::{BTreeMap, HashMap};

use super::classify::Class;
use super::listing::{Function, Instruction, function_at};
use super::timing::{M7Throughput, m4_cycles};
use super::trace::Trace;

/// Latency the arithmetic lower bound charges for a divide or square root:
/// the M4's VDIV/VSQRT.F32, 14 cycles (TI SWCU192 Table 3-27).
pub const DIV_SQRT_BOUND: u64 = 14;

/// Executed floating-point operations.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq)]
pub struct FpOps {
    /// f32 adds and subtracts in hardware (a VMLA counts one here).
    pub add: u64,
    /// f32 multiplies in hardware (a VMLA counts one here).
    pub mul: u64,
    /// Of those, multiply-adds issued as one VMLA/VFMA-family instruction.
    pub mac: u64,
    /// f32 divides.
    pub div: u64,
    /// f32 square roots (VSQRT).
    pub sqrt: u64,
    /// f64 adds and subtracts done in software (calls to the run-time's
    /// `__aeabi_dadd` and kin: the M4 has no double-precision unit).
    pub soft_add: u64,
    /// f64 multiplies in software.
    pub soft_mul: u64,
    /// f64 divides in software.
    pub soft_div: u64,
    /// Other software float routines (conversions, comparisons).
    pub soft_other: u64,
    /// Calls to a software square root (libm's `sqrtf`/`sqrt`).
    pub soft_sqrt: u64,
}

impl FpOps {
    /// The arithmetic lower bound in cycles: one per add or multiply, the
    /// table's latency for divide and square root.
    pub fn bound(&self) -> u64 {
        self.add
            + self.mul
            + self.soft_add
            + self.soft_mul
            + DIV_SQRT_BOUND * (self.div + self.sqrt + self.soft_div + self.soft_sqrt)
    }
}

/// Everything executed under one probe, summed over its calls.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct Tally {
    /// Calls seen.
    pub calls: u64,
    /// Instructions executed.
    pub instructions: u64,
    /// Cortex-M4F cycles by the table.
    pub m4_cycles: u64,
    /// The Cortex-M7 throughput model.
    pub m7: M7Throughput,
    /// Executions by class (count, taken branches).
    pub classes: BTreeMap<Class, (u64, u64)>,
    /// Floating-point operations.
    pub fp: FpOps,
    /// M4 cycles by the function the instructions belong to.
    pub by_function: HashMap<String, u64>,
    /// Calls of each function (entries into it), the probe included.
    pub entries: HashMap<String, u64>,
    /// Instructions QEMU ran that the listing does not hold.
    pub unlisted: u64,
    /// M4 cycles by instruction group, in the order of [`GROUPS`].
    pub group_cycles: [u64; 6],
    /// Executions and M4 cycles by instruction address.
    pub by_address: BTreeMap<u32, (u64, u64)>,
}

/// Instruction groups for the report's cycle breakdown.
pub const GROUPS: [&str; 6] = [
    "fp arith",
    "fp load/store",
    "fp move",
    "int",
    "int load/store",
    "branch",
];

/// The group of a class, an index into [`GROUPS`].
pub fn group(class: Class) -> usize {
    match class {
        Class::FpAdd
        | Class::FpMul
        | Class::FpMac
        | Class::FpFused
        | Class::FpDiv
        | Class::FpSqrt => 0,
        Class::FpLoad
        | Class::FpLoadDouble
        | Class::FpStore
        | Class::FpLoadMulti(_)
        | Class::FpStoreMulti(_) => 1,
        Class::FpMove | Class::FpMoveCore | Class::FpOther => 2,
        Class::IntAlu | Class::IntMul | Class::IntDiv | Class::It | Class::Other => 3,
        Class::Load | Class::Store | Class::LoadMulti(_) | Class::StoreMulti(_) => 4,
        Class::Branch | Class::BranchIndirect(_) => 5,
    }
}

impl Tally {
    /// Per-call value of a total.
    pub fn per_call(&self, total: u64) -> f64 {
        if self.calls == 0 {
            0.0
        } else {
            total as f64 / self.calls as f64
        }
    }
}

/// What a software floating-point routine does.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum Soft {
    Add,
    Mul,
    Div,
    Sqrt,
    Other,
}

/// Classifies a run-time or libm routine by the last segment of its name;
/// the flag tells an `__aeabi_*` entry point (often a thunk that calls the
/// implementation) from the implementation (`__muldf3`, ...).
fn soft_kind(name: &str) -> Option<(Soft, bool)> {
    let last = name.rsplit("::").next().unwrap_or(name);
    if let Some(op) = last.strip_prefix("__aeabi_") {
        let kind = match op {
            "dadd" | "dsub" | "drsub" => Soft::Add,
            "dmul" => Soft::Mul,
            "ddiv" | "drdiv" => Soft::Div,
            _ if op.starts_with('d') || op == "f2d" => Soft::Other,
            _ => return None,
        };
        return Some((kind, true));
    }
    let kind = match last {
        "__adddf3" | "__subdf3" => Soft::Add,
        "__muldf3" => Soft::Mul,
        "__divdf3" => Soft::Div,
        "sqrtf" | "sqrt" => Soft::Sqrt,
        _ if last.starts_with("__") && (last.ends_with("df2") || last.ends_with("dfsf2")) => {
            Soft::Other
        }
        _ => return None,
    };
    Some((kind, false))
}

/// `true` for a software floating-point routine of the run-time library.
pub fn is_soft_float(name: &str) -> bool {
    soft_kind(name).is_some_and(|(k, _)| k != Soft::Sqrt)
}

/// Attributes every executed block to the probe call it ran under.
///
/// A call starts when a block at a probe's entry address runs and lasts until
/// a block of the function that made the call runs again; everything in
/// between (callees included: libm, the run-time's soft-float routines) is
/// the call's. Branches are judged taken when the next block does not start
/// right after them.
pub fn attribute(
    trace: &Trace,
    listing: &HashMap<u32, Instruction>,
    functions: &[Function],
    probes: &[(String, u32)],
) -> Vec<Tally> {
    let mut tallies = vec![Tally::default(); probes.len()];
    // Every name of each function start (aliases share an address).
    let mut names_at: HashMap<u32, Vec<&str>> = HashMap::new();
    for f in functions {
        names_at.entry(f.addr).or_default().push(&f.name);
    }
    // Soft-float entries per probe and kind: (through __aeabi_*, direct).
    let mut soft = vec![[(0u64, 0u64); 5]; probes.len()];
    let mut inside: Option<(usize, Option<&Function>)> = None;
    for (i, &entry) in trace.executed.iter().enumerate() {
        let pc = entry.1;
        if inside.is_none() {
            if let Some(p) = probes.iter().position(|&(_, a)| a == pc) {
                let caller = i
                    .checked_sub(1)
                    .and_then(|j| trace.executed.get(j))
                    .and_then(|e| function_at(functions, e.1));
                inside = Some((p, caller));
                tallies[p].calls += 1;
            } else {
                continue;
            }
        }
        let Some((p, caller)) = inside else {
            continue;
        };
        if caller.is_some_and(|c| c.contains(pc)) && probes[p].1 != pc {
            inside = None;
            continue;
        }
        let t = &mut tallies[p];
        if let Some(names) = names_at.get(&pc) {
            let name = names[0].to_string();
            *t.entries.entry(name).or_default() += 1;
            if let Some((kind, thunk)) = names.iter().find_map(|n| soft_kind(n)) {
                let slot = &mut soft[p][kind as usize];
                if thunk {
                    slot.0 += 1;
                } else {
                    slot.1 += 1;
                }
            }
        }
        let Some(block) = trace.block(entry) else {
            continue;
        };
        let next = trace.executed.get(i + 1).map(|e| e.1);
        let mut after_memory = false;
        for (k, &(addr, size)) in block.instructions.iter().enumerate() {
            let last = k + 1 == block.instructions.len();
            let taken = last && next != Some(addr + size);
            let Some(insn) = listing.get(&addr) else {
                t.unlisted += 1;
                t.instructions += 1;
                t.m4_cycles += 1;
                after_memory = false;
                continue;
            };
            let class = insn.class;
            let cycles = u64::from(m4_cycles(class, taken, after_memory));
            after_memory = class.is_single_memory();
            t.instructions += 1;
            t.m4_cycles += cycles;
            t.group_cycles[group(class)] += cycles;
            let at = t.by_address.entry(addr).or_default();
            at.0 += 1;
            at.1 += cycles;
            t.m7.add(class, 1, u64::from(taken && class.is_branch()));
            let e = t.classes.entry(class).or_default();
            e.0 += 1;
            e.1 += u64::from(taken && class.is_branch());
            match class {
                Class::FpAdd => t.fp.add += 1,
                Class::FpMul => t.fp.mul += 1,
                Class::FpMac | Class::FpFused => {
                    t.fp.add += 1;
                    t.fp.mul += 1;
                    t.fp.mac += 1;
                }
                Class::FpDiv => t.fp.div += 1,
                Class::FpSqrt => t.fp.sqrt += 1,
                _ => {}
            }
            let owner = function_at(functions, addr).map_or("?", |f| f.name.as_str());
            *t.by_function.entry(owner.to_string()).or_default() += cycles;
        }
    }
    // An __aeabi_* thunk and the implementation it calls are one operation;
    // where only one of the two runs, its count stands.
    for (t, s) in tallies.iter_mut().zip(&soft) {
        let n = |k: Soft| s[k as usize].0.max(s[k as usize].1);
        t.fp.soft_add = n(Soft::Add);
        t.fp.soft_mul = n(Soft::Mul);
        t.fp.soft_div = n(Soft::Div);
        t.fp.soft_sqrt = n(Soft::Sqrt);
        t.fp.soft_other = n(Soft::Other);
    }
    tallies
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::cost::listing::{parse_disassembly, parse_symbols};
    use crate::cost::trace::parse_log;

    /// A hand-written program: `main` calls `probe` twice; `probe` does
    /// x*y + z with VMUL and VADD, loops once through a VDIV, and calls the
    /// soft-float multiply; the listing and the log follow the formats of
    /// LLVM 14's llvm-objdump and QEMU 7.2.
    const SYMS: &str = "\
00000100 g     F .text\t00000010 main
00000200 l     F .text\t00000020 demo::probe::h0123456789abcdef
00000300 g     F .text\t00000004 __aeabi_dmul
";
    const LISTING: &str = "\
     100:      \tbl\t0x200 <demo::probe>
     104:      \tb\t0x100 <main>
     200:      \tvmul.f32\ts0, s0, s1
     204:      \tvadd.f32\ts0, s0, s2
     208:      \tvdiv.f32\ts0, s0, s3
     20c:      \tsubs\tr0, #1
     20e:      \tbne\t0x208 <demo::probe+0x8>
     210:      \tbl\t0x300 <__aeabi_dmul>
     214:      \tbx\tlr
     300:      \tbx\tlr
";

    /// The QEMU log of two calls: each block's `in_asm` listing is printed
    /// before its first execution, as QEMU does.
    fn log() -> String {
        // (host translation, guest start, first half-word of each instruction)
        let blocks: [(u64, &[(u32, &str)]); 7] = [
            (1, &[(0x100, "f000 f87e")]),
            (
                2,
                &[
                    (0x200, "ee20 0a00"),
                    (0x204, "ee30 0a01"),
                    (0x208, "ee80 0a01"),
                    (0x20c, "3801"),
                    (0x20e, "d1fb"),
                ],
            ),
            (3, &[(0x208, "ee80 0a01"), (0x20c, "3801"), (0x20e, "d1fb")]),
            (4, &[(0x210, "f000 f876")]),
            (5, &[(0x300, "4770")]),
            (6, &[(0x214, "4770")]),
            (7, &[(0x104, "e7fc")]),
        ];
        // One call: the loop takes its branch once, then falls through.
        let call = [2u64, 3, 4, 5, 6, 7, 1];
        let order: Vec<u64> = core::iter::once(1).chain(call).chain(call).collect();
        let mut seen = std::collections::HashSet::new();
        let mut s = String::new();
        for host in order {
            let (_, insns) = blocks.iter().find(|b| b.0 == host).unwrap();
            if seen.insert(host) {
                s.push_str("----------------\nIN: demo\n");
                for (a, hw) in insns.iter() {
                    s.push_str(&format!("0x{a:08x}:  {hw}  op\n"));
                }
                s.push('\n');
            }
            let pc = insns[0].0;
            s.push_str(&format!(
                "Trace 0: 0x{host:x} [00000000/{pc:08x}/00000110/ff020200] demo\n"
            ));
        }
        s
    }

    #[test]
    fn attributes_a_hand_written_trace() {
        let functions = parse_symbols(SYMS);
        let listing = parse_disassembly(LISTING);
        let trace = parse_log(&log());
        let probes = vec![("probe".to_string(), 0x200)];
        let t = &attribute(&trace, &listing, &functions, &probes)[0];
        assert_eq!(t.calls, 2);
        assert_eq!(t.unlisted, 0);
        // Per call: 5 + 3 + 1 + 1 + 1 instructions.
        assert_eq!(t.instructions, 2 * 11);
        // Per call, M4 cycles (TI SWCU192 Table 3-27; Cortex-M4 TRM 3.3):
        // VMUL 1, VADD 1, VDIV 14 x 2, SUBS 1 x 2, BNE taken 2 then not 1,
        // BL taken 2, __aeabi_dmul's BX 3, the probe's BX 3.
        let per_call = 1 + 1 + 28 + 2 + 2 + 1 + 2 + 3 + 3;
        assert_eq!(t.m4_cycles, 2 * per_call);
        assert_eq!(t.fp.mul, 2);
        assert_eq!(t.fp.add, 2);
        assert_eq!(t.fp.div, 4);
        assert_eq!(t.fp.soft_mul, 2);
        // Bound per call: add 1 + mul 1 + two divides 28 + soft multiply 1.
        assert_eq!(t.fp.bound(), 2 * 31);
        assert_eq!(t.entries.get("__aeabi_dmul"), Some(&2));
        assert_eq!(t.by_function.get("__aeabi_dmul"), Some(&6));
    }
}
