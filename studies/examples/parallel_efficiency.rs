//! Parallel efficiency of `stria run`: the quick demo at 40,000 evaluations on one thread and
//! on two, each into a fresh run directory, alternating, best of `--repeats`:
//!
//! `cargo run --release -p studies --example parallel_efficiency -- --evals 40000 --repeats 3`
//!
//! Efficiency on two threads = t(1) / (2 t(2)). The results of the two runs are also compared
//! (same seed, same result, whatever the thread count).

use std::path::Path;
use std::time::Instant;

use studies::run::{run, RunOptions};

fn main() {
    let mut evals: u64 = 40_000;
    let mut repeats = 3;
    let args: Vec<String> = std::env::args().collect();
    for w in args.windows(2) {
        match w[0].as_str() {
            "--evals" => evals = w[1].parse().expect("--evals N"),
            "--repeats" => repeats = w[1].parse().expect("--repeats N"),
            _ => {}
        }
    }
    let study = Path::new(env!("CARGO_MANIFEST_DIR")).join("demo/quick.toml");
    let dir = tempfile_dir();
    let time = |threads: usize, k: usize| -> f64 {
        let out = dir.join(format!("t{threads}-{k}"));
        let t0 = Instant::now();
        run(&RunOptions {
            study: study.clone(),
            out: Some(out),
            threads: Some(threads),
            max_evals: Some(evals),
            fresh: true,
            ..RunOptions::default()
        })
        .expect("the demo runs");
        t0.elapsed().as_secs_f64()
    };
    let (mut t1, mut t2) = (f64::INFINITY, f64::INFINITY);
    for k in 0..repeats {
        t1 = t1.min(time(1, k));
        t2 = t2.min(time(2, k));
    }
    let same = std::fs::read(dir.join("t1-0/evaluations.csv")).ok()
        == std::fs::read(dir.join("t2-0/evaluations.csv")).ok();
    println!(
        "quick demo, {evals} evaluations, best of {repeats}: 1 thread {t1:.2} s, 2 threads {t2:.2} s, speed-up {:.2}, efficiency {:.0} %; same evaluations.csv: {same}",
        t1 / t2,
        100.0 * t1 / (2.0 * t2)
    );
    let _ = std::fs::remove_dir_all(&dir);
}

fn tempfile_dir() -> std::path::PathBuf {
    let d = std::env::temp_dir().join(format!("stria-efficiency-{}", std::process::id()));
    std::fs::create_dir_all(&d).expect("a temporary directory");
    d
}
