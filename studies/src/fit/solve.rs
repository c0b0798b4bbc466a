//! The calibration as Bayesian inference over the fitted ROM constants theta.
//!
//! - **Likelihood**: the residuals r(theta) = model - data are independent normal errors of
//!   one unknown standard deviation; with the scale-invariant prior 1/sigma integrated out,
//!   ln L(theta) = -(N/2) ln SSR(theta) (Box and Tiao, Bayesian Inference in Statistical
//!   Analysis, 1973, sec. 2.7; for a linear model this gives Student-t marginals with N - p
//!   degrees of freedom, the usual regression intervals).
//! - **Prior**: each constant's prior from [`model::constants::priors`] (uniform,
//!   log-uniform or truncated normal); its support is also the range searched.
//! - **Mode**: Nelder-Mead through the optimizer crate's argmin adapter
//!   ([`optimizer::minimize_from`], bounded; in ln(theta) for a log-uniform prior) from several
//!   seeded starts.
//! - **Laplace approximation**: the Gauss-Newton curvature at the mode, precision
//!   J^T J / s^2 with s^2 = SSR / (N - p) (Bates and Watts, Nonlinear Regression Analysis,
//!   1988, ch. 2), plus the prior's precision (a normal prior's 1/sd^2; a bounded prior as the
//!   normal of the same variance: 12 / width^2, in ln(theta) for a log-uniform one).
//! - **Samples**: the affine-invariant ensemble sampler ([`optimizer::mcmc`], Goodman and
//!   Weare 2010) of the full posterior, started in a small ball about the mode.
//! - **Weak data**: a constant is not informed when a rule of the data says so (overlimiting
//!   constants need points past the limit, pattern constants such points on a patterned
//!   membrane) or when the data alone (the Gauss-Newton covariance without the prior) leave it
//!   a standard deviation above [`WEAK_SIGMA_OF_WIDTH`] of its prior's width. Such constants
//!   are refused, or with `allow_weak` held at their priors and the rest fitted again.

use model::constants::Distribution;
use model::RomConstants;
use optimizer::mcmc::{self, EnsembleConfig};
use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;

/// Constants `stria fit` can fit (their `[rom]` keys); each has a prior in
/// [`model::constants::priors`], whose support is its search range.
pub const FITTABLE: [&str; 10] = [
    "onset_voltage",
    "overlimiting_conductance",
    "overlimiting_exponent",
    "wavelength_prefactor",
    "wavelength_exponent",
    "lockin_width",
    "alpha_0",
    "alpha_max",
    "best_open_fraction",
    "funnel_layer_ratio",
];

/// The default set of fitted constants.
pub const DEFAULT_FIT: [&str; 4] = [
    "onset_voltage",
    "overlimiting_conductance",
    "lockin_width",
    "alpha_max",
];

/// A constant is taken as not informed by the data when the data alone leave it a standard
/// deviation above this share of its prior's width (upper - lower). A uniform prior's own
/// standard deviation is 0.29 of its width; at 0.5 of the width the data would narrow it by
/// less than a seventh.
pub const WEAK_SIGMA_OF_WIDTH: f64 = 0.5;

/// Read a constant by its serde key.
pub fn get(c: &RomConstants, key: &str) -> Option<f64> {
    serde_json::to_value(c).ok()?.get(key)?.as_f64()
}

/// Set a constant by its serde key.
pub fn set(c: &RomConstants, key: &str, value: f64) -> Option<RomConstants> {
    let mut v = serde_json::to_value(c).ok()?;
    let slot = v.get_mut(key)?;
    *slot = serde_json::Value::from(value);
    serde_json::from_value(v).ok()
}

/// The prior of a fittable constant.
pub fn prior_of(key: &str) -> Option<Distribution> {
    model::constants::priors()
        .into_iter()
        .find(|p| p.key == key)
        .map(|p| p.distribution)
}

/// ln of the prior density of `x` (up to a constant); -inf outside the support.
pub fn log_prior(d: &Distribution, x: f64) -> f64 {
    if !d.contains(x) {
        return f64::NEG_INFINITY;
    }
    match *d {
        Distribution::Uniform { .. } => 0.0,
        Distribution::LogUniform { .. } => -x.ln(),
        Distribution::Normal { mean, sd, .. } => -0.5 * ((x - mean) / sd).powi(2),
    }
}

/// The prior's precision at `x` as a normal term of the Laplace approximation: a normal's
/// 1/sd^2, a uniform's 12/width^2 (the normal of the same variance), a log-uniform's the same
/// in ln(x) carried to x.
fn prior_precision(d: &Distribution, x: f64) -> f64 {
    match *d {
        Distribution::Uniform { lower, upper } => 12.0 / (upper - lower).powi(2),
        Distribution::LogUniform { lower, upper } => 12.0 / (x * (upper / lower).ln()).powi(2),
        Distribution::Normal { sd, .. } => 1.0 / (sd * sd),
    }
}

/// What the forward model gives for one point.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Predicted {
    /// Current density, A/m^2.
    pub current_density_a_m2: f64,
    /// Limiting current density of this surface (funnelling included), A/m^2.
    pub heterogeneous_limit_a_m2: f64,
}

/// How the posterior is sampled and what to do with weak constants.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Settings {
    /// Walkers of the ensemble (0: four per constant, at least 16).
    pub walkers: usize,
    /// Steps of every walker; the first third is burn-in.
    pub steps: usize,
    /// Seed of the starts and of the sampler.
    pub seed: u64,
    /// Hold constants the data cannot inform at their priors instead of refusing.
    pub allow_weak: bool,
    /// Most samples kept for the constants file (evenly thinned).
    pub max_kept: usize,
}

impl Default for Settings {
    fn default() -> Self {
        Settings {
            walkers: 0,
            steps: 1500,
            seed: super::SEED,
            allow_weak: false,
            max_kept: 2000,
        }
    }
}

/// A constant the data cannot inform, and why.
#[derive(Debug, Clone, PartialEq)]
pub struct Weak {
    /// Its `[rom]` key.
    pub key: String,
    /// Why, for the user.
    pub why: String,
}

/// The sampled posterior of the fitted constants.
#[derive(Debug, Clone, PartialEq)]
pub struct Sampled {
    /// Samples (rows), in the order of the fitted keys; thinned to at most
    /// [`Settings::max_kept`].
    pub samples: Vec<Vec<f64>>,
    /// Mean over all kept steps.
    pub mean: Vec<f64>,
    /// Covariance over all kept steps.
    pub covariance: Vec<Vec<f64>>,
    /// Central 95 % interval (2.5th and 97.5th percentiles) of each constant.
    pub interval_95: Vec<(f64, f64)>,
    /// Walkers.
    pub walkers: usize,
    /// Steps per walker, burn-in included.
    pub steps: usize,
    /// Burn-in steps discarded.
    pub burn_in: usize,
    /// Seed of the sampler.
    pub seed: u64,
    /// Share of proposals accepted after the burn-in.
    pub acceptance: f64,
    /// Integrated autocorrelation time of each constant, in steps (NaN: chain too short to
    /// estimate it).
    pub autocorrelation_steps: Vec<f64>,
}

/// The fit's result.
#[derive(Debug, Clone, PartialEq)]
pub struct FitResult {
    /// The constants written: the posterior mean of the fitted ones, the others as given.
    pub constants: RomConstants,
    /// Fitted keys, posterior means and posterior standard deviations.
    pub parameters: Vec<(String, f64, f64)>,
    /// Posterior correlation matrix of the fitted constants.
    pub correlation: Vec<Vec<f64>>,
    /// The posterior mode (maximum a posteriori), per fitted key.
    pub mode: Vec<f64>,
    /// Laplace approximation: covariance at the mode (data and prior).
    pub laplace_covariance: Vec<Vec<f64>>,
    /// Standard deviation the data alone give each fitted constant (Gauss-Newton, no prior).
    pub data_sigma: Vec<f64>,
    /// The samples.
    pub sampled: Sampled,
    /// Constants the data cannot inform, held at their priors (`allow_weak`).
    pub held_at_prior: Vec<Weak>,
    /// Residuals model - data at [`FitResult::constants`], A/m^2, per point.
    pub residuals: Vec<f64>,
    /// Root mean square residual, A/m^2.
    pub rms_a_m2: f64,
    /// Starts tried and the cost (-ln posterior) each reached.
    pub start_costs: Vec<f64>,
    /// Fitted constants whose mode lies at an edge of their prior.
    pub at_bound: Vec<String>,
}

/// Why a fit was refused or failed; the message is for the user.
#[derive(Debug, Clone, PartialEq)]
pub struct Refusal(pub String);

/// A fitted constant: key, prior and how it is searched.
#[derive(Debug, Clone, Copy, PartialEq)]
struct Bound {
    key: &'static str,
    prior: Distribution,
    lower: f64,
    upper: f64,
}

impl Bound {
    fn of(key: &str) -> Option<Bound> {
        let key = *FITTABLE.iter().find(|k| **k == key)?;
        let prior = prior_of(key)?;
        let (lower, upper) = prior.support();
        Some(Bound {
            key,
            prior,
            lower,
            upper,
        })
    }
    /// Log-uniform priors are searched in ln(theta).
    fn logarithmic(&self) -> bool {
        matches!(self.prior, Distribution::LogUniform { .. })
    }
    fn width(&self) -> f64 {
        self.upper - self.lower
    }
}

fn to_physical(z: &[f64], b: &[Bound]) -> Vec<f64> {
    z.iter()
        .zip(b)
        .map(|(z, b)| if b.logarithmic() { z.exp() } else { *z })
        .collect()
}

fn to_search(p: &[f64], b: &[Bound]) -> Vec<f64> {
    p.iter()
        .zip(b)
        .map(|(p, b)| if b.logarithmic() { p.ln() } else { *p })
        .collect()
}

fn search_bounds(b: &[Bound]) -> Vec<(f64, f64)> {
    b.iter()
        .map(|b| {
            if b.logarithmic() {
                (b.lower.ln(), b.upper.ln())
            } else {
                (b.lower, b.upper)
            }
        })
        .collect()
}

/// Evaluations allowed to each start of the Nelder-Mead search.
pub const BUDGET_PER_START: u64 = 1500;

struct Cost<'a, F> {
    base: RomConstants,
    bounds: &'a [Bound],
    data: &'a [f64],
    forward: &'a F,
}

impl<F: Fn(usize, &RomConstants) -> Option<Predicted> + Sync> Cost<'_, F> {
    fn constants(&self, p: &[f64]) -> RomConstants {
        let mut c = self.base;
        for (b, v) in self.bounds.iter().zip(p) {
            c = set(&c, b.key, *v).expect("fittable keys are RomConstants fields");
        }
        c
    }
    fn residuals(&self, p: &[f64]) -> Option<Vec<f64>> {
        let c = self.constants(p);
        // outside the admissible set the law is not monotone
        c.validate().ok()?;
        (0..self.data.len())
            .map(|k| {
                let r = (self.forward)(k, &c)?.current_density_a_m2 - self.data[k];
                r.is_finite().then_some(r)
            })
            .collect()
    }
    /// ln posterior up to a constant: -(N/2) ln SSR + sum of ln priors; -inf outside.
    fn log_posterior(&self, p: &[f64]) -> f64 {
        let lp: f64 = self
            .bounds
            .iter()
            .zip(p)
            .map(|(b, x)| log_prior(&b.prior, *x))
            .sum();
        if !lp.is_finite() {
            return f64::NEG_INFINITY;
        }
        let Some(r) = self.residuals(p) else {
            return f64::NEG_INFINITY;
        };
        // a floor keeps an exact fit (SSR = 0) finite
        let ssr = r.iter().map(|x| x * x).sum::<f64>().max(1e-300);
        -0.5 * self.data.len() as f64 * ssr.ln() + lp
    }
}

fn nelder_mead<F: Fn(usize, &RomConstants) -> Option<Predicted> + Sync>(
    cost: &Cost<'_, F>,
    p0: &[f64],
    seed: u64,
) -> Result<(Vec<f64>, f64), String> {
    let bounds = search_bounds(cost.bounds);
    let z0: Vec<f64> = to_search(p0, cost.bounds)
        .iter()
        .zip(&bounds)
        .map(|(z, (lo, hi))| z.clamp(*lo, *hi))
        .collect();
    let m = optimizer::minimize_from(
        |z: &[f64]| {
            let l = cost.log_posterior(&to_physical(z, cost.bounds));
            if l.is_finite() {
                -l
            } else {
                f64::INFINITY
            }
        },
        &bounds,
        &z0,
        optimizer::Solver::NelderMead,
        BUDGET_PER_START,
        seed,
    )
    .map_err(|e| e.to_string())?;
    Ok((to_physical(&m.x, cost.bounds), m.f))
}

/// What the data can inform by rule: overlimiting constants need points beyond the limiting
/// current of their own surface, pattern constants need such points on a patterned surface.
fn rule_weak<F>(
    bounds: &[Bound],
    start: &RomConstants,
    data: &[f64],
    patterned: &[bool],
    forward: &F,
) -> Vec<Weak>
where
    F: Fn(usize, &RomConstants) -> Option<Predicted>,
{
    let n = data.len();
    let over: Vec<bool> = (0..n)
        .map(|k| {
            forward(k, start)
                .map(|pr| data[k] > 1.05 * pr.heterogeneous_limit_a_m2)
                .unwrap_or(false)
        })
        .collect();
    let n_over = over.iter().filter(|o| **o).count();
    let n_over_pattern = over
        .iter()
        .zip(patterned)
        .filter(|(o, pt)| **o && **pt)
        .count();
    let overlimiting_keys = [
        "onset_voltage",
        "overlimiting_conductance",
        "overlimiting_exponent",
        "alpha_0",
    ];
    let pattern_keys = [
        "lockin_width",
        "alpha_max",
        "wavelength_prefactor",
        "wavelength_exponent",
        "best_open_fraction",
    ];
    let mut out = Vec::new();
    for b in bounds {
        let why = if overlimiting_keys.contains(&b.key) && n_over < 2 {
            format!(
                "it needs at least two points beyond the limiting current (more than 1.05 \
                 times the ROM's limit of their surface), and the data have {n_over}"
            )
        } else if pattern_keys.contains(&b.key) && n_over_pattern < 2 {
            format!(
                "it needs at least two points beyond the limiting current on a patterned \
                 membrane (open_fraction < 1), and the data have {n_over_pattern}"
            )
        } else if b.key == "funnel_layer_ratio" && !patterned.iter().any(|x| *x) {
            "no curve on a patterned membrane".to_string()
        } else {
            continue;
        };
        out.push(Weak {
            key: b.key.to_string(),
            why,
        });
    }
    out
}

/// Jacobian of the residuals in physical parameters at `p`, central differences.
fn jacobian<F: Fn(usize, &RomConstants) -> Option<Predicted> + Sync>(
    cost: &Cost<'_, F>,
    p: &[f64],
) -> Result<Vec<Vec<f64>>, Refusal> {
    let n = cost.data.len();
    let bounds = cost.bounds;
    let mut jac = vec![vec![0.0; bounds.len()]; n];
    for j in 0..bounds.len() {
        let h = 1e-5 * bounds[j].width();
        let mut up = p.to_vec();
        let mut dn = p.to_vec();
        up[j] = (up[j] + h).min(bounds[j].upper);
        dn[j] = (dn[j] - h).max(bounds[j].lower);
        let (Some(ru), Some(rd)) = (cost.residuals(&up), cost.residuals(&dn)) else {
            return Err(Refusal(format!(
                "the model failed near the fitted `{}`",
                bounds[j].key
            )));
        };
        for k in 0..n {
            jac[k][j] = (ru[k] - rd[k]) / (up[j] - dn[j]);
        }
    }
    Ok(jac)
}

fn jtj(jac: &[Vec<f64>], p: usize) -> Vec<Vec<f64>> {
    let mut m = vec![vec![0.0; p]; p];
    for row in jac {
        for a in 0..p {
            for b in 0..p {
                m[a][b] += row[a] * row[b];
            }
        }
    }
    m
}

fn correlation_of(cov: &[Vec<f64>]) -> Vec<Vec<f64>> {
    let p = cov.len();
    (0..p)
        .map(|a| {
            (0..p)
                .map(|b| cov[a][b] / (cov[a][a] * cov[b][b]).sqrt())
                .collect()
        })
        .collect()
}

/// The mode, the data-only and the Laplace covariances of one set of fitted constants.
struct Mode {
    p: Vec<f64>,
    start_costs: Vec<f64>,
    data_cov: Vec<Vec<f64>>,
    laplace_cov: Vec<Vec<f64>>,
}

fn find_mode<F: Fn(usize, &RomConstants) -> Option<Predicted> + Sync>(
    cost: &Cost<'_, F>,
    start: &RomConstants,
    seed: u64,
) -> Result<Mode, Refusal> {
    let bounds = cost.bounds;
    let (n, p) = (cost.data.len(), bounds.len());
    let p0: Vec<f64> = bounds
        .iter()
        .map(|b| {
            get(start, b.key)
                .unwrap_or(0.5 * (b.lower + b.upper))
                .clamp(b.lower, b.upper)
        })
        .collect();
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    let mut starts = vec![p0];
    for _ in 0..4 {
        // seeded draws of the prior
        starts.push(
            bounds
                .iter()
                .map(|b| b.prior.quantile(rng.random()))
                .collect(),
        );
    }
    let mut best: Option<(Vec<f64>, f64)> = None;
    let mut start_costs = Vec::new();
    let t0 = std::time::Instant::now();
    for (k, s) in starts.iter().enumerate() {
        let (x, c) = nelder_mead(cost, s, seed.wrapping_add(k as u64)).map_err(Refusal)?;
        // Progress of a long fit (one line a start, on stderr).
        if t0.elapsed() > std::time::Duration::from_secs(2) {
            eprintln!(
                "fit: start {} of {} done after {:.0} s",
                k + 1,
                starts.len(),
                t0.elapsed().as_secs_f64()
            );
        }
        start_costs.push(c);
        if best.as_ref().is_none_or(|b| c < b.1) {
            best = Some((x, c));
        }
    }
    let (mode, c) = best.expect("at least one start");
    if !c.is_finite() {
        return Err(Refusal(
            "no start reached a finite misfit: the model fails for these data".into(),
        ));
    }
    let r = cost
        .residuals(&mode)
        .ok_or_else(|| Refusal("the model failed at the fitted constants".into()))?;
    let ssr: f64 = r.iter().map(|x| x * x).sum();
    let s2 = ssr / (n - p) as f64;
    let jac = jacobian(cost, &mode)?;
    let info = jtj(&jac, p);
    // The data-only covariance, with a ridge of a prior a hundred thousand prior widths wide
    // so that a direction the data do not see comes out huge rather than singular.
    let mut ridged = info.clone();
    for (j, b) in bounds.iter().enumerate() {
        ridged[j][j] += s2.max(1e-300) / (1e5 * b.width()).powi(2);
    }
    let data_cov = invert(&ridged).map(|m| scale(&m, s2)).ok_or_else(|| {
        Refusal("the curvature of the misfit is not positive definite; fit fewer constants".into())
    })?;
    let mut precision = scale(&info, 1.0 / s2.max(1e-300));
    for (j, b) in bounds.iter().enumerate() {
        precision[j][j] += prior_precision(&b.prior, mode[j]);
    }
    let laplace_cov = invert(&precision).ok_or_else(|| {
        Refusal(
            "the curvature of the posterior is not positive definite; fit fewer constants".into(),
        )
    })?;
    Ok(Mode {
        p: mode,
        start_costs,
        data_cov,
        laplace_cov,
    })
}

fn scale(m: &[Vec<f64>], f: f64) -> Vec<Vec<f64>> {
    m.iter()
        .map(|r| r.iter().map(|v| v * f).collect())
        .collect()
}

/// Constants the data alone leave wider than [`WEAK_SIGMA_OF_WIDTH`] of their prior width.
fn sigma_weak(bounds: &[Bound], data_cov: &[Vec<f64>]) -> Vec<Weak> {
    let corr = correlation_of(data_cov);
    let p = bounds.len();
    (0..p)
        .filter_map(|j| {
            let sd = data_cov[j][j].max(0.0).sqrt();
            let b = &bounds[j];
            if sd <= WEAK_SIGMA_OF_WIDTH * b.width() {
                return None;
            }
            let partner = (0..p)
                .filter(|&k| k != j)
                .max_by(|&x, &y| corr[j][x].abs().total_cmp(&corr[j][y].abs()));
            let corr_words = partner.map_or(String::new(), |k| {
                format!(
                    "; its strongest correlation is {:+.2} with `{}`",
                    corr[j][k], bounds[k].key
                )
            });
            Some(Weak {
                key: b.key.to_string(),
                why: format!(
                    "the data alone leave it +- {} (one sigma), {:.1} times its prior's width \
                     ({} to {}, width {}; informed means at most {WEAK_SIGMA_OF_WIDTH} times)\
                     {corr_words}",
                    sig3(sd),
                    sd / b.width(),
                    sig3(b.lower),
                    sig3(b.upper),
                    sig3(b.width()),
                ),
            })
        })
        .collect()
}

/// Three significant digits.
fn sig3(x: f64) -> String {
    if x == 0.0 || !x.is_finite() {
        return format!("{x}");
    }
    let digits = (2 - x.abs().log10().floor() as i32).max(0) as usize;
    if x.abs() >= 1e5 || x.abs() < 1e-3 {
        format!("{x:.2e}")
    } else {
        format!("{x:.digits$}")
    }
}

/// Percentile `q` in [0, 1] of `v` (sorted copy, linear interpolation between order
/// statistics).
pub fn percentile(v: &[f64], q: f64) -> f64 {
    let mut s: Vec<f64> = v.iter().copied().filter(|x| !x.is_nan()).collect();
    if s.is_empty() {
        return f64::NAN;
    }
    s.sort_by(f64::total_cmp);
    let h = q.clamp(0.0, 1.0) * (s.len() - 1) as f64;
    let (i, f) = (h.floor() as usize, h - h.floor());
    if i + 1 < s.len() {
        s[i] + f * (s[i + 1] - s[i])
    } else {
        s[i]
    }
}

/// Fit `keys` of `start` to `data` (current densities, A/m^2) given the forward model
/// `forward(point_index, constants)`. `patterned[k]` says whether point k is on a patterned
/// surface. Deterministic for `settings.seed`, whatever the thread count.
pub fn fit<F>(
    keys: &[String],
    start: &RomConstants,
    data: &[f64],
    patterned: &[bool],
    forward: F,
    settings: &Settings,
) -> Result<FitResult, Refusal>
where
    F: Fn(usize, &RomConstants) -> Option<Predicted> + Sync,
{
    let mut bounds = Vec::new();
    for k in keys {
        let b = Bound::of(k).ok_or_else(|| {
            Refusal(format!(
                "`{k}` cannot be fitted; fittable constants: {}",
                FITTABLE.join(", ")
            ))
        })?;
        if bounds.iter().any(|x: &Bound| x.key == b.key) {
            return Err(Refusal(format!("`{k}` is named twice in --fit")));
        }
        bounds.push(b);
    }
    let n = data.len();
    if n < bounds.len() + 2 {
        return Err(Refusal(format!(
            "too few points: {n} points for {p} constants; a fit needs at least {} (two more \
             points than constants) to leave an estimate of the error",
            bounds.len() + 2,
            p = bounds.len()
        )));
    }
    let refuse = |weak: &[Weak]| {
        let lines: Vec<String> = weak
            .iter()
            .map(|w| format!("the data cannot inform `{}`: {}", w.key, w.why))
            .collect();
        Refusal(format!(
            "{}. Add data that inform {}, fit fewer constants (--fit), or pass --allow-weak \
             to hold {} at {} prior{}",
            lines.join("; "),
            if weak.len() == 1 { "it" } else { "them" },
            if weak.len() == 1 { "it" } else { "them" },
            if weak.len() == 1 { "its" } else { "their" },
            if weak.len() == 1 { "" } else { "s" },
        ))
    };
    let mut held: Vec<Weak> = rule_weak(&bounds, start, data, patterned, &forward);
    if !held.is_empty() && !settings.allow_weak {
        return Err(refuse(&held));
    }
    let (mut cost_bounds, mode) = loop {
        let live: Vec<Bound> = bounds
            .iter()
            .filter(|b| !held.iter().any(|w| w.key == b.key))
            .copied()
            .collect();
        if live.is_empty() {
            return Err(Refusal(format!(
                "the data inform none of the constants asked for: {}",
                held.iter()
                    .map(|w| format!("`{}`: {}", w.key, w.why))
                    .collect::<Vec<_>>()
                    .join("; ")
            )));
        }
        let cost = Cost {
            base: *start,
            bounds: &live,
            data,
            forward: &forward,
        };
        let mode = find_mode(&cost, start, settings.seed)?;
        let weak = sigma_weak(&live, &mode.data_cov);
        if weak.is_empty() {
            break (live, mode);
        }
        if !settings.allow_weak {
            return Err(refuse(&weak));
        }
        held.extend(weak);
    };
    let bounds = std::mem::take(&mut cost_bounds);
    let cost = Cost {
        base: *start,
        bounds: &bounds,
        data,
        forward: &forward,
    };
    let p = bounds.len();
    let sampled = sample_posterior(&cost, &mode, settings)?;

    let mean = sampled.mean.clone();
    let mut constants = cost.constants(&mean);
    let mut residuals = cost.residuals(&mean);
    if constants.validate().is_err() || residuals.is_none() {
        // the posterior mean of a curved posterior can leave the admissible set; the mode
        // never does
        constants = cost.constants(&mode.p);
        residuals = cost.residuals(&mode.p);
    }
    let residuals =
        residuals.ok_or_else(|| Refusal("the model failed at the fitted constants".into()))?;
    let ssr: f64 = residuals.iter().map(|r| r * r).sum();
    let at_bound = bounds
        .iter()
        .zip(&mode.p)
        .filter(|(b, v)| {
            let t = (**v - b.lower) / b.width();
            !(1e-3..=1.0 - 1e-3).contains(&t)
        })
        .map(|(b, _)| b.key.to_string())
        .collect();
    Ok(FitResult {
        constants,
        parameters: bounds
            .iter()
            .enumerate()
            .map(|(j, b)| {
                (
                    b.key.to_string(),
                    sampled.mean[j],
                    sampled.covariance[j][j].max(0.0).sqrt(),
                )
            })
            .collect(),
        correlation: correlation_of(&sampled.covariance),
        mode: mode.p.clone(),
        laplace_covariance: mode.laplace_cov.clone(),
        data_sigma: (0..p)
            .map(|j| mode.data_cov[j][j].max(0.0).sqrt())
            .collect(),
        sampled,
        held_at_prior: held,
        rms_a_m2: (ssr / n as f64).sqrt(),
        residuals,
        start_costs: mode.start_costs,
        at_bound,
    })
}

/// The ensemble sampler on the posterior, started in a ball about the mode a tenth of the
/// Laplace standard deviations wide (inside the support).
fn sample_posterior<F: Fn(usize, &RomConstants) -> Option<Predicted> + Sync>(
    cost: &Cost<'_, F>,
    mode: &Mode,
    settings: &Settings,
) -> Result<Sampled, Refusal> {
    let bounds = cost.bounds;
    let p = bounds.len();
    let walkers = if settings.walkers == 0 {
        (4 * p).max(16)
    } else {
        settings.walkers
    };
    let steps = settings.steps.max(3);
    let config = EnsembleConfig {
        walkers,
        steps,
        burn_in: steps / 3,
        thin: 1,
        stretch: 2.0,
        seed: settings.seed ^ 0x4d43_4d43,
    };
    let mut rng = ChaCha8Rng::seed_from_u64(config.seed.wrapping_add(1));
    let mut start = Vec::with_capacity(walkers);
    for _ in 0..walkers {
        let mut x = mode.p.clone();
        for _ in 0..100 {
            let y: Vec<f64> = (0..p)
                .map(|j| {
                    let sd = 0.1 * mode.laplace_cov[j][j].max(0.0).sqrt();
                    let sd = sd
                        .min(0.01 * bounds[j].width())
                        .max(1e-9 * bounds[j].width());
                    (mode.p[j] + sd * normal(&mut rng)).clamp(bounds[j].lower, bounds[j].upper)
                })
                .collect();
            if cost.log_posterior(&y).is_finite() {
                x = y;
                break;
            }
        }
        start.push(x);
    }
    if cost.data.len() * walkers * steps > 50_000_000 {
        // Progress of a long fit (stderr): the sampler costs walkers x steps model passes.
        eprintln!(
            "fit: sampling the posterior, {walkers} walkers x {steps} steps over {} points",
            cost.data.len()
        );
    }
    let out = mcmc::sample(|x| cost.log_posterior(x), &start, &config)
        .map_err(|e| Refusal(e.to_string()))?;
    let (mean, covariance) = mcmc::mean_and_covariance(&out.samples);
    let interval_95 = (0..p)
        .map(|j| {
            let v: Vec<f64> = out.samples.iter().map(|x| x[j]).collect();
            (percentile(&v, 0.025), percentile(&v, 0.975))
        })
        .collect();
    let every = out.samples.len().div_ceil(settings.max_kept.max(1));
    let samples = out.samples.iter().step_by(every.max(1)).cloned().collect();
    Ok(Sampled {
        samples,
        mean,
        covariance,
        interval_95,
        walkers,
        steps,
        burn_in: config.burn_in,
        seed: config.seed,
        acceptance: out.acceptance,
        autocorrelation_steps: out.autocorrelation_time,
    })
}

/// Inverse of a small symmetric positive matrix by Gauss-Jordan elimination with partial
/// pivoting; None when (numerically) singular.
fn invert(m: &[Vec<f64>]) -> Option<Vec<Vec<f64>>> {
    let n = m.len();
    let scale: Vec<f64> = (0..n).map(|i| m[i][i].abs().sqrt().max(1e-300)).collect();
    // scale to unit diagonal so the pivot test is relative
    let mut a: Vec<Vec<f64>> = (0..n)
        .map(|i| (0..n).map(|j| m[i][j] / (scale[i] * scale[j])).collect())
        .collect();
    let mut inv: Vec<Vec<f64>> = (0..n)
        .map(|i| (0..n).map(|j| if i == j { 1.0 } else { 0.0 }).collect())
        .collect();
    for col in 0..n {
        let piv = (col..n).max_by(|&x, &y| a[x][col].abs().total_cmp(&a[y][col].abs()))?;
        if a[piv][col].abs() < 1e-10 {
            return None;
        }
        a.swap(col, piv);
        inv.swap(col, piv);
        let d = a[col][col];
        for j in 0..n {
            a[col][j] /= d;
            inv[col][j] /= d;
        }
        for r in 0..n {
            if r != col {
                let f = a[r][col];
                for j in 0..n {
                    a[r][j] -= f * a[col][j];
                    inv[r][j] -= f * inv[col][j];
                }
            }
        }
    }
    Some(
        (0..n)
            .map(|i| (0..n).map(|j| inv[i][j] / (scale[i] * scale[j])).collect())
            .collect(),
    )
}

/// Seeded standard normal numbers (Box-Muller), for synthetic data in tests and demos.
pub fn normal(rng: &mut ChaCha8Rng) -> f64 {
    let u1: f64 = rng.random::<f64>().max(1e-300);
    let u2: f64 = rng.random();
    (-2.0 * u1.ln()).sqrt() * (std::f64::consts::TAU * u2).cos()
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A stand-in forward model with the ROM's shape for an unpatterned surface:
    /// i = i_lim (1 - exp(-v/2)) + i_lim g max(0, v - v_c) (docs/physics.md#overlimiting-current).
    fn toy(v: f64, c: &RomConstants) -> Predicted {
        let ilim = 20.0;
        let ec = if v > c.onset_voltage {
            ilim * c.overlimiting_conductance * (v - c.onset_voltage)
        } else {
            0.0
        };
        Predicted {
            current_density_a_m2: ilim * (1.0 - (-v / 2.0).exp()) + ec,
            heterogeneous_limit_a_m2: ilim,
        }
    }

    #[test]
    fn recovers_a_line_beyond_onset_and_refuses_underlimiting_data() {
        let truth = set(
            &set(&RomConstants::default(), "onset_voltage", 14.0).unwrap(),
            "overlimiting_conductance",
            0.08,
        )
        .unwrap();
        let v: Vec<f64> = (0..30).map(|k| k as f64 * 1.5).collect();
        let mut rng = ChaCha8Rng::seed_from_u64(1);
        let data: Vec<f64> = v
            .iter()
            .map(|v| toy(*v, &truth).current_density_a_m2 + 0.1 * normal(&mut rng))
            .collect();
        let keys = vec![
            "onset_voltage".to_string(),
            "overlimiting_conductance".to_string(),
        ];
        let r = fit(
            &keys,
            &RomConstants::default(),
            &data,
            &vec![false; v.len()],
            |k, c| Some(toy(v[k], c)),
            &Settings {
                seed: 7,
                steps: 600,
                ..Settings::default()
            },
        )
        .unwrap();
        let (_, vc, svc) = &r.parameters[0];
        let (_, g, sg) = &r.parameters[1];
        assert!((vc - 14.0).abs() < 3.0 * svc && *svc < 1.0, "{vc} +- {svc}");
        assert!((g - 0.08).abs() < 3.0 * sg && *sg < 0.01, "{g} +- {sg}");
        assert!(r.rms_a_m2 < 0.15);
        // below the limit only: the overlimiting constants are not informed
        let low: Vec<f64> = data[..6].to_vec();
        let e = fit(
            &keys,
            &RomConstants::default(),
            &low,
            &[false; 6],
            |k, c| Some(toy(v[k], c)),
            &Settings {
                seed: 7,
                steps: 600,
                ..Settings::default()
            },
        )
        .unwrap_err();
        assert!(e.0.contains("cannot inform `onset_voltage`"), "{}", e.0);
        let e = fit(
            &keys,
            &RomConstants::default(),
            &data[..3],
            &[false; 3],
            |k, c| Some(toy(v[k], c)),
            &Settings {
                seed: 7,
                steps: 600,
                ..Settings::default()
            },
        )
        .unwrap_err();
        assert!(e.0.contains("too few points"), "{}", e.0);
    }

    #[test]
    fn inverse_of_a_known_matrix() {
        let inv = invert(&[vec![4.0, 2.0], vec![2.0, 3.0]]).unwrap();
        // exact inverse: 1/8 [[3, -2], [-2, 4]]
        assert!(
            (inv[0][0] - 0.375).abs() < 1e-12
                && (inv[0][1] + 0.25).abs() < 1e-12
                && (inv[1][1] - 0.5).abs() < 1e-12
        );
        assert!(invert(&[vec![1.0, 1.0], vec![1.0, 1.0]]).is_none());
    }
}
