//! stria's reduced-order physics model of one electrodialysis cell pair with a
//! patterned (striped) ion-exchange membrane. Pure: no I/O, no printing.
//!
//! Entry points: [`evaluate`] (one design along the channel), [`iv_curve`] (current-voltage
//! characteristic of the cell pair at the inlet), [`interface::solve`] (one membrane
//! interface, what a CFD case simulates).
//!
//! Layout, one idea per module: [`properties`] (electrolyte and water), [`hydraulics`],
//! [`transfer`] (Sherwood, delta, Peers), [`interface`] (the ROM current-voltage law of one
//! layer), [`cell`] (the voltage balance of a cell pair at one point), [`channel`] (along the
//! channel), [`energy`], [`validity`] (input errors and warnings), [`constants`] (CODATA and
//! ROM constants with provenance), [`numerics`] (root finders, quadrature).
#![deny(missing_docs)]
#![allow(non_snake_case)] // unit suffixes such as `_Pa`, `_V` follow the JSON schema

pub mod cell;
pub mod channel;
pub mod constants;
pub mod design;
pub mod energy;
mod evaluate;
pub mod hydraulics;
pub mod interface;
pub mod membrane;
pub mod numerics;
pub mod output;
pub mod plant;
pub mod properties;
pub mod scaling;
pub mod stack;
pub mod transfer;
pub mod validity;

pub use constants::RomConstants;
pub use design::*;
pub use evaluate::{evaluate, iv_curve, IvPoint};
pub use output::*;

/// Revision of the model's numbers: raised whenever a change moves the result of any
/// evaluation (a law, a constant, the integrator or its tolerances, even at round-off).
/// Study fingerprints include it, so a run is never resumed with a different model.
pub const MODEL_REVISION: u32 = 8;

/// Why an evaluation could not produce a result.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum ModelError {
    /// An input outside its physical range.
    #[error("{field} = {} is outside its physical range: {allowed}", shown(*value))]
    Input {
        /// Field name.
        field: &'static str,
        /// Value given.
        value: f64,
        /// Allowed range in words.
        allowed: &'static str,
    },
    /// A numerical failure (non-finite value, solver did not converge).
    #[error("numerical failure: {0}")]
    Numerical(String),
    /// Product-target mode: the target is not reached within the maximum length.
    #[error("product target {target_mol_m3} mol/m^3 not reached within {max_length_m} m (outlet there: {outlet_mol_m3} mol/m^3)")]
    TargetUnreachable {
        /// Target, mol/m^3.
        target_mol_m3: f64,
        /// Maximum length searched, m.
        max_length_m: f64,
        /// Outlet concentration at the maximum length, mol/m^3.
        outlet_mol_m3: f64,
    },
}

/// A number for a message: plain in the usual range, in exponent form when very small or very
/// large (a subnormal printed plainly runs to hundreds of digits).
fn shown(v: f64) -> String {
    let a = v.abs();
    if v == 0.0 || !v.is_finite() || (1e-4..1e9).contains(&a) {
        format!("{v}")
    } else {
        format!("{v:e}")
    }
}
