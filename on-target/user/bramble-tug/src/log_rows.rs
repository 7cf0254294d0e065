//! Reads the tug's recorded log (docs/log-format.md) into the row table the
//! target run replays: used by the build script, which writes the table
//! into the probe, and by the host test, which replays the same rows.

/// Predicts the target replays: the first 90 s of the shift.
pub const SHIFT_INPUTS: usize = 9_000;

/// Row kinds: an input (one predict), then the three channels.
pub const INPUT: u32 = 0;
/// A wheel-speed reading.
pub const WHEEL: u32 = 1;
/// A radio position fix.
pub const RADIO: u32 = 2;
/// A heading fix.
pub const HEADING: u32 = 3;

/// The log's rows up to `inputs` predicts, as `[kind, a, b, c]` with f32
/// bit patterns: an input row carries dt (its time minus the previous
/// input's, in f64, then rounded to f32), the gyro rate and the
/// acceleration; a channel row carries its values. The first input row
/// only sets the start; truth rows are left out.
///
/// # Errors
/// A message naming the line for a row this reader cannot use.
pub fn read(text: &str, inputs: usize) -> Result<Vec<[u32; 4]>, String> {
    let mut rows = Vec::new();
    let mut last: Option<f64> = None;
    let mut predicts = 0;
    for (i, line) in text.lines().enumerate() {
        if line.starts_with('#') || line.starts_with("time_s") {
            continue;
        }
        let cells: Vec<&str> = line.split(',').collect();
        let num = |k: usize| -> Result<f64, String> {
            cells
                .get(k)
                .and_then(|c| c.trim().parse::<f64>().ok())
                .ok_or_else(|| format!("line {}: cell {} is not a number", i + 1, k + 1))
        };
        let t = num(0)?;
        let (kind, values) = match cells.get(1).copied() {
            Some("input") => {
                let Some(prev) = last.replace(t) else {
                    continue;
                };
                if predicts == inputs {
                    break;
                }
                predicts += 1;
                (INPUT, [(t - prev) as f32, num(2)? as f32, num(3)? as f32])
            }
            Some("wheel") => (WHEEL, [num(2)? as f32, 0.0, 0.0]),
            Some("radio") => (RADIO, [num(2)? as f32, num(3)? as f32, 0.0]),
            Some("heading") => (HEADING, [num(2)? as f32, 0.0, 0.0]),
            Some("truth") => continue,
            other => return Err(format!("line {}: unknown stream {other:?}", i + 1)),
        };
        if last.is_none() {
            return Err(format!(
                "line {}: a measurement before the first input",
                i + 1
            ));
        }
        rows.push([
            kind,
            values[0].to_bits(),
            values[1].to_bits(),
            values[2].to_bits(),
        ]);
    }
    Ok(rows)
}
