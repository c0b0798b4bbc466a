//! What a user types: `stria eval`'s constraints and i/i_lim (sheet and JSON), `stria eval
//! --run DIR --pick ID`, and every command block of README.md run on the demo.

use std::path::{Path, PathBuf};
use std::process::{Command, Output, Stdio};
use std::time::Instant;

use proptest::prelude::*;
use proptest::test_runner::{Config, RngAlgorithm, RngSeed};
use serde_json::Value;

use studies::eval::{constraint_checks, current_over_limit};
use studies::study::search::Constraint;
use studies::study::Study;

fn root() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("..")
}

fn demo(name: &str) -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("demo")
        .join(name)
}

fn stria_in(dir: &Path, args: &[&str]) -> Output {
    Command::new(env!("CARGO_BIN_EXE_stria"))
        .args(args)
        .current_dir(dir)
        .stdin(Stdio::null())
        .output()
        .expect("stria runs")
}

fn text(o: &[u8]) -> String {
    String::from_utf8_lossy(o).into_owned()
}

/// A short run of the quick demo (two generations of 40) in `dir/runs/quick`; its front's ids.
fn quick_run(dir: &Path) -> Vec<u64> {
    let q = demo("quick.toml");
    let o = stria_in(
        dir,
        &[
            "run",
            q.to_str().unwrap(),
            "--out",
            "runs/quick",
            "--max-evals",
            "80",
        ],
    );
    assert_eq!(o.status.code(), Some(0), "{}", text(&o.stderr));
    front_ids(&dir.join("runs/quick/front.csv"))
}

fn front_ids(path: &Path) -> Vec<u64> {
    std::fs::read_to_string(path)
        .unwrap()
        .lines()
        .skip(1)
        .map(|l| l.split(',').next().unwrap().parse().unwrap())
        .collect()
}

/// Fixed seed, no persistence files (as in input_fuzz.rs).
fn config(cases: u32) -> Config {
    Config {
        cases,
        failure_persistence: None,
        rng_algorithm: RngAlgorithm::ChaCha,
        rng_seed: RngSeed::Fixed(0x5ee7_0010),
        ..Config::default()
    }
}

proptest! {
    #![proptest_config(config(48))]

    /// On random designs within the quick demo's bounds and random limits: each constraint's
    /// value is the evaluation's own quantity in SI, `met` is value <= limit (every constraint
    /// is an upper limit) and agrees with the sign of the optimiser's g; i/i_lim's maximum is
    /// at least its inlet and outlet values and every profile point's, and the inlet and outlet
    /// are the profile's ends. Asking for profiles does not change the evaluation.
    #[test]
    // exact: each number is compared with the one it was copied from (the same bits)
    #[allow(clippy::float_cmp)]
    fn constraint_verdicts_and_current_over_limit_agree_with_the_evaluation(
        u in proptest::collection::vec(0.0f64..1.0, 4),
        product in 1.0f64..30.0,
        pressure in 100.0f64..3000.0,
        reynolds in 5.0f64..200.0,
        recovery in 0.3f64..0.7,
    ) {
        let (mut study, _) = Study::load(&demo("quick.toml")).unwrap();
        study.constraints = vec![
            Constraint::MaxProduct(product),
            Constraint::MaxPressureDrop(pressure),
            Constraint::MaxReynolds(reynolds),
            Constraint::MinWaterRecovery(recovery),
        ];
        let x: Vec<f64> = study
            .variables
            .iter()
            .zip(&u)
            .map(|(v, t)| v.lower + t * (v.upper - v.lower))
            .collect();
        let mut design = study.design_at(&x);
        // The plant evaluates its stages without membrane water transport (model/src/plant.rs,
        // module docs), so the cell pair it must equal is evaluated the same way.
        design.membranes.physics.water_transport = false;
        let plain = model::evaluate(&design, &study.constants, &model::Options::default());
        prop_assume!(plain.is_ok());
        let plain = plain.unwrap();
        let options = model::Options { profiles: true, ..model::Options::default() };
        let p = study.evaluate_plant_at(&x, &options).unwrap();
        let e = &p.stage_evaluations[0];
        prop_assert_eq!(&plain.performance, &e.performance);
        prop_assert_eq!(&plain.hydraulics, &e.hydraulics);

        let checks = constraint_checks(&study, &p);
        prop_assert_eq!(checks.len(), 4);
        // (name, value, limit, unit, lower bound); the quick demo is one stage of one cell
        // pair, so the plant's product is the cell pair's outlet
        let expected = [
            ("product_concentration", e.performance.outlet_concentration_mol_m3, product, "mol/m3", false),
            ("pressure_drop", e.hydraulics.pressure_drop_Pa, pressure, "Pa", false),
            ("reynolds", e.hydraulics.reynolds, reynolds, "-", false),
            ("water_recovery", p.plant.water_recovery, recovery, "-", true),
        ];
        for ((c, check), (name, value, limit, unit, lower)) in
            study.constraints.iter().zip(&checks).zip(expected)
        {
            prop_assert_eq!(check.name, name);
            prop_assert_eq!(check.unit, unit);
            prop_assert_eq!(check.value, value);
            prop_assert_eq!(check.limit, limit);
            prop_assert_eq!(check.bound, if lower { "lower" } else { "upper" });
            prop_assert_eq!(check.met, if lower { value >= limit } else { value <= limit });
            let g = c.g(&p);
            prop_assert!(if check.met { g <= 0.0 } else { g >= 0.0 }, "g {} met {}", g, check.met);
        }

        let p = e.profiles.as_ref().unwrap();
        let r = current_over_limit(p).unwrap();
        let ratio = |k: usize| p.current_density_A_m2[k] / p.limiting_current_density_A_m2[k];
        let last = p.x_m.len() - 1;
        prop_assert_eq!(r.inlet, ratio(0));
        prop_assert_eq!(r.outlet, ratio(last));
        prop_assert!(r.max >= r.inlet && r.max >= r.outlet);
        for k in 0..=last {
            prop_assert!(r.max >= ratio(k));
        }
        prop_assert!(r.max_at_m >= 0.0 && r.max_at_m <= e.inputs.length_m * (1.0 + 1e-12));
        prop_assert!(r.inlet > 0.0 && r.inlet.is_finite());
    }
}

#[test]
fn eval_shows_the_constraints_and_current_over_limit_in_json_and_on_the_sheet() {
    let dir = tempfile::tempdir().unwrap();
    let q = demo("quick.toml");
    let o = stria_in(dir.path(), &["eval", q.to_str().unwrap(), "--json"]);
    assert_eq!(o.status.code(), Some(0), "{}", text(&o.stderr));
    let v: Value = serde_json::from_slice(&o.stdout).unwrap();
    assert!(v.get("profiles").is_none(), "profiles only with --profile");
    let cons = v["constraints"].as_array().expect("constraints array");
    // the quick demo's three limits, in SI (the study gives 8.5 mM, 150 kPa, 1500)
    let names: Vec<&str> = cons.iter().map(|c| c["name"].as_str().unwrap()).collect();
    assert_eq!(
        names,
        ["product_concentration", "pressure_drop", "reynolds"]
    );
    let limits: Vec<f64> = cons.iter().map(|c| c["limit"].as_f64().unwrap()).collect();
    assert_eq!(limits, [8.5, 150e3, 1500.0]);
    for c in cons {
        for field in ["name", "value", "limit", "unit", "met"] {
            assert!(c.get(field).is_some(), "constraint without {field}: {c}");
        }
        let met = c["value"].as_f64().unwrap() <= c["limit"].as_f64().unwrap();
        assert_eq!(c["met"].as_bool(), Some(met), "{c}");
    }
    assert_eq!(
        cons[0]["value"].as_f64(),
        v["performance"]["outlet_concentration_mol_m3"].as_f64()
    );
    assert_eq!(
        cons[1]["value"].as_f64(),
        v["hydraulics"]["pressure_drop_Pa"].as_f64()
    );
    let r = &v["current_over_limit"];
    let (inlet, outlet, max) = (
        r["inlet"].as_f64().unwrap(),
        r["outlet"].as_f64().unwrap(),
        r["max"].as_f64().unwrap(),
    );
    assert!(max >= inlet && max >= outlet, "{r}");
    assert!(r["definition"].as_str().unwrap().contains("limiting"));

    // the sheet shows the same verdicts, in the study's units, and defines its terms
    let o = stria_in(dir.path(), &["eval", q.to_str().unwrap()]);
    assert_eq!(o.status.code(), Some(0), "{}", text(&o.stderr));
    let sheet = text(&o.stdout);
    let section = sheet
        .split("Constraints of the study\n")
        .nth(1)
        .expect("constraints section");
    let rows: Vec<&str> = section.lines().take(3).collect();
    for (row, c) in rows.iter().zip(cons) {
        let verdict = if c["met"].as_bool().unwrap() {
            " met"
        } else {
            " VIOLATED"
        };
        assert!(row.ends_with(verdict), "{row} vs {c}");
    }
    assert!(
        rows[1].contains("at most") && rows[1].contains("150.0 kPa"),
        "{}",
        rows[1]
    );
    assert!(rows[0].contains("8.500 mM"), "{}", rows[0]);
    for needle in [
        "Current over limiting current, i/i_lim",
        "at the inlet",
        "at the outlet",
        "largest along the channel",
        "design: the study's baseline design",
        "the active-area fraction: the share of the patterned",
    ] {
        assert!(sheet.contains(needle), "no `{needle}` in:\n{sheet}");
    }
}

#[test]
fn eval_of_a_front_design_reproduces_its_row_and_refuses_bad_picks() {
    let dir = tempfile::tempdir().unwrap();
    let t0 = Instant::now();
    let ids = quick_run(dir.path());
    assert!(!ids.is_empty());
    let front = std::fs::read_to_string(dir.path().join("runs/quick/front.csv")).unwrap();
    let header: Vec<&str> = front.lines().next().unwrap().split(',').collect();
    let col = |name: &str| header.iter().position(|h| *h == name).unwrap();
    for line in front.lines().skip(1).take(3) {
        let cells: Vec<&str> = line.split(',').collect();
        let o = stria_in(
            dir.path(),
            &["eval", "--run", "runs/quick", "--pick", cells[0], "--json"],
        );
        assert_eq!(o.status.code(), Some(0), "{}", text(&o.stderr));
        let v: Value = serde_json::from_slice(&o.stdout).unwrap();
        // the same model on the same design: the run's numbers, to the last digit
        for (column, path) in [
            ("pitch_m", ("inputs", "pitch_m")),
            ("velocity_m_s", ("inputs", "velocity_m_s")),
            (
                "salt_removal_rate_mol_m2_s",
                ("economics", "salt_removal_rate_mol_m2_s"),
            ),
            (
                "specific_energy_kWh_m3",
                ("performance", "specific_energy_kWh_m3"),
            ),
            (
                "outlet_concentration_mol_m3",
                ("performance", "outlet_concentration_mol_m3"),
            ),
        ] {
            let want: f64 = cells[col(column)].parse().unwrap();
            assert_eq!(v[path.0][path.1].as_f64(), Some(want), "{column} of {line}");
        }
        assert!(v["design"]["origin"]
            .as_str()
            .unwrap()
            .contains(&format!("id {} of the front", cells[0])));
    }
    let sheet = stria_in(
        dir.path(),
        &["eval", "--run", "runs/quick", "--pick", &ids[0].to_string()],
    );
    assert_eq!(sheet.status.code(), Some(0));
    assert!(text(&sheet.stdout).contains(&format!("design: id {} of the front", ids[0])));

    // an id not on the front: exit 2, the file and the ids available
    let missing = (0..).find(|k| !ids.contains(k)).unwrap();
    let o = stria_in(
        dir.path(),
        &[
            "eval",
            "--run",
            "runs/quick",
            "--pick",
            &missing.to_string(),
        ],
    );
    let err = text(&o.stderr);
    assert_eq!(o.status.code(), Some(2), "{err}");
    assert!(err.contains("front.csv") && err.contains("--pick"), "{err}");
    let listed = ids
        .iter()
        .take(30)
        .map(|i| i.to_string())
        .collect::<Vec<_>>()
        .join(", ");
    assert!(err.contains(&listed), "{err}");
    assert!(!err.contains("panicked"), "{err}");

    // not a run directory: exit 2 naming the missing file
    std::fs::create_dir(dir.path().join("empty")).unwrap();
    let o = stria_in(dir.path(), &["eval", "--run", "empty", "--pick", "1"]);
    let err = text(&o.stderr);
    assert_eq!(o.status.code(), Some(2), "{err}");
    assert!(err.contains("study.toml"), "{err}");

    // a study.toml edited after the run no longer matches its fingerprint: refused
    let study = dir.path().join("runs/quick/study.toml");
    let edited = std::fs::read_to_string(&study)
        .unwrap()
        .replace("max_reynolds = 1500", "max_reynolds = 1400");
    std::fs::write(&study, edited).unwrap();
    let o = stria_in(
        dir.path(),
        &["eval", "--run", "runs/quick", "--pick", &ids[0].to_string()],
    );
    let err = text(&o.stderr);
    assert_eq!(o.status.code(), Some(2), "{err}");
    assert!(
        err.contains("study.toml:1:") && err.contains("fingerprint"),
        "{err}"
    );

    // --pick without --run, or with a study file: a usage error
    let o = stria_in(dir.path(), &["eval", "--pick", "3"]);
    assert_eq!(o.status.code(), Some(2));
    eprintln!(
        "eval --run/--pick test: {:.1} s",
        t0.elapsed().as_secs_f64()
    );
}

/// The commands of a README line: a `stria` command (or `cargo run ... --bin stria -- ...`,
/// rewritten to `stria ...`), None for anything else.
fn stria_command(line: &str) -> Option<String> {
    let line = line.trim();
    if line.starts_with("stria ") {
        return Some(line.to_string());
    }
    if line.starts_with("cargo run") && line.contains("stria") {
        let args = line.split_once(" -- ")?.1;
        return Some(format!("stria {args}"));
    }
    None
}

/// Every fenced block of README.md that starts with a stria command, with its first line.
fn readme_blocks(readme: &str) -> Vec<(usize, Vec<String>)> {
    let mut blocks = Vec::new();
    let mut current: Option<(usize, Vec<String>)> = None;
    for (k, line) in readme.lines().enumerate() {
        if line.trim_start().starts_with("```") {
            match current.take() {
                Some(block) => blocks.push(block),
                None => current = Some((k + 2, Vec::new())),
            }
        } else if let Some((_, lines)) = current.as_mut() {
            lines.push(line.to_string());
        }
    }
    blocks
        .into_iter()
        .filter(|(_, lines)| {
            lines
                .iter()
                .find(|l| !l.trim().is_empty())
                .is_some_and(|l| stria_command(l).is_some())
        })
        .collect()
}

#[test]
fn every_command_block_of_the_readme_runs_on_the_demo() {
    let readme = std::fs::read_to_string(root().join("README.md")).unwrap();
    let blocks = readme_blocks(&readme);
    assert!(
        blocks.len() >= 5,
        "found only {} command blocks",
        blocks.len()
    );

    // A temporary directory laid out like the repository for the README's relative paths, a
    // `stria` on the PATH, and the user's own study (the README: copy the quick demo).
    let dir = tempfile::tempdir().unwrap();
    let work = dir.path();
    let demo_dir = work.join("studies/demo");
    std::fs::create_dir_all(&demo_dir).unwrap();
    for entry in std::fs::read_dir(demo("")).unwrap() {
        let p = entry.unwrap().path();
        std::fs::copy(&p, demo_dir.join(p.file_name().unwrap())).unwrap();
    }
    std::fs::copy(demo("quick.toml"), work.join("my_study.toml")).unwrap();
    let bin = work.join("bin");
    std::fs::create_dir(&bin).unwrap();
    std::os::unix::fs::symlink(env!("CARGO_BIN_EXE_stria"), bin.join("stria")).unwrap();
    let path = format!(
        "{}:{}",
        bin.display(),
        std::env::var("PATH").unwrap_or_default()
    );

    let mut ran = 0;
    for (first_line, lines) in &blocks {
        for line in lines {
            let Some(mut cmd) = stria_command(line) else {
                continue;
            };
            // A run in this test: two generations of the demo's 40, not its whole budget.
            let is_run = cmd.starts_with("stria run ");
            if is_run {
                let (c, comment) = cmd.split_once('#').unwrap_or((&cmd, ""));
                cmd = format!("{} --max-evals 80 #{comment}", c.trim_end());
            }
            // The README asks for ids from front.csv (`--pick ID`): take those of the run.
            if cmd.contains("ID") {
                let front = cmd
                    .split_whitespace()
                    .find(|w| w.starts_with("runs/"))
                    .map(|d| work.join(d).join("front.csv"))
                    .unwrap_or_else(|| panic!("README.md:{first_line}: `{cmd}` names no run"));
                let ids = front_ids(&front);
                assert!(!ids.is_empty(), "{} is empty", front.display());
                let mut k = 0;
                cmd = cmd
                    .split(' ')
                    .map(|w| {
                        if w == "ID" {
                            k += 1;
                            ids[(k - 1) % ids.len()].to_string()
                        } else {
                            w.to_string()
                        }
                    })
                    .collect::<Vec<_>>()
                    .join(" ");
            }
            let t0 = Instant::now();
            let o = Command::new("sh")
                .arg("-c")
                .arg(&cmd)
                .current_dir(work)
                .env("PATH", &path)
                .stdin(Stdio::null())
                .output()
                .unwrap();
            eprintln!(
                "README.md:{first_line}: `{cmd}` ({:.2} s)",
                t0.elapsed().as_secs_f64()
            );
            assert_eq!(
                o.status.code(),
                Some(0),
                "README.md block at line {first_line}: `{cmd}` failed\nstdout:\n{}\nstderr:\n{}",
                text(&o.stdout),
                text(&o.stderr)
            );
            ran += 1;
        }
    }
    assert!(ran >= 10, "only {ran} README commands ran");
}
