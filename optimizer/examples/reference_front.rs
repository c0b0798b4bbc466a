//! Write the front NSGA-II finds on a published test problem, for comparison with another
//! library at the same budget:
//!
//! `cargo run --release -p optimizer --example reference_front -- --problem zdt1 --evals 20000 --seed 7 --out front.csv`
//!
//! The CSV has a header `f1,f2` (or `f1,f2,f3`) and one non-dominated point a row. By default
//! the front is the non-dominated feasible members of the final population (what other
//! libraries report), and the run is lean as theirs: no archive, no hypervolume history
//! (`RunConfig::lean`; the population is bit for bit that of a full run). `--front archive`
//! keeps the archive and writes every non-dominated design seen instead.

use clap::{Parser, ValueEnum};
use optimizer::problems::{Dtlz2, Zdt, ZdtKind};
use optimizer::{Algorithm, Nsga2Config, Problem, Run, RunConfig};
use std::io::Write;
use std::sync::atomic::AtomicBool;
use std::time::Instant;

#[derive(Clone, Copy, ValueEnum)]
enum Which {
    Zdt1,
    Zdt2,
    Zdt3,
    Dtlz2,
}

#[derive(Clone, Copy, ValueEnum)]
enum FrontKind {
    Population,
    Archive,
}

#[derive(Parser)]
struct Args {
    /// Test problem.
    #[arg(long, value_enum)]
    problem: Which,
    /// Evaluation budget.
    #[arg(long, default_value_t = 20_000)]
    evals: u64,
    /// Seed.
    #[arg(long, default_value_t = 1)]
    seed: u64,
    /// Population size.
    #[arg(long, default_value_t = 100)]
    population: usize,
    /// Which front to write: the final population's (a lean run) or the archive's.
    #[arg(long, value_enum, default_value_t = FrontKind::Population)]
    front: FrontKind,
    /// Output CSV file.
    #[arg(long)]
    out: std::path::PathBuf,
}

fn solve(problem: &dyn Problem, args: &Args) -> Result<Vec<Vec<f64>>, String> {
    let nsga = Nsga2Config {
        population_size: args.population,
        ..Nsga2Config::default()
    };
    let config = RunConfig::new(Algorithm::Nsga2(nsga), args.seed, args.evals);
    let config = match args.front {
        FrontKind::Population => config.lean(),
        FrontKind::Archive => config,
    };
    let mut run = Run::new(config, problem).map_err(|e| e.to_string())?;
    run.run(problem, |_, _| {}, &AtomicBool::new(false), None);
    Ok(match args.front {
        FrontKind::Archive => run.archive().objectives(),
        FrontKind::Population => run.population_front(),
    })
}

fn main() {
    let args = Args::parse();
    let started = Instant::now();
    let problem: Box<dyn Problem> = match args.problem {
        Which::Zdt1 => Box::new(Zdt {
            kind: ZdtKind::Zdt1,
            n: 30,
        }),
        Which::Zdt2 => Box::new(Zdt {
            kind: ZdtKind::Zdt2,
            n: 30,
        }),
        Which::Zdt3 => Box::new(Zdt {
            kind: ZdtKind::Zdt3,
            n: 30,
        }),
        Which::Dtlz2 => Box::new(Dtlz2 { m: 3, n: 12 }),
    };
    let front = match solve(problem.as_ref(), &args) {
        Ok(f) => f,
        Err(e) => {
            eprintln!("error: {e}");
            std::process::exit(2);
        }
    };
    let m = problem.num_objectives();
    let mut text = (1..=m)
        .map(|i| format!("f{i}"))
        .collect::<Vec<_>>()
        .join(",");
    text.push('\n');
    for p in &front {
        let row: Vec<String> = p.iter().map(|v| format!("{v}")).collect();
        text.push_str(&row.join(","));
        text.push('\n');
    }
    // Write to a temporary file beside the target, then rename: never a half-written front.
    let tmp = args.out.with_extension("csv.tmp");
    let written = std::fs::File::create(&tmp).and_then(|mut f| {
        f.write_all(text.as_bytes())?;
        f.sync_all()
    });
    if let Err(e) = written.and_then(|_| std::fs::rename(&tmp, &args.out)) {
        eprintln!("error: cannot write {}: {e}", args.out.display());
        std::process::exit(1);
    }
    eprintln!(
        "{} points written to {} in {:.6} s",
        front.len(),
        args.out.display(),
        started.elapsed().as_secs_f64()
    );
}
