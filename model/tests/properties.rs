//! Property tests of the model: monotone current-voltage laws, exact inverses, and the
//! second law (energy never below the thermodynamic minimum) over random admissible designs.
//! Every random number comes from a seeded generator.

mod support;

use model::cell::{Cell, Guess};
use model::interface::Layer;
use model::*;
use proptest::prelude::*;
use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;
use support::{random_design, Spread};

fn constants_strategy() -> impl Strategy<Value = RomConstants> {
    (
        (
            5.0..40.0f64,
            0.001..0.5f64,
            1.0..2.5f64,
            0.2..5.0f64,
            0.1..1.5f64,
        ),
        (
            0.05..2.0f64,
            0.02..0.5f64,
            0.02..0.9f64,
            0.1..0.9f64,
            0.5..6.0f64,
        ),
        0.3..3.0f64,
    )
        .prop_map(
            |((vc, g, n, a, q), (s, a0, amax, phi, kp), fs)| RomConstants {
                onset_voltage: vc,
                overlimiting_conductance: g,
                overlimiting_exponent: n,
                wavelength_prefactor: a,
                wavelength_exponent: q,
                lockin_width: s,
                alpha_0: a0,
                alpha_max: amax,
                best_open_fraction: phi,
                pinning_sharpness: kp,
                funnel_layer_ratio: fs,
                ..RomConstants::default()
            },
        )
}

/// 400 cases from a fixed seed, so that CI runs the same cases every time; set
/// STRIA_PROPTEST_SEED to another number to explore new ones (and STRIA_PROPTEST_CASES for
/// more). A failing case found that way is saved in `properties.proptest-regressions` and
/// replayed first on every later run.
fn config() -> ProptestConfig {
    let env = |name: &str| std::env::var(name).ok().and_then(|v| v.parse::<u64>().ok());
    ProptestConfig {
        cases: env("STRIA_PROPTEST_CASES").map_or(400, |n| n as u32),
        rng_algorithm: proptest::test_runner::RngAlgorithm::ChaCha,
        rng_seed: proptest::test_runner::RngSeed::Fixed(
            env("STRIA_PROPTEST_SEED").unwrap_or(20_261_202),
        ),
        ..ProptestConfig::default()
    }
}

proptest! {
    #![proptest_config(config())]

    /// docs/physics.md#monotonicity: the characteristic must stay strictly increasing in v for every
    /// admissible input, so a voltage has exactly one current.
    #[test]
    fn layer_current_strictly_increasing(
        k in constants_strategy(),
        i_lim in 0.1..1000.0f64,
        delta in 5e-6..1e-3f64,
        pitch in 1e-6..1e-2f64,
        f in 0.01..1.0f64,
        v0 in 0.0..200.0f64,
    ) {
        prop_assume!(k.validate().is_ok());
        let l = Layer::new(i_lim, delta, pitch, f, &k);
        let mut last = l.current(v0).0;
        for j in 1..400 {
            let v = v0 + j as f64 * 0.25;
            let (i, di) = l.current(v);
            prop_assert!(i > last, "not increasing at v = {}: {} -> {}", v, last, i);
            prop_assert!(di > 0.0);
            // docs/physics.md#active-area-fraction: alpha never exceeds the open fraction.
            prop_assert!(l.alpha(v) <= f.min(1.0) + 1e-15);
            last = i;
        }
    }

    /// The inverse (layer voltage for a current) returns the voltage it came from.
    #[test]
    fn layer_voltage_inverts_current(
        k in constants_strategy(),
        i_lim in 0.1..1000.0f64,
        delta in 5e-6..1e-3f64,
        pitch in 1e-6..1e-2f64,
        f in 0.01..1.0f64,
        v in 0.01..300.0f64,
        guess in 0.0..300.0f64,
    ) {
        prop_assume!(k.validate().is_ok());
        let l = Layer::new(i_lim, delta, pitch, f, &k);
        let (i, _) = l.current(v);
        prop_assume!(i < 0.999_999 * l.i_het || v > k.onset_voltage);
        let (w, _) = l.voltage(i, guess);
        prop_assert!((w - v).abs() < 1e-7 * v.max(1.0), "{} -> {} -> {}", v, i, w);
    }

    /// The cell-pair current rises strictly with the cell-pair voltage at a point.
    #[test]
    fn cell_current_strictly_increasing(
        k in constants_strategy(),
        c_d in 1.0..200.0f64,
        c_c in 1.0..400.0f64,
        delta in 1e-5..3e-4f64,
        pitch in 1e-5..1e-3f64,
        f in 0.1..1.0f64,
    ) {
        prop_assume!(k.validate().is_ok());
        let r = sweep_point(&k, (c_d, c_c, delta), (pitch, f));
        prop_assert!(r.is_ok(), "{}", r.unwrap_err());
    }
}

/// Solve one point of the demo cell (with `pitch` and open fraction `f`) at 120 cell-pair
/// voltages from its membrane potential up: the current rises strictly, the solved point
/// satisfies the voltage balance (to 1e-6 relative: the solve converges on the layer voltage,
/// and on a plateau of the other layer a tiny voltage step moves that layer a lot), and both
/// layers carry its current. Err names the first failure.
fn sweep_point(
    k: &RomConstants,
    (c_d, c_c, delta): (f64, f64, f64),
    (pitch, f): (f64, f64),
) -> Result<(), String> {
    let mut d = Design::demo();
    d.membranes.pitch_m = pitch;
    d.membranes.open_fraction = f;
    let cell = Cell::new(&d, k);
    let p = cell.point(delta, delta, c_d, c_c);
    let mut g = Guess::default();
    let mut last = -1.0;
    for j in 0..120 {
        let u = p.e_mem + 0.01 + 0.05 * j as f64;
        let s = cell.solve(&p, u, &mut g);
        let i = s.current_density;
        if i <= last {
            return Err(format!("current {i} at {u} V not above {last}"));
        }
        let back = cell.voltage_of(&p, &s);
        if (back - u).abs() >= 1e-6 * u.max(1.0) {
            return Err(format!("balance: {back} vs {u}"));
        }
        if (p.cem.current(s.v_cem).0 - i).abs() > 1e-8 * i.max(1e-3)
            || (p.aem.current(s.v_aem).0 - i).abs() > 1e-8 * i.max(1e-3)
        {
            return Err(format!("a layer does not carry {i} at {u} V"));
        }
        last = i;
    }
    Ok(())
}

/// A random admissible design with every channel filling and membrane property varied.
fn any_design(rng: &mut ChaCha8Rng) -> Design {
    random_design(
        rng,
        Spread {
            spacers_and_membranes: true,
            ..Spread::default()
        },
    )
}

/// docs/physics.md#energy-and-cost: energy used never falls below the thermodynamic minimum for the same
/// streams (second law), over 10,000 random designs from a seeded generator. Every design
/// must also evaluate without error.
#[test]
fn energy_never_below_thermodynamic_minimum() {
    let mut rng = ChaCha8Rng::seed_from_u64(20_240_601);
    let k = RomConstants::default();
    let o = Options {
        rel_tol: 1e-6,
        profiles: false,
    };
    for n in 0..10_000 {
        let mut d = any_design(&mut rng);
        // Every other design with ideal membranes: real ones let salt diffuse back and water
        // cross, which can mix the streams (a negative minimum work) and leave the diluate
        // saltier than fed at a weak current.
        let ideal = n % 2 == 1;
        if ideal {
            d.membranes.physics = MembranePhysics::ideal();
        }
        let e = evaluate(&d, &k, &o).unwrap_or_else(|err| panic!("design {n}: {err}: {d:?}"));
        let p = &e.performance;
        if ideal
            && d.water.concentrate_feed_concentration_mol_m3 >= d.water.feed_concentration_mol_m3
        {
            // Moving salt uphill costs work; with a weaker concentrate feed it may not.
            assert!(p.thermodynamic_minimum_kWh_m3 >= 0.0);
        }
        assert!(
            p.electrical_energy_kWh_m3 >= p.thermodynamic_minimum_kWh_m3 * (1.0 - 1e-9),
            "design {n}: {} < {}: {d:?}",
            p.electrical_energy_kWh_m3,
            p.thermodynamic_minimum_kWh_m3
        );
        assert!(p.specific_energy_kWh_m3 >= p.thermodynamic_minimum_kWh_m3);
        assert!(
            p.outlet_concentration_mol_m3 >= 0.0
                && (!ideal || p.outlet_concentration_mol_m3 <= d.water.feed_concentration_mol_m3),
            "design {n}: outlet {}: {d:?}",
            p.outlet_concentration_mol_m3
        );
    }
}

/// Robustness of the other drives and modes over random designs (seeded): current drive
/// finds a voltage that reproduces the current; target mode either finds a length whose
/// outlet is the target or reports the target unreachable.
#[test]
fn current_drive_and_target_mode_over_random_designs() {
    let mut rng = ChaCha8Rng::seed_from_u64(7_001);
    let k = RomConstants::default();
    let o = Options {
        rel_tol: 1e-7,
        profiles: false,
    };
    let (mut found, mut unreachable) = (0, 0);
    for n in 0..300 {
        let d = any_design(&mut rng);
        let base = evaluate(&d, &k, &o).unwrap();
        if base.performance.cell_current_A > 1e-3 {
            let mut g = d;
            g.operation.drive = Drive::Current {
                cell_current_a: base.performance.cell_current_A,
            };
            let e = evaluate(&g, &k, &o).unwrap_or_else(|err| panic!("design {n}: {err}: {g:?}"));
            assert!(
                (e.performance.cell_current_A / base.performance.cell_current_A - 1.0).abs() < 1e-6,
                "design {n}"
            );
        }
        let mut t = d;
        let target = d.water.feed_concentration_mol_m3 * rng.random_range(0.05..0.95);
        t.operation.length_mode = LengthMode::ProductTarget {
            product_concentration_mol_m3: target,
        };
        match evaluate(&t, &k, &o) {
            Ok(e) => {
                found += 1;
                assert!((e.performance.outlet_concentration_mol_m3 / target - 1.0).abs() < 1e-6);
                assert!(e.inputs.length_m <= d.channel.length_m);
            }
            Err(ModelError::TargetUnreachable { outlet_mol_m3, .. }) => {
                unreachable += 1;
                assert!(outlet_mol_m3 > target);
            }
            Err(other) => panic!("design {n}: {other}: {t:?}"),
        }
    }
    assert!(
        found > 20 && unreachable > 20,
        "{found} found, {unreachable} unreachable"
    );
}

/// Two cases that random runs found, kept as plain tests: a point whose secondary layer
/// (the AEM) has just passed its onset. The first left the voltage balance off by 3e-6
/// (a Newton step across the onset kink was accepted on the curvature of the other side); the
/// second by 1.3e-6 (with overlimiting exponent 2.27 the curvature changes fast past the
/// onset, and the derivatives at two iterates 0.14 apart agreed by chance: the stop now also
/// weighs the residual that the last step left).
#[test]
fn point_solve_balances_just_past_a_secondary_onset() {
    let cases = [
        (
            RomConstants {
                onset_voltage: 24.24896203585767,
                overlimiting_conductance: 0.44616234042587716,
                overlimiting_exponent: 1.2345155175599691,
                wavelength_prefactor: 4.808622581362814,
                wavelength_exponent: 1.1432873406982667,
                lockin_width: 1.7187188838276157,
                alpha_0: 0.37756794711816777,
                alpha_max: 0.15153853397700906,
                best_open_fraction: 0.8230391009314617,
                pinning_sharpness: 5.573380534528488,
                funnel_layer_ratio: 0.9015067373578791,
                ..RomConstants::default()
            },
            (
                11.091088278825524,
                298.79713059383295,
                2.9189938824458605e-5,
            ),
            (0.0007387057626836812, 0.41738638134395656),
        ),
        (
            RomConstants {
                onset_voltage: 13.975463512930913,
                overlimiting_conductance: 0.12612705519931872,
                overlimiting_exponent: 2.269673565279372,
                wavelength_prefactor: 0.4579715482688194,
                wavelength_exponent: 1.4653229131943735,
                lockin_width: 0.4977358893703918,
                alpha_0: 0.0542405049287563,
                alpha_max: 0.8256199533892454,
                best_open_fraction: 0.29763194731489784,
                pinning_sharpness: 3.9781919575639697,
                funnel_layer_ratio: 0.768532954698962,
                ..RomConstants::default()
            },
            (189.25115247491985, 23.96160071173132, 8.383051174450317e-5),
            (9.919726923000956e-5, 0.9428719535381745),
        ),
    ];
    for (k, conc, pattern) in cases {
        sweep_point(&k, conc, pattern).unwrap();
    }
}
