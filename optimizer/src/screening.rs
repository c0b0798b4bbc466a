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

/// The next batch of design points (at most `remaining`), in O(batch) time and memory
/// whatever the number of points: point `i` of the design is computed from the seed and `i`
/// alone, so the design is the same for any batch size and across a resume.
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
        InitialDesign::LatinHypercube => {
            doe::latin_hypercube_slice(c.points, s.next, n, d, s.design_seed)
        }
        InitialDesign::Random => {
            // Point i takes draws i d .. (i + 1) d of the seed's stream: one f64 is one u64,
            // two 32-bit words of ChaCha, so the stream is entered at word 2 d i.
            use rand::Rng;
            let mut rng = ChaCha8Rng::seed_from_u64(s.design_seed);
            rng.set_word_pos(2 * d as u128 * s.next as u128);
            (0..n)
                .map(|_| (0..d).map(|_| rng.random::<f64>()).collect())
                .collect()
        }
    };
    s.next += n;
    doe::scale_to_bounds(unit, vars)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn vars(d: usize) -> Vec<Variable> {
        (0..d)
            .map(|j| Variable {
                name: format!("x{j}"),
                lower: 0.0,
                upper: 1.0,
            })
            .collect()
    }

    fn all_batches(c: &ScreeningConfig, seed: u64, d: usize) -> Vec<Vec<f64>> {
        let mut s = ScreeningState::new(seed);
        let mut out = Vec::new();
        while !s.complete(c) {
            out.extend(next_batch(c, &mut s, &vars(d), usize::MAX));
        }
        out
    }

    #[test]
    fn the_design_does_not_depend_on_the_batch_size() {
        for design in [InitialDesign::LatinHypercube, InitialDesign::Random] {
            let whole = all_batches(
                &ScreeningConfig {
                    design,
                    points: 103,
                    batch_size: 103,
                },
                42,
                3,
            );
            for batch_size in [1, 7, 50] {
                let c = ScreeningConfig {
                    design,
                    points: 103,
                    batch_size,
                };
                assert_eq!(all_batches(&c, 42, 3), whole, "{design:?} {batch_size}");
            }
        }
    }

    #[test]
    fn batched_latin_hypercube_has_one_point_per_stratum() {
        // Defining property of a Latin hypercube (McKay et al. 1979), for sizes that are and
        // are not powers of two (the strata come from a permutation of the points).
        for n in [1, 2, 37, 64, 1000] {
            let c = ScreeningConfig {
                design: InitialDesign::LatinHypercube,
                points: n,
                batch_size: 9,
            };
            let pts = all_batches(&c, 7, 4);
            for j in 0..4 {
                let mut strata: Vec<usize> =
                    pts.iter().map(|p| (p[j] * n as f64) as usize).collect();
                strata.sort_unstable();
                assert_eq!(strata, (0..n).collect::<Vec<_>>(), "n {n}, variable {j}");
            }
        }
    }

    #[test]
    fn random_design_is_the_seeds_stream_in_order() {
        // The random design is the stream of the seed drawn point by point, so a batch that
        // enters the stream at its own offset continues it exactly.
        use rand::Rng;
        let mut rng = ChaCha8Rng::seed_from_u64(5);
        let expected: Vec<Vec<f64>> = (0..40)
            .map(|_| (0..3).map(|_| rng.random::<f64>()).collect())
            .collect();
        let c = ScreeningConfig {
            design: InitialDesign::Random,
            points: 40,
            batch_size: 6,
        };
        assert_eq!(all_batches(&c, 5, 3), expected);
    }

    #[test]
    fn a_batch_of_a_huge_design_costs_only_the_batch() {
        // 1e13 points: generating the whole design (the former way) needs about 240 TB.
        let c = ScreeningConfig {
            design: InitialDesign::LatinHypercube,
            points: 10_000_000_000_000,
            batch_size: 100,
        };
        let mut s = ScreeningState::new(3);
        s.next = 9_999_999_999_950;
        let b = next_batch(&c, &mut s, &vars(6), usize::MAX);
        assert_eq!(b.len(), 50);
        assert!(s.complete(&c));
        assert!(b.iter().flatten().all(|x| (0.0..1.0).contains(x)));
    }
}
