//! `stria campaign`: many studies from one file, run on this machine (a bounded pool of
//! `stria run` processes) or as a Slurm job array (one task a scenario), then compared.
//!
//! Layout of a campaign directory (`docs/campaigns.md`):
//! - `campaign.json`: the campaign's name, base study and scenarios with their changes and
//!   fingerprints (`CAMPAIGN_FORMAT`); a second invocation on the directory resumes it and is
//!   refused if the scenarios changed;
//! - `<scenario>/scenario.toml`: the scenario's resolved study; `<scenario>/` is its run
//!   directory (`stria run <scenario>/scenario.toml --out <scenario>`, locally or as a task);
//! - `<scenario>/task.json`: exit code of the last local run or Slurm task of the scenario;
//! - `slurm/campaign.sbatch` and `slurm/logs/`: the job array script and its logs;
//! - `campaign.csv` and `campaign.html`: written by `stria campaign collect`.

pub mod file;
pub mod slurm;
pub mod status;

use std::os::unix::process::CommandExt;
use std::path::{Path, PathBuf};
use std::process::{Command, Stdio};
use std::sync::atomic::{AtomicBool, AtomicUsize, Ordering};
use std::time::Duration;

use serde::{Deserialize, Serialize};

use crate::error::{io_error, CliError};
use crate::fsio::write_atomic;

pub use file::{Campaign, Scenario};

/// Version of `campaign.json`; raise it when its layout changes.
pub const CAMPAIGN_FORMAT: u32 = 1;

/// Exit code of `stria run` for a paused run (stopped by a signal or its wall-clock budget
/// before the end; run it again to resume).
pub const PAUSED_EXIT: i32 = crate::run::EXIT_PAUSED as i32;

/// One scenario as recorded in `campaign.json`.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ScenarioRecord {
    /// Its name and directory.
    pub name: String,
    /// Its changes to the base study, as `section.key=value`.
    pub sets: Vec<String>,
    /// The fingerprint of its resolved study.
    pub fingerprint: String,
}

/// `campaign.json`.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct CampaignRecord {
    /// [`CAMPAIGN_FORMAT`].
    pub format: u32,
    /// The campaign's name.
    pub name: String,
    /// The campaign file it came from.
    pub campaign_file: String,
    /// The base study.
    pub study: String,
    /// Its scenarios, in order (the Slurm array index is the position).
    pub scenarios: Vec<ScenarioRecord>,
}

/// Options of `stria campaign FILE --out DIR`.
#[derive(Debug, Clone, Default)]
pub struct CampaignOptions {
    /// The campaign file.
    pub file: PathBuf,
    /// The campaign directory.
    pub out: PathBuf,
    /// Submit a Slurm job array instead of running locally.
    pub slurm: bool,
    /// Write the Slurm script and do not submit it.
    pub slurm_script_only: bool,
    /// Slurm overrides from the command line.
    pub partition: Option<String>,
    /// Slurm account override.
    pub account: Option<String>,
    /// Slurm time limit override.
    pub time: Option<String>,
    /// Slurm CPUs per task override.
    pub cpus_per_task: Option<usize>,
    /// Local: scenarios at once.
    pub parallel: Option<usize>,
    /// Local: threads per scenario.
    pub threads_per_scenario: Option<usize>,
}

/// The scenario's run directory inside the campaign directory.
pub fn scenario_dir(dir: &Path, name: &str) -> PathBuf {
    dir.join(name)
}

/// Check the whole campaign, then prepare its directory: `campaign.json` and each scenario's
/// resolved study. A directory holding another campaign (other scenarios or fingerprints) is
/// refused.
pub fn prepare(c: &Campaign, dir: &Path) -> Result<CampaignRecord, CliError> {
    let mut scenarios = Vec::with_capacity(c.scenarios.len());
    let mut studies = Vec::with_capacity(c.scenarios.len());
    for s in &c.scenarios {
        let study = c.study_of(s)?;
        scenarios.push(ScenarioRecord {
            name: s.name.clone(),
            sets: s.sets(),
            fingerprint: study.fingerprint(),
        });
        studies.push(study.to_resolved_toml());
    }
    let record = CampaignRecord {
        format: CAMPAIGN_FORMAT,
        name: c.name.clone(),
        campaign_file: c.file.display().to_string(),
        study: c.study.display().to_string(),
        scenarios,
    };
    let json_path = dir.join("campaign.json");
    if json_path.exists() {
        let old = load_record(dir)?;
        let old_keys: Vec<_> = old
            .scenarios
            .iter()
            .map(|s| (&s.name, &s.fingerprint))
            .collect();
        let new_keys: Vec<_> = record
            .scenarios
            .iter()
            .map(|s| (&s.name, &s.fingerprint))
            .collect();
        if old_keys != new_keys {
            let what = first_difference(&old, &record);
            return Err(CliError::input(
                &json_path,
                None,
                "scenarios",
                format!("this directory holds another campaign ({what})"),
                "the same campaign again (it resumes), or a new --out directory",
            ));
        }
    } else if dir.exists()
        && std::fs::read_dir(dir)
            .map_err(|e| io_error("read", dir, e))?
            .next()
            .is_some()
    {
        return Err(CliError::input(
            dir,
            None,
            "--out",
            "the directory is not empty and holds no campaign.json",
            "a new or empty directory, or the directory of the same campaign",
        ));
    }
    std::fs::create_dir_all(dir).map_err(|e| io_error("create", dir, e))?;
    for (s, text) in c.scenarios.iter().zip(&studies) {
        let sdir = scenario_dir(dir, &s.name);
        std::fs::create_dir_all(&sdir).map_err(|e| io_error("create", &sdir, e))?;
        let path = sdir.join("scenario.toml");
        if std::fs::read_to_string(&path).ok().as_deref() != Some(text.as_str()) {
            write_atomic(&path, text.as_bytes()).map_err(|e| io_error("write", &path, e))?;
        }
    }
    let json = serde_json::to_string_pretty(&record).expect("campaign record serialises");
    write_atomic(&json_path, json.as_bytes()).map_err(|e| io_error("write", &json_path, e))?;
    Ok(record)
}

fn first_difference(old: &CampaignRecord, new: &CampaignRecord) -> String {
    for (a, b) in old.scenarios.iter().zip(&new.scenarios) {
        if a.name != b.name {
            return format!("scenario `{}` where this campaign has `{}`", a.name, b.name);
        }
        if a.fingerprint != b.fingerprint {
            return format!("scenario `{}` has another study", a.name);
        }
    }
    format!(
        "{} scenarios where this campaign has {}",
        old.scenarios.len(),
        new.scenarios.len()
    )
}

/// Read `DIR/campaign.json`.
pub fn load_record(dir: &Path) -> Result<CampaignRecord, CliError> {
    let path = dir.join("campaign.json");
    let text = std::fs::read_to_string(&path).map_err(|e| {
        CliError::input(
            &path,
            None,
            "(file)",
            format!("cannot read it: {e}"),
            "a campaign directory made by `stria campaign FILE --out DIR`",
        )
    })?;
    let record: CampaignRecord = serde_json::from_str(&text).map_err(|e| {
        CliError::input(
            &path,
            Some(e.line()),
            "(json)",
            format!("not a campaign record: {e}"),
            "the campaign.json stria wrote",
        )
    })?;
    if record.format != CAMPAIGN_FORMAT {
        return Err(CliError::input(
            &path,
            None,
            "format",
            format!("campaign format {} is not this stria's", record.format),
            format!("format {CAMPAIGN_FORMAT}"),
        ));
    }
    for s in &record.scenarios {
        if !file::valid_name(&s.name) {
            return Err(CliError::input(
                &path,
                None,
                "scenarios",
                format!("`{}` is not a scenario name", s.name),
                "the campaign.json stria wrote",
            ));
        }
    }
    Ok(record)
}

/// What the last run of a scenario ended with (`<scenario>/task.json`).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct TaskRecord {
    /// Exit code of `stria run` (none when killed by a signal).
    pub exit_code: Option<i32>,
    /// `local` or `slurm`.
    pub executor: String,
}

fn write_task(dir: &Path, code: Option<i32>) -> Result<(), CliError> {
    let path = dir.join("task.json");
    let rec = TaskRecord {
        exit_code: code,
        executor: "local".into(),
    };
    let text = serde_json::to_string(&rec).expect("task record serialises");
    write_atomic(&path, text.as_bytes()).map_err(|e| io_error("write", &path, e))
}

/// How many scenarios run at once and with how many threads each, on `cores` cores.
pub fn share_cores(
    scenarios: usize,
    cores: usize,
    parallel: Option<usize>,
    threads: Option<usize>,
) -> (usize, usize) {
    let cores = cores.max(1);
    let parallel = parallel
        .unwrap_or_else(|| match threads {
            Some(t) => (cores / t.max(1)).max(1),
            None => cores,
        })
        .clamp(1, scenarios.max(1));
    let threads = threads.unwrap_or((cores / parallel).max(1));
    (parallel, threads)
}

/// `stria campaign FILE --out DIR`: check, prepare, then run locally or submit to Slurm.
pub fn run(opts: &CampaignOptions, stop: &AtomicBool) -> Result<i32, CliError> {
    let mut c = file::load(&opts.file)?;
    apply_overrides(&mut c, opts)?;
    let dir = &opts.out;
    let record = prepare(&c, dir)?;
    eprintln!(
        "stria campaign `{}`: {} scenario(s) of {}; directory {}",
        c.name,
        record.scenarios.len(),
        c.study.display(),
        dir.display()
    );
    if opts.slurm || opts.slurm_script_only {
        let exe = std::env::current_exe()
            .map_err(|e| io_error("find", Path::new("the stria executable"), e))?;
        let script = slurm::write_script(&c, &record, dir, &exe)?;
        if opts.slurm_script_only {
            eprintln!(
                "wrote {}; submit it with `sbatch {}`",
                script.display(),
                script.display()
            );
            return Ok(0);
        }
        let job = slurm::submit(&script)?;
        println!("{job}");
        eprintln!(
            "submitted job array {job}; `stria campaign status {}` shows each scenario, `stria campaign collect {}` compares them",
            dir.display(),
            dir.display()
        );
        return Ok(0);
    }
    run_local(&c, &record, dir, stop)
}

fn apply_overrides(c: &mut Campaign, o: &CampaignOptions) -> Result<(), CliError> {
    let cmd = Path::new("command line");
    for (name, v) in [
        ("--partition", &o.partition),
        ("--account", &o.account),
        ("--time", &o.time),
    ] {
        if let Some(v) = v {
            if !file::slurm_word_ok(v) {
                return Err(CliError::input(
                    cmd,
                    None,
                    name,
                    format!("`{v}` has characters Slurm options do not take"),
                    "letters, digits and : - _ . ,",
                ));
            }
        }
    }
    if o.partition.is_some() {
        c.slurm.partition = o.partition.clone();
    }
    if o.account.is_some() {
        c.slurm.account = o.account.clone();
    }
    if o.time.is_some() {
        c.slurm.time = o.time.clone();
    }
    for (name, v) in [
        ("--cpus-per-task", o.cpus_per_task),
        ("--parallel", o.parallel),
        ("--threads-per-scenario", o.threads_per_scenario),
    ] {
        if matches!(v, Some(n) if n == 0 || n > 4096) {
            return Err(CliError::input(
                cmd,
                None,
                name,
                format!("{} is out of range", v.unwrap_or(0)),
                "1 to 4096",
            ));
        }
    }
    if let Some(n) = o.cpus_per_task {
        c.slurm.cpus_per_task = n;
    }
    if o.parallel.is_some() {
        c.local.parallel = o.parallel;
    }
    if o.threads_per_scenario.is_some() {
        c.local.threads_per_scenario = o.threads_per_scenario;
    }
    Ok(())
}

/// Run the scenarios on this machine: a pool of at most `parallel` `stria run` processes at a
/// time, each with its share of the cores. A finished scenario is skipped; a paused or
/// interrupted one resumes. A stop request (Ctrl-C, SIGTERM) is passed on to the running
/// scenarios, which pause at the end of their generation; no new one starts.
fn run_local(
    c: &Campaign,
    record: &CampaignRecord,
    dir: &Path,
    stop: &AtomicBool,
) -> Result<i32, CliError> {
    let cores = std::thread::available_parallelism().map_or(1, |n| n.get());
    let (parallel, threads) = share_cores(
        record.scenarios.len(),
        cores,
        c.local.parallel,
        c.local.threads_per_scenario,
    );
    eprintln!(
        "running locally: {parallel} scenario(s) at a time, {threads} thread(s) each; logs in each scenario's run.log"
    );
    let exe = std::env::current_exe()
        .map_err(|e| io_error("find", Path::new("the stria executable"), e))?;
    let next = AtomicUsize::new(0);
    let outcomes: Vec<std::sync::Mutex<Option<RunResult>>> = record
        .scenarios
        .iter()
        .map(|_| std::sync::Mutex::new(None))
        .collect();
    std::thread::scope(|scope| {
        for _ in 0..parallel {
            scope.spawn(|| loop {
                if stop.load(Ordering::SeqCst) {
                    break;
                }
                let i = next.fetch_add(1, Ordering::SeqCst);
                let Some(s) = record.scenarios.get(i) else {
                    break;
                };
                let sdir = scenario_dir(dir, &s.name);
                let r = if status::is_finished(&sdir) {
                    Ok(Some(0))
                } else {
                    run_one(&exe, &sdir, threads, stop)
                };
                *outcomes[i].lock().expect("outcome lock") = Some(r);
            });
        }
    });
    let mut done = 0;
    let mut paused = 0;
    let mut failed = Vec::new();
    for (s, o) in record.scenarios.iter().zip(outcomes) {
        match o.into_inner().expect("outcome lock") {
            Some(Ok(Some(0))) => done += 1,
            Some(Ok(Some(PAUSED_EXIT))) | None => paused += 1,
            Some(Ok(code)) => failed.push(format!(
                "{} (exit {})",
                s.name,
                code.map_or("by signal".into(), |c| c.to_string())
            )),
            Some(Err(e)) => failed.push(format!("{} ({e})", s.name)),
        }
    }
    eprintln!(
        "{done} done, {paused} paused or not started, {} failed{}",
        failed.len(),
        if failed.is_empty() {
            String::new()
        } else {
            format!(": {}", failed.join("; "))
        }
    );
    if !failed.is_empty() {
        eprintln!(
            "a failed scenario's run.log says why; fix it and run the campaign again (finished scenarios are kept)"
        );
        return Ok(1);
    }
    if paused > 0 {
        eprintln!(
            "run the same command again to resume; `stria campaign status {}` shows each scenario",
            dir.display()
        );
        return Ok(PAUSED_EXIT);
    }
    eprintln!(
        "next: `stria campaign collect {}` compares the scenarios",
        dir.display()
    );
    Ok(0)
}

/// What one scenario's run ended with: its exit code (none if killed by a signal).
type RunResult = Result<Option<i32>, CliError>;

/// One scenario's `stria run`, its output appended to `run.log`; a stop request is passed on
/// as SIGTERM. Returns the exit code (none if it died by a signal).
fn run_one(exe: &Path, sdir: &Path, threads: usize, stop: &AtomicBool) -> RunResult {
    let log_path = sdir.join("run.log");
    let log = std::fs::OpenOptions::new()
        .create(true)
        .append(true)
        .open(&log_path)
        .map_err(|e| io_error("open", &log_path, e))?;
    let log2 = log
        .try_clone()
        .map_err(|e| io_error("open", &log_path, e))?;
    // Its own process group: a Ctrl-C at the terminal reaches only the campaign, which passes
    // it on once (a second signal would make a run leave at once, losing its generation).
    let mut child = Command::new(exe)
        .process_group(0)
        .arg("run")
        .arg(sdir.join("scenario.toml"))
        .arg("--out")
        .arg(sdir)
        .arg("--threads")
        .arg(threads.to_string())
        .stdin(Stdio::null())
        .stdout(log)
        .stderr(log2)
        .spawn()
        .map_err(|e| io_error("start", exe, e))?;
    let mut signalled = false;
    let status = loop {
        if let Some(st) = child
            .try_wait()
            .map_err(|e| io_error("wait for the run of", sdir, e))?
        {
            break st;
        }
        if stop.load(Ordering::SeqCst) && !signalled {
            terminate(child.id());
            signalled = true;
        }
        std::thread::sleep(Duration::from_millis(50));
    };
    let code = status.code();
    write_task(sdir, code)?;
    Ok(code)
}

fn terminate(pid: u32) {
    // SAFETY: kill(2) with a pid this process spawned and has not yet reaped.
    unsafe {
        libc::kill(pid as libc::pid_t, libc::SIGTERM);
    }
}
