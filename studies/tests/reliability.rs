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

#[test]
fn a_population_beyond_the_cap_is_refused() {
    // Audit item 7: `population = 1000000` passed `check` and needed 1.8 GB.
    let dir = tempfile::tempdir().unwrap();
    let p = study_with(
        dir.path(),
        "pop.toml",
        &[("population = 40", "population = 1000000")],
    );
    let o = stria(&["check", p.to_str().unwrap()]);
    assert_bad(&o, "pop.toml", "optimizer.population");
    assert!(stderr(&o).contains("<= 100000"), "{}", stderr(&o));
}

#[test]
fn one_changed_digit_in_the_checkpoint_is_refused() {
    // Audit item 5: a digit changed in the checkpoint's population resumed to a different
    // result. The checkpoint ends in its CRC-32 now.
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("r");
    run_ok(&small_study(dir.path(), 64), &out, &[]);
    let cp = out.join("checkpoint.json");
    let text = std::fs::read_to_string(&cp).unwrap();
    let at = text
        .find("\"population\":[")
        .expect("a population in the state");
    let (i, c) = text[at..]
        .char_indices()
        .find(|(_, c)| c.is_ascii_digit())
        .map(|(i, c)| (at + i, c))
        .unwrap();
    let other = if c == '9' { '8' } else { (c as u8 + 1) as char };
    let mut bad = text.clone();
    bad.replace_range(i..i + 1, &other.to_string());
    std::fs::write(&cp, bad).unwrap();
    let o = run(&small_study(dir.path(), 128), &out, &[]);
    let err = stderr(&o);
    assert_eq!(o.status.code(), Some(1), "{err}");
    assert!(err.contains("checksum"), "{err}");
    assert!(err.contains("--fresh"), "{err}");
}

/// Spawn `stria run` with snapshots only at the start (and the end), and SIGKILL it once
/// journal.jsonl holds `lines` whole lines.
fn kill_with_journal(study: &Path, out: &Path, lines: usize, env: &[(&str, &str)]) {
    let mut child = Command::new(env!("CARGO_BIN_EXE_stria"))
        .env("STRIA_SNAPSHOT_SECONDS", "300")
        .envs(env.iter().copied())
        .args([
            "run",
            study.to_str().unwrap(),
            "--out",
            out.to_str().unwrap(),
        ])
        .args(["--threads", "2"])
        .stdin(Stdio::null())
        .stdout(Stdio::null())
        .stderr(Stdio::null())
        .spawn()
        .unwrap();
    let t0 = Instant::now();
    let count = || {
        std::fs::read_to_string(out.join("history.csv"))
            .map(|t| t.matches('\n').count().saturating_sub(1))
            .unwrap_or(0)
    };
    while count() < lines {
        assert!(child.try_wait().unwrap().is_none(), "the run ended early");
        assert!(
            t0.elapsed() < Duration::from_secs(60),
            "no progress in 60 s"
        );
        std::thread::sleep(Duration::from_millis(5));
    }
    child.kill().unwrap();
    child.wait().unwrap();
}

#[test]
fn a_damaged_journal_is_cut_at_the_last_good_line_and_replayed_to_it() {
    // Audit item 5: a changed digit in a journal line went unseen (or, in a line that no
    // longer parsed, the whole journal was refused). Each line ends in its CRC-32: the
    // journal is cut at the damaged line, the lines before it are replayed, the rest computed
    // again, and the result is that of an uninterrupted run.
    let dir = tempfile::tempdir().unwrap();
    let study = small_study(dir.path(), 4000);
    let out = dir.path().join("r");
    kill_with_journal(&study, &out, 6, &[]);
    let journal = out.join("journal.jsonl");
    let text = std::fs::read_to_string(&journal).unwrap();
    let whole_lines = text.matches('\n').count();
    assert!(whole_lines >= 3, "{whole_lines} journal lines");
    // A digit of an objective in the second line, changed.
    let second = text.find('\n').unwrap() + 1;
    let at = second + text[second..].find("\"objectives\":[").unwrap();
    let i = at + text[at..].find(|c: char| c.is_ascii_digit()).unwrap();
    let c = text.as_bytes()[i] as char;
    let other = if c == '9' { '8' } else { (c as u8 + 1) as char };
    let mut bad = text.clone();
    bad.replace_range(i..i + 1, &other.to_string());
    std::fs::write(&journal, bad).unwrap();

    let o = run(&study, &out, &["--max-evals", "480"]);
    let err = stderr(&o);
    assert_eq!(o.status.code(), Some(0), "{err}");
    assert!(err.contains("line 2 fails its checksum"), "{err}");
    assert!(err.contains("replayed 1 generation"), "{err}");
    let straight = dir.path().join("straight");
    run_ok(&study, &straight, &["--max-evals", "480"]);
    for f in ["front.csv", "evaluations.csv"] {
        assert!(
            std::fs::read(out.join(f)).unwrap() == std::fs::read(straight.join(f)).unwrap(),
            "{f} differs from an uninterrupted run"
        );
    }
}

#[test]
fn the_journal_is_snapshot_by_size_too() {
    // Audit item 7: the journal was bounded by time only (45 MB per 30 s on two cores, all
    // read into memory on resume). With the size threshold at 20 kB (a generation of 16 is
    // about 5 kB), the journal never holds much more than that, however long the interval.
    let dir = tempfile::tempdir().unwrap();
    let study = small_study(dir.path(), 4000);
    let out = dir.path().join("r");
    kill_with_journal(
        &study,
        &out,
        40,
        &[("STRIA_JOURNAL_SNAPSHOT_BYTES", "20000")],
    );
    let journal = std::fs::read_to_string(out.join("journal.jsonl")).unwrap();
    let longest = journal.lines().map(str::len).max().unwrap_or(0);
    assert!(
        journal.len() <= 20_000 + 2 * longest + 2,
        "journal of {} bytes",
        journal.len()
    );
    let cp = std::fs::read_to_string(out.join("checkpoint.json")).unwrap();
    assert!(
        !cp.contains("\"generation\":0,"),
        "no snapshot after the start"
    );
}

/// A finished run of 64 evaluations in `dir/r`, with its study.
fn finished_run(dir: &Path) -> (PathBuf, PathBuf) {
    let study = small_study(dir, 64);
    let out = dir.join("r");
    run_ok(&study, &out, &[]);
    (study, out)
}

#[test]
fn handoff_refuses_a_study_toml_edited_after_the_run() {
    // Audit item 6: `handoff` used a hand-edited study.toml without checking its
    // fingerprint, so the cards described another study than the run's designs.
    let dir = tempfile::tempdir().unwrap();
    let (_, out) = finished_run(dir.path());
    let front = std::fs::read_to_string(out.join("front.csv")).unwrap();
    let id = front
        .lines()
        .nth(1)
        .unwrap()
        .split(',')
        .next()
        .unwrap()
        .to_string();
    let path = out.join("study.toml");
    let text = std::fs::read_to_string(&path).unwrap();
    let at = text.find("gap_mm = ").expect("a gap in the resolved study");
    let end = at + text[at..].find('\n').unwrap();
    let edited = format!("{}gap_mm = 0.9{}", &text[..at], &text[end..]);
    assert_ne!(edited, text);
    std::fs::write(&path, edited).unwrap();
    let o = stria(&["handoff", out.to_str().unwrap(), "--pick", &id]);
    assert_bad(&o, "study.toml", "fingerprint");
    assert!(!out.join("handoff").exists());
}

#[test]
fn report_leaves_out_front_values_it_cannot_draw_and_a_torn_history_line() {
    // Audit item 6: `report` drew NaN, inf or 1e300 from a front.csv, and a torn last line
    // of history.csv (a kill during the append) made it fail as bad input until a resume.
    let dir = tempfile::tempdir().unwrap();
    let (_, out) = finished_run(dir.path());
    let front = std::fs::read_to_string(out.join("front.csv")).unwrap();
    let mut lines: Vec<String> = front.lines().map(String::from).collect();
    assert!(lines.len() >= 5, "a front of {} rows", lines.len() - 1);
    for (k, bad) in [(1, "NaN"), (2, "inf"), (3, "1e300")] {
        let mut cells: Vec<&str> = lines[k].split(',').collect();
        let last = cells.len() - 1;
        cells[last - 1] = bad;
        lines[k] = cells.join(",");
    }
    std::fs::write(out.join("front.csv"), lines.join("\n") + "\n").unwrap();
    let mut history = std::fs::OpenOptions::new()
        .append(true)
        .open(out.join("history.csv"))
        .unwrap();
    std::io::Write::write_all(&mut history, b"99,1584,0.7").unwrap();
    let o = stria(&["report", out.to_str().unwrap()]);
    let err = stderr(&o);
    assert_eq!(o.status.code(), Some(0), "{err}");
    assert_eq!(err.matches("is left out").count(), 3, "{err}");
    let page = std::fs::read_to_string(out.join("report").join("report.html")).unwrap();
    for word in ["NaN", ">inf<", "\"inf\"", "1e300", "1.0e300"] {
        assert!(!page.contains(word), "`{word}` in the report");
    }
}
