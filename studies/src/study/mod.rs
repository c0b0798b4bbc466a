//! Study files: raw TOML ([`raw`]) checked into one [`Study`]; nothing downstream re-validates.

pub mod choices;
pub mod keys;
pub mod plant;
pub mod raw;
pub mod reader;
pub mod search;

mod build;

use std::fmt;
use std::path::{Path, PathBuf};

use model::plant::{evaluate_plant, ConcentrateLoop, Plant, PlantEvaluation};
use model::{Design, Evaluation, Options, RomConstants};

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
    /// The plant: stacks, later stages, concentrate loop, water analysis.
    pub plant: plant::PlantSpec,
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
        let max = crate::fsio::STUDY_FILE_MAX_BYTES;
        let text = crate::fsio::read_input(path, max).map_err(|e| {
            CliError::input(
                path,
                None,
                "(file)",
                format!("cannot read the study file: {e}"),
                format!(
                    "a readable regular TOML file of at most {}",
                    crate::fsio::size_words(max)
                ),
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
            if v.stage == 1 {
                v.kind.set(
                    &mut d,
                    value,
                    self.concentrate_gap_follows,
                    self.concentrate_velocity_follows,
                );
            }
        }
        d
    }

    /// The baseline values of the variables (SI).
    pub fn baseline_x(&self) -> Vec<f64> {
        let plant = self.baseline_plant();
        self.variables
            .iter()
            .map(|v| match (v.kind, plant.concentrate_loop) {
                (VariableKind::WaterRecovery, ConcentrateLoop::FeedAndBleed { water_recovery }) => {
                    water_recovery
                }
                _ => v.kind.get(&plant.stages[v.stage - 1].design),
            })
            .collect()
    }

    /// The plant of the study's own design.
    pub fn baseline_plant(&self) -> Plant {
        self.plant.plant(
            &self.baseline,
            self.concentrate_gap_follows,
            self.concentrate_velocity_follows,
        )
    }

    /// The plant of the design at `x`: stage 1 is [`Self::design_at`]; later stages follow it
    /// except where they override, and then take their own variables.
    pub fn plant_at(&self, x: &[f64]) -> Plant {
        let mut plant = self.plant.plant(
            &self.design_at(x),
            self.concentrate_gap_follows,
            self.concentrate_velocity_follows,
        );
        for (v, &value) in self.variables.iter().zip(x) {
            if v.kind == VariableKind::WaterRecovery {
                plant.concentrate_loop = ConcentrateLoop::FeedAndBleed {
                    water_recovery: value,
                };
            } else if v.stage > 1 {
                v.kind.set(
                    &mut plant.stages[v.stage - 1].design,
                    value,
                    self.concentrate_gap_follows,
                    self.concentrate_velocity_follows,
                );
            }
        }
        plant
    }

    /// Evaluate the plant at `x` (one model evaluation per stage, more around a concentrate
    /// loop); the first stage's evaluation is the cell pair's. A study without plant sections
    /// is one stage of one cell pair, whose numbers are the cell-pair model's bit for bit.
    pub fn evaluate_plant_at(
        &self,
        x: &[f64],
        options: &Options,
    ) -> Result<PlantEvaluation, model::ModelError> {
        evaluate_plant(&self.plant_at(x), &self.constants, options)
    }

    /// Evaluate the design at `x`: the plant, the objectives in their natural directions and
    /// the normalised constraints g (feasible when g <= 0).
    pub fn evaluate_outcome(
        &self,
        x: &[f64],
    ) -> Result<(PlantEvaluation, Vec<f64>, Vec<f64>), String> {
        let p = self
            .evaluate_plant_at(x, &Options::default())
            .map_err(|e| e.to_string())?;
        let mut objectives = Vec::with_capacity(self.objectives.len());
        for o in &self.objectives {
            let v = o.value(&p);
            if !v.is_finite() {
                return Err(format!("{} is not finite ({v})", o.key()));
            }
            objectives.push(v);
        }
        let constraints = self.constraints.iter().map(|c| c.g(&p)).collect();
        Ok((p, objectives, constraints))
    }

    /// Evaluate the design at `x`: the first stage's cell-pair evaluation and the objectives.
    pub fn evaluate_point(&self, x: &[f64]) -> Result<(Evaluation, Vec<f64>), String> {
        let (mut p, objectives, _) = self.evaluate_outcome(x)?;
        Ok((p.stage_evaluations.swap_remove(0), objectives))
    }

    /// The resolved study body (every default explicit), without the fingerprint line.
    fn resolved_body(&self) -> String {
        let mut out = String::new();
        // The table's `stages.N` stands for each stage section present, in stage order.
        let mut sections: Vec<String> = Vec::new();
        for (section, _) in keys::SECTIONS {
            if *section == "stages.N" {
                let mut stages: Vec<usize> = self
                    .resolved
                    .iter()
                    .filter_map(|r| r.section.strip_prefix("stages."))
                    .filter_map(keys::stage_number)
                    .collect();
                stages.sort_unstable();
                stages.dedup();
                sections.extend(stages.iter().map(|n| format!("stages.{n}")));
            } else {
                sections.push(section.to_string());
                if let Some(name) = section.strip_prefix("variables.") {
                    // The same variable of later stages, in stage order.
                    for n in 2..=keys::MAX_STAGES {
                        let staged = format!("variables.stage{n}.{name}");
                        if self.resolved.iter().any(|r| r.section == staged) {
                            sections.push(staged);
                        }
                    }
                }
            }
        }
        for section in &sections {
            let items: Vec<&Resolved> = self
                .resolved
                .iter()
                .filter(|r| r.section == *section)
                .collect();
            // Optional sections appear only when given (their presence switches a feature on).
            let optional = section.starts_with("variables.")
                || ["water.analysis", "stack", "concentrate_loop"].contains(&section.as_str());
            if items.is_empty() && optional {
                continue;
            }
            if !out.is_empty() {
                out.push('\n');
            }
            out.push_str(&format!("[{section}]\n"));
            // In table order, then the ROM constants in their own order.
            let mut ordered: Vec<&Resolved> = Vec::new();
            let table = keys::table_section(section);
            for spec in keys::KEYS.iter().filter(|s| s.section == table) {
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
            for spec in keys::KEYS.iter().filter(|s| s.section == table) {
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
    /// budget keys, which may be raised on resume) and the model revision
    /// ([`model::MODEL_REVISION`]): FNV-1a 64-bit of those lines, hex.
    pub fn fingerprint(&self) -> String {
        let body = self.resolved_body();
        let mut h: u64 = 0xcbf2_9ce4_8422_2325;
        let revision = format!("model_revision = {}", model::MODEL_REVISION);
        for line in std::iter::once(revision.as_str()).chain(body.lines()) {
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
            "# fingerprint: {}\n# model revision: {}\n# Resolved study: every default made explicit (written by stria).\n\n{}",
            self.fingerprint(),
            model::MODEL_REVISION,
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

/// Read the line `# model revision: N` of a resolved study file (None for files written before
/// it was recorded).
pub fn read_model_revision(text: &str) -> Option<u32> {
    text.lines()
        .take(5)
        .find_map(|l| l.strip_prefix("# model revision:"))
        .and_then(|v| v.trim().parse().ok())
}

/// Read the first line `# fingerprint: <hex>` of a resolved study file.
pub fn read_fingerprint(text: &str) -> Option<String> {
    text.lines()
        .next()?
        .strip_prefix("# fingerprint:")
        .map(|s| s.trim().to_string())
}

#[cfg(test)]
#[allow(clippy::float_cmp)] // values parsed from literals and scaled by exact factors
mod tests {
    use super::*;

    fn quick() -> String {
        std::fs::read_to_string(Path::new(env!("CARGO_MANIFEST_DIR")).join("demo/quick.toml"))
            .unwrap()
    }

    /// The quick demo with pitch, open fraction and velocity as its only variables.
    fn quick_three_variables() -> String {
        let text = quick();
        let start = text
            .find("[variables.cell_pair_voltage]")
            .expect("quick demo has a voltage variable");
        let end = start + text[start..].find("[objectives]").unwrap();
        format!("{}{}", &text[..start], &text[end..])
    }

    fn load(text: &str) -> Result<(Study, Vec<StudyWarning>), CliError> {
        Study::from_text(Path::new("t.toml"), text, &[])
    }

    fn err(text: &str) -> String {
        load(text).unwrap_err().to_string()
    }

    #[test]
    fn resolved_study_reloads_to_the_same_study() {
        let (s, _) = load(&quick()).unwrap();
        let resolved = s.to_resolved_toml();
        let (again, _) = load(&resolved).unwrap();
        assert_eq!(s.baseline, again.baseline);
        assert_eq!(s.constants, again.constants);
        assert_eq!(s.fingerprint(), again.fingerprint());
        assert_eq!(read_fingerprint(&resolved), Some(s.fingerprint()));
        assert!(again.concentrate_gap_follows && again.concentrate_velocity_follows);
    }

    #[test]
    fn budget_keys_do_not_change_the_fingerprint_but_others_do() {
        let (mut s, _) = load(&quick()).unwrap();
        let f = s.fingerprint();
        s.set_budget(Some(99), Some(2.0));
        assert_eq!(f, s.fingerprint());
        let (t, _) = load(&quick().replace("seed = 7", "seed = 8")).unwrap();
        assert_ne!(f, t.fingerprint());
    }

    #[test]
    fn both_feed_keys_or_none_are_refused() {
        let text = quick().replace("feed_g_L = 2.4", "feed_g_L = 2.4\nfeed_mol_m3 = 41");
        assert!(err(&text).contains("both"), "{}", err(&text));
        let text = quick().replace("feed_g_L = 2.4", "");
        assert!(err(&text).contains("feed concentration"));
    }

    #[test]
    fn custom_salt_needs_its_ionic_data_and_molar_mass_for_g_per_litre() {
        let text = quick().replace("salt = \"NaCl\"", "salt = \"custom\"");
        assert!(err(&text).contains("cation_diffusivity_m2_s"));
        let text = quick().replace(
            "salt = \"NaCl\"",
            "salt = \"custom\"\ncation_diffusivity_m2_s = 1.3e-9\nanion_diffusivity_m2_s = 2.0e-9\ncation_conductivity_S_m2_mol = 5.0e-3\nanion_conductivity_S_m2_mol = 7.6e-3",
        );
        assert!(err(&text).contains("molar_mass_g_mol"), "{}", err(&text));
        let ok = text.replace("feed_g_L = 2.4", "feed_mol_m3 = 41.0");
        let (s, _) = load(&ok).unwrap();
        assert!(matches!(s.baseline.water.salt, model::Salt::Custom { .. }));
    }

    #[test]
    fn product_target_mode_needs_its_target() {
        let text = quick().replace(
            "length_mode = \"fixed\"",
            "length_mode = \"product_target\"",
        );
        assert!(err(&text).contains("product_target_mol_m3"));
        let ok = text.replace(
            "length_mode = \"product_target\"",
            "length_mode = \"product_target\"\nproduct_target_mol_m3 = 8.5",
        );
        let (s, _) = load(&ok).unwrap();
        assert!(matches!(
            s.baseline.operation.length_mode,
            model::LengthMode::ProductTarget { .. }
        ));
    }

    #[test]
    fn voltage_variable_needs_voltage_drive_and_bounds_must_be_ordered() {
        let text = quick_three_variables()
            .replace("cell_pair_voltage_V = 2.0", "cell_current_A = 10.0")
            .replace(
                "[objectives]",
                "[variables.cell_pair_voltage]\nlower_V = 1.0\nupper_V = 3.0\n\n[objectives]",
            );
        assert!(err(&text).contains("driven by current"), "{}", err(&text));
        let text = quick().replace("upper_um = 600.0", "upper_um = 20.0");
        assert!(err(&text).contains("not above"), "{}", err(&text));
    }

    #[test]
    fn outside_the_calibrated_range_is_a_warning_not_an_error() {
        let (_, w) =
            load(&quick().replace("temperature_C = 16.0", "temperature_C = 45.0")).unwrap();
        assert_eq!(w.len(), 1);
        assert!(
            w[0].field == "water.temperature_C" && w[0].line.is_some(),
            "{w:?}"
        );
    }

    #[test]
    fn design_at_moves_the_following_concentrate_stream_too() {
        let text = quick_three_variables().replace(
            "[objectives]",
            "[variables.gap]\nlower_mm = 0.3\nupper_mm = 0.8\n\n[objectives]",
        );
        let (s, _) = load(&text).unwrap();
        let d = s.design_at(&[100e-6, 0.4, 0.05, 0.6e-3]);
        assert_eq!(d.membranes.pitch_m, 100e-6);
        assert_eq!(d.operation.concentrate_velocity_m_s, 0.05);
        assert_eq!(d.channel.concentrate_gap_m, 0.6e-3);
        let text = text.replace("gap_mm = 0.5", "gap_mm = 0.5\nconcentrate_gap_mm = 0.7");
        let (s, _) = load(&text).unwrap();
        assert_eq!(
            s.design_at(&[100e-6, 0.4, 0.05, 0.6e-3])
                .channel
                .concentrate_gap_m,
            0.7e-3
        );
    }

    #[test]
    fn rom_overrides_and_unknown_rom_keys() {
        let text = quick().replace(
            "[variables.pitch]",
            "[rom]\nalpha_0 = 0.2\n\n[variables.pitch]",
        );
        let (s, _) = load(&text).unwrap();
        assert_eq!(s.constants.alpha_0, 0.2);
        let text = quick().replace(
            "[variables.pitch]",
            "[rom]\nalpha_zero = 0.2\n\n[variables.pitch]",
        );
        assert!(err(&text).contains("alpha_0"), "{}", err(&text));
    }
}
