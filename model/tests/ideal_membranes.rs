//! With every effect of real membranes switched off (`MembranePhysics::ideal`), the model
//! reproduces model revision 7 (ideal membranes) bit for bit: the fixture holds 40 seeded
//! designs (the demo, its counter-current, product-target and current-drive variants, and 36
//! random designs with spacers, both flows and both drives) and their revision-7 evaluations,
//! written by `examples/ideal_fixture.rs` before the membrane physics existed.

use model::*;

#[test]
fn ideal_membranes_reproduce_revision_7_bit_for_bit() {
    let text = include_str!("data/ideal_rev7.jsonl");
    let k = RomConstants::default();
    let mut n = 0;
    for (j, line) in text.lines().enumerate() {
        let rec: serde_json::Value = serde_json::from_str(line).unwrap();
        let mut d: Design = serde_json::from_value(rec["design"].clone()).unwrap();
        d.membranes.physics = MembranePhysics::ideal();
        let o = Options {
            rel_tol: 1e-7,
            profiles: j % 10 == 0,
        };
        let old = &rec["evaluation"];
        let new = serde_json::to_value(evaluate(&d, &k, &o).unwrap()).unwrap();
        // Every field of revision 7 is there with the same bits (fields added since are
        // not compared).
        for (section, value) in old.as_object().unwrap() {
            match value {
                serde_json::Value::Object(fields) => {
                    for (key, v) in fields {
                        assert_eq!(&new[section][key], v, "design {j}: {section}.{key} moved");
                    }
                }
                v => assert_eq!(&new[section], v, "design {j}: {section} moved"),
            }
        }
        n += 1;
    }
    assert_eq!(n, 40);
}
