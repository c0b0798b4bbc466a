//! Designs of experiments: Latin hypercube (McKay, Beckman and Conover, Technometrics 21
//! (1979) 239) and an Owen-scrambled Sobol sequence (Sobol 1967; scrambling after Burley,
//! JCGT 9(4) 2020, through the `sobol_burley` crate).
//!
//! `sobol_burley` gives `f32` samples, at most 2^16 points and 256 dimensions. That fits the
//! use here: a screening sweep or an initial population of a design study has a few
//! variables and far fewer than 65 536 points, and the `f32` grid (2^-24 of each range) is
//! far finer than any design tolerance. Larger requests are refused with an error instead of
//! silently repeating points.

use crate::problem::Variable;
use rand::seq::SliceRandom;
use rand::Rng;
use rand_chacha::ChaCha8Rng;
use serde::{Deserialize, Serialize};

/// Largest number of Sobol points (limit of `sobol_burley`).
pub const SOBOL_MAX_POINTS: usize = 1 << 16;
/// Largest number of Sobol dimensions (limit of `sobol_burley`).
pub const SOBOL_MAX_DIMENSIONS: usize = 256;

/// A design of experiments over the variable bounds.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum InitialDesign {
    /// Independent uniform points.
    Random,
    /// Latin hypercube: each variable's range cut into `n` equal strata, one point in each.
    LatinHypercube,
    /// Owen-scrambled Sobol points (at most 2^16 points and 256 variables).
    Sobol,
}

/// `n` points of a Latin hypercube in the unit cube `[0, 1)^d`: in each dimension, a random
/// permutation of the strata and a uniform position inside each stratum.
pub fn latin_hypercube(n: usize, d: usize, rng: &mut ChaCha8Rng) -> Vec<Vec<f64>> {
    let mut pts = vec![vec![0.0; d]; n];
    let mut perm: Vec<usize> = (0..n).collect();
    for j in 0..d {
        perm.shuffle(rng);
        for (i, p) in pts.iter_mut().enumerate() {
            let u: f64 = rng.random();
            p[j] = (perm[i] as f64 + u) / n as f64;
        }
    }
    pts
}

/// Points `start..start + n` of the Owen-scrambled Sobol sequence with scramble `seed`, in
/// the unit cube `[0, 1)^d`.
pub fn sobol(start: usize, n: usize, d: usize, seed: u32) -> Result<Vec<Vec<f64>>, String> {
    if start + n > SOBOL_MAX_POINTS {
        return Err(format!(
            "a Sobol design holds at most {SOBOL_MAX_POINTS} points, {} asked",
            start + n
        ));
    }
    if d > SOBOL_MAX_DIMENSIONS {
        return Err(format!(
            "a Sobol design holds at most {SOBOL_MAX_DIMENSIONS} variables, {d} asked"
        ));
    }
    Ok((start..start + n)
        .map(|i| {
            (0..d)
                .map(|j| f64::from(sobol_burley::sample(i as u32, j as u32, seed)))
                .collect()
        })
        .collect())
}

/// Map unit-cube points onto the variable bounds.
pub fn scale_to_bounds(unit: Vec<Vec<f64>>, vars: &[Variable]) -> Vec<Vec<f64>> {
    unit.into_iter()
        .map(|u| {
            u.iter()
                .zip(vars)
                .map(|(t, v)| (v.lower + t * (v.upper - v.lower)).clamp(v.lower, v.upper))
                .collect()
        })
        .collect()
}

/// `n` points of `kind` within the bounds of `vars`, all randomness drawn from `rng`.
/// A Sobol request beyond its limits falls back to a Latin hypercube (callers validate first).
pub(crate) fn design(
    kind: InitialDesign,
    vars: &[Variable],
    n: usize,
    rng: &mut ChaCha8Rng,
) -> Vec<Vec<f64>> {
    let d = vars.len();
    let unit = match kind {
        InitialDesign::Random => (0..n)
            .map(|_| (0..d).map(|_| rng.random::<f64>()).collect())
            .collect(),
        InitialDesign::LatinHypercube => latin_hypercube(n, d, rng),
        InitialDesign::Sobol => {
            let seed: u32 = rng.random();
            sobol(0, n, d, seed).unwrap_or_else(|_| latin_hypercube(n, d, rng))
        }
    };
    scale_to_bounds(unit, vars)
}

#[cfg(test)]
mod tests {
    use super::*;
    use rand::SeedableRng;

    #[test]
    fn latin_hypercube_has_one_point_per_stratum() {
        // Defining property of a Latin hypercube (McKay et al. 1979).
        let mut rng = ChaCha8Rng::seed_from_u64(1);
        let n = 37;
        let pts = latin_hypercube(n, 4, &mut rng);
        for j in 0..4 {
            let mut strata: Vec<usize> = pts.iter().map(|p| (p[j] * n as f64) as usize).collect();
            strata.sort_unstable();
            assert_eq!(strata, (0..n).collect::<Vec<_>>());
        }
    }

    #[test]
    fn sobol_first_power_of_two_is_stratified() {
        // A (0, m, s)-net property of the Sobol sequence in each single dimension: the first
        // 2^k points put exactly one point in each interval [i/2^k, (i+1)/2^k).
        let pts = sobol(0, 64, 3, 9).expect("within limits");
        for j in 0..3 {
            let mut cells: Vec<usize> = pts.iter().map(|p| (p[j] * 64.0) as usize).collect();
            cells.sort_unstable();
            assert_eq!(cells, (0..64).collect::<Vec<_>>());
        }
        assert!(sobol(65_000, 1000, 2, 0).is_err());
    }
}
