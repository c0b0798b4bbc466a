//! Ion-exchange membranes as real ones: Donnan equilibrium at each face
//! (Teorell-Meyer-Sievers), the membrane potential that follows, an area resistance that
//! depends on the solution concentration, salt back-diffusion, and water transport by
//! osmosis and electro-osmosis.
//!
//! Every relation is per membrane and per unit membrane area; [`crate::cell`] adds the two
//! membranes of a cell pair and [`crate::channel`] carries the fluxes along the channel.
//! Each effect can be switched off in [`crate::design::MembranePhysics`]; with all of them
//! off the model is the ideal-membrane model of model revision 7, bit for bit.
//!
//! # Teorell-Meyer-Sievers (TMS)
//! Teorell, Proc. Soc. Exp. Biol. Med. 33 (1935) 282; Meyer and Sievers, Helv. Chim. Acta 19
//! (1936) 649. A membrane holds fixed charge X (mol per m^3 of sorbed water; a CEM's is
//! negative, an AEM's positive, X here is its magnitude). At a face in contact with a 1:1
//! salt solution of concentration c (ideal solutions, Donnan equilibrium), the co-ion and
//! counter-ion concentrations inside the membrane are
//!
//!   c_co = (sqrt(X^2 + 4 c^2) - X) / 2 = 2 c^2 / (sqrt(X^2 + 4 c^2) + X),   c_ct = c_co + X,
//!
//! (c_co c_ct = c^2). The counter-ion transport number at that face is
//! t = D_ct c_ct / (D_ct c_ct + D_co c_co), with the membrane-phase diffusivities in the ratio
//! of the solution's (an assumption of this crate: both are hindered alike). Limits:
//! X >> c gives t -> 1 (ideal membrane); X << c gives the solution's own transport number.
//! The zero-current membrane potential (Donnan potentials at both faces plus the diffusion
//! potential inside, where electroneutrality c_ct = c_co + X makes the Nernst-Planck
//! equations integrable) is, in thermal units, from face 1 (diluate) to face 2 (concentrate),
//!
//!   E = ln(c_2 / c_ct,2) - ln(c_1 / c_ct,1) + U ln(s_2 + U X) - U ln(s_1 + U X),
//!
//! s = sqrt(X^2 + 4 c^2), U = (D_ct - D_co) / (D_ct + D_co): the classic TMS result
//! (as written in Lakshminarayanaiah, Transport Phenomena in Membranes, 1969, ch. 5; from
//! memory). It tends to ln(c_2/c_1) for an ideal membrane and to the liquid-junction
//! potential U ln(c_2/c_1) for an uncharged one.
//!
//! The fixed charge is not a datasheet number; stria derives the effective X of each membrane
//! from the counter-ion transport number the engineer gives at the diluate feed concentration
//! (both faces at the feed), by inverting the face relation in closed form:
//! r = c_co / c_ct = D_ct (1 - t) / (D_co t), X = c (1/sqrt(r) - sqrt(r)). The transport
//! number then falls as the concentrate strengthens, as measured (Strathmann, Ion-Exchange
//! Membrane Separation Processes, 2004, ch. 3). Homogeneous ED membranes hold about 1-3 mol of
//! fixed charge per litre of sorbed water (from memory); the effective X of a membrane with
//! t = 0.97 in 41 mM NaCl is lower (about 0.3 mol/L), because the ideal Donnan model
//! overstates the co-ion exclusion of a real membrane.
//!
//! # Area resistance
//! Galama et al., J. Membr. Sci. 467 (2014) 279 measured the resistance of a CEM between
//! NaCl solutions of 0.01-1.1 M and found it set mainly by the lower of the two external
//! concentrations, well described by two resistors in series: a gel phase independent of
//! the concentration and a solution phase whose resistance goes as that of the external
//! solution. With the datasheet value R_ref at c_ref = 0.5 M NaCl (the usual test condition,
//! common practice) and the solution share phi of R_ref there:
//!
//!   R = R_ref [(1 - phi) + phi kappa(c_ref) rho_low],
//!
//! where rho_low is the resistivity of the lower-concentration solution, 1/kappa(min(c_d, c_c)).
//! A minimum would put a kink into the along-channel right-hand side wherever the two
//! streams' concentrations cross (a concentrate fed weaker than the diluate), which the
//! integrator's error control does not see; stria takes it smoothly as the Lehmer mean of the
//! two resistivities, rho_low = (rho_d^3 + rho_c^3) / (rho_d^2 + rho_c^2): the larger one when
//! they differ much (within 1 % once they differ tenfold), either one when they are equal.
//! It rises steeply (as 1/c) in dilute solution, as Dlugolecki et al., J. Membr. Sci. 346
//! (2009) 163 report below about 0.01-0.05 M. phi = 0.08 (range 0.02-0.3) puts R(0.01 M)
//! at about 4 R_ref (from memory of the measured curves; low confidence; prior 0.02-0.32).
//!
//! # Salt back-diffusion
//! The salt that diffuses from the concentrate back into the diluate is limited by the co-ion
//! (trace in the membrane when c << X; the counter-ion follows it to keep electroneutrality):
//! J_s = P (c_co(c_c) - c_co(c_d)), mol/(m^2 s), with the Donnan co-ion concentrations of the
//! faces and the co-ion permeance P = D_co,membrane / thickness (m/s). P = 1e-7 m/s (prior
//! 1e-8 to 1e-6; from memory: membrane-phase diffusivities are one to two decades below the
//! solution's, membranes are 0.1-0.2 mm thick). It grows as c^2 while c << X.
//!
//! # Water transport
//! Volume flux from the diluate into the concentrate, m^3/(m^2 s) (= m/s):
//! J_v = V_w t_w i / F + L_p 2 R T (c_c - c_d), where t_w is the electro-osmotic water
//! transport number (mol of water carried per faraday through the membrane; about 5-10 in
//! NaCl, Strathmann 2004, from memory), V_w the molar volume of water (M_w / rho_w) and L_p
//! the osmotic water permeability, m/(s Pa), with the ideal van 't Hoff osmotic pressure
//! 2 R T c (about 7 % high for NaCl at 0.1 M, where the osmotic coefficient is 0.93).
//! Defaults: t_w = 6 per membrane (prior 3-9), L_p = 2e-14 m/(s Pa) (prior 5e-15 to 8e-14;
//! from memory, low confidence). [`priors`] gives every material constant's prior range. Both move water out of the diluate, so the product flow
//! falls along the channel and its concentration falls less than its salt flow.

use serde::{Deserialize, Serialize};

use crate::constants::{Distribution, Prior, GAS_CONSTANT};

/// Reference concentration of the datasheet area resistance: 0.5 M NaCl, mol/m^3 (common
/// practice).
pub const RESISTANCE_REFERENCE_MOL_M3: f64 = 500.0;

/// Molar mass of water, kg/mol.
pub const WATER_MOLAR_MASS_KG_MOL: f64 = 0.018_015_28;

/// Material data of one membrane beyond its transport number and datasheet resistance (a
/// generic homogeneous grade by default: [`MembraneMaterial::generic`]).
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct MembraneMaterial {
    /// phi: share of the datasheet area resistance (at 0.5 M NaCl) that scales with the
    /// resistance of the external solution (Galama et al. 2014 two-resistor form), 0..1.
    pub solution_resistance_share: f64,
    /// P: co-ion permeance of the membrane, D_co / thickness, m/s (salt back-diffusion).
    pub salt_permeance_m_s: f64,
    /// L_p: osmotic water permeability, m/(s Pa).
    pub water_permeability_m_s_pa: f64,
    /// t_w: electro-osmotic water transport number, mol water per faraday.
    pub water_transport_number: f64,
}

impl MembraneMaterial {
    /// A generic homogeneous ED grade (values from memory; see the module docs for ranges).
    pub const fn generic() -> Self {
        MembraneMaterial {
            solution_resistance_share: 0.08,
            salt_permeance_m_s: 1e-7,
            water_permeability_m_s_pa: 2e-14,
            water_transport_number: 6.0,
        }
    }
}

impl Default for MembraneMaterial {
    fn default() -> Self {
        Self::generic()
    }
}

/// The prior of every uncertain membrane material constant (the same for the CEM and the
/// AEM), in the form of [`crate::constants::priors`]: keys are those of a study's
/// `[membranes]` section (`cem_...` and `aem_...`), units those of the key, centred on the
/// generic grade's default (log-uniform priors at their geometric centre, uniform at their
/// arithmetic centre).
pub fn priors() -> Vec<Prior> {
    use Distribution::*;
    let rows: [(&str, &str, Distribution, &str, &str); 4] = [
        (
            "resistance_solution_share",
            "-",
            LogUniform { lower: 0.02, upper: 0.32 },
            "generic grade (this crate): R(0.01 M) about 4 R(0.5 M)",
            "from memory: measured R(c) curves of homogeneous grades rise 2-10 times from 0.5 M to 0.01 M (Dlugolecki et al. 2009; Galama et al. 2014); a factor 4 either way",
        ),
        (
            "salt_permeance_m_s",
            "m/s",
            LogUniform { lower: 1e-8, upper: 1e-6 },
            "generic grade (this crate), from memory",
            "from memory: membrane-phase co-ion diffusivities of 1e-12 to 1e-10 m^2/s over 0.1-0.2 mm; a decade either way",
        ),
        (
            "water_permeability_m_s_Pa",
            "m/(s Pa)",
            LogUniform { lower: 5e-15, upper: 8e-14 },
            "generic grade (this crate), from memory, low confidence",
            "from memory, low confidence: osmotic water permeabilities of ED membranes; a factor 4 either way",
        ),
        (
            "electroosmotic_water_mol_F",
            "mol/F",
            Uniform { lower: 3.0, upper: 9.0 },
            "generic grade (this crate)",
            "Strathmann, Ion-Exchange Membrane Separation Processes, 2004 (from memory): 5-10 mol water per faraday in NaCl; widened down to 3 for tight grades",
        ),
    ];
    let mut out = Vec::new();
    for side in ["cem", "aem"] {
        for (key, unit, distribution, centre_source, range_source) in rows {
            let key: &'static str = match (side, key) {
                ("cem", "resistance_solution_share") => "cem_resistance_solution_share",
                ("cem", "salt_permeance_m_s") => "cem_salt_permeance_m_s",
                ("cem", "water_permeability_m_s_Pa") => "cem_water_permeability_m_s_Pa",
                ("cem", _) => "cem_electroosmotic_water_mol_F",
                (_, "resistance_solution_share") => "aem_resistance_solution_share",
                (_, "salt_permeance_m_s") => "aem_salt_permeance_m_s",
                (_, "water_permeability_m_s_Pa") => "aem_water_permeability_m_s_Pa",
                _ => "aem_electroosmotic_water_mol_F",
            };
            out.push(Prior {
                key,
                unit,
                distribution,
                centre_source,
                range_source,
            });
        }
    }
    out
}

/// Donnan equilibrium of a membrane of fixed charge `x` (mol/m^3) with a 1:1 salt solution of
/// concentration `c` (mol/m^3): (counter-ion, co-ion) concentrations inside, mol/m^3.
/// The co-ion form 2 c^2 / (sqrt(X^2 + 4 c^2) + X) has no cancellation when c << X.
#[inline]
pub fn donnan(x: f64, c: f64) -> (f64, f64) {
    let f = Face::new(1.0 / x, c);
    (f.co + x, f.co)
}

/// One face of a membrane in Donnan equilibrium, in forms that stay finite for an ideal
/// membrane (X infinite): g = c_co / X, q = sqrt(X^2 + 4 c^2) / X, and c_co itself.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Face {
    /// c_co / X, -.
    pub g: f64,
    /// sqrt(1 + (2 c / X)^2), -.
    pub q: f64,
    /// Co-ion concentration inside, mol/m^3.
    pub co: f64,
}

impl Face {
    /// The face of a membrane with 1/X = `inv_x` (m^3/mol; 0 for an ideal membrane) in
    /// contact with concentration `c`.
    #[inline]
    pub fn new(inv_x: f64, c: f64) -> Self {
        let a = 2.0 * c * inv_x;
        let q = (1.0 + a * a).sqrt();
        let inv = 1.0 / (q + 1.0);
        Face {
            g: 0.5 * a * a * inv,
            q,
            co: c * a * inv,
        }
    }

    /// Counter-ion transport number with diffusivity ratio `rho` = D_co / D_ct:
    /// (1 + g) / (1 + g + rho g).
    #[inline]
    pub fn transport_number(&self, rho: f64) -> f64 {
        (1.0 + self.g) / (1.0 + self.g + rho * self.g)
    }
}

/// Counter-ion transport number at a face: D_ct c_ct / (D_ct c_ct + D_co c_co), with the
/// diffusivities given as weights `w_ct`, `w_co` (any common scale, e.g. the solution
/// transport numbers).
#[inline]
pub fn face_transport_number(x: f64, c: f64, w_ct: f64, w_co: f64) -> f64 {
    Face::new(1.0 / x, c).transport_number(w_co / w_ct)
}

/// The fixed charge (mol/m^3) that gives counter-ion transport number `t` at a face in
/// contact with concentration `c`: r = w_ct (1 - t) / (w_co t), X = c (1/sqrt(r) - sqrt(r)).
/// `t` must lie above the solution's own w_ct / (w_ct + w_co) (then X > 0); t = 1 gives
/// infinity (an ideal membrane).
pub fn fixed_charge_for(t: f64, c: f64, w_ct: f64, w_co: f64) -> f64 {
    let r = w_ct * (1.0 - t) / (w_co * t);
    if r <= 0.0 {
        return f64::INFINITY;
    }
    let q = r.sqrt();
    c * (1.0 / q - q)
}

/// TMS zero-current membrane potential from face 1 (concentration `c1`) to face 2 (`c2`), in
/// thermal units (module docs). Positive for c2 > c1; it opposes the desalting current.
/// Written with g = c_co/X and q = s/X, so that an ideal membrane (X infinite) gives
/// ln(c2/c1): ln(c2/c1) + ln((1 + g1)/(1 + g2)) + U ln((q2 + U)/(q1 + U)).
pub fn tms_potential(x: f64, c1: f64, c2: f64, w_ct: f64, w_co: f64) -> f64 {
    let u = (w_ct - w_co) / (w_ct + w_co);
    let f1 = Face::new(1.0 / x, c1);
    let f2 = Face::new(1.0 / x, c2);
    (c2 * (1.0 + f1.g) / (c1 * (1.0 + f2.g))).ln() + u * ((f2.q + u) / (f1.q + u)).ln()
}

/// The resistivity of the more dilute of two solutions of conductivities `kappa_d`, `kappa_c`
/// (S/m), taken smoothly: the Lehmer mean (a^3 + b^3)/(a^2 + b^2) of the resistivities, Ohm m.
#[inline]
pub fn dilute_resistivity(kappa_d: f64, kappa_c: f64) -> f64 {
    let a = 1.0 / kappa_d;
    let b = 1.0 / kappa_c;
    let (a2, b2) = (a * a, b * b);
    (a2 * a + b2 * b) / (a2 + b2)
}

/// Area resistance between solutions of conductivities `kappa_d`, `kappa_c` (S/m) from the
/// datasheet value `r_ref` (Ohm m^2) at conductivity `kappa_ref` (0.5 M NaCl at the same
/// temperature) and solution share `phi`: R = r_ref [(1 - phi) + phi kappa_ref rho_low]
/// (Galama et al. 2014; module docs).
#[inline]
pub fn area_resistance(r_ref: f64, phi: f64, kappa_ref: f64, kappa_d: f64, kappa_c: f64) -> f64 {
    r_ref * ((1.0 - phi) + phi * kappa_ref * dilute_resistivity(kappa_d, kappa_c))
}

/// Ideal (van 't Hoff) osmotic pressure of a 1:1 salt, Pa: 2 R T c.
#[inline]
pub fn osmotic_pressure(temperature_k: f64, c: f64) -> f64 {
    2.0 * GAS_CONSTANT * temperature_k * c
}

/// Which ion a membrane passes.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Exchange {
    /// Cation-exchange membrane: the cation is the counter-ion.
    Cation,
    /// Anion-exchange membrane: the anion is the counter-ion.
    Anion,
}

/// One membrane of a cell pair with the constants its relations need along the channel.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Membrane {
    /// Which ion it passes.
    pub exchange: Exchange,
    /// Effective fixed charge, mol/m^3 (infinite for an ideal membrane).
    pub fixed_charge_mol_m3: f64,
    /// Counter-ion diffusivity weight (its solution transport number), -.
    pub w_ct: f64,
    /// Co-ion diffusivity weight, -.
    pub w_co: f64,
    /// Datasheet area resistance (0.5 M NaCl), Ohm m^2.
    pub area_resistance_ref_ohm_m2: f64,
    /// Material data.
    pub material: MembraneMaterial,
    /// 1 / X, m^3/mol (0 for an ideal membrane).
    pub inv_x: f64,
    /// D_co / D_ct, -.
    pub rho: f64,
}

impl Membrane {
    /// A membrane with counter-ion transport number `t` at both faces in `c_ref` (mol/m^3),
    /// in a salt of solution cation transport number `t_plus`.
    pub fn new(
        exchange: Exchange,
        t: f64,
        c_ref: f64,
        t_plus: f64,
        area_resistance_ref_ohm_m2: f64,
        material: MembraneMaterial,
    ) -> Self {
        let (w_ct, w_co) = match exchange {
            Exchange::Cation => (t_plus, 1.0 - t_plus),
            Exchange::Anion => (1.0 - t_plus, t_plus),
        };
        let x = fixed_charge_for(t, c_ref, w_ct, w_co);
        Membrane {
            exchange,
            fixed_charge_mol_m3: x,
            w_ct,
            w_co,
            area_resistance_ref_ohm_m2,
            material,
            inv_x: 1.0 / x,
            rho: w_co / w_ct,
        }
    }

    /// Counter-ion transport number at a face in contact with `c`, -.
    #[inline]
    pub fn face_transport_number(&self, c: f64) -> f64 {
        Face::new(self.inv_x, c).transport_number(self.rho)
    }

    /// Effective counter-ion transport number between the diluate `c_d` and the concentrate
    /// `c_c`: the mean of the two faces' (a reduced-order choice of this crate: it carries the
    /// co-ion leakage of both faces and tends to each face's value when the other is alike).
    #[inline]
    pub fn transport_number(&self, c_d: f64, c_c: f64) -> f64 {
        0.5 * (self.face_transport_number(c_d) + self.face_transport_number(c_c))
    }

    /// TMS membrane potential from the diluate to the concentrate, thermal units.
    pub fn potential(&self, c_d: f64, c_c: f64) -> f64 {
        tms_potential(self.fixed_charge_mol_m3, c_d, c_c, self.w_ct, self.w_co)
    }

    /// Area resistance of the unpatterned membrane between `kappa_d` and `kappa_c` (S/m),
    /// with `kappa_ref` the conductivity at 0.5 M, Ohm m^2.
    #[inline]
    pub fn area_resistance(&self, kappa_ref: f64, kappa_d: f64, kappa_c: f64) -> f64 {
        area_resistance(
            self.area_resistance_ref_ohm_m2,
            self.material.solution_resistance_share,
            kappa_ref,
            kappa_d,
            kappa_c,
        )
    }

    /// Salt back-diffusion from the concentrate into the diluate, mol/(m^2 s).
    #[inline]
    pub fn salt_back_flux(&self, c_d: f64, c_c: f64) -> f64 {
        self.material.salt_permeance_m_s
            * (Face::new(self.inv_x, c_c).co - Face::new(self.inv_x, c_d).co)
    }
}

/// Both membranes of a cell pair between the diluate and concentrate bulk concentrations.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct PairState {
    /// Effective CEM counter-ion transport number (mean of its faces), -.
    pub t_cem: f64,
    /// Effective AEM counter-ion transport number, -.
    pub t_aem: f64,
    /// Sum of the two TMS membrane potentials, thermal units.
    pub potential: f64,
    /// Salt back-diffusion through both membranes, mol/(m^2 s).
    pub salt_back_flux: f64,
}

/// The state of a CEM and an AEM between `c_d` and `c_c` (mol/m^3) in one pass: four faces
/// (four square roots) and two logarithms, the two potentials' terms merged (the AEM's
/// U is the CEM's with the sign changed). Equal to the per-membrane functions to round-off.
#[inline]
pub fn pair_state(cem: &Membrane, aem: &Membrane, c_d: f64, c_c: f64) -> PairState {
    let cd = Face::new(cem.inv_x, c_d);
    let cc = Face::new(cem.inv_x, c_c);
    let ad = Face::new(aem.inv_x, c_d);
    let ac = Face::new(aem.inv_x, c_c);
    // U of the CEM, (D+ - D-)/(D+ + D-); the AEM's is -u.
    let u = (cem.w_ct - cem.w_co) / (cem.w_ct + cem.w_co);
    let r = c_c / c_d;
    let donnan = r * r * (1.0 + cd.g) * (1.0 + ad.g) / ((1.0 + cc.g) * (1.0 + ac.g));
    let diffusion = (cc.q + u) * (ad.q - u) / ((cd.q + u) * (ac.q - u));
    PairState {
        t_cem: 0.5 * (cd.transport_number(cem.rho) + cc.transport_number(cem.rho)),
        t_aem: 0.5 * (ad.transport_number(aem.rho) + ac.transport_number(aem.rho)),
        potential: donnan.ln() + u * diffusion.ln(),
        salt_back_flux: cem.material.salt_permeance_m_s * (cc.co - cd.co)
            + aem.material.salt_permeance_m_s * (ac.co - ad.co),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    const TP: f64 = 0.396; // NaCl at 25 C (CRC Handbook diffusivities)

    #[test]
    fn donnan_product_and_electroneutrality() {
        for (x, c) in [
            (2000.0, 1.0),
            (2000.0, 500.0),
            (10.0, 1000.0),
            (300.0, 41.0),
        ] {
            let (ct, co) = donnan(x, c);
            assert!((ct * co - c * c).abs() <= 1e-12 * c * c);
            assert!((ct - co - x).abs() <= 1e-12 * ct);
        }
    }

    #[test]
    fn fixed_charge_inverts_the_face_transport_number() {
        for t in [0.5, 0.8, 0.95, 0.99, 0.9999] {
            for c in [1.0, 41.0, 500.0] {
                let x = fixed_charge_for(t, c, TP, 1.0 - TP);
                let back = face_transport_number(x, c, TP, 1.0 - TP);
                assert!((back - t).abs() < 1e-12, "t {t} c {c}: {back}");
            }
        }
        assert!(fixed_charge_for(1.0, 41.0, TP, 1.0 - TP).is_infinite());
    }
}

#[cfg(test)]
mod prior_tests {
    use super::*;

    #[test]
    fn every_material_constant_has_a_prior_centred_on_its_default() {
        let m = MembraneMaterial::generic();
        let defaults = [
            ("resistance_solution_share", m.solution_resistance_share),
            ("salt_permeance_m_s", m.salt_permeance_m_s),
            ("water_permeability_m_s_Pa", m.water_permeability_m_s_pa),
            ("electroosmotic_water_mol_F", m.water_transport_number),
        ];
        let p = priors();
        assert_eq!(p.len(), 8);
        for side in ["cem", "aem"] {
            for (key, value) in defaults {
                let full = format!("{side}_{key}");
                let prior = p.iter().find(|q| q.key == full).unwrap();
                let centre = match prior.distribution {
                    Distribution::Uniform { lower, upper } => 0.5 * (lower + upper),
                    Distribution::LogUniform { lower, upper } => (lower * upper).sqrt(),
                    Distribution::Normal { mean, .. } => mean,
                };
                assert!(
                    (centre / value - 1.0).abs() < 1e-12,
                    "{full}: {centre} {value}"
                );
            }
        }
    }
}
