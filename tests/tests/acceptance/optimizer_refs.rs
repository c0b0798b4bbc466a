//! Acceptance checks of the optimizer crate against published test problems with analytic
//! fronts, exact hypervolume arithmetic and the moocore reference library.
//! Sources (see docs/references.md#optimisation):
//! - ZDT1-3: Zitzler, Deb and Thiele, Evol. Comput. 8 (2000) 173;
//! - DTLZ2: Deb, Thiele, Laumanns and Zitzler (2002);
//! - NSGA-II and the TNK problem: Deb, Pratap, Agarwal and Meyarivan, IEEE TEC 6 (2002) 182;
//! - hypervolume of the analytic fronts: the table in docs/references.md#optimisation;
//! - moocore (PyPI) `moocore.hypervolume(points, ref=...)`.

use optimizer::indicators::{hypervolume, igd, igd_plus};
use optimizer::problems::{himmelblau, rosenbrock, Dtlz2, Tnk, Zdt, ZdtKind};
use optimizer::{
    minimize, Algorithm, InitialDesign, Nsga2Config, Outcome, Problem, Run, RunConfig,
    Scalarisation, ScalarisedConfig, ScreeningConfig, Solver, StopReason, Variable,
};
use std::sync::atomic::AtomicBool;

fn nsga2_run(problem: &dyn Problem, seed: u64, evals: u64) -> Run {
    let config = RunConfig::new(Algorithm::Nsga2(Nsga2Config::default()), seed, evals);
    finish(config, problem)
}

fn finish(config: RunConfig, problem: &dyn Problem) -> Run {
    let mut run = Run::new(config, problem).expect("valid configuration");
    let stop = run.run(problem, |_, _| {}, &AtomicBool::new(false), None);
    assert_eq!(stop, StopReason::EvaluationBudget);
    run
}

/// (IGD, hypervolume ratio) of the final population after `evals` evaluations.
fn quality(
    problem: &dyn Problem,
    reference: &[Vec<f64>],
    hv_exact: f64,
    seed: u64,
    evals: u64,
) -> (f64, f64) {
    let run = nsga2_run(problem, seed, evals);
    let front = run.population_front();
    let r = vec![1.1; problem.num_objectives()];
    let q = (igd(&front, reference), hypervolume(&front, &r) / hv_exact);
    println!("seed {seed}: IGD {:.5}, HV ratio {:.5}", q.0, q.1);
    q
}

// Budget for the ZDT problems: 20 000 evaluations, population 100 (200 generations), the
// budget of the comparisons in Deb et al. (2002) is 25 000.
const ZDT_EVALS: u64 = 20_000;

#[test]
fn nsga2_zdt1_reaches_the_analytic_front() {
    // Source: ZDT1 front f2 = 1 - sqrt(f1) (Zitzler, Deb and Thiele 2000); HV at ref
    // (1.1, 1.1) = 0.876667 (docs/references.md#optimisation).
    let p = Zdt {
        kind: ZdtKind::Zdt1,
        n: 30,
    };
    let reference = p.reference_front(1001);
    for seed in [1, 2] {
        let (d, hv) = quality(&p, &reference, 0.876667, seed, ZDT_EVALS);
        assert!(d < 0.012, "IGD {d}");
        assert!(hv > 0.98, "HV ratio {hv}");
    }
    // Run lean (no archive, no hypervolume history, as other libraries run NSGA-II): the
    // same tolerances hold, and the final front is bit for bit that of the full run.
    let config = RunConfig::new(Algorithm::Nsga2(Nsga2Config::default()), 1, ZDT_EVALS);
    let lean = finish(config.lean(), &p);
    assert!(lean.archive().is_empty() && lean.hv_history().is_empty());
    let front = lean.population_front();
    let d = igd(&front, &reference);
    let hv = hypervolume(&front, &[1.1, 1.1]) / 0.876667;
    println!("lean seed 1: IGD {d:.5}, HV ratio {hv:.5}");
    assert!(d < 0.012, "IGD {d}");
    assert!(hv > 0.98, "HV ratio {hv}");
    assert_eq!(front, nsga2_run(&p, 1, ZDT_EVALS).population_front());
}

#[test]
fn nsga2_zdt2_reaches_the_analytic_front() {
    // Source: ZDT2 front f2 = 1 - f1^2; HV at (1.1, 1.1) = 0.543333 (docs/references.md#optimisation).
    let p = Zdt {
        kind: ZdtKind::Zdt2,
        n: 30,
    };
    for seed in [1, 2] {
        let (d, hv) = quality(&p, &p.reference_front(1001), 0.543333, seed, ZDT_EVALS);
        assert!(d < 0.012, "IGD {d}");
        assert!(hv > 0.97, "HV ratio {hv}");
    }
}

#[test]
fn nsga2_zdt3_reaches_the_analytic_front() {
    // Source: ZDT3 front, non-dominated pieces of f2 = 1 - sqrt(f1) - f1 sin(10 pi f1);
    // HV at (1.1, 1.1) = 1.331761 (docs/references.md#optimisation).
    let p = Zdt {
        kind: ZdtKind::Zdt3,
        n: 30,
    };
    for seed in [1, 2] {
        let (d, hv) = quality(&p, &p.reference_front(20_001), 1.331761, seed, ZDT_EVALS);
        assert!(d < 0.012, "IGD {d}");
        assert!(hv > 0.985, "HV ratio {hv}");
    }
}

#[test]
fn nsga2_dtlz2_reaches_the_unit_sphere() {
    // Source: DTLZ2 front, the unit sphere octant (Deb et al. 2002); HV at (1.1, 1.1, 1.1)
    // = 1.331 - pi/6 = 0.807401 (docs/references.md#optimisation). 100 points cannot cover the octant, so the
    // ratio is judged loosely; every point must be near the sphere.
    let p = Dtlz2 { m: 3, n: 12 };
    for seed in [1, 2] {
        let (d, hv) = quality(&p, &p.reference_front(990), 0.807401, seed, 20_000);
        // A perfectly spread 100-point set is itself about 0.05 from 990 lattice points.
        assert!(d < 0.09, "IGD {d}");
        assert!(hv > 0.85, "HV ratio {hv}");
    }
    let run = nsga2_run(&p, 3, 20_000);
    // The step's hypervolume (incremental sorted archive) equals a fresh computation.
    let fresh = hypervolume(&run.archive().objectives(), run.hv_reference().unwrap());
    let last = *run.hv_history().last().unwrap();
    assert!((fresh - last).abs() <= 1e-12 * fresh, "{fresh} vs {last}");
    for f in run.population_front() {
        let r = f.iter().map(|v| v * v).sum::<f64>().sqrt();
        assert!((r - 1.0).abs() < 0.05, "|f| = {r}");
    }
}

/// A small seeded generator for test data (SplitMix64, Steele, Lea and Flood, OOPSLA 2014).
struct SplitMix(u64);
impl SplitMix {
    fn next_f64(&mut self) -> f64 {
        self.0 = self.0.wrapping_add(0x9e37_79b9_7f4a_7c15);
        let mut z = self.0;
        z = (z ^ (z >> 30)).wrapping_mul(0xbf58_476d_1ce4_e5b9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94d0_49bb_1331_11eb);
        z ^= z >> 31;
        (z >> 11) as f64 / (1u64 << 53) as f64
    }
    fn points(&mut self, n: usize, m: usize) -> Vec<Vec<f64>> {
        (0..n)
            .map(|_| (0..m).map(|_| self.next_f64()).collect())
            .collect()
    }
}

/// Hypervolume by inclusion-exclusion over all subsets: the measure of a union of boxes
/// anchored at the reference point (exact arithmetic of the definition; exponential cost).
fn hv_inclusion_exclusion(points: &[Vec<f64>], r: &[f64]) -> f64 {
    let n = points.len();
    let mut total = 0.0;
    for mask in 1u32..(1 << n) {
        let mut corner = vec![f64::NEG_INFINITY; r.len()];
        for (i, p) in points.iter().enumerate() {
            if mask & (1 << i) != 0 {
                for (c, v) in corner.iter_mut().zip(p) {
                    *c = c.max(*v);
                }
            }
        }
        let vol: f64 = corner
            .iter()
            .zip(r)
            .map(|(c, ri)| (ri - c).max(0.0))
            .product();
        if mask.count_ones() % 2 == 1 {
            total += vol;
        } else {
            total -= vol;
        }
    }
    total
}

#[test]
fn hypervolume_equals_inclusion_exclusion_on_small_sets() {
    // Source: the definition of the hypervolume as the measure of a union of boxes, computed
    // exactly by inclusion-exclusion; random sets include dominated points and points
    // outside the reference box.
    let mut g = SplitMix(11);
    for m in 2..=5 {
        for n in 1..=10 {
            let pts = g.points(n, m);
            let r = vec![0.95; m];
            let fast = hypervolume(&pts, &r);
            let exact = hv_inclusion_exclusion(&pts, &r);
            assert!(
                (fast - exact).abs() <= 1e-12 * exact.max(1e-3),
                "m {m} n {n}: {fast} vs {exact}"
            );
        }
    }
}

#[test]
fn hypervolume_of_sampled_fronts_approaches_the_table() {
    // Source: docs/references.md#optimisation table (ZDT1 0.876667, DTLZ2 0.807401 at ref 1.1); a dense sample
    // of the front approaches the exact value from below.
    let z = Zdt {
        kind: ZdtKind::Zdt1,
        n: 30,
    }
    .reference_front(20_001);
    let hv = hypervolume(&z, &[1.1, 1.1]);
    assert!(hv < 0.876667 + 1e-6 && hv > 0.876667 - 1e-4, "{hv}");
    let d = Dtlz2 { m: 3, n: 12 }.reference_front(20_000);
    let hv = hypervolume(&d, &[1.1, 1.1, 1.1]);
    assert!(hv < 0.807401 + 1e-6 && hv > 0.807401 - 0.01, "{hv}");
}

/// moocore's hypervolume of `points`, or None when the developer opted out of the python
/// cross-checks (`python_refs::SKIP_VAR`).
fn moocore_hypervolume(points: &[Vec<f64>], r: &[f64]) -> Option<f64> {
    let script = "import sys, json, moocore\n\
                  d = json.load(sys.stdin)\n\
                  print(repr(float(moocore.hypervolume(d['p'], ref=d['r']))))\n";
    let input = serde_json::json!({ "p": points, "r": r }).to_string();
    let out = crate::python_refs::run("moocore", script, &input)?;
    Some(out.trim().parse().expect("moocore prints a number"))
}

#[test]
fn hypervolume_matches_moocore() {
    // Source: moocore (PyPI), moocore.hypervolume(points, ref=...), on random 2-, 3- and
    // 4-objective sets (with dominated points mixed in).
    let mut g = SplitMix(5);
    let cases = [(2, 500), (2, 50), (3, 400), (3, 60), (4, 40)];
    for (m, n) in cases {
        let pts = g.points(n, m);
        let r = vec![1.0; m];
        let ours = hypervolume(&pts, &r);
        let Some(theirs) = moocore_hypervolume(&pts, &r) else {
            return;
        };
        assert!(
            (ours - theirs).abs() <= 1e-10 * theirs,
            "m {m} n {n}: ours {ours}, moocore {theirs}"
        );
    }
}

#[test]
fn igd_plus_of_a_shifted_front() {
    // Source: definition of IGD+ (Ishibuchi et al. 2015): a front shifted by +d in every
    // objective has IGD+ = d sqrt(m) against the original.
    let z = Zdt {
        kind: ZdtKind::Zdt1,
        n: 30,
    }
    .reference_front(101);
    let shifted: Vec<Vec<f64>> = z.iter().map(|p| vec![p[0] + 0.01, p[1] + 0.01]).collect();
    let v = igd_plus(&shifted, &z);
    assert!((v - 0.01 * 2f64.sqrt()).abs() < 1e-12, "{v}");
}

#[test]
fn nsga2_tnk_front_lies_on_the_constraint_boundary() {
    // Source: TNK (Tanaka et al. 1995) as solved by constrained NSGA-II in Deb et al. (2002),
    // section VI: the front lies on the boundary of g1 (r^2 = 1 + 0.1 cos(16 theta)) where
    // g2 holds. Every design kept must be feasible, the front near the analytic curve.
    let p = Tnk;
    let run = nsga2_run(&p, 4, 10_000);
    assert!(run
        .archive()
        .members()
        .iter()
        .all(|e| e.constraints.iter().all(|g| *g <= 0.0)));
    let front = run.population_front();
    assert!(front.len() >= 60, "{} points", front.len());
    let d = igd(&front, &Tnk::reference_front(5001));
    println!("TNK: IGD {d:.5}, {} points", front.len());
    assert!(d < 0.01, "IGD {d}");
    // Every front point lies near the analytic curve (on the boundary of g1).
    let reference = Tnk::reference_front(5001);
    for f in &front {
        let gap = reference
            .iter()
            .map(|z| ((z[0] - f[0]).powi(2) + (z[1] - f[1]).powi(2)).sqrt())
            .fold(f64::INFINITY, f64::min);
        assert!(gap < 0.02, "{f:?} is {gap} from the front");
    }
}

/// ZDT1 that fails (Err) in one band of x1 and returns NaN in another.
struct Flaky;
impl Problem for Flaky {
    fn variables(&self) -> Vec<Variable> {
        Zdt {
            kind: ZdtKind::Zdt1,
            n: 10,
        }
        .variables()
    }
    fn num_objectives(&self) -> usize {
        2
    }
    fn num_constraints(&self) -> usize {
        0
    }
    fn evaluate(&self, x: &[f64]) -> Result<Outcome, String> {
        if (0.30..0.35).contains(&x[0]) {
            return Err("outside the model's validity".into());
        }
        let mut o = Zdt {
            kind: ZdtKind::Zdt1,
            n: 10,
        }
        .evaluate(x)?;
        if (0.60..0.62).contains(&x[0]) {
            o.objectives[1] = f64::NAN;
        }
        Ok(o)
    }
}

#[test]
fn failed_evaluations_are_recorded_and_never_reach_the_front() {
    // Source: the `Problem` contract (DEVELOPERS.md, "The optimizer"): a failed design is infeasible with a
    // reason, never NaN in a front, never a crash; the rest of the ZDT1 front is still found.
    let config = RunConfig::new(Algorithm::Nsga2(Nsga2Config::default()), 9, 6000);
    let mut run = Run::new(config, &Flaky).unwrap();
    let mut reasons = Vec::new();
    run.run(
        &Flaky,
        |rep, _| {
            for e in &rep.new {
                if let Some(r) = &e.failure {
                    reasons.push(r.clone());
                }
            }
        },
        &AtomicBool::new(false),
        None,
    );
    assert!(reasons.iter().any(|r| r.contains("validity")));
    assert!(reasons.iter().any(|r| r.contains("NaN")));
    for e in run.archive().members() {
        assert!(e.objectives.iter().all(|v| v.is_finite()));
        assert!(!(0.30..0.35).contains(&e.x[0]) && !(0.60..0.62).contains(&e.x[0]));
    }
    assert!(run.archive().len() > 50);
    // The state with failures still goes through JSON.
    let back = Run::from_json(&run.to_json()).unwrap();
    assert_eq!(back.to_json(), run.to_json());
}

fn steps(run: &mut Run, p: &dyn Problem, k: usize) {
    for _ in 0..k {
        run.step(p);
    }
}

/// DTLZ2 that takes at least 100 microseconds an evaluation, so that batches are evaluated on
/// the thread pool (cheaper batches run on the calling thread).
struct SlowDtlz2;
impl Problem for SlowDtlz2 {
    fn variables(&self) -> Vec<Variable> {
        Dtlz2 { m: 3, n: 12 }.variables()
    }
    fn num_objectives(&self) -> usize {
        3
    }
    fn num_constraints(&self) -> usize {
        0
    }
    fn evaluate(&self, x: &[f64]) -> Result<Outcome, String> {
        std::thread::sleep(std::time::Duration::from_micros(100));
        Dtlz2 { m: 3, n: 12 }.evaluate(x)
    }
}

#[test]
fn same_front_for_one_and_two_threads() {
    // Source: determinism requirement (every random number drawn before the parallel
    // evaluation); compared bit for bit through the serialised state.
    let go = |threads: usize| {
        let pool = rayon::ThreadPoolBuilder::new()
            .num_threads(threads)
            .build()
            .unwrap();
        pool.install(|| {
            let config = RunConfig::new(Algorithm::Nsga2(Nsga2Config::default()), 21, 1500);
            let mut run = Run::new(config, &SlowDtlz2).unwrap();
            steps(&mut run, &SlowDtlz2, 15);
            assert_eq!(run.evaluations(), 1500);
            run.to_json()
        })
    };
    assert_eq!(go(1), go(2));
}

fn resume_equals_uninterrupted(config: RunConfig, p: &dyn Problem, before: usize, after: usize) {
    let mut straight = Run::new(config.clone(), p).unwrap();
    steps(&mut straight, p, before + after);
    let mut first = Run::new(config, p).unwrap();
    steps(&mut first, p, before);
    let text = serde_json::to_string(&first).unwrap();
    let mut resumed: Run = serde_json::from_str(&text).unwrap();
    steps(&mut resumed, p, after);
    assert!(resumed.evaluations() > 0);
    assert_eq!(resumed.to_json(), straight.to_json());
    assert!(resumed == straight);
}

#[test]
fn resume_from_checkpoint_equals_uninterrupted_run() {
    // Source: checkpoint rule (DEVELOPERS.md, "The optimizer"); NSGA-II, scalarised and screening.
    let z = Zdt {
        kind: ZdtKind::Zdt1,
        n: 30,
    };
    let mut c = RunConfig::new(Algorithm::Nsga2(Nsga2Config::default()), 3, 100_000);
    c.archive_epsilon = Some(vec![0.01, 0.01]);
    resume_equals_uninterrupted(c, &z, 7, 9);
    // Without a grid the archive keeps a sort cache that is not part of the state.
    let d = Dtlz2 { m: 3, n: 12 };
    let c = RunConfig::new(Algorithm::Nsga2(Nsga2Config::default()), 6, 100_000);
    resume_equals_uninterrupted(c, &d, 12, 8);
    let sc = ScalarisedConfig {
        scalarisation: Scalarisation::Chebyshev,
        solver: Solver::NelderMead,
        subproblems: 6,
        evaluations_per_subproblem: 150,
        initial_samples: 20,
    };
    let z5 = Zdt {
        kind: ZdtKind::Zdt2,
        n: 5,
    };
    resume_equals_uninterrupted(
        RunConfig::new(Algorithm::Scalarised(sc), 4, 10_000),
        &z5,
        3,
        4,
    );
    let screen = ScreeningConfig {
        design: InitialDesign::LatinHypercube,
        points: 100,
        batch_size: 30,
    };
    resume_equals_uninterrupted(
        RunConfig::new(Algorithm::Screening(screen), 5, 10_000),
        &z5,
        2,
        2,
    );
}

#[test]
fn nelder_mead_and_particle_swarm_find_rosenbrock_minimum() {
    // Source: Rosenbrock (1960), minimum 0 at (1, 1).
    let b = [(-2.0, 2.0), (-1.0, 3.0)];
    let nm = minimize(rosenbrock, &b, Solver::NelderMead, 3000, 1).unwrap();
    println!(
        "Rosenbrock NM: {:?} f {:e} in {}",
        nm.x, nm.f, nm.evaluations
    );
    assert!(nm.evaluations <= 3000);
    assert!(
        (nm.x[0] - 1.0).abs() < 1e-4 && (nm.x[1] - 1.0).abs() < 1e-4,
        "{:?}",
        nm.x
    );
    let ps = minimize(rosenbrock, &b, Solver::ParticleSwarm, 8000, 2).unwrap();
    println!("Rosenbrock PSO: {:?} f {:e}", ps.x, ps.f);
    assert!(
        (ps.x[0] - 1.0).abs() < 0.05 && (ps.x[1] - 1.0).abs() < 0.1,
        "{:?}",
        ps.x
    );
}

#[test]
fn all_three_solvers_find_a_himmelblau_minimum() {
    // Source: Himmelblau (1972): four minima of value 0 at (3, 2), (-2.805118, 3.131312),
    // (-3.779310, -3.283186), (3.584428, -1.848126).
    let minima = [
        [3.0, 2.0],
        [-2.805118, 3.131312],
        [-3.779310, -3.283186],
        [3.584428, -1.848126],
    ];
    let b = [(-5.0, 5.0), (-5.0, 5.0)];
    for (solver, tol) in [
        (Solver::NelderMead, 1e-4),
        (Solver::ParticleSwarm, 1e-2),
        (Solver::SimulatedAnnealing, 0.05),
    ] {
        let r = minimize(himmelblau, &b, solver, 4000, 7).unwrap();
        println!("Himmelblau {solver:?}: {:?} f {:e}", r.x, r.f);
        let near = minima
            .iter()
            .map(|m| ((r.x[0] - m[0]).powi(2) + (r.x[1] - m[1]).powi(2)).sqrt())
            .fold(f64::INFINITY, f64::min);
        assert!(
            near < tol,
            "{solver:?}: {:?} is {near} from the nearest minimum",
            r.x
        );
    }
}

#[test]
fn minimize_survives_failed_evaluations() {
    // Source: argmin's Nelder-Mead has no NaN guard (argmin docs); failures must become a
    // penalty. Sphere (minimum 0 at the origin) returning NaN on half the plane x0 > 0.5.
    let f = |x: &[f64]| {
        if x[0] > 0.5 {
            f64::NAN
        } else {
            x.iter().map(|v| v * v).sum()
        }
    };
    let r = minimize(f, &[(-1.0, 2.0), (-1.0, 1.0)], Solver::NelderMead, 2000, 3).unwrap();
    assert!(r.f < 1e-8 && r.f.is_finite(), "{:?} {}", r.x, r.f);
}

#[test]
fn scalarised_sweeps_trace_zdt_fronts() {
    // Source: analytic ZDT fronts (Zitzler, Deb and Thiele 2000), 5 variables. Chebyshev
    // reaches the non-convex ZDT2 front; epsilon constraint and weighted sum the convex ZDT1
    // front; each with a different argmin solver.
    let cases = [
        (ZdtKind::Zdt2, Scalarisation::Chebyshev, Solver::NelderMead),
        (
            ZdtKind::Zdt1,
            Scalarisation::EpsilonConstraint { objective: 1 },
            Solver::ParticleSwarm,
        ),
        (
            ZdtKind::Zdt1,
            Scalarisation::WeightedSum,
            Solver::SimulatedAnnealing,
        ),
    ];
    for (kind, s, solver) in cases {
        let p = Zdt { kind, n: 5 };
        let sc = ScalarisedConfig {
            scalarisation: s,
            solver,
            subproblems: 12,
            evaluations_per_subproblem: 600,
            initial_samples: 40,
        };
        let mut run = Run::new(RunConfig::new(Algorithm::Scalarised(sc), 8, 100_000), &p).unwrap();
        let stop = run.run(&p, |_, _| {}, &AtomicBool::new(false), None);
        assert_eq!(stop, StopReason::Completed);
        let d = igd(&run.archive().objectives(), &p.reference_front(1001));
        println!(
            "{kind:?} {s:?} {solver:?}: IGD {d:.4}, archive {}",
            run.archive().len()
        );
        assert!(d < 0.02, "{kind:?} {s:?} {solver:?}: IGD {d}");
    }
}

#[test]
fn screening_evaluates_the_whole_design_in_batches() {
    // Source: definition of the Sobol (0, m, s)-net: 64 points stratify each variable.
    let p = Zdt {
        kind: ZdtKind::Zdt1,
        n: 4,
    };
    let sc = ScreeningConfig {
        design: InitialDesign::Sobol,
        points: 64,
        batch_size: 20,
    };
    let mut run = Run::new(RunConfig::new(Algorithm::Screening(sc), 1, 1000), &p).unwrap();
    let mut xs = Vec::new();
    let mut steps_done = 0;
    let stop = run.run(
        &p,
        |rep, _| {
            steps_done += 1;
            xs.extend(rep.new.iter().map(|e| e.x[2]));
        },
        &AtomicBool::new(false),
        None,
    );
    assert_eq!(stop, StopReason::Completed);
    assert_eq!(steps_done, 4);
    assert_eq!(run.evaluations(), 64);
    let mut cells: Vec<usize> = xs.iter().map(|v| (v * 64.0) as usize).collect();
    cells.sort_unstable();
    assert_eq!(cells, (0..64).collect::<Vec<_>>());
}

#[test]
fn stop_flag_deadline_and_stall_end_a_run() {
    // Source: termination rules (`optimizer::run`, stop flag, deadline, stall).
    let p = Zdt {
        kind: ZdtKind::Zdt1,
        n: 30,
    };
    let mk = || {
        Run::new(
            RunConfig::new(Algorithm::Nsga2(Nsga2Config::default()), 1, 1_000_000),
            &p,
        )
        .unwrap()
    };
    let mut run = mk();
    assert_eq!(
        run.run(&p, |_, _| {}, &AtomicBool::new(true), None),
        StopReason::StopRequested
    );
    assert_eq!(run.evaluations(), 0);
    let mut run = mk();
    let deadline = std::time::Instant::now() + std::time::Duration::from_millis(200);
    assert_eq!(
        run.run(&p, |_, _| {}, &AtomicBool::new(false), Some(deadline)),
        StopReason::Deadline
    );
    let mut c = RunConfig::new(Algorithm::Nsga2(Nsga2Config::default()), 1, 1_000_000);
    c.stall_generations = Some(5);
    c.stall_tolerance = 1e-3;
    c.hv_reference = Some(vec![1.1, 1.1]);
    let mut run = Run::new(
        c,
        &Zdt {
            kind: ZdtKind::Zdt1,
            n: 3,
        },
    )
    .unwrap();
    let stop = run.run(
        &Zdt {
            kind: ZdtKind::Zdt1,
            n: 3,
        },
        |_, _| {},
        &AtomicBool::new(false),
        None,
    );
    assert_eq!(stop, StopReason::Stalled);
    assert!(run.evaluations() < 1_000_000);
    let h = run.hv_history();
    assert!(h[h.len() - 1] <= h[h.len() - 6] * (1.0 + 1e-3));
}

#[test]
fn invalid_settings_are_refused() {
    let p = Zdt {
        kind: ZdtKind::Zdt1,
        n: 3,
    };
    let bad = Nsga2Config {
        population_size: 2,
        ..Nsga2Config::default()
    };
    assert!(Run::new(RunConfig::new(Algorithm::Nsga2(bad), 1, 100), &p).is_err());
    let mut c = RunConfig::new(Algorithm::Nsga2(Nsga2Config::default()), 1, 100);
    c.archive_epsilon = Some(vec![0.1]);
    assert!(Run::new(c, &p).is_err());
    let sc = ScreeningConfig {
        design: InitialDesign::Sobol,
        points: 70_000,
        batch_size: 10,
    };
    assert!(Run::new(RunConfig::new(Algorithm::Screening(sc), 1, 100), &p).is_err());
    // A state of another version, or not a state at all, is refused with a message.
    let run = Run::new(
        RunConfig::new(Algorithm::Nsga2(Nsga2Config::default()), 1, 100),
        &p,
    )
    .unwrap();
    let current = format!("\"version\":{}", optimizer::run::STATE_VERSION);
    assert!(
        run.to_json().contains(&current),
        "the state names its version"
    );
    let other = run.to_json().replacen(&current, "\"version\":99", 1);
    assert!(Run::from_json(&other)
        .unwrap_err()
        .to_string()
        .contains("version 99"));
    assert!(Run::from_json("{}").is_err());
}

#[test]
fn nsga2_dtlz2_with_four_objectives_converges() {
    // Source: DTLZ2 front with 4 objectives is the unit sphere in the positive orthant (Deb
    // et al. 2002); the final front near it, and the hypervolume history finite and positive.
    let p = Dtlz2 { m: 4, n: 13 };
    let run = nsga2_run(&p, 2, 10_000);
    let radii: Vec<f64> = run
        .population_front()
        .iter()
        .map(|f| f.iter().map(|v| v * v).sum::<f64>().sqrt())
        .collect();
    let mean = radii.iter().sum::<f64>() / radii.len() as f64;
    let worst = radii.iter().fold(0.0f64, |a, r| a.max(*r));
    println!("DTLZ2 m=4: mean |f| {mean:.4}, worst {worst:.4}");
    // NSGA-II converges more slowly beyond three objectives (Deb and Jain, IEEE TEC 18
    // (2014) 577), hence a wider tolerance than for three; a random start has a mean radius
    // of about 1.75 (1 + g with g about 9/12).
    assert!(mean < 1.15 && worst < 1.5, "mean {mean}, worst {worst}");
    let h = run.hv_history();
    assert!(h.iter().all(|v| v.is_finite()) && *h.last().unwrap() > 0.0);
}
