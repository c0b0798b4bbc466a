//! Evaluations per second of the demo design on one thread (a quick companion of the
//! criterion bench; run in release mode).
use model::{evaluate, Design, Options, RomConstants};
fn main() {
    let d = Design::demo();
    let k = RomConstants::default();
    let o = Options::default();
    let e = evaluate(&d, &k, &o).unwrap();
    println!(
        "steps {} point solves {}",
        e.numerics.integration_steps, e.numerics.point_solves
    );
    let n: u32 = std::env::var("STRIA_SPEED_N")
        .ok()
        .and_then(|v| v.parse().ok())
        .unwrap_or(5000);
    let t = std::time::Instant::now();
    for _ in 0..n {
        std::hint::black_box(evaluate(&d, &k, &o).unwrap());
    }
    let dt = t.elapsed().as_secs_f64() / n as f64;
    println!(
        "{:.1} us per evaluation (wall), {:.0} evaluations/s",
        dt * 1e6,
        1.0 / dt
    );
}
