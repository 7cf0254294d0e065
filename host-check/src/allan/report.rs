//! The text report of an analysed log: the curve, the fitted terms with
//! their uncertainty, which filter state each figure drives and with which
//! number, and the spec lines that use them.

use std::fmt::Write as _;

use super::{Analysis, AxisResult, Fitted, Term};
use crate::numeric::noise;

/// A number with 4 significant digits, scientific.
fn sci(v: f64) -> String {
    format!("{v:.4e}")
}

fn paren(unit: &str) -> String {
    if unit.chars().all(char::is_alphanumeric) {
        unit.to_string()
    } else {
        format!("({unit})")
    }
}

/// The unit text of a term's coefficient for samples in `u`.
#[must_use]
pub fn term_unit(term: Term, u: &str) -> String {
    let p = paren(u);
    match term {
        Term::Q => format!("{p}*s"),
        Term::N => format!("{p}*sqrt(s)"),
        Term::B => u.to_string(),
        Term::K => format!("{p}/sqrt(s)"),
        Term::R => format!("{p}/s"),
    }
}

/// The whole report. `step_s` is the filter step the discrete numbers are
/// given for (the log's own interval when the user gives none).
#[must_use]
pub fn render(a: &Analysis, step_s: f64) -> String {
    let s = &a.summary;
    let ts = s.mean_interval_s();
    let mut o = String::new();
    let _ = writeln!(
        o,
        "Allan deviation of {}: {} samples over {} s at {} Hz (mean interval {} s)",
        crate::output::one_line(&a.file),
        s.samples,
        sci(s.last_s - s.first_s),
        sci(1.0 / ts),
        sci(ts)
    );
    let _ = writeln!(
        o,
        "method: overlapping Allan variance (IEEE Std 952-1997 Annex C; El-Sheimy, Hou & Niu 2008), \
         streamed through a decimated cascade (stride 1 below m = {}, at most m/32 above); \
         1-sigma error 1/sqrt(2 (N/m - 1)) (IEEE 952; El-Sheimy 2008 eq. 6), conservative for the overlapping estimate",
        super::variance::LEVEL_SPAN
    );
    for w in &a.warnings {
        let _ = writeln!(o, "warning: {w}");
    }
    for axis in &a.axes {
        o.push('\n');
        render_axis(&mut o, axis, ts, step_s);
    }
    o
}

fn render_axis(o: &mut String, r: &AxisResult, ts: f64, step_s: f64) {
    let u = r.axis.unit.clone().unwrap_or_default();
    let name = crate::output::one_line(&r.axis.name);
    let _ = writeln!(o, "axis {name} [{}]", crate::output::one_line(&u));
    for w in &r.warnings {
        let _ = writeln!(o, "  warning: {w}");
    }
    let _ = writeln!(
        o,
        "  {:>12} {:>12} {:>12} {:>12} {:>8}",
        "tau s", "adev", "-1 sigma", "+1 sigma", "clusters"
    );
    for p in &r.points {
        let _ = writeln!(
            o,
            "  {:>12} {:>12} {:>12} {:>12} {:>8}",
            sci(p.tau),
            sci(p.adev),
            sci(p.lo),
            sci(p.hi),
            p.clusters
        );
    }
    let Some(fit) = &r.fit else {
        let _ = writeln!(
            o,
            "  no term fit: too few cluster times with a non-zero deviation"
        );
        return;
    };
    let _ = writeln!(
        o,
        "  fitted terms ({} octave-spaced cluster times, weighted chi^2 {:.2}; 1-sigma):",
        fit.used, fit.chi2
    );
    for t in super::fit::TERMS {
        match fit.get(t) {
            Some(f) => {
                let resolved = if f.value > 2.0 * f.sigma {
                    ""
                } else {
                    "  (not resolved: below 2 sigma)"
                };
                let _ = writeln!(
                    o,
                    "    {:<50} {} +- {} {}{resolved}",
                    t.name(),
                    sci(f.value),
                    sci(f.sigma),
                    term_unit(t, &u)
                );
            }
            None => {
                let _ = writeln!(o, "    {:<50} not seen", t.name());
            }
        }
    }
    let tc = r.minimum.map(|(tau, _)| tau / noise::GAUSS_MARKOV_PEAK_AT);
    if let Some((tau, adev)) = r.minimum {
        let _ = writeln!(
            o,
            "    read-off at the fitted curve's minimum: sigma = {} at tau = {} s -> B <= sigma/0.664 = {} {u}; \
             a Gauss-Markov bias peaking there has correlation time tau/1.89 = {} s",
            sci(adev),
            sci(tau),
            sci(adev / noise::BIAS_FLOOR),
            sci(tau / noise::GAUSS_MARKOV_PEAK_AT)
        );
    }
    let _ = writeln!(
        o,
        "  what each figure drives (filter step T = {} s; numbers in {}^2):",
        sci(step_s),
        paren(&u)
    );
    if let Some(f) = fit.get(Term::N) {
        let (rate, _) = noise::white_rate_numbers(f.value, ts);
        let (_, per_filter_step) = noise::white_rate_numbers(f.value, step_s);
        let _ = writeln!(
            o,
            "    N: white noise on the rate itself. Per-sample variance N^2/Ts = {} at the log's {} Hz \
             (R of a rate channel, or the input noise of a predict that integrates the rate); \
             the integrated quantity (angle, velocity) gains N^2 T = {} {}^2*s^2 per filter step (its Q entry)",
            sci(rate),
            sci(1.0 / ts),
            sci(per_filter_step),
            paren(&u)
        );
    }
    if let Some(f) = fit.get(Term::B) {
        let sigma = noise::bias_instability_sigma(f.value);
        let tc = tc.unwrap_or(f64::NAN);
        let gm = noise::gauss_markov_state(sigma, tc, step_s);
        let _ = writeln!(
            o,
            "    B: a first-order Gauss-Markov bias state (correlation time {} s from the minimum). \
             Steady sigma = 1.076 B = {} (its Allan peak 0.617 sigma = the floor 0.664 B); \
             phi = exp(-T/tc) = {:.9}; Qd = sigma^2 (1 - exp(-2T/tc)) = {} per step",
            sci(tc),
            sci(sigma),
            gm.phi,
            sci(gm.qd)
        );
    }
    if let Some(f) = fit.get(Term::K) {
        let rw = noise::rate_random_walk_state(f.value, step_s);
        let _ = writeln!(
            o,
            "    K: a random-walk bias state. phi = 1; Qd = K^2 T = {} per step \
             (not K^2/T = {}: that is a per-sample variance, and this is no white noise)",
            sci(rw.qd),
            sci(f.value * f.value / step_s)
        );
    }
    if let Some(f) = fit.get(Term::Q) {
        let (reading, rate) = noise::quantization_numbers(f.value, ts);
        let _ = writeln!(
            o,
            "    Q: the reading error of the integrated quantity. Variance Q^2 = {} per reading \
             (R of an angle or position channel); a rate from two readings has 2 Q^2/Ts^2 = {} \
             (correlated -1/2 between neighbours)",
            sci(reading),
            sci(rate)
        );
    }
    if let Some(f) = fit.get(Term::R) {
        let _ = writeln!(
            o,
            "    R: a rate ramp of {} {}: a trend, not noise; a static log should not have one",
            sci(f.value),
            term_unit(Term::R, &u)
        );
    }
    let _ = writeln!(
        o,
        "  spec lines (noise figures; in a continuous model, the entry of `noise` for the column of `g` that drives the state named):"
    );
    let line = |o: &mut String, f: &Fitted, key: &str, extra: &str, state: &str| {
        let _ = writeln!(
            o,
            "    {{ {key} = {}, unit = \"{}\"{extra} }},   # {}: drives {state}",
            sci(f.value),
            term_unit(f.term, &u),
            match f.term {
                Term::N => "N",
                Term::B => "B",
                Term::K => "K",
                Term::Q => "Q",
                Term::R => "R",
            }
        );
    };
    if let Some(f) = fit.get(Term::N) {
        line(
            o,
            &f,
            "random_walk",
            "",
            "the integrated quantity (or a rate channel's R)",
        );
    }
    if let Some(f) = fit.get(Term::B) {
        let extra = format!(", correlation_s = {}", sci(tc.unwrap_or(f64::NAN)));
        line(
            o,
            &f,
            "bias_instability",
            &extra,
            "a Gauss-Markov bias state (a = -1/correlation_s)",
        );
    }
    if let Some(f) = fit.get(Term::K) {
        line(o, &f, "rate_random_walk", "", "a random-walk bias state");
    }
    if let Some(f) = fit.get(Term::Q) {
        line(o, &f, "quantization", "", "an integrated reading's R");
    }
}
