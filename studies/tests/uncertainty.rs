//! `stria eval --samples` and `stria sensitivity` end to end: same seed same numbers,
//! percentiles in order, bad options refused with exit 2.

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

#[test]
fn eval_samples_give_ordered_percentiles_the_same_for_a_seed() {
    let quick = demo("quick.toml");
    let q = quick.to_str().unwrap();
    let a = stria(&["eval", q, "--samples", "40", "--seed", "5", "--json"]);
    assert!(a.status.success(), "{}", String::from_utf8_lossy(&a.stderr));
    let b = stria(&["eval", q, "--samples", "40", "--seed", "5", "--json"]);
    assert_eq!(a.stdout, b.stdout, "same seed, same output");
    let v: serde_json::Value = serde_json::from_slice(&a.stdout).unwrap();
    let u = &v["uncertainty"];
    assert_eq!(u["samples"], 40);
    assert_eq!(u["seed"], 5);
    let outputs = u["outputs"].as_array().unwrap();
    assert!(outputs.len() >= 5);
    let mut spread = 0;
    for o in outputs {
        let (p5, p50, p95) = (
            o["p5"].as_f64().unwrap(),
            o["p50"].as_f64().unwrap(),
            o["p95"].as_f64().unwrap(),
        );
        assert!(p5 <= p50 && p50 <= p95, "{o}");
        spread += usize::from(p95 > p5);
    }
    // The uncertain constants move the electrochemistry: most outputs spread.
    assert!(spread >= 5, "{u}");
    // The deterministic evaluation is still there, and lies inside the band of its energy
    // (the defaults sit inside every prior).
    let e = v["performance"]["specific_energy_kWh_m3"].as_f64().unwrap();
    let o = outputs
        .iter()
        .find(|o| o["output"] == "specific_energy_kWh_m3")
        .unwrap();
    assert!(o["p5"].as_f64().unwrap() * 0.9 <= e && e <= o["p95"].as_f64().unwrap() * 1.1);

    // The quick demo is patterned: it is compared with its unpatterned twin at the same draws.
    let p = &u["patterning"];
    let prob = p["probability_patterning_cheaper"].as_f64().unwrap();
    assert!((0.0..=1.0).contains(&prob), "{p}");
    let compared = p["draws_compared"].as_u64().unwrap();
    assert!(compared > 30 && compared <= 40, "{p}");
    // A probability from m draws is a multiple of 1/m.
    assert!((prob * compared as f64 - (prob * compared as f64).round()).abs() < 1e-9);
    for key in ["levelised_cost_ratio", "salt_removal_rate_ratio"] {
        let r = &p[key];
        let (a, b, c) = (
            r["p5"].as_f64().unwrap(),
            r["p50"].as_f64().unwrap(),
            r["p95"].as_f64().unwrap(),
        );
        assert!(0.0 < a && a <= b && b <= c, "{key}: {r}");
    }
    // An unpatterned design has nothing to compare with.
    let plain = stria(&[
        "eval",
        q,
        "--samples",
        "10",
        "--json",
        "--set",
        "membranes.open_fraction=1",
    ]);
    assert!(
        plain.status.success(),
        "{}",
        String::from_utf8_lossy(&plain.stderr)
    );
    let v: serde_json::Value = serde_json::from_slice(&plain.stdout).unwrap();
    assert!(v["uncertainty"]["patterning"].is_null());

    let c = stria(&["eval", q, "--samples", "40", "--seed", "6", "--json"]);
    assert_ne!(a.stdout, c.stdout, "another seed, other draws");

    let sheet = stria(&["eval", q, "--samples", "20"]);
    assert!(sheet.status.success());
    let text = String::from_utf8(sheet.stdout).unwrap();
    assert!(text.contains("Uncertainty (20 draws"), "{text}");
    assert!(
        text.trim_end().ends_with("licensed practice."),
        "the caution ends the sheet"
    );
}

#[test]
fn eval_samples_out_of_range_are_refused() {
    let quick = demo("quick.toml");
    let q = quick.to_str().unwrap();
    for n in ["0", "1", "1000001"] {
        let out = stria(&["eval", q, "--samples", n]);
        assert_eq!(out.status.code(), Some(2), "--samples {n}");
        let err = String::from_utf8_lossy(&out.stderr);
        assert!(
            err.contains("--samples") && err.contains("allowed"),
            "{err}"
        );
    }
    let out = stria(&["eval", q, "--seed", "3"]);
    assert_eq!(out.status.code(), Some(2), "--seed without --samples");
}

#[test]
fn sensitivity_writes_the_indices_the_same_for_a_seed() {
    let dir = tempfile::tempdir().unwrap();
    let quick = demo("quick.toml");
    let q = quick.to_str().unwrap();
    let (a, b) = (dir.path().join("a"), dir.path().join("b"));
    for out in [&a, &b] {
        let o = stria(&[
            "sensitivity",
            q,
            "--samples",
            "64",
            "--seed",
            "2",
            "--out",
            out.to_str().unwrap(),
        ]);
        assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    }
    let csv_a = std::fs::read_to_string(a.join("sensitivity.csv")).unwrap();
    assert_eq!(
        csv_a,
        std::fs::read_to_string(b.join("sensitivity.csv")).unwrap()
    );
    let mut lines = csv_a.lines();
    assert_eq!(
        lines.next(),
        Some("output,parameter,first_order,first_order_ci,total,total_ci")
    );
    let rows: Vec<Vec<String>> = lines
        .map(|l| l.split(',').map(str::to_string).collect())
        .collect();
    // Ten uncertain constants times (objectives + constrained quantities) of the quick demo.
    assert_eq!(rows.len() % 10, 0);
    assert!(rows.len() >= 20);
    let num = |r: &Vec<String>, i: usize| r[i].parse::<f64>().unwrap();
    for r in &rows {
        assert_eq!(r.len(), 6);
        for i in 2..6 {
            assert!(num(r, i).is_finite(), "{r:?}");
        }
        assert!(
            num(r, 3) >= 0.0 && num(r, 5) >= 0.0,
            "half-widths are not negative"
        );
    }
    // The onset voltage moves the electrochemistry and so the salt removal rate; the
    // channel's pressure drop does not depend on any ROM constant.
    let onset = rows
        .iter()
        .find(|r| r[0] == "salt_removal_rate_mol_m2_s" && r[1] == "onset_voltage")
        .expect("a row for the removal rate and the onset voltage");
    assert!(num(onset, 4) > 0.05, "{onset:?}");
    for r in rows.iter().filter(|r| r[0] == "pressure_drop") {
        assert!(num(r, 2).abs() < 1e-12 && num(r, 4).abs() < 1e-12, "{r:?}");
    }
    let svg = std::fs::read_to_string(a.join("sensitivity.svg")).unwrap();
    assert!(
        svg.starts_with("<svg") && svg.contains("onset_voltage"),
        "the figure names the parameters"
    );

    let bad = stria(&[
        "sensitivity",
        q,
        "--samples",
        "1",
        "--out",
        a.to_str().unwrap(),
    ]);
    assert_eq!(bad.status.code(), Some(2));
}
