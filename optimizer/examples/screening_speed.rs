//! Throughput of a Latin-hypercube screening sweep with a cheap test problem, so the time is
//! the optimiser's own (design points, bookkeeping), not the model's:
//!
//! `cargo run --release -p optimizer --example screening_speed -- --points 1000000 --batch 40 --steps 2000`
//!
//! Prints evaluations per second over `--steps` batches taken from the start of the design.

use clap::Parser;
use optimizer::problems::{Zdt, ZdtKind};
use optimizer::{Algorithm, InitialDesign, Run, RunConfig, ScreeningConfig};
use std::time::Instant;

#[derive(Parser)]
struct Args {
    /// Points of the design (the screening budget).
    #[arg(long, default_value_t = 1_000_000)]
    points: usize,
    /// Points a batch.
    #[arg(long, default_value_t = 40)]
    batch: usize,
    /// Batches to time.
    #[arg(long, default_value_t = 2000)]
    steps: usize,
    /// Variables of the test problem (ZDT1).
    #[arg(long, default_value_t = 6)]
    variables: usize,
}

fn main() {
    let a = Args::parse();
    let problem = Zdt {
        kind: ZdtKind::Zdt1,
        n: a.variables,
    };
    let config = RunConfig::new(
        Algorithm::Screening(ScreeningConfig {
            design: InitialDesign::LatinHypercube,
            points: a.points,
            batch_size: a.batch,
        }),
        1,
        a.points as u64,
    );
    let mut run = Run::new(config, &problem).expect("valid settings");
    let t0 = Instant::now();
    for _ in 0..a.steps {
        if run.finished().is_some() {
            break;
        }
        run.step(&problem);
    }
    let s = t0.elapsed().as_secs_f64();
    println!(
        "{} points, batches of {}: {} evaluations in {:.2} s, {:.0} evaluations/s",
        a.points,
        a.batch,
        run.evaluations(),
        s,
        run.evaluations() as f64 / s
    );
}
