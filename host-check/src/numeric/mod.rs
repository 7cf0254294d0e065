//! Numerical foundations of the verifier: double-double arithmetic, the
//! extended-precision reference filter, discretisation, Riccati steady state
//! and noise-figure conversions.
