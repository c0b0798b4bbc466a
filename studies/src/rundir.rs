//! Reading a run directory (written by `stria run`) for reports and hand-off cards.

use std::path::{Path, PathBuf};

use crate::error::CliError;
use crate::study::{read_fingerprint, Study};

/// One row of `front.csv`: its id, and every column as written and as a number.
#[derive(Debug, Clone, PartialEq)]
pub struct FrontRow {
    /// Design id.
    pub id: u64,
    /// The line in front.csv.
    pub line: usize,
    /// Column texts, in header order (the id included).
    pub raw: Vec<String>,
    /// Column values (NaN where the text is not a number), in header order.
    pub values: Vec<f64>,
}

/// A table read from a CSV file of the run.
#[derive(Debug, Clone, PartialEq)]
pub struct Front {
    /// Column names.
    pub columns: Vec<String>,
    /// Rows sorted by id.
    pub rows: Vec<FrontRow>,
}

impl Front {
    /// Index of a column.
    pub fn col(&self, name: &str) -> Option<usize> {
        self.columns.iter().position(|c| c == name)
    }

    /// The row with this id.
    pub fn row(&self, id: u64) -> Option<&FrontRow> {
        self.rows.iter().find(|r| r.id == id)
    }
}

/// One line of history.csv.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct HistoryRow {
    /// Generation.
    pub generation: f64,
    /// Evaluations so far.
    pub evaluations: f64,
    /// Feasible share of the generation.
    pub feasible_share: f64,
    /// Hypervolume of the archive.
    pub hypervolume: f64,
    /// Seconds since the start.
    pub elapsed_s: f64,
}

/// Everything read from a run directory.
#[derive(Debug, Clone)]
pub struct RunDir {
    /// The directory.
    pub dir: PathBuf,
    /// The study (from the resolved `study.toml`).
    pub study: Study,
    /// The front.
    pub front: Front,
    /// History (empty when history.csv is missing).
    pub history: Vec<HistoryRow>,
    /// summary.json (Null when missing).
    pub summary: serde_json::Value,
}

fn missing(dir: &Path, what: &str) -> CliError {
    CliError::input(
        dir.join(what),
        None,
        "(file)",
        format!("{what} is missing: is this a run directory written by `stria run`?"),
        "a directory holding study.toml, front.csv, history.csv and summary.json",
    )
}

/// A CSV table: column names, and rows as (line, cells).
type Table = (Vec<String>, Vec<(usize, Vec<String>)>);

/// Read a CSV table with a header.
/// Largest front.csv or history.csv read (1 GiB).
pub const TABLE_MAX_BYTES: u64 = 1 << 30;

/// Largest magnitude of a number in front.csv that is drawn or handed off: no quantity the
/// run writes comes near it, so a larger one (or NaN, infinity) is damage or an edit.
pub const FRONT_VALUE_MAX: f64 = 1e15;

fn read_table(path: &Path) -> Result<Table, CliError> {
    let text = crate::fsio::read_input(path, TABLE_MAX_BYTES).map_err(|e| {
        CliError::input(
            path,
            None,
            "(file)",
            format!("cannot be read: {e}"),
            format!(
                "a readable regular CSV file of at most {}",
                crate::fsio::size_words(TABLE_MAX_BYTES)
            ),
        )
    })?;
    table_of(path, &text)
}

fn table_of(path: &Path, text: &str) -> Result<Table, CliError> {
    let mut rdr = csv::ReaderBuilder::new().from_reader(text.as_bytes());
    let bad = |line: Option<usize>, e: csv::Error| {
        CliError::input(
            path,
            line,
            "(row)",
            format!("not readable as CSV: {e}"),
            "the CSV written by `stria run`",
        )
    };
    let columns: Vec<String> = rdr
        .headers()
        .map_err(|e| bad(Some(1), e))?
        .iter()
        .map(String::from)
        .collect();
    let mut rows = Vec::new();
    for rec in rdr.records() {
        let rec = rec.map_err(|e| bad(None, e))?;
        let line = rec.position().map(|p| p.line() as usize).unwrap_or(0);
        rows.push((line, rec.iter().map(String::from).collect()));
    }
    Ok((columns, rows))
}

/// Read `front.csv`.
pub fn read_front(path: &Path) -> Result<Front, CliError> {
    let (columns, rows) = read_table(path)?;
    if columns.first().map(String::as_str) != Some("id") {
        return Err(CliError::input(
            path,
            Some(1),
            "id",
            "the first column must be `id`",
            "front.csv as written by `stria run`",
        ));
    }
    let mut out = Vec::new();
    for (line, raw) in rows {
        let id = raw[0].parse::<u64>().map_err(|_| {
            CliError::input(
                path,
                Some(line),
                "id",
                format!("`{}` is not a design id", raw[0]),
                "a whole number",
            )
        })?;
        let values: Vec<f64> = raw
            .iter()
            .map(|s| s.parse::<f64>().unwrap_or(f64::NAN))
            .collect();
        // A number that is not finite, or absurdly large, cannot be drawn or handed off:
        // the row is left out, with a note (blank cells, such as an absent wavelength, are
        // not numbers and stay).
        let absurd = raw.iter().zip(&values).position(|(t, v)| {
            t.parse::<f64>().is_ok() && (v.is_nan() || v.abs() > FRONT_VALUE_MAX)
        });
        if let Some(k) = absurd {
            eprintln!(
                "warning: {}:{line}: {}: `{}` is not a finite number of at most {FRONT_VALUE_MAX:e} in magnitude; design {id} is left out",
                path.display(),
                columns.get(k).map_or("?", String::as_str),
                raw[k]
            );
            continue;
        }
        out.push(FrontRow {
            id,
            line,
            raw,
            values,
        });
    }
    out.sort_by_key(|r| r.id);
    Ok(Front { columns, rows: out })
}

/// Read history.csv (missing file: empty history).
pub fn read_history(path: &Path) -> Result<Vec<HistoryRow>, CliError> {
    if !path.exists() {
        return Ok(Vec::new());
    }
    let text = crate::fsio::read_input(path, TABLE_MAX_BYTES).map_err(|e| {
        CliError::input(
            path,
            None,
            "(file)",
            format!("cannot be read: {e}"),
            format!(
                "a readable regular CSV file of at most {}",
                crate::fsio::size_words(TABLE_MAX_BYTES)
            ),
        )
    })?;
    // A run appends one whole line per generation; a last line without its newline is an
    // append cut short by a kill (the resume cuts it too): left out.
    let whole = match text.rfind('\n') {
        Some(i) => &text[..=i],
        None => "",
    };
    let (columns, rows) = table_of(path, whole)?;
    let idx = |name: &str| -> Result<usize, CliError> {
        columns.iter().position(|c| c == name).ok_or_else(|| {
            CliError::input(
                path,
                Some(1),
                name,
                format!("column `{name}` is missing"),
                "history.csv as written by `stria run`",
            )
        })
    };
    let (g, e, f, h, t) = (
        idx("generation")?,
        idx("evaluations")?,
        idx("feasible_share")?,
        idx("hypervolume")?,
        idx("elapsed_s")?,
    );
    let num = |s: &str| s.parse::<f64>().unwrap_or(f64::NAN);
    Ok(rows
        .iter()
        .map(|(_, r)| HistoryRow {
            generation: num(&r[g]),
            evaluations: num(&r[e]),
            feasible_share: num(&r[f]),
            hypervolume: num(&r[h]),
            elapsed_s: num(&r[t]),
        })
        .collect())
}

/// Read a whole run directory.
pub fn read(dir: &Path) -> Result<RunDir, CliError> {
    if !dir.is_dir() {
        return Err(CliError::input(
            dir,
            None,
            "(directory)",
            "is not a directory",
            "a run directory written by `stria run`",
        ));
    }
    let study_path = dir.join("study.toml");
    if !study_path.exists() {
        return Err(missing(dir, "study.toml"));
    }
    let (study, _) = Study::load(&study_path)?;
    // The run wrote its fingerprint on the first line; a study.toml edited since describes
    // another study than the one the front belongs to.
    let text = crate::fsio::read_input(&study_path, crate::fsio::STUDY_FILE_MAX_BYTES)
        .map_err(|e| crate::error::io_error("read", &study_path, e))?;
    let computed = study.fingerprint();
    match read_fingerprint(&text) {
        Some(recorded) if recorded == computed => {}
        recorded => {
            return Err(CliError::input(
                &study_path,
                Some(1),
                "# fingerprint",
                match recorded {
                    Some(r) => format!("the run recorded fingerprint {r}, but the file's keys now give {computed}: it was edited after the run, so its designs and cards would not be the run's"),
                    None => "no fingerprint line: not the study.toml that `stria run` writes".to_string(),
                },
                "the study.toml the run wrote, unchanged (copy the study elsewhere to change it and run it again)",
            ));
        }
    }
    let front_path = dir.join("front.csv");
    if !front_path.exists() {
        return Err(missing(dir, "front.csv"));
    }
    let front = read_front(&front_path)?;
    let history = read_history(&dir.join("history.csv"))?;
    let summary = std::fs::read_to_string(dir.join("summary.json"))
        .ok()
        .and_then(|s| serde_json::from_str(&s).ok())
        .unwrap_or(serde_json::Value::Null);
    Ok(RunDir {
        dir: dir.to_path_buf(),
        study,
        front,
        history,
        summary,
    })
}

/// The design variables of a front row, in the study's variable order.
pub fn x_of(run: &RunDir, row: &FrontRow) -> Result<Vec<f64>, CliError> {
    let path = run.dir.join("front.csv");
    run.study
        .variables
        .iter()
        .map(|v| {
            let col = v.column();
            let i = run.front.col(&col).ok_or_else(|| {
                CliError::input(
                    &path,
                    Some(1),
                    col.clone(),
                    format!("column `{col}` of the study's variable is missing"),
                    "front.csv written for this study",
                )
            })?;
            let x = row.values[i];
            if x.is_finite() {
                Ok(x)
            } else {
                Err(CliError::input(
                    &path,
                    Some(row.line),
                    col,
                    format!("`{}` is not a number", row.raw[i]),
                    "a number",
                ))
            }
        })
        .collect()
}

/// The unpatterned reference of a design: the same design with open_fraction = 1.
pub fn unpatterned(design: &model::Design) -> model::Design {
    let mut d = *design;
    d.membranes.open_fraction = 1.0;
    d
}
