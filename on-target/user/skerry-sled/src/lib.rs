//! The Skerry sled's 15-state filter as a Cortex-M4F probe built with
//! cairn-probe: the shared simulated tow.
#![no_std]
#![deny(missing_docs)]

pub mod run;
