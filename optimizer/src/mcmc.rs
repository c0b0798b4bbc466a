//! Markov chain Monte Carlo: the affine-invariant ensemble sampler of Goodman and Weare
//! (J. Goodman, J. Weare, "Ensemble samplers with affine invariance", Commun. Appl. Math.
//! Comput. Sci. 5 (2010) 65-80, doi:10.2140/camcos.2010.5.65), with its stretch move, and the
//! integrated autocorrelation time with an automatic window (Sokal, "Monte Carlo methods in
//! statistical mechanics", 1997, sec. 3; the walker-averaged form of Goodman and Weare, sec. 3).
//!
//! The stretch move (Goodman and Weare, eq. 7): a walker X_k moves along the line through
//! another walker X_j to Y = X_j + Z (X_k - X_j), with Z drawn from g(z) proportional to
//! 1/sqrt(z) on [1/a, a]; the move is accepted with probability
//! min(1, Z^(n-1) p(Y) / p(X_k)) in n dimensions. The sampler is invariant under affine maps
//! of the parameters, so a strongly correlated or badly scaled posterior costs no tuning.
//!
//! The ensemble is split into two halves that move in turn, each walker of one half
//! stretching about a walker of the other (the parallel form of Goodman and Weare, sec. 3;
//! also Foreman-Mackey et al., PASP 125 (2013) 306, alg. 3). Every random number of a
//! half-step is drawn from one seeded `ChaCha8Rng` on the calling thread before the proposals
//! are evaluated (in parallel with rayon, results kept in order), so a seed fixes the chain
//! whatever the number of threads.

use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;
use rayon::prelude::*;
use serde::{Deserialize, Serialize};

/// Settings of an ensemble run.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct EnsembleConfig {
    /// Number of walkers: even, at least twice the dimension and at least 4.
    pub walkers: usize,
    /// Steps of every walker, burn-in included.
    pub steps: usize,
    /// Leading steps discarded (the ensemble forgetting its start).
    pub burn_in: usize,
    /// Keep every `thin`-th step after the burn-in (>= 1).
    pub thin: usize,
    /// Stretch scale a > 1 of g(z); Goodman and Weare use 2.
    pub stretch: f64,
    /// Seed of the run's generator.
    pub seed: u64,
}

impl EnsembleConfig {
    /// `walkers` walkers for `steps` steps, the first half of them burn-in, every step kept,
    /// a = 2.
    pub fn new(walkers: usize, steps: usize, seed: u64) -> Self {
        EnsembleConfig {
            walkers,
            steps,
            burn_in: steps / 2,
            thin: 1,
            stretch: 2.0,
            seed,
        }
    }

    /// Check the settings for a problem of `dim` dimensions.
    pub fn validate(&self, dim: usize) -> Result<(), McmcError> {
        let bad = |m: String| Err(McmcError::Config(m));
        if dim == 0 {
            return bad("no parameters to sample".into());
        }
        if self.walkers < 4 || !self.walkers.is_multiple_of(2) || self.walkers < 2 * dim {
            return bad(format!(
                "{} walkers for {dim} parameters: the ensemble needs an even number, at least \
                 4 and at least twice the number of parameters",
                self.walkers
            ));
        }
        if self.thin == 0 {
            return bad("thin must be at least 1".into());
        }
        if self.burn_in >= self.steps {
            return bad(format!(
                "burn-in of {} steps leaves nothing of {} steps",
                self.burn_in, self.steps
            ));
        }
        if !(self.stretch.is_finite() && self.stretch > 1.0) {
            return bad(format!("stretch scale {} must be > 1", self.stretch));
        }
        Ok(())
    }
}

/// Why a run could not start.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum McmcError {
    /// Settings that cannot work.
    #[error("ensemble sampler: {0}")]
    Config(String),
    /// A starting walker of zero probability or with the wrong number of parameters.
    #[error("ensemble sampler: walker {walker} starts {why}")]
    Start {
        /// Index of the walker.
        walker: usize,
        /// What is wrong with it.
        why: String,
    },
}

/// What an ensemble run gives.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct EnsembleSample {
    /// Kept positions after the burn-in, step by step, each step's walkers in order.
    pub samples: Vec<Vec<f64>>,
    /// ln p of each kept position.
    pub log_prob: Vec<f64>,
    /// Share of proposals accepted after the burn-in.
    pub acceptance: f64,
    /// Integrated autocorrelation time of each parameter after the burn-in, in steps
    /// ([`autocorrelation_time`]); NaN when the chain is too short to estimate it.
    pub autocorrelation_time: Vec<f64>,
    /// Walkers of the run.
    pub walkers: usize,
    /// Steps after the burn-in (before thinning).
    pub steps_after_burn_in: usize,
}

impl EnsembleSample {
    /// Effective number of independent draws of parameter `i`: walkers x steps after the
    /// burn-in / tau, at most the number of kept samples.
    pub fn effective_size(&self, i: usize) -> f64 {
        let n = (self.walkers * self.steps_after_burn_in) as f64;
        (n / self.autocorrelation_time[i].max(1.0)).min(self.samples.len() as f64)
    }
}

/// Draw Z from g(z) proportional to 1/sqrt(z) on [1/a, a] by inversion (Goodman and Weare,
/// eq. 9): z = ((a - 1) u + 1)^2 / a for u uniform on [0, 1).
fn stretch_factor(a: f64, u: f64) -> f64 {
    let s = (a - 1.0) * u + 1.0;
    s * s / a
}

/// Sample `log_prob` (ln of an unnormalised density; -inf or NaN outside its support) with
/// the ensemble starting at `start` (one position per walker, each of finite ln p).
pub fn sample<F>(
    log_prob: F,
    start: &[Vec<f64>],
    config: &EnsembleConfig,
) -> Result<EnsembleSample, McmcError>
where
    F: Fn(&[f64]) -> f64 + Sync,
{
    let dim = start.first().map_or(0, Vec::len);
    config.validate(dim)?;
    if start.len() != config.walkers {
        return Err(McmcError::Config(format!(
            "{} starting positions for {} walkers",
            start.len(),
            config.walkers
        )));
    }
    let mut pos: Vec<Vec<f64>> = start.to_vec();
    let mut lp: Vec<f64> = Vec::with_capacity(pos.len());
    for (k, x) in pos.iter().enumerate() {
        if x.len() != dim {
            return Err(McmcError::Start {
                walker: k,
                why: format!("with {} parameters, not {dim}", x.len()),
            });
        }
        let l = log_prob(x);
        if !l.is_finite() {
            return Err(McmcError::Start {
                walker: k,
                why: format!("where ln p is {l} (it must start inside the support)"),
            });
        }
        lp.push(l);
    }
    let half = config.walkers / 2;
    let a = config.stretch;
    let mut rng = ChaCha8Rng::seed_from_u64(config.seed);
    let kept_steps = (config.steps - config.burn_in).div_ceil(config.thin);
    let mut samples = Vec::with_capacity(kept_steps * config.walkers);
    let mut log_probs = Vec::with_capacity(kept_steps * config.walkers);
    // per parameter, per walker: the chain after burn-in (for the autocorrelation time)
    let after = config.steps - config.burn_in;
    let mut chains = vec![vec![Vec::with_capacity(after); config.walkers]; dim];
    let mut accepted = 0u64;
    let mut proposed = 0u64;
    for step in 0..config.steps {
        for h in 0..2 {
            let (active, other) = if h == 0 {
                (0..half, half..config.walkers)
            } else {
                (half..config.walkers, 0..half)
            };
            // every random number of the half-step, on this thread, in walker order
            let draws: Vec<(usize, f64, f64)> = active
                .clone()
                .map(|_| {
                    let j = other.start + rng.random_range(0..other.len());
                    let z = stretch_factor(a, rng.random::<f64>());
                    let u: f64 = rng.random();
                    (j, z, u)
                })
                .collect();
            let proposals: Vec<Vec<f64>> = active
                .clone()
                .zip(&draws)
                .map(|(k, &(j, z, _))| {
                    (0..dim)
                        .map(|i| pos[j][i] + z * (pos[k][i] - pos[j][i]))
                        .collect()
                })
                .collect();
            let lp_new: Vec<f64> = proposals.par_iter().map(|y| log_prob(y)).collect();
            for ((k, &(_, z, u)), (y, l)) in active
                .clone()
                .zip(&draws)
                .zip(proposals.into_iter().zip(lp_new))
            {
                let log_ratio = (dim as f64 - 1.0) * z.ln() + l - lp[k];
                // NaN and -inf proposals are never accepted
                let accept = l.is_finite() && u.ln() < log_ratio;
                if step >= config.burn_in {
                    proposed += 1;
                    accepted += u64::from(accept);
                }
                if accept {
                    pos[k] = y;
                    lp[k] = l;
                }
            }
        }
        if step >= config.burn_in {
            for (i, chain) in chains.iter_mut().enumerate() {
                for (w, c) in chain.iter_mut().enumerate() {
                    c.push(pos[w][i]);
                }
            }
            if (step - config.burn_in).is_multiple_of(config.thin) {
                samples.extend(pos.iter().cloned());
                log_probs.extend(lp.iter().copied());
            }
        }
    }
    let autocorrelation_time = chains
        .iter()
        .map(|c| autocorrelation_time(c, 5.0))
        .collect();
    Ok(EnsembleSample {
        samples,
        log_prob: log_probs,
        acceptance: accepted as f64 / proposed.max(1) as f64,
        autocorrelation_time,
        walkers: config.walkers,
        steps_after_burn_in: after,
    })
}

/// Integrated autocorrelation time tau = 1 + 2 sum_{t>=1} rho(t) of one quantity followed by
/// several chains of equal length (the walkers of an ensemble): rho(t) is the autocorrelation
/// at lag t averaged over the chains (each chain's autocovariance about its own mean, divided
/// by its lag-0 value), summed up to the smallest window M with M >= c tau(M) (Sokal's
/// automatic window; c = 5 is usual). NaN when the chains are shorter than the window needs
/// or constant.
pub fn autocorrelation_time(chains: &[Vec<f64>], c: f64) -> f64 {
    let n = chains.first().map_or(0, Vec::len);
    if n < 2 || chains.iter().any(|x| x.len() != n) {
        return f64::NAN;
    }
    let centred: Vec<(Vec<f64>, f64)> = chains
        .iter()
        .filter_map(|x| {
            let m = x.iter().sum::<f64>() / n as f64;
            let d: Vec<f64> = x.iter().map(|v| v - m).collect();
            let c0 = d.iter().map(|v| v * v).sum::<f64>() / n as f64;
            (c0 > 0.0).then_some((d, c0))
        })
        .collect();
    if centred.is_empty() {
        return f64::NAN;
    }
    let rho = |t: usize| -> f64 {
        centred
            .iter()
            .map(|(d, c0)| {
                d[..n - t]
                    .iter()
                    .zip(&d[t..])
                    .map(|(a, b)| a * b)
                    .sum::<f64>()
                    / n as f64
                    / c0
            })
            .sum::<f64>()
            / centred.len() as f64
    };
    let mut tau = 1.0;
    for m in 1..n {
        tau += 2.0 * rho(m);
        if m as f64 >= c * tau {
            return tau;
        }
    }
    f64::NAN
}

/// Sample mean and covariance (divisor N - 1) of `samples` (rows are draws).
pub fn mean_and_covariance(samples: &[Vec<f64>]) -> (Vec<f64>, Vec<Vec<f64>>) {
    let n = samples.len();
    let dim = samples.first().map_or(0, Vec::len);
    let mut mean = vec![0.0; dim];
    for x in samples {
        for (m, v) in mean.iter_mut().zip(x) {
            *m += v / n as f64;
        }
    }
    let mut cov = vec![vec![0.0; dim]; dim];
    for x in samples {
        for a in 0..dim {
            for b in 0..dim {
                cov[a][b] += (x[a] - mean[a]) * (x[b] - mean[b]);
            }
        }
    }
    let d = (n.max(2) - 1) as f64;
    for row in &mut cov {
        for v in row.iter_mut() {
            *v /= d;
        }
    }
    (mean, cov)
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Standard normal by Box-Muller from the test's generator.
    fn normal(rng: &mut ChaCha8Rng) -> f64 {
        let u1: f64 = rng.random::<f64>().max(1e-300);
        let u2: f64 = rng.random();
        (-2.0 * u1.ln()).sqrt() * (std::f64::consts::TAU * u2).cos()
    }

    fn ball(walkers: usize, centre: &[f64], scale: f64, seed: u64) -> Vec<Vec<f64>> {
        let mut rng = ChaCha8Rng::seed_from_u64(seed);
        (0..walkers)
            .map(|_| {
                centre
                    .iter()
                    .map(|c| c + scale * normal(&mut rng))
                    .collect()
            })
            .collect()
    }

    /// Exact: g(z) = 1/(2 (sqrt(a) - 1/sqrt(a)) sqrt(z)) on [1/a, a] has
    /// E[z] = (a^(3/2) - a^(-3/2)) / (3 (sqrt(a) - 1/sqrt(a))); for a = 2 that is 7/6.
    #[test]
    fn stretch_factor_has_the_density_of_goodman_and_weare() {
        let mut rng = ChaCha8Rng::seed_from_u64(3);
        let n = 200_000;
        let mut sum = 0.0;
        for _ in 0..n {
            let z = stretch_factor(2.0, rng.random());
            assert!((0.5..=2.0).contains(&z));
            sum += z;
        }
        // E[z] = 7/6, var(z) = E[z^2] - 7/6^2 with E[z^2] = (a^(5/2) - a^(-5/2)) / (5 (sqrt a -
        // 1/sqrt a)) = 1.55; sd of the mean 0.56/sqrt(n) ~ 1.3e-3
        assert!(
            (sum / n as f64 - 7.0 / 6.0).abs() < 5e-3,
            "{}",
            sum / n as f64
        );
    }

    /// An AR(1) chain x_t = phi x_(t-1) + e_t has rho(t) = phi^t and so, exactly,
    /// tau = (1 + phi) / (1 - phi) (Sokal 1997, sec. 3).
    #[test]
    fn autocorrelation_time_of_an_ar1_process_is_exact_within_its_error() {
        let phi: f64 = 0.8;
        let exact = (1.0 + phi) / (1.0 - phi); // 9
        let mut rng = ChaCha8Rng::seed_from_u64(11);
        let chains: Vec<Vec<f64>> = (0..32)
            .map(|_| {
                let mut x = normal(&mut rng) / (1.0 - phi * phi).sqrt();
                (0..4000)
                    .map(|_| {
                        x = phi * x + normal(&mut rng);
                        x
                    })
                    .collect()
            })
            .collect();
        let tau = autocorrelation_time(&chains, 5.0);
        // Sokal's variance of the estimate: var(tau) ~ 2 (2M + 1) tau^2 / N with M ~ 5 tau:
        // relative sd ~ sqrt(2 * 91 / 128000) ~ 4 %; allow 4 sd
        assert!((tau / exact - 1.0).abs() < 0.16, "tau {tau} vs {exact}");
        assert!(autocorrelation_time(&[vec![1.0; 10]], 5.0).is_nan());
    }

    /// Within `k` Monte-Carlo standard errors: the error of a mean is sd sqrt(tau / N).
    fn assert_mean(s: &EnsembleSample, i: usize, exact: f64, sd: f64, k: f64) {
        let (mean, _) = mean_and_covariance(&s.samples);
        let se = sd / s.effective_size(i).sqrt();
        assert!(
            (mean[i] - exact).abs() < k * se,
            "parameter {i}: mean {} vs {exact} (se {se}, tau {})",
            mean[i],
            s.autocorrelation_time[i]
        );
    }

    /// A correlated 2-D Gaussian, mean (1, -2), sds (1, 2), correlation 0.9: the sample mean
    /// and covariance match the exact ones within Monte-Carlo error (exact distribution).
    #[test]
    fn a_correlated_gaussian_is_sampled_with_its_mean_and_covariance() {
        let (m, s, r) = ([1.0, -2.0], [1.0, 2.0], 0.9);
        let det = 1.0 - r * r;
        let lp = |x: &[f64]| {
            let (a, b) = ((x[0] - m[0]) / s[0], (x[1] - m[1]) / s[1]);
            -0.5 * (a * a - 2.0 * r * a * b + b * b) / det
        };
        let cfg = EnsembleConfig {
            walkers: 32,
            steps: 4000,
            burn_in: 500,
            thin: 1,
            stretch: 2.0,
            seed: 5,
        };
        let out = sample(lp, &ball(32, &[0.0, 0.0], 0.1, 1), &cfg).unwrap();
        assert_eq!(out.samples.len(), 32 * 3500);
        // Goodman and Weare's stretch move accepts some 30-70 % on such targets
        assert!(
            (0.3..0.8).contains(&out.acceptance),
            "acceptance {}",
            out.acceptance
        );
        assert_mean(&out, 0, m[0], s[0], 4.0);
        assert_mean(&out, 1, m[1], s[1], 4.0);
        let (_, cov) = mean_and_covariance(&out.samples);
        // the sd of a sample variance is var sqrt(2 tau / N); of a covariance about the same
        for (a, b, exact) in [
            (0, 0, s[0] * s[0]),
            (1, 1, s[1] * s[1]),
            (0, 1, r * s[0] * s[1]),
        ] {
            let n_eff = out.effective_size(a).min(out.effective_size(b));
            let se = s[a] * s[b] * (2.0 / n_eff).sqrt();
            assert!(
                (cov[a][b] - exact).abs() < 4.0 * se,
                "cov[{a}][{b}] {} vs {exact} (se {se})",
                cov[a][b]
            );
        }
    }

    /// The "twisted Gaussian" banana of Haario, Saksman and Tamminen (Comput. Stat. 14 (1999)
    /// 375, their test distribution with b = 0.03, here in two dimensions): x1 ~ N(0, 100) and
    /// x2 = y + b (x1^2 - 100) with y ~ N(0, 1). Exactly E[x1] = E[x2] = 0, var x1 = 100,
    /// var x2 = 1 + b^2 var(x1^2) = 1 + 2 b^2 100^2 = 19, cov(x1, x2) = b E[x1^3] = 0.
    #[test]
    fn a_twisted_gaussian_banana_has_its_exact_marginal_moments() {
        let b = 0.03;
        let lp = |x: &[f64]| {
            let y = x[1] - b * (x[0] * x[0] - 100.0);
            -0.5 * (x[0] * x[0] / 100.0 + y * y)
        };
        let cfg = EnsembleConfig {
            walkers: 32,
            steps: 6000,
            burn_in: 1000,
            thin: 1,
            stretch: 2.0,
            seed: 9,
        };
        let out = sample(lp, &ball(32, &[0.0, -3.0], 0.5, 2), &cfg).unwrap();
        assert_mean(&out, 0, 0.0, 10.0, 4.0);
        assert_mean(&out, 1, 0.0, 19f64.sqrt(), 4.0);
        let (_, cov) = mean_and_covariance(&out.samples);
        // sd of x1's sample variance: var sqrt(2 / N_eff) for a normal marginal
        let se = 100.0 * (2.0 / out.effective_size(0)).sqrt();
        assert!(
            (cov[0][0] - 100.0).abs() < 4.0 * se,
            "var x1 {} (se {se})",
            cov[0][0]
        );
        // x2 is skewed and heavier-tailed (its fourth moment is larger): a wider allowance
        let se = 19.0 * (6.0 / out.effective_size(1)).sqrt();
        assert!(
            (cov[1][1] - 19.0).abs() < 4.0 * se,
            "var x2 {} (se {se})",
            cov[1][1]
        );
        eprintln!(
            "banana: acceptance {:.2}, tau {:?}, var {:.1} {:.1}",
            out.acceptance, out.autocorrelation_time, cov[0][0], cov[1][1]
        );
    }

    #[test]
    fn the_chain_is_the_same_whatever_the_thread_count() {
        let lp = |x: &[f64]| -0.5 * x.iter().map(|v| v * v).sum::<f64>();
        let cfg = EnsembleConfig::new(8, 200, 4);
        let start = ball(8, &[0.0, 0.0, 0.0], 1.0, 3);
        let run = |threads: usize| {
            rayon::ThreadPoolBuilder::new()
                .num_threads(threads)
                .build()
                .unwrap()
                .install(|| sample(lp, &start, &cfg).unwrap())
        };
        let (one, two) = (run(1), run(2));
        let bits = |s: &EnsembleSample| -> Vec<u64> {
            s.samples.iter().flatten().map(|v| v.to_bits()).collect()
        };
        assert_eq!(bits(&one), bits(&two));
    }

    #[test]
    fn bad_settings_and_starts_are_refused() {
        let lp = |x: &[f64]| if x[0] > 0.0 { 0.0 } else { f64::NEG_INFINITY };
        let cfg = EnsembleConfig::new(4, 10, 0);
        assert!(matches!(
            sample(lp, &vec![vec![1.0]; 3], &cfg),
            Err(McmcError::Config(_))
        ));
        assert!(matches!(
            sample(lp, &[vec![1.0], vec![1.0], vec![-1.0], vec![1.0]], &cfg),
            Err(McmcError::Start { walker: 2, .. })
        ));
        let three = EnsembleConfig::new(5, 10, 0);
        assert!(three.validate(1).is_err());
        assert!(EnsembleConfig::new(4, 10, 0).validate(3).is_err());
        // a one-sided support is respected: no sample ever crosses to x <= 0
        let out = sample(lp, &ball(4, &[1.0], 0.1, 1), &EnsembleConfig::new(4, 50, 1)).unwrap();
        assert!(out.samples.iter().all(|x| x[0] > 0.0));
    }
}
