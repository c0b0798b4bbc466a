//! Typed, range-checked access to the raw study, recording every resolved value (defaults
//! included) for the resolved study file.

use std::path::PathBuf;

use toml_edit::Value;

use super::choices::Choices;
use super::keys::{self, DefaultValue, KeySpec, Kind};
use super::raw::{Origin, RawStudy};
use super::StudyWarning;
use crate::error::CliError;

/// One line of the resolved study.
#[derive(Debug, Clone, PartialEq)]
pub struct Resolved {
    /// Section.
    pub section: String,
    /// Key.
    pub key: String,
    /// TOML literal.
    pub literal: String,
    /// Written as a comment (a derived value that must keep following its source on reload).
    pub commented: Option<String>,
}

/// Reads values of a [`RawStudy`] by the key table.
pub struct Reader<'a> {
    pub(crate) raw: &'a RawStudy,
    pub(crate) resolved: Vec<Resolved>,
    pub(crate) warnings: Vec<StudyWarning>,
}

/// A float as a TOML literal that reads back to the same bits.
pub fn fmt_f64(v: f64) -> String {
    format!("{v:?}")
}

fn spec_of(section: &str, key: &str) -> &'static KeySpec {
    // Every caller passes a key of the table; a miss is a programming error caught by tests.
    keys::spec(section, key).unwrap_or_else(|| panic!("key {section}.{key} missing from KEYS"))
}

impl<'a> Reader<'a> {
    /// A reader over `raw`.
    pub fn new(raw: &'a RawStudy) -> Self {
        Reader {
            raw,
            resolved: Vec::new(),
            warnings: Vec::new(),
        }
    }

    /// File and line of a key (the section header when the key is absent).
    pub fn locate(&self, section: &str, key: &str) -> (PathBuf, Option<usize>) {
        match self.raw.get(section, key).map(|e| &e.origin) {
            Some(Origin::File(l)) => (self.raw.file.clone(), Some(*l)),
            Some(Origin::Set) => (PathBuf::from("command line (--set)"), None),
            None => (
                self.raw.file.clone(),
                self.raw.sections.get(section).copied().filter(|&l| l > 0),
            ),
        }
    }

    /// An input error at a key.
    pub fn err(
        &self,
        section: &str,
        key: &str,
        message: impl Into<String>,
        allowed: impl Into<String>,
    ) -> CliError {
        let (file, line) = self.locate(section, key);
        CliError::input(file, line, format!("{section}.{key}"), message, allowed)
    }

    /// A warning at a key.
    pub fn warn(&mut self, section: &str, key: &str, message: impl Into<String>) {
        let (file, line) = self.locate(section, key);
        self.warnings.push(StudyWarning {
            file,
            line,
            field: format!("{section}.{key}"),
            message: message.into(),
        });
    }

    /// Record a resolved value.
    pub fn record(&mut self, section: &str, key: &str, literal: String) {
        self.resolved
            .retain(|r| !(r.section == section && r.key == key));
        self.resolved.push(Resolved {
            section: section.into(),
            key: key.into(),
            literal,
            commented: None,
        });
    }

    /// Record a derived value that is written as a comment.
    pub fn record_comment(&mut self, section: &str, key: &str, literal: String, why: &str) {
        self.resolved.push(Resolved {
            section: section.into(),
            key: key.into(),
            literal,
            commented: Some(why.into()),
        });
    }

    /// Whether a key is given.
    pub fn given(&self, section: &str, key: &str) -> bool {
        self.raw.get(section, key).is_some()
    }

    fn value(&self, section: &str, key: &str) -> Option<Value> {
        let spec = spec_of(section, key);
        match self.raw.get(section, key) {
            Some(e) => Some(e.value.clone()),
            None => match spec.default {
                DefaultValue::Value(lit) => lit.parse::<Value>().ok(),
                _ => None,
            },
        }
    }

    fn missing(&self, section: &str, key: &str) -> CliError {
        let spec = spec_of(section, key);
        let allowed = match spec.range {
            Some(r) => format!("{} ({}, {})", spec.doc, spec.unit, r.describe()),
            None => format!("{} ({})", spec.doc, spec.kind.describe()),
        };
        self.err(
            section,
            key,
            format!("missing `{key}` in [{section}]"),
            allowed,
        )
    }

    /// A number in the key's own unit: type, range (error) and calibrated range (warning)
    /// checked; recorded. `None` when absent without a default.
    pub fn float(&mut self, section: &str, key: &str) -> Result<Option<f64>, CliError> {
        let spec = spec_of(section, key);
        let Some(v) = self.value(section, key) else {
            return Ok(None);
        };
        let x = match &v {
            Value::Float(f) => *f.value(),
            Value::Integer(i) => *i.value() as f64,
            Value::String(s)
                if s.value()
                    .split_whitespace()
                    .next()
                    .is_some_and(|w| w.parse::<f64>().is_ok()) =>
            {
                return Err(self.err(
                    section,
                    key,
                    format!(
                        "expected a bare number, found the text \"{}\"; the unit is part of the key name",
                        s.value()
                    ),
                    format!("a number in {}, e.g. {key} = 0.5", spec.unit),
                ))
            }
            other => {
                return Err(self.err(
                    section,
                    key,
                    format!("expected a number, found {}", type_name(other)),
                    format!("a number in {}", spec.unit),
                ))
            }
        };
        if !x.is_finite() {
            return Err(self.err(
                section,
                key,
                format!("{x} is not a finite number"),
                "a finite number",
            ));
        }
        // A subnormal number (below about 2.2e-308 in size) passes a "> 0" range but the model
        // cannot compute with it (the quotients overflow).
        if x != 0.0 && !x.is_normal() {
            let range = spec
                .range
                .map(|r| format!("{} {}, ", r.describe(), spec.unit))
                .unwrap_or_default();
            return Err(self.err(
                section,
                key,
                format!("{x:e} {} is too small to compute with", spec.unit),
                format!(
                    "{range}at least {:e} in size (or 0 where 0 is allowed)",
                    f64::MIN_POSITIVE
                ),
            ));
        }
        if let Some(r) = spec.range {
            if !r.contains(x) {
                return Err(self.err(
                    section,
                    key,
                    format!("{} {} is out of range", fmt_num(x), spec.unit),
                    format!("{} {}", r.describe(), spec.unit),
                ));
            }
        }
        if let Some(c) = spec.calibrated {
            if !c.contains(x) {
                self.warn(
                    section,
                    key,
                    format!(
                        "{} {} is outside the range the model is calibrated for ({} {}); results there are extrapolated",
                        fmt_num(x),
                        spec.unit,
                        c.describe(),
                        spec.unit
                    ),
                );
            }
        }
        self.record(section, key, fmt_f64(x));
        Ok(Some(x))
    }

    /// A required number.
    pub fn float_req(&mut self, section: &str, key: &str) -> Result<f64, CliError> {
        self.float(section, key)?
            .ok_or_else(|| self.missing(section, key))
    }

    /// A whole number (range-checked, recorded).
    pub fn int(&mut self, section: &str, key: &str) -> Result<Option<u64>, CliError> {
        let spec = spec_of(section, key);
        let Some(v) = self.value(section, key) else {
            return Ok(None);
        };
        let i = match &v {
            Value::Integer(i) => *i.value(),
            other => {
                return Err(self.err(
                    section,
                    key,
                    format!("expected a whole number, found {}", type_name(other)),
                    "a whole number",
                ))
            }
        };
        if let Some(r) = spec.range {
            if !r.contains(i as f64) {
                return Err(self.err(section, key, format!("{i} is out of range"), r.describe()));
            }
        }
        self.record(section, key, i.to_string());
        Ok(Some(i as u64))
    }

    /// Text (recorded).
    pub fn text(&mut self, section: &str, key: &str) -> Result<Option<String>, CliError> {
        let Some(v) = self.value(section, key) else {
            return Ok(None);
        };
        let s = match &v {
            Value::String(s) => s.value().clone(),
            other => {
                return Err(self.err(
                    section,
                    key,
                    format!("expected text in quotes, found {}", type_name(other)),
                    "text in double quotes",
                ))
            }
        };
        self.record(
            section,
            key,
            Value::from(s.clone()).to_string().trim().to_string(),
        );
        Ok(Some(s))
    }

    /// One word of a choice (recorded); errors suggest the closest word.
    pub fn choice(&mut self, section: &str, key: &str) -> Result<String, CliError> {
        let spec = spec_of(section, key);
        let Kind::Choice(words) = spec.kind else {
            panic!("{section}.{key} is not a choice")
        };
        let Some(word) = self.text(section, key)? else {
            return Err(self.missing(section, key));
        };
        if !words.contains(&word.as_str()) {
            let hint = keys::closest(&word, words.iter().copied())
                .map(|b| format!("; did you mean \"{b}\"?"))
                .unwrap_or_default();
            return Err(self.err(
                section,
                key,
                format!("\"{word}\" is not a known choice{hint}"),
                keys::quoted(words),
            ));
        }
        Ok(word)
    }

    /// A choice read through its table: the word checked as [`Reader::choice`] does, then its
    /// value. The key's `Kind::Choice` must list this table's words (the key reference and the
    /// parser then agree by construction).
    pub fn choose<T: Copy + PartialEq + std::fmt::Debug>(
        &mut self,
        section: &str,
        key: &str,
        table: &Choices<T>,
    ) -> Result<T, CliError> {
        let word = self.choice(section, key)?;
        table.parse(&word).ok_or_else(|| {
            self.err(
                section,
                key,
                format!("\"{word}\" has no meaning in this version of stria"),
                keys::quoted(table.words()),
            )
        })
    }

    /// A list of choices read through their table (see [`Reader::choose`]).
    pub fn choose_list<T: Copy + PartialEq + std::fmt::Debug>(
        &mut self,
        section: &str,
        key: &str,
        table: &Choices<T>,
    ) -> Result<Vec<T>, CliError> {
        let words = self.word_list(section, key)?;
        words
            .iter()
            .map(|w| {
                table.parse(w).ok_or_else(|| {
                    self.err(
                        section,
                        key,
                        format!("\"{w}\" has no meaning in this version of stria"),
                        keys::quoted(table.words()),
                    )
                })
            })
            .collect()
    }

    /// A list of words from the key's set (recorded).
    pub fn word_list(&mut self, section: &str, key: &str) -> Result<Vec<String>, CliError> {
        let spec = spec_of(section, key);
        let Kind::List(words) = spec.kind else {
            panic!("{section}.{key} is not a list")
        };
        let Some(v) = self.value(section, key) else {
            return Err(self.missing(section, key));
        };
        let Value::Array(arr) = &v else {
            return Err(self.err(
                section,
                key,
                format!("expected a list, found {}", type_name(&v)),
                format!("a list such as [\"{}\"]", words[0]),
            ));
        };
        let mut out: Vec<String> = Vec::new();
        for item in arr.iter() {
            let Some(w) = item.as_str() else {
                return Err(self.err(
                    section,
                    key,
                    format!("list item {} is not text", item.to_string().trim()),
                    keys::quoted(words),
                ));
            };
            if !words.contains(&w) {
                let hint = keys::closest(w, words.iter().copied())
                    .map(|b| format!("; did you mean \"{b}\"?"))
                    .unwrap_or_default();
                return Err(self.err(
                    section,
                    key,
                    format!("\"{w}\" is not known{hint}"),
                    keys::quoted(words),
                ));
            }
            if out.iter().any(|o| o == w) {
                return Err(self.err(
                    section,
                    key,
                    format!("\"{w}\" is listed twice"),
                    "each at most once",
                ));
            }
            out.push(w.to_string());
        }
        if out.is_empty() {
            return Err(self.err(section, key, "the list is empty", keys::quoted(words)));
        }
        let lit = format!(
            "[{}]",
            out.iter()
                .map(|w| format!("\"{w}\""))
                .collect::<Vec<_>>()
                .join(", ")
        );
        self.record(section, key, lit);
        Ok(out)
    }

    /// A list of numbers (recorded).
    pub fn float_list(&mut self, section: &str, key: &str) -> Result<Option<Vec<f64>>, CliError> {
        let Some(v) = self.value(section, key) else {
            return Ok(None);
        };
        let Value::Array(arr) = &v else {
            return Err(self.err(
                section,
                key,
                format!("expected a list of numbers, found {}", type_name(&v)),
                "a list of numbers such as [1e-4, 0.01]",
            ));
        };
        let mut out = Vec::new();
        for item in arr.iter() {
            let x = match item {
                Value::Float(f) => *f.value(),
                Value::Integer(i) => *i.value() as f64,
                other => {
                    return Err(self.err(
                        section,
                        key,
                        format!("list item {} is not a number", other.to_string().trim()),
                        "numbers",
                    ))
                }
            };
            out.push(x);
        }
        let lit = format!(
            "[{}]",
            out.iter()
                .map(|x| fmt_f64(*x))
                .collect::<Vec<_>>()
                .join(", ")
        );
        self.record(section, key, lit);
        Ok(Some(out))
    }
}

/// A number for messages: plain `{}`.
pub fn fmt_num(x: f64) -> String {
    format!("{x}")
}

/// Name of a TOML value's type for messages.
pub fn type_name(v: &Value) -> &'static str {
    match v {
        Value::String(_) => "text",
        Value::Integer(_) => "a whole number",
        Value::Float(_) => "a number",
        Value::Boolean(_) => "true/false",
        Value::Datetime(_) => "a date",
        Value::Array(_) => "a list",
        Value::InlineTable(_) => "a table",
    }
}
