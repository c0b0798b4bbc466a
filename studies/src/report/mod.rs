//! `stria report`: figures and a self-contained HTML page for a run.

pub mod svg;
pub mod rundir;
