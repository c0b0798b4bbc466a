//! Scaling of the concentrate: a water analysis, its speciation, and the calcite and gypsum
//! saturation indices of the feed and of the concentrate outlet.
//!
//! **Screening assumption (stated with every result).** The model desalinates one 1:1 salt; the
//! concentrate outlet's analysis is the feed's with *every* ion multiplied by that salt's
//! concentrate factor (outlet over inlet concentration of the concentrate stream), at the feed's
//! pH and temperature. Real concentrates shift pH (CO2 transfer, water splitting past the limiting
//! current) and membranes pass divalent ions differently; the indices screen, they do not predict.
//!
//! **Speciation.** An ion-association model of the kind PHREEQC runs with its `phreeqc.dat`
//! database (Parkhurst and Appelo, USGS Techniques and Methods 6-A43, 2013): the free ions Ca+2,
//! Mg+2, Na+, K+, Cl-, SO4-2, CO3-2 with the complexes and ion pairs HCO3-, CO2(aq), OH-, HSO4-,
//! CaCO3(aq), CaHCO3+, CaSO4(aq), CaHSO4+, CaOH+, MgCO3(aq), MgHCO3+, MgSO4(aq), MgOH+, NaCO3-,
//! NaHCO3(aq), NaSO4-, KSO4-. The mass balances (totals of Ca, Mg, Na, K, sulfate, and the
//! carbonate alkalinity at the fixed pH) are solved by Gauss-Seidel substitution, each free ion
//! in turn, with the ionic strength, the activity coefficients and the activity of water updated
//! every sweep, until no free molality changes by more than [`SPECIATION_TOLERANCE`] relative.
//!
//! **Activity coefficients** (log10, molal ionic strength I, charge z):
//! - ions with `phreeqc.dat` `-gamma a b`: the WATEQ extended Debye-Hueckel form
//!   (Truesdell and Jones, J. Res. USGS 2 (1974) 233): log g = -A z^2 sqrt(I) / (1 + B a sqrt(I)) + b I;
//! - other ions: Davies (1962): log g = -A z^2 (sqrt(I) / (1 + sqrt(I)) - 0.3 I);
//! - neutral species: log g = 0.1 I (PHREEQC's default salting-out coefficient);
//! - water: a_w = 1 - 0.017 sum(m_i) (PHREEQC's approximation).
//!
//! A = 1.82483e6 sqrt(rho) / (eps T)^1.5 and B = 50.2916 sqrt(rho / (eps T)) (a in Angstrom,
//! rho in g/cm^3; Helgeson and Kirkham, Am. J. Sci. 274 (1974) 1089, from memory) with the
//! water density and permittivity of [`crate::properties`].
//!
//! **Equilibrium constants** against temperature: calcite, HCO3- and CO2(aq) from Plummer and
//! Busenberg, Geochim. Cosmochim. Acta 46 (1982) 1011 (the analytic expressions `phreeqc.dat`
//! carries); the others from `phreeqc.dat`'s analytic expressions or, where it gives only log K
//! at 25 C and a reaction enthalpy, the van't Hoff equation with that enthalpy (as PHREEQC does).
//!
//! **Input conversion** as PHREEQC's with `units mg/l` and density 1 kg/L: molality = (mg/L /
//! gram formula weight / 1000) / (1 - TDS/1e6) where TDS is the sum of the given mg/L; sulfate is
//! read as SO4 (96.064 g/mol), alkalinity "as HCO3" as equivalents of 61.0191 g each (the formula
//! weights of `phreeqc.dat`'s element table).
//!
//! Validity: 0-90 C (Plummer and Busenberg's fit range), pH 4-10 here; the extended Debye-Hueckel
//! form holds to about I = 0.5 mol/kg ([`IONIC_STRENGTH_MAX`]); stronger brines need Pitzer's
//! equations. The cross-check against PHREEQC (tests/tests/acceptance/scaling_refs.rs) covers
//! fresh to strongly brackish waters and their concentrates.

use crate::output::Warning;
use crate::properties::{water_density, water_permittivity};
use crate::ModelError;
use serde::{Deserialize, Serialize};

/// Relative change of every free molality below which the speciation loop stops.
pub const SPECIATION_TOLERANCE: f64 = 1e-12;
/// Charge imbalance of an analysis above which a warning is given, percent of the sum of
/// cation and anion equivalents (common practice: analyses within 5 % are usually accepted for
/// waters above a few meq/L).
pub const IMBALANCE_WARN_PERCENT: f64 = 5.0;
/// Ionic strength above which the extended Debye-Hueckel activities lose their accuracy,
/// mol/kg (common practice; Pitzer's equations are used beyond).
pub const IONIC_STRENGTH_MAX: f64 = 0.5;
/// The screening assumption, stated with every result.
pub const SCREENING_NOTE: &str = "saturation indices screen for scaling only: the concentrate \
outlet is taken as the feed analysis with every ion multiplied by the model salt's concentrate \
factor, at the feed's pH and temperature. A positive index means the mineral can precipitate; \
control scaling with antiscalant or acid dosing and periodic polarity reversal as a licensed \
water-treatment specialist specifies, and defer to the membrane supplier's limits.";

/// Gram formula weights, g/mol, of `phreeqc.dat`'s SOLUTION_MASTER_SPECIES element table
/// (H 1.008, C 12.0111, O 16.0, S 32.064).
mod gfw {
    pub const NA: f64 = 22.9898;
    pub const K: f64 = 39.102;
    pub const CA: f64 = 40.08;
    pub const MG: f64 = 24.312;
    pub const CL: f64 = 35.453;
    pub const SO4: f64 = 32.064 + 4.0 * 16.0;
    pub const HCO3: f64 = 1.008 + 12.0111 + 3.0 * 16.0;
}

/// A water analysis: major ions in mg/L, alkalinity in mg/L as HCO3, pH and temperature.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct WaterAnalysis {
    /// Sodium, mg/L.
    pub na_mg_l: f64,
    /// Potassium, mg/L.
    pub k_mg_l: f64,
    /// Calcium, mg/L.
    pub ca_mg_l: f64,
    /// Magnesium, mg/L.
    pub mg_mg_l: f64,
    /// Chloride, mg/L.
    pub cl_mg_l: f64,
    /// Sulfate as SO4, mg/L.
    pub so4_mg_l: f64,
    /// Alkalinity as HCO3, mg/L.
    pub alkalinity_mg_l_hco3: f64,
    /// pH (activity scale).
    pub ph: f64,
    /// Temperature, C.
    pub temperature_c: f64,
}

impl WaterAnalysis {
    /// The same analysis with every concentration multiplied by `factor` (pH and temperature
    /// held): the screening concentrate.
    pub fn concentrated(&self, factor: f64) -> WaterAnalysis {
        WaterAnalysis {
            na_mg_l: self.na_mg_l * factor,
            k_mg_l: self.k_mg_l * factor,
            ca_mg_l: self.ca_mg_l * factor,
            mg_mg_l: self.mg_mg_l * factor,
            cl_mg_l: self.cl_mg_l * factor,
            so4_mg_l: self.so4_mg_l * factor,
            alkalinity_mg_l_hco3: self.alkalinity_mg_l_hco3 * factor,
            ..*self
        }
    }

    /// Sum of the given concentrations, mg/L.
    pub fn tds_mg_l(&self) -> f64 {
        self.na_mg_l
            + self.k_mg_l
            + self.ca_mg_l
            + self.mg_mg_l
            + self.cl_mg_l
            + self.so4_mg_l
            + self.alkalinity_mg_l_hco3
    }

    /// Cation and anion sums, meq/L (alkalinity counted as HCO3-).
    pub fn equivalents_meq_l(&self) -> (f64, f64) {
        let cations = self.na_mg_l / gfw::NA
            + self.k_mg_l / gfw::K
            + 2.0 * self.ca_mg_l / gfw::CA
            + 2.0 * self.mg_mg_l / gfw::MG;
        let anions = self.cl_mg_l / gfw::CL
            + 2.0 * self.so4_mg_l / gfw::SO4
            + self.alkalinity_mg_l_hco3 / gfw::HCO3;
        (cations, anions)
    }

    /// Charge imbalance, percent: 100 (cations - anions) / (cations + anions) in equivalents.
    /// Zero for an empty analysis.
    pub fn charge_imbalance_percent(&self) -> f64 {
        let (c, a) = self.equivalents_meq_l();
        if c + a > 0.0 {
            100.0 * (c - a) / (c + a)
        } else {
            0.0
        }
    }

    /// Check every field against its physical range.
    pub fn check(&self) -> Result<(), ModelError> {
        let conc = [
            ("na_mg_l", self.na_mg_l),
            ("k_mg_l", self.k_mg_l),
            ("ca_mg_l", self.ca_mg_l),
            ("mg_mg_l", self.mg_mg_l),
            ("cl_mg_l", self.cl_mg_l),
            ("so4_mg_l", self.so4_mg_l),
            ("alkalinity_mg_l_hco3", self.alkalinity_mg_l_hco3),
        ];
        for (field, v) in conc {
            if !(v.is_finite() && (0.0..=2e5).contains(&v)) {
                return Err(ModelError::Input {
                    field,
                    value: v,
                    allowed: "0 to 200000 mg/L",
                });
            }
        }
        if !(self.ph.is_finite() && (4.0..=10.0).contains(&self.ph)) {
            return Err(ModelError::Input {
                field: "ph",
                value: self.ph,
                allowed: "4 to 10",
            });
        }
        if !(self.temperature_c.is_finite() && (0.0..=90.0).contains(&self.temperature_c)) {
            return Err(ModelError::Input {
                field: "temperature_c",
                value: self.temperature_c,
                allowed: "0 to 90 C",
            });
        }
        let tds = self.tds_mg_l();
        if tds > 3e5 {
            return Err(ModelError::Input {
                field: "tds_mg_l",
                value: tds,
                allowed: "a total of at most 300000 mg/L",
            });
        }
        if self.alkalinity_mg_l_hco3 <= 0.0 || self.ca_mg_l <= 0.0 {
            return Err(ModelError::Input {
                field: if self.ca_mg_l <= 0.0 {
                    "ca_mg_l"
                } else {
                    "alkalinity_mg_l_hco3"
                },
                value: self.ca_mg_l.min(self.alkalinity_mg_l_hco3),
                allowed: "positive (calcium and alkalinity define the calcite index)",
            });
        }
        Ok(())
    }
}

/// Saturation indices of one water, log10(IAP / Ksp).
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct SaturationIndices {
    /// Calcite, CaCO3.
    pub calcite_si: f64,
    /// Gypsum, CaSO4.2H2O.
    pub gypsum_si: f64,
    /// Ionic strength of the speciated water, mol/kg.
    pub ionic_strength_mol_kg: f64,
}

/// Feed and concentrate-outlet indices, the screening result.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct ScalingResult {
    /// The feed's indices.
    pub feed: SaturationIndices,
    /// The concentrate outlet's, every ion concentrated by `concentrate_factor`.
    pub concentrate: SaturationIndices,
    /// Concentrate outlet over inlet concentration of the model salt, -.
    pub concentrate_factor: f64,
    /// Charge imbalance of the feed analysis, percent.
    pub charge_imbalance_percent: f64,
}

/// Equilibrium constants (log10) at one temperature.
#[derive(Debug, Clone, Copy)]
struct LogK {
    hco3: f64,    // CO3-2 + H+ = HCO3-
    co2: f64,     // CO3-2 + 2H+ = CO2 + H2O
    water: f64,   // H2O = OH- + H+
    hso4: f64,    // SO4-2 + H+ = HSO4-
    caoh: f64,    // Ca+2 + H2O = CaOH+ + H+
    caco3: f64,   // Ca+2 + CO3-2 = CaCO3
    cahco3: f64,  // Ca+2 + CO3-2 + H+ = CaHCO3+
    caso4: f64,   // Ca+2 + SO4-2 = CaSO4
    cahso4: f64,  // Ca+2 + HSO4- = CaHSO4+
    mgoh: f64,    // Mg+2 + H2O = MgOH+ + H+
    mgco3: f64,   // Mg+2 + CO3-2 = MgCO3
    mghco3: f64,  // Mg+2 + H+ + CO3-2 = MgHCO3+
    mgso4: f64,   // Mg+2 + SO4-2 = MgSO4
    naco3: f64,   // Na+ + CO3-2 = NaCO3-
    nahco3: f64,  // Na+ + HCO3- = NaHCO3
    naso4: f64,   // Na+ + SO4-2 = NaSO4-
    kso4: f64,    // K+ + SO4-2 = KSO4-
    calcite: f64, // CaCO3 = Ca+2 + CO3-2
    gypsum: f64,  // CaSO4:2H2O = Ca+2 + SO4-2 + 2H2O
}

/// PHREEQC's analytic expression: log K = A1 + A2 T + A3/T + A4 log10 T + A5/T^2 + A6 T^2.
fn analytic(a: [f64; 6], t: f64) -> f64 {
    a[0] + a[1] * t + a[2] / t + a[3] * t.log10() + a[4] / (t * t) + a[5] * t * t
}

/// van't Hoff from log K at 25 C and a reaction enthalpy in kcal/mol (PHREEQC's form with
/// R = 8.3144621e-3 kJ/(mol K), 1 kcal = 4.184 kJ).
fn van_t_hoff(log_k_25: f64, dh_kcal: f64, t: f64) -> f64 {
    log_k_25
        - dh_kcal * 4.184 / (std::f64::consts::LN_10 * 8.314_462_1e-3) * (1.0 / t - 1.0 / 298.15)
}

impl LogK {
    /// All constants at `t` kelvin (phreeqc.dat; sources in the module docs).
    fn at(t: f64) -> LogK {
        LogK {
            // Plummer and Busenberg (1982), as in phreeqc.dat.
            hco3: analytic(
                [107.8871, 0.03252849, -5151.79, -38.92561, 563713.9, 0.0],
                t,
            ),
            co2: analytic(
                [464.1965, 0.09344813, -26986.16, -165.75951, 2248628.9, 0.0],
                t,
            ),
            calcite: analytic([-171.9065, -0.077993, 2839.319, 71.595, 0.0, 0.0], t),
            // phreeqc.dat analytic expressions.
            water: analytic(
                [
                    293.29227,
                    0.1360833,
                    -10576.913,
                    -123.73158,
                    0.0,
                    -6.996455e-5,
                ],
                t,
            ),
            hso4: analytic([-56.889, 0.006473, 2307.9, 19.8858, 0.0, 0.0], t),
            caco3: analytic([-1228.732, -0.299440, 35512.75, 485.818, 0.0, 0.0], t),
            cahco3: analytic(
                [1317.0071, 0.34546894, -39916.84, -517.70761, 563713.9, 0.0],
                t,
            ),
            mgco3: analytic([0.9910, 0.00667, 0.0, 0.0, 0.0, 0.0], t),
            mghco3: analytic(
                [48.6721, 0.03252849, -2614.335, -18.00263, 563713.9, 0.0],
                t,
            ),
            kso4: analytic([3.106, 0.0, -673.6, 0.0, 0.0, 0.0], t),
            gypsum: analytic([68.2401, 0.0, -3221.51, -25.0627, 0.0, 0.0], t),
            // phreeqc.dat log K at 25 C with delta_h (kcal/mol), or constant.
            caoh: -12.78,
            caso4: van_t_hoff(2.25, 1.325, t),
            cahso4: 1.08,
            mgoh: van_t_hoff(-11.44, 15.952, t),
            mgso4: van_t_hoff(2.37, 4.550, t),
            naco3: van_t_hoff(1.27, 8.91, t),
            nahco3: van_t_hoff(-0.25, -1.0, t),
            naso4: van_t_hoff(0.7, 1.120, t),
        }
    }
}

/// Debye-Hueckel A (kg^0.5/mol^0.5) and B (kg^0.5/(mol^0.5 Angstrom)) at `t` kelvin.
fn debye_hueckel(t: f64) -> (f64, f64) {
    let rho = water_density(t) / 1000.0;
    let eps = water_permittivity(t);
    (
        1.82483e6 * rho.sqrt() / (eps * t).powf(1.5),
        50.2916 * (rho / (eps * t)).sqrt(),
    )
}

/// Activity-coefficient rule of one species.
#[derive(Clone, Copy)]
enum Gamma {
    /// WATEQ extended Debye-Hueckel with ion size a (Angstrom) and b (kg/mol).
    Wateq(f64, f64, f64),
    /// Davies, charge z.
    Davies(f64),
    /// Neutral species.
    Neutral,
}

impl Gamma {
    fn value(self, a_dh: f64, b_dh: f64, i: f64) -> f64 {
        let s = i.sqrt();
        let log_g = match self {
            Gamma::Wateq(z, a, b) => -a_dh * z * z * s / (1.0 + b_dh * a * s) + b * i,
            Gamma::Davies(z) => -a_dh * z * z * (s / (1.0 + s) - 0.3 * i),
            Gamma::Neutral => 0.1 * i,
        };
        10f64.powf(log_g)
    }
}

// phreeqc.dat -gamma parameters (the last line given for a species wins, as in PHREEQC).
const G_H: Gamma = Gamma::Wateq(1.0, 9.0, 0.0);
const G_CA: Gamma = Gamma::Wateq(2.0, 5.0, 0.165);
const G_MG: Gamma = Gamma::Wateq(2.0, 5.5, 0.20);
const G_NA: Gamma = Gamma::Wateq(1.0, 4.08, 0.082);
const G_K: Gamma = Gamma::Wateq(1.0, 3.5, 0.015);
const G_CO3: Gamma = Gamma::Wateq(-2.0, 5.4, 0.0);
const G_SO4: Gamma = Gamma::Wateq(-2.0, 5.0, -0.04);
const G_HCO3: Gamma = Gamma::Wateq(-1.0, 5.4, 0.0);
const G_OH: Gamma = Gamma::Wateq(-1.0, 3.5, 0.0);
const G_CAHCO3: Gamma = Gamma::Wateq(1.0, 6.0, 0.0);
const G_MGHCO3: Gamma = Gamma::Wateq(1.0, 4.0, 0.0);
const G_MGOH: Gamma = Gamma::Wateq(1.0, 6.5, 0.0);
const G_NASO4: Gamma = Gamma::Wateq(-1.0, 5.4, 0.0);
const G_KSO4: Gamma = Gamma::Wateq(-1.0, 5.4, 0.0);
const G_PLUS: Gamma = Gamma::Davies(1.0); // CaOH+, CaHSO4+
const G_MINUS: Gamma = Gamma::Davies(-1.0); // HSO4-, NaCO3-

/// Activity coefficients of every species at one ionic strength.
struct Gammas {
    h: f64,
    ca: f64,
    mg: f64,
    na: f64,
    k: f64,
    co3: f64,
    so4: f64,
    hco3: f64,
    oh: f64,
    cahco3: f64,
    mghco3: f64,
    mgoh: f64,
    naso4: f64,
    kso4: f64,
    plus: f64,
    minus: f64,
    neutral: f64,
}

impl Gammas {
    fn at(t: f64, i: f64) -> Gammas {
        let (a, b) = debye_hueckel(t);
        let g = |x: Gamma| x.value(a, b, i);
        Gammas {
            h: g(G_H),
            ca: g(G_CA),
            mg: g(G_MG),
            na: g(G_NA),
            k: g(G_K),
            co3: g(G_CO3),
            so4: g(G_SO4),
            hco3: g(G_HCO3),
            oh: g(G_OH),
            cahco3: g(G_CAHCO3),
            mghco3: g(G_MGHCO3),
            mgoh: g(G_MGOH),
            naso4: g(G_NASO4),
            kso4: g(G_KSO4),
            plus: g(G_PLUS),
            minus: g(G_MINUS),
            neutral: g(Gamma::Neutral),
        }
    }
}

/// Molalities of every species (mol/kg water) of a speciated water.
#[derive(Debug, Clone, Copy, Default)]
struct Species {
    ca: f64,
    mg: f64,
    na: f64,
    k: f64,
    cl: f64,
    so4: f64,
    co3: f64,
    h: f64,
    oh: f64,
    hco3: f64,
    co2: f64,
    hso4: f64,
    caoh: f64,
    caco3: f64,
    cahco3: f64,
    caso4: f64,
    cahso4: f64,
    mgoh: f64,
    mgco3: f64,
    mghco3: f64,
    mgso4: f64,
    naco3: f64,
    nahco3: f64,
    naso4: f64,
    kso4: f64,
}

impl Species {
    fn all(&self) -> [(f64, f64); 25] {
        [
            (self.ca, 2.0),
            (self.mg, 2.0),
            (self.na, 1.0),
            (self.k, 1.0),
            (self.cl, -1.0),
            (self.so4, -2.0),
            (self.co3, -2.0),
            (self.h, 1.0),
            (self.oh, -1.0),
            (self.hco3, -1.0),
            (self.co2, 0.0),
            (self.hso4, -1.0),
            (self.caoh, 1.0),
            (self.caco3, 0.0),
            (self.cahco3, 1.0),
            (self.caso4, 0.0),
            (self.cahso4, 1.0),
            (self.mgoh, 1.0),
            (self.mgco3, 0.0),
            (self.mghco3, 1.0),
            (self.mgso4, 0.0),
            (self.naco3, -1.0),
            (self.nahco3, 0.0),
            (self.naso4, -1.0),
            (self.kso4, -1.0),
        ]
    }

    fn ionic_strength(&self) -> f64 {
        0.5 * self.all().iter().map(|(m, z)| m * z * z).sum::<f64>()
    }

    fn water_activity(&self) -> f64 {
        1.0 - 0.017 * self.all().iter().map(|(m, _)| m).sum::<f64>()
    }
}

/// Total molalities of the analysis (mol/kg water) and the alkalinity (eq/kg water).
struct Totals {
    ca: f64,
    mg: f64,
    na: f64,
    k: f64,
    cl: f64,
    so4: f64,
    alk: f64,
}

impl Totals {
    fn of(w: &WaterAnalysis) -> Totals {
        // mg/L -> mol/kg water with density 1 kg/L: the water in a litre is 1 kg less the solutes.
        let per_kg = 1e-3 / (1.0 - w.tds_mg_l() * 1e-6);
        Totals {
            ca: w.ca_mg_l / gfw::CA * per_kg,
            mg: w.mg_mg_l / gfw::MG * per_kg,
            na: w.na_mg_l / gfw::NA * per_kg,
            k: w.k_mg_l / gfw::K * per_kg,
            cl: w.cl_mg_l / gfw::CL * per_kg,
            so4: w.so4_mg_l / gfw::SO4 * per_kg,
            alk: w.alkalinity_mg_l_hco3 / gfw::HCO3 * per_kg,
        }
    }
}

/// Speciate `w`: returns the species molalities, the activity coefficients' ionic strength and
/// the activity of water at convergence.
fn speciate(w: &WaterAnalysis) -> Result<(Species, Gammas, f64), ModelError> {
    let t_k = w.temperature_c + 273.15;
    let k = LogK::at(t_k);
    let p = |x: f64| 10f64.powf(x);
    let (k_hco3, k_co2, k_w, k_hso4) = (p(k.hco3), p(k.co2), p(k.water), p(k.hso4));
    let (k_caoh, k_caco3, k_cahco3, k_caso4, k_cahso4) =
        (p(k.caoh), p(k.caco3), p(k.cahco3), p(k.caso4), p(k.cahso4));
    let (k_mgoh, k_mgco3, k_mghco3, k_mgso4) = (p(k.mgoh), p(k.mgco3), p(k.mghco3), p(k.mgso4));
    let (k_naco3, k_nahco3, k_naso4, k_kso4) = (p(k.naco3), p(k.nahco3), p(k.naso4), p(k.kso4));
    let tot = Totals::of(w);
    let a_h = p(-w.ph);

    // Start: no complexes, all alkalinity as HCO3-.
    let mut s = Species {
        ca: tot.ca,
        mg: tot.mg,
        na: tot.na,
        k: tot.k,
        cl: tot.cl,
        so4: tot.so4,
        hco3: tot.alk,
        ..Species::default()
    };
    let mut g = Gammas::at(t_k, s.ionic_strength());
    s.co3 = tot.alk / (k_hco3 * a_h * g.co3 / g.hco3);
    for _ in 0..1000 {
        let i = s.ionic_strength();
        g = Gammas::at(t_k, i);
        let a_w = s.water_activity();
        let old = [s.ca, s.mg, s.na, s.k, s.so4, s.co3];

        // Activities of the anions seen by the cations.
        let a_so4 = g.so4 * s.so4;
        let a_co3 = g.co3 * s.co3;
        let a_hco3 = k_hco3 * a_co3 * a_h;
        let a_hso4 = k_hso4 * a_so4 * a_h;
        let n = g.neutral;
        // Each cation: total = free (1 + its complexes per free molality).
        s.ca = tot.ca
            / (1.0
                + g.ca
                    * (k_caoh * a_w / a_h / g.plus
                        + k_caco3 * a_co3 / n
                        + k_cahco3 * a_co3 * a_h / g.cahco3
                        + k_caso4 * a_so4 / n
                        + k_cahso4 * a_hso4 / g.plus));
        s.mg = tot.mg
            / (1.0
                + g.mg
                    * (k_mgoh * a_w / a_h / g.mgoh
                        + k_mgco3 * a_co3 / n
                        + k_mghco3 * a_co3 * a_h / g.mghco3
                        + k_mgso4 * a_so4 / n));
        s.na = tot.na
            / (1.0
                + g.na
                    * (k_naco3 * a_co3 / g.minus
                        + k_nahco3 * a_hco3 / n
                        + k_naso4 * a_so4 / g.naso4));
        s.k = tot.k / (1.0 + g.k * k_kso4 * a_so4 / g.kso4);
        let (a_ca, a_mg, a_na, a_k) = (g.ca * s.ca, g.mg * s.mg, g.na * s.na, g.k * s.k);

        // Sulfate.
        s.so4 = tot.so4
            / (1.0
                + g.so4
                    * (k_hso4 * a_h / g.minus
                        + k_caso4 * a_ca / n
                        + k_cahso4 * a_ca * k_hso4 * a_h / g.plus
                        + k_mgso4 * a_mg / n
                        + k_naso4 * a_na / g.naso4
                        + k_kso4 * a_k / g.kso4));
        let a_so4 = g.so4 * s.so4;

        // Carbonate from the alkalinity: the carbonate part per unit free CO3-2, and the rest.
        let per_co3 = 2.0
            + g.co3
                * (k_hco3 * a_h / g.hco3
                    + 2.0 * k_caco3 * a_ca / n
                    + k_cahco3 * a_ca * a_h / g.cahco3
                    + 2.0 * k_mgco3 * a_mg / n
                    + k_mghco3 * a_mg * a_h / g.mghco3
                    + 2.0 * k_naco3 * a_na / g.minus
                    + k_nahco3 * a_na * k_hco3 * a_h / n);
        s.h = a_h / g.h;
        s.oh = k_w * a_w / a_h / g.oh;
        s.caoh = k_caoh * a_ca * a_w / a_h / g.plus;
        s.mgoh = k_mgoh * a_mg * a_w / a_h / g.mgoh;
        s.hso4 = k_hso4 * a_so4 * a_h / g.minus;
        s.cahso4 = k_cahso4 * a_ca * k_hso4 * a_so4 * a_h / g.plus;
        let other = s.oh - s.h + s.caoh + s.mgoh - s.hso4 - s.cahso4;
        if tot.alk - other <= 0.0 {
            return Err(ModelError::Input {
                field: "alkalinity_mg_l_hco3",
                value: w.alkalinity_mg_l_hco3,
                allowed: "more than the hydroxide alkalinity at the given pH (lower the pH or \
                          raise the alkalinity)",
            });
        }
        s.co3 = (tot.alk - other) / per_co3;
        let a_co3 = g.co3 * s.co3;

        // The complexes at the new free activities.
        s.hco3 = k_hco3 * a_co3 * a_h / g.hco3;
        s.co2 = k_co2 * a_co3 * a_h * a_h / a_w / n;
        s.caco3 = k_caco3 * a_ca * a_co3 / n;
        s.cahco3 = k_cahco3 * a_ca * a_co3 * a_h / g.cahco3;
        s.caso4 = k_caso4 * a_ca * a_so4 / n;
        s.mgco3 = k_mgco3 * a_mg * a_co3 / n;
        s.mghco3 = k_mghco3 * a_mg * a_co3 * a_h / g.mghco3;
        s.mgso4 = k_mgso4 * a_mg * a_so4 / n;
        s.naco3 = k_naco3 * a_na * a_co3 / g.minus;
        s.nahco3 = k_nahco3 * a_na * k_hco3 * a_co3 * a_h / n;
        s.naso4 = k_naso4 * a_na * a_so4 / g.naso4;
        s.kso4 = k_kso4 * a_k * a_so4 / g.kso4;

        let new = [s.ca, s.mg, s.na, s.k, s.so4, s.co3];
        let change = old
            .iter()
            .zip(new)
            .filter(|(o, _)| **o > 0.0)
            .map(|(o, n)| ((n - o) / o).abs())
            .fold(0.0, f64::max);
        if !change.is_finite() {
            return Err(ModelError::Numerical(
                "speciation of the water analysis gave a non-finite molality".into(),
            ));
        }
        if change <= SPECIATION_TOLERANCE && (s.ionic_strength() - i).abs() <= 1e-12 * i {
            return Ok((s, g, a_w));
        }
    }
    Err(ModelError::Numerical(
        "speciation of the water analysis did not converge in 1000 sweeps".into(),
    ))
}

/// Calcite and gypsum saturation indices of one water.
pub fn saturation_indices(w: &WaterAnalysis) -> Result<SaturationIndices, ModelError> {
    w.check()?;
    let (s, g, a_w) = speciate(w)?;
    let k = LogK::at(w.temperature_c + 273.15);
    let log_ca = (g.ca * s.ca).log10();
    Ok(SaturationIndices {
        calcite_si: log_ca + (g.co3 * s.co3).log10() - k.calcite,
        gypsum_si: log_ca + (g.so4 * s.so4).log10() + 2.0 * a_w.log10() - k.gypsum,
        ionic_strength_mol_kg: s.ionic_strength(),
    })
}

/// The screening result: the feed's indices, and the concentrate outlet's with every ion
/// multiplied by `concentrate_factor` (see the module docs).
pub fn screen(w: &WaterAnalysis, concentrate_factor: f64) -> Result<ScalingResult, ModelError> {
    if !(concentrate_factor.is_finite() && concentrate_factor >= 1.0) {
        return Err(ModelError::Input {
            field: "concentrate_factor",
            value: concentrate_factor,
            allowed: "1 or more (the concentrate leaves saltier than it enters)",
        });
    }
    Ok(ScalingResult {
        feed: saturation_indices(w)?,
        concentrate: saturation_indices(&w.concentrated(concentrate_factor))?,
        concentrate_factor,
        charge_imbalance_percent: w.charge_imbalance_percent(),
    })
}

/// Warnings of a screening result: charge imbalance of the analysis, ionic strength beyond the
/// activity model, and supersaturated concentrate.
pub fn warnings(r: &ScalingResult) -> Vec<Warning> {
    let mut out = Vec::new();
    if r.charge_imbalance_percent.abs() > IMBALANCE_WARN_PERCENT {
        out.push(Warning {
            quantity: "charge_imbalance_percent".into(),
            value: r.charge_imbalance_percent,
            bound: IMBALANCE_WARN_PERCENT,
            message: format!(
                "the water analysis is out of charge balance by {:.1} % (cations minus anions \
                 over their sum, in equivalents); above {IMBALANCE_WARN_PERCENT} % an ion is \
                 usually missing or mis-measured",
                r.charge_imbalance_percent
            ),
        });
    }
    if r.concentrate.ionic_strength_mol_kg > IONIC_STRENGTH_MAX {
        out.push(Warning {
            quantity: "concentrate_ionic_strength_mol_kg".into(),
            value: r.concentrate.ionic_strength_mol_kg,
            bound: IONIC_STRENGTH_MAX,
            message: format!(
                "the concentrate's ionic strength {:.2} mol/kg is above {IONIC_STRENGTH_MAX}, \
                 where the extended Debye-Hueckel activities lose their accuracy",
                r.concentrate.ionic_strength_mol_kg
            ),
        });
    }
    for (name, si) in [
        ("calcite", r.concentrate.calcite_si),
        ("gypsum", r.concentrate.gypsum_si),
    ] {
        if si > 0.0 {
            out.push(Warning {
                quantity: format!("concentrate_{name}_si"),
                value: si,
                bound: 0.0,
                message: format!(
                    "the concentrate outlet is supersaturated in {name} (SI {si:.2}); {SCREENING_NOTE}"
                ),
            });
        }
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    fn example() -> WaterAnalysis {
        WaterAnalysis {
            na_mg_l: 600.0,
            k_mg_l: 10.0,
            ca_mg_l: 120.0,
            mg_mg_l: 40.0,
            cl_mg_l: 900.0,
            so4_mg_l: 400.0,
            alkalinity_mg_l_hco3: 250.0,
            ph: 7.6,
            temperature_c: 16.0,
        }
    }

    #[test]
    fn example_water_matches_phreeqc() {
        // Source: PHREEQC 3 (phreeqpython 1.6, phreeqc.dat): calcite SI 0.245, gypsum SI
        // -1.087, ionic strength 0.04272 mol/kg for this analysis.
        let si = saturation_indices(&example()).unwrap();
        assert!((si.calcite_si - 0.245).abs() < 0.01, "{si:?}");
        assert!((si.gypsum_si - -1.087).abs() < 0.01, "{si:?}");
        assert!((si.ionic_strength_mol_kg - 0.04272).abs() < 2e-4, "{si:?}");
    }

    #[test]
    fn concentrating_raises_both_indices() {
        let r = screen(&example(), 3.0).unwrap();
        assert!(r.concentrate.calcite_si > r.feed.calcite_si + 0.5);
        assert!(r.concentrate.gypsum_si > r.feed.gypsum_si + 0.5);
        assert!(r.charge_imbalance_percent.abs() < 5.0);
    }

    #[test]
    fn imbalance_is_warned() {
        let mut w = example();
        w.na_mg_l = 1200.0;
        let r = screen(&w, 1.0).unwrap();
        assert!(r.charge_imbalance_percent > IMBALANCE_WARN_PERCENT);
        assert!(warnings(&r)
            .iter()
            .any(|x| x.quantity == "charge_imbalance_percent"));
    }

    #[test]
    fn bad_analysis_is_refused() {
        let mut w = example();
        w.ph = f64::NAN;
        assert!(matches!(
            saturation_indices(&w),
            Err(ModelError::Input { field: "ph", .. })
        ));
        assert!(screen(&example(), 0.5).is_err());
    }
}
