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
    #[derive(serde::Deserialize)]
    struct File {
        rom: RomConstants,
    }
    let k = toml::from_str::<File>(&text).unwrap().rom;
    assert_eq!(k, cal.result.constants);
    // the posterior: its mean is the [rom] values, its samples load through one function
    let post = fit::posterior::load(&out).unwrap();
    assert_eq!(post.names.len(), 4);
    for (j, name) in post.names.iter().enumerate() {
        assert_eq!(solve::get(&k, name), Some(post.mean[j]), "{name}");
        let (lo, hi) = (post.interval_95[j][0], post.interval_95[j][1]);
        assert!(lo < post.mean[j] && post.mean[j] < hi, "{name}");
    }
    assert!(post.samples.len() >= 1000, "{} samples", post.samples.len());
    assert!(post.constants_at(&k, 0).is_some());
    assert!(
        (0.15..0.9).contains(&post.acceptance),
        "acceptance {}",
        post.acceptance
    );
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

/// The demo data cut to their three required columns: every point is then taken at the
/// study's conditions (one pitch, one open fraction), and the pattern constants and the
/// overlimiting conductance trade off exactly. The fit is refused, naming them with their
/// sigma against the prior width and their correlation; `--allow-weak` holds them at their
/// priors, says so and fits the rest.
#[test]
fn data_that_cannot_inform_the_constants_are_refused_unless_allow_weak() {
    let dir = tempfile::tempdir().unwrap();
    let full = std::fs::read_to_string(demo("cfd_results_demo.csv")).unwrap();
    let cut: String = full
        .lines()
        .filter(|l| !l.starts_with('#'))
        .map(|l| l.split(',').take(3).collect::<Vec<_>>().join(",") + "\n")
        .collect();
    let data = dir.path().join("cut.csv");
    std::fs::write(&data, cut).unwrap();
    let out = dir.path().join("cut.constants.toml");
    let run = |extra: &[&str]| {
        std::process::Command::new(env!("CARGO_BIN_EXE_stria"))
            .arg("fit")
            .arg(&data)
            .arg("--study")
            .arg(demo("quick.toml"))
            .arg("--out")
            .arg(&out)
            .args(extra)
            .output()
            .unwrap()
    };
    let o = run(&[]);
    let err = String::from_utf8_lossy(&o.stderr);
    assert_eq!(o.status.code(), Some(2), "{err}");
    for k in ["overlimiting_conductance", "lockin_width", "alpha_max"] {
        assert!(err.contains(&format!("cannot inform `{k}`")), "{err}");
    }
    assert!(!err.contains("cannot inform `onset_voltage`"), "{err}");
    assert!(
        err.contains("times its prior's width") && err.contains("correlation is"),
        "{err}"
    );
    assert!(
        err.contains("--allow-weak") && !err.contains("panicked"),
        "{err}"
    );
    assert!(!out.exists(), "nothing written when refused");

    let o = run(&["--allow-weak", "--steps", "300"]);
    let text = String::from_utf8_lossy(&o.stdout);
    assert_eq!(
        o.status.code(),
        Some(0),
        "{text}{}",
        String::from_utf8_lossy(&o.stderr)
    );
    assert!(
        text.contains("held at its prior (--allow-weak): alpha_max"),
        "{text}"
    );
    let post = fit::posterior::load(&out).unwrap();
    assert_eq!(post.names, vec!["onset_voltage".to_string()]);
    let mut held = post.held_at_prior.clone();
    held.sort();
    assert_eq!(
        held,
        vec!["alpha_max", "lockin_width", "overlimiting_conductance"]
    );
}

/// A damaged posterior is bad input (exit 2) naming the file and the section, for a study
/// that loads the file as for `posterior::load`.
#[test]
fn a_damaged_posterior_is_refused_where_it_is_read() {
    let dir = tempfile::tempdir().unwrap();
    let k = dir.path().join("k.toml");
    std::fs::write(
        &k,
        "[rom]\nonset_voltage = 18.0\n\n[posterior]\nformat = 1\nmethod = \"x\"\nnames = [\"onset_voltage\"]\n\
         mean = [18.0]\nmode = [18.0]\ninterval_95 = [[17.0, 19.0]]\nheld_at_prior = []\nwalkers = 4\n\
         steps = 10\nburn_in = 3\nseed = 1\nacceptance = 0.5\nautocorrelation_steps = [2.0]\n\
         covariance = [[0.25]]\nlaplace_covariance = [[0.25]]\nsamples = [[18.0, 1.0]]\n",
    )
    .unwrap();
    let e = fit::posterior::load(&k).unwrap_err();
    assert_eq!(e.exit_code(), 2);
    let msg = e.to_string();
    assert!(
        msg.contains("k.toml:4") && msg.contains("sample 1 has 2 values"),
        "{msg}"
    );
    let study_text = std::fs::read_to_string(demo("quick.toml"))
        .unwrap()
        .replace(
            "[optimizer]",
            &format!(
                "[rom]\nconstants_file = {:?}\n\n[optimizer]",
                k.to_str().unwrap()
            ),
        );
    let e = Study::from_text(&dir.path().join("s.toml"), &study_text, &[]).unwrap_err();
    assert!(e.to_string().contains("sample 1 has 2 values"), "{e}");
    // repaired, the study loads it and takes the [rom] value
    let good = std::fs::read_to_string(&k)
        .unwrap()
        .replace("[[18.0, 1.0]]", "[[18.0]]");
    std::fs::write(&k, good).unwrap();
    let (s, _) = Study::from_text(&dir.path().join("s.toml"), &study_text, &[]).unwrap();
    assert!((s.constants.onset_voltage - 18.0).abs() < 1e-12);
    assert_eq!(fit::posterior::load(&k).unwrap().samples, vec![vec![18.0]]);
}

/// Coverage of the stated 95 % intervals (the check a calibrated posterior must pass; the
/// frequency property of Bayesian intervals when the truth is drawn from the prior, e.g.
/// Cook, Gelman and Rubin, J. Comput. Graph. Stat. 15 (2006) 675): 50 seeded repeats, each a
/// truth of onset voltage and overlimiting conductance drawn from their priors
/// (model::constants::priors), an unpatterned current-voltage curve of the model at the truth
/// plus normal noise, and the fit's 95 % intervals. Pooled over both constants, the intervals
/// must contain the truth in 88-99 % of cases (binomial 95 % range for 100 intervals at 0.95
/// is about 90-99 %).
#[test]
fn stated_95_percent_intervals_cover_hidden_constants_in_88_to_99_percent_of_repeats() {
    use rand::Rng;
    let study = quick_study();
    let b = &study.baseline;
    let t = b.water.temperature_k;
    let keys = ["onset_voltage", "overlimiting_conductance"];
    let priors: Vec<_> = keys.iter().map(|k| solve::prior_of(k).unwrap()).collect();
    let cond = InterfaceConditions {
        salt: b.water.salt,
        temperature_k: t,
        concentration_mol_m3: 41.0,
        velocity_m_s: b.operation.velocity_m_s,
        gap_m: b.channel.gap_m,
        position_m: 0.5 * b.channel.length_m,
        pitch_m: 120e-6,
        open_fraction: 1.0,
        membrane_transport_number: b.membranes.cem_transport_number,
        spacer: b.channel.spacer,
        membrane: MembraneKind::Cem,
    };
    let settings = solve::Settings {
        steps: 300,
        walkers: 12,
        ..solve::Settings::default()
    };
    let started = std::time::Instant::now();
    let (mut covered, mut total) = (0usize, 0usize);
    let mut per_key = [0usize; 2];
    let mut acceptance = Vec::new();
    let mut tau: f64 = 0.0;
    for repeat in 0..50u64 {
        let mut rng = ChaCha8Rng::seed_from_u64(1000 + repeat);
        let values: Vec<f64> = priors.iter().map(|d| d.quantile(rng.random())).collect();
        let truth = RomConstants {
            onset_voltage: values[0],
            overlimiting_conductance: values[1],
            ..study.constants
        };
        let noise = 1.0; // A/m^2, a few % of the limiting current here
        let mut text = String::from(
            "# synthetic: the ROM at hidden constants plus seeded noise (test data)\n\
             curve,layer_voltage_V,current_density_A_m2,open_fraction\n",
        );
        for k in 0..14 {
            let v = 4.0 * k as f64;
            let i = interface::solve(&cond, v, &truth).current_density_a_m2
                + noise * solve::normal(&mut rng);
            text.push_str(&format!("flat,{},{},1\n", v * vt(t), i.max(0.0)));
        }
        let d = data::parse(Path::new("synthetic.csv"), &text).unwrap();
        let keys: Vec<String> = keys.iter().map(|k| k.to_string()).collect();
        let cal = fit::calibrate_with(
            &d,
            &study,
            &keys,
            &solve::Settings {
                seed: repeat,
                ..settings
            },
        )
        .unwrap();
        let r = &cal.result;
        acceptance.push(r.sampled.acceptance);
        tau = r
            .sampled
            .autocorrelation_steps
            .iter()
            .fold(tau, |a, b| a.max(*b));
        for j in 0..2 {
            let (lo, hi) = r.sampled.interval_95[j];
            let inside = lo <= values[j] && values[j] <= hi;
            covered += usize::from(inside);
            per_key[j] += usize::from(inside);
            total += 1;
        }
    }
    let rate = covered as f64 / total as f64;
    eprintln!(
        "coverage {covered}/{total} ({:.0} %; onset {}/50, conductance {}/50), acceptance {:.2}-{:.2}, \
         largest autocorrelation time {tau:.0} steps, {:.1} s",
        100.0 * rate,
        per_key[0],
        per_key[1],
        acceptance.iter().copied().fold(f64::INFINITY, f64::min),
        acceptance.iter().copied().fold(0.0, f64::max),
        started.elapsed().as_secs_f64()
    );
    assert!((0.88..=0.99).contains(&rate), "coverage {rate}");
}
