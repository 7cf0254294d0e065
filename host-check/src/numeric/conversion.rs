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
