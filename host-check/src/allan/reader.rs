//! The recorded static log, read one line at a time: a header naming the
//! axes (and their units), then `time, value, value, ...` rows.
//!
//! Memory does not grow with the log: each row is parsed into a reused
//! buffer and handed on. Bad rows (a value that is not a number, NaN, a
//! time stamp that does not increase) stop the read with the file and line;
//! irregular intervals (gaps) are counted and reported, not fatal.

use std::fmt;
use std::io::BufRead;

/// Longest line read, bytes: a longer one is refused (a binary file or
/// `/dev/zero` is not read until memory runs out).
pub const MAX_LINE: usize = 64 * 1024;

/// A problem with the log, located by file and line (line 0: the file as
/// a whole).
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct LogError {
    /// The file name as given.
    pub file: String,
    /// 1-based line, 0 when the problem is with the whole file.
    pub line: u64,
    /// What is wrong.
    pub message: String,
}

impl fmt::Display for LogError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        if self.line == 0 {
            write!(f, "{}: {}", self.file, self.message)
        } else {
            write!(f, "{}:{}: {}", self.file, self.line, self.message)
        }
    }
}

impl std::error::Error for LogError {}

/// One value column of the log.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Axis {
    /// Its name from the header (`axis1`, ... without one).
    pub name: String,
    /// Its unit from the header (`name[unit]`), if given.
    pub unit: Option<String>,
}

/// Irregular sample intervals seen while reading.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct Gaps {
    /// Intervals longer than 1.5 times the first one.
    pub count: u64,
    /// Line of the first such interval.
    pub first_line: u64,
    /// The longest interval, s.
    pub longest_s: f64,
    /// Its line.
    pub longest_line: u64,
}

/// What the reader learned about the whole log.
#[derive(Debug, Clone, PartialEq)]
pub struct LogSummary {
    /// Rows read.
    pub samples: u64,
    /// First time stamp, s.
    pub first_s: f64,
    /// Last time stamp, s.
    pub last_s: f64,
    /// The first interval, s (the reference for gaps).
    pub first_interval_s: f64,
    /// Irregular intervals.
    pub gaps: Gaps,
}

impl LogSummary {
    /// Mean sample interval, s: (last - first) / (samples - 1).
    #[must_use]
    pub fn mean_interval_s(&self) -> f64 {
        (self.last_s - self.first_s) / (self.samples.saturating_sub(1).max(1) as f64)
    }
}

/// What receives the log as it is read.
pub trait Sink {
    /// The axes, once, before any row; an `Err` message stops the read at
    /// the header's line.
    ///
    /// # Errors
    /// A message for the header's line.
    fn header(&mut self, axes: &[Axis]) -> Result<(), String>;
    /// One row: its time, s, and one value per axis.
    fn row(&mut self, time_s: f64, values: &[f64]);
}

/// Reads the log from `input` (named `file` in messages): parses the
/// header, then hands every row, in order, to `sink`.
/// Blank lines and lines starting with `#` are skipped. The first column
/// is the time in seconds (a header unit such as `time[ms]` scales it).
///
/// # Errors
/// A [`LogError`] with the line for a malformed header or row, a value or
/// time that is not a finite number, a time stamp that does not increase,
/// a line longer than [`MAX_LINE`], an unreadable file, or fewer than two
/// rows.
pub fn read_log<R: BufRead>(
    file: &str,
    mut input: R,
    sink: &mut impl Sink,
) -> Result<LogSummary, LogError> {
    let err = |line: u64, message: String| LogError {
        file: file.to_string(),
        line,
        message,
    };
    let mut buf = Vec::with_capacity(256);
    let mut values: Vec<f64> = Vec::new();
    let mut axes: Option<Vec<Axis>> = None;
    let mut time_scale = 1.0;
    let mut line_no = 0u64;
    let mut summary = LogSummary {
        samples: 0,
        first_s: f64::NAN,
        last_s: f64::NAN,
        first_interval_s: f64::NAN,
        gaps: Gaps::default(),
    };
    loop {
        buf.clear();
        let n = <&mut R as std::io::Read>::take(&mut input, MAX_LINE as u64 + 1)
            .read_until(b'\n', &mut buf)
            .map_err(|e| err(line_no + 1, format!("cannot read: {e}")))?;
        if n == 0 {
            break;
        }
        line_no += 1;
        if buf.len() > MAX_LINE {
            return Err(err(
                line_no,
                format!("line longer than {MAX_LINE} bytes: not a log of samples"),
            ));
        }
        let text = std::str::from_utf8(&buf)
            .map_err(|_| err(line_no, "not UTF-8 text".into()))?
            .trim();
        if text.is_empty() || text.starts_with('#') {
            continue;
        }
        let Some(cols) = &axes else {
            let (parsed, scale) = parse_header(text).map_err(|m| err(line_no, m))?;
            let data_row = parsed.is_none();
            let found = match parsed {
                Some(a) => a,
                None => {
                    // No header: the first row is data; name the axes.
                    let k = text.split(',').count();
                    if k < 2 {
                        return Err(err(
                            line_no,
                            "a row needs a time and at least one value, separated by commas".into(),
                        ));
                    }
                    (1..k)
                        .map(|i| Axis {
                            name: format!("axis{i}"),
                            unit: None,
                        })
                        .collect()
                }
            };
            time_scale = scale;
            sink.header(&found).map_err(|m| err(line_no, m))?;
            values = vec![0.0; found.len()];
            axes = Some(found);
            if !data_row {
                continue;
            }
            let cols = axes.as_ref().map_or(0, Vec::len);
            let t = parse_row(text, cols, &mut values, time_scale).map_err(|m| err(line_no, m))?;
            accept(&mut summary, t, line_no).map_err(|m| err(line_no, m))?;
            sink.row(t, &values);
            continue;
        };
        let t =
            parse_row(text, cols.len(), &mut values, time_scale).map_err(|m| err(line_no, m))?;
        accept(&mut summary, t, line_no).map_err(|m| err(line_no, m))?;
        sink.row(t, &values);
    }
    if summary.samples < 2 {
        return Err(err(
            0,
            format!(
                "{} sample rows: an Allan deviation needs a recorded series (thousands of rows)",
                summary.samples
            ),
        ));
    }
    Ok(summary)
}

/// Checks a time stamp against the previous one and records it.
fn accept(s: &mut LogSummary, t: f64, line: u64) -> Result<(), String> {
    if s.samples == 0 {
        s.first_s = t;
    } else {
        let dt = t - s.last_s;
        if dt == 0.0 {
            return Err(format!(
                "duplicate time stamp {t} s (the row before has the same time)"
            ));
        }
        if dt < 0.0 {
            return Err(format!(
                "time stamp {t} s goes back from {} s: the rows must be in time order",
                s.last_s
            ));
        }
        if s.samples == 1 {
            s.first_interval_s = dt;
        } else if dt > 1.5 * s.first_interval_s {
            let g = &mut s.gaps;
            if g.count == 0 {
                g.first_line = line;
            }
            g.count += 1;
            if dt > g.longest_s {
                g.longest_s = dt;
                g.longest_line = line;
            }
        }
    }
    s.last_s = t;
    s.samples += 1;
    Ok(())
}

/// Parses `time, v1, v2, ...` into `values`; returns the time in seconds.
fn parse_row(text: &str, cols: usize, values: &mut [f64], time_scale: f64) -> Result<f64, String> {
    let mut fields = text.split(',');
    let t = number(fields.next().unwrap_or(""), "time")? * time_scale;
    let mut k = 0;
    for f in fields {
        if k == cols {
            return Err(format!(
                "{} values, the header has {cols}",
                text.split(',').count() - 1
            ));
        }
        values[k] = number(f, "value")?;
        k += 1;
    }
    if k != cols {
        return Err(format!("{k} values, the header has {cols}"));
    }
    Ok(t)
}

fn number(field: &str, what: &str) -> Result<f64, String> {
    let f = field.trim();
    match f.parse::<f64>() {
        Ok(v) if v.is_finite() => Ok(v),
        Ok(v) => Err(format!("{what} `{v}` is not a finite number")),
        Err(_) => Err(format!(
            "{what} `{}` is not a number",
            crate::output::one_line(f)
        )),
    }
}

/// A header line: `time[s], gyro_x[deg/s], ...`; `Ok(None)` when the line
/// is a data row (its first field is a number). Returns the axes and the
/// time column's scale to seconds.
fn parse_header(text: &str) -> Result<(Option<Vec<Axis>>, f64), String> {
    let mut fields = text.split(',').map(str::trim);
    let first = fields.next().unwrap_or("");
    if first.parse::<f64>().is_ok() {
        return Ok((None, 1.0));
    }
    let (_, tunit) = split_unit(first);
    let scale = match tunit {
        None => 1.0,
        Some(u) => {
            let parsed = crate::numeric::units::parse_unit(&u)
                .map_err(|e| format!("time column `{first}`: {e}"))?;
            let mut secs = [0; crate::numeric::units::BASE_DIMS];
            secs[1] = 2;
            if parsed.dims != secs {
                return Err(format!(
                    "time column `{first}`: the unit must be a time (s, ms, us), not `{u}`"
                ));
            }
            parsed.scale
        }
    };
    let axes: Vec<Axis> = fields
        .map(|f| {
            let (name, unit) = split_unit(f);
            Axis { name, unit }
        })
        .collect();
    if axes.is_empty() {
        return Err("the header names a time column but no value column".into());
    }
    if let Some(a) = axes.iter().find(|a| a.name.is_empty()) {
        return Err(format!(
            "an empty column name in the header{}",
            a.unit
                .as_ref()
                .map_or(String::new(), |u| format!(" (unit `{u}`)"))
        ));
    }
    Ok((Some(axes), scale))
}

/// `name[unit]` or `name (unit)` into the name and the unit.
fn split_unit(field: &str) -> (String, Option<String>) {
    for (open, close) in [('[', ']'), ('(', ')')] {
        if let Some(i) = field.find(open)
            && field.ends_with(close)
        {
            let unit = field[i + 1..field.len() - 1].trim().to_string();
            return (
                field[..i].trim().to_string(),
                (!unit.is_empty()).then_some(unit),
            );
        }
    }
    (field.to_string(), None)
}

#[cfg(test)]
mod tests {
    use super::*;

    type Rows = Vec<(f64, Vec<f64>)>;

    fn read(text: &str) -> Result<(Vec<Axis>, Rows, LogSummary), LogError> {
        struct Keep(Vec<Axis>, Rows);
        impl Sink for Keep {
            fn header(&mut self, axes: &[Axis]) -> Result<(), String> {
                self.0 = axes.to_vec();
                Ok(())
            }
            fn row(&mut self, t: f64, v: &[f64]) {
                self.1.push((t, v.to_vec()));
            }
        }
        let mut keep = Keep(Vec::new(), Vec::new());
        let s = read_log("log.csv", text.as_bytes(), &mut keep)?;
        Ok((keep.0, keep.1, s))
    }

    #[test]
    fn header_units_and_rows() {
        let (axes, rows, s) =
            read("# invented\ntime[ms], gx[deg/s], gy (deg/s)\n0,1,2\n10,3,4\n20,5,6\n").unwrap();
        assert_eq!(axes[0].name, "gx");
        assert_eq!(axes[1].unit.as_deref(), Some("deg/s"));
        assert_eq!(rows[1], (0.01, vec![3.0, 4.0]));
        assert_eq!(s.samples, 3);
        assert!((s.mean_interval_s() - 0.01).abs() < 1e-15);
        // No header: the first row is data.
        let (axes, rows, _) = read("0,1\n1,2\n").unwrap();
        assert_eq!((axes[0].name.as_str(), rows.len()), ("axis1", 2));
    }

    #[test]
    fn bad_rows_name_their_line() {
        let cases = [
            ("t,x\n0,1\n1,nan\n", 3, "finite"),
            ("t,x\n0,1\n1,abc\n", 3, "not a number"),
            ("t,x\n0,1\n0,2\n", 3, "duplicate"),
            ("t,x\n0,1\n2,2\n1,3\n", 4, "goes back"),
            ("t,x\n0,1\n1,2,3\n", 3, "header has 1"),
            ("t,x\n0,1\n1\n", 3, "header has 1"),
            ("t[m],x\n0,1\n", 1, "must be a time"),
            ("t,x\n0,1\n", 0, "1 sample rows"),
        ];
        for (text, line, what) in cases {
            let e = read(text).unwrap_err();
            assert_eq!(e.line, line, "{text:?}: {e}");
            assert!(e.message.contains(what), "{text:?}: {e}");
            assert!(e.to_string().starts_with("log.csv:"), "{e}");
        }
    }

    #[test]
    fn gaps_are_counted_not_fatal() {
        let (_, _, s) = read("t,x\n0,1\n1,1\n2,1\n5,1\n6,1\n10,1\n").unwrap();
        assert_eq!(s.gaps.count, 2);
        assert_eq!(s.gaps.first_line, 5);
        assert_eq!((s.gaps.longest_s, s.gaps.longest_line), (4.0, 7));
    }

    #[test]
    fn a_long_line_is_refused() {
        let text = format!("t,x\n0,{}\n", "1".repeat(MAX_LINE + 10));
        let e = read(&text).unwrap_err();
        assert!(e.message.contains("longer than"), "{e}");
    }
}
