//! Acceptance checks: studies end to end. A demo study is loaded, run through the library
//! entry point of `stria run`, and its run directory is held to definitions and laws from
//! outside the project.

use std::path::{Path, PathBuf};

use studies::run::{run, Ended, RunOptions};
use studies::study::Study;

/// Faraday constant, C/mol (CODATA 2018, exact since the 2019 SI redefinition).
const FARADAY: f64 = 96_485.332_12;

fn demo(name: &str) -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("../studies/demo")
        .join(name)
}

fn small_quick_study(dir: &Path) -> PathBuf {
    let text = std::fs::read_to_string(demo("quick.toml"))
        .unwrap()
        .replace("population = 40", "population = 16")
        .replace("max_evaluations = 4000", "max_evaluations = 320");
    let path = dir.join("quick_small.toml");
    std::fs::write(&path, text).unwrap();
    path
}

fn read_csv(path: &Path) -> (Vec<String>, Vec<Vec<String>>) {
    let text = std::fs::read_to_string(path).unwrap();
    let mut lines = text.lines();
    let header = lines.next().unwrap().split(',').map(String::from).collect();
    let rows = lines
        .map(|l| l.split(',').map(String::from).collect())
        .collect();
    (header, rows)
}

#[test]
fn feed_in_grams_per_litre_converts_with_the_handbook_molar_mass() {
    // NaCl molar mass 58.443 g/mol (Na 22.98977 + Cl 35.453, IUPAC standard atomic weights;
    // from memory; the CRC Handbook rounds it to 58.44); 2.4 g/L.
    let (study, warnings) = Study::load(&demo("quick.toml")).unwrap();
    assert!(warnings.is_empty(), "{warnings:?}");
    approx::assert_relative_eq!(
        study.baseline.water.feed_concentration_mol_m3,
        2.4 / 58.443 * 1000.0,
        max_relative = 1e-12
    );
    // 16 C = 289.15 K (definition of the Celsius scale, SI Brochure).
    approx::assert_relative_eq!(
        study.baseline.water.temperature_k,
        289.15,
        max_relative = 1e-12
    );
    // Units in key names: 0.5 mm, 120 um, 4 cm/s, 3 Ohm cm2 in SI.
    approx::assert_relative_eq!(study.baseline.channel.gap_m, 0.5e-3, max_relative = 1e-12);
    approx::assert_relative_eq!(
        study.baseline.membranes.pitch_m,
        120e-6,
        max_relative = 1e-12
    );
    approx::assert_relative_eq!(
        study.baseline.operation.velocity_m_s,
        0.04,
        max_relative = 1e-12
    );
    approx::assert_relative_eq!(
        study.baseline.membranes.cem_area_resistance_ohm_m2,
        3e-4,
        max_relative = 1e-12
    );
}

#[test]
fn a_run_front_is_pareto_optimal_feasible_and_obeys_faraday() {
    let dir = tempfile::tempdir().unwrap();
    let study_path = small_quick_study(dir.path());
    let out = dir.path().join("run");
    let ended = run(&RunOptions {
        study: study_path.clone(),
        out: Some(out.clone()),
        threads: Some(2),
        ..RunOptions::default()
    })
    .unwrap();
    assert!(matches!(ended, Ended::Finished(_)));
    let (study, _) = Study::load(&study_path).unwrap();

    let (header, rows) = read_csv(&out.join("front.csv"));
    assert!(!rows.is_empty(), "empty front");
    let col = |name: &str| header.iter().position(|h| h == name).unwrap();
    let (srr, energy) = (
        col("salt_removal_rate_mol_m2_s"),
        col("specific_energy_kWh_m3"),
    );
    let value = |r: &Vec<String>, c: usize| r[c].parse::<f64>().unwrap();

    // Pareto optimality (definition, e.g. Deb et al. 2002): no front design is dominated by
    // another (salt removal rate maximised, specific energy minimised).
    for a in &rows {
        for b in &rows {
            let better_or_equal =
                value(b, srr) >= value(a, srr) && value(b, energy) <= value(a, energy);
            let strictly = value(b, srr) > value(a, srr) || value(b, energy) < value(a, energy);
            assert!(
                !(better_or_equal && strictly),
                "design {} dominates design {}",
                b[0],
                a[0]
            );
        }
    }

    // Every front design meets the study's product limit (8.5 mol/m3, the demo's invented target).
    for r in &rows {
        assert!(value(r, col("outlet_concentration_mol_m3")) <= 8.5 + 1e-12);
    }

    // Re-evaluating a front design reproduces its objectives bit for bit, and its salt balance
    // closes with Faraday's law: (c_in Q_d - c_out Q_d,out) F = eta I (CODATA 2018 Faraday
    // constant; the product flow Q_d,out is below the feed flow when water crosses the
    // membranes).
    let nvar = study.variables.len();
    for r in rows.iter().take(5) {
        let x: Vec<f64> = (1..=nvar).map(|c| value(r, c)).collect();
        let (e, objectives) = study.evaluate_point(&x).unwrap();
        assert_eq!(objectives[0].to_bits(), value(r, srr).to_bits());
        assert_eq!(objectives[1].to_bits(), value(r, energy).to_bits());
        let p = &e.performance;
        let removed = (e.inputs.feed_concentration_mol_m3 * p.diluate_flow_m3_s
            - p.outlet_concentration_mol_m3 * p.diluate_outlet_flow_m3_s)
            * FARADAY;
        let carried = p.current_efficiency * p.cell_current_A;
        approx::assert_relative_eq!(removed, carried, max_relative = 1e-6);
    }

    // The archive only grows, so its hypervolume never falls (monotonicity of the
    // hypervolume indicator under Pareto dominance, Zitzler et al. 2003).
    let (_, history) = read_csv(&out.join("history.csv"));
    let hv: Vec<f64> = history.iter().map(|r| r[3].parse().unwrap()).collect();
    for w in hv.windows(2) {
        assert!(w[1] >= w[0] || w[0] == 0.0, "hypervolume fell: {w:?}");
    }
    let summary: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(out.join("summary.json")).unwrap()).unwrap();
    assert_eq!(summary["evaluations"], 320);
    assert_eq!(summary["front_size"], rows.len());
}
