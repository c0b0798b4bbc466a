//! The campaign file: a base study and its scenarios (rows of a CSV table and/or a grid over a
//! few keys), with the options of local and Slurm execution. Format in `docs/campaigns.md`.
//!
//! Every scenario is the base study with some keys changed, exactly as `stria eval --set` changes
//! them; the whole campaign is checked before anything starts, and a bad cell is named by the
//! CSV file, its line and its column.

use std::path::{Path, PathBuf};

use toml_edit::{ImDocument, Item, Value};

use crate::error::CliError;
use crate::study::raw::{line_of, syntax_message};
use crate::study::Study;

/// Largest number of scenarios one campaign may hold (a Slurm array index must stay small, and
/// a campaign of more than this is better split).
pub const MAX_SCENARIOS: usize = 10_000;

/// Largest campaign file or scenario table read, bytes.
pub const MAX_FILE_BYTES: u64 = 16 * 1024 * 1024;

/// Where a changed key's value came from, for messages.
#[derive(Debug, Clone, PartialEq)]
pub enum Source {
    /// A cell of the scenario table: 1-based line and the column's key.
    Csv {
        /// Line in the CSV file (1-based; the header is line 1).
        line: usize,
    },
    /// A grid value in the campaign file (1-based line of the key).
    Grid {
        /// Line in the campaign file.
        line: Option<usize>,
    },
    /// The campaign's budget (`[campaign] max_evaluations`).
    Budget {
        /// Line in the campaign file.
        line: Option<usize>,
    },
}

/// One changed key of a scenario: `section.key`, its literal, and where it came from.
#[derive(Debug, Clone, PartialEq)]
pub struct Change {
    /// `section.key`, as in a study file and `--set`.
    pub key: String,
    /// The value as written (a TOML literal or a bare word).
    pub literal: String,
    /// Where it was written.
    pub source: Source,
}

/// One scenario: a name (the directory it runs in) and its changes to the base study.
#[derive(Debug, Clone, PartialEq)]
pub struct Scenario {
    /// Name: letters, digits, `.`, `_`, `-`; unique in the campaign.
    pub name: String,
    /// Changes to the base study, in order.
    pub changes: Vec<Change>,
}

impl Scenario {
    /// The changes as `--set` assignments.
    pub fn sets(&self) -> Vec<String> {
        self.changes
            .iter()
            .map(|c| format!("{}={}", c.key, c.literal))
            .collect()
    }
}

/// Options of local execution.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct LocalOptions {
    /// Scenarios run at once (default: as many as cores, at most the scenario count).
    pub parallel: Option<usize>,
    /// Threads of each scenario's run (default: cores / parallel, at least 1).
    pub threads_per_scenario: Option<usize>,
}

/// Options of the Slurm job array (each may be overridden on the command line).
#[derive(Debug, Clone, PartialEq)]
pub struct SlurmOptions {
    /// `--partition`.
    pub partition: Option<String>,
    /// `--account`.
    pub account: Option<String>,
    /// `--time` of each task, as Slurm writes it (`HH:MM:SS`, `D-HH:MM:SS`, minutes).
    pub time: Option<String>,
    /// `--cpus-per-task`; also the run's thread count.
    pub cpus_per_task: usize,
    /// Seconds before the time limit at which Slurm sends SIGTERM (`--signal=TERM@N`).
    pub signal_before_end_s: u32,
    /// Tasks of the array running at once (`--array=...%N`), none for no limit.
    pub max_running: Option<usize>,
    /// Times a paused task requeues itself to go on (a preempted or time-limited task).
    pub max_requeues: u32,
}

impl Default for SlurmOptions {
    fn default() -> Self {
        SlurmOptions {
            partition: None,
            account: None,
            time: None,
            cpus_per_task: 1,
            signal_before_end_s: 300,
            max_running: None,
            max_requeues: 3,
        }
    }
}

/// A checked campaign.
#[derive(Debug, Clone)]
pub struct Campaign {
    /// The campaign file.
    pub file: PathBuf,
    /// Its name (`[campaign] name`, default the file stem).
    pub name: String,
    /// The base study file.
    pub study: PathBuf,
    /// The base study's text, as read.
    pub study_text: String,
    /// The scenarios, in table order (each row crossed with the grid, grid last fastest).
    pub scenarios: Vec<Scenario>,
    /// Local execution.
    pub local: LocalOptions,
    /// Slurm execution.
    pub slurm: SlurmOptions,
}

/// Read a text file that must be a regular file of at most [`MAX_FILE_BYTES`].
pub fn read_limited(path: &Path, what: &str, field: &str) -> Result<String, CliError> {
    let bad = |msg: String| {
        CliError::input(
            path,
            None,
            field,
            msg,
            format!("a readable {what} (a regular file of at most 16 MiB)"),
        )
    };
    let meta = std::fs::metadata(path).map_err(|e| bad(format!("cannot read it: {e}")))?;
    if !meta.is_file() {
        return Err(bad("not a regular file".into()));
    }
    if meta.len() > MAX_FILE_BYTES {
        return Err(bad(format!("{} bytes is too large", meta.len())));
    }
    std::fs::read_to_string(path).map_err(|e| bad(format!("cannot read it: {e}")))
}

const CAMPAIGN_KEYS: &[&str] = &["name", "study", "scenarios_csv", "max_evaluations"];
const LOCAL_KEYS: &[&str] = &["parallel", "threads_per_scenario"];
const SLURM_KEYS: &[&str] = &[
    "partition",
    "account",
    "time",
    "cpus_per_task",
    "signal_before_end_s",
    "max_running",
    "max_requeues",
];
const SECTIONS: &[&str] = &["campaign", "grid", "local", "slurm"];

struct Ctx<'a> {
    file: &'a Path,
    text: &'a str,
}

impl Ctx<'_> {
    fn err(
        &self,
        line: Option<usize>,
        field: impl Into<String>,
        msg: impl Into<String>,
        allowed: impl Into<String>,
    ) -> CliError {
        CliError::input(self.file, line, field, msg, allowed)
    }
    fn line(&self, item: &Item, key: Option<&toml_edit::Key>) -> Option<usize> {
        key.and_then(|k| k.span())
            .or_else(|| item.span())
            .map(|s| line_of(self.text, s.start))
    }
}

fn check_keys(
    cx: &Ctx,
    section: &str,
    table: &dyn toml_edit::TableLike,
    allowed: &[&str],
) -> Result<(), CliError> {
    for (k, item) in table.iter() {
        if !allowed.contains(&k) {
            let line = cx.line(item, table.get_key_value(k).map(|(key, _)| key));
            let hint = crate::study::keys::closest(k, allowed.iter().copied())
                .map(|b| format!("; did you mean `{b}`?"))
                .unwrap_or_default();
            return Err(cx.err(
                line,
                format!("{section}.{k}"),
                format!("unknown key `{k}` in [{section}]{hint}"),
                allowed.join(", "),
            ));
        }
    }
    Ok(())
}

fn get_str(
    cx: &Ctx,
    table: &dyn toml_edit::TableLike,
    section: &str,
    key: &str,
) -> Result<Option<(String, Option<usize>)>, CliError> {
    let Some((k, item)) = table.get_key_value(key) else {
        return Ok(None);
    };
    let line = cx.line(item, Some(k));
    match item.as_str() {
        Some(s) if !s.trim().is_empty() => Ok(Some((s.to_string(), line))),
        _ => Err(cx.err(
            line,
            format!("{section}.{key}"),
            "expected a non-empty text in quotes",
            "e.g. \"text\"",
        )),
    }
}

fn get_int(
    cx: &Ctx,
    table: &dyn toml_edit::TableLike,
    section: &str,
    key: &str,
    lo: i64,
    hi: i64,
) -> Result<Option<(i64, Option<usize>)>, CliError> {
    let Some((k, item)) = table.get_key_value(key) else {
        return Ok(None);
    };
    let line = cx.line(item, Some(k));
    match item.as_integer() {
        Some(v) if (lo..=hi).contains(&v) => Ok(Some((v, line))),
        Some(v) => Err(cx.err(
            line,
            format!("{section}.{key}"),
            format!("{v} is out of range"),
            format!("an integer from {lo} to {hi}"),
        )),
        None => Err(cx.err(
            line,
            format!("{section}.{key}"),
            "expected an integer",
            format!("an integer from {lo} to {hi}"),
        )),
    }
}

/// A scenario name is used as a directory name: keep it portable.
pub fn valid_name(name: &str) -> bool {
    !name.is_empty()
        && name.len() <= 100
        && !name.starts_with('.')
        && name
            .chars()
            .all(|c| c.is_ascii_alphanumeric() || matches!(c, '.' | '_' | '-'))
}

/// Turn a value into a piece of a name: unsafe characters become `_`.
fn name_piece(s: &str) -> String {
    s.chars()
        .map(|c| {
            if c.is_ascii_alphanumeric() || matches!(c, '.' | '-') {
                c
            } else {
                '_'
            }
        })
        .collect()
}

/// A value of a grid or CSV cell as a `--set` literal.
fn literal_of(v: &Value) -> Option<String> {
    match v {
        Value::String(s) => Some(s.value().to_string()),
        Value::Integer(i) => Some(i.value().to_string()),
        Value::Float(f) => Some(crate::study::reader::fmt_f64(*f.value())),
        Value::Boolean(b) => Some(b.value().to_string()),
        _ => None,
    }
}

/// Whether `section.key` names a study key a scenario may change.
fn study_key_exists(key: &str) -> bool {
    match key.rsplit_once('.') {
        Some((section, k)) => crate::study::raw::valid_keys(section)
            .iter()
            .any(|v| v == k),
        None => false,
    }
}

/// Parse and check a campaign file: its own keys, the scenario table and grid, and every
/// scenario's study (so a bad cell stops the campaign before anything runs).
pub fn load(file: &Path) -> Result<Campaign, CliError> {
    let text = read_limited(file, "campaign file (TOML)", "(file)")?;
    let cx = Ctx { file, text: &text };
    let doc = ImDocument::parse(text.as_str()).map_err(|e| {
        let line = e.span().map(|s| line_of(&text, s.start));
        cx.err(line, "(syntax)", syntax_message(&e), "TOML syntax")
    })?;
    let root = doc.as_table();
    for (name, item) in root.iter() {
        if !SECTIONS.contains(&name) || !item.is_table_like() {
            let line = cx.line(item, root.key(name));
            return Err(cx.err(
                line,
                name,
                format!("unknown section or key `{name}` at the top level"),
                "[campaign], [grid], [local], [slurm]",
            ));
        }
    }
    let empty = toml_edit::Table::new();
    let section = |s: &str| -> &dyn toml_edit::TableLike {
        root.get(s)
            .and_then(|i| i.as_table_like())
            .unwrap_or(&empty)
    };
    let camp = section("campaign");
    check_keys(&cx, "campaign", camp, CAMPAIGN_KEYS)?;
    let base_dir = file.parent().unwrap_or(Path::new("."));
    let Some((study_rel, _)) = get_str(&cx, camp, "campaign", "study")? else {
        return Err(cx.err(
            None,
            "campaign.study",
            "the base study is missing",
            "[campaign] study = \"path/to/study.toml\" (relative to the campaign file)",
        ));
    };
    let study = base_dir.join(&study_rel);
    let study_text = read_limited(&study, "study file (TOML)", "(file)")?;
    let name = match get_str(&cx, camp, "campaign", "name")? {
        Some((n, line)) => {
            if !valid_name(&n) {
                return Err(cx.err(
                    line,
                    "campaign.name",
                    format!("`{n}` cannot be a file name"),
                    "letters, digits, '.', '_' and '-' (not starting with '.'), at most 100",
                ));
            }
            n
        }
        None => file
            .file_stem()
            .map(|s| name_piece(&s.to_string_lossy()))
            .unwrap_or_else(|| "campaign".into()),
    };
    let budget = get_int(
        &cx,
        camp,
        "campaign",
        "max_evaluations",
        1,
        1_000_000_000_000,
    )?;

    // Rows: from the CSV table, or one row without changes.
    let mut rows: Vec<(String, Vec<Change>)> =
        match get_str(&cx, camp, "campaign", "scenarios_csv")? {
            Some((rel, _)) => read_table(&base_dir.join(rel))?,
            None => vec![(String::new(), Vec::new())],
        };
    // The grid: every combination, crossed with the rows.
    let grid = section("grid");
    let mut axes: Vec<(String, Vec<String>, Option<usize>)> = Vec::new();
    for (key, item) in grid.iter() {
        let line = cx.line(item, grid.get_key_value(key).map(|(k, _)| k));
        if !study_key_exists(key) {
            return Err(cx.err(
                line,
                format!("grid.\"{key}\""),
                format!("`{key}` is not a study key"),
                "a study key as section.key in quotes, e.g. \"economics.electricity_price_per_kWh\" (see `stria keys`)",
            ));
        }
        let values: Option<Vec<String>> = item
            .as_array()
            .filter(|a| !a.is_empty())
            .map(|a| a.iter().map(literal_of).collect::<Option<Vec<_>>>())
            .unwrap_or(None);
        let Some(values) = values else {
            return Err(cx.err(
                line,
                format!("grid.\"{key}\""),
                "expected a non-empty list of values",
                "e.g. [0.08, 0.16] or [\"NaCl\", \"KCl\"]",
            ));
        };
        axes.push((key.to_string(), values, line));
    }
    for (key, values, line) in &axes {
        let tail = key.rsplit_once('.').map(|(_, k)| k).unwrap_or(key);
        let mut next = Vec::with_capacity(rows.len() * values.len());
        for (name, changes) in &rows {
            for v in values {
                let mut c = changes.clone();
                c.retain(|x| x.key != *key);
                c.push(Change {
                    key: key.clone(),
                    literal: v.clone(),
                    source: Source::Grid { line: *line },
                });
                let piece = format!("{tail}-{}", name_piece(v));
                let n = if name.is_empty() {
                    piece
                } else {
                    format!("{name}__{piece}")
                };
                next.push((n, c));
            }
        }
        rows = next;
        if rows.len() > MAX_SCENARIOS {
            return Err(cx.err(
                *line,
                format!("grid.\"{key}\""),
                format!("the campaign grows past {MAX_SCENARIOS} scenarios"),
                format!("at most {MAX_SCENARIOS} scenarios; split the campaign"),
            ));
        }
    }
    let mut scenarios = Vec::with_capacity(rows.len());
    for (i, (name, mut changes)) in rows.into_iter().enumerate() {
        let name = if name.is_empty() {
            format!("s{:03}", i + 1)
        } else {
            name
        };
        if let Some((n, line)) = budget {
            changes.push(Change {
                key: "optimizer.max_evaluations".into(),
                literal: n.to_string(),
                source: Source::Budget { line },
            });
        }
        scenarios.push(Scenario { name, changes });
    }
    let mut seen = std::collections::BTreeSet::new();
    for s in &scenarios {
        if !valid_name(&s.name) {
            return Err(cx.err(
                None,
                "scenario names",
                format!("the scenario name `{}` is too long for a directory", s.name),
                "shorter `scenario` names or fewer grid keys (a name is at most 100 characters)",
            ));
        }
        if !seen.insert(s.name.as_str()) {
            return Err(cx.err(
                None,
                "scenario names",
                format!("two scenarios are both named `{}`", s.name),
                "unique names (the `scenario` column of the table, or distinct grid values)",
            ));
        }
    }
    if scenarios.len() > MAX_SCENARIOS {
        return Err(cx.err(
            None,
            "campaign.scenarios_csv",
            format!("{} scenarios", scenarios.len()),
            format!("at most {MAX_SCENARIOS}"),
        ));
    }

    let local_t = section("local");
    check_keys(&cx, "local", local_t, LOCAL_KEYS)?;
    let local = LocalOptions {
        parallel: get_int(&cx, local_t, "local", "parallel", 1, 4096)?.map(|v| v.0 as usize),
        threads_per_scenario: get_int(&cx, local_t, "local", "threads_per_scenario", 1, 4096)?
            .map(|v| v.0 as usize),
    };
    let slurm_t = section("slurm");
    check_keys(&cx, "slurm", slurm_t, SLURM_KEYS)?;
    let d = SlurmOptions::default();
    let word = |key: &str| -> Result<Option<String>, CliError> {
        match get_str(&cx, slurm_t, "slurm", key)? {
            Some((s, line)) if !slurm_word_ok(&s) => Err(cx.err(
                line,
                format!("slurm.{key}"),
                format!("`{s}` has characters Slurm options do not take"),
                "letters, digits and : - _ . ,",
            )),
            other => Ok(other.map(|v| v.0)),
        }
    };
    let slurm = SlurmOptions {
        partition: word("partition")?,
        account: word("account")?,
        time: word("time")?,
        cpus_per_task: get_int(&cx, slurm_t, "slurm", "cpus_per_task", 1, 4096)?
            .map_or(d.cpus_per_task, |v| v.0 as usize),
        signal_before_end_s: get_int(&cx, slurm_t, "slurm", "signal_before_end_s", 10, 65_535)?
            .map_or(d.signal_before_end_s, |v| v.0 as u32),
        max_running: get_int(&cx, slurm_t, "slurm", "max_running", 1, 100_000)?
            .map(|v| v.0 as usize),
        max_requeues: get_int(&cx, slurm_t, "slurm", "max_requeues", 0, 1000)?
            .map_or(d.max_requeues, |v| v.0 as u32),
    };

    let campaign = Campaign {
        file: file.to_path_buf(),
        name,
        study,
        study_text,
        scenarios,
        local,
        slurm,
    };
    for s in &campaign.scenarios {
        campaign.study_of(s)?;
    }
    Ok(campaign)
}

/// Characters allowed in a Slurm option value written into the batch script.
pub fn slurm_word_ok(s: &str) -> bool {
    !s.is_empty()
        && s.len() <= 200
        && s.chars()
            .all(|c| c.is_ascii_alphanumeric() || matches!(c, ':' | '-' | '_' | '.' | ','))
}

impl Campaign {
    /// The scenario's checked study: the base with the scenario's changes. An error in a
    /// changed key names where the change was written (CSV line and column, or campaign line).
    pub fn study_of(&self, s: &Scenario) -> Result<Study, CliError> {
        match Study::from_text(&self.study, &self.study_text, &s.sets()) {
            Ok((study, _warnings)) => Ok(study),
            Err(e) => Err(self.relocate(s, e)),
        }
    }

    fn relocate(&self, s: &Scenario, e: CliError) -> CliError {
        let CliError::Input {
            field,
            message,
            allowed,
            ..
        } = &e
        else {
            return e;
        };
        let bare = field.trim_start_matches("--set ").to_string();
        let Some(change) = s.changes.iter().rev().find(|c| c.key == bare) else {
            // The error is in the base study itself (or a rule across keys): keep it, and say
            // which scenario met it.
            return match e {
                CliError::Input {
                    file,
                    line,
                    field,
                    message,
                    allowed,
                } => CliError::Input {
                    file,
                    line,
                    field,
                    message: format!("{message} (scenario `{}`)", s.name),
                    allowed,
                },
                other => other,
            };
        };
        let (file, line, field) = match &change.source {
            Source::Csv { line } => (
                self.table_path(),
                Some(*line),
                format!("column `{}` (scenario `{}`)", change.key, s.name),
            ),
            Source::Grid { line } => (
                self.file.clone(),
                *line,
                format!("grid.\"{}\" = {}", change.key, change.literal),
            ),
            Source::Budget { line } => (
                self.file.clone(),
                *line,
                "campaign.max_evaluations".to_string(),
            ),
        };
        CliError::input(file, line, field, message.clone(), allowed.clone())
    }

    fn table_path(&self) -> PathBuf {
        // Re-read the key: the campaign was checked, so it is there when a CSV source exists.
        let text = std::fs::read_to_string(&self.file).unwrap_or_default();
        let rel = ImDocument::parse(text.as_str())
            .ok()
            .and_then(|d| {
                d.as_table()
                    .get("campaign")
                    .and_then(|c| c.get("scenarios_csv"))
                    .and_then(|v| v.as_str().map(str::to_string))
            })
            .unwrap_or_default();
        self.file.parent().unwrap_or(Path::new(".")).join(rel)
    }
}

/// Read the scenario table: a header of study keys (`section.key`, units in the key names) and
/// an optional `scenario` column naming each row; one row a scenario; an empty cell keeps the
/// base study's value.
fn read_table(path: &Path) -> Result<Vec<(String, Vec<Change>)>, CliError> {
    let text = read_limited(path, "scenario table (CSV)", "(file)")?;
    let mut rdr = csv::ReaderBuilder::new()
        .has_headers(true)
        .trim(csv::Trim::All)
        .flexible(false)
        .from_reader(text.as_bytes());
    let header = rdr
        .headers()
        .map_err(|e| CliError::input(path, Some(1), "(header)", e.to_string(), "a CSV header"))?
        .clone();
    let mut name_col = None;
    for (i, h) in header.iter().enumerate() {
        if h == "scenario" {
            name_col = Some(i);
        } else if !study_key_exists(h) {
            let hint = header_hint(h);
            return Err(CliError::input(
                path,
                Some(1),
                format!("column `{h}`"),
                format!("`{h}` is not a study key{hint}"),
                "`scenario` and study keys as section.key (see `stria keys`), e.g. water.feed_g_L",
            ));
        }
    }
    let mut rows = Vec::new();
    for rec in rdr.records() {
        let rec = rec.map_err(|e| {
            let line = e.position().map(|p| p.line() as usize);
            CliError::input(
                path,
                line,
                "(row)",
                e.to_string(),
                "rows with as many cells as the header",
            )
        })?;
        let line = rec.position().map_or(0, |p| p.line() as usize);
        let mut changes = Vec::new();
        let mut name = String::new();
        for (i, cell) in rec.iter().enumerate() {
            if Some(i) == name_col {
                if !valid_name(cell) {
                    return Err(CliError::input(
                        path,
                        Some(line),
                        "column `scenario`",
                        format!("`{cell}` cannot be a directory name"),
                        "letters, digits, '.', '_' and '-' (not starting with '.'), at most 100",
                    ));
                }
                name = cell.to_string();
            } else if !cell.is_empty() {
                changes.push(Change {
                    key: header[i].to_string(),
                    literal: cell.to_string(),
                    source: Source::Csv { line },
                });
            }
        }
        if name.is_empty() {
            name = format!("row{line}");
        }
        rows.push((name, changes));
        if rows.len() > MAX_SCENARIOS {
            return Err(CliError::input(
                path,
                Some(line),
                "(rows)",
                "too many rows",
                format!("at most {MAX_SCENARIOS} scenarios"),
            ));
        }
    }
    if rows.is_empty() {
        return Err(CliError::input(
            path,
            Some(1),
            "(rows)",
            "the table has no scenario rows",
            "one row per scenario under the header",
        ));
    }
    Ok(rows)
}

fn header_hint(h: &str) -> String {
    match h.rsplit_once('.') {
        Some((section, key)) => {
            let keys = crate::study::raw::valid_keys(section);
            crate::study::keys::closest(key, keys.iter().map(String::as_str))
                .map(|b| format!("; did you mean `{section}.{b}`?"))
                .unwrap_or_default()
        }
        None => "; a column names its section too, as section.key".into(),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn names_are_portable_directory_names() {
        assert!(valid_name("well-3_summer.2026"));
        assert!(!valid_name(".hidden"));
        assert!(!valid_name("a/b"));
        assert!(!valid_name(""));
        assert_eq!(name_piece("0.08 $/kWh"), "0.08___kWh");
    }

    #[test]
    fn slurm_words_refuse_shell_characters() {
        assert!(slurm_word_ok("02:00:00"));
        assert!(slurm_word_ok("gpu-a100,cpu"));
        assert!(!slurm_word_ok("x; rm -rf /"));
        assert!(!slurm_word_ok("$(id)"));
    }
}
