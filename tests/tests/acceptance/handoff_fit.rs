//! Acceptance checks: hand-off case cards and calibration, against published relations.

// CODATA 2018 (docs/references.md#physical-constants).
const R: f64 = 8.314462618;
const F: f64 = 96485.33212;
const EPS0: f64 = 8.8541878128e-12;

/// Electrohydrodynamic coupling constant eps (RT/F)^2 / (mu D) of aqueous NaCl at 25 C: about
/// 0.5 in the electroconvection literature (from memory, wide tolerance 0.25-1.0); with the
/// handbook values of docs/references.md#debye-length (eps_r 78.4, IAPWS; mu 0.8900 mPa s, IAPWS 2008; salt
/// D 1.611e-9 m^2/s, CRC) the relation gives 0.32, and the model's properties must agree to 3 %.
#[test]
fn coupling_constant_of_aqueous_nacl_at_25_c() {
    let t = 298.15;
    let vt = R * t / F;
    let by_hand = 78.4 * EPS0 * vt * vt / (0.8900e-3 * 1.611e-9);
    let p = model::properties::properties(model::Salt::NaCl, t, 10.0);
    let ours = p.relative_permittivity * EPS0 * vt * vt
        / (p.dynamic_viscosity_pa_s * p.salt_diffusivity_m2_s);
    assert!((ours / by_hand - 1.0).abs() < 0.03, "{ours} vs {by_hand}");
    assert!((0.25..=1.0).contains(&ours), "{ours}");
}

/// Stripe layout: n pitches, conducting share = open fraction, contiguous (geometry).
#[test]
fn stripe_edges_tile_the_window() {
    let (pitch, f, n) = (150e-6, 0.35, 7);
    let (c, i) = studies::figures::pattern::stripes(pitch, f, n);
    let open: f64 = c.iter().map(|s| s[1] - s[0]).sum();
    let inert: f64 = i.iter().map(|s| s[1] - s[0]).sum();
    assert!((open / (n as f64 * pitch) - f).abs() < 1e-12);
    assert!((open + inert - n as f64 * pitch).abs() < 1e-15);
    for k in 0..n {
        assert!((c[k][1] - i[k][0]).abs() < 1e-18);
        if k + 1 < n {
            assert!((i[k][1] - c[k + 1][0]).abs() < 1e-18);
        }
    }
}
