//! Work of the outer searches over whole integrations (release mode): random designs (the
//! property tests' generator, seed 7001) driven by the current that a random voltage gives,
//! and the channel integrations that finding that voltage takes per integration of the
//! voltage-driven design (mean and worst); and the integrations of counter-current designs.
#[path = "../tests/support/mod.rs"]
mod support;
use model::*;
use rand::SeedableRng;
use rand_chacha::ChaCha8Rng;

fn main() {
    let mut rng = ChaCha8Rng::seed_from_u64(7_001);
    let k = RomConstants::default();
    let o = Options::default();
    let (mut n, mut total, mut worst) = (0u32, 0u64, 0u32);
    let (mut n_cc, mut total_cc, mut worst_cc) = (0u32, 0u64, 0u32);
    for _ in 0..400 {
        let d = support::random_design(&mut rng, support::Spread::default());
        let Ok(base) = evaluate(&d, &k, &o) else {
            continue;
        };
        if d.operation.flow == FlowArrangement::CounterCurrent {
            n_cc += 1;
            total_cc += base.numerics.channel_integrations as u64;
            worst_cc = worst_cc.max(base.numerics.channel_integrations);
        }
        if base.performance.cell_current_A <= 1e-3 {
            continue;
        }
        let mut g = d;
        g.operation.drive = Drive::Current {
            cell_current_a: base.performance.cell_current_A,
        };
        let e = evaluate(&g, &k, &o).unwrap();
        let per = e.numerics.channel_integrations / base.numerics.channel_integrations;
        n += 1;
        total += per as u64;
        worst = worst.max(per);
    }
    println!(
        "current drive, {n} designs: {:.2} integrations per voltage-driven one (worst {worst})",
        total as f64 / n as f64
    );
    println!(
        "counter-current, {n_cc} designs: {:.2} integrations (worst {worst_cc})",
        total_cc as f64 / n_cc as f64
    );
}
