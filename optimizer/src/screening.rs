//! Screening: a design of experiments over the variable bounds, evaluated in batches.

use crate::doe::{self, InitialDesign};
use crate::problem::Variable;
use rand::SeedableRng;
use rand_chacha::ChaCha8Rng;
use serde::{Deserialize, Serialize};

/// Settings of a screening sweep.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ScreeningConfig {
    /// The design (Latin hypercube, Sobol or random).
    pub design: InitialDesign,
    /// Number of design points (Sobol: at most 2^16).
    pub points: usize,
    /// Points evaluated per step (in parallel).
    pub batch_size: usize,
}

impl ScreeningConfig {
    pub(crate) fn validate(&self) -> Result<(), String> {
        if self.points == 0 {
            return Err("points must be at least 1".into());
        }
        if self.batch_size == 0 {
            return Err("batch_size must be at least 1".into());
        }
        Ok(())
    }
}

/// Where a screening sweep is: the design is regenerated from its seed, so the state stays
/// small whatever the number of points.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub(crate) struct ScreeningState {
    design_seed: u64,
    next: usize,
}

impl ScreeningState {
    pub(crate) fn new(design_seed: u64) -> ScreeningState {
        ScreeningState {
            design_seed,
            next: 0,
        }
    }

    pub(crate) fn complete(&self, c: &ScreeningConfig) -> bool {
        self.next >= c.points
    }
}

/// The next batch of design points (at most `remaining`).
pub(crate) fn next_batch(
    c: &ScreeningConfig,
    s: &mut ScreeningState,
    vars: &[Variable],
    remaining: usize,
) -> Vec<Vec<f64>> {
    let n = c.batch_size.min(remaining).min(c.points - s.next);
    let d = vars.len();
    let unit = match c.design {
        InitialDesign::Sobol => {
            let seed = (s.design_seed & 0xffff_ffff) as u32;
            doe::sobol(s.next, n, d, seed).expect("limits checked when the run was set up")
        }
        kind => {
            let mut rng = ChaCha8Rng::seed_from_u64(s.design_seed);
            let all = match kind {
                InitialDesign::LatinHypercube => doe::latin_hypercube(c.points, d, &mut rng),
                _ => {
                    use rand::Rng;
                    (0..c.points)
                        .map(|_| (0..d).map(|_| rng.random::<f64>()).collect())
                        .collect()
                }
            };
            all[s.next..s.next + n].to_vec()
        }
    };
    s.next += n;
    doe::scale_to_bounds(unit, vars)
}
