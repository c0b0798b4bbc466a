//! What a study searches: design variables, objectives, constraints and optimiser settings.

use model::plant::PlantEvaluation;
use model::{Design, Drive};
use serde::Serialize;

/// A design quantity that a study can vary.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
pub enum VariableKind {
    /// Stripe pitch.
    Pitch,
    /// Open fraction.
    OpenFraction,
    /// Mean velocity of both streams (the concentrate follows unless given separately).
    Velocity,
    /// Cell-pair voltage (voltage drive).
    CellPairVoltage,
    /// Channel gap (the concentrate gap follows unless given separately).
    Gap,
    /// Channel length.
    Length,
    /// Water recovery of a feed-and-bleed concentrate loop (the plant's, not a stage's).
    WaterRecovery,
}

impl VariableKind {
    /// All, in file order.
    pub const ALL: [VariableKind; 7] = [
        VariableKind::Pitch,
        VariableKind::OpenFraction,
        VariableKind::Velocity,
        VariableKind::CellPairVoltage,
        VariableKind::Gap,
        VariableKind::Length,
        VariableKind::WaterRecovery,
    ];

    /// Name in the study file (`[variables.<name>]`).
    pub fn name(self) -> &'static str {
        match self {
            VariableKind::Pitch => "pitch",
            VariableKind::OpenFraction => "open_fraction",
            VariableKind::Velocity => "velocity",
            VariableKind::CellPairVoltage => "cell_pair_voltage",
            VariableKind::Gap => "gap",
            VariableKind::Length => "length",
            VariableKind::WaterRecovery => "water_recovery",
        }
    }

    /// CSV column and SI name (contract).
    pub fn column(self) -> &'static str {
        match self {
            VariableKind::Pitch => "pitch_m",
            VariableKind::OpenFraction => "open_fraction",
            VariableKind::Velocity => "velocity_m_s",
            VariableKind::CellPairVoltage => "cell_pair_voltage_V",
            VariableKind::Gap => "gap_m",
            VariableKind::Length => "length_m",
            VariableKind::WaterRecovery => "water_recovery",
        }
    }

    /// SI unit.
    pub fn unit(self) -> &'static str {
        match self {
            VariableKind::Pitch | VariableKind::Gap | VariableKind::Length => "m",
            VariableKind::OpenFraction | VariableKind::WaterRecovery => "-",
            VariableKind::Velocity => "m/s",
            VariableKind::CellPairVoltage => "V",
        }
    }

    /// The unit suffix of the bound keys (`lower_um`), and the factor to SI.
    pub fn bound_unit(self) -> (&'static str, f64) {
        match self {
            VariableKind::Pitch => ("_um", 1e-6),
            VariableKind::OpenFraction | VariableKind::WaterRecovery => ("", 1.0),
            VariableKind::Velocity => ("_cm_s", 1e-2),
            VariableKind::CellPairVoltage => ("_V", 1.0),
            VariableKind::Gap => ("_mm", 1e-3),
            VariableKind::Length => ("_m", 1.0),
        }
    }

    /// The value in a cell-pair design, SI (the water recovery is the plant's: NaN here).
    pub fn get(self, d: &Design) -> f64 {
        match self {
            VariableKind::Pitch => d.membranes.pitch_m,
            VariableKind::OpenFraction => d.membranes.open_fraction,
            VariableKind::Velocity => d.operation.velocity_m_s,
            VariableKind::CellPairVoltage => match d.operation.drive {
                Drive::Voltage {
                    cell_pair_voltage_v,
                } => cell_pair_voltage_v,
                Drive::Current { .. } => f64::NAN,
            },
            VariableKind::Gap => d.channel.gap_m,
            VariableKind::Length => d.channel.length_m,
            VariableKind::WaterRecovery => f64::NAN,
        }
    }

    /// Set the value in a cell-pair design (the concentrate gap and velocity too where they
    /// follow); the water recovery is the plant's and is not set here.
    pub fn set(self, d: &mut Design, value: f64, gap_follows: bool, velocity_follows: bool) {
        match self {
            VariableKind::Pitch => d.membranes.pitch_m = value,
            VariableKind::OpenFraction => d.membranes.open_fraction = value,
            VariableKind::Velocity => {
                d.operation.velocity_m_s = value;
                if velocity_follows {
                    d.operation.concentrate_velocity_m_s = value;
                }
            }
            VariableKind::CellPairVoltage => {
                d.operation.drive = Drive::Voltage {
                    cell_pair_voltage_v: value,
                }
            }
            VariableKind::Gap => {
                d.channel.gap_m = value;
                if gap_follows {
                    d.channel.concentrate_gap_m = value;
                }
            }
            VariableKind::Length => d.channel.length_m = value,
            VariableKind::WaterRecovery => {}
        }
    }
}

/// One searched variable, bounds in SI.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct DesignVariable {
    /// Which quantity.
    pub kind: VariableKind,
    /// Lower bound, SI.
    pub lower: f64,
    /// Upper bound, SI.
    pub upper: f64,
    /// The stage it belongs to, 1 for the study's own design (and for the water recovery).
    pub stage: usize,
}

impl DesignVariable {
    /// Its study-file section: `variables.pitch`, or `variables.stage2.pitch` for stage 2.
    pub fn section(&self) -> String {
        if self.stage == 1 {
            format!("variables.{}", self.kind.name())
        } else {
            format!("variables.stage{}.{}", self.stage, self.kind.name())
        }
    }

    /// Its CSV column: `pitch_m`, or `stage2_pitch_m` for stage 2.
    pub fn column(&self) -> String {
        if self.stage == 1 {
            self.kind.column().to_string()
        } else {
            format!("stage{}_{}", self.stage, self.kind.column())
        }
    }
}

/// An objective with its fixed direction.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
pub enum Objective {
    /// Salt removal rate per membrane area, mol/(m2 s), maximised.
    SaltRemovalRate,
    /// Specific energy, kWh/m3, minimised.
    SpecificEnergy,
    /// Membrane cost per production capacity, currency per (m3/day), minimised.
    MembraneCost,
    /// Levelised cost of water, currency/m3, minimised.
    LevelisedCost,
    /// Salt removal fraction, -, maximised.
    SaltRemovalFraction,
    /// Plant specific energy (all stages, electrodes, shunts, rectifier, pumps), kWh/m3, minimised.
    PlantSpecificEnergy,
    /// Plant levelised cost of water, currency/m3, minimised.
    PlantLevelisedCost,
    /// Membrane area of all stages per capacity, m2/(m3/day), minimised.
    PlantMembraneArea,
    /// Water recovery of the plant, -, maximised.
    WaterRecovery,
    /// Highest stack voltage of the stages, V, minimised.
    StackVoltage,
    /// Product concentration of the plant (last stage's diluate outlet), mol/m3, minimised.
    ProductConcentration,
}

impl Objective {
    /// From its study-file key (the table `keys::OBJECTIVES`).
    pub fn from_key(key: &str) -> Option<Objective> {
        super::keys::OBJECTIVES.parse(key)
    }

    /// Study-file key.
    pub fn key(self) -> &'static str {
        match self {
            Objective::SaltRemovalRate => "salt_removal_rate",
            Objective::SpecificEnergy => "specific_energy",
            Objective::MembraneCost => "membrane_cost",
            Objective::LevelisedCost => "levelised_cost",
            Objective::SaltRemovalFraction => "salt_removal_fraction",
            Objective::PlantSpecificEnergy => "plant_specific_energy",
            Objective::PlantLevelisedCost => "plant_levelised_cost",
            Objective::PlantMembraneArea => "plant_membrane_area",
            Objective::WaterRecovery => "water_recovery",
            Objective::StackVoltage => "stack_voltage",
            Objective::ProductConcentration => "product_concentration",
        }
    }

    /// Unit.
    pub fn unit(self) -> &'static str {
        match self {
            Objective::SaltRemovalRate => "mol/(m2 s)",
            Objective::SpecificEnergy => "kWh/m3",
            Objective::MembraneCost => "currency/(m3/day)",
            Objective::LevelisedCost => "currency/m3",
            Objective::SaltRemovalFraction | Objective::WaterRecovery => "-",
            Objective::PlantSpecificEnergy => "kWh/m3",
            Objective::PlantLevelisedCost => "currency/m3",
            Objective::PlantMembraneArea => "m2/(m3/day)",
            Objective::StackVoltage => "V",
            Objective::ProductConcentration => "mol/m3",
        }
    }

    /// CSV column: key and unit.
    pub fn column(self) -> &'static str {
        match self {
            Objective::SaltRemovalRate => "salt_removal_rate_mol_m2_s",
            Objective::SpecificEnergy => "specific_energy_kWh_m3",
            Objective::MembraneCost => "membrane_cost_per_m3_day",
            Objective::LevelisedCost => "levelised_cost_per_m3",
            Objective::SaltRemovalFraction => "salt_removal_fraction",
            Objective::PlantSpecificEnergy => "plant_specific_energy_kWh_m3",
            Objective::PlantLevelisedCost => "plant_levelised_cost_per_m3",
            Objective::PlantMembraneArea => "plant_membrane_area_m2_per_m3_day",
            Objective::WaterRecovery => "water_recovery",
            Objective::StackVoltage => "stack_voltage_V",
            Objective::ProductConcentration => "product_concentration_mol_m3",
        }
    }

    /// Whether larger is better.
    pub fn maximise(self) -> bool {
        matches!(
            self,
            Objective::SaltRemovalRate | Objective::SaltRemovalFraction | Objective::WaterRecovery
        )
    }

    /// "max" or "min".
    pub fn direction(self) -> &'static str {
        if self.maximise() {
            "max"
        } else {
            "min"
        }
    }

    /// Value in its natural direction (cell-pair objectives from the first stage).
    pub fn value(self, p: &PlantEvaluation) -> f64 {
        let e = &p.stage_evaluations[0];
        let plant = &p.plant;
        match self {
            Objective::SaltRemovalRate => e.economics.salt_removal_rate_mol_m2_s,
            Objective::SpecificEnergy => e.performance.specific_energy_kWh_m3,
            Objective::MembraneCost => e.economics.membrane_cost_per_m3_day,
            Objective::LevelisedCost => e.economics.levelised_cost_per_m3,
            Objective::SaltRemovalFraction => e.performance.salt_removal_fraction,
            Objective::PlantSpecificEnergy => plant.specific_energy_kWh_m3,
            Objective::PlantLevelisedCost => plant.levelised_cost_per_m3,
            Objective::PlantMembraneArea => plant.membrane_area_m2_per_m3_day,
            Objective::WaterRecovery => plant.water_recovery,
            Objective::StackVoltage => max_stack_voltage(p),
            Objective::ProductConcentration => plant.product_concentration_mol_m3,
        }
    }

    /// The minimised form the optimiser sees.
    pub fn to_minimised(self, natural: f64) -> f64 {
        if self.maximise() {
            -natural
        } else {
            natural
        }
    }
}

/// An inequality constraint; limits in SI.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub enum Constraint {
    /// Product concentration at most this, mol/m3.
    MaxProduct(f64),
    /// Diluate pressure drop at most this, Pa.
    MaxPressureDrop(f64),
    /// Reynolds number at most this.
    MaxReynolds(f64),
    /// Highest stack voltage of the stages at most this, V.
    MaxStackVoltage(f64),
    /// Plant water recovery at least this.
    MinWaterRecovery(f64),
    /// Concentrate-outlet calcite saturation index at most this.
    MaxConcentrateCalciteSi(f64),
    /// Concentrate-outlet gypsum saturation index at most this.
    MaxConcentrateGypsumSi(f64),
}

/// The highest stack voltage among the stages, V.
pub fn max_stack_voltage(p: &PlantEvaluation) -> f64 {
    p.plant
        .stages
        .iter()
        .map(|s| s.stack.stack_voltage_V)
        .fold(f64::NEG_INFINITY, f64::max)
}

impl Constraint {
    /// Study-file key.
    pub fn key(self) -> &'static str {
        match self {
            Constraint::MaxProduct(_) => "max_product_mol_m3",
            Constraint::MaxPressureDrop(_) => "max_pressure_drop_kPa",
            Constraint::MaxReynolds(_) => "max_reynolds",
            Constraint::MaxStackVoltage(_) => "max_stack_voltage_V",
            Constraint::MinWaterRecovery(_) => "min_water_recovery",
            Constraint::MaxConcentrateCalciteSi(_) => "max_concentrate_calcite_si",
            Constraint::MaxConcentrateGypsumSi(_) => "max_concentrate_gypsum_si",
        }
    }

    /// CSV column of the normalised constraint value g (feasible when g <= 0).
    pub fn column(self) -> &'static str {
        match self {
            Constraint::MaxProduct(_) => "g_product_concentration",
            Constraint::MaxPressureDrop(_) => "g_pressure_drop",
            Constraint::MaxReynolds(_) => "g_reynolds",
            Constraint::MaxStackVoltage(_) => "g_stack_voltage",
            Constraint::MinWaterRecovery(_) => "g_water_recovery",
            Constraint::MaxConcentrateCalciteSi(_) => "g_concentrate_calcite_si",
            Constraint::MaxConcentrateGypsumSi(_) => "g_concentrate_gypsum_si",
        }
    }

    /// The limit.
    pub fn limit(self) -> f64 {
        match self {
            Constraint::MaxProduct(v)
            | Constraint::MaxPressureDrop(v)
            | Constraint::MaxReynolds(v)
            | Constraint::MaxStackVoltage(v)
            | Constraint::MinWaterRecovery(v)
            | Constraint::MaxConcentrateCalciteSi(v)
            | Constraint::MaxConcentrateGypsumSi(v) => v,
        }
    }

    /// The constrained quantity of an evaluation, SI (the product is the plant's).
    pub fn quantity(self, p: &PlantEvaluation) -> f64 {
        let e = &p.stage_evaluations[0];
        let si = |f: fn(&model::plant::ScalingOut) -> f64| p.scaling.as_ref().map_or(f64::NAN, f);
        match self {
            Constraint::MaxProduct(_) => p.plant.product_concentration_mol_m3,
            Constraint::MaxStackVoltage(_) => max_stack_voltage(p),
            Constraint::MinWaterRecovery(_) => p.plant.water_recovery,
            Constraint::MaxConcentrateCalciteSi(_) => si(|s| s.concentrate_calcite_si),
            Constraint::MaxConcentrateGypsumSi(_) => si(|s| s.concentrate_gypsum_si),
            Constraint::MaxPressureDrop(_) => e.hydraulics.pressure_drop_Pa,
            Constraint::MaxReynolds(_) => e.hydraulics.reynolds,
        }
    }

    /// Normalised g (g <= 0 feasible), so violations of different constraints are comparable:
    /// quantity / limit - 1 for an upper limit, 1 - quantity / limit for a lower one, and
    /// SI - limit for a saturation index (already a logarithm; its limit may be 0 or negative).
    pub fn g(self, p: &PlantEvaluation) -> f64 {
        let q = self.quantity(p);
        match self {
            Constraint::MinWaterRecovery(l) => 1.0 - q / l,
            Constraint::MaxConcentrateCalciteSi(l) | Constraint::MaxConcentrateGypsumSi(l) => q - l,
            _ => q / self.limit() - 1.0,
        }
    }

    /// The constrained quantity's name, without a unit (`stria eval --json`).
    pub fn name(self) -> &'static str {
        match self {
            Constraint::MaxProduct(_) => "product_concentration",
            Constraint::MaxPressureDrop(_) => "pressure_drop",
            Constraint::MaxReynolds(_) => "reynolds",
            Constraint::MaxStackVoltage(_) => "stack_voltage",
            Constraint::MinWaterRecovery(_) => "water_recovery",
            Constraint::MaxConcentrateCalciteSi(_) => "concentrate_calcite_si",
            Constraint::MaxConcentrateGypsumSi(_) => "concentrate_gypsum_si",
        }
    }

    /// The constrained quantity in words (design sheet).
    pub fn label(self) -> &'static str {
        match self {
            Constraint::MaxProduct(_) => "product (diluate outlet)",
            Constraint::MaxPressureDrop(_) => "diluate pressure drop",
            Constraint::MaxReynolds(_) => "Reynolds number",
            Constraint::MaxStackVoltage(_) => "stack voltage (largest stage)",
            Constraint::MinWaterRecovery(_) => "water recovery (plant)",
            Constraint::MaxConcentrateCalciteSi(_) => "calcite SI of the concentrate",
            Constraint::MaxConcentrateGypsumSi(_) => "gypsum SI of the concentrate",
        }
    }

    /// SI unit of the value and the limit.
    pub fn unit(self) -> &'static str {
        match self {
            Constraint::MaxProduct(_) => "mol/m3",
            Constraint::MaxPressureDrop(_) => "Pa",
            Constraint::MaxStackVoltage(_) => "V",
            Constraint::MaxReynolds(_)
            | Constraint::MinWaterRecovery(_)
            | Constraint::MaxConcentrateCalciteSi(_)
            | Constraint::MaxConcentrateGypsumSi(_) => "-",
        }
    }

    /// The unit of the study key (and of the design sheet) and the factor from SI to it.
    pub fn key_unit(self) -> (&'static str, f64) {
        match self {
            Constraint::MaxProduct(_) => ("mM", 1.0),
            Constraint::MaxPressureDrop(_) => ("kPa", 1e-3),
            Constraint::MaxStackVoltage(_) => ("V", 1.0),
            Constraint::MaxReynolds(_)
            | Constraint::MinWaterRecovery(_)
            | Constraint::MaxConcentrateCalciteSi(_)
            | Constraint::MaxConcentrateGypsumSi(_) => ("-", 1.0),
        }
    }

    /// Whether the limit is a lower one (the quantity must be at least the limit).
    pub fn is_minimum(self) -> bool {
        matches!(self, Constraint::MinWaterRecovery(_))
    }

    /// Whether a value of the quantity meets the constraint, the limit itself included: at
    /// most the limit, or at least it for a minimum.
    pub fn met_by(self, value: f64) -> bool {
        if self.is_minimum() {
            value >= self.limit()
        } else {
            value <= self.limit()
        }
    }
}

/// Which search.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
pub enum AlgorithmChoice {
    /// NSGA-II.
    Nsga2,
    /// Sweep of scalarised single-objective problems.
    Scalarised,
    /// Space-filling screening sample.
    Screening,
}

impl AlgorithmChoice {
    /// Study-file word.
    pub fn key(self) -> &'static str {
        match self {
            AlgorithmChoice::Nsga2 => "nsga2",
            AlgorithmChoice::Scalarised => "scalarised",
            AlgorithmChoice::Screening => "screening",
        }
    }
}

/// The `[optimizer]` section, checked.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct OptimizerSettings {
    /// Algorithm.
    pub algorithm: AlgorithmChoice,
    /// Seed.
    pub seed: u64,
    /// Population or batch size.
    pub population: usize,
    /// Evaluation budget.
    pub max_evaluations: u64,
    /// Wall-clock budget, hours.
    pub hours: Option<f64>,
    /// Stall criterion, generations.
    pub stall_generations: Option<u64>,
    /// Archive grid, per objective in natural units.
    pub archive_epsilon: Option<Vec<f64>>,
    /// Scalarised: the single-objective solver.
    pub solver: optimizer::Solver,
    /// Scalarised: how the objectives are combined.
    pub scalarisation: optimizer::Scalarisation,
    /// Scalarised: number of sub-problems.
    pub subproblems: usize,
    /// Screening: the sampler.
    pub sampler: optimizer::InitialDesign,
}
