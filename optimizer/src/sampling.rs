//! Seeded draws from simple probability distributions, and percentiles of a sample.
//!
//! Every distribution is drawn by its inverse cumulative distribution function
//! ([`Distribution::quantile`]) from uniform numbers of a [`ChaCha8Rng`], so a draw is a
//! pure function of the generator's state (no rejection loops, nothing that depends on the
//! crate version of a sampler) and the same quantile maps the points of a quasi-random
//! design (e.g. Sobol) onto the distribution.

use rand::Rng;
use rand_chacha::ChaCha8Rng;
use serde::{Deserialize, Serialize};

/// A one-dimensional distribution.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
#[serde(tag = "kind", rename_all = "snake_case")]
pub enum Distribution {
    /// Uniform on `[lower, upper]`.
    Uniform {
        /// Lower bound.
        lower: f64,
        /// Upper bound.
        upper: f64,
    },
    /// ln(x) uniform on `[ln lower, ln upper]` (`0 < lower < upper`).
    LogUniform {
        /// Lower bound, positive.
        lower: f64,
        /// Upper bound.
        upper: f64,
    },
    /// Normal with mean `mean` and standard deviation `sd`.
    Normal {
        /// Mean.
        mean: f64,
        /// Standard deviation, positive.
        sd: f64,
    },
    /// Normal(`mean`, `sd`) conditioned on `[lower, upper]`.
    TruncatedNormal {
        /// Mean of the untruncated normal.
        mean: f64,
        /// Standard deviation of the untruncated normal, positive.
        sd: f64,
        /// Lower bound.
        lower: f64,
        /// Upper bound.
        upper: f64,
    },
}

impl Distribution {
    /// Check the parameters: finite, ordered bounds, positive scales.
    pub fn validate(&self) -> Result<(), String> {
        let ok = |c: bool, what: &str| if c { Ok(()) } else { Err(what.to_string()) };
        match *self {
            Distribution::Uniform { lower, upper } => ok(
                lower.is_finite() && upper.is_finite() && lower < upper,
                "a uniform distribution needs finite bounds with lower < upper",
            ),
            Distribution::LogUniform { lower, upper } => ok(
                lower.is_finite() && upper.is_finite() && lower > 0.0 && lower < upper,
                "a log-uniform distribution needs finite bounds with 0 < lower < upper",
            ),
            Distribution::Normal { mean, sd } => ok(
                mean.is_finite() && sd.is_finite() && sd > 0.0,
                "a normal distribution needs a finite mean and a finite positive sd",
            ),
            Distribution::TruncatedNormal {
                mean,
                sd,
                lower,
                upper,
            } => {
                ok(
                    mean.is_finite() && sd.is_finite() && sd > 0.0,
                    "a truncated normal needs a finite mean and a finite positive sd",
                )?;
                ok(
                    !lower.is_nan() && !upper.is_nan() && lower < upper,
                    "a truncated normal needs bounds with lower < upper",
                )?;
                let (zl, zu) = ((lower - mean) / sd, (upper - mean) / sd);
                // The mass between the bounds, from the tail nearer it (as in `quantile`).
                let mass = if zl > 0.0 {
                    normal_cdf(-zl) - normal_cdf(-zu)
                } else {
                    normal_cdf(zu) - normal_cdf(zl)
                };
                ok(
                    mass > 1e-300,
                    "a truncated normal needs bounds that hold some of its probability",
                )
            }
        }
    }

    /// The value below which a fraction `p` of the distribution lies (`0 < p < 1`; 0 and 1
    /// give the bounds, infinite for an untruncated normal).
    pub fn quantile(&self, p: f64) -> f64 {
        let p = p.clamp(0.0, 1.0);
        match *self {
            Distribution::Uniform { lower, upper } => lower + p * (upper - lower),
            Distribution::LogUniform { lower, upper } => {
                (lower.ln() + p * (upper.ln() - lower.ln())).exp()
            }
            Distribution::Normal { mean, sd } => mean + sd * normal_quantile(p),
            Distribution::TruncatedNormal {
                mean,
                sd,
                lower,
                upper,
            } => {
                let (zl, zu) = ((lower - mean) / sd, (upper - mean) / sd);
                // Work in the tail nearer the mass, so that bounds far out in the upper
                // tail do not lose their probability to 1 - tiny.
                let z = if zl > 0.0 {
                    let (ql, qu) = (normal_cdf(-zl), normal_cdf(-zu));
                    -normal_quantile(ql - p * (ql - qu))
                } else {
                    let (pl, pu) = (normal_cdf(zl), normal_cdf(zu));
                    normal_quantile(pl + p * (pu - pl))
                };
                (mean + sd * z).clamp(lower, upper)
            }
        }
    }

    /// One draw, from one uniform number of `rng`.
    pub fn draw(&self, rng: &mut ChaCha8Rng) -> f64 {
        // Open interval (0, 1): 53 random bits, offset by half a step.
        let u = ((rng.random::<u64>() >> 11) as f64 + 0.5) / (1u64 << 53) as f64;
        self.quantile(u)
    }

    /// The median.
    pub fn median(&self) -> f64 {
        self.quantile(0.5)
    }
}

/// Standard normal cumulative distribution function, Phi(z) = erfc(-z / sqrt 2) / 2.
pub fn normal_cdf(z: f64) -> f64 {
    0.5 * libm::erfc(-z / std::f64::consts::SQRT_2)
}

/// Inverse of the standard normal cumulative distribution function.
///
/// Acklam's rational approximation (relative error 1.15e-9; P. J. Acklam, "An algorithm for
/// computing the inverse normal cumulative distribution function", 2003, as widely
/// reproduced) followed by one Halley step on `erfc`, which brings it to about machine
/// precision. `p <= 0` gives minus infinity and `p >= 1` plus infinity.
pub fn normal_quantile(p: f64) -> f64 {
    if p.is_nan() {
        return f64::NAN;
    }
    if p <= 0.0 {
        return f64::NEG_INFINITY;
    }
    if p >= 1.0 {
        return f64::INFINITY;
    }
    const A: [f64; 6] = [
        -3.969_683_028_665_376e1,
        2.209_460_984_245_205e2,
        -2.759_285_104_469_687e2,
        1.383_577_518_672_69e2,
        -3.066_479_806_614_716e1,
        2.506_628_277_459_239,
    ];
    const B: [f64; 5] = [
        -5.447_609_879_822_406e1,
        1.615_858_368_580_409e2,
        -1.556_989_798_598_866e2,
        6.680_131_188_771_972e1,
        -1.328_068_155_288_572e1,
    ];
    const C: [f64; 6] = [
        -7.784_894_002_430_293e-3,
        -3.223_964_580_411_365e-1,
        -2.400_758_277_161_838,
        -2.549_732_539_343_734,
        4.374_664_141_464_968,
        2.938_163_982_698_783,
    ];
    const D: [f64; 4] = [
        7.784_695_709_041_462e-3,
        3.224_671_290_700_398e-1,
        2.445_134_137_142_996,
        3.754_408_661_907_416,
    ];
    const P_LOW: f64 = 0.02425;
    let tail = |q: f64| {
        (((((C[0] * q + C[1]) * q + C[2]) * q + C[3]) * q + C[4]) * q + C[5])
            / ((((D[0] * q + D[1]) * q + D[2]) * q + D[3]) * q + 1.0)
    };
    let x = if p < P_LOW {
        tail((-2.0 * p.ln()).sqrt())
    } else if p <= 1.0 - P_LOW {
        let q = p - 0.5;
        let r = q * q;
        (((((A[0] * r + A[1]) * r + A[2]) * r + A[3]) * r + A[4]) * r + A[5]) * q
            / (((((B[0] * r + B[1]) * r + B[2]) * r + B[3]) * r + B[4]) * r + 1.0)
    } else {
        -tail((-2.0 * (1.0 - p).ln()).sqrt())
    };
    // One Halley step (Acklam's refinement).
    let e = normal_cdf(x) - p;
    let u = e * (2.0 * std::f64::consts::PI).sqrt() * (0.5 * x * x).exp();
    x - u / (1.0 + 0.5 * x * u)
}

/// The `q`-quantile (`0 <= q <= 1`) of `values` by linear interpolation between order
/// statistics (Hyndman and Fan 1996, definition 7: the default of R and NumPy). `values`
/// need not be sorted; NaN sorts last. An empty slice gives NaN.
pub fn percentile(values: &[f64], q: f64) -> f64 {
    let mut v = values.to_vec();
    v.sort_by(f64::total_cmp);
    percentile_sorted(&v, q)
}

/// [`percentile`] of values already sorted ascending.
pub fn percentile_sorted(sorted: &[f64], q: f64) -> f64 {
    if sorted.is_empty() {
        return f64::NAN;
    }
    let h = (sorted.len() - 1) as f64 * q.clamp(0.0, 1.0);
    let (lo, frac) = (h.floor() as usize, h - h.floor());
    if lo + 1 >= sorted.len() {
        return sorted[sorted.len() - 1];
    }
    sorted[lo] + frac * (sorted[lo + 1] - sorted[lo])
}

#[cfg(test)]
mod tests {
    use super::*;
    use rand::SeedableRng;

    #[test]
    fn normal_quantile_inverts_the_cdf() {
        // Definition: Phi(Phi^-1(p)) = p; and the tabulated 0.975 point 1.959963984540054
        // (Abramowitz and Stegun 1964, table 26.5, to the digits shown there).
        for &p in &[
            1e-300, 1e-12, 0.001, 0.02425, 0.1, 0.5, 0.8, 0.975, 0.999_999,
        ] {
            let z = normal_quantile(p);
            assert!((normal_cdf(z) - p).abs() <= 1e-13 * p.max(1e-3), "{p} {z}");
        }
        assert!((normal_quantile(0.975) - 1.959_963_984_540_054).abs() < 1e-12);
        assert!(normal_quantile(0.5).abs() < 1e-15);
    }

    #[test]
    fn draws_stay_inside_their_bounds_and_match_their_moments() {
        let mut rng = ChaCha8Rng::seed_from_u64(3);
        let n = 20_000;
        let t = Distribution::TruncatedNormal {
            mean: 1.0,
            sd: 2.0,
            lower: 0.5,
            upper: 2.0,
        };
        let lu = Distribution::LogUniform {
            lower: 0.1,
            upper: 10.0,
        };
        let nd = Distribution::Normal { mean: 3.0, sd: 0.5 };
        let (mut sum_ln, mut sum_n, mut sum_n2) = (0.0, 0.0, 0.0);
        for _ in 0..n {
            let x = t.draw(&mut rng);
            assert!((0.5..=2.0).contains(&x));
            let y = lu.draw(&mut rng);
            assert!((0.1..=10.0).contains(&y));
            sum_ln += y.ln();
            let z = nd.draw(&mut rng);
            sum_n += z;
            sum_n2 += z * z;
        }
        let nf = n as f64;
        // Mean of ln x for ln-uniform on [ln 0.1, ln 10] is 0; sd of the mean is
        // ln(100)/sqrt(12 n) = 0.0094, so 0.04 is over four standard errors.
        assert!((sum_ln / nf).abs() < 0.04);
        let mean = sum_n / nf;
        let var = sum_n2 / nf - mean * mean;
        assert!((mean - 3.0).abs() < 0.015, "{mean}"); // se 0.0035
        assert!((var.sqrt() - 0.5).abs() < 0.015, "{var}"); // se of sd 0.0025
    }

    #[test]
    fn truncated_normal_far_in_a_tail_is_finite_and_inside() {
        let t = Distribution::TruncatedNormal {
            mean: 0.0,
            sd: 1.0,
            lower: 9.0,
            upper: 10.0,
        };
        t.validate().unwrap();
        for p in [0.0, 1e-9, 0.5, 1.0 - 1e-9, 1.0] {
            let x = t.quantile(p);
            assert!((9.0..=10.0).contains(&x), "{p} {x}");
        }
        // Almost all the mass of a normal truncated to [9, 10] lies just above 9
        // (the density falls by e^-9 per unit).
        assert!(t.median() < 9.1);
    }

    #[test]
    fn same_seed_same_draws() {
        let d = Distribution::Uniform {
            lower: -1.0,
            upper: 1.0,
        };
        let a: Vec<f64> = {
            let mut r = ChaCha8Rng::seed_from_u64(9);
            (0..5).map(|_| d.draw(&mut r)).collect()
        };
        let mut r = ChaCha8Rng::seed_from_u64(9);
        let b: Vec<f64> = (0..5).map(|_| d.draw(&mut r)).collect();
        assert_eq!(a, b);
    }

    #[test]
    fn percentiles_interpolate_like_numpy() {
        // numpy.percentile([1, 2, 3, 4], [0, 25, 50, 90, 100]) = 1, 1.75, 2.5, 3.7, 4
        // (definition 7 of Hyndman and Fan 1996, worked by hand).
        let v = [4.0, 1.0, 3.0, 2.0];
        let got: Vec<f64> = [0.0, 0.25, 0.5, 0.9, 1.0]
            .iter()
            .map(|&q| percentile(&v, q))
            .collect();
        let want = [1.0, 1.75, 2.5, 3.7, 4.0];
        for (g, w) in got.iter().zip(want) {
            assert!((g - w).abs() < 1e-12, "{got:?}");
        }
        assert!(percentile(&[], 0.5).is_nan());
    }

    #[test]
    fn bad_parameters_are_refused() {
        assert!(Distribution::Uniform {
            lower: 1.0,
            upper: 1.0
        }
        .validate()
        .is_err());
        assert!(Distribution::LogUniform {
            lower: 0.0,
            upper: 1.0
        }
        .validate()
        .is_err());
        assert!(Distribution::Normal {
            mean: 0.0,
            sd: -1.0
        }
        .validate()
        .is_err());
    }
}
