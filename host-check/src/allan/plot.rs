//! The log-log Allan deviation plot as SVG: each axis's points with their
//! 1-sigma bars, the fitted total and each fitted term as a dashed line.

use std::fmt::Write as _;

use super::{Analysis, Term};

const W: f64 = 760.0;
const H: f64 = 520.0;
const LEFT: f64 = 80.0;
const RIGHT: f64 = 200.0;
const TOP: f64 = 40.0;
const BOTTOM: f64 = 60.0;
const COLOURS: [&str; 8] = crate::report::PALETTE;

fn escape(text: &str) -> String {
    crate::output::one_line(text)
        .replace('&', "&amp;")
        .replace('<', "&lt;")
        .replace('>', "&gt;")
        .replace('"', "&quot;")
}

/// The plot of every axis of `analysis`.
#[must_use]
pub fn svg(analysis: &Analysis) -> String {
    let pts = analysis.axes.iter().flat_map(|a| a.points.iter());
    let (mut tmin, mut tmax, mut ymin, mut ymax) = (f64::MAX, f64::MIN, f64::MAX, f64::MIN);
    // Only finite, positive values set the range (a constant log has
    // zeros; the analysis refuses an overflowing one).
    for p in pts.filter(|p| p.tau.is_finite() && p.tau > 0.0 && p.adev.is_finite()) {
        tmin = tmin.min(p.tau);
        tmax = tmax.max(p.tau);
        if p.lo > 0.0 {
            ymin = ymin.min(p.lo);
        } else if p.adev > 0.0 {
            ymin = ymin.min(p.adev / 10.0);
        }
        if p.hi.is_finite() {
            ymax = ymax.max(p.hi);
        }
    }
    if !(tmin > 0.0 && tmax >= tmin && ymin > 0.0 && ymax >= ymin && ymax.is_finite()) {
        (tmin, tmax, ymin, ymax) = (1.0, 10.0, 1.0, 10.0);
    }
    let (lx0, lx1) = (
        tmin.log10().floor(),
        tmax.log10().ceil().max(tmin.log10().floor() + 1.0),
    );
    let ly1 = ymax.log10().ceil().max(ymin.log10().floor() + 1.0);
    // At most 40 decades: one grid line per decade keeps the file small.
    let ly0 = ymin.log10().floor().max(ly1 - 40.0);
    let x = |t: f64| LEFT + (t.log10() - lx0) / (lx1 - lx0) * (W - LEFT - RIGHT);
    let y = |v: f64| TOP + (ly1 - v.log10()) / (ly1 - ly0) * (H - TOP - BOTTOM);
    let mut s = String::new();
    let _ = writeln!(
        s,
        r#"<svg xmlns="http://www.w3.org/2000/svg" width="{W}" height="{H}" viewBox="0 0 {W} {H}" font-family="sans-serif" font-size="12">"#
    );
    let _ = writeln!(s, r#"<rect width="{W}" height="{H}" fill="white"/>"#);
    let _ = writeln!(
        s,
        r#"<text x="{LEFT}" y="22" font-size="14">Overlapping Allan deviation: {}</text>"#,
        escape(&analysis.file)
    );
    // Decade grid.
    for d in (lx0 as i32)..=(lx1 as i32) {
        let px = x(10f64.powi(d));
        let _ = writeln!(
            s,
            r##"<line x1="{px:.1}" y1="{TOP}" x2="{px:.1}" y2="{:.1}" stroke="#ddd"/><text x="{px:.1}" y="{:.1}" text-anchor="middle">1e{d}</text>"##,
            H - BOTTOM,
            H - BOTTOM + 18.0
        );
    }
    for d in (ly0 as i32)..=(ly1 as i32) {
        let py = y(10f64.powi(d));
        let _ = writeln!(
            s,
            r##"<line x1="{LEFT}" y1="{py:.1}" x2="{:.1}" y2="{py:.1}" stroke="#ddd"/><text x="{:.1}" y="{:.1}" text-anchor="end">1e{d}</text>"##,
            W - RIGHT,
            LEFT - 6.0,
            py + 4.0
        );
    }
    let _ = writeln!(
        s,
        r##"<rect x="{LEFT}" y="{TOP}" width="{:.1}" height="{:.1}" fill="none" stroke="#444"/>"##,
        W - LEFT - RIGHT,
        H - TOP - BOTTOM
    );
    let _ = writeln!(
        s,
        r#"<text x="{:.1}" y="{:.1}" text-anchor="middle">cluster time tau, s</text>"#,
        LEFT + (W - LEFT - RIGHT) / 2.0,
        H - 16.0
    );
    let unit = analysis
        .axes
        .first()
        .and_then(|a| a.axis.unit.clone())
        .unwrap_or_default();
    let _ = writeln!(
        s,
        r#"<text transform="translate(18 {:.1}) rotate(-90)" text-anchor="middle">Allan deviation, {}</text>"#,
        TOP + (H - TOP - BOTTOM) / 2.0,
        escape(&unit)
    );
    let mut legend_y = TOP + 10.0;
    let clip = |v: f64| v.clamp(10f64.powf(ly0 - 0.5), 10f64.powf(ly1 + 0.5));
    for (i, a) in analysis.axes.iter().enumerate() {
        let c = COLOURS[i % COLOURS.len()];
        for p in &a.points {
            if !(p.adev > 0.0 && p.adev.is_finite()) {
                continue;
            }
            let (px, py) = (x(p.tau), y(p.adev));
            let lo = if p.lo > 0.0 { p.lo } else { 10f64.powf(ly0) };
            let _ = writeln!(
                s,
                r#"<line x1="{px:.1}" y1="{:.1}" x2="{px:.1}" y2="{:.1}" stroke="{c}" stroke-width="1"/><circle cx="{px:.1}" cy="{py:.1}" r="2.5" fill="{c}"/>"#,
                y(clip(lo)),
                y(clip(p.hi))
            );
        }
        let _ = writeln!(
            s,
            r#"<circle cx="{:.1}" cy="{:.1}" r="3" fill="{c}"/><text x="{:.1}" y="{:.1}">{}</text>"#,
            W - RIGHT + 14.0,
            legend_y - 4.0,
            W - RIGHT + 22.0,
            legend_y,
            escape(&a.axis.name)
        );
        legend_y += 16.0;
        let Some(fit) = &a.fit else { continue };
        let line = |f: &dyn Fn(f64) -> f64| {
            let mut d = String::new();
            for k in 0..=80 {
                let t = 10f64.powf(lx0 + (lx1 - lx0) * f64::from(k) / 80.0);
                let v = f(t);
                if v > 0.0 && v.is_finite() {
                    let _ = write!(
                        d,
                        "{}{:.1},{:.1} ",
                        if d.is_empty() { "M" } else { "L" },
                        x(t),
                        y(clip(v))
                    );
                }
            }
            d
        };
        let total = line(&|t| fit.avar(t).sqrt());
        let _ = writeln!(
            s,
            r#"<path d="{total}" fill="none" stroke="{c}" stroke-width="1.5"/>"#
        );
        for ft in &fit.terms {
            let path = line(&|t| ft.term.avar(ft.value, t).sqrt());
            let _ = writeln!(
                s,
                r#"<path d="{path}" fill="none" stroke="{c}" stroke-width="1" stroke-dasharray="5 4"/>"#
            );
            let label = match ft.term {
                Term::Q => "Q",
                Term::N => "N",
                Term::B => "B",
                Term::K => "K",
                Term::R => "R",
            };
            let _ = writeln!(
                s,
                r#"<text x="{:.1}" y="{:.1}" fill="{c}">{label} = {:.3e}</text>"#,
                W - RIGHT + 22.0,
                legend_y,
                ft.value
            );
            legend_y += 15.0;
        }
        legend_y += 6.0;
    }
    let _ = writeln!(
        s,
        r#"<text x="{:.1}" y="{:.1}" font-size="10">dashed: fitted terms; bars: 1-sigma</text>"#,
        W - RIGHT + 8.0,
        H - BOTTOM
    );
    s.push_str("</svg>\n");
    s
}
