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
