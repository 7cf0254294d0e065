//! The model spec: a TOML file of our own design, parsed with spans and
//! validated into one [`Plan`] before any work starts.

mod error;
mod figures;
pub mod raw;
mod validate;

use std::path::Path;

pub use crate::engine::plan::*;
pub use error::{Locator, SpecError};
pub use figures::{ConversionRecord, convert_standalone};
pub use validate::MAX_MISSION_S;

/// Reads and validates a spec file.
///
/// # Errors
/// A [`SpecError`] naming file, line and field for anything malformed or
/// inconsistent, or for a file that cannot be read.
pub fn load(path: &Path) -> Result<Plan, SpecError> {
    let file = path.display().to_string();
    let whole = |message: String| SpecError {
        file: file.clone(),
        line: 0,
        column: 0,
        field: String::new(),
        message,
    };
    let text = read_capped(path, MAX_SPEC_BYTES, "spec file")
        .map_err(|e| whole(format!("cannot read the spec file: {e}")))?;
    parse(&file, &text, path.parent())
}

/// Largest spec file read, bytes (16 MiB: a spec is a page of TOML; the
/// cap stops a device that never ends, such as `/dev/zero`).
pub const MAX_SPEC_BYTES: u64 = 16 << 20;

/// Largest recorded CSV log read whole (a profile), bytes (256 MiB: about
/// ten million rows).
pub const MAX_LOG_BYTES: u64 = 256 << 20;

/// Reads a UTF-8 text file of at most `cap` bytes.
///
/// # Errors
/// The I/O error, or one saying the file is larger than the cap or not
/// UTF-8 text.
pub fn read_capped(path: &Path, cap: u64, what: &str) -> std::io::Result<String> {
    use std::io::Read;
    let mut bytes = Vec::new();
    std::fs::File::open(path)?
        .take(cap + 1)
        .read_to_end(&mut bytes)?;
    if bytes.len() as u64 > cap {
        return Err(std::io::Error::other(format!(
            "larger than {} MiB, the limit for a {what}",
            cap >> 20
        )));
    }
    String::from_utf8(bytes)
        .map_err(|_| std::io::Error::new(std::io::ErrorKind::InvalidData, "not UTF-8 text"))
}

/// Parses and validates spec text; `base` resolves relative file names.
///
/// # Errors
/// A [`SpecError`] naming file, line and field.
pub fn parse(file: &str, text: &str, base: Option<&Path>) -> Result<Plan, SpecError> {
    let loc = Locator::new(file, text);
    let raw: raw::RawSpec = toml::from_str(text).map_err(|e| loc.from_toml(&e))?;
    validate::plan(&loc, raw, base)
}

#[cfg(test)]
mod tests {
    use super::*;
    use nalgebra::DMatrix;

    fn channel(rate_hz: f64, dropouts: Vec<(f64, f64)>) -> ChannelPlan {
        ChannelPlan {
            name: "c".into(),
            m: 1,
            kind: ChannelKind::Heading,
            r: DMatrix::identity(1, 1),
            rate_hz,
            dropouts,
            gate: None,
            line: 0,
        }
    }

    #[test]
    fn a_channel_falls_due_at_its_rate() {
        // 4 Hz at a 200 Hz step: every 50th step, 4 per second (arithmetic).
        let c = channel(4.0, vec![]);
        let due: Vec<u64> = (1..=200).filter(|&k| c.due(k, 200.0)).collect();
        assert_eq!(due, vec![50, 100, 150, 200]);
        // A rate that does not divide the step rate: 3 per second at 200 Hz.
        let c = channel(3.0, vec![]);
        assert_eq!((1..=200).filter(|&k| c.due(k, 200.0)).count(), 3);
        // A dropout window [0.3 s, 0.6 s) removes the measurement at 0.5 s.
        let c = channel(4.0, vec![(0.3, 0.6)]);
        let due: Vec<u64> = (1..=200).filter(|&k| c.due(k, 200.0)).collect();
        assert_eq!(due, vec![50, 150, 200]);
    }

    #[test]
    fn profiles_repeat_and_hold() {
        let p = Profile::Segments(vec![
            Segment {
                seconds: 2.0,
                speed: 1.0,
                yaw_rate: 0.0,
            },
            Segment {
                seconds: 1.0,
                speed: 0.5,
                yaw_rate: 0.1,
            },
        ]);
        assert_eq!(p.at(0.5), (1.0, 0.0));
        assert_eq!(p.at(2.5), (0.5, 0.1));
        assert_eq!(p.at(3.5), (1.0, 0.0));
        let r = Profile::Recorded(vec![[0.0, 1.0, 0.0], [1.0, 2.0, 0.2], [2.0, 3.0, 0.0]]);
        assert_eq!(r.at(0.5), (1.0, 0.0));
        assert_eq!(r.at(1.5), (2.0, 0.2));
        assert_eq!(r.at(2.5), (1.0, 0.0));
    }
}
