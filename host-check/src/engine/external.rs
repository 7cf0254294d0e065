//! An external reference covariance trajectory (CSV: step, time, then the
//! P entries), read one row at a time alongside the run.

use std::fs::File;
use std::io::{BufRead, BufReader, Read};
use std::path::{Path, PathBuf};

use nalgebra::DMatrix;

/// Longest line of the external reference, bytes (a row of 81 entries in
/// full precision is under 2 KiB; the cap stops a file without line breaks
/// from filling memory).
pub const MAX_LINE_BYTES: u64 = 1 << 20;

/// A streaming reader of the external reference.
pub struct ExternalStream {
    path: PathBuf,
    reader: BufReader<File>,
    line_no: usize,
    n: usize,
    dt: f64,
    pending: Option<(u64, DMatrix<f64>)>,
    last_step: Option<u64>,
}

impl ExternalStream {
    /// Opens the file for `n` states and a step of `dt` seconds, and reads
    /// the first row.
    ///
    /// # Errors
    /// A message naming the file and line.
    pub fn open(path: &Path, n: usize, dt: f64) -> Result<Self, String> {
        let file = File::open(path).map_err(|e| format!("{}: cannot open: {e}", path.display()))?;
        let mut s = Self {
            path: path.to_path_buf(),
            reader: BufReader::new(file),
            line_no: 0,
            n,
            dt,
            pending: None,
            last_step: None,
        };
        s.advance()?;
        Ok(s)
    }

    fn advance(&mut self) -> Result<(), String> {
        self.pending = None;
        let mut buf = Vec::new();
        loop {
            buf.clear();
            self.line_no += 1;
            let read = self
                .reader
                .by_ref()
                .take(MAX_LINE_BYTES + 1)
                .read_until(b'\n', &mut buf)
                .map_err(|e| format!("{}:{}: {e}", self.path.display(), self.line_no))?;
            if read == 0 {
                break;
            }
            if buf.len() as u64 > MAX_LINE_BYTES {
                return Err(format!(
                    "{}:{}: a line longer than {} KiB; a row of P entries is far shorter",
                    self.path.display(),
                    self.line_no,
                    MAX_LINE_BYTES >> 10
                ));
            }
            let Ok(line) = std::str::from_utf8(&buf) else {
                return Err(format!(
                    "{}:{}: not UTF-8 text",
                    self.path.display(),
                    self.line_no
                ));
            };
            let line = line.trim();
            if line.is_empty() || line.starts_with('#') {
                continue;
            }
            let cells: Vec<&str> = line.split(',').map(str::trim).collect();
            let Some(Ok(step)) = cells.first().map(|c| c.parse::<u64>()) else {
                if self.line_no == 1 {
                    continue; // header
                }
                return Err(format!(
                    "{}:{}: the first column must be a step number",
                    self.path.display(),
                    self.line_no
                ));
            };
            let time = cells.get(1).and_then(|c| c.parse::<f64>().ok());
            let expected = step as f64 * self.dt;
            match time {
                Some(t) if (t - expected).abs() <= 1e-6 * expected.abs().max(1.0) => {}
                _ => {
                    return Err(format!(
                        "{}:{}: the time column must be step x dt = {expected} s",
                        self.path.display(),
                        self.line_no
                    ));
                }
            }
            let values: Result<Vec<f64>, _> = cells[2.min(cells.len())..]
                .iter()
                .map(|c| c.parse::<f64>())
                .collect();
            let values = values
                .map_err(|_| format!("{}:{}: not a number", self.path.display(), self.line_no))?;
            let n = self.n;
            let p = if values.len() == n * n {
                DMatrix::from_row_slice(n, n, &values)
            } else if values.len() == n * (n + 1) / 2 {
                let mut p = DMatrix::zeros(n, n);
                let mut it = values.iter();
                for i in 0..n {
                    for j in i..n {
                        let v = *it.next().unwrap_or(&f64::NAN);
                        p[(i, j)] = v;
                        p[(j, i)] = v;
                    }
                }
                p
            } else {
                return Err(format!(
                    "{}:{}: {} P entries; expected {} (full, row by row) or {} (upper triangle)",
                    self.path.display(),
                    self.line_no,
                    values.len(),
                    n * n,
                    n * (n + 1) / 2
                ));
            };
            if !p.iter().all(|v| v.is_finite()) {
                return Err(format!(
                    "{}:{}: non-finite entry",
                    self.path.display(),
                    self.line_no
                ));
            }
            if self.last_step.is_some_and(|s| s >= step) {
                return Err(format!(
                    "{}:{}: steps must increase",
                    self.path.display(),
                    self.line_no
                ));
            }
            self.last_step = Some(step);
            self.pending = Some((step, p));
            return Ok(());
        }
        Ok(())
    }

    /// The external covariance at `step`, if the file has a row for it.
    ///
    /// # Errors
    /// A message naming the file and line of a malformed row.
    pub fn at(&mut self, step: u64) -> Result<Option<DMatrix<f64>>, String> {
        while let Some((s, _)) = &self.pending {
            if *s < step {
                self.advance()?;
            } else {
                break;
            }
        }
        match self.pending.take() {
            Some((s, p)) if s == step => {
                self.advance()?;
                Ok(Some(p))
            }
            other => {
                self.pending = other;
                Ok(None)
            }
        }
    }
}
