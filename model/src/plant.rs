//! A plant: stages in series (the diluate of each feeds the next), each stage a set of identical
//! stacks in parallel with its own cell-pair design, and a concentrate stream that is either
//! once-through or a feed-and-bleed loop whose make-up and bleed set the water recovery.
//!
//! **Flows.** The plant is sized to the product capacity Q_p (`Economics::plant_capacity_m3_day`
//! of the first stage's design). Each stage passes the whole diluate flow Q_p through
//! Q_p / q_d,i cell pairs in parallel (q_d,i its cell pair's diluate flow), grouped in stacks of
//! N_i cell pairs: ceil(Q_p / (N_i q_d,i)) stacks. Its concentrate flow is Q_c,i = Q_p q_c,i / q_d,i.
//! The plant's flows assume that no water crosses the membranes, so its stages are evaluated
//! with the cell-pair model's water transport (osmosis, electro-osmosis) switched off and the
//! diluate flow is the same in every stage; the other effects of real membranes stay as the
//! stage designs have them. (Carrying each stage's water loss into the next stage's flow is
//! not done yet.)
//!
//! **Once-through concentrate.** Every stage's concentrate enters at the first stage's
//! concentrate feed and leaves to drain: water recovery r = Q_p / (Q_p + sum Q_c,i).
//!
//! **Feed-and-bleed.** All stages draw their concentrate from one well-mixed loop (tank) at
//! c_L and return it there; feed water at c_f makes up what the bleed takes out. The recovery r
//! is the design's: make-up = bleed = Q_b = Q_p (1 - r) / r. The loop's steady state is the root
//! of the tank's salt balance
//!   h(c_L) = [Q_b c_f + sum Q_c,i c_c,out,i(c_L)] / (sum Q_c,i + Q_b) - c_L = 0,
//! whose outlets c_c,out,i depend on c_L through the whole stage evaluations (the concentrate's
//! conductivity, and back-diffusion and osmosis where the membrane model has them). It is
//! solved by secant steps from the feed and the one-pass estimate c_f + removal / Q_b, kept inside
//! the bracket the evaluated points give (bisection otherwise), to |h| <= [`LOOP_TOLERANCE`] c_L.
//!
//! **Energy** per m^3 of product: each stage's stack power (cell pairs, electrodes, shunt
//! currents, rectifier losses: [`crate::stack`]) over its flow, plus both pumping loops as the
//! cell-pair model gives them (diluate and concentrate channel pressure drops at the pump
//! efficiency); manifolds, piping and the make-up pump are left out. Summed over the stages,
//! which all pass the same product flow.
//!
//! **Levelised cost** of water at plant level: membranes (with the pattern surcharge) annuitised
//! over the membrane life, as in [`crate::energy::levelised_cost`]; electrodes, spacers, stack
//! hardware and rectifiers ([`PlantCosts`]) over the plant life; energy at the electricity price.
//!
//! With one stage of one cell pair ([`crate::stack::Stack::single_cell_pair`]), once-through
//! concentrate and no extra costs, every number is the cell-pair evaluation's, bit for bit.

use crate::energy::{capital_recovery_factor, levelised_cost, J_PER_KWH};
use crate::output::{Evaluation, Warning};
use crate::scaling::{screen, ScalingResult, WaterAnalysis};
use crate::stack::{evaluate_stack, CellPairPoint, Stack, StackResult};
use crate::{evaluate, Design, ModelError, Options, RomConstants};
use serde::{Deserialize, Serialize};

/// Relative tolerance of the concentrate loop's salt balance (|h| <= tol c_L).
pub const LOOP_TOLERANCE: f64 = 1e-10;
/// Largest number of loop evaluations (all stages each) before the loop is declared unsolved.
pub const LOOP_MAX_EVALUATIONS: usize = 60;

/// One stage: a cell-pair design and its stack.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct Stage {
    /// The cell pair (its feed concentrations are set by the plant, except the first stage's
    /// diluate feed and, once-through, its concentrate feed).
    pub design: Design,
    /// The stack.
    pub stack: Stack,
}

/// How the concentrate flows.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub enum ConcentrateLoop {
    /// Fed with feed water (the first stage's concentrate feed), then to drain.
    OnceThrough,
    /// Recirculated with a make-up of feed water and an equal bleed.
    FeedAndBleed {
        /// Water recovery, product / (product + bleed), 0..1.
        water_recovery: f64,
    },
}

/// Capital items beyond the membranes, and the life over which they are annuitised.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct PlantCosts {
    /// Electrode price per m^2 of electrode (two per stack, each of the cell area), currency.
    pub electrode_price_per_m2: f64,
    /// Spacer price per m^2 (two per cell pair, each of the cell area), currency.
    pub spacer_price_per_m2: f64,
    /// Stack hardware (end plates, frames, tie rods, manifolds) per stack, currency.
    pub stack_hardware_price_per_stack: f64,
    /// Rectifier price per kW of rated DC output, currency.
    pub rectifier_price_per_kW: f64,
    /// Life of everything but the membranes, years.
    pub plant_life_years: f64,
}

impl PlantCosts {
    /// No capital beyond the membranes (the cell-pair model's levelised cost).
    pub fn none() -> PlantCosts {
        PlantCosts {
            electrode_price_per_m2: 0.0,
            spacer_price_per_m2: 0.0,
            stack_hardware_price_per_stack: 0.0,
            rectifier_price_per_kW: 0.0,
            plant_life_years: 20.0,
        }
    }
}

/// A plant.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Plant {
    /// Stages in flow order, at least one.
    pub stages: Vec<Stage>,
    /// The concentrate stream.
    pub concentrate_loop: ConcentrateLoop,
    /// Capital beyond the membranes.
    pub costs: PlantCosts,
    /// Optional water analysis of the feed, for the scaling screen.
    pub analysis: Option<WaterAnalysis>,
}

impl Plant {
    /// One stage of `design` with a single cell pair, once-through, no extra costs: the
    /// cell-pair model as a plant.
    pub fn single(design: Design) -> Plant {
        Plant {
            stages: vec![Stage {
                design,
                stack: Stack::single_cell_pair(),
            }],
            concentrate_loop: ConcentrateLoop::OnceThrough,
            costs: PlantCosts::none(),
            analysis: None,
        }
    }
}

/// One stage's outputs.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct StageOut {
    /// Diluate inlet, mol/m^3.
    pub inlet_concentration_mol_m3: f64,
    /// Diluate outlet, mol/m^3.
    pub outlet_concentration_mol_m3: f64,
    /// Concentrate inlet, mol/m^3.
    pub concentrate_inlet_concentration_mol_m3: f64,
    /// Concentrate outlet, mol/m^3.
    pub concentrate_outlet_concentration_mol_m3: f64,
    /// Mean current density, A/m^2.
    pub mean_current_density_A_m2: f64,
    /// Mean current density over the Peers limit at the stage's inlet, -.
    pub current_over_limiting: f64,
    /// Stripe pitch of the stage's membranes, m.
    pub pitch_m: f64,
    /// Cell-pair voltage, V.
    pub cell_pair_voltage_V: f64,
    /// The stage's stack.
    pub stack: StackResult,
    /// Stacks in parallel in this stage.
    pub stacks_in_parallel: u64,
    /// Electrical energy of the stage's stacks (electrodes, shunts, rectifier), kWh per m^3 of product.
    pub electrical_energy_kWh_m3: f64,
    /// Pumping energy of the stage (both streams), kWh per m^3 of product.
    pub pumping_energy_kWh_m3: f64,
    /// Concentrate flow of the stage, m^3/day.
    pub concentrate_flow_m3_day: f64,
}

/// The plant's outputs.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct PlantOut {
    /// Per stage, in flow order.
    pub stages: Vec<StageOut>,
    /// Product / (product + water drained with the concentrate), -.
    pub water_recovery: f64,
    /// Product (last stage's diluate outlet), mol/m^3.
    pub product_concentration_mol_m3: f64,
    /// Product flow the plant is sized to, m^3/day.
    pub product_flow_m3_day: f64,
    /// Electrical plus pumping energy, kWh per m^3 of product.
    pub specific_energy_kWh_m3: f64,
    /// Levelised cost of water, currency per m^3 of product.
    pub levelised_cost_per_m3: f64,
    /// Membrane area (all stages, CEM and AEM) per product capacity, m^2 per (m^3/day).
    pub membrane_area_m2_per_m3_day: f64,
    /// Concentrate loop concentration (feed-and-bleed), mol/m^3; None once-through.
    pub concentrate_loop_concentration_mol_m3: Option<f64>,
    /// Bleed (feed-and-bleed) or drained concentrate (once-through) flow, m^3/day.
    pub concentrate_discharge_m3_day: f64,
    /// Evaluations of all stages the loop solve took (1 once-through).
    pub loop_evaluations: u32,
    /// Relative salt-balance residual of the loop at the solution, |h| / c_L (0 once-through).
    pub loop_residual: f64,
}

/// Scaling screen outputs.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct ScalingOut {
    /// Feed calcite saturation index.
    pub feed_calcite_si: f64,
    /// Feed gypsum saturation index.
    pub feed_gypsum_si: f64,
    /// Concentrate-outlet calcite saturation index.
    pub concentrate_calcite_si: f64,
    /// Concentrate-outlet gypsum saturation index.
    pub concentrate_gypsum_si: f64,
    /// The concentrate factor applied to every ion, -.
    pub concentrate_factor: f64,
    /// Charge imbalance of the analysis, percent.
    pub charge_imbalance_percent: f64,
}

/// A whole plant evaluation.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct PlantEvaluation {
    /// Each stage's cell-pair evaluation, in flow order.
    pub stage_evaluations: Vec<Evaluation>,
    /// Plant outputs.
    pub plant: PlantOut,
    /// Scaling screen; None without an analysis.
    pub scaling: Option<ScalingOut>,
    /// Plant-level warnings (stack voltage, scaling); the stages' own are in their evaluations.
    pub warnings: Vec<Warning>,
}

/// The stages evaluated at one concentrate inlet (None: each stage's own concentrate feed, the
/// first stage's).
fn run_stages(
    p: &Plant,
    concentrate_in: Option<f64>,
    k: &RomConstants,
    o: &Options,
) -> Result<Vec<Evaluation>, ModelError> {
    let mut out: Vec<Evaluation> = Vec::with_capacity(p.stages.len());
    let first = &p.stages[0].design.water;
    for (i, s) in p.stages.iter().enumerate() {
        let mut d = s.design;
        if i > 0 {
            d.water.feed_concentration_mol_m3 = out[i - 1].performance.outlet_concentration_mol_m3;
            d.water.concentrate_feed_concentration_mol_m3 =
                first.concentrate_feed_concentration_mol_m3;
        }
        if let Some(c) = concentrate_in {
            d.water.concentrate_feed_concentration_mol_m3 = c;
        }
        // The plant's flow bookkeeping has no water crossing the membranes (module docs).
        d.membranes.physics.water_transport = false;
        out.push(evaluate(&d, k, o)?);
    }
    Ok(out)
}

/// Evaluate a plant.
pub fn evaluate_plant(
    p: &Plant,
    k: &RomConstants,
    o: &Options,
) -> Result<PlantEvaluation, ModelError> {
    if p.stages.is_empty() {
        return Err(ModelError::Input {
            field: "stages",
            value: 0.0,
            allowed: "at least one stage",
        });
    }
    let first = p.stages[0].design;
    let c_f = first.water.feed_concentration_mol_m3;
    let q_p = first.economics.plant_capacity_m3_day / 86_400.0;
    // Per unit product flow: each stage's concentrate flow.
    let conc_per_product: Vec<f64> = p
        .stages
        .iter()
        .map(|s| {
            let c = &s.design.channel;
            let op = &s.design.operation;
            (c.concentrate_gap_m * op.concentrate_velocity_m_s) / (c.gap_m * op.velocity_m_s)
        })
        .collect();
    let q_c_sum: f64 = conc_per_product.iter().sum::<f64>() * q_p;

    let (evals, loop_c, discharge, evaluations, residual) = match p.concentrate_loop {
        ConcentrateLoop::OnceThrough => (run_stages(p, None, k, o)?, None, q_c_sum, 1, 0.0),
        ConcentrateLoop::FeedAndBleed { water_recovery: r } => {
            if !(r.is_finite() && r > 0.0 && r < 1.0) {
                return Err(ModelError::Input {
                    field: "water_recovery",
                    value: r,
                    allowed: "between 0 and 1 (exclusive)",
                });
            }
            let q_b = q_p * (1.0 - r) / r;
            let (evals, c_l, n, res) = solve_loop(p, k, o, c_f, q_p, q_b, &conc_per_product)?;
            (evals, Some(c_l), q_b, n, res)
        }
    };

    let crf_m = capital_recovery_factor(
        first.economics.discount_rate,
        first.economics.membrane_life_years,
    );
    let crf_p = capital_recovery_factor(first.economics.discount_rate, p.costs.plant_life_years);
    let e = &first.economics;
    let mut stages = Vec::with_capacity(evals.len());
    let mut specific = 0.0;
    let mut membrane_cost = 0.0;
    let mut other_capital = 0.0;
    let mut area = 0.0;
    let mut warnings = Vec::new();
    for (i, (s, ev)) in p.stages.iter().zip(&evals).enumerate() {
        let perf = &ev.performance;
        let point = CellPairPoint {
            voltage_v: ev.inputs.cell_pair_voltage_V,
            current_a: perf.cell_current_A,
            gap_m: s.design.channel.gap_m,
            concentrate_gap_m: s.design.channel.concentrate_gap_m,
            salt: s.design.water.salt,
            temperature_k: s.design.water.temperature_k,
            concentrations_mol_m3: [
                ev.inputs.feed_concentration_mol_m3,
                perf.outlet_concentration_mol_m3,
                loop_c.unwrap_or(first.water.concentrate_feed_concentration_mol_m3),
                perf.concentrate_outlet_concentration_mol_m3,
            ],
        };
        let st = evaluate_stack(&s.stack, &point)?;
        for mut w in crate::stack::warnings(&st) {
            w.message = format!("stage {}: {}", i + 1, w.message);
            warnings.push(w);
        }
        let n = s.stack.cell_pairs as f64;
        let q_d = perf.diluate_flow_m3_s;
        let electrical = st.stack_voltage_V * st.stack_current_A
            / s.stack.rectifier_efficiency
            / (n * q_d)
            / J_PER_KWH;
        let pumping = perf.pumping_energy_kWh_m3;
        specific += electrical + pumping;
        membrane_cost += ev.economics.membrane_cost_per_m3_day;
        area += ev.economics.membrane_area_m2_per_m3_day;
        let stacks = (q_p / (n * q_d)).ceil().max(1.0);
        // Other capital per unit daily capacity: per stack, electrodes and hardware; per cell
        // pair, spacers; per kW, the rectifier (rated at one stack's DC power).
        let cell_area = ev.inputs.length_m * ev.inputs.width_m;
        let per_stack = 2.0 * cell_area * p.costs.electrode_price_per_m2
            + n * 2.0 * cell_area * p.costs.spacer_price_per_m2
            + p.costs.stack_hardware_price_per_stack
            + st.stack_voltage_V * st.stack_current_A / 1000.0 * p.costs.rectifier_price_per_kW;
        other_capital += stacks * per_stack / e.plant_capacity_m3_day;
        let ilim = ev.transfer.limiting_current_density_feed_A_m2;
        stages.push(StageOut {
            inlet_concentration_mol_m3: ev.inputs.feed_concentration_mol_m3,
            outlet_concentration_mol_m3: perf.outlet_concentration_mol_m3,
            concentrate_inlet_concentration_mol_m3: point.concentrations_mol_m3[2],
            concentrate_outlet_concentration_mol_m3: perf.concentrate_outlet_concentration_mol_m3,
            mean_current_density_A_m2: perf.mean_current_density_A_m2,
            current_over_limiting: perf.mean_current_density_A_m2 / ilim,
            pitch_m: ev.inputs.pitch_m,
            cell_pair_voltage_V: ev.inputs.cell_pair_voltage_V,
            stack: st,
            stacks_in_parallel: stacks as u64,
            electrical_energy_kWh_m3: electrical,
            pumping_energy_kWh_m3: pumping,
            concentrate_flow_m3_day: conc_per_product[i] * e.plant_capacity_m3_day,
        });
    }
    let lcow = levelised_cost(
        membrane_cost,
        crf_m,
        e.operating_hours_per_year,
        specific,
        e.electricity_price_per_kwh,
    ) + other_capital * crf_p / (e.operating_hours_per_year / 24.0);
    let water_recovery = match (p.concentrate_loop, evals.len()) {
        (ConcentrateLoop::FeedAndBleed { water_recovery }, _) => water_recovery,
        // One stage: the cell pair's own figure, q_d / (q_d + q_c).
        (ConcentrateLoop::OnceThrough, 1) => evals[0].performance.water_recovery,
        (ConcentrateLoop::OnceThrough, _) => q_p / (q_p + q_c_sum),
    };
    let last = evals.last().expect("at least one stage");
    let scaling = match &p.analysis {
        Some(a) => {
            // The saltiest concentrate that leaves a stage, over the feed.
            let c_max = stages
                .iter()
                .map(|s| s.concentrate_outlet_concentration_mol_m3)
                .fold(0.0, f64::max);
            let r = screen(a, (c_max / c_f).max(1.0))?;
            warnings.extend(crate::scaling::warnings(&r));
            Some(scaling_out(&r))
        }
        None => None,
    };
    Ok(PlantEvaluation {
        plant: PlantOut {
            stages,
            water_recovery,
            product_concentration_mol_m3: last.performance.outlet_concentration_mol_m3,
            product_flow_m3_day: e.plant_capacity_m3_day,
            specific_energy_kWh_m3: specific,
            levelised_cost_per_m3: lcow,
            membrane_area_m2_per_m3_day: area,
            concentrate_loop_concentration_mol_m3: loop_c,
            concentrate_discharge_m3_day: discharge * 86_400.0,
            loop_evaluations: evaluations,
            loop_residual: residual,
        },
        stage_evaluations: evals,
        scaling,
        warnings,
    })
}

fn scaling_out(r: &ScalingResult) -> ScalingOut {
    ScalingOut {
        feed_calcite_si: r.feed.calcite_si,
        feed_gypsum_si: r.feed.gypsum_si,
        concentrate_calcite_si: r.concentrate.calcite_si,
        concentrate_gypsum_si: r.concentrate.gypsum_si,
        concentrate_factor: r.concentrate_factor,
        charge_imbalance_percent: r.charge_imbalance_percent,
    }
}

/// The feed-and-bleed steady state: returns the stages at the solution, c_L, the number of
/// evaluations of all stages, and the relative residual |h| / c_L.
#[allow(clippy::too_many_arguments)]
fn solve_loop(
    p: &Plant,
    k: &RomConstants,
    o: &Options,
    c_f: f64,
    q_p: f64,
    q_b: f64,
    conc_per_product: &[f64],
) -> Result<(Vec<Evaluation>, f64, u32, f64), ModelError> {
    let q_c: Vec<f64> = conc_per_product.iter().map(|x| x * q_p).collect();
    let q_c_sum: f64 = q_c.iter().sum();
    // h(c_L) of the module docs, and the stages there.
    let h = |c_l: f64| -> Result<(f64, Vec<Evaluation>), ModelError> {
        let ev = run_stages(p, Some(c_l), k, o)?;
        let returned: f64 = ev
            .iter()
            .zip(&q_c)
            .map(|(e, q)| q * e.performance.concentrate_outlet_concentration_mol_m3)
            .sum();
        Ok(((q_b * c_f + returned) / (q_c_sum + q_b) - c_l, ev))
    };
    let hi_limit = crate::validity::FEED_MAX_MOL_M3;
    let (mut x0, (mut h0, ev0)) = (c_f, h(c_f)?);
    let mut count = 1u32;
    if h0.abs() <= LOOP_TOLERANCE * c_f {
        return Ok((ev0, c_f, count, h0.abs() / c_f));
    }
    // The one-pass estimate: what the stages add at c_L = c_f, all of it to the bleed.
    let added: f64 = ev0
        .iter()
        .zip(&q_c)
        .map(|(e, q)| q * (e.performance.concentrate_outlet_concentration_mol_m3 - c_f))
        .sum();
    // h > 0 below the root (the stages add salt), h < 0 above it.
    let mut lo = c_f;
    let mut hi: Option<f64> = None;
    let mut x1 = (c_f + added / q_b).min(hi_limit);
    loop {
        let (h1, ev1) = h(x1)?;
        count += 1;
        if h1.abs() <= LOOP_TOLERANCE * x1 {
            return Ok((ev1, x1, count, h1.abs() / x1));
        }
        if count as usize >= LOOP_MAX_EVALUATIONS {
            return Err(ModelError::Numerical(format!(
                "concentrate loop not solved to {LOOP_TOLERANCE} in {LOOP_MAX_EVALUATIONS} \
                 evaluations (residual {:e} at {x1} mol/m^3)",
                h1.abs() / x1
            )));
        }
        if h1 > 0.0 {
            lo = lo.max(x1);
        } else {
            hi = Some(hi.map_or(x1, |h: f64| h.min(x1)));
        }
        if h1 > 0.0 && x1 >= hi_limit {
            return Err(ModelError::Numerical(format!(
                "concentrate loop concentration above {hi_limit} mol/m^3 (lower the recovery)"
            )));
        }
        // Secant step, kept inside the bracket (bisection or doubling otherwise).
        let secant = x1 - h1 * (x1 - x0) / (h1 - h0);
        let upper = hi.unwrap_or(hi_limit);
        let x2 = if secant.is_finite() && secant > lo && secant < upper {
            secant
        } else if let Some(h) = hi {
            0.5 * (lo + h)
        } else {
            (2.0 * x1).min(hi_limit)
        };
        (x0, h0) = (x1, h1);
        x1 = x2;
    }
}

#[cfg(test)]
#[allow(clippy::float_cmp)] // the plant copies the cell-pair numbers; they must match bit for bit
mod tests {
    use super::*;
    use crate::stack::ShuntGeometry;

    fn two_stage(recovery: Option<f64>) -> Plant {
        let d = Design::demo();
        let mut second = d;
        second.membranes.pitch_m = 80e-6;
        second.operation.drive = crate::Drive::Voltage {
            cell_pair_voltage_v: 1.6,
        };
        let stack = Stack {
            cell_pairs: 200,
            electrode_voltage_v: 2.5,
            rectifier_efficiency: 0.95,
            shunt: Some(ShuntGeometry::typical()),
        };
        Plant {
            stages: vec![
                Stage { design: d, stack },
                Stage {
                    design: second,
                    stack,
                },
            ],
            concentrate_loop: match recovery {
                Some(r) => ConcentrateLoop::FeedAndBleed { water_recovery: r },
                None => ConcentrateLoop::OnceThrough,
            },
            costs: PlantCosts::none(),
            analysis: None,
        }
    }

    #[test]
    fn one_stage_of_one_cell_pair_is_the_cell_pair_model_exactly() {
        // The plant evaluates its stages without water transport (module docs).
        let mut d = Design::demo();
        d.membranes.physics.water_transport = false;
        let (k, o) = (RomConstants::default(), Options::default());
        let cell = evaluate(&d, &k, &o).unwrap();
        let p = evaluate_plant(&Plant::single(d), &k, &o).unwrap();
        assert_eq!(p.stage_evaluations[0], cell);
        let perf = &cell.performance;
        assert_eq!(p.plant.specific_energy_kWh_m3, perf.specific_energy_kWh_m3);
        assert_eq!(
            p.plant.levelised_cost_per_m3,
            cell.economics.levelised_cost_per_m3
        );
        assert_eq!(p.plant.water_recovery, perf.water_recovery);
        assert_eq!(
            p.plant.product_concentration_mol_m3,
            perf.outlet_concentration_mol_m3
        );
        assert_eq!(
            p.plant.stages[0].electrical_energy_kWh_m3,
            perf.electrical_energy_kWh_m3
        );
        assert_eq!(
            p.plant.membrane_area_m2_per_m3_day,
            cell.economics.membrane_area_m2_per_m3_day
        );
        let st = &p.plant.stages[0].stack;
        assert_eq!(st.stack_voltage_V, cell.inputs.cell_pair_voltage_V);
        assert_eq!(st.stack_current_A, perf.cell_current_A);
    }

    /// Salt in minus salt out over salt in, and the same for water.
    fn balances(p: &Plant, e: &PlantEvaluation) -> (f64, f64) {
        let d = &p.stages[0].design;
        let c_f = d.water.feed_concentration_mol_m3;
        let q_p = d.economics.plant_capacity_m3_day;
        let out = &e.plant;
        let q_out = out.concentrate_discharge_m3_day;
        let (feed_water, salt_in, salt_out) = match out.concentrate_loop_concentration_mol_m3 {
            Some(c_l) => (
                q_p + q_out,
                (q_p + q_out) * c_f,
                q_p * out.product_concentration_mol_m3 + q_out * c_l,
            ),
            None => {
                let c_in = d.water.concentrate_feed_concentration_mol_m3;
                let conc_out: f64 = out
                    .stages
                    .iter()
                    .map(|s| s.concentrate_flow_m3_day * s.concentrate_outlet_concentration_mol_m3)
                    .sum();
                (
                    q_p + q_out,
                    q_p * c_f + q_out * c_in,
                    q_p * out.product_concentration_mol_m3 + conc_out,
                )
            }
        };
        let water = (feed_water - q_p - q_out) / feed_water;
        ((salt_in - salt_out) / salt_in, water)
    }

    #[test]
    fn stages_in_series_and_the_loop_close_their_balances() {
        // Conservation of salt and water around the plant (the loop solved to LOOP_TOLERANCE;
        // the cell-pair model's own salt balance between its streams closes to about 1e-11).
        let (k, o) = (RomConstants::default(), Options::default());
        for r in [None, Some(0.8), Some(0.9)] {
            let p = two_stage(r);
            let e = evaluate_plant(&p, &k, &o).unwrap();
            let s = &e.plant.stages;
            // The diluate of stage 1 feeds stage 2.
            assert_eq!(
                s[1].inlet_concentration_mol_m3,
                s[0].outlet_concentration_mol_m3
            );
            let (salt, water) = balances(&p, &e);
            assert!(salt.abs() < 1e-9, "{salt}");
            assert!(water.abs() < 1e-14, "{water}");
            if let Some(r) = r {
                assert!(e.plant.loop_residual <= LOOP_TOLERANCE);
                assert_eq!(e.plant.water_recovery, r);
            }
        }
    }
}
