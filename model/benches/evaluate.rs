//! One full along-channel evaluation of the demo design (Marlow Flats, Well 3; invented, for
//! the demo only) at the default tolerance. Target: 50,000 evaluations/s on one core.
#![allow(missing_docs)] // criterion_group! generates an undocumented public function
use criterion::{black_box, criterion_group, criterion_main, Criterion};
use model::{evaluate, Design, Options, RomConstants};

fn bench(c: &mut Criterion) {
    let d = Design::demo();
    let k = RomConstants::default();
    let o = Options::default();
    let e = evaluate(&d, &k, &o).expect("demo evaluates");
    eprintln!(
        "demo: {} accepted steps, {} point solves per evaluation",
        e.numerics.integration_steps, e.numerics.point_solves
    );
    c.bench_function("evaluate_demo", |b| {
        b.iter(|| evaluate(black_box(&d), black_box(&k), black_box(&o)).unwrap())
    });
}

criterion_group!(benches, bench);
criterion_main!(benches);
