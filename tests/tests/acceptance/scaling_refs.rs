//! The scaling screen (`model::scaling`) against PHREEQC: calcite and gypsum saturation indices
//! of waters from fresh to strongly brackish, and of their concentrates, within 0.1.
//!
//! Source: PHREEQC 3 through phreeqpython (PyPI, installed by `.ci/requirements.txt`) with its
//! `phreeqc.dat` database, driven by `tests/scripts/phreeqc_si.py` through `python_refs`. The
//! check fails when python3 or phreeqpython is missing; a developer without them opts out with
//! `STRIA_SKIP_PYTHON_REFS=1` (DEVELOPERS.md).

use model::scaling::{saturation_indices, WaterAnalysis};

/// Largest difference accepted between our saturation index and PHREEQC's (the bound).
const SI_TOLERANCE: f64 = 0.1;

/// (Na, K, Ca, Mg, Cl, SO4, alkalinity as HCO3) in mg/L, pH, temperature C. Made up to span
/// fresh to strongly brackish waters; none is a real site's analysis.
const WATERS: [([f64; 7], f64, f64); 14] = [
    ([5.0, 1.0, 15.0, 3.0, 8.0, 10.0, 50.0], 7.2, 10.0), // soft fresh
    ([12.0, 2.0, 60.0, 10.0, 20.0, 40.0, 200.0], 7.8, 12.0), // hard fresh
    ([30.0, 3.0, 110.0, 25.0, 60.0, 120.0, 300.0], 7.4, 20.0), // very hard
    ([150.0, 5.0, 80.0, 20.0, 200.0, 150.0, 200.0], 7.9, 25.0), // mildly brackish
    ([600.0, 10.0, 120.0, 40.0, 900.0, 400.0, 250.0], 7.6, 16.0), // the example water
    ([800.0, 15.0, 200.0, 60.0, 1400.0, 600.0, 180.0], 7.3, 18.0),
    ([1200.0, 20.0, 150.0, 80.0, 1800.0, 900.0, 300.0], 8.0, 22.0),
    (
        [1500.0, 25.0, 350.0, 120.0, 2500.0, 1400.0, 220.0],
        7.1,
        28.0,
    ), // gypsum-rich
    (
        [2000.0, 30.0, 250.0, 150.0, 3200.0, 1200.0, 350.0],
        7.7,
        30.0,
    ),
    (
        [3000.0, 50.0, 400.0, 250.0, 5000.0, 1800.0, 280.0],
        7.5,
        15.0,
    ), // strongly brackish
    (
        [3500.0, 60.0, 500.0, 350.0, 6000.0, 2500.0, 250.0],
        7.0,
        35.0,
    ),
    (
        [4500.0, 80.0, 600.0, 400.0, 7500.0, 3000.0, 320.0],
        8.2,
        20.0,
    ), // very brackish
    ([300.0, 8.0, 40.0, 15.0, 380.0, 100.0, 150.0], 6.8, 5.0), // cold, acidic side
    (
        [900.0, 12.0, 300.0, 100.0, 1500.0, 1500.0, 120.0],
        7.4,
        40.0,
    ), // warm, sulfate-rich
];

/// Concentrate factors applied to every water (1 is the feed).
const FACTORS: [f64; 3] = [1.0, 2.0, 4.0];

fn analyses() -> Vec<WaterAnalysis> {
    let mut out = Vec::new();
    for (c, ph, t) in WATERS {
        let w = WaterAnalysis {
            na_mg_l: c[0],
            k_mg_l: c[1],
            ca_mg_l: c[2],
            mg_mg_l: c[3],
            cl_mg_l: c[4],
            so4_mg_l: c[5],
            alkalinity_mg_l_hco3: c[6],
            ph,
            temperature_c: t,
        };
        for f in FACTORS {
            out.push(w.concentrated(f));
        }
    }
    out
}

/// PHREEQC's (calcite SI, gypsum SI, ionic strength) of each analysis; None when the developer
/// opted out of the python cross-checks.
fn phreeqc(ws: &[WaterAnalysis]) -> Option<Vec<[f64; 3]>> {
    let input: Vec<serde_json::Value> = ws
        .iter()
        .map(|w| {
            serde_json::json!({
                "na": w.na_mg_l, "k": w.k_mg_l, "ca": w.ca_mg_l, "mg": w.mg_mg_l,
                "cl": w.cl_mg_l, "so4": w.so4_mg_l, "alk": w.alkalinity_mg_l_hco3,
                "ph": w.ph, "temp": w.temperature_c,
            })
        })
        .collect();
    let out = crate::python_refs::run(
        "phreeqpython",
        include_str!("../../scripts/phreeqc_si.py"),
        &serde_json::Value::from(input).to_string(),
    )?;
    Some(serde_json::from_str(&out).expect("phreeqc_si.py writes a JSON list"))
}

#[test]
fn saturation_indices_match_phreeqc() {
    // Source: PHREEQC 3 via phreeqpython, phreeqc.dat (see the module docs).
    let ws = analyses();
    let Some(theirs) = phreeqc(&ws) else {
        return;
    };
    assert_eq!(theirs.len(), ws.len());
    let mut worst: f64 = 0.0;
    let mut sum = 0.0;
    for (w, t) in ws.iter().zip(&theirs) {
        let ours = saturation_indices(w).unwrap();
        let dc = ours.calcite_si - t[0];
        let dg = ours.gypsum_si - t[1];
        worst = worst.max(dc.abs()).max(dg.abs());
        sum += dc.abs() + dg.abs();
        assert!(
            dc.abs() <= SI_TOLERANCE && dg.abs() <= SI_TOLERANCE,
            "{w:?}: ours calcite {:.3} gypsum {:.3} (I {:.4}); PHREEQC {:.3} {:.3} (I {:.4})",
            ours.calcite_si,
            ours.gypsum_si,
            ours.ionic_strength_mol_kg,
            t[0],
            t[1],
            t[2]
        );
    }
    println!(
        "PHREEQC cross-check: {} analyses, ionic strength {:.4} to {:.3} mol/kg, largest SI \
         difference {worst:.4}, mean {:.4}",
        ws.len(),
        theirs.iter().map(|t| t[2]).fold(f64::INFINITY, f64::min),
        theirs.iter().map(|t| t[2]).fold(0.0, f64::max),
        sum / (2.0 * ws.len() as f64)
    );
}
