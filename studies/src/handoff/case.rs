#![allow(non_snake_case)] // unit suffixes such as `_V`, `_A_m2` follow the case.json schema
//! The CFD case card (`case.json`): geometry, properties, boundary conditions, dimensionless
//! groups, mesh estimate and the ROM's predictions, built from plain numbers so that every
//! relation here can be checked on its own.

use model::constants::VACUUM_PERMITTIVITY;
use model::interface::MembraneKind;
use model::properties::{debye_length, thermal_voltage};
use serde::Serialize;

/// Version of the `case.json` schema; raised whenever a field changes meaning or is removed.
pub const SCHEMA_VERSION: u32 = 2;

/// Share of the bulk concentration above which a piece of membrane counts as active
/// (reached by salty fluid) in the active-area fraction's definition.
pub const ACTIVE_THRESHOLD: f64 = 0.1;
/// Probe height above the membrane, as a share of the diffusion-layer thickness, at which the
/// active-area criterion is evaluated (outside the equilibrium double layer).
pub const PROBE_HEIGHT_OF_DELTA: f64 = 0.05;
/// Wall-normal cells per Debye length at the membrane (common practice).
pub const CELLS_PER_DEBYE: f64 = 4.0;
/// Geometric growth ratio of the wall-normal spacing away from the membrane (common practice).
pub const GROWTH_RATIO: f64 = 1.05;

/// Everything the card is computed from (SI units).
#[derive(Debug, Clone, PartialEq)]
pub struct CaseInputs {
    /// Folder / case name.
    pub name: String,
    /// Front id of the design, None for nothing (always Some for designs of a run).
    pub design_id: u64,
    /// True for the unpatterned reference of `design_id` (the same design, open fraction 1).
    pub unpatterned: bool,
    /// Study name.
    pub study: String,
    /// Salt name.
    pub salt: String,
    /// K.
    pub temperature_k: f64,
    /// Channel gap, m.
    pub gap_m: f64,
    /// Channel length, m.
    pub channel_length_m: f64,
    /// Stripe pitch, m.
    pub pitch_m: f64,
    /// Conducting share of each pitch.
    pub open_fraction: f64,
    /// Mean velocity, m/s.
    pub velocity_m_s: f64,
    /// Cell-pair voltage, V.
    pub cell_pair_voltage_v: f64,
    /// Distance of the window centre from the inlet, m.
    pub position_m: f64,
    /// Local bulk concentration at the window, mol/m^3.
    pub bulk_concentration_mol_m3: f64,
    /// Salt diffusivity, m^2/s.
    pub salt_diffusivity_m2_s: f64,
    /// Cation transport number in solution.
    pub cation_transport_number: f64,
    /// The patterned membrane whose interface the case simulates.
    pub membrane: MembraneKind,
    /// Counter-ion transport number of that membrane.
    pub membrane_transport_number: f64,
    /// Relative permittivity of water.
    pub relative_permittivity: f64,
    /// kg/m^3.
    pub density_kg_m3: f64,
    /// Pa s.
    pub dynamic_viscosity_pa_s: f64,
    /// Local diffusion-layer voltage at that membrane, thermal units.
    pub layer_voltage_thermal: f64,
    /// Local diffusion-layer thickness, m.
    pub boundary_layer_thickness_m: f64,
    /// Local Peers limiting current density (homogeneous membrane), A/m^2.
    pub limiting_current_density_a_m2: f64,
    /// Local heterogeneous (funnelling) limit, A/m^2.
    pub heterogeneous_limit_a_m2: f64,
    /// ROM current density at the window, A/m^2.
    pub current_density_a_m2: f64,
    /// ROM active-area fraction.
    pub active_area_fraction: f64,
    /// ROM vortex wavelength, m (None below onset).
    pub vortex_wavelength_m: Option<f64>,
    /// Number of pitches in the window.
    pub pitches_in_window: usize,
}

/// A value with the definition a CFD engineer can measure.
#[derive(Debug, Clone, Serialize)]
pub struct Defined<T: Serialize> {
    /// The number.
    pub value: T,
    /// Unit.
    pub unit: &'static str,
    /// How it is defined / measured.
    pub definition: String,
}

/// Geometry section.
#[derive(Debug, Clone, Serialize)]
pub struct Geometry {
    /// How the coordinates are laid.
    pub coordinates: String,
    /// Channel gap (domain height), m.
    pub gap_m: f64,
    /// Channel length, m.
    pub channel_length_m: f64,
    /// Distance of the window's upstream edge from the channel inlet, m.
    pub window_start_from_inlet_m: f64,
    /// Distance of the window centre from the inlet, m.
    pub window_centre_from_inlet_m: f64,
    /// Window length, m (a whole number of pitches).
    pub window_length_m: f64,
    /// Pitches in the window.
    pub pitches_in_window: usize,
    /// Stripe pitch, m.
    pub pitch_m: f64,
    /// Conducting share of each pitch.
    pub open_fraction: f64,
    /// Conducting (ion-exchange) stripes, [x_start, x_end] in m from the window start.
    pub conducting_stripes_m: Vec<[f64; 2]>,
    /// Inert (non-conducting) stripes, [x_start, x_end] in m.
    pub inert_stripes_m: Vec<[f64; 2]>,
}

/// Electrolyte section.
#[derive(Debug, Clone, Serialize)]
pub struct Electrolyte {
    /// Salt name.
    pub salt: String,
    /// K.
    pub temperature_K: f64,
    /// Bulk concentration at the window, mol/m^3.
    pub bulk_concentration_mol_m3: f64,
    /// Salt diffusivity, m^2/s (both ions taken with this value in a single-diffusivity model).
    pub salt_diffusivity_m2_s: f64,
    /// Cation transport number in solution.
    pub cation_transport_number: f64,
    /// Counter-ion transport number of the simulated membrane (an ideal membrane would be 1).
    pub membrane_transport_number: f64,
    /// Relative permittivity of water.
    pub relative_permittivity: f64,
    /// eps_r eps_0, F/m.
    pub permittivity_F_m: f64,
    /// Debye length sqrt(eps R T / (2 F^2 c)), m.
    pub debye_length_m: f64,
    /// R T / F, V.
    pub thermal_voltage_V: f64,
}

/// Fluid section.
#[derive(Debug, Clone, Serialize)]
pub struct Fluid {
    /// kg/m^3.
    pub density_kg_m3: f64,
    /// Pa s.
    pub dynamic_viscosity_Pa_s: f64,
    /// m^2/s.
    pub kinematic_viscosity_m2_s: f64,
}

/// Operating point at the window.
#[derive(Debug, Clone, Serialize)]
pub struct OperatingPoint {
    /// Mean channel velocity, m/s.
    pub mean_velocity_m_s: f64,
    /// Cell-pair voltage of the stack design, V.
    pub cell_pair_voltage_V: f64,
    /// Voltage to apply across the diffusion layer, V.
    pub layer_voltage_V: f64,
    /// The same in thermal units.
    pub layer_voltage_thermal: f64,
    /// ROM diffusion-layer thickness at the window (Leveque / fully developed), m.
    pub boundary_layer_thickness_m: f64,
    /// Peers limiting current density of a homogeneous membrane at the window, A/m^2.
    pub limiting_current_density_A_m2: f64,
    /// ROM limiting current density of this pattern (funnelling), A/m^2.
    pub heterogeneous_limit_A_m2: f64,
}

/// One boundary.
#[derive(Debug, Clone, Serialize)]
pub struct Boundary {
    /// Boundary name.
    pub boundary: &'static str,
    /// Where it is.
    pub location: String,
    /// Flow condition.
    pub flow: String,
    /// Ion conditions.
    pub ions: String,
    /// Electric potential condition.
    pub potential: String,
}

/// Dimensionless groups.
#[derive(Debug, Clone, Serialize)]
pub struct Dimensionless {
    /// lambda_D / delta.
    pub debye_over_delta: Defined<f64>,
    /// eps (RT/F)^2 / (mu D).
    pub ehd_coupling: Defined<f64>,
    /// u h / D.
    pub peclet: Defined<f64>,
    /// nu / D.
    pub schmidt: Defined<f64>,
    /// u d_h / nu.
    pub reynolds: Defined<f64>,
    /// Layer voltage / (RT/F).
    pub voltage_thermal: Defined<f64>,
    /// Inert stripe pitch / delta.
    pub pitch_over_delta: Defined<f64>,
}

/// Mesh estimate.
#[derive(Debug, Clone, Serialize)]
pub struct Mesh {
    /// First wall-normal spacing at the membrane, m.
    pub wall_normal_first_spacing_m: f64,
    /// Growth ratio of the wall-normal spacing.
    pub wall_normal_growth_ratio: f64,
    /// Largest wall-normal spacing (in the bulk), m.
    pub wall_normal_max_spacing_m: f64,
    /// Cells across the gap.
    pub wall_normal_cells: u64,
    /// Streamwise spacing, m.
    pub streamwise_spacing_m: f64,
    /// Cells along the window.
    pub streamwise_cells: u64,
    /// Estimated cell count of a 2-D structured mesh.
    pub estimated_cells: u64,
    /// What the estimate rests on.
    pub basis: String,
}

/// ROM predictions to confirm.
#[derive(Debug, Clone, Serialize)]
pub struct Predictions {
    /// Current density, A/m^2.
    pub current_density_A_m2: Defined<f64>,
    /// Active-area fraction.
    pub active_area_fraction: Defined<f64>,
    /// Threshold share of bulk used by the active-area definition.
    pub active_threshold_fraction_of_bulk: f64,
    /// Probe height of the active-area definition, m.
    pub active_probe_height_m: f64,
    /// Vortex wavelength, m (null: no electroconvection predicted).
    pub vortex_wavelength_m: Defined<Option<f64>>,
}

/// The whole case card.
#[derive(Debug, Clone, Serialize)]
pub struct CaseCard {
    /// Schema name.
    pub schema: &'static str,
    /// Schema version.
    pub schema_version: u32,
    /// Case name (folder name).
    pub name: String,
    /// Study name.
    pub study: String,
    /// Front id of the design this case belongs to.
    pub design_id: u64,
    /// True: the unpatterned reference, the design with open fraction 1 at its operating
    /// point (schema 1 called it `unpatterned_baseline`).
    pub unpatterned_reference: bool,
    /// The membrane at y = 0: "CEM" (cation-exchange) or "AEM" (anion-exchange).
    pub membrane: &'static str,
    /// What the case is, in one sentence.
    pub description: String,
    /// Geometry.
    pub geometry: Geometry,
    /// Electrolyte.
    pub electrolyte: Electrolyte,
    /// Fluid.
    pub fluid: Fluid,
    /// Operating point.
    pub operating_point: OperatingPoint,
    /// Boundary conditions, every boundary.
    pub boundary_conditions: Vec<Boundary>,
    /// Dimensionless groups.
    pub dimensionless: Dimensionless,
    /// Mesh estimate.
    pub mesh: Mesh,
    /// ROM predictions.
    pub predictions: Predictions,
    /// The screening-model caution.
    pub caution: &'static str,
}

/// The membrane whose diluate-side interface a card (and a fit of the results) describes, and
/// its counter-ion transport number: the patterned one, the CEM when the pattern is on the CEM
/// or on both (for NaCl and KCl the CEM reaches its limit first), the AEM when only the AEM
/// carries it. An unpatterned twin keeps the same membrane, like with like.
pub fn simulated_membrane(m: &model::Membranes) -> (MembraneKind, f64) {
    match m.pattern_side {
        model::PatternSide::Aem => (MembraneKind::Aem, m.aem_transport_number),
        _ => (MembraneKind::Cem, m.cem_transport_number),
    }
}

/// Wall-normal cells for a graded spacing from `first` growing by `ratio` up to `max`, then
/// uniform, across `height`.
pub fn graded_cells(height: f64, first: f64, ratio: f64, max: f64) -> u64 {
    let mut y = 0.0;
    let mut dy = first;
    let mut n = 0u64;
    while y < height {
        y += dy;
        n += 1;
        dy = (dy * ratio).min(max);
        if dy >= max {
            return n + ((height - y).max(0.0) / max).ceil() as u64;
        }
    }
    n
}

/// Build the card.
pub fn build(inp: &CaseInputs) -> CaseCard {
    let vt = thermal_voltage(inp.temperature_k);
    let eps = inp.relative_permittivity * VACUUM_PERMITTIVITY;
    let c = inp.bulk_concentration_mol_m3;
    let d = inp.salt_diffusivity_m2_s;
    let mu = inp.dynamic_viscosity_pa_s;
    let nu = mu / inp.density_kg_m3;
    let delta = inp.boundary_layer_thickness_m;
    let lambda_d = debye_length(inp.relative_permittivity, inp.temperature_k, c);
    let h = inp.gap_m;
    let u = inp.velocity_m_s;
    let n = inp.pitches_in_window;
    let window = inp.pitch_m * n as f64;
    let start = inp.position_m - 0.5 * window;
    let (conducting, inert) = crate::figures::pattern::stripes(inp.pitch_m, inp.open_fraction, n);

    let first = lambda_d / CELLS_PER_DEBYE;
    let finest_feature = if inp.open_fraction < 1.0 {
        inp.pitch_m * inp.open_fraction.min(1.0 - inp.open_fraction)
    } else {
        inp.pitch_m
    };
    let dx = (finest_feature / 10.0).min(delta / 50.0);
    let dy_max = dx.min(delta / 20.0);
    let ny = graded_cells(h, first, GROWTH_RATIO, dy_max);
    let nx = (window / dx).ceil() as u64;

    let layer_v = inp.layer_voltage_thermal * vt;
    let name = inp.name.clone();
    // The simulated membrane's words: its kind, counter-ion and co-ion, the opposite wall,
    // and the sign of its potential against that wall (cations leave the diluate towards the
    // cathode through the CEM, anions towards the anode through the AEM).
    let (kind, exchange) = (inp.membrane.name(), inp.membrane.exchange());
    let (counter, co, other, sign) = match inp.membrane {
        MembraneKind::Cem => ("cation", "anion", MembraneKind::Aem.exchange(), -1.0),
        MembraneKind::Aem => ("anion", "cation", MembraneKind::Cem.exchange(), 1.0),
    };
    let description = if inp.unpatterned {
        format!(
            "Unpatterned reference of design {}: the same channel, water and operating point with \
             a homogeneous {exchange} membrane, so the patterned case can be compared like \
             with like.",
            inp.design_id
        )
    } else {
        format!(
            "Design {} of study {}: one diluate-side {exchange} membrane interface with \
             inert stripes, a window of {} pitches centred {:.4} m from the channel inlet.",
            inp.design_id, inp.study, n, inp.position_m
        )
    };

    let boundary_conditions = vec![
        Boundary {
            boundary: "inflow",
            location: "x = 0, 0 <= y <= gap".into(),
            flow: format!(
                "fully developed plane Poiseuille profile u(y) = 6 U (y/h)(1 - y/h), mean U = {u} m/s"
            ),
            ions: format!(
                "cation and anion concentration both c(y) = c_b min(1, y / delta), c_b = {c} \
                 mol/m^3, delta = {delta} m: the depleted layer the flow brings from upstream \
                 at the limiting current (or extend the domain upstream and let it develop)"
            ),
            potential: "zero normal gradient".into(),
        },
        Boundary {
            boundary: "outflow",
            location: format!("x = {window} m, 0 <= y <= gap"),
            flow: "zero normal stress (pressure 0), zero normal velocity gradient".into(),
            ions: "zero normal diffusive flux of both ions (convective outflow)".into(),
            potential: "zero normal gradient".into(),
        },
        Boundary {
            boundary: "conducting stripes",
            location: "y = 0 on the conducting_stripes_m intervals".into(),
            flow: "no slip".into(),
            ions: format!(
                "ideal {counter}-selective surface: {counter} concentration fixed at the \
                 membrane's counter-ion level (at least 2 c_b, e.g. 2 c_b = {} mol/m^3), zero \
                 {co} flux; the ROM uses a membrane transport number of {}",
                2.0 * c,
                inp.membrane_transport_number
            ),
            potential: format!(
                "phi = {}V = {} V ({}{} thermal units) relative to the opposite wall",
                if sign < 0.0 { "-" } else { "+" },
                sign * layer_v,
                if sign < 0.0 { "-" } else { "+" },
                inp.layer_voltage_thermal
            ),
        },
        Boundary {
            boundary: "inert stripes",
            location: "y = 0 on the inert_stripes_m intervals".into(),
            flow: "no slip".into(),
            ions: "zero normal flux of both ions".into(),
            potential: "zero normal electric field (an uncharged insulator)".into(),
        },
        Boundary {
            boundary: "opposite wall",
            location: "y = gap, 0 <= x <= window".into(),
            flow: "no slip".into(),
            ions: format!(
                "a non-polarising {other} wall standing in for the opposite membrane: \
                 {co} concentration fixed at c_b = {c} mol/m^3, zero {counter} flux"
            ),
            potential: "phi = 0 (reference)".into(),
        },
    ];

    let definition_cd = "time average (over at least 20 vortex turnover times after the start-up \
        transient) of the wall-normal current density through y = 0, averaged over the whole \
        window length (conducting and inert stripes both in the denominator), A/m^2";
    CaseCard {
        schema: "stria.cfd_case",
        schema_version: SCHEMA_VERSION,
        name,
        study: inp.study.clone(),
        design_id: inp.design_id,
        unpatterned_reference: inp.unpatterned,
        membrane: kind,
        description,
        geometry: Geometry {
            coordinates: "x along the flow from the window's upstream edge, y from the patterned \
                          membrane (y = 0) to the opposite wall (y = gap); 2-D, stripes run across \
                          the flow"
                .into(),
            gap_m: h,
            channel_length_m: inp.channel_length_m,
            window_start_from_inlet_m: start,
            window_centre_from_inlet_m: inp.position_m,
            window_length_m: window,
            pitches_in_window: n,
            pitch_m: inp.pitch_m,
            open_fraction: inp.open_fraction,
            conducting_stripes_m: conducting,
            inert_stripes_m: inert,
        },
        electrolyte: Electrolyte {
            salt: inp.salt.clone(),
            temperature_K: inp.temperature_k,
            bulk_concentration_mol_m3: c,
            salt_diffusivity_m2_s: d,
            cation_transport_number: inp.cation_transport_number,
            membrane_transport_number: inp.membrane_transport_number,
            relative_permittivity: inp.relative_permittivity,
            permittivity_F_m: eps,
            debye_length_m: lambda_d,
            thermal_voltage_V: vt,
        },
        fluid: Fluid {
            density_kg_m3: inp.density_kg_m3,
            dynamic_viscosity_Pa_s: mu,
            kinematic_viscosity_m2_s: nu,
        },
        operating_point: OperatingPoint {
            mean_velocity_m_s: u,
            cell_pair_voltage_V: inp.cell_pair_voltage_v,
            layer_voltage_V: layer_v,
            layer_voltage_thermal: inp.layer_voltage_thermal,
            boundary_layer_thickness_m: delta,
            limiting_current_density_A_m2: inp.limiting_current_density_a_m2,
            heterogeneous_limit_A_m2: inp.heterogeneous_limit_a_m2,
        },
        boundary_conditions,
        dimensionless: Dimensionless {
            debye_over_delta: Defined {
                value: lambda_d / delta,
                unit: "-",
                definition: "Debye length at the bulk concentration over the ROM's \
                             diffusion-layer thickness at the window"
                    .into(),
            },
            ehd_coupling: Defined {
                value: eps * vt * vt / (mu * d),
                unit: "-",
                definition: "electrohydrodynamic coupling constant eps_r eps_0 (R T / F)^2 / \
                             (mu D), D the salt diffusivity"
                    .into(),
            },
            peclet: Defined {
                value: u * h / d,
                unit: "-",
                definition: "mean velocity times gap over salt diffusivity, U h / D".into(),
            },
            schmidt: Defined {
                value: nu / d,
                unit: "-",
                definition: "kinematic viscosity over salt diffusivity, nu / D".into(),
            },
            reynolds: Defined {
                value: u * 2.0 * h / nu,
                unit: "-",
                definition: "U d_h / nu with the slit's hydraulic diameter d_h = 2 h".into(),
            },
            voltage_thermal: Defined {
                value: inp.layer_voltage_thermal,
                unit: "-",
                definition: "diffusion-layer voltage over the thermal voltage R T / F".into(),
            },
            pitch_over_delta: Defined {
                value: inp.pitch_m / delta,
                unit: "-",
                definition: "stripe pitch over the ROM's diffusion-layer thickness".into(),
            },
        },
        mesh: Mesh {
            wall_normal_first_spacing_m: first,
            wall_normal_growth_ratio: GROWTH_RATIO,
            wall_normal_max_spacing_m: dy_max,
            wall_normal_cells: ny,
            streamwise_spacing_m: dx,
            streamwise_cells: nx,
            estimated_cells: nx * ny,
            basis: format!(
                "common practice: {CELLS_PER_DEBYE} cells per Debye length at the membrane, \
                 growing by {GROWTH_RATIO} per cell to min(dx, delta/20); dx = min(narrowest \
                 stripe/10, delta/50). The extended space charge past the limit forms structures \
                 below 100 nm in domains of about 10 um (common practice): refine locally there, \
                 and refine until the window-mean current changes by less than 2 %."
            ),
        },
        predictions: Predictions {
            current_density_A_m2: Defined {
                value: inp.current_density_a_m2,
                unit: "A/m^2",
                definition: definition_cd.into(),
            },
            active_area_fraction: Defined {
                value: inp.active_area_fraction,
                unit: "-",
                definition: format!(
                    "share of the window's membrane length (both stripe kinds) where the \
                     time-averaged {co} concentration at height y = {PROBE_HEIGHT_OF_DELTA} \
                     delta = {:.3e} m exceeds {ACTIVE_THRESHOLD} of the bulk concentration",
                    PROBE_HEIGHT_OF_DELTA * delta
                ),
            },
            active_threshold_fraction_of_bulk: ACTIVE_THRESHOLD,
            active_probe_height_m: PROBE_HEIGHT_OF_DELTA * delta,
            vortex_wavelength_m: Defined {
                value: inp.vortex_wavelength_m,
                unit: "m",
                definition: "window length over the number of vortex pairs: the wavelength of \
                             the strongest peak of the spatial power spectrum of the \
                             time-averaged wall-normal velocity along y = delta / 2; null when \
                             the ROM predicts no electroconvection"
                    .into(),
            },
        },
        caution: crate::CAUTION,
    }
}
