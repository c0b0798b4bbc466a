//! The plant sections end to end: `[stack]`, `[stages.N]`, `[concentrate_loop]` and
//! `[water.analysis]` through `stria check`, `stria eval --json` and `stria run`, and their bad
//! input (exit 2, file, line and field named).

use std::path::{Path, PathBuf};
use std::process::{Command, Output, Stdio};

fn stria(args: &[&str]) -> Output {
    Command::new(env!("CARGO_BIN_EXE_stria"))
        .args(args)
        .stdin(Stdio::null())
        .output()
        .expect("stria runs")
}

fn demo(name: &str) -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("demo")
        .join(name)
}

fn stderr(o: &Output) -> String {
    String::from_utf8_lossy(&o.stderr).into_owned()
}

fn json(o: &Output) -> serde_json::Value {
    assert_eq!(o.status.code(), Some(0), "{}", stderr(o));
    serde_json::from_slice(&o.stdout).unwrap()
}

/// The plant demo with text replacements (each must match), written into `dir`.
fn plant_with(dir: &Path, edits: &[(&str, &str)]) -> PathBuf {
    let mut text = std::fs::read_to_string(demo("plant.toml")).unwrap();
    for (from, to) in edits {
        assert!(text.contains(from), "the demo has no `{from}`");
        text = text.replacen(from, to, 1);
    }
    let path = dir.join("p.toml");
    std::fs::write(&path, text).unwrap();
    path
}

fn line_of(path: &Path, needle: &str) -> usize {
    let text = std::fs::read_to_string(path).unwrap();
    text.lines().position(|l| l.contains(needle)).unwrap() + 1
}

/// Exit 2 and one message naming the file, the line, the field and what is allowed.
fn assert_bad(o: &Output, line: usize, field: &str, also: &str) {
    let err = stderr(o);
    assert_eq!(o.status.code(), Some(2), "exit code; stderr:\n{err}");
    assert!(!err.contains("panicked"), "{err}");
    assert!(
        err.contains(&format!("p.toml:{line}:")),
        "no line {line} in:\n{err}"
    );
    assert!(err.contains(field), "no field `{field}` in:\n{err}");
    assert!(err.contains(also), "no `{also}` in:\n{err}");
    assert!(err.contains("allowed"), "no allowed values in:\n{err}");
}

#[test]
fn plant_demo_checks_clean_and_its_resolved_study_reloads() {
    let o = stria(&["check", demo("plant.toml").to_str().unwrap()]);
    let err = stderr(&o);
    assert_eq!(o.status.code(), Some(0), "{err}");
    assert!(!err.lines().any(|l| l.starts_with("warning:")), "{err}");
    let dir = tempfile::tempdir().unwrap();
    let resolved = dir.path().join("resolved.toml");
    std::fs::write(&resolved, &o.stdout).unwrap();
    let again = stria(&["check", resolved.to_str().unwrap()]);
    assert_eq!(again.status.code(), Some(0), "{}", stderr(&again));
    let first = |o: &Output| {
        String::from_utf8_lossy(&o.stdout)
            .lines()
            .next()
            .unwrap()
            .to_string()
    };
    assert_eq!(first(&o), first(&again), "fingerprint changes on reload");
    // Both stages and the loop survive the reload.
    let a = json(&stria(&[
        "eval",
        demo("plant.toml").to_str().unwrap(),
        "--json",
    ]));
    let b = json(&stria(&["eval", resolved.to_str().unwrap(), "--json"]));
    assert_eq!(a["plant"], b["plant"]);
}

#[test]
fn eval_json_adds_stack_plant_and_scaling() {
    let v = json(&stria(&[
        "eval",
        demo("plant.toml").to_str().unwrap(),
        "--json",
    ]));
    for f in [
        "cell_pairs",
        "stack_voltage_V",
        "stack_current_A",
        "electrode_voltage_V",
        "shunt_current_fraction",
        "stacks_in_parallel",
        "power_kW",
    ] {
        assert!(v["stack"][f].is_number(), "stack.{f}");
    }
    for f in [
        "water_recovery",
        "product_concentration_mol_m3",
        "product_flow_m3_day",
        "specific_energy_kWh_m3",
        "levelised_cost_per_m3",
    ] {
        assert!(v["plant"][f].is_number(), "plant.{f}");
    }
    for f in [
        "feed_calcite_si",
        "feed_gypsum_si",
        "concentrate_calcite_si",
        "concentrate_gypsum_si",
    ] {
        assert!(v["scaling"][f].is_number(), "scaling.{f}");
    }
    let stages = v["plant"]["stages"].as_array().unwrap();
    assert_eq!(stages.len(), 2);
    // The diluate of stage 1 feeds stage 2; stage 1 is the cell pair of the existing fields.
    assert_eq!(
        stages[1]["inlet_concentration_mol_m3"],
        stages[0]["outlet_concentration_mol_m3"]
    );
    assert_eq!(
        stages[0]["outlet_concentration_mol_m3"],
        v["performance"]["outlet_concentration_mol_m3"]
    );
    assert_eq!(v["plant"]["water_recovery"], 0.85);
    assert_eq!(v["stack"]["cell_pairs"], 200);
    // 2.4 g/L feed, Well 3's analysis: the feed SIs of the PHREEQC example water.
    assert!((v["scaling"]["feed_calcite_si"].as_f64().unwrap() - 0.245).abs() < 0.02);
    assert!((v["scaling"]["feed_gypsum_si"].as_f64().unwrap() + 1.087).abs() < 0.02);
}

#[test]
fn a_study_without_plant_sections_is_one_cell_pair_exactly() {
    let v = json(&stria(&[
        "eval",
        demo("quick.toml").to_str().unwrap(),
        "--json",
    ]));
    assert!(v["scaling"].is_null());
    assert_eq!(v["plant"]["stages"].as_array().unwrap().len(), 1);
    assert_eq!(
        v["plant"]["specific_energy_kWh_m3"],
        v["performance"]["specific_energy_kWh_m3"]
    );
    assert_eq!(
        v["plant"]["levelised_cost_per_m3"],
        v["economics"]["levelised_cost_per_m3"]
    );
    assert_eq!(
        v["plant"]["water_recovery"],
        v["performance"]["water_recovery"]
    );
    assert_eq!(
        v["stack"]["stack_voltage_V"],
        v["inputs"]["cell_pair_voltage_V"]
    );
    assert_eq!(
        v["stack"]["stack_current_A"],
        v["performance"]["cell_current_A"]
    );
    assert_eq!(v["stack"]["shunt_current_fraction"], 0.0);
}

#[test]
fn plant_demo_runs() {
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("run");
    let o = stria(&[
        "run",
        demo("plant.toml").to_str().unwrap(),
        "--out",
        out.to_str().unwrap(),
        "--max-evals",
        "80",
    ]);
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    let front = std::fs::read_to_string(out.join("front.csv")).unwrap();
    let header = front.lines().next().unwrap();
    assert!(header.contains("plant_levelised_cost_per_m3"), "{header}");
    assert!(header.contains("plant_specific_energy_kWh_m3"), "{header}");
}

#[test]
fn bad_plant_input_is_refused_at_its_line() {
    let dir = tempfile::tempdir().unwrap();
    // A stage number that skips one.
    let p = plant_with(dir.path(), &[("[stages.2]", "[stages.3]")]);
    assert_bad(
        &stria(&["check", p.to_str().unwrap()]),
        line_of(&p, "[stages.3]"),
        "stages.3",
        "[stages.2] is not",
    );
    // Stage 1 is the study's own design.
    let p = plant_with(dir.path(), &[("[stages.2]", "[stages.1]")]);
    assert_bad(
        &stria(&["check", p.to_str().unwrap()]),
        line_of(&p, "[stages.1]"),
        "stages.1",
        "not a stage number",
    );
    // An unknown key in a stage, with a suggestion.
    let p = plant_with(dir.path(), &[("pitch_um = 200.0", "pitch_mu = 200.0")]);
    assert_bad(
        &stria(&["check", p.to_str().unwrap()]),
        line_of(&p, "pitch_mu"),
        "stages.2.pitch_mu",
        "pitch_um",
    );
    // Recovery out of range.
    let p = plant_with(
        dir.path(),
        &[("water_recovery = 0.85", "water_recovery = 1.2")],
    );
    assert_bad(
        &stria(&["check", p.to_str().unwrap()]),
        line_of(&p, "water_recovery ="),
        "concentrate_loop.water_recovery",
        "out of range",
    );
    // Once-through has no recovery setting.
    let p = plant_with(
        dir.path(),
        &[("mode = \"feed_and_bleed\"", "mode = \"once_through\"")],
    );
    assert_bad(
        &stria(&["check", p.to_str().unwrap()]),
        line_of(&p, "water_recovery ="),
        "concentrate_loop.water_recovery",
        "once-through",
    );
    // pH outside the screen's range.
    let p = plant_with(dir.path(), &[("pH = 7.6", "pH = 12.5")]);
    assert_bad(
        &stria(&["check", p.to_str().unwrap()]),
        line_of(&p, "pH = 12.5"),
        "water.analysis.pH",
        "out of range",
    );
    // A saturation-index limit without an analysis.
    let text = std::fs::read_to_string(demo("plant.toml")).unwrap();
    let start = text.find("[water.analysis]").unwrap();
    let end = text.find("[stack]").unwrap();
    let p = dir.path().join("p.toml");
    std::fs::write(&p, format!("{}{}", &text[..start], &text[end..])).unwrap();
    assert_bad(
        &stria(&["check", p.to_str().unwrap()]),
        line_of(&p, "max_concentrate_gypsum_si"),
        "constraints.max_concentrate_gypsum_si",
        "water analysis",
    );
}

#[test]
fn stages_with_very_different_layers_find_different_best_pitches() {
    // Stage 1: a 0.3 mm gap at 8 cm/s over 0.3 m (a thin diffusion layer); stage 2: a 1.5 mm
    // gap at 1 cm/s over 1 m (a layer several times thicker). The vortices scale with the
    // layer, so a search of both stages' pitches for the lowest product concentration should
    // put stage 2's best pitch well above stage 1's.
    let dir = tempfile::tempdir().unwrap();
    let mut s = std::fs::read_to_string(demo("plant.toml")).unwrap();
    let stages = s.find("[stages.2]").unwrap();
    let looped = s.find("[concentrate_loop]").unwrap();
    s.replace_range(
        stages..looped,
        "[stages.2]\ngap_mm = 1.5\nvelocity_cm_s = 1.0\nlength_m = 1.0\ncell_pair_voltage_V = 2.0\n\n",
    );
    let vars = s.find("[variables.pitch]").unwrap();
    s.truncate(vars);
    s.push_str(
        "[variables.pitch]\nlower_um = 20.0\nupper_um = 3000.0\n\n\
         [variables.stage2.pitch]\nlower_um = 20.0\nupper_um = 3000.0\n\n\
         [objectives]\nlist = [\"product_concentration\"]\n\n\
         [optimizer]\nalgorithm = \"screening\"\nsampler = \"sobol\"\nseed = 3\n\
         population = 64\nmax_evaluations = 256\n",
    );
    for (from, to) in [
        ("gap_mm = 0.5 ", "gap_mm = 0.3 "),
        ("velocity_cm_s = 4.0 ", "velocity_cm_s = 8.0 "),
        ("length_m = 0.45 ", "length_m = 0.3 "),
    ] {
        assert!(s.contains(from), "{from}");
        s = s.replacen(from, to, 1);
    }
    let study = dir.path().join("graded.toml");
    std::fs::write(&study, s).unwrap();
    let out = dir.path().join("run");
    let o = stria(&[
        "run",
        study.to_str().unwrap(),
        "--out",
        out.to_str().unwrap(),
    ]);
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    let front = std::fs::read_to_string(out.join("front.csv")).unwrap();
    let mut lines = front.lines();
    let header: Vec<&str> = lines.next().unwrap().split(',').collect();
    let best: Vec<f64> = lines
        .next()
        .unwrap()
        .split(',')
        .map(|x| x.parse().unwrap_or(f64::NAN))
        .collect();
    let col = |name: &str| best[header.iter().position(|h| *h == name).unwrap()];
    let (p1, p2) = (col("pitch_m"), col("stage2_pitch_m"));
    assert!(p2 > 2.0 * p1, "stage 1 best pitch {p1} m, stage 2 {p2} m");
}

#[test]
fn stage_and_recovery_variables_are_checked() {
    let dir = tempfile::tempdir().unwrap();
    // A variable of a stage the study does not have.
    let p = plant_with(
        dir.path(),
        &[("[variables.pitch]", "[variables.stage3.pitch]")],
    );
    assert_bad(
        &stria(&["check", p.to_str().unwrap()]),
        line_of(&p, "[variables.stage3.pitch]"),
        "variables.stage3.pitch",
        "stage 3 is not in the study",
    );
    // The recovery is a variable only with a feed-and-bleed loop.
    let p = plant_with(
        dir.path(),
        &[
            ("mode = \"feed_and_bleed\"", "mode = \"once_through\""),
            ("water_recovery = 0.85", ""),
        ],
    );
    assert_bad(
        &stria(&["check", p.to_str().unwrap()]),
        line_of(&p, "lower = 0.6"),
        "variables.water_recovery",
        "feed-and-bleed",
    );
    // The demo's stage variable and recovery variable: CSV columns of their own.
    let p = demo("plant.toml");
    let out = dir.path().join("run");
    let o = stria(&[
        "run",
        p.to_str().unwrap(),
        "--out",
        out.to_str().unwrap(),
        "--max-evals",
        "80",
    ]);
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    let header = std::fs::read_to_string(out.join("evaluations.csv")).unwrap();
    let header = header.lines().next().unwrap();
    assert!(
        header.contains("stage2_pitch_m") && header.contains("water_recovery"),
        "{header}"
    );
}
