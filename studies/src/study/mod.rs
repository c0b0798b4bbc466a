//! Study files: raw TOML ([`raw`]) checked into one [`Study`]; nothing downstream re-validates.

pub mod keys;
pub mod raw;
pub mod reader;
pub mod search;

mod build;

use std::fmt;
use std::path::{Path, PathBuf};

use model::{Design, Drive, Evaluation, Options, RomConstants};

pub use reader::Resolved;
pub use search::{
    AlgorithmChoice, Constraint, DesignVariable, Objective, OptimizerSettings, VariableKind,
};

use crate::error::CliError;
use raw::RawStudy;

/// A warning about a valid study (outside the calibrated range, an ignored key, ...).
#[derive(Debug, Clone, PartialEq)]
pub struct StudyWarning {
    /// File (or "command line (--set)").
    pub file: PathBuf,
    /// Line, when known.
    pub line: Option<usize>,
    /// Field, `section.key`.
    pub field: String,
    /// Sentence.
    pub message: String,
}

impl fmt::Display for StudyWarning {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "warning: {}", self.file.display())?;
        if let Some(l) = self.line {
            write!(f, ":{l}")?;
        }
        write!(f, ": {}: {}", self.field, self.message)
    }
}

/// A checked study.
#[derive(Debug, Clone)]
pub struct Study {
    /// Name.
    pub name: String,
    /// Free text.
    pub description: String,
    /// The study file it came from.
    pub file: PathBuf,
    /// Currency label of prices.
    pub currency: String,
    /// The baseline design (SI).
    pub baseline: Design,
    /// ROM constants after the constants file and `[rom]` overrides.
    pub constants: RomConstants,
    /// Searched variables (may be empty for `check`/`eval`; `run` needs at least one).
    pub variables: Vec<DesignVariable>,
    /// Objectives.
    pub objectives: Vec<Objective>,
    /// Constraints.
    pub constraints: Vec<Constraint>,
    /// Optimiser settings.
    pub optimizer: OptimizerSettings,
    /// The concentrate gap follows the diluate gap (not given separately).
    pub concentrate_gap_follows: bool,
    /// The concentrate velocity follows the diluate velocity (not given separately).
    pub concentrate_velocity_follows: bool,
    /// Every key with its resolved value, for [`Study::to_resolved_toml`].
    pub resolved: Vec<Resolved>,
}

impl Study {
    /// Load and check a study file.
    pub fn load(path: &Path) -> Result<(Study, Vec<StudyWarning>), CliError> {
        Study::load_with(path, &[])
    }

    /// Load a study file with `--set section.key=value` overrides applied before checking.
    pub fn load_with(path: &Path, sets: &[String]) -> Result<(Study, Vec<StudyWarning>), CliError> {
        let text = std::fs::read_to_string(path).map_err(|e| {
            CliError::input(
                path,
                None,
                "(file)",
                format!("cannot read the study file: {e}"),
                "a readable TOML file",
            )
        })?;
        Study::from_text(path, &text, sets)
    }

    /// Check a study given as text (`path` names it in messages and anchors relative paths).
    pub fn from_text(
        path: &Path,
        text: &str,
        sets: &[String],
    ) -> Result<(Study, Vec<StudyWarning>), CliError> {
        let mut raw = RawStudy::parse(path, text)?;
        for s in sets {
            raw.apply_set(s)?;
        }
        build::build(&raw)
    }

    /// The baseline with the searched variables set to `x` (SI, in variable order).
    pub fn design_at(&self, x: &[f64]) -> Design {
        let mut d = self.baseline;
        for (v, &value) in self.variables.iter().zip(x) {
            match v.kind {
                VariableKind::Pitch => d.membranes.pitch_m = value,
                VariableKind::OpenFraction => d.membranes.open_fraction = value,
                VariableKind::Velocity => {
                    d.operation.velocity_m_s = value;
                    if self.concentrate_velocity_follows {
                        d.operation.concentrate_velocity_m_s = value;
                    }
                }
                VariableKind::CellPairVoltage => {
                    d.operation.drive = Drive::Voltage {
                        cell_pair_voltage_v: value,
                    }
                }
                VariableKind::Gap => {
                    d.channel.gap_m = value;
                    if self.concentrate_gap_follows {
                        d.channel.concentrate_gap_m = value;
                    }
                }
                VariableKind::Length => d.channel.length_m = value,
            }
        }
        d
    }

    /// The baseline values of the variables (SI).
    pub fn baseline_x(&self) -> Vec<f64> {
        self.variables
            .iter()
            .map(|v| v.kind.get(&self.baseline))
            .collect()
    }

    /// Evaluate the design at `x`: the evaluation and the objectives in their natural direction.
    /// A model failure or a non-finite objective is an `Err` with the reason.
    pub fn evaluate_point(&self, x: &[f64]) -> Result<(Evaluation, Vec<f64>), String> {
        let design = self.design_at(x);
        let eval = model::evaluate(&design, &self.constants, &Options::default())
            .map_err(|e| e.to_string())?;
        let mut objectives = Vec::with_capacity(self.objectives.len());
        for o in &self.objectives {
            let v = o.value(&eval);
            if !v.is_finite() {
                return Err(format!("{} is not finite ({v})", o.key()));
            }
            objectives.push(v);
        }
        Ok((eval, objectives))
    }

    /// The resolved study body (every default explicit), without the fingerprint line.
    fn resolved_body(&self) -> String {
        let mut out = String::new();
        for (section, _) in keys::SECTIONS {
            let items: Vec<&Resolved> = self
                .resolved
                .iter()
                .filter(|r| r.section == *section)
                .collect();
            if items.is_empty() && section.starts_with("variables.") {
                continue;
            }
            if !out.is_empty() {
                out.push('\n');
            }
            out.push_str(&format!("[{section}]\n"));
            // In table order, then the ROM constants in their own order.
            let mut ordered: Vec<&Resolved> = Vec::new();
            for spec in keys::KEYS.iter().filter(|s| s.section == *section) {
                if let Some(r) = items.iter().find(|r| r.key == spec.key) {
                    ordered.push(r);
                }
            }
            for r in &items {
                if !ordered.iter().any(|o| o.key == r.key) {
                    ordered.push(r);
                }
            }
            for r in ordered {
                match &r.commented {
                    None => out.push_str(&format!("{} = {}\n", r.key, r.literal)),
                    Some(why) => out.push_str(&format!("# {} = {}  ({why})\n", r.key, r.literal)),
                }
            }
            for spec in keys::KEYS.iter().filter(|s| s.section == *section) {
                if matches!(spec.default, keys::DefaultValue::Unset)
                    && !items.iter().any(|r| r.key == spec.key)
                {
                    out.push_str(&format!("# {}: not set\n", spec.key));
                }
            }
        }
        out
    }

    /// Fingerprint of everything that shapes the results (every resolved key except the
    /// budget keys, which may be raised on resume): FNV-1a 64-bit of the resolved lines, hex.
    pub fn fingerprint(&self) -> String {
        let body = self.resolved_body();
        let mut h: u64 = 0xcbf2_9ce4_8422_2325;
        for line in body.lines() {
            if line.starts_with('#') || line.trim().is_empty() {
                continue;
            }
            let key = line.split('=').next().unwrap_or("").trim();
            let is_budget = keys::KEYS
                .iter()
                .any(|s| s.section == "optimizer" && s.budget && s.key == key);
            if is_budget {
                continue;
            }
            for b in line.bytes().chain(std::iter::once(b'\n')) {
                h ^= u64::from(b);
                h = h.wrapping_mul(0x0000_0100_0000_01b3);
            }
        }
        format!("{h:016x}")
    }

    /// The resolved study file: first line `# fingerprint: <hex>`, then every key with its
    /// value (defaults explicit). Loading it gives the same study and fingerprint.
    pub fn to_resolved_toml(&self) -> String {
        format!(
            "# fingerprint: {}\n# Resolved study: every default made explicit (written by stria).\n\n{}",
            self.fingerprint(),
            self.resolved_body()
        )
    }

    /// Change the budget (from `stria run --max-evals/--hours`); budget keys are outside the
    /// fingerprint.
    pub fn set_budget(&mut self, max_evaluations: Option<u64>, hours: Option<f64>) {
        if let Some(n) = max_evaluations {
            self.optimizer.max_evaluations = n;
            self.set_resolved("optimizer", "max_evaluations", n.to_string());
        }
        if let Some(h) = hours {
            self.optimizer.hours = Some(h);
            self.set_resolved("optimizer", "hours", reader::fmt_f64(h));
        }
    }

    fn set_resolved(&mut self, section: &str, key: &str, literal: String) {
        self.resolved
            .retain(|r| !(r.section == section && r.key == key));
        self.resolved.push(Resolved {
            section: section.into(),
            key: key.into(),
            literal,
            commented: None,
        });
    }
}

/// Read the first line `# fingerprint: <hex>` of a resolved study file.
pub fn read_fingerprint(text: &str) -> Option<String> {
    text.lines()
        .next()?
        .strip_prefix("# fingerprint:")
        .map(|s| s.trim().to_string())
}
