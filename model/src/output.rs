//! What one evaluation returns. Field names follow the `stria eval --json` schema
//! (docs/formats.md#design-sheet-json); serialising an [`Evaluation`] gives that JSON.

use serde::{Deserialize, Serialize};

/// Inputs echoed in SI units.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct InputsEcho {
    /// "NaCl", "KCl" or "custom".
    pub salt: String,
    /// K.
    pub temperature_K: f64,
    /// mol/m^3.
    pub feed_concentration_mol_m3: f64,
    /// m.
    pub gap_m: f64,
    /// m (the channel length used; in target mode the length found).
    pub length_m: f64,
    /// m.
    pub width_m: f64,
    /// m/s.
    pub velocity_m_s: f64,
    /// "none" or the spacer correlation's name.
    pub spacer: String,
    /// m.
    pub pitch_m: f64,
    /// -.
    pub open_fraction: f64,
    /// V (in current-drive mode, the voltage found).
    pub cell_pair_voltage_V: f64,
    /// -.
    pub cem_transport_number: f64,
    /// -.
    pub aem_transport_number: f64,
}

/// Properties at the feed concentration and temperature.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct PropertiesOut {
    /// m^2/s.
    pub salt_diffusivity_m2_s: f64,
    /// -.
    pub cation_transport_number: f64,
    /// kg/m^3.
    pub density_kg_m3: f64,
    /// Pa s.
    pub dynamic_viscosity_Pa_s: f64,
    /// m^2/s.
    pub kinematic_viscosity_m2_s: f64,
    /// S/m.
    pub conductivity_S_m: f64,
    /// m.
    pub debye_length_m: f64,
    /// V.
    pub thermal_voltage_V: f64,
}

/// Diluate channel hydraulics.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct HydraulicsOut {
    /// m.
    pub hydraulic_diameter_m: f64,
    /// -.
    pub reynolds: f64,
    /// -.
    pub schmidt: f64,
    /// Diluate pressure drop over the channel, Pa.
    pub pressure_drop_Pa: f64,
}

/// Mass transfer.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct TransferOut {
    /// Length-averaged Sherwood number (both walls active).
    pub sherwood_mean: f64,
    /// hydraulic_diameter / sherwood_mean, m.
    pub boundary_layer_thickness_mean_m: f64,
    /// Peers limiting current density at feed concentration and mean thickness, A/m^2.
    pub limiting_current_density_feed_A_m2: f64,
    /// "CEM" or "AEM".
    pub limiting_membrane: String,
    /// Limit of the limiting membrane with the pattern's funnelling (i_lim Phi) at the feed
    /// concentration and mean thickness, A/m^2.
    pub heterogeneous_limiting_current_density_feed_A_m2: f64,
    /// Funnelling factor Phi of the patterned membrane at the channel-mean diffusion-layer
    /// thickness (1 for an unpatterned cell pair), -.
    pub funnelling_factor: f64,
}

/// Performance.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct PerformanceOut {
    /// mol/m^3.
    pub outlet_concentration_mol_m3: f64,
    /// mol/m^3.
    pub concentrate_outlet_concentration_mol_m3: f64,
    /// Diluate outlet (product) flow / (diluate + concentrate inlet flow): water moved into
    /// the concentrate by osmosis and electro-osmosis lowers it.
    pub water_recovery: f64,
    /// 1 - c_out / c_in.
    pub salt_removal_fraction: f64,
    /// A/m^2 of cell-pair area.
    pub mean_current_density_A_m2: f64,
    /// A, one cell pair of the given width.
    pub cell_current_A: f64,
    /// Diluate inlet flow, m^3/s, one cell pair.
    pub diluate_flow_m3_s: f64,
    /// Diluate outlet (product) flow, m^3/s, one cell pair.
    pub diluate_outlet_flow_m3_s: f64,
    /// Concentrate outlet flow, m^3/s, one cell pair.
    pub concentrate_outlet_flow_m3_s: f64,
    /// Salt removed / (current / F).
    pub current_efficiency: f64,
    /// kWh per m^3 of product.
    pub electrical_energy_kWh_m3: f64,
    /// kWh per m^3 of product (diluate and concentrate pumps).
    pub pumping_energy_kWh_m3: f64,
    /// electrical + pumping, kWh/m^3.
    pub specific_energy_kWh_m3: f64,
    /// Ideal-solution minimum work for the same streams, kWh/m^3.
    pub thermodynamic_minimum_kWh_m3: f64,
    /// Channel-mean active-area fraction of the patterned membrane, -.
    pub active_area_fraction: f64,
    /// Channel-mean natural vortex wavelength, m; None without electroconvection.
    pub vortex_wavelength_m: Option<f64>,
    /// pitch / vortex_wavelength_m; None without electroconvection.
    pub pitch_over_wavelength: Option<f64>,
    /// Largest CEM diffusion-layer voltage along the channel, thermal units.
    pub max_cem_layer_voltage_thermal: f64,
    /// Largest AEM diffusion-layer voltage along the channel, thermal units.
    pub max_aem_layer_voltage_thermal: f64,
}

/// One membrane's state at the two ends of the diluate channel (the membrane material itself:
/// a patterned membrane conducts through its open share, which divides this resistance by the
/// open fraction).
#[derive(Debug, Clone, PartialEq, Default, Serialize, Deserialize)]
pub struct MembraneOut {
    /// Effective fixed charge (Donnan model), mol per m^3 of sorbed water; None for an ideal
    /// membrane (transport number 1).
    pub fixed_charge_mol_m3: Option<f64>,
    /// Effective counter-ion transport number at the diluate inlet (mean of the two faces), -.
    pub transport_number_inlet: f64,
    /// The same at the diluate outlet, -.
    pub transport_number_outlet: f64,
    /// Area resistance at the diluate inlet, Ohm m^2.
    pub area_resistance_inlet_Ohm_m2: f64,
    /// Area resistance at the diluate outlet, Ohm m^2.
    pub area_resistance_outlet_Ohm_m2: f64,
}

/// Both membranes.
#[derive(Debug, Clone, PartialEq, Default, Serialize, Deserialize)]
pub struct MembranesOut {
    /// Cation-exchange membrane.
    pub cem: MembraneOut,
    /// Anion-exchange membrane.
    pub aem: MembraneOut,
}

/// Economics (beyond the JSON schema's required fields).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct EconomicsOut {
    /// Salt removal rate per membrane area, mol/(m^2 s) (per m^2 of cell pair: CEM + AEM count once each).
    pub salt_removal_rate_mol_m2_s: f64,
    /// Membrane area (CEM + AEM) per product flow, m^2 per (m^3/day).
    pub membrane_area_m2_per_m3_day: f64,
    /// Membrane cost per production capacity, currency per (m^3/day).
    pub membrane_cost_per_m3_day: f64,
    /// Levelised cost of water, currency per m^3 of product.
    pub levelised_cost_per_m3: f64,
    /// Membrane area of the whole plant, m^2.
    pub plant_membrane_area_m2: f64,
}

/// One validity warning.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Warning {
    /// Quantity concerned, e.g. "reynolds".
    pub quantity: String,
    /// Its value (SI).
    pub value: f64,
    /// The bound it crossed.
    pub bound: f64,
    /// A sentence for the engineer.
    pub message: String,
}

/// Profiles along the channel (on request): a point at every integration step end and at
/// every twentieth of the integrated length (from the integrator's continuous extension).
#[derive(Debug, Clone, PartialEq, Default, Serialize, Deserialize)]
pub struct Profiles {
    /// Distance from the inlet, m.
    pub x_m: Vec<f64>,
    /// Diluate bulk concentration, mol/m^3.
    pub diluate_mol_m3: Vec<f64>,
    /// Concentrate bulk concentration, mol/m^3.
    pub concentrate_mol_m3: Vec<f64>,
    /// Local current density, A/m^2.
    pub current_density_A_m2: Vec<f64>,
    /// Local limiting current density of the limiting membrane (funnelling included), A/m^2.
    pub limiting_current_density_A_m2: Vec<f64>,
    /// Local active-area fraction, -.
    pub active_area_fraction: Vec<f64>,
    /// Local CEM diffusion-layer voltage in thermal units, -.
    pub cem_layer_voltage_thermal: Vec<f64>,
    /// Local AEM diffusion-layer voltage in thermal units, -.
    pub aem_layer_voltage_thermal: Vec<f64>,
}

/// How the along-channel integration went.
#[derive(Debug, Clone, PartialEq, Default, Serialize, Deserialize)]
pub struct NumericsOut {
    /// Accepted integration steps (of the final integration).
    pub integration_steps: u32,
    /// Point solves (right-hand-side evaluations) over all integrations of this evaluation.
    pub point_solves: u64,
    /// Full channel integrations (more than one for current drive or counter-current flow).
    pub channel_integrations: u32,
}

/// The full result of one evaluation.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Evaluation {
    /// Inputs echoed.
    pub inputs: InputsEcho,
    /// Properties.
    pub properties: PropertiesOut,
    /// Hydraulics.
    pub hydraulics: HydraulicsOut,
    /// Transfer.
    pub transfer: TransferOut,
    /// Performance.
    pub performance: PerformanceOut,
    /// Economics.
    pub economics: EconomicsOut,
    /// The membranes at the diluate inlet and outlet.
    #[serde(default)]
    pub membranes: MembranesOut,
    /// Validity warnings.
    pub warnings: Vec<Warning>,
    /// Integration statistics.
    #[serde(default)]
    pub numerics: NumericsOut,
    /// Profiles along x, when requested.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub profiles: Option<Profiles>,
}
