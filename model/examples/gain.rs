//! Interface and cell-level gain of the best pattern over an unpatterned membrane with the
//! default ROM constants (demo conditions; invented, for the demo only).
use model::interface::{solve, InterfaceConditions, MembraneKind};
use model::{evaluate, Design, Options, RomConstants, Salt, Spacer};

fn main() {
    let k = RomConstants::default();
    let base = InterfaceConditions {
        salt: Salt::NaCl,
        temperature_k: 298.15,
        concentration_mol_m3: 10.0,
        velocity_m_s: 0.04,
        gap_m: 0.5e-3,
        position_m: 0.2,
        pitch_m: 1e-4,
        open_fraction: 1.0,
        membrane_transport_number: 0.97,
        spacer: Spacer::None,
        membrane: MembraneKind::Cem,
    };
    for v in [30.0, 40.0, 60.0, 80.0, 100.0] {
        let un = solve(&base, v, &k);
        let mut best = (0.0, 0.0, 0.0, 0.0);
        for ip in 0..200 {
            let pitch = 1e-6 * 10f64.powf(ip as f64 * 0.02);
            for jf in 1..20 {
                let f = jf as f64 * 0.05;
                let c = InterfaceConditions {
                    pitch_m: pitch,
                    open_fraction: f,
                    ..base
                };
                let s = solve(&c, v, &k);
                if s.current_density_a_m2 > best.0 {
                    best = (
                        s.current_density_a_m2,
                        pitch,
                        f,
                        s.overlimiting_current_density_a_m2,
                    );
                }
            }
        }
        println!(
            "v={v}: delta={:.3e} unpat i={:.2} (ec {:.2}) alpha={:.3}; best i={:.2} (ec {:.2}) pitch={:.3e} f={:.2} ratio total={:.3} ec={:.3}",
            un.boundary_layer_thickness_m, un.current_density_a_m2, un.overlimiting_current_density_a_m2,
            un.active_area_fraction, best.0, best.3, best.1, best.2,
            best.0 / un.current_density_a_m2, best.3 / un.overlimiting_current_density_a_m2
        );
    }
    // Cell level: demo design, best pitch over a grid, vs unpatterned at the same voltage.
    let o = Options::default();
    for u in [1.0, 1.5, 2.0, 3.0] {
        let mut d = Design::demo();
        d.operation.drive = model::Drive::Voltage {
            cell_pair_voltage_v: u,
        };
        d.membranes.open_fraction = 1.0;
        let un = evaluate(&d, &k, &o).unwrap();
        let mut best = (0.0, 0.0, 0.0);
        for ip in 0..40 {
            let pitch = 10e-6 * 10f64.powf(ip as f64 * 0.05);
            for f in [0.3, 0.4, 0.5, 0.6, 0.7] {
                d.membranes.pitch_m = pitch;
                d.membranes.open_fraction = f;
                let e = evaluate(&d, &k, &o).unwrap();
                let r = e.performance.salt_removal_fraction;
                if r > best.0 {
                    best = (r, pitch, f);
                }
            }
        }
        println!("cell U={u}: unpatterned removal {:.4}, best {:.4} at pitch {:.3e} f {:.2}: ratio {:.3}",
            un.performance.salt_removal_fraction, best.0, best.1, best.2, best.0 / un.performance.salt_removal_fraction);
    }
}
