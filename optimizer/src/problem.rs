//! The problem interface and the record of one evaluation.

use rayon::prelude::*;
use serde::{Deserialize, Serialize};

/// A bounded continuous decision variable.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Variable {
    /// Name, as the caller wants it reported.
    pub name: String,
    /// Lower bound (inclusive, finite).
    pub lower: f64,
    /// Upper bound (inclusive, finite, not below `lower`).
    pub upper: f64,
}

impl Variable {
    /// A variable named `name` bounded by `[lower, upper]`.
    pub fn new(name: impl Into<String>, lower: f64, upper: f64) -> Variable {
        Variable {
            name: name.into(),
            lower,
            upper,
        }
    }
}

/// What a successful evaluation returns.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Outcome {
    /// Objective values, each minimised.
    pub objectives: Vec<f64>,
    /// Inequality constraint values; `g <= 0` is feasible.
    pub constraints: Vec<f64>,
}

/// A problem to optimise: bounded variables, minimised objectives, constraints `g <= 0`.
///
/// `evaluate` is called from several threads at once (rayon), so it must not depend on the
/// order of calls. A design that cannot be evaluated returns `Err(reason)`: it is recorded as
/// infeasible and the search goes on.
pub trait Problem: Sync {
    /// The decision variables and their bounds.
    fn variables(&self) -> Vec<Variable>;
    /// Number of objectives (at least one).
    fn num_objectives(&self) -> usize;
    /// Number of inequality constraints (may be zero).
    fn num_constraints(&self) -> usize;
    /// Evaluate one design; `Err` means a failed design, with the reason.
    fn evaluate(&self, x: &[f64]) -> Result<Outcome, String>;
}

/// Violation recorded for a failed evaluation: worse than any evaluated design.
///
/// `f64::MAX` rather than infinity, so that the record survives JSON.
pub const FAILED_VIOLATION: f64 = f64::MAX;

/// One evaluated design, as recorded by a run.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Evaluated {
    /// Sequential evaluation number in the run (0, 1, 2, ...), deterministic.
    pub id: u64,
    /// Generation (or step) in which the design was evaluated.
    pub generation: u64,
    /// Decision variables.
    pub x: Vec<f64>,
    /// Objective values (minimised); empty when the evaluation failed.
    pub objectives: Vec<f64>,
    /// Constraint values (`g <= 0` feasible); empty when the evaluation failed.
    pub constraints: Vec<f64>,
    /// Total constraint violation, the sum of `max(0, g)`; [`FAILED_VIOLATION`] on failure.
    pub violation: f64,
    /// Why the evaluation failed, if it did.
    pub failure: Option<String>,
}

impl Evaluated {
    /// Feasible: evaluated without failure and with zero violation.
    pub fn is_feasible(&self) -> bool {
        self.failure.is_none() && self.violation <= 0.0
    }

    /// Turn the result of [`Problem::evaluate`] into a record, checking its shape and that
    /// every number is finite (a NaN or infinite value becomes a failure with a reason).
    pub fn from_result(
        id: u64,
        generation: u64,
        x: Vec<f64>,
        result: Result<Outcome, String>,
        num_objectives: usize,
        num_constraints: usize,
    ) -> Evaluated {
        let failed = |x: Vec<f64>, reason: String| Evaluated {
            id,
            generation,
            x,
            objectives: Vec::new(),
            constraints: Vec::new(),
            violation: FAILED_VIOLATION,
            failure: Some(reason),
        };
        let outcome = match result {
            Ok(o) => o,
            Err(reason) => return failed(x, reason),
        };
        if outcome.objectives.len() != num_objectives {
            let reason = format!(
                "evaluation returned {} objectives, expected {}",
                outcome.objectives.len(),
                num_objectives
            );
            return failed(x, reason);
        }
        if outcome.constraints.len() != num_constraints {
            let reason = format!(
                "evaluation returned {} constraints, expected {}",
                outcome.constraints.len(),
                num_constraints
            );
            return failed(x, reason);
        }
        if let Some((i, v)) = outcome
            .objectives
            .iter()
            .enumerate()
            .find(|(_, v)| !v.is_finite())
        {
            return failed(x, format!("objective {} is {}", i + 1, v));
        }
        if let Some((i, v)) = outcome
            .constraints
            .iter()
            .enumerate()
            .find(|(_, v)| !v.is_finite())
        {
            return failed(x, format!("constraint {} is {}", i + 1, v));
        }
        let violation: f64 = outcome.constraints.iter().map(|g| g.max(0.0)).sum();
        Evaluated {
            id,
            generation,
            x,
            objectives: outcome.objectives,
            constraints: outcome.constraints,
            violation: violation.min(f64::MAX),
            failure: None,
        }
    }
}

/// Evaluate one design, turning a panic inside the problem into a failure.
pub(crate) fn evaluate_guarded<P: Problem + ?Sized>(
    problem: &P,
    x: &[f64],
) -> Result<Outcome, String> {
    match std::panic::catch_unwind(std::panic::AssertUnwindSafe(|| problem.evaluate(x))) {
        Ok(r) => r,
        Err(payload) => {
            let msg = payload
                .downcast_ref::<&str>()
                .map(|s| s.to_string())
                .or_else(|| payload.downcast_ref::<String>().cloned())
                .unwrap_or_else(|| "unknown panic".to_string());
            Err(format!("evaluation panicked: {msg}"))
        }
    }
}

/// Evaluate a batch in parallel (rayon); ids run from `first_id` in the order of `xs`, so the
/// result does not depend on the number of threads. When the first evaluation takes less
/// than [`CHEAP_EVALUATION`], the rest run on the calling thread: waking the thread pool would
/// cost more than it saves (the records are the same either way).
pub(crate) fn evaluate_batch<P: Problem + ?Sized>(
    problem: &P,
    xs: Vec<Vec<f64>>,
    first_id: u64,
    generation: u64,
) -> Vec<Evaluated> {
    let m = problem.num_objectives();
    let k = problem.num_constraints();
    let one = |(i, x): (usize, Vec<f64>)| {
        let r = evaluate_guarded(problem, &x);
        Evaluated::from_result(first_id + i as u64, generation, x, r, m, k)
    };
    let mut items = xs.into_iter().enumerate();
    let Some(first) = items.next() else {
        return Vec::new();
    };
    let started = std::time::Instant::now();
    let mut out = vec![one(first)];
    if started.elapsed() < CHEAP_EVALUATION {
        out.extend(items.map(one));
    } else {
        let rest: Vec<(usize, Vec<f64>)> = items.collect();
        out.par_extend(rest.into_par_iter().map(one));
    }
    out
}

/// Evaluations faster than this run sequentially (see [`evaluate_batch`]).
pub(crate) const CHEAP_EVALUATION: std::time::Duration = std::time::Duration::from_micros(20);
