//! What the uncertain ROM constants do to the results: seeded draws of the constants from
//! their priors ([`priors`]), percentiles of one design's outputs (`stria eval --samples`),
//! and Sobol sensitivity indices of a study's outputs ([`sensitivity`], `stria sensitivity`).
//!
//! A draw is a pure function of the seed: the constants are drawn in the fixed order of
//! [`priors::priors`] from one `ChaCha8Rng` on the calling thread, then evaluated in parallel
//! with an order-preserving collect, so the same seed gives the same numbers whatever the
//! thread count.

pub mod priors;
pub mod sensitivity;

use std::fmt::Write as _;

use model::plant::{evaluate_plant, Plant};
use model::{Evaluation, Options, RomConstants};
use optimizer::sampling::percentile;
use rand::SeedableRng;
use rand_chacha::ChaCha8Rng;
use rayon::prelude::*;
use serde::Serialize;

use crate::eval::sig;
use priors::Prior;

/// An output reported with its uncertainty: key (SI, as in the JSON), label and unit of the
/// sheet, factor from SI to the sheet's unit, and how to read it from an evaluation.
pub struct Output {
    /// Key in the JSON `uncertainty` object (SI value).
    pub key: &'static str,
    /// Label on the design sheet.
    pub label: &'static str,
    /// Unit on the design sheet ("{currency}" is replaced by the study's currency).
    pub unit: &'static str,
    /// Factor from the SI value to the sheet's unit.
    pub factor: f64,
    /// The SI value of an evaluation.
    pub get: fn(&Evaluation) -> f64,
}

/// The outputs whose percentiles `stria eval --samples` gives.
pub const OUTPUTS: [Output; 9] = [
    Output {
        key: "outlet_concentration_mol_m3",
        label: "product (diluate outlet)",
        unit: "mM",
        factor: 1.0,
        get: |e| e.performance.outlet_concentration_mol_m3,
    },
    Output {
        key: "salt_removal_fraction",
        label: "salt removal",
        unit: "%",
        factor: 100.0,
        get: |e| e.performance.salt_removal_fraction,
    },
    Output {
        key: "mean_current_density_A_m2",
        label: "mean current density",
        unit: "A/m2",
        factor: 1.0,
        get: |e| e.performance.mean_current_density_A_m2,
    },
    Output {
        key: "current_efficiency",
        label: "current efficiency",
        unit: "%",
        factor: 100.0,
        get: |e| e.performance.current_efficiency,
    },
    Output {
        key: "specific_energy_kWh_m3",
        label: "specific energy",
        unit: "kWh/m3",
        factor: 1.0,
        get: |e| e.performance.specific_energy_kWh_m3,
    },
    Output {
        key: "active_area_fraction",
        label: "active-area fraction",
        unit: "-",
        factor: 1.0,
        get: |e| e.performance.active_area_fraction,
    },
    Output {
        key: "salt_removal_rate_mol_m2_s",
        label: "salt removal rate",
        unit: "mol/(m2 s)",
        factor: 1.0,
        get: |e| e.economics.salt_removal_rate_mol_m2_s,
    },
    Output {
        key: "membrane_area_m2_per_m3_day",
        label: "membrane area per capacity",
        unit: "m2/(m3/day)",
        factor: 1.0,
        get: |e| e.economics.membrane_area_m2_per_m3_day,
    },
    Output {
        key: "levelised_cost_per_m3",
        label: "levelised cost of water",
        unit: "{currency}/m3",
        factor: 1.0,
        get: |e| e.economics.levelised_cost_per_m3,
    },
];

/// `n` sets of constants: `base` with the constants of `priors` drawn from them, all from
/// one generator seeded with `seed`, in the order of `priors` within each draw.
pub fn draw_constants(
    base: &RomConstants,
    priors: &[Prior],
    n: usize,
    seed: u64,
) -> Result<Vec<RomConstants>, String> {
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    let keys: Vec<&str> = priors.iter().map(|p| p.key).collect();
    (0..n)
        .map(|_| {
            let values: Vec<f64> = priors
                .iter()
                .map(|p| p.distribution.draw(&mut rng))
                .collect();
            priors::with_values(base, &keys, &values)
        })
        .collect()
}

/// Percentiles of one output over the draws.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct OutputPercentiles {
    /// Output key (see [`OUTPUTS`]); values in SI.
    pub output: String,
    /// 5th percentile.
    pub p5: f64,
    /// Median.
    pub p50: f64,
    /// 95th percentile.
    pub p95: f64,
}

/// The uncertainty of one design: the `uncertainty` object of `stria eval --samples --json`.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Uncertainty {
    /// Draws asked for.
    pub samples: usize,
    /// Seed of the draws.
    pub seed: u64,
    /// Draws the model could not evaluate (left out of the percentiles).
    pub failed: usize,
    /// The constants drawn, with their distributions.
    pub varied: Vec<VariedConstant>,
    /// Constants the study sets itself, held at its values.
    pub held: Vec<String>,
    /// Percentiles of each output (SI).
    pub outputs: Vec<OutputPercentiles>,
    /// The design against its unpatterned twin under the same draws (absent when the design
    /// is itself unpatterned).
    pub patterning: Option<PatterningComparison>,
}

/// The patterned design against the same design with open fraction 1 at the same operating
/// point (the project's unpatterned baseline), evaluated at the same draws of the constants.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct PatterningComparison {
    /// Draws at which both evaluations succeeded.
    pub draws_compared: usize,
    /// Share of those draws at which the patterned design's levelised cost is lower.
    pub probability_patterning_cheaper: f64,
    /// Levelised cost, patterned / unpatterned: percentiles over the draws.
    pub levelised_cost_ratio: OutputPercentiles,
    /// Salt removal rate, patterned / unpatterned: percentiles over the draws.
    pub salt_removal_rate_ratio: OutputPercentiles,
}

fn percentiles_of(name: &str, v: &[f64]) -> OutputPercentiles {
    OutputPercentiles {
        output: name.to_string(),
        p5: percentile(v, 0.05),
        p50: percentile(v, 0.5),
        p95: percentile(v, 0.95),
    }
}

/// A varied constant and its prior, for the record.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct VariedConstant {
    /// The `[rom]` key.
    pub key: String,
    /// Its prior.
    pub prior: optimizer::sampling::Distribution,
}

/// Evaluate `plant` at `n` draws of the constants around `base` (seeded with `seed`); the
/// outputs are those of its first stage's cell pair (the design sheet's).
///
/// With `unpatterned` (the same plant with open fraction 1), both are evaluated at the same
/// draws and compared ([`PatterningComparison`]).
pub fn of_design(
    plant: &Plant,
    unpatterned: Option<&Plant>,
    base: &RomConstants,
    n: usize,
    seed: u64,
) -> Result<Uncertainty, String> {
    let (varied, held) = priors::priors_for(base);
    let draws = draw_constants(base, &varied, n, seed)?;
    let first_stage = |plant: &Plant, k: &RomConstants| {
        let mut p = evaluate_plant(plant, k, &Options::default()).ok()?;
        (!p.stage_evaluations.is_empty()).then(|| p.stage_evaluations.swap_remove(0))
    };
    let evals: Vec<Option<Evaluation>> = draws.par_iter().map(|k| first_stage(plant, k)).collect();
    let patterning = unpatterned.map(|u| {
        let plain: Vec<Option<Evaluation>> = draws.par_iter().map(|k| first_stage(u, k)).collect();
        let pairs: Vec<(&Evaluation, &Evaluation)> = evals
            .iter()
            .zip(&plain)
            .filter_map(|(a, b)| Some((a.as_ref()?, b.as_ref()?)))
            .collect();
        let ratio = |f: fn(&Evaluation) -> f64| -> Vec<f64> {
            pairs
                .iter()
                .map(|(a, b)| f(a) / f(b))
                .filter(|r| r.is_finite())
                .collect()
        };
        let cheaper = pairs
            .iter()
            .filter(|(a, b)| a.economics.levelised_cost_per_m3 < b.economics.levelised_cost_per_m3)
            .count();
        PatterningComparison {
            draws_compared: pairs.len(),
            probability_patterning_cheaper: cheaper as f64 / pairs.len().max(1) as f64,
            levelised_cost_ratio: percentiles_of(
                "levelised_cost_ratio",
                &ratio(|e| e.economics.levelised_cost_per_m3),
            ),
            salt_removal_rate_ratio: percentiles_of(
                "salt_removal_rate_ratio",
                &ratio(|e| e.economics.salt_removal_rate_mol_m2_s),
            ),
        }
    });
    let ok: Vec<&Evaluation> = evals.iter().flatten().collect();
    let outputs = OUTPUTS
        .iter()
        .map(|o| {
            let v: Vec<f64> = ok
                .iter()
                .map(|e| (o.get)(e))
                .filter(|x| x.is_finite())
                .collect();
            OutputPercentiles {
                output: o.key.to_string(),
                p5: percentile(&v, 0.05),
                p50: percentile(&v, 0.5),
                p95: percentile(&v, 0.95),
            }
        })
        .collect();
    Ok(Uncertainty {
        samples: n,
        seed,
        failed: n - ok.len(),
        varied: varied
            .iter()
            .map(|p| VariedConstant {
                key: p.key.to_string(),
                prior: p.distribution,
            })
            .collect(),
        held: held.iter().map(|s| s.to_string()).collect(),
        outputs,
        patterning,
    })
}

/// Largest number of draws `stria eval --samples` accepts.
pub const MAX_EVAL_SAMPLES: usize = 100_000;

/// The uncertainty `stria eval --samples N [--seed S]` asks for (`None` without `--samples`):
/// the study's baseline at N draws, seeded with S or the study's optimizer seed.
pub fn for_eval(
    study: &crate::study::Study,
    samples: Option<(usize, Option<u64>)>,
) -> Result<Option<Uncertainty>, crate::error::CliError> {
    let Some((n, seed)) = samples else {
        return Ok(None);
    };
    if !(2..=MAX_EVAL_SAMPLES).contains(&n) {
        return Err(crate::error::CliError::input(
            "command line",
            None,
            "--samples",
            format!("{n} draws"),
            format!("2 to {MAX_EVAL_SAMPLES} draws"),
        ));
    }
    let seed = seed.unwrap_or(study.optimizer.seed);
    let unpatterned = (study.baseline.membranes.open_fraction < 1.0).then(|| {
        study.plant.plant(
            &crate::rundir::unpatterned(&study.baseline),
            study.concentrate_gap_follows,
            study.concentrate_velocity_follows,
        )
    });
    of_design(
        &study.baseline_plant(),
        unpatterned.as_ref(),
        &study.constants,
        n,
        seed,
    )
    .map(Some)
    .map_err(crate::error::CliError::runtime)
}

/// The design sheet's section on the uncertainty.
pub fn sheet_section(u: &Uncertainty, currency: &str) -> String {
    let mut s = String::new();
    let _ = writeln!(
        s,
        "\nUncertainty ({} draws of {} ROM constants from their priors, seed {})",
        u.samples,
        u.varied.len(),
        u.seed
    );
    let _ = writeln!(
        s,
        "  {:<34} {:>10} {:>10} {:>10} unit",
        "output", "5th", "median", "95th"
    );
    for (o, p) in OUTPUTS.iter().zip(&u.outputs) {
        let f = |x: f64| sig(x * o.factor, 3);
        let unit = o.unit.replace("{currency}", currency);
        let line = format!(
            "  {:<34} {:>10} {:>10} {:>10} {unit}",
            o.label,
            f(p.p5),
            f(p.p50),
            f(p.p95)
        );
        let _ = writeln!(s, "{}", line.trim_end());
    }
    if u.failed > 0 {
        let _ = writeln!(
            s,
            "  {} of {} draws could not be evaluated and are left out",
            u.failed, u.samples
        );
    }
    if let Some(p) = &u.patterning {
        let r = &p.levelised_cost_ratio;
        let q = &p.salt_removal_rate_ratio;
        let text = format!(
            "Against the same design unpatterned (open fraction 1, same operating point, same \
             draws): levelised cost ratio {} / {} / {} (5th / median / 95th), salt removal rate \
             ratio {} / {} / {}; the pattern is the cheaper in {:.0} % of {} draws.",
            sig(r.p5, 3),
            sig(r.p50, 3),
            sig(r.p95, 3),
            sig(q.p5, 3),
            sig(q.p50, 3),
            sig(q.p95, 3),
            100.0 * p.probability_patterning_cheaper,
            p.draws_compared
        );
        for line in crate::eval::wrap(&text, 94).lines() {
            let _ = writeln!(s, "  {line}");
        }
    }
    let keys: Vec<&str> = u.varied.iter().map(|v| v.key.as_str()).collect();
    let mut notes = format!("varied: {}.", keys.join(", "));
    if !u.held.is_empty() {
        notes.push_str(&format!(
            " Held at the study's values: {}.",
            u.held.join(", ")
        ));
    }
    for line in crate::eval::wrap(&notes, 94).lines() {
        let _ = writeln!(s, "  {line}");
    }
    s
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_same_seed_draws_the_same_constants() {
        let base = RomConstants::default();
        let p = priors::priors();
        let a = draw_constants(&base, &p, 5, 3).unwrap();
        let b = draw_constants(&base, &p, 5, 3).unwrap();
        let c = draw_constants(&base, &p, 5, 4).unwrap();
        assert_eq!(a, b);
        assert_ne!(a, c);
        for k in &a {
            k.validate().unwrap();
        }
    }
}
