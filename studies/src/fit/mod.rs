//! `stria fit DATA.csv --study STUDY.toml [--fit name ...] [--out constants.toml]`: calibrate
//! ROM constants to current-voltage data of single membrane interfaces (the CFD cases of
//! `stria handoff`, or experiments with the same definitions).
//!
//! The forward model is [`model::interface::solve`] at each point's conditions; the fit is a
//! bounded least-squares fit of the current densities ([`solve`]). Writes a constants file
//! (TOML, the `model::RomConstants` keys, loadable as `[rom] constants_file`) and an SVG plot of
//! the data against the fitted curves, both atomically.

pub mod data;
pub mod posterior;
pub mod solve;

use std::path::{Path, PathBuf};

use model::interface::{self, InterfaceConditions, MembraneKind};
use model::RomConstants;

use crate::error::{io_error, CliError};
use crate::figures;
use crate::fsio::write_atomic;
use crate::study::Study;
use data::DataSet;
use solve::{FitResult, Predicted};

/// Seed of the fit's random starts (fixed: the same data give the same constants).
pub const SEED: u64 = 0x5354_5249_4146_4954;

/// A calibration: the data, the conditions each point was evaluated at, and the fit.
#[derive(Debug, Clone)]
pub struct Calibration {
    /// Conditions per point (study values filled in).
    pub conditions: Vec<InterfaceConditions>,
    /// Layer voltage per point, thermal units.
    pub voltage_thermal: Vec<f64>,
    /// The fit.
    pub result: FitResult,
    /// Notes on conditions taken from the study.
    pub notes: Vec<String>,
    /// Constants the fit started from.
    pub start: RomConstants,
}

/// The interface conditions of each point, missing ones from the study's baseline; notes say
/// which were taken from the study.
pub fn conditions(data: &DataSet, study: &Study) -> (Vec<InterfaceConditions>, Vec<String>) {
    let b = &study.baseline;
    let default_position = 0.5 * b.channel.length_m;
    let (membrane, tm) = fitted_membrane(study);
    let conds = data
        .points
        .iter()
        .map(|p| {
            let c = &p.conditions;
            InterfaceConditions {
                salt: b.water.salt,
                temperature_k: c.temperature_k.unwrap_or(b.water.temperature_k),
                concentration_mol_m3: c
                    .concentration_mol_m3
                    .unwrap_or(b.water.feed_concentration_mol_m3),
                velocity_m_s: c.velocity_m_s.unwrap_or(b.operation.velocity_m_s),
                gap_m: c.gap_m.unwrap_or(b.channel.gap_m),
                position_m: c.position_m.unwrap_or(default_position),
                pitch_m: c.pitch_m.unwrap_or(b.membranes.pitch_m),
                open_fraction: c.open_fraction.unwrap_or(b.membranes.open_fraction),
                membrane_transport_number: tm,
                spacer: b.channel.spacer,
                membrane,
            }
        })
        .collect();
    let study_value = |col: &str| -> String {
        match col {
            "concentration_mol_m3" => {
                format!("{} mol/m^3 (feed)", b.water.feed_concentration_mol_m3)
            }
            "velocity_m_s" => format!("{} m/s", b.operation.velocity_m_s),
            "pitch_m" => format!("{} m", b.membranes.pitch_m),
            "open_fraction" => format!("{}", b.membranes.open_fraction),
            "gap_m" => format!("{} m", b.channel.gap_m),
            "temperature_K" => format!("{} K", b.water.temperature_k),
            "position_m" => {
                format!("{default_position} m (mid-channel, where the hand-off window sits)")
            }
            _ => String::new(),
        }
    };
    let n = data.points.len();
    let mut notes: Vec<String> = data
        .from_study
        .iter()
        .map(|(col, k)| {
            let rows = if *k == n {
                "all rows".to_string()
            } else {
                format!("{k} of {n} rows")
            };
            format!(
                "{col} not given for {rows}: taken from the study, {}",
                study_value(col)
            )
        })
        .collect();
    notes.push(format!(
        "the data are taken as the {} interface (the study's patterned membrane); salt {}, {} \
         transport number {} and channel filling `{}` taken from the study",
        membrane.name(),
        b.water.salt.name(),
        membrane.name(),
        tm,
        b.channel.spacer.name()
    ));
    (conds, notes)
}

/// The membrane whose interface the data describe, as in the hand-off cards
/// ([`crate::handoff::case::simulated_membrane`]), with its counter-ion transport number.
pub fn fitted_membrane(study: &Study) -> (MembraneKind, f64) {
    crate::handoff::case::simulated_membrane(&study.baseline.membranes)
}

/// Fit `keys` (empty: the default set) to the data with the study's constants as the start,
/// with the default sampler settings.
pub fn calibrate(data: &DataSet, study: &Study, keys: &[String]) -> Result<Calibration, CliError> {
    calibrate_with(data, study, keys, &solve::Settings::default())
}

/// [`calibrate`] with the sampler's settings and the weak-data rule chosen.
pub fn calibrate_with(
    data: &DataSet,
    study: &Study,
    keys: &[String],
    settings: &solve::Settings,
) -> Result<Calibration, CliError> {
    let keys: Vec<String> = if keys.is_empty() {
        solve::DEFAULT_FIT.iter().map(|s| s.to_string()).collect()
    } else {
        keys.to_vec()
    };
    let (conds, notes) = conditions(data, study);
    let vt: Vec<f64> = data
        .points
        .iter()
        .zip(&conds)
        .map(|(p, c)| p.layer_voltage_v / model::properties::thermal_voltage(c.temperature_k))
        .collect();
    let currents: Vec<f64> = data.points.iter().map(|p| p.current_density_a_m2).collect();
    let patterned: Vec<bool> = conds.iter().map(|c| c.open_fraction < 1.0).collect();
    let forward = |k: usize, c: &RomConstants| -> Option<Predicted> {
        let s = interface::solve(&conds[k], vt[k], c);
        s.current_density_a_m2.is_finite().then_some(Predicted {
            current_density_a_m2: s.current_density_a_m2,
            heterogeneous_limit_a_m2: s.heterogeneous_limit_a_m2,
        })
    };
    let result = solve::fit(
        &keys,
        &study.constants,
        &currents,
        &patterned,
        forward,
        settings,
    )
    .map_err(|r| {
        CliError::input(
            &data.file,
            None,
            "--fit",
            format!("the fit is refused: {}", r.0),
            format!(
                "fittable constants {} (default {}), with data that inform each",
                solve::FITTABLE.join(", "),
                solve::DEFAULT_FIT.join(", ")
            ),
        )
    })?;
    Ok(Calibration {
        conditions: conds,
        voltage_thermal: vt,
        result,
        notes,
        start: study.constants,
    })
}

/// The unit of a ROM constant in words (docs/constants.md#rom-constants): the onset voltage in
/// thermal voltages, the overlimiting conductance in limiting currents per thermal voltage.
fn unit_of(key: &str) -> &'static str {
    model::constants::rom_meaning(key).map_or("-", |(unit, _)| unit)
}

/// The constants file: a header saying where it came from, `[rom]` with every
/// `RomConstants` key (the fitted ones at their posterior mean), then the `[posterior]`
/// section ([`posterior::to_toml`], docs/formats.md#constants-file).
pub fn constants_toml(cal: &Calibration, data_file: &Path) -> Result<String, CliError> {
    let body = toml::to_string(&cal.result.constants).map_err(|source| CliError::Toml {
        context: "constants file".into(),
        source,
    })?;
    let r = &cal.result;
    let mut head = format!(
        "# ROM constants calibrated by `stria fit` from {}\n\
         # Load from a study with [rom] constants_file = \"<this file>\".\n\
         # RMS misfit {:.4} A/m^2 over {} points at the posterior mean.\n",
        data_file.display(),
        r.rms_a_m2,
        r.residuals.len()
    );
    for (j, (k, v, s)) in r.parameters.iter().enumerate() {
        let (lo, hi) = r.sampled.interval_95[j];
        head.push_str(&format!(
            "# fitted: {k} = {} +- {} (posterior mean and sd; 95 % interval {} to {}; unit: {})\n",
            figures::fmt_num(*v),
            figures::fmt_num(*s),
            figures::fmt_num(lo),
            figures::fmt_num(hi),
            unit_of(k)
        ));
    }
    for w in &r.held_at_prior {
        head.push_str(&format!(
            "# held at its prior (--allow-weak): {}: the data cannot inform it\n",
            w.key
        ));
    }
    head.push_str(
        "# Every other key is the value the fit started from (the study's constants).\n\n[rom]\n",
    );
    Ok(head + &body + "\n" + &posterior::to_toml(&posterior::Posterior::of(&r.sampled, r)))
}

/// The plot of data against the fitted curves, per curve.
pub fn plot(data: &DataSet, cal: &Calibration) -> Result<String, CliError> {
    let mut series = Vec::new();
    for (ci, (curve, idx)) in data.curve_groups().iter().enumerate() {
        let colour = ci + 1;
        let pts: Vec<(f64, f64)> = idx
            .iter()
            .map(|&k| {
                (
                    data.points[k].layer_voltage_v,
                    data.points[k].current_density_a_m2,
                )
            })
            .collect();
        let first = idx[0];
        let vmax = idx
            .iter()
            .map(|&k| data.points[k].layer_voltage_v)
            .fold(0.0, f64::max);
        let vt = model::properties::thermal_voltage(cal.conditions[first].temperature_k);
        let line: Vec<(f64, f64)> = (0..=80)
            .map(|j| {
                let v = vmax * j as f64 / 80.0;
                let s = interface::solve(&cal.conditions[first], v / vt, &cal.result.constants);
                (v, s.current_density_a_m2)
            })
            .collect();
        series.push(figures::Series {
            name: format!("{curve}: data"),
            points: pts,
            mark: figures::Mark::Points,
            colour,
        });
        series.push(figures::Series {
            name: format!("{curve}: fitted ROM"),
            points: line,
            mark: figures::Mark::Line,
            colour,
        });
    }
    figures::xy_chart(
        "Current-voltage data against the fitted ROM",
        "diffusion-layer voltage (V)",
        "current density (A/m^2)",
        &series,
    )
    .map_err(CliError::from)
}

/// Per-curve residual summary: (curve, points, RMS residual A/m^2, largest |residual|).
pub fn per_curve(data: &DataSet, cal: &Calibration) -> Vec<(String, usize, f64, f64)> {
    data.curve_groups()
        .into_iter()
        .map(|(c, idx)| {
            let r: Vec<f64> = idx.iter().map(|&k| cal.result.residuals[k]).collect();
            let rms = (r.iter().map(|x| x * x).sum::<f64>() / r.len() as f64).sqrt();
            let max = r.iter().map(|x| x.abs()).fold(0.0, f64::max);
            (c, r.len(), rms, max)
        })
        .collect()
}

/// `stria fit`.
pub fn run(
    data_path: &Path,
    study_path: &Path,
    fit: &[String],
    out: Option<&Path>,
) -> Result<(), CliError> {
    run_with(data_path, study_path, fit, out, &solve::Settings::default())
}

/// `stria fit` with the sampler's settings and `--allow-weak` chosen.
pub fn run_with(
    data_path: &Path,
    study_path: &Path,
    fit: &[String],
    out: Option<&Path>,
    settings: &solve::Settings,
) -> Result<(), CliError> {
    let data = data::read(data_path)?;
    let (study, _) = Study::load(study_path)?;
    let cal = calibrate_with(&data, &study, fit, settings)?;
    let out: PathBuf = out
        .map(Path::to_path_buf)
        .unwrap_or_else(|| data_path.with_extension("constants.toml"));
    let plot_path = out.with_extension("fit.svg");
    let toml_text = constants_toml(&cal, data_path)?;
    let svg_text = plot(&data, &cal)?;
    write_atomic(&out, toml_text.as_bytes()).map_err(|e| io_error("write", &out, e))?;
    write_atomic(&plot_path, svg_text.as_bytes()).map_err(|e| io_error("write", &plot_path, e))?;

    let r = &cal.result;
    println!(
        "Fitted {} points of {} curve(s) from {}",
        data.points.len(),
        data.curves().len(),
        data_path.display()
    );
    for n in &cal.notes {
        println!("  note: {n}");
    }
    for w in &r.held_at_prior {
        println!(
            "  held at its prior (--allow-weak): {}: the data cannot inform it: {}",
            w.key, w.why
        );
    }
    println!(
        "Constants: start -> posterior mean +- sd [95 % interval] (mode; sd from the data alone)"
    );
    for (j, (k, v, s)) in r.parameters.iter().enumerate() {
        let start = solve::get(&cal.start, k).unwrap_or(f64::NAN);
        let (lo, hi) = r.sampled.interval_95[j];
        println!(
            "  {k:<26} {:>8} -> {} +- {} [{}, {}]  (mode {}; data alone +- {})  {}",
            figures::fmt_num(start),
            figures::fmt_num(*v),
            figures::fmt_num(*s),
            figures::fmt_num(lo),
            figures::fmt_num(hi),
            figures::fmt_num(r.mode[j]),
            figures::fmt_num(r.data_sigma[j]),
            unit_of(k)
        );
        if let Some((_, meaning)) = model::constants::rom_meaning(k) {
            println!("      {meaning}");
        }
    }
    let sm = &r.sampled;
    let tau = sm
        .autocorrelation_steps
        .iter()
        .copied()
        .fold(f64::NAN, f64::max);
    println!(
        "Posterior sampled by the affine-invariant ensemble (Goodman and Weare 2010): {} walkers x \
         {} steps ({} burn-in), acceptance {:.0} %, autocorrelation time {} steps",
        sm.walkers,
        sm.steps,
        sm.burn_in,
        100.0 * sm.acceptance,
        if tau.is_finite() {
            format!("{tau:.0}")
        } else {
            "not estimable (chain too short)".into()
        }
    );
    let after = (sm.steps - sm.burn_in) as f64;
    if !tau.is_finite() || after < 10.0 * tau {
        println!(
            "  warning: the chain is short against its autocorrelation time; raise --steps for \
             steadier intervals"
        );
    }
    for k in &r.at_bound {
        println!(
            "  warning: the mode of {k} lies at an edge of its prior: the data push it out of \
             the prior's range, or the model misses them"
        );
    }
    let p = r.parameters.len();
    for a in 0..p {
        for b in (a + 1)..p {
            if r.correlation[a][b].abs() > 0.95 {
                println!(
                    "  note: {} and {} are strongly correlated ({:.2}): the data fix a \
                     combination of them better than either",
                    r.parameters[a].0, r.parameters[b].0, r.correlation[a][b]
                );
            }
        }
    }
    println!("Residuals (model - data) per curve:");
    for (c, n, rms, max) in per_curve(&data, &cal) {
        println!("  {c:<24} {n:>3} points  RMS {rms:.4} A/m^2  largest {max:.4} A/m^2");
    }
    let mean = data
        .points
        .iter()
        .map(|p| p.current_density_a_m2)
        .sum::<f64>()
        / data.points.len() as f64;
    println!(
        "RMS error {:.4} A/m^2 ({:.2} % of the mean current density)",
        r.rms_a_m2,
        100.0 * r.rms_a_m2 / mean.max(1e-300)
    );
    println!("Wrote {} and {}", out.display(), plot_path.display());
    println!(
        "Use it: in the study's [rom] section, constants_file = \"{}\"",
        out.display()
    );
    Ok(())
}
