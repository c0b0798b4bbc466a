//! A run directory in the format of docs/formats.md#run-directory (study.toml, front.csv, history.csv,
//! summary.json), made by evaluating a few designs of the demo study with the model. Shared by
//! the report and hand-off tests (`mod outputs_support;`); it has no tests of its own.
#![allow(dead_code)]

use std::path::{Path, PathBuf};

use studies::study::Study;

/// The demo study file.
pub fn demo(name: &str) -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("demo")
        .join(name)
}

/// Diagnostic columns of front.csv after the objectives (contract order).
pub const DIAGNOSTICS: [&str; 8] = [
    "outlet_concentration_mol_m3",
    "salt_removal_fraction",
    "mean_current_density_A_m2",
    "specific_energy_kWh_m3",
    "active_area_fraction",
    "vortex_wavelength_m",
    "pitch_over_wavelength",
    "boundary_layer_thickness_mean_m",
];

/// Write a run directory for the quick demo study with `objectives` (study keys) into `dir`;
/// returns the ids on the front.
pub fn write_run(dir: &Path, objectives: &[&str]) -> Vec<u64> {
    write_run_with(dir, objectives, &[])
}

/// [`write_run`] with text replacements applied to the quick demo first (each must match).
pub fn write_run_with(dir: &Path, objectives: &[&str], edits: &[(&str, &str)]) -> Vec<u64> {
    let mut text = std::fs::read_to_string(demo("quick.toml")).unwrap();
    for (from, to) in edits {
        assert!(text.contains(from), "quick.toml has no `{from}`");
        text = text.replacen(from, to, 1);
    }
    let list = objectives
        .iter()
        .map(|o| format!("{o:?}"))
        .collect::<Vec<_>>()
        .join(", ");
    let text = text.replace(
        "list = [\"salt_removal_rate\", \"specific_energy\"]",
        &format!("list = [{list}]"),
    );
    let (study, _) = Study::from_text(&dir.join("study.toml"), &text, &[]).unwrap();
    std::fs::write(dir.join("study.toml"), study.to_resolved_toml()).unwrap();

    let mut header: Vec<String> = vec!["id".into()];
    header.extend(study.variables.iter().map(|v| v.kind.column().to_string()));
    header.extend(study.objectives.iter().map(|o| o.column().to_string()));
    for d in DIAGNOSTICS {
        if !header.iter().any(|h| h == d) {
            header.push(d.to_string());
        }
    }
    let mut csv = header.join(",") + "\n";
    // (pitch m, open fraction, velocity m/s, cell-pair voltage V): a spread of patterns,
    // flows and voltages, in the order of the quick demo's variables
    let xs = [
        [120e-6, 0.5, 0.04, 2.0],
        [60e-6, 0.4, 0.02, 1.5],
        [250e-6, 0.6, 0.06, 2.5],
        [400e-6, 0.8, 0.03, 3.0],
        [90e-6, 0.3, 0.08, 1.8],
    ];
    assert_eq!(
        study.variables.len(),
        xs[0].len(),
        "fixture follows quick.toml's variables"
    );
    let mut ids = Vec::new();
    for (k, x) in xs.iter().enumerate() {
        let id = 17 + 23 * k as u64;
        let (e, objs) = study.evaluate_point(x).unwrap();
        let p = &e.performance;
        let lv = p.vortex_wavelength_m;
        let mut row: Vec<String> = vec![id.to_string()];
        row.extend(x.iter().map(|v| format!("{v}")));
        row.extend(objs.iter().map(|v| format!("{v}")));
        for d in DIAGNOSTICS {
            if study.objectives.iter().any(|o| o.column() == d) {
                continue;
            }
            row.push(match d {
                "outlet_concentration_mol_m3" => format!("{}", p.outlet_concentration_mol_m3),
                "salt_removal_fraction" => format!("{}", p.salt_removal_fraction),
                "mean_current_density_A_m2" => format!("{}", p.mean_current_density_A_m2),
                "specific_energy_kWh_m3" => format!("{}", p.specific_energy_kWh_m3),
                "active_area_fraction" => format!("{}", p.active_area_fraction),
                "vortex_wavelength_m" => lv.map(|l| format!("{l}")).unwrap_or_default(),
                "pitch_over_wavelength" => lv.map(|l| format!("{}", x[0] / l)).unwrap_or_default(),
                _ => format!("{}", e.transfer.boundary_layer_thickness_mean_m),
            });
        }
        csv.push_str(&(row.join(",") + "\n"));
        ids.push(id);
    }
    std::fs::write(dir.join("front.csv"), csv).unwrap();
    let mut hist = String::from("generation,evaluations,feasible_share,hypervolume,elapsed_s\n");
    for g in 0..6 {
        hist.push_str(&format!(
            "{g},{},{},{},{}\n",
            40 * (g + 1),
            0.5 + 0.05 * g as f64,
            1.0 - 0.5f64.powi(g + 1),
            0.1 * g as f64
        ));
    }
    std::fs::write(dir.join("history.csv"), hist).unwrap();
    let summary = serde_json::json!({
        "study": study.name, "fingerprint": study.fingerprint(), "algorithm": "nsga2", "seed": 7,
        "evaluations": 240, "generations": 6, "stop_reason": "budget", "front_size": ids.len(),
        "objectives": [], "variables": [], "evaluations_csv_cap": 1000000, "finished": true
    });
    std::fs::write(dir.join("summary.json"), summary.to_string()).unwrap();
    ids
}
