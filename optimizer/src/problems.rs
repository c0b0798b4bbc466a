//! Test problems with known Pareto fronts, for tests, examples and benchmarks.
//!
//! - ZDT1, ZDT2, ZDT3: Zitzler, Deb and Thiele, "Comparison of multiobjective evolutionary
//!   algorithms: empirical results", Evol. Comput. 8 (2000) 173.
//! - DTLZ2: Deb, Thiele, Laumanns and Zitzler, "Scalable multi-objective optimization test
//!   problems", CEC 2002.
//! - TNK: Tanaka et al. (1995), as given in Deb, Multi-Objective Optimization using
//!   Evolutionary Algorithms, Wiley 2001, and Deb et al. (2002), table V: a front on the
//!   boundary of a constraint.

use crate::problem::{Outcome, Problem, Variable};
use crate::scalarised::weights;
use std::f64::consts::PI;

/// The ZDT variant.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum ZdtKind {
    /// Convex front `f2 = 1 - sqrt(f1)`.
    Zdt1,
    /// Non-convex front `f2 = 1 - f1^2`.
    Zdt2,
    /// Disconnected front, pieces of `f2 = 1 - sqrt(f1) - f1 sin(10 pi f1)`.
    Zdt3,
}

/// ZDT1, ZDT2 or ZDT3 with `n` variables in [0, 1] (30 in the original).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Zdt {
    /// Which of the three.
    pub kind: ZdtKind,
    /// Number of variables (at least 2).
    pub n: usize,
}

impl Zdt {
    fn h(&self, f1: f64, g: f64) -> f64 {
        let r = f1 / g;
        match self.kind {
            ZdtKind::Zdt1 => 1.0 - r.sqrt(),
            ZdtKind::Zdt2 => 1.0 - r * r,
            ZdtKind::Zdt3 => 1.0 - r.sqrt() - r * (10.0 * PI * f1).sin(),
        }
    }

    /// The analytic Pareto front (g = 1) sampled at `points` values of f1 in [0, 1]; for ZDT3
    /// the dominated parts of the curve are removed.
    pub fn reference_front(&self, points: usize) -> Vec<Vec<f64>> {
        let curve: Vec<Vec<f64>> = (0..points)
            .map(|i| {
                let f1 = i as f64 / (points - 1) as f64;
                vec![f1, self.h(f1, 1.0)]
            })
            .collect();
        // f1 is ascending: a point is non-dominated when its f2 is below all earlier ones.
        let mut front = Vec::new();
        let mut best = f64::INFINITY;
        for p in curve {
            if p[1] < best {
                best = p[1];
                front.push(p);
            }
        }
        front
    }
}

impl Problem for Zdt {
    fn variables(&self) -> Vec<Variable> {
        (0..self.n)
            .map(|i| Variable::new(format!("x{}", i + 1), 0.0, 1.0))
            .collect()
    }
    fn num_objectives(&self) -> usize {
        2
    }
    fn num_constraints(&self) -> usize {
        0
    }
    fn evaluate(&self, x: &[f64]) -> Result<Outcome, String> {
        let f1 = x[0];
        let g = 1.0 + 9.0 * x[1..].iter().sum::<f64>() / (self.n - 1) as f64;
        Ok(Outcome {
            objectives: vec![f1, g * self.h(f1, g)],
            constraints: vec![],
        })
    }
}

/// DTLZ2 with `m` objectives and `n` variables in [0, 1] (n = m + 9 in the original).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Dtlz2 {
    /// Number of objectives (at least 2).
    pub m: usize,
    /// Number of variables (at least m).
    pub n: usize,
}

impl Dtlz2 {
    /// Points of the analytic front (the unit sphere in the positive orthant): a simplex
    /// lattice of about `points` directions, normalised to length one.
    pub fn reference_front(&self, points: usize) -> Vec<Vec<f64>> {
        weights(self.m, points)
            .into_iter()
            .map(|w| {
                let norm = w.iter().map(|v| v * v).sum::<f64>().sqrt();
                w.iter().map(|v| v / norm).collect()
            })
            .collect()
    }
}

impl Problem for Dtlz2 {
    fn variables(&self) -> Vec<Variable> {
        (0..self.n)
            .map(|i| Variable::new(format!("x{}", i + 1), 0.0, 1.0))
            .collect()
    }
    fn num_objectives(&self) -> usize {
        self.m
    }
    fn num_constraints(&self) -> usize {
        0
    }
    fn evaluate(&self, x: &[f64]) -> Result<Outcome, String> {
        let m = self.m;
        let g: f64 = x[m - 1..].iter().map(|v| (v - 0.5) * (v - 0.5)).sum();
        let f = (0..m)
            .map(|i| {
                let mut v = 1.0 + g;
                for xj in &x[..m - 1 - i] {
                    v *= (xj * PI / 2.0).cos();
                }
                if i > 0 {
                    v *= (x[m - 1 - i] * PI / 2.0).sin();
                }
                v
            })
            .collect();
        Ok(Outcome {
            objectives: f,
            constraints: vec![],
        })
    }
}

/// TNK: minimise `(x1, x2)` over `[0, pi]^2` subject to
/// `g1 = 1 + 0.1 cos(16 atan(x1/x2)) - x1^2 - x2^2 <= 0` and
/// `g2 = (x1 - 0.5)^2 + (x2 - 0.5)^2 - 0.5 <= 0`. The front lies on the boundary of g1.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub struct Tnk;

impl Tnk {
    /// The analytic front: in polar form (x1 = r sin t, x2 = r cos t, so atan(x1/x2) = t) the
    /// boundary of g1 is `r(t)^2 = 1 + 0.1 cos(16 t)`; its points that satisfy g2 and are
    /// non-dominated, sampled at `points` angles.
    pub fn reference_front(points: usize) -> Vec<Vec<f64>> {
        let mut pts: Vec<Vec<f64>> = (0..points)
            .map(|i| {
                let t = 0.5 * PI * i as f64 / (points - 1) as f64;
                let r = (1.0 + 0.1 * (16.0 * t).cos()).sqrt();
                vec![r * t.sin(), r * t.cos()]
            })
            .filter(|p| (p[0] - 0.5).powi(2) + (p[1] - 0.5).powi(2) <= 0.5)
            .collect();
        pts.sort_by(|a, b| a[0].total_cmp(&b[0]));
        let mut front = Vec::new();
        let mut best = f64::INFINITY;
        for p in pts {
            if p[1] < best {
                best = p[1];
                front.push(p);
            }
        }
        front
    }
}

impl Problem for Tnk {
    fn variables(&self) -> Vec<Variable> {
        vec![Variable::new("x1", 0.0, PI), Variable::new("x2", 0.0, PI)]
    }
    fn num_objectives(&self) -> usize {
        2
    }
    fn num_constraints(&self) -> usize {
        2
    }
    fn evaluate(&self, x: &[f64]) -> Result<Outcome, String> {
        let (x1, x2) = (x[0], x[1]);
        // atan(x1/x2) as an angle from the x2 axis; atan2 keeps x2 = 0 finite.
        let t = x1.atan2(x2);
        Ok(Outcome {
            objectives: vec![x1, x2],
            constraints: vec![
                1.0 + 0.1 * (16.0 * t).cos() - x1 * x1 - x2 * x2,
                (x1 - 0.5).powi(2) + (x2 - 0.5).powi(2) - 0.5,
            ],
        })
    }
}

/// Rosenbrock's function `sum 100 (x_{i+1} - x_i^2)^2 + (1 - x_i)^2`; minimum 0 at (1, ..., 1)
/// (Rosenbrock, Comput. J. 3 (1960) 175).
pub fn rosenbrock(x: &[f64]) -> f64 {
    x.windows(2)
        .map(|w| 100.0 * (w[1] - w[0] * w[0]).powi(2) + (1.0 - w[0]).powi(2))
        .sum()
}

/// Himmelblau's function `(x^2 + y - 11)^2 + (x + y^2 - 7)^2`; four minima of value 0, at
/// (3, 2), (-2.805118, 3.131312), (-3.779310, -3.283186), (3.584428, -1.848126)
/// (Himmelblau, Applied Nonlinear Programming, McGraw-Hill 1972).
pub fn himmelblau(x: &[f64]) -> f64 {
    (x[0] * x[0] + x[1] - 11.0).powi(2) + (x[0] + x[1] * x[1] - 7.0).powi(2)
}
