//! The Slurm job array of a campaign: one array task a scenario, each `stria run` on the
//! scenario's resolved study in its own directory, so a preempted or requeued task resumes
//! where its run stopped. What the script asks of Slurm is in `docs/campaigns.md`.

use std::path::{Path, PathBuf};
use std::process::Command;

use super::{Campaign, CampaignRecord, PAUSED_EXIT};
use crate::error::{io_error, CliError};
use crate::fsio::write_atomic;

/// Quote a string for bash: single quotes, with each `'` written as `'\''`.
pub fn shell_quote(s: &str) -> String {
    format!("'{}'", s.replace('\'', r"'\''"))
}

/// The batch script of the campaign's job array.
pub fn script(c: &Campaign, record: &CampaignRecord, dir: &Path, exe: &Path) -> String {
    let o = &c.slurm;
    let n = record.scenarios.len();
    let mut array = format!("0-{}", n.saturating_sub(1));
    if let Some(m) = o.max_running {
        array.push_str(&format!("%{m}"));
    }
    let logs = dir.join("slurm").join("logs");
    let mut s = String::new();
    s.push_str("#!/bin/bash\n");
    s.push_str(&format!(
        "# stria campaign `{}`: one array task a scenario (written by `stria campaign --slurm`;\n\
         # see docs/campaigns.md). Each task runs `stria run` on its scenario's resolved study;\n\
         # a task stopped by SIGTERM (preemption, or the signal before its time limit) pauses at\n\
         # the end of its generation and requeues itself up to {} time(s) to go on.\n",
        c.name, o.max_requeues
    ));
    s.push_str(&format!("#SBATCH --job-name=stria-{}\n", c.name));
    s.push_str(&format!("#SBATCH --array={array}\n"));
    s.push_str("#SBATCH --ntasks=1\n");
    s.push_str(&format!("#SBATCH --cpus-per-task={}\n", o.cpus_per_task));
    s.push_str("#SBATCH --requeue\n");
    s.push_str(&format!(
        "#SBATCH --signal=TERM@{}\n",
        o.signal_before_end_s
    ));
    s.push_str("#SBATCH --open-mode=append\n");
    s.push_str(&format!(
        "#SBATCH --output={}\n",
        logs.join("%A_%a.log").display()
    ));
    if let Some(p) = &o.partition {
        s.push_str(&format!("#SBATCH --partition={p}\n"));
    }
    if let Some(a) = &o.account {
        s.push_str(&format!("#SBATCH --account={a}\n"));
    }
    if let Some(t) = &o.time {
        s.push_str(&format!("#SBATCH --time={t}\n"));
    }
    s.push_str("set -u\n");
    s.push_str(&format!(
        "STRIA={}\nCAMPAIGN={}\n",
        shell_quote(&exe.display().to_string()),
        shell_quote(&dir.display().to_string())
    ));
    s.push_str("NAMES=(\n");
    for sc in &record.scenarios {
        s.push_str(&format!("  {}\n", shell_quote(&sc.name)));
    }
    s.push_str(")\n");
    s.push_str(&format!(
        r#"name="${{NAMES[$SLURM_ARRAY_TASK_ID]}}"
dir="$CAMPAIGN/$name"
echo "stria campaign task ${{SLURM_ARRAY_JOB_ID}}_${{SLURM_ARRAY_TASK_ID}}: scenario $name, restart ${{SLURM_RESTART_COUNT:-0}}"
srun --ntasks=1 --cpus-per-task={cpus} "$STRIA" run "$dir/scenario.toml" --out "$dir" --threads {cpus}
code=$?
printf '{{"exit_code": %d, "executor": "slurm"}}\n' "$code" > "$dir/task.json.tmp" && mv -f "$dir/task.json.tmp" "$dir/task.json"
if [ "$code" -eq {paused} ] && [ "${{SLURM_RESTART_COUNT:-0}}" -lt {maxreq} ]; then
  echo "paused; requeueing to go on"
  scontrol requeue "${{SLURM_ARRAY_JOB_ID}}_${{SLURM_ARRAY_TASK_ID}}"
fi
exit "$code"
"#,
        cpus = o.cpus_per_task,
        paused = PAUSED_EXIT,
        maxreq = o.max_requeues,
    ));
    s
}

/// Write `DIR/slurm/campaign.sbatch` (and the log directory); returns its path.
pub fn write_script(
    c: &Campaign,
    record: &CampaignRecord,
    dir: &Path,
    exe: &Path,
) -> Result<PathBuf, CliError> {
    let dir = std::path::absolute(dir).map_err(|e| io_error("resolve", dir, e))?;
    let exe = std::path::absolute(exe).map_err(|e| io_error("resolve", exe, e))?;
    let logs = dir.join("slurm").join("logs");
    std::fs::create_dir_all(&logs).map_err(|e| io_error("create", &logs, e))?;
    let path = dir.join("slurm").join("campaign.sbatch");
    let text = script(c, record, &dir, &exe);
    write_atomic(&path, text.as_bytes()).map_err(|e| io_error("write", &path, e))?;
    Ok(path)
}

/// Submit the script with `sbatch --parsable`; returns the job id.
pub fn submit(script: &Path) -> Result<String, CliError> {
    let out = Command::new("sbatch")
        .arg("--parsable")
        .arg(script)
        .output()
        .map_err(|e| {
            CliError::runtime(format!(
                "cannot run sbatch ({e}); is Slurm installed here? `--slurm-script-only` writes the script without submitting it"
            ))
        })?;
    if !out.status.success() {
        return Err(CliError::runtime(format!(
            "sbatch refused {}: {}",
            script.display(),
            String::from_utf8_lossy(&out.stderr).trim()
        )));
    }
    let text = String::from_utf8_lossy(&out.stdout);
    let job = text.trim().split(';').next().unwrap_or("").to_string();
    if job.is_empty() {
        return Err(CliError::runtime("sbatch printed no job id".to_string()));
    }
    Ok(job)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn quoting_survives_quotes_and_spaces() {
        assert_eq!(shell_quote("a b"), "'a b'");
        assert_eq!(shell_quote("it's"), r"'it'\''s'");
    }
}
