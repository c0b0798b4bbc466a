//! Sobol indices (`optimizer::sensitivity`) against SALib (PyPI, `SALib.analyze.sobol.analyze`
//! with `calc_second_order=False`, and its `SALib.sample.sobol.sample` sampler and test
//! functions `Ishigami`, `Sobol_G`), at the same sample size. The analytic indices of both
//! functions are checked in the optimizer's unit tests.

use optimizer::sensitivity::{
    functions, saltelli_points, sobol_indices, BaseSampler, Bootstrap, SobolIndices,
};
use rand::SeedableRng;
use rand_chacha::ChaCha8Rng;
use std::f64::consts::PI;

const G_A: [f64; 6] = [0.0, 1.0, 4.5, 9.0, 99.0, 99.0];
const N: usize = 1024;
const RESAMPLES: usize = 1000;

/// SALib's analysis of our outputs `y`, and SALib's own sample of the same size with its
/// outputs and analysis. The problem is Ishigami on [-pi, pi]^3 or the G function on [0, 1]^6.
const SCRIPT: &str = r#"
import sys, json
import numpy as np
from SALib.analyze import sobol as analyze
from SALib.sample import sobol as sample
from SALib.test_functions import Ishigami, Sobol_G
d = json.load(sys.stdin)
if d['function'] == 'ishigami':
    problem = {'num_vars': 3, 'names': ['x1', 'x2', 'x3'], 'bounds': [[-np.pi, np.pi]] * 3}
    f = lambda X: Ishigami.evaluate(X, A=7.0, B=0.1)
else:
    k = len(d['a'])
    problem = {'num_vars': k, 'names': ['x%d' % i for i in range(k)], 'bounds': [[0.0, 1.0]] * k}
    f = lambda X: Sobol_G.evaluate(X, a=np.array(d['a']))
def res(si):
    return {k: [float(v) for v in si[k]] for k in ('S1', 'S1_conf', 'ST', 'ST_conf')}
ours = analyze.analyze(problem, np.array(d['y']), calc_second_order=False,
                       num_resamples=d['resamples'], seed=1)
X = sample.sample(problem, d['n'], calc_second_order=False, seed=7)
Y = f(X)
theirs = analyze.analyze(problem, Y, calc_second_order=False,
                         num_resamples=d['resamples'], seed=2)
print(json.dumps({'on_our_y': res(ours), 'x': X.tolist(), 'y': Y.tolist(),
                  'their': res(theirs)}))
"#;

/// A test function on the unit cube.
type Func = Box<dyn Fn(&[f64]) -> f64>;

fn f_of(function: &str) -> (usize, Func) {
    match function {
        "ishigami" => (3, Box::new(|u| functions::ishigami(u, 7.0, 0.1))),
        _ => (G_A.len(), Box::new(|u| functions::g_function(u, &G_A))),
    }
}

fn ours(y: &[f64], d: usize, seed: u64) -> SobolIndices {
    let boot = Bootstrap {
        resamples: RESAMPLES,
        confidence: 0.95,
    };
    sobol_indices(y, d, boot, &mut ChaCha8Rng::seed_from_u64(seed)).unwrap()
}

fn vec_of(v: &serde_json::Value, key: &str) -> Vec<f64> {
    v[key]
        .as_array()
        .unwrap()
        .iter()
        .map(|x| x.as_f64().unwrap())
        .collect()
}

fn cross_check(function: &str) {
    let (d, f) = f_of(function);
    let pts = saltelli_points(N, d, BaseSampler::Sobol, &mut ChaCha8Rng::seed_from_u64(3)).unwrap();
    let y: Vec<f64> = pts.iter().map(|p| f(p)).collect();
    let mine = ours(&y, d, 4);
    let input = serde_json::json!({
        "function": function, "a": G_A, "y": y, "n": N, "resamples": RESAMPLES,
    })
    .to_string();
    let Some(out) = crate::python_refs::run("SALib", SCRIPT, &input) else {
        return;
    };
    let v: serde_json::Value = serde_json::from_str(&out).unwrap();

    // 1. The same outputs give the same point estimates (the same formulas: Saltelli et al.
    //    2010 first order, Jansen 1999 total, variance of f(A) and f(B) together), and
    //    bootstrap intervals of the same width: each half-width is 1.96 times a bootstrap
    //    standard deviation from 1000 resamples, whose relative error is about
    //    1/sqrt(2 * 1000) = 2.2 %, so the two agree to well within 20 %.
    let on = &v["on_our_y"];
    for (key, key_ci, est, ci) in [
        ("S1", "S1_conf", &mine.first_order, &mine.first_order_ci),
        ("ST", "ST_conf", &mine.total, &mine.total_ci),
    ] {
        let (theirs, theirs_ci) = (vec_of(on, key), vec_of(on, key_ci));
        for i in 0..d {
            assert!(
                (est[i] - theirs[i]).abs() < 1e-10,
                "{function} {key}[{i}]: ours {} SALib {}",
                est[i],
                theirs[i]
            );
            let ratio = ci[i] / theirs_ci[i];
            assert!(
                (0.8..1.25).contains(&ratio) || (ci[i] < 1e-9 && theirs_ci[i] < 1e-9),
                "{function} {key_ci}[{i}]: ours {} SALib {}",
                ci[i],
                theirs_ci[i]
            );
        }
    }

    // 2. SALib's own sample (its layout is ours: A, AB_1..AB_d, B per row) fed to our
    //    estimator gives SALib's estimates; their test function agrees with ours.
    let xs: Vec<Vec<f64>> = serde_json::from_value(v["x"].clone()).unwrap();
    let ys = vec_of(&v, "y");
    assert_eq!(xs.len(), N * (d + 2));
    for (x, yv) in xs.iter().zip(&ys) {
        let u: Vec<f64> = if function == "ishigami" {
            x.iter().map(|t| (t + PI) / (2.0 * PI)).collect()
        } else {
            x.clone()
        };
        assert!((f(&u) - yv).abs() < 1e-9 * (1.0 + yv.abs()), "{x:?}: {yv}");
    }
    let on_theirs = ours(&ys, d, 5);
    let their = &v["their"];
    let (s1, st) = (vec_of(their, "S1"), vec_of(their, "ST"));
    let (s1c, stc) = (vec_of(their, "S1_conf"), vec_of(their, "ST_conf"));
    for i in 0..d {
        assert!((on_theirs.first_order[i] - s1[i]).abs() < 1e-10);
        assert!((on_theirs.total[i] - st[i]).abs() < 1e-10);
    }

    // 3. Independent samples of the same size (ours and SALib's, different scrambles) give
    //    estimates that agree within four combined standard errors (from the two bootstrap
    //    intervals: half-width / 1.96) plus 0.005 for the estimators' bias.
    for i in 0..d {
        let tol = |a: f64, b: f64| 4.0 * (a * a + b * b).sqrt() / 1.96 + 0.005;
        let t1 = tol(mine.first_order_ci[i], s1c[i]);
        assert!(
            (mine.first_order[i] - s1[i]).abs() < t1,
            "{function} S1[{i}]: ours {} SALib {} (tol {t1})",
            mine.first_order[i],
            s1[i]
        );
        let tt = tol(mine.total_ci[i], stc[i]);
        assert!(
            (mine.total[i] - st[i]).abs() < tt,
            "{function} ST[{i}]: ours {} SALib {} (tol {tt})",
            mine.total[i],
            st[i]
        );
    }
}

#[test]
fn ishigami_indices_match_salib() {
    cross_check("ishigami");
}

#[test]
fn g_function_indices_match_salib() {
    cross_check("gfunc");
}
