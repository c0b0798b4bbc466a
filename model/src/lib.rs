//! stria's reduced-order physics model of one electrodialysis cell pair with a
//! patterned (striped) ion-exchange membrane. Pure: no I/O, no printing.
//!
//! Entry point: [`evaluate`].
#![deny(missing_docs)]
#![allow(non_snake_case)] // unit suffixes such as `_Pa`, `_V` follow the JSON schema

pub mod constants;
pub mod design;
pub mod hydraulics;
pub mod interface;
pub mod numerics;
pub mod output;
pub mod properties;
pub mod transfer;

pub use constants::RomConstants;
pub use design::*;
pub use output::*;

/// Why an evaluation could not produce a result.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum ModelError {
    /// An input outside its physical range.
    #[error("{field} = {value} is outside its physical range: {allowed}")]
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

/// Evaluate one design: along-channel integration of the cell pair, energy, cost, warnings.
///
/// Placeholder signature of the contract; the model work replaces the body.
pub fn evaluate(
    design: &Design,
    constants: &RomConstants,
    options: &Options,
) -> Result<Evaluation, ModelError> {
    let _ = (design, constants, options);
    Err(ModelError::Numerical("model not yet implemented".into()))
}
