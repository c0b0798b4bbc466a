//! Scalarisation: the multi-objective problem as a series of single-objective sub-problems,
//! each solved by [`crate::minimize_from`] (argmin), one sub-problem a step (Miettinen,
//! Nonlinear Multiobjective Optimization, Kluwer 1999, ch. 3 and 4):
//! - weighted sum, `sum w_i f_i'`;
//! - augmented Chebyshev, `max w_i f_i' + 1e-4 sum f_i'` (reaches non-convex parts of a front);
//! - epsilon constraint, minimise `f_j'` subject to `f_i' <= eps_i` for the others, the bounds
//!   swept over the front's range (a penalty enforces them).
//!
//! `f'` are objectives normalised by the ideal and nadir points of a payoff table (Miettinen
//! 1999, section 2.4): the first step evaluates a Latin hypercube sample (start points and a
//! first scale), the next `m` steps minimise each objective alone (the anchors), and the
//! ideal and nadir taken from the anchors then stay fixed for the sweep. Infeasible and failed
//! designs cost more than any feasible one (a penalty of 1e6 plus the violation).
//! Evaluations inside a sub-problem are sequential: the solvers are.

use crate::archive::Archive;
use crate::doe;
use crate::problem::{evaluate_batch, evaluate_guarded, Evaluated, Problem, Variable};
use crate::single::{minimize_from, Solver};
use rand::Rng;
use rand_chacha::ChaCha8Rng;
use serde::{Deserialize, Serialize};
use std::sync::Mutex;

/// How objectives are folded into one.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum Scalarisation {
    /// Weighted sum of normalised objectives (finds only the convex parts of a front).
    WeightedSum,
    /// Augmented weighted Chebyshev distance to the ideal point.
    Chebyshev,
    /// Minimise objective `objective` (0-based) with bounds on the others, swept.
    EpsilonConstraint {
        /// The objective minimised; the others are bounded.
        objective: usize,
    },
}

/// Settings of a scalarised run.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ScalarisedConfig {
    /// The scalarisation.
    pub scalarisation: Scalarisation,
    /// The argmin solver of each sub-problem.
    pub solver: Solver,
    /// Number of sub-problems (weight vectors or epsilon levels).
    pub subproblems: usize,
    /// Evaluation budget of one sub-problem.
    pub evaluations_per_subproblem: u64,
    /// Size of the initial Latin hypercube sample that estimates ideal and nadir points.
    pub initial_samples: usize,
}

impl ScalarisedConfig {
    pub(crate) fn validate(&self, m: usize) -> Result<(), String> {
        if self.subproblems == 0 {
            return Err("subproblems must be at least 1".into());
        }
        if self.evaluations_per_subproblem == 0 {
            return Err("evaluations_per_subproblem must be at least 1".into());
        }
        if self.initial_samples < 2 {
            return Err("initial_samples must be at least 2".into());
        }
        if let Scalarisation::EpsilonConstraint { objective } = self.scalarisation {
            if objective >= m {
                return Err(format!(
                    "epsilon constraint on objective {objective}, the problem has {m} (0-based)"
                ));
            }
        }
        Ok(())
    }
}

/// Where a scalarised run is.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub(crate) struct ScalarisedState {
    ideal: Vec<f64>,
    nadir: Vec<f64>,
    sampled: bool,
    anchors: Vec<Vec<f64>>,
    next: usize,
}

impl ScalarisedState {
    pub(crate) fn new(_c: &ScalarisedConfig, m: usize) -> ScalarisedState {
        ScalarisedState {
            ideal: vec![0.0; m],
            nadir: vec![1.0; m],
            sampled: false,
            anchors: Vec::new(),
            next: 0,
        }
    }

    pub(crate) fn complete(&self, c: &ScalarisedConfig) -> bool {
        self.sampled && self.anchors.len() >= self.ideal.len() && self.next >= c.subproblems
    }
}

/// Weight vectors on the simplex: evenly spaced for two objectives, otherwise a simplex
/// lattice (Das and Dennis, SIAM J. Optim. 8 (1998) 631) thinned to `k` evenly spread points.
pub fn weights(m: usize, k: usize) -> Vec<Vec<f64>> {
    if m == 1 {
        return vec![vec![1.0]; k];
    }
    if m == 2 {
        return (0..k)
            .map(|i| {
                let t = if k == 1 {
                    0.5
                } else {
                    i as f64 / (k - 1) as f64
                };
                vec![t, 1.0 - t]
            })
            .collect();
    }
    let mut h = 1;
    while binomial(h + m - 1, m - 1) < k {
        h += 1;
    }
    let mut all = Vec::new();
    lattice(m, h, &mut vec![], &mut all);
    let n = all.len();
    (0..k)
        .map(|i| {
            let j = if k == 1 { n / 2 } else { i * (n - 1) / (k - 1) };
            all[j].iter().map(|&a| a as f64 / h as f64).collect()
        })
        .collect()
}

fn binomial(n: usize, r: usize) -> usize {
    (0..r).fold(1usize, |acc, i| acc * (n - i) / (i + 1))
}

fn lattice(m: usize, left: usize, prefix: &mut Vec<usize>, out: &mut Vec<Vec<usize>>) {
    if prefix.len() == m - 1 {
        let mut v = prefix.clone();
        v.push(left);
        out.push(v);
        return;
    }
    for a in 0..=left {
        prefix.push(a);
        lattice(m, left - a, prefix, out);
        prefix.pop();
    }
}

const INFEASIBLE_COST: f64 = 1e6;

/// What a step minimises: one objective alone (an anchor) or sub-problem `k`.
#[derive(Clone, Copy)]
enum Target {
    Anchor(usize),
    Sub(usize),
}

fn scalar_cost(
    c: &ScalarisedConfig,
    s: &ScalarisedState,
    target: Target,
    w: &[f64],
    e: &Evaluated,
) -> f64 {
    if e.failure.is_some() {
        return f64::INFINITY;
    }
    let norm: Vec<f64> = e
        .objectives
        .iter()
        .zip(s.ideal.iter().zip(&s.nadir))
        .map(|(f, (lo, hi))| (f - lo) / (hi - lo).max(1e-12))
        .collect();
    let base = match (target, c.scalarisation) {
        (Target::Anchor(i), _) => norm[i] + 1e-3 * norm.iter().sum::<f64>(),
        (Target::Sub(_), Scalarisation::WeightedSum) => {
            norm.iter().zip(w).map(|(f, w)| f * w).sum()
        }
        (Target::Sub(_), Scalarisation::Chebyshev) => {
            let max = norm
                .iter()
                .zip(w)
                .map(|(f, w)| f * w)
                .fold(f64::NEG_INFINITY, f64::max);
            max + 1e-4 * norm.iter().sum::<f64>()
        }
        (Target::Sub(k), Scalarisation::EpsilonConstraint { objective }) => {
            let eps = epsilon_levels(norm.len(), objective, k, c.subproblems);
            let over: f64 = norm
                .iter()
                .zip(&eps)
                .enumerate()
                .filter(|(i, _)| *i != objective)
                .map(|(_, (f, e))| (f - e).max(0.0))
                .sum();
            norm[objective] + 1e3 * over
        }
    };
    if e.is_feasible() {
        base
    } else {
        INFEASIBLE_COST + e.violation.min(1e290) + base.abs().min(1e6)
    }
}

/// Bounds (normalised) on the non-minimised objectives for sub-problem `k`: evenly spaced over
/// [0, 1] for two objectives, Sobol points of the unit cube otherwise.
fn epsilon_levels(m: usize, objective: usize, k: usize, total: usize) -> Vec<f64> {
    let others = m - 1;
    let point: Vec<f64> = if others == 1 {
        vec![(k as f64 + 0.5) / total as f64]
    } else {
        doe::sobol(k % doe::SOBOL_MAX_POINTS, 1, others.min(256), 0)
            .map(|p| p[0].clone())
            .unwrap_or_else(|_| vec![0.5; others])
    };
    let mut eps = Vec::with_capacity(m);
    let mut it = point.into_iter();
    for i in 0..m {
        eps.push(if i == objective {
            f64::INFINITY
        } else {
            it.next().unwrap_or(0.5)
        });
    }
    eps
}

/// One step: the initial sample, or one sub-problem.
#[allow(clippy::too_many_arguments)]
pub(crate) fn step<P: Problem + ?Sized>(
    c: &ScalarisedConfig,
    s: &mut ScalarisedState,
    problem: &P,
    vars: &[Variable],
    rng: &mut ChaCha8Rng,
    archive: &Archive,
    population: &[Evaluated],
    first_id: u64,
    generation: u64,
    remaining: u64,
) -> Vec<Evaluated> {
    let m = s.ideal.len();
    if !s.sampled {
        let n = c.initial_samples.min(remaining as usize);
        let xs = doe::design(doe::InitialDesign::LatinHypercube, vars, n, rng);
        let new = evaluate_batch(problem, xs, first_id, generation);
        let ok: Vec<&Evaluated> = {
            let feas: Vec<&Evaluated> = new.iter().filter(|e| e.is_feasible()).collect();
            if feas.len() >= 2 {
                feas
            } else {
                new.iter().filter(|e| e.failure.is_none()).collect()
            }
        };
        if !ok.is_empty() {
            for i in 0..m {
                s.ideal[i] = ok
                    .iter()
                    .map(|e| e.objectives[i])
                    .fold(f64::INFINITY, f64::min);
                s.nadir[i] = ok
                    .iter()
                    .map(|e| e.objectives[i])
                    .fold(f64::NEG_INFINITY, f64::max);
            }
        }
        s.sampled = true;
        return new;
    }
    let target = if s.anchors.len() < m {
        Target::Anchor(s.anchors.len())
    } else {
        let k = s.next;
        s.next += 1;
        Target::Sub(k)
    };
    let w = match target {
        Target::Anchor(_) => vec![0.0; m],
        Target::Sub(k) => weights(m, c.subproblems)[k].clone(),
    };
    // Start from the best design seen for this sub-problem.
    let start = archive
        .members()
        .iter()
        .chain(population)
        .map(|e| (scalar_cost(c, s, target, &w, e), e))
        .filter(|(v, _)| v.is_finite())
        .min_by(|a, b| a.0.total_cmp(&b.0).then(a.1.id.cmp(&b.1.id)))
        .map(|(_, e)| e.x.clone())
        .unwrap_or_else(|| vars.iter().map(|v| 0.5 * (v.lower + v.upper)).collect());
    let budget = c.evaluations_per_subproblem.min(remaining);
    let seed: u64 = rng.random();
    let nobj = problem.num_objectives();
    let ncon = problem.num_constraints();
    let log: Mutex<Vec<Evaluated>> = Mutex::new(Vec::new());
    let state: &ScalarisedState = s;
    let cost = |x: &[f64]| {
        let r = evaluate_guarded(problem, x);
        let mut log = log.lock().unwrap_or_else(|e| e.into_inner());
        let id = first_id + log.len() as u64;
        let e = Evaluated::from_result(id, generation, x.to_vec(), r, nobj, ncon);
        let v = scalar_cost(c, state, target, &w, &e);
        log.push(e);
        v
    };
    let bounds: Vec<(f64, f64)> = vars.iter().map(|v| (v.lower, v.upper)).collect();
    // Bounds and start point come from a validated run, so this cannot fail.
    let _ = minimize_from(cost, &bounds, &start, c.solver, budget, seed);
    let new = log.into_inner().unwrap_or_else(|e| e.into_inner());
    if let Target::Anchor(i) = target {
        // The anchor: the best feasible design of this step for objective i (or, if none, a
        // copy of the current scale so the payoff table stays complete).
        let best = new
            .iter()
            .filter(|e| e.is_feasible())
            .min_by(|a, b| a.objectives[i].total_cmp(&b.objectives[i]));
        let anchor = match best {
            Some(e) => e.objectives.clone(),
            None => s.nadir.clone(),
        };
        s.anchors.push(anchor);
        if s.anchors.len() == m {
            payoff_scale(s, archive, &new);
        }
    }
    new
}

/// Ideal point: the best value of each objective over the archive and this step; nadir: the
/// worst value of each objective over the anchors (payoff table). A degenerate range keeps
/// the sample's scale.
fn payoff_scale(s: &mut ScalarisedState, archive: &Archive, new: &[Evaluated]) {
    let m = s.ideal.len();
    for i in 0..m {
        let ideal = archive
            .members()
            .iter()
            .chain(new.iter().filter(|e| e.is_feasible()))
            .map(|e| e.objectives[i])
            .chain(s.anchors.iter().map(|a| a[i]))
            .fold(f64::INFINITY, f64::min);
        let nadir = s
            .anchors
            .iter()
            .map(|a| a[i])
            .fold(f64::NEG_INFINITY, f64::max);
        if nadir - ideal > 1e-12 * nadir.abs().max(1.0) {
            s.ideal[i] = ideal;
            s.nadir[i] = nadir;
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn weights_lie_on_the_simplex() {
        for m in 1..5 {
            for w in weights(m, 7) {
                assert_eq!(w.len(), m);
                assert!((w.iter().sum::<f64>() - 1.0).abs() < 1e-12);
                assert!(w.iter().all(|v| *v >= 0.0));
            }
        }
        // Das and Dennis (1998): the lattice with h divisions in m objectives has
        // C(h + m - 1, m - 1) points.
        let mut all = Vec::new();
        lattice(3, 4, &mut vec![], &mut all);
        assert_eq!(all.len(), 15);
    }
}
