//! `stria campaign status DIR` and `stria campaign collect DIR`: the state of each scenario
//! from its run directory, and one table and page comparing the scenarios' results.

use std::fmt::Write as _;
use std::fs::File;
use std::path::Path;

use serde_json::Value;

use super::{load_record, scenario_dir, CampaignRecord, TaskRecord, PAUSED_EXIT};
use crate::error::{io_error, CliError};
use crate::fsio::write_atomic;

/// The state of one scenario.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum State {
    /// Its run finished (summary.json says so).
    Done,
    /// A `stria run` holds its directory's lock now.
    Running,
    /// Its run stopped before the end (paused, killed or preempted); running it again resumes.
    Paused,
    /// Its last run exited with an error (see its run.log or the Slurm log).
    Failed,
    /// Nothing of its run exists yet (or it waits in a queue).
    NotStarted,
}

impl State {
    /// The word shown and written for it.
    pub fn word(self) -> &'static str {
        match self {
            State::Done => "done",
            State::Running => "running",
            State::Paused => "paused",
            State::Failed => "failed",
            State::NotStarted => "not started",
        }
    }
}

fn summary(dir: &Path) -> Option<Value> {
    let text = std::fs::read_to_string(dir.join("summary.json")).ok()?;
    serde_json::from_str(&text).ok()
}

/// Whether the run in `dir` finished.
pub fn is_finished(dir: &Path) -> bool {
    summary(dir).and_then(|s| s.get("finished").and_then(Value::as_bool)) == Some(true)
}

fn is_locked(dir: &Path) -> bool {
    let Ok(f) = File::open(dir.join(".stria.lock")) else {
        return false;
    };
    matches!(f.try_lock(), Err(std::fs::TryLockError::WouldBlock))
}

fn last_task(dir: &Path) -> Option<TaskRecord> {
    let text = std::fs::read_to_string(dir.join("task.json")).ok()?;
    serde_json::from_str(&text).ok()
}

/// The state of the scenario whose run directory is `dir`.
pub fn state_of(dir: &Path) -> State {
    if is_locked(dir) {
        return State::Running;
    }
    if is_finished(dir) {
        return State::Done;
    }
    if let Some(TaskRecord {
        exit_code: Some(code),
        ..
    }) = last_task(dir)
    {
        if code != 0 && code != PAUSED_EXIT {
            return State::Failed;
        }
    }
    let started = ["checkpoint.json", "journal.jsonl", "summary.json"]
        .iter()
        .any(|f| dir.join(f).exists());
    if started {
        State::Paused
    } else {
        State::NotStarted
    }
}

/// `stria campaign status DIR`: one line a scenario, and the counts.
pub fn run_status(dir: &Path) -> Result<(), CliError> {
    let record = load_record(dir)?;
    let width = record
        .scenarios
        .iter()
        .map(|s| s.name.len())
        .max()
        .unwrap_or(8)
        .max(8);
    println!(
        "{:<width$}  {:<11}  {:>12}  {:>6}",
        "scenario", "state", "evaluations", "front"
    );
    let mut counts = std::collections::BTreeMap::new();
    for s in &record.scenarios {
        let sdir = scenario_dir(dir, &s.name);
        let state = state_of(&sdir);
        *counts.entry(state.word()).or_insert(0) += 1;
        let sum = summary(&sdir);
        let num = |k: &str| {
            sum.as_ref()
                .and_then(|v| v.get(k))
                .and_then(Value::as_u64)
                .map_or("-".to_string(), |n| n.to_string())
        };
        println!(
            "{:<width$}  {:<11}  {:>12}  {:>6}",
            s.name,
            state.word(),
            num("evaluations"),
            num("front_size")
        );
    }
    let line: Vec<String> = counts.iter().map(|(k, v)| format!("{v} {k}")).collect();
    println!("{}", line.join(", "));
    Ok(())
}

/// One scenario's row of `campaign.csv`.
struct Row {
    cells: Vec<String>,
}

/// Best value of each objective over the scenario's front (its natural direction), from
/// summary.json's objective list and front.csv.
fn best_of_front(sdir: &Path, sum: &Value) -> Vec<(String, Option<f64>)> {
    let objectives: Vec<(String, bool)> = sum
        .get("objectives")
        .and_then(Value::as_array)
        .map(|a| {
            a.iter()
                .filter_map(|o| {
                    Some((
                        o.get("column")?.as_str()?.to_string(),
                        o.get("direction")?.as_str()? == "max",
                    ))
                })
                .collect()
        })
        .unwrap_or_default();
    let mut best: Vec<Option<f64>> = vec![None; objectives.len()];
    if let Ok(mut rdr) = csv::Reader::from_path(sdir.join("front.csv")) {
        let header = rdr.headers().cloned().unwrap_or_default();
        let cols: Vec<Option<usize>> = objectives
            .iter()
            .map(|(c, _)| header.iter().position(|h| h == c))
            .collect();
        for rec in rdr.records().map_while(Result::ok) {
            for (k, col) in cols.iter().enumerate() {
                let Some(v) = col
                    .and_then(|i| rec.get(i))
                    .and_then(|t| t.parse::<f64>().ok())
                    .filter(|v| v.is_finite())
                else {
                    continue;
                };
                let better = match best[k] {
                    None => true,
                    Some(b) => {
                        if objectives[k].1 {
                            v > b
                        } else {
                            v < b
                        }
                    }
                };
                if better {
                    best[k] = Some(v);
                }
            }
        }
    }
    objectives
        .into_iter()
        .zip(best)
        .map(|((c, max), b)| (format!("best_{}_{c}", if max { "max" } else { "min" }), b))
        .collect()
}

fn fmt_value(v: Option<f64>) -> String {
    // Four significant digits: the model's outputs rest on constants known to a factor of two.
    v.map_or(String::new(), |x| format!("{x:.4e}"))
}

fn flatten(prefix: &str, v: &Value, out: &mut Vec<(String, String)>) {
    match v {
        Value::Object(m) => {
            for (k, x) in m {
                flatten(&format!("{prefix}.{k}"), x, out);
            }
        }
        Value::Number(n) => out.push((prefix.to_string(), n.to_string())),
        Value::Bool(b) => out.push((prefix.to_string(), b.to_string())),
        Value::String(s) => out.push((prefix.to_string(), s.clone())),
        _ => {}
    }
}

/// `stria campaign collect DIR`: `campaign.csv` (one row a scenario: its changes, state,
/// evaluations, front size, hypervolume, best of each objective, and the value of patterning
/// where the run records one) and `campaign.html` comparing them.
pub fn run_collect(dir: &Path) -> Result<(), CliError> {
    let record = load_record(dir)?;
    let (header, rows) = table(dir, &record);
    let mut w = csv::Writer::from_writer(Vec::new());
    w.write_record(&header)
        .map_err(|e| CliError::runtime(e.to_string()))?;
    for r in &rows {
        w.write_record(&r.cells)
            .map_err(|e| CliError::runtime(e.to_string()))?;
    }
    let bytes = w
        .into_inner()
        .map_err(|e| CliError::runtime(e.to_string()))?;
    let csv_path = dir.join("campaign.csv");
    write_atomic(&csv_path, &bytes).map_err(|e| io_error("write", &csv_path, e))?;
    let html_path = dir.join("campaign.html");
    let html = page(&record, &header, &rows);
    write_atomic(&html_path, html.as_bytes()).map_err(|e| io_error("write", &html_path, e))?;
    eprintln!(
        "wrote {} and {} ({} scenarios)",
        csv_path.display(),
        html_path.display(),
        rows.len()
    );
    Ok(())
}

fn table(dir: &Path, record: &CampaignRecord) -> (Vec<String>, Vec<Row>) {
    // Columns: the keys any scenario changes, then the results; every scenario fills each.
    let mut keys: Vec<String> = Vec::new();
    for s in &record.scenarios {
        for set in &s.sets {
            let k = set.split_once('=').map_or(set.as_str(), |(k, _)| k);
            if !keys.iter().any(|x| x == k) {
                keys.push(k.to_string());
            }
        }
    }
    let mut per: Vec<(Vec<(String, String)>, State)> = Vec::new();
    let mut extra: Vec<String> = Vec::new();
    for s in &record.scenarios {
        let sdir = scenario_dir(dir, &s.name);
        let state = state_of(&sdir);
        let mut cells: Vec<(String, String)> = Vec::new();
        if let Some(sum) = summary(&sdir) {
            for k in ["evaluations", "front_size", "hypervolume"] {
                if let Some(v) = sum.get(k) {
                    let text = match v.as_f64() {
                        Some(x) if k == "hypervolume" => fmt_value(Some(x)),
                        _ => v.to_string(),
                    };
                    cells.push((k.to_string(), text));
                }
            }
            for (c, b) in best_of_front(&sdir, &sum) {
                cells.push((c, fmt_value(b)));
            }
            if let Some(vp) = sum.get("value_of_patterning") {
                let mut flat = Vec::new();
                flatten("value_of_patterning", vp, &mut flat);
                cells.extend(flat);
            }
        }
        for (k, _) in &cells {
            if !extra.contains(k) {
                extra.push(k.clone());
            }
        }
        per.push((cells, state));
    }
    let mut header = vec!["scenario".to_string(), "state".to_string()];
    header.extend(keys.iter().cloned());
    header.extend(extra.iter().cloned());
    let rows = record
        .scenarios
        .iter()
        .zip(per)
        .map(|(s, (cells, state))| {
            let mut row = vec![s.name.clone(), state.word().to_string()];
            for k in &keys {
                let v = s
                    .sets
                    .iter()
                    .rev()
                    .find_map(|set| set.strip_prefix(&format!("{k}=")))
                    .unwrap_or("");
                row.push(v.to_string());
            }
            for k in &extra {
                row.push(
                    cells
                        .iter()
                        .find(|(c, _)| c == k)
                        .map_or(String::new(), |(_, v)| v.clone()),
                );
            }
            Row { cells: row }
        })
        .collect();
    (header, rows)
}

fn page(record: &CampaignRecord, header: &[String], rows: &[Row]) -> String {
    let esc = crate::report::html::esc;
    let mut h = String::new();
    let _ = write!(
        h,
        "<!DOCTYPE html>\n<html lang=\"en\"><head><meta charset=\"utf-8\"><title>stria campaign {}</title>\n\
         <style>body{{font-family:sans-serif;margin:2em;}} table{{border-collapse:collapse;}} \
         td,th{{border:1px solid #bbb;padding:0.25em 0.6em;text-align:right;}} \
         td:first-child,th{{text-align:left;}} .failed{{background:#fde2e2;}} .paused{{background:#fff4d6;}}</style>\n\
         </head><body>\n<h1>Campaign {}</h1>\n<p>Base study <code>{}</code>; {} scenario(s). \
         Each row is one scenario's run; the best values are over its front, in SI units as in \
         front.csv, shown to four significant digits (the model rests on constants known to a \
         factor of two: compare scenarios, do not read the digits as exact).</p>\n",
        esc(&record.name),
        esc(&record.name),
        esc(&record.study),
        rows.len()
    );
    h.push_str("<table>\n<tr>");
    for c in header {
        let _ = write!(h, "<th>{}</th>", esc(c));
    }
    h.push_str("</tr>\n");
    for r in rows {
        let class = match r.cells.get(1).map(String::as_str) {
            Some("failed") => " class=\"failed\"",
            Some("paused") | Some("not started") => " class=\"paused\"",
            _ => "",
        };
        let _ = write!(h, "<tr{class}>");
        for c in &r.cells {
            let _ = write!(h, "<td>{}</td>", esc(c));
        }
        h.push_str("</tr>\n");
    }
    h.push_str(
        "</table>\n<p>stria is a screening model: its results guide design and detailed simulation; \
         they do not certify a plant. Defer to local codes and licensed practice.</p>\n</body></html>\n",
    );
    h
}
