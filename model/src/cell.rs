//! The voltage balance of one cell pair at one point along the channel.
//!
//! U_cell = E_mem + i R_ohm + V_T (v_CEM + v_AEM) + 2 V_T [ln(1 + i/i_lim,c,CEM) + ln(1 + i/i_lim,c,AEM)]
//!
//! - E_mem = [(2 tm_CEM - 1) + (2 tm_AEM - 1)] V_T ln(c_c / c_d): membrane potentials of the
//!   bulk concentration ratio (ideal solutions; the polarisation of the layers is carried by
//!   the layer voltages, so E_mem uses bulk, not wall, concentrations).
//! - R_ohm = R_CEM/f_CEM + R_AEM/f_AEM (a patterned membrane conducts through its open share
//!   only; f = 1 when unpatterned) + the solution-side constriction of each striped face,
//!   counted once (see [`constriction_length`]: exact for a layer of thickness H between the
//!   striped face and an equipotential plane, saturating at H (1/f - 1) where the pitch
//!   exceeds H; on the diluate side less the part inside the funnelling film, which the
//!   funnelling factor and the layer law already hold) + the diluate and concentrate cores
//!   shadow (h - 2 delta) / kappa. The two diffusion layers of each channel are left out of
//!   the ohmic term because the layer voltages 2 V_T ln(c_b/c_s) already hold their ohmic
//!   drop (no double counting).
//! - v_CEM, v_AEM: diluate-side layer voltages in thermal units, each with its own law
//!   ([`crate::interface::Layer`], classic plus overlimiting branch).
//! - The concentrate-side enrichment layers: 2 V_T ln(1 + i / i_lim,c) each (ideal membrane).
//!
//! Solve strategy: the unknown is the layer voltage of the membrane with the lower
//! heterogeneous limit (the CEM for NaCl); the current follows in closed form, and the other
//! layer is inverted in closed form while it is below its own onset. The residual is
//! strictly increasing in the unknown, bracketed by [0, (U - E_mem) / V_T], and solved by
//! Newton steps kept inside the bracket ([`crate::numerics::newton_bracketed`]).

use crate::constants::{RomConstants, FARADAY};
use crate::design::{Design, MembranePhysics, PatternSide};
use crate::hydraulics::{channel_flow, ChannelFlow};
use crate::interface::{water_splitting_share, Layer, Surface};
use crate::membrane::{pair_state, Exchange, Membrane, RESISTANCE_REFERENCE_MOL_M3};
use crate::numerics::newton_bracketed;
use crate::properties::{properties, ConductivityModel, Properties};
use crate::transfer::SherwoodModel;

/// Constriction length H (1 / Phi(f, p / H) - 1), m, of a conducting layer of thickness
/// `thickness_m` between a face striped with open fraction f (pitch p; conducting stripes
/// equipotential, the rest insulating) and an equipotential plane: divided by the layer's
/// conductivity it is the area resistance the stripes add to the layer. Phi is the same
/// exact two-dimensional solution as the funnelling factor ([`crate::interface::Funnel`]; the
/// concentration and the potential obey the same Laplace problem). Limits:
/// (p / pi) ln(1 / sin(pi f / 2)) for p << H (the classic constriction of periodic strips on
/// an insulating plane) and H (1/f - 1) for p >> H (current confined to the stripes across
/// the whole layer): it saturates instead of growing with p. 0 for f = 1.
pub fn constriction_length(pitch_m: f64, open_fraction: f64, thickness_m: f64) -> f64 {
    if open_fraction >= 1.0 || thickness_m <= 0.0 {
        return 0.0;
    }
    let phi = crate::interface::Funnel::new(open_fraction).phi(pitch_m / thickness_m);
    thickness_m * (1.0 / phi - 1.0)
}

/// Ratio of the slopes di/dv of the two layers beyond which the flatter layer's voltage is
/// taken as the unknown (for conditioning on a current plateau).
const CONDITIONING: f64 = 1e4;

/// Everything about one cell pair that is constant along the channel.
#[derive(Debug, Clone, Copy)]
pub struct Cell {
    /// Thermal voltage, V.
    pub vt: f64,
    /// Properties at the feed.
    pub props: Properties,
    /// Conductivity law.
    pub cond: ConductivityModel,
    /// Membrane transport numbers.
    pub tm_cem: f64,
    /// AEM counter-ion transport number.
    pub tm_aem: f64,
    /// CEM area resistance including 1/f, Ohm m^2.
    pub r_cem: f64,
    /// AEM area resistance including 1/f, Ohm m^2.
    pub r_aem: f64,
    /// Constriction lengths of the striped faces on the diluate side over the channel
    /// (each face to the opposite wall, or to the mid-plane when both walls are striped), m.
    pub constriction_d_m: f64,
    /// The same on the concentrate side (stripes go through the membrane: its concentrate
    /// face is striped too), m.
    pub constriction_c_m: f64,
    /// Diluate gap, m.
    pub gap_d: f64,
    /// Concentrate gap, m.
    pub gap_c: f64,
    /// Diluate flow.
    pub flow_d: ChannelFlow,
    /// Concentrate flow.
    pub flow_c: ChannelFlow,
    /// Diluate Sherwood model.
    pub sh_d: SherwoodModel,
    /// Concentrate Sherwood model.
    pub sh_c: SherwoodModel,
    /// CEM diluate surface.
    pub cem: Surface,
    /// AEM diluate surface.
    pub aem: Surface,
    /// Which membrane carries the pattern.
    pub pattern: PatternSide,
    /// F D / (tm_CEM - t+), A m^2 / mol per (1/m): i_lim = this c / delta.
    pub peers_cem: f64,
    /// F D / (tm_AEM - t-).
    pub peers_aem: f64,
    /// tm_CEM + tm_AEM - 1.
    pub xi0: f64,
    /// ROM constants.
    pub k: RomConstants,
    /// Which effects of real membranes are on.
    pub physics: MembranePhysics,
    /// The CEM ([`crate::membrane`]): effective fixed charge from its transport number at the
    /// diluate feed.
    pub mem_cem: Membrane,
    /// The AEM.
    pub mem_aem: Membrane,
    /// Solution conductivity at 0.5 M, the datasheet condition of the area resistances, S/m.
    pub kappa_ref: f64,
    /// F D, C m^2/(mol s) (the Peers limit is F D c / ((t_m - t) delta)).
    pub fd: f64,
    /// Cation transport number of the solution, -.
    pub tp: f64,
    /// Electro-osmotic volume per unit current of both membranes, V_w (t_w,CEM + t_w,AEM) / F,
    /// m^3/C (0 without water transport).
    pub eo_m3_c: f64,
    /// Osmotic volume flux per unit concentration difference, 2 R T (L_p,CEM + L_p,AEM),
    /// m/s per mol/m^3 (0 without water transport).
    pub osmotic_m4_mol_s: f64,
}

/// Warm-start values of the point solve (the previous point's layer voltages and slopes).
#[derive(Debug, Clone, Copy, Default, PartialEq)]
pub struct Guess {
    /// CEM layer voltage, thermal units.
    pub v_cem: f64,
    /// AEM layer voltage, thermal units.
    pub v_aem: f64,
    /// di/dv of the CEM layer there (0 = unknown), A/m^2.
    pub slope_cem: f64,
    /// di/dv of the AEM layer there, A/m^2.
    pub slope_aem: f64,
}

/// The solution at one point.
#[derive(Debug, Clone, Copy, Default, PartialEq)]
pub struct PointSolution {
    /// Current density, A/m^2.
    pub current_density: f64,
    /// CEM diluate-side layer voltage, thermal units.
    pub v_cem: f64,
    /// AEM diluate-side layer voltage, thermal units.
    pub v_aem: f64,
    /// Current efficiency xi = (tm_CEM + tm_AEM - 1)(1 - (ws_CEM + ws_AEM)/2), -.
    pub xi: f64,
    /// Water-splitting share at the CEM, -.
    pub ws_cem: f64,
    /// Water-splitting share at the AEM, -.
    pub ws_aem: f64,
    /// Active-area fraction of the patterned membrane, -.
    pub alpha: f64,
    /// Vortex wavelength at the patterned membrane (0 = no electroconvection), m.
    pub wavelength: f64,
    /// Heterogeneous limit of the limiting membrane, A/m^2.
    pub limiting: f64,
    /// True when the CEM has the lower heterogeneous limit.
    pub cem_limits: bool,
    /// Salt back-diffusion into the diluate in current units, A/m^2 (0 when off).
    pub back_a_m2: f64,
    /// Water flux out of the diluate (osmosis and electro-osmosis), m/s (0 when off).
    pub water_m_s: f64,
}

/// The local state that does not depend on the current (one per point).
#[derive(Debug, Clone, Copy)]
pub struct Point {
    /// CEM diluate layer law.
    pub cem: Layer,
    /// AEM diluate layer law.
    pub aem: Layer,
    /// Membrane potentials, V.
    pub e_mem: f64,
    /// Ohmic area resistance, Ohm m^2.
    pub r_ohm: f64,
    /// 1 / i_lim on the concentrate side of the CEM, m^2/A.
    pub inv_cc: f64,
    /// 1 / i_lim on the concentrate side of the AEM, m^2/A.
    pub inv_ca: f64,
    /// tm_CEM + tm_AEM - 1 here (with Donnan transport numbers, local), -.
    pub xi0: f64,
    /// Salt back-diffusion into the diluate through both membranes, in current units
    /// F J_s, A/m^2 (0 when off).
    pub back_a_m2: f64,
    /// Osmotic water flux out of the diluate, m/s (0 when off).
    pub osmotic_m_s: f64,
}

impl Cell {
    /// Build the cell of a design (inputs assumed validated).
    pub fn new(design: &Design, k: &RomConstants) -> Self {
        let w = &design.water;
        let ch = &design.channel;
        let m = &design.membranes;
        let op = &design.operation;
        let props = properties(w.salt, w.temperature_k, w.feed_concentration_mol_m3);
        let props_c = properties(
            w.salt,
            w.temperature_k,
            w.concentrate_feed_concentration_mol_m3,
        );
        let flow = |gap, u, p: &Properties| {
            channel_flow(
                ch.spacer,
                gap,
                ch.length_m,
                u,
                p.density_kg_m3,
                p.dynamic_viscosity_pa_s,
                p.salt_diffusivity_m2_s,
            )
        };
        let flow_d = flow(ch.gap_m, op.velocity_m_s, &props);
        let flow_c = flow(ch.concentrate_gap_m, op.concentrate_velocity_m_s, &props_c);
        let (f_cem, f_aem) = match m.pattern_side {
            PatternSide::Cem => (m.open_fraction, 1.0),
            PatternSide::Aem => (1.0, m.open_fraction),
            PatternSide::Both => (m.open_fraction, m.open_fraction),
        };
        let d = props.salt_diffusivity_m2_s;
        let tp = props.cation_transport_number;
        // A striped face's current spreads out to the opposite wall, or to the mid-plane when
        // both walls are striped.
        let span = |gap: f64| match m.pattern_side {
            PatternSide::Both => 0.5 * gap,
            _ => gap,
        };
        let ph = m.physics;
        let c_f = w.feed_concentration_mol_m3;
        let mem_cem = Membrane::new(
            Exchange::Cation,
            m.cem_transport_number,
            c_f,
            tp,
            m.cem_area_resistance_ohm_m2,
            ph.cem,
        );
        let mem_aem = Membrane::new(
            Exchange::Anion,
            m.aem_transport_number,
            c_f,
            tp,
            m.aem_area_resistance_ohm_m2,
            ph.aem,
        );
        let cond = ConductivityModel::new(w.salt, w.temperature_k);
        let water_volume = crate::membrane::WATER_MOLAR_MASS_KG_MOL
            / crate::properties::water_density(w.temperature_k);
        let (eo, osm) = if ph.water_transport {
            (
                water_volume * (ph.cem.water_transport_number + ph.aem.water_transport_number)
                    / FARADAY,
                crate::membrane::osmotic_pressure(w.temperature_k, 1.0)
                    * (ph.cem.water_permeability_m_s_pa + ph.aem.water_permeability_m_s_pa),
            )
        } else {
            (0.0, 0.0)
        };
        Cell {
            vt: props.thermal_voltage_v,
            props,
            cond,
            tm_cem: m.cem_transport_number,
            tm_aem: m.aem_transport_number,
            r_cem: m.cem_area_resistance_ohm_m2 / f_cem,
            r_aem: m.aem_area_resistance_ohm_m2 / f_aem,
            constriction_d_m: constriction_length(m.pitch_m, f_cem, span(ch.gap_m))
                + constriction_length(m.pitch_m, f_aem, span(ch.gap_m)),
            constriction_c_m: constriction_length(m.pitch_m, f_cem, span(ch.concentrate_gap_m))
                + constriction_length(m.pitch_m, f_aem, span(ch.concentrate_gap_m)),
            gap_d: ch.gap_m,
            gap_c: ch.concentrate_gap_m,
            flow_d,
            flow_c,
            sh_d: SherwoodModel::new(ch.spacer, &flow_d),
            sh_c: SherwoodModel::new(ch.spacer, &flow_c),
            cem: Surface::new(m.pitch_m, f_cem, k),
            aem: Surface::new(m.pitch_m, f_aem, k),
            pattern: m.pattern_side,
            peers_cem: FARADAY * d / (m.cem_transport_number - tp),
            peers_aem: FARADAY * d / (m.aem_transport_number - (1.0 - tp)),
            xi0: m.cem_transport_number + m.aem_transport_number - 1.0,
            k: *k,
            physics: ph,
            mem_cem,
            mem_aem,
            kappa_ref: cond.conductivity(RESISTANCE_REFERENCE_MOL_M3),
            fd: FARADAY * d,
            tp,
            eo_m3_c: eo,
            osmotic_m4_mol_s: osm,
        }
    }

    /// The local laws at diluate layer thickness `delta_d`, concentrate layer thickness
    /// `delta_c` and bulk concentrations `c_d`, `c_c` (mol/m^3).
    #[inline]
    pub fn point(&self, delta_d: f64, delta_c: f64, c_d: f64, c_c: f64) -> Point {
        let kappa_d = self.cond.conductivity(c_d);
        let kappa_c = self.cond.conductivity(c_c);
        let core_d = (self.gap_d - 2.0 * delta_d).max(0.0) * self.flow_d.shadow_factor;
        let core_c = (self.gap_c - 2.0 * delta_c).max(0.0) * self.flow_c.shadow_factor;
        let ph = &self.physics;
        // Transport numbers, membrane potential and back-diffusion: ideal (constant transport
        // numbers, E = sum (2 t - 1) V_T ln(c_c/c_d)) or Donnan at each face (TMS).
        let (xi0, peers_cem, peers_aem, e_mem, back) = if ph.donnan || ph.salt_back_diffusion {
            let st = pair_state(&self.mem_cem, &self.mem_aem, c_d, c_c);
            let back = if ph.salt_back_diffusion {
                FARADAY * st.salt_back_flux
            } else {
                0.0
            };
            if ph.donnan {
                (
                    st.t_cem + st.t_aem - 1.0,
                    self.fd / (st.t_cem - self.tp),
                    self.fd / (st.t_aem - (1.0 - self.tp)),
                    self.vt * st.potential,
                    back,
                )
            } else {
                let e = 2.0 * self.xi0 * self.vt * (c_c / c_d).ln();
                (self.xi0, self.peers_cem, self.peers_aem, e, back)
            }
        } else {
            let e = 2.0 * self.xi0 * self.vt * (c_c / c_d).ln();
            (self.xi0, self.peers_cem, self.peers_aem, e, 0.0)
        };
        let cem = self.cem.layer(peers_cem * c_d / delta_d, delta_d);
        let aem = self.aem.layer(peers_aem * c_d / delta_d, delta_d);
        // The diluate constriction inside the funnelling film (thickness ratio x delta) is in
        // Phi and the layer law already: count the rest once.
        let film = self.k.funnel_layer_ratio * delta_d;
        let inside = film * (1.0 / cem.phi - 1.0) + film * (1.0 / aem.phi - 1.0);
        let constriction_d = (self.constriction_d_m - inside).max(0.0);
        // The membranes' own resistance: constant, or rising in dilute solution (Galama et al.
        // 2014 two-resistor form at the more dilute of the two solutions).
        let r_mem = if ph.concentration_dependent_resistance {
            let ratio = self.kappa_ref * crate::membrane::dilute_resistivity(kappa_d, kappa_c);
            let f = |phi: f64| (1.0 - phi) + phi * ratio;
            self.r_cem * f(ph.cem.solution_resistance_share)
                + self.r_aem * f(ph.aem.solution_resistance_share)
        } else {
            self.r_cem + self.r_aem
        };
        let r_ohm = r_mem
            + (constriction_d + core_d) / kappa_d
            + (self.constriction_c_m + core_c) / kappa_c;
        Point {
            cem,
            aem,
            e_mem,
            r_ohm,
            inv_cc: delta_c / (peers_cem * c_c),
            inv_ca: delta_c / (peers_aem * c_c),
            xi0,
            back_a_m2: back,
            osmotic_m_s: self.osmotic_m4_mol_s * (c_c - c_d),
        }
    }

    /// Solve the voltage balance at one point for the cell-pair voltage `u` (V).
    ///
    /// Returns zero current when `u` does not exceed the membrane potentials (no
    /// desalination; the model does not run the cell backwards). The unknown is the voltage
    /// of the layer whose current is the flatter function of its voltage (on a plateau the
    /// voltage is the well-conditioned variable); when the solution shows the other layer
    /// to be the flatter one, the solve is repeated with the roles swapped, warm-started.
    pub fn solve(&self, p: &Point, u: f64, guess: &mut Guess) -> PointSolution {
        let cem_limits = p.cem.i_het <= p.aem.i_het;
        let drive = (u - p.e_mem) / self.vt;
        let (v_cem, v_aem, i, slope_cem, slope_aem) = if drive <= 0.0 {
            (0.0, 0.0, 0.0, 0.0, 0.0)
        } else {
            // Start with the layer that was clearly flatter at the previous point (on a
            // plateau the voltage is the well-conditioned unknown); when neither is clearly
            // flatter, with the one whose law is dearer to invert (the patterned one), so the
            // cheap plain law is the one inverted in the loop.
            let cem_dear = !p.cem.is_plain() || p.aem.is_plain();
            let (dc, da) = (guess.slope_cem, guess.slope_aem);
            let mut cem_primary = if dc > 0.0 && da > 0.0 {
                if dc * CONDITIONING < da {
                    true
                } else if da * CONDITIONING < dc {
                    false
                } else {
                    cem_dear
                }
            } else {
                cem_limits
            };
            let mut g = if cem_primary {
                (guess.v_cem, guess.v_aem)
            } else {
                (guess.v_aem, guess.v_cem)
            };
            let mut result = (0.0, 0.0, 0.0, 0.0, 0.0);
            for _ in 0..2 {
                let (prim, sec) = if cem_primary {
                    (&p.cem, &p.aem)
                } else {
                    (&p.aem, &p.cem)
                };
                let (v, vs, i, dip, dis) = self.solve_with(p, prim, sec, drive, g);
                result = if cem_primary {
                    (v, vs, i, dip, dis)
                } else {
                    (vs, v, i, dis, dip)
                };
                if dis * CONDITIONING >= dip {
                    break;
                }
                cem_primary = !cem_primary;
                g = (vs, v);
            }
            result
        };
        *guess = Guess {
            v_cem,
            v_aem,
            slope_cem,
            slope_aem,
        };
        let k = &self.k;
        let ws_cem = water_splitting_share(v_cem, k.water_splitting_onset, k.water_splitting_scale);
        let ws_aem =
            water_splitting_share(v_aem, k.water_splitting_onset_aem, k.water_splitting_scale);
        let (pat, v_pat) = match self.pattern {
            PatternSide::Aem => (&p.aem, v_aem),
            _ => (&p.cem, v_cem),
        };
        let (alpha, wavelength) = pat.alpha_and_wavelength(v_pat);
        PointSolution {
            current_density: i,
            v_cem,
            v_aem,
            xi: p.xi0 * (1.0 - 0.5 * (ws_cem + ws_aem)),
            ws_cem,
            ws_aem,
            alpha,
            wavelength,
            limiting: p.cem.i_het.min(p.aem.i_het),
            cem_limits,
            back_a_m2: p.back_a_m2,
            water_m_s: p.osmotic_m_s + self.eo_m3_c * i,
        }
    }

    /// Bracketed Newton solve of the balance in the voltage of `prim`, inverting `sec`.
    /// Returns (v_prim, v_sec, i, di/dv_prim, di/dv_sec).
    #[allow(clippy::float_cmp)] // exact on purpose: the bracket end is the very point already solved, not a computed neighbour
    fn solve_with(
        &self,
        p: &Point,
        prim: &Layer,
        sec: &Layer,
        drive: f64,
        guess: (f64, f64),
    ) -> (f64, f64, f64, f64, f64) {
        let inv_r_vt = p.r_ohm / self.vt;
        // Last evaluated (v, i, v_sec, di, dis).
        let last_cell = std::cell::Cell::new((f64::NAN, 0.0, guess.1, 0.0, 0.0));
        let residual = |v: f64| {
            let (i, di) = prim.current(v);
            let (vs, dis) = sec.voltage(i, last_cell.get().2);
            last_cell.set((v, i, vs, di, dis));
            let a = 1.0 + i * p.inv_cc;
            let b = 1.0 + i * p.inv_ca;
            let f = i * inv_r_vt + v + vs + 2.0 * (a * b).ln() - drive;
            let df = 1.0 + di * (inv_r_vt + 1.0 / dis + 2.0 * (p.inv_cc / a + p.inv_ca / b));
            (f, df)
        };
        let kink = |a: f64, b: f64, k: f64| (a - k) * (b - k) <= 0.0;
        // A Newton step across either layer's onset kink: the primary's at its onset voltage,
        // the secondary's where its voltage, moved along the tangent, passes its onset.
        let kinked = |x: f64, next: f64| {
            let (xl, _, vs, di, dis) = last_cell.get();
            kink(x, next, prim.onset())
                || (xl == x && kink(vs, vs + di / dis * (next - x), sec.onset()))
        };
        let (v, _) = newton_bracketed(residual, 0.0, drive, guess.0, 1e-10 * (1.0 + drive), kinked);
        let mut last = last_cell.get();
        let dv = v - last.0;
        if dv != 0.0 {
            // The last Newton step is tiny: move the last evaluation along its tangent (the
            // neglected terms are of order dv^2) rather than evaluate again; evaluate when the
            // step is not tiny or crosses the onset kink of either layer.
            let dvs = last.3 * dv / last.4;
            let vs = last.2 + dvs;
            let tiny = 1e-5;
            if dv.abs() <= tiny
                && dvs.abs() <= tiny
                && !kink(last.0, v, prim.onset())
                && !kink(last.2, vs, sec.onset())
            {
                last = (v, last.1 + last.3 * dv, vs, last.3, last.4);
            } else {
                residual(v);
                last = last_cell.get();
            }
        }
        (v, last.2, last.1, last.3, last.4)
    }

    /// The cell-pair voltage of a solved point from its layer voltages (the forward balance;
    /// well conditioned also on a current plateau, where inverting i is not).
    pub fn voltage_of(&self, p: &Point, s: &PointSolution) -> f64 {
        let i = s.current_density;
        p.e_mem
            + i * p.r_ohm
            + self.vt
                * (s.v_cem
                    + s.v_aem
                    + 2.0 * ((1.0 + i * p.inv_cc).ln() + (1.0 + i * p.inv_ca).ln()))
    }

    /// The cell-pair voltage that carries current density `i` at point `p` (the forward
    /// direction of [`Cell::solve`]; ill-conditioned on a plateau of either layer).
    pub fn voltage_at(&self, p: &Point, i: f64) -> f64 {
        let (vc, _) = p.cem.voltage(i, p.cem.onset());
        let (va, _) = p.aem.voltage(i, p.aem.onset());
        p.e_mem
            + i * p.r_ohm
            + self.vt * (vc + va + 2.0 * ((1.0 + i * p.inv_cc).ln() + (1.0 + i * p.inv_ca).ln()))
    }
}
