//! Study files, runs, reports, hand-off and calibration behind the `stria` binary.
