//! Study files, runs, reports, hand-off and calibration behind the `stria` binary.
//!
//! The binary (`src/main.rs`) only parses the command line and calls the functions here; the
//! library returns typed errors ([`error::CliError`]) and writes nothing to the terminal except
//! through the command functions' explicit output.
#![deny(missing_docs)]
#![allow(non_snake_case)] // unit suffixes such as `_V` follow the study-file keys

/// The caution that goes with every result: on the design sheet, in the report and on each
/// hand-off card (the one text; the README quotes it; docs/physics.md#safety).
pub const CAUTION: &str = "stria is a screening model: its results guide design and detailed \
simulation; they do not certify a plant. Product water must meet the local drinking-water rules; \
ED stacks run at hazardous voltages; electrode reactions make gases (hydrogen, chlorine, oxygen) \
that need venting; operation above the limiting current shifts pH and can scale membranes. Defer \
to local codes and licensed practice.";

pub mod campaign;
pub mod check;
pub mod error;
pub mod eval;
pub mod figures;
pub mod fit;
pub mod fsio;
pub mod handoff;
pub mod plant_sheet;
pub mod report;
pub mod run;
pub mod rundir;
pub mod study;
pub mod uncertainty;
