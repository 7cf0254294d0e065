//! Reads `llvm-objdump` output: function symbols (`--syms -C`) and the
//! disassembly (`-d --no-show-raw-insn -C`), keyed by address.

use std::collections::HashMap;

use super::classify::{Class, classify};

/// A function symbol of the ELF.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Function {
    /// Start address (Thumb bit clear).
    pub addr: u32,
    /// Size in bytes.
    pub size: u32,
    /// Demangled name without Rust's `::h<hash>` suffix.
    pub name: String,
}

impl Function {
    /// `true` when `pc` lies inside the function.
    pub fn contains(&self, pc: u32) -> bool {
        pc >= self.addr && pc < self.addr.saturating_add(self.size.max(1))
    }
}

/// Removes the `::h0123456789abcdef` disambiguator that legacy Rust mangling
/// appends to every path.
pub fn strip_hash(name: &str) -> &str {
    match name.rsplit_once("::h") {
        Some((stem, hash)) if hash.len() == 16 && hash.chars().all(|c| c.is_ascii_hexdigit()) => {
            stem
        }
        _ => name,
    }
}

/// Undoes the escapes of Rust's legacy symbol mangling that LLVM 14's
/// demangler leaves in place (`_$LT$` for `<`, `..` for `::`, `$u20$` for a
/// space, ...), as rustc-demangle does (common practice).
pub fn unescape_legacy(name: &str) -> String {
    const ESCAPES: [(&str, &str); 16] = [
        ("$SP$", "@"),
        ("$BP$", "*"),
        ("$RF$", "&"),
        ("$LT$", "<"),
        ("$GT$", ">"),
        ("$LP$", "("),
        ("$RP$", ")"),
        ("$C$", ","),
        ("$u20$", " "),
        ("$u22$", "\""),
        ("$u27$", "'"),
        ("$u2b$", "+"),
        ("$u3b$", ";"),
        ("$u5b$", "["),
        ("$u5d$", "]"),
        ("$u7e$", "~"),
    ];
    let mut out = String::with_capacity(name.len());
    for (i, segment) in name.split("::").enumerate() {
        if i > 0 {
            out.push_str("::");
        }
        let mut seg = segment
            .strip_prefix("_$")
            .map_or(segment.to_string(), |s| format!("${s}"));
        if seg.contains('$') {
            for (from, to) in ESCAPES {
                seg = seg.replace(from, to);
            }
            seg = seg.replace("$u7b$", "{").replace("$u7d$", "}");
        }
        out.push_str(&seg.replace("..", "::"));
    }
    out
}

/// Parses `llvm-objdump --syms -C` into the function symbols, sorted by
/// address. Lines look like
/// `00000fe8 l     F .text (tab) 00000688 cairn_on_target::probe::pose_predict::h1a70...`.
pub fn parse_symbols(text: &str) -> Vec<Function> {
    let mut out = Vec::new();
    for line in text.lines() {
        let Some((head, rest)) = line.split_once('\t') else {
            continue;
        };
        // head: address, 7 flag characters, section name.
        let mut parts = head.split_whitespace();
        let Some(addr) = parts.next().and_then(|a| u32::from_str_radix(a, 16).ok()) else {
            continue;
        };
        if !head.contains(" F ") {
            continue;
        }
        let rest = rest.trim_start();
        let Some((size, name)) = rest.split_once(' ') else {
            continue;
        };
        let Ok(size) = u32::from_str_radix(size, 16) else {
            continue;
        };
        let name = name.trim();
        let name = name.strip_prefix(".hidden ").unwrap_or(name);
        out.push(Function {
            addr: addr & !1,
            size,
            name: unescape_legacy(strip_hash(name)),
        });
    }
    out.sort_by_key(|f| f.addr);
    out
}

/// The function that contains `pc`, if any.
pub fn function_at(functions: &[Function], pc: u32) -> Option<&Function> {
    let i = functions.partition_point(|f| f.addr <= pc);
    functions[..i].iter().rev().find(|f| f.contains(pc))
}

/// One disassembled instruction.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Instruction {
    /// Mnemonic as printed, e.g. `vmul.f32`, `bne.w`.
    pub mnemonic: String,
    /// Operands as printed, without the trailing comment.
    pub operands: String,
    /// Its timing class.
    pub class: Class,
}

/// Parses `llvm-objdump -d --no-show-raw-insn` into instructions by address.
/// Lines look like `     ffe:      \tvmul.f32\ts29, s1, s22`.
pub fn parse_disassembly(text: &str) -> HashMap<u32, Instruction> {
    let mut out = HashMap::new();
    for line in text.lines() {
        let Some((addr, body)) = line.split_once(':') else {
            continue;
        };
        if !line.starts_with(' ') {
            continue;
        }
        let Ok(addr) = u32::from_str_radix(addr.trim(), 16) else {
            continue;
        };
        let body = body.trim_start();
        let (mnemonic, operands) = match body.split_once('\t') {
            Some((m, o)) => (m.trim(), o),
            None => (body.trim(), ""),
        };
        // Data words keep their raw bytes ("00 00 00 3f  .word ...").
        if mnemonic.is_empty()
            || mnemonic.contains(' ')
            || mnemonic.starts_with('.')
            || mnemonic.starts_with('<')
        {
            continue;
        }
        let operands = operands.split('@').next().unwrap_or("").trim();
        out.insert(
            addr,
            Instruction {
                mnemonic: mnemonic.to_string(),
                operands: operands.to_string(),
                class: classify(mnemonic, operands),
            },
        );
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn symbols_from_an_objdump_table() {
        // Format of LLVM 14's `llvm-objdump --syms -C` on an ELF for Arm.
        let text = "\
SYMBOL TABLE:
00000000 l    df *ABS*\t00000000 cost_probe.f29473f5-cgu.0
00000fe8 l     F .text\t00000688 cairn_on_target::probe::pose_predict::h1a701360d06cc2f5
000089b0 l     F .text\t00000608 libm::math::sinf::sinf::hc2055a49520a23a5
00000c55 g     F .text\t00000008 main
00000440 l       .text\t00000000 $d
00009cf2 l     F .text\t0000000c .hidden __aeabi_dmul
";
        let f = parse_symbols(text);
        assert_eq!(f.len(), 4);
        assert_eq!(f[3].name, "__aeabi_dmul");
        assert_eq!(f[0].name, "main");
        assert_eq!(f[0].addr, 0xc54);
        assert_eq!(f[1].name, "cairn_on_target::probe::pose_predict");
        assert_eq!(f[1].size, 0x688);
        assert_eq!(function_at(&f, 0x1000).map(|f| f.addr), Some(0xfe8));
        assert_eq!(function_at(&f, 0x1670), None);
        assert_eq!(
            function_at(&f, 0x89b0).map(|f| f.name.as_str()),
            Some("libm::math::sinf::sinf")
        );
    }

    #[test]
    fn legacy_escapes_are_undone() {
        // Rust legacy mangling escapes, as rustc-demangle reads them.
        assert_eq!(
            unescape_legacy(
                "_$LT$cairn_core..form..Joseph$u20$as$u20$cairn_core..form..CovarianceForm$GT$::posterior"
            ),
            "<cairn_core::form::Joseph as cairn_core::form::CovarianceForm>::posterior"
        );
        assert_eq!(
            unescape_legacy("libm::math::sinf::sinf"),
            "libm::math::sinf::sinf"
        );
    }

    #[test]
    fn instructions_from_a_listing() {
        let text = "\
00000fe8 <cairn_on_target::probe::pose_predict::h1a701360d06cc2f5>:
     fe8:      \tpush\t{r4, r5, r6, r7, lr}
     ff6:      \tvldr\ts22, [pc, #652]         @ 0x1284 <$d>
     ffe:      \tvmul.f32\ts29, s1, s22
    101a:      \tbl\t0x89b0 <libm::math::sinf::sinf::hc2055a49520a23a5> @ imm = #31122
    1284: 00 00 00 3f  \t.word\t0x3f000000
";
        let d = parse_disassembly(text);
        assert_eq!(d.len(), 4);
        assert_eq!(d[&0xfe8].class, Class::StoreMulti(5));
        assert_eq!(d[&0xff6].class, Class::FpLoad);
        assert_eq!(d[&0xff6].operands, "s22, [pc, #652]");
        assert_eq!(d[&0xffe].class, Class::FpMul);
        assert_eq!(d[&0x101a].class, Class::Branch);
    }
}
