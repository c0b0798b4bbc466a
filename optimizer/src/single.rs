//! Single-objective, gradient-free minimisation through argmin 0.11 behind one small
//! interface, [`minimize`]: Nelder-Mead (Nelder and Mead, Comput. J. 7 (1965) 308), particle
//! swarm (Kennedy and Eberhart 1995, with the constriction settings of argmin) and simulated
//! annealing (Kirkpatrick, Gelatt and Vecchi, Science 220 (1983) 671).
//!
//! argmin's types stay inside this module. The adapter
//! - keeps trial points inside the bounds: Nelder-Mead works on unbounded coordinates `z`
//!   mapped by `x = lo + (hi - lo) (1 + sin z) / 2` (the bounded simplex transformation of
//!   D'Errico's fminsearchbnd; a clamp plus penalty makes the simplex collapse against a
//!   bound), annealing moves are clamped, and any other trial point outside is clamped and
//!   penalised by its distance outside;
//! - turns a NaN or infinite cost into a large finite penalty, because argmin's Nelder-Mead
//!   has no guard against NaN;
//! - counts evaluations and stops the solver when the budget is used up;
//! - keeps the best point itself, so the answer is the best design actually evaluated.

use argmin::core::{CostFunction, Error as ArgminError, Executor};
use argmin::solver::neldermead::NelderMead;
use argmin::solver::particleswarm::ParticleSwarm;
use argmin::solver::simulatedannealing::{Anneal, SimulatedAnnealing};
use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;
use serde::{Deserialize, Serialize};
use std::sync::Mutex;

/// Cost given to the solver for a failed (non-finite) evaluation.
pub const FAILURE_COST: f64 = 1e100;

/// Which argmin solver [`minimize`] uses.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum Solver {
    /// Nelder-Mead simplex, restarted from the best point while budget remains.
    NelderMead,
    /// Particle swarm over the bounds (the only one that does not need a start point).
    ParticleSwarm,
    /// Simulated annealing with moves shrinking with the temperature.
    SimulatedAnnealing,
}

/// The best point found by [`minimize`].
#[derive(Debug, Clone, PartialEq)]
pub struct Minimum {
    /// Best point (within the bounds).
    pub x: Vec<f64>,
    /// Its cost, as the cost function returned it (finite unless every evaluation failed).
    pub f: f64,
    /// Evaluations used.
    pub evaluations: u64,
}

/// Input that [`minimize`] cannot work with.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum MinimizeError {
    /// Bounds empty, reversed or not finite.
    #[error("bounds: {0}")]
    Bounds(String),
    /// A start point of the wrong length or outside the bounds.
    #[error("start point: {0}")]
    Start(String),
    /// A zero evaluation budget.
    #[error("the evaluation budget must be at least 1")]
    Budget,
}

struct Tracker {
    evaluations: u64,
    best: Option<(Vec<f64>, f64)>,
    rng: ChaCha8Rng,
}

/// The argmin problem: borrows the cost function and the shared tracker, so a solver that
/// stops with an error (the budget stop) loses nothing.
struct Adapter<'a, F> {
    f: &'a F,
    lower: &'a [f64],
    upper: &'a [f64],
    budget: u64,
    init_temp: f64,
    sine_map: bool,
    tracker: &'a Mutex<Tracker>,
}

impl<F: Fn(&[f64]) -> f64> Adapter<'_, F> {
    fn clamp(&self, p: &[f64]) -> (Vec<f64>, f64) {
        if self.sine_map {
            let x = p
                .iter()
                .zip(self.lower.iter().zip(self.upper))
                .map(|(z, (lo, hi))| {
                    let z = if z.is_finite() { *z } else { 0.0 };
                    (lo + (hi - lo) * 0.5 * (1.0 + z.sin())).clamp(*lo, *hi)
                })
                .collect();
            return (x, 0.0);
        }
        let mut outside = 0.0;
        let x = p
            .iter()
            .zip(self.lower.iter().zip(self.upper))
            .map(|(v, (lo, hi))| {
                let v = if v.is_nan() { 0.5 * (lo + hi) } else { *v };
                let range = (hi - lo).max(f64::MIN_POSITIVE);
                if v < *lo {
                    outside += (lo - v) / range;
                } else if v > *hi {
                    outside += (v - hi) / range;
                }
                v.clamp(*lo, *hi)
            })
            .collect();
        (x, outside.min(1e6))
    }

    fn lock(&self) -> std::sync::MutexGuard<'_, Tracker> {
        self.tracker.lock().unwrap_or_else(|e| e.into_inner())
    }

    fn used(&self) -> u64 {
        self.lock().evaluations
    }

    fn best(&self) -> Option<(Vec<f64>, f64)> {
        self.lock().best.clone()
    }

    fn again(&self) -> Self {
        Adapter { ..*self }
    }
}

impl<F: Fn(&[f64]) -> f64> CostFunction for Adapter<'_, F> {
    type Param = Vec<f64>;
    type Output = f64;

    fn cost(&self, p: &Vec<f64>) -> Result<f64, ArgminError> {
        if self.used() >= self.budget {
            return Err(ArgminError::msg("evaluation budget used up"));
        }
        let (x, outside) = self.clamp(p);
        let raw = (self.f)(&x);
        let value = if raw.is_finite() { raw } else { FAILURE_COST };
        let mut t = self.lock();
        t.evaluations += 1;
        if raw.is_finite() && t.best.as_ref().is_none_or(|(_, b)| raw < *b) {
            t.best = Some((x, raw));
        }
        Ok(value + outside * (1.0 + value.abs()))
    }
}

impl<F: Fn(&[f64]) -> f64> Anneal for Adapter<'_, F> {
    type Param = Vec<f64>;
    type Output = Vec<f64>;
    type Float = f64;

    fn anneal(&self, p: &Vec<f64>, temp: f64) -> Result<Vec<f64>, ArgminError> {
        // One coordinate a move (as in Corana, Marchesi, Martini and Ridella, ACM TOMS 13
        // (1987) 262), with a step of half the range at the initial temperature, shrinking
        // with the square root of the temperature.
        let scale = 0.5 * (temp / self.init_temp).clamp(1e-10, 1.0).sqrt();
        let mut t = self.lock();
        let i = t.rng.random_range(0..p.len());
        let u: f64 = t.rng.random();
        let mut x = p.clone();
        let (lo, hi) = (self.lower[i], self.upper[i]);
        x[i] = (x[i] + (2.0 * u - 1.0) * scale * (hi - lo)).clamp(lo, hi);
        Ok(x)
    }
}

/// Minimise `f` over the box `bounds` with at most `budget` evaluations, starting (Nelder-Mead,
/// annealing) from the centre of the box. Every random number comes from `seed`.
pub fn minimize<F: Fn(&[f64]) -> f64>(
    f: F,
    bounds: &[(f64, f64)],
    solver: Solver,
    budget: u64,
    seed: u64,
) -> Result<Minimum, MinimizeError> {
    let x0: Vec<f64> = bounds.iter().map(|(lo, hi)| 0.5 * (lo + hi)).collect();
    minimize_from(f, bounds, &x0, solver, budget, seed)
}

/// As [`minimize`], from the start point `x0` (particle swarm ignores it: its swarm is drawn
/// at random over the bounds).
pub fn minimize_from<F: Fn(&[f64]) -> f64>(
    f: F,
    bounds: &[(f64, f64)],
    x0: &[f64],
    solver: Solver,
    budget: u64,
    seed: u64,
) -> Result<Minimum, MinimizeError> {
    if bounds.is_empty() {
        return Err(MinimizeError::Bounds("no variables".into()));
    }
    for (i, (lo, hi)) in bounds.iter().enumerate() {
        if !(lo.is_finite() && hi.is_finite() && lo <= hi) {
            return Err(MinimizeError::Bounds(format!(
                "variable {}: [{lo}, {hi}] is not a finite interval",
                i + 1
            )));
        }
    }
    if x0.len() != bounds.len() {
        return Err(MinimizeError::Start(format!(
            "{} values for {} variables",
            x0.len(),
            bounds.len()
        )));
    }
    if x0
        .iter()
        .zip(bounds)
        .any(|(v, (lo, hi))| !(v >= lo && v <= hi))
    {
        return Err(MinimizeError::Start("outside the bounds".into()));
    }
    if budget == 0 {
        return Err(MinimizeError::Budget);
    }
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    let tracker = Mutex::new(Tracker {
        evaluations: 0,
        best: None,
        rng: ChaCha8Rng::seed_from_u64(rng.random()),
    });
    let lower: Vec<f64> = bounds.iter().map(|b| b.0).collect();
    let upper: Vec<f64> = bounds.iter().map(|b| b.1).collect();
    let adapter = Adapter {
        f: &f,
        lower: &lower,
        upper: &upper,
        budget,
        init_temp: 1.0,
        sine_map: false,
        tracker: &tracker,
    };
    match solver {
        Solver::NelderMead => nelder_mead(&adapter, x0),
        Solver::ParticleSwarm => particle_swarm(&adapter, &mut rng),
        Solver::SimulatedAnnealing => annealing(&adapter, x0, &mut rng),
    }
    let t = tracker.into_inner().unwrap_or_else(|e| e.into_inner());
    Ok(match t.best {
        Some((x, f)) => Minimum {
            x,
            f,
            evaluations: t.evaluations,
        },
        None => Minimum {
            x: x0.to_vec(),
            f: f64::INFINITY,
            evaluations: t.evaluations,
        },
    })
}

fn nelder_mead<F: Fn(&[f64]) -> f64>(a: &Adapter<'_, F>, x0: &[f64]) {
    let a = &Adapter {
        sine_map: true,
        ..a.again()
    };
    let to_z = |x: &[f64]| -> Vec<f64> {
        x.iter()
            .zip(a.lower.iter().zip(a.upper))
            .map(|(v, (lo, hi))| {
                let t = if hi > lo { (v - lo) / (hi - lo) } else { 0.5 };
                (2.0 * t - 1.0).clamp(-1.0, 1.0).asin()
            })
            .collect()
    };
    let mut start = to_z(x0);
    let mut size = 0.5;
    let mut last_best = f64::INFINITY;
    // Restart from the best point with a smaller simplex while budget remains: a collapsed
    // simplex is a known failure mode of Nelder-Mead (McKinnon, SIAM J. Optim. 9 (1998) 148).
    for _ in 0..12 {
        let left = a.budget.saturating_sub(a.used());
        if left <= start.len() as u64 {
            // Too few evaluations left for a simplex: argmin's Nelder-Mead evaluates every
            // vertex when it starts and cannot stop for the budget there (it would panic).
            // Spend one on the start point if nothing has been evaluated yet.
            if left > 0 && a.best().is_none() {
                let _ = a.cost(&start);
            }
            break;
        }
        let simplex = initial_simplex(&start, size);
        let solver = NelderMead::new(simplex)
            .with_sd_tolerance(1e-15)
            .expect("a positive tolerance is accepted");
        // An error here is the adapter's budget stop; the tracker keeps the best point.
        let _ = Executor::new(a.again(), solver)
            .configure(|s| s.max_iters(left))
            .timer(false)
            .run();
        match a.best() {
            Some((x, f)) if f < last_best => {
                last_best = f;
                start = to_z(&x);
                size *= 0.5;
            }
            _ => break,
        }
    }
}

/// A right-angled simplex at `z0` with legs `size` (in the unbounded coordinates); a leg
/// that would cross the crest of the sine map (|z| > pi/2) points the other way.
fn initial_simplex(z0: &[f64], size: f64) -> Vec<Vec<f64>> {
    let mut s = vec![z0.to_vec()];
    for i in 0..z0.len() {
        let mut v = z0.to_vec();
        v[i] = if v[i] + size <= std::f64::consts::FRAC_PI_2 {
            v[i] + size
        } else {
            v[i] - size
        };
        s.push(v);
    }
    s
}

fn particle_swarm<F: Fn(&[f64]) -> f64>(a: &Adapter<'_, F>, rng: &mut ChaCha8Rng) {
    let n = a.lower.len();
    let particles = (10 + 2 * n).clamp(10, 40).min(a.budget.max(1) as usize);
    let swarm = ParticleSwarm::new((a.lower.to_vec(), a.upper.to_vec()), particles)
        .with_rng_generator(ChaCha8Rng::seed_from_u64(rng.random()));
    let _ = Executor::new(a.again(), swarm)
        .configure(|s| s.max_iters(a.budget))
        .timer(false)
        .run();
}

fn annealing<F: Fn(&[f64]) -> f64>(a: &Adapter<'_, F>, x0: &[f64], rng: &mut ChaCha8Rng) {
    // The temperature is in cost units: start at the spread of a few random costs, so that
    // worse moves are often accepted at first whatever the scale of the cost.
    let probe: Vec<f64> = (0..5)
        .map(|_| {
            let x: Vec<f64> = a
                .lower
                .iter()
                .zip(a.upper)
                .map(|(lo, hi)| lo + rng.random::<f64>() * (hi - lo))
                .collect();
            a.cost(&x).unwrap_or(FAILURE_COST)
        })
        .filter(|c| *c < FAILURE_COST)
        .collect();
    let spread = if probe.len() >= 2 {
        let mean = probe.iter().sum::<f64>() / probe.len() as f64;
        (probe.iter().map(|c| (c - mean).abs()).sum::<f64>() / probe.len() as f64).max(1e-9)
    } else {
        1.0
    };
    let adapter = Adapter {
        init_temp: spread,
        ..a.again()
    };
    let left = a.budget.saturating_sub(a.used());
    if left == 0 {
        return;
    }
    let sa = SimulatedAnnealing::new_with_rng(spread, ChaCha8Rng::seed_from_u64(rng.random()))
        .expect("a positive temperature is accepted")
        .with_reannealing_best(left / 10 + 10);
    let _ = Executor::new(adapter, sa)
        .configure(|s| s.param(x0.to_vec()).max_iters(left))
        .timer(false)
        .run();
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn no_solver_overruns_or_panics_on_a_small_budget() {
        // Every budget from 1 to 60 on a 4-variable problem. argmin's Nelder-Mead needs five
        // evaluations to start; a restart late in the budget used to start with fewer and
        // panic inside argmin.
        let bounds = vec![(-2.0, 2.0); 4];
        for solver in [
            Solver::NelderMead,
            Solver::ParticleSwarm,
            Solver::SimulatedAnnealing,
        ] {
            for budget in 1..=60u64 {
                let m = minimize(
                    |x: &[f64]| x.iter().map(|v| (v - 0.3) * (v - 0.3)).sum(),
                    &bounds,
                    solver,
                    budget,
                    11,
                )
                .unwrap();
                assert!(
                    m.evaluations >= 1 && m.evaluations <= budget,
                    "{solver:?} budget {budget}: {} evaluations",
                    m.evaluations
                );
                assert!(m.f.is_finite());
            }
        }
    }
}
