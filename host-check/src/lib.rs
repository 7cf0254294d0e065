//! cairn host-check: runs cairn-core's own code in f32 and f64 against an
//! extended-precision reference and judges whether the filter is safe to flash.

pub mod numeric;
