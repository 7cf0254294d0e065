//! A hand-written SVG plot: the relative covariance error of each variant
//! against time, on a log scale, one line per variant, with each variant's
//! projected error carried to the end of the mission (dashed).

use std::fmt::Write;

use crate::run::RunResult;

const WIDTH: f64 = 1060.0;
const HEIGHT: f64 = 480.0;
const LEFT: f64 = 80.0;
const RIGHT: f64 = 330.0;
const TOP: f64 = 40.0;
const BOTTOM: f64 = 60.0;
const COLOURS: [&str; 8] = super::PALETTE;
/// Markers drawn along each curve, about this many.
const MARKERS: usize = 9;
/// Two curves closer than this everywhere, in pixels, coincide on the plot.
const SAME_PX: f64 = 0.5;

/// A marker at (x, y): the shape says the form (circle conventional,
/// square U-D, triangle Joseph, diamond anything else), the fill the
/// precision (f32 filled, f64 open).
fn marker(form: &str, f64_open: bool, colour: &str, x: f64, y: f64) -> String {
    let fill = if f64_open { "#fbfaf7" } else { colour };
    let style = format!(r#"fill="{fill}" stroke="{colour}" stroke-width="1.3""#);
    match form {
        "conventional" => format!(r#"<circle cx="{x:.1}" cy="{y:.1}" r="3.2" {style}/>"#),
        "u-d" => format!(
            r#"<rect x="{:.1}" y="{:.1}" width="6" height="6" {style}/>"#,
            x - 3.0,
            y - 3.0
        ),
        "joseph" => format!(
            r#"<path d="M{x:.1},{:.1} L{:.1},{:.1} L{:.1},{:.1} Z" {style}/>"#,
            y - 3.8,
            x + 3.6,
            y + 2.8,
            x - 3.6,
            y + 2.8
        ),
        _ => format!(
            r#"<path d="M{x:.1},{:.1} L{:.1},{y:.1} L{x:.1},{:.1} L{:.1},{y:.1} Z" {style}/>"#,
            y - 3.8,
            x + 3.8,
            y + 3.8,
            x - 3.8
        ),
    }
}

/// Whether two curves' pixel points agree within [`SAME_PX`] everywhere.
fn same_curve(a: &[Option<(f64, f64)>], b: &[Option<(f64, f64)>]) -> bool {
    a.len() == b.len()
        && a.iter().zip(b).all(|(p, q)| match (p, q) {
            (Some(p), Some(q)) => (p.0 - q.0).abs() <= SAME_PX && (p.1 - q.1).abs() <= SAME_PX,
            (None, None) => true,
            _ => false,
        })
}

fn esc(s: &str) -> String {
    s.replace('&', "&amp;")
        .replace('<', "&lt;")
        .replace('>', "&gt;")
}

/// A variant's projected error from the end of the horizon to the end of
/// the mission (no significant rise: its largest observed value), as
/// (time, error) points.
fn extrapolation(
    vm: &crate::engine::mission::VariantMission,
    run: &RunResult,
    t0: f64,
    t1: f64,
) -> Vec<(f64, f64)> {
    let Some(level) = vm.projected_error else {
        return Vec::new();
    };
    let (l0, l1) = (t0.log10(), t1.log10());
    (0..=40)
        .map(|i| {
            let t = 10f64.powf(l0 + (l1 - l0) * f64::from(i) / 40.0);
            // The robust line of a significant rise; otherwise the largest
            // error seen: no growth claimed.
            let e = match &vm.trend {
                Some(tr) if tr.rising && vm.case != crate::engine::mission::Case::Bounded => {
                    (tr.line_at_end + tr.slope * (t / run.dt - tr.end_step))
                        .max(tr.largest)
                        .max(f64::MIN_POSITIVE)
                }
                _ => level,
            };
            (t, e)
        })
        .collect()
}

/// The SVG text of the drift plot.
pub fn plot(title: &str, run: &RunResult, threshold: f64) -> String {
    // Decades covered: from the smallest positive value to the largest.
    let mut lo = f64::INFINITY;
    let mut hi = threshold;
    for v in &run.variants {
        for &e in &v.figures.series {
            if e.is_finite() && e > 0.0 {
                lo = lo.min(e);
                hi = hi.max(e);
            }
        }
    }
    let mission = run.mission.as_ref();
    for e in mission
        .iter()
        .flat_map(|m| m.variants.iter().filter_map(|v| v.projected_error))
    {
        if e.is_finite() && e > 0.0 {
            hi = hi.max(e);
        }
    }
    if !lo.is_finite() {
        lo = threshold * 1e-6;
    }
    let dlo = lo.log10().floor().max(-20.0);
    let dhi = hi.log10().ceil().max(dlo + 1.0);
    let t_horizon = run
        .series_time
        .last()
        .copied()
        .unwrap_or(1.0)
        .max(f64::MIN_POSITIVE);
    // A mission much longer than the horizon gets a log time axis, so the
    // horizon's data and the extrapolation both show.
    let t_end = mission.map_or(t_horizon, |m| m.seconds.max(t_horizon));
    let t_first = run
        .series_time
        .first()
        .copied()
        .unwrap_or(t_horizon)
        .max(f64::MIN_POSITIVE);
    let log_time = t_end > 2.0 * t_horizon && t_first < t_horizon;
    let pw = WIDTH - LEFT - RIGHT;
    let ph = HEIGHT - TOP - BOTTOM;
    let (l0, l1) = (t_first.log10(), t_end.log10());
    let x_of = |t: f64| {
        if log_time {
            LEFT + pw * ((t.max(t_first).log10() - l0) / (l1 - l0))
        } else {
            LEFT + pw * (t / t_end)
        }
    };
    let y_of = |e: f64| TOP + ph * (dhi - e.log10().clamp(dlo, dhi)) / (dhi - dlo);

    let mut s = String::new();
    let _ = writeln!(
        s,
        r#"<svg xmlns="http://www.w3.org/2000/svg" width="{WIDTH}" height="{HEIGHT}" viewBox="0 0 {WIDTH} {HEIGHT}" font-family="sans-serif" font-size="12">"#
    );
    let _ = writeln!(s, r##"<rect width="100%" height="100%" fill="#fbfaf7"/>"##);
    let _ = writeln!(
        s,
        r#"<text x="{LEFT}" y="24" font-size="15">Relative covariance error against the reference: {}</text>"#,
        esc(title)
    );
    // Grid and decade labels.
    let mut d = dlo;
    while d <= dhi + 0.5 {
        let y = y_of(10f64.powf(d));
        let _ = writeln!(
            s,
            r##"<line x1="{LEFT}" y1="{y:.1}" x2="{:.1}" y2="{y:.1}" stroke="#ddd"/><text x="{:.1}" y="{:.1}" text-anchor="end">1e{d}</text>"##,
            LEFT + pw,
            LEFT - 6.0,
            y + 4.0
        );
        d += 1.0;
    }
    let ticks: Vec<(f64, String)> = if log_time {
        [
            (1.0, "1 s"),
            (10.0, "10 s"),
            (60.0, "1 min"),
            (600.0, "10 min"),
            (3600.0, "1 h"),
            (6.0 * 3600.0, "6 h"),
            (86_400.0, "1 d"),
            (864_000.0, "10 d"),
            (8_640_000.0, "100 d"),
            (31_557_600.0, "1 y"),
            (315_576_000.0, "10 y"),
        ]
        .iter()
        .filter(|(t, _)| *t >= t_first && *t <= t_end)
        .map(|(t, l)| (*t, (*l).to_string()))
        .collect()
    } else {
        (0..=5)
            .map(|i| {
                let t = t_end * f64::from(i) / 5.0;
                let label = if t_end >= 600.0 {
                    format!("{:.0}", t / 60.0)
                } else {
                    format!("{t:.3}")
                };
                (t, label)
            })
            .collect()
    };
    for (t, label) in &ticks {
        let x = x_of(*t);
        let _ = writeln!(
            s,
            r##"<line x1="{x:.1}" y1="{TOP}" x2="{x:.1}" y2="{:.1}" stroke="#eee"/><text x="{x:.1}" y="{:.1}" text-anchor="middle">{}</text>"##,
            TOP + ph,
            TOP + ph + 18.0,
            label
        );
    }
    let _ = writeln!(
        s,
        r#"<text x="{:.1}" y="{:.1}" text-anchor="middle">time [{}]</text>"#,
        LEFT + pw / 2.0,
        HEIGHT - 16.0,
        if log_time {
            "log scale; dashed beyond the end of the run: projected error"
        } else if t_end >= 600.0 {
            "min"
        } else {
            "s"
        }
    );
    if let Some(m) = mission
        && t_end > t_horizon
    {
        let xh = x_of(t_horizon);
        let _ = writeln!(
            s,
            r##"<line x1="{xh:.1}" y1="{TOP}" x2="{xh:.1}" y2="{:.1}" stroke="#999"/><text x="{:.1}" y="{:.1}" font-size="10">end of run</text><text x="{:.1}" y="{:.1}" font-size="10" text-anchor="end">mission end ({})</text>"##,
            TOP + ph,
            xh + 3.0,
            TOP + 12.0,
            LEFT + pw - 3.0,
            TOP + 12.0,
            esc(&crate::engine::mission::duration_words(m.seconds))
        );
    }
    // Threshold.
    let yt = y_of(threshold);
    let _ = writeln!(
        s,
        r##"<line x1="{LEFT}" y1="{yt:.1}" x2="{:.1}" y2="{yt:.1}" stroke="#555" stroke-dasharray="6 4"/><text x="{:.1}" y="{:.1}">limit</text>"##,
        LEFT + pw,
        LEFT + pw + 6.0,
        yt + 4.0
    );
    // Lines, each with its markers; a curve that coincides with an earlier
    // one (to plotting resolution) has its markers at other points, and the
    // legend names the one it hides behind.
    let curves: Vec<Vec<Option<(f64, f64)>>> = run
        .variants
        .iter()
        .map(|v| {
            v.figures
                .series
                .iter()
                .zip(&run.series_time)
                .map(|(e, t)| (e.is_finite() && *e > 0.0).then(|| (x_of(*t), y_of(*e))))
                .collect()
        })
        .collect();
    let variants = run.variants.len().max(1);
    for (i, v) in run.variants.iter().enumerate() {
        let colour = COLOURS[i % COLOURS.len()];
        let f64_open = v.precision == crate::spec::Precision::F64;
        let mut pts = String::new();
        for (x, y) in curves[i].iter().flatten() {
            let _ = write!(pts, "{x:.1},{y:.1} ");
        }
        let dash = if f64_open {
            r#" stroke-dasharray="2 3""#
        } else {
            ""
        };
        if !pts.is_empty() {
            let _ = writeln!(
                s,
                r#"<polyline fill="none" stroke="{colour}" stroke-width="1.6"{dash} points="{}"/>"#,
                pts.trim_end()
            );
        }
        let stride = (curves[i].len() / MARKERS).max(1);
        let phase = i * stride / variants;
        for (k, p) in curves[i].iter().enumerate() {
            if let Some((x, y)) = p
                && k % stride == phase
            {
                let _ = writeln!(s, "{}", marker(&v.form, f64_open, colour, *x, *y));
            }
        }
        if let Some(vm) = mission.and_then(|m| m.variants.get(i))
            && t_end > t_horizon
        {
            let ext = extrapolation(vm, run, t_horizon, t_end);
            let mut pts = String::new();
            for (t, e) in ext {
                if e.is_finite() && e > 0.0 {
                    let _ = write!(pts, "{:.1},{:.1} ", x_of(t), y_of(e));
                }
            }
            if !pts.is_empty() {
                let _ = writeln!(
                    s,
                    r#"<polyline fill="none" stroke="{colour}" stroke-width="1.2" stroke-dasharray="7 4" opacity="0.8" points="{}"/>"#,
                    pts.trim_end()
                );
            }
            if let Some(tc) = vm.crossing_s.filter(|t| *t > t_horizon && *t <= t_end) {
                let _ = writeln!(
                    s,
                    r#"<circle cx="{:.1}" cy="{yt:.1}" r="4" fill="none" stroke="{colour}" stroke-width="1.6"/>"#,
                    x_of(tc)
                );
            }
        }
        let ly = TOP + 16.0 + 20.0 * i as f64;
        let lx = WIDTH - RIGHT + 20.0;
        let mark = match mission.and_then(|m| m.variants.get(i)) {
            Some(vm) if vm.passes_mission => "pass",
            Some(vm)
                if v.verdict.passes && vm.outlook == crate::engine::mission::Outlook::Undecided =>
            {
                "undecided"
            }
            Some(_) => "FAIL",
            None if v.verdict.passes => "pass",
            None => "FAIL",
        };
        let same = (0..i)
            .find(|&j| !curves[i].is_empty() && same_curve(&curves[i], &curves[j]))
            .map_or(String::new(), |j| {
                format!(" (same as {})", esc(&run.variants[j].name))
            });
        let _ = writeln!(
            s,
            r#"<line x1="{lx}" y1="{ly}" x2="{:.1}" y2="{ly}" stroke="{colour}" stroke-width="2"{dash}/>{}<text x="{:.1}" y="{:.1}">{}{same} ({mark})</text>"#,
            lx + 18.0,
            marker(&v.form, f64_open, colour, lx + 9.0, ly),
            lx + 22.0,
            ly + 4.0,
            esc(&v.name)
        );
    }
    let _ = writeln!(
        s,
        r##"<rect x="{LEFT}" y="{TOP}" width="{pw}" height="{ph}" fill="none" stroke="#333"/>"##
    );
    s.push_str("</svg>\n");
    s
}
