//! Reads QEMU's `-d in_asm,exec,nochain` log: which translated blocks exist
//! (their instruction addresses) and the exact sequence in which they ran.

use std::collections::HashMap;

/// One translated block: the addresses and sizes of its instructions.
#[derive(Debug, Clone, Default, PartialEq, Eq)]
pub struct Block {
    /// (address, size in bytes) of each guest instruction, in order.
    pub instructions: Vec<(u32, u32)>,
}

impl Block {
    /// The address just past the block's last instruction.
    pub fn end(&self) -> Option<u32> {
        self.instructions.last().map(|&(a, s)| a + s)
    }
}

/// The translated blocks and the exact sequence in which they ran.
///
/// Blocks are keyed by QEMU's host address of the translation (the first
/// field of an `exec` line), which tells apart two translations that start
/// at the same guest address; QEMU prints a block's `in_asm` listing right
/// before its first execution, which ties the two together.
#[derive(Debug, Clone, Default, PartialEq, Eq)]
pub struct Trace {
    /// Blocks by host translation address.
    pub blocks: HashMap<u64, Block>,
    /// (host translation address, guest start address) of the executed
    /// blocks, in execution order.
    pub executed: Vec<(u64, u32)>,
}

impl Trace {
    /// The block of an execution entry.
    pub fn block(&self, entry: (u64, u32)) -> Option<&Block> {
        self.blocks.get(&entry.0)
    }
}

/// A Thumb-2 instruction is 32 bits wide when its first half-word starts with
/// 0b11101, 0b11110 or 0b11111 (Arm v7-M Architecture Reference Manual,
/// section A5.1, common practice).
fn thumb_size(first_halfword: u16) -> u32 {
    if first_halfword >> 11 >= 0b11101 {
        4
    } else {
        2
    }
}

/// Parses an `in_asm` instruction line such as
/// `0x000089a8:  b580       push     {r7, lr}`.
fn parse_instruction(line: &str) -> Option<(u32, u32)> {
    let rest = line.strip_prefix("0x")?;
    let (addr, tail) = rest.split_once(':')?;
    let addr = u32::from_str_radix(addr, 16).ok()?;
    let first = tail.split_whitespace().next()?;
    // Without a disassembler QEMU prints raw bytes ("OBJD-T: ..."); with
    // capstone, the half-words. Either way the first half-word decides.
    let hw = u16::from_str_radix(first.get(..4)?, 16).ok()?;
    Some((addr, thumb_size(hw)))
}

/// Parses an `exec` line such as
/// `Trace 0: 0x7f7434000100 [00800408/00000400/00000110/ff020200] Reset`,
/// returning the host translation address and the guest PC (the second
/// field in brackets).
fn parse_exec(line: &str) -> Option<(u64, u32)> {
    let rest = line.strip_prefix("Trace ")?;
    let (head, tail) = rest.split_once('[')?;
    let host = head.split_whitespace().last()?.strip_prefix("0x")?;
    let host = u64::from_str_radix(host, 16).ok()?;
    let inside = tail.split_once(']')?.0;
    let pc = inside.split('/').nth(1)?;
    Some((host, u32::from_str_radix(pc, 16).ok()?))
}

/// Parses a whole log.
pub fn parse_log(text: &str) -> Trace {
    let mut trace = Trace::default();
    let mut listing: Option<Block> = None;
    let mut pending: Option<Block> = None;
    for line in text.lines() {
        if line.starts_with("IN:") {
            listing = Some(Block::default());
        } else if line.starts_with("0x")
            && let Some(b) = listing.as_mut()
        {
            if let Some(insn) = parse_instruction(line) {
                b.instructions.push(insn);
            }
        } else if let Some((host, pc)) = parse_exec(line) {
            if let Some(b) = listing.take().or_else(|| pending.take()) {
                if b.instructions.first().map(|i| i.0) == Some(pc) {
                    trace.blocks.insert(host, b);
                } else {
                    pending = Some(b);
                }
            }
            trace.executed.push((host, pc));
        } else if listing.is_some() && (line.trim().is_empty() || line.starts_with("---")) {
            pending = listing.take();
        }
    }
    trace
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn blocks_and_executions_from_a_log() {
        // Format of QEMU 7.2's `-d in_asm,exec,nochain` on mps2-an386.
        let log = "\
----------------
IN: Reset
0x00000400:  f008 fad2  bl       #0x89a8

Trace 0: 0x7f7434000100 [00800408/00000400/00000110/ff020200] Reset
----------------
IN: DefaultPreInit
0x000089a8:  b580       push     {r7, lr}
0x000089aa:  466f       mov      r7, sp
0x000089ac:  bd80       pop      {r7, pc}

Trace 0: 0x7f7434000240 [00800408/000089a8/00000110/ff020200] DefaultPreInit
Trace 0: 0x7f7434000240 [00800408/000089a8/00000110/ff020200] DefaultPreInit
";
        let t = parse_log(log);
        let pcs: Vec<u32> = t.executed.iter().map(|e| e.1).collect();
        assert_eq!(pcs, vec![0x400, 0x89a8, 0x89a8]);
        assert_eq!(
            t.block(t.executed[0]).unwrap().instructions,
            vec![(0x400, 4)]
        );
        let b = t.block(t.executed[2]).unwrap();
        assert_eq!(b.instructions, vec![(0x89a8, 2), (0x89aa, 2), (0x89ac, 2)]);
        assert_eq!(b.end(), Some(0x89ae));
    }

    #[test]
    fn thumb_widths() {
        // ARMv7-M ARM A5.1: 0xf008 (BL, first half) is 32-bit; 0xb580 (PUSH)
        // and 0xe7fe (B, 16-bit, top bits 0b11100) are 16-bit.
        assert_eq!(thumb_size(0xf008), 4);
        assert_eq!(thumb_size(0xe92d), 4);
        assert_eq!(thumb_size(0xb580), 2);
        assert_eq!(thumb_size(0xe7fe), 2);
    }
}
