//! Writes the fixture of `model/tests/ideal_membranes.rs`: seeded random designs and their
//! evaluations as JSON lines (design, evaluation or error). Run at model revision 7 (before
//! the membrane physics) it recorded what an evaluation with every membrane effect switched
//! off must reproduce bit for bit: `cargo run -p model --example ideal_fixture > FILE`.
#[path = "../tests/support/mod.rs"]
mod support;

use model::*;
use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;

fn main() {
    let mut rng = ChaCha8Rng::seed_from_u64(611);
    let k = RomConstants::default();
    let mut designs = vec![Design::demo()];
    let mut counter = Design::demo();
    counter.operation.flow = FlowArrangement::CounterCurrent;
    designs.push(counter);
    let mut target = Design::demo();
    target.operation.length_mode = LengthMode::ProductTarget {
        product_concentration_mol_m3: 20.0,
    };
    target.channel.length_m = 2.0;
    designs.push(target);
    let mut current = Design::demo();
    current.operation.drive = Drive::Current {
        cell_current_a: 1.5,
    };
    designs.push(current);
    for j in 0..36 {
        let spread = support::Spread {
            high_removal: j % 4 == 3,
            spacers_and_membranes: j % 2 == 1,
        };
        let mut d = support::random_design(&mut rng, spread);
        if j % 9 == 4 {
            d.operation.drive = Drive::Current {
                cell_current_a: rng.random_range(0.05..2.0),
            };
        }
        designs.push(d);
    }
    for (j, d) in designs.iter().enumerate() {
        let o = Options {
            rel_tol: 1e-7,
            profiles: j % 10 == 0,
        };
        let out = match evaluate(d, &k, &o) {
            Ok(e) => serde_json::json!({ "design": d, "evaluation": e }),
            Err(e) => serde_json::json!({ "design": d, "error": e.to_string() }),
        };
        println!("{}", serde_json::to_string(&out).unwrap());
    }
}
