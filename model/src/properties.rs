//! Electrolyte and water properties: the handbook layer of the model.
//!
//! Every function takes SI units (K, mol/m^3) and returns SI units. Sources are named on each
//! function; the check values live in `tests/tests/acceptance/model_refs.rs`.
//!
//! Scope: dilute to moderately concentrated aqueous 1:1 salts, 0-100 C. Ionic diffusivities
//! and transport numbers are the infinite-dilution values (the salt diffusivity of NaCl falls by
//! about 8 % at 0.1 M; Robinson and Stokes, from memory); the conductivity carries the
//! concentration dependence that matters most for the ohmic terms.

use crate::constants::{FARADAY, GAS_CONSTANT, VACUUM_PERMITTIVITY};
use crate::design::Salt;

/// Temperature of the ionic data tables, K (25 C).
pub const T_REF_K: f64 = 298.15;

/// Water viscosity at 20 C, Pa s (IAPWS 2008 release; Huber et al., J. Phys. Chem. Ref. Data
/// 38, 2009), the anchor of the Kestin correlation in [`water_viscosity`].
pub const WATER_VISCOSITY_20C_PA_S: f64 = 1.0016e-3;

/// Ionic data of a 1:1 salt at 25 C, infinite dilution.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct IonicData {
    /// Cation diffusivity, m^2/s.
    pub cation_diffusivity_m2_s: f64,
    /// Anion diffusivity, m^2/s.
    pub anion_diffusivity_m2_s: f64,
    /// Cation limiting molar conductivity, S m^2/mol.
    pub cation_limiting_conductivity: f64,
    /// Anion limiting molar conductivity, S m^2/mol.
    pub anion_limiting_conductivity: f64,
    /// Ion-size parameter `a` of the Robinson-Stokes conductivity equation, m.
    pub ion_size_m: f64,
    /// Molar mass, kg/mol (for the solution density).
    pub molar_mass_kg_mol: f64,
    /// Apparent molar volume at infinite dilution, m^3/mol (for the solution density).
    pub apparent_molar_volume_m3_mol: f64,
}

/// Ionic data of a salt at 25 C.
///
/// Diffusivities and limiting ionic conductivities: CRC Handbook of Chemistry and Physics,
/// "Ionic conductivity and diffusion at infinite dilution" (Na+ 1.334e-9, K+ 1.957e-9,
/// Cl- 2.032e-9 m^2/s; 50.08, 73.48, 76.31 S cm^2/mol).
/// Ion-size parameters: fitted here to the CRC molar conductivity at 0.1 M (106.69 S cm^2/mol
/// NaCl, 128.90 KCl) with the Robinson-Stokes equation of [`ConductivityModel`]; the values at
/// 1 mM and 10 mM are then independent checks. A custom salt gets 4.0 angstrom, typical of
/// simple 1:1 salts (Robinson and Stokes, Electrolyte Solutions, 1959; from memory).
/// Molar volumes at infinite dilution: NaCl 16.6, KCl 26.8 cm^3/mol (Millero, Chem. Rev. 71
/// (1971) 147; from memory); a custom salt uses water's density.
pub fn ionic_data(salt: Salt) -> IonicData {
    match salt {
        Salt::NaCl => IonicData {
            cation_diffusivity_m2_s: 1.334e-9,
            anion_diffusivity_m2_s: 2.032e-9,
            cation_limiting_conductivity: 50.08e-4,
            anion_limiting_conductivity: 76.31e-4,
            ion_size_m: NACL_ION_SIZE_M,
            molar_mass_kg_mol: NACL_MOLAR_MASS_G_MOL * 1e-3,
            apparent_molar_volume_m3_mol: 16.6e-6,
        },
        Salt::KCl => IonicData {
            cation_diffusivity_m2_s: 1.957e-9,
            anion_diffusivity_m2_s: 2.032e-9,
            cation_limiting_conductivity: 73.48e-4,
            anion_limiting_conductivity: 76.31e-4,
            ion_size_m: KCL_ION_SIZE_M,
            molar_mass_kg_mol: KCL_MOLAR_MASS_G_MOL * 1e-3,
            apparent_molar_volume_m3_mol: 26.8e-6,
        },
        Salt::Custom {
            cation_diffusivity_m2_s,
            anion_diffusivity_m2_s,
            cation_limiting_conductivity_s_m2_mol,
            anion_limiting_conductivity_s_m2_mol,
        } => IonicData {
            cation_diffusivity_m2_s,
            anion_diffusivity_m2_s,
            cation_limiting_conductivity: cation_limiting_conductivity_s_m2_mol,
            anion_limiting_conductivity: anion_limiting_conductivity_s_m2_mol,
            ion_size_m: 4.0e-10,
            molar_mass_kg_mol: 0.0,
            apparent_molar_volume_m3_mol: 0.0,
        },
    }
}

/// Molar mass of NaCl, g/mol: Na 22.98977 + Cl 35.453 (IUPAC standard atomic weights; from
/// memory). The one value for the solution density and for a feed given in g/L.
pub const NACL_MOLAR_MASS_G_MOL: f64 = 58.443;
/// Molar mass of KCl, g/mol: K 39.0983 + Cl 35.453 (IUPAC standard atomic weights; from memory).
pub const KCL_MOLAR_MASS_G_MOL: f64 = 74.551;

/// Molar mass of a named salt, g/mol; `None` for a custom salt (the study gives it).
pub fn molar_mass_g_mol(salt: Salt) -> Option<f64> {
    match salt {
        Salt::NaCl => Some(NACL_MOLAR_MASS_G_MOL),
        Salt::KCl => Some(KCL_MOLAR_MASS_G_MOL),
        Salt::Custom { .. } => None,
    }
}

/// Robinson-Stokes ion-size parameter of NaCl, m (fitted to CRC 106.69 S cm^2/mol at 0.1 M).
pub const NACL_ION_SIZE_M: f64 = 4.23e-10;
/// Robinson-Stokes ion-size parameter of KCl, m (fitted to CRC 128.90 S cm^2/mol at 0.1 M).
pub const KCL_ION_SIZE_M: f64 = 4.23e-10;

/// Thermal voltage V_T = R T / F, V (CODATA 2018 constants). 25.693 mV at 298.15 K.
#[inline]
pub fn thermal_voltage(temperature_k: f64) -> f64 {
    GAS_CONSTANT * temperature_k / FARADAY
}

/// Dynamic viscosity of pure water, Pa s.
///
/// Kestin, Sokolov and Wakeham, J. Phys. Chem. Ref. Data 7 (1978) 941 (also the CRC Handbook
/// form): log10(mu(t)/mu(20 C)) = (20 - t)/(t + 96) [1.2364 - 1.37e-3 (20 - t) + 5.7e-6 (20 - t)^2],
/// t in C, anchored at mu(20 C) = 1.0016 mPa s (IAPWS 2008). Valid 0-150 C at about 0.2 %
/// against IAPWS 2008 (from memory); gives 0.8900 mPa s at 25 C.
pub fn water_viscosity(temperature_k: f64) -> f64 {
    let t = temperature_k - 273.15;
    let d = 20.0 - t;
    let log_ratio = d / (t + 96.0) * (1.2364 - 1.37e-3 * d + 5.7e-6 * d * d);
    WATER_VISCOSITY_20C_PA_S * 10f64.powf(log_ratio)
}

/// Density of pure air-free water at 1 atm, kg/m^3.
///
/// Kell, J. Chem. Eng. Data 20 (1975) 97, valid 0-150 C within about 0.01 kg/m^3 below
/// 100 C (from memory): 998.21 kg/m^3 at 20 C, 997.05 at 25 C (IAPWS-95 agree to 0.01).
pub fn water_density(temperature_k: f64) -> f64 {
    let t = temperature_k - 273.15;
    let num = 999.83952 + 16.945176 * t - 7.9870401e-3 * t * t - 46.170461e-6 * t.powi(3)
        + 105.56302e-9 * t.powi(4)
        - 280.54253e-12 * t.powi(5);
    num / (1.0 + 16.879850e-3 * t)
}

/// Relative static permittivity of water, -.
///
/// Malmberg and Maryott, J. Res. NBS 56 (1956) 1: eps_r = 87.740 - 0.40008 t + 9.398e-4 t^2
/// - 1.410e-6 t^3, t in C, 0-100 C. 78.30 at 25 C (IAPWS 1997 gives 78.4, CRC 78.36).
pub fn water_permittivity(temperature_k: f64) -> f64 {
    let t = temperature_k - 273.15;
    87.740 - 0.40008 * t + 9.398e-4 * t * t - 1.410e-6 * t * t * t
}

/// Debye length of a 1:1 electrolyte, m: lambda_D = sqrt(eps_r eps_0 R T / (2 F^2 c)).
///
/// IUPAC Gold Book; Israelachvili, Intermolecular and Surface Forces (3rd ed., 2011), ch. 14:
/// 0.304 / sqrt(c in mol/L) nm at 25 C. `concentration_mol_m3` must be positive.
pub fn debye_length(
    relative_permittivity: f64,
    temperature_k: f64,
    concentration_mol_m3: f64,
) -> f64 {
    (relative_permittivity * VACUUM_PERMITTIVITY * GAS_CONSTANT * temperature_k
        / (2.0 * FARADAY * FARADAY * concentration_mol_m3))
        .sqrt()
}

/// Stokes-Einstein temperature factor for diffusivities and limiting conductivities:
/// D(T)/D(25 C) = (T / 298.15) (mu(25 C) / mu(T)); Walden's rule Lambda0(T)/Lambda0(25 C) =
/// mu(25 C)/mu(T). Returns (diffusivity factor, conductivity factor).
pub fn stokes_einstein_factors(temperature_k: f64) -> (f64, f64) {
    let viscosity_ratio = water_viscosity(T_REF_K) / water_viscosity(temperature_k);
    (temperature_k / T_REF_K * viscosity_ratio, viscosity_ratio)
}

/// Concentration dependence of the molar conductivity of a 1:1 salt.
///
/// Robinson-Stokes extension of the Debye-Hueckel-Onsager law (Robinson and Stokes,
/// Electrolyte Solutions, 2nd ed. 1959, ch. 7):
/// Lambda = Lambda0 - (B1 Lambda0 + B2) sqrt(c) / (1 + B a sqrt(c)), c in mol/L, with
/// B1 = 8.204e5 / (eps_r T)^(3/2) (L/mol)^(1/2), B2 = 82.50 / (eta (eps_r T)^(1/2))
/// S cm^2 mol^-1 (L/mol)^(1/2) (eta in poise), B = 50.29 / (eps_r T)^(1/2) per angstrom
/// (L/mol)^(1/2). At 25 C: B1 = 0.230, B2 = 60.7, B = 0.329 (Atkins gives the limiting slope
/// 60.20 + 0.229 Lambda0). The limiting Kohlrausch law (a = 0) is 8 % off at 0.1 M; this form
/// is within 1 % of the CRC table from 1 mM to 0.1 M and about 1 % at 0.5 M for NaCl and KCl.
/// Valid to about 0.5 M; beyond, a warning is raised by the model.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct ConductivityModel {
    /// Limiting molar conductivity of the salt at T, S m^2/mol.
    pub limiting_molar_conductivity: f64,
    /// Relaxation coefficient B1, (L/mol)^(1/2).
    pub b1: f64,
    /// Electrophoretic coefficient B2, S m^2/mol (L/mol)^(1/2).
    pub b2: f64,
    /// B a, the ion-size term, (L/mol)^(1/2).
    pub ba: f64,
}

impl ConductivityModel {
    /// Build the model for a salt at a temperature.
    pub fn new(salt: Salt, temperature_k: f64) -> Self {
        let data = ionic_data(salt);
        let (_, walden) = stokes_einstein_factors(temperature_k);
        let eps_t = water_permittivity(temperature_k) * temperature_k;
        let eta_poise = water_viscosity(temperature_k) * 10.0;
        ConductivityModel {
            limiting_molar_conductivity: (data.cation_limiting_conductivity
                + data.anion_limiting_conductivity)
                * walden,
            b1: 8.204e5 / eps_t.powf(1.5),
            b2: 82.50 / (eta_poise * eps_t.sqrt()) * 1e-4,
            ba: 50.29 / eps_t.sqrt() * data.ion_size_m * 1e10,
        }
    }

    /// Molar conductivity, S m^2/mol, at `c` mol/m^3.
    #[inline]
    pub fn molar_conductivity(&self, concentration_mol_m3: f64) -> f64 {
        let sc = (concentration_mol_m3.max(0.0) * 1e-3).sqrt();
        let l0 = self.limiting_molar_conductivity;
        l0 - (self.b1 * l0 + self.b2) * sc / (1.0 + self.ba * sc)
    }

    /// Conductivity kappa = Lambda c, S/m, at `c` mol/m^3.
    #[inline]
    pub fn conductivity(&self, concentration_mol_m3: f64) -> f64 {
        self.molar_conductivity(concentration_mol_m3) * concentration_mol_m3.max(0.0)
    }
}

/// All properties of the solution at one temperature and concentration.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Properties {
    /// Cation diffusivity at T (infinite dilution), m^2/s.
    pub cation_diffusivity_m2_s: f64,
    /// Anion diffusivity at T (infinite dilution), m^2/s.
    pub anion_diffusivity_m2_s: f64,
    /// Salt diffusivity D = 2 D+ D- / (D+ + D-), m^2/s.
    pub salt_diffusivity_m2_s: f64,
    /// Cation transport number in solution t+ = D+ / (D+ + D-), -.
    pub cation_transport_number: f64,
    /// Solution density, kg/m^3.
    pub density_kg_m3: f64,
    /// Dynamic viscosity (pure water), Pa s.
    pub dynamic_viscosity_pa_s: f64,
    /// Kinematic viscosity, m^2/s.
    pub kinematic_viscosity_m2_s: f64,
    /// Relative permittivity (pure water), -.
    pub relative_permittivity: f64,
    /// Molar conductivity, S m^2/mol.
    pub molar_conductivity_s_m2_mol: f64,
    /// Conductivity, S/m.
    pub conductivity_s_m: f64,
    /// Debye length, m.
    pub debye_length_m: f64,
    /// Thermal voltage RT/F, V.
    pub thermal_voltage_v: f64,
}

/// Properties of a 1:1 salt solution at `temperature_k` and `concentration_mol_m3`.
///
/// Diffusivities scale from 25 C by Stokes-Einstein ([`stokes_einstein_factors`]). The
/// solution density adds the salt at its infinite-dilution apparent molar volume:
/// rho = rho_w + c (M - V_phi rho_w) (within about 0.1 % to 0.5 M NaCl; from memory). Viscosity
/// and permittivity are those of pure water (the salt raises mu by about 1 % at 0.1 M NaCl).
pub fn properties(salt: Salt, temperature_k: f64, concentration_mol_m3: f64) -> Properties {
    let data = ionic_data(salt);
    let (d_factor, _) = stokes_einstein_factors(temperature_k);
    let dp = data.cation_diffusivity_m2_s * d_factor;
    let dm = data.anion_diffusivity_m2_s * d_factor;
    let rho_w = water_density(temperature_k);
    let rho = rho_w
        + concentration_mol_m3
            * (data.molar_mass_kg_mol - data.apparent_molar_volume_m3_mol * rho_w);
    let mu = water_viscosity(temperature_k);
    let eps = water_permittivity(temperature_k);
    let cond = ConductivityModel::new(salt, temperature_k);
    Properties {
        cation_diffusivity_m2_s: dp,
        anion_diffusivity_m2_s: dm,
        salt_diffusivity_m2_s: 2.0 * dp * dm / (dp + dm),
        cation_transport_number: dp / (dp + dm),
        density_kg_m3: rho,
        dynamic_viscosity_pa_s: mu,
        kinematic_viscosity_m2_s: mu / rho,
        relative_permittivity: eps,
        molar_conductivity_s_m2_mol: cond.molar_conductivity(concentration_mol_m3),
        conductivity_s_m: cond.conductivity(concentration_mol_m3),
        debye_length_m: debye_length(eps, temperature_k, concentration_mol_m3),
        thermal_voltage_v: thermal_voltage(temperature_k),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn conductivity_is_positive_and_rises_with_concentration() {
        // Property: kappa must rise monotonically over the model's range (0 to 0.5 M).
        for salt in [Salt::NaCl, Salt::KCl] {
            let m = ConductivityModel::new(salt, 298.15);
            let mut last = 0.0;
            for k in 1..=500 {
                let kappa = m.conductivity(k as f64);
                assert!(kappa > last);
                last = kappa;
            }
        }
    }

    #[test]
    fn stokes_einstein_is_identity_at_reference_temperature() {
        let (d, l) = stokes_einstein_factors(T_REF_K);
        assert!((d - 1.0).abs() < 1e-12 && (l - 1.0).abs() < 1e-12);
    }
}
