//! Target cost estimate: cycles per predict and update on a Cortex-M4F (and a
//! Cortex-M7 throughput figure), from QEMU's exact executed instruction mix.
//!
//! The pipeline: build `on-target`'s `cost_probe` for `thumbv7em-none-eabihf`
//! with `-C target-cpu=cortex-m4` (or take a given ELF); find the probe
//! functions (`cairn_on_target::probe::*`, never inlined) in the symbol
//! table; disassemble the ELF with `llvm-objdump` and classify every
//! instruction; run the probe under `qemu-system-arm -M mps2-an386 -icount
//! shift=0 -d in_asm,exec,nochain`, which logs every translated block and
//! every execution of one; attribute each executed block to the probe call
//! it ran under (callees included); weight the mix with the cycle table of
//! [`timing`]. QEMU counts instructions, not cycles, and does not model the
//! DWT cycle counter: the cycles come from the table.

pub mod classify;
pub mod estimate;
pub mod listing;
pub mod timing;
pub mod trace;
pub mod user;

use std::fmt::{self, Write as _};
use std::path::{Path, PathBuf};
use std::process::{Command, Stdio};
use std::time::{Duration, Instant};

use estimate::{FpOps, Tally, attribute};
use std::collections::HashMap;

use listing::{Function, Instruction, function_at, parse_disassembly, parse_symbols};

/// Where the probe symbols of cairn's own cost probe live.
pub const PROBE_PATH: &str = "cairn_on_target::probe::";

/// The prefix of a user probe's symbol: `cairn_probe__NAME` prices the
/// operation NAME (the contract of the `cairn-probe` harness,
/// docs/target-probes.md).
pub const USER_PROBE_PREFIX: &str = "cairn_probe__";

/// The demo's rates (odometry 200 Hz, beacon fix 4 Hz, sun compass 1 Hz), used
/// for the pose probes of both filters (Joseph and U-D) when no rate is given.
pub const DEMO_RATES: [(&str, f64); 6] = [
    ("pose_predict", 200.0),
    ("pose_position_update", 4.0),
    ("pose_heading_update", 1.0),
    ("pose_ud_predict", 200.0),
    ("pose_ud_position_update", 4.0),
    ("pose_ud_heading_update", 1.0),
];

/// Whether a probe runs the U-D factored filter (`pose_ud_*`,
/// `linear{N}_ud_predict`, `linear{N}_update{M}_ud`) rather than one of the
/// covariance forms.
pub fn is_ud_probe(name: &str) -> bool {
    name.starts_with("pose_ud_") || name.contains("_ud_") || name.ends_with("_ud")
}

/// What to estimate and for which clock and rates.
#[derive(Debug, Clone, PartialEq)]
pub struct CostConfig {
    /// A cost-probe ELF already built; when `None`, `probe` or else
    /// `on_target` is built.
    pub elf: Option<PathBuf>,
    /// A user's probe crate to build (release, for the Cortex-M4F) and
    /// trace, and the binary in it; see [`user::build_user_probe`].
    pub probe: Option<user::ProbeCrate>,
    /// The `on-target` workspace; `None` finds it next to the current
    /// directory or this crate.
    pub on_target: Option<PathBuf>,
    /// Core clock, MHz.
    pub clock_mhz: f64,
    /// Call rates by probe name, Hz; the demo's rates fill the gaps.
    pub rates: Vec<(String, f64)>,
    /// Apply the demo's rates to the pose probes that have no rate (off
    /// when the rates come from a spec).
    pub demo_rates: bool,
    /// Linear model sizes (n, m) to build probes for; empty means on-target's
    /// default, n = 9 with m = 3. Ignored with `elf`.
    pub sizes: Vec<(usize, usize)>,
    /// Longest time QEMU may run.
    pub timeout: Duration,
}

impl Default for CostConfig {
    fn default() -> Self {
        Self {
            elf: None,
            probe: None,
            on_target: None,
            clock_mhz: 168.0,
            rates: Vec::new(),
            demo_rates: true,
            sizes: Vec::new(),
            timeout: Duration::from_secs(120),
        }
    }
}

/// Why an estimate could not be made.
#[derive(Debug)]
pub enum CostError {
    /// A required program is not installed.
    ToolMissing {
        /// The program.
        tool: &'static str,
        /// How to get it.
        hint: &'static str,
    },
    /// A bad configuration value.
    Config(String),
    /// Building the on-target probe failed.
    Build(String),
    /// A program failed or produced unusable output.
    Tool {
        /// The program.
        tool: &'static str,
        /// What went wrong.
        detail: String,
    },
    /// A file could not be read or written.
    Io(PathBuf, std::io::Error),
    /// The ELF holds no cost probes.
    NoProbes(PathBuf),
}

impl fmt::Display for CostError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            CostError::ToolMissing { tool, hint } => {
                write!(f, "`{tool}` is not installed ({hint})")
            }
            CostError::Config(m) => write!(f, "{m}"),
            CostError::Build(m) => write!(f, "building the cost probe failed:\n{m}"),
            CostError::Tool { tool, detail } => write!(f, "{tool}: {detail}"),
            CostError::Io(p, e) => write!(f, "{}: {e}", p.display()),
            CostError::NoProbes(p) => write!(
                f,
                "{} holds no probe functions: a user probe exports `{USER_PROBE_PREFIX}NAME` \
                 symbols (the cairn-probe harness, docs/target-probes.md), on-target's \
                 cost_probe defines `{PROBE_PATH}*`",
                p.display()
            ),
        }
    }
}

impl std::error::Error for CostError {
    fn source(&self) -> Option<&(dyn std::error::Error + 'static)> {
        match self {
            CostError::Io(_, e) => Some(e),
            _ => None,
        }
    }
}

/// The cost of one operation, per call.
#[derive(Debug, Clone, PartialEq)]
pub struct OperationCost {
    /// Probe name, e.g. `pose_predict`.
    pub name: String,
    /// Calls traced.
    pub calls: u64,
    /// Instructions executed per call.
    pub instructions: f64,
    /// Cortex-M4F cycles per call (table-weighted).
    pub m4_cycles: f64,
    /// Cortex-M7 cycles per call (throughput model).
    pub m7_cycles: f64,
    /// Floating-point operations, summed over the calls.
    pub fp_total: FpOps,
    /// The arithmetic lower bound per call, cycles.
    pub bound: f64,
    /// Call rate, Hz, when known.
    pub rate_hz: Option<f64>,
    /// The functions taking the most M4 cycles: (name, share of the call).
    pub hot: Vec<(String, f64)>,
    /// Functions called under the probe, with calls per probe call, most
    /// called first (the probe itself and the soft-float routines, which
    /// the f64 counts cover, left out).
    pub callees: Vec<(String, f64)>,
    /// Share of the M4 cycles spent inside software f64 routines.
    pub soft_share: f64,
    /// Share of the M4 cycles by instruction group ([`estimate::GROUPS`]).
    pub mix: [f64; 6],
    /// Every instruction executed under the probe, in address order.
    pub profile: Vec<ProfileLine>,
}

/// One instruction of an operation's profile.
#[derive(Debug, Clone, PartialEq)]
pub struct ProfileLine {
    /// Address.
    pub addr: u32,
    /// The function it belongs to (short name).
    pub function: String,
    /// Mnemonic and operands as disassembled.
    pub text: String,
    /// Executions per call.
    pub count: f64,
    /// M4 cycles per call.
    pub cycles: f64,
}

impl OperationCost {
    fn from_tally(
        name: &str,
        t: &Tally,
        rate_hz: Option<f64>,
        listing: &HashMap<u32, Instruction>,
        functions: &[Function],
    ) -> Self {
        let total = t.m4_cycles.max(1) as f64;
        let mut hot: Vec<(String, f64)> = t
            .by_function
            .iter()
            .map(|(n, &c)| (n.clone(), c as f64 / total))
            .collect();
        hot.sort_by(|a, b| b.1.total_cmp(&a.1).then_with(|| a.0.cmp(&b.0)));
        hot.truncate(4);
        Self {
            name: name.to_string(),
            calls: t.calls,
            instructions: t.per_call(t.instructions),
            m4_cycles: t.per_call(t.m4_cycles),
            m7_cycles: if t.calls == 0 {
                0.0
            } else {
                t.m7.cycles() / t.calls as f64
            },
            fp_total: t.fp,
            bound: t.per_call(t.fp.bound()),
            rate_hz,
            hot,
            callees: {
                let mut c: Vec<(String, f64)> = t
                    .entries
                    .iter()
                    .filter(|(n, _)| {
                        !n.ends_with(&format!("::{name}"))
                            && **n != format!("{USER_PROBE_PREFIX}{name}")
                            && !estimate::is_soft_float(n)
                    })
                    .map(|(n, &k)| (n.clone(), t.per_call(k)))
                    .collect();
                c.sort_by(|a, b| b.1.total_cmp(&a.1).then_with(|| a.0.cmp(&b.0)));
                c.truncate(6);
                c
            },
            soft_share: t
                .by_function
                .iter()
                .filter(|(n, _)| estimate::is_soft_float(n))
                .map(|(_, &c)| c as f64 / total)
                .sum(),
            mix: t.group_cycles.map(|c| c as f64 / total),
            profile: t
                .by_address
                .iter()
                .map(|(&addr, &(count, cycles))| ProfileLine {
                    addr,
                    function: function_at(functions, addr)
                        .map_or_else(|| "?".to_string(), |f| short_name(&f.name)),
                    text: listing.get(&addr).map_or_else(String::new, |i| {
                        format!("{} {}", i.mnemonic, i.operands).trim().to_string()
                    }),
                    count: t.per_call(count),
                    cycles: t.per_call(cycles),
                })
                .collect(),
        }
    }

    /// The profile as text: one line per executed instruction, with its
    /// executions and M4 cycles per call, grouped by function.
    pub fn render_profile(&self) -> String {
        let mut out = format!(
            "{}: {:.0} M4 cycles per call, instruction by instruction\n\
             {:>8}  {:>7}  {:>7}  instruction\n",
            self.name, self.m4_cycles, "address", "runs", "cycles"
        );
        let mut current = "";
        for line in &self.profile {
            if line.function != current {
                current = &line.function;
                let _ = writeln!(out, "{current}:");
            }
            let _ = writeln!(
                out,
                "{:>8x}  {:>7.2}  {:>7.2}  {}",
                line.addr, line.count, line.cycles, line.text
            );
        }
        out
    }

    /// Per-call value of an operation count.
    pub fn per_call(&self, total: u64) -> f64 {
        if self.calls == 0 {
            0.0
        } else {
            total as f64 / self.calls as f64
        }
    }

    /// Estimated M4 cycles over the arithmetic lower bound.
    pub fn ratio(&self) -> Option<f64> {
        (self.bound > 0.0).then(|| self.m4_cycles / self.bound)
    }

    /// Microseconds per call at `clock_mhz`.
    pub fn micros(&self, clock_mhz: f64) -> f64 {
        self.m4_cycles / clock_mhz
    }

    /// Share of the CPU at the call rate, 0 to 1 (0 without a rate).
    pub fn cpu_share(&self, clock_mhz: f64) -> f64 {
        self.rate_hz
            .map_or(0.0, |r| r * self.m4_cycles / (clock_mhz * 1e6))
    }
}

/// The whole estimate.
#[derive(Debug, Clone, PartialEq)]
pub struct CostReport {
    /// The ELF that was traced.
    pub elf: PathBuf,
    /// Core clock, MHz.
    pub clock_mhz: f64,
    /// One entry per probe.
    pub operations: Vec<OperationCost>,
    /// Things the reader must know (soft-float in the path, missing tuning).
    pub warnings: Vec<String>,
}

impl CostReport {
    /// The operation of a probe.
    pub fn operation(&self, name: &str) -> Option<&OperationCost> {
        self.operations.iter().find(|o| o.name == name)
    }

    /// CPU share of every operation with a rate, 0 to 1.
    pub fn cpu_share(&self) -> f64 {
        self.cpu_share_where(|_| true)
    }

    /// CPU share of the operations with a rate whose probe name passes
    /// `keep`, 0 to 1.
    pub fn cpu_share_where(&self, keep: impl Fn(&str) -> bool) -> f64 {
        self.operations
            .iter()
            .filter(|o| keep(&o.name))
            .map(|o| o.cpu_share(self.clock_mhz))
            .sum()
    }

    /// The report as terminal text.
    pub fn render(&self) -> String {
        let mut s = String::new();
        let calls = self.operations.first().map_or(0, |o| o.calls);
        let _ = writeln!(
            s,
            "cairn cost: cycles per call from QEMU's executed instruction mix ({calls} calls each)"
        );
        let _ = writeln!(s, "  ELF   {}", self.elf.display());
        let _ = writeln!(
            s,
            "  clock {} MHz (Cortex-M4F, zero wait states)\n",
            self.clock_mhz
        );
        let _ = writeln!(
            s,
            "{:<30} {:>7} {:>8} {:>7} {:>6} {:>6} {:>4} {:>5} {:>6} {:>7} {:>8} {:>8} {:>7} {:>6}",
            "operation",
            "instr",
            "M4 cyc",
            "M7 cyc",
            "f32 +",
            "f32 x",
            "div",
            "sqrt",
            "f64 sw",
            "bound",
            "M4/bound",
            "us/call",
            "rate Hz",
            "CPU"
        );
        for o in &self.operations {
            let f = &o.fp_total;
            let ratio = o.ratio().map_or("-".to_string(), |r| format!("{r:.2}x"));
            let rate = o.rate_hz.map_or("-".to_string(), |r| format!("{r}"));
            let share = if o.rate_hz.is_some() {
                format!("{:.2}%", 100.0 * o.cpu_share(self.clock_mhz))
            } else {
                "-".to_string()
            };
            let _ = writeln!(
                s,
                "{:<30} {:>7.0} {:>8.0} {:>7.0} {:>6.0} {:>6.0} {:>4.0} {:>5.0} {:>6.0} {:>7.0} {:>8} {:>8.2} {:>7} {:>6}",
                o.name,
                o.instructions,
                o.m4_cycles,
                o.m7_cycles,
                o.per_call(f.add),
                o.per_call(f.mul),
                o.per_call(f.div),
                o.per_call(f.sqrt + f.soft_sqrt),
                o.per_call(f.soft_add + f.soft_mul + f.soft_div),
                o.bound,
                ratio,
                o.micros(self.clock_mhz),
                rate,
                share
            );
        }
        // A firmware runs one filter: with rates on both kinds of probe, the
        // shares are given per filter, not summed.
        let rated = |ud: bool| {
            self.operations
                .iter()
                .any(|o| o.rate_hz.is_some() && is_ud_probe(&o.name) == ud)
        };
        if rated(false) && rated(true) {
            let _ = writeln!(
                s,
                "\nCPU share at the given rates: {:.2}% of {} MHz with the covariance-form \
                 probes, {:.2}% with the U-D probes",
                100.0 * self.cpu_share_where(|n| !is_ud_probe(n)),
                self.clock_mhz,
                100.0 * self.cpu_share_where(is_ud_probe)
            );
        } else {
            let _ = writeln!(
                s,
                "\nCPU share at the given rates: {:.2}% of {} MHz",
                100.0 * self.cpu_share(),
                self.clock_mhz
            );
        }
        let _ = writeln!(s, "\nwhere the M4 cycles go (share of each call):");
        for o in &self.operations {
            let hot: Vec<String> = o
                .hot
                .iter()
                .map(|(n, share)| format!("{} {:.0}%", short_name(n), 100.0 * share))
                .collect();
            let _ = writeln!(s, "  {:<28} {}", o.name, hot.join(", "));
            let mix: Vec<String> = estimate::GROUPS
                .iter()
                .zip(o.mix)
                .map(|(g, share)| format!("{g} {:.0}%", 100.0 * share))
                .collect();
            let _ = writeln!(s, "  {:<28} by kind: {}", "", mix.join(", "));
            if !o.callees.is_empty() {
                let calls: Vec<String> = o
                    .callees
                    .iter()
                    .map(|(n, k)| format!("{} x{k:.0}", short_name(n)))
                    .collect();
                let _ = writeln!(s, "  {:<28} calls: {}", "", calls.join(", "));
            }
        }
        for w in &self.warnings {
            let _ = writeln!(s, "\nwarning: {w}");
        }
        let _ = writeln!(
            s,
            "\nM4 cycles: Arm Cortex-M4 TRM (DDI 0439) timings as in TI SWCU192 Table 3-27.\n\
             M7 cycles: rough, not traced on an M7: the same M4 instruction trace priced with a\n\
             dual-issue throughput bound and LLVM's ARMScheduleM7.td latencies (dependency\n\
             stalls not modelled, so optimistic). Bound: 1 cycle per add or\n\
             multiply (f32 in hardware, f64 in software alike), 14 per divide or square root.\n\
             f64 sw: f64 operations done by run-time library calls (the M4 has no f64 unit)."
        );
        s
    }
}

/// A short name for the report: `<A as B>::m` and `<impl B for A>::m`
/// become `A::m`; paths keep their last two segments; generics go.
fn short_name(name: &str) -> String {
    let strip_generics = |s: &str| -> String {
        let mut depth = 0;
        s.chars()
            .filter(|&c| {
                match c {
                    '<' => depth += 1,
                    '>' => depth -= 1,
                    _ => return depth == 0,
                }
                false
            })
            .collect()
    };
    // A path into an impl block, `nalgebra::base::ops::<impl ...>::mul`: the
    // impl is the interesting part.
    let name = name.find("::<").map_or(name, |i| &name[i + 2..]);
    if let Some(rest) = name.strip_prefix('<')
        && let Some(close) = rest.rfind(">::")
    {
        let inner = &rest[..close];
        let method = &rest[close + 3..];
        let ty = match (inner.strip_prefix("impl "), inner.find(" as ")) {
            (Some(imp), _) => imp.rsplit(" for ").next().unwrap_or(imp),
            (None, Some(a)) => &inner[..a],
            _ => inner,
        };
        let ty = strip_generics(ty.trim_start_matches('&'));
        let ty = ty.rsplit("::").next().unwrap_or("").to_string();
        return format!("{ty}::{method}");
    }
    let plain = strip_generics(name);
    let parts: Vec<&str> = plain.rsplitn(3, "::").collect();
    if parts.len() >= 2 {
        format!("{}::{}", parts[1], parts[0])
    } else {
        plain
    }
}

/// What a spec asks the estimator to price.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct SpecProbes {
    /// Linear sizes (n, m) to build probes for.
    pub sizes: Vec<(usize, usize)>,
    /// Call rates by probe name, Hz.
    pub rates: Vec<(String, f64)>,
    /// What the probes cannot match (form, precision, channel kinds).
    pub notes: Vec<String>,
}

/// The probes and rates a spec asks for: the sizes of a linear model's
/// channels, or the pose probes; rates from the step rate (predict) and each
/// channel's rate (its update, in the form the spec flashes; a U-D spec gets
/// the U-D predict and updates). Notes say what the probes cannot match.
pub fn plan_probes(plan: &crate::spec::Plan) -> SpecProbes {
    use crate::spec::{ChannelKind, ModelPlan};
    let n = plan.states.len();
    let mut sizes = Vec::new();
    let mut rates: Vec<(String, f64)> = Vec::new();
    let mut notes = Vec::new();
    let mut add = |name: String, hz: f64| match rates.iter_mut().find(|r| r.0 == name) {
        Some(r) => r.1 += hz,
        None => rates.push((name, hz)),
    };
    // The probe name's suffix for the flashed form.
    let form = match plan.flash.form.as_str() {
        f @ ("joseph" | "conventional") => f.to_string(),
        "u-d" => "ud".to_string(),
        other => {
            notes.push(format!(
                "the spec flashes the {other} form; the probes price the Joseph form instead"
            ));
            "joseph".to_string()
        }
    };
    if plan.flash.precision == crate::spec::Precision::F64 {
        notes.push(
            "the spec flashes f64; the probes run f32 (f64 on a Cortex-M4F is software \
             arithmetic, about 75x the f32 cost)"
                .to_string(),
        );
    }
    // The pose probes have one Joseph set and one U-D set.
    let pose = if form == "ud" { "pose_ud" } else { "pose" };
    match &plan.model {
        ModelPlan::Pose { .. } => {
            if form == "conventional" {
                notes.push(
                    "the pose probes price the Joseph form, not the conventional one".to_string(),
                );
            }
            add(format!("{pose}_predict"), plan.step_hz);
            for c in &plan.channels {
                match c.kind {
                    ChannelKind::Position => add(format!("{pose}_position_update"), c.rate_hz),
                    ChannelKind::Heading => add(format!("{pose}_heading_update"), c.rate_hz),
                    ChannelKind::Linear(_) | ChannelKind::User => notes.push(format!(
                        "channel {}: no probe for a linear channel on the pose model",
                        c.name
                    )),
                }
            }
        }
        _ => {
            let predict = if form == "ud" {
                "ud_predict"
            } else {
                "predict"
            };
            add(format!("linear{n}_{predict}"), plan.step_hz);
            for c in &plan.channels {
                if !sizes.contains(&(n, c.m)) {
                    sizes.push((n, c.m));
                }
                add(format!("linear{n}_update{}_{form}", c.m), c.rate_hz);
            }
        }
    }
    SpecProbes {
        sizes,
        rates,
        notes,
    }
}

/// Finds a program, trying each name in turn.
fn find_tool(names: &[&'static str]) -> Option<&'static str> {
    names.iter().copied().find(|n| {
        Command::new(n)
            .arg("--version")
            .stdout(Stdio::null())
            .stderr(Stdio::null())
            .status()
            .is_ok_and(|s| s.success())
    })
}

fn run_tool(tool: &'static str, args: &[&std::ffi::OsStr]) -> Result<String, CostError> {
    let out = Command::new(tool)
        .args(args)
        .output()
        .map_err(|e| CostError::Tool {
            tool,
            detail: e.to_string(),
        })?;
    if !out.status.success() {
        return Err(CostError::Tool {
            tool,
            detail: String::from_utf8_lossy(&out.stderr).into_owned(),
        });
    }
    Ok(String::from_utf8_lossy(&out.stdout).into_owned())
}

/// The on-target workspace: the configured one, `./on-target`, or the one
/// next to this crate's sources.
fn on_target_dir(config: &CostConfig) -> Result<PathBuf, CostError> {
    let candidates = [
        config.on_target.clone(),
        Some(PathBuf::from("on-target")),
        Some(Path::new(env!("CARGO_MANIFEST_DIR")).join("../on-target")),
    ];
    candidates
        .into_iter()
        .flatten()
        .find(|d| d.join("Cargo.toml").is_file())
        .ok_or_else(|| {
            CostError::Config(
                "cannot find the on-target workspace: pass --on-target DIR or --elf FILE".into(),
            )
        })
}

/// Largest state size on-target's build script generates probes for.
pub const MAX_PROBE_N: usize = 24;

/// Builds on-target's `cost_probe` in release, with linear probes for
/// `sizes` (n, m), and returns its ELF. The workspace's own
/// `.cargo/config.toml` sets the target, the linker script and
/// `-C target-cpu=cortex-m4`; variables that would override it are removed.
///
/// # Errors
/// [`CostError::Config`] for a size outside 1 <= m <= n <= [`MAX_PROBE_N`];
/// [`CostError::Build`] when cargo fails.
pub fn build_probe(dir: &Path, sizes: &[(usize, usize)]) -> Result<PathBuf, CostError> {
    if let Some(&(n, m)) = sizes
        .iter()
        .find(|&&(n, m)| !(1..=MAX_PROBE_N).contains(&n) || !(1..=n).contains(&m))
    {
        return Err(CostError::Config(format!(
            "size {n}x{m}: need 1 <= m <= n <= {MAX_PROBE_N}"
        )));
    }
    let list: Vec<String> = sizes.iter().map(|(n, m)| format!("{n}x{m}")).collect();
    let mut cargo = Command::new("cargo");
    cargo
        .args(["build", "--release", "--locked", "--bin", "cost_probe"])
        .current_dir(dir)
        .env_remove("RUSTFLAGS")
        .env_remove("CARGO_ENCODED_RUSTFLAGS")
        .env_remove("CARGO_TARGET_DIR")
        .env_remove("CARGO_BUILD_TARGET")
        .env_remove("CARGO_BUILD_RUSTFLAGS");
    // Unset means on-target's default sizes; leaving it unset then keeps the
    // build shared with tests/target.rs (a changed value rebuilds).
    if list.is_empty() {
        cargo.env_remove("CAIRN_COST_SIZES");
    } else {
        cargo.env("CAIRN_COST_SIZES", list.join(","));
    }
    let out = cargo
        .output()
        .map_err(|e| CostError::Build(format!("cannot run cargo: {e}")))?;
    if !out.status.success() {
        return Err(CostError::Build(
            String::from_utf8_lossy(&out.stderr).into_owned(),
        ));
    }
    Ok(dir.join("target/thumbv7em-none-eabihf/release/cost_probe"))
}

/// Runs the ELF under QEMU with block tracing and returns (log, stdout).
fn trace_qemu(elf: &Path, timeout: Duration) -> Result<(String, String), CostError> {
    let log = std::env::temp_dir().join(format!("cairn-cost-{}.log", std::process::id()));
    let mut child = Command::new("qemu-system-arm")
        .args(["-M", "mps2-an386", "-nographic"])
        .args(["-semihosting-config", "enable=on,target=native"])
        .args(["-icount", "shift=0"])
        .args(["-d", "in_asm,exec,nochain", "-D"])
        .arg(&log)
        .arg("-kernel")
        .arg(elf)
        .stdin(Stdio::null())
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .map_err(|e| CostError::Tool {
            tool: "qemu-system-arm",
            detail: e.to_string(),
        })?;
    let start = Instant::now();
    loop {
        match child.try_wait() {
            Ok(Some(_)) => break,
            Ok(None) if start.elapsed() > timeout => {
                let _ = child.kill();
                let _ = child.wait();
                let _ = std::fs::remove_file(&log);
                return Err(CostError::Tool {
                    tool: "qemu-system-arm",
                    detail: format!("no exit within {timeout:?}: is the ELF a cost probe?"),
                });
            }
            Ok(None) => std::thread::sleep(Duration::from_millis(20)),
            Err(e) => {
                return Err(CostError::Tool {
                    tool: "qemu-system-arm",
                    detail: e.to_string(),
                });
            }
        }
    }
    let out = child.wait_with_output().map_err(|e| CostError::Tool {
        tool: "qemu-system-arm",
        detail: e.to_string(),
    })?;
    let text = std::fs::read_to_string(&log).map_err(|e| CostError::Io(log.clone(), e));
    let _ = std::fs::remove_file(&log);
    let stdout = String::from_utf8_lossy(&out.stdout).into_owned();
    if !out.status.success() {
        return Err(CostError::Tool {
            tool: "qemu-system-arm",
            detail: format!(
                "the probe failed ({}): {stdout}{}",
                out.status,
                String::from_utf8_lossy(&out.stderr)
            ),
        });
    }
    Ok((text?, stdout))
}

/// The probes in the ELF: (name, entry address), the pose probes first
/// (each Joseph operation followed by its U-D twin), then the linear ones by
/// state size, predicts before the updates, then any others.
pub fn probes(functions: &[Function]) -> Vec<(String, u32)> {
    let mut found: Vec<(String, u32)> = functions
        .iter()
        .filter_map(|f| {
            f.name
                .strip_prefix(PROBE_PATH)
                .or_else(|| f.name.strip_prefix(USER_PROBE_PREFIX))
                .filter(|n| !n.is_empty())
                .map(|n| (n.to_string(), f.addr))
        })
        .collect();
    let key = |name: &str| {
        let pose = [
            "pose_predict",
            "pose_ud_predict",
            "pose_predict_unchecked",
            "pose_position_update",
            "pose_ud_position_update",
            "pose_position_update_unchecked",
            "pose_heading_update",
            "pose_ud_heading_update",
        ];
        if let Some(i) = pose.iter().position(|p| *p == name) {
            return (0, i, String::new());
        }
        let digits: String = name
            .trim_start_matches(|c: char| !c.is_ascii_digit())
            .chars()
            .take_while(char::is_ascii_digit)
            .collect();
        let n = digits.parse().unwrap_or(usize::MAX);
        (1, n, name.replace("_predict", "_0predict"))
    };
    found.sort_by_key(|(name, _)| key(name));
    found
}

/// Makes the estimate: builds (or takes) the probe ELF, disassembles and
/// traces it, and prices every probe.
///
/// # Errors
/// [`CostError`] when a tool is missing, the build or a run fails, the ELF
/// has no probes, or the clock or a rate is not a positive finite number.
pub fn estimate(config: &CostConfig) -> Result<CostReport, CostError> {
    if !(config.clock_mhz.is_finite() && config.clock_mhz > 0.0) {
        return Err(CostError::Config(format!(
            "clock must be a positive number of MHz, got {}",
            config.clock_mhz
        )));
    }
    for (name, hz) in &config.rates {
        if !(hz.is_finite() && *hz > 0.0) {
            return Err(CostError::Config(format!(
                "rate of {name} must be a positive number of Hz, got {hz}"
            )));
        }
    }
    let objdump =
        find_tool(&["llvm-objdump", "llvm-objdump-14"]).ok_or(CostError::ToolMissing {
            tool: "llvm-objdump",
            hint: "Debian: apt-get install llvm",
        })?;
    if find_tool(&["qemu-system-arm"]).is_none() {
        return Err(CostError::ToolMissing {
            tool: "qemu-system-arm",
            hint: "Debian: apt-get install qemu-system-arm",
        });
    }
    let elf = match &config.elf {
        Some(e) => {
            if !e.is_file() {
                return Err(CostError::Config(format!("{}: no such ELF", e.display())));
            }
            e.clone()
        }
        None => match &config.probe {
            Some(p) => user::build_user_probe(p)?,
            None => build_probe(&on_target_dir(config)?, &config.sizes)?,
        },
    };
    let syms = run_tool(
        objdump,
        &["--syms".as_ref(), "-C".as_ref(), elf.as_os_str()],
    )?;
    let functions = parse_symbols(&syms);
    let probes = probes(&functions);
    if probes.is_empty() {
        return Err(CostError::NoProbes(elf));
    }
    for (name, _) in &config.rates {
        if !probes.iter().any(|(p, _)| p == name) {
            let known: Vec<&str> = probes.iter().map(|(p, _)| p.as_str()).collect();
            return Err(CostError::Config(format!(
                "no probe named {name}; the ELF has: {}",
                known.join(", ")
            )));
        }
    }
    let asm = run_tool(
        objdump,
        &[
            "-d".as_ref(),
            "--no-show-raw-insn".as_ref(),
            "-C".as_ref(),
            elf.as_os_str(),
        ],
    )?;
    let listing = parse_disassembly(&asm);
    let (log, stdout) = trace_qemu(&elf, config.timeout)?;
    let trace = trace::parse_log(&log);
    let tallies = attribute(&trace, &listing, &functions, &probes);

    let rate = |name: &str| {
        config
            .rates
            .iter()
            .find(|(n, _)| n == name)
            .map(|r| r.1)
            .or_else(|| {
                DEMO_RATES
                    .iter()
                    .find(|(n, _)| config.demo_rates && *n == name)
                    .map(|r| r.1)
            })
    };
    let mut operations: Vec<OperationCost> = probes
        .iter()
        .zip(&tallies)
        .map(|((name, _), t)| OperationCost::from_tally(name, t, rate(name), &listing, &functions))
        .collect();
    user::announced_order(&mut operations, &stdout);
    let warnings = warnings(
        &operations,
        &tallies,
        &stdout,
        &listing,
        &functions,
        &probes,
    );
    Ok(CostReport {
        elf,
        clock_mhz: config.clock_mhz,
        operations,
        warnings,
    })
}

fn warnings(
    operations: &[OperationCost],
    tallies: &[Tally],
    stdout: &str,
    listing: &std::collections::HashMap<u32, listing::Instruction>,
    functions: &[Function],
    probes: &[(String, u32)],
) -> Vec<String> {
    let mut w = Vec::new();
    let announced = stdout
        .split_whitespace()
        .skip_while(|t| *t != "calls")
        .nth(1)
        .and_then(|n| n.parse::<u64>().ok());
    for o in operations {
        if Some(o.calls) != announced {
            w.push(format!(
                "{}: traced {} calls, the probe announced {:?}",
                o.name, o.calls, announced
            ));
        }
        let f = &o.fp_total;
        if f.soft_sqrt > 0 {
            w.push(format!(
                "{}: a software square root runs {:.0} times per call; use VSQRT (f32::sqrt with \
                 target-cpu=cortex-m4) or keep square roots out of the covariance path",
                o.name,
                o.per_call(f.soft_sqrt)
            ));
        }
        let soft = f.soft_add + f.soft_mul + f.soft_div + f.soft_other;
        if soft > 0 {
            let libm = o.hot.iter().any(|(n, _)| n.starts_with("libm::")) || o.soft_share > 0.0;
            w.push(format!(
                "{}: {:.0} software f64 operations per call take {:.0}% of its cycles (the M4 \
                 has no f64 unit){}",
                o.name,
                o.per_call(soft),
                100.0 * o.soft_share,
                if libm {
                    "; libm's sinf/cosf compute in f64 internally"
                } else {
                    ""
                }
            ));
        }
    }
    for t in tallies {
        if t.unlisted > 0 {
            w.push(format!(
                "{} executed instructions were not in the llvm-objdump listing (counted as 1 cycle)",
                t.unlisted
            ));
        }
    }
    // VMLA in the probes' own code: built without -C target-cpu=cortex-m4?
    let vmla = probes
        .iter()
        .filter_map(|(_, a)| functions.iter().find(|f| f.addr == *a))
        .flat_map(|f| (f.addr..f.addr + f.size).step_by(2))
        .filter(|a| {
            listing
                .get(a)
                .is_some_and(|i| i.class == classify::Class::FpMac)
        })
        .count();
    if vmla > 0 {
        w.push(format!(
            "the probes hold {vmla} VMLA-family instructions (3 cycles on the M4, VMUL + VADD \
             take 2): was the ELF built without -C target-cpu=cortex-m4?"
        ));
    }
    w
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn short_names_keep_the_last_two_segments() {
        assert_eq!(short_name("libm::math::sinf::sinf"), "sinf::sinf");
        assert_eq!(short_name("__aeabi_dmul"), "__aeabi_dmul");
        assert_eq!(
            short_name("<cairn_core::form::Joseph as cairn_core::form::CovarianceForm>::posterior"),
            "Joseph::posterior"
        );
        assert_eq!(
            short_name(
                "nalgebra::base::ops::<impl core::ops::arith::Mul<&nalgebra::Matrix<T,R2,C2,SB>> for &nalgebra::Matrix<T,R1,C1,SA>>::mul"
            ),
            "Matrix::mul"
        );
        assert_eq!(
            short_name("cairn_core::ldl::Ldl<T,_>::right_divide"),
            "Ldl::right_divide"
        );
    }

    #[test]
    fn cpu_share_from_clock_and_rate() {
        // 1680 cycles at 168 MHz is 10 us; at 200 Hz that is 0.2% of the CPU.
        let o = OperationCost {
            name: "p".into(),
            calls: 1,
            instructions: 1000.0,
            m4_cycles: 1680.0,
            m7_cycles: 900.0,
            fp_total: FpOps::default(),
            bound: 840.0,
            rate_hz: Some(200.0),
            hot: Vec::new(),
            callees: Vec::new(),
            soft_share: 0.0,
            mix: [0.0; 6],
            profile: Vec::new(),
        };
        assert!((o.micros(168.0) - 10.0).abs() < 1e-12);
        assert!((o.cpu_share(168.0) - 0.002).abs() < 1e-15);
        assert_eq!(o.ratio(), Some(2.0));
    }

    /// End to end on the pose filter: builds on-target's cost probe, traces
    /// it under QEMU and prices the pose operations.
    #[test]
    fn pose_filter_end_to_end() {
        // A missing tool fails the test: it must not pass unchecked
        // (scripts/test-all.sh installs qemu-system-arm; llvm-objdump comes
        // with the machine's LLVM).
        assert!(
            find_tool(&["qemu-system-arm"]).is_some()
                && find_tool(&["llvm-objdump", "llvm-objdump-14"]).is_some(),
            "qemu-system-arm and llvm-objdump are needed for this test"
        );
        let report = estimate(&CostConfig::default()).expect("estimate");
        println!("{}", report.render());
        let predict = report
            .operation("pose_predict")
            .expect("pose_predict probe");
        let position = report
            .operation("pose_position_update")
            .expect("position probe");
        let heading = report
            .operation("pose_heading_update")
            .expect("heading probe");
        for o in [predict, position, heading] {
            assert_eq!(o.calls, 16, "{}", o.name);
            // Every cycle is at least one instruction; the table's dearest
            // common instruction (VDIV, 14) bounds the other side.
            assert!(o.m4_cycles >= o.instructions, "{}", o.name);
            assert!(o.m4_cycles <= 14.0 * o.instructions, "{}", o.name);
            assert!(o.bound > 0.0 && o.m4_cycles > o.bound, "{}", o.name);
        }
        // The cycle targets set for the structure-aware kernels (pose
        // predict 250, position fix 350, heading fix 220; measured in
        // docs/performance.md). A traced instruction mix priced by the
        // table, not a wall time: the same build gives the same figure, so a
        // change that costs cycles fails here.
        for (o, target) in [(predict, 250.0), (position, 350.0), (heading, 220.0)] {
            assert!(
                o.m4_cycles <= target,
                "{}: {} M4 cycles, target {target}",
                o.name,
                o.m4_cycles
            );
        }
        // Operation counts the source fixes (pose.rs, form.rs, ldl.rs; n = 3):
        // P = F P F' + Q has at least n^3 = 27 multiplies, the position
        // update divides at least once per LDL' pivot of S (m = 2).
        assert!(predict.per_call(predict.fp_total.mul) >= 27.0);
        assert!(position.per_call(position.fp_total.div) >= 2.0);
        // No square root anywhere in the covariance path (issue 2).
        for o in &report.operations {
            assert_eq!(o.fp_total.sqrt + o.fp_total.soft_sqrt, 0, "{}", o.name);
        }
        // Built with -C target-cpu=cortex-m4: no VMLA warning.
        assert!(
            !report.warnings.iter().any(|w| w.contains("VMLA")),
            "{:?}",
            report.warnings
        );
        assert!(report.cpu_share() > 0.0);
        // The instruction profile accounts for every cycle and instruction
        // of the call, and shows the multiplies counted above.
        for o in [predict, position, heading] {
            let cycles: f64 = o.profile.iter().map(|l| l.cycles).sum();
            let runs: f64 = o.profile.iter().map(|l| l.count).sum();
            assert!((cycles - o.m4_cycles).abs() < 1e-6, "{}", o.name);
            assert!((runs - o.instructions).abs() < 1e-6, "{}", o.name);
        }
        assert!(
            predict
                .profile
                .iter()
                .any(|l| l.text.starts_with("vmul.f32"))
        );
        assert!(predict.render_profile().contains("vmul.f32"));
        // The unchecked floors do the dense arithmetic with no checks and
        // no transaction, above their own bound; the filter, with the pose
        // model's structural patterns (pose.rs), skips the products with
        // F's and H's structural zeros and ones, so it executes fewer
        // multiplies than the dense floor despite its checks.
        for (floor, filter) in [
            ("pose_predict_unchecked", predict),
            ("pose_position_update_unchecked", position),
        ] {
            let f = report.operation(floor).expect("floor probe");
            assert_eq!(f.calls, 16, "{floor}");
            assert!(f.m4_cycles > f.bound, "{floor}");
            assert!(
                filter.fp_total.mul < f.fp_total.mul,
                "{floor}: {} against {}",
                filter.fp_total.mul,
                f.fp_total.mul
            );
        }

        // The U-D twins, on the same scenario and the same demo rates.
        let ud_predict = report
            .operation("pose_ud_predict")
            .expect("pose_ud_predict probe");
        let ud_position = report
            .operation("pose_ud_position_update")
            .expect("U-D position probe");
        let ud_heading = report
            .operation("pose_ud_heading_update")
            .expect("U-D heading probe");
        let linear_ud_predict = report
            .operation("linear9_ud_predict")
            .expect("linear U-D predict probe");
        let linear_ud_update = report
            .operation("linear9_update3_ud")
            .expect("linear U-D update probe");
        for (o, hz) in [
            (ud_predict, Some(200.0)),
            (ud_position, Some(4.0)),
            (ud_heading, Some(1.0)),
            (linear_ud_predict, None),
            (linear_ud_update, None),
        ] {
            assert_eq!(o.calls, 16, "{}", o.name);
            assert_eq!(o.rate_hz, hz, "{}", o.name);
            assert!(o.m4_cycles >= o.instructions, "{}", o.name);
            assert!(o.m4_cycles <= 14.0 * o.instructions, "{}", o.name);
            assert!(o.bound > 0.0 && o.m4_cycles > o.bound, "{}", o.name);
        }
        // Bierman's measurement update (G. J. Bierman, Factorization Methods
        // for Discrete Sequential Estimation, 1977) processes one scalar
        // component at a time and divides by that component's innovation
        // variance, with no square root (checked above for every probe):
        // at least one divide per component, m = 2, 1 and 3.
        let div = |o: &OperationCost| o.per_call(o.fp_total.div);
        assert!(div(ud_position) >= 2.0, "{}", div(ud_position));
        assert!(div(ud_heading) >= 1.0, "{}", div(ud_heading));
        assert!(div(linear_ud_update) >= 3.0, "{}", div(linear_ud_update));
        // Thornton's time update (same book) scales every off-diagonal entry
        // of the new U by the reciprocal of its column's pivot: one divide
        // per column that has off-diagonal entries, n - 1 = 2 for the pose
        // and 8 for n = 9 (the core forms the reciprocal once instead of
        // dividing n (n - 1) / 2 times).
        assert!(div(ud_predict) >= 2.0, "{}", div(ud_predict));
        assert!(div(linear_ud_predict) >= 8.0, "{}", div(linear_ud_predict));
        assert!(div(linear_ud_predict) < 36.0, "{}", div(linear_ud_predict));
        // With demo rates on both filters the report gives a share for each.
        assert!(report.cpu_share_where(is_ud_probe) > 0.0);
        assert!(report.cpu_share_where(|n| !is_ud_probe(n)) > 0.0);
        assert!(report.render().contains("with the U-D probes"));
    }

    #[test]
    fn probes_come_in_reading_order() {
        let f = |name: &str, addr| Function {
            addr,
            size: 4,
            name: format!("{PROBE_PATH}{name}"),
        };
        let functions = vec![
            f("linear15_update3_joseph", 0),
            f("linear2_predict", 4),
            f("pose_heading_update", 8),
            f("linear15_predict", 12),
            f("pose_predict", 16),
            f("main_loop", 20),
            f("pose_ud_predict", 24),
            f("linear15_update3_ud", 28),
            f("linear15_ud_predict", 32),
            f("pose_ud_heading_update", 36),
        ];
        let names: Vec<String> = probes(&functions).into_iter().map(|p| p.0).collect();
        assert_eq!(
            names,
            [
                "pose_predict",
                "pose_ud_predict",
                "pose_heading_update",
                "pose_ud_heading_update",
                "linear2_predict",
                "linear15_predict",
                "linear15_ud_predict",
                "linear15_update3_joseph",
                "linear15_update3_ud",
                "main_loop"
            ]
        );
    }

    #[test]
    fn spec_sizes_and_rates() {
        // The demo (pose model): the predict at the step rate, each fix at
        // its channel's rate, no linear sizes.
        let demo = crate::demo::plan().expect("demo spec");
        let wanted = plan_probes(&demo);
        assert!(wanted.sizes.is_empty());
        let rate = |w: &SpecProbes, name: &str| w.rates.iter().find(|r| r.0 == name).map(|r| r.1);
        assert_eq!(rate(&wanted, "pose_predict"), Some(demo.step_hz));
        assert!(rate(&wanted, "pose_position_update").is_some());
        // A linear spec: n = 2 states, one scalar channel at 50 Hz.
        let path = Path::new(env!("CARGO_MANIFEST_DIR")).join("specs/wna-tracker.toml");
        let plan = crate::spec::load(&path).expect("wna-tracker spec");
        let wanted = plan_probes(&plan);
        assert_eq!(wanted.sizes, vec![(2, 1)]);
        assert_eq!(rate(&wanted, "linear2_predict"), Some(50.0));
        assert_eq!(rate(&wanted, "linear2_update1_joseph"), Some(50.0));
        // The same specs flashing U-D get the U-D probes, and only those.
        let mut plan = plan;
        plan.flash.form = "u-d".into();
        let wanted = plan_probes(&plan);
        assert_eq!(wanted.sizes, vec![(2, 1)]);
        assert!(wanted.notes.is_empty(), "{:?}", wanted.notes);
        assert_eq!(rate(&wanted, "linear2_ud_predict"), Some(50.0));
        assert_eq!(rate(&wanted, "linear2_update1_ud"), Some(50.0));
        assert_eq!(rate(&wanted, "linear2_predict"), None);
        let mut demo = demo;
        demo.flash.form = "u-d".into();
        let wanted = plan_probes(&demo);
        assert_eq!(rate(&wanted, "pose_ud_predict"), Some(demo.step_hz));
        assert!(rate(&wanted, "pose_ud_position_update").is_some());
        assert!(wanted.rates.iter().all(|r| is_ud_probe(&r.0)));
    }

    #[test]
    fn ud_probe_names() {
        for n in [
            "pose_ud_predict",
            "pose_ud_heading_update",
            "linear9_ud_predict",
            "linear12_update3_ud",
        ] {
            assert!(is_ud_probe(n), "{n}");
        }
        for n in [
            "pose_predict",
            "pose_position_update",
            "linear9_predict",
            "linear9_update3_joseph",
            "linear9_update3_conventional",
        ] {
            assert!(!is_ud_probe(n), "{n}");
        }
    }

    #[test]
    fn refuses_bad_sizes_before_building() {
        let dir = Path::new("/nonexistent");
        assert!(matches!(
            build_probe(dir, &[(3, 4)]),
            Err(CostError::Config(_))
        ));
        assert!(matches!(
            build_probe(dir, &[(0, 0)]),
            Err(CostError::Config(_))
        ));
        assert!(matches!(
            build_probe(dir, &[(25, 1)]),
            Err(CostError::Config(_))
        ));
    }

    #[test]
    fn refuses_a_bad_clock() {
        let c = CostConfig {
            clock_mhz: 0.0,
            ..CostConfig::default()
        };
        assert!(matches!(estimate(&c), Err(CostError::Config(_))));
    }
}
