//! A recorded log of the robot (docs/log-format.md): timestamped input rows
//! and measurement rows per channel, streamed, every bad row refused with
//! file, line and column.

use std::fs::File;
use std::io::{BufRead, BufReader};
use std::path::{Path, PathBuf};

/// The header every log starts with (after comments).
pub const HEADER: &str = "time_s,stream,values";
/// The largest line accepted, bytes.
const MAX_LINE: usize = 64 * 1024;

/// A bad log, located.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct LogError {
    /// The file.
    pub file: String,
    /// Line, 1-based (0: the file as a whole).
    pub line: usize,
    /// Column, 1-based (0: the line as a whole).
    pub column: usize,
    /// What is wrong.
    pub message: String,
}

impl core::fmt::Display for LogError {
    fn fmt(&self, f: &mut core::fmt::Formatter<'_>) -> core::fmt::Result {
        match (self.line, self.column) {
            (0, _) => write!(f, "{}: {}", self.file, self.message),
            (l, 0) => write!(f, "{}:{l}: {}", self.file, self.message),
            (l, c) => write!(f, "{}:{l}:{c}: {}", self.file, self.message),
        }
    }
}

impl std::error::Error for LogError {}

/// What a log row carries.
#[derive(Debug, Clone, PartialEq)]
pub enum Row {
    /// The model's input for one step.
    Input(Vec<f64>),
    /// A measurement of channel `index`.
    Measurement(usize, Vec<f64>),
    /// The true state (invented logs only).
    Truth(Vec<f64>),
}

/// What the reader must know to check rows: the input's length, each
/// channel's name and size, and the number of states.
#[derive(Debug, Clone)]
pub struct Layout {
    /// Values in an input row.
    pub input_len: usize,
    /// Channel names and sizes, in the scenario's order.
    pub channels: Vec<(String, usize)>,
    /// States (the length of a truth row).
    pub states: usize,
}

/// A streaming reader of one log.
pub struct LogReader {
    file: String,
    lines: std::io::Lines<BufReader<File>>,
    line_no: usize,
    layout: Layout,
    header_seen: bool,
    last_time: f64,
    last_input_time: Option<f64>,
    inputs: u64,
}

impl LogReader {
    /// Opens a log.
    ///
    /// # Errors
    /// A [`LogError`] when the file cannot be opened.
    pub fn open(path: &Path, layout: Layout) -> Result<Self, LogError> {
        let file = path.display().to_string();
        let f = File::open(path).map_err(|e| LogError {
            file: file.clone(),
            line: 0,
            column: 0,
            message: format!("cannot open the log: {e}"),
        })?;
        Ok(Self {
            file,
            lines: BufReader::new(f).lines(),
            line_no: 0,
            layout,
            header_seen: false,
            last_time: f64::NEG_INFINITY,
            last_input_time: None,
            inputs: 0,
        })
    }

    fn err(&self, column: usize, message: impl Into<String>) -> LogError {
        LogError {
            file: self.file.clone(),
            line: self.line_no,
            column,
            message: message.into(),
        }
    }

    /// The next row with its time, `None` at the end.
    ///
    /// # Errors
    /// A [`LogError`] naming line and column for anything malformed.
    pub fn next_row(&mut self) -> Result<Option<(f64, Row)>, LogError> {
        loop {
            let Some(line) = self.lines.next() else {
                if !self.header_seen {
                    return Err(LogError {
                        file: self.file.clone(),
                        line: 0,
                        column: 0,
                        message: format!(
                            "no header: the first line that is not a comment must be `{HEADER}`"
                        ),
                    });
                }
                return Ok(None);
            };
            self.line_no += 1;
            let line = line.map_err(|e| self.err(0, format!("cannot read: {e}")))?;
            if line.len() > MAX_LINE {
                return Err(self.err(0, format!("line longer than {MAX_LINE} bytes")));
            }
            let text = line.trim_end_matches('\r');
            let trimmed = text.trim();
            if trimmed.is_empty() || trimmed.starts_with('#') {
                continue;
            }
            if !self.header_seen {
                if trimmed != HEADER {
                    return Err(self.err(1, format!("expected the header `{HEADER}`")));
                }
                self.header_seen = true;
                continue;
            }
            return self.parse(text).map(Some);
        }
    }

    fn parse(&mut self, text: &str) -> Result<(f64, Row), LogError> {
        let mut cells = Vec::new();
        let mut col = 1;
        for cell in text.split(',') {
            cells.push((col, cell.trim()));
            col += cell.len() + 1;
        }
        if cells.len() < 2 {
            return Err(self.err(1, "a row needs a time, a stream name and values"));
        }
        let (tcol, tcell) = cells[0];
        let t: f64 = tcell
            .parse()
            .map_err(|_| self.err(tcol, format!("`{tcell}` is not a time in seconds")))?;
        if !t.is_finite() {
            return Err(self.err(tcol, "the time is not finite"));
        }
        if t < self.last_time {
            return Err(self.err(
                tcol,
                format!(
                    "time {t} s goes back (the row above is at {} s)",
                    self.last_time
                ),
            ));
        }
        let (scol, stream) = cells[1];
        let mut values = Vec::with_capacity(cells.len() - 2);
        for &(c, cell) in &cells[2..] {
            if cell.is_empty() {
                return Err(self.err(c, "empty cell"));
            }
            let v: f64 = cell
                .parse()
                .map_err(|_| self.err(c, format!("`{cell}` is not a number")))?;
            if !v.is_finite() {
                return Err(self.err(c, format!("`{cell}` is not finite")));
            }
            values.push(v);
        }
        let expect = |what: &str, n: usize, this: &Self| -> Result<(), LogError> {
            if values.len() == n {
                Ok(())
            } else {
                Err(this.err(
                    scol,
                    format!("{what} needs {n} values, the row has {}", values.len()),
                ))
            }
        };
        let row = match stream {
            "input" => {
                expect("an input row", self.layout.input_len, self)?;
                if let Some(last) = self.last_input_time
                    && t <= last
                {
                    return Err(self.err(
                        tcol,
                        format!(
                            "input rows must be strictly increasing in time ({t} s after {last} s)"
                        ),
                    ));
                }
                self.last_input_time = Some(t);
                self.inputs += 1;
                Row::Input(values)
            }
            "truth" => {
                expect("a truth row", self.layout.states, self)?;
                Row::Truth(values)
            }
            name => {
                let Some(i) = self.layout.channels.iter().position(|(n, _)| n == name) else {
                    let names: Vec<&str> = self
                        .layout
                        .channels
                        .iter()
                        .map(|(n, _)| n.as_str())
                        .collect();
                    return Err(self.err(
                        scol,
                        format!(
                            "unknown stream `{}` (expected input, truth or a channel: {})",
                            name.escape_debug(),
                            names.join(", ")
                        ),
                    ));
                };
                if self.inputs < 2 {
                    return Err(self.err(
                        tcol,
                        "a measurement row must come after the second input row (the first input row only sets the start time)",
                    ));
                }
                expect(
                    &format!("channel `{name}`"),
                    self.layout.channels[i].1,
                    self,
                )?;
                Row::Measurement(i, values)
            }
        };
        self.last_time = t;
        Ok((t, row))
    }
}

/// What a first pass over a log found.
#[derive(Debug, Clone)]
pub struct LogSummary {
    /// The file.
    pub path: PathBuf,
    /// Input rows.
    pub input_rows: u64,
    /// Time of the first and last input row, s.
    pub span: (f64, f64),
    /// Measurement rows per channel.
    pub measurements: Vec<u64>,
    /// Truth rows.
    pub truth_rows: u64,
    /// The longest interval between input rows, s.
    pub longest_gap_s: f64,
}

/// Reads a whole log once, checking every row.
///
/// # Errors
/// The first bad row, located; a log with fewer than two input rows.
pub fn survey(path: &Path, layout: &Layout) -> Result<LogSummary, LogError> {
    let mut r = LogReader::open(path, layout.clone())?;
    let mut s = LogSummary {
        path: path.to_path_buf(),
        input_rows: 0,
        span: (f64::NAN, f64::NAN),
        measurements: vec![0; layout.channels.len()],
        truth_rows: 0,
        longest_gap_s: 0.0,
    };
    let mut last = None;
    while let Some((t, row)) = r.next_row()? {
        match row {
            Row::Input(_) => {
                s.input_rows += 1;
                if let Some(l) = last {
                    s.longest_gap_s = s.longest_gap_s.max(t - l);
                } else {
                    s.span.0 = t;
                }
                last = Some(t);
                s.span.1 = t;
            }
            Row::Measurement(i, _) => s.measurements[i] += 1,
            Row::Truth(_) => s.truth_rows += 1,
        }
    }
    if s.input_rows < 2 {
        return Err(LogError {
            file: path.display().to_string(),
            line: 0,
            column: 0,
            message: format!("{} input rows: a log needs at least two", s.input_rows),
        });
    }
    Ok(s)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn layout() -> Layout {
        Layout {
            input_len: 2,
            channels: vec![("radio".into(), 2), ("wheel".into(), 1)],
            states: 3,
        }
    }

    fn write(text: &str) -> tempfile_path::TempPath {
        tempfile_path::TempPath::with(text)
    }

    mod tempfile_path {
        use std::path::PathBuf;
        pub struct TempPath(pub PathBuf);
        impl TempPath {
            pub fn with(text: &str) -> Self {
                use std::sync::atomic::{AtomicU64, Ordering};
                static COUNT: AtomicU64 = AtomicU64::new(0);
                let p = std::env::temp_dir().join(format!(
                    "cairn-log-test-{}-{}.csv",
                    std::process::id(),
                    COUNT.fetch_add(1, Ordering::Relaxed)
                ));
                std::fs::write(&p, text).unwrap();
                Self(p)
            }
        }
        impl Drop for TempPath {
            fn drop(&mut self) {
                let _ = std::fs::remove_file(&self.0);
            }
        }
    }

    #[test]
    fn a_good_log_is_surveyed() {
        let f = write(
            "# invented\ntime_s,stream,values\n0.0,input,1,2\n0.01,input,1,2\n0.01,wheel,0.5\n0.025,input,1,2\n0.03,radio,1,2\n0.03,truth,1,2,3\n",
        );
        let s = survey(&f.0, &layout()).unwrap();
        assert_eq!(s.input_rows, 3);
        assert_eq!(s.measurements, vec![1, 1]);
        assert_eq!(s.truth_rows, 1);
        assert!((s.longest_gap_s - 0.015).abs() < 1e-15);
    }

    #[test]
    fn bad_rows_are_located() {
        let cases = [
            ("time_s,stream,values\n0,input,1\n", 2, 3, "needs 2 values"),
            ("time_s,stream,values\n0,input,1,x\n", 2, 11, "not a number"),
            ("time_s,stream,values\n0,input,1,NaN\n", 2, 11, "not finite"),
            (
                "time_s,stream,values\n1,input,1,2\n0.5,input,1,2\n",
                3,
                1,
                "goes back",
            ),
            (
                "time_s,stream,values\n1,input,1,2\n1,input,1,2\n",
                3,
                1,
                "strictly increasing",
            ),
            (
                "time_s,stream,values\n0,input,1,2\n1,input,1,2\n1,gps,1\n",
                4,
                3,
                "unknown stream",
            ),
            (
                "time_s,stream,values\n0,input,1,2\n0,radio,1,2\n",
                3,
                1,
                "second input row",
            ),
            ("time_s,stream,values\n0,input,1,,2\n", 2, 11, "empty cell"),
            ("t,s,v\n", 1, 1, "header"),
        ];
        for (text, line, column, words) in cases {
            let f = write(text);
            let e = survey(&f.0, &layout()).unwrap_err();
            assert_eq!((e.line, e.column), (line, column), "{text:?}: {e}");
            assert!(e.message.contains(words), "{text:?}: {e}");
        }
        let f = write("# nothing\n");
        assert!(
            survey(&f.0, &layout())
                .unwrap_err()
                .message
                .contains("no header")
        );
        let f = write("time_s,stream,values\n0,input,1,2\n");
        assert!(
            survey(&f.0, &layout())
                .unwrap_err()
                .message
                .contains("at least two")
        );
    }
}
