//! The study as an optimisation problem, and the optimiser configuration it asks for.

use std::collections::HashMap;
use std::sync::atomic::{AtomicU64, Ordering};

use optimizer::{
    Algorithm, Nsga2Config, Outcome, Problem, RunConfig, ScalarisedConfig, ScreeningConfig,
    Variable,
};

use super::files::JournalRecord;

use crate::study::{AlgorithmChoice, Study};

/// A study seen by the optimiser: variables in SI, objectives minimised (maximised ones
/// negated), constraints normalised (g <= 0 feasible).
pub struct StudyProblem<'a> {
    /// The study.
    pub study: &'a Study,
}

impl Problem for StudyProblem<'_> {
    fn variables(&self) -> Vec<Variable> {
        self.study
            .variables
            .iter()
            .map(|v| Variable::new(v.column(), v.lower, v.upper))
            .collect()
    }

    fn num_objectives(&self) -> usize {
        self.study.objectives.len()
    }

    fn num_constraints(&self) -> usize {
        self.study.constraints.len()
    }

    fn evaluate(&self, x: &[f64]) -> Result<Outcome, String> {
        let (_, natural, constraints) = self.study.evaluate_outcome(x)?;
        let objectives = self
            .study
            .objectives
            .iter()
            .zip(&natural)
            .map(|(o, v)| o.to_minimised(*v))
            .collect();
        Ok(Outcome {
            objectives,
            constraints,
        })
    }
}

/// A study problem that answers from the journal: the outcomes recorded for the generations
/// after the last snapshot, keyed by the exact bits of the design variables, so a resume
/// replays those generations (the optimiser draws the same designs from the same state)
/// without evaluating again. A design not in the journal is counted as a miss and not
/// evaluated (the replay undoes a step with a miss).
pub struct Replay<'a> {
    inner: &'a StudyProblem<'a>,
    recorded: HashMap<Vec<u64>, Result<Outcome, String>>,
    misses: AtomicU64,
}

impl<'a> Replay<'a> {
    /// The replay of `records` over `inner`.
    pub fn new(inner: &'a StudyProblem<'a>, records: &[JournalRecord]) -> Replay<'a> {
        let mut recorded = HashMap::new();
        for o in records.iter().flat_map(|r| &r.outcomes) {
            let key = o.x.iter().map(|v| v.to_bits()).collect();
            let result = match &o.failure {
                Some(reason) => Err(reason.clone()),
                None => Ok(Outcome {
                    objectives: o.objectives.clone(),
                    constraints: o.constraints.clone(),
                }),
            };
            recorded.insert(key, result);
        }
        Replay {
            inner,
            recorded,
            misses: AtomicU64::new(0),
        }
    }

    /// Designs that were not in the journal (0 when the replay matched it).
    pub fn misses(&self) -> u64 {
        self.misses.load(Ordering::SeqCst)
    }
}

impl Problem for Replay<'_> {
    fn variables(&self) -> Vec<Variable> {
        self.inner.variables()
    }

    fn num_objectives(&self) -> usize {
        self.inner.num_objectives()
    }

    fn num_constraints(&self) -> usize {
        self.inner.num_constraints()
    }

    fn evaluate(&self, x: &[f64]) -> Result<Outcome, String> {
        let key: Vec<u64> = x.iter().map(|v| v.to_bits()).collect();
        match self.recorded.get(&key) {
            Some(r) => r.clone(),
            None => {
                self.misses.fetch_add(1, Ordering::SeqCst);
                Err("not in the journal".into())
            }
        }
    }
}

/// The optimiser configuration of a study.
pub fn run_config(study: &Study) -> RunConfig {
    let o = &study.optimizer;
    let algorithm = match o.algorithm {
        AlgorithmChoice::Nsga2 => Algorithm::Nsga2(Nsga2Config {
            population_size: o.population,
            ..Nsga2Config::default()
        }),
        AlgorithmChoice::Scalarised => {
            let rest = o.max_evaluations.saturating_sub(o.population as u64);
            Algorithm::Scalarised(ScalarisedConfig {
                scalarisation: o.scalarisation,
                solver: o.solver,
                subproblems: o.subproblems,
                evaluations_per_subproblem: (rest / o.subproblems.max(1) as u64).max(1),
                initial_samples: o.population.max(2),
            })
        }
        AlgorithmChoice::Screening => Algorithm::Screening(ScreeningConfig {
            design: o.sampler,
            points: o.max_evaluations.min(usize::MAX as u64) as usize,
            batch_size: o.population,
        }),
    };
    let mut config = RunConfig::new(algorithm, o.seed, o.max_evaluations);
    config.archive_epsilon = o.archive_epsilon.clone();
    config.stall_generations = o.stall_generations;
    config
}
