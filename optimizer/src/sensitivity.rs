//! Variance-based global sensitivity: Sobol first-order and total-effect indices.
//!
//! For a function `y = f(x)` of `d` independent inputs, the first-order index
//! `S_i = V[E(y | x_i)] / V(y)` is the share of the output variance that `x_i` explains
//! alone, and the total-effect index `T_i = E[V(y | x_~i)] / V(y)` the share that would
//! remain if every input but `x_i` were known (Sobol, Math. Model. Comput. Exp. 1 (1993) 407;
//! Homma and Saltelli, Reliab. Eng. Syst. Saf. 52 (1996) 1).
//!
//! The estimators work on two independent base samples `A` and `B` (`n` rows each, one
//! column per input) and the `d` matrices `AB_i` (`A` with column `i` taken from `B`), so
//! they cost `n (d + 2)` evaluations:
//! - first order, Saltelli et al., Comput. Phys. Commun. 181 (2010) 259, table 2 (b):
//!   `V_i = (1/n) sum_j f(B)_j (f(AB_i)_j - f(A)_j)`;
//! - total effect, Jansen, Comput. Phys. Commun. 117 (1999) 35 (table 2 (f) of Saltelli et
//!   al. 2010): `VT_i = (1/2n) sum_j (f(A)_j - f(AB_i)_j)^2`;
//!
//! both divided by the variance of the `2n` outputs of `A` and `B` together, after all
//! outputs are centred on their mean (as SALib does; the first-order estimator is not
//! invariant to a shift of the output). Confidence
//! intervals come from a seeded bootstrap over the rows (`j`): the half-width is the normal
//! quantile times the standard deviation of the resampled estimates (Efron and Tibshirani,
//! An Introduction to the Bootstrap, 1993, section 13.2).
//!
//! The rows are laid out as SALib lays them (`A_j, AB_1j, ..., AB_dj, B_j` for each row
//! `j`), so outputs of one can be given to the other.

use crate::doe;
use crate::sampling::normal_quantile;
use rand::Rng;
use rand_chacha::ChaCha8Rng;
use serde::{Deserialize, Serialize};

/// How the base samples `A` and `B` are drawn in the unit cube.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum BaseSampler {
    /// Owen-scrambled Sobol points in `2d` dimensions: the first `d` coordinates make `A`,
    /// the last `d` make `B` (Saltelli et al. 2010, section 3). At most 2^16 rows and
    /// `d <= 128`.
    Sobol,
    /// Independent uniform numbers.
    Random,
}

/// The points at which to evaluate the function: `n (d + 2)` rows in the unit cube
/// `[0, 1)^d`, `d + 2` consecutive rows (`A_j`, `AB_1j`, ..., `AB_dj`, `B_j`) for each base
/// row `j`. All randomness (the Sobol scramble or the uniform numbers) comes from `rng`.
pub fn saltelli_points(
    n: usize,
    d: usize,
    sampler: BaseSampler,
    rng: &mut ChaCha8Rng,
) -> Result<Vec<Vec<f64>>, String> {
    if n < 2 || d == 0 {
        return Err(format!(
            "sensitivity needs at least 2 base samples and 1 input ({n} and {d} asked)"
        ));
    }
    let base: Vec<Vec<f64>> = match sampler {
        BaseSampler::Sobol => doe::sobol(0, n, 2 * d, rng.random())?,
        BaseSampler::Random => (0..n)
            .map(|_| (0..2 * d).map(|_| rng.random::<f64>()).collect())
            .collect(),
    };
    let mut rows = Vec::with_capacity(n * (d + 2));
    for ab in &base {
        let (a, b) = ab.split_at(d);
        rows.push(a.to_vec());
        for i in 0..d {
            let mut r = a.to_vec();
            r[i] = b[i];
            rows.push(r);
        }
        rows.push(b.to_vec());
    }
    Ok(rows)
}

/// Sobol indices of one output with their confidence half-widths.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct SobolIndices {
    /// First-order index of each input (Saltelli et al. 2010).
    pub first_order: Vec<f64>,
    /// Half-width of the bootstrap confidence interval of each first-order index.
    pub first_order_ci: Vec<f64>,
    /// Total-effect index of each input (Jansen 1999).
    pub total: Vec<f64>,
    /// Half-width of the bootstrap confidence interval of each total-effect index.
    pub total_ci: Vec<f64>,
    /// Variance of the `2n` outputs at `A` and `B` (0 for a constant output, whose indices
    /// are all reported as 0).
    pub variance: f64,
}

/// How the confidence intervals are estimated.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Bootstrap {
    /// Number of bootstrap resamples (0: no intervals, all half-widths 0).
    pub resamples: usize,
    /// Confidence level of the intervals, e.g. 0.95.
    pub confidence: f64,
}

impl Default for Bootstrap {
    /// 200 resamples, 95 % intervals.
    fn default() -> Self {
        Bootstrap {
            resamples: 200,
            confidence: 0.95,
        }
    }
}

/// The indices of an output `y` evaluated at the rows of [`saltelli_points`] (`y.len()` must
/// be `n (d + 2)`), with bootstrap intervals whose resamples are drawn from `rng`.
pub fn sobol_indices(
    y: &[f64],
    d: usize,
    bootstrap: Bootstrap,
    rng: &mut ChaCha8Rng,
) -> Result<SobolIndices, String> {
    let step = d + 2;
    if d == 0 || !y.len().is_multiple_of(step) || y.len() / step < 2 {
        return Err(format!(
            "sensitivity: {} outputs do not make n (d + 2) with d = {d} and n >= 2",
            y.len()
        ));
    }
    if let Some(k) = y.iter().position(|v| !v.is_finite()) {
        return Err(format!(
            "sensitivity: output {k} is not a finite number ({})",
            y[k]
        ));
    }
    if !(bootstrap.confidence > 0.0 && bootstrap.confidence < 1.0) {
        return Err(format!(
            "sensitivity: confidence level {} is not between 0 and 1",
            bootstrap.confidence
        ));
    }
    let n = y.len() / step;
    // Centre on the mean of all outputs (as SALib does): the first-order estimator is not
    // invariant to a shift of the output, and its error grows with the mean's size.
    let mean = y.iter().sum::<f64>() / y.len() as f64;
    let scale = y.iter().fold(0.0f64, |m, v| m.max(v.abs()));
    let centred: Vec<f64> = y.iter().map(|v| v - mean).collect();
    let rows: Vec<&[f64]> = centred.chunks(step).collect();
    let all: Vec<usize> = (0..n).collect();
    let (s, t, variance) = estimate(&rows, &all, d, scale);
    let mut out = SobolIndices {
        first_order: s,
        first_order_ci: vec![0.0; d],
        total: t,
        total_ci: vec![0.0; d],
        variance,
    };
    if variance == 0.0 || bootstrap.resamples < 2 {
        return Ok(out);
    }
    let z = normal_quantile(0.5 + bootstrap.confidence / 2.0);
    // The resampled estimates, one row per input (s then t), for a two-pass deviation.
    let mut boot_s = vec![Vec::with_capacity(bootstrap.resamples); d];
    let mut boot_t = vec![Vec::with_capacity(bootstrap.resamples); d];
    let mut pick = vec![0usize; n];
    for _ in 0..bootstrap.resamples {
        for p in pick.iter_mut() {
            *p = rng.random_range(0..n);
        }
        let (s, t, _) = estimate(&rows, &pick, d, scale);
        for i in 0..d {
            boot_s[i].push(s[i]);
            boot_t[i].push(t[i]);
        }
    }
    let sd = |v: &[f64]| {
        let m = v.iter().sum::<f64>() / v.len() as f64;
        (v.iter().map(|x| (x - m).powi(2)).sum::<f64>() / (v.len() - 1) as f64).sqrt()
    };
    out.first_order_ci = boot_s.iter().map(|v| z * sd(v)).collect();
    out.total_ci = boot_t.iter().map(|v| z * sd(v)).collect();
    Ok(out)
}

/// First-order and total estimates over the base rows `pick` (with repetition for a
/// bootstrap resample), and the variance they are normalised by. An output constant to
/// rounding (relative to `scale`, the largest output magnitude) gives zeros.
fn estimate(rows: &[&[f64]], pick: &[usize], d: usize, scale: f64) -> (Vec<f64>, Vec<f64>, f64) {
    let n = pick.len() as f64;
    let (mut sum, mut count) = (0.0, 0.0);
    for &j in pick {
        sum += rows[j][0] + rows[j][d + 1];
        count += 2.0;
    }
    let mean = sum / count;
    let mut var = 0.0;
    for &j in pick {
        var += (rows[j][0] - mean).powi(2) + (rows[j][d + 1] - mean).powi(2);
    }
    var /= count;
    let mut s = vec![0.0; d];
    let mut t = vec![0.0; d];
    // A spread at rounding level of the outputs is no variance.
    if var <= (4.0 * f64::EPSILON * scale).powi(2) {
        return (s, t, 0.0);
    }
    for &j in pick {
        let r = rows[j];
        let (fa, fb) = (r[0], r[d + 1]);
        for i in 0..d {
            let fab = r[1 + i];
            s[i] += fb * (fab - fa);
            t[i] += (fa - fab) * (fa - fab);
        }
    }
    for i in 0..d {
        s[i] /= n * var;
        t[i] /= 2.0 * n * var;
    }
    (s, t, var)
}

/// Test functions with analytic Sobol indices.
pub mod functions {
    use std::f64::consts::PI;

    /// The Ishigami function, `sin x1 + a sin^2 x2 + b x3^4 sin x1` on `[-pi, pi]^3`
    /// (Ishigami and Homma, Proc. ISUMA 1990, 398), from a point `u` of the unit cube.
    pub fn ishigami(u: &[f64], a: f64, b: f64) -> f64 {
        let x: Vec<f64> = u.iter().map(|t| -PI + 2.0 * PI * t).collect();
        x[0].sin() + a * x[1].sin().powi(2) + b * x[2].powi(4) * x[0].sin()
    }

    /// Analytic (first-order, total) indices of [`ishigami`] (Sobol and Levitan, Comput.
    /// Phys. Commun. 117 (1999) 52; Saltelli et al., Global Sensitivity Analysis: The Primer,
    /// 2008, section 4.9): `V1 = (1 + b pi^4/5)^2 / 2`, `V2 = a^2/8`,
    /// `V13 = b^2 pi^8 (1/18 - 1/50)`, `V = V1 + V2 + V13`.
    pub fn ishigami_indices(a: f64, b: f64) -> (Vec<f64>, Vec<f64>) {
        let pi4 = PI.powi(4);
        let v1 = 0.5 * (1.0 + b * pi4 / 5.0).powi(2);
        let v2 = a * a / 8.0;
        let v13 = b * b * pi4 * pi4 * (1.0 / 18.0 - 1.0 / 50.0);
        let v = v1 + v2 + v13;
        (
            vec![v1 / v, v2 / v, 0.0],
            vec![(v1 + v13) / v, v2 / v, v13 / v],
        )
    }

    /// The Sobol G function `prod_i (|4 u_i - 2| + a_i) / (1 + a_i)` on the unit cube
    /// (Saltelli and Sobol, Reliab. Eng. Syst. Saf. 50 (1995) 225).
    pub fn g_function(u: &[f64], a: &[f64]) -> f64 {
        u.iter()
            .zip(a)
            .map(|(x, ai)| ((4.0 * x - 2.0).abs() + ai) / (1.0 + ai))
            .product()
    }

    /// Analytic (first-order, total) indices of [`g_function`]: `V_i = 1 / (3 (1 + a_i)^2)`,
    /// `V = prod (1 + V_i) - 1`, `S_i = V_i / V`, `T_i = V_i prod_{j != i} (1 + V_j) / V`
    /// (Saltelli and Sobol 1995).
    pub fn g_function_indices(a: &[f64]) -> (Vec<f64>, Vec<f64>) {
        let vi: Vec<f64> = a
            .iter()
            .map(|ai| 1.0 / (3.0 * (1.0 + ai).powi(2)))
            .collect();
        let prod: f64 = vi.iter().map(|v| 1.0 + v).product();
        let v = prod - 1.0;
        (
            vi.iter().map(|x| x / v).collect(),
            vi.iter().map(|x| x * prod / (1.0 + x) / v).collect(),
        )
    }
}

#[cfg(test)]
mod tests {
    use super::functions::*;
    use super::*;
    use rand::SeedableRng;

    fn run(
        f: &dyn Fn(&[f64]) -> f64,
        d: usize,
        n: usize,
        sampler: BaseSampler,
        seed: u64,
    ) -> SobolIndices {
        let mut rng = ChaCha8Rng::seed_from_u64(seed);
        let pts = saltelli_points(n, d, sampler, &mut rng).unwrap();
        let y: Vec<f64> = pts.iter().map(|p| f(p)).collect();
        sobol_indices(&y, d, Bootstrap::default(), &mut rng).unwrap()
    }

    #[test]
    fn ishigami_analytic_values() {
        // Ishigami a = 7, b = 0.1: S = 0.3139, 0.4424, 0; T = 0.5576, 0.4424, 0.2437
        // (Saltelli et al. 2008, The Primer, section 4.9, to the digits shown there).
        let (s, t) = ishigami_indices(7.0, 0.1);
        let close = |x: &[f64], y: &[f64]| x.iter().zip(y).all(|(a, b)| (a - b).abs() < 6e-5);
        assert!(close(&s, &[0.3139, 0.4424, 0.0]), "{s:?}");
        assert!(close(&t, &[0.5576, 0.4424, 0.2437]), "{t:?}");
    }

    /// Tolerance: the truth must lie within four bootstrap standard errors of the estimate
    /// (the bootstrap measures the sampling error at this `n`; four standard errors fail by
    /// chance once in 16,000 under normality, and the Sobol points' error is below the
    /// random-sampling error the bootstrap measures), plus 0.005 for the estimators' small
    /// bias and the bootstrap's own error.
    fn within(est: &SobolIndices, s: &[f64], t: &[f64]) {
        for i in 0..s.len() {
            let tol_s = 4.0 * est.first_order_ci[i] / 1.96 + 0.005;
            let tol_t = 4.0 * est.total_ci[i] / 1.96 + 0.005;
            assert!(
                (est.first_order[i] - s[i]).abs() < tol_s,
                "S{i}: {} vs {} (tol {tol_s})",
                est.first_order[i],
                s[i]
            );
            assert!(
                (est.total[i] - t[i]).abs() < tol_t,
                "T{i}: {} vs {} (tol {tol_t})",
                est.total[i],
                t[i]
            );
        }
    }

    #[test]
    fn ishigami_indices_are_recovered() {
        let (s, t) = ishigami_indices(7.0, 0.1);
        for sampler in [BaseSampler::Sobol, BaseSampler::Random] {
            let est = run(&|u| ishigami(u, 7.0, 0.1), 3, 8192, sampler, 11);
            within(&est, &s, &t);
            // At n = 8192 the intervals are a few hundredths wide at most.
            assert!(est.first_order_ci.iter().all(|c| *c < 0.06), "{est:?}");
        }
    }

    #[test]
    fn g_function_indices_are_recovered() {
        // a = (0, 1, 4.5, 9, 99, 99, 99, 99): a common test set (Saltelli et al. 2010, sec. 4).
        let a = [0.0, 1.0, 4.5, 9.0, 99.0, 99.0, 99.0, 99.0];
        let (s, t) = g_function_indices(&a);
        let est = run(&|u| g_function(u, &a), 8, 4096, BaseSampler::Sobol, 5);
        within(&est, &s, &t);
        // The unimportant inputs (a = 99) are found unimportant.
        assert!(est.total[4..].iter().all(|t| *t < 0.002), "{est:?}");
    }

    #[test]
    fn bootstrap_intervals_cover_the_truth() {
        // Over 60 seeded repeats with random base samples (n = 1024), the 95 % intervals of
        // the G function's first input should contain the analytic index in about 95 % of
        // cases; 48/60 (80 %) is the binomial 0.1 % lower bound at p = 0.95.
        let a = [0.0, 1.0, 9.0];
        let (s, t) = g_function_indices(&a);
        let (mut hit_s, mut hit_t) = (0, 0);
        for seed in 0..60 {
            let est = run(&|u| g_function(u, &a), 3, 1024, BaseSampler::Random, seed);
            hit_s += usize::from((est.first_order[0] - s[0]).abs() <= est.first_order_ci[0]);
            hit_t += usize::from((est.total[0] - t[0]).abs() <= est.total_ci[0]);
        }
        assert!(
            hit_s >= 48 && hit_t >= 48,
            "coverage {hit_s}/60, {hit_t}/60"
        );
    }

    #[test]
    fn same_seed_same_indices_and_constant_output_is_zero() {
        let f = |u: &[f64]| ishigami(u, 7.0, 0.1);
        let a = run(&f, 3, 256, BaseSampler::Sobol, 2);
        let b = run(&f, 3, 256, BaseSampler::Sobol, 2);
        assert_eq!(a, b);
        let c = run(&|_| 4.0, 3, 64, BaseSampler::Random, 1);
        assert!(c.variance.abs() < f64::MIN_POSITIVE);
        assert!(c
            .first_order
            .iter()
            .chain(&c.total)
            .all(|v| v.abs() < f64::MIN_POSITIVE));
    }

    #[test]
    fn bad_shapes_are_refused() {
        let mut rng = ChaCha8Rng::seed_from_u64(0);
        assert!(sobol_indices(&[1.0; 9], 2, Bootstrap::default(), &mut rng).is_err());
        assert!(sobol_indices(&[1.0; 4], 2, Bootstrap::default(), &mut rng).is_err());
        let mut y = vec![1.0; 8];
        y[3] = f64::NAN;
        assert!(sobol_indices(&y, 2, Bootstrap::default(), &mut rng).is_err());
        assert!(saltelli_points(1, 2, BaseSampler::Random, &mut rng).is_err());
        assert!(saltelli_points(70_000, 2, BaseSampler::Sobol, &mut rng).is_err());
    }
}
