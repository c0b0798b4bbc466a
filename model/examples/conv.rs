//! Convergence of the outlet with the integration tolerance, demo design (invented, for the
//! demo only) at 0.5 V (no kinks) and 2.0 V (overlimiting: onset kinks along the channel).
use model::{evaluate, Design, Drive, Options, RomConstants};
fn main() {
    let k = RomConstants::default();
    for u in [0.5, 2.0] {
        let mut d = Design::demo();
        d.operation.drive = Drive::Voltage {
            cell_pair_voltage_v: u,
        };
        let r = evaluate(
            &d,
            &k,
            &Options {
                rel_tol: 1e-12,
                profiles: false,
            },
        )
        .unwrap()
        .performance
        .outlet_concentration_mol_m3;
        for t in [1e-5, 1e-6, 1e-7, 1e-8, 1e-9] {
            let e = evaluate(
                &d,
                &k,
                &Options {
                    rel_tol: t,
                    profiles: false,
                },
            )
            .unwrap();
            println!(
                "U {u} tol {t:e}: outlet err {:.2e} maxvC {:.1} steps {} solves {}",
                e.performance.outlet_concentration_mol_m3 / r - 1.0,
                e.performance.max_cem_layer_voltage_thermal,
                e.numerics.integration_steps,
                e.numerics.point_solves
            );
        }
    }
}
