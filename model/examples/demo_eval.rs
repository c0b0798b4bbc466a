//! Evaluate the demo design (Marlow Flats, Well 3; invented, for the demo only) and print the
//! JSON, the number of integration steps and the interface gain figures.
use model::{evaluate, Design, Options, RomConstants};

fn main() {
    let d = Design::demo();
    let k = RomConstants::default();
    let o = Options {
        rel_tol: 1e-7,
        profiles: false,
    };
    let e = evaluate(&d, &k, &o).expect("demo evaluates");
    println!("{}", serde_json::to_string_pretty(&e).unwrap());
}
