//! `stria sensitivity STUDY.toml [--samples N] [--seed S] [--design-variables] [--out DIR]`:
//! Sobol first-order and total indices (`optimizer::sensitivity`: Saltelli et al. 2010 and
//! Jansen 1999, bootstrap intervals) of every objective and every constrained quantity of the
//! study's baseline design with respect to the uncertain ROM constants (their priors,
//! [`super::priors`]) and, with `--design-variables`, the study's design variables (uniform
//! over their bounds).
//!
//! Writes `sensitivity.csv` (columns output, parameter, first_order, first_order_ci, total,
//! total_ci; the intervals are 95 % half-widths) and `sensitivity.svg` into the output
//! directory, atomically, and prints the table.
//!
//! A base row whose `d + 2` evaluations do not all succeed is left out of the estimate (the
//! estimators need every one of them); how many were left out is printed and a run that
//! loses more than a tenth of its rows is refused as unreliable.

use std::fmt::Write as _;
use std::path::{Path, PathBuf};

use optimizer::sensitivity::{
    saltelli_points, sobol_indices, BaseSampler, Bootstrap, SobolIndices,
};
use plotters::prelude::*;
use rand::SeedableRng;
use rand_chacha::ChaCha8Rng;
use rayon::prelude::*;

use crate::error::CliError;
use crate::eval::sig;
use crate::study::Study;

/// Largest number of base samples (Sobol points: 2^16 at most, and the cost is n (d + 2)).
pub const MAX_SAMPLES: usize = 16_384;

/// What `stria sensitivity` was asked.
#[derive(Debug, Clone)]
pub struct SensitivityOptions {
    /// The study file.
    pub study: PathBuf,
    /// Base samples n (evaluations: n (d + 2)).
    pub samples: usize,
    /// Seed (default: the study's optimizer seed).
    pub seed: Option<u64>,
    /// Also vary the study's design variables over their bounds.
    pub design_variables: bool,
    /// Output directory (default `runs/<study file stem>-sensitivity`).
    pub out: Option<PathBuf>,
}

/// One row of `sensitivity.csv`.
#[derive(Debug, Clone, PartialEq)]
pub struct Row {
    /// Output (objective key or constrained quantity).
    pub output: String,
    /// Parameter (ROM constant key or design-variable name).
    pub parameter: String,
    /// First-order index.
    pub first_order: f64,
    /// Its 95 % half-width.
    pub first_order_ci: f64,
    /// Total-effect index.
    pub total: f64,
    /// Its 95 % half-width.
    pub total_ci: f64,
}

/// The indices, and how many base rows were left out.
#[derive(Debug, Clone, PartialEq)]
pub struct Analysis {
    /// Output names, in order.
    pub outputs: Vec<String>,
    /// Parameter names, in order.
    pub parameters: Vec<String>,
    /// Indices of each output.
    pub indices: Vec<SobolIndices>,
    /// Base rows used.
    pub rows_used: usize,
    /// Base rows left out (an evaluation failed).
    pub rows_dropped: usize,
}

/// The output names of a study: its objectives, then its constrained quantities.
fn output_names(study: &Study) -> Vec<String> {
    let mut names: Vec<String> = study
        .objectives
        .iter()
        .map(|o| o.column().to_string())
        .collect();
    // A constraint's quantity is named by its g column without the "g_".
    names.extend(
        study
            .constraints
            .iter()
            .map(|c| c.column().trim_start_matches("g_").to_string()),
    );
    names
}

/// Compute the indices (no I/O).
pub fn analyse(
    study: &Study,
    samples: usize,
    seed: u64,
    design_variables: bool,
) -> Result<Analysis, String> {
    let (priors, _) = super::priors::priors_for(&study.constants);
    let keys: Vec<&str> = priors.iter().map(|p| p.key).collect();
    let mut parameters: Vec<String> = keys.iter().map(|k| k.to_string()).collect();
    let n_const = parameters.len();
    if design_variables {
        parameters.extend(study.variables.iter().map(|v| v.kind.name().to_string()));
    }
    let d = parameters.len();
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    let points = saltelli_points(samples, d, BaseSampler::Sobol, &mut rng)?;
    let outputs = output_names(study);
    let n_out = outputs.len();
    // One row of outputs per point, or None when the model fails on it.
    let values: Vec<Option<Vec<f64>>> = points
        .par_iter()
        .map(|u| {
            let cv: Vec<f64> = priors
                .iter()
                .zip(u)
                .map(|(p, t)| p.distribution.quantile(*t))
                .collect();
            let k = super::priors::with_values(&study.constants, &keys, &cv).ok()?;
            let plant = if design_variables {
                let x: Vec<f64> = study
                    .variables
                    .iter()
                    .zip(&u[n_const..])
                    .map(|(v, t)| v.lower + t * (v.upper - v.lower))
                    .collect();
                study.plant_at(&x)
            } else {
                study.baseline_plant()
            };
            let e = model::plant::evaluate_plant(&plant, &k, &model::Options::default()).ok()?;
            let mut row: Vec<f64> = study.objectives.iter().map(|o| o.value(&e)).collect();
            row.extend(study.constraints.iter().map(|c| c.quantity(&e)));
            row.iter().all(|v| v.is_finite()).then_some(row)
        })
        .collect();
    // Keep the base rows whose d + 2 evaluations all succeeded.
    let step = d + 2;
    let kept: Vec<usize> = (0..samples)
        .filter(|j| values[j * step..(j + 1) * step].iter().all(Option::is_some))
        .collect();
    let dropped = samples - kept.len();
    if kept.len() < 2 || dropped * 10 > samples {
        return Err(format!(
            "the model failed on {dropped} of {samples} base rows; the indices would not be reliable"
        ));
    }
    let mut indices = Vec::with_capacity(n_out);
    for o in 0..n_out {
        let y: Vec<f64> = kept
            .iter()
            .flat_map(|j| values[j * step..(j + 1) * step].iter())
            .map(|r| r.as_ref().map_or(f64::NAN, |r| r[o]))
            .collect();
        indices.push(sobol_indices(&y, d, Bootstrap::default(), &mut rng)?);
    }
    Ok(Analysis {
        outputs,
        parameters,
        indices,
        rows_used: kept.len(),
        rows_dropped: dropped,
    })
}

impl Analysis {
    /// The rows of `sensitivity.csv`, output by output in study order, parameters in order.
    pub fn rows(&self) -> Vec<Row> {
        let mut rows = Vec::new();
        for (o, idx) in self.outputs.iter().zip(&self.indices) {
            for (i, p) in self.parameters.iter().enumerate() {
                rows.push(Row {
                    output: o.clone(),
                    parameter: p.clone(),
                    first_order: idx.first_order[i],
                    first_order_ci: idx.first_order_ci[i],
                    total: idx.total[i],
                    total_ci: idx.total_ci[i],
                });
            }
        }
        rows
    }

    /// `sensitivity.csv`.
    pub fn csv(&self) -> String {
        let mut s = String::from("output,parameter,first_order,first_order_ci,total,total_ci\n");
        for r in self.rows() {
            let _ = writeln!(
                s,
                "{},{},{:.4},{:.4},{:.4},{:.4}",
                r.output, r.parameter, r.first_order, r.first_order_ci, r.total, r.total_ci
            );
        }
        s
    }

    /// The table printed on stdout.
    pub fn table(&self) -> String {
        let mut s = String::new();
        for (o, idx) in self.outputs.iter().zip(&self.indices) {
            let _ = writeln!(s, "{o}");
            if idx.variance == 0.0 {
                let _ = writeln!(s, "  does not vary with these parameters (all indices 0)");
                continue;
            }
            let _ = writeln!(
                s,
                "  {:<28} {:>16} {:>16}",
                "parameter", "first order", "total"
            );
            let mut order: Vec<usize> = (0..self.parameters.len()).collect();
            order.sort_by(|&a, &b| idx.total[b].total_cmp(&idx.total[a]).then(a.cmp(&b)));
            for i in order {
                let _ = writeln!(
                    s,
                    "  {:<28} {:>16} {:>16}",
                    self.parameters[i],
                    format!(
                        "{} +- {}",
                        sig(idx.first_order[i], 2),
                        sig(idx.first_order_ci[i], 1)
                    ),
                    format!("{} +- {}", sig(idx.total[i], 2), sig(idx.total_ci[i], 1)),
                );
            }
        }
        s
    }

    /// `sensitivity.svg`: one panel per output, a pair of bars per parameter (total effect
    /// light, first order dark) with their 95 % intervals.
    pub fn svg(&self) -> Result<String, crate::figures::FigureError> {
        use crate::figures::{err, palette};
        let d = self.parameters.len();
        let panel_h = 70 + 26 * d as u32;
        let height = panel_h * self.outputs.len().max(1) as u32;
        let mut buf = String::new();
        {
            let root = SVGBackend::with_string(&mut buf, (760, height)).into_drawing_area();
            root.fill(&WHITE).map_err(err)?;
            let panels = root.split_evenly((self.outputs.len().max(1), 1));
            for ((panel, name), idx) in panels.iter().zip(&self.outputs).zip(&self.indices) {
                let names = self.parameters.clone();
                let top = idx
                    .total
                    .iter()
                    .zip(&idx.total_ci)
                    .chain(idx.first_order.iter().zip(&idx.first_order_ci))
                    .map(|(v, c)| v + c)
                    .fold(0.1f64, f64::max)
                    .min(1.2);
                let mut chart = ChartBuilder::on(panel)
                    .caption(format!("Sobol indices of {name}"), ("sans-serif", 16))
                    .margin(10)
                    .x_label_area_size(36)
                    .y_label_area_size(190)
                    .build_cartesian_2d(0.0..top, -0.5..(d as f64 - 0.5))
                    .map_err(err)?;
                chart
                    .configure_mesh()
                    .x_desc("index (share of the output variance)")
                    .y_labels(d)
                    .y_label_formatter(&|v| {
                        let i = v.round();
                        if (v - i).abs() < 1e-6 && i >= 0.0 && (i as usize) < names.len() {
                            names[i as usize].clone()
                        } else {
                            String::new()
                        }
                    })
                    .light_line_style(WHITE)
                    .draw()
                    .map_err(err)?;
                let (light, dark) = (palette(1).mix(0.35), palette(1));
                let bars = |vals: &[f64], cis: &[f64], off: f64| {
                    let mut v = Vec::new();
                    for i in 0..d {
                        let y = i as f64 + off;
                        v.push((vals[i].max(0.0), cis[i], y));
                    }
                    v
                };
                for (series, style, label) in [
                    (
                        bars(&idx.total, &idx.total_ci, 0.18),
                        light.filled(),
                        "total effect",
                    ),
                    (
                        bars(&idx.first_order, &idx.first_order_ci, -0.18),
                        dark.filled(),
                        "first order",
                    ),
                ] {
                    chart
                        .draw_series(series.iter().map(|&(x, _, y)| {
                            Rectangle::new([(0.0, y - 0.15), (x.min(top), y + 0.15)], style)
                        }))
                        .map_err(err)?
                        .label(label)
                        .legend(move |(x, y)| Rectangle::new([(x, y - 5), (x + 14, y + 5)], style));
                    chart
                        .draw_series(series.iter().map(|&(x, c, y)| {
                            PathElement::new(
                                vec![((x - c).max(0.0), y), ((x + c).min(top), y)],
                                BLACK.stroke_width(1),
                            )
                        }))
                        .map_err(err)?;
                }
                chart
                    .configure_series_labels()
                    .position(SeriesLabelPosition::LowerRight)
                    .background_style(WHITE.mix(0.85))
                    .border_style(BLACK)
                    .draw()
                    .map_err(err)?;
            }
            root.present().map_err(err)?;
        }
        Ok(buf)
    }
}

/// The output directory used when `--out` is not given.
pub fn default_dir(study: &Path) -> PathBuf {
    let stem = study
        .file_stem()
        .map(|s| s.to_string_lossy().to_string())
        .unwrap_or_else(|| "study".into());
    PathBuf::from("runs").join(format!("{stem}-sensitivity"))
}

/// Run `stria sensitivity`.
pub fn run(o: &SensitivityOptions) -> Result<(), CliError> {
    if !(2..=MAX_SAMPLES).contains(&o.samples) {
        return Err(CliError::input(
            "command line",
            None,
            "--samples",
            format!("{} base samples", o.samples),
            format!("2 to {MAX_SAMPLES} base samples (powers of two suit the Sobol points best)"),
        ));
    }
    let (study, warnings) = Study::load(&o.study)?;
    for w in &warnings {
        eprintln!("{w}");
    }
    if o.design_variables && study.variables.is_empty() {
        return Err(CliError::input(
            &o.study,
            None,
            "variables",
            "--design-variables asks for the design variables, and the study has none",
            "a study with at least one [variables.*] section",
        ));
    }
    let seed = o.seed.unwrap_or(study.optimizer.seed);
    let a = analyse(&study, o.samples, seed, o.design_variables).map_err(CliError::runtime)?;
    let svg = a.svg()?;
    let dir = o.out.clone().unwrap_or_else(|| default_dir(&o.study));
    let io = |action: &str, path: &Path, e: std::io::Error| CliError::Io {
        action: action.into(),
        path: path.to_path_buf(),
        source: e,
    };
    crate::fsio::create_dir_synced(&dir).map_err(|e| io("create", &dir, e))?;
    let csv_path = dir.join("sensitivity.csv");
    let svg_path = dir.join("sensitivity.svg");
    crate::fsio::write_atomic(&csv_path, a.csv().as_bytes())
        .map_err(|e| io("write", &csv_path, e))?;
    crate::fsio::write_atomic(&svg_path, svg.as_bytes()).map_err(|e| io("write", &svg_path, e))?;
    print!("{}", a.table());
    println!(
        "{} base samples ({} evaluations), seed {seed}; 95 % intervals from 200 bootstrap resamples",
        a.rows_used,
        o.samples * (a.parameters.len() + 2)
    );
    if a.rows_dropped > 0 {
        println!(
            "{} base rows left out: the model failed on one of their points",
            a.rows_dropped
        );
    }
    println!("wrote {} and {}", csv_path.display(), svg_path.display());
    Ok(())
}
