//! The reduced-order-model (ROM) constants. Every field is overridable from a study file
//! (`[rom]` section) or a calibration result (`stria fit` writes a TOML file of these keys).
//!
//! Defaults and provenance: see [`RomConstants::default`] and the provenance table.

use serde::{Deserialize, Serialize};

/// ROM constants of the electroconvective regime, the funnelling limit and water splitting.
/// Field names are the keys of the study file's `[rom]` section and of a constants file.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields, default)]
pub struct RomConstants {
    /// v_c: onset diffusion-layer voltage of electroconvection, thermal units (-).
    pub onset_voltage: f64,
    /// g: overlimiting conductance, (i / i_lim) per thermal unit^n (-).
    pub overlimiting_conductance: f64,
    /// n: overlimiting exponent (-).
    pub overlimiting_exponent: f64,
    /// a_lambda: vortex wavelength / diffusion-layer thickness at onset (-).
    pub wavelength_prefactor: f64,
    /// q: growth exponent of the vortex wavelength with v / v_c (-).
    pub wavelength_exponent: f64,
    /// sigma: width of the lock-in window in ln(pitch / lambda_v) (-).
    pub lockin_width: f64,
    /// alpha_0: active-area fraction of an unpatterned membrane under chaotic electroconvection (-).
    pub alpha_0: f64,
    /// alpha_max: active-area fraction of a perfectly locked-in pattern (-).
    pub alpha_max: f64,
    /// phi_star: open fraction at which pinning is most effective (-).
    pub best_open_fraction: f64,
    /// Funnelling: pitch / delta at which the heterogeneous limit is half way between
    /// homogeneous and open_fraction (-).
    pub funnel_scale: f64,
    /// Funnelling: steepness of the interpolation in pitch / delta (-).
    pub funnel_exponent: f64,
    /// v_ws: diffusion-layer voltage at which water splitting starts, thermal units (-).
    pub water_splitting_onset: f64,
    /// Water-splitting scale: thermal units over which the current-efficiency loss grows (-).
    pub water_splitting_scale: f64,
}

impl Default for RomConstants {
    /// Provisional values; the model work tunes them to the facts of the trade and documents each.
    fn default() -> Self {
        RomConstants {
            onset_voltage: 20.0,
            overlimiting_conductance: 0.05,
            overlimiting_exponent: 1.0,
            wavelength_prefactor: 1.0,
            wavelength_exponent: 2.0 / 3.0,
            lockin_width: 0.35,
            alpha_0: 0.15,
            alpha_max: 0.4,
            best_open_fraction: 0.5,
            funnel_scale: 1.0,
            funnel_exponent: 2.0,
            water_splitting_onset: 40.0,
            water_splitting_scale: 20.0,
        }
    }
}
