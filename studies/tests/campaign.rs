//! `stria campaign` end to end: a campaign checked as a whole before anything starts, local
//! execution that resumes after a stop, status and collect, and the same scenarios run as a
//! Slurm job array on a real one-node cluster (CI starts it: `.ci/slurm/up`), bit for bit
//! equal to the local run, including a task stopped by SIGTERM and requeued.

use std::path::{Path, PathBuf};
use std::process::{Command, Output, Stdio};
use std::time::{Duration, Instant};

fn stria() -> Command {
    Command::new(env!("CARGO_BIN_EXE_stria"))
}

fn demo() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("demo/quick.toml")
}

fn run(args: &[&str], cwd: &Path) -> Output {
    stria()
        .args(args)
        .current_dir(cwd)
        .stdin(Stdio::null())
        .output()
        .unwrap()
}

fn text(o: &Output) -> String {
    format!(
        "{}{}",
        String::from_utf8_lossy(&o.stdout),
        String::from_utf8_lossy(&o.stderr)
    )
}

/// A campaign of three scenarios of the quick demo (two feeds in a table, crossed with nothing;
/// plus a third row), each with `budget` evaluations.
fn write_campaign(dir: &Path, budget: u64, rows: &str) -> PathBuf {
    std::fs::copy(demo(), dir.join("quick.toml")).unwrap();
    std::fs::write(
        dir.join("wells.csv"),
        format!("scenario,water.feed_g_L,economics.electricity_price_per_kWh\n{rows}"),
    )
    .unwrap();
    let file = dir.join("wells.toml");
    std::fs::write(
        &file,
        format!(
            "[campaign]\nstudy = \"quick.toml\"\nscenarios_csv = \"wells.csv\"\nmax_evaluations = {budget}\n\n[local]\nparallel = 2\nthreads_per_scenario = 1\n"
        ),
    )
    .unwrap();
    file
}

const THREE: &str = "well-3,2.4,0.14\nwell-5,3.1,0.14\nwell-7,1.6,0.22\n";

/// Files a scenario's run leaves that must match bit for bit wherever it ran; history.csv is
/// compared without its wall-clock column.
fn assert_same_scenario(a: &Path, b: &Path) {
    for f in [
        "front.csv",
        "evaluations.csv",
        "study.toml",
        "scenario.toml",
    ] {
        let (x, y) = (
            std::fs::read(a.join(f)).unwrap(),
            std::fs::read(b.join(f)).unwrap(),
        );
        assert!(
            x == y,
            "{f} differs between {} and {}",
            a.display(),
            b.display()
        );
    }
    let strip = |p: &Path| -> Vec<String> {
        std::fs::read_to_string(p.join("history.csv"))
            .unwrap()
            .lines()
            .map(|l| l.rsplit_once(',').map_or(l, |(head, _)| head).to_string())
            .collect()
    };
    assert_eq!(strip(a), strip(b), "history.csv differs (elapsed_s aside)");
}

#[test]
fn a_bad_cell_names_the_table_line_and_column_and_nothing_starts() {
    let dir = tempfile::tempdir().unwrap();
    let file = write_campaign(dir.path(), 200, "well-3,2.4,0.14\nwell-5,-3.1,0.14\n");
    let out = dir.path().join("out");
    let o = run(
        &[
            "campaign",
            file.to_str().unwrap(),
            "--out",
            out.to_str().unwrap(),
        ],
        dir.path(),
    );
    let msg = text(&o);
    assert_eq!(o.status.code(), Some(2), "{msg}");
    assert!(msg.contains("wells.csv:3"), "{msg}");
    assert!(msg.contains("water.feed_g_L"), "{msg}");
    assert!(msg.contains("allowed"), "{msg}");
    assert!(
        !out.exists(),
        "nothing may be written before the whole campaign is checked"
    );

    // An unknown column is named with its did-you-mean.
    std::fs::write(
        dir.path().join("wells.csv"),
        "scenario,water.feed_gL\nwell-3,2.4\n",
    )
    .unwrap();
    let o = run(
        &[
            "campaign",
            file.to_str().unwrap(),
            "--out",
            out.to_str().unwrap(),
        ],
        dir.path(),
    );
    let msg = text(&o);
    assert_eq!(o.status.code(), Some(2), "{msg}");
    assert!(
        msg.contains("wells.csv:1") && msg.contains("feed_g_L"),
        "{msg}"
    );

    // A grid key that is not a study key is named at its line in the campaign file.
    std::fs::write(
        &file,
        "[campaign]\nstudy = \"quick.toml\"\n\n[grid]\n\"water.feed_gL\" = [1.0, 2.0]\n",
    )
    .unwrap();
    let o = run(
        &[
            "campaign",
            file.to_str().unwrap(),
            "--out",
            out.to_str().unwrap(),
        ],
        dir.path(),
    );
    let msg = text(&o);
    assert_eq!(o.status.code(), Some(2), "{msg}");
    assert!(msg.contains("wells.toml:5"), "{msg}");
    assert!(!out.exists());
}

#[test]
fn a_local_campaign_stops_resumes_and_collects() {
    let dir = tempfile::tempdir().unwrap();
    let file = write_campaign(dir.path(), 2400, THREE);
    let out = dir.path().join("out");
    let args = [
        "campaign",
        file.to_str().unwrap(),
        "--out",
        out.to_str().unwrap(),
    ];

    // Stop the campaign with SIGTERM once the first generations are committed; it passes the
    // stop on, the runs pause, and it exits with the paused code.
    let child = stria()
        .args(args)
        .current_dir(dir.path())
        .stdin(Stdio::null())
        .stdout(Stdio::null())
        .stderr(Stdio::piped())
        .spawn()
        .unwrap();
    let t0 = Instant::now();
    let journal = out.join("well-3").join("journal.jsonl");
    while std::fs::metadata(&journal).map_or(0, |m| m.len()) == 0 {
        assert!(
            t0.elapsed() < Duration::from_secs(120),
            "no generation committed"
        );
        std::thread::sleep(Duration::from_millis(20));
    }
    // SAFETY: kill(2) on our own child.
    unsafe {
        libc::kill(child.id() as libc::pid_t, libc::SIGTERM);
    }
    let o = child.wait_with_output().unwrap();
    let first = text(&o);
    let status = run(&["campaign", "status", out.to_str().unwrap()], dir.path());
    let st = text(&status);
    if o.status.code() == Some(75) {
        assert!(st.contains("paused"), "{first}\n{st}");
    } else {
        // The runs were quicker than the signal: every scenario is done.
        assert_eq!(o.status.code(), Some(0), "{first}");
    }

    // Run it again: it resumes and finishes.
    let o = run(&args, dir.path());
    assert_eq!(o.status.code(), Some(0), "{}", text(&o));
    let st = text(&run(
        &["campaign", "status", out.to_str().unwrap()],
        dir.path(),
    ));
    assert!(st.contains("3 done"), "{st}");

    // The same campaign uninterrupted gives the same files.
    let whole = dir.path().join("whole");
    let o = run(
        &[
            "campaign",
            file.to_str().unwrap(),
            "--out",
            whole.to_str().unwrap(),
        ],
        dir.path(),
    );
    assert_eq!(o.status.code(), Some(0), "{}", text(&o));
    for s in ["well-3", "well-5", "well-7"] {
        assert_same_scenario(&out.join(s), &whole.join(s));
    }

    // collect: one row a scenario with its changes and results.
    let o = run(&["campaign", "collect", out.to_str().unwrap()], dir.path());
    assert_eq!(o.status.code(), Some(0), "{}", text(&o));
    let csv = std::fs::read_to_string(out.join("campaign.csv")).unwrap();
    let lines: Vec<&str> = csv.lines().collect();
    assert_eq!(lines.len(), 4, "{csv}");
    assert!(
        lines[0].starts_with("scenario,state,water.feed_g_L"),
        "{csv}"
    );
    assert!(lines[1].starts_with("well-3,done,2.4,0.14"), "{csv}");
    let html = std::fs::read_to_string(out.join("campaign.html")).unwrap();
    assert!(html.contains("well-7") && html.contains("</table>"));

    // Another campaign in the same directory is refused.
    std::fs::write(
        dir.path().join("wells.csv"),
        "scenario,water.feed_g_L\nwell-9,2.0\n",
    )
    .unwrap();
    let o = run(&args, dir.path());
    assert_eq!(o.status.code(), Some(2), "{}", text(&o));
    assert!(text(&o).contains("another campaign"), "{}", text(&o));
}

/// Whether the Slurm test must run: in CI (`CI` set) or when asked (`STRIA_SLURM_TEST=1`). It
/// starts its own one-node cluster as root with `.ci/slurm/up` and stops it by pid after.
fn slurm_wanted() -> bool {
    std::env::var_os("CI").is_some() || std::env::var_os("STRIA_SLURM_TEST").is_some()
}

struct Cluster {
    state: PathBuf,
    ci: PathBuf,
}

impl Cluster {
    fn up(state: &Path) -> Cluster {
        let ci = Path::new(env!("CARGO_MANIFEST_DIR")).join("../.ci/slurm");
        let o = Command::new(ci.join("up"))
            .arg(state)
            .output()
            .unwrap_or_else(|e| panic!("cannot start the Slurm test cluster (.ci/slurm/up): {e}"));
        assert!(
            o.status.success(),
            "the Slurm test cluster did not start: {}",
            text(&o)
        );
        Cluster {
            state: state.to_path_buf(),
            ci,
        }
    }
    fn conf(&self) -> PathBuf {
        self.state.join("slurm.conf")
    }
    fn cmd(&self, prog: &str) -> Command {
        let mut c = Command::new(prog);
        c.env("SLURM_CONF", self.conf());
        c
    }
}

impl Drop for Cluster {
    fn drop(&mut self) {
        let _ = Command::new(self.ci.join("down")).arg(&self.state).status();
    }
}

fn wait_done(cl: &Cluster, dir: &Path, names: &[&str], limit: Duration) {
    let t0 = Instant::now();
    loop {
        let o = stria()
            .env("SLURM_CONF", cl.conf())
            .args(["campaign", "status", dir.to_str().unwrap()])
            .output()
            .unwrap();
        let st = text(&o);
        let done = names
            .iter()
            .filter(|n| {
                st.lines()
                    .any(|l| l.starts_with(*n) && l.contains(" done "))
            })
            .count();
        if done == names.len() {
            return;
        }
        assert!(!st.contains("failed"), "a scenario failed:\n{st}");
        // A requeued task waits for its begin time; release it at once.
        if let Ok(o) = cl.cmd("squeue").args(["-h", "-o", "%i %r"]).output() {
            for line in String::from_utf8_lossy(&o.stdout).lines() {
                if let Some(id) = line.strip_suffix(" BeginTime") {
                    let _ = cl
                        .cmd("scontrol")
                        .args(["update", &format!("JobId={id}"), "StartTime=now"])
                        .status();
                }
            }
        }
        assert!(
            t0.elapsed() < limit,
            "campaign not done in {limit:?}:\n{st}"
        );
        std::thread::sleep(Duration::from_millis(500));
    }
}

#[test]
fn a_slurm_job_array_gives_the_local_result_also_after_sigterm_and_requeue() {
    if !slurm_wanted() {
        println!(
            "note: the Slurm campaign test needs root, slurm-wlm and munge; it runs in CI or with STRIA_SLURM_TEST=1"
        );
        return;
    }
    let dir = tempfile::tempdir().unwrap();
    let cl = Cluster::up(&dir.path().join("slurm-state"));
    let names = ["well-3", "well-5", "well-7"];

    // Three scenarios through sbatch, against the same campaign run here.
    let file = write_campaign(dir.path(), 600, THREE);
    let local = dir.path().join("local");
    let o = run(
        &[
            "campaign",
            file.to_str().unwrap(),
            "--out",
            local.to_str().unwrap(),
        ],
        dir.path(),
    );
    assert_eq!(o.status.code(), Some(0), "{}", text(&o));
    let viaslurm = dir.path().join("slurm");
    let o = stria()
        .env("SLURM_CONF", cl.conf())
        .args(["campaign", file.to_str().unwrap(), "--out"])
        .arg(&viaslurm)
        .arg("--slurm")
        .current_dir(dir.path())
        .output()
        .unwrap();
    assert_eq!(o.status.code(), Some(0), "{}", text(&o));
    wait_done(&cl, &viaslurm, &names, Duration::from_secs(600));
    for n in names {
        assert_same_scenario(&local.join(n), &viaslurm.join(n));
    }

    // One long scenario: SIGTERM to the running task (as before a time limit or on
    // preemption); it pauses, requeues itself, resumes and ends with the local result.
    let long = dir.path().join("long");
    std::fs::create_dir_all(&long).unwrap();
    let file = write_campaign(&long, 30_000, "well-3,2.4,0.14\n");
    let local = long.join("local");
    let o = run(
        &[
            "campaign",
            file.to_str().unwrap(),
            "--out",
            local.to_str().unwrap(),
        ],
        &long,
    );
    assert_eq!(o.status.code(), Some(0), "{}", text(&o));
    let sl = long.join("slurm");
    let o = stria()
        .env("SLURM_CONF", cl.conf())
        .args(["campaign", file.to_str().unwrap(), "--out"])
        .arg(&sl)
        .arg("--slurm")
        .current_dir(&long)
        .output()
        .unwrap();
    assert_eq!(o.status.code(), Some(0), "{}", text(&o));
    let job = String::from_utf8_lossy(&o.stdout).trim().to_string();
    let journal = sl.join("well-3").join("journal.jsonl");
    let t0 = Instant::now();
    while std::fs::metadata(&journal).map_or(0, |m| m.len()) == 0 {
        assert!(
            t0.elapsed() < Duration::from_secs(300),
            "the task never committed a generation"
        );
        std::thread::sleep(Duration::from_millis(50));
    }
    let o = cl
        .cmd("scancel")
        .args(["--signal=TERM", &format!("{job}_0")])
        .output()
        .unwrap();
    assert!(o.status.success(), "scancel: {}", text(&o));
    wait_done(&cl, &sl, &["well-3"], Duration::from_secs(600));
    let logs: String = std::fs::read_dir(sl.join("slurm/logs"))
        .unwrap()
        .map(|e| std::fs::read_to_string(e.unwrap().path()).unwrap())
        .collect();
    assert!(
        logs.contains("requeueing") && logs.contains("restart 1"),
        "the task was not paused and requeued:\n{logs}"
    );
    assert_same_scenario(&local.join("well-3"), &sl.join("well-3"));
}
