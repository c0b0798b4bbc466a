//! The plant parts of `stria eval`: the `stack`, `plant` and `scaling` objects of the JSON, and
//! the Stack, Plant and Scaling sections of the design sheet.

use std::fmt::Write as _;

use model::plant::PlantEvaluation;
use serde_json::{json, Value};

use crate::eval::{sig, wrap};
use crate::study::Study;

/// Add `stack`, `plant` and `scaling` to the JSON of the first stage's cell pair. `scaling` is
/// null without a water analysis. Later stages' own validity warnings and the plant's (stack
/// voltage, scaling) go in `plant.warnings`.
pub fn add_to_json(v: &mut Value, p: &PlantEvaluation) -> Result<(), serde_json::Error> {
    let first = &p.plant.stages[0];
    let st = &first.stack;
    v["stack"] = json!({
        "cell_pairs": st.cell_pairs,
        "stack_voltage_V": st.stack_voltage_V,
        "stack_current_A": st.stack_current_A,
        "electrode_voltage_V": st.electrode_voltage_V,
        "shunt_current_fraction": st.shunt_current_fraction,
        "stacks_in_parallel": first.stacks_in_parallel,
        "power_kW": st.power_kW,
    });
    let mut plant = serde_json::to_value(&p.plant)?;
    plant["warnings"] = serde_json::to_value(plant_warnings(p))?;
    v["plant"] = plant;
    v["scaling"] = serde_json::to_value(p.scaling)?;
    Ok(())
}

fn plant_warnings(p: &PlantEvaluation) -> Vec<model::Warning> {
    let mut out = p.warnings.clone();
    for (i, e) in p.stage_evaluations.iter().enumerate().skip(1) {
        for w in &e.warnings {
            let mut w = w.clone();
            w.message = format!("stage {}: {}", i + 1, w.message);
            out.push(w);
        }
    }
    out
}

fn row(out: &mut String, label: &str, value: String, unit: &str) {
    let line = format!("  {label:<34} {value:>12} {unit}");
    let _ = writeln!(out, "{}", line.trim_end());
}

/// The Stack, Plant and Scaling sections of the design sheet (empty for a study without plant
/// sections: the sheet is then the cell pair's, as before).
pub fn sheet_sections(study: &Study, p: &PlantEvaluation) -> String {
    let mut s = String::new();
    if study.plant.is_single_cell_pair() {
        return s;
    }
    let cur = &study.currency;
    let pl = &p.plant;
    s.push_str("\nStack and plant (per stage; the sections above are stage 1's cell pair)\n");
    let _ = writeln!(
        s,
        "  {:>5} {:>9} {:>9} {:>9} {:>8} {:>7} {:>9} {:>9} {:>6} {:>7} {:>8} {:>8}",
        "stage",
        "in mM",
        "out mM",
        "conc.out",
        "i A/m2",
        "i/ilim",
        "pitch um",
        "stack V",
        "shunt",
        "stacks",
        "el.kWh/m3",
        "pump"
    );
    for (i, st) in pl.stages.iter().enumerate() {
        let _ = writeln!(
            s,
            "  {:>5} {:>9} {:>9} {:>9} {:>8} {:>7} {:>9} {:>9} {:>6} {:>7} {:>8} {:>8}",
            i + 1,
            sig(st.inlet_concentration_mol_m3, 4),
            sig(st.outlet_concentration_mol_m3, 4),
            sig(st.concentrate_outlet_concentration_mol_m3, 4),
            sig(st.mean_current_density_A_m2, 3),
            sig(st.current_over_limiting, 3),
            sig(st.pitch_m * 1e6, 3),
            sig(st.stack.stack_voltage_V, 4),
            sig(st.stack.shunt_current_fraction, 2),
            st.stacks_in_parallel,
            sig(st.electrical_energy_kWh_m3, 3),
            sig(st.pumping_energy_kWh_m3, 3),
        );
    }
    let first = &pl.stages[0].stack;
    row(
        &mut s,
        "cell pairs per stack (stage 1)",
        first.cell_pairs.to_string(),
        "",
    );
    row(
        &mut s,
        "electrode voltage",
        sig(first.electrode_voltage_V, 3),
        "V",
    );
    row(
        &mut s,
        "stack current (stage 1)",
        sig(first.stack_current_A, 4),
        "A",
    );
    row(
        &mut s,
        "stack power (stage 1)",
        sig(first.power_kW, 4),
        "kW",
    );
    row(
        &mut s,
        "product concentration",
        sig(pl.product_concentration_mol_m3, 4),
        "mM",
    );
    row(
        &mut s,
        "product flow",
        sig(pl.product_flow_m3_day, 4),
        "m3/day",
    );
    row(&mut s, "water recovery", sig(pl.water_recovery, 3), "-");
    if let Some(c) = pl.concentrate_loop_concentration_mol_m3 {
        row(&mut s, "concentrate loop concentration", sig(c, 4), "mM");
        row(
            &mut s,
            "loop evaluations",
            pl.loop_evaluations.to_string(),
            "",
        );
    }
    row(
        &mut s,
        "concentrate discharge",
        sig(pl.concentrate_discharge_m3_day, 4),
        "m3/day",
    );
    row(
        &mut s,
        "plant specific energy",
        sig(pl.specific_energy_kWh_m3, 4),
        "kWh/m3",
    );
    row(
        &mut s,
        "plant membrane area per capacity",
        sig(pl.membrane_area_m2_per_m3_day, 4),
        "m2/(m3/day)",
    );
    row(
        &mut s,
        "plant levelised cost of water",
        sig(pl.levelised_cost_per_m3, 4),
        &format!("{cur}/m3"),
    );
    if let Some(sc) = &p.scaling {
        s.push_str("\nScaling screen (saturation index; > 0 can precipitate)\n");
        row(&mut s, "feed calcite SI", sig_si(sc.feed_calcite_si), "");
        row(&mut s, "feed gypsum SI", sig_si(sc.feed_gypsum_si), "");
        row(
            &mut s,
            "concentrate factor",
            sig(sc.concentrate_factor, 3),
            "-",
        );
        row(
            &mut s,
            "concentrate calcite SI",
            sig_si(sc.concentrate_calcite_si),
            "",
        );
        row(
            &mut s,
            "concentrate gypsum SI",
            sig_si(sc.concentrate_gypsum_si),
            "",
        );
        row(
            &mut s,
            "charge imbalance of the analysis",
            format!("{:.1}", sc.charge_imbalance_percent),
            "%",
        );
        s.push_str(&indent(&wrap(model::scaling::SCREENING_NOTE, 92)));
    }
    let warnings = plant_warnings(p);
    if !warnings.is_empty() {
        s.push_str("\nPlant warnings\n");
        for w in &warnings {
            let _ = writeln!(s, "  - {}", w.message);
        }
    }
    s
}

/// A saturation index to two decimals (the PHREEQC cross-check holds it to about 0.03).
fn sig_si(x: f64) -> String {
    format!("{x:.2}")
}

fn indent(text: &str) -> String {
    text.lines().map(|l| format!("  {l}\n")).collect()
}

/// The design sheet with the plant sections placed before its warnings.
pub fn with_plant_sections(sheet: String, plant: &str) -> String {
    if plant.is_empty() {
        return sheet;
    }
    match sheet.find("\nWarnings\n") {
        Some(at) => format!("{}{}{}", &sheet[..at], plant, &sheet[at..]),
        None => sheet + plant,
    }
}
