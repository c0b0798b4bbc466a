//! `stria eval`: one design as a readable design sheet (engineers' units) or as JSON (SI).

use std::fmt::Write as _;
use std::path::Path;

use model::{Drive, Evaluation, LengthMode, ModelError, Options};

use crate::error::CliError;
use crate::study::Study;

/// A number with `sig` significant digits, plain or in exponent form as fits.
pub fn sig(x: f64, sig: usize) -> String {
    if !x.is_finite() {
        return format!("{x}");
    }
    if x == 0.0 {
        return "0".into();
    }
    let mag = x.abs().log10().floor() as i32;
    if !(-3..6).contains(&mag) {
        return format!("{:.*e}", sig.saturating_sub(1), x);
    }
    let decimals = (sig as i32 - 1 - mag).max(0) as usize;
    format!("{x:.decimals$}")
}

fn row(out: &mut String, label: &str, value: String, unit: &str) {
    let line = format!("  {label:<34} {value:>12} {unit}");
    let _ = writeln!(out, "{}", line.trim_end());
}

/// The design sheet: inputs, properties, hydraulics, transfer, performance, economics,
/// warnings (and profiles when present), ending with the caution.
pub fn design_sheet(study: &Study, e: &Evaluation) -> String {
    let d = &study.baseline;
    let mut s = String::new();
    let _ = writeln!(s, "stria design sheet: {}", study.name);
    let _ = writeln!(s, "study file: {}", study.file.display());
    let i = &e.inputs;
    let molar_mass = model::properties::molar_mass_g_mol(d.water.salt);
    s.push_str("\nInputs\n");
    row(&mut s, "salt", i.salt.clone(), "");
    row(&mut s, "temperature", sig(i.temperature_K - 273.15, 4), "C");
    row(
        &mut s,
        "feed concentration",
        sig(i.feed_concentration_mol_m3, 4),
        "mM (mol/m3)",
    );
    if let Some(m) = molar_mass {
        row(
            &mut s,
            "feed concentration",
            sig(i.feed_concentration_mol_m3 * m / 1000.0, 4),
            "g/L",
        );
    }
    row(
        &mut s,
        "concentrate feed",
        sig(d.water.concentrate_feed_concentration_mol_m3, 4),
        "mM",
    );
    row(&mut s, "gap", sig(i.gap_m * 1e3, 4), "mm");
    row(&mut s, "length", sig(i.length_m, 4), "m");
    if let LengthMode::ProductTarget {
        product_concentration_mol_m3,
    } = d.operation.length_mode
    {
        row(
            &mut s,
            "  (length found for product target)",
            sig(product_concentration_mol_m3, 4),
            "mM",
        );
    }
    row(&mut s, "width", sig(i.width_m, 4), "m");
    row(&mut s, "spacer", i.spacer.clone(), "");
    row(&mut s, "velocity", sig(i.velocity_m_s * 100.0, 4), "cm/s");
    row(
        &mut s,
        "concentrate gap / velocity",
        format!(
            "{} / {}",
            sig(d.channel.concentrate_gap_m * 1e3, 3),
            sig(d.operation.concentrate_velocity_m_s * 100.0, 3)
        ),
        "mm / cm/s",
    );
    let flow = match d.operation.flow {
        model::FlowArrangement::CoCurrent => "co-current",
        model::FlowArrangement::CounterCurrent => "counter-current",
    };
    row(&mut s, "flow arrangement", flow.into(), "");
    row(&mut s, "pattern pitch", sig(i.pitch_m * 1e6, 4), "um");
    row(&mut s, "open fraction", sig(i.open_fraction, 4), "-");
    let side = match d.membranes.pattern_side {
        model::PatternSide::Cem => "CEM",
        model::PatternSide::Aem => "AEM",
        model::PatternSide::Both => "CEM and AEM",
    };
    row(&mut s, "patterned membrane", side.into(), "");
    let drive_note = match d.operation.drive {
        Drive::Voltage { .. } => "V",
        Drive::Current { .. } => "V (found for the given current)",
    };
    row(
        &mut s,
        "cell-pair voltage",
        sig(i.cell_pair_voltage_V, 4),
        drive_note,
    );
    row(
        &mut s,
        "CEM / AEM transport number",
        format!("{} / {}", i.cem_transport_number, i.aem_transport_number),
        "-",
    );

    let p = &e.properties;
    s.push_str("\nProperties (feed concentration and temperature)\n");
    row(
        &mut s,
        "salt diffusivity",
        sig(p.salt_diffusivity_m2_s, 4),
        "m2/s",
    );
    row(
        &mut s,
        "cation transport number",
        sig(p.cation_transport_number, 4),
        "-",
    );
    row(&mut s, "density", sig(p.density_kg_m3, 5), "kg/m3");
    row(
        &mut s,
        "dynamic viscosity",
        sig(p.dynamic_viscosity_Pa_s * 1e3, 4),
        "mPa s",
    );
    row(
        &mut s,
        "kinematic viscosity",
        sig(p.kinematic_viscosity_m2_s, 4),
        "m2/s",
    );
    row(
        &mut s,
        "conductivity",
        sig(p.conductivity_S_m * 10.0, 4),
        "mS/cm",
    );
    row(&mut s, "Debye length", sig(p.debye_length_m * 1e9, 4), "nm");
    row(
        &mut s,
        "thermal voltage",
        sig(p.thermal_voltage_V * 1e3, 4),
        "mV",
    );

    let h = &e.hydraulics;
    s.push_str("\nHydraulics (diluate channel)\n");
    row(
        &mut s,
        "hydraulic diameter",
        sig(h.hydraulic_diameter_m * 1e3, 4),
        "mm",
    );
    row(&mut s, "Reynolds number", sig(h.reynolds, 4), "-");
    row(&mut s, "Schmidt number", sig(h.schmidt, 4), "-");
    row(
        &mut s,
        "pressure drop",
        sig(h.pressure_drop_Pa / 1e3, 4),
        "kPa",
    );

    let t = &e.transfer;
    s.push_str("\nMass transfer\n");
    row(
        &mut s,
        "Sherwood number (channel mean)",
        sig(t.sherwood_mean, 4),
        "-",
    );
    row(
        &mut s,
        "boundary layer (channel mean)",
        sig(t.boundary_layer_thickness_mean_m * 1e6, 4),
        "um",
    );
    row(
        &mut s,
        "limiting current density (feed)",
        sig(t.limiting_current_density_feed_A_m2, 4),
        "A/m2",
    );
    row(&mut s, "limiting membrane", t.limiting_membrane.clone(), "");

    let f = &e.performance;
    s.push_str("\nPerformance\n");
    row(
        &mut s,
        "product (diluate outlet)",
        sig(f.outlet_concentration_mol_m3, 4),
        "mM",
    );
    if let Some(m) = molar_mass {
        row(
            &mut s,
            "product (diluate outlet)",
            sig(f.outlet_concentration_mol_m3 * m, 4),
            "mg/L",
        );
    }
    row(
        &mut s,
        "concentrate outlet",
        sig(f.concentrate_outlet_concentration_mol_m3, 4),
        "mM",
    );
    row(
        &mut s,
        "salt removal",
        sig(f.salt_removal_fraction * 100.0, 4),
        "%",
    );
    row(
        &mut s,
        "water recovery",
        sig(f.water_recovery * 100.0, 4),
        "%",
    );
    row(
        &mut s,
        "mean current density",
        sig(f.mean_current_density_A_m2, 4),
        "A/m2",
    );
    row(&mut s, "cell-pair current", sig(f.cell_current_A, 4), "A");
    row(
        &mut s,
        "diluate flow (one cell pair)",
        sig(f.diluate_flow_m3_s * 3.6e6, 4),
        "L/h",
    );
    row(
        &mut s,
        "current efficiency",
        sig(f.current_efficiency * 100.0, 4),
        "%",
    );
    row(
        &mut s,
        "electrical energy",
        sig(f.electrical_energy_kWh_m3, 4),
        "kWh/m3",
    );
    row(
        &mut s,
        "pumping energy",
        sig(f.pumping_energy_kWh_m3, 4),
        "kWh/m3",
    );
    row(
        &mut s,
        "specific energy",
        sig(f.specific_energy_kWh_m3, 4),
        "kWh/m3",
    );
    row(
        &mut s,
        "thermodynamic minimum",
        sig(f.thermodynamic_minimum_kWh_m3, 4),
        "kWh/m3",
    );
    row(
        &mut s,
        "active-area fraction",
        sig(f.active_area_fraction, 4),
        "-",
    );
    match f.vortex_wavelength_m {
        Some(l) => {
            row(&mut s, "vortex wavelength", sig(l * 1e6, 4), "um");
            row(
                &mut s,
                "pitch / vortex wavelength",
                sig(i.pitch_m / l, 4),
                "-",
            );
        }
        None => row(
            &mut s,
            "vortex wavelength",
            "none".into(),
            "(no electroconvection)",
        ),
    }

    let c = &e.economics;
    let cur = &study.currency;
    s.push_str("\nEconomics\n");
    row(
        &mut s,
        "salt removal rate",
        sig(c.salt_removal_rate_mol_m2_s, 4),
        "mol/(m2 s)",
    );
    row(
        &mut s,
        "membrane area per capacity",
        sig(c.membrane_area_m2_per_m3_day, 4),
        "m2/(m3/day)",
    );
    row(
        &mut s,
        "membrane area of the plant",
        sig(c.plant_membrane_area_m2, 4),
        "m2",
    );
    row(
        &mut s,
        "membrane cost per capacity",
        sig(c.membrane_cost_per_m3_day, 4),
        &format!("{cur}/(m3/day)"),
    );
    row(
        &mut s,
        "levelised cost of water",
        sig(c.levelised_cost_per_m3, 4),
        &format!("{cur}/m3"),
    );

    s.push_str("\nWarnings\n");
    if e.warnings.is_empty() {
        s.push_str("  none\n");
    }
    for w in &e.warnings {
        let _ = writeln!(
            s,
            "  - {} = {} (bound {}): {}",
            w.quantity,
            sig(w.value, 4),
            sig(w.bound, 4),
            w.message
        );
    }

    if let Some(pr) = &e.profiles {
        s.push_str("\nProfiles along the channel\n");
        let _ = writeln!(
            s,
            "  {:>9} {:>11} {:>11} {:>10} {:>10} {:>8} {:>9} {:>9}",
            "x mm",
            "diluate mM",
            "conc. mM",
            "i A/m2",
            "i_lim A/m2",
            "active",
            "V_cem/V_T",
            "V_aem/V_T"
        );
        for k in 0..pr.x_m.len() {
            let at = |v: &Vec<f64>| v.get(k).copied().unwrap_or(f64::NAN);
            let _ = writeln!(
                s,
                "  {:>9} {:>11} {:>11} {:>10} {:>10} {:>8} {:>9} {:>9}",
                sig(at(&pr.x_m) * 1e3, 4),
                sig(at(&pr.diluate_mol_m3), 4),
                sig(at(&pr.concentrate_mol_m3), 4),
                sig(at(&pr.current_density_A_m2), 4),
                sig(at(&pr.limiting_current_density_A_m2), 4),
                sig(at(&pr.active_area_fraction), 3),
                sig(at(&pr.cem_layer_voltage_thermal), 3),
                sig(at(&pr.aem_layer_voltage_thermal), 3),
            );
        }
    }
    s.push('\n');
    s.push_str(&wrap(&format!("Caution: {}", crate::CAUTION), 96));
    s.push('\n');
    s
}

/// Wrap text at `width` columns.
pub fn wrap(text: &str, width: usize) -> String {
    let mut out = String::new();
    let mut line = String::new();
    for word in text.split_whitespace() {
        if !line.is_empty() && line.len() + 1 + word.len() > width {
            out.push_str(&line);
            out.push('\n');
            line.clear();
        }
        if !line.is_empty() {
            line.push(' ');
        }
        line.push_str(word);
    }
    out.push_str(&line);
    out
}

/// Turn a model error on the study's own baseline into a command-line error.
pub fn model_error(study: &Study, e: ModelError) -> CliError {
    match e {
        ModelError::Input {
            field,
            value,
            allowed,
        } => CliError::input(
            &study.file,
            None,
            field,
            format!("the model rejects {value}"),
            allowed,
        ),
        other => CliError::model("the model could not evaluate the design", other),
    }
}

/// Run `stria eval`; `samples` = (draws, seed) adds the uncertainty of the outputs
/// ([`crate::uncertainty`]).
pub fn run(
    path: &Path,
    sets: &[String],
    json: bool,
    profile: bool,
    samples: Option<(usize, Option<u64>)>,
) -> Result<(), CliError> {
    let (study, warnings) = Study::load_with(path, sets)?;
    for w in &warnings {
        eprintln!("{w}");
    }
    let options = Options {
        profiles: profile,
        ..Options::default()
    };
    let p = model::plant::evaluate_plant(&study.baseline_plant(), &study.constants, &options)
        .map_err(|e| model_error(&study, e))?;
    let e = &p.stage_evaluations[0];
    let uncertainty = crate::uncertainty::for_eval(&study, samples)?;
    if json {
        let mut v = serde_json::to_value(e).map_err(|e| CliError::json("JSON", e))?;
        crate::plant_sheet::add_to_json(&mut v, &p).map_err(|e| CliError::json("JSON", e))?;
        if let (Some(u), Some(map)) = (&uncertainty, v.as_object_mut()) {
            let u = serde_json::to_value(u).map_err(|e| CliError::json("JSON", e))?;
            map.insert("uncertainty".into(), u);
        }
        let text = serde_json::to_string_pretty(&v).map_err(|e| CliError::json("JSON", e))?;
        println!("{text}");
    } else {
        let plant = crate::plant_sheet::sheet_sections(&study, &p);
        let sheet = crate::plant_sheet::with_plant_sections(design_sheet(&study, e), &plant);
        match &uncertainty {
            // The uncertainty section goes before the closing caution.
            Some(u) => {
                let section = crate::uncertainty::sheet_section(u, &study.currency);
                match sheet.rfind("\n\n") {
                    Some(at) => print!("{}{section}{}", &sheet[..at + 1], &sheet[at + 1..]),
                    None => print!("{sheet}{section}"),
                }
            }
            None => print!("{sheet}"),
        }
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn sig_formats() {
        assert_eq!(sig(41.068, 4), "41.07");
        assert_eq!(sig(0.5, 3), "0.500");
        assert_eq!(sig(1.234e-9, 3), "1.23e-9");
        assert_eq!(sig(0.0, 3), "0");
    }
}
