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
use rand::{Rng, SeedableRng};
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

/// Points `start..start + n` of an `points`-point Latin hypercube in `[0, 1)^d` given by
/// `seed`, in O(n) time and memory whatever `points` is (a screening sweep of 10^13 points
/// takes its batches this way). Each dimension's strata are a keyed pseudorandom permutation
/// of `0..points` (a balanced Feistel network with cycle walking, after Black and Rogaway,
/// "Ciphers with arbitrary finite domains", CT-RSA 2002), evaluated at the point's index; the
/// position inside the stratum is draw `i` of the seed's ChaCha stream `j`. So point `i` depends
/// on `seed` and `i` only. (Not the same design as [`latin_hypercube`], which shuffles.)
pub fn latin_hypercube_slice(
    points: usize,
    start: usize,
    n: usize,
    d: usize,
    seed: u64,
) -> Vec<Vec<f64>> {
    let mut pts = vec![vec![0.0; d]; n];
    for j in 0..d {
        let perm = IndexPermutation::new(points as u64, mix64(seed ^ mix64(j as u64 + 1)));
        let mut rng = ChaCha8Rng::seed_from_u64(seed);
        rng.set_stream(j as u64);
        // One f64 is one u64: two 32-bit words of the stream.
        rng.set_word_pos(2 * start as u128);
        for (k, p) in pts.iter_mut().enumerate() {
            let u: f64 = rng.random();
            let stratum = perm.apply((start + k) as u64);
            p[j] = (stratum as f64 + u) / points as f64;
        }
    }
    pts
}

/// The finaliser of SplitMix64 (Steele, Lea and Flood, OOPSLA 2014): a bijective 64-bit mix.
fn mix64(mut z: u64) -> u64 {
    z = z.wrapping_add(0x9e37_79b9_7f4a_7c15);
    z = (z ^ (z >> 30)).wrapping_mul(0xbf58_476d_1ce4_e5b9);
    z = (z ^ (z >> 27)).wrapping_mul(0x94d0_49bb_1331_11eb);
    z ^ (z >> 31)
}

/// A keyed permutation of `0..n`: a balanced Feistel network on the smallest even number of
/// bits that holds `n`, walked again from its own output until the value falls below `n`
/// (cycle walking; the domain is less than 4 n, so the expected walk is under four passes).
struct IndexPermutation {
    n: u64,
    half_bits: u32,
    keys: [u64; 6],
}

impl IndexPermutation {
    fn new(n: u64, key: u64) -> IndexPermutation {
        let bits = (64 - n.saturating_sub(1).leading_zeros()).max(2);
        let half_bits = bits.div_ceil(2);
        let mut keys = [0; 6];
        for (r, k) in keys.iter_mut().enumerate() {
            *k = mix64(key.wrapping_add(r as u64));
        }
        IndexPermutation { n, half_bits, keys }
    }

    fn apply(&self, i: u64) -> u64 {
        let mask = (1u64 << self.half_bits) - 1;
        let mut x = i;
        loop {
            let (mut l, mut r) = (x >> self.half_bits, x & mask);
            for k in self.keys {
                (l, r) = (r, l ^ (mix64(r ^ k) & mask));
            }
            x = (l << self.half_bits) | r;
            if x < self.n {
                return x;
            }
        }
    }
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

    #[test]
    fn index_permutation_is_a_bijection() {
        for n in [1u64, 2, 3, 5, 64, 100, 1023, 4096] {
            let p = IndexPermutation::new(n, 99);
            let mut seen: Vec<u64> = (0..n).map(|i| p.apply(i)).collect();
            seen.sort_unstable();
            assert_eq!(seen, (0..n).collect::<Vec<_>>(), "n {n}");
        }
    }

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
