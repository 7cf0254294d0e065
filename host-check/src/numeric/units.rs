//! The unit grammar of the spec file: parses texts such as `deg/s/sqrt(Hz)`
//! or `(deg/h)^2/Hz` into a scale factor and a dimension.
//!
//! # Grammar
//! ```text
//! unit     := product
//! product  := power (('*' | '·' | '/') power)*      left to right: a/b/c = a/(b*c)
//! power    := factor ('^' exponent | '²' | '³')?
//! factor   := name | '1' | '(' product ')' | 'sqrt' '(' product ')' | '√' factor
//! exponent := number | '(' number ('/' number)? ')'  signed; a multiple of 1/2
//! ```
//! Spaces are ignored around symbols; two names side by side need a `*`.
//!
//! # Names
//! | name                  | meaning                              | prefixes |
//! |-----------------------|--------------------------------------|----------|
//! | `m`                   | metre                                | yes      |
//! | `s`, `min`, `h`, `hr` | second, minute, hour                 | `s` only |
//! | `Hz`                  | 1/s                                  | yes      |
//! | `rad`, `deg`, `°`     | radian, degree (pi/180 rad)          | yes      |
//! | `dps`                 | degree per second                    | yes      |
//! | `g`                   | standard gravity, 9.80665 m/s² (not the gram) | yes |
//! | `kg`                  | kilogram                             | no       |
//! | `K`, `degC`           | kelvin (a Celsius *difference*)      | no       |
//! | `Pa`, `hPa`, `bar`    | pascal, hectopascal, bar (1e5 Pa)    | `Pa`, `bar` |
//! | `T`, `gauss`          | tesla, gauss (1e-4 T)                | yes      |
//!
//! Prefixes: `n` 1e-9, `u`/`µ`/`μ` 1e-6, `m` 1e-3, `c` 1e-2, `k` 1e3. A
//! whole name wins over a prefixed one (`min` is the minute, `mg` is the
//! milli-g, `ms` the millisecond, `mm` the millimetre).
//!
//! Angles are kept as their own dimension (rad), although SI counts them as
//! dimensionless, so that `deg/s` fits a quantity in `rad/s` but not one in
//! `m/s`, and a PSD "per rad/s" is told apart from one "per Hz".

use super::NumericError;

/// Number of base dimensions: m, s, rad, kg, K, A.
pub const BASE_DIMS: usize = 6;
/// Names of the base dimensions, in the order of [`Unit::dims`].
pub const BASE_NAMES: [&str; BASE_DIMS] = ["m", "s", "rad", "kg", "K", "A"];

/// A parsed unit: a value `v` in this unit is `v * scale` in coherent base
/// units (m, s, rad, kg, K, A) with dimension `dims`.
#[derive(Clone, Debug, PartialEq)]
pub struct Unit {
    /// Multiply a value in this unit by `scale` to get coherent base units.
    pub scale: f64,
    /// Twice the exponent of each base dimension (m, s, rad, kg, K, A), so
    /// that square roots (`sqrt(Hz)`) are exact.
    pub dims: [i32; BASE_DIMS],
}

impl Unit {
    /// The dimensionless unit 1.
    pub const ONE: Unit = Unit {
        scale: 1.0,
        dims: [0; BASE_DIMS],
    };

    fn base(scale: f64, idx: usize, twice_exp: i32) -> Unit {
        let mut dims = [0; BASE_DIMS];
        dims[idx] = twice_exp;
        Unit { scale, dims }
    }

    /// `self * other`.
    #[must_use]
    pub fn mul(&self, other: &Unit) -> Unit {
        let mut dims = self.dims;
        for (d, o) in dims.iter_mut().zip(other.dims) {
            *d += o;
        }
        Unit {
            scale: self.scale * other.scale,
            dims,
        }
    }

    /// `self / other`.
    #[must_use]
    pub fn div(&self, other: &Unit) -> Unit {
        let mut dims = self.dims;
        for (d, o) in dims.iter_mut().zip(other.dims) {
            *d -= o;
        }
        Unit {
            scale: self.scale / other.scale,
            dims,
        }
    }

    /// `self ^ (half_exp / 2)`, or `None` when an exponent would not be a
    /// multiple of 1/2.
    #[must_use]
    pub fn powh(&self, half_exp: i32) -> Option<Unit> {
        let mut dims = [0; BASE_DIMS];
        for (d, s) in dims.iter_mut().zip(self.dims) {
            let p = s * half_exp;
            if p % 2 != 0 {
                return None;
            }
            *d = p / 2;
        }
        Some(Unit {
            scale: self.scale.powf(f64::from(half_exp) / 2.0),
            dims,
        })
    }

    /// True when both units have the same dimension.
    #[must_use]
    pub fn same_dimension(&self, other: &Unit) -> bool {
        self.dims == other.dims
    }

    /// The dimension as a unit text in coherent base units, in the spec's
    /// own grammar, e.g. `m/s^2`, `rad/sqrt(s)`, `m*rad/s`, `1/s`, `1` (it
    /// parses back to the same dimension, with scale 1).
    #[must_use]
    pub fn coherent_text(&self) -> String {
        let power = |name: &str, twice: i32| match twice {
            1 => format!("sqrt({name})"),
            2 => name.to_string(),
            t if t % 2 == 0 => format!("{name}^{}", t / 2),
            t => format!("{name}^({t}/2)"),
        };
        let mut up = Vec::new();
        let mut down = Vec::new();
        for (name, d) in BASE_NAMES.iter().zip(self.dims) {
            match d {
                0 => {}
                d if d > 0 => up.push(power(name, d)),
                d => down.push(power(name, -d)),
            }
        }
        let up = if up.is_empty() {
            "1".to_string()
        } else {
            up.join("*")
        };
        match down.len() {
            0 => up,
            1 => format!("{up}/{}", down[0]),
            _ => format!("{up}/({})", down.join("*")),
        }
    }

    /// True when every exponent is a whole number (no `sqrt(Hz)` left).
    #[must_use]
    pub fn is_whole(&self) -> bool {
        self.dims.iter().all(|d| d % 2 == 0)
    }

    /// The dimension in words, e.g. `m s^-2`, `rad s^-1/2`, `1`.
    #[must_use]
    pub fn dimension_text(&self) -> String {
        let mut parts = Vec::new();
        for (name, d) in BASE_NAMES.iter().zip(self.dims) {
            match d {
                0 => {}
                2 => parts.push((*name).to_string()),
                d if d % 2 == 0 => parts.push(format!("{name}^{}", d / 2)),
                d => parts.push(format!("{name}^{d}/2")),
            }
        }
        if parts.is_empty() {
            "1".to_string()
        } else {
            parts.join(" ")
        }
    }
}

const M: usize = 0;
const S: usize = 1;
const RAD: usize = 2;
const KG: usize = 3;
const K: usize = 4;
const A: usize = 5;

/// Standard gravity, m/s² (CGPM 1901, exact by definition).
pub const STANDARD_GRAVITY: f64 = 9.806_65;

/// A whole name (no prefix), and whether it accepts a prefix.
fn named(name: &str) -> Option<(Unit, bool)> {
    let deg = core::f64::consts::PI / 180.0;
    let u = match name {
        "1" => (Unit::ONE, false),
        "m" => (Unit::base(1.0, M, 2), true),
        "s" | "sec" => (Unit::base(1.0, S, 2), true),
        "min" => (Unit::base(60.0, S, 2), false),
        "h" | "hr" => (Unit::base(3600.0, S, 2), false),
        "Hz" => (Unit::base(1.0, S, -2), true),
        "rad" => (Unit::base(1.0, RAD, 2), true),
        "deg" | "°" => (Unit::base(deg, RAD, 2), true),
        "dps" => (Unit::base(deg, RAD, 2).div(&Unit::base(1.0, S, 2)), true),
        "g" => (
            Unit::base(STANDARD_GRAVITY, M, 2).div(&Unit::base(1.0, S, 4)),
            true,
        ),
        "kg" => (Unit::base(1.0, KG, 2), false),
        "K" | "degC" => (Unit::base(1.0, K, 2), false),
        "Pa" | "hPa" | "bar" => {
            let scale = match name {
                "Pa" => 1.0,
                "hPa" => 100.0,
                _ => 1e5,
            };
            // kg m^-1 s^-2
            let mut dims = [0; BASE_DIMS];
            dims[KG] = 2;
            dims[M] = -2;
            dims[S] = -4;
            (Unit { scale, dims }, name != "hPa")
        }
        "T" | "gauss" => {
            let scale = if name == "T" { 1.0 } else { 1e-4 };
            // kg s^-2 A^-1
            let mut dims = [0; BASE_DIMS];
            dims[KG] = 2;
            dims[S] = -4;
            dims[A] = -2;
            (Unit { scale, dims }, true)
        }
        _ => return None,
    };
    Some(u)
}

fn lookup(name: &str) -> Option<Unit> {
    if let Some((u, _)) = named(name) {
        return Some(u);
    }
    let prefixes: [(&str, f64); 6] = [
        ("n", 1e-9),
        ("u", 1e-6),
        ("µ", 1e-6),
        ("μ", 1e-6),
        ("m", 1e-3),
        ("c", 1e-2),
    ];
    let kilo = [("k", 1e3)];
    for (p, f) in prefixes.iter().chain(kilo.iter()) {
        if let Some(rest) = name.strip_prefix(p)
            && let Some((u, true)) = named(rest)
        {
            return Some(Unit {
                scale: u.scale * f,
                dims: u.dims,
            });
        }
    }
    None
}

#[derive(Clone, Debug, PartialEq)]
enum Tok {
    Name(String),
    Num(f64),
    Mul,
    Div,
    Pow,
    Open,
    Close,
    Root,
    Sup(i32),
}

fn is_name_char(c: char) -> bool {
    c.is_alphabetic() || c == '°'
}

fn tokenize(text: &str) -> Result<Vec<Tok>, NumericError> {
    let bad = |reason: String| NumericError::BadUnit {
        text: quoted(text),
        reason,
    };
    let mut toks = Vec::new();
    let chars: Vec<char> = text.chars().collect();
    let mut i = 0;
    while i < chars.len() {
        let c = chars[i];
        match c {
            c if c.is_whitespace() => {
                i += 1;
            }
            '*' | '·' | '⋅' => {
                toks.push(Tok::Mul);
                i += 1;
            }
            '/' => {
                toks.push(Tok::Div);
                i += 1;
            }
            '^' => {
                toks.push(Tok::Pow);
                i += 1;
            }
            '(' => {
                toks.push(Tok::Open);
                i += 1;
            }
            ')' => {
                toks.push(Tok::Close);
                i += 1;
            }
            '√' => {
                toks.push(Tok::Root);
                i += 1;
            }
            '²' => {
                toks.push(Tok::Sup(4));
                i += 1;
            }
            '³' => {
                toks.push(Tok::Sup(6));
                i += 1;
            }
            c if c.is_ascii_digit() || c == '.' || c == '-' || c == '+' => {
                let start = i;
                i += 1;
                while i < chars.len() && (chars[i].is_ascii_digit() || chars[i] == '.') {
                    i += 1;
                }
                let s: String = chars[start..i].iter().collect();
                let v: f64 = s
                    .parse()
                    .map_err(|_| bad(format!("`{s}` is not a number")))?;
                toks.push(Tok::Num(v));
            }
            c if is_name_char(c) => {
                let start = i;
                while i < chars.len() && is_name_char(chars[i]) {
                    i += 1;
                }
                toks.push(Tok::Name(chars[start..i].iter().collect()));
            }
            c => return Err(bad(format!("unexpected character `{c}`"))),
        }
    }
    Ok(toks)
}

/// Deepest nesting of parentheses, `sqrt(` and `√` in one unit: far more
/// than any real unit needs, and a bound on the parser's recursion (so a
/// text of thousands of `(` is refused, not a stack overflow).
pub const MAX_NESTING: usize = 16;

/// A unit text as quoted in an error: whole when short, otherwise its
/// first 60 characters and the length (a message should not repeat 40 000
/// parentheses).
fn quoted(text: &str) -> String {
    let n = text.chars().count();
    if n <= 80 {
        text.to_string()
    } else {
        let head: String = text.chars().take(60).collect();
        format!("{head}... ({n} characters)")
    }
}

struct Parser<'a> {
    text: &'a str,
    toks: Vec<Tok>,
    pos: usize,
    depth: usize,
}

impl Parser<'_> {
    fn bad(&self, reason: impl Into<String>) -> NumericError {
        NumericError::BadUnit {
            text: quoted(self.text),
            reason: reason.into(),
        }
    }

    fn peek(&self) -> Option<&Tok> {
        self.toks.get(self.pos)
    }

    fn next(&mut self) -> Option<Tok> {
        let t = self.toks.get(self.pos).cloned();
        self.pos += 1;
        t
    }

    fn expect(&mut self, t: &Tok, what: &str) -> Result<(), NumericError> {
        match self.next() {
            Some(ref got) if got == t => Ok(()),
            _ => Err(self.bad(format!("expected {what}"))),
        }
    }

    fn product(&mut self) -> Result<Unit, NumericError> {
        let mut u = self.power()?;
        loop {
            match self.peek() {
                Some(Tok::Mul) => {
                    self.pos += 1;
                    u = u.mul(&self.power()?);
                }
                Some(Tok::Div) => {
                    self.pos += 1;
                    u = u.div(&self.power()?);
                }
                Some(Tok::Name(_) | Tok::Open | Tok::Root | Tok::Num(_)) => {
                    return Err(self.bad("two units side by side: write `*` between them"));
                }
                _ => return Ok(u),
            }
        }
    }

    fn power(&mut self) -> Result<Unit, NumericError> {
        let u = self.factor()?;
        let half = match self.peek() {
            Some(Tok::Pow) => {
                self.pos += 1;
                self.exponent()?
            }
            Some(Tok::Sup(h)) => {
                let h = *h;
                self.pos += 1;
                h
            }
            _ => return Ok(u),
        };
        u.powh(half)
            .ok_or_else(|| self.bad("exponents must be multiples of 1/2"))
    }

    fn exponent(&mut self) -> Result<i32, NumericError> {
        let value = match self.next() {
            Some(Tok::Num(v)) => v,
            Some(Tok::Open) => {
                let num = match self.next() {
                    Some(Tok::Num(v)) => v,
                    _ => return Err(self.bad("expected a number after `^(`")),
                };
                let v = if self.peek() == Some(&Tok::Div) {
                    self.pos += 1;
                    match self.next() {
                        Some(Tok::Num(d)) if d != 0.0 => num / d,
                        _ => return Err(self.bad("expected a non-zero denominator")),
                    }
                } else {
                    num
                };
                self.expect(&Tok::Close, "`)` after the exponent")?;
                v
            }
            _ => return Err(self.bad("expected an exponent after `^`")),
        };
        let twice = value * 2.0;
        if twice.fract() != 0.0 || twice.abs() > 64.0 {
            return Err(self.bad(format!(
                "exponent {value} is not a multiple of 1/2 (or is too large)"
            )));
        }
        Ok(twice as i32)
    }

    fn factor(&mut self) -> Result<Unit, NumericError> {
        if self.depth >= MAX_NESTING {
            return Err(self.bad(format!(
                "nested more than {MAX_NESTING} deep (parentheses, sqrt or √)"
            )));
        }
        self.depth += 1;
        let u = self.factor_inner();
        self.depth -= 1;
        u
    }

    fn factor_inner(&mut self) -> Result<Unit, NumericError> {
        match self.next() {
            Some(Tok::Name(n)) if n == "sqrt" => {
                self.expect(&Tok::Open, "`(` after sqrt")?;
                let u = self.product()?;
                self.expect(&Tok::Close, "`)` closing sqrt(")?;
                u.powh(1)
                    .ok_or_else(|| self.bad("square root of a square root"))
            }
            Some(Tok::Name(n)) => lookup(&n).ok_or_else(|| NumericError::UnknownUnit {
                text: self.text.to_string(),
                name: n,
            }),
            Some(Tok::Num(1.0)) => Ok(Unit::ONE),
            Some(Tok::Num(v)) => Err(self.bad(format!(
                "a number ({v}) where a unit name belongs (only `1` is allowed, as in `1/s`)"
            ))),
            Some(Tok::Open) => {
                let u = self.product()?;
                self.expect(&Tok::Close, "`)`")?;
                Ok(u)
            }
            Some(Tok::Root) => {
                let u = self.factor()?;
                u.powh(1)
                    .ok_or_else(|| self.bad("square root of a square root"))
            }
            Some(t) => Err(self.bad(format!("unexpected {}", describe(&t)))),
            None => Err(self.bad("unexpected end of the unit")),
        }
    }
}

fn describe(t: &Tok) -> &'static str {
    match t {
        Tok::Name(_) => "name",
        Tok::Num(_) => "number",
        Tok::Mul => "`*`",
        Tok::Div => "`/`",
        Tok::Pow => "`^`",
        Tok::Open => "`(`",
        Tok::Close => "`)`",
        Tok::Root => "`√`",
        Tok::Sup(_) => "superscript",
    }
}

/// Parses a unit text (see the module documentation for the grammar and
/// the names).
///
/// # Errors
/// [`NumericError::UnknownUnit`] naming the unknown name, or
/// [`NumericError::BadUnit`] saying what does not parse (empty text,
/// unbalanced parentheses, an exponent that is not a multiple of 1/2, two
/// names without an operator, ...).
pub fn parse_unit(text: &str) -> Result<Unit, NumericError> {
    let toks = tokenize(text)?;
    let mut p = Parser {
        text,
        toks,
        pos: 0,
        depth: 0,
    };
    if p.toks.is_empty() {
        return Err(p.bad("empty unit (write `1` for a dimensionless quantity)"));
    }
    let u = p.product()?;
    if p.pos < p.toks.len() {
        return Err(p.bad(format!(
            "unexpected {} after the unit",
            describe(&p.toks[p.pos])
        )));
    }
    Ok(u)
}

/// The factor converting a value in unit `from` to unit `to` (same
/// dimension), e.g. `conversion_factor("deg/h", "rad/s")`.
///
/// # Errors
/// As [`parse_unit`], and [`NumericError::UnitMismatch`] when the dimensions
/// differ.
pub fn conversion_factor(from: &str, to: &str) -> Result<f64, NumericError> {
    let a = parse_unit(from)?;
    let b = parse_unit(to)?;
    if !a.same_dimension(&b) {
        return Err(NumericError::UnitMismatch {
            unit: from.to_string(),
            quantity: to.to_string(),
            reason: format!(
                "dimension {} is not {}",
                a.dimension_text(),
                b.dimension_text()
            ),
        });
    }
    Ok(a.scale / b.scale)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn close(a: f64, b: f64) -> bool {
        (a - b).abs() <= 1e-14 * b.abs()
    }

    #[test]
    fn si_and_common_names() {
        // Definitions: 1 deg = pi/180 rad, 1 h = 3600 s, g = 9.80665 m/s^2
        // (CGPM 1901), 1 gauss = 1e-4 T, 1 hPa = 100 Pa (SI brochure).
        let u = parse_unit("deg/s").unwrap();
        assert!(close(u.scale, core::f64::consts::PI / 180.0));
        assert_eq!(u.dims, parse_unit("rad/s").unwrap().dims);
        assert!(close(parse_unit("ug").unwrap().scale, 9.806_65e-6));
        assert_eq!(
            parse_unit("ug").unwrap().dims,
            parse_unit("m/s^2").unwrap().dims
        );
        assert!(close(parse_unit("mgauss").unwrap().scale, 1e-7));
        assert!(close(parse_unit("uT").unwrap().scale, 1e-6));
        assert!(close(parse_unit("hPa").unwrap().scale, 100.0));
        assert!(close(parse_unit("min").unwrap().scale, 60.0));
        assert!(close(parse_unit("ms").unwrap().scale, 1e-3));
        assert!(close(parse_unit("mm").unwrap().scale, 1e-3));
        assert!(close(
            parse_unit("mdps").unwrap().scale,
            1e-3 * core::f64::consts::PI / 180.0
        ));
        assert!(close(parse_unit("kHz").unwrap().scale, 1e3));
    }

    #[test]
    fn roots_powers_and_grouping() {
        // deg/sqrt(h) = (pi/180) / 60 rad/sqrt(s) (hour = 3600 s).
        let a = parse_unit("deg/sqrt(h)").unwrap();
        assert!(close(a.scale, core::f64::consts::PI / 180.0 / 60.0));
        assert_eq!(a.dimension_text(), "s^-1/2 rad");
        // The same written with a root sign and a superscript-free power.
        assert_eq!(parse_unit("°/√h").unwrap().dims, a.dims);
        assert!(close(parse_unit("deg*h^-0.5").unwrap().scale, a.scale));
        assert!(close(parse_unit("deg*h^(-1/2)").unwrap().scale, a.scale));
        // (deg/h)^2/Hz: scale (pi/180/3600)^2.
        let p = parse_unit("(deg/h)^2/Hz").unwrap();
        assert!(close(
            p.scale,
            (core::f64::consts::PI / 180.0 / 3600.0).powi(2)
        ));
        assert_eq!(p.dimension_text(), "s^-1 rad^2");
        assert_eq!(parse_unit("(deg/h)²/Hz").unwrap(), p);
        // Left-to-right division: m/s/s = m/s^2.
        assert_eq!(parse_unit("m/s/s").unwrap(), parse_unit("m/s^2").unwrap());
        assert_eq!(parse_unit("1/s").unwrap(), parse_unit("Hz").unwrap());
        assert_eq!(parse_unit(" m / s ").unwrap(), parse_unit("m/s").unwrap());
    }

    #[test]
    fn coherent_texts_read_back_to_their_dimension() {
        // Our own grammar, both ways: the text of a parsed unit parses to the
        // same dimension with scale 1 (coherent base units).
        for (text, want) in [
            ("deg/s/sqrt(Hz)", "rad/sqrt(s)"),
            ("(m/s^2)^2/Hz", "m^2/s^3"),
            ("mg", "m/s^2"),
            ("deg/sqrt(h)", "rad/sqrt(s)"),
            ("Hz", "1/s"),
            ("1", "1"),
            ("m*rad/s", "m*rad/s"),
            ("m/s/K", "m/(s*K)"),
            ("sqrt(s)^3", "s^(3/2)"),
        ] {
            let u = parse_unit(text).unwrap();
            let c = u.coherent_text();
            assert_eq!(c, want, "{text}");
            let back = parse_unit(&c).unwrap();
            assert!(back.same_dimension(&u), "{text} -> {c}");
            assert!((back.scale - 1.0).abs() < 1e-15, "{text} -> {c}");
        }
        assert!(parse_unit("m/s").unwrap().is_whole());
        assert!(!parse_unit("m/sqrt(Hz)").unwrap().is_whole());
    }

    #[test]
    fn nesting_is_bounded() {
        let nested = |k: usize| format!("{}m{}/s", "(".repeat(k), ")".repeat(k));
        assert_eq!(parse_unit(&nested(10)).unwrap(), parse_unit("m/s").unwrap());
        // Thousands of parentheses: refused, not a stack overflow.
        for k in [MAX_NESTING, 5_000, 200_000] {
            let e = parse_unit(&nested(k)).unwrap_err().to_string();
            assert!(e.contains("nested more than"), "{k}: {e:.80}");
        }
        let roots = format!("{}s", "√".repeat(100_000));
        assert!(parse_unit(&roots).is_err());
    }

    #[test]
    fn errors_name_the_problem() {
        match parse_unit("furlong/s") {
            Err(NumericError::UnknownUnit { name, .. }) => assert_eq!(name, "furlong"),
            e => panic!("{e:?}"),
        }
        for bad in [
            "",
            "m s",
            "m/(s",
            "m^x",
            "m^0.3",
            "2*m",
            "m/",
            "sqrt(sqrt(s))",
            "m)",
            "m$",
        ] {
            let e = parse_unit(bad);
            assert!(
                matches!(
                    e,
                    Err(NumericError::BadUnit { .. } | NumericError::UnknownUnit { .. })
                ),
                "{bad}: {e:?}"
            );
            assert!(e.unwrap_err().to_string().contains(bad));
        }
        assert!(matches!(
            conversion_factor("m/s", "rad/s"),
            Err(NumericError::UnitMismatch { .. })
        ));
        assert!(close(
            conversion_factor("deg/h", "rad/s").unwrap(),
            core::f64::consts::PI / 180.0 / 3600.0
        ));
    }
}
