//! `stria handoff`: every number of case.json recomputed here from the published relations with
//! CODATA constants (not through the model), stripe layout against pitch and open fraction,
//! schema version, and a clear error for an id that is not on the front.

mod outputs_support;
use outputs_support as fixture;

use serde_json::Value;
use studies::handoff;

// CODATA 2018 (docs/references.md#physical-constants): exact SI 2019 values of R and F, and eps_0.
const R: f64 = 8.314462618;
const F: f64 = 96485.33212;
const EPS0: f64 = 8.8541878128e-12;

fn num(v: &Value, path: &str) -> f64 {
    let mut x = v;
    for k in path.split('.') {
        x = &x[k];
    }
    x.as_f64()
        .unwrap_or_else(|| panic!("{path} is not a number: {x}"))
}

fn close(a: f64, b: f64, rel: f64, what: &str) {
    assert!((a - b).abs() <= rel * b.abs(), "{what}: {a} vs {b}");
}

fn check_case(c: &Value, unpatterned: bool) {
    assert_eq!(c["schema"], "stria.cfd_case");
    assert_eq!(c["schema_version"].as_u64(), Some(2));
    assert_eq!(c["unpatterned_reference"].as_bool(), Some(unpatterned));
    let t = num(c, "electrolyte.temperature_K");
    let conc = num(c, "electrolyte.bulk_concentration_mol_m3");
    let eps_r = num(c, "electrolyte.relative_permittivity");
    let d = num(c, "electrolyte.salt_diffusivity_m2_s");
    let mu = num(c, "fluid.dynamic_viscosity_Pa_s");
    let rho = num(c, "fluid.density_kg_m3");
    let u = num(c, "operating_point.mean_velocity_m_s");
    let h = num(c, "geometry.gap_m");
    let delta = num(c, "operating_point.boundary_layer_thickness_m");
    let vt = R * t / F;
    // thermal voltage RT/F
    close(
        num(c, "electrolyte.thermal_voltage_V"),
        vt,
        1e-12,
        "thermal voltage",
    );
    // Debye length sqrt(eps_r eps_0 R T / (2 F^2 c)) (Israelachvili 2011, ch. 14; IUPAC Gold Book)
    let ld = (eps_r * EPS0 * R * t / (2.0 * F * F * conc)).sqrt();
    close(
        num(c, "electrolyte.debye_length_m"),
        ld,
        1e-12,
        "Debye length",
    );
    close(
        num(c, "electrolyte.permittivity_F_m"),
        eps_r * EPS0,
        1e-12,
        "permittivity",
    );
    close(
        num(c, "fluid.kinematic_viscosity_m2_s"),
        mu / rho,
        1e-12,
        "kinematic viscosity",
    );
    close(
        num(c, "dimensionless.debye_over_delta.value"),
        ld / delta,
        1e-12,
        "lambda_D/delta",
    );
    // electrohydrodynamic coupling constant eps (RT/F)^2 / (mu D) (Rubinstein and Zaltzman 2000)
    close(
        num(c, "dimensionless.ehd_coupling.value"),
        eps_r * EPS0 * vt * vt / (mu * d),
        1e-12,
        "coupling",
    );
    // Peclet U h / D, Schmidt nu / D, Reynolds U d_h / nu with d_h = 2 h (docs/references.md#hydraulics)
    close(
        num(c, "dimensionless.peclet.value"),
        u * h / d,
        1e-12,
        "Peclet",
    );
    close(
        num(c, "dimensionless.schmidt.value"),
        mu / (rho * d),
        1e-12,
        "Schmidt",
    );
    close(
        num(c, "dimensionless.reynolds.value"),
        u * 2.0 * h * rho / mu,
        1e-12,
        "Reynolds",
    );
    let v = num(c, "operating_point.layer_voltage_thermal");
    close(
        num(c, "dimensionless.voltage_thermal.value"),
        v,
        1e-12,
        "voltage",
    );
    close(
        num(c, "operating_point.layer_voltage_V"),
        v * vt,
        1e-12,
        "layer voltage in V",
    );
    // property inputs against handbook values at the case temperature (16 C, from memory:
    // water viscosity 1.11 mPa s; permittivity 81.6 from the Malmberg and Maryott 1956
    // polynomial; NaCl D by Stokes-Einstein from 1.611e-9 at
    // 25 C: docs/references.md#electrolytes), wide tolerances
    close(mu, 1.11e-3, 0.03, "viscosity at 16 C");
    close(eps_r, 81.6, 0.02, "permittivity at 16 C");
    close(
        d,
        1.611e-9 * (t / 298.15) * (0.8900e-3 / mu),
        0.03,
        "salt diffusivity",
    );

    // geometry: a whole number of pitches, centred at mid-channel, stripes consistent
    let pitch = num(c, "geometry.pitch_m");
    let f = num(c, "geometry.open_fraction");
    let n = c["geometry"]["pitches_in_window"].as_u64().unwrap() as usize;
    let window = num(c, "geometry.window_length_m");
    close(window, n as f64 * pitch, 1e-12, "window");
    close(
        num(c, "geometry.window_centre_from_inlet_m"),
        0.5 * num(c, "geometry.channel_length_m"),
        1e-12,
        "centre",
    );
    close(
        num(c, "geometry.window_start_from_inlet_m"),
        0.5 * num(c, "geometry.channel_length_m") - 0.5 * window,
        1e-9,
        "start",
    );
    let strip = |k: &str| -> Vec<(f64, f64)> {
        c["geometry"][k]
            .as_array()
            .unwrap()
            .iter()
            .map(|s| (s[0].as_f64().unwrap(), s[1].as_f64().unwrap()))
            .collect()
    };
    let (cond, inert) = (strip("conducting_stripes_m"), strip("inert_stripes_m"));
    if unpatterned {
        assert!((f - 1.0).abs() < 1e-15);
        assert_eq!(cond.len(), 1);
        assert!(inert.is_empty());
        close(
            cond[0].1 - cond[0].0,
            window,
            1e-12,
            "one conducting stripe",
        );
    } else {
        assert_eq!(cond.len(), n);
        assert_eq!(inert.len(), n);
        for k in 0..n {
            close(
                cond[k].0 + 1e-300,
                k as f64 * pitch + 1e-300,
                1e-9,
                "conducting start",
            );
            close(cond[k].1 - cond[k].0, f * pitch, 1e-9, "conducting width");
            close(inert[k].0, cond[k].1, 1e-12, "inert follows conducting");
            close(
                inert[k].1 - inert[k].0,
                (1.0 - f) * pitch,
                1e-9,
                "inert width",
            );
        }
        let open: f64 = cond.iter().map(|s| s.1 - s.0).sum();
        close(open / window, f, 1e-9, "open share of the window");
        close(inert[n - 1].1, window, 1e-12, "stripes fill the window");
    }
    // mesh: a quarter Debye length at the wall, cells = streamwise x wall-normal
    close(
        num(c, "mesh.wall_normal_first_spacing_m"),
        ld / 4.0,
        1e-12,
        "first cell",
    );
    let nx = c["mesh"]["streamwise_cells"].as_u64().unwrap();
    let ny = c["mesh"]["wall_normal_cells"].as_u64().unwrap();
    assert_eq!(c["mesh"]["estimated_cells"].as_u64().unwrap(), nx * ny);
    assert_eq!(
        nx,
        (window / num(c, "mesh.streamwise_spacing_m")).ceil() as u64
    );
    // a graded mesh needs fewer cells across the gap than a uniform one at the wall spacing,
    // and at least the uniform count at the largest spacing
    assert!(
        ny as f64 <= h / (ld / 4.0) && ny as f64 >= h / num(c, "mesh.wall_normal_max_spacing_m")
    );
    // predictions with definitions
    for k in [
        "current_density_A_m2",
        "active_area_fraction",
        "vortex_wavelength_m",
    ] {
        assert!(
            c["predictions"][k]["definition"].as_str().unwrap().len() > 40,
            "{k}"
        );
    }
    let a = num(c, "predictions.active_area_fraction.value");
    assert!(a > 0.0 && a <= f + 1e-12, "active-area fraction {a}");
    assert!(num(c, "predictions.current_density_A_m2.value") > 0.0);
    assert!(c["predictions"]["active_area_fraction"]["definition"]
        .as_str()
        .unwrap()
        .contains("0.1 of the bulk"));
    assert_eq!(c["boundary_conditions"].as_array().unwrap().len(), 5);

    // the ROM's predictions are reproducible from the card's own conditions
    let cond = model::interface::InterfaceConditions {
        salt: model::Salt::NaCl,
        temperature_k: t,
        concentration_mol_m3: conc,
        velocity_m_s: u,
        gap_m: h,
        position_m: num(c, "geometry.window_centre_from_inlet_m"),
        pitch_m: pitch,
        open_fraction: f,
        membrane_transport_number: num(c, "electrolyte.membrane_transport_number"),
        spacer: model::Spacer::None,
        membrane: if c["membrane"] == "AEM" {
            model::interface::MembraneKind::Aem
        } else {
            model::interface::MembraneKind::Cem
        },
    };
    let k = studies::study::Study::load(&fixture::demo("quick.toml"))
        .unwrap()
        .0
        .constants;
    let s = model::interface::solve(&cond, v, &k);
    close(
        num(c, "predictions.current_density_A_m2.value"),
        s.current_density_a_m2,
        1e-12,
        "current",
    );
    close(a, s.active_area_fraction, 1e-12, "active area");
    close(delta, s.boundary_layer_thickness_m, 1e-12, "delta");
    close(
        num(c, "operating_point.limiting_current_density_A_m2"),
        s.limiting_current_density_a_m2,
        1e-12,
        "i_lim",
    );
    close(
        num(c, "operating_point.heterogeneous_limit_A_m2"),
        s.heterogeneous_limit_a_m2,
        1e-12,
        "i_het",
    );
    match s.vortex_wavelength_m {
        Some(l) => close(
            num(c, "predictions.vortex_wavelength_m.value"),
            l,
            1e-12,
            "wavelength",
        ),
        None => assert!(c["predictions"]["vortex_wavelength_m"]["value"].is_null()),
    }
}

#[test]
fn case_cards_recompute_from_published_relations() {
    let dir = tempfile::tempdir().unwrap();
    let ids = fixture::write_run(dir.path(), &["salt_removal_rate", "specific_energy"]);
    let out = dir.path().join("cards");
    handoff::run(dir.path(), &[ids[0], ids[2]], Some(&out)).unwrap();
    for id in [ids[0], ids[2]] {
        let read = |name: &str| -> Value {
            serde_json::from_str(
                &std::fs::read_to_string(out.join(name).join("case.json")).unwrap(),
            )
            .unwrap()
        };
        let p = read(&format!("design_{id}"));
        let b = read(&format!("design_{id}_unpatterned"));
        check_case(&p, false);
        check_case(&b, true);
        // like with like: same window, operating point and design id
        for k in [
            "geometry.window_length_m",
            "geometry.gap_m",
            "operating_point.mean_velocity_m_s",
            "operating_point.cell_pair_voltage_V",
        ] {
            close(num(&b, k), num(&p, k), 1e-12, k);
        }
        assert_eq!(p["design_id"], b["design_id"]);
        for name in [format!("design_{id}"), format!("design_{id}_unpatterned")] {
            let svg = std::fs::read_to_string(out.join(&name).join("layout.svg")).unwrap();
            roxmltree::Document::parse(&svg).unwrap();
            let readme = std::fs::read_to_string(out.join(&name).join("README.txt")).unwrap();
            assert!(readme.contains("curve,layer_voltage_V,current_density_A_m2"));
            assert!(readme.contains("screening model") && readme.contains("stria fit"));
        }
    }
}

#[test]
fn the_coupling_constant_of_aqueous_nacl_at_25_c_is_about_one_half() {
    // From memory: the electroconvection literature uses about 0.5 for aqueous KCl/NaCl; with the
    // salt diffusivity of NaCl it comes out near 0.3, so a wide band. Independently, the same
    // relation with the reference values of docs/references.md#debye-length (eps_r 78.4, mu 0.8900 mPa s,
    // D 1.611e-9 m^2/s, IAPWS and CRC) must agree with the card within 3 %.
    let t = 298.15;
    let p = model::properties::properties(model::Salt::NaCl, t, 10.0);
    let vt = R * t / F;
    let card_value = p.relative_permittivity * EPS0 * vt * vt
        / (p.dynamic_viscosity_pa_s * p.salt_diffusivity_m2_s);
    let reference = 78.4 * EPS0 * vt * vt / (0.8900e-3 * 1.611e-9);
    eprintln!("coupling constant, NaCl 25 C: {card_value:.4} (handbook values: {reference:.4})");
    close(
        card_value,
        reference,
        0.03,
        "coupling constant vs reference properties",
    );
    assert!(
        (0.25..=1.0).contains(&card_value),
        "{card_value} not about 0.5"
    );
    // and the card computes the same from the same properties
    let inputs = studies::handoff::case::CaseInputs {
        name: "t".into(),
        design_id: 0,
        unpatterned: false,
        study: "t".into(),
        salt: "NaCl".into(),
        temperature_k: t,
        gap_m: 5e-4,
        channel_length_m: 0.4,
        pitch_m: 1e-4,
        open_fraction: 0.5,
        velocity_m_s: 0.04,
        cell_pair_voltage_v: 2.0,
        position_m: 0.2,
        bulk_concentration_mol_m3: 10.0,
        salt_diffusivity_m2_s: p.salt_diffusivity_m2_s,
        cation_transport_number: p.cation_transport_number,
        membrane: model::interface::MembraneKind::Cem,
        membrane_transport_number: 0.97,
        relative_permittivity: p.relative_permittivity,
        density_kg_m3: p.density_kg_m3,
        dynamic_viscosity_pa_s: p.dynamic_viscosity_pa_s,
        layer_voltage_thermal: 30.0,
        boundary_layer_thickness_m: 1e-4,
        limiting_current_density_a_m2: 20.0,
        heterogeneous_limit_a_m2: 18.0,
        current_density_a_m2: 25.0,
        active_area_fraction: 0.3,
        vortex_wavelength_m: Some(1.2e-4),
        pitches_in_window: 5,
    };
    let card = studies::handoff::case::build(&inputs);
    close(
        card.dimensionless.ehd_coupling.value,
        card_value,
        1e-12,
        "card coupling",
    );
    // Debye length at 10 mM, 25 C: 0.304 / sqrt(0.01) nm = 3.04 nm (Israelachvili), 0.5 %
    close(
        card.electrolyte.debye_length_m,
        3.04e-9,
        0.005,
        "Debye length 10 mM",
    );
}

#[test]
fn an_id_not_on_the_front_is_a_clear_error_and_nothing_is_written() {
    let dir = tempfile::tempdir().unwrap();
    let ids = fixture::write_run(dir.path(), &["salt_removal_rate", "specific_energy"]);
    let out = dir.path().join("cards");
    let e = handoff::run(dir.path(), &[ids[0], 999_999], Some(&out)).unwrap_err();
    assert_eq!(e.exit_code(), 2);
    let msg = e.to_string();
    assert!(
        msg.contains("999999")
            && msg.contains("not on the front")
            && msg.contains(&ids[0].to_string()),
        "{msg}"
    );
    assert!(!out.exists(), "nothing written");
}

#[test]
fn the_binary_exits_2_with_one_clear_message_for_an_unknown_id() {
    let dir = tempfile::tempdir().unwrap();
    let ids = fixture::write_run(dir.path(), &["salt_removal_rate", "specific_energy"]);
    let out = std::process::Command::new(env!("CARGO_BIN_EXE_stria"))
        .arg("handoff")
        .arg(dir.path())
        .args(["--pick", &ids[1].to_string(), "--pick", "424242"])
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(2));
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(
        err.contains("424242") && err.contains("front.csv") && !err.contains("panicked"),
        "{err}"
    );
    assert!(!dir.path().join("handoff").exists());
}

/// Peers limit F D c / ((tm - t) delta) from the card's own numbers (Peers, Discuss. Faraday
/// Soc. 21 (1956); docs/references.md#limiting-current-and-membranes), with t the counter-ion's transport number in solution.
fn peers_from_card(c: &Value) -> f64 {
    let t_plus = num(c, "electrolyte.cation_transport_number");
    let t = if c["membrane"] == "AEM" {
        1.0 - t_plus
    } else {
        t_plus
    };
    F * num(c, "electrolyte.salt_diffusivity_m2_s")
        * num(c, "electrolyte.bulk_concentration_mol_m3")
        / ((num(c, "electrolyte.membrane_transport_number") - t)
            * num(c, "operating_point.boundary_layer_thickness_m"))
}

#[test]
fn an_aem_pattern_gets_cards_of_the_anion_exchange_interface() {
    let dir = tempfile::tempdir().unwrap();
    let ids = fixture::write_run_with(
        dir.path(),
        &["salt_removal_rate", "specific_energy"],
        &[("pattern_side = \"cem\"", "pattern_side = \"aem\"")],
    );
    let out = dir.path().join("cards");
    handoff::run(dir.path(), &[ids[0]], Some(&out)).unwrap();
    let read = |name: &str| -> Value {
        serde_json::from_str(&std::fs::read_to_string(out.join(name).join("case.json")).unwrap())
            .unwrap()
    };
    let p = read(&format!("design_{}", ids[0]));
    let b = read(&format!("design_{}_unpatterned", ids[0]));
    for (c, unpatterned) in [(&p, false), (&b, true)] {
        check_case(c, unpatterned);
        assert_eq!(c["membrane"], "AEM");
        assert!(c["description"]
            .as_str()
            .unwrap()
            .contains("anion-exchange membrane"));
        let bc = c["boundary_conditions"].as_array().unwrap();
        let stripes = bc
            .iter()
            .find(|x| x["boundary"] == "conducting stripes")
            .unwrap();
        assert!(stripes["ions"]
            .as_str()
            .unwrap()
            .starts_with("ideal anion-selective surface"));
        // anions leave the diluate towards the anode: the AEM sits above the opposite wall
        assert!(stripes["potential"]
            .as_str()
            .unwrap()
            .starts_with("phi = +V"));
        let opposite = bc
            .iter()
            .find(|x| x["boundary"] == "opposite wall")
            .unwrap();
        assert!(opposite["ions"]
            .as_str()
            .unwrap()
            .contains("cation-exchange wall"));
        // the AEM's transport number from the study, and its Peers limit (t- = 1 - t+)
        close(
            num(c, "electrolyte.membrane_transport_number"),
            0.96,
            1e-12,
            "AEM transport number of the quick demo",
        );
        close(
            num(c, "operating_point.limiting_current_density_A_m2"),
            peers_from_card(c),
            1e-9,
            "Peers limit at the AEM",
        );
    }

    // The CEM cards of the same designs keep the cation-exchange wording and the CEM's limit,
    // which for NaCl is lower than the AEM's at the same layer (t+ < t-).
    let cem_dir = dir.path().join("cem");
    std::fs::create_dir_all(&cem_dir).unwrap();
    let cem_ids = fixture::write_run(&cem_dir, &["salt_removal_rate", "specific_energy"]);
    let cem_out = cem_dir.join("cards");
    handoff::run(&cem_dir, &[cem_ids[0]], Some(&cem_out)).unwrap();
    let q: Value = serde_json::from_str(
        &std::fs::read_to_string(
            cem_out
                .join(format!("design_{}", cem_ids[0]))
                .join("case.json"),
        )
        .unwrap(),
    )
    .unwrap();
    assert_eq!(q["membrane"], "CEM");
    close(
        num(&q, "operating_point.limiting_current_density_A_m2"),
        peers_from_card(&q),
        1e-9,
        "Peers limit at the CEM",
    );
}

#[test]
fn the_window_state_is_the_solved_state_at_mid_length() {
    // Analytic property of the balances: in co-current flow at a fixed cell-pair voltage, the
    // state at x of a channel is the outlet state of a channel of length x. The card's bulk
    // concentration and layer voltage at the window centre (mid-length) must be that state to
    // the model's integration accuracy (1e-6), also for a product-target design, whose length
    // is found (the first cards interpolated linearly between integration steps and missed it
    // by up to 0.5 %).
    use studies::rundir;
    for edits in [
        vec![],
        vec![(
            "length_mode = \"fixed\"",
            "length_mode = \"product_target\"\nproduct_target_mol_m3 = 30.0",
        )],
    ] {
        let dir = tempfile::tempdir().unwrap();
        let ids = fixture::write_run_with(
            dir.path(),
            &["salt_removal_rate", "specific_energy"],
            &edits,
        );
        let run = rundir::read(dir.path()).unwrap();
        let row = run.front.row(ids[0]).unwrap();
        let design = run.study.design_at(&rundir::x_of(&run, row).unwrap());
        let inputs = handoff::case_inputs(&run, &design, ids[0], false, None).unwrap();
        let k = &run.study.constants;
        let full = model::evaluate(&design, k, &model::Options::default()).unwrap();
        let mut half = design;
        half.channel.length_m = inputs.position_m;
        half.operation.length_mode = model::LengthMode::Fixed;
        half.operation.drive = model::Drive::Voltage {
            cell_pair_voltage_v: full.inputs.cell_pair_voltage_V,
        };
        close(
            2.0 * inputs.position_m,
            full.inputs.length_m,
            1e-12,
            "window at mid-length",
        );
        let o = model::Options {
            profiles: true,
            ..model::Options::default()
        };
        let h = model::evaluate(&half, k, &o).unwrap();
        let hp = h.profiles.unwrap();
        close(
            inputs.bulk_concentration_mol_m3,
            h.performance.outlet_concentration_mol_m3,
            1e-6,
            "bulk concentration at mid-length",
        );
        close(
            inputs.layer_voltage_thermal,
            *hp.cem_layer_voltage_thermal.last().unwrap(),
            1e-6,
            "layer voltage at mid-length",
        );
    }
}
