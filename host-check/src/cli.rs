//! The command line: clap derive, one enum of subcommands (add a variant
//! and a match arm to add one), and the code that runs each.

use std::path::{Path, PathBuf};

use clap::{Args, Parser, Subcommand, ValueEnum};

pub use crate::exit::{EXIT_BAD_INPUT, EXIT_FAIL, EXIT_PASS, Failure};
use crate::exit::{Message, bad};
use crate::output;
use crate::report::{self, Report};
use crate::run::{self, RunOptions};
use crate::spec::{self, Mode, Plan};

const EXIT_CODES: &str = "Exit codes:
  0  the variant to flash (default f32 joseph) passes, for the whole mission
  1  it fails, is projected to cross a limit within the mission, the run
     cannot decide the mission (\"undecided: run at least H\"), or the spec's
     external reference disagrees with ours (a numerical pass is not a
     safety case; see the report)
  2  bad input: a malformed or inconsistent spec, an unreadable file, a bad
     option, an output that cannot be written or that names an input
A closed standard output (a pipe whose reader has gone) ends the output
quietly; the exit code is the one above.";

/// The whole spec format (docs/spec-format.md), built into the binary:
/// `cairn spec-format` prints it.
pub const SPEC_FORMAT: &str = include_str!("../../docs/spec-format.md");

/// `check --help`: the spec format in one screen, then the exit codes.
const CHECK_HELP: &str = concat!(
    "The spec file (TOML; unknown fields are errors; `cairn spec-format` prints the whole format,
`cairn demo --print-spec` a complete example):
  title, seed    a title for the report; the seed of the synthetic noise
  [[state]]      name and unit of each state, in order (1 to 24 states)
  [model]        kind = \"continuous\" (a, g, noise), \"discrete\" (f, q or q_diag) or
                 \"planar-pose\" (speed_noise, yaw_rate_noise, profile or profile_csv,
                 mode, origin_shift_m); step_hz
  [[channel]]    name, rate_hz, h (or fix for the pose model), r, r_diag or noise;
                 dropouts, gate
  [start]        x, and p, p_diag or std
  [horizon]      seconds, hours or steps: the length of the run
  [mission]      days, hours or seconds the filter must last (default: the run)
  [verdict]      thresholds: max_relative_error, max_asymmetry, max_gain_error,
                 max_state_difference_sd, max_steady_distance, max_transient_excess
  [flash]        the spec's choice: precision (\"f32\", \"f64\") and form
                 (\"joseph\", \"conventional\", \"u-d\")
  [reference]    csv (an external covariance trajectory) and tolerance
A noise figure: { KIND = VALUE, unit = \"...\" } with KIND density, psd, random_walk,
bias_instability, rate_random_walk, quantization, std or variance; optional sided,
per, at_hz, quantity, correlation_s.

",
    "Exit codes:
  0  the variant to flash (default f32 joseph) passes, for the whole mission
  1  it fails, is projected to cross a limit within the mission, the run
     cannot decide the mission (\"undecided: run at least H\"), or the spec's
     external reference disagrees with ours (a numerical pass is not a
     safety case; see the report)
  2  bad input: a malformed or inconsistent spec, an unreadable file, a bad
     option, an output that cannot be written or that names an input
A closed standard output (a pipe whose reader has gone) ends the output
quietly; the exit code is the one above."
);

/// Checks a Kalman filter's single-precision numerics before it is flashed:
/// runs cairn-core's own code in f32 and f64, in every covariance form,
/// against an extended-precision reference on your model's schedule, and
/// turns datasheet noise figures into Q and R. With no subcommand, runs the
/// built-in demo.
#[derive(Debug, Parser)]
#[command(name = "cairn", version, after_help = EXIT_CODES, args_conflicts_with_subcommands = true)]
pub struct Cli {
    /// What to do (the demo check when omitted).
    #[command(subcommand)]
    pub command: Option<Command>,
    /// Report options for the demo check run without a subcommand.
    #[command(flatten)]
    pub output: Output,
}

/// The subcommands.
#[derive(Debug, Subcommand)]
pub enum Command {
    /// Check the filter a spec file describes (`cairn spec-format` prints
    /// the format).
    #[command(after_help = CHECK_HELP)]
    Check(CheckArgs),
    /// Print the spec file format, the whole reference (built into the
    /// binary).
    ///
    /// The same text as docs/spec-format.md in the source repository.
    #[command(after_help = "Exit codes:\n  0  printed")]
    SpecFormat,
    /// Check the built-in demo: an invented survey rover, one hour of wheel
    /// odometry at 200 Hz with beacon position fixes and sun-compass
    /// heading fixes.
    #[command(after_help = EXIT_CODES)]
    Demo(DemoArgs),
    /// Convert one datasheet noise figure into the filter's numbers and
    /// show each step (no check is run).
    #[command(after_help = "Exit codes:\n  0  converted\n  2  bad figure or unit")]
    Noise(NoiseArgs),
    /// Estimate the cycles of one predict and one update on a Cortex-M4F
    /// (traced under QEMU; an M7 column, rough).
    ///
    /// Builds on-target's cost probe (or, with --probe, the user's own probe
    /// crate), traces it under QEMU and weights the executed instructions
    /// with the M4's published cycle table: the M4 figures are the traced
    /// ones. The "M7 cyc" column is rough, not traced on an M7: the same M4
    /// instruction trace priced with a dual-issue throughput bound from
    /// LLVM's M7 latencies, optimistic (dependency stalls not modelled).
    #[command(
        after_help = "Exit codes:\n  0  estimate printed\n  2  bad option, missing tool or failed build/run"
    )]
    Cost(CostArgs),
    /// Monte Carlo consistency: simulate truth and measurements from the
    /// spec's own noise, run every variant, and judge average NEES and NIS
    /// against their chi-square intervals (the demo when no spec is given).
    #[command(after_help = crate::consistency::command::EXIT_CODES)]
    Trials(crate::consistency::command::TrialsArgs),
    /// Write the spec's matrices (F, Q, H, R, P0 and the Riccati steady
    /// gain and covariance) as a Rust file of `const` arrays for firmware.
    #[command(after_help = crate::constants::command::EXIT_CODES)]
    Constants(crate::constants::command::ConstantsArgs),
    /// Noise figures from your own sensor: the overlapping Allan deviation
    /// of a recorded static log (streamed), the fitted N, B and K with
    /// their uncertainty, the spec lines that use them, and the plot.
    #[command(after_help = crate::allan::command::EXIT_CODES)]
    Allan(crate::allan::command::AllanArgs),
}

/// `cairn cost`.
#[derive(Debug, Args)]
pub struct CostArgs {
    /// Trace this cost-probe ELF instead of building on-target's: cairn's
    /// own or a user probe (`cairn_probe__NAME` symbols, docs/target-probes.md).
    #[arg(long, value_name = "PATH", conflicts_with = "probe")]
    pub elf: Option<PathBuf>,
    /// Build this probe crate (made with the cairn-probe harness) in release
    /// for the Cortex-M4F and trace it: prices the user's own operations.
    #[arg(long, value_name = "DIR")]
    pub probe: Option<PathBuf>,
    /// The binary of the probe crate to trace (needed when it has several).
    #[arg(long, value_name = "NAME", requires = "probe")]
    pub bin: Option<String>,
    /// The on-target workspace to build (default: ./on-target).
    #[arg(long, value_name = "DIR")]
    pub on_target: Option<PathBuf>,
    /// Core clock, MHz.
    #[arg(long, value_name = "MHZ", default_value_t = 168.0)]
    pub clock_mhz: f64,
    /// Call rate of an operation, NAME=HZ (repeatable), e.g.
    /// pose_predict=400; the demo's rates apply to the pose operations
    /// otherwise.
    #[arg(long = "rate", value_name = "NAME=HZ")]
    pub rates: Vec<String>,
    /// Also price a linear model of N states with M-component updates
    /// (repeatable), e.g. 12x3.
    #[arg(long = "size", value_name = "NxM")]
    pub sizes: Vec<String>,
    /// Take the sizes and rates from a spec file (its model, step rate and
    /// channel rates).
    #[arg(long, value_name = "PATH")]
    pub spec: Option<PathBuf>,
    /// Also print one operation instruction by instruction: every executed
    /// instruction with its runs and M4 cycles per call.
    #[arg(long, value_name = "NAME")]
    pub profile: Option<String>,
}

/// Where the reports go.
#[derive(Debug, Clone, Args, Default)]
pub struct Output {
    /// Write the full report (every figure) as JSON to this file.
    #[arg(long, value_name = "PATH")]
    pub json: Option<PathBuf>,
    /// Write the drift plot (relative error against time, log scale) as SVG.
    #[arg(long, value_name = "PATH")]
    pub plot: Option<PathBuf>,
    /// Print only the verdict line, not the whole report.
    #[arg(long, short)]
    pub quiet: bool,
    /// Never show a progress bar (it is hidden anyway when stderr is not a terminal).
    #[arg(long)]
    pub no_progress: bool,
    /// The mission the filter must last, e.g. 30d, 12h, 90m or 3600s
    /// (overrides the spec's mission table; default: the run's length,
    /// the spec's `[horizon]`).
    #[arg(long, value_name = "LENGTH")]
    pub mission: Option<String>,
    /// Also estimate the chosen variant's cycles per step: builds
    /// on-target's cost probe and traces it under QEMU, as `cairn cost
    /// --spec` does (slow; f32 conventional, Joseph and U-D).
    #[arg(long)]
    pub cycles: bool,
}

/// `cairn check`.
#[derive(Debug, Args)]
pub struct CheckArgs {
    /// The spec file (TOML).
    pub spec: PathBuf,
    /// Run only this many seconds of the spec's `[horizon]` (a quick look).
    #[arg(long, value_name = "S")]
    pub seconds: Option<f64>,
    /// For nonlinear models: covariance-only or end-to-end (overrides the spec).
    #[arg(long, value_enum)]
    pub mode: Option<ModeArg>,
    /// Pose model, end-to-end mode, origin shift: each variant moves its
    /// origin to its x, y (whole metres, origin kept in f64) whenever |x|
    /// or |y| passes M metres (overrides the spec's `origin_shift_m`).
    #[arg(long = "origin-shift", alias = "recentre", value_name = "M")]
    pub recentre: Option<f64>,
    /// Report options.
    #[command(flatten)]
    pub output: Output,
}

/// `cairn demo`.
#[derive(Debug, Args)]
pub struct DemoArgs {
    /// Print the demo's spec file and exit (a starting point for your own).
    #[arg(long)]
    pub print_spec: bool,
    /// Run only this many seconds of the hour.
    #[arg(long, value_name = "S")]
    pub seconds: Option<f64>,
    /// Covariance-only or end-to-end (overrides the spec).
    #[arg(long, value_enum)]
    pub mode: Option<ModeArg>,
    /// End-to-end mode, origin shift: each variant moves its origin to its
    /// x, y (whole metres, origin kept in f64) whenever |x| or |y| passes M
    /// metres.
    #[arg(long = "origin-shift", alias = "recentre", value_name = "M")]
    pub recentre: Option<f64>,
    /// Report options.
    #[command(flatten)]
    pub output: Output,
}

/// The mode on the command line.
#[derive(Debug, Clone, Copy, ValueEnum)]
pub enum ModeArg {
    /// Same Jacobians for every variant, along the reference trajectory.
    Covariance,
    /// Every variant runs its own nonlinear filter.
    EndToEnd,
}

/// `cairn noise`.
#[derive(Debug, Args)]
pub struct NoiseArgs {
    /// The figure as the spec writes it, e.g. `density = 0.004`,
    /// `random_walk = 0.2` (N), `bias_instability = 3e-4` (B),
    /// `rate_random_walk = 5e-5` (K) or `quantization = 1e-3` (Q).
    #[arg(value_name = "KIND=VALUE")]
    pub figure: String,
    /// Its unit, e.g. "deg/s/sqrt(Hz)", "deg/sqrt(h)", "(m/s^2)^2/Hz", "m".
    #[arg(long)]
    pub unit: String,
    /// "one" or "two" for densities and PSDs.
    #[arg(long)]
    pub sided: Option<String>,
    /// Frequency variable of a PSD: "Hz" or "rad/s".
    #[arg(long)]
    pub per: Option<String>,
    /// Sample rate a per-sample std or variance was measured at, Hz.
    #[arg(long, value_name = "HZ")]
    pub at_hz: Option<f64>,
    /// Unit of the noisy quantity (e.g. "rad/s" for a gyro); checks the
    /// figure's unit against it and converts into it.
    #[arg(long)]
    pub quantity: Option<String>,
    /// Correlation time of a bias instability's Gauss-Markov state, s.
    #[arg(long, value_name = "S")]
    pub correlation_s: Option<f64>,
    /// Also give the discrete number at this filter rate, Hz: a white
    /// noise's per-sample variance, a bias state's Qd per step.
    #[arg(long, value_name = "HZ")]
    pub rate: Option<f64>,
}

/// Runs the parsed command line; returns the exit code.
///
/// # Errors
/// A [`Failure`] carrying exit code 2 for bad input.
pub fn execute(cli: Cli) -> Result<u8, Failure> {
    match cli.command {
        None => demo(&DemoArgs {
            print_spec: false,
            seconds: None,
            mode: None,
            recentre: None,
            output: cli.output,
        }),
        Some(Command::Demo(a)) => demo(&a),
        Some(Command::Check(a)) => {
            let mut plan = spec::load(&a.spec).map_err(bad)?;
            refuse_clashes(Some(&a.spec), &plan, &a.output)?;
            plan.set_recentre(a.recentre).map_err(|m| bad(Message(m)))?;
            check("check", plan, a.seconds, a.mode, &a.output)
        }
        Some(Command::Noise(a)) => noise(&a),
        Some(Command::SpecFormat) => {
            output::print(SPEC_FORMAT)?;
            Ok(EXIT_PASS)
        }
        Some(Command::Cost(a)) => cost(&a),
        Some(Command::Trials(a)) => crate::consistency::command::execute(&a),
        Some(Command::Constants(a)) => crate::constants::command::execute(&a),
        Some(Command::Allan(a)) => crate::allan::command::execute(&a),
    }
}

fn cost(a: &CostArgs) -> Result<u8, Failure> {
    let mut sizes = Vec::new();
    for item in &a.sizes {
        let parsed = item
            .split_once(['x', 'X'])
            .and_then(|(n, m)| Some((n.trim().parse().ok()?, m.trim().parse().ok()?)));
        let Some(size) = parsed else {
            return Err(bad(Message(format!(
                "`{item}`: write a size as NxM, e.g. 12x3"
            ))));
        };
        sizes.push(size);
    }
    let (mut rates, mut demo_rates) = (Vec::new(), true);
    if let Some(path) = &a.spec {
        let plan = spec::load(path).map_err(bad)?;
        let wanted = crate::cost::plan_probes(&plan);
        for note in &wanted.notes {
            output::note(&format!("note: {note}"));
        }
        sizes.extend(wanted.sizes);
        rates = wanted.rates;
        demo_rates = false;
    }
    for r in &a.rates {
        let parsed = r
            .split_once('=')
            .and_then(|(n, hz)| Some((n.trim().to_string(), hz.trim().parse::<f64>().ok()?)));
        let Some(rate) = parsed else {
            return Err(bad(Message(format!(
                "`{r}`: write a rate as NAME=HZ, e.g. pose_predict=200"
            ))));
        };
        rates.retain(|r: &(String, f64)| r.0 != rate.0);
        rates.push(rate);
    }
    let config = crate::cost::CostConfig {
        elf: a.elf.clone(),
        probe: a.probe.clone().map(|dir| crate::cost::user::ProbeCrate {
            dir,
            bin: a.bin.clone(),
        }),
        on_target: a.on_target.clone(),
        clock_mhz: a.clock_mhz,
        rates,
        demo_rates,
        sizes,
        ..crate::cost::CostConfig::default()
    };
    let report = crate::cost::estimate(&config).map_err(bad)?;
    output::print(&report.render())?;
    if let Some(name) = &a.profile {
        let Some(op) = report.operation(name) else {
            let known: Vec<&str> = report.operations.iter().map(|o| o.name.as_str()).collect();
            return Err(bad(Message(format!(
                "--profile {name}: no such operation; the ELF has: {}",
                known.join(", ")
            ))));
        };
        output::print(&format!("\n{}", op.render_profile()))?;
    }
    Ok(EXIT_PASS)
}

fn demo(a: &DemoArgs) -> Result<u8, Failure> {
    if a.print_spec {
        output::print(crate::demo::SPEC)?;
        return Ok(EXIT_PASS);
    }
    let mut plan = crate::demo::plan().map_err(bad)?;
    refuse_clashes(None, &plan, &a.output)?;
    plan.set_recentre(a.recentre).map_err(|m| bad(Message(m)))?;
    check("demo", plan, a.seconds, a.mode, &a.output)
}

/// Refuses report files that name the spec, a file it reads, or each other.
fn refuse_clashes(spec: Option<&Path>, plan: &Plan, out: &Output) -> Result<(), Failure> {
    let mut inputs: Vec<(&str, &Path)> = Vec::new();
    if let Some(s) = spec {
        inputs.push(("spec", s));
    }
    if let Some(e) = &plan.external {
        inputs.push(("spec's reference CSV", &e.path));
    }
    if let spec::ModelPlan::Pose {
        profile_csv: Some(p),
        ..
    } = &plan.model
    {
        inputs.push(("spec's recorded profile", p));
    }
    let mut outputs: Vec<(&str, &Path)> = Vec::new();
    if let Some(j) = &out.json {
        outputs.push(("--json", j));
    }
    if let Some(p) = &out.plot {
        outputs.push(("--plot", p));
    }
    output::refuse_clashes(&inputs, &outputs)
}

fn check(
    command: &str,
    mut plan: Plan,
    seconds: Option<f64>,
    mode: Option<ModeArg>,
    out: &Output,
) -> Result<u8, Failure> {
    if let Some(s) = seconds {
        if !(s.is_finite() && s > 0.0) {
            return Err(bad(Message(format!("--seconds must be positive, got {s}"))));
        }
        plan.steps = plan.steps.min(((s * plan.step_hz).round() as u64).max(1));
    }
    if let Some(m) = &out.mission {
        plan.thresholds.mission_seconds = Some(parse_mission(m)?);
    }
    if mode.is_some() && plan.is_linear() {
        return Err(bad(Message(
            "--mode applies to the planar-pose model only: a linear model has one mode (every variant runs the same F and H)"
                .into(),
        )));
    }
    let opts = RunOptions {
        progress: !out.no_progress,
        mode: mode.map(|m| match m {
            ModeArg::Covariance => Mode::Covariance,
            ModeArg::EndToEnd => Mode::EndToEnd,
        }),
    };
    let mut result = run::run(&plan, opts).map_err(|e| bad(located(&plan, e)))?;
    crate::engine::mission::fail_on_external(&mut result);
    if out.cycles
        && let Some(m) = result.mission.as_mut()
    {
        let estimate = match m
            .verdict
            .choice
            .as_deref()
            .and_then(crate::engine::mission::probe_form)
        {
            Some(form) => {
                let mut priced = plan.clone();
                priced.flash.form = form.to_string();
                let wanted = crate::cost::plan_probes(&priced);
                let config = crate::cost::CostConfig {
                    rates: wanted.rates,
                    demo_rates: false,
                    sizes: wanted.sizes,
                    ..crate::cost::CostConfig::default()
                };
                crate::cost::estimate(&config).map_err(|e| format!("no cycle estimate: {e}"))
            }
            None => Err(format!(
                "no cycle estimate: the cost probes price f32 conventional, Joseph and U-D, not {}",
                m.verdict.choice.as_deref().unwrap_or("nothing")
            )),
        };
        crate::engine::mission::attach_cycles(
            m,
            estimate.as_ref().map_err(Clone::clone),
            plan.step_hz,
        );
    }
    if out.quiet {
        output::print(&format!(
            "{}: spec's choice {} {} (exit {}); cheapest passing the run: {}; recommended for the mission: {}\n",
            plan.title,
            result.flash,
            if result.flash_passes { "PASS" } else { "FAIL" },
            if result.flash_passes {
                EXIT_PASS
            } else {
                EXIT_FAIL
            },
            result.cheapest_passing.as_deref().unwrap_or("none"),
            result
                .mission
                .as_ref()
                .and_then(|m| m.verdict.choice.as_deref())
                .unwrap_or("none")
        ))?;
    } else {
        output::print(&report::render_as(command, &plan, &result))?;
    }
    if let Some(path) = &out.json {
        let json = Report::new(&plan, &result)
            .to_json()
            .map_err(|e| bad(Message(format!("cannot write the JSON report: {e}"))))?;
        output::write_file(path, json.as_bytes())?;
    }
    if let Some(path) = &out.plot {
        let svg = report::plot(&plan.title, &result, plan.thresholds.max_relative_error);
        output::write_file(path, svg.as_bytes())?;
    }
    Ok(if result.flash_passes {
        EXIT_PASS
    } else {
        EXIT_FAIL
    })
}

/// A run error located in the spec: the file, and the line and field of
/// the channel the message names (the reference refusing its update), or
/// the file alone. An error that already starts with a file name (a
/// malformed row of the external reference) keeps it.
fn located(plan: &Plan, e: run::RunError) -> Box<dyn std::error::Error + Send + Sync> {
    if let Some(ext) = &plan.external
        && e.0.starts_with(&ext.path.display().to_string())
    {
        return Box::new(spec::SpecError {
            file: plan.file.clone(),
            line: 0,
            column: 0,
            field: "reference.csv".into(),
            message: e.0,
        });
    }
    let named = plan
        .channels
        .iter()
        .enumerate()
        .find(|(_, c)| e.0.contains(&format!("channel `{}`", c.name)));
    let (line, column, field) = match named {
        Some((i, c)) if c.line > 0 => (c.line, 1, format!("channel[{i}]")),
        Some((i, _)) => (0, 0, format!("channel[{i}]")),
        None => (0, 0, String::new()),
    };
    Box::new(spec::SpecError {
        file: plan.file.clone(),
        line,
        column,
        field,
        message: e.0,
    })
}

/// A mission length: a positive number with a unit suffix d, h, m or s.
fn parse_mission(text: &str) -> Result<f64, Failure> {
    let t = text.trim();
    let (num, scale) = match t.char_indices().last() {
        Some((i, 'd')) => (&t[..i], 86_400.0),
        Some((i, 'h')) => (&t[..i], 3600.0),
        Some((i, 'm')) => (&t[..i], 60.0),
        Some((i, 's')) => (&t[..i], 1.0),
        _ => {
            return Err(bad(Message(format!(
                "--mission `{text}`: give a length with a unit, e.g. 30d, 12h, 90m or 3600s"
            ))));
        }
    };
    match num.trim().parse::<f64>() {
        Ok(v) if v.is_finite() && v > 0.0 && v * scale <= crate::spec::MAX_MISSION_S => {
            Ok(v * scale)
        }
        _ => Err(bad(Message(format!(
            "--mission `{text}`: the length must be a positive number up to 100 years, e.g. 30d"
        )))),
    }
}

/// The figure kinds `cairn noise` takes (the spec's noise-figure keys).
const NOISE_KINDS: [&str; 8] = [
    "density",
    "psd",
    "random_walk",
    "bias_instability",
    "rate_random_walk",
    "quantization",
    "std",
    "variance",
];

/// A conversion error of `cairn noise` told by the option it came from
/// (the figure was put together from the options: no file, line or field
/// of it is anything the user wrote).
fn noise_option_error(e: &spec::SpecError) -> String {
    let key = e.field.strip_prefix("figure.").unwrap_or(&e.field);
    let option = match key {
        "" | "figure" => return e.message.clone(),
        "unit" => "--unit".to_string(),
        "sided" => "--sided".to_string(),
        "per" => "--per".to_string(),
        "at_hz" => "--at-hz".to_string(),
        "quantity" => "--quantity".to_string(),
        "correlation_s" => "--correlation-s".to_string(),
        kind => format!("the figure `{kind}=`"),
    };
    format!("{option}: {}", e.message)
}

fn noise(a: &NoiseArgs) -> Result<u8, Failure> {
    let Some((kind, value)) = a.figure.split_once('=') else {
        return Err(bad(Message(format!(
            "`{}`: write the figure as KIND=VALUE, e.g. density=0.004",
            a.figure
        ))));
    };
    let (kind, value) = (kind.trim(), value.trim());
    if !NOISE_KINDS.contains(&kind) {
        return Err(bad(Message(format!(
            "`{}`: unknown kind `{kind}`; use one of {}",
            a.figure,
            NOISE_KINDS.join(", ")
        ))));
    }
    let Ok(number) = value.parse::<f64>() else {
        return Err(bad(Message(format!(
            "`{}`: the value `{value}` is not a number",
            a.figure
        ))));
    };
    for (option, v, what) in [
        ("--at-hz", a.at_hz, "a sample rate in Hz"),
        (
            "--correlation-s",
            a.correlation_s,
            "a correlation time in s",
        ),
        ("--rate", a.rate, "a filter rate in Hz"),
    ] {
        if let Some(x) = v
            && !(x.is_finite() && x > 0.0)
        {
            return Err(bad(Message(format!(
                "{option} must be {what}, a positive number; got {x}"
            ))));
        }
    }
    let quote = |s: &str| format!("\"{}\"", s.replace('\\', "\\\\").replace('"', "\\\""));
    let mut doc = format!("{kind} = {number:?}\nunit = {}\n", quote(&a.unit));
    if let Some(s) = &a.sided {
        doc.push_str(&format!("sided = {}\n", quote(s)));
    }
    if let Some(s) = &a.per {
        doc.push_str(&format!("per = {}\n", quote(s)));
    }
    if let Some(q) = &a.quantity {
        doc.push_str(&format!("quantity = {}\n", quote(q)));
    }
    if let Some(r) = a.at_hz {
        doc.push_str(&format!("at_hz = {r:?}\n"));
    }
    if let Some(c) = a.correlation_s {
        doc.push_str(&format!("correlation_s = {c:?}\n"));
    }
    let rec =
        spec::convert_standalone(&doc, a.rate).map_err(|e| bad(Message(noise_option_error(&e))))?;
    let text = format!("{}\n{}", rec.given, rec.chain_text(2));
    output::print(&text)?;
    Ok(EXIT_PASS)
}
