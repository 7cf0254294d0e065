//! The terminal report: the spec in one paragraph, the noise conversions,
//! the variants side by side, the verdicts and the cheapest form that passes.

use std::fmt::Write;

use super::NOT_A_SAFETY_CASE;
use crate::run::{RunResult, VariantResult};
use crate::spec::{ChannelKind, Mode, ModelPlan, Plan};

fn sci(v: f64) -> String {
    if v.is_nan() {
        "n/a".into()
    } else if v.is_infinite() {
        if v > 0.0 { "inf".into() } else { "-inf".into() }
    } else if v == 0.0 {
        "0".into()
    } else {
        format!("{v:.2e}")
    }
}

fn duration(s: f64) -> String {
    if s >= 3600.0 {
        format!("{:.2} h", s / 3600.0)
    } else if s >= 60.0 {
        format!("{:.1} min", s / 60.0)
    } else {
        format!("{s:.3} s")
    }
}

/// `n` and the noun, singular or plural: "1 component", "2 components".
fn count(n: impl Into<u64>, one: &str, many: &str) -> String {
    let n = n.into();
    format!("{n} {}", if n == 1 { one } else { many })
}

/// The mission section: growth fits, crossing times, the steady gain.
fn mission(o: &mut String, m: &crate::engine::mission::MissionResult, limit: f64) {
    use crate::engine::mission::{crossing_time_words, duration_words};
    let _ = writeln!(
        o,
        "\nMission: {}{} ({}); error limit {}",
        duration_words(m.seconds),
        if m.is_horizon {
            " (the run's length; state one with [mission] or --mission)"
        } else {
            ""
        },
        count(m.steps.round() as u64, "step", "steps"),
        sci(limit)
    );
    let horizon_s = m.horizon_seconds;
    if m.seconds > 100.0 * horizon_s {
        let _ = writeln!(
            o,
            "  The mission is {:.0} times the {} run: a projection assumes the growth seen goes on, \
and misses growth that starts later; confirm it with a longer run ([horizon]).",
            m.seconds / horizon_s,
            duration_words(horizon_s)
        );
    }
    // The crossing column is as wide as its longest entry.
    let cw = m
        .variants
        .iter()
        .map(|v| v.crossing.trim_start_matches("after ").len())
        .max()
        .unwrap_or(0)
        .max(14);
    // Slopes per hour of the mission's steps.
    let per_hour = if m.seconds > 0.0 {
        m.steps / m.seconds * 3600.0
    } else {
        0.0
    };
    let _ = writeln!(
        o,
        "  {:<18} {:<19} {:>10} {:>21} {:>10} {:>10} {:>16}  {:<cw$}  mission",
        "variant",
        "trend",
        "slope/h",
        "95% interval",
        "at end",
        "upper",
        "state diff (sd)",
        "crossing"
    );
    for v in &m.variants {
        let (t, b, ci) = match &v.trend {
            Some(t) => (
                t.label(),
                sci(t.slope * per_hour),
                format!(
                    "{} to {}",
                    sci(t.slope_low * per_hour),
                    sci(t.slope_high * per_hour)
                ),
            ),
            None => ("-".into(), "-".into(), "-".into()),
        };
        let t = if v.case == crate::engine::mission::Case::Bounded {
            format!("{t}*")
        } else {
            t
        };
        let _ = writeln!(
            o,
            "  {:<18} {:<19} {:>10} {:>21} {:>10} {:>10} {:>16}  {:<cw$}  {}",
            v.name,
            t,
            b,
            ci,
            v.projected_error.map_or("-".into(), sci),
            v.projected_error_high.map_or("-".into(), sci),
            v.projected_state_sigma.map_or("-".into(), sci),
            v.crossing.trim_start_matches("after "),
            v.outlook.word()
        );
    }
    let _ = writeln!(
        o,
        "  (trend: Mann-Kendall test, two-sided 5%, on {} block maxima of the per-bucket largest \
error after the first 10% of the run, variance tie-corrected and inflated for serial correlation \
(Hamed-Rao); slope: Theil-Sen with Sen's 95% interval, relative error per hour; 'at end' follows \
the robust line only for a significant rise, else the largest value seen; 'upper' adds the \
interval's upper half-width above max(slope, 0); a crossing gives the robust line's time and the \
interval's; 'state diff (sd)': the state difference from the f64 run in standard deviations, \
tested the same way; docs/mission.md)",
        m.variants
            .iter()
            .find_map(|v| v.trend.map(|t| t.blocks))
            .unwrap_or(crate::engine::mission::fit::BLOCKS)
    );
    let mut reasons: Vec<&str> = Vec::new();
    for v in &m.variants {
        if !reasons.contains(&v.reason.as_str()) {
            reasons.push(&v.reason);
        }
    }
    for r in reasons {
        let _ = writeln!(o, "  Covariance: {r}.");
    }
    if let Some(r) = m.variants.iter().find_map(|v| v.state_reason.as_deref()) {
        let _ = writeln!(o, "  State: {r}.");
    }
    if m.variants
        .iter()
        .any(|v| v.outlook == crate::engine::mission::Outlook::Undecided)
    {
        let _ = writeln!(
            o,
            "  (undecided: no significant rise, but the interval's upper slope would cross the limit \
within the mission. 'Run at least' is the run length ([horizon]) at which the interval, narrowed \
as that length over T around the estimate, would decide. An undecided verdict is not a pass: exit 1.)"
        );
    }
    match (&m.constant_gain, &m.constant_gain_note) {
        (Some(cg), _) => {
            let _ = writeln!(
                o,
                "\nSteady gain (cairn-core SteadyGain with the Riccati gain; closed-loop radius {:.4})",
                cg.closed_loop_radius
            );
            let _ = writeln!(
                o,
                "  transient: covariance up to {} above the optimal (largest generalised eigenvalue - 1; trace {}) at t = {}",
                sci(cg.max_excess),
                sci(cg.max_trace_excess),
                duration_words(cg.max_excess_time_s)
            );
            let _ = writeln!(
                o,
                "  within {} of the optimal covariance {}",
                sci(cg.threshold),
                cg.settle_time_s.map_or_else(
                    || format!("not within {} measurement intervals", cg.intervals),
                    |s| format!("after {}", duration_words(s))
                )
            );
            for l in &cg.variants {
                let _ = writeln!(
                    o,
                    "  {:<18} {}; state differs from the f64 run by {} standard deviations{}{}",
                    l.name,
                    count(l.steps, "step", "steps"),
                    sci(l.max_state_difference_sigma),
                    match (l.outlook, l.crossing_s) {
                        (Some(crate::engine::mission::Outlook::Undecided), _) => format!(
                            "; undecided: run at least {}",
                            l.run_at_least_s
                                .map_or_else(|| "longer".to_string(), duration_words)
                        ),
                        (_, Some(t)) if t > crate::engine::mission::FAR_MISSIONS * m.seconds => {
                            format!(
                                "; no crossing in sight (beyond {:.0} x the mission)",
                                crate::engine::mission::FAR_MISSIONS
                            )
                        }
                        (_, Some(t)) => format!(
                            "; projected past the limit after {} ({} to {})",
                            crossing_time_words(t, m.seconds),
                            crossing_time_words(l.crossing_low_s.unwrap_or(t), m.seconds),
                            l.crossing_high_s.map_or_else(
                                || "never".into(),
                                |h| crossing_time_words(h, m.seconds)
                            )
                        ),
                        _ => String::new(),
                    },
                    l.refused
                        .as_ref()
                        .map_or(String::new(), |r| format!("; REFUSED at {r}"))
                );
            }
            if let Some(n) = &cg.variants_note {
                let _ = writeln!(o, "  {n}");
            }
        }
        (None, Some(n)) => {
            let _ = writeln!(o, "\n{n}");
        }
        (None, None) => {}
    }
    if !m.verdict.passed_over.is_empty() {
        let _ = writeln!(o, "\nPassed over (cheapest first)");
        for p in &m.verdict.passed_over {
            let _ = writeln!(o, "  {p}");
        }
    }
}

/// The report as text (plain ASCII, fits 100 columns for six variants).
pub fn render(plan: &Plan, run: &RunResult) -> String {
    render_as("check", plan, run)
}

/// The report as text under the banner of `command` ("check", "demo").
pub fn render_as(command: &str, plan: &Plan, run: &RunResult) -> String {
    let mut o = String::new();
    let _ = writeln!(o, "cairn {command}: {}", plan.title);
    let states: Vec<String> = plan
        .states
        .iter()
        .map(|s| format!("{} [{}]", s.name, s.unit))
        .collect();
    let kind = match &plan.model {
        ModelPlan::Linear {
            discretised: true, ..
        } => "continuous (Van Loan discretised)",
        ModelPlan::Linear { .. } => "discrete",
        ModelPlan::Pose { .. } => "planar pose (cairn-core)",
        ModelPlan::User { description } => description.as_str(),
    };
    let _ = writeln!(o, "  spec     {}", plan.file);
    let _ = writeln!(o, "  model    {kind}; states {}", states.join(", "));
    // A linear model has one way to run (every variant runs the same F and
    // H): the two modes are a nonlinear model's.
    let mode = match run.mode {
        Mode::Covariance if plan.is_linear() => String::new(),
        Mode::Covariance => {
            "; mode covariance-only (shared Jacobians along the reference trajectory)".into()
        }
        Mode::EndToEnd => "; mode end-to-end (each variant runs its own nonlinear filter)".into(),
    };
    let _ = writeln!(
        o,
        "  schedule {} at {} Hz ({}){mode}",
        count(run.steps, "step", "steps"),
        plan.step_hz,
        duration(run.steps as f64 * run.dt)
    );
    match (run.recentre_m, plan.recentre_m) {
        (Some(d), _) => {
            let _ = writeln!(
                o,
                "  frame    origin shift: each variant moves its origin to its x, y (whole metres, kept in f64) \
when |x| or |y| passes {d} m;\n           states are compared as origin + local state"
            );
        }
        (None, Some(_)) => {
            let _ = writeln!(
                o,
                "  frame    no origin shift in covariance-only mode (the variants share the reference's Jacobians)"
            );
        }
        (None, None) => {}
    }
    for c in &plan.channels {
        let m = c.m as u64;
        let what = match &c.kind {
            ChannelKind::Linear(_) => count(m, "component", "components"),
            ChannelKind::Position => "position fix".into(),
            ChannelKind::Heading => "heading fix".into(),
            ChannelKind::User => format!("own model, {}", count(m, "component", "components")),
        };
        let _ = writeln!(
            o,
            "  channel  {}: {what} at {} Hz{}{}",
            c.name,
            c.rate_hz,
            if c.dropouts.is_empty() {
                String::new()
            } else {
                format!(
                    ", {}",
                    count(c.dropouts.len() as u64, "dropout window", "dropout windows")
                )
            },
            c.gate.map_or(String::new(), |g| format!(", gate {g}"))
        );
    }

    if !plan.conversions.is_empty() {
        let _ = writeln!(o, "\nNoise figures to filter numbers");
        for c in &plan.conversions {
            let _ = writeln!(o, "  {}: {}", c.field, c.given);
            o.push_str(&c.chain_text(6));
        }
    }

    let m = super::Matrices::of(plan);
    let _ = writeln!(o, "\nFilter matrices (what the firmware is given)");
    let fmt_rows = |rows: &[Vec<f64>]| -> String {
        rows.iter()
            .map(|r| r.iter().map(|v| sci(*v)).collect::<Vec<_>>().join(" "))
            .collect::<Vec<_>>()
            .join("; ")
    };
    if let (Some(f), Some(q)) = (&m.f, &m.q) {
        let _ = writeln!(o, "  F = [{}]", fmt_rows(f));
        let _ = writeln!(o, "  Q = [{}]", fmt_rows(q));
    }
    if let Some([sv, yv, hv]) = m.pose_variances {
        let _ = writeln!(
            o,
            "  PlanarOdometry {{ speed_var: {}, yaw_rate_var: {}, heading_drift_var: {} }}",
            sci(sv),
            sci(yv),
            sci(hv)
        );
    }
    for (name, r) in &m.r {
        let _ = writeln!(o, "  R ({name}) = [{}]", fmt_rows(r));
    }

    let _ = writeln!(o, "\nReference (double-double, about 32 digits)");
    let diag: Vec<String> = run
        .reference
        .final_covariance
        .iter()
        .enumerate()
        .map(|(i, r)| sci(r[i]))
        .collect();
    let _ = writeln!(o, "  final P diagonal   {}", diag.join("  "));
    let _ = writeln!(
        o,
        "  updates {}; largest cond(S) {}; smallest eigenvalue of P {}",
        run.reference.updates,
        sci(run.reference.max_innovation_condition),
        sci(run.reference.min_eigenvalue)
    );
    if let Some(s) = &run.steady {
        let diag: Vec<String> = s
            .posterior
            .iter()
            .enumerate()
            .map(|(i, r)| sci(r[i]))
            .collect();
        let gain: Vec<String> = s
            .gain
            .iter()
            .map(|r| r.iter().map(|v| sci(*v)).collect::<Vec<_>>().join(" "))
            .collect();
        let _ = writeln!(
            o,
            "  Riccati steady state (every {}): posterior diagonal {}; gain [{}]; residual {}",
            if s.steps_per_update == 1 {
                "step".to_string()
            } else {
                format!("{} steps", s.steps_per_update)
            },
            diag.join("  "),
            gain.join("; "),
            sci(s.residual)
        );
        if let Some(d) = s.reference_distance {
            let _ = writeln!(
                o,
                "  reference's last posterior is {} (relative) from it",
                sci(d)
            );
        }
    } else if let Some(n) = &run.steady_note {
        let _ = writeln!(o, "  {n}");
    }
    if let Some(e) = &run.external {
        let _ = writeln!(
            o,
            "  external reference: {} rows, largest difference from ours {} (tolerance {}): {}",
            e.rows,
            sci(e.max_difference),
            sci(e.tolerance),
            if e.agrees { "agrees" } else { "DISAGREES" }
        );
    }

    // The table.
    let vs = &run.variants;
    let w = 18;
    let _ = writeln!(o, "\nVariants (cairn-core's own code), cheapest first");
    let mut line = format!("  {:<32}", "");
    for v in vs {
        let _ = write!(line, "{:>w$}", v.name);
    }
    let _ = writeln!(o, "{line}");
    let th = &plan.thresholds;
    type Cell = fn(&VariantResult) -> String;
    let rows: Vec<(String, Cell)> = vec![
        (
            format!("max rel. error of P (<= {})", sci(th.max_relative_error)),
            |v| sci(v.figures.max_relative_error),
        ),
        ("  at t [s]".into(), |_| String::new()),
        (
            format!("max asymmetry (<= {})", sci(th.max_asymmetry)),
            |v| sci(v.figures.max_asymmetry),
        ),
        ("smallest eigenvalue".into(), |v| {
            sci(v.figures.min_eigenvalue)
        }),
        ("lost positive definiteness".into(), |v| {
            v.figures
                .first_not_positive_definite
                .map_or("never".into(), |s| format!("step {s}"))
        }),
        (
            format!("max gain error (<= {})", sci(th.max_gain_error)),
            |v| {
                if v.figures.gains_compared == 0 {
                    "n/a".into()
                } else {
                    sci(v.figures.max_gain_error)
                }
            },
        ),
        ("cond(S) x eps".into(), |v| sci(v.innovation_rounding)),
        ("min S pivot / diagonal".into(), |v| {
            if v.figures.min_innovation_pivot_ratio.is_finite() {
                sci(v.figures.min_innovation_pivot_ratio)
            } else {
                "-".into()
            }
        }),
        (
            format!("state diff (sd) (<= {})", th.max_state_difference_sigma),
            |v| {
                if v.figures.states_compared {
                    sci(v.figures.max_state_difference_sigma)
                } else {
                    "-".into()
                }
            },
        ),
        ("origin shifts".into(), |v| v.recentres.to_string()),
        ("steady-state distance".into(), |v| {
            v.figures.steady_distance.map_or("-".into(), sci)
        }),
        ("refused".into(), |v| {
            v.figures
                .failure
                .as_ref()
                .map_or("no".into(), |f| format!("step {}", f.step))
        }),
        ("verdict".into(), |v| {
            if v.verdict.passes {
                "PASS".into()
            } else {
                "FAIL".into()
            }
        }),
    ];
    for (label, cell) in &rows {
        if label == "origin shifts" && run.recentre_m.is_none() {
            continue;
        }
        if label.trim() == "at t [s]" {
            let mut line = format!("  {label:<32}");
            for v in vs {
                let _ = write!(
                    line,
                    "{:>w$}",
                    format!("{:.2}", v.figures.max_relative_error_step as f64 * run.dt)
                );
            }
            let _ = writeln!(o, "{line}");
            continue;
        }
        let mut line = format!("  {label:<32}");
        for v in vs {
            let _ = write!(line, "{:>w$}", cell(v));
        }
        let _ = writeln!(o, "{line}");
    }
    if run.mode == Mode::Covariance && !plan.is_linear() {
        let _ = writeln!(
            o,
            "  (state differences are not judged in covariance-only mode)"
        );
    }

    let failing: Vec<&VariantResult> = vs.iter().filter(|v| !v.verdict.passes).collect();
    if !failing.is_empty() {
        let _ = writeln!(o, "\nWhy variants fail");
        for v in failing {
            for r in &v.verdict.reasons {
                let _ = writeln!(o, "  {:<16} {r}", v.name);
            }
        }
    }
    engine_figures(&mut o, plan, run);
    let _ = writeln!(
        o,
        "\nGain errors and rounding of S are separate: the Joseph form keeps a gain error out of P to \
first order, but no covariance form recovers information lost when S = HPH' + R is rounded \
(cond(S) x eps near 1 or above; factored forms such as U-D delay it)."
    );
    if let Some(m) = &run.mission {
        mission(&mut o, m, plan.thresholds.max_relative_error);
    }
    ending(&mut o, run);
    let _ = writeln!(o, "\n{NOT_A_SAFETY_CASE}");
    o
}

/// The ending: the spec's choice with its verdict and exit code, then the
/// cheapest variant passing the run, then the recommendation for the
/// mission; the first sets the exit code, the other two only advise.
fn ending(o: &mut String, run: &RunResult) {
    use crate::engine::mission::{Outlook, duration_words};
    let run_words = format!("the {} run", duration_words(run.steps as f64 * run.dt));
    let flash_undecided = run.mission.as_ref().and_then(|m| {
        m.variants
            .iter()
            .find(|v| v.name == run.flash && v.outlook == Outlook::Undecided)
            .map(|v| v.crossing.clone())
    });
    let mission = run.mission.as_ref().filter(|m| !m.is_horizon);
    let mission_words = mission.map(|m| format!("the {} mission", duration_words(m.seconds)));
    let (word, over) = if run.flash_passes {
        (
            "PASS",
            match &mission_words {
                Some(mw) => format!("passes {run_words} and {mw}"),
                None => format!("passes {run_words}"),
            },
        )
    } else if let Some(u) = &flash_undecided {
        (
            "UNDECIDED",
            format!(
                "passes {run_words}; {} is {u}",
                mission_words.as_deref().unwrap_or("the mission")
            ),
        )
    } else if run.flash_passes_horizon {
        (
            "FAIL",
            format!(
                "passes {run_words}, not {}",
                mission_words.as_deref().unwrap_or("the mission")
            ),
        )
    } else {
        ("FAIL", format!("fails {run_words}"))
    };
    let code = if run.flash_passes {
        crate::exit::EXIT_PASS
    } else {
        crate::exit::EXIT_FAIL
    };
    let _ = writeln!(o, "\nVerdict");
    let _ = writeln!(
        o,
        "  Spec's choice ([flash]): {} {word}: {over} -> exit {code}",
        run.flash
    );
    let _ = writeln!(
        o,
        "  Cheapest variant passing {run_words}: {}",
        run.cheapest_passing.as_deref().unwrap_or("none")
    );
    let Some(m) = &run.mission else {
        return;
    };
    let v = &m.verdict;
    let for_what = mission_words.unwrap_or_else(|| run_words.clone());
    if !v.undecided.is_empty() {
        let _ = writeln!(
            o,
            "  Recommendation for {for_what}: undecided; run at least {} to decide {} (cheaper \
than any variant that passes now)",
            v.run_at_least_s
                .map_or_else(|| "longer".to_string(), duration_words),
            v.undecided
                .iter()
                .map(|u| u.split(':').next().unwrap_or(""))
                .collect::<Vec<_>>()
                .join(", ")
        );
    }
    let what = if v.undecided.is_empty() {
        format!("Recommendation for {for_what}")
    } else {
        "Of the decided variants, the cheapest passing".to_string()
    };
    match &v.choice {
        Some(c) => {
            let whose = if *c == run.flash {
                " (the spec's choice)".to_string()
            } else {
                format!(
                    " (not the spec's choice, {}: change [flash] to flash it)",
                    run.flash
                )
            };
            let _ = writeln!(
                o,
                "  {what}: {c}{whose}; {}",
                match v.cycles_per_step {
                    Some(cy) => format!("about {cy:.0} cycles per step ({})", v.cycles_note),
                    None => v.cycles_note.clone(),
                }
            );
        }
        None => {
            let _ = writeln!(
                o,
                "  {what}: nothing passes (change the model, the thresholds or the mission)"
            );
        }
    }
}

/// The Jacobian comparison, gate decisions and how far the states went.
fn engine_figures(o: &mut String, plan: &Plan, run: &RunResult) {
    if let Some(j) = &run.jacobians {
        let _ = writeln!(
            o,
            "\nJacobians against central differences of the model's own f and h (f64, along the reference; limit {:.0e} of max(1, |entry|))",
            j.tolerance
        );
        for m in &j.models {
            let worst = m.worst.as_ref().map_or("-".to_string(), |w| {
                format!(
                    "largest mismatch {:.1e} at row {}, column {} (step {})",
                    w.mismatch, w.row, w.column, w.step
                )
            });
            let _ = writeln!(
                o,
                "  {:<20} {} points, {worst}{}",
                crate::output::one_line(&m.model),
                m.points,
                if m.worst
                    .as_ref()
                    .is_some_and(|w| w.mismatch > j.tolerance || w.mismatch.is_nan())
                {
                    "  FAIL"
                } else {
                    ""
                }
            );
        }
    }
    if run.reference.gated > 0 || run.variants.iter().any(|v| v.gate_differences > 0) {
        let _ = writeln!(
            o,
            "\nGate decisions: the reference gated {}; every variant applies what the reference applies",
            count(run.reference.gated, "measurement", "measurements")
        );
        for v in run.variants.iter().filter(|v| v.gate_differences > 0) {
            let _ = writeln!(
                o,
                "  {:<16} its own gate decided otherwise {}, first at step {}",
                v.name,
                count(v.gate_differences, "time", "times"),
                v.first_gate_difference.unwrap_or(0)
            );
        }
    }
    let far: Vec<String> = run
        .reach
        .iter()
        .zip(&plan.states)
        .map(|(r, s)| {
            let unit = if s.unit == "1" {
                String::new()
            } else {
                format!(" {}", crate::output::one_line(&s.unit))
            };
            format!(
                "{} {:.4e}{unit} (f32 spacing {:.1e})",
                crate::output::one_line(&r.state),
                r.max_abs,
                r.f32_spacing
            )
        })
        .collect();
    if !far.is_empty() {
        let _ = writeln!(o, "\nLargest |x| reached: {}", far.join("; "));
    }
}
