//! Constants: the CODATA physical constants and the reduced-order-model (ROM) constants.
//!
//! Every ROM field is overridable from a study file (`[rom]` section) or a calibration result
//! (`stria fit` writes a TOML file of these keys). [`provenance`] gives each default with
//! its source; [`PHYSICAL`] lists the physical constants; [`priors`] gives the prior of every
//! uncertain ROM constant (distribution, range, provenance) for uncertainty studies.
//!
//! # How the defaults were chosen
//! Two facts of the trade fix the scale (common practice, no source): under chaotic
//! electroconvection only about 15 % of an unpatterned membrane is reached by salty fluid
//! (`alpha_0 = 0.15`), and a well-chosen pattern about doubles the overlimiting desalination
//! rate at one membrane interface at the same diffusion-layer voltage. The second fact is met
//! at the reference layer voltage [`REFERENCE_LAYER_VOLTAGE`] by `alpha_max`, `lockin_width`
//! and the pinning law; the test `best_pattern_doubles_interface_current` in
//! `tests/tests/acceptance/model_refs.rs` holds the defaults to it (ratio 2 within 25 %).

use serde::{Deserialize, Serialize};

use crate::ModelError;

/// Faraday constant, C/mol (CODATA 2018, exact in SI 2019).
pub const FARADAY: f64 = 96_485.332_12;
/// Molar gas constant, J/(mol K) (CODATA 2018, exact in SI 2019).
pub const GAS_CONSTANT: f64 = 8.314_462_618;
/// Vacuum electric permittivity, F/m (CODATA 2018).
pub const VACUUM_PERMITTIVITY: f64 = 8.854_187_812_8e-12;

/// Diffusion-layer voltage (thermal units) at which the interface-level "twice the
/// overlimiting removal" fact of the trade is held: 3 v_c = 60 V_T, about 1.5 V across the
/// layer, inside the chaotic regime that detailed simulations report (Demekhin et al. 2013
/// regime map; from memory).
pub const REFERENCE_LAYER_VOLTAGE: f64 = 60.0;

/// ROM constants of the electroconvective regime, the funnelling limit and water splitting.
/// Field names are the keys of the study file's `[rom]` section and of a constants file.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields, default)]
pub struct RomConstants {
    /// v_c: onset diffusion-layer voltage of electroconvection, thermal units (-).
    pub onset_voltage: f64,
    /// g: overlimiting conductance, (i / i_lim) per thermal unit^n (-).
    pub overlimiting_conductance: f64,
    /// n: overlimiting exponent (-), 1 <= n <= 3.
    pub overlimiting_exponent: f64,
    /// a_lambda: vortex wavelength / diffusion-layer thickness at onset (-).
    pub wavelength_prefactor: f64,
    /// q: growth exponent of the vortex wavelength with v / v_c (-).
    pub wavelength_exponent: f64,
    /// sigma: width of the lock-in window in ln(pitch / lambda_v) (-).
    pub lockin_width: f64,
    /// alpha_0: active-area fraction of an unpatterned membrane under chaotic electroconvection (-).
    pub alpha_0: f64,
    /// alpha_max: active-area fraction of a perfectly locked-in pattern (-).
    pub alpha_max: f64,
    /// phi_star: open fraction at which pinning is most effective (-).
    pub best_open_fraction: f64,
    /// kappa_P: sharpness of the pinning efficiency
    /// P(f) = (f/phi*)^(kappa_P phi*) ((1-f)/(1-phi*))^(kappa_P (1-phi*)) (-).
    pub pinning_sharpness: f64,
    /// delta_F / delta: thickness of the Nernst layer in the exact funnelling solution over
    /// the diffusion-layer thickness of the Sherwood law (-); 1 takes the film as it is.
    pub funnel_layer_ratio: f64,
    /// v_ws: diffusion-layer voltage at which water splitting starts at the CEM, thermal units (-).
    pub water_splitting_onset: f64,
    /// v_ws at the AEM (starts earlier there), thermal units (-).
    pub water_splitting_onset_aem: f64,
    /// Water-splitting scale: thermal units beyond onset at which half the current is carried
    /// by H+/OH- (-).
    pub water_splitting_scale: f64,
    /// Largest diffusion-layer voltage inside the calibrated range, thermal units (-); above
    /// it the model warns.
    pub calibrated_voltage_max: f64,
}

impl Default for RomConstants {
    /// The defaults of the provenance table ([`provenance`]).
    fn default() -> Self {
        RomConstants {
            onset_voltage: 20.0,
            overlimiting_conductance: 0.05,
            overlimiting_exponent: 1.0,
            wavelength_prefactor: 1.0,
            wavelength_exponent: 2.0 / 3.0,
            lockin_width: 0.5,
            alpha_0: 0.15,
            alpha_max: 0.36,
            best_open_fraction: 0.5,
            pinning_sharpness: 2.0,
            funnel_layer_ratio: 1.0,
            water_splitting_onset: 60.0,
            water_splitting_onset_aem: 35.0,
            water_splitting_scale: 20.0,
            calibrated_voltage_max: 120.0,
        }
    }
}

impl RomConstants {
    /// Check every constant against its admissible range (the range inside which the
    /// current-voltage law stays strictly increasing and finite).
    pub fn validate(&self) -> Result<(), ModelError> {
        let checks: [(&'static str, f64, f64, f64, &'static str); 15] = [
            (
                "onset_voltage",
                self.onset_voltage,
                0.5,
                200.0,
                "0.5 to 200 thermal units",
            ),
            (
                "overlimiting_conductance",
                self.overlimiting_conductance,
                1e-3,
                10.0,
                "1e-3 to 10",
            ),
            (
                "overlimiting_exponent",
                self.overlimiting_exponent,
                1.0,
                3.0,
                "1 to 3",
            ),
            (
                "wavelength_prefactor",
                self.wavelength_prefactor,
                1e-3,
                1e3,
                "1e-3 to 1e3",
            ),
            (
                "wavelength_exponent",
                self.wavelength_exponent,
                0.05,
                3.0,
                "0.05 to 3",
            ),
            ("lockin_width", self.lockin_width, 0.01, 10.0, "0.01 to 10"),
            ("alpha_0", self.alpha_0, 1e-3, 1.0, "0.001 to 1"),
            ("alpha_max", self.alpha_max, 1e-3, 1.0, "0.001 to 1"),
            (
                "best_open_fraction",
                self.best_open_fraction,
                0.01,
                0.99,
                "0.01 to 0.99",
            ),
            (
                "pinning_sharpness",
                self.pinning_sharpness,
                0.1,
                50.0,
                "0.1 to 50",
            ),
            (
                "funnel_layer_ratio",
                self.funnel_layer_ratio,
                0.1,
                10.0,
                "0.1 to 10",
            ),
            (
                "water_splitting_onset",
                self.water_splitting_onset,
                0.0,
                1e4,
                "0 to 1e4 thermal units",
            ),
            (
                "water_splitting_onset_aem",
                self.water_splitting_onset_aem,
                0.0,
                1e4,
                "0 to 1e4 thermal units",
            ),
            (
                "water_splitting_scale",
                self.water_splitting_scale,
                1e-3,
                1e4,
                "1e-3 to 1e4 thermal units",
            ),
            (
                "calibrated_voltage_max",
                self.calibrated_voltage_max,
                0.0,
                1e4,
                "0 to 1e4 thermal units",
            ),
        ];
        for (field, value, lo, hi, allowed) in checks {
            if !(value.is_finite() && value >= lo && value <= hi) {
                return Err(ModelError::Input {
                    field,
                    value,
                    allowed,
                });
            }
        }
        Ok(())
    }
}

/// One row of a constants table.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ConstantRow {
    /// Symbol as written in the model description, e.g. "v_c".
    pub symbol: &'static str,
    /// Key in a study file's `[rom]` section (empty for physical constants).
    pub key: &'static str,
    /// Value in `unit`.
    pub value: f64,
    /// Unit ("-" for dimensionless, "V_T" for thermal units).
    pub unit: &'static str,
    /// Where the value comes from: a source, "from memory" or "common practice".
    pub source: &'static str,
}

/// The physical constants (CODATA 2018; SI 2019 exact values for F and R).
pub const PHYSICAL: [ConstantRow; 3] = [
    ConstantRow {
        symbol: "F",
        key: "",
        value: FARADAY,
        unit: "C/mol",
        source: "CODATA 2018 (exact in SI 2019)",
    },
    ConstantRow {
        symbol: "R",
        key: "",
        value: GAS_CONSTANT,
        unit: "J/(mol K)",
        source: "CODATA 2018 (exact in SI 2019)",
    },
    ConstantRow {
        symbol: "eps_0",
        key: "",
        value: VACUUM_PERMITTIVITY,
        unit: "F/m",
        source: "CODATA 2018",
    },
];

/// The ROM constants of `k` with their provenance (the defaults' sources; a user override
/// keeps the row but the value is the user's).
pub fn provenance_of(k: &RomConstants) -> Vec<ConstantRow> {
    vec![
        ConstantRow { symbol: "v_c", key: "onset_voltage", value: k.onset_voltage, unit: "V_T",
            source: "Rubinstein and Zaltzman, Phys. Rev. E 62 (2000) 2238; Zaltzman and Rubinstein, J. Fluid Mech. 579 (2007) 173: onset of order 10-30 V_T, about 20 for lambda_D/L near 1e-3 (from memory)" },
        ConstantRow { symbol: "g", key: "overlimiting_conductance", value: k.overlimiting_conductance, unit: "i_lim per V_T",
            source: "from memory: measured overlimiting branches reach about 2-3 i_lim some 40 V_T past onset (Rubinstein et al., Phys. Rev. Lett. 101 (2008) 236101, shapes)" },
        ConstantRow { symbol: "n", key: "overlimiting_exponent", value: k.overlimiting_exponent, unit: "-",
            source: "common practice: overlimiting branches are close to linear (an overlimiting 'resistance'); n = 1 also gives the closed form" },
        ConstantRow { symbol: "a_lambda", key: "wavelength_prefactor", value: k.wavelength_prefactor, unit: "-",
            source: "from memory: vortex pairs at onset are about as wide as the depleted layer is thick; Balster et al., J. Phys. Chem. B 111 (2007) 2152 find undulations at 50-200 % of delta most effective" },
        ConstantRow { symbol: "q", key: "wavelength_exponent", value: k.wavelength_exponent, unit: "-",
            source: "Kwak, Pham, Lim and Han, Phys. Rev. Lett. 110 (2013) 114501: vortex size ~ (V^2/U)^(1/3) under shear; with delta ~ U^(-1/3) this needs q = 2/3" },
        ConstantRow { symbol: "sigma", key: "lockin_width", value: k.lockin_width, unit: "-",
            source: "tuned (this crate) so that the best pitch keeps lock-in over v_c..3 v_c, where lambda_v grows by 3^(2/3); common practice that a pattern tolerates roughly +-50 % pitch mismatch" },
        ConstantRow { symbol: "alpha_0", key: "alpha_0", value: k.alpha_0, unit: "-",
            source: "common practice: under chaotic electroconvection about 85 % of an unpatterned membrane is idle" },
        ConstantRow { symbol: "alpha_max", key: "alpha_max", value: k.alpha_max, unit: "-",
            source: "tuned (this crate) to the fact of the trade that a well-chosen pattern desalinates about twice as fast at the same voltage (common practice): at one interface at 3 v_c the best pattern gives 1.8x the total and 2.3x the overlimiting current of a plain membrane" },
        ConstantRow { symbol: "phi_star", key: "best_open_fraction", value: k.best_open_fraction, unit: "-",
            source: "from memory: half-open stripe patterns are the usual choice in pattern studies; symmetric pinning assumed" },
        ConstantRow { symbol: "kappa_P", key: "pinning_sharpness", value: k.pinning_sharpness, unit: "-",
            source: "choice of this crate: with phi* = 0.5, kappa_P = 2 gives the parabola P = 4 f (1 - f)" },
        ConstantRow { symbol: "delta_F/delta", key: "funnel_layer_ratio", value: k.funnel_layer_ratio, unit: "-",
            source: "choice of this crate: the exact funnelling solution of a Nernst film (docs/physics.md#funnelling) is applied with the film thickness of the Sherwood law; a calibration handle for real, convective layers" },
        ConstantRow { symbol: "v_ws", key: "water_splitting_onset", value: k.water_splitting_onset, unit: "V_T",
            source: "from memory: CEMs split water only at layer voltages well into the overlimiting range; Nikonenko et al., Desalination 342 (2014) 85" },
        ConstantRow { symbol: "v_ws,AEM", key: "water_splitting_onset_aem", value: k.water_splitting_onset_aem, unit: "V_T",
            source: "common practice: water splitting starts earlier at the AEM (catalytic amine groups)" },
        ConstantRow { symbol: "s_ws", key: "water_splitting_scale", value: k.water_splitting_scale, unit: "V_T",
            source: "from memory: current efficiency falls over some tens of V_T past onset" },
        ConstantRow { symbol: "v_cal", key: "calibrated_voltage_max", value: k.calibrated_voltage_max, unit: "V_T",
            source: "common practice: direct simulations and experiments rarely exceed about 120 V_T (3 V) across one layer" },
    ]
}

/// Units in words and meaning of each ROM constant, by its `[rom]` key: (key, unit, meaning).
/// `stria keys` (docs/study-reference.md), docs/constants.md and `stria fit` print them beside
/// the values; the relations are in docs/physics.md, section "Interface law".
pub const ROM_MEANINGS: &[(&str, &str, &str)] = &[
    ("onset_voltage", "thermal voltages (RT/F, 25.7 mV at 25 C)",
        "v_c: diffusion-layer voltage at which electroconvection starts; no overlimiting current below it"),
    ("overlimiting_conductance", "limiting currents per thermal voltage (i_lim per RT/F)",
        "g: slope di/dv of the overlimiting branch of an unpatterned membrane past onset, in units of its limiting current per thermal voltage (n = 1)"),
    ("overlimiting_exponent", "dimensionless",
        "n: shape of the overlimiting branch, i_ec of a plain membrane = i_lim g (v - v_c)^n; 1 is a straight line"),
    ("wavelength_prefactor", "diffusion-layer thicknesses",
        "a_lambda: natural vortex wavelength at onset divided by the diffusion-layer thickness delta"),
    ("wavelength_exponent", "dimensionless",
        "q: growth of the vortex wavelength with voltage, lambda_v = a_lambda delta (v / v_c)^q"),
    ("lockin_width", "natural-log units of pitch / wavelength",
        "sigma: width of the Gaussian lock-in window in ln(pitch / lambda_v); a pattern pins the vortices while its pitch is within about a factor exp(sigma) of their wavelength"),
    ("alpha_0", "share of membrane area (0-1)",
        "alpha_0: active-area fraction of an unpatterned membrane under chaotic electroconvection (share of the surface reached by salty fluid)"),
    ("alpha_max", "share of membrane area (0-1)",
        "alpha_max: active-area fraction of a perfectly locked-in pattern (never above the open fraction)"),
    ("best_open_fraction", "share of each pitch (0-1)",
        "phi*: open fraction at which stripes pin the vortices best"),
    ("pinning_sharpness", "dimensionless",
        "kappa_P: how fast the pinning efficiency falls away from phi* (P = 4 f (1 - f) at phi* = 0.5, kappa_P = 2)"),
    ("funnel_layer_ratio", "diffusion-layer thicknesses",
        "delta_F / delta: the funnelling factor is the exact one of a Nernst film of thickness delta_F = ratio x delta"),
    ("water_splitting_onset", "thermal voltages (RT/F)",
        "v_ws: CEM diffusion-layer voltage at which water splitting starts"),
    ("water_splitting_onset_aem", "thermal voltages (RT/F)",
        "v_ws,AEM: AEM diffusion-layer voltage at which water splitting starts (earlier than at the CEM)"),
    ("water_splitting_scale", "thermal voltages (RT/F)",
        "s_ws: voltage past the water-splitting onset at which H+/OH- carry half of the current"),
    ("calibrated_voltage_max", "thermal voltages (RT/F)",
        "v_cal: largest diffusion-layer voltage inside the calibrated range; above it the model warns"),
];

/// The unit in words and the meaning of the ROM constant `key` (see [`ROM_MEANINGS`]).
pub fn rom_meaning(key: &str) -> Option<(&'static str, &'static str)> {
    ROM_MEANINGS
        .iter()
        .find(|(k, _, _)| *k == key)
        .map(|(_, unit, meaning)| (*unit, *meaning))
}

/// The default ROM constants with their provenance.
pub fn provenance() -> Vec<ConstantRow> {
    provenance_of(&RomConstants::default())
}

/// Shape of a prior distribution. Bounds are in the constant's unit (see [`ConstantRow`]).
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
#[serde(tag = "kind", rename_all = "snake_case")]
pub enum Distribution {
    /// Uniform on [lower, upper].
    Uniform {
        /// Lower bound.
        lower: f64,
        /// Upper bound.
        upper: f64,
    },
    /// Uniform in ln(x) on [lower, upper] (0 < lower < upper).
    LogUniform {
        /// Lower bound.
        lower: f64,
        /// Upper bound.
        upper: f64,
    },
    /// Normal of `mean` and standard deviation `sd`, truncated to [lower, upper] (the
    /// constant's admissible or physical range).
    Normal {
        /// Mean (of the untruncated normal).
        mean: f64,
        /// Standard deviation (of the untruncated normal).
        sd: f64,
        /// Lower truncation bound.
        lower: f64,
        /// Upper truncation bound.
        upper: f64,
    },
}

/// Standard normal cumulative distribution function.
fn normal_cdf(z: f64) -> f64 {
    0.5 * crate::numerics::erfc(-z / std::f64::consts::SQRT_2)
}

impl Distribution {
    /// The support [lower, upper].
    pub fn support(&self) -> (f64, f64) {
        match *self {
            Distribution::Uniform { lower, upper }
            | Distribution::LogUniform { lower, upper }
            | Distribution::Normal { lower, upper, .. } => (lower, upper),
        }
    }

    /// The value at cumulative probability `u` in [0, 1] (inverse CDF), so that a uniform
    /// sample u gives a sample of the prior. The truncated normal is inverted by bisection on
    /// its CDF to 1e-12 of its support.
    #[allow(clippy::float_cmp)] // exact on purpose: the quantile function is exact at its end points 0 and 1
    pub fn quantile(&self, u: f64) -> f64 {
        let u = u.clamp(0.0, 1.0);
        match *self {
            Distribution::Uniform { lower, upper } => lower + u * (upper - lower),
            Distribution::LogUniform { lower, upper } => {
                (lower.ln() + u * (upper.ln() - lower.ln())).exp()
            }
            Distribution::Normal {
                mean,
                sd,
                lower,
                upper,
            } => {
                if u == 0.0 || u == 1.0 {
                    return if u == 0.0 { lower } else { upper };
                }
                let (pa, pb) = (
                    normal_cdf((lower - mean) / sd),
                    normal_cdf((upper - mean) / sd),
                );
                let target = pa + u * (pb - pa);
                let (mut a, mut b) = (lower, upper);
                while b - a > 1e-12 * (upper - lower) {
                    let m = 0.5 * (a + b);
                    if normal_cdf((m - mean) / sd) < target {
                        a = m;
                    } else {
                        b = m;
                    }
                }
                0.5 * (a + b)
            }
        }
    }

    /// Whether `x` lies in the support.
    pub fn contains(&self, x: f64) -> bool {
        let (a, b) = self.support();
        x >= a && x <= b
    }
}

/// The prior of one uncertain constant: what a study or an uncertainty analysis draws it from.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Prior {
    /// Key of the constant in a study file's `[rom]` section (a field of [`RomConstants`]).
    pub key: &'static str,
    /// Unit of the bounds ("-" dimensionless, "V_T" thermal units).
    pub unit: &'static str,
    /// The distribution.
    pub distribution: Distribution,
    /// Where the centre (today's default) comes from: the constant's provenance row.
    pub centre_source: &'static str,
    /// Where the range and the shape come from: a source, "from memory" or "common practice".
    pub range_source: &'static str,
}

/// ROM constants that are not uncertain physics and so carry no prior: each with the reason.
pub const WITHOUT_PRIOR: [(&str, &str); 1] = [(
    "calibrated_voltage_max",
    "a validity bound of the model (where it warns), not a physical quantity",
)];

/// The prior of every uncertain ROM constant, centred on today's default (the range's
/// arithmetic centre for a uniform prior, its geometric centre for a log-uniform one, the
/// mean of a normal) unless the range source says otherwise. Keys are the `[rom]` keys; every
/// field of [`RomConstants`] has one except those in [`WITHOUT_PRIOR`]. Every support lies
/// inside the admissible range of [`RomConstants::validate`].
pub fn priors() -> Vec<Prior> {
    use Distribution::*;
    let rows = provenance();
    let source = |key: &str| {
        rows.iter()
            .find(|r| r.key == key)
            .map(|r| r.source)
            .unwrap_or("")
    };
    let unit = |key: &str| {
        rows.iter()
            .find(|r| r.key == key)
            .map(|r| r.unit)
            .unwrap_or("-")
    };
    let table: Vec<(&'static str, Distribution, &'static str)> = vec![
        ("onset_voltage", Uniform { lower: 10.0, upper: 30.0 },
            "from memory: linear-stability and direct simulations put the onset at 10-30 V_T (Rubinstein and Zaltzman 2000; Zaltzman and Rubinstein 2007); uniform over that band"),
        ("overlimiting_conductance", LogUniform { lower: 0.025, upper: 0.1 },
            "from memory: overlimiting branches reach 2-3 i_lim some 40 V_T past onset (Rubinstein et al. 2008), i.e. g from about 0.025 to 0.05 per V_T on a plain membrane; widened by the same factor above the default to keep it the geometric centre"),
        ("overlimiting_exponent", Normal { mean: 1.0, sd: 0.25, lower: 1.0, upper: 3.0 },
            "common practice: measured overlimiting branches are near linear; a half-normal above n = 1 (sd 0.25) allows the mild upward curvature some curves show"),
        ("wavelength_prefactor", LogUniform { lower: 1.0 / 3.0, upper: 3.0 },
            "from memory: published critical wavelengths of electroconvection at onset span about one to a few layer thicknesses (Zaltzman and Rubinstein 2007 marginal-stability curves; Balster et al. 2007 find 50-200 % of delta most effective); log-uniform from delta/3 to 3 delta"),
        ("wavelength_exponent", Uniform { lower: 1.0 / 3.0, upper: 1.0 },
            "from memory: Kwak et al. 2013 give 2/3 from (V^2/U)^(1/3); the exponent is measured over less than a decade of V, +-1/3 allowed"),
        ("lockin_width", LogUniform { lower: 0.25, upper: 1.0 },
            "common practice: a pattern tolerates roughly +-30 % to +-100 % pitch mismatch; a factor 2 either way of the default"),
        ("alpha_0", Uniform { lower: 0.08, upper: 0.22 },
            "common practice: 'about 15 %' of an unpatterned membrane active; read as 8-22 %"),
        ("alpha_max", Uniform { lower: 0.25, upper: 0.47 },
            "tuned (this crate) to the twice-as-fast fact of the trade; the range keeps the interface gain of the best pattern within roughly 1.5-2.5x"),
        ("best_open_fraction", Uniform { lower: 0.3, upper: 0.7 },
            "from memory: pattern studies use open fractions from about 0.3 to 0.7 with similar success"),
        ("pinning_sharpness", LogUniform { lower: 1.0, upper: 4.0 },
            "choice of this crate, no source: a factor 2 either way of the default"),
        ("funnel_layer_ratio", LogUniform { lower: 0.7, upper: 1.0 / 0.7 },
            "from memory: a Nernst film stands for a convective concentration layer to some tens of per cent in thickness (Levich's film idealisation); a factor 1/0.7 either way"),
        ("water_splitting_onset", Uniform { lower: 40.0, upper: 80.0 },
            "from memory: CEMs split water well into the overlimiting range (Nikonenko et al. 2014); +-20 V_T"),
        ("water_splitting_onset_aem", Uniform { lower: 20.0, upper: 50.0 },
            "from memory: AEMs split water earlier (Nikonenko et al. 2014); +-15 V_T"),
        ("water_splitting_scale", LogUniform { lower: 10.0, upper: 40.0 },
            "from memory: current efficiency falls over some tens of V_T past onset; a factor 2 either way"),
    ];
    table
        .into_iter()
        .map(|(key, distribution, range_source)| Prior {
            key,
            unit: unit(key),
            distribution,
            centre_source: source(key),
            range_source,
        })
        .collect()
}

#[cfg(test)]
#[allow(clippy::float_cmp)] // quantiles of these distributions are exact in binary floating point
mod tests {
    use super::*;

    #[test]
    fn every_field_has_a_provenance_row() {
        let json = serde_json::to_value(RomConstants::default()).unwrap();
        let keys: Vec<&str> = provenance().iter().map(|r| r.key).collect();
        for k in json.as_object().unwrap().keys() {
            assert!(keys.contains(&k.as_str()), "no provenance row for {k}");
        }
        assert_eq!(keys.len(), json.as_object().unwrap().len());
    }

    #[test]
    fn every_field_has_a_meaning() {
        let json = serde_json::to_value(RomConstants::default()).unwrap();
        for k in json.as_object().unwrap().keys() {
            assert!(rom_meaning(k).is_some(), "no ROM_MEANINGS row for {k}");
        }
        assert_eq!(ROM_MEANINGS.len(), json.as_object().unwrap().len());
    }

    #[test]
    fn every_uncertain_constant_has_a_prior_centred_on_its_default() {
        let k = serde_json::to_value(RomConstants::default()).unwrap();
        let k = k.as_object().unwrap();
        let priors = priors();
        for key in k.keys() {
            let n = priors.iter().filter(|p| p.key == key).count();
            let exempt = WITHOUT_PRIOR.iter().any(|(w, _)| w == key);
            assert_eq!(n, usize::from(!exempt), "{key}: {n} priors");
        }
        for p in &priors {
            let default = k[p.key].as_f64().unwrap();
            let centre = match p.distribution {
                Distribution::Uniform { lower, upper } => 0.5 * (lower + upper),
                Distribution::LogUniform { lower, upper } => (lower * upper).sqrt(),
                Distribution::Normal { mean, .. } => mean,
            };
            assert!(
                (centre / default - 1.0).abs() < 1e-9,
                "{}: centre {centre} vs default {default}",
                p.key
            );
            assert!(
                !p.centre_source.is_empty() && !p.range_source.is_empty(),
                "{}",
                p.key
            );
            // Both ends of the support are admissible values.
            let (lo, hi) = p.distribution.support();
            assert!(lo < hi, "{}", p.key);
            for x in [lo, hi] {
                let mut v = serde_json::to_value(RomConstants::default()).unwrap();
                v[p.key] = serde_json::Value::from(x);
                let c: RomConstants = serde_json::from_value(v).unwrap();
                c.validate()
                    .unwrap_or_else(|e| panic!("{}: {x}: {e}", p.key));
            }
        }
    }

    #[test]
    fn quantiles_invert_the_distributions() {
        let u = Distribution::Uniform {
            lower: 2.0,
            upper: 4.0,
        };
        assert_eq!(u.quantile(0.25), 2.5);
        let l = Distribution::LogUniform {
            lower: 1.0,
            upper: 100.0,
        };
        assert!((l.quantile(0.5) - 10.0).abs() < 1e-12);
        // Truncated normal: the median of a symmetric truncation is the mean; the 0.8413
        // quantile of an untruncated (very wide) one is mean + sd (Phi(1) = 0.841345, tables).
        let n = Distribution::Normal {
            mean: 1.0,
            sd: 0.5,
            lower: 0.0,
            upper: 2.0,
        };
        assert!((n.quantile(0.5) - 1.0).abs() < 1e-9);
        let w = Distribution::Normal {
            mean: 1.0,
            sd: 0.5,
            lower: -20.0,
            upper: 20.0,
        };
        assert!((w.quantile(0.841_345) - 1.5).abs() < 1e-5);
        for d in [u, l, n] {
            let (lo, hi) = d.support();
            assert_eq!(d.quantile(0.0), lo);
            assert!((d.quantile(1.0) - hi).abs() < 1e-9 * hi.abs());
            assert!(d.contains(d.quantile(0.3)));
        }
    }

    #[test]
    fn defaults_are_admissible() {
        RomConstants::default().validate().unwrap();
    }
}
