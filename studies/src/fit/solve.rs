//! The least-squares fit: Nelder-Mead through the optimizer crate's argmin adapter
//! ([`optimizer::minimize_from`], bounded), in ln(p) for constants whose bounds span decades,
//! from several seeded starts; uncertainty from the Gauss-Newton approximation of the cost's
//! curvature, sigma^2 = SSR / (N - p) (J^T J)^-1 (Bates and Watts, Nonlinear Regression
//! Analysis, 1988, ch. 2).

use model::RomConstants;
use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;

/// A constant that can be fitted, with its physical bounds.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Bound {
    /// serde key in [`RomConstants`].
    pub key: &'static str,
    /// Lower bound.
    pub lower: f64,
    /// Upper bound.
    pub upper: f64,
    /// Why these bounds.
    pub why: &'static str,
}

/// Fittable constants and their bounds.
pub const BOUNDS: [Bound; 10] = [
    Bound {
        key: "onset_voltage",
        lower: 2.0,
        upper: 60.0,
        why: "onset of order 10-30 thermal voltages (Rubinstein and Zaltzman 2000), widened",
    },
    Bound {
        key: "overlimiting_conductance",
        lower: 1e-4,
        upper: 2.0,
        why: "positive; above 2 i_lim per thermal unit is far beyond reported overlimiting slopes",
    },
    Bound {
        key: "overlimiting_exponent",
        lower: 0.5,
        upper: 3.0,
        why: "shape exponent of the overlimiting branch",
    },
    Bound {
        key: "wavelength_prefactor",
        lower: 0.1,
        upper: 10.0,
        why: "vortices of the order of the depleted layer",
    },
    Bound {
        key: "wavelength_exponent",
        lower: 0.0,
        upper: 2.0,
        why: "growth of the vortex size with voltage",
    },
    Bound {
        key: "lockin_width",
        lower: 0.05,
        upper: 3.0,
        why: "width of the lock-in window in ln(pitch / wavelength)",
    },
    Bound {
        key: "alpha_0",
        lower: 0.01,
        upper: 0.9,
        why: "a share of the surface",
    },
    Bound {
        key: "alpha_max",
        lower: 0.02,
        upper: 1.0,
        why: "a share of the surface",
    },
    Bound {
        key: "best_open_fraction",
        lower: 0.05,
        upper: 0.95,
        why: "an open fraction",
    },
    Bound {
        key: "funnel_scale",
        lower: 0.01,
        upper: 100.0,
        why: "pitch / delta of the funnelling transition",
    },
];

/// The default set of fitted constants.
pub const DEFAULT_FIT: [&str; 4] = [
    "onset_voltage",
    "overlimiting_conductance",
    "lockin_width",
    "alpha_max",
];

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

/// What the forward model gives for one point.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Predicted {
    /// Current density, A/m^2.
    pub current_density_a_m2: f64,
    /// Limiting current density of this surface (funnelling included), A/m^2.
    pub heterogeneous_limit_a_m2: f64,
}

/// The fit's result.
#[derive(Debug, Clone, PartialEq)]
pub struct FitResult {
    /// Fitted constants (the others as given).
    pub constants: RomConstants,
    /// Fitted keys, values and one-sigma uncertainties.
    pub parameters: Vec<(String, f64, f64)>,
    /// Correlation matrix of the fitted parameters.
    pub correlation: Vec<Vec<f64>>,
    /// Residuals model - data, A/m^2, per point.
    pub residuals: Vec<f64>,
    /// Root mean square residual, A/m^2.
    pub rms_a_m2: f64,
    /// Starts tried and the cost each reached.
    pub start_costs: Vec<f64>,
    /// Parameters that ended at a bound.
    pub at_bound: Vec<String>,
}

/// Why a fit was refused or failed; the message is for the user.
#[derive(Debug, Clone, PartialEq)]
pub struct Refusal(pub String);

/// Bounds spanning more than a decade and a half are searched in ln(p), others in p.
fn logarithmic(b: &Bound) -> bool {
    b.lower > 0.0 && b.upper / b.lower > 20.0
}

fn to_physical(z: &[f64], b: &[Bound]) -> Vec<f64> {
    z.iter()
        .zip(b)
        .map(|(z, b)| if logarithmic(b) { z.exp() } else { *z })
        .collect()
}

fn to_search(p: &[f64], b: &[Bound]) -> Vec<f64> {
    p.iter()
        .zip(b)
        .map(|(p, b)| if logarithmic(b) { p.ln() } else { *p })
        .collect()
}

fn search_bounds(b: &[Bound]) -> Vec<(f64, f64)> {
    b.iter()
        .map(|b| {
            if logarithmic(b) {
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

impl<F: Fn(usize, &RomConstants) -> Option<Predicted>> Cost<'_, F> {
    fn constants(&self, p: &[f64]) -> RomConstants {
        let mut c = self.base;
        for (b, v) in self.bounds.iter().zip(p) {
            c = set(&c, b.key, *v).expect("fittable keys are RomConstants fields");
        }
        c
    }
    fn residuals(&self, p: &[f64]) -> Option<Vec<f64>> {
        let c = self.constants(p);
        // outside the admissible set (e.g. alpha_max below alpha_0) the law is not monotone
        c.validate().ok()?;
        (0..self.data.len())
            .map(|k| {
                let r = (self.forward)(k, &c)?.current_density_a_m2 - self.data[k];
                r.is_finite().then_some(r)
            })
            .collect()
    }
    fn ssr(&self, p: &[f64]) -> f64 {
        self.residuals(p)
            .map(|r| r.iter().map(|x| x * x).sum())
            .unwrap_or(f64::INFINITY)
    }
}

fn nelder_mead<F: Fn(usize, &RomConstants) -> Option<Predicted>>(
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
        |z: &[f64]| cost.ssr(&to_physical(z, cost.bounds)),
        &bounds,
        &z0,
        optimizer::Solver::NelderMead,
        BUDGET_PER_START,
        seed,
    )
    .map_err(|e| e.to_string())?;
    Ok((to_physical(&m.x, cost.bounds), m.f))
}

/// Fit `keys` of `start` to `data` (current densities, A/m^2) given the forward model
/// `forward(point_index, constants)`. `patterned[k]` says whether point k is on a patterned
/// surface. Several seeded starts; deterministic.
pub fn fit<F>(
    keys: &[String],
    start: &RomConstants,
    data: &[f64],
    patterned: &[bool],
    forward: F,
    seed: u64,
) -> Result<FitResult, Refusal>
where
    F: Fn(usize, &RomConstants) -> Option<Predicted>,
{
    let mut bounds = Vec::new();
    for k in keys {
        let b = BOUNDS.iter().find(|b| b.key == k).ok_or_else(|| {
            Refusal(format!(
                "`{k}` cannot be fitted; fittable constants: {}",
                BOUNDS.iter().map(|b| b.key).collect::<Vec<_>>().join(", ")
            ))
        })?;
        if bounds.iter().any(|x: &Bound| x.key == b.key) {
            return Err(Refusal(format!("`{k}` is named twice in --fit")));
        }
        bounds.push(*b);
    }
    let n = data.len();
    let p = bounds.len();
    if n < p + 2 {
        return Err(Refusal(format!(
            "too few points: {n} points for {p} constants; a fit needs at least {} (two more \
             points than constants) to leave an estimate of the error",
            p + 2
        )));
    }
    // What the data can inform: overlimiting constants need points beyond the limiting current
    // of their own surface, pattern constants need such points on a patterned surface.
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
    for b in &bounds {
        if overlimiting_keys.contains(&b.key) && n_over < 2 {
            return Err(Refusal(format!(
                "the data cannot inform `{}`: it needs at least two points beyond the limiting \
                 current (more than 1.05 times the ROM's limit of their surface), and the data \
                 have {n_over}",
                b.key
            )));
        }
        if pattern_keys.contains(&b.key) && n_over_pattern < 2 {
            return Err(Refusal(format!(
                "the data cannot inform `{}`: it needs at least two points beyond the limiting \
                 current on a patterned membrane (open_fraction < 1), and the data have \
                 {n_over_pattern}",
                b.key
            )));
        }
        if b.key == "funnel_scale" && !patterned.iter().any(|x| *x) {
            return Err(Refusal(
                "the data cannot inform `funnel_scale`: no curve on a patterned membrane".into(),
            ));
        }
    }

    let p0: Vec<f64> = bounds
        .iter()
        .map(|b| {
            get(start, b.key)
                .unwrap_or(0.5 * (b.lower + b.upper))
                .clamp(b.lower, b.upper)
        })
        .collect();
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    let mut starts = vec![p0.clone()];
    for _ in 0..4 {
        starts.push(
            bounds
                .iter()
                .map(|b| {
                    // log-uniform for bounds spanning decades, else uniform
                    let u: f64 = rng.random();
                    if b.lower > 0.0 && b.upper / b.lower > 20.0 {
                        (b.lower.ln() + u * (b.upper / b.lower).ln()).exp()
                    } else {
                        b.lower + u * (b.upper - b.lower)
                    }
                })
                .collect(),
        );
    }
    let cost = Cost {
        base: *start,
        bounds: &bounds,
        data,
        forward: &forward,
    };
    let mut best: Option<(Vec<f64>, f64)> = None;
    let mut start_costs = Vec::new();
    let t0 = std::time::Instant::now();
    for (k, s) in starts.iter().enumerate() {
        let (p, c) = nelder_mead(&cost, s, seed.wrapping_add(k as u64)).map_err(Refusal)?;
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
            best = Some((p, c));
        }
    }
    let (pbest, _) = best.expect("at least one start");
    let residuals = cost
        .residuals(&pbest)
        .ok_or_else(|| Refusal("the model failed at the fitted constants".into()))?;
    let ssr: f64 = residuals.iter().map(|r| r * r).sum();
    if !ssr.is_finite() {
        return Err(Refusal(
            "no start reached a finite misfit: the model fails for these data".into(),
        ));
    }

    // Jacobian of the residuals in physical parameters, central differences.
    let mut jac = vec![vec![0.0; p]; n];
    for j in 0..p {
        let h = 1e-5 * (bounds[j].upper - bounds[j].lower);
        let mut up = pbest.clone();
        let mut dn = pbest.clone();
        up[j] = (up[j] + h).min(bounds[j].upper);
        dn[j] = (dn[j] - h).max(bounds[j].lower);
        let ru = cost.residuals(&up);
        let rd = cost.residuals(&dn);
        let (Some(ru), Some(rd)) = (ru, rd) else {
            return Err(Refusal(format!(
                "the model failed near the fitted `{}`",
                bounds[j].key
            )));
        };
        for k in 0..n {
            jac[k][j] = (ru[k] - rd[k]) / (up[j] - dn[j]);
        }
    }
    let data_scale = (data.iter().map(|d| d * d).sum::<f64>() / n as f64)
        .sqrt()
        .max(1e-30);
    for j in 0..p {
        let norm = (jac.iter().map(|r| r[j] * r[j]).sum::<f64>()).sqrt();
        // change of the fit over the whole bound range, relative to the data
        if norm * (bounds[j].upper - bounds[j].lower) < 1e-6 * data_scale * (n as f64).sqrt() {
            return Err(Refusal(format!(
                "the data cannot inform `{}`: the model's currents at these points do not \
                 change with it (zero sensitivity)",
                bounds[j].key
            )));
        }
    }
    let mut jtj = vec![vec![0.0; p]; p];
    for row in &jac {
        for a in 0..p {
            for b in 0..p {
                jtj[a][b] += row[a] * row[b];
            }
        }
    }
    let inv = invert(&jtj).ok_or_else(|| {
        Refusal(format!(
            "the data cannot separate the constants {}: their effects on the currents are \
             indistinguishable (singular curvature); fit fewer constants",
            keys.join(", ")
        ))
    })?;
    let s2 = ssr / (n - p) as f64;
    let sig: Vec<f64> = (0..p).map(|j| (s2 * inv[j][j]).max(0.0).sqrt()).collect();
    let correlation = (0..p)
        .map(|a| {
            (0..p)
                .map(|b| inv[a][b] / (inv[a][a] * inv[b][b]).sqrt())
                .collect()
        })
        .collect::<Vec<Vec<f64>>>();
    if correlation.iter().flatten().any(|r: &f64| !r.is_finite()) {
        return Err(Refusal(
            "the curvature of the misfit is not positive definite; fit fewer constants".into(),
        ));
    }
    let at_bound = bounds
        .iter()
        .zip(&pbest)
        .filter(|(b, v)| {
            let t = (**v - b.lower) / (b.upper - b.lower);
            !(1e-3..=1.0 - 1e-3).contains(&t)
        })
        .map(|(b, _)| b.key.to_string())
        .collect();
    Ok(FitResult {
        constants: cost.constants(&pbest),
        parameters: bounds
            .iter()
            .zip(&pbest)
            .zip(&sig)
            .map(|((b, v), s)| (b.key.to_string(), *v, *s))
            .collect(),
        correlation,
        rms_a_m2: (ssr / n as f64).sqrt(),
        residuals,
        start_costs,
        at_bound,
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
            7,
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
            7,
        )
        .unwrap_err();
        assert!(e.0.contains("cannot inform `onset_voltage`"), "{}", e.0);
        let e = fit(
            &keys,
            &RomConstants::default(),
            &data[..3],
            &[false; 3],
            |k, c| Some(toy(v[k], c)),
            7,
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
