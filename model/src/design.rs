//! The inputs of one evaluation: a complete cell-pair design in SI units.
//!
//! These types are the contract between `model` and `studies`. Fields may be added;
//! none is renamed without updating every crate.

use serde::{Deserialize, Serialize};

pub use crate::membrane::MembraneMaterial;

/// The dissolved 1:1 salt.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub enum Salt {
    /// Sodium chloride (CRC Handbook ionic data).
    NaCl,
    /// Potassium chloride (CRC Handbook ionic data).
    KCl,
    /// A custom 1:1 salt given by its ionic data at 25 C, infinite dilution.
    Custom {
        /// Cation diffusivity at 25 C, m^2/s.
        cation_diffusivity_m2_s: f64,
        /// Anion diffusivity at 25 C, m^2/s.
        anion_diffusivity_m2_s: f64,
        /// Cation limiting molar conductivity at 25 C, S m^2/mol.
        cation_limiting_conductivity_s_m2_mol: f64,
        /// Anion limiting molar conductivity at 25 C, S m^2/mol.
        anion_limiting_conductivity_s_m2_mol: f64,
    },
}

impl Salt {
    /// Name used in reports and JSON: "NaCl", "KCl" or "custom".
    pub fn name(&self) -> &'static str {
        match self {
            Salt::NaCl => "NaCl",
            Salt::KCl => "KCl",
            Salt::Custom { .. } => "custom",
        }
    }
}

/// The feed water.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct Water {
    /// Dissolved salt.
    pub salt: Salt,
    /// Temperature, K.
    pub temperature_k: f64,
    /// Feed concentration of the diluate, mol/m^3 (= mM).
    pub feed_concentration_mol_m3: f64,
    /// Feed concentration of the concentrate stream, mol/m^3. Often equal to the feed.
    pub concentrate_feed_concentration_mol_m3: f64,
}

/// How the channel is filled.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub enum Spacer {
    /// Open slit, no spacer: laminar Leveque / fully developed correlations.
    None,
    /// Spacer-filled channel with the Schock and Miquel (1987) Sherwood and friction correlations.
    SchockMiquel {
        /// Fraction of the channel volume open to flow (porosity), 0..1.
        porosity: f64,
        /// Factor >= 1 by which the spacer raises the solution resistance (shadow effect).
        shadow_factor: f64,
    },
    /// Open-slit correlations multiplied by user-given factors.
    Multiplier {
        /// Multiplier on the Sherwood number (>= 1 for a mixing spacer).
        sherwood: f64,
        /// Multiplier on the pressure drop.
        friction: f64,
        /// Factor >= 1 by which the spacer raises the solution resistance (shadow effect).
        shadow_factor: f64,
    },
}

impl Spacer {
    /// Name used in reports and JSON: "none", "schock_miquel" or "multiplier".
    pub fn name(&self) -> &'static str {
        match self {
            Spacer::None => "none",
            Spacer::SchockMiquel { .. } => "schock_miquel",
            Spacer::Multiplier { .. } => "multiplier",
        }
    }
}

/// Geometry of the diluate and concentrate channels of one cell pair.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct Channel {
    /// Diluate channel gap (membrane to membrane), m.
    pub gap_m: f64,
    /// Concentrate channel gap, m.
    pub concentrate_gap_m: f64,
    /// Flow-path length, m. In product-target mode this is the upper bound searched.
    pub length_m: f64,
    /// Channel width across the flow, m.
    pub width_m: f64,
    /// Spacer of both channels.
    pub spacer: Spacer,
}

/// Which membrane(s) carry the inert stripe pattern on their diluate side.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
pub enum PatternSide {
    /// Cation-exchange membrane only (the usual choice for NaCl: it limits first).
    Cem,
    /// Anion-exchange membrane only.
    Aem,
    /// Both membranes.
    Both,
}

/// Ion-exchange membranes and the surface pattern.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct Membranes {
    /// Counter-ion transport number in the CEM, 0.5..1.
    pub cem_transport_number: f64,
    /// Counter-ion transport number in the AEM, 0.5..1.
    pub aem_transport_number: f64,
    /// CEM area resistance of the unpatterned membrane, Ohm m^2.
    pub cem_area_resistance_ohm_m2: f64,
    /// AEM area resistance, Ohm m^2.
    pub aem_area_resistance_ohm_m2: f64,
    /// Stripe period along the flow, m.
    pub pitch_m: f64,
    /// Conducting share of each period, 0 < open_fraction <= 1 (1 = unpatterned).
    pub open_fraction: f64,
    /// Which membrane carries the pattern.
    pub pattern_side: PatternSide,
    /// The effects of real membranes the model includes, and their material data
    /// ([`crate::membrane`]). With every effect off the membranes are ideal: constant
    /// transport numbers and area resistances, no salt or water crossing them.
    #[serde(default)]
    pub physics: MembranePhysics,
}

/// Which effects of real membranes an evaluation includes ([`crate::membrane`]), each
/// switchable, and the material data of the two membranes. The default has every effect on,
/// with a generic homogeneous grade; [`MembranePhysics::ideal`] switches them all off and
/// gives the ideal-membrane results of model revision 7 bit for bit.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct MembranePhysics {
    /// Donnan (Teorell-Meyer-Sievers) transport numbers and membrane potential: the transport
    /// numbers given are those at the diluate feed and fall as the concentrate strengthens.
    pub donnan: bool,
    /// Area resistances that rise in dilute solution (the datasheet value holds at 0.5 M).
    pub concentration_dependent_resistance: bool,
    /// Salt diffusion from the concentrate back into the diluate.
    pub salt_back_diffusion: bool,
    /// Water transport (osmosis and electro-osmosis) from the diluate into the concentrate.
    pub water_transport: bool,
    /// CEM material data.
    pub cem: MembraneMaterial,
    /// AEM material data.
    pub aem: MembraneMaterial,
}

impl MembranePhysics {
    /// Every effect on, generic homogeneous grades (the default).
    pub const fn generic() -> Self {
        MembranePhysics {
            donnan: true,
            concentration_dependent_resistance: true,
            salt_back_diffusion: true,
            water_transport: true,
            cem: MembraneMaterial::generic(),
            aem: MembraneMaterial::generic(),
        }
    }

    /// Every effect off: ideal membranes (the model of revision 7).
    pub const fn ideal() -> Self {
        MembranePhysics {
            donnan: false,
            concentration_dependent_resistance: false,
            salt_back_diffusion: false,
            water_transport: false,
            ..Self::generic()
        }
    }
}

impl Default for MembranePhysics {
    fn default() -> Self {
        Self::generic()
    }
}

/// How the stack is driven.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub enum Drive {
    /// Uniform cell-pair voltage along the channel, V (potentiostatic).
    Voltage {
        /// Cell-pair voltage, V.
        cell_pair_voltage_v: f64,
    },
    /// Given total cell-pair current, A (galvanostatic; voltage found by an outer solve).
    Current {
        /// Total current through one cell pair, A.
        cell_current_a: f64,
    },
}

/// Relative flow direction of diluate and concentrate.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
pub enum FlowArrangement {
    /// Same direction (default).
    CoCurrent,
    /// Opposite directions.
    CounterCurrent,
}

/// What fixes the channel length.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub enum LengthMode {
    /// The channel length is `Channel::length_m`; the outlet follows.
    Fixed,
    /// Find the length at which the diluate reaches this concentration, mol/m^3
    /// (searched up to `Channel::length_m`).
    ProductTarget {
        /// Product (diluate outlet) concentration wanted, mol/m^3.
        product_concentration_mol_m3: f64,
    },
}

/// Operating point.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct Operation {
    /// Mean diluate velocity, m/s.
    pub velocity_m_s: f64,
    /// Mean concentrate velocity, m/s.
    pub concentrate_velocity_m_s: f64,
    /// Voltage or current drive.
    pub drive: Drive,
    /// Flow arrangement.
    pub flow: FlowArrangement,
    /// Length mode.
    pub length_mode: LengthMode,
}

/// Economic inputs.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct Economics {
    /// Electricity price, currency units per kWh.
    pub electricity_price_per_kwh: f64,
    /// Pump (wire-to-water) efficiency, 0..1.
    pub pump_efficiency: f64,
    /// Price of plain ion-exchange membrane, currency per m^2.
    pub membrane_price_per_m2: f64,
    /// Extra price of a patterned membrane, currency per m^2 of patterned membrane.
    pub pattern_surcharge_per_m2: f64,
    /// Membrane life, years.
    pub membrane_life_years: f64,
    /// Discount rate per year (0.06 = 6 %).
    pub discount_rate: f64,
    /// Hours of operation per year.
    pub operating_hours_per_year: f64,
    /// Plant product capacity, m^3/day (sets the membrane area of the whole plant).
    pub plant_capacity_m3_day: f64,
}

/// A complete design: everything one evaluation needs besides the ROM constants.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct Design {
    /// Feed water.
    pub water: Water,
    /// Channels.
    pub channel: Channel,
    /// Membranes and pattern.
    pub membranes: Membranes,
    /// Operating point.
    pub operation: Operation,
    /// Economics.
    pub economics: Economics,
}

/// Numerical options of one evaluation.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct Options {
    /// Relative local error tolerance of the along-channel integration.
    pub rel_tol: f64,
    /// Record profiles along the channel.
    pub profiles: bool,
}

impl Default for Options {
    fn default() -> Self {
        Options {
            rel_tol: 1e-7,
            profiles: false,
        }
    }
}

impl Design {
    /// The demo design of stria: Marlow Flats, Well 3 brackish groundwater (invented, for the
    /// demo only). NaCl at 16 C, 41 mol/m^3 (2.4 g/L) on both streams; open slits of 0.5 mm,
    /// 0.45 m long, 0.20 m wide; CEM tm 0.97 and AEM tm 0.96, 3 Ohm cm^2 each; pattern on the
    /// CEM, pitch 120 um, open fraction 0.5; 4 cm/s both streams; 2.0 V per cell pair,
    /// co-current, fixed length; economics of the demo (invented).
    pub fn demo() -> Design {
        Design {
            water: Water {
                salt: Salt::NaCl,
                temperature_k: 289.15,
                feed_concentration_mol_m3: 41.0,
                concentrate_feed_concentration_mol_m3: 41.0,
            },
            channel: Channel {
                gap_m: 0.5e-3,
                concentrate_gap_m: 0.5e-3,
                length_m: 0.45,
                width_m: 0.20,
                spacer: Spacer::None,
            },
            membranes: Membranes {
                cem_transport_number: 0.97,
                aem_transport_number: 0.96,
                cem_area_resistance_ohm_m2: 3e-4,
                aem_area_resistance_ohm_m2: 3e-4,
                pitch_m: 120e-6,
                open_fraction: 0.5,
                pattern_side: PatternSide::Cem,
                physics: MembranePhysics::generic(),
            },
            operation: Operation {
                velocity_m_s: 0.04,
                concentrate_velocity_m_s: 0.04,
                drive: Drive::Voltage {
                    cell_pair_voltage_v: 2.0,
                },
                flow: FlowArrangement::CoCurrent,
                length_mode: LengthMode::Fixed,
            },
            economics: Economics {
                electricity_price_per_kwh: 0.14,
                pump_efficiency: 0.65,
                membrane_price_per_m2: 90.0,
                pattern_surcharge_per_m2: 45.0,
                membrane_life_years: 7.0,
                discount_rate: 0.06,
                operating_hours_per_year: 8000.0,
                plant_capacity_m3_day: 1500.0,
            },
        }
    }
}
