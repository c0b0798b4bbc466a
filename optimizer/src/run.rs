//! A run: configuration, serialisable state, one step at a time, termination.

use crate::archive::Archive;
use crate::doe::{self, InitialDesign};
use crate::indicators::{hypervolume_of, hypervolume_sorted};
use crate::nsga2::{self, Nsga2Config, RankingCache};
use crate::problem::{evaluate_batch, Evaluated, Problem, Variable};
use crate::scalarised::{self, ScalarisedConfig, ScalarisedState};
use crate::screening::{self, ScreeningConfig, ScreeningState};
use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;
use serde::{Deserialize, Serialize};
use std::sync::atomic::{AtomicBool, Ordering};
use std::time::Instant;

/// Version of the serialised [`Run`] state; bumped whenever its layout or meaning changes.
/// 2: a Latin-hypercube screening sweep takes its points from
/// [`doe::latin_hypercube_slice`] (batches in O(batch)); a version-1 state of such a sweep is
/// refused, every other version-1 state reads unchanged.
pub const STATE_VERSION: u32 = 2;

/// Which algorithm a run uses.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum Algorithm {
    /// NSGA-II, one generation a step.
    Nsga2(Nsga2Config),
    /// A series of single-objective sub-problems (weighted sum, Chebyshev or epsilon
    /// constraint) solved through argmin, one sub-problem a step.
    Scalarised(ScalarisedConfig),
    /// A design of experiments evaluated in batches, one batch a step.
    Screening(ScreeningConfig),
}

impl Algorithm {
    /// Short name: `nsga2`, `scalarised` or `screening`.
    pub fn name(&self) -> &'static str {
        match self {
            Algorithm::Nsga2(_) => "nsga2",
            Algorithm::Scalarised(_) => "scalarised",
            Algorithm::Screening(_) => "screening",
        }
    }
}

/// Everything that fixes a run (with the problem).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct RunConfig {
    /// The algorithm and its settings.
    pub algorithm: Algorithm,
    /// Seed of the run's random number generator; the only source of randomness.
    pub seed: u64,
    /// Evaluation budget (at least 1); a step never goes past it.
    pub max_evaluations: u64,
    /// Epsilon grid of the archive (one positive value per objective), bounding its size.
    pub archive_epsilon: Option<Vec<f64>>,
    /// Hypervolume reference point; `None` fixes one from the first feasible designs found
    /// (their worst value plus 10 % of their range in each objective) and keeps it.
    pub hv_reference: Option<Vec<f64>>,
    /// Stop when the archive hypervolume has not grown by more than `stall_tolerance`
    /// (relative) over this many steps.
    pub stall_generations: Option<u64>,
    /// Relative hypervolume growth below which a step counts as stalled.
    pub stall_tolerance: f64,
    /// Keep the archive of every non-dominated feasible design seen (default). Off, the run
    /// keeps no archive ([`Run::archive`] stays empty) and the hypervolume, if tracked, is that
    /// of the current population's feasible members; the designs found are then those of
    /// [`Run::population`]. Not allowed with the scalarised algorithm, which starts each
    /// sub-problem from the archive, nor with `archive_epsilon`.
    #[serde(default = "yes")]
    pub keep_archive: bool,
    /// Measure the hypervolume after every step (default). Off, [`Run::hv_history`] stays
    /// empty and [`StepReport::hypervolume`] is 0; a stall test needs it on.
    #[serde(default = "yes")]
    pub track_hypervolume: bool,
}

fn yes() -> bool {
    true
}

impl RunConfig {
    /// A configuration with no archive grid, an automatic hypervolume reference, no stall
    /// test, and archive and hypervolume history kept.
    pub fn new(algorithm: Algorithm, seed: u64, max_evaluations: u64) -> RunConfig {
        RunConfig {
            algorithm,
            seed,
            max_evaluations,
            archive_epsilon: None,
            hv_reference: None,
            stall_generations: None,
            stall_tolerance: 1e-6,
            keep_archive: true,
            track_hypervolume: true,
        }
    }

    /// The same configuration run lean: no archive and no hypervolume history, as other
    /// libraries run NSGA-II (the designs found are the final population's). The random
    /// draws, and so the population after every step, are the same as with both kept.
    pub fn lean(mut self) -> RunConfig {
        self.keep_archive = false;
        self.track_hypervolume = false;
        self
    }
}

/// Why a run stopped.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum StopReason {
    /// The evaluation budget is used up.
    EvaluationBudget,
    /// The algorithm has nothing left to do (every design or sub-problem done).
    Completed,
    /// The hypervolume stalled for the configured number of steps.
    Stalled,
    /// The wall-clock deadline passed.
    Deadline,
    /// The caller raised the stop flag.
    StopRequested,
}

impl std::fmt::Display for StopReason {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        let s = match self {
            StopReason::EvaluationBudget => "evaluation budget reached",
            StopReason::Completed => "completed",
            StopReason::Stalled => "hypervolume stalled",
            StopReason::Deadline => "wall-clock budget reached",
            StopReason::StopRequested => "stopped on request",
        };
        f.write_str(s)
    }
}

/// A configuration that cannot be run on this problem.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum ConfigError {
    /// A variable's bounds are not finite or are reversed.
    #[error("variable `{name}`: {message}")]
    Variable {
        /// The variable's name.
        name: String,
        /// What is wrong.
        message: String,
    },
    /// The problem's shape is unusable (no variables, no objectives).
    #[error("problem: {0}")]
    Problem(String),
    /// A setting of the run is out of range.
    #[error("setting `{field}`: {message}")]
    Setting {
        /// The setting.
        field: String,
        /// What is wrong and what is allowed.
        message: String,
    },
    /// A serialised state could not be read or is of another version.
    #[error("run state: {0}")]
    State(String),
}

fn setting(field: &str, message: impl Into<String>) -> ConfigError {
    ConfigError::Setting {
        field: field.to_string(),
        message: message.into(),
    }
}

/// What one step did.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct StepReport {
    /// The step's generation number (0 for the first step).
    pub generation: u64,
    /// Evaluations done by the run so far, this step included.
    pub evaluations: u64,
    /// The designs evaluated in this step, in id order.
    pub new: Vec<Evaluated>,
    /// Share of this step's designs that are feasible (0 when none were evaluated).
    pub feasible_share: f64,
    /// Hypervolume after this step (0 before a reference point exists, and always 0 when the
    /// run does not track it): of the archive, or of the population's feasible members with
    /// NSGA-II and four or more objectives or when the run keeps no archive.
    pub hypervolume: f64,
}

#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
enum AlgoState {
    Nsga2,
    Scalarised(ScalarisedState),
    Screening(ScreeningState),
}

/// A run: the whole state of an optimisation (configuration, population, archive, random
/// number generator, counters). It serialises with serde; a run taken through JSON between two
/// steps continues exactly as one that was not (serde_json's `float_roundtrip` is enabled).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Run {
    version: u32,
    config: RunConfig,
    variables: Vec<Variable>,
    num_objectives: usize,
    num_constraints: usize,
    rng: ChaCha8Rng,
    generation: u64,
    evaluations: u64,
    population: Vec<Evaluated>,
    archive: Archive,
    hv_reference: Option<Vec<f64>>,
    hv_history: Vec<f64>,
    state: AlgoState,
    /// The NSGA-II population's ranking, kept from survival (not part of the state).
    #[serde(skip)]
    ranking: RankingCache,
}

impl Run {
    /// Check `config` against `problem` and set up a run (no evaluation yet).
    pub fn new(config: RunConfig, problem: &(impl Problem + ?Sized)) -> Result<Run, ConfigError> {
        let variables = problem.variables();
        let m = problem.num_objectives();
        if variables.is_empty() {
            return Err(ConfigError::Problem("no variables".into()));
        }
        if m == 0 {
            return Err(ConfigError::Problem("no objectives".into()));
        }
        for v in &variables {
            if !(v.lower.is_finite() && v.upper.is_finite()) {
                return Err(ConfigError::Variable {
                    name: v.name.clone(),
                    message: format!("bounds must be finite, got [{}, {}]", v.lower, v.upper),
                });
            }
            if v.lower > v.upper {
                return Err(ConfigError::Variable {
                    name: v.name.clone(),
                    message: format!("lower bound {} is above upper bound {}", v.lower, v.upper),
                });
            }
        }
        if config.max_evaluations == 0 {
            return Err(setting("max_evaluations", "must be at least 1"));
        }
        if let Some(eps) = &config.archive_epsilon {
            // A subnormal grid size overflows the box index of any ordinary objective value.
            if eps.len() != m
                || eps
                    .iter()
                    .any(|e| !(e.is_finite() && e.is_normal() && *e > 0.0))
            {
                return Err(setting(
                    "archive_epsilon",
                    format!("needs {m} positive finite values (not subnormal), one per objective"),
                ));
            }
        }
        if let Some(r) = &config.hv_reference {
            if r.len() != m || r.iter().any(|e| !e.is_finite()) {
                return Err(setting(
                    "hv_reference",
                    format!("needs {m} finite values, one per objective"),
                ));
            }
        }
        if config.stall_generations == Some(0) {
            return Err(setting("stall_generations", "must be at least 1"));
        }
        if !(config.stall_tolerance.is_finite() && config.stall_tolerance >= 0.0) {
            return Err(setting("stall_tolerance", "must be finite and >= 0"));
        }
        if config.stall_generations.is_some() && !config.track_hypervolume {
            return Err(setting(
                "stall_generations",
                "a stall test judges the hypervolume history: needs track_hypervolume on",
            ));
        }
        if !config.keep_archive {
            if config.archive_epsilon.is_some() {
                return Err(setting(
                    "archive_epsilon",
                    "an archive grid needs keep_archive on",
                ));
            }
            if matches!(config.algorithm, Algorithm::Scalarised(_)) {
                return Err(setting(
                    "keep_archive",
                    "the scalarised algorithm starts each sub-problem from the archive: \
                     must be on",
                ));
            }
        }
        let mut rng = ChaCha8Rng::seed_from_u64(config.seed);
        let state = match &config.algorithm {
            Algorithm::Nsga2(c) => {
                c.validate().map_err(|e| setting("nsga2", e))?;
                if c.initial == InitialDesign::Sobol {
                    check_sobol(c.population_size, variables.len())?;
                }
                AlgoState::Nsga2
            }
            Algorithm::Scalarised(c) => {
                c.validate(m).map_err(|e| setting("scalarised", e))?;
                AlgoState::Scalarised(ScalarisedState::new(c, m))
            }
            Algorithm::Screening(c) => {
                c.validate().map_err(|e| setting("screening", e))?;
                if c.design == InitialDesign::Sobol {
                    check_sobol(c.points, variables.len())?;
                }
                AlgoState::Screening(ScreeningState::new(rng.random()))
            }
        };
        Ok(Run {
            version: STATE_VERSION,
            archive: Archive::new(config.archive_epsilon.clone()),
            hv_reference: config.hv_reference.clone(),
            config,
            variables,
            num_objectives: m,
            num_constraints: problem.num_constraints(),
            rng,
            generation: 0,
            evaluations: 0,
            population: Vec::new(),
            hv_history: Vec::new(),
            state,
            ranking: RankingCache::default(),
        })
    }

    /// Read a state written with `serde_json`, checking its version.
    pub fn from_json(text: &str) -> Result<Run, ConfigError> {
        let mut run: Run =
            serde_json::from_str(text).map_err(|e| ConfigError::State(e.to_string()))?;
        let lhs_screening = matches!(
            &run.config.algorithm,
            Algorithm::Screening(c) if c.design == InitialDesign::LatinHypercube
        );
        if run.version == 1 && lhs_screening {
            return Err(ConfigError::State(
                "state version 1 of a Latin-hypercube screening sweep: its points came from a construction this version no longer uses, so the sweep cannot continue".into(),
            ));
        }
        if run.version != STATE_VERSION && run.version != 1 {
            return Err(ConfigError::State(format!(
                "state version {} cannot be read by this version (reads {STATE_VERSION} and 1)",
                run.version
            )));
        }
        run.version = STATE_VERSION;
        let consistent = matches!(
            (&run.config.algorithm, &run.state),
            (Algorithm::Nsga2(_), AlgoState::Nsga2)
                | (Algorithm::Scalarised(_), AlgoState::Scalarised(_))
                | (Algorithm::Screening(_), AlgoState::Screening(_))
        );
        if !consistent {
            return Err(ConfigError::State(
                "the algorithm's progress does not match its configuration".into(),
            ));
        }
        Ok(run)
    }

    /// The state as JSON (bit-exact round trip through [`Run::from_json`]).
    pub fn to_json(&self) -> String {
        serde_json::to_string(self).expect("a run state always serialises")
    }

    /// One generation (NSGA-II), one sub-problem (scalarised) or one batch (screening);
    /// evaluations in parallel where the algorithm allows it. Does nothing once
    /// [`Run::finished`] says so.
    pub fn step(&mut self, problem: &(impl Problem + ?Sized)) -> StepReport {
        let generation = self.generation;
        if self.finished().is_some() {
            return StepReport {
                generation,
                evaluations: self.evaluations,
                new: Vec::new(),
                feasible_share: 0.0,
                hypervolume: self.hv_history.last().copied().unwrap_or(0.0),
            };
        }
        let remaining = (self.config.max_evaluations - self.evaluations) as usize;
        let new = match (&self.config.algorithm, &mut self.state) {
            (Algorithm::Nsga2(c), AlgoState::Nsga2) => {
                let n = c.population_size.min(remaining);
                let xs = if self.population.is_empty() {
                    nsga2::initial(c, &self.variables, &mut self.rng, n)
                } else {
                    nsga2::offspring(
                        c,
                        &self.variables,
                        &mut self.rng,
                        &self.population,
                        self.ranking.0.take(),
                        n,
                    )
                };
                let new = evaluate_batch(problem, xs, self.evaluations, generation);
                let population = std::mem::take(&mut self.population);
                let (survivors, ranking) = nsga2::survive(population, &new, c.population_size);
                self.population = survivors;
                self.ranking = RankingCache(ranking);
                new
            }
            (Algorithm::Scalarised(c), AlgoState::Scalarised(s)) => {
                let new = scalarised::step(
                    c,
                    s,
                    problem,
                    &self.variables,
                    &mut self.rng,
                    &self.archive,
                    &self.population,
                    self.evaluations,
                    generation,
                    remaining as u64,
                );
                self.population = new.clone();
                new
            }
            (Algorithm::Screening(c), AlgoState::Screening(s)) => {
                let xs = screening::next_batch(c, s, &self.variables, remaining);
                let new = evaluate_batch(problem, xs, self.evaluations, generation);
                self.population = new.clone();
                new
            }
            _ => unreachable!("the state always matches the configured algorithm"),
        };
        self.evaluations += new.len() as u64;
        // Neither the archive nor the hypervolume draws a random number: switching them off
        // leaves the search itself unchanged.
        let measured = if self.config.keep_archive {
            let r = self
                .hv_reference
                .as_deref()
                .filter(|_| self.config.track_hypervolume);
            self.archive.insert_batch_measured(&new, r)
        } else {
            None
        };
        let hv = if self.config.track_hypervolume {
            self.update_hypervolume(measured)
        } else {
            0.0
        };
        self.generation += 1;
        let feasible = new.iter().filter(|e| e.is_feasible()).count();
        StepReport {
            generation,
            evaluations: self.evaluations,
            feasible_share: if new.is_empty() {
                0.0
            } else {
                feasible as f64 / new.len() as f64
            },
            new,
            hypervolume: hv,
        }
    }

    /// Hypervolume after a step; `measured` is the archive's, if the archive update measured
    /// it with the current reference point.
    fn update_hypervolume(&mut self, measured: Option<f64>) -> f64 {
        let keep = self.config.keep_archive;
        if self.hv_reference.is_none() {
            // Fixed from the first feasible designs found: the archive, or without one the
            // non-dominated feasible members of the population.
            let pts: Vec<Vec<f64>> = if keep {
                self.archive.objectives()
            } else {
                self.population_front()
            };
            let r = (0..self.num_objectives)
                .map(|i| {
                    let hi = pts.iter().map(|p| p[i]).fold(f64::NEG_INFINITY, f64::max);
                    let lo = pts.iter().map(|p| p[i]).fold(f64::INFINITY, f64::min);
                    let span = (hi - lo).max(1e-9 * hi.abs().max(1.0));
                    hi + 0.1 * span
                })
                .collect();
            self.hv_reference = Some(r);
        }
        // With four or more objectives the exact hypervolume costs O(n^(m-2) log n), too
        // much for a large archive at every step: NSGA-II then reports the hypervolume of its
        // population (the feasible members; dominated ones add nothing). So does a run
        // without an archive.
        let population_hv = !keep
            || (self.num_objectives >= 4 && matches!(self.config.algorithm, Algorithm::Nsga2(_)));
        let hv = match &self.hv_reference {
            Some(r) if population_hv => hypervolume_of(
                self.population
                    .iter()
                    .filter(|e| e.is_feasible())
                    .map(|e| e.objectives.as_slice()),
                r,
            ),
            Some(r) => match (measured, self.archive.sorted_objectives()) {
                (Some(v), _) => v,
                // The archive keeps its points sorted (two or three objectives): no re-sort.
                (None, Some(sorted)) => hypervolume_sorted(sorted, r),
                (None, None) => hypervolume_of(
                    self.archive
                        .members()
                        .iter()
                        .map(|e| e.objectives.as_slice()),
                    r,
                ),
            },
            None => 0.0,
        };
        self.hv_history.push(hv);
        hv
    }

    /// Why the run is over, if it is (budget, algorithm complete, stalled hypervolume).
    /// A deadline or a stop request is reported by [`Run::run`] instead.
    pub fn finished(&self) -> Option<StopReason> {
        if self.evaluations >= self.config.max_evaluations {
            return Some(StopReason::EvaluationBudget);
        }
        let done = match (&self.config.algorithm, &self.state) {
            (Algorithm::Scalarised(c), AlgoState::Scalarised(s)) => s.complete(c),
            (Algorithm::Screening(c), AlgoState::Screening(s)) => s.complete(c),
            _ => false,
        };
        if done {
            return Some(StopReason::Completed);
        }
        if let Some(k) = self.config.stall_generations {
            let h = &self.hv_history;
            let k = k as usize;
            if h.len() > k {
                let old = h[h.len() - 1 - k];
                let now = h[h.len() - 1];
                if old > 0.0 && now <= old * (1.0 + self.config.stall_tolerance) {
                    return Some(StopReason::Stalled);
                }
            }
        }
        None
    }

    /// Step until finished, the stop flag is raised or the deadline passes (both checked
    /// between steps), calling `on_step` after every step.
    pub fn run(
        &mut self,
        problem: &(impl Problem + ?Sized),
        mut on_step: impl FnMut(&StepReport, &Run),
        stop: &AtomicBool,
        deadline: Option<Instant>,
    ) -> StopReason {
        loop {
            if let Some(r) = self.finished() {
                return r;
            }
            if stop.load(Ordering::SeqCst) {
                return StopReason::StopRequested;
            }
            if deadline.is_some_and(|d| Instant::now() >= d) {
                return StopReason::Deadline;
            }
            let report = self.step(problem);
            on_step(&report, self);
        }
    }

    /// The non-dominated feasible designs found so far (empty when the run keeps no
    /// archive, see [`RunConfig::keep_archive`]).
    pub fn archive(&self) -> &Archive {
        &self.archive
    }

    /// The current population (NSGA-II) or the designs of the last step (other algorithms).
    pub fn population(&self) -> &[Evaluated] {
        &self.population
    }

    /// Objective vectors of the non-dominated feasible members of the population (what
    /// NSGA-II implementations usually report as their result).
    pub fn population_front(&self) -> Vec<Vec<f64>> {
        let pts: Vec<Vec<f64>> = self
            .population
            .iter()
            .filter(|e| e.is_feasible())
            .map(|e| e.objectives.clone())
            .collect();
        crate::dominance::non_dominated_indices(&pts)
            .into_iter()
            .map(|i| pts[i].clone())
            .collect()
    }

    /// The configuration.
    pub fn config(&self) -> &RunConfig {
        &self.config
    }

    /// The variables, as the problem gave them when the run was set up.
    pub fn variables(&self) -> &[Variable] {
        &self.variables
    }

    /// Steps done so far.
    pub fn generation(&self) -> u64 {
        self.generation
    }

    /// Evaluations done so far.
    pub fn evaluations(&self) -> u64 {
        self.evaluations
    }

    /// The hypervolume reference point in use (configured or fixed from the first front).
    pub fn hv_reference(&self) -> Option<&[f64]> {
        self.hv_reference.as_deref()
    }

    /// Hypervolume after each step so far (see [`StepReport::hypervolume`]; empty when the
    /// run does not track it).
    pub fn hv_history(&self) -> &[f64] {
        &self.hv_history
    }
}

fn check_sobol(points: usize, dims: usize) -> Result<(), ConfigError> {
    if points > doe::SOBOL_MAX_POINTS {
        return Err(setting(
            "design",
            format!(
                "a Sobol design holds at most {} points, {points} asked; use a Latin hypercube",
                doe::SOBOL_MAX_POINTS
            ),
        ));
    }
    if dims > doe::SOBOL_MAX_DIMENSIONS {
        return Err(setting(
            "design",
            format!(
                "a Sobol design holds at most {} variables, the problem has {dims}",
                doe::SOBOL_MAX_DIMENSIONS
            ),
        ));
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::problems::{Dtlz2, Tnk, Zdt, ZdtKind};
    use crate::screening::ScreeningConfig;

    fn nsga2(seed: u64, evals: u64) -> RunConfig {
        RunConfig::new(Algorithm::Nsga2(Nsga2Config::default()), seed, evals)
    }

    fn finish(config: RunConfig, p: &dyn Problem) -> Run {
        let mut run = Run::new(config, p).unwrap();
        run.run(p, |_, _| {}, &AtomicBool::new(false), None);
        run
    }

    /// Population (ids, variables, objectives, constraints) as JSON: equal strings are equal
    /// bits (`float_roundtrip`).
    fn population_json(run: &Run) -> String {
        serde_json::to_string(run.population()).unwrap()
    }

    #[test]
    fn lean_runs_search_exactly_as_full_runs() {
        // Source: determinism rule (DEVELOPERS.md, "The optimizer"): archive upkeep and hypervolume
        // draw no random number, so switching them off leaves the population bit for bit the
        // same. Two objectives (ZDT1), three (DTLZ2, the sorted-sweep archive path) and a
        // constrained problem (TNK, Deb et al. 2002).
        let zdt1 = Zdt {
            kind: ZdtKind::Zdt1,
            n: 30,
        };
        let dtlz2 = Dtlz2 { m: 3, n: 12 };
        let cases: [(&dyn Problem, u64); 3] = [(&zdt1, 3000), (&dtlz2, 3000), (&Tnk, 2000)];
        for (p, evals) in cases {
            let full = finish(nsga2(11, evals), p);
            assert!(!full.archive().is_empty() && !full.hv_history().is_empty());
            let mut no_archive = nsga2(11, evals);
            no_archive.keep_archive = false;
            let mut no_hv = nsga2(11, evals);
            no_hv.track_hypervolume = false;
            for config in [nsga2(11, evals).lean(), no_archive, no_hv] {
                let (keep, track) = (config.keep_archive, config.track_hypervolume);
                let run = finish(config, p);
                assert_eq!(run.evaluations(), evals);
                assert_eq!(run.generation(), full.generation());
                assert_eq!(population_json(&run), population_json(&full));
                assert_eq!(run.archive().is_empty(), !keep);
                if keep {
                    assert_eq!(run.archive(), full.archive());
                }
                assert_eq!(run.hv_history().is_empty(), !track);
            }
        }
    }

    #[test]
    fn population_hypervolume_without_an_archive() {
        // Without an archive the tracked hypervolume is that of the feasible population,
        // never above the archive's (the archive holds every design the population held), and
        // the automatic reference point is fixed from the first population's front as it is
        // from the first archive (the same designs).
        let p = Zdt {
            kind: ZdtKind::Zdt2,
            n: 30,
        };
        let full = finish(nsga2(4, 2000), &p);
        let mut c = nsga2(4, 2000);
        c.keep_archive = false;
        let run = finish(c, &p);
        assert_eq!(run.hv_reference(), full.hv_reference());
        let r = run.hv_reference().unwrap();
        let pop = hypervolume_of(run.population().iter().map(|e| e.objectives.as_slice()), r);
        assert_eq!(run.hv_history().last().unwrap().to_bits(), pop.to_bits());
        assert_eq!(run.hv_history().len(), full.hv_history().len());
        for (a, b) in run.hv_history().iter().zip(full.hv_history()) {
            assert!(*a > 0.0 && *a <= *b * (1.0 + 1e-12), "{a} vs {b}");
        }
    }

    #[test]
    fn lean_state_round_trips_and_old_states_read_as_full() {
        let p = Dtlz2 { m: 3, n: 12 };
        let config = nsga2(5, 100_000).lean();
        let mut straight = Run::new(config.clone(), &p).unwrap();
        let mut first = Run::new(config, &p).unwrap();
        for _ in 0..6 {
            straight.step(&p);
            first.step(&p);
        }
        let mut resumed = Run::from_json(&first.to_json()).unwrap();
        for _ in 0..4 {
            straight.step(&p);
            resumed.step(&p);
        }
        assert_eq!(resumed.to_json(), straight.to_json());
        // A state written before the two switches existed reads as a run keeping both.
        let full = Run::new(nsga2(5, 1000), &p).unwrap().to_json();
        let old = full.replacen(",\"keep_archive\":true,\"track_hypervolume\":true", "", 1);
        assert_ne!(old, full);
        let read = Run::from_json(&old).unwrap();
        assert!(read.config().keep_archive && read.config().track_hypervolume);
        assert_eq!(read.to_json(), full);
    }

    #[test]
    fn version_one_states_read_except_a_latin_hypercube_sweep() {
        let p = Zdt {
            kind: ZdtKind::Zdt1,
            n: 3,
        };
        let old = |c: RunConfig| {
            let mut r = Run::new(c, &p).unwrap();
            r.step(&p);
            r.to_json().replacen("\"version\":2", "\"version\":1", 1)
        };
        let v1 = old(nsga2(3, 1000));
        assert!(v1.contains("\"version\":1"));
        assert_eq!(Run::from_json(&v1).unwrap().version, STATE_VERSION);
        let screen = |design| {
            RunConfig::new(
                Algorithm::Screening(ScreeningConfig {
                    design,
                    points: 50,
                    batch_size: 10,
                }),
                1,
                1000,
            )
        };
        assert!(Run::from_json(&old(screen(InitialDesign::Sobol))).is_ok());
        let e = Run::from_json(&old(screen(InitialDesign::LatinHypercube))).unwrap_err();
        assert!(e.to_string().contains("Latin-hypercube"), "{e}");
        let v9 = old(nsga2(3, 1000)).replacen("\"version\":1", "\"version\":9", 1);
        assert!(Run::from_json(&v9).is_err());
    }

    #[test]
    fn lean_combinations_that_cannot_work_are_refused() {
        let p = Zdt {
            kind: ZdtKind::Zdt1,
            n: 3,
        };
        let field = |c: RunConfig| match Run::new(c, &p) {
            Err(ConfigError::Setting { field, .. }) => field,
            other => panic!("expected a setting error, got {other:?}"),
        };
        let mut c = nsga2(1, 100);
        c.track_hypervolume = false;
        c.stall_generations = Some(5);
        assert_eq!(field(c), "stall_generations");
        let mut c = nsga2(1, 100).lean();
        c.archive_epsilon = Some(vec![0.1, 0.1]);
        assert_eq!(field(c), "archive_epsilon");
        let sc = ScalarisedConfig {
            scalarisation: crate::Scalarisation::Chebyshev,
            solver: crate::Solver::NelderMead,
            subproblems: 4,
            evaluations_per_subproblem: 20,
            initial_samples: 10,
        };
        let sc = RunConfig::new(Algorithm::Scalarised(sc), 1, 100);
        assert_eq!(field(sc.lean()), "keep_archive");
        // Screening keeps nothing between batches but its design: lean is allowed.
        let screen = ScreeningConfig {
            design: InitialDesign::LatinHypercube,
            points: 50,
            batch_size: 20,
        };
        let run = finish(
            RunConfig::new(Algorithm::Screening(screen), 1, 100).lean(),
            &p,
        );
        assert_eq!(run.evaluations(), 50);
        assert!(run.archive().is_empty());
    }
}
