//! The failures of a hostile audit of the `stria` binary, each reproduced: inputs that are not
//! regular files or too large, budgets and thread counts out of range, run directories with a
//! missing checkpoint, symbolic links or temporary files left by a kill.

use std::path::{Path, PathBuf};
use std::process::{Command, Output, Stdio};
use std::time::{Duration, Instant};

fn stria(args: &[&str]) -> Output {
    Command::new(env!("CARGO_BIN_EXE_stria"))
        .args(args)
        .stdin(Stdio::null())
        .output()
        .expect("stria runs")
}

/// `stria` with a time limit: a command that blocks (a FIFO read) fails the test instead of
/// hanging it.
fn stria_within(args: &[&str], limit: Duration) -> Output {
    let mut child = Command::new(env!("CARGO_BIN_EXE_stria"))
        .args(args)
        .stdin(Stdio::null())
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .expect("stria runs");
    let t0 = Instant::now();
    while child.try_wait().unwrap().is_none() {
        if t0.elapsed() > limit {
            let _ = child.kill();
            let _ = child.wait();
            panic!("`stria {}` still runs after {limit:?}", args.join(" "));
        }
        std::thread::sleep(Duration::from_millis(20));
    }
    child.wait_with_output().unwrap()
}

fn stderr(o: &Output) -> String {
    String::from_utf8_lossy(&o.stderr).into_owned()
}

/// Bad input: exit 2, no panic, the file or option and `also` named, the allowed values given.
fn assert_bad(o: &Output, names: &str, also: &str) {
    let err = stderr(o);
    assert_eq!(o.status.code(), Some(2), "exit code; stderr:\n{err}");
    assert!(!err.contains("panicked"), "{err}");
    assert!(err.contains(names), "no `{names}` in:\n{err}");
    assert!(err.contains(also), "no `{also}` in:\n{err}");
    assert!(err.contains("allowed"), "no allowed values in:\n{err}");
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

/// The quick demo with a population of 16 and `evals` evaluations.
fn small_study(dir: &Path, evals: u64) -> PathBuf {
    study_with(
        dir,
        "s.toml",
        &[
            ("population = 40", "population = 16"),
            (
                "max_evaluations = 4000",
                &format!("max_evaluations = {evals}"),
            ),
        ],
    )
}

fn run(study: &Path, out: &Path, extra: &[&str]) -> Output {
    let mut args = vec![
        "run",
        study.to_str().unwrap(),
        "--out",
        out.to_str().unwrap(),
    ];
    args.extend_from_slice(extra);
    stria(&args)
}

fn run_ok(study: &Path, out: &Path, extra: &[&str]) {
    let o = run(study, out, extra);
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
}

#[cfg(unix)]
#[test]
fn inputs_that_are_not_regular_files_are_refused_at_once() {
    // Audit item 4: `mkfifo f; stria check f` blocked forever, and a constants file of
    // /dev/zero ate memory.
    let dir = tempfile::tempdir().unwrap();
    let fifo = dir.path().join("f.toml");
    let made = Command::new("mkfifo").arg(&fifo).status().unwrap();
    assert!(made.success());
    let o = stria_within(&["check", fifo.to_str().unwrap()], Duration::from_secs(20));
    assert_bad(&o, "f.toml", "not a regular file");

    let zero = study_with(
        dir.path(),
        "zero.toml",
        &[(
            "[optimizer]",
            "[rom]\nconstants_file = \"/dev/zero\"\n\n[optimizer]",
        )],
    );
    let o = stria_within(&["check", zero.to_str().unwrap()], Duration::from_secs(20));
    assert_bad(&o, "zero.toml", "rom.constants_file");
    assert!(stderr(&o).contains("not a regular file"), "{}", stderr(&o));
}

#[test]
fn input_files_beyond_their_size_limit_are_refused() {
    let dir = tempfile::tempdir().unwrap();
    let big = study_with(
        dir.path(),
        "big.toml",
        &[("[study]", &format!("# {}\n[study]", "x".repeat(1 << 20)))],
    );
    let o = stria(&["check", big.to_str().unwrap()]);
    assert_bad(&o, "big.toml", "limit of 1 MiB");
}

#[test]
fn budget_and_thread_options_have_the_study_keys_ranges() {
    // Audit item 3: `--hours 1e300` and `3e15` panicked (Duration overflow), while the study
    // key stops at 10,000 h. Item 9: `--threads 100000` tried for 25 s and exited 1.
    let dir = tempfile::tempdir().unwrap();
    let study = small_study(dir.path(), 64);
    let out = dir.path().join("r");
    for hours in ["1e300", "3e15", "10001", "0", "-1", "NaN"] {
        let o = run(&study, &out, &[&format!("--hours={hours}")]);
        assert_bad(&o, "--hours", "<= 10000");
    }
    let o = run(&study, &out, &["--max-evals", "20000000000000"]);
    assert_bad(&o, "--max-evals", "<= 1e13");
    let t0 = Instant::now();
    let o = run(&study, &out, &["--threads", "100000"]);
    assert_bad(&o, "--threads", "1 to 1024");
    assert!(
        t0.elapsed() < Duration::from_secs(20),
        "refusing --threads took {:?}",
        t0.elapsed()
    );
    // Nothing was written by the refused runs.
    assert!(!out.join("checkpoint.json").exists());
}

#[test]
fn a_missing_checkpoint_beside_run_files_is_refused_unless_fresh() {
    // Audit item 2: `rm r/checkpoint.json; stria run Q --out r` silently started again over
    // the run's files.
    let dir = tempfile::tempdir().unwrap();
    let study = small_study(dir.path(), 64);
    let out = dir.path().join("r");
    run_ok(&study, &out, &[]);
    let rows = std::fs::read(out.join("evaluations.csv")).unwrap();
    std::fs::remove_file(out.join("checkpoint.json")).unwrap();
    let o = run(&study, &out, &[]);
    assert_bad(&o, "--out", "evaluations.csv");
    assert!(stderr(&o).contains("--fresh"), "{}", stderr(&o));
    assert_eq!(std::fs::read(out.join("evaluations.csv")).unwrap(), rows);
    run_ok(&study, &out, &["--fresh"]);
    assert_eq!(std::fs::read(out.join("evaluations.csv")).unwrap(), rows);
}

#[test]
fn a_start_killed_before_its_first_checkpoint_starts_again() {
    // Headers only (what a start cut short before its checkpoint leaves): nothing to lose, so
    // the run starts without --fresh.
    let dir = tempfile::tempdir().unwrap();
    let study = small_study(dir.path(), 64);
    let whole = dir.path().join("whole");
    run_ok(&study, &whole, &[]);
    let out = dir.path().join("r");
    std::fs::create_dir(&out).unwrap();
    let header = std::fs::read_to_string(whole.join("evaluations.csv")).unwrap();
    let header = header.lines().next().unwrap().to_string() + "\n";
    std::fs::write(out.join("evaluations.csv"), header).unwrap();
    std::fs::write(out.join("journal.jsonl"), "").unwrap();
    run_ok(&study, &out, &[]);
    assert_eq!(
        std::fs::read(out.join("evaluations.csv")).unwrap(),
        std::fs::read(whole.join("evaluations.csv")).unwrap()
    );
}

#[cfg(unix)]
#[test]
fn a_resume_never_writes_through_a_symbolic_link() {
    // Audit item 9: a resume appended to the target of a symlinked evaluations.csv.
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("r");
    run_ok(&small_study(dir.path(), 64), &out, &[]);
    let elsewhere = dir.path().join("elsewhere.csv");
    std::fs::rename(out.join("evaluations.csv"), &elsewhere).unwrap();
    let before = std::fs::read(&elsewhere).unwrap();
    std::os::unix::fs::symlink(&elsewhere, out.join("evaluations.csv")).unwrap();
    let more = small_study(dir.path(), 128);
    let o = run(&more, &out, &[]);
    let err = stderr(&o);
    assert_eq!(o.status.code(), Some(1), "{err}");
    assert!(err.contains("symbolic link"), "{err}");
    assert!(!err.contains("panicked"), "{err}");
    assert_eq!(std::fs::read(&elsewhere).unwrap(), before);
}

#[test]
fn temporary_files_left_by_a_kill_are_removed() {
    // Audit item 9: a kill between creating an atomic write's temporary file and renaming it
    // left the file behind for good.
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("r");
    let study = small_study(dir.path(), 64);
    run_ok(&study, &out, &[]);
    let stale = [".checkpoint.json.tmp4242", ".front.csv.tmp17"];
    for n in stale {
        std::fs::write(out.join(n), "half").unwrap();
    }
    std::fs::write(out.join("notes.txt.tmp1"), "mine").unwrap();
    run_ok(&small_study(dir.path(), 96), &out, &[]);
    for n in stale {
        assert!(!out.join(n).exists(), "{n} is still there");
    }
    assert!(out.join("notes.txt.tmp1").exists());
}
