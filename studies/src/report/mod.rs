//! `stria report DIR`: SVG figures and one self-contained HTML page for a run directory.
//!
//! Written to `DIR/report/`: `report.html` (every figure inlined, no external file, script or
//! URL, so it opens offline and can be mailed as one file) and each figure as its own SVG.
//! The unpatterned reference is the study's baseline design with open_fraction = 1 at the same
//! operating point, evaluated by the model.

pub mod html;

use std::path::Path;
use std::time::Instant;

use model::{Design, Drive, Evaluation, Options};

use crate::error::{io_error, CliError};
use crate::figures;
use crate::fsio::write_atomic;
use crate::rundir::{self, RunDir};

/// Designs shown in the current-voltage, profile and pattern figures (best in each objective).
pub const BEST_FEW: usize = 3;

/// One figure: file name, caption, SVG text.
#[derive(Debug, Clone)]
pub struct Figure {
    /// File name in the report folder.
    pub file: String,
    /// Caption under the figure.
    pub caption: String,
    /// SVG document.
    pub svg: String,
}

/// A chosen design for the detailed figures.
#[derive(Debug, Clone)]
pub struct Chosen {
    /// Front id.
    pub id: u64,
    /// Why it was chosen.
    pub why: String,
    /// The design.
    pub design: Design,
    /// Its evaluation with profiles.
    pub eval: Evaluation,
    /// The same design unpatterned (open fraction 1) at the same operating point, when the
    /// model could evaluate it.
    pub twin: Option<Evaluation>,
}

/// The whole report before it is written.
#[derive(Debug, Clone)]
pub struct Report {
    /// Figures in page order, grouped by section title.
    pub sections: Vec<(String, String, Vec<Figure>)>,
    /// The HTML page.
    pub html: String,
}

fn profiled(d: &Design, run: &RunDir, what: &str) -> Result<Evaluation, String> {
    let opts = Options {
        profiles: true,
        ..Options::default()
    };
    model::evaluate(d, &run.study.constants, &opts).map_err(|e| format!("{what}: {e}"))
}

fn cell_voltage(d: &Design, e: &Evaluation) -> f64 {
    match d.operation.drive {
        Drive::Voltage {
            cell_pair_voltage_v,
        } => cell_pair_voltage_v,
        Drive::Current { .. } => e.inputs.cell_pair_voltage_V,
    }
}

/// The best design of the front in each objective (natural direction), without repeats.
pub fn best_few(run: &RunDir) -> Vec<(u64, String)> {
    let mut out: Vec<(u64, String)> = Vec::new();
    for o in &run.study.objectives {
        let Some(c) = run.front.col(o.column()) else {
            continue;
        };
        let best = run
            .front
            .rows
            .iter()
            .filter(|r| r.values[c].is_finite())
            .max_by(|a, b| {
                let (x, y) = (a.values[c], b.values[c]);
                if o.maximise() {
                    x.total_cmp(&y)
                } else {
                    y.total_cmp(&x)
                }
                // on ties the lower id wins
                .then(b.id.cmp(&a.id))
            });
        if let Some(r) = best {
            match out.iter_mut().find(|(id, _)| *id == r.id) {
                Some((_, why)) => why.push_str(&format!(", best {}", o.key())),
                None => out.push((r.id, format!("best {}", o.key()))),
            }
        }
        if out.len() == BEST_FEW {
            break;
        }
    }
    out
}

/// The study's plant with every stage unpatterned (open fraction 1), evaluated.
fn unpatterned_plant(run: &RunDir) -> Option<model::plant::PlantEvaluation> {
    let s = &run.study;
    let mut plant = s.plant.plant(
        &rundir::unpatterned(&s.baseline),
        s.concentrate_gap_follows,
        s.concentrate_velocity_follows,
    );
    for stage in &mut plant.stages {
        stage.design.membranes.open_fraction = 1.0;
    }
    model::plant::evaluate_plant(&plant, &s.constants, &Options::default()).ok()
}

fn front_figures(
    run: &RunDir,
    baseline: Option<&model::plant::PlantEvaluation>,
) -> Result<Vec<Figure>, CliError> {
    let objs = &run.study.objectives;
    let mut figs = Vec::new();
    // the unpatterned reference may break a constraint the front respects: say so beside it
    let violated: Vec<&str> = baseline
        .map(|e| {
            run.study
                .constraints
                .iter()
                .filter(|c| c.g(e) > 0.0)
                .map(|c| c.key())
                .collect()
        })
        .unwrap_or_default();
    let baseline_label = if violated.is_empty() {
        "unpatterned reference".to_string()
    } else {
        format!(
            "unpatterned reference (infeasible: {})",
            violated.join(", ")
        )
    };
    let diag = "active_area_fraction";
    for a in 0..objs.len() {
        for b in (a + 1)..objs.len() {
            let (oa, ob) = (objs[a], objs[b]);
            let third = (0..objs.len()).find(|&k| k != a && k != b).map(|k| objs[k]);
            let (ccol, clabel) = match third {
                Some(o) => (
                    o.column().to_string(),
                    format!("{} ({})", o.key(), o.unit()),
                ),
                None => (diag.to_string(), "active-area fraction (-)".to_string()),
            };
            let (Some(ia), Some(ib)) = (run.front.col(oa.column()), run.front.col(ob.column()))
            else {
                return Err(CliError::input(
                    run.dir.join("front.csv"),
                    Some(1),
                    oa.column(),
                    "an objective column of the study is missing",
                    "front.csv written by `stria run` for this study",
                ));
            };
            let ic = run.front.col(&ccol);
            let pts: Vec<(f64, f64, f64)> = run
                .front
                .rows
                .iter()
                .map(|r| {
                    (
                        r.values[ia],
                        r.values[ib],
                        ic.map(|c| r.values[c]).unwrap_or(0.0),
                    )
                })
                .collect();
            let mark = baseline.map(|e| (oa.value(e), ob.value(e), baseline_label.as_str()));
            let svg = figures::scatter_coloured(
                &format!("Front: {} against {}", ob.key(), oa.key()),
                &format!("{} ({}, {})", oa.key(), oa.unit(), oa.direction()),
                &format!("{} ({}, {})", ob.key(), ob.unit(), ob.direction()),
                &clabel,
                &pts,
                mark,
            )?;
            figs.push(Figure {
                file: format!("front_{}_vs_{}.svg", ob.key(), oa.key()),
                caption: format!(
                    "The {} non-dominated designs in {} and {}, coloured by {}; the cross marks \
                     the unpatterned reference: the study's baseline design with an unpatterned \
                     membrane (open fraction 1) at the same operating point.",
                    pts.len(),
                    oa.key(),
                    ob.key(),
                    clabel
                ),
                svg,
            });
        }
    }
    Ok(figs)
}

fn hypervolume_figure(run: &RunDir) -> Result<Option<Figure>, CliError> {
    let pts: Vec<(f64, f64)> = run
        .history
        .iter()
        .map(|h| (h.evaluations, h.hypervolume))
        .filter(|p| p.0.is_finite() && p.1.is_finite())
        .collect();
    if pts.is_empty() {
        return Ok(None);
    }
    let svg = figures::xy_chart(
        "Hypervolume of the front against evaluations",
        "evaluations",
        "hypervolume (minimised objectives, fixed reference point)",
        &[figures::Series {
            name: "hypervolume".into(),
            points: pts,
            mark: figures::Mark::Line,
            colour: 1,
        }],
    )?;
    Ok(Some(Figure {
        file: "hypervolume.svg".into(),
        caption: "Hypervolume after each generation (history.csv): a flat tail means the search \
                  has stopped improving the front."
            .into(),
        svg,
    }))
}

fn design_figures(
    run: &RunDir,
    chosen: &[Chosen],
    base: Option<(&Design, &Evaluation)>,
) -> Result<Vec<Figure>, CliError> {
    let mut figs = Vec::new();
    // current-voltage curves at the channel inlet
    let vmax = chosen
        .iter()
        .map(|c| cell_voltage(&c.design, &c.eval))
        .chain(base.map(|(d, e)| cell_voltage(d, e)))
        .fold(0.0, f64::max)
        * 1.5;
    let volts: Vec<f64> = (1..=48).map(|k| vmax * k as f64 / 48.0).collect();
    let mut iv = Vec::new();
    let mut add_iv = |name: String, d: &Design, colour: usize, mark: figures::Mark| {
        let pts: Vec<(f64, f64)> = model::iv_curve(d, &run.study.constants, &volts)
            .iter()
            .map(|p| (p.voltage_v, p.current_density_a_m2))
            .filter(|p| p.0.is_finite() && p.1.is_finite())
            .collect();
        iv.push(figures::Series {
            name,
            points: pts,
            mark,
            colour,
        });
    };
    if let Some((d, _)) = base {
        add_iv("unpatterned reference".into(), d, 0, figures::Mark::Line);
    }
    for (k, c) in chosen.iter().enumerate() {
        add_iv(
            format!("design {} ({})", c.id, c.why),
            &c.design,
            k + 1,
            figures::Mark::Line,
        );
        add_iv(
            format!("design {} unpatterned", c.id),
            &rundir::unpatterned(&c.design),
            k + 1,
            figures::Mark::Faint,
        );
    }
    figs.push(Figure {
        file: "iv_curves.svg".into(),
        caption: "Cell-pair current density against cell-pair voltage at the channel inlet (feed \
                  concentrations): the chosen designs (solid), each unpatterned at its own \
                  velocity and gap (faint, same colour), and the unpatterned reference (the \
                  study's baseline design, open fraction 1; black)."
            .into(),
        svg: figures::xy_chart(
            "Current-voltage curves",
            "cell-pair voltage (V)",
            "current density (A/m^2)",
            &iv,
        )?,
    });
    // profiles along the channel
    type Pick = fn(&model::Profiles) -> &Vec<f64>;
    let profile_sets: [(&str, &str, &str, Pick); 3] = [
        (
            "profile_concentration.svg",
            "Diluate concentration along the channel",
            "diluate concentration (mol/m^3)",
            |p| &p.diluate_mol_m3,
        ),
        (
            "profile_current.svg",
            "Local current density along the channel",
            "current density (A/m^2)",
            |p| &p.current_density_A_m2,
        ),
        (
            "profile_active_area.svg",
            "Active-area fraction along the channel",
            "active-area fraction (-)",
            |p| &p.active_area_fraction,
        ),
    ];
    for (file, title, ylabel, pick) in profile_sets {
        let mut series = Vec::new();
        let mut add = |name: String, e: &Evaluation, colour: usize, mark: figures::Mark| {
            if let Some(p) = &e.profiles {
                series.push(figures::Series {
                    name,
                    points: p.x_m.iter().copied().zip(pick(p).iter().copied()).collect(),
                    mark,
                    colour,
                });
            }
        };
        if let Some((_, e)) = base {
            add("unpatterned reference".into(), e, 0, figures::Mark::Line);
        }
        for (k, c) in chosen.iter().enumerate() {
            add(
                format!("design {}", c.id),
                &c.eval,
                k + 1,
                figures::Mark::Line,
            );
            if let Some(t) = &c.twin {
                add(
                    format!("design {} unpatterned", c.id),
                    t,
                    k + 1,
                    figures::Mark::Faint,
                );
            }
        }
        figs.push(Figure {
            file: file.into(),
            caption: format!(
                "{title}, from inlet (0) to outlet: the chosen designs (solid), each unpatterned \
                 at its own operating point (faint, same colour), and the unpatterned reference \
                 (the study's baseline design, open fraction 1; black)."
            ),
            svg: figures::xy_chart(title, "distance from the inlet (m)", ylabel, &series)?,
        });
    }
    // each pattern to scale
    for c in chosen {
        let m = &c.design.membranes;
        let delta = c.eval.transfer.boundary_layer_thickness_mean_m;
        let lv = c.eval.performance.vortex_wavelength_m;
        let n = figures::pattern::pitches_for_window(m.pitch_m, delta, lv).min(40);
        let (conducting, _) = figures::pattern::stripes(m.pitch_m, m.open_fraction, n);
        let window = m.pitch_m * n as f64;
        let height = (2.2 * delta)
            .max(lv.unwrap_or(0.0))
            .min(1.1 * c.design.channel.gap_m);
        let title = format!(
            "Design {}: pitch {} um, open fraction {}",
            c.id,
            figures::fmt_num(m.pitch_m * 1e6),
            figures::fmt_num(m.open_fraction)
        );
        figs.push(Figure {
            file: format!("pattern_{}.svg", c.id),
            caption: format!(
                "Design {} drawn to scale: {} pitches of the membrane (conducting stripes blue, \
                 inert grey), the channel-mean diffusion-layer thickness (red) and the natural \
                 vortex wavelength (green rolls, a pair per wavelength{}).",
                c.id,
                n,
                if lv.is_none() {
                    "; none: no electroconvection at this operating point"
                } else {
                    ""
                }
            ),
            svg: figures::pattern(&figures::PatternFigure {
                title: &title,
                window_m: window,
                height_m: height,
                conducting: &conducting,
                delta_m: delta,
                wavelength_m: lv,
                wall_m: Some(c.design.channel.gap_m),
            })?,
        });
    }
    Ok(figs)
}

/// What to say of a run that has not finished (summary.json's `finished` is not true): its
/// front is the one of the last refresh, and a resume brings it up to date.
pub fn unfinished_note(run: &RunDir) -> Option<String> {
    if run.summary.get("finished").and_then(|v| v.as_bool()) == Some(true) {
        return None;
    }
    let at = match (
        run.summary.get("generations").and_then(|v| v.as_u64()),
        run.summary.get("evaluations").and_then(|v| v.as_u64()),
    ) {
        (Some(g), Some(e)) => format!(" (its summary shows generation {g}, {e} evaluations)"),
        _ => String::new(),
    };
    Some(format!(
        "This run has not finished{at}: it was paused, stopped or is still running, and the \
         front shown is the one of its last refresh (a run killed mid-way may have gone further). \
         Run `stria run` again with the same study and --out to resume it; that brings \
         front.csv and this report up to date."
    ))
}

/// Build the report of a run (figures and page) without writing anything.
pub fn build(run: &RunDir) -> Result<Report, CliError> {
    let base_design = rundir::unpatterned(&run.study.baseline);
    let base_eval = profiled(&base_design, run, "unpatterned reference");
    let mut notes = Vec::new();
    if let Err(e) = &base_eval {
        notes.push(format!(
            "The unpatterned reference could not be evaluated ({e}); it is not shown."
        ));
    }
    let base_eval = base_eval.ok();
    if let Some(n) = unfinished_note(run) {
        notes.push(n);
    }
    let mut chosen = Vec::new();
    for (id, why) in best_few(run) {
        let row = run.front.row(id).expect("best_few picks rows of the front");
        let x = rundir::x_of(run, row)?;
        let design = run.study.design_at(&x);
        match profiled(&design, run, &format!("design {id}")) {
            Ok(eval) => {
                let twin = profiled(&rundir::unpatterned(&design), run, "twin").ok();
                chosen.push(Chosen {
                    id,
                    why,
                    design,
                    eval,
                    twin,
                })
            }
            Err(e) => notes.push(format!("Design {id} could not be re-evaluated ({e}); it is left out of the detailed figures.")),
        }
    }
    let mut sections = Vec::new();
    if run.front.rows.is_empty() {
        notes.push("The front is empty: no feasible design yet.".into());
    } else {
        sections.push((
            "The front".to_string(),
            "Each pair of objectives; colour shows the third objective (or the active-area fraction when there are two).".to_string(),
            front_figures(
                run,
                base_eval.as_ref().and(unpatterned_plant(run)).as_ref(),
            )?,
        ));
    }
    if let Some(f) = hypervolume_figure(run)? {
        sections.push(("Progress".into(), String::new(), vec![f]));
    }
    if !chosen.is_empty() {
        let list = chosen
            .iter()
            .map(|c| format!("design {} ({})", c.id, c.why))
            .collect::<Vec<_>>()
            .join("; ");
        sections.push((
            "Chosen designs against the unpatterned reference".into(),
            format!("The best design in each objective: {list}. Black: the unpatterned reference."),
            design_figures(run, &chosen, base_eval.as_ref().map(|e| (&base_design, e)))?,
        ));
    }
    let html = html::page(run, &sections, &chosen, base_eval.as_ref(), &notes);
    Ok(Report { sections, html })
}

/// `stria report DIR`.
pub fn run(dir: &Path) -> Result<(), CliError> {
    let t0 = Instant::now();
    let run = rundir::read(dir)?;
    let report = build(&run)?;
    let out = dir.join("report");
    std::fs::create_dir_all(&out).map_err(|e| io_error("create", &out, e))?;
    let mut n = 0;
    for (_, _, figs) in &report.sections {
        for f in figs {
            let p = out.join(&f.file);
            write_atomic(&p, f.svg.as_bytes()).map_err(|e| io_error("write", &p, e))?;
            n += 1;
        }
    }
    let page = out.join("report.html");
    write_atomic(&page, report.html.as_bytes()).map_err(|e| io_error("write", &page, e))?;
    println!(
        "Wrote {} ({} figures inlined, also as SVG files in {}) in {:.2} s",
        page.display(),
        n,
        out.display(),
        t0.elapsed().as_secs_f64()
    );
    println!("Open it in any browser; it needs no network. Next: `stria handoff {} --pick ID` for the designs to simulate.", dir.display());
    if let Some(n) = unfinished_note(&run) {
        eprintln!("note: {n}");
    }
    Ok(())
}
