//! `stria check`: validate a study, print it resolved, and the model's warnings at the bounds.

use std::path::Path;

use std::time::Instant;

use model::Options;
use optimizer::Run;

use crate::error::CliError;
use crate::run::problem::{run_config, StudyProblem};
use crate::study::Study;

/// The model's validity warnings (and failures) at the baseline and at each variable's lower
/// and upper bound (the other variables at their baseline), one line each, deduplicated.
pub fn bound_warnings(study: &Study) -> Vec<String> {
    let base = study.baseline_x();
    let mut points: Vec<(String, Vec<f64>)> = vec![("baseline design".to_string(), base.clone())];
    for (i, v) in study.variables.iter().enumerate() {
        for (label, value) in [("lower", v.lower), ("upper", v.upper)] {
            let mut x = base.clone();
            x[i] = value;
            let (suffix, to_si) = v.kind.bound_unit();
            let unit = suffix.trim_start_matches('_').replace("_s", "/s");
            points.push((
                format!(
                    "{} {label} bound ({} {})",
                    v.section().trim_start_matches("variables."),
                    crate::eval::sig(value / to_si, 4),
                    if unit.is_empty() { "-" } else { &unit }
                ),
                x,
            ));
        }
    }
    let mut out: Vec<String> = Vec::new();
    let mut seen: Vec<String> = Vec::new();
    for (label, x) in points {
        // Every stage's validity warnings (a study without plant sections has one stage).
        match study.evaluate_plant_at(&x, &Options::default()) {
            Ok(p) => {
                let staged = p.stage_evaluations.iter().enumerate().flat_map(|(i, e)| {
                    e.warnings.iter().cloned().map(move |mut w| {
                        if i > 0 {
                            w.message = format!("stage {}: {}", i + 1, w.message);
                        }
                        w
                    })
                });
                for w in staged {
                    let key = format!("{label}|{}|{}", w.quantity, w.message);
                    if !seen.contains(&key) {
                        seen.push(key);
                        out.push(format!(
                            "at {label}: {} = {} (bound {}): {}",
                            w.quantity,
                            crate::eval::sig(w.value, 4),
                            crate::eval::sig(w.bound, 4),
                            w.message
                        ));
                    }
                }
            }
            Err(e) => out.push(format!(
                "at {label}: the model cannot evaluate this design: {e}"
            )),
        }
    }
    out
}

fn duration(s: f64) -> String {
    if s < 120.0 {
        format!("{s:.0} s")
    } else if s < 7200.0 {
        format!("{:.0} min", s / 60.0)
    } else {
        format!("{:.1} h", s / 3600.0)
    }
}

/// Run `stria check STUDY`: the resolved study on stdout, warnings and the verdict on stderr.
pub fn run(path: &Path) -> Result<(), CliError> {
    let (study, warnings) = Study::load(path)?;
    if !study.variables.is_empty() && !study.objectives.is_empty() {
        // The optimiser's own checks (e.g. the size limit of a Sobol design), before any run.
        let problem = StudyProblem { study: &study };
        Run::new(run_config(&study), &problem).map_err(|e| {
            CliError::input(
                path,
                None,
                "optimizer",
                format!("the optimiser cannot run these settings: {e}"),
                "see docs/study-reference.md, section [optimizer]",
            )
        })?;
    }
    print!("{}", study.to_resolved_toml());
    for w in &warnings {
        eprintln!("{w}");
    }
    let started = Instant::now();
    let model_warnings = bound_warnings(&study);
    let per_eval = started.elapsed().as_secs_f64() / (1 + 2 * study.variables.len()) as f64;
    for w in &model_warnings {
        eprintln!("model warning: {w}");
    }
    eprintln!(
        "{}: valid study \"{}\": {} variable(s), {} objective(s), {} constraint(s); {} input warning(s), {} model warning(s)",
        path.display(),
        study.name,
        study.variables.len(),
        study.objectives.len(),
        study.constraints.len(),
        warnings.len(),
        model_warnings.len()
    );
    if !study.variables.is_empty() {
        eprintln!(
            "one evaluation took about {:.2} ms here: {} evaluations are about {} of model time on one thread (shared among the threads of `stria run`, plus file writes each generation)",
            per_eval * 1e3,
            study.optimizer.max_evaluations,
            duration(per_eval * study.optimizer.max_evaluations as f64)
        );
    }
    Ok(())
}
