//! Sobol indices of a test function with analytic indices, as JSON on stdout:
//!
//! `cargo run --release -p optimizer --example sensitivity -- --function ishigami --samples 4096 --seed 1`
//!
//! prints `{"function": ..., "samples": n, "first_order": [...], "first_order_ci": [...],
//! "total": [...], "total_ci": [...], "analytic_first_order": [...], "analytic_total": [...]}`.
//! `--points FILE` also writes the evaluated points and outputs as CSV (`x1..xd,y`, rows in
//! the order of `optimizer::sensitivity::saltelli_points`), which another library's
//! estimator can read.

use clap::{Parser, ValueEnum};
use optimizer::sensitivity::{functions, saltelli_points, sobol_indices, BaseSampler, Bootstrap};
use rand::SeedableRng;
use rand_chacha::ChaCha8Rng;

#[derive(Clone, Copy, ValueEnum)]
enum Function {
    /// Ishigami with a = 7, b = 0.1 (3 inputs).
    Ishigami,
    /// Sobol G function with a = (0, 1, 4.5, 9, 99, 99, 99, 99) (8 inputs).
    Gfunc,
}

#[derive(Clone, Copy, ValueEnum)]
enum Sampler {
    Sobol,
    Random,
}

#[derive(Parser)]
struct Args {
    /// Test function.
    #[arg(long, value_enum)]
    function: Function,
    /// Base samples n (the function is evaluated n (d + 2) times).
    #[arg(long, default_value_t = 4096)]
    samples: usize,
    /// Seed of the base samples and the bootstrap.
    #[arg(long, default_value_t = 1)]
    seed: u64,
    /// How the base samples are drawn.
    #[arg(long, value_enum, default_value_t = Sampler::Sobol)]
    sampler: Sampler,
    /// Bootstrap resamples for the confidence intervals.
    #[arg(long, default_value_t = 200)]
    resamples: usize,
    /// Also write the points and outputs to this CSV file.
    #[arg(long)]
    points: Option<std::path::PathBuf>,
}

/// A test function on the unit cube.
type Func = Box<dyn Fn(&[f64]) -> f64>;

const G_A: [f64; 8] = [0.0, 1.0, 4.5, 9.0, 99.0, 99.0, 99.0, 99.0];

fn main() {
    let args = Args::parse();
    let (name, d, f, (s, t)): (&str, usize, Func, _) = match args.function {
        Function::Ishigami => (
            "ishigami",
            3,
            Box::new(|u| functions::ishigami(u, 7.0, 0.1)),
            functions::ishigami_indices(7.0, 0.1),
        ),
        Function::Gfunc => (
            "gfunc",
            8,
            Box::new(|u| functions::g_function(u, &G_A)),
            functions::g_function_indices(&G_A),
        ),
    };
    let sampler = match args.sampler {
        Sampler::Sobol => BaseSampler::Sobol,
        Sampler::Random => BaseSampler::Random,
    };
    let mut rng = ChaCha8Rng::seed_from_u64(args.seed);
    let pts = match saltelli_points(args.samples, d, sampler, &mut rng) {
        Ok(p) => p,
        Err(e) => {
            eprintln!("error: {e}");
            std::process::exit(2);
        }
    };
    let y: Vec<f64> = pts.iter().map(|p| f(p)).collect();
    let boot = Bootstrap {
        resamples: args.resamples,
        ..Bootstrap::default()
    };
    let idx = match sobol_indices(&y, d, boot, &mut rng) {
        Ok(i) => i,
        Err(e) => {
            eprintln!("error: {e}");
            std::process::exit(1);
        }
    };
    if let Some(path) = &args.points {
        let head: Vec<String> = (1..=d).map(|i| format!("x{i}")).collect();
        let mut text = format!("{},y\n", head.join(","));
        for (p, v) in pts.iter().zip(&y) {
            let row: Vec<String> = p.iter().map(|x| format!("{x:?}")).collect();
            text.push_str(&format!("{},{v:?}\n", row.join(",")));
        }
        if let Err(e) = std::fs::write(path, text) {
            eprintln!("error: cannot write {}: {e}", path.display());
            std::process::exit(1);
        }
    }
    let out = serde_json::json!({
        "function": name,
        "samples": args.samples,
        "seed": args.seed,
        "first_order": idx.first_order,
        "first_order_ci": idx.first_order_ci,
        "total": idx.total,
        "total_ci": idx.total_ci,
        "analytic_first_order": s,
        "analytic_total": t,
    });
    println!("{out}");
}
