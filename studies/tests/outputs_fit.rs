//! `stria fit`: synthetic data fitted back to known constants, the demo data set, refusals and
//! bad CSV files.

use std::path::{Path, PathBuf};

use model::interface::{self, InterfaceConditions, MembraneKind};
use model::RomConstants;
use rand::SeedableRng;
use rand_chacha::ChaCha8Rng;
use studies::fit::{self, data, solve};
use studies::study::Study;

fn demo(name: &str) -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("demo")
        .join(name)
}

fn quick_study() -> Study {
    Study::load(&demo("quick.toml"))
        .expect("demo study loads")
        .0
}

/// Thermal voltage RT/F with CODATA 2018 R and F (docs/references.md#physical-constants), written out here so the test
/// does not lean on the model's own constant.
fn vt(t: f64) -> f64 {
    8.314462618 * t / 96485.33212
}

/// Curves of the model itself at `truth` at the interface of `membrane`: (label, pitch, open
/// fraction), 16 voltages each from 0 to 48 thermal units, plus seeded Gaussian noise of
/// `noise` A/m^2.
fn synthetic_at(truth: &RomConstants, study: &Study, noise: f64, membrane: MembraneKind) -> String {
    let b = &study.baseline;
    let tm = match membrane {
        MembraneKind::Cem => b.membranes.cem_transport_number,
        MembraneKind::Aem => b.membranes.aem_transport_number,
    };
    let t = b.water.temperature_k;
    let mut rng = ChaCha8Rng::seed_from_u64(42);
    let mut out = String::from(
        "# synthetic: the ROM at known constants plus seeded noise (test data)\n\
         curve,layer_voltage_V,current_density_A_m2,pitch_m,open_fraction,concentration_mol_m3\n",
    );
    for (label, pitch, f, c) in [
        ("flat", 120e-6, 1.0, 41.0),
        ("p120", 120e-6, 0.5, 41.0),
        ("p300", 300e-6, 0.6, 41.0),
        ("p60_dilute", 60e-6, 0.5, 20.0),
    ] {
        let cond = InterfaceConditions {
            salt: b.water.salt,
            temperature_k: t,
            concentration_mol_m3: c,
            velocity_m_s: b.operation.velocity_m_s,
            gap_m: b.channel.gap_m,
            position_m: 0.5 * b.channel.length_m,
            pitch_m: pitch,
            open_fraction: f,
            membrane_transport_number: tm,
            spacer: b.channel.spacer,
            membrane,
        };
        for k in 0..16 {
            let v = 3.0 * k as f64;
            let i = interface::solve(&cond, v, truth).current_density_a_m2
                + noise * solve::normal(&mut rng);
            out.push_str(&format!(
                "{label},{},{},{pitch},{f},{c}\n",
                v * vt(t),
                i.max(0.0)
            ));
        }
    }
    out
}

#[test]
fn synthetic_data_are_fitted_back_to_the_known_constants_within_the_stated_uncertainty() {
    fitted_back(quick_study(), MembraneKind::Cem);
}

#[test]
fn aem_data_of_a_study_that_patterns_the_aem_are_fitted_back_the_same_way() {
    // The hand-off cards of an AEM-only pattern describe the AEM interface; the fit then reads
    // the data as AEM data (its own Peers limit, with t- = 1 - t+, and transport number).
    let text = std::fs::read_to_string(demo("quick.toml"))
        .unwrap()
        .replacen("pattern_side = \"cem\"", "pattern_side = \"aem\"", 1);
    let (study, _) = Study::from_text(&demo("quick.toml"), &text, &[]).unwrap();
    assert_eq!(fit::fitted_membrane(&study).0, MembraneKind::Aem);
    fitted_back(study, MembraneKind::Aem);
}

fn fitted_back(study: Study, membrane: MembraneKind) {
    let truth = RomConstants {
        onset_voltage: 15.0,
        overlimiting_conductance: 0.08,
        lockin_width: 0.7,
        alpha_max: 0.38,
        ..study.constants
    };
    let noise = 0.3; // A/m^2, about 1 % of the limiting current here
    let text = synthetic_at(&truth, &study, noise, membrane);
    let d = data::parse(Path::new("synthetic.csv"), &text).unwrap();
    let cal = fit::calibrate(&d, &study, &[]).unwrap();
    for (key, value, sigma) in &cal.result.parameters {
        let t = solve::get(&truth, key).unwrap();
        eprintln!("{key}: true {t}, fitted {value} +- {sigma}");
        assert!(sigma.is_finite() && *sigma > 0.0, "{key}: sigma {sigma}");
        // within three stated standard deviations (99.7 % for a well-posed fit)
        assert!(
            (value - t).abs() <= 3.0 * sigma,
            "{key}: true {t}, fitted {value} +- {sigma}"
        );
        // and the uncertainty is useful: below 25 % of the value
        assert!(
            *sigma < 0.25 * t.abs(),
            "{key}: sigma {sigma} too large for {t}"
        );
    }
    // the misfit is the noise: RMS within 30 % of the noise level
    eprintln!("rms {}", cal.result.rms_a_m2);
    assert!(
        (cal.result.rms_a_m2 / noise - 1.0).abs() < 0.3,
        "rms {}",
        cal.result.rms_a_m2
    );
}

#[test]
fn the_demo_data_set_fits_with_a_sensible_error_and_writes_a_loadable_constants_file() {
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("calibrated.toml");
    let data_path = demo("cfd_results_demo.csv");
    fit::run(&data_path, &demo("quick.toml"), &[], Some(&out)).unwrap();
    let d = data::read(&data_path).unwrap();
    let cal = fit::calibrate(&d, &quick_study(), &[]).unwrap();
    let mean = d.points.iter().map(|p| p.current_density_a_m2).sum::<f64>() / d.points.len() as f64;
    eprintln!("demo rms {} A/m2, mean {} A/m2", cal.result.rms_a_m2, mean);
    // sensible: the invented data scatter by about 2 %; a fit within 6 % of the mean current
    assert!(
        cal.result.rms_a_m2 < 0.06 * mean,
        "rms {}",
        cal.result.rms_a_m2
    );
    // the constants file parses as RomConstants and a study loads it through [rom] constants_file
    let text = std::fs::read_to_string(&out).unwrap();
    let k: RomConstants = toml::from_str(&text).unwrap();
    assert_eq!(k, cal.result.constants);
    let study_text = std::fs::read_to_string(demo("quick.toml")).unwrap();
    let with_file = study_text.replace(
        "[optimizer]",
        &format!(
            "[rom]\nconstants_file = {:?}\n\n[optimizer]",
            out.to_str().unwrap()
        ),
    );
    let (s, _) = Study::from_text(&dir.path().join("s.toml"), &with_file, &[]).unwrap();
    assert_eq!(s.constants, k);
    // the plot is well-formed SVG
    let svg = std::fs::read_to_string(out.with_extension("fit.svg")).unwrap();
    roxmltree::Document::parse(&svg).unwrap();
}

fn run_on(text: &str) -> studies::error::CliError {
    let dir = tempfile::tempdir().unwrap();
    let p = dir.path().join("bad.csv");
    std::fs::write(&p, text).unwrap();
    let e = fit::run(
        &p,
        &demo("quick.toml"),
        &[],
        Some(&dir.path().join("k.toml")),
    )
    .unwrap_err();
    assert!(
        !dir.path().join("k.toml").exists(),
        "nothing written on bad input"
    );
    e
}

#[test]
fn bad_csv_gets_a_clear_message_naming_row_and_column_and_exit_2() {
    let h = "curve,layer_voltage_V,current_density_A_m2\n";
    for (text, line, col) in [
        ("curve,current_density_A_m2\na,1\n", ":1", "layer_voltage_V"),
        (
            &format!("{h}a,0.1,2\na,0.2,abc\n") as &str,
            ":3",
            "current_density_A_m2",
        ),
        (
            &format!("{h}a,0.1,2\na,0.2,-4\n"),
            ":3",
            "current_density_A_m2",
        ),
        (&format!("{h}a,x,2\n"), ":2", "layer_voltage_V"),
    ] {
        let e = run_on(text);
        let msg = e.to_string();
        assert_eq!(e.exit_code(), 2, "{msg}");
        assert!(
            msg.contains(&format!("bad.csv{line}")) && msg.contains(col),
            "{msg}"
        );
    }
    let e = run_on("");
    assert_eq!(e.exit_code(), 2);
    assert!(e.to_string().contains("empty"), "{e}");
}

#[test]
fn an_ill_posed_fit_is_refused_with_a_reason() {
    let study = quick_study();
    // only points below the limiting current: the overlimiting constants are not informed
    let t = study.baseline.water.temperature_k;
    let mut text = String::from("curve,layer_voltage_V,current_density_A_m2\n");
    for k in 1..10 {
        let v = 0.5 * k as f64;
        text.push_str(&format!(
            "low,{},{}\n",
            v * vt(t),
            30.0 * (1.0 - (-v / 2.0f64).exp())
        ));
    }
    let e = run_on(&text);
    assert_eq!(e.exit_code(), 2);
    assert!(
        e.to_string().contains("cannot inform `onset_voltage`"),
        "{e}"
    );
    // too few points for the constants asked
    let e = run_on("curve,layer_voltage_V,current_density_A_m2\na,0.5,40\na,1.0,60\n");
    assert!(e.to_string().contains("too few points"), "{e}");
    // an unknown constant
    let d = data::parse(Path::new("d.csv"), &text).unwrap();
    let e = fit::calibrate(&d, &study, &["onset".to_string()]).unwrap_err();
    assert!(e.to_string().contains("cannot be fitted"), "{e}");
}

#[test]
fn the_binary_exits_2_on_bad_data_and_writes_nothing() {
    let dir = tempfile::tempdir().unwrap();
    let p = dir.path().join("bad.csv");
    std::fs::write(
        &p,
        "curve,layer_voltage_V,current_density_A_m2\na,0.1,2\na,0.2,-1\n",
    )
    .unwrap();
    let out = std::process::Command::new(env!("CARGO_BIN_EXE_stria"))
        .arg("fit")
        .arg(&p)
        .arg("--study")
        .arg(demo("quick.toml"))
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(2));
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(
        err.contains("bad.csv:3")
            && err.contains("current_density_A_m2")
            && !err.contains("panicked"),
        "{err}"
    );
    assert_eq!(
        std::fs::read_dir(dir.path()).unwrap().count(),
        1,
        "nothing written"
    );
}
