//! `stria run`: a study's optimisation with a resumable run directory.
//!
//! Each generation, in this order: evaluation rows appended (fsync), history row appended
//! (fsync), then one line appended to journal.jsonl (fsync): the generation's evaluations,
//! exactly, and the byte lengths of the two CSV files after it. That line is the commit
//! point. Every `snapshot_every()` (and at the end) the whole optimiser state is written to
//! checkpoint.json atomically and the journal is emptied; front.csv and summary.json are
//! refreshed every few seconds. A run killed at any instant resumes from the snapshot,
//! replays the journalled generations (the optimiser draws the same designs from the same
//! state; their outcomes come from the journal, nothing is evaluated twice), cuts the rows of
//! the unfinished generation and repeats that generation exactly. Rewriting the whole state
//! every generation (the first layout) wrote gigabytes over a long run on a real disk; the
//! journal writes about as much per generation as evaluations.csv does.

pub mod files;
pub mod problem;
mod progress;
mod writer;

use std::collections::HashMap;
use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::Arc;
use std::time::{Duration, Instant};

use optimizer::{Run, StepReport, StopReason};

use crate::error::{io_error, CliError};
use crate::fsio::{
    create_dir_synced, read_input, remove_stale_temps, truncate_synced, write_atomic,
    STUDY_FILE_MAX_BYTES,
};
use crate::study::{read_fingerprint, read_model_revision, Study};
use files::{
    journal_line, parse_journal, seal, unseal, Checkpoint, JournalRecord, RunDir, Sealed,
    CHECKPOINT_MAX_BYTES, CHECKPOINT_VERSION, EVALUATIONS_CSV_CAP, HISTORY_HEADER,
    JOURNAL_MAX_BYTES, JOURNAL_SNAPSHOT_BYTES,
};
use problem::{run_config, Replay, StudyProblem};

/// Options of `stria run`.
#[derive(Debug, Clone, Default)]
pub struct RunOptions {
    /// The study file.
    pub study: PathBuf,
    /// Run directory (default `runs/<study file stem>`).
    pub out: Option<PathBuf>,
    /// Worker threads (default: rayon's choice, all cores).
    pub threads: Option<usize>,
    /// Evaluation budget override.
    pub max_evals: Option<u64>,
    /// Wall-clock budget override for this invocation, hours.
    pub hours: Option<f64>,
    /// Discard an existing run in the directory.
    pub fresh: bool,
    /// Rows of evaluations.csv kept at most (default [`EVALUATIONS_CSV_CAP`]).
    pub evaluations_csv_cap: Option<u64>,
    /// Raised (by the binary's Ctrl-C handler) to stop at the end of the current generation;
    /// the run is then paused and resumable. `None`: nothing stops it early.
    pub stop: Option<Arc<AtomicBool>>,
}

/// Why the loop ended, for the final message.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Ended {
    /// The optimiser is done (budget, completed, stalled).
    Finished(StopReason),
    /// Stopped before the end (a stop signal or the wall-clock budget); resumable. `stria run`
    /// exits with [`EXIT_PAUSED`].
    Paused(StopReason),
}

struct State {
    run: Run,
    eval_bytes: u64,
    eval_rows: u64,
    history_bytes: u64,
    elapsed_before_s: f64,
    cap_noted: bool,
    csv_cap: u64,
    derived_written: Option<Instant>,
    last_snapshot: Instant,
    /// How often the whole state is written ([`snapshot_every`], read once).
    snapshot_every: Duration,
    /// Bytes appended to the journal since the last snapshot.
    journal_bytes: u64,
    /// A snapshot is due once `journal_bytes` reaches this ([`journal_snapshot_bytes`]).
    journal_snapshot_bytes: u64,
    /// Journalled generations after the snapshot, to replay on resume.
    pending: Vec<JournalRecord>,
    /// Where the run directory's writes go (a writer thread during the run loop).
    out: writer::Writer,
}

/// Longest time front.csv and summary.json lag behind the checkpoint during a run.
const DERIVED_EVERY: Duration = Duration::from_secs(5);

/// How often the whole optimiser state is written (30 s; the environment variable
/// `STRIA_SNAPSHOT_SECONDS` overrides it, for tests of the replay).
fn snapshot_every() -> Duration {
    std::env::var("STRIA_SNAPSHOT_SECONDS")
        .ok()
        .and_then(|v| v.parse::<f64>().ok())
        .filter(|v| v.is_finite() && *v >= 0.0)
        .map_or(Duration::from_secs(30), Duration::from_secs_f64)
}

/// Journal growth that makes a snapshot due ([`JOURNAL_SNAPSHOT_BYTES`]; the environment
/// variable `STRIA_JOURNAL_SNAPSHOT_BYTES` overrides it, for tests).
fn journal_snapshot_bytes() -> u64 {
    std::env::var("STRIA_JOURNAL_SNAPSHOT_BYTES")
        .ok()
        .and_then(|v| v.parse::<u64>().ok())
        .unwrap_or(JOURNAL_SNAPSHOT_BYTES)
}

fn cmd_err(field: &str, message: impl Into<String>, allowed: &str) -> CliError {
    CliError::input("command line", None, field, message, allowed)
}

fn file_len(path: &Path) -> Result<u64, CliError> {
    std::fs::metadata(path)
        .map(|m| m.len())
        .map_err(|e| io_error("read", path, e))
}

/// The run directory used for a study when `--out` is not given.
pub fn default_dir(study: &Path) -> PathBuf {
    let stem = study
        .file_stem()
        .map(|s| s.to_string_lossy().to_string())
        .unwrap_or_else(|| "study".into());
    PathBuf::from("runs").join(stem)
}

/// Exit code of a run that paused before its end (a stop signal or the `--hours` budget) with
/// everything written, so a resume continues it: 75, `EX_TEMPFAIL` of BSD's sysexits.h
/// ("try again later"; common practice for batch schedulers that requeue).
pub const EXIT_PAUSED: u8 = 75;

/// Most worker threads `--threads` takes (more only adds start-up time: the results do not
/// depend on the thread count).
pub const MAX_THREADS: usize = 1024;

/// The command-line budget and thread options, checked against the same ranges as the study
/// keys they override (`optimizer.max_evaluations`, `optimizer.hours`).
fn check_options(opts: &RunOptions) -> Result<(), CliError> {
    let key_range = |key: &str| {
        crate::study::keys::spec("optimizer", key)
            .and_then(|s| s.range)
            .expect("the budget keys have ranges")
    };
    if let Some(n) = opts.max_evals {
        let r = key_range("max_evaluations");
        if !r.contains(n as f64) {
            return Err(cmd_err(
                "--max-evals",
                format!("{n} evaluations"),
                &format!(
                    "a whole number {} (as optimizer.max_evaluations)",
                    r.describe()
                ),
            ));
        }
    }
    if let Some(h) = opts.hours {
        let r = key_range("hours");
        if !r.contains(h) {
            return Err(cmd_err(
                "--hours",
                format!("{h} hours"),
                &format!("a number of hours {} (as optimizer.hours)", r.describe()),
            ));
        }
    }
    if let Some(t) = opts.threads {
        if !(1..=MAX_THREADS).contains(&t) {
            return Err(cmd_err(
                "--threads",
                format!("{t} threads"),
                &format!("a whole number from 1 to {MAX_THREADS}"),
            ));
        }
    }
    Ok(())
}

/// Run `stria run`.
pub fn run(opts: &RunOptions) -> Result<Ended, CliError> {
    let never = AtomicBool::new(false);
    let stop: &AtomicBool = opts.stop.as_deref().unwrap_or(&never);

    let (mut study, warnings) = Study::load(&opts.study)?;
    for w in &warnings {
        eprintln!("{w}");
    }
    check_options(opts)?;
    study.set_budget(opts.max_evals, opts.hours);
    if study.variables.is_empty() {
        return Err(CliError::input(
            &opts.study,
            None,
            "variables",
            "a run needs at least one design variable",
            "[variables.pitch], [variables.open_fraction], [variables.velocity], [variables.cell_pair_voltage], [variables.gap], [variables.length]",
        ));
    }
    let csv_cap = opts.evaluations_csv_cap.unwrap_or(EVALUATIONS_CSV_CAP);
    let dir = opts.out.clone().unwrap_or_else(|| default_dir(&opts.study));
    create_dir_synced(&dir).map_err(|e| io_error("create", &dir, e))?;
    let rd = RunDir::new(&dir);
    // One run per directory at a time: an advisory lock, released by the OS however the
    // process ends (so a killed run never leaves a stale lock behind).
    let lock_path = dir.join(".stria.lock");
    let lock = std::fs::OpenOptions::new()
        .create(true)
        .truncate(false)
        .write(true)
        .open(&lock_path)
        .map_err(|e| io_error("open", &lock_path, e))?;
    if lock.try_lock().is_err() {
        return Err(CliError::input(
            &opts.study,
            None,
            "--out",
            format!("another `stria run` is working in {}", dir.display()),
            "wait for it to finish (or stop it with Ctrl-C), or give another --out directory",
        ));
    }
    // Temporary files of atomic writes cut short by a kill (the lock says no other process
    // is writing here).
    remove_stale_temps(&dir, &RunDir::FILES).map_err(|e| io_error("clean", &dir, e))?;
    let problem = StudyProblem { study: &study };
    let fingerprint = study.fingerprint();

    if opts.fresh {
        for p in rd.all() {
            if std::fs::symlink_metadata(&p).is_ok() {
                std::fs::remove_file(&p).map_err(|e| io_error("remove", &p, e))?;
            }
        }
    } else if rd.study().exists() {
        let text = read_input(&rd.study(), STUDY_FILE_MAX_BYTES)
            .map_err(|e| io_error("read", &rd.study(), e))?;
        let old = read_fingerprint(&text).unwrap_or_default();
        let old_revision = read_model_revision(&text);
        if old != fingerprint && old_revision != Some(model::MODEL_REVISION) {
            let made_with = old_revision.map_or("an earlier model revision".to_string(), |r| {
                format!("model revision {r}")
            });
            return Err(CliError::input(
                &opts.study,
                None,
                "(study)",
                format!(
                    "{} holds a run made with {made_with}; this stria computes with revision {}, whose numbers differ, so the run cannot be resumed without mixing the two",
                    dir.display(),
                    model::MODEL_REVISION
                ),
                "--fresh to start the study again with this model, another --out directory, or the stria that made the run",
            ));
        }
        if old != fingerprint {
            return Err(CliError::input(
                &opts.study,
                None,
                "(study)",
                format!(
                    "{} holds a run of a different study (fingerprint {old}; this study's is {fingerprint}), so it cannot be resumed with this file",
                    dir.display()
                ),
                "the unchanged study to resume (only optimizer.max_evaluations, hours and stall_generations may change), --fresh to discard that run, or another --out directory",
            ));
        }
    }

    let mut state = if rd.checkpoint().exists() && !opts.fresh {
        resume(&rd, &study, &fingerprint, csv_cap)?
    } else {
        if !opts.fresh {
            refuse_work_without_checkpoint(&rd, &opts.study)?;
        }
        start(&rd, &study, &problem, &fingerprint, csv_cap)?
    };
    write_atomic(&rd.study(), study.to_resolved_toml().as_bytes())
        .map_err(|e| io_error("write", &rd.study(), e))?;

    let threads = opts.threads.unwrap_or_else(rayon::current_num_threads);
    let pool = rayon::ThreadPoolBuilder::new()
        .num_threads(threads)
        .build()
        .map_err(|source| CliError::Threads { threads, source })?;
    eprintln!(
        "stria run: \"{}\": {} variable(s), {} objective(s), {} constraint(s); {} with seed {}; budget {} evaluations{}; {} thread(s); directory {}",
        study.name,
        study.variables.len(),
        study.objectives.len(),
        study.constraints.len(),
        study.optimizer.algorithm.key(),
        study.optimizer.seed,
        study.optimizer.max_evaluations,
        study.optimizer.hours.map(|h| format!(" or {h} h")).unwrap_or_default(),
        threads,
        dir.display()
    );
    eprintln!(
        "evaluations.csv keeps at most {} rows; later evaluations count in the summary only",
        state.csv_cap
    );
    if !state.pending.is_empty() {
        let total = state.pending.len();
        let replayed = pool.install(|| replay_journal(&rd, &mut state, &problem))?;
        let elapsed = state.elapsed_before_s;
        write_snapshot(&rd, &mut state, elapsed, &fingerprint)?;
        eprintln!(
            "replayed {replayed} generation(s) from {} (their outcomes were recorded; nothing evaluated twice)",
            rd.journal().display()
        );
        if replayed < total {
            eprintln!(
                "the journal's last {} generation(s) do not follow from this run's settings (a lowered budget?): they are computed again",
                total - replayed
            );
        }
    }
    if state.run.evaluations() > 0 {
        eprintln!(
            "resuming at generation {} ({} evaluations done)",
            state.run.generation(),
            state.run.evaluations()
        );
    }

    let started = Instant::now();
    let deadline = study
        .optimizer
        .hours
        .map(|h| started + Duration::from_secs_f64(h * 3600.0));
    let mut front_cache: HashMap<u64, Vec<String>> = HashMap::new();
    let mut progress = progress::Progress::new(&study, state.run.evaluations(), deadline);
    // The commit of each generation overlaps the next one's evaluation (see `writer`).
    state.out = writer::Writer::background();
    let ended = pool.install(|| -> Result<Ended, CliError> {
        loop {
            if let Some(r) = state.run.finished() {
                return Ok(Ended::Finished(r));
            }
            if stop.load(Ordering::SeqCst) {
                return Ok(Ended::Paused(StopReason::StopRequested));
            }
            if deadline.is_some_and(|d| Instant::now() >= d) {
                return Ok(Ended::Paused(StopReason::Deadline));
            }
            let report = state.run.step(&problem);
            let elapsed = state.elapsed_before_s + started.elapsed().as_secs_f64();
            commit(
                &rd,
                &study,
                &mut state,
                &report,
                elapsed,
                &fingerprint,
                &mut front_cache,
                None,
            )?;
            progress.update(&report, state.run.archive().len());
        }
    });
    let ended = ended.and_then(|e| state.out.finish().map(|()| e))?; // (on Err: Drop flushes)
    progress.finish();
    let elapsed = state.elapsed_before_s + started.elapsed().as_secs_f64();
    let stop_reason = match ended {
        Ended::Finished(r) | Ended::Paused(r) => r,
    };
    write_snapshot(&rd, &mut state, elapsed, &fingerprint)?;
    write_front(&rd, &study, &state, &mut front_cache)?;
    write_summary(
        &rd,
        &study,
        &state,
        elapsed,
        &fingerprint,
        Some(stop_reason),
        matches!(ended, Ended::Finished(_)),
    )?;
    match ended {
        Ended::Finished(r) => eprintln!(
            "finished ({r}) after {} evaluations in {} generations; {} designs on the front; written to {}\n\
             next: the front is in {d}/front.csv; `stria report {d}` draws it with the unpatterned \
             reference, `stria eval --run {d} --pick ID` shows a design's sheet, and \
             `stria handoff {d} --pick ID` writes CFD case cards for chosen ids",
            state.run.evaluations(),
            state.run.generation(),
            state.run.archive().len(),
            dir.display(),
            d = dir.display()
        ),
        Ended::Paused(r) => eprintln!(
            "paused ({r}) after {} generations and {} evaluations; everything is written.\nresume with: stria run {} --out {}",
            state.run.generation(),
            state.run.evaluations(),
            opts.study.display(),
            dir.display()
        ),
    }
    Ok(ended)
}

/// A run directory without checkpoint.json but with finished work in it (rows past the
/// headers, journal lines) is refused: starting again would write over that work. (A
/// start killed before its first checkpoint leaves headers only, and starts again.)
fn refuse_work_without_checkpoint(rd: &RunDir, study: &Path) -> Result<(), CliError> {
    let mut found = Vec::new();
    for path in [rd.evaluations(), rd.history(), rd.journal()] {
        let text = match std::fs::symlink_metadata(&path) {
            Ok(m) if m.is_file() => {
                let mut head = Vec::new();
                let f = std::fs::File::open(&path).map_err(|e| io_error("read", &path, e))?;
                std::io::Read::read_to_end(&mut std::io::Read::take(f, 1 << 16), &mut head)
                    .map_err(|e| io_error("read", &path, e))?;
                Some((m.len(), head))
            }
            Ok(m) => Some((m.len(), b"\n\n".to_vec())),
            Err(e) if e.kind() == std::io::ErrorKind::NotFound => None,
            Err(e) => return Err(io_error("read", &path, e)),
        };
        let Some((len, head)) = text else { continue };
        let is_journal = path == rd.journal();
        // Past a header line (the CSVs) or anything at all (the journal).
        let work = if is_journal {
            len > 0
        } else {
            head.iter()
                .position(|b| *b == b'\n')
                .is_some_and(|i| (i as u64) + 1 < len)
        };
        if work {
            found.push(format!(
                "{} ({len} bytes)",
                path.file_name().unwrap_or_default().to_string_lossy()
            ));
        }
    }
    if found.is_empty() {
        return Ok(());
    }
    Err(CliError::input(
        study,
        None,
        "--out",
        format!(
            "{} has no checkpoint.json but holds the work of a run: {}; starting again would write over it",
            rd.dir.display(),
            found.join(", ")
        ),
        "--fresh to discard that work and start again, or another --out directory",
    ))
}

fn start(
    rd: &RunDir,
    study: &Study,
    problem: &StudyProblem,
    fingerprint: &str,
    csv_cap: u64,
) -> Result<State, CliError> {
    let run = Run::new(run_config(study), problem).map_err(|e| {
        CliError::input(
            &study.file,
            None,
            "optimizer",
            format!("the optimiser cannot run these settings: {e}"),
            "see docs/study-reference.md, section [optimizer]",
        )
    })?;
    let header = files::evaluations_header(study);
    write_atomic(&rd.evaluations(), header.as_bytes())
        .map_err(|e| io_error("write", &rd.evaluations(), e))?;
    write_atomic(&rd.history(), HISTORY_HEADER.as_bytes())
        .map_err(|e| io_error("write", &rd.history(), e))?;
    write_atomic(&rd.journal(), b"").map_err(|e| io_error("write", &rd.journal(), e))?;
    let mut state = State {
        run,
        eval_bytes: header.len() as u64,
        eval_rows: 0,
        history_bytes: HISTORY_HEADER.len() as u64,
        elapsed_before_s: 0.0,
        cap_noted: false,
        csv_cap,
        derived_written: None,
        last_snapshot: Instant::now(),
        snapshot_every: snapshot_every(),
        journal_bytes: 0,
        journal_snapshot_bytes: journal_snapshot_bytes(),
        pending: Vec::new(),
        out: writer::Writer::direct(),
    };
    write_atomic(&rd.study(), study.to_resolved_toml().as_bytes())
        .map_err(|e| io_error("write", &rd.study(), e))?;
    let mut cache = HashMap::new();
    write_front(rd, study, &state, &mut cache)?;
    write_summary(rd, study, &state, 0.0, fingerprint, None, false)?;
    write_checkpoint(rd, &mut state, 0.0, fingerprint)?;
    Ok(state)
}

fn resume(rd: &RunDir, study: &Study, fingerprint: &str, csv_cap: u64) -> Result<State, CliError> {
    let path = rd.checkpoint();
    let text = read_input(&path, CHECKPOINT_MAX_BYTES).map_err(|e| io_error("read", &path, e))?;
    let (text, sealed) = match unseal(text.trim_end()) {
        Sealed::Good(body) => (body, true),
        // Version 2 had no checksum; its version is checked below.
        Sealed::Unsealed => (text, false),
        Sealed::Bad => {
            return Err(CliError::Runtime(format!(
                "{} fails its checksum: it was changed or damaged after it was written, and resuming from it would not give the run's result; start afresh with --fresh",
                path.display()
            )))
        }
    };
    let cp: Checkpoint = serde_json::from_str(&text).map_err(|source| CliError::Damaged {
        path: path.clone(),
        source,
    })?;
    let readable = if sealed {
        cp.version == CHECKPOINT_VERSION
    } else {
        cp.version == 2
    };
    if !readable {
        return Err(CliError::Runtime(format!(
            "{} has layout version {}{}, this stria reads {CHECKPOINT_VERSION} (and 2); start afresh with --fresh",
            path.display(),
            cp.version,
            if sealed { "" } else { " without a checksum" }
        )));
    }
    if cp.fingerprint != fingerprint {
        return Err(CliError::input(
            &study.file,
            None,
            "(study)",
            "the checkpoint belongs to a different study",
            "the unchanged study, or --fresh",
        ));
    }
    // Budget keys may change on resume: patch them into the optimiser's configuration.
    let mut run_value = cp.run;
    if let Some(config) = run_value.get_mut("config").and_then(|c| c.as_object_mut()) {
        config.insert(
            "max_evaluations".into(),
            serde_json::json!(study.optimizer.max_evaluations),
        );
        config.insert(
            "stall_generations".into(),
            serde_json::json!(study.optimizer.stall_generations),
        );
    }
    let run = Run::from_json(&run_value.to_string()).map_err(|source| CliError::Optimizer {
        path: path.clone(),
        source,
    })?;
    // The generations committed to the journal after the snapshot (a journal not yet emptied
    // after a snapshot still holds older ones: skipped).
    let journal = rd.journal();
    let text = match read_input(&journal, JOURNAL_MAX_BYTES) {
        Ok(t) => t,
        Err(e) if e.kind() == std::io::ErrorKind::NotFound => String::new(),
        Err(e) => return Err(io_error("read", &journal, e)),
    };
    // A damaged line cuts the journal there: the generations before it are replayed, the
    // rest are computed again (nothing after the damage can be trusted).
    let read = parse_journal(&text, sealed);
    let mut damage = read.damage;
    let mut pending = Vec::new();
    for r in read.records {
        if r.generation <= run.generation() {
            continue;
        }
        if r.generation != run.generation() + 1 + pending.len() as u64 {
            damage.get_or_insert(format!(
                "generation {} follows the snapshot's {} out of order",
                r.generation,
                run.generation()
            ));
            break;
        }
        pending.push(r);
    }
    if let Some(why) = damage {
        eprintln!(
            "{} is damaged ({why}): cut there; the {} generation(s) before it are replayed and the rest computed again",
            journal.display(),
            pending.len()
        );
    }
    let state = State {
        run,
        eval_bytes: cp.evaluations_csv_bytes,
        eval_rows: cp.evaluations_csv_rows,
        history_bytes: cp.history_csv_bytes,
        elapsed_before_s: cp.elapsed_s,
        cap_noted: cp.evaluations_csv_rows >= csv_cap,
        csv_cap,
        derived_written: None,
        last_snapshot: Instant::now(),
        snapshot_every: snapshot_every(),
        journal_bytes: 0,
        journal_snapshot_bytes: journal_snapshot_bytes(),
        pending,
        out: writer::Writer::direct(),
    };
    if state.pending.is_empty() {
        cut_to_commit(rd, &state)?;
        // Nothing in the journal is needed (its whole lines are in the snapshot), but it may
        // end in a line torn by a kill: emptied, so that new lines do not fuse with that
        // fragment into a damaged line. (With pending lines, the snapshot after the replay
        // empties it.)
        write_atomic(&journal, b"").map_err(|e| io_error("write", &journal, e))?;
    }
    Ok(state)
}

/// Cut the appended files to the lengths of the last commit in `state` (the rows of an
/// unfinished generation go); a file shorter than that is damage.
fn cut_to_commit(rd: &RunDir, state: &State) -> Result<(), CliError> {
    for (file, len) in [
        (rd.evaluations(), state.eval_bytes),
        (rd.history(), state.history_bytes),
    ] {
        let now = file_len(&file)?;
        if now < len {
            return Err(CliError::Runtime(format!(
                "{} is shorter ({now} bytes) than at the last commit ({len} bytes); start afresh with --fresh",
                file.display()
            )));
        }
        truncate_synced(&file, len).map_err(|e| io_error("truncate", &file, e))?;
    }
    Ok(())
}

/// Replay the journalled generations after the checkpoint: step the optimiser with outcomes
/// looked up in the journal. A step that does not reproduce its record (the same generation,
/// evaluations and designs) is undone and the replay ends there: the budget keys may change
/// on resume, and a lowered budget changes the last steps; those generations are computed
/// again. Then the CSVs are cut to the last replayed commit. Returns the generations replayed.
fn replay_journal(
    rd: &RunDir,
    state: &mut State,
    problem: &StudyProblem,
) -> Result<usize, CliError> {
    let pending = std::mem::take(&mut state.pending);
    let replay = Replay::new(problem, &pending);
    let mut replayed = 0;
    for rec in &pending {
        if state.run.finished().is_some() {
            break;
        }
        let before = state.run.clone();
        state.run.step(&replay);
        if state.run.generation() != rec.generation
            || state.run.evaluations() != rec.evaluations
            || replay.misses() > 0
        {
            state.run = before;
            break;
        }
        state.eval_bytes = rec.evaluations_csv_bytes;
        state.eval_rows = rec.evaluations_csv_rows;
        state.history_bytes = rec.history_csv_bytes;
        state.elapsed_before_s = rec.elapsed_s;
        state.cap_noted = rec.evaluations_csv_rows >= state.csv_cap;
        replayed += 1;
    }
    cut_to_commit(rd, state)?;
    Ok(replayed)
}

#[allow(clippy::too_many_arguments)]
fn commit(
    rd: &RunDir,
    study: &Study,
    state: &mut State,
    report: &StepReport,
    elapsed: f64,
    fingerprint: &str,
    cache: &mut HashMap<u64, Vec<String>>,
    stop_reason: Option<StopReason>,
) -> Result<(), CliError> {
    let mut rows = String::new();
    for e in &report.new {
        if state.eval_rows >= state.csv_cap {
            if !state.cap_noted {
                eprintln!(
                    "evaluations.csv reached its cap of {} rows; later evaluations are counted in summary.json only",
                    state.csv_cap
                );
                state.cap_noted = true;
            }
            break;
        }
        rows.push_str(&files::evaluation_row(study, e));
        state.eval_rows += 1;
    }
    // The previous generation's writes, overlapped with this generation's evaluation, are
    // done before this one's are queued: one commit in flight at most.
    state.out.flush()?;
    if !rows.is_empty() {
        state.eval_bytes += rows.len() as u64;
        state.out.append(rd.evaluations(), rows.into_bytes())?;
    }
    let line = format!(
        "{},{},{},{},{:.3}\n",
        report.generation,
        report.evaluations,
        files::num(report.feasible_share),
        files::num(report.hypervolume),
        elapsed
    );
    state.history_bytes += line.len() as u64;
    state.out.append(rd.history(), line.into_bytes())?;
    let record = JournalRecord {
        generation: state.run.generation(),
        evaluations: state.run.evaluations(),
        evaluations_csv_bytes: state.eval_bytes,
        evaluations_csv_rows: state.eval_rows,
        history_csv_bytes: state.history_bytes,
        elapsed_s: elapsed,
        outcomes: report.new.clone(),
    };
    let entry = journal_line(&record).map_err(|e| CliError::json("journal", e))?;
    state.journal_bytes += entry.len() as u64;
    state.out.append(rd.journal(), entry.into_bytes())?;
    // front.csv and summary.json follow from the checkpoint (a resume rewrites them), so on
    // fast generations they are refreshed every few seconds rather than every generation.
    if !matches!(state.derived_written, Some(t) if t.elapsed() < DERIVED_EVERY) {
        write_front(rd, study, state, cache)?;
        write_summary(rd, study, state, elapsed, fingerprint, stop_reason, false)?;
        state.derived_written = Some(Instant::now());
    }
    if state.last_snapshot.elapsed() >= state.snapshot_every
        || state.journal_bytes >= state.journal_snapshot_bytes
    {
        write_snapshot(rd, state, elapsed, fingerprint)?;
    }
    Ok(())
}

/// The whole state to checkpoint.json (atomically), then the journal emptied. A kill between
/// the two leaves journal lines the snapshot already holds; a resume skips them.
fn write_snapshot(
    rd: &RunDir,
    state: &mut State,
    elapsed: f64,
    fingerprint: &str,
) -> Result<(), CliError> {
    write_checkpoint(rd, state, elapsed, fingerprint)?;
    state.out.replace(rd.journal(), Vec::new())?;
    state.last_snapshot = Instant::now();
    state.journal_bytes = 0;
    Ok(())
}

fn write_front(
    rd: &RunDir,
    study: &Study,
    state: &State,
    cache: &mut HashMap<u64, Vec<String>>,
) -> Result<(), CliError> {
    let text = files::front_csv(study, state.run.archive().members(), cache);
    state.out.replace(rd.front(), text.into_bytes())
}

fn write_checkpoint(
    rd: &RunDir,
    state: &mut State,
    elapsed: f64,
    fingerprint: &str,
) -> Result<(), CliError> {
    // The optimiser state is spliced in as its own JSON text (no second parse of a state
    // that can be large).
    let cp = Checkpoint {
        version: CHECKPOINT_VERSION,
        fingerprint: fingerprint.to_string(),
        evaluations_csv_bytes: state.eval_bytes,
        evaluations_csv_rows: state.eval_rows,
        history_csv_bytes: state.history_bytes,
        elapsed_s: elapsed,
        run: serde_json::Value::Null,
    };
    let head = serde_json::to_string(&cp).map_err(|e| CliError::json("checkpoint", e))?;
    let head = head
        .strip_suffix("\"run\":null}")
        .ok_or_else(|| CliError::Runtime("checkpoint: unexpected layout".into()))?;
    let text = seal(&format!("{head}\"run\":{}}}", state.run.to_json()));
    state.out.replace(rd.checkpoint(), text.into_bytes())
}

fn write_summary(
    rd: &RunDir,
    study: &Study,
    state: &State,
    elapsed: f64,
    fingerprint: &str,
    stop_reason: Option<StopReason>,
    finished: bool,
) -> Result<(), CliError> {
    let objectives: Vec<serde_json::Value> = study
        .objectives
        .iter()
        .map(|o| serde_json::json!({"key": o.key(), "column": o.column(), "unit": o.unit(), "direction": o.direction()}))
        .collect();
    let variables: Vec<serde_json::Value> = study
        .variables
        .iter()
        .map(|v| serde_json::json!({"key": v.column(), "unit": v.kind.unit(), "lower": v.lower, "upper": v.upper}))
        .collect();
    let constraints: Vec<serde_json::Value> = study
        .constraints
        .iter()
        .map(|c| serde_json::json!({"key": c.key(), "column": c.column(), "limit_si": c.limit()}))
        .collect();
    let summary = serde_json::json!({
        "study": study.name,
        "fingerprint": fingerprint,
        "algorithm": study.optimizer.algorithm.key(),
        "seed": study.optimizer.seed,
        "evaluations": state.run.evaluations(),
        "generations": state.run.generation(),
        "stop_reason": stop_reason.map(|r| r.to_string()),
        "front_size": state.run.archive().len(),
        "objectives": objectives,
        "variables": variables,
        "constraints": constraints,
        "currency": study.currency,
        "evaluations_csv_cap": state.csv_cap,
        "evaluations_csv_rows": state.eval_rows,
        "hypervolume": state.run.hv_history().last().copied().unwrap_or(0.0),
        "hv_reference": state.run.hv_reference(),
        "elapsed_s": elapsed,
        "finished": finished,
    });
    let text = serde_json::to_string_pretty(&summary).map_err(|e| CliError::json("summary", e))?;
    state.out.replace(rd.summary(), text.into_bytes())
}
