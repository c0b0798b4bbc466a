//! Behaviour of the public API: validity warnings (docs/physics.md#validity), input errors, the
//! current-voltage curve, profiles, the JSON schema of `stria eval --json`, and the
//! convergence of the outlet in the integration tolerance.
#![allow(clippy::float_cmp)] // defaults and exact zeros are compared with the literals they are

mod support;

use model::*;
use rand::SeedableRng;
use rand_chacha::ChaCha8Rng;
use support::{random_design, Spread};

fn eval(d: &Design) -> Evaluation {
    evaluate(d, &RomConstants::default(), &Options::default()).unwrap()
}

fn warned(e: &Evaluation, quantity: &str) -> Option<Warning> {
    e.warnings.iter().find(|w| w.quantity == quantity).cloned()
}

#[test]
fn demo_has_no_warnings() {
    assert!(eval(&Design::demo()).warnings.is_empty());
}

#[test]
fn warnings_name_quantity_value_and_bound() {
    let mut d = Design::demo();
    d.channel.gap_m = 2e-3;
    d.operation.velocity_m_s = 1.5;
    let w = warned(&eval(&d), "reynolds").expect("turbulent-range warning");
    assert!(w.value > w.bound && w.bound == validity::RE_LAMINAR_MAX);

    let mut d = Design::demo();
    d.membranes.pitch_m = 5e-6;
    let w = warned(&eval(&d), "pitch_m").expect("pitch warning");
    assert_eq!(w.value, 5e-6);

    let mut d = Design::demo();
    d.membranes.open_fraction = 0.05;
    let w = warned(&eval(&d), "open_fraction").expect("open fraction warning");
    assert_eq!(w.bound, validity::OPEN_FRACTION_MIN);

    let mut d = Design::demo();
    d.operation.drive = Drive::Voltage {
        cell_pair_voltage_v: 12.0,
    };
    let e = eval(&d);
    assert!(
        warned(&e, "layer_voltage_thermal").is_some(),
        "{:?}",
        e.warnings
    );
    let ws = warned(&e, "water_splitting_share").expect("water splitting warning");
    assert!(ws.value > 0.0 && ws.message.contains("pH"));
    assert!(e.performance.current_efficiency < 0.93);

    let mut d = Design::demo();
    d.water.feed_concentration_mol_m3 = 700.0;
    d.water.concentrate_feed_concentration_mol_m3 = 700.0;
    assert!(warned(&eval(&d), "feed_concentration_mol_m3").is_some());

    let mut d = Design::demo();
    d.channel.length_m = 8.0;
    assert!(warned(&eval(&d), "outlet_concentration_mol_m3").is_some());
}

#[test]
fn bad_inputs_are_errors_naming_the_field() {
    let k = RomConstants::default();
    let o = Options::default();
    let mut d = Design::demo();
    d.channel.gap_m = -1.0;
    match evaluate(&d, &k, &o) {
        Err(ModelError::Input { field, .. }) => assert_eq!(field, "gap_m"),
        other => panic!("{other:?}"),
    }
    let mut d = Design::demo();
    d.membranes.cem_transport_number = 0.3; // below the solution's t+ of NaCl
    assert!(matches!(
        evaluate(&d, &k, &o),
        Err(ModelError::Input {
            field: "cem_transport_number",
            ..
        })
    ));
    let bad = RomConstants {
        overlimiting_exponent: 0.5,
        ..RomConstants::default()
    };
    assert!(matches!(
        evaluate(&Design::demo(), &bad, &o),
        Err(ModelError::Input {
            field: "overlimiting_exponent",
            ..
        })
    ));
}

#[test]
fn iv_curve_is_monotone_and_zero_below_membrane_potential() {
    let d = Design::demo();
    let volts: Vec<f64> = (0..80).map(|j| 0.05 * j as f64).collect();
    let iv = iv_curve(&d, &RomConstants::default(), &volts);
    assert_eq!(iv.len(), volts.len());
    assert_eq!(iv[0].current_density_a_m2, 0.0);
    for w in iv.windows(2) {
        assert!(w[1].current_density_a_m2 > w[0].current_density_a_m2);
        assert!(w[1].cem_layer_voltage_thermal >= w[0].cem_layer_voltage_thermal);
    }
}

#[test]
fn profiles_cover_the_channel() {
    let o = Options {
        profiles: true,
        ..Options::default()
    };
    let e = evaluate(&Design::demo(), &RomConstants::default(), &o).unwrap();
    let p = e.profiles.unwrap();
    assert_eq!(p.x_m[0], 0.0);
    assert!((p.x_m.last().unwrap() - 0.45).abs() < 1e-12);
    assert!(p.x_m.windows(2).all(|w| w[1] > w[0]));
    assert!(p.diluate_mol_m3.windows(2).all(|w| w[1] <= w[0]));
    let n = p.x_m.len();
    for v in [
        &p.concentrate_mol_m3,
        &p.current_density_A_m2,
        &p.limiting_current_density_A_m2,
        &p.active_area_fraction,
        &p.cem_layer_voltage_thermal,
    ] {
        assert_eq!(v.len(), n);
    }
    assert!(
        (p.diluate_mol_m3.last().unwrap() - e.performance.outlet_concentration_mol_m3).abs()
            < 1e-12
    );
}

#[test]
fn profile_points_inside_steps_are_on_the_solution() {
    // Analytic property: in co-current flow at a fixed cell-pair voltage, the state at x in a
    // channel of length L is the outlet state of a channel of length x (the Leveque layer
    // depends on x alone). The profile's point at every twentieth of the length, mid-length
    // included, comes from the integrator's continuous extension and a point solve there; it
    // must match a half-length channel's outlet to the integration accuracy (1e-6). Linear
    // interpolation between step ends missed it by 0.1-0.5 % at these voltages.
    let k = RomConstants::default();
    let with = Options {
        profiles: true,
        ..Options::default()
    };
    for u in [0.5, 2.0, 3.0] {
        let mut d = Design::demo();
        d.operation.drive = Drive::Voltage {
            cell_pair_voltage_v: u,
        };
        let e = evaluate(&d, &k, &with).unwrap();
        let p = e.profiles.as_ref().unwrap();
        let mid = 0.5 * d.channel.length_m;
        let j = p
            .x_m
            .iter()
            .position(|&x| x == mid)
            .expect("a point at mid-length");
        let mut half = d;
        half.channel.length_m = mid;
        let h = evaluate(&half, &k, &with).unwrap();
        let hp = h.profiles.as_ref().unwrap();
        let n = hp.x_m.len() - 1;
        let rel = |a: f64, b: f64| (a / b - 1.0).abs();
        assert!(
            rel(p.diluate_mol_m3[j], hp.diluate_mol_m3[n]) < 1e-6,
            "U {u}: diluate"
        );
        assert!(rel(p.current_density_A_m2[j], hp.current_density_A_m2[n]) < 1e-6);
        assert!(
            rel(
                p.cem_layer_voltage_thermal[j],
                hp.cem_layer_voltage_thermal[n]
            ) < 1e-6
        );
        assert!(
            rel(
                p.aem_layer_voltage_thermal[j],
                hp.aem_layer_voltage_thermal[n]
            ) < 1e-6
        );
        // Every twentieth of the length is there.
        for i in 1..20 {
            let x = d.channel.length_m * (i as f64 / 20.0);
            assert!(p.x_m.contains(&x), "U {u}: no point at {x}");
        }
        // The extra points do not change the integration.
        let plain = evaluate(&d, &k, &Options::default()).unwrap();
        assert_eq!(
            plain.performance.outlet_concentration_mol_m3,
            e.performance.outlet_concentration_mol_m3
        );
        assert_eq!(plain.numerics, e.numerics);
    }
}

#[test]
fn json_has_the_eval_schema_fields() {
    // docs/formats.md#design-sheet-json, `stria eval --json`.
    let v = serde_json::to_value(eval(&Design::demo())).unwrap();
    let schema: [(&str, &[&str]); 5] = [
        (
            "inputs",
            &[
                "salt",
                "temperature_K",
                "feed_concentration_mol_m3",
                "gap_m",
                "length_m",
                "width_m",
                "velocity_m_s",
                "spacer",
                "pitch_m",
                "open_fraction",
                "cell_pair_voltage_V",
                "cem_transport_number",
                "aem_transport_number",
            ],
        ),
        (
            "properties",
            &[
                "salt_diffusivity_m2_s",
                "cation_transport_number",
                "density_kg_m3",
                "dynamic_viscosity_Pa_s",
                "kinematic_viscosity_m2_s",
                "conductivity_S_m",
                "debye_length_m",
                "thermal_voltage_V",
            ],
        ),
        (
            "hydraulics",
            &[
                "hydraulic_diameter_m",
                "reynolds",
                "schmidt",
                "pressure_drop_Pa",
            ],
        ),
        (
            "transfer",
            &[
                "sherwood_mean",
                "boundary_layer_thickness_mean_m",
                "limiting_current_density_feed_A_m2",
                "limiting_membrane",
            ],
        ),
        (
            "performance",
            &[
                "outlet_concentration_mol_m3",
                "concentrate_outlet_concentration_mol_m3",
                "water_recovery",
                "salt_removal_fraction",
                "mean_current_density_A_m2",
                "cell_current_A",
                "diluate_flow_m3_s",
                "current_efficiency",
                "electrical_energy_kWh_m3",
                "pumping_energy_kWh_m3",
                "specific_energy_kWh_m3",
                "thermodynamic_minimum_kWh_m3",
                "active_area_fraction",
                "vortex_wavelength_m",
            ],
        ),
    ];
    for (section, keys) in schema {
        for k in keys {
            assert!(v[section].get(*k).is_some(), "{section}.{k} missing");
        }
    }
    assert!(v["warnings"].is_array());
    // Round trip.
    let back: Evaluation = serde_json::from_value(v).unwrap();
    assert_eq!(back.inputs.salt, "NaCl");
}

#[test]
fn counter_current_and_spacers_evaluate() {
    let mut d = Design::demo();
    d.operation.flow = FlowArrangement::CounterCurrent;
    let c = eval(&d);
    let co = eval(&Design::demo());
    assert!(
        (c.performance.salt_removal_fraction - co.performance.salt_removal_fraction).abs() < 0.2
    );
    let mut d = Design::demo();
    d.channel.spacer = Spacer::SchockMiquel {
        porosity: 0.85,
        shadow_factor: 1.2,
    };
    d.operation.velocity_m_s = 0.1;
    d.operation.concentrate_velocity_m_s = 0.1;
    let s = eval(&d);
    assert_eq!(s.inputs.spacer, "schock_miquel");
    assert!(s.performance.pumping_energy_kWh_m3 > co.performance.pumping_energy_kWh_m3);
}

#[test]
fn counter_current_streams_balance_each_other() {
    // Conservation (docs/physics.md#along-the-channel): the salt the diluate loses, the concentrate gains:
    // (c_c,out - c_c,in) h_c u_c = (c_in - c_out) h_d u_d. In counter-current flow the
    // concentrate outlet is the shooting's unknown, so the balance holds as closely as the
    // shooting converged (it stops at 1e-2 rel_tol of the outlet).
    let k = RomConstants::default();
    let mut rng = ChaCha8Rng::seed_from_u64(77);
    let mut designs = Vec::new();
    for u in [0.3, 1.0, 2.0, 3.5] {
        let mut d = Design::demo();
        d.operation.drive = Drive::Voltage {
            cell_pair_voltage_v: u,
        };
        designs.push(d);
    }
    for _ in 0..24 {
        designs.push(random_design(&mut rng, Spread::default()));
    }
    for mut d in designs {
        d.operation.flow = FlowArrangement::CounterCurrent;
        let e = evaluate(&d, &k, &Options::default()).unwrap();
        let p = &e.performance;
        // Salt flows (water crosses the membranes too, so the outlet flows differ from the
        // inlet flows), per unit width.
        let q_d = d.channel.gap_m * d.operation.velocity_m_s;
        let q_c = d.channel.concentrate_gap_m * d.operation.concentrate_velocity_m_s;
        let (q_d_out, q_c_out) = (
            q_d * p.diluate_outlet_flow_m3_s / p.diluate_flow_m3_s,
            p.concentrate_outlet_flow_m3_s / d.channel.width_m,
        );
        let lost =
            d.water.feed_concentration_mol_m3 * q_d - p.outlet_concentration_mol_m3 * q_d_out;
        let gained = p.concentrate_outlet_concentration_mol_m3 * q_c_out
            - d.water.concentrate_feed_concentration_mol_m3 * q_c;
        let scale = p.outlet_concentration_mol_m3 * q_d;
        assert!(
            (lost - gained).abs()
                <= 1.1e-2 * 1e-7 * scale.max(1e-13 * lost.abs()) + 1e-15 * lost.abs(),
            "{d:?}: lost {lost}, gained {gained}"
        );
    }
}

#[test]
fn outlet_converged_at_default_tolerance_on_random_designs() {
    // Issue 2: "outlet converged to 1e-6 relative" at the default tolerance. Reference: the
    // same integration at rel_tol 1e-11 (a tolerance-convergence check, common practice; the
    // outlets there agree with 1e-12 to about 1e-10 relative). 48 designs, one in four of
    // them high removal (down to 1e-10 of the feed and below).
    let k = RomConstants::default();
    let run = |d: &Design, rel_tol: f64| {
        let o = Options {
            rel_tol,
            profiles: false,
        };
        evaluate(d, &k, &o)
            .unwrap()
            .performance
            .outlet_concentration_mol_m3
    };
    assert_eq!(Options::default().rel_tol, 1e-7);
    let mut rng = ChaCha8Rng::seed_from_u64(20_261_202);
    let (mut worst, mut lowest_removal_ratio) = (0.0f64, 1.0f64);
    for j in 0..48 {
        let mut d = random_design(
            &mut rng,
            Spread {
                high_removal: j % 4 == 0,
                ..Spread::default()
            },
        );
        if j % 4 == 0 {
            // Salt diffusing back from the concentrate keeps a real diluate from emptying
            // below about 1e-4 of the feed; the deep-removal designs leave it out so that the
            // integrator is tested down there (water transport and the rest stay on).
            d.membranes.physics.salt_back_diffusion = false;
        }
        let reference = run(&d, 1e-11);
        let outlet = run(&d, Options::default().rel_tol);
        // Relative down to 1e-12 of the feed (absolute below: 1e-18 of the feed). The point
        // solve's concentration clamp sits at 1e-18 of the feed, so it never shapes a claimed
        // outlet.
        let floor = 1e-12 * d.water.feed_concentration_mol_m3;
        let err = (outlet - reference).abs() / reference.max(floor);
        assert!(
            err <= 1e-6,
            "design {j}: outlet {outlet} vs reference {reference} ({err:.2e} relative): {d:?}"
        );
        worst = worst.max(err);
        lowest_removal_ratio =
            lowest_removal_ratio.min(reference / d.water.feed_concentration_mol_m3);
    }
    // The set does reach deep removal, and the errors are not all zero (the test can fail).
    assert!(lowest_removal_ratio < 1e-4, "{lowest_removal_ratio}");
    assert!(worst > 0.0);
}
