//! The `stria` binary end to end: bad input (exit 2, file/line/field named, no panic), the
//! demos, the JSON schema of `eval`, and runs that are killed and resumed.

use std::path::{Path, PathBuf};
use std::process::{Command, Output, Stdio};
use std::time::Duration;

use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;

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

/// The quick demo with text replacements (each must match), written into `dir`.
fn study_with(dir: &Path, name: &str, edits: &[(&str, &str)]) -> PathBuf {
    let mut text = std::fs::read_to_string(demo("quick.toml")).unwrap();
    for (from, to) in edits {
        assert!(text.contains(from), "the demo has no `{from}`");
        text = text.replacen(from, to, 1);
    }
    let path = dir.join(name);
    std::fs::write(&path, text).unwrap();
    path
}

fn line_of(path: &Path, needle: &str) -> usize {
    let text = std::fs::read_to_string(path).unwrap();
    text.lines().position(|l| l.contains(needle)).unwrap() + 1
}

fn stderr(o: &Output) -> String {
    String::from_utf8_lossy(&o.stderr).into_owned()
}

/// A bad-input run: exit 2, one message naming the file, the line and the field, no panic.
fn assert_bad(o: &Output, file: &str, line: Option<usize>, field: &str, also: &str) {
    let err = stderr(o);
    assert_eq!(o.status.code(), Some(2), "exit code; stderr:\n{err}");
    assert!(
        !err.contains("panicked") && !err.contains("backtrace"),
        "{err}"
    );
    assert!(err.contains(file), "no file `{file}` in:\n{err}");
    if let Some(l) = line {
        assert!(err.contains(&format!(":{l}:")), "no line {l} in:\n{err}");
    }
    assert!(err.contains(field), "no field `{field}` in:\n{err}");
    assert!(err.contains(also), "no `{also}` in:\n{err}");
    assert!(err.contains("allowed"), "no allowed values in:\n{err}");
}

#[test]
fn unknown_key_is_named_with_a_suggestion() {
    let dir = tempfile::tempdir().unwrap();
    let p = study_with(dir.path(), "typo.toml", &[("gap_mm = 0.5", "gap_nm = 0.5")]);
    let line = line_of(&p, "gap_nm");
    let o = stria(&["check", p.to_str().unwrap()]);
    assert_bad(
        &o,
        "typo.toml",
        Some(line),
        "channel.gap_nm",
        "did you mean `gap_mm`",
    );
}

#[test]
fn out_of_range_value_gives_the_allowed_range() {
    let dir = tempfile::tempdir().unwrap();
    let p = study_with(
        dir.path(),
        "range.toml",
        &[("open_fraction = 0.5", "open_fraction = 1.5")],
    );
    let line = line_of(&p, "open_fraction = 1.5");
    let o = stria(&["check", p.to_str().unwrap()]);
    assert_bad(
        &o,
        "range.toml",
        Some(line),
        "membranes.open_fraction",
        "out of range",
    );
    assert!(stderr(&o).contains("<= 1"), "{}", stderr(&o));
}

#[test]
fn an_archive_grid_too_fine_to_number_its_boxes_is_refused() {
    // A grid of 5e-324 put every design into one box, and the run's front collapsed to one
    // design; every value must be from 1e-12 up, and the count must match the objectives.
    let dir = tempfile::tempdir().unwrap();
    for (eps, also) in [
        ("[5e-324, 5e-324]", "too small"),
        ("[1e-3]", "1 values given for 2 objectives"),
    ] {
        let p = study_with(
            dir.path(),
            "grid.toml",
            &[(
                "max_evaluations = 4000",
                &format!("max_evaluations = 4000\narchive_epsilon = {eps}"),
            )],
        );
        let line = line_of(&p, "archive_epsilon");
        let o = stria(&["check", p.to_str().unwrap()]);
        assert_bad(
            &o,
            "grid.toml",
            Some(line),
            "optimizer.archive_epsilon",
            also,
        );
    }
}

#[test]
fn values_the_model_refuses_are_refused_at_their_line() {
    // The study's allowed ranges are the model's (model/src/validity.rs): a value inside the
    // study's range but outside the model's passed `stria check` and failed every evaluation.
    let dir = tempfile::tempdir().unwrap();
    for (from, to, field) in [
        (
            "pump_efficiency = 0.65",
            "pump_efficiency = 0.005",
            "economics.pump_efficiency",
        ),
        ("length_m = 0.45", "length_m = 1e-6", "channel.length_m"),
    ] {
        let p = study_with(dir.path(), "edge.toml", &[(from, to)]);
        let line = line_of(&p, to);
        let o = stria(&["check", p.to_str().unwrap()]);
        assert_bad(&o, "edge.toml", Some(line), field, "out of range");
    }
}

#[test]
fn key_without_its_unit_is_refused() {
    let dir = tempfile::tempdir().unwrap();
    let p = study_with(
        dir.path(),
        "unit.toml",
        &[("velocity_cm_s = 4.0", "velocity = 4.0")],
    );
    let line = line_of(&p, "velocity = 4.0");
    let o = stria(&["eval", p.to_str().unwrap()]);
    assert_bad(
        &o,
        "unit.toml",
        Some(line),
        "operation.velocity",
        "velocity_cm_s",
    );
}

#[test]
fn wrong_type_is_refused() {
    let dir = tempfile::tempdir().unwrap();
    let p = study_with(
        dir.path(),
        "type.toml",
        &[("pitch_um = 120.0", "pitch_um = \"fine\"")],
    );
    let line = line_of(&p, "pitch_um = \"fine\"");
    let o = stria(&["check", p.to_str().unwrap()]);
    assert_bad(
        &o,
        "type.toml",
        Some(line),
        "membranes.pitch_um",
        "expected a number",
    );
}

#[test]
fn missing_key_and_bad_choice_are_refused() {
    let dir = tempfile::tempdir().unwrap();
    let p = study_with(dir.path(), "missing.toml", &[("width_m = 0.20", "")]);
    let o = stria(&["check", p.to_str().unwrap()]);
    assert_bad(&o, "missing.toml", None, "channel.width_m", "missing");
    let p = study_with(
        dir.path(),
        "choice.toml",
        &[("salt = \"NaCl\"", "salt = \"NaCL\"")],
    );
    let line = line_of(&p, "NaCL");
    let o = stria(&["check", p.to_str().unwrap()]);
    assert_bad(
        &o,
        "choice.toml",
        Some(line),
        "water.salt",
        "did you mean \"NaCl\"",
    );
}

#[test]
fn syntax_error_names_its_line() {
    let dir = tempfile::tempdir().unwrap();
    let p = study_with(
        dir.path(),
        "syntax.toml",
        &[("length_m = 0.45", "length_m = = 0.45")],
    );
    let line = line_of(&p, "length_m = =");
    let o = stria(&["check", p.to_str().unwrap()]);
    assert_bad(&o, "syntax.toml", Some(line), "(syntax)", "TOML");
}

#[test]
fn bad_set_options_are_refused() {
    let q = demo("quick.toml");
    let q = q.to_str().unwrap();
    let o = stria(&["eval", q, "--set", "membranes.pich_um=80"]);
    assert_bad(
        &o,
        "command line",
        None,
        "membranes.pich_um",
        "did you mean `pitch_um`",
    );
    let o = stria(&["eval", q, "--set", "membranes.pitch_um=wide"]);
    assert_bad(
        &o,
        "command line",
        None,
        "membranes.pitch_um",
        "expected a number",
    );
    let o = stria(&["eval", q, "--set", "membranes.pitch_um"]);
    assert_bad(&o, "command line", None, "--set", "section.key=value");
    let o = stria(&["eval", q, "--set", "channel.gap_mm=0"]);
    assert_bad(&o, "command line", None, "channel.gap_mm", "out of range");
}

#[test]
fn missing_study_file_and_bad_options_exit_2() {
    let o = stria(&["check", "/nonexistent/study.toml"]);
    assert_bad(&o, "/nonexistent/study.toml", None, "(file)", "cannot read");
    let o = stria(&[
        "run",
        demo("quick.toml").to_str().unwrap(),
        "--threads",
        "lots",
    ]);
    assert_eq!(o.status.code(), Some(2));
    let o = stria(&["frobnicate"]);
    assert_eq!(o.status.code(), Some(2));
}

#[test]
fn demos_check_clean() {
    for name in ["quick.toml", "overnight.toml", "screening.toml"] {
        let o = stria(&["check", demo(name).to_str().unwrap()]);
        let err = stderr(&o);
        assert_eq!(o.status.code(), Some(0), "{name}: {err}");
        assert!(
            !err.lines().any(|l| l.starts_with("warning:")),
            "{name}: {err}"
        );
        assert!(err.contains("valid study"), "{err}");
        // The resolved study is itself a valid study with the same fingerprint.
        let dir = tempfile::tempdir().unwrap();
        let resolved = dir.path().join("resolved.toml");
        std::fs::write(&resolved, &o.stdout).unwrap();
        let again = stria(&["check", resolved.to_str().unwrap()]);
        assert_eq!(again.status.code(), Some(0), "{}", stderr(&again));
        let first = String::from_utf8_lossy(&o.stdout)
            .lines()
            .next()
            .unwrap()
            .to_string();
        let second = String::from_utf8_lossy(&again.stdout)
            .lines()
            .next()
            .unwrap()
            .to_string();
        assert_eq!(first, second, "{name}: fingerprint changes on reload");
    }
}

/// The field list of `stria eval --json` (docs/formats.md#design-sheet-json).
const SCHEMA: &[(&str, &[&str])] = &[
    (
        "inputs",
        &[
            "salt",
            "temperature_K",
            "feed_concentration_mol_m3",
            "gap_m",
            "length_m",
            "width_m",
            "velocity_m_s",
            "spacer",
            "pitch_m",
            "open_fraction",
            "cell_pair_voltage_V",
            "cem_transport_number",
            "aem_transport_number",
        ],
    ),
    (
        "properties",
        &[
            "salt_diffusivity_m2_s",
            "cation_transport_number",
            "density_kg_m3",
            "dynamic_viscosity_Pa_s",
            "kinematic_viscosity_m2_s",
            "conductivity_S_m",
            "debye_length_m",
            "thermal_voltage_V",
        ],
    ),
    (
        "hydraulics",
        &[
            "hydraulic_diameter_m",
            "reynolds",
            "schmidt",
            "pressure_drop_Pa",
        ],
    ),
    (
        "transfer",
        &[
            "sherwood_mean",
            "boundary_layer_thickness_mean_m",
            "limiting_current_density_feed_A_m2",
            "limiting_membrane",
            "funnelling_factor",
        ],
    ),
    (
        "performance",
        &[
            "outlet_concentration_mol_m3",
            "concentrate_outlet_concentration_mol_m3",
            "water_recovery",
            "salt_removal_fraction",
            "mean_current_density_A_m2",
            "cell_current_A",
            "diluate_flow_m3_s",
            "current_efficiency",
            "electrical_energy_kWh_m3",
            "pumping_energy_kWh_m3",
            "specific_energy_kWh_m3",
            "thermodynamic_minimum_kWh_m3",
            "active_area_fraction",
            "vortex_wavelength_m",
        ],
    ),
];

#[test]
fn eval_json_has_the_schema_fields() {
    let o = stria(&[
        "eval",
        demo("quick.toml").to_str().unwrap(),
        "--json",
        "--set",
        "membranes.pitch_um=80",
    ]);
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    let v: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
    for (group, fields) in SCHEMA {
        let g = v.get(group).unwrap_or_else(|| panic!("no group {group}"));
        for f in *fields {
            assert!(g.get(f).is_some(), "no {group}.{f}");
        }
    }
    assert!(v["warnings"].is_array());
    assert_eq!(v["inputs"]["salt"], "NaCl");
    assert_eq!(v["inputs"]["spacer"], "none");
    // --set took effect, converted from um to SI.
    approx::assert_relative_eq!(
        v["inputs"]["pitch_m"].as_f64().unwrap(),
        80e-6,
        max_relative = 1e-12
    );
    // 2.4 g/L NaCl (58.443 g/mol, IUPAC standard atomic weights; from memory) = 41.07 mol/m3.
    approx::assert_relative_eq!(
        v["inputs"]["feed_concentration_mol_m3"].as_f64().unwrap(),
        2.4 / 58.443 * 1000.0,
        max_relative = 1e-12
    );
    let sheet = stria(&["eval", demo("quick.toml").to_str().unwrap(), "--profile"]);
    let text = String::from_utf8_lossy(&sheet.stdout);
    for heading in [
        "Inputs",
        "Properties",
        "Hydraulics",
        "Mass transfer",
        "Performance",
        "Economics",
        "Warnings",
        "Profiles",
        "screening model",
    ] {
        assert!(text.contains(heading), "sheet lacks {heading}");
    }
}

fn small_study(dir: &Path, name: &str, evals: u64) -> PathBuf {
    study_with(
        dir,
        name,
        &[
            ("population = 40", "population = 16"),
            (
                "max_evaluations = 4000",
                &format!("max_evaluations = {evals}"),
            ),
        ],
    )
}

fn run_to_end(study: &Path, out: &Path, extra: &[&str]) {
    let mut args = vec![
        "run",
        study.to_str().unwrap(),
        "--out",
        out.to_str().unwrap(),
    ];
    args.extend_from_slice(extra);
    let o = stria(&args);
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
}

fn read(p: &Path) -> Vec<u8> {
    std::fs::read(p).unwrap()
}

/// Two run directories hold the same results: front.csv and evaluations.csv, byte for byte.
fn assert_same_results(a: &Path, b: &Path, context: &str) {
    for f in ["front.csv", "evaluations.csv"] {
        assert!(
            read(&a.join(f)) == read(&b.join(f)),
            "{f} differs {context}"
        );
    }
}

fn spawn_run(study: &Path, out: &Path, snapshot_seconds: &str) -> std::process::Child {
    Command::new(env!("CARGO_BIN_EXE_stria"))
        .env("STRIA_SNAPSHOT_SECONDS", snapshot_seconds)
        .args([
            "run",
            study.to_str().unwrap(),
            "--out",
            out.to_str().unwrap(),
            "--threads",
            "2",
        ])
        .stdin(Stdio::null())
        .stdout(Stdio::null())
        .stderr(Stdio::piped())
        .spawn()
        .unwrap()
}

/// Run `study` whole, then again under five seeded SIGKILLs and a final resume; the front and
/// evaluations must come out byte-identical, and at least one resume must have replayed
/// journalled generations. Returns the length of the whole run, ms.
fn kill_and_resume(dir: &Path, study: &Path, evaluations: u64, seed: u64) -> u64 {
    let whole = dir.join("whole");
    let t0 = std::time::Instant::now();
    run_to_end(study, &whole, &["--threads", "2"]);
    // Kill instants are drawn (seeded) within the length of an uninterrupted run, so that
    // they fall mid-run on fast and slow machines alike.
    let whole_ms = (t0.elapsed().as_millis() as u64).max(20);
    let broken = dir.join("broken");
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    let (mut kills, mut replays) = (0, 0);
    // Snapshot interval of each attempt: every generation, mixed snapshots and journal
    // replay, and replay only (the default interval is longer than the run).
    for every in ["30", "0", "0.005", "30", "0.002"] {
        let mut child = spawn_run(study, &broken, every);
        std::thread::sleep(Duration::from_millis(
            rng.random_range(whole_ms / 10..whole_ms / 2 + 1),
        ));
        if child.try_wait().unwrap().is_none() {
            child.kill().unwrap(); // SIGKILL on Unix
            kills += 1;
        }
        let out = child.wait_with_output().unwrap();
        replays += String::from_utf8_lossy(&out.stderr)
            .matches("replayed")
            .count();
    }
    let last = stria(&[
        "run",
        study.to_str().unwrap(),
        "--out",
        broken.to_str().unwrap(),
        "--threads",
        "2",
    ]);
    assert_eq!(last.status.code(), Some(0), "{}", stderr(&last));
    replays += stderr(&last).matches("replayed").count();
    assert!(kills > 0, "no run was interrupted; the test proves nothing");
    assert!(
        replays > 0,
        "no resume replayed journalled generations; the test misses the journal"
    );
    assert_same_results(&whole, &broken, &format!("after {kills} kills"));
    let summary: serde_json::Value =
        serde_json::from_slice(&read(&broken.join("summary.json"))).unwrap();
    assert_eq!(summary["evaluations"], evaluations);
    assert_eq!(summary["finished"], true);
    whole_ms
}

#[test]
fn killed_runs_resume_to_the_uninterrupted_result() {
    let dir = tempfile::tempdir().unwrap();
    let study = small_study(dir.path(), "s.toml", 2400);
    let whole_ms = kill_and_resume(dir.path(), &study, 2400, 20261202);
    let whole = dir.path().join("whole");
    let spawn = |out: &Path| spawn_run(&study, out, "30");

    // Ctrl-C (SIGINT): a clean pause with everything written and the resume command printed.
    let paused = dir.path().join("paused");
    let child = spawn(&paused);
    std::thread::sleep(Duration::from_millis(whole_ms / 3));
    let _ = Command::new("kill")
        .args(["-INT", &child.id().to_string()])
        .status();
    let o = child.wait_with_output().unwrap();
    let err = String::from_utf8_lossy(&o.stderr);
    // 75 when the signal paused the run, 0 when it came after the end.
    let paused_code = if err.contains("paused") { 75 } else { 0 };
    assert_eq!(o.status.code(), Some(paused_code), "{err}");
    if err.contains("paused") {
        assert!(err.contains("resume with: stria run"), "{err}");
        let s: serde_json::Value =
            serde_json::from_slice(&read(&paused.join("summary.json"))).unwrap();
        assert_eq!(s["finished"], false);
        assert_eq!(s["stop_reason"], "stopped on request");
    }
    run_to_end(&study, &paused, &["--threads", "2"]);
    assert!(read(&whole.join("front.csv")) == read(&paused.join("front.csv")));
}

/// Wait until `out`'s evaluations.csv holds data rows (the run is past its set-up and its
/// stop handler is installed).
fn wait_for_rows(out: &Path, child: &mut std::process::Child) {
    for _ in 0..600 {
        let rows = std::fs::read_to_string(out.join("evaluations.csv"))
            .map(|t| t.lines().count())
            .unwrap_or(0);
        if rows > 1 {
            return;
        }
        assert!(child.try_wait().unwrap().is_none(), "the run ended early");
        std::thread::sleep(Duration::from_millis(20));
    }
    panic!("the run wrote no rows in 12 s");
}

#[test]
fn stop_signals_pause_the_run_with_their_own_exit_code() {
    // SIGTERM (Slurm, systemd, containers) and SIGHUP pause like Ctrl-C: the generation ends,
    // everything is written, and the exit code is 75 (EX_TEMPFAIL of sysexits.h), not 0.
    let dir = tempfile::tempdir().unwrap();
    let study = small_study(dir.path(), "s.toml", 1_000_000);
    for signal in ["-TERM", "-HUP"] {
        let out = dir.path().join(&signal[1..]);
        let mut child = spawn_run(&study, &out, "30");
        wait_for_rows(&out, &mut child);
        let sent = Command::new("kill")
            .args([signal, &child.id().to_string()])
            .status()
            .unwrap();
        assert!(sent.success());
        let o = child.wait_with_output().unwrap();
        let err = stderr(&o);
        assert_eq!(o.status.code(), Some(75), "{signal}: {err}");
        assert!(err.contains("resume with: stria run"), "{err}");
        let s: serde_json::Value =
            serde_json::from_slice(&read(&out.join("summary.json"))).unwrap();
        assert_eq!(s["finished"], false);
        assert_eq!(s["stop_reason"], "stopped on request");
    }
    // The wall-clock budget pauses the same way.
    let out = dir.path().join("hours");
    let o = stria(&[
        "run",
        study.to_str().unwrap(),
        "--out",
        out.to_str().unwrap(),
        "--hours",
        "0.0001",
    ]);
    assert_eq!(o.status.code(), Some(75), "{}", stderr(&o));
}

#[test]
fn killed_scalarised_runs_resume_to_the_uninterrupted_result() {
    // The scalarised sweep evaluates inside argmin solvers; its replay goes through the same
    // journal (3000 evaluations: the budget runs out in the middle of a sub-problem).
    let dir = tempfile::tempdir().unwrap();
    let study = study_with(
        dir.path(),
        "scalarised.toml",
        &[
            ("algorithm = \"nsga2\"", "algorithm = \"scalarised\""),
            ("max_evaluations = 4000", "max_evaluations = 3000"),
        ],
    );
    kill_and_resume(dir.path(), &study, 3000, 7);
}

#[test]
fn same_result_with_one_and_two_threads() {
    let dir = tempfile::tempdir().unwrap();
    let study = small_study(dir.path(), "s.toml", 320);
    let (a, b) = (dir.path().join("t1"), dir.path().join("t2"));
    run_to_end(&study, &a, &["--threads", "1"]);
    run_to_end(&study, &b, &["--threads", "2"]);
    assert_same_results(&a, &b, "between 1 and 2 threads");
}

#[test]
fn resuming_with_a_changed_study_is_refused_unless_fresh() {
    let dir = tempfile::tempdir().unwrap();
    let study = small_study(dir.path(), "s.toml", 64);
    let out = dir.path().join("run");
    run_to_end(&study, &out, &[]);
    // A raised budget is not a change of study: the run goes on.
    run_to_end(&study, &out, &["--max-evals", "96"]);
    let summary: serde_json::Value =
        serde_json::from_slice(&read(&out.join("summary.json"))).unwrap();
    assert_eq!(summary["evaluations"], 96);

    let changed = std::fs::read_to_string(&study)
        .unwrap()
        .replace("upper_um = 600.0", "upper_um = 500.0");
    std::fs::write(&study, changed).unwrap();
    let o = stria(&[
        "run",
        study.to_str().unwrap(),
        "--out",
        out.to_str().unwrap(),
    ]);
    let err = stderr(&o);
    assert_eq!(o.status.code(), Some(2), "{err}");
    assert!(
        err.contains("different study") && err.contains("--fresh"),
        "{err}"
    );
    run_to_end(&study, &out, &["--fresh"]);
    let resolved = std::fs::read_to_string(out.join("study.toml")).unwrap();
    assert!(resolved.starts_with("# fingerprint: "));
    assert!(resolved.contains("upper_um = 500.0"));
}

#[test]
fn run_directory_has_the_contract_columns() {
    let dir = tempfile::tempdir().unwrap();
    let study = small_study(dir.path(), "s.toml", 32);
    let out = dir.path().join("run");
    run_to_end(&study, &out, &[]);
    let head = |f: &str| {
        String::from_utf8(read(&out.join(f)))
            .unwrap()
            .lines()
            .next()
            .unwrap()
            .to_string()
    };
    assert_eq!(
        head("evaluations.csv"),
        "id,generation,pitch_m,open_fraction,velocity_m_s,cell_pair_voltage_V,salt_removal_rate_mol_m2_s,specific_energy_kWh_m3,g_product_concentration,g_pressure_drop,g_reynolds,feasible,reason"
    );
    assert_eq!(
        head("front.csv"),
        "id,pitch_m,open_fraction,velocity_m_s,cell_pair_voltage_V,salt_removal_rate_mol_m2_s,specific_energy_kWh_m3,outlet_concentration_mol_m3,salt_removal_fraction,mean_current_density_A_m2,active_area_fraction,vortex_wavelength_m,pitch_over_wavelength,boundary_layer_thickness_mean_m"
    );
    assert_eq!(
        head("history.csv"),
        "generation,evaluations,feasible_share,hypervolume,elapsed_s"
    );
    let s: serde_json::Value = serde_json::from_slice(&read(&out.join("summary.json"))).unwrap();
    for key in [
        "study",
        "fingerprint",
        "algorithm",
        "seed",
        "evaluations",
        "generations",
        "stop_reason",
        "front_size",
        "objectives",
        "variables",
        "evaluations_csv_cap",
        "finished",
    ] {
        assert!(s.get(key).is_some(), "summary.json lacks {key}");
    }
    assert_eq!(s["objectives"][0]["direction"], "max");
    assert_eq!(s["objectives"][1]["direction"], "min");
    // Rows of evaluations.csv: one per evaluation.
    let rows = String::from_utf8(read(&out.join("evaluations.csv")))
        .unwrap()
        .lines()
        .count();
    assert_eq!(rows, 33);
}

#[test]
fn evaluations_csv_stops_at_its_cap_and_the_summary_says_so() {
    let dir = tempfile::tempdir().unwrap();
    let study = small_study(dir.path(), "s.toml", 160);
    let out = dir.path().join("run");
    let opts = studies::run::RunOptions {
        study: study.clone(),
        out: Some(out.clone()),
        threads: Some(1),
        evaluations_csv_cap: Some(50),
        ..Default::default()
    };
    studies::run::run(&opts).unwrap();
    let rows = String::from_utf8(read(&out.join("evaluations.csv"))).unwrap();
    assert_eq!(rows.lines().count(), 51, "header and 50 rows");
    assert!(rows.lines().last().unwrap().starts_with("49,"));
    let s: serde_json::Value = serde_json::from_slice(&read(&out.join("summary.json"))).unwrap();
    assert_eq!(s["evaluations"], 160);
    assert_eq!(s["evaluations_csv_cap"], 50);
    assert_eq!(s["evaluations_csv_rows"], 50);
    // Resuming a finished run changes nothing.
    studies::run::run(&opts).unwrap();
    assert_eq!(
        String::from_utf8(read(&out.join("evaluations.csv"))).unwrap(),
        rows
    );
}

#[test]
fn a_second_run_in_the_same_directory_is_refused() {
    let dir = tempfile::tempdir().unwrap();
    let study = small_study(dir.path(), "s.toml", 1_000_000);
    let out = dir.path().join("run");
    let mut first = Command::new(env!("CARGO_BIN_EXE_stria"))
        .args([
            "run",
            study.to_str().unwrap(),
            "--out",
            out.to_str().unwrap(),
            "--threads",
            "1",
        ])
        .stdin(Stdio::null())
        .stdout(Stdio::null())
        .stderr(Stdio::null())
        .spawn()
        .unwrap();
    let mut waited = 0;
    while !out.join("checkpoint.json").exists() && waited < 200 {
        std::thread::sleep(Duration::from_millis(50));
        waited += 1;
    }
    let o = stria(&[
        "run",
        study.to_str().unwrap(),
        "--out",
        out.to_str().unwrap(),
    ]);
    first.kill().unwrap();
    first.wait().unwrap();
    assert_bad(&o, "s.toml", None, "--out", "another `stria run`");
}

#[test]
fn a_journal_that_does_not_follow_from_the_checkpoint_is_computed_again() {
    let dir = tempfile::tempdir().unwrap();
    let study = small_study(dir.path(), "s.toml", 64);
    let out = dir.path().join("run");
    run_to_end(&study, &out, &[]);
    let summary: serde_json::Value =
        serde_json::from_slice(&read(&out.join("summary.json"))).unwrap();
    let generations = summary["generations"].as_u64().unwrap();
    let len = |f: &str| std::fs::metadata(out.join(f)).unwrap().len();
    // A journal line for the next generation whose designs are not the ones the optimiser
    // draws from the checkpoint (as if the journal belonged to another state).
    let outcome = serde_json::json!({"id": 64, "generation": generations, "x": [1e-4, 0.5, 0.05, 1.0],
        "objectives": [1.0, 2.0], "constraints": [-1.0, -1.0, -1.0], "violation": 0.0,
        "failure": null});
    let record = serde_json::json!({
        "generation": generations + 1,
        "evaluations": 64 + 16,
        "evaluations_csv_bytes": len("evaluations.csv"),
        "evaluations_csv_rows": 64,
        "history_csv_bytes": len("history.csv"),
        "elapsed_s": 1.0,
        "outcomes": vec![outcome; 16],
    });
    // Sealed with its checksum, as the run writes it, so it is the replay that refuses it.
    let line = studies::run::files::seal(&record.to_string());
    std::fs::write(out.join("journal.jsonl"), format!("{line}\n")).unwrap();
    let o = stria(&[
        "run",
        study.to_str().unwrap(),
        "--out",
        out.to_str().unwrap(),
        "--max-evals",
        "200",
    ]);
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    assert!(stderr(&o).contains("computed again"), "{}", stderr(&o));
    // Nothing of the forged line is used: the result is that of a run straight to 200.
    let straight = dir.path().join("straight");
    run_to_end(&study, &straight, &["--max-evals", "200"]);
    assert_same_results(&straight, &out, "from a straight run");
}

#[test]
fn a_torn_journal_line_does_not_spoil_the_lines_after_it() {
    // A kill in the middle of a journal append leaves a line without its newline. The resume
    // must not append its own lines behind that fragment: they would fuse with it into one
    // damaged line, and once another line followed, the next resume refused the journal as
    // damaged (seen once in the kill-and-resume test of a scalarised study).
    let dir = tempfile::tempdir().unwrap();
    let study = small_study(dir.path(), "s.toml", 64);
    let out = dir.path().join("run");
    run_to_end(&study, &out, &[]);
    let journal = out.join("journal.jsonl");
    std::fs::write(&journal, "{\"generation\": 5, \"evalua").unwrap();
    // Resume with a longer budget and no snapshot (30 s), killed once two generations are
    // journalled.
    let mut child = Command::new(env!("CARGO_BIN_EXE_stria"))
        .env("STRIA_SNAPSHOT_SECONDS", "30")
        .args([
            "run",
            study.to_str().unwrap(),
            "--out",
            out.to_str().unwrap(),
        ])
        .args(["--max-evals", "100000", "--threads", "1"])
        .stdin(Stdio::null())
        .stdout(Stdio::null())
        .stderr(Stdio::null())
        .spawn()
        .unwrap();
    let t0 = std::time::Instant::now();
    while std::fs::read_to_string(&journal)
        .unwrap_or_default()
        .matches('\n')
        .count()
        < 2
    {
        assert!(
            t0.elapsed() < Duration::from_secs(60),
            "no generations journalled"
        );
        std::thread::sleep(Duration::from_millis(2));
    }
    child.kill().unwrap();
    child.wait().unwrap();
    let o = stria(&[
        "run",
        study.to_str().unwrap(),
        "--out",
        out.to_str().unwrap(),
        "--max-evals",
        "200",
    ]);
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    assert!(stderr(&o).contains("replayed"), "{}", stderr(&o));
    let straight = dir.path().join("straight");
    run_to_end(&study, &straight, &["--max-evals", "200"]);
    assert_same_results(&straight, &out, "from a straight run");
}

#[test]
fn a_resume_with_a_lowered_budget_ends_the_replay_where_the_budget_ends() {
    // A run killed with journalled generations (no snapshot but the first), resumed with a
    // budget below what the journal holds: the replay stops at the budget, and the run
    // directory stays consistent (the rows of evaluations.csv are the evaluations counted).
    let dir = tempfile::tempdir().unwrap();
    let study = small_study(dir.path(), "s.toml", 4000);
    let out = dir.path().join("run");
    let journal_evaluations = |out: &Path| -> u64 {
        std::fs::read_to_string(out.join("journal.jsonl"))
            .unwrap_or_default()
            .lines()
            .filter_map(|l| serde_json::from_str::<serde_json::Value>(l).ok())
            .filter_map(|v| v["evaluations"].as_u64())
            .max()
            .unwrap_or(0)
    };
    let mut journalled = 0;
    for wait_ms in [60u64, 120, 240, 480, 960] {
        let _ = std::fs::remove_dir_all(&out);
        let mut child = spawn_run(&study, &out, "1000000");
        std::thread::sleep(Duration::from_millis(wait_ms));
        let _ = child.kill();
        let _ = child.wait();
        journalled = journal_evaluations(&out);
        if journalled >= 64 {
            break;
        }
    }
    assert!(journalled >= 64, "no run was killed with a journal");
    let lowered = journalled / 2;
    let o = stria(&[
        "run",
        study.to_str().unwrap(),
        "--out",
        out.to_str().unwrap(),
        "--max-evals",
        &lowered.to_string(),
    ]);
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    let summary: serde_json::Value =
        serde_json::from_slice(&read(&out.join("summary.json"))).unwrap();
    let done = summary["evaluations"].as_u64().unwrap();
    assert!(
        done >= lowered && done < journalled,
        "{done} vs {lowered}..{journalled}"
    );
    let rows = std::fs::read_to_string(out.join("evaluations.csv"))
        .unwrap()
        .lines()
        .count() as u64
        - 1;
    assert_eq!(rows, done);
}

#[test]
fn a_run_made_with_another_model_revision_is_not_resumed() {
    let dir = tempfile::tempdir().unwrap();
    let study = small_study(dir.path(), "s.toml", 32);
    let out = dir.path().join("run");
    run_to_end(&study, &out, &[]);
    let resolved = std::fs::read_to_string(out.join("study.toml")).unwrap();
    assert!(resolved.contains("\n# model revision: "), "{resolved}");
    // As an older stria would have left it: another revision, hence another fingerprint.
    let mut lines: Vec<String> = resolved.lines().map(str::to_string).collect();
    lines[0] = "# fingerprint: 0123456789abcdef".into();
    lines[1] = "# model revision: 1".into();
    std::fs::write(out.join("study.toml"), lines.join("\n") + "\n").unwrap();
    let o = stria(&[
        "run",
        study.to_str().unwrap(),
        "--out",
        out.to_str().unwrap(),
        "--max-evals",
        "64",
    ]);
    assert_eq!(o.status.code(), Some(2), "{}", stderr(&o));
    let err = stderr(&o);
    assert!(
        err.contains("model revision 1") && err.contains("--fresh"),
        "{err}"
    );
}
