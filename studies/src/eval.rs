//! `stria eval`: one design as a readable design sheet (engineers' units) or as JSON (SI).

use std::fmt::Write as _;
use std::path::Path;

use model::plant::PlantEvaluation;
use model::{Design, Drive, Evaluation, LengthMode, ModelError, Options, Profiles};
use serde::Serialize;

use crate::error::CliError;
use crate::rundir;
use crate::study::{read_fingerprint, read_model_revision, Study};

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

/// The sheet's mass-transfer section.
fn mass_transfer_rows(s: &mut String, t: &model::output::TransferOut) {
    s.push_str("\nMass transfer\n");
    row(
        s,
        "Sherwood number (channel mean)",
        sig(t.sherwood_mean, 4),
        "-",
    );
    row(
        s,
        "boundary layer (channel mean)",
        sig(t.boundary_layer_thickness_mean_m * 1e6, 4),
        "um",
    );
    row(
        s,
        "limiting current density (feed)",
        sig(t.limiting_current_density_feed_A_m2, 4),
        "A/m2",
    );
    row(s, "limiting membrane", t.limiting_membrane.clone(), "");
    row(
        s,
        "funnelling factor (channel mean)",
        sig(t.funnelling_factor, 4),
        "-",
    );
}

/// The vortex wavelength and the pitch over it (or none without electroconvection).
fn wavelength_rows(s: &mut String, f: &model::PerformanceOut, pitch_m: f64) {
    match f.vortex_wavelength_m {
        Some(l) => {
            row(s, "vortex wavelength", sig(l * 1e6, 4), "um");
            row(s, "pitch / vortex wavelength", sig(pitch_m / l, 4), "-");
        }
        None => row(
            s,
            "vortex wavelength",
            "none".into(),
            "(no electroconvection)",
        ),
    }
}

/// The membranes' transport numbers and area resistances at the diluate inlet and outlet.
fn membrane_rows(s: &mut String, e: &model::Evaluation) {
    s.push_str("\nMembranes (diluate inlet -> outlet)\n");
    for (name, m) in [("CEM", &e.membranes.cem), ("AEM", &e.membranes.aem)] {
        row(
            s,
            &format!("{name} transport number"),
            format!(
                "{} -> {}",
                sig(m.transport_number_inlet, 4),
                sig(m.transport_number_outlet, 4)
            ),
            "-",
        );
        row(
            s,
            &format!("{name} area resistance"),
            format!(
                "{} -> {}",
                sig(m.area_resistance_inlet_Ohm_m2 * 1e4, 3),
                sig(m.area_resistance_outlet_Ohm_m2 * 1e4, 3)
            ),
            "Ohm cm2",
        );
    }
}

/// The outlet flows (water crosses the membranes).
fn flow_rows(s: &mut String, f: &model::PerformanceOut) {
    row(
        s,
        "product flow (one cell pair)",
        sig(f.diluate_outlet_flow_m3_s * 3.6e6, 4),
        "L/h",
    );
    row(
        s,
        "concentrate outlet flow",
        sig(f.concentrate_outlet_flow_m3_s * 3.6e6, 4),
        "L/h",
    );
}

fn row(out: &mut String, label: &str, value: String, unit: &str) {
    let line = format!("  {label:<34} {value:>12} {unit}");
    let _ = writeln!(out, "{}", line.trim_end());
}

/// What the active-area fraction is, in words, wherever it is shown.
pub const ACTIVE_AREA_MEANING: &str = "active-area fraction: the share of the patterned \
membrane's surface (conducting and inert stripes together) that the vortices keep supplied \
with salty water; it never exceeds the open fraction";

/// What i/i_lim is, in words (design sheet and JSON).
pub const CURRENT_OVER_LIMIT_MEANING: &str = "local current density over the local limiting \
current density of the limiting membrane (funnelling by the pattern included), at the inlet, at \
the outlet and its largest value along the channel (over the integration's accepted steps and \
every twentieth of the length); above 1 the channel runs past its limiting current";

/// One of the study's constraints checked on an evaluation (SI units).
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ConstraintCheck {
    /// The constrained quantity (`product_concentration`, `pressure_drop`, `reynolds`).
    pub name: &'static str,
    /// The study key that sets the limit (`constraints.max_product_mol_m3`).
    pub key: String,
    /// The quantity's value, in `unit`.
    pub value: f64,
    /// The limit, in `unit`.
    pub limit: f64,
    /// SI unit of value and limit.
    pub unit: &'static str,
    /// "upper" (the value must be at most the limit) or "lower" (at least).
    pub bound: &'static str,
    /// value <= limit for an upper bound, value >= limit for a lower one.
    pub met: bool,
}

/// Each of the study's constraints on a (plant) evaluation, in the study's order.
pub fn constraint_checks(study: &Study, p: &PlantEvaluation) -> Vec<ConstraintCheck> {
    study
        .constraints
        .iter()
        .map(|c| {
            let value = c.quantity(p);
            ConstraintCheck {
                name: c.name(),
                key: format!("constraints.{}", c.key()),
                value,
                limit: c.limit(),
                unit: c.unit(),
                bound: if c.is_minimum() { "lower" } else { "upper" },
                met: c.met_by(value),
            }
        })
        .collect()
}

/// Local current density over the local limiting current density along the channel.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct CurrentOverLimit {
    /// At the diluate inlet.
    pub inlet: f64,
    /// At the diluate outlet.
    pub outlet: f64,
    /// The largest along the channel (at least the inlet and the outlet value).
    pub max: f64,
    /// Where the largest is, m from the inlet.
    pub max_at_m: f64,
}

/// i/i_lim at the inlet, the outlet and its maximum over the profile points (every accepted
/// step and every twentieth of the length); None for an empty profile.
pub fn current_over_limit(p: &Profiles) -> Option<CurrentOverLimit> {
    let ratios: Vec<f64> = p
        .current_density_A_m2
        .iter()
        .zip(&p.limiting_current_density_A_m2)
        .map(|(i, l)| i / l)
        .collect();
    let (&inlet, &outlet) = (ratios.first()?, ratios.last()?);
    let (k, &max) = ratios
        .iter()
        .enumerate()
        .max_by(|a, b| a.1.total_cmp(b.1))?;
    Some(CurrentOverLimit {
        inlet,
        outlet,
        max,
        max_at_m: p.x_m.get(k).copied().unwrap_or(f64::NAN),
    })
}

/// Everything a design sheet shows.
pub struct SheetInput<'a> {
    /// The study (names, currency, constraints).
    pub study: &'a Study,
    /// The design evaluated (the study's baseline design, or a design of a run's front).
    pub design: &'a Design,
    /// Which design this is, in words.
    pub origin: String,
    /// Its evaluation.
    pub evaluation: &'a Evaluation,
    /// The study's constraints on it.
    pub constraints: Vec<ConstraintCheck>,
    /// i/i_lim along the channel (None when the model returned no profile).
    pub current_over_limit: Option<CurrentOverLimit>,
    /// Print the profile table (`--profile`).
    pub show_profiles: bool,
}

/// The sheet's constraints and i/i_lim sections.
fn limits_sections(s: &mut String, input: &SheetInput) {
    s.push_str("\nConstraints of the study\n");
    if input.constraints.is_empty() {
        s.push_str("  none\n");
    }
    for (c, check) in input.study.constraints.iter().zip(&input.constraints) {
        let (unit, factor) = c.key_unit();
        let verdict = if check.met { "met" } else { "VIOLATED" };
        let line = format!(
            "  {:<34} {:>12} {:<4} {} {:>9} {:<4} {verdict}",
            c.label(),
            sig(check.value * factor, 4),
            unit,
            if c.is_minimum() {
                "at least"
            } else {
                "at most "
            },
            sig(check.limit * factor, 4),
            unit,
        );
        let _ = writeln!(s, "{}", line.trim_end());
    }
    s.push_str("\nCurrent over limiting current, i/i_lim\n");
    match &input.current_over_limit {
        Some(r) => {
            row(s, "at the inlet", sig(r.inlet, 3), "-");
            row(s, "at the outlet", sig(r.outlet, 3), "-");
            row(
                s,
                "largest along the channel",
                sig(r.max, 3),
                &format!("- (at {} mm)", sig(r.max_at_m * 1e3, 3)),
            );
        }
        None => s.push_str("  not available (no profile)\n"),
    }
    let _ = writeln!(s, "{}", indent(&wrap(CURRENT_OVER_LIMIT_MEANING, 92), "  "));
}

/// Indent every line of `text`.
fn indent(text: &str, by: &str) -> String {
    text.lines()
        .map(|l| format!("{by}{l}"))
        .collect::<Vec<_>>()
        .join("\n")
}

/// The design sheet: inputs, properties, hydraulics, transfer, performance, economics, the
/// study's constraints, i/i_lim, warnings (and profiles when asked), ending with the caution.
pub fn design_sheet(input: &SheetInput) -> String {
    let (study, d, e) = (input.study, input.design, input.evaluation);
    let mut s = String::new();
    let _ = writeln!(s, "stria design sheet: {}", study.name);
    let _ = writeln!(s, "study file: {}", study.file.display());
    let _ = writeln!(s, "design: {}", input.origin);
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

    mass_transfer_rows(&mut s, &e.transfer);

    membrane_rows(&mut s, e);

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
    flow_rows(&mut s, f);
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
        "- (channel mean, see below)",
    );
    wavelength_rows(&mut s, f, i.pitch_m);

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

    limits_sections(&mut s, input);

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

    if let Some(pr) = e.profiles.as_ref().filter(|_| input.show_profiles) {
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
    s.push_str(&wrap(&format!("Terms: the {ACTIVE_AREA_MEANING}."), 96));
    s.push_str("\n\n");
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

/// Which design `stria eval` evaluates.
#[derive(Debug, Clone, Copy)]
pub enum Subject<'a> {
    /// The study file's baseline design (the values in the file), changed by `--set`.
    Study {
        /// The study file.
        path: &'a Path,
        /// `--set SECTION.KEY=VALUE` changes.
        sets: &'a [String],
    },
    /// A design on the front of a run directory, by its id in front.csv.
    Pick {
        /// The run directory.
        dir: &'a Path,
        /// The design's id.
        id: u64,
    },
}

/// The ids of a front for a message: all of them, or the first 30 and the count.
fn ids_shown(front: &rundir::Front) -> String {
    let ids: Vec<String> = front.rows.iter().map(|r| r.id.to_string()).collect();
    if ids.is_empty() {
        "none: front.csv holds no designs yet".into()
    } else if ids.len() > 30 {
        format!("{} ... ({} designs)", ids[..30].join(", "), ids.len())
    } else {
        ids.join(", ")
    }
}

/// The run's study (checked against the fingerprint recorded in its study.toml), the design
/// with front id `id`, and a description of it.
pub fn picked_design(dir: &Path, id: u64) -> Result<(Study, Design, String), CliError> {
    let run = rundir::read(dir)?;
    let study_path = dir.join("study.toml");
    let text = std::fs::read_to_string(&study_path).map_err(|e| {
        CliError::input(
            &study_path,
            None,
            "(file)",
            format!("cannot be read: {e}"),
            "the study.toml written by `stria run`",
        )
    })?;
    let fingerprint = run.study.fingerprint();
    match read_fingerprint(&text) {
        None => {
            return Err(CliError::input(
                &study_path,
                Some(1),
                "# fingerprint",
                "the first line holds no fingerprint, so this is not the resolved study of a run",
                "the study.toml that `stria run` wrote into the run directory",
            ))
        }
        Some(recorded) if recorded != fingerprint => {
            let revision = read_model_revision(&text);
            let message = if revision != Some(model::MODEL_REVISION) {
                format!(
                    "the run was made with {}; this stria computes with model revision {}, so \
                     its evaluation would not be the design's numbers in front.csv",
                    revision.map_or("an earlier model revision".into(), |r| format!(
                        "model revision {r}"
                    )),
                    model::MODEL_REVISION
                )
            } else {
                format!(
                    "the file was changed after the run: it records fingerprint {recorded}, its \
                     contents give {fingerprint}"
                )
            };
            return Err(CliError::input(
                &study_path,
                Some(1),
                "# fingerprint",
                message,
                "the run's study.toml as `stria run` wrote it (or `stria eval FILE --set ...` \
                 with the design's values, to evaluate it under this model)",
            ));
        }
        Some(_) => {}
    }
    let row = run.front.row(id).ok_or_else(|| {
        CliError::input(
            dir.join("front.csv"),
            None,
            "--pick",
            format!("design {id} is not on the front of this run"),
            format!("an id from front.csv: {}", ids_shown(&run.front)),
        )
    })?;
    let x = rundir::x_of(&run, row)?;
    let design = run.study.design_at(&x);
    let origin = format!(
        "id {id} of the front of run {} (front.csv line {})",
        dir.display(),
        row.line
    );
    Ok((run.study, design, origin))
}

/// Run `stria eval`: the design sheet, or with `json` the evaluation in SI units with the
/// study's constraints and i/i_lim added; `samples` = (draws, seed) adds the uncertainty of
/// the outputs ([`crate::uncertainty`]).
pub fn run(
    subject: Subject,
    json: bool,
    profile: bool,
    samples: Option<(usize, Option<u64>)>,
) -> Result<(), CliError> {
    let (study, design, origin) = match subject {
        Subject::Study { path, sets } => {
            let (study, warnings) = Study::load_with(path, sets)?;
            for w in &warnings {
                eprintln!("{w}");
            }
            let design = study.baseline;
            let origin = if sets.is_empty() {
                "the study's baseline design (the values in the study file)".to_string()
            } else {
                "the study's baseline design (the values in the study file) with the --set \
                 changes"
                    .to_string()
            };
            (study, design, origin)
        }
        Subject::Pick { dir, id } => picked_design(dir, id)?,
    };
    // The profile gives i/i_lim along the channel; it is shown only when asked for. (Profiles
    // do not change the integration's steps or results.)
    let options = Options {
        profiles: true,
        ..Options::default()
    };
    let plant = study.plant.plant(
        &design,
        study.concentrate_gap_follows,
        study.concentrate_velocity_follows,
    );
    let mut p = model::plant::evaluate_plant(&plant, &study.constants, &options)
        .map_err(|e| model_error(&study, e))?;
    let constraints = constraint_checks(&study, &p);
    let ratio = p.stage_evaluations[0]
        .profiles
        .as_ref()
        .and_then(current_over_limit);
    if !profile {
        for e in &mut p.stage_evaluations {
            e.profiles = None;
        }
    }
    let e = &p.stage_evaluations[0];
    let uncertainty = crate::uncertainty::for_eval(&study, samples)?;
    if json {
        let mut v = serde_json::to_value(e).map_err(|e| CliError::json("JSON", e))?;
        crate::plant_sheet::add_to_json(&mut v, &p).map_err(|e| CliError::json("JSON", e))?;
        if let Some(obj) = v.as_object_mut() {
            if let Some(u) = &uncertainty {
                let u = serde_json::to_value(u).map_err(|e| CliError::json("JSON", e))?;
                obj.insert("uncertainty".into(), u);
            }
            obj.insert("design".into(), serde_json::json!({ "origin": origin }));
            obj.insert(
                "constraints".into(),
                serde_json::to_value(&constraints).map_err(|e| CliError::json("JSON", e))?,
            );
            obj.insert(
                "current_over_limit".into(),
                match ratio {
                    Some(r) => serde_json::json!({
                        "inlet": r.inlet,
                        "outlet": r.outlet,
                        "max": r.max,
                        "max_at_m": r.max_at_m,
                        "definition": CURRENT_OVER_LIMIT_MEANING,
                    }),
                    None => serde_json::Value::Null,
                },
            );
        }
        let text = serde_json::to_string_pretty(&v).map_err(|e| CliError::json("JSON", e))?;
        println!("{text}");
    } else {
        let plant_text = crate::plant_sheet::sheet_sections(&study, &p);
        let sheet = design_sheet(&SheetInput {
            study: &study,
            design: &design,
            origin,
            evaluation: e,
            constraints,
            current_over_limit: ratio,
            show_profiles: profile,
        });
        let sheet = crate::plant_sheet::with_plant_sections(sheet, &plant_text);
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
