//! Stage one: the study file as parsed, every value with the line it came from. Unknown
//! sections and keys are caught here, each with a suggestion.

use std::collections::BTreeMap;
use std::path::{Path, PathBuf};

use toml_edit::{ImDocument, Item, TableLike, Value};

use super::keys::{self, closest, section_keys, SECTIONS};
use crate::error::CliError;

/// Where a raw value came from.
#[derive(Debug, Clone, PartialEq)]
pub enum Origin {
    /// The study file, at this 1-based line.
    File(usize),
    /// A `--set` option of the command line.
    Set,
}

/// One value as written.
#[derive(Debug, Clone)]
pub struct RawEntry {
    /// The TOML value.
    pub value: Value,
    /// Where it came from.
    pub origin: Origin,
}

/// The parsed study file.
#[derive(Debug, Clone)]
pub struct RawStudy {
    /// The study file.
    pub file: PathBuf,
    /// Values by (section, key).
    pub entries: BTreeMap<(String, String), RawEntry>,
    /// Sections present, with the line of their header.
    pub sections: BTreeMap<String, usize>,
}

/// 1-based line of a byte offset.
pub fn line_of(text: &str, offset: usize) -> usize {
    text.as_bytes()[..offset.min(text.len())]
        .iter()
        .filter(|&&b| b == b'\n')
        .count()
        + 1
}

/// The parser's description of a TOML syntax error as one line (its lines joined by "; ").
/// It gives none for a key with `=` at the very end of the file; that gets its own.
pub fn syntax_message(e: &toml_edit::TomlError) -> String {
    let lines: Vec<&str> = e
        .message()
        .lines()
        .map(str::trim)
        .filter(|l| !l.is_empty())
        .collect();
    if lines.is_empty() {
        "not valid TOML: a value is expected here".to_string()
    } else {
        format!("not valid TOML: {}", lines.join("; "))
    }
}

/// A key or section name as shown in a field: an empty name (`"" = 1`) is shown as `""`.
pub fn shown_name(name: &str) -> String {
    if name.is_empty() {
        "\"\"".to_string()
    } else {
        name.to_string()
    }
}

fn is_section(name: &str) -> bool {
    // The table's `stages.N` stands for `stages.2`, `stages.3`, ...; it is not itself a name.
    if name == "stages.N" {
        return false;
    }
    let name = keys::table_section(name);
    SECTIONS.iter().any(|(s, _)| *s == name)
}

fn variable_names() -> Vec<&'static str> {
    SECTIONS
        .iter()
        .filter_map(|(s, _)| s.strip_prefix("variables."))
        .collect()
}

/// Every valid key of a section (including the model's ROM constants).
pub fn valid_keys(section: &str) -> Vec<String> {
    let mut out: Vec<String> = section_keys(section)
        .into_iter()
        .map(String::from)
        .collect();
    if section == "rom" {
        out.extend(keys::rom_keys().into_iter().map(|(k, _)| k));
    }
    out
}

/// A message and a hint for a key that is not in the table.
pub fn unknown_key_help(section: &str, key: &str) -> (String, String) {
    let valid = valid_keys(section);
    if key.is_empty() {
        return (
            format!("an empty key (\"\") in [{section}]"),
            valid.join(", "),
        );
    }
    // A key written without its unit: `gap` where `gap_mm` exists.
    let with_unit: Vec<&String> = valid
        .iter()
        .filter(|v| v.starts_with(&format!("{key}_")))
        .collect();
    if !with_unit.is_empty() {
        let names: Vec<&str> = with_unit.iter().map(|s| s.as_str()).collect();
        return (
            format!("`{key}` has no unit; write the unit in the key name"),
            names.join(", "),
        );
    }
    // A key that lives in another section.
    for (other, _) in SECTIONS {
        // Bound keys recur in every variable section; there the unit is what differs.
        let both_variables = section.starts_with("variables.") && other.starts_with("variables.");
        if !both_variables && valid_keys(other).iter().any(|v| v == key) {
            return (
                format!("unknown key `{key}` in [{section}]; it belongs in [{other}]"),
                valid.join(", "),
            );
        }
    }
    if let Some(best) = closest(key, valid.iter().map(|s| s.as_str())) {
        return (
            format!("unknown key `{key}` in [{section}]; did you mean `{best}`?"),
            valid.join(", "),
        );
    }
    (
        format!("unknown key `{key}` in [{section}]"),
        valid.join(", "),
    )
}

fn unknown_section_help(name: &str) -> String {
    let all: Vec<&str> = SECTIONS.iter().map(|(s, _)| *s).collect();
    match closest(name, all.iter().copied()) {
        Some(best) => format!("unknown section [{name}]; did you mean [{best}]?"),
        None => format!("unknown section [{name}]"),
    }
}

impl RawStudy {
    /// Parse a study file's text.
    pub fn parse(file: &Path, text: &str) -> Result<RawStudy, CliError> {
        let doc = ImDocument::parse(text).map_err(|e| {
            let line = e.span().map(|s| line_of(text, s.start));
            CliError::input(
                file,
                line,
                "(syntax)",
                syntax_message(&e),
                "TOML syntax (https://toml.io)",
            )
        })?;
        let mut raw = RawStudy {
            file: file.to_path_buf(),
            entries: BTreeMap::new(),
            sections: BTreeMap::new(),
        };
        let root = doc.as_table();
        let all_sections: Vec<&str> = SECTIONS.iter().map(|(s, _)| *s).collect();
        for (name, item) in root.iter() {
            let line = root
                .key(name)
                .and_then(|k| k.span())
                .or_else(|| item.span())
                .map(|s| line_of(text, s.start));
            if name == "variables" {
                raw.read_variables(text, item, line)?;
                continue;
            }
            if name == "stages" {
                raw.read_stages(text, item, line)?;
                continue;
            }
            if !is_section(name) {
                let name = &shown_name(name);
                if item.is_value() {
                    // A key written above every section header.
                    let home = SECTIONS
                        .iter()
                        .find(|(s, _)| valid_keys(s).iter().any(|k| k == name));
                    let msg = match home {
                        Some((s, _)) => {
                            format!("`{name}` is outside any section; it belongs in [{s}]")
                        }
                        None => format!("`{name}` is outside any section"),
                    };
                    return Err(CliError::input(
                        file,
                        line,
                        name,
                        msg,
                        "keys inside the sections of the study reference",
                    ));
                }
                return Err(CliError::input(
                    file,
                    line,
                    name,
                    unknown_section_help(name),
                    all_sections.join(", "),
                ));
            }
            raw.read_section(text, name, item, line)?;
        }
        Ok(raw)
    }

    /// `[variables.<name>]` and `[variables.stage<N>.<name>]` sections.
    fn read_variables(
        &mut self,
        text: &str,
        item: &Item,
        line: Option<usize>,
    ) -> Result<(), CliError> {
        let table = item.as_table_like().ok_or_else(|| {
            CliError::input(
                &self.file,
                line,
                "variables",
                "must be a table of variables",
                "[variables.<name>] sections",
            )
        })?;
        for (var, sub) in table.iter() {
            let vline = table
                .get_key_value(var)
                .and_then(|(k, _)| k.span())
                .map(|s| line_of(text, s.start))
                .or(line);
            if let Some(n) = var
                .strip_prefix("stage")
                .filter(|n| keys::stage_number(n).is_some())
            {
                // [variables.stage2.pitch]: a variable of a later stage.
                let stage = sub.as_table_like().ok_or_else(|| {
                    CliError::input(
                        &self.file,
                        vline,
                        format!("variables.{var}"),
                        "must be a table of variables",
                        format!("[variables.stage{n}.<name>] sections"),
                    )
                })?;
                for (name, item) in stage.iter() {
                    let nline = stage
                        .get_key_value(name)
                        .and_then(|(k, _)| k.span())
                        .map(|s| line_of(text, s.start))
                        .or(vline);
                    let section = format!("variables.stage{n}.{}", shown_name(name));
                    if !is_section(&section) {
                        let names: Vec<&str> = variable_names()
                            .into_iter()
                            .filter(|v| *v != "water_recovery")
                            .collect();
                        return Err(CliError::input(
                            &self.file,
                            nline,
                            section,
                            format!(
                                "unknown design variable `{}` of stage {n}",
                                shown_name(name)
                            ),
                            names.join(", "),
                        ));
                    }
                    self.read_section(text, &section, item, nline)?;
                }
                continue;
            }
            let section = format!("variables.{}", shown_name(var));
            if !is_section(&section) {
                let names = variable_names();
                let msg = match closest(var, names.iter().copied()) {
                    Some(b) => {
                        format!(
                            "unknown design variable `{}`; did you mean `{b}`?",
                            shown_name(var)
                        )
                    }
                    None => format!("unknown design variable `{}`", shown_name(var)),
                };
                return Err(CliError::input(
                    &self.file,
                    vline,
                    section,
                    msg,
                    names.join(", "),
                ));
            }
            self.read_section(text, &section, sub, vline)?;
        }
        Ok(())
    }

    /// `[stages.<N>]` sections.
    fn read_stages(
        &mut self,
        text: &str,
        item: &Item,
        line: Option<usize>,
    ) -> Result<(), CliError> {
        let table = item.as_table_like().ok_or_else(|| {
            CliError::input(
                &self.file,
                line,
                "stages",
                "must be a table of stages",
                "[stages.2], [stages.3], ... sections",
            )
        })?;
        for (n, sub) in table.iter() {
            let sline = table
                .get_key_value(n)
                .and_then(|(k, _)| k.span())
                .map(|s| line_of(text, s.start))
                .or(line);
            let section = format!("stages.{}", shown_name(n));
            if keys::stage_number(n).is_none() {
                return Err(CliError::input(
                    &self.file,
                    sline,
                    section,
                    format!("`{}` is not a stage number", shown_name(n)),
                    format!(
                        "[stages.2] to [stages.{}] (stage 1 is the study's own design)",
                        keys::MAX_STAGES
                    ),
                ));
            }
            self.read_section(text, &section, sub, sline)?;
        }
        Ok(())
    }

    fn read_section(
        &mut self,
        text: &str,
        section: &str,
        item: &Item,
        line: Option<usize>,
    ) -> Result<(), CliError> {
        let table: &dyn TableLike = item.as_table_like().ok_or_else(|| {
            let what = if item.is_array_of_tables() {
                format!("must be one section [{section}], not a list of sections [[{section}]]")
            } else {
                "must be a section (a table), not a single value".to_string()
            };
            CliError::input(
                &self.file,
                line,
                section,
                what,
                format!("[{section}] followed by its keys"),
            )
        })?;
        self.sections.insert(section.to_string(), line.unwrap_or(0));
        let valid = valid_keys(section);
        for (key, sub) in table.iter() {
            let kline = table
                .get_key_value(key)
                .and_then(|(k, _)| k.span())
                .or_else(|| sub.span())
                .map(|s| line_of(text, s.start))
                .or(line);
            let field = format!("{section}.{}", shown_name(key));
            let nested = format!("{section}.{key}");
            if sub.is_table_like() && is_section(&nested) {
                self.read_section(text, &nested, sub, kline)?;
                continue;
            }
            if !valid.iter().any(|v| v == key) {
                let (msg, allowed) = unknown_key_help(section, key);
                return Err(CliError::input(&self.file, kline, field, msg, allowed));
            }
            let value = match sub {
                Item::Value(v) => v.clone(),
                _ => {
                    return Err(CliError::input(
                        &self.file,
                        kline,
                        field,
                        "must be a value, not a table",
                        "a number, text or list",
                    ))
                }
            };
            self.entries.insert(
                (section.to_string(), key.to_string()),
                RawEntry {
                    value,
                    origin: Origin::File(kline.unwrap_or(0)),
                },
            );
        }
        Ok(())
    }

    /// Apply one `--set section.key=value` option (same key names as the study file).
    pub fn apply_set(&mut self, assignment: &str) -> Result<(), CliError> {
        let cmd = Path::new("command line");
        let (lhs, rhs) = assignment.split_once('=').ok_or_else(|| {
            CliError::input(
                cmd,
                None,
                format!("--set {assignment}"),
                "expected section.key=value",
                "e.g. --set membranes.pitch_um=80",
            )
        })?;
        let lhs = lhs.trim();
        let (section, key) = lhs.rsplit_once('.').ok_or_else(|| {
            CliError::input(
                cmd,
                None,
                format!("--set {lhs}"),
                "the key needs its section, as section.key",
                "e.g. --set membranes.pitch_um=80",
            )
        })?;
        let field = format!("--set {lhs}");
        if !is_section(section) {
            let all: Vec<&str> = SECTIONS.iter().map(|(s, _)| *s).collect();
            return Err(CliError::input(
                cmd,
                None,
                field,
                unknown_section_help(section),
                all.join(", "),
            ));
        }
        if !valid_keys(section).iter().any(|v| v == key) {
            let (msg, allowed) = unknown_key_help(section, key);
            return Err(CliError::input(cmd, None, field, msg, allowed));
        }
        let rhs = rhs.trim();
        // A bare word (KCl, cem) is taken as text so quoting on a shell line is optional.
        let value = rhs
            .parse::<Value>()
            .unwrap_or_else(|_| Value::from(rhs.to_string()));
        self.sections.entry(section.to_string()).or_insert(0);
        self.entries.insert(
            (section.to_string(), key.to_string()),
            RawEntry {
                value,
                origin: Origin::Set,
            },
        );
        Ok(())
    }

    /// Whether a section is present (variables and optional sections).
    pub fn has_section(&self, section: &str) -> bool {
        self.sections.contains_key(section)
    }

    /// The value of a key, if given.
    pub fn get(&self, section: &str, key: &str) -> Option<&RawEntry> {
        self.entries.get(&(section.to_string(), key.to_string()))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn unknown_key_gets_a_suggestion_and_its_line() {
        let text = "[study]\nname = \"x\"\n\n[channel]\ngap_mn = 0.5\n";
        let err = RawStudy::parse(Path::new("s.toml"), text).unwrap_err();
        let msg = err.to_string();
        assert!(msg.contains("s.toml:5"), "{msg}");
        assert!(msg.contains("gap_mm"), "{msg}");
        assert_eq!(err.exit_code(), 2);
    }

    #[test]
    fn key_without_unit_is_named() {
        let text = "[channel]\ngap = 0.5\n";
        let msg = RawStudy::parse(Path::new("s.toml"), text)
            .unwrap_err()
            .to_string();
        assert!(msg.contains("no unit"), "{msg}");
        assert!(msg.contains("gap_mm"), "{msg}");
    }

    #[test]
    fn a_key_in_the_wrong_section_is_sent_home() {
        let msg = RawStudy::parse(Path::new("s.toml"), "[channel]\npitch_um = 80\n")
            .unwrap_err()
            .to_string();
        assert!(msg.contains("belongs in [membranes]"), "{msg}");
        let msg = RawStudy::parse(Path::new("s.toml"), "[variables.gap]\nlower_um = 80\n")
            .unwrap_err()
            .to_string();
        assert!(msg.contains("lower_mm"), "{msg}");
    }

    #[test]
    fn unknown_section_and_variable() {
        let msg = RawStudy::parse(Path::new("s.toml"), "[chanel]\n")
            .unwrap_err()
            .to_string();
        assert!(msg.contains("[channel]"), "{msg}");
        let msg = RawStudy::parse(Path::new("s.toml"), "[variables.pich]\nlower_um = 1\n")
            .unwrap_err()
            .to_string();
        assert!(msg.contains("pitch"), "{msg}");
    }

    #[test]
    fn set_parses_numbers_and_bare_words() {
        let mut raw = RawStudy::parse(Path::new("s.toml"), "").unwrap();
        raw.apply_set("membranes.pitch_um=80").unwrap();
        raw.apply_set("water.salt=KCl").unwrap();
        assert_eq!(
            raw.get("membranes", "pitch_um").unwrap().value.as_integer(),
            Some(80)
        );
        assert_eq!(
            raw.get("water", "salt").unwrap().value.as_str(),
            Some("KCl")
        );
        assert!(raw.apply_set("membranes.pitch=80").is_err());
        assert!(raw.apply_set("pitch_um").is_err());
    }
}
