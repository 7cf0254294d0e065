//! The record of one noise figure's conversion into the filter's number,
//! step by step, as the reports show it.

use serde::Serialize;

/// One step of a conversion, for the report.
#[derive(Debug, Clone, Serialize)]
pub struct Step {
    /// What the step computes.
    pub what: String,
    /// The formula.
    pub formula: String,
    /// The value obtained.
    pub value: f64,
    /// Its unit.
    pub unit: String,
}

/// The chain of conversions of one noise figure.
#[derive(Debug, Clone, Serialize)]
pub struct ConversionRecord {
    /// The spec field the figure came from.
    pub field: String,
    /// The figure as written.
    pub given: String,
    /// The steps, in order.
    pub steps: Vec<Step>,
    /// The number the filter uses.
    pub result: f64,
    /// What the result is.
    pub result_is: String,
}

impl ConversionRecord {
    /// The steps as aligned columns (what, formula, value and unit, every
    /// column as wide as its longest entry), then the result, each line
    /// indented by `indent` spaces; one number format throughout
    /// ([`super::noise::number`]).
    #[must_use]
    pub fn chain_text(&self, indent: usize) -> String {
        use std::fmt::Write;
        let pad = " ".repeat(indent);
        let what_w = self.steps.iter().map(|s| s.what.len()).max().unwrap_or(0);
        let formula_w = self
            .steps
            .iter()
            .map(|s| s.formula.len())
            .max()
            .unwrap_or(0);
        let mut o = String::new();
        for s in &self.steps {
            let line = format!(
                "{pad}{:<what_w$}  {:<formula_w$}  = {} {}",
                s.what,
                s.formula,
                super::noise::number(s.value),
                s.unit
            );
            let _ = writeln!(o, "{}", line.trim_end());
        }
        let _ = writeln!(
            o,
            "{pad}=> {} = {}",
            self.result_is,
            super::noise::number(self.result)
        );
        o
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_chain_keeps_its_columns() {
        // Our own layout: every '=' of the steps in one column, whatever the
        // lengths of the texts before it.
        let step = |what: &str, formula: &str, value: f64| Step {
            what: what.into(),
            formula: formula.into(),
            value,
            unit: "m^2".into(),
        };
        let r = ConversionRecord {
            field: "f".into(),
            given: "std = 0.3 m".into(),
            steps: vec![
                step("a", "x", 0.3),
                step(
                    "a much longer description of a step",
                    "W = sigma^2 * Ts",
                    8.726_646e-5,
                ),
            ],
            result: 0.09,
            result_is: "variance".into(),
        };
        let text = r.chain_text(2);
        let cols: Vec<usize> = text
            .lines()
            .take(2)
            .map(|l| l.find("  = ").unwrap())
            .collect();
        assert_eq!(cols[0], cols[1], "{text}");
        assert!(text.contains("= 3.000e-1 m^2"), "{text}");
        assert!(text.contains("= 8.727e-5 m^2"), "{text}");
        assert!(text.ends_with("  => variance = 9.000e-2\n"), "{text}");
    }
}
