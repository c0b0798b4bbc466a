//! Priors of the uncertain ROM constants.
//!
//! Until the model carries its own priors, the ranges come from the provenance table
//! (`model::constants::provenance_of`, `docs/constants.md`): where a source gives a range it is
//! used; a value marked "from memory", "tuned" or "common practice" gets a factor-of-two
//! (log-uniform) or a stated +-range. Constants that are computed from a formula or fixed by a
//! published scaling are not varied. [`priors`] is the one place to switch to the model's
//! priors.

use model::RomConstants;
use optimizer::sampling::Distribution;

/// One uncertain constant: its `[rom]` key, its distribution, and why.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Prior {
    /// The `RomConstants` serde key (the study's `[rom]` key).
    pub key: &'static str,
    /// The distribution of its value.
    pub distribution: Distribution,
    /// Where the range comes from.
    pub why: &'static str,
}

/// The priors of the uncertain constants, in a fixed order (the order of the draws).
pub fn priors() -> Vec<Prior> {
    use Distribution::{LogUniform, Uniform};
    vec![
        Prior {
            key: "onset_voltage",
            distribution: Uniform {
                lower: 10.0,
                upper: 30.0,
            },
            why: "provenance: onset of order 10-30 thermal voltages",
        },
        Prior {
            key: "overlimiting_conductance",
            distribution: LogUniform {
                lower: 0.025,
                upper: 0.1,
            },
            why: "from memory: a factor of two either way",
        },
        Prior {
            key: "wavelength_prefactor",
            distribution: LogUniform {
                lower: 0.5,
                upper: 2.0,
            },
            why: "provenance: undulations at 50-200 % of the layer thickness",
        },
        Prior {
            key: "lockin_width",
            distribution: LogUniform {
                lower: 0.25,
                upper: 1.0,
            },
            why: "tuned: a factor of two either way",
        },
        Prior {
            key: "alpha_0",
            distribution: Uniform {
                lower: 0.10,
                upper: 0.20,
            },
            why: "common practice (about 85 % idle): +-0.05",
        },
        Prior {
            key: "alpha_max",
            distribution: Uniform {
                lower: 0.27,
                upper: 0.45,
            },
            why: "tuned to 'about twice as fast': +-25 %",
        },
        Prior {
            key: "best_open_fraction",
            distribution: Uniform {
                lower: 0.4,
                upper: 0.6,
            },
            why: "from memory (half-open patterns usual): +-0.1",
        },
        Prior {
            key: "water_splitting_onset",
            distribution: Uniform {
                lower: 40.0,
                upper: 80.0,
            },
            why: "from memory: well into the overlimiting range",
        },
        Prior {
            key: "water_splitting_onset_aem",
            distribution: Uniform {
                lower: 25.0,
                upper: 45.0,
            },
            why: "common practice: earlier than at the CEM",
        },
        Prior {
            key: "water_splitting_scale",
            distribution: LogUniform {
                lower: 10.0,
                upper: 40.0,
            },
            why: "from memory: some tens of thermal voltages",
        },
    ]
}

/// The priors that apply to a study with constants `base`: a constant the study sets away
/// from its default is taken as known and held fixed (its key is in the second list).
pub fn priors_for(base: &RomConstants) -> (Vec<Prior>, Vec<&'static str>) {
    let default = serde_json::to_value(RomConstants::default()).unwrap_or_default();
    let own = serde_json::to_value(base).unwrap_or_default();
    let mut varied = Vec::new();
    let mut fixed = Vec::new();
    for p in priors() {
        let (a, b) = (default[p.key].as_f64(), own[p.key].as_f64());
        match (a, b) {
            (Some(a), Some(b)) if a.to_bits() != b.to_bits() => fixed.push(p.key),
            _ => varied.push(p),
        }
    }
    (varied, fixed)
}

/// `base` with the constants `keys` set to `values` (serde keys of `RomConstants`).
pub fn with_values(
    base: &RomConstants,
    keys: &[&str],
    values: &[f64],
) -> Result<RomConstants, String> {
    let mut v = serde_json::to_value(base).map_err(|e| e.to_string())?;
    for (k, x) in keys.iter().zip(values) {
        match v.get_mut(*k) {
            Some(slot) => *slot = serde_json::json!(x),
            None => return Err(format!("no ROM constant named {k}")),
        }
    }
    serde_json::from_value(v).map_err(|e| e.to_string())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn every_prior_names_a_constant_and_holds_its_default_and_admissible_values() {
        let d = RomConstants::default();
        let json = serde_json::to_value(d).unwrap();
        for p in priors() {
            p.distribution.validate().unwrap();
            let x = json[p.key].as_f64().unwrap_or_else(|| panic!("{}", p.key));
            let (lo, hi) = (p.distribution.quantile(0.0), p.distribution.quantile(1.0));
            assert!(
                lo <= x && x <= hi,
                "{}: default {x} outside [{lo}, {hi}]",
                p.key
            );
            for q in [0.0, 1.0] {
                let k = with_values(&d, &[p.key], &[p.distribution.quantile(q)]).unwrap();
                k.validate().unwrap();
            }
        }
    }

    #[test]
    fn a_constant_set_by_the_study_is_held() {
        let k = RomConstants {
            onset_voltage: 25.0,
            ..RomConstants::default()
        };
        let (varied, fixed) = priors_for(&k);
        assert_eq!(fixed, vec!["onset_voltage"]);
        assert_eq!(varied.len(), priors().len() - 1);
    }
}
