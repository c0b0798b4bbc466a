//! The files of a run directory (layout in docs/formats.md#run-directory): names, headers, rows, checkpoint.

use std::collections::HashMap;
use std::path::{Path, PathBuf};

use optimizer::Evaluated;
use serde::{Deserialize, Serialize};

use crate::study::{Objective, Study};

/// Rows of evaluations.csv kept at most; later evaluations are counted but not written.
pub const EVALUATIONS_CSV_CAP: u64 = 1_000_000;

/// Version of checkpoint.json's layout (2: a snapshot plus journal.jsonl; 3: the checkpoint
/// and every journal line end in their CRC-32, see [`seal`]). A version-2 run resumes
/// unchecked; the next snapshot writes version 3.
pub const CHECKPOINT_VERSION: u32 = 3;

/// Largest checkpoint.json read (4 GiB; the state of a run with a bounded archive is a few
/// megabytes).
pub const CHECKPOINT_MAX_BYTES: u64 = 4 << 30;

/// A snapshot is written once the journal has grown by this much since the last one (as well
/// as every [`snapshot_every`](super) seconds), so the journal a resume reads stays small.
pub const JOURNAL_SNAPSHOT_BYTES: u64 = 32 << 20;

/// Largest journal.jsonl read (1 GiB: the snapshot rule keeps it near
/// [`JOURNAL_SNAPSHOT_BYTES`] plus one generation).
pub const JOURNAL_MAX_BYTES: u64 = 1 << 30;

/// The tail [`seal`] appends: `,"crc32":"` + 8 hex digits + `"}`.
const SEAL_LEN: usize = 20;

/// Seal a JSON object's text with the CRC-32 (IEEE, `crc32fast`) of its bytes, as one more
/// field at its end: `{...}` becomes `{...,"crc32":"1a2b3c4d"}`. The result is still one JSON
/// object; [`unseal`] checks and removes the field. Corruption that leaves the JSON
/// well-formed (a changed digit) is then seen.
pub fn seal(object: &str) -> String {
    debug_assert!(object.starts_with('{') && object.ends_with('}') && object.len() > 2);
    let crc = crc32fast::hash(object.as_bytes());
    format!("{},\"crc32\":\"{crc:08x}\"}}", &object[..object.len() - 1])
}

/// What [`unseal`] found.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum Sealed {
    /// The checksum matches: the object's text as it was sealed.
    Good(String),
    /// No checksum field at the end (a file of an older layout).
    Unsealed,
    /// A checksum that does not match the text.
    Bad,
}

/// Check and remove the checksum [`seal`] added.
pub fn unseal(text: &str) -> Sealed {
    let Some(cut) = text.len().checked_sub(SEAL_LEN) else {
        return Sealed::Unsealed;
    };
    let (Some(body), Some(tail)) = (text.get(..cut), text.get(cut..)) else {
        return Sealed::Unsealed;
    };
    let Some(hex) = tail
        .strip_prefix(",\"crc32\":\"")
        .and_then(|t| t.strip_suffix("\"}"))
    else {
        return Sealed::Unsealed;
    };
    let Ok(crc) = u32::from_str_radix(hex, 16) else {
        return Sealed::Bad;
    };
    let object = format!("{body}}}");
    if crc32fast::hash(object.as_bytes()) == crc {
        Sealed::Good(object)
    } else {
        Sealed::Bad
    }
}

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

/// A journal as read: the records up to the first damaged line, and what was wrong with that
/// line (`None`: every whole line was good).
#[derive(Debug, Clone, PartialEq)]
pub struct JournalRead {
    /// Records of the good lines before any damage, in order.
    pub records: Vec<JournalRecord>,
    /// The first damaged line, said in words, e.g. "line 7 fails its checksum".
    pub damage: Option<String>,
}

/// The committed records of a journal's text, in order: every whole line (ending in a
/// newline) that passes its checksum (`sealed`; a version-2 journal has none) and parses. A
/// last line without its newline is a write cut short by a kill and is ignored. At a damaged
/// line the journal is cut: the records before it are returned with the damage named.
pub fn parse_journal(text: &str, sealed: bool) -> JournalRead {
    let mut records = Vec::new();
    for (k, line) in text.split_inclusive('\n').enumerate() {
        let Some(line) = line.strip_suffix('\n') else {
            break;
        };
        let body = if sealed {
            match unseal(line) {
                Sealed::Good(b) => b,
                Sealed::Bad | Sealed::Unsealed => {
                    return JournalRead {
                        records,
                        damage: Some(format!("line {} fails its checksum", k + 1)),
                    }
                }
            }
        } else {
            line.to_string()
        };
        match serde_json::from_str::<JournalRecord>(&body) {
            Ok(r) => records.push(r),
            Err(e) => {
                return JournalRead {
                    records,
                    damage: Some(format!("line {} is not a journal record ({e})", k + 1)),
                }
            }
        }
    }
    JournalRead {
        records,
        damage: None,
    }
}

/// One journal line: the record's JSON, sealed, with its newline.
pub fn journal_line(record: &JournalRecord) -> Result<String, serde_json::Error> {
    let mut line = seal(&serde_json::to_string(record)?);
    line.push('\n');
    Ok(line)
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
    h.extend(study.variables.iter().map(|v| v.column()));
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
    h.extend(study.variables.iter().map(|v| v.column()));
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
        journal_line(r).unwrap()
    }

    #[test]
    fn journal_round_trips_bit_for_bit_and_ignores_a_torn_last_line() {
        let (a, b) = (record(1), record(2));
        let whole = line(&a) + &line(&b);
        let read = parse_journal(&whole, true);
        assert_eq!(read.records, vec![a.clone(), b.clone()]);
        assert_eq!(read.damage, None);
        // Cut anywhere inside the second line: only the first record is committed.
        for cut in line(&a).len()..whole.len() {
            let read = parse_journal(&whole[..cut], true);
            assert_eq!(read.records, vec![a.clone()]);
            assert_eq!(read.damage, None);
        }
        assert!(parse_journal("", true).records.is_empty());
    }

    #[test]
    fn a_damaged_line_cuts_the_journal_there() {
        let text = line(&record(1)) + "{\"generation\": oops}\n" + &line(&record(3));
        let read = parse_journal(&text, true);
        assert_eq!(read.records, vec![record(1)]);
        assert!(read.damage.unwrap().contains("line 2"));
    }

    #[test]
    fn one_changed_digit_fails_the_checksum() {
        // Corruption that leaves the JSON well-formed: every digit of the line changed in
        // turn is seen.
        let good = line(&record(2));
        for (i, c) in good.char_indices().filter(|(_, c)| c.is_ascii_digit()) {
            let other = if c == '9' { '8' } else { (c as u8 + 1) as char };
            let mut bad = good.clone();
            bad.replace_range(i..i + 1, &other.to_string());
            let text = line(&record(1)) + &bad + &line(&record(3));
            let read = parse_journal(&text, true);
            assert_eq!(read.records, vec![record(1)], "digit at {i}");
            assert!(read.damage.is_some());
        }
    }

    #[test]
    fn seal_and_unseal() {
        let sealed = seal("{\"a\":1}");
        assert!(serde_json::from_str::<serde_json::Value>(&sealed).is_ok());
        assert_eq!(unseal(&sealed), Sealed::Good("{\"a\":1}".into()));
        assert_eq!(unseal("{\"a\":1}"), Sealed::Unsealed);
        assert_eq!(unseal(&sealed.replace("\"a\":1", "\"a\":2")), Sealed::Bad);
        // A version-2 journal (no seals) still reads.
        let plain = serde_json::to_string(&record(1)).unwrap() + "\n";
        assert_eq!(parse_journal(&plain, false).records, vec![record(1)]);
        assert!(parse_journal(&plain, true).damage.is_some());
    }
}
