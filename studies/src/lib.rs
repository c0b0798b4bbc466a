//! Study files, runs, reports, hand-off and calibration behind the `stria` binary.
//!
//! The binary (`src/main.rs`) only parses the command line and calls the functions here; the
//! library returns typed errors ([`error::CliError`]) and writes nothing to the terminal except
//! through the command functions' explicit output.
#![deny(missing_docs)]
#![allow(non_snake_case)] // unit suffixes such as `_V` follow the study-file keys

pub mod campaign;
pub mod check;
pub mod error;
pub mod eval;
pub mod fit;
pub mod fsio;
pub mod handoff;
pub mod report;
pub mod run;
pub mod study;
