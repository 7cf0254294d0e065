//! Formatting of the generated source: round-trip literals, column-major
//! matrix arrays with a row-by-row doc comment, and constant names.

use std::fmt::Write as _;

use nalgebra::DMatrix;

use crate::spec::Precision;

/// The shortest literal that reads back to the same value in `precision`
/// (Rust's `{:?}` float formatting is shortest round-trip: at most 9
/// significant digits for f32, 17 for f64).
pub fn literal(value: f64, precision: Precision) -> String {
    match precision {
        Precision::F32 => format!("{:?}", value as f32),
        Precision::F64 => format!("{value:?}"),
    }
}

/// A name usable as part of a Rust constant: upper snake case.
pub fn const_name(text: &str) -> String {
    let mut out = String::new();
    let mut gap = false;
    for ch in text.chars() {
        if ch.is_ascii_alphanumeric() {
            if gap && !out.is_empty() {
                out.push('_');
            }
            gap = false;
            out.push(ch.to_ascii_uppercase());
        } else {
            gap = true;
        }
    }
    if out.is_empty() || out.starts_with(|c: char| c.is_ascii_digit()) {
        out.insert_str(0, "CH_");
    }
    out
}

/// Writes a doc comment line per item of `doc`, then the constant
/// `name: [[T; rows]; cols]` in column-major order, with the matrix shown
/// row by row in the doc comment.
pub fn matrix(
    out: &mut String,
    name: &str,
    doc: &[String],
    m: &DMatrix<f64>,
    precision: Precision,
) {
    let t = precision.name();
    for line in doc {
        let _ = writeln!(out, "/// {line}");
    }
    let _ = writeln!(out, "///");
    let _ = writeln!(out, "/// Row by row ({} x {}):", m.nrows(), m.ncols());
    let _ = writeln!(out, "/// ```text");
    for i in 0..m.nrows() {
        let row: Vec<String> = (0..m.ncols())
            .map(|j| literal(m[(i, j)], precision))
            .collect();
        let _ = writeln!(out, "/// [{}]", row.join(", "));
    }
    let _ = writeln!(out, "/// ```");
    let cols: Vec<String> = (0..m.ncols())
        .map(|j| {
            let col: Vec<String> = (0..m.nrows())
                .map(|i| literal(m[(i, j)], precision))
                .collect();
            format!("[{}]", col.join(", "))
        })
        .collect();
    let _ = writeln!(
        out,
        "pub const {name}: [[{t}; {}]; {}] = [{}];\n",
        m.nrows(),
        m.ncols(),
        cols.join(", ")
    );
}

/// Writes a documented vector constant `name: [T; len]`.
pub fn vector(out: &mut String, name: &str, doc: &[String], v: &[f64], precision: Precision) {
    for line in doc {
        let _ = writeln!(out, "/// {line}");
    }
    let items: Vec<String> = v.iter().map(|&x| literal(x, precision)).collect();
    let _ = writeln!(
        out,
        "pub const {name}: [{}; {}] = [{}];\n",
        precision.name(),
        v.len(),
        items.join(", ")
    );
}

/// Writes a documented scalar constant.
pub fn scalar(out: &mut String, name: &str, doc: &[String], v: f64, precision: Precision) {
    for line in doc {
        let _ = writeln!(out, "/// {line}");
    }
    let _ = writeln!(
        out,
        "pub const {name}: {} = {};\n",
        precision.name(),
        literal(v, precision)
    );
}

/// Writes a documented `usize` constant.
pub fn size(out: &mut String, name: &str, doc: &str, v: usize) {
    let _ = writeln!(out, "/// {doc}\npub const {name}: usize = {v};\n");
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn literals_read_back_exactly() {
        // IEEE 754 binary32 needs at most 9 significant digits to round-trip
        // (common practice; Rust's shortest formatting never needs more).
        for v in [
            0.1,
            1.0 / 3.0,
            6.666_666_666e-4,
            1e-12,
            123_456_789.0,
            -2.5e30,
        ] {
            let s = literal(v, Precision::F32);
            assert_eq!(
                s.parse::<f32>().unwrap().to_bits(),
                (v as f32).to_bits(),
                "{s}"
            );
            let d = literal(v, Precision::F64);
            assert_eq!(d.parse::<f64>().unwrap().to_bits(), v.to_bits(), "{d}");
        }
    }

    #[test]
    fn names_are_upper_snake_case() {
        assert_eq!(const_name("magnetic strip"), "MAGNETIC_STRIP");
        assert_eq!(const_name("sun-compass (v2)"), "SUN_COMPASS_V2");
        assert_eq!(const_name("2nd beacon"), "CH_2ND_BEACON");
        assert_eq!(const_name("  "), "CH_");
    }
}
