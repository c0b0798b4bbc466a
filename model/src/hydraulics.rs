//! Channel hydraulics: hydraulic diameter, Reynolds and Schmidt numbers, pressure drop and
//! pumping power, for an open slit or a spacer-filled channel.

use crate::design::Spacer;

/// Flow in one channel (diluate or concentrate).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct ChannelFlow {
    /// Hydraulic diameter, m.
    pub hydraulic_diameter_m: f64,
    /// Reynolds number u_eff d_h / nu, -.
    pub reynolds: f64,
    /// Schmidt number nu / D, -.
    pub schmidt: f64,
    /// Pressure drop over the flow length, Pa.
    pub pressure_drop_pa: f64,
    /// Factor >= 1 on the solution resistance of the channel (spacer shadow), -.
    pub shadow_factor: f64,
}

/// Laminar pressure drop of an open slit of gap `h`, Pa: dp = 12 mu u L / h^2
/// (plane Poiseuille flow; Darcy f = 96/Re with d_h = 2h). Worked value: h = 0.5 mm,
/// u = 5 cm/s, L = 10 cm, water at 25 C: 213.6 Pa. Valid for laminar flow (Re below about 2000).
#[inline]
pub fn slit_pressure_drop(
    viscosity_pa_s: f64,
    velocity_m_s: f64,
    length_m: f64,
    gap_m: f64,
) -> f64 {
    12.0 * viscosity_pa_s * velocity_m_s * length_m / (gap_m * gap_m)
}

/// Hydraulic diameter of a spacer-filled channel, m: d_h = 4 eps / (2/h + (1 - eps) 8/h)
/// (Schock and Miquel, Desalination 64 (1987) 339, wetted surface of the walls plus a
/// filament specific surface 8/h; from memory). Tends to 2h for eps -> 1.
#[inline]
pub fn spacer_hydraulic_diameter(gap_m: f64, porosity: f64) -> f64 {
    4.0 * porosity / (2.0 / gap_m + (1.0 - porosity) * 8.0 / gap_m)
}

/// Schock-Miquel friction factor of a spacer-filled channel, f = 6.23 Re^-0.3, used as
/// dp = f rho u_eff^2 L / (2 d_h) (Schock and Miquel 1987; from memory, order of magnitude;
/// fitted for 100 < Re < 1000).
#[inline]
pub fn schock_miquel_friction(reynolds: f64) -> f64 {
    6.23 * reynolds.powf(-0.3)
}

/// Hydraulics of one channel.
///
/// `velocity_m_s` is the mean (superficial, empty-channel) velocity; in a spacer-filled
/// channel the interstitial velocity u / porosity sets Re and the friction. Multiplier
/// spacers take the open-slit values times the given friction factor.
#[allow(clippy::too_many_arguments)]
pub fn channel_flow(
    spacer: Spacer,
    gap_m: f64,
    length_m: f64,
    velocity_m_s: f64,
    density_kg_m3: f64,
    viscosity_pa_s: f64,
    diffusivity_m2_s: f64,
) -> ChannelFlow {
    let nu = viscosity_pa_s / density_kg_m3;
    let schmidt = nu / diffusivity_m2_s;
    match spacer {
        Spacer::None | Spacer::Multiplier { .. } => {
            let d_h = 2.0 * gap_m;
            let (friction, shadow) = match spacer {
                Spacer::Multiplier {
                    friction,
                    shadow_factor,
                    ..
                } => (friction, shadow_factor),
                _ => (1.0, 1.0),
            };
            ChannelFlow {
                hydraulic_diameter_m: d_h,
                reynolds: velocity_m_s * d_h / nu,
                schmidt,
                pressure_drop_pa: friction
                    * slit_pressure_drop(viscosity_pa_s, velocity_m_s, length_m, gap_m),
                shadow_factor: shadow,
            }
        }
        Spacer::SchockMiquel {
            porosity,
            shadow_factor,
        } => {
            let d_h = spacer_hydraulic_diameter(gap_m, porosity);
            let u_eff = velocity_m_s / porosity;
            let re = u_eff * d_h / nu;
            let f = schock_miquel_friction(re.max(1e-9));
            ChannelFlow {
                hydraulic_diameter_m: d_h,
                reynolds: re,
                schmidt,
                pressure_drop_pa: f * density_kg_m3 * u_eff * u_eff * length_m / (2.0 * d_h),
                shadow_factor,
            }
        }
    }
}

/// Hydraulic pumping power, W: dp Q / pump efficiency (wire-to-water).
#[inline]
pub fn pumping_power(pressure_drop_pa: f64, flow_m3_s: f64, pump_efficiency: f64) -> f64 {
    pressure_drop_pa * flow_m3_s / pump_efficiency
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn spacer_hydraulic_diameter_tends_to_slit() {
        let h = 5e-4;
        assert!((spacer_hydraulic_diameter(h, 1.0) - 2.0 * h).abs() < 1e-15);
        assert!(spacer_hydraulic_diameter(h, 0.8) < 2.0 * h);
    }

    #[test]
    fn slit_pressure_drop_is_f96_over_re() {
        // Darcy form dp = f (L/d_h) rho u^2 / 2 with f = 96/Re must equal 12 mu u L / h^2.
        let (mu, rho, u, l, h) = (1e-3, 1000.0, 0.05, 0.1, 5e-4);
        let re = rho * u * 2.0 * h / mu;
        let darcy = 96.0 / re * l / (2.0 * h) * rho * u * u / 2.0;
        assert!((darcy - slit_pressure_drop(mu, u, l, h)).abs() < 1e-9);
    }
}
