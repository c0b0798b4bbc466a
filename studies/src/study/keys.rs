//! The one table of study-file keys: type, unit, default, allowed range, calibrated range and
//! meaning. The parser, the unknown-key check, the resolved study and docs/study-reference.md
//! are all driven by it, so they cannot drift apart.
//!
//! Unit scheme: every dimensional number carries its unit in the key name (`gap_mm`,
//! `pitch_um`, `velocity_cm_s`, `temperature_C`, `feed_mol_m3`); a key without a unit suffix is
//! dimensionless. Values are plain TOML numbers.

/// What a key holds.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Kind {
    /// A number (integers are accepted).
    Float,
    /// A whole number.
    Int,
    /// Free text.
    Text,
    /// One of a fixed set of words.
    Choice(&'static [&'static str]),
    /// A list of words from a fixed set (no repeats).
    List(&'static [&'static str]),
    /// A list of numbers.
    FloatList,
    /// A file path, relative to the study file.
    Path,
}

impl Kind {
    /// Short name for messages and the reference.
    pub fn describe(&self) -> String {
        match self {
            Kind::Float => "number".into(),
            Kind::Int => "integer".into(),
            Kind::Text => "text".into(),
            Kind::Choice(c) => format!("one of {}", quoted(c)),
            Kind::List(c) => format!("list of {}", quoted(c)),
            Kind::FloatList => "list of numbers".into(),
            Kind::Path => "path".into(),
        }
    }
}

/// `"a", "b"` for a set of words.
pub fn quoted(words: &[&str]) -> String {
    words
        .iter()
        .map(|w| format!("\"{w}\""))
        .collect::<Vec<_>>()
        .join(", ")
}

/// A closed or open numeric interval.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Range {
    /// Lower end.
    pub lo: f64,
    /// Upper end.
    pub hi: f64,
    /// Lower end excluded.
    pub lo_open: bool,
    /// Upper end excluded.
    pub hi_open: bool,
}

impl Range {
    /// Whether `v` lies in the interval.
    pub fn contains(&self, v: f64) -> bool {
        let lo_ok = if self.lo_open {
            v > self.lo
        } else {
            v >= self.lo
        };
        let hi_ok = if self.hi_open {
            v < self.hi
        } else {
            v <= self.hi
        };
        v.is_finite() && lo_ok && hi_ok
    }

    /// Text such as `> 0 and <= 10`.
    pub fn describe(&self) -> String {
        let lo = if self.lo_open { ">" } else { ">=" };
        let hi = if self.hi_open { "<" } else { "<=" };
        format!("{lo} {} and {hi} {}", bound(self.lo), bound(self.hi))
    }
}

/// A bound for messages: exponent form for very small or large magnitudes.
fn bound(x: f64) -> String {
    if x != 0.0 && (x.abs() < 1e-3 || x.abs() >= 1e7) {
        format!("{x:e}")
    } else {
        format!("{x}")
    }
}

const fn closed(lo: f64, hi: f64) -> Option<Range> {
    Some(Range {
        lo,
        hi,
        lo_open: false,
        hi_open: false,
    })
}

const fn pos(hi: f64) -> Option<Range> {
    Some(Range {
        lo: 0.0,
        hi,
        lo_open: true,
        hi_open: false,
    })
}

const fn open_unit() -> Option<Range> {
    Some(Range {
        lo: 0.0,
        hi: 1.0,
        lo_open: true,
        hi_open: true,
    })
}

/// The default of a key.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum DefaultValue {
    /// Must be given.
    Required,
    /// This TOML literal.
    Value(&'static str),
    /// Follows from another key or condition (explained in words).
    Derived(&'static str),
    /// Optional; no default (the feature is off when absent).
    Unset,
}

/// One key of the study file.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct KeySpec {
    /// Section, e.g. `channel` or `variables.pitch`.
    pub section: &'static str,
    /// Key within the section.
    pub key: &'static str,
    /// Type.
    pub kind: Kind,
    /// Unit as written in reports ("-" for dimensionless).
    pub unit: &'static str,
    /// Factor from the key's unit to SI (temperature is converted by an offset instead).
    pub to_si: f64,
    /// Default.
    pub default: DefaultValue,
    /// Physically allowed range; outside it is an error.
    pub range: Option<Range>,
    /// Range the model is calibrated for; outside it is a warning.
    pub calibrated: Option<Range>,
    /// Meaning.
    pub doc: &'static str,
    /// Budget keys may change between a run and its resume (excluded from the fingerprint).
    pub budget: bool,
}

#[allow(clippy::too_many_arguments)]
const fn k(
    section: &'static str,
    key: &'static str,
    kind: Kind,
    unit: &'static str,
    to_si: f64,
    default: DefaultValue,
    range: Option<Range>,
    calibrated: Option<Range>,
    doc: &'static str,
) -> KeySpec {
    KeySpec {
        section,
        key,
        kind,
        unit,
        to_si,
        default,
        range,
        calibrated,
        doc,
        budget: false,
    }
}

const fn budget(mut spec: KeySpec) -> KeySpec {
    spec.budget = true;
    spec
}

use model::{FlowArrangement, PatternSide};
use optimizer::{InitialDesign, Scalarisation, Solver};

use super::choices::{Choices, LengthModeChoice, LoopModeChoice, SaltChoice, SpacerChoice};
use super::search::{AlgorithmChoice, Objective};
use DefaultValue::{Derived, Required, Unset, Value};
use Kind::{Choice, Float, FloatList, Int, List, Path, Text};

/// Salts the model knows.
pub const SALTS: Choices<SaltChoice> = Choices::new(
    &["NaCl", "KCl", "custom"],
    &[SaltChoice::NaCl, SaltChoice::KCl, SaltChoice::Custom],
);
/// Spacer choices.
pub const SPACERS: Choices<SpacerChoice> = Choices::new(
    &["none", "schock_miquel", "multiplier"],
    &[
        SpacerChoice::None,
        SpacerChoice::SchockMiquel,
        SpacerChoice::Multiplier,
    ],
);
/// Pattern sides.
pub const PATTERN_SIDES: Choices<PatternSide> = Choices::new(
    &["cem", "aem", "both"],
    &[PatternSide::Cem, PatternSide::Aem, PatternSide::Both],
);
/// Effects of real membranes (`membranes.effects`); "none" alone gives ideal membranes.
pub const MEMBRANE_EFFECTS: &[&str] = &[
    "donnan",
    "concentration_resistance",
    "salt_back_diffusion",
    "water_transport",
    "none",
];
/// Flow arrangements.
pub const FLOWS: Choices<FlowArrangement> = Choices::new(
    &["co_current", "counter_current"],
    &[FlowArrangement::CoCurrent, FlowArrangement::CounterCurrent],
);
/// Length modes.
pub const LENGTH_MODES: Choices<LengthModeChoice> = Choices::new(
    &["fixed", "product_target"],
    &[LengthModeChoice::Fixed, LengthModeChoice::ProductTarget],
);
/// Concentrate loop modes.
pub const LOOP_MODES: Choices<LoopModeChoice> = Choices::new(
    &["once_through", "feed_and_bleed"],
    &[LoopModeChoice::OnceThrough, LoopModeChoice::FeedAndBleed],
);
/// Most stages a plant may have.
pub const MAX_STAGES: usize = 8;
/// Objective keys.
pub const OBJECTIVES: Choices<Objective> = Choices::new(
    &[
        "salt_removal_rate",
        "specific_energy",
        "membrane_cost",
        "levelised_cost",
        "salt_removal_fraction",
        "plant_specific_energy",
        "plant_levelised_cost",
        "plant_membrane_area",
        "water_recovery",
        "stack_voltage",
        "product_concentration",
    ],
    &[
        Objective::SaltRemovalRate,
        Objective::SpecificEnergy,
        Objective::MembraneCost,
        Objective::LevelisedCost,
        Objective::SaltRemovalFraction,
        Objective::PlantSpecificEnergy,
        Objective::PlantLevelisedCost,
        Objective::PlantMembraneArea,
        Objective::WaterRecovery,
        Objective::StackVoltage,
        Objective::ProductConcentration,
    ],
);
/// Algorithms.
pub const ALGORITHMS: Choices<AlgorithmChoice> = Choices::new(
    &["nsga2", "scalarised", "screening"],
    &[
        AlgorithmChoice::Nsga2,
        AlgorithmChoice::Scalarised,
        AlgorithmChoice::Screening,
    ],
);
/// Single-objective solvers for scalarised runs.
pub const SOLVERS: Choices<Solver> = Choices::new(
    &["nelder_mead", "particle_swarm", "simulated_annealing"],
    &[
        Solver::NelderMead,
        Solver::ParticleSwarm,
        Solver::SimulatedAnnealing,
    ],
);
/// Scalarisations (an epsilon constraint keeps the first objective as the one minimised).
pub const SCALARISATIONS: Choices<Scalarisation> = Choices::new(
    &["weighted_sum", "chebyshev", "epsilon"],
    &[
        Scalarisation::WeightedSum,
        Scalarisation::Chebyshev,
        Scalarisation::EpsilonConstraint { objective: 0 },
    ],
);
/// Screening samplers.
pub const SAMPLERS: Choices<InitialDesign> = Choices::new(
    &["lhs", "sobol"],
    &[InitialDesign::LatinHypercube, InitialDesign::Sobol],
);

/// Sections in file order, with a one-line meaning.
pub const SECTIONS: &[(&str, &str)] = &[
    ("study", "What the study is called."),
    ("water", "The feed water."),
    ("channel", "Diluate and concentrate channels of one cell pair (and the spacer)."),
    ("membranes", "The ion-exchange membranes and the stripe pattern."),
    ("operation", "How the stack is driven and fed."),
    ("economics", "Prices and plant figures for cost objectives."),
    ("water.analysis", "Optional water analysis of the feed (mg/L) for the scaling screen: calcite and gypsum saturation indices of the feed and of the concentrate outlet, every ion concentrated by the model salt's concentrate factor at the feed's pH and temperature (a screening assumption)."),
    ("stack", "Optional: the stack of the first stage (cell pairs, electrodes, rectifier, manifolds for the shunt currents) and the plant's capital beyond the membranes. Without it each stage is a single cell pair without electrodes, as the cell-pair model."),
    ("stages.N", "Optional: stage N = 2, 3, ... in series after the first (the study's own design is stage 1); the diluate of each stage feeds the next. Each key overrides the first stage's value for this stage."),
    ("concentrate_loop", "Optional: the concentrate stream, once-through or feed-and-bleed with a make-up and bleed that set the water recovery."),
    ("rom", "Overrides of the reduced-order-model constants (any key of the constants table)."),
    ("variables.pitch", "Design variable: stripe pitch (CSV column `pitch_m`)."),
    ("variables.open_fraction", "Design variable: open fraction (CSV column `open_fraction`)."),
    ("variables.velocity", "Design variable: mean velocity of both streams (CSV column `velocity_m_s`)."),
    ("variables.cell_pair_voltage", "Design variable: cell-pair voltage, voltage drive only (CSV column `cell_pair_voltage_V`)."),
    ("variables.gap", "Design variable: channel gap (CSV column `gap_m`)."),
    ("variables.length", "Design variable: channel length (CSV column `length_m`)."),
    ("variables.water_recovery", "Design variable: water recovery of a feed-and-bleed concentrate loop (CSV column `water_recovery`). Any other variable may name a later stage: [variables.stage2.pitch] searches stage 2's pitch (CSV column `stage2_pitch_m`), with the same bound keys."),
    ("objectives", "What to optimise; each objective has a fixed direction."),
    ("constraints", "Limits a design must respect to be feasible; each is optional."),
    ("optimizer", "The search algorithm and its budget."),
];

/// Every key of the study file except the `[rom]` constants, which come from
/// `model::RomConstants` (see [`rom_keys`]).
pub const KEYS: &[KeySpec] = &[
    k("study", "name", Text, "-", 1.0, Required, None, None, "Name of the study, used in reports and run summaries."),
    k("study", "description", Text, "-", 1.0, Value("\"\""), None, None, "Free text for the report."),
    k("water", "salt", Choice(SALTS.words()), "-", 1.0, Value("\"NaCl\""), None, None, "Dissolved 1:1 salt; \"custom\" needs the four ionic data keys below."),
    k("water", "temperature_C", Float, "C", 1.0, Required, Some(Range { lo: 0.0, hi: 100.0, lo_open: true, hi_open: true }), closed(5.0, 40.0), "Water temperature, degrees Celsius (property data are fitted from 5 to 40 C)."),
    k("water", "feed_mol_m3", Float, "mol/m3", 1.0, Derived("give feed_mol_m3 or feed_g_L"), closed(1e-3, 6000.0), closed(1.0, 300.0), "Diluate feed concentration, mol/m3 (= mM)."),
    k("water", "feed_g_L", Float, "g/L", 1.0, Derived("give feed_mol_m3 or feed_g_L"), closed(1e-4, 350.0), None, "Diluate feed concentration as mass of salt per litre, converted with molar_mass_g_mol."),
    k("water", "concentrate_feed_mol_m3", Float, "mol/m3", 1.0, Derived("same as the diluate feed"), closed(1e-3, 6000.0), closed(1.0, 1000.0), "Concentrate feed concentration, mol/m3."),
    k("water", "concentrate_feed_g_L", Float, "g/L", 1.0, Derived("same as the diluate feed"), closed(1e-4, 350.0), None, "Concentrate feed concentration, g/L."),
    k("water", "molar_mass_g_mol", Float, "g/mol", 1.0, Derived("58.443 for NaCl, 74.551 for KCl (the model's values); required for a custom salt given in g/L"), closed(1.0, 1000.0), None, "Molar mass of the salt, for g/L inputs."),
    k("water", "cation_diffusivity_m2_s", Float, "m2/s", 1.0, Derived("custom salt only"), pos(1e-7), None, "Custom salt: cation diffusivity at 25 C, infinite dilution."),
    k("water", "anion_diffusivity_m2_s", Float, "m2/s", 1.0, Derived("custom salt only"), pos(1e-7), None, "Custom salt: anion diffusivity at 25 C, infinite dilution."),
    k("water", "cation_conductivity_S_m2_mol", Float, "S m2/mol", 1.0, Derived("custom salt only"), pos(0.1), None, "Custom salt: cation limiting molar conductivity at 25 C."),
    k("water", "anion_conductivity_S_m2_mol", Float, "S m2/mol", 1.0, Derived("custom salt only"), pos(0.1), None, "Custom salt: anion limiting molar conductivity at 25 C."),
    k("channel", "gap_mm", Float, "mm", 1e-3, Required, closed(0.01, 10.0), closed(0.1, 2.0), "Diluate channel gap, membrane to membrane."),
    k("channel", "concentrate_gap_mm", Float, "mm", 1e-3, Derived("same as gap_mm (and follows it when gap is a variable)"), closed(0.01, 10.0), closed(0.1, 2.0), "Concentrate channel gap."),
    k("channel", "length_m", Float, "m", 1.0, Required, closed(1e-5, 20.0), closed(0.02, 3.0), "Flow-path length; in product-target mode the longest length searched."),
    k("channel", "width_m", Float, "m", 1.0, Required, closed(1e-5, 5.0), None, "Channel width across the flow."),
    k("channel", "spacer", Choice(SPACERS.words()), "-", 1.0, Value("\"none\""), None, None, "Channel filling: open slit, Schock-Miquel spacer correlations, or open-slit correlations times factors."),
    k("channel", "spacer_porosity", Float, "-", 1.0, Derived("0.85 with schock_miquel"), open_unit(), closed(0.7, 0.95), "Schock-Miquel spacer: volume fraction open to flow."),
    k("channel", "spacer_shadow_factor", Float, "-", 1.0, Derived("1.0 with a spacer"), closed(1.0, 10.0), None, "Spacer: factor by which the spacer raises the solution resistance."),
    k("channel", "spacer_sherwood_factor", Float, "-", 1.0, Derived("1.0 with multiplier"), pos(50.0), None, "Multiplier spacer: factor on the Sherwood number."),
    k("channel", "spacer_friction_factor", Float, "-", 1.0, Derived("1.0 with multiplier"), pos(1000.0), None, "Multiplier spacer: factor on the pressure drop."),
    k("membranes", "cem_transport_number", Float, "-", 1.0, Required, Some(Range { lo: 0.5, hi: 1.0, lo_open: false, hi_open: false }), closed(0.85, 1.0), "Counter-ion transport number in the cation-exchange membrane with both faces at the diluate feed concentration (with the \"donnan\" effect it sets the membrane's effective fixed charge, and falls as the concentrate strengthens)."),
    k("membranes", "aem_transport_number", Float, "-", 1.0, Required, Some(Range { lo: 0.5, hi: 1.0, lo_open: false, hi_open: false }), closed(0.85, 1.0), "Counter-ion transport number in the anion-exchange membrane, as for the CEM."),
    k("membranes", "cem_area_resistance_ohm_cm2", Float, "Ohm cm2", 1e-4, Required, pos(1000.0), closed(0.5, 30.0), "Area resistance of the unpatterned CEM in 0.5 M NaCl (the datasheet condition; with the \"concentration_resistance\" effect it rises in dilute solution)."),
    k("membranes", "aem_area_resistance_ohm_cm2", Float, "Ohm cm2", 1e-4, Required, pos(1000.0), closed(0.5, 30.0), "Area resistance of the AEM in 0.5 M NaCl, as for the CEM."),
    k("membranes", "pattern_side", Choice(PATTERN_SIDES.words()), "-", 1.0, Value("\"cem\""), None, None, "Which membrane carries the inert stripes on its diluate side."),
    k("membranes", "effects", List(MEMBRANE_EFFECTS), "-", 1.0, Value("[\"donnan\", \"concentration_resistance\", \"salt_back_diffusion\", \"water_transport\"]"), None, None, "Effects of real membranes the model includes (docs/physics.md#real-membranes): Donnan (Teorell-Meyer-Sievers) transport numbers and potential, an area resistance that rises in dilute solution, salt back-diffusion, water transport by osmosis and electro-osmosis. [\"none\"] gives ideal membranes."),
    k("membranes", "cem_resistance_solution_share", Float, "-", 1.0, Value("0.08"), closed(0.0, 1.0), closed(0.02, 0.32), "Share of the CEM's 0.5 M area resistance that scales with the external solution's resistance (two resistors in series, Galama et al. 2014; generic grade from memory)."),
    k("membranes", "aem_resistance_solution_share", Float, "-", 1.0, Value("0.08"), closed(0.0, 1.0), closed(0.02, 0.32), "The same for the AEM."),
    k("membranes", "cem_salt_permeance_m_s", Float, "m/s", 1.0, Value("1e-7"), closed(0.0, 1e-4), closed(1e-8, 1e-6), "Co-ion permeance of the CEM (membrane-phase co-ion diffusivity over thickness) for salt back-diffusion (generic grade from memory)."),
    k("membranes", "aem_salt_permeance_m_s", Float, "m/s", 1.0, Value("1e-7"), closed(0.0, 1e-4), closed(1e-8, 1e-6), "The same for the AEM."),
    k("membranes", "cem_water_permeability_m_s_Pa", Float, "m/s/Pa", 1.0, Value("2e-14"), closed(0.0, 1e-10), closed(5e-15, 8e-14), "Osmotic water permeability of the CEM (generic grade from memory, low confidence)."),
    k("membranes", "aem_water_permeability_m_s_Pa", Float, "m/s/Pa", 1.0, Value("2e-14"), closed(0.0, 1e-10), closed(5e-15, 8e-14), "The same for the AEM."),
    k("membranes", "cem_electroosmotic_water_mol_F", Float, "mol/F", 1.0, Value("6.0"), closed(0.0, 50.0), closed(3.0, 10.0), "Electro-osmotic water transport through the CEM, mol of water per faraday (5-10 in NaCl, Strathmann 2004, from memory)."),
    k("membranes", "aem_electroosmotic_water_mol_F", Float, "mol/F", 1.0, Value("6.0"), closed(0.0, 50.0), closed(3.0, 10.0), "The same for the AEM."),
    k("membranes", "pitch_um", Float, "um", 1e-6, Required, closed(0.1, 1e5), closed(20.0, 5000.0), "Stripe period along the flow."),
    k("membranes", "open_fraction", Float, "-", 1.0, Required, closed(0.01, 1.0), closed(0.1, 1.0), "Conducting share of each period (1 = unpatterned)."),
    k("operation", "velocity_cm_s", Float, "cm/s", 1e-2, Required, closed(0.01, 200.0), closed(0.2, 30.0), "Mean diluate velocity."),
    k("operation", "concentrate_velocity_cm_s", Float, "cm/s", 1e-2, Derived("same as velocity_cm_s (and follows it when velocity is a variable)"), closed(0.01, 200.0), closed(0.2, 30.0), "Mean concentrate velocity."),
    k("operation", "cell_pair_voltage_V", Float, "V", 1.0, Derived("give cell_pair_voltage_V or cell_current_A"), pos(50.0), closed(0.05, 6.0), "Cell-pair voltage (potentiostatic drive)."),
    k("operation", "cell_current_A", Float, "A", 1.0, Derived("give cell_pair_voltage_V or cell_current_A"), pos(1e4), None, "Current through one cell pair (galvanostatic drive)."),
    k("operation", "flow", Choice(FLOWS.words()), "-", 1.0, Value("\"co_current\""), None, None, "Relative direction of diluate and concentrate."),
    k("operation", "length_mode", Choice(LENGTH_MODES.words()), "-", 1.0, Value("\"fixed\""), None, None, "Fixed channel length, or the length that reaches product_target_mol_m3."),
    k("operation", "product_target_mol_m3", Float, "mol/m3", 1.0, Derived("required with length_mode = \"product_target\""), pos(6000.0), None, "Wanted product concentration in product-target mode."),
    k("economics", "currency", Text, "-", 1.0, Value("\"currency units\""), None, None, "Label of the currency of every price (reports only)."),
    k("economics", "electricity_price_per_kWh", Float, "currency/kWh", 1.0, Required, closed(0.0, 100.0), None, "Electricity price."),
    k("economics", "pump_efficiency", Float, "-", 1.0, Required, closed(0.01, 1.0), closed(0.3, 0.9), "Wire-to-water efficiency of the pumps."),
    k("economics", "membrane_price_per_m2", Float, "currency/m2", 1.0, Required, closed(0.0, 1e5), None, "Price of plain ion-exchange membrane."),
    k("economics", "pattern_surcharge_per_m2", Float, "currency/m2", 1.0, Value("0.0"), closed(0.0, 1e5), None, "Extra price per m2 of patterned membrane."),
    k("economics", "membrane_life_years", Float, "years", 1.0, Required, closed(0.01, 100.0), None, "Membrane life."),
    k("economics", "discount_rate_percent", Float, "%/yr", 1.0, Required, Some(Range { lo: 0.0, hi: 100.0, lo_open: false, hi_open: true }), None, "Discount rate for the capital recovery factor."),
    k("economics", "operating_hours_per_year", Float, "h/yr", 1.0, Required, closed(1.0, 8784.0), None, "Hours of operation per year."),
    k("economics", "plant_capacity_m3_day", Float, "m3/day", 1.0, Required, pos(1e8), None, "Product capacity of the whole plant."),
    k("water.analysis", "na_mg_L", Float, "mg/L", 1.0, Required, closed(0.0, 2e5), None, "Sodium."),
    k("water.analysis", "k_mg_L", Float, "mg/L", 1.0, Value("0.0"), closed(0.0, 2e5), None, "Potassium."),
    k("water.analysis", "ca_mg_L", Float, "mg/L", 1.0, Required, Some(Range { lo: 0.0, hi: 2e5, lo_open: true, hi_open: false }), None, "Calcium."),
    k("water.analysis", "mg_mg_L", Float, "mg/L", 1.0, Value("0.0"), closed(0.0, 2e5), None, "Magnesium."),
    k("water.analysis", "cl_mg_L", Float, "mg/L", 1.0, Required, closed(0.0, 2e5), None, "Chloride."),
    k("water.analysis", "so4_mg_L", Float, "mg/L", 1.0, Value("0.0"), closed(0.0, 2e5), None, "Sulfate as SO4."),
    k("water.analysis", "alkalinity_mg_L_as_HCO3", Float, "mg/L as HCO3", 1.0, Required, Some(Range { lo: 0.0, hi: 2e5, lo_open: true, hi_open: false }), None, "Alkalinity as HCO3."),
    k("water.analysis", "pH", Float, "-", 1.0, Required, closed(4.0, 10.0), None, "pH of the feed (the temperature is [water] temperature_C, at most 90 C)."),
    k("stack", "cell_pairs", Int, "-", 1.0, Required, closed(1.0, 5000.0), None, "Cell pairs per stack (first stage)."),
    k("stack", "electrode_voltage_V", Float, "V", 1.0, Value("2.5"), closed(0.0, 50.0), closed(1.5, 4.0), "Electrode compartments as one voltage (reaction potentials, overpotentials, rinse); about 2-3 V for gas-evolving electrodes, common practice. The rinse carries hydrogen, oxygen and chlorine: vent it."),
    k("stack", "rectifier_efficiency", Float, "-", 1.0, Value("0.95"), Some(Range { lo: 0.01, hi: 1.0, lo_open: true, hi_open: false }), closed(0.85, 0.99), "DC output over AC input of the rectifier."),
    k("stack", "manifold_diameter_mm", Float, "mm", 1e-3, Unset, closed(0.001, 1000.0), None, "Diameter of each of the four manifolds; set it to include the shunt currents (Veerman et al. 2008 equivalent circuit)."),
    k("stack", "feed_channel_length_mm", Float, "mm", 1e-3, Derived("30 with a manifold"), closed(0.001, 1000.0), None, "Length of the feed channel from a manifold into a compartment."),
    k("stack", "feed_channel_width_mm", Float, "mm", 1e-3, Derived("5 with a manifold"), closed(0.001, 1000.0), None, "Width of that feed channel (its depth is the compartment's gap)."),
    k("stack", "membrane_thickness_mm", Float, "mm", 1e-3, Derived("0.15 with a manifold"), closed(0.001, 1000.0), None, "Membrane thickness (sets the cell-pair thickness, the manifold segment length)."),
    k("stack", "electrode_price_per_m2", Float, "currency/m2", 1.0, Value("0.0"), closed(0.0, 1e6), None, "Electrode price (two per stack, each of the cell area)."),
    k("stack", "spacer_price_per_m2", Float, "currency/m2", 1.0, Value("0.0"), closed(0.0, 1e6), None, "Spacer or gasket price (two per cell pair, each of the cell area)."),
    k("stack", "hardware_price_per_stack", Float, "currency/stack", 1.0, Value("0.0"), closed(0.0, 1e9), None, "End plates, frames, tie rods per stack."),
    k("stack", "rectifier_price_per_kW", Float, "currency/kW", 1.0, Value("0.0"), closed(0.0, 1e6), None, "Rectifier price per kW of DC output."),
    k("stack", "plant_life_years", Float, "years", 1.0, Value("20.0"), closed(0.01, 100.0), None, "Life over which everything but the membranes is annuitised."),
    k("stages.N", "length_m", Float, "m", 1.0, Derived("the first stage's"), closed(1e-5, 20.0), closed(0.02, 3.0), "Flow-path length of this stage."),
    k("stages.N", "gap_mm", Float, "mm", 1e-3, Derived("the first stage's"), closed(0.01, 10.0), closed(0.1, 2.0), "Diluate gap of this stage (the concentrate gap follows when it follows in [channel])."),
    k("stages.N", "pitch_um", Float, "um", 1e-6, Derived("the first stage's"), closed(0.1, 1e5), closed(20.0, 5000.0), "Stripe pitch of this stage's membranes."),
    k("stages.N", "open_fraction", Float, "-", 1.0, Derived("the first stage's"), closed(0.01, 1.0), closed(0.1, 1.0), "Open fraction of this stage's pattern."),
    k("stages.N", "velocity_cm_s", Float, "cm/s", 1e-2, Derived("the first stage's"), closed(0.01, 200.0), closed(0.2, 30.0), "Mean diluate velocity of this stage (the concentrate follows when it follows in [operation])."),
    k("stages.N", "cell_pair_voltage_V", Float, "V", 1.0, Derived("the first stage's"), pos(50.0), closed(0.05, 6.0), "Cell-pair voltage of this stage (voltage drive)."),
    k("stages.N", "cell_pairs", Int, "-", 1.0, Derived("the first stage's"), closed(1.0, 5000.0), None, "Cell pairs per stack of this stage."),
    k("concentrate_loop", "mode", Choice(LOOP_MODES.words()), "-", 1.0, Value("\"once_through\""), None, None, "once_through: every stage's concentrate is fed with feed water and drained; feed_and_bleed: one recirculating loop with a make-up of feed water and an equal bleed."),
    k("concentrate_loop", "water_recovery", Float, "-", 1.0, Derived("required with feed_and_bleed"), Some(Range { lo: 0.01, hi: 0.99, lo_open: false, hi_open: false }), closed(0.5, 0.95), "Product over plant feed (product plus bleed); sets the bleed."),
    k("rom", "constants_file", Path, "-", 1.0, Unset, None, None, "A constants file (e.g. written by `stria fit`), relative to the study file; keys given in [rom] override it."),
    k("variables.pitch", "lower_um", Float, "um", 1e-6, Required, closed(0.1, 1e5), closed(20.0, 5000.0), "Lower bound of the stripe pitch."),
    k("variables.pitch", "upper_um", Float, "um", 1e-6, Required, closed(0.1, 1e5), closed(20.0, 5000.0), "Upper bound of the stripe pitch."),
    k("variables.open_fraction", "lower", Float, "-", 1.0, Required, closed(0.01, 1.0), closed(0.1, 1.0), "Lower bound of the open fraction."),
    k("variables.open_fraction", "upper", Float, "-", 1.0, Required, closed(0.01, 1.0), closed(0.1, 1.0), "Upper bound of the open fraction."),
    k("variables.velocity", "lower_cm_s", Float, "cm/s", 1e-2, Required, closed(0.01, 200.0), closed(0.2, 30.0), "Lower bound of the mean velocity."),
    k("variables.velocity", "upper_cm_s", Float, "cm/s", 1e-2, Required, closed(0.01, 200.0), closed(0.2, 30.0), "Upper bound of the mean velocity."),
    k("variables.cell_pair_voltage", "lower_V", Float, "V", 1.0, Required, pos(50.0), closed(0.05, 6.0), "Lower bound of the cell-pair voltage."),
    k("variables.cell_pair_voltage", "upper_V", Float, "V", 1.0, Required, pos(50.0), closed(0.05, 6.0), "Upper bound of the cell-pair voltage."),
    k("variables.gap", "lower_mm", Float, "mm", 1e-3, Required, closed(0.01, 10.0), closed(0.1, 2.0), "Lower bound of the gap (both channels)."),
    k("variables.gap", "upper_mm", Float, "mm", 1e-3, Required, closed(0.01, 10.0), closed(0.1, 2.0), "Upper bound of the gap."),
    k("variables.length", "lower_m", Float, "m", 1.0, Required, closed(1e-5, 20.0), closed(0.02, 3.0), "Lower bound of the channel length."),
    k("variables.length", "upper_m", Float, "m", 1.0, Required, closed(1e-5, 20.0), closed(0.02, 3.0), "Upper bound of the channel length."),
    k("variables.water_recovery", "lower", Float, "-", 1.0, Required, Some(Range { lo: 0.01, hi: 0.99, lo_open: false, hi_open: false }), closed(0.5, 0.95), "Lower bound of the water recovery."),
    k("variables.water_recovery", "upper", Float, "-", 1.0, Required, Some(Range { lo: 0.01, hi: 0.99, lo_open: false, hi_open: false }), closed(0.5, 0.95), "Upper bound of the water recovery."),
    k("objectives", "list", List(OBJECTIVES.words()), "-", 1.0, Value("[\"salt_removal_rate\", \"specific_energy\"]"), None, None, "Objectives: salt_removal_rate (mol/(m2 s), maximised), specific_energy (kWh/m3, minimised), membrane_cost (currency per m3/day of capacity, minimised), levelised_cost (currency/m3, minimised), salt_removal_fraction (-, maximised); at plant level (all stages, stacks, electrodes, rectifier, concentrate loop): plant_specific_energy (kWh/m3, minimised), plant_levelised_cost (currency/m3, minimised), plant_membrane_area (m2 per m3/day, minimised), water_recovery (-, maximised), stack_voltage (V, highest of the stages, minimised), product_concentration (mol/m3, the last stage's outlet, minimised)."),
    k("constraints", "max_product_mol_m3", Float, "mol/m3", 1.0, Unset, pos(6000.0), None, "Highest allowed product (diluate outlet) concentration."),
    k("constraints", "max_pressure_drop_kPa", Float, "kPa", 1e3, Unset, pos(1e4), None, "Highest allowed diluate pressure drop over the channel."),
    k("constraints", "max_stack_voltage_V", Float, "V", 1.0, Unset, pos(1e5), None, "Highest allowed stack voltage of any stage (above 120 V DC a stack is hazardous to touch; follow local electrical codes)."),
    k("constraints", "min_water_recovery", Float, "-", 1.0, Unset, open_unit(), None, "Lowest allowed water recovery of the plant."),
    k("constraints", "max_concentrate_calcite_si", Float, "-", 1.0, Unset, closed(-10.0, 10.0), None, "Highest allowed calcite saturation index of the concentrate outlet (needs [water.analysis]; g = SI - limit)."),
    k("constraints", "max_concentrate_gypsum_si", Float, "-", 1.0, Unset, closed(-10.0, 10.0), None, "Highest allowed gypsum saturation index of the concentrate outlet (needs [water.analysis]; g = SI - limit)."),
    k("constraints", "max_reynolds", Float, "-", 1.0, Unset, pos(1e6), None, "Highest allowed channel Reynolds number (laminar flow below about 2000 in an open slit)."),
    k("optimizer", "algorithm", Choice(ALGORITHMS.words()), "-", 1.0, Value("\"nsga2\""), None, None, "nsga2: multi-objective evolutionary search; scalarised: a sweep of single-objective sub-problems; screening: a space-filling sample."),
    k("optimizer", "seed", Int, "-", 1.0, Value("1"), closed(0.0, 9.007e15), None, "Seed of every random number of the run."),
    k("optimizer", "population", Int, "-", 1.0, Value("40"), closed(4.0, 1e5), None, "Population size (nsga2) or batch size (screening, scalarised); at most 100,000 (memory of the order of 200 bytes per member and objective, held several times over, and one journal line per generation of them)."),
    budget(k("optimizer", "max_evaluations", Int, "-", 1.0, Value("2000"), closed(1.0, 1e13), None, "Evaluation budget (may be raised when resuming)."),),
    budget(k("optimizer", "hours", Float, "h", 3600.0, Unset, pos(10000.0), None, "Wall-clock budget of one invocation of `stria run`."),),
    budget(k("optimizer", "stall_generations", Int, "-", 1.0, Unset, closed(1.0, 1e9), None, "Stop when the hypervolume has not grown for this many generations."),),
    k("optimizer", "archive_epsilon", FloatList, "objective units", 1.0, Unset, None, None, "Grid size per objective (in the objective's unit, from 1e-12 up) that bounds the archive of a long run."),
    k("optimizer", "solver", Choice(SOLVERS.words()), "-", 1.0, Value("\"nelder_mead\""), None, None, "scalarised: single-objective solver of each sub-problem."),
    k("optimizer", "scalarisation", Choice(SCALARISATIONS.words()), "-", 1.0, Value("\"chebyshev\""), None, None, "scalarised: how objectives are combined."),
    k("optimizer", "subproblems", Int, "-", 1.0, Value("11"), closed(1.0, 10000.0), None, "scalarised: number of weight vectors or epsilon levels."),
    k("optimizer", "sampler", Choice(SAMPLERS.words()), "-", 1.0, Value("\"lhs\""), None, None, "screening: Latin hypercube or Sobol sequence."),
];

/// Keys of `[rom]` besides `constants_file`: the serde names of `model::RomConstants`, with
/// their defaults, in declaration order.
pub fn rom_keys() -> Vec<(String, f64)> {
    let value = serde_json::to_value(model::RomConstants::default()).unwrap_or_default();
    let mut out = Vec::new();
    if let serde_json::Value::Object(map) = value {
        for (key, v) in map {
            if let Some(x) = v.as_f64() {
                out.push((key, x));
            }
        }
    }
    out
}

/// The model's admissible range of one ROM constant (`model::RomConstants::validate` with
/// every other constant at its default): the message and the allowed range when `x` is
/// outside it. A key that is not a constant passes (it is refused where it is read).
pub fn check_rom_value(key: &str, x: f64) -> Result<(), (String, String)> {
    let mut map = serde_json::Map::new();
    map.insert(key.to_string(), serde_json::json!(x));
    let Ok(one) = serde_json::from_value::<model::RomConstants>(serde_json::Value::Object(map))
    else {
        return Ok(());
    };
    match one.validate() {
        Err(model::ModelError::Input { value, allowed, .. }) => {
            Err((format!("{value} is out of range"), allowed.to_string()))
        }
        _ => Ok(()),
    }
}

/// The admissible range of a ROM constant in words (every lower end is at least 0, so -1 is
/// outside each).
fn rom_allowed(key: &str) -> String {
    check_rom_value(key, -1.0)
        .err()
        .map(|(_, allowed)| allowed)
        .unwrap_or_else(|| "finite".to_string())
}

/// The table's name of a section: `stages.2`, `stages.3`, ... are all `stages.N`, and
/// `variables.stage2.pitch` is `variables.pitch`.
pub fn table_section(section: &str) -> &str {
    if let Some(n) = section.strip_prefix("stages.") {
        if stage_number(n).is_some() {
            return "stages.N";
        }
    }
    if let Some(rest) = section.strip_prefix("variables.stage") {
        if let Some((n, name)) = rest.split_once('.') {
            if stage_number(n).is_some() && name != "water_recovery" {
                if let Some((s, _)) = SECTIONS
                    .iter()
                    .find(|(s, _)| s.strip_prefix("variables.") == Some(name))
                {
                    return s;
                }
            }
        }
    }
    section
}

/// The stage number of a `stages.N` suffix: 2 to [`MAX_STAGES`].
pub fn stage_number(suffix: &str) -> Option<usize> {
    suffix
        .parse::<usize>()
        .ok()
        .filter(|n| (2..=MAX_STAGES).contains(n) && suffix == n.to_string())
}

/// Look a key up.
pub fn spec(section: &str, key: &str) -> Option<&'static KeySpec> {
    let section = table_section(section);
    KEYS.iter().find(|s| s.section == section && s.key == key)
}

/// Keys of one section.
pub fn section_keys(section: &str) -> Vec<&'static str> {
    let section = table_section(section);
    KEYS.iter()
        .filter(|s| s.section == section)
        .map(|s| s.key)
        .collect()
}

/// The closest of `candidates` to `word`, if close enough to be a likely typo.
pub fn closest<'a>(word: &str, candidates: impl IntoIterator<Item = &'a str>) -> Option<&'a str> {
    let candidates: Vec<&'a str> = candidates.into_iter().collect();
    // A shortened name (`energy` for `specific_energy`) is a likely intent too.
    let lower = word.to_lowercase();
    if lower.len() >= 4 {
        let containing: Vec<&str> = candidates
            .iter()
            .copied()
            .filter(|c| c.to_lowercase().contains(&lower))
            .collect();
        // Of several (`energy` in `specific_energy` and `plant_specific_energy`), the shortest
        // when it is the only one that short.
        if let Some(&shortest) = containing.iter().min_by_key(|c| c.len()) {
            if containing
                .iter()
                .filter(|c| c.len() == shortest.len())
                .count()
                == 1
            {
                return Some(shortest);
            }
        }
    }
    let mut best: Option<(&str, f64)> = None;
    for c in candidates {
        let score = strsim::jaro_winkler(&word.to_lowercase(), &c.to_lowercase());
        if !matches!(best, Some((_, b)) if score <= b) {
            best = Some((c, score));
        }
    }
    best.filter(|(_, s)| *s >= 0.8).map(|(c, _)| c)
}

fn md_escape(s: &str) -> String {
    s.replace('|', "\\|")
}

/// The reference of every key as Markdown: the text of docs/study-reference.md.
pub fn reference_markdown() -> String {
    let mut out = String::new();
    out.push_str("# Study file reference\n\n");
    out.push_str(
        "Generated from the key table in `studies/src/study/keys.rs` by `stria keys`; a test \
         keeps this file equal to that output.\n\n",
    );
    out.push_str(
        "A study is one TOML file. Every dimensional number carries its unit in the key name \
         (`gap_mm`, `pitch_um`, `velocity_cm_s`, `temperature_C`, `feed_mol_m3`); a key without \
         a unit suffix is dimensionless. Unknown keys are errors (with a suggestion). A value \
         outside \"allowed\" is an error; a value outside \"calibrated\" is accepted with a \
         warning. `stria check STUDY.toml` prints the study with every default made explicit; \
         `stria eval STUDY.toml --set section.key=value` changes one key from the command line.\n\n",
    );
    for (section, doc) in SECTIONS {
        out.push_str(&format!("## [{section}]\n\n{doc}\n\n"));
        out.push_str("| key | type | unit | default | allowed | calibrated | meaning |\n");
        out.push_str("|---|---|---|---|---|---|---|\n");
        for s in KEYS.iter().filter(|s| s.section == *section) {
            let default = match s.default {
                Required => "required".to_string(),
                Value(v) => format!("`{v}`"),
                Derived(d) => d.to_string(),
                Unset => "not set".to_string(),
            };
            let range = s.range.map(|r| r.describe()).unwrap_or_default();
            let cal = s.calibrated.map(|r| r.describe()).unwrap_or_default();
            out.push_str(&format!(
                "| `{}` | {} | {} | {} | {} | {} | {}{} |\n",
                s.key,
                md_escape(&s.kind.describe()),
                s.unit,
                md_escape(&default),
                range,
                cal,
                md_escape(s.doc),
                if s.budget {
                    " May change on resume."
                } else {
                    ""
                }
            ));
        }
        if *section == "rom" {
            for (key, _) in rom_keys() {
                let (unit, meaning) = model::constants::rom_meaning(&key).unwrap_or(("-", ""));
                out.push_str(&format!(
                    "| `{key}` | number | {unit} | the model's value | {} | | ROM constant {}. Default and source: docs/constants.md#rom-constants (`stria check` prints the values in force). |\n",
                    rom_allowed(&key),
                    md_escape(meaning)
                ));
            }
        }
        out.push('\n');
    }
    out.push_str(
        "Bounds of a variable use the unit of their key and must lie in that quantity's allowed \
         range, with lower < upper. A variable whose section is absent is held at its value in \
         the study's baseline design (the values the study file gives).\n",
    );
    out
}

#[cfg(test)]
#[allow(clippy::float_cmp)] // conversion factors are literals of the table
mod tests {
    use super::*;

    /// docs/study-reference.md is generated from this table; regenerate it with
    /// `STRIA_BLESS=1 cargo test -p studies reference` (or `stria keys > docs/study-reference.md`).
    #[test]
    fn reference_doc_matches_the_key_table() {
        let path =
            std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("../docs/study-reference.md");
        let want = reference_markdown();
        if std::env::var_os("STRIA_BLESS").is_some() {
            std::fs::write(&path, &want).unwrap();
        }
        let have = std::fs::read_to_string(&path).unwrap_or_default();
        assert!(
            have == want,
            "docs/study-reference.md is out of date: run `stria keys > docs/study-reference.md`"
        );
    }

    #[test]
    fn table_is_consistent() {
        for s in KEYS {
            assert!(
                SECTIONS.iter().any(|(name, _)| *name == s.section),
                "{}.{} has no section",
                s.section,
                s.key
            );
            assert_eq!(
                KEYS.iter()
                    .filter(|o| o.section == s.section && o.key == s.key)
                    .count(),
                1,
                "{}.{} twice",
                s.section,
                s.key
            );
            if let DefaultValue::Value(lit) = s.default {
                let v: toml_edit::Value = lit.parse().unwrap();
                match s.kind {
                    Kind::Choice(words) => assert!(words.contains(&v.as_str().unwrap())),
                    Kind::Float | Kind::Int => {
                        let x = v.as_float().or(v.as_integer().map(|i| i as f64)).unwrap();
                        if let Some(r) = s.range {
                            assert!(
                                r.contains(x),
                                "default of {}.{} out of range",
                                s.section,
                                s.key
                            );
                        }
                    }
                    _ => {}
                }
            }
        }
        // The unit in a key's name is its unit column: "cm/s" ends the key in `_cm_s`, "Ohm cm2"
        // in `_ohm_cm2` (case aside); a few units read better spelled out in the name.
        let spelled = [
            ("h", "hours"),
            ("%/yr", "percent"),
            ("h/yr", "per_year"),
            ("currency/kWh", "per_kwh"),
            ("currency/m2", "per_m2"),
            ("currency/kW", "per_kw"),
            ("currency", "price_per"),
            ("currency/stack", "per_stack"),
        ];
        for s in KEYS
            .iter()
            .filter(|s| !matches!(s.unit, "-" | "objective units"))
        {
            let name = s.key.to_lowercase();
            let carried = match spelled.iter().find(|(unit, _)| *unit == s.unit) {
                Some((_, spelled_out)) => name.contains(spelled_out),
                None => name.ends_with(&s.unit.replace([' ', '/'], "_").to_lowercase()),
            };
            assert!(
                carried,
                "{}.{} does not carry its unit {} in its name",
                s.section, s.key, s.unit
            );
        }
        // A key with a conversion factor has a unit to convert from.
        for s in KEYS.iter().filter(|s| s.to_si != 1.0) {
            assert_ne!(s.unit, "-", "{}.{}", s.section, s.key);
        }
    }

    /// The default molar masses quoted in the reference are the model's.
    #[test]
    fn quoted_molar_masses_are_the_models() {
        let row = KEYS.iter().find(|s| s.key == "molar_mass_g_mol").unwrap();
        let DefaultValue::Derived(text) = row.default else {
            panic!("molar_mass_g_mol: {:?}", row.default)
        };
        for salt in [model::Salt::NaCl, model::Salt::KCl] {
            let m = model::properties::molar_mass_g_mol(salt).unwrap();
            assert!(text.contains(&format!("{m} for {}", salt.name())), "{text}");
        }
    }

    #[test]
    fn close_typos_are_suggested_and_far_words_are_not() {
        assert_eq!(
            closest("pitch_mu", ["pitch_um", "open_fraction"]),
            Some("pitch_um")
        );
        assert_eq!(closest("zzz", ["pitch_um", "open_fraction"]), None);
        assert_eq!(
            closest("energy", OBJECTIVES.words().iter().copied()),
            Some("specific_energy")
        );
    }
}
