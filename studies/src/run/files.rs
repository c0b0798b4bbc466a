//! The files of a run directory (layout in docs/formats.md#run-directory): names, headers, rows, checkpoint.

use std::collections::HashMap;
use std::path::{Path, PathBuf};

use optimizer::Evaluated;
use serde::{Deserialize, Serialize};

use crate::study::{Objective, Study};

/// Rows of evaluations.csv kept at most; later evaluations are counted but not written.
pub const EVALUATIONS_CSV_CAP: u64 = 1_000_000;

/// Version of checkpoint.json's layout (2: a snapshot plus journal.jsonl).
pub const CHECKPOINT_VERSION: u32 = 2;

/// Paths of a run directory.
#[derive(Debug, Clone)]
pub struct RunDir {
    /// The directory.
    pub dir: PathBuf,
}

impl RunDir {
    /// The names of the files `stria run` writes.
    pub const FILES: [&'static str; 7] = [
        "checkpoint.json",
        "evaluations.csv",
        "front.csv",
        "history.csv",
        "summary.json",
        "study.toml",
        "journal.jsonl",
    ];

    /// A run directory at `dir`.
    pub fn new(dir: &Path) -> RunDir {
        RunDir {
            dir: dir.to_path_buf(),
        }
    }
    /// study.toml
    pub fn study(&self) -> PathBuf {
        self.dir.join("study.toml")
    }
    /// checkpoint.json
    pub fn checkpoint(&self) -> PathBuf {
        self.dir.join("checkpoint.json")
    }
    /// evaluations.csv
    pub fn evaluations(&self) -> PathBuf {
        self.dir.join("evaluations.csv")
    }
    /// front.csv
    pub fn front(&self) -> PathBuf {
        self.dir.join("front.csv")
    }
    /// history.csv
    pub fn history(&self) -> PathBuf {
        self.dir.join("history.csv")
    }
    /// summary.json
    pub fn summary(&self) -> PathBuf {
        self.dir.join("summary.json")
    }
    /// journal.jsonl: one line per generation committed since the last snapshot.
    pub fn journal(&self) -> PathBuf {
        self.dir.join("journal.jsonl")
    }
    /// Every file `stria run` writes (what `--fresh` removes).
    pub fn all(&self) -> Vec<PathBuf> {
        RunDir::FILES.iter().map(|n| self.dir.join(n)).collect()
    }
}

/// The bookkeeping stored beside the optimiser state.
#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct Checkpoint {
    /// Layout version.
    pub version: u32,
    /// Fingerprint of the study.
    pub fingerprint: String,
    /// Byte length of evaluations.csv at this checkpoint.
    pub evaluations_csv_bytes: u64,
    /// Data rows in evaluations.csv at this checkpoint.
    pub evaluations_csv_rows: u64,
    /// Byte length of history.csv at this checkpoint.
    pub history_csv_bytes: u64,
    /// Wall-clock seconds spent by all invocations so far.
    pub elapsed_s: f64,
    /// The optimiser state (`optimizer::Run`).
    pub run: serde_json::Value,
}

/// One committed generation in journal.jsonl: what it evaluated (exactly, so a resume can
/// replay the generation from the last snapshot without evaluating again) and the lengths of
/// the appended files after it.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct JournalRecord {
    /// Generation number after the step.
    pub generation: u64,
    /// Evaluations done after the step.
    pub evaluations: u64,
    /// Byte length of evaluations.csv after the step.
    pub evaluations_csv_bytes: u64,
    /// Data rows in evaluations.csv after the step.
    pub evaluations_csv_rows: u64,
    /// Byte length of history.csv after the step.
    pub history_csv_bytes: u64,
    /// Wall-clock seconds of all invocations after the step.
    pub elapsed_s: f64,
    /// The step's evaluations, in order, as the optimiser recorded them.
    pub outcomes: Vec<Evaluated>,
}

/// The committed records of a journal's text, in order: every whole line (ending in a
/// newline) that parses; a last line without its newline is a write cut short by a kill and
/// is ignored. A damaged line followed by more lines is an error.
pub fn parse_journal(text: &str) -> Result<Vec<JournalRecord>, String> {
    let mut out = Vec::new();
    let mut lines = text.split_inclusive('\n').peekable();
    while let Some(line) = lines.next() {
        if !line.ends_with('\n') {
            break;
        }
        match serde_json::from_str::<JournalRecord>(line) {
            Ok(r) => out.push(r),
            Err(e) if lines.peek().is_some() => {
                return Err(format!("line {} is damaged ({e})", out.len() + 1));
            }
            Err(_) => break,
        }
    }
    Ok(out)
}

/// A number as written in every CSV: Rust's shortest round-trip form, so it is bit-stable.
pub fn num(x: f64) -> String {
    format!("{x}")
}

fn csv_line(fields: &[String]) -> String {
    let mut w = csv::WriterBuilder::new()
        .has_headers(false)
        .from_writer(Vec::new());
    // Writing to memory cannot fail.
    let _ = w.write_record(fields);
    let bytes = w.into_inner().unwrap_or_default();
    String::from_utf8(bytes).unwrap_or_default()
}

/// Header of evaluations.csv.
pub fn evaluations_header(study: &Study) -> String {
    let mut h: Vec<String> = vec!["id".into(), "generation".into()];
    h.extend(study.variables.iter().map(|v| v.kind.column().to_string()));
    h.extend(study.objectives.iter().map(|o| o.column().to_string()));
    h.extend(study.constraints.iter().map(|c| c.column().to_string()));
    h.push("feasible".into());
    h.push("reason".into());
    csv_line(&h)
}

/// The natural-direction objective values of an evaluated design.
pub fn natural_objectives(study: &Study, e: &Evaluated) -> Vec<f64> {
    study
        .objectives
        .iter()
        .zip(&e.objectives)
        .map(|(o, v)| if o.maximise() { -v } else { *v })
        .collect()
}

/// One evaluations.csv row (objectives in their natural direction; blank when failed).
pub fn evaluation_row(study: &Study, e: &Evaluated) -> String {
    let mut r: Vec<String> = vec![e.id.to_string(), e.generation.to_string()];
    r.extend(e.x.iter().map(|x| num(*x)));
    if e.failure.is_some() {
        r.extend(study.objectives.iter().map(|_| String::new()));
        r.extend(study.constraints.iter().map(|_| String::new()));
    } else {
        r.extend(natural_objectives(study, e).iter().map(|x| num(*x)));
        r.extend(e.constraints.iter().map(|x| num(*x)));
    }
    r.push(if e.is_feasible() { "true" } else { "false" }.into());
    let reason = match &e.failure {
        Some(f) => f.clone(),
        None if e.violation > 0.0 => {
            let broken: Vec<&str> = study
                .constraints
                .iter()
                .zip(&e.constraints)
                .filter(|(_, g)| **g > 0.0)
                .map(|(c, _)| c.key())
                .collect();
            format!("violates {}", broken.join(", "))
        }
        None => String::new(),
    };
    r.push(reason);
    csv_line(&r)
}

/// Extra columns of front.csv, in order (a column already an objective is left out).
pub const FRONT_EXTRAS: [&str; 8] = [
    "outlet_concentration_mol_m3",
    "salt_removal_fraction",
    "mean_current_density_A_m2",
    "specific_energy_kWh_m3",
    "active_area_fraction",
    "vortex_wavelength_m",
    "pitch_over_wavelength",
    "boundary_layer_thickness_mean_m",
];

fn extras_kept(study: &Study) -> Vec<&'static str> {
    FRONT_EXTRAS
        .iter()
        .copied()
        .filter(|c| {
            !study
                .objectives
                .iter()
                .any(|o: &Objective| o.column() == *c)
        })
        .collect()
}

/// Header of front.csv.
pub fn front_header(study: &Study) -> String {
    let mut h: Vec<String> = vec!["id".into()];
    h.extend(study.variables.iter().map(|v| v.kind.column().to_string()));
    h.extend(study.objectives.iter().map(|o| o.column().to_string()));
    h.extend(extras_kept(study).iter().map(|s| s.to_string()));
    csv_line(&h)
}

/// The extra front columns of one design, from a fresh model evaluation (blank if it fails,
/// which cannot happen for a design that was evaluated before: the model is deterministic).
pub fn front_extras(study: &Study, x: &[f64]) -> Vec<String> {
    let kept = extras_kept(study);
    let Ok((e, _)) = study.evaluate_point(x) else {
        return kept.iter().map(|_| String::new()).collect();
    };
    let pitch = study.design_at(x).membranes.pitch_m;
    let wl = e.performance.vortex_wavelength_m;
    kept.iter()
        .map(|c| match *c {
            "outlet_concentration_mol_m3" => num(e.performance.outlet_concentration_mol_m3),
            "salt_removal_fraction" => num(e.performance.salt_removal_fraction),
            "mean_current_density_A_m2" => num(e.performance.mean_current_density_A_m2),
            "specific_energy_kWh_m3" => num(e.performance.specific_energy_kWh_m3),
            "active_area_fraction" => num(e.performance.active_area_fraction),
            "vortex_wavelength_m" => wl.map(num).unwrap_or_default(),
            "pitch_over_wavelength" => wl.map(|l| num(pitch / l)).unwrap_or_default(),
            _ => num(e.transfer.boundary_layer_thickness_mean_m),
        })
        .collect()
}

/// front.csv text for the archive, sorted by id. `cache` keeps the extra columns of members
/// already computed (pruned to the current members, so it stays as small as the archive).
pub fn front_csv(
    study: &Study,
    members: &[Evaluated],
    cache: &mut HashMap<u64, Vec<String>>,
) -> String {
    let mut sorted: Vec<&Evaluated> = members.iter().collect();
    sorted.sort_by_key(|e| e.id);
    let ids: std::collections::HashSet<u64> = sorted.iter().map(|e| e.id).collect();
    cache.retain(|id, _| ids.contains(id));
    let mut out = front_header(study);
    for e in sorted {
        let extras = cache
            .entry(e.id)
            .or_insert_with(|| front_extras(study, &e.x))
            .clone();
        let mut r: Vec<String> = vec![e.id.to_string()];
        r.extend(e.x.iter().map(|x| num(*x)));
        r.extend(natural_objectives(study, e).iter().map(|x| num(*x)));
        r.extend(extras);
        out.push_str(&csv_line(&r));
    }
    out
}

/// Header of history.csv.
pub const HISTORY_HEADER: &str = "generation,evaluations,feasible_share,hypervolume,elapsed_s\n";

#[cfg(test)]
mod tests {
    use super::*;

    fn record(generation: u64) -> JournalRecord {
        JournalRecord {
            generation,
            evaluations: 16 * generation,
            evaluations_csv_bytes: 100 + generation,
            evaluations_csv_rows: 16 * generation,
            history_csv_bytes: 40 + generation,
            elapsed_s: 0.1 * generation as f64,
            outcomes: vec![
                Evaluated {
                    id: 3 * generation,
                    generation,
                    x: vec![1.0 / 3.0, 1e-300, 0.1 + 0.2],
                    objectives: vec![-2.0f64.sqrt(), 7.0],
                    constraints: vec![-0.25],
                    violation: 0.0,
                    failure: None,
                },
                Evaluated {
                    id: 3 * generation + 1,
                    generation,
                    x: vec![0.5, 2.0, 3.0],
                    objectives: vec![],
                    constraints: vec![],
                    violation: optimizer::problem::FAILED_VIOLATION,
                    failure: Some("target \"unreachable\"\nat 1.5 m".into()),
                },
            ],
        }
    }

    fn line(r: &JournalRecord) -> String {
        format!("{}\n", serde_json::to_string(r).unwrap())
    }

    #[test]
    fn journal_round_trips_bit_for_bit_and_ignores_a_torn_last_line() {
        let (a, b) = (record(1), record(2));
        let whole = line(&a) + &line(&b);
        assert_eq!(parse_journal(&whole).unwrap(), vec![a.clone(), b.clone()]);
        // Cut anywhere inside the second line: only the first record is committed.
        for cut in line(&a).len()..whole.len() {
            assert_eq!(parse_journal(&whole[..cut]).unwrap(), vec![a.clone()]);
        }
        assert!(parse_journal("").unwrap().is_empty());
    }

    #[test]
    fn a_damaged_line_inside_the_journal_is_an_error() {
        let text = line(&record(1)) + "{\"generation\": oops}\n" + &line(&record(3));
        assert!(parse_journal(&text).is_err());
    }
}
