//! Seeded random designs shared by the model's tests and the tolerance sweep
//! (`examples/tolsweep.rs` includes this file), so that what the sweep measures and what the
//! convergence test asserts come from one generator. Included with `mod support;`; it has no
//! tests of its own.
#![allow(dead_code)]

use model::*;
use rand::Rng;
use rand_chacha::ChaCha8Rng;

/// What a random design varies beyond the basic ranges.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq)]
pub struct Spread {
    /// Long, slow, thin, high-voltage channels that empty the diluate by several orders of
    /// magnitude.
    pub high_removal: bool,
    /// Channel fillings (open, multipliers, Schock-Miquel) and membrane transport numbers and
    /// area resistances too (otherwise the demo's open channel and membranes).
    pub spacers_and_membranes: bool,
}

/// A random design inside the admissible input ranges (the demo's economics), every draw from
/// the seeded generator: salt, temperature 5-50 C, feed 3-300 mol/m^3 and concentrate feed
/// 0.5-4 times it, gaps 0.2-2 mm, length 5-150 cm, open fraction 0.1-1, pitch 10 um - 1 mm,
/// pattern side, velocities 0.5-20 cm/s, cell-pair voltage 0.02-4 V, one in eight
/// counter-current.
pub fn random_design(rng: &mut ChaCha8Rng, spread: Spread) -> Design {
    let mut d = Design::demo();
    let feed = 10f64.powf(rng.random_range(0.5..2.5));
    d.water.salt = [Salt::NaCl, Salt::KCl][rng.random_range(0..2)];
    d.water.temperature_k = rng.random_range(278.15..323.15);
    d.water.feed_concentration_mol_m3 = feed;
    d.water.concentrate_feed_concentration_mol_m3 = feed * rng.random_range(0.5..4.0);
    d.channel.gap_m = rng.random_range(0.2e-3..2e-3);
    d.channel.concentrate_gap_m = rng.random_range(0.2e-3..2e-3);
    d.channel.length_m = rng.random_range(0.05..1.5);
    d.membranes.open_fraction = rng.random_range(0.1..1.0);
    d.membranes.pitch_m = 10f64.powf(rng.random_range(-5.0..-3.0));
    d.membranes.pattern_side =
        [PatternSide::Cem, PatternSide::Aem, PatternSide::Both][rng.random_range(0..3)];
    d.operation.velocity_m_s = rng.random_range(0.005..0.2);
    d.operation.concentrate_velocity_m_s = rng.random_range(0.005..0.2);
    let mut volts = rng.random_range(0.02..4.0);
    if spread.high_removal {
        d.channel.gap_m = rng.random_range(0.2e-3..0.5e-3);
        d.channel.length_m = rng.random_range(0.8..1.5);
        d.operation.velocity_m_s = rng.random_range(0.005..0.03);
        volts = rng.random_range(1.5..4.0);
    }
    d.operation.drive = Drive::Voltage {
        cell_pair_voltage_v: volts,
    };
    if rng.random_range(0..8) == 0 {
        d.operation.flow = FlowArrangement::CounterCurrent;
    }
    if spread.spacers_and_membranes {
        d.channel.spacer = match rng.random_range(0..3) {
            0 => Spacer::None,
            1 => Spacer::Multiplier {
                sherwood: rng.random_range(1.0..3.0),
                friction: rng.random_range(1.0..5.0),
                shadow_factor: rng.random_range(1.0..1.5),
            },
            _ => Spacer::SchockMiquel {
                porosity: rng.random_range(0.7..0.95),
                shadow_factor: rng.random_range(1.0..1.5),
            },
        };
        d.membranes.cem_transport_number = rng.random_range(0.85..1.0);
        d.membranes.aem_transport_number = rng.random_range(0.85..1.0);
        d.membranes.cem_area_resistance_ohm_m2 = rng.random_range(1e-4..1e-3);
        d.membranes.aem_area_resistance_ohm_m2 = rng.random_range(1e-4..1e-3);
    }
    d
}
