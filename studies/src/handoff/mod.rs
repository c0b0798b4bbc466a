//! `stria handoff`: CFD case cards for chosen front designs, each with its unpatterned
//! reference (the same design, open fraction 1) at the same operating point.
//!
//! For each pick, two folders under the output directory (default `DIR/handoff`):
//! `design_<id>/` and `design_<id>_unpatterned/`, each with `case.json` (see [`case`]),
//! `geometry.geo` (see [`geo`]), `layout.svg` and `README.txt`. Every pick is checked and every card computed before
//! anything is written; each file is written atomically.

pub mod case;
pub mod geo;

use std::path::{Path, PathBuf};

use model::interface::{self, InterfaceConditions, MembraneKind};
use model::{Design, Drive, LengthMode, Options};

use crate::error::{io_error, CliError};
use crate::figures;
use crate::fsio::write_atomic;
use crate::rundir::{self, RunDir};
use case::{CaseCard, CaseInputs};

/// One case ready to write.
struct Prepared {
    folder: String,
    card: CaseCard,
    layout_svg: String,
    readme: String,
}

/// Linear interpolation of a profile at `x` (clamped to its ends).
pub fn interpolate(xs: &[f64], ys: &[f64], x: f64) -> f64 {
    if xs.is_empty() {
        return f64::NAN;
    }
    if x <= xs[0] {
        return ys[0];
    }
    for k in 1..xs.len() {
        if x <= xs[k] {
            let t = (x - xs[k - 1]) / (xs[k] - xs[k - 1]);
            return ys[k - 1] + t * (ys[k] - ys[k - 1]);
        }
    }
    ys[ys.len() - 1]
}

/// The local state at the channel's mid-length (where the window is placed) and the ROM's
/// interface-level predictions there. `pitches` fixes the window (None: chosen from the design).
pub fn case_inputs(
    run: &RunDir,
    design: &Design,
    design_id: u64,
    unpatterned: bool,
    pitches: Option<usize>,
) -> Result<CaseInputs, CliError> {
    let constants = &run.study.constants;
    let options = Options {
        profiles: true,
        ..Options::default()
    };
    let name = if unpatterned {
        format!("design_{design_id}_unpatterned")
    } else {
        format!("design_{design_id}")
    };
    let eval = model::evaluate(design, constants, &options)
        .map_err(|e| CliError::model(format!("{name}: the model failed"), e))?;
    let length = eval.inputs.length_m;
    // The profiles have a point at every twentieth of the integrated length, so the window's
    // state at mid-length is a solved point, not an interpolation. A product-target design
    // integrates up to its longest length; its profiles are taken from the same channel at the
    // length found (fixed length, at the voltage found), so mid-length is again a grid point.
    let at_found_length;
    let profiles_of = if matches!(design.operation.length_mode, LengthMode::Fixed) {
        &eval
    } else {
        let mut fixed = *design;
        fixed.channel.length_m = length;
        fixed.operation.length_mode = LengthMode::Fixed;
        fixed.operation.drive = Drive::Voltage {
            cell_pair_voltage_v: eval.inputs.cell_pair_voltage_V,
        };
        at_found_length = model::evaluate(&fixed, constants, &options)
            .map_err(|e| CliError::model(format!("{name}: the model failed"), e))?;
        &at_found_length
    };
    let profiles = profiles_of
        .profiles
        .as_ref()
        .ok_or_else(|| CliError::runtime(format!("{name}: the model returned no profiles")))?;
    let position = 0.5 * length;
    let c_b = interpolate(&profiles.x_m, &profiles.diluate_mol_m3, position);
    let (membrane, membrane_tm) = case::simulated_membrane(&design.membranes);
    let layer_profile = match membrane {
        MembraneKind::Cem => &profiles.cem_layer_voltage_thermal,
        MembraneKind::Aem => &profiles.aem_layer_voltage_thermal,
    };
    let v = interpolate(&profiles.x_m, layer_profile, position);
    let t = design.water.temperature_k;
    let props = model::properties::properties(design.water.salt, t, c_b);
    let conditions = InterfaceConditions {
        salt: design.water.salt,
        temperature_k: t,
        concentration_mol_m3: c_b,
        velocity_m_s: design.operation.velocity_m_s,
        gap_m: design.channel.gap_m,
        position_m: position,
        pitch_m: design.membranes.pitch_m,
        open_fraction: design.membranes.open_fraction,
        membrane_transport_number: membrane_tm,
        spacer: design.channel.spacer,
        membrane,
    };
    let state = interface::solve(&conditions, v, constants);
    let pitches = pitches.unwrap_or_else(|| {
        figures::pattern::pitches_for_window(
            design.membranes.pitch_m,
            state.boundary_layer_thickness_m,
            state.vortex_wavelength_m,
        )
    });
    let cell_pair_voltage_v = match design.operation.drive {
        Drive::Voltage {
            cell_pair_voltage_v,
        } => cell_pair_voltage_v,
        Drive::Current { .. } => eval.inputs.cell_pair_voltage_V,
    };
    Ok(CaseInputs {
        name,
        design_id,
        unpatterned,
        study: run.study.name.clone(),
        salt: design.water.salt.name().to_string(),
        temperature_k: t,
        gap_m: design.channel.gap_m,
        channel_length_m: length,
        pitch_m: design.membranes.pitch_m,
        open_fraction: design.membranes.open_fraction,
        velocity_m_s: design.operation.velocity_m_s,
        cell_pair_voltage_v,
        position_m: position,
        bulk_concentration_mol_m3: c_b,
        salt_diffusivity_m2_s: props.salt_diffusivity_m2_s,
        cation_transport_number: props.cation_transport_number,
        membrane,
        membrane_transport_number: membrane_tm,
        relative_permittivity: props.relative_permittivity,
        density_kg_m3: props.density_kg_m3,
        dynamic_viscosity_pa_s: props.dynamic_viscosity_pa_s,
        layer_voltage_thermal: v,
        boundary_layer_thickness_m: state.boundary_layer_thickness_m,
        limiting_current_density_a_m2: state.limiting_current_density_a_m2,
        heterogeneous_limit_a_m2: state.heterogeneous_limit_a_m2,
        current_density_a_m2: state.current_density_a_m2,
        active_area_fraction: state.active_area_fraction,
        vortex_wavelength_m: state.vortex_wavelength_m,
        pitches_in_window: pitches,
    })
}

fn layout(card: &CaseCard) -> Result<String, CliError> {
    let g = &card.geometry;
    let title = format!(
        "{}: window of {} pitches at {:.3} m, to scale",
        card.name, g.pitches_in_window, g.window_centre_from_inlet_m
    );
    figures::pattern(&figures::PatternFigure {
        title: &title,
        window_m: g.window_length_m,
        height_m: g.gap_m,
        conducting: &g.conducting_stripes_m,
        delta_m: card.operating_point.boundary_layer_thickness_m,
        wavelength_m: card.predictions.vortex_wavelength_m.value,
        wall_m: Some(g.gap_m),
    })
    .map_err(CliError::from)
}

/// The README.txt of a case.
pub fn readme(card: &CaseCard) -> String {
    let g = &card.geometry;
    let p = &card.predictions;
    let d = &card.dimensionless;
    let wavelength = match p.vortex_wavelength_m.value {
        Some(l) => format!("{l:.4e} m"),
        None => "none (no electroconvection predicted)".into(),
    };
    format!(
        "CFD case {name} (study {study})\n\
         {rule}\n\n\
         WHAT THIS IS\n\
         {description}\n\
         Domain: 2-D, the channel gap ({gap:.4e} m) by a window of {n} stripe pitches \
         ({window:.4e} m) starting {start:.4e} m from the channel inlet. The {membrane} \
         ({exchange}) is the wall y = 0; stripe edges are in case.json \
         (geometry.conducting_stripes_m, geometry.inert_stripes_m, metres from the window start).\n\
         layout.svg draws the window to scale with the diffusion-layer thickness and the \
         predicted vortex size. geometry.geo is the same window in Gmsh's geometry format, \
         with the boundaries as named physical groups and the mesh sizes below \
         (`gmsh -2 geometry.geo` meshes it).\n\n\
         WHAT TO RUN\n\
         Poisson-Nernst-Planck-Stokes (or Navier-Stokes) for the two ions of {salt} at \
         {temp:.2} K, with the boundary conditions of case.json (boundary_conditions: inflow, \
         outflow, conducting stripes, inert stripes, opposite wall). Apply the diffusion-layer \
         voltage {vv:.4e} V ({vt:.3} thermal units). Dimensionless groups: lambda_D/delta = \
         {ld:.3e}, coupling constant = {ehd:.3}, Peclet = {pe}, Schmidt = {sc}, \
         Reynolds = {re}.\n\
         Mesh: first wall-normal cell {dy:.3e} m (a quarter of a Debye length), about {cells} \
         cells (see case.json mesh.basis). Run until the window-mean current is statistically \
         steady, then average over at least 20 vortex turnover times.\n\n\
         WHAT THE ROM PREDICTS (please confirm or refute)\n\
         current density: {cd:.4} A/m^2 -- {cd_def}\n\
         active-area fraction: {aa:.4} -- {aa_def}\n\
         vortex wavelength: {wavelength} -- {wl_def}\n\n\
         WHAT TO SEND BACK\n\
         A CSV file that `stria fit DATA.csv --study STUDY.toml` reads: one row per simulated \
         voltage, header\n\
         curve,layer_voltage_V,current_density_A_m2,concentration_mol_m3,velocity_m_s,pitch_m,open_fraction,gap_m,temperature_K,position_m\n\
         with curve = {name}, layer_voltage_V the voltage applied across the layer as above \
         (bulk minus membrane surface, the membrane's own ohmic drop excluded), \
         current_density_A_m2 the window-mean current density as defined above, and the \
         conditions of this case:\n\
         {name},<V>,<A/m^2>,{c},{u},{pitch},{of},{gap},{temp},{pos}\n\
         A sweep of 8 or more voltages from below the limiting current to about twice this \
         case's voltage informs the onset voltage, the overlimiting conductance and, with the \
         patterned and unpatterned cases together, the lock-in constants. Lines starting with \
         # are comments.\n\n\
         CAUTION\n\
         {caution}\n",
        name = card.name,
        study = card.study,
        rule = "=".repeat(40),
        description = card.description,
        gap = g.gap_m,
        n = g.pitches_in_window,
        window = g.window_length_m,
        start = g.window_start_from_inlet_m,
        salt = card.electrolyte.salt,
        temp = card.electrolyte.temperature_K,
        vv = card.operating_point.layer_voltage_V,
        vt = card.operating_point.layer_voltage_thermal,
        ld = d.debye_over_delta.value,
        ehd = d.ehd_coupling.value,
        pe = figures::fmt_num(d.peclet.value),
        sc = figures::fmt_num(d.schmidt.value),
        re = figures::fmt_num(d.reynolds.value),
        dy = card.mesh.wall_normal_first_spacing_m,
        cells = card.mesh.estimated_cells,
        cd = p.current_density_A_m2.value,
        cd_def = p.current_density_A_m2.definition,
        aa = p.active_area_fraction.value,
        aa_def = p.active_area_fraction.definition,
        wl_def = p.vortex_wavelength_m.definition,
        c = card.electrolyte.bulk_concentration_mol_m3,
        u = card.operating_point.mean_velocity_m_s,
        pitch = g.pitch_m,
        of = g.open_fraction,
        pos = g.window_centre_from_inlet_m,
        caution = crate::CAUTION,
        membrane = if card.unpatterned_reference {
            format!("unpatterned {}", card.membrane)
        } else {
            format!("patterned {}", card.membrane)
        },
        exchange = if card.membrane == MembraneKind::Aem.name() {
            "anion-exchange membrane"
        } else {
            "cation-exchange membrane"
        },
    )
}

/// `stria handoff DIR --pick ID [--pick ID ...] [--out DIR2]`.
pub fn run(dir: &Path, picks: &[u64], out: Option<&Path>) -> Result<(), CliError> {
    let run = rundir::read(dir)?;
    if picks.is_empty() {
        return Err(CliError::input(
            "command line",
            None,
            "--pick",
            "no design chosen",
            "one or more --pick ID with ids from front.csv",
        ));
    }
    let ids: Vec<String> = run.front.rows.iter().map(|r| r.id.to_string()).collect();
    let shown = if ids.len() > 30 {
        format!("{} ... ({} designs)", ids[..30].join(", "), ids.len())
    } else {
        ids.join(", ")
    };
    let mut rows = Vec::new();
    for id in picks {
        let row = run.front.row(*id).ok_or_else(|| {
            CliError::input(
                dir.join("front.csv"),
                None,
                "--pick",
                format!("design {id} is not on the front of this run"),
                format!("an id from front.csv: {shown}"),
            )
        })?;
        if !rows.iter().any(|r: &&rundir::FrontRow| r.id == *id) {
            rows.push(row);
        }
    }
    let mut prepared = Vec::new();
    for row in rows {
        let x = rundir::x_of(&run, row)?;
        let design = run.study.design_at(&x);
        let patterned = case_inputs(&run, &design, row.id, false, None)?;
        let n = patterned.pitches_in_window;
        let base = case_inputs(&run, &rundir::unpatterned(&design), row.id, true, Some(n))?;
        for inp in [patterned, base] {
            let card = case::build(&inp);
            prepared.push(Prepared {
                folder: inp.name.clone(),
                layout_svg: layout(&card)?,
                readme: readme(&card),
                card,
            });
        }
    }
    let out: PathBuf = out
        .map(Path::to_path_buf)
        .unwrap_or_else(|| dir.join("handoff"));
    for p in &prepared {
        let folder = out.join(&p.folder);
        std::fs::create_dir_all(&folder).map_err(|e| io_error("create", &folder, e))?;
        let json =
            serde_json::to_string_pretty(&p.card).map_err(|e| CliError::json("case.json", e))?;
        let geometry = geo::geo(&p.card);
        for (file, bytes) in [
            ("case.json", json.as_bytes()),
            ("geometry.geo", geometry.as_bytes()),
            ("layout.svg", p.layout_svg.as_bytes()),
            ("README.txt", p.readme.as_bytes()),
        ] {
            let path = folder.join(file);
            write_atomic(&path, bytes).map_err(|e| io_error("write", &path, e))?;
        }
        println!(
            "{}: {} pitches, lambda_D/delta {:.3e}, coupling {:.3}, about {} cells, ROM current {:.4} A/m^2",
            folder.display(),
            p.card.geometry.pitches_in_window,
            p.card.dimensionless.debye_over_delta.value,
            p.card.dimensionless.ehd_coupling.value,
            p.card.mesh.estimated_cells,
            p.card.predictions.current_density_A_m2.value,
        );
    }
    println!(
        "Send each folder to the CFD group; their current-voltage results come back through \
         `stria fit` (format in each README.txt)."
    );
    Ok(())
}
