//! Real membranes (docs/physics.md#real-membranes) against their references: the
//! Teorell-Meyer-Sievers closed form and limits, Scatchard's relation between the membrane
//! potential and the transport number, the Galama et al. (2014) resistance form, and the
//! balances of salt and water with water crossing the membranes.

use model::membrane::{
    area_resistance, dilute_resistivity, face_transport_number, fixed_charge_for, pair_state,
    tms_potential, Exchange, Membrane, MembraneMaterial,
};
use model::properties::{properties, ConductivityModel};
use model::{
    evaluate, Design, Drive, FlowArrangement, MembranePhysics, Options, RomConstants, Salt,
};

/// NaCl at 25 C: the cation's share of the diffusivities (CRC Handbook, docs/references.md#electrolytes).
fn t_plus() -> f64 {
    properties(Salt::NaCl, 298.15, 10.0).cation_transport_number
}

/// The TMS potential as the classic papers write it (Teorell 1935; Meyer and Sievers 1936;
/// in Lakshminarayanaiah, Transport Phenomena in Membranes, 1969, from memory), with the square
/// roots written out, independently of stria's g/q form:
/// E = ln[c2 (sqrt(4 c1^2 + X^2) + X) / (c1 (sqrt(4 c2^2 + X^2) + X))]
///   + U ln[(sqrt(4 c2^2 + X^2) + U X) / (sqrt(4 c1^2 + X^2) + U X)].
fn tms_textbook(x: f64, c1: f64, c2: f64, u: f64) -> f64 {
    let s1 = (4.0 * c1 * c1 + x * x).sqrt();
    let s2 = (4.0 * c2 * c2 + x * x).sqrt();
    (c2 * (s1 + x) / (c1 * (s2 + x))).ln() + u * ((s2 + u * x) / (s1 + u * x)).ln()
}

#[test]
fn tms_potential_is_the_published_closed_form() {
    let tp = t_plus();
    for (w_ct, w_co) in [(tp, 1.0 - tp), (1.0 - tp, tp)] {
        let u = (w_ct - w_co) / (w_ct + w_co);
        for x in [10.0, 300.0, 3000.0] {
            for (c1, c2) in [(1.0, 10.0), (41.0, 66.0), (100.0, 500.0), (500.0, 100.0)] {
                let a = tms_potential(x, c1, c2, w_ct, w_co);
                let b = tms_textbook(x, c1, c2, u);
                assert!(
                    (a - b).abs() <= 1e-12 * (1.0 + b.abs()),
                    "{x} {c1} {c2}: {a} {b}"
                );
            }
        }
    }
}

#[test]
fn tms_limits_of_high_and_low_fixed_charge() {
    // X >> c: an ideal membrane, t -> 1 and E -> ln(c2/c1) (Nernst). X << c: the membrane is
    // a slab of solution, t -> the solution's and E -> the liquid-junction potential
    // U ln(c2/c1) with U = 2 t - 1 (Planck/Henderson for one 1:1 salt).
    let tp = t_plus();
    let (c1, c2) = (10.0, 50.0);
    let x_hi = 1e7;
    assert!(1.0 - face_transport_number(x_hi, c2, tp, 1.0 - tp) < 1e-10);
    assert!((tms_potential(x_hi, c1, c2, tp, 1.0 - tp) - (c2 / c1).ln()).abs() < 1e-8);
    let x_lo = 1e-9;
    assert!((face_transport_number(x_lo, c1, tp, 1.0 - tp) - tp).abs() < 1e-9);
    let junction = (2.0 * tp - 1.0) * (c2 / c1).ln();
    assert!((tms_potential(x_lo, c1, c2, tp, 1.0 - tp) - junction).abs() < 1e-8);
    // The transport number falls as the solution strengthens (co-ion uptake).
    let x = 1000.0;
    let t: Vec<f64> = [1.0, 10.0, 100.0, 1000.0]
        .iter()
        .map(|&c| face_transport_number(x, c, tp, 1.0 - tp))
        .collect();
    assert!(t.windows(2).all(|w| w[1] < w[0]), "{t:?}");
}

#[test]
fn apparent_transport_number_of_a_small_step_is_the_face_transport_number() {
    // Scatchard's relation (J. Am. Chem. Soc. 75 (1953) 2883; from memory): between two
    // solutions differing little, the membrane potential is (2 t - 1) V_T d ln c with t the
    // counter-ion transport number in the membrane at that concentration.
    let tp = t_plus();
    for x in [50.0, 300.0, 2000.0] {
        for c in [5.0, 41.0, 300.0] {
            let eps = 1e-6;
            let e = tms_potential(x, c, c * (1.0 + eps), tp, 1.0 - tp);
            let t_app = 0.5 * (1.0 + e / (1.0 + eps).ln());
            let t = face_transport_number(x, c, tp, 1.0 - tp);
            assert!((t_app - t).abs() < 1e-6, "{x} {c}: {t_app} {t}");
        }
    }
}

#[test]
fn fixed_charge_from_transport_number_and_pair_state_agree_with_single_membranes() {
    let tp = t_plus();
    let m = MembraneMaterial::generic();
    let cem = Membrane::new(Exchange::Cation, 0.97, 41.0, tp, 3e-4, m);
    let aem = Membrane::new(Exchange::Anion, 0.96, 41.0, tp, 3e-4, m);
    // Both faces at the reference give back the transport numbers (exact inversion).
    assert!((cem.transport_number(41.0, 41.0) - 0.97).abs() < 1e-12);
    assert!((aem.transport_number(41.0, 41.0) - 0.96).abs() < 1e-12);
    assert!(fixed_charge_for(1.0, 41.0, tp, 1.0 - tp).is_infinite());
    for (c_d, c_c) in [(41.0, 41.0), (15.0, 66.0), (2.0, 400.0)] {
        let st = pair_state(&cem, &aem, c_d, c_c);
        let e = cem.potential(c_d, c_c) + aem.potential(c_d, c_c);
        assert!((st.potential - e).abs() < 1e-12 * (1.0 + e.abs()));
        assert!((st.t_cem - cem.transport_number(c_d, c_c)).abs() < 1e-14);
        let back = cem.salt_back_flux(c_d, c_c) + aem.salt_back_flux(c_d, c_c);
        assert!((st.salt_back_flux - back).abs() <= 1e-14 * back.abs().max(1e-20));
    }
}

#[test]
fn area_resistance_follows_the_two_resistor_form() {
    // Galama et al., J. Membr. Sci. 467 (2014) 279: R is set mainly by the lower external
    // concentration; gel and solution phases in series. Datasheet value at 0.5 M NaCl
    // (common practice).
    let cond = ConductivityModel::new(Salt::NaCl, 298.15);
    let k_ref = cond.conductivity(500.0);
    let (r_ref, phi) = (3e-4, 0.08);
    assert!((area_resistance(r_ref, phi, k_ref, k_ref, k_ref) - r_ref).abs() < 1e-18);
    // Set by the dilute side: within 1 % once the solutions differ tenfold in resistivity.
    let (k_lo, k_hi) = (0.1, 1.0);
    let rho = dilute_resistivity(k_lo, k_hi);
    assert!(rho <= 1.0 / k_lo && rho > 0.99 / k_lo, "{rho}");
    // Rises steeply in dilute solution: about 2-10 times from 0.5 M to 0.01 M for homogeneous
    // grades (Dlugolecki et al., J. Membr. Sci. 346 (2009) 163; from memory, wide).
    let k10 = cond.conductivity(10.0);
    let rise = area_resistance(r_ref, phi, k_ref, k10, k10) / r_ref;
    assert!((2.0..10.0).contains(&rise), "{rise}");
}

/// Salt and water flows in and out of one cell pair per unit width (m^2/s and mol/(m s)).
fn flows(d: &Design, e: &model::Evaluation) -> ([f64; 2], [f64; 2]) {
    let p = &e.performance;
    let w = d.channel.width_m;
    let (q_d, q_c) = (
        p.diluate_flow_m3_s / w,
        d.channel.concentrate_gap_m * d.operation.concentrate_velocity_m_s,
    );
    let (q_d_out, q_c_out) = (
        p.diluate_outlet_flow_m3_s / w,
        p.concentrate_outlet_flow_m3_s / w,
    );
    let salt_in = q_d * d.water.feed_concentration_mol_m3
        + q_c * d.water.concentrate_feed_concentration_mol_m3;
    let salt_out = q_d_out * p.outlet_concentration_mol_m3
        + q_c_out * p.concentrate_outlet_concentration_mol_m3;
    ([salt_in, salt_out], [q_d + q_c, q_d_out + q_c_out])
}

#[test]
fn salt_and_water_balances_close_with_water_transport() {
    // Conservation: salt and water leaving the cell pair equal what enters, to round-off in
    // co-current flow (the state carries both flows linearly) and to the shooting's tolerance
    // (1e-2 rel_tol) in counter-current flow.
    let k = RomConstants::default();
    for flow in [FlowArrangement::CoCurrent, FlowArrangement::CounterCurrent] {
        for (u, cf, ccf) in [(2.0, 41.0, 41.0), (0.8, 20.0, 200.0), (3.0, 100.0, 100.0)] {
            let mut d = Design::demo();
            d.operation.flow = flow;
            d.operation.drive = Drive::Voltage {
                cell_pair_voltage_v: u,
            };
            d.water.feed_concentration_mol_m3 = cf;
            d.water.concentrate_feed_concentration_mol_m3 = ccf;
            assert_eq!(d.membranes.physics, MembranePhysics::generic());
            let e = evaluate(&d, &k, &Options::default()).unwrap();
            let ([s_in, s_out], [w_in, w_out]) = flows(&d, &e);
            let tol = if flow == FlowArrangement::CoCurrent {
                1e-13
            } else {
                1e-8
            };
            assert!(
                (s_in - s_out).abs() <= tol * s_in,
                "{flow:?} {u}: salt {s_in} {s_out}"
            );
            assert!(
                (w_in - w_out).abs() <= tol * w_in,
                "{flow:?} {u}: water {w_in} {w_out}"
            );
            // Water left the diluate (electro-osmosis with the current, osmosis towards the
            // stronger concentrate), and the recovery counts the product actually delivered.
            let p = &e.performance;
            assert!(p.diluate_outlet_flow_m3_s < p.diluate_flow_m3_s);
            let q_c = d.channel.concentrate_gap_m
                * d.operation.concentrate_velocity_m_s
                * d.channel.width_m;
            let r = p.diluate_outlet_flow_m3_s / (p.diluate_flow_m3_s + q_c);
            assert!((p.water_recovery - r).abs() < 1e-15);
        }
    }
}

#[test]
fn without_current_salt_diffuses_back_and_water_moves_to_the_concentrate() {
    // Below the membrane potential no current flows; what crosses is diffusion and osmosis,
    // both down their gradients (second law).
    let k = RomConstants::default();
    let mut d = Design::demo();
    d.water.concentrate_feed_concentration_mol_m3 = 400.0;
    d.operation.drive = Drive::Voltage {
        cell_pair_voltage_v: 1e-3,
    };
    let e = evaluate(&d, &k, &Options::default()).unwrap();
    let p = &e.performance;
    #[allow(clippy::float_cmp)]
    // exact on purpose: below the membrane potential the model sets the current to 0
    let no_current = p.cell_current_A == 0.0;
    assert!(no_current);
    assert!(p.outlet_concentration_mol_m3 > d.water.feed_concentration_mol_m3);
    assert!(p.diluate_outlet_flow_m3_s < p.diluate_flow_m3_s);
    // Mixing: the minimum work of what happened is negative.
    assert!(p.thermodynamic_minimum_kWh_m3 < 0.0);
}
