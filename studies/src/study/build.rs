//! Stage two: raw values checked into a [`Study`] (cross-key rules live here).

use std::path::Path;

use model::{
    validity, Channel, Design, Drive, Economics, LengthMode, MembraneMaterial, MembranePhysics,
    Membranes, Operation, RomConstants, Salt, Spacer, Water,
};
use toml_edit::ImDocument;

use super::choices::{LengthModeChoice, SaltChoice, SpacerChoice};
use super::keys;
use super::raw::{line_of, shown_name, syntax_message, unknown_key_help, RawStudy};
use super::reader::{fmt_f64, Reader};
use super::search::{
    AlgorithmChoice, Constraint, DesignVariable, Objective, OptimizerSettings, VariableKind,
};
use super::{Study, StudyWarning};
use crate::error::CliError;

/// Budget from which a run without an archive grid gets a warning.
const LONG_RUN: u64 = 200_000;

/// Check a raw study.
pub fn build(raw: &RawStudy) -> Result<(Study, Vec<StudyWarning>), CliError> {
    let mut r = Reader::new(raw);

    // [study]
    let name = r.text("study", "name")?.ok_or_else(|| {
        r.err(
            "study",
            "name",
            "missing `name` in [study]",
            "a name in quotes, e.g. name = \"Well 3 pattern study\"",
        )
    })?;
    if name.trim().is_empty() {
        return Err(r.err("study", "name", "the name is empty", "a non-empty name"));
    }
    let description = r.text("study", "description")?.unwrap_or_default();

    let water = read_water(&mut r)?;
    let (channel, concentrate_gap_follows) = read_channel(&mut r)?;
    let membranes = read_membranes(&mut r, &water)?;
    let (operation, concentrate_velocity_follows) = read_operation(&mut r)?;
    let (economics, currency) = read_economics(&mut r)?;
    let constants = read_rom(&mut r)?;
    let baseline = Design {
        water,
        channel,
        membranes,
        operation,
        economics,
    };
    let plant = super::plant::read_plant(&mut r, &baseline, baseline.water.temperature_k - 273.15)?;
    let variables = read_variables(&mut r, &baseline, &plant)?;
    let objectives: Vec<Objective> = r.choose_list("objectives", "list", &keys::OBJECTIVES)?;
    let constraints = read_constraints(&mut r, &plant)?;
    let optimizer = read_optimizer(&mut r, objectives.len())?;

    let study = Study {
        name,
        description,
        file: raw.file.clone(),
        currency,
        baseline,
        constants,
        variables,
        objectives,
        constraints,
        optimizer,
        plant,
        concentrate_gap_follows,
        concentrate_velocity_follows,
        resolved: r.resolved,
    };
    Ok((study, r.warnings))
}

fn one_of(
    r: &mut Reader,
    section: &str,
    a: &str,
    b: &str,
) -> Result<Option<(bool, f64)>, CliError> {
    let ga = r.given(section, a);
    let gb = r.given(section, b);
    if ga && gb {
        return Err(r.err(
            section,
            b,
            format!("both `{a}` and `{b}` are given"),
            format!("one of `{a}` or `{b}`"),
        ));
    }
    if ga {
        return Ok(r.float(section, a)?.map(|x| (true, x)));
    }
    if gb {
        return Ok(r.float(section, b)?.map(|x| (false, x)));
    }
    Ok(None)
}

fn read_water(r: &mut Reader) -> Result<Water, CliError> {
    let salt_word = r.choose("water", "salt", &keys::SALTS)?;
    let temperature_c = r.float_req("water", "temperature_C")?;
    let custom_keys = [
        "cation_diffusivity_m2_s",
        "anion_diffusivity_m2_s",
        "cation_conductivity_S_m2_mol",
        "anion_conductivity_S_m2_mol",
    ];
    let salt = match salt_word {
        SaltChoice::NaCl => Salt::NaCl,
        SaltChoice::KCl => Salt::KCl,
        SaltChoice::Custom => {
            let mut v = [0.0; 4];
            for (i, key) in custom_keys.iter().enumerate() {
                v[i] = r.float("water", key)?.ok_or_else(|| {
                    r.err(
                        "water",
                        key,
                        format!("a custom salt needs `{key}`"),
                        "its value at 25 C, infinite dilution",
                    )
                })?;
            }
            Salt::Custom {
                cation_diffusivity_m2_s: v[0],
                anion_diffusivity_m2_s: v[1],
                cation_limiting_conductivity_s_m2_mol: v[2],
                anion_limiting_conductivity_s_m2_mol: v[3],
            }
        }
    };
    if !matches!(salt, Salt::Custom { .. }) {
        for key in custom_keys {
            if r.given("water", key) {
                return Err(r.err(
                    "water",
                    key,
                    format!("`{key}` is only used with salt = \"custom\""),
                    "remove it, or set salt = \"custom\"",
                ));
            }
        }
    }
    let default_mass = model::properties::molar_mass_g_mol(salt);
    let molar_mass = match r.float("water", "molar_mass_g_mol")? {
        Some(m) => Some(m),
        None => {
            if let Some(m) = default_mass {
                r.record("water", "molar_mass_g_mol", fmt_f64(m));
            }
            default_mass
        }
    };
    let to_mol = |r: &Reader, key: &str, (in_mol, x): (bool, f64)| -> Result<f64, CliError> {
        if in_mol {
            return Ok(x);
        }
        let m = molar_mass.ok_or_else(|| {
            r.err(
                "water",
                "molar_mass_g_mol",
                format!("`{key}` is in g/L but a custom salt has no known molar mass"),
                "molar_mass_g_mol = <g/mol>, or give the concentration in mol/m3",
            )
        })?;
        let mol = x / m * 1000.0;
        // The model's range, checked here at the g/L key.
        if !(validity::FEED_MIN_MOL_M3..=validity::FEED_MAX_MOL_M3).contains(&mol) {
            return Err(r.err(
                "water",
                key,
                format!("{x} g/L at {m} g/mol is {mol:e} mol/m3, outside the model's range"),
                "a concentration from 1e-3 to 6000 mol/m3 (check molar_mass_g_mol)",
            ));
        }
        Ok(mol)
    };
    let feed = one_of(r, "water", "feed_mol_m3", "feed_g_L")?.ok_or_else(|| {
        r.err(
            "water",
            "feed_mol_m3",
            "missing the feed concentration",
            "feed_mol_m3 (mol/m3 = mM) or feed_g_L (g/L)",
        )
    })?;
    let feed_mol = to_mol(r, "feed_g_L", feed)?;
    let conc = match one_of(
        r,
        "water",
        "concentrate_feed_mol_m3",
        "concentrate_feed_g_L",
    )? {
        Some(c) => to_mol(r, "concentrate_feed_g_L", c)?,
        None => {
            let key = if feed.0 {
                "concentrate_feed_mol_m3"
            } else {
                "concentrate_feed_g_L"
            };
            r.record("water", key, fmt_f64(feed.1));
            feed_mol
        }
    };
    Ok(Water {
        salt,
        temperature_k: temperature_c + 273.15,
        feed_concentration_mol_m3: feed_mol,
        concentrate_feed_concentration_mol_m3: conc,
    })
}

fn read_channel(r: &mut Reader) -> Result<(Channel, bool), CliError> {
    let gap = r.float_req("channel", "gap_mm")?;
    let (cgap, follows) = match r.float("channel", "concentrate_gap_mm")? {
        Some(c) => (c, false),
        None => {
            r.record_comment(
                "channel",
                "concentrate_gap_mm",
                fmt_f64(gap),
                "follows gap_mm",
            );
            (gap, true)
        }
    };
    let length = r.float_req("channel", "length_m")?;
    let width = r.float_req("channel", "width_m")?;
    let spacer_word = r.choose("channel", "spacer", &keys::SPACERS)?;
    let only = |r: &mut Reader, key: &str, used_with: &str| {
        if r.given("channel", key) {
            r.warn(
                "channel",
                key,
                format!("ignored: only used with spacer = {used_with}"),
            );
        }
    };
    let spacer = match spacer_word {
        SpacerChoice::None => {
            for key in [
                "spacer_porosity",
                "spacer_shadow_factor",
                "spacer_sherwood_factor",
                "spacer_friction_factor",
            ] {
                only(r, key, "\"schock_miquel\" or \"multiplier\"");
            }
            Spacer::None
        }
        SpacerChoice::SchockMiquel => {
            only(r, "spacer_sherwood_factor", "\"multiplier\"");
            only(r, "spacer_friction_factor", "\"multiplier\"");
            Spacer::SchockMiquel {
                porosity: float_or(r, "channel", "spacer_porosity", 0.85)?,
                shadow_factor: float_or(r, "channel", "spacer_shadow_factor", 1.0)?,
            }
        }
        SpacerChoice::Multiplier => {
            only(r, "spacer_porosity", "\"schock_miquel\"");
            Spacer::Multiplier {
                sherwood: float_or(r, "channel", "spacer_sherwood_factor", 1.0)?,
                friction: float_or(r, "channel", "spacer_friction_factor", 1.0)?,
                shadow_factor: float_or(r, "channel", "spacer_shadow_factor", 1.0)?,
            }
        }
    };
    Ok((
        Channel {
            gap_m: gap * 1e-3,
            concentrate_gap_m: cgap * 1e-3,
            length_m: length,
            width_m: width,
            spacer,
        },
        follows,
    ))
}

/// A number with a default that depends on another key (recorded either way).
fn float_or(r: &mut Reader, section: &str, key: &str, default: f64) -> Result<f64, CliError> {
    match r.float(section, key)? {
        Some(x) => Ok(x),
        None => {
            r.record(section, key, fmt_f64(default));
            Ok(default)
        }
    }
}

fn read_membranes(r: &mut Reader, water: &Water) -> Result<Membranes, CliError> {
    let cem_t = r.float_req("membranes", "cem_transport_number")?;
    let aem_t = r.float_req("membranes", "aem_transport_number")?;
    // The model's rule, checked here at the key's line: a membrane must be more selective
    // than the solution itself for its counter-ion.
    let (cem_min, aem_min) = validity::transport_number_minima(water);
    for (key, t, min, ion) in [
        ("cem_transport_number", cem_t, cem_min, "cation"),
        ("aem_transport_number", aem_t, aem_min, "anion"),
    ] {
        if t <= min {
            return Err(r.err(
                "membranes",
                key,
                format!(
                    "{t} is not above the solution's own {ion} transport number ({:.3}) by {}",
                    min - validity::TRANSPORT_MARGIN,
                    validity::TRANSPORT_MARGIN
                ),
                format!("above {min:.3} up to 1 for this salt and temperature"),
            ));
        }
    }
    let cem_r = r.float_req("membranes", "cem_area_resistance_ohm_cm2")?;
    let aem_r = r.float_req("membranes", "aem_area_resistance_ohm_cm2")?;
    let side = r.choose("membranes", "pattern_side", &keys::PATTERN_SIDES)?;
    let pitch = r.float_req("membranes", "pitch_um")?;
    let open = r.float_req("membranes", "open_fraction")?;
    let physics = read_membrane_physics(r)?;
    Ok(Membranes {
        cem_transport_number: cem_t,
        aem_transport_number: aem_t,
        cem_area_resistance_ohm_m2: cem_r * 1e-4,
        aem_area_resistance_ohm_m2: aem_r * 1e-4,
        pitch_m: pitch * 1e-6,
        open_fraction: open,
        pattern_side: side,
        physics,
    })
}

/// The effects of real membranes and the material data (every key has a default).
fn read_membrane_physics(r: &mut Reader) -> Result<MembranePhysics, CliError> {
    let effects = r.word_list("membranes", "effects")?;
    if effects.len() > 1 && effects.iter().any(|e| e == "none") {
        return Err(r.err(
            "membranes",
            "effects",
            "\"none\" is listed with other effects",
            "[\"none\"] alone, or any of the other effects",
        ));
    }
    let has = |w: &str| effects.iter().any(|e| e == w);
    let mut material = |side: &str| -> Result<MembraneMaterial, CliError> {
        let f = |r: &mut Reader, key: &str| -> Result<f64, CliError> {
            r.float_req("membranes", &format!("{side}_{key}"))
        };
        Ok(MembraneMaterial {
            solution_resistance_share: f(r, "resistance_solution_share")?,
            salt_permeance_m_s: f(r, "salt_permeance_m_s")?,
            water_permeability_m_s_pa: f(r, "water_permeability_m_s_Pa")?,
            water_transport_number: f(r, "electroosmotic_water_mol_F")?,
        })
    };
    let cem = material("cem")?;
    let aem = material("aem")?;
    Ok(MembranePhysics {
        donnan: has("donnan"),
        concentration_dependent_resistance: has("concentration_resistance"),
        salt_back_diffusion: has("salt_back_diffusion"),
        water_transport: has("water_transport"),
        cem,
        aem,
    })
}

fn read_operation(r: &mut Reader) -> Result<(Operation, bool), CliError> {
    let v = r.float_req("operation", "velocity_cm_s")?;
    let (cv, follows) = match r.float("operation", "concentrate_velocity_cm_s")? {
        Some(c) => (c, false),
        None => {
            r.record_comment(
                "operation",
                "concentrate_velocity_cm_s",
                fmt_f64(v),
                "follows velocity_cm_s",
            );
            (v, true)
        }
    };
    let drive = match one_of(r, "operation", "cell_pair_voltage_V", "cell_current_A")? {
        Some((true, u)) => Drive::Voltage {
            cell_pair_voltage_v: u,
        },
        Some((false, i)) => Drive::Current { cell_current_a: i },
        None => {
            return Err(r.err(
                "operation",
                "cell_pair_voltage_V",
                "missing the drive",
                "cell_pair_voltage_V (V) or cell_current_A (A)",
            ))
        }
    };
    let flow = r.choose("operation", "flow", &keys::FLOWS)?;
    let mode = r.choose("operation", "length_mode", &keys::LENGTH_MODES)?;
    let length_mode = if mode == LengthModeChoice::ProductTarget {
        let t = r
            .float("operation", "product_target_mol_m3")?
            .ok_or_else(|| {
                r.err(
                    "operation",
                    "product_target_mol_m3",
                    "length_mode = \"product_target\" needs `product_target_mol_m3`",
                    "the wanted product concentration in mol/m3",
                )
            })?;
        LengthMode::ProductTarget {
            product_concentration_mol_m3: t,
        }
    } else {
        if r.given("operation", "product_target_mol_m3") {
            r.warn(
                "operation",
                "product_target_mol_m3",
                "ignored: only used with length_mode = \"product_target\"",
            );
        }
        LengthMode::Fixed
    };
    Ok((
        Operation {
            velocity_m_s: v * 1e-2,
            concentrate_velocity_m_s: cv * 1e-2,
            drive,
            flow,
            length_mode,
        },
        follows,
    ))
}

fn read_economics(r: &mut Reader) -> Result<(Economics, String), CliError> {
    let currency = r.text("economics", "currency")?.unwrap_or_default();
    let e = Economics {
        electricity_price_per_kwh: r.float_req("economics", "electricity_price_per_kWh")?,
        pump_efficiency: r.float_req("economics", "pump_efficiency")?,
        membrane_price_per_m2: r.float_req("economics", "membrane_price_per_m2")?,
        pattern_surcharge_per_m2: r
            .float("economics", "pattern_surcharge_per_m2")?
            .unwrap_or(0.0),
        membrane_life_years: r.float_req("economics", "membrane_life_years")?,
        discount_rate: r.float_req("economics", "discount_rate_percent")? / 100.0,
        operating_hours_per_year: r.float_req("economics", "operating_hours_per_year")?,
        plant_capacity_m3_day: r.float_req("economics", "plant_capacity_m3_day")?,
    };
    Ok((e, currency))
}

fn read_rom(r: &mut Reader) -> Result<RomConstants, CliError> {
    let defaults = keys::rom_keys();
    let mut values: Vec<(String, f64)> = defaults.clone();
    if let Some(entry) = r.raw.get("rom", "constants_file") {
        let Some(rel) = entry.value.as_str() else {
            return Err(r.err(
                "rom",
                "constants_file",
                "expected a path in quotes",
                "a path relative to the study file",
            ));
        };
        let base = r.raw.file.parent().unwrap_or(Path::new("."));
        let path = base.join(rel);
        let max = crate::fsio::CONSTANTS_FILE_MAX_BYTES;
        let text = crate::fsio::read_input(&path, max).map_err(|e| {
            r.err(
                "rom",
                "constants_file",
                format!("cannot read {}: {e}", path.display()),
                format!(
                    "a constants file (TOML of [rom] keys, a regular file of at most {}) relative to the study file",
                    crate::fsio::size_words(max)
                ),
            )
        })?;
        for (key, x) in read_constants_file(&path, &text)? {
            if let Some(slot) = values.iter_mut().find(|(k, _)| *k == key) {
                slot.1 = x;
            }
        }
        r.record_comment(
            "rom",
            "constants_file",
            format!("\"{rel}\""),
            "its values are written out below",
        );
    }
    for (key, slot) in values.iter_mut() {
        if let Some(entry) = r.raw.get("rom", key) {
            let x = match &entry.value {
                toml_edit::Value::Float(f) => *f.value(),
                toml_edit::Value::Integer(i) => *i.value() as f64,
                other => {
                    return Err(r.err(
                        "rom",
                        key,
                        format!(
                            "expected a number, found {}",
                            super::reader::type_name(other)
                        ),
                        "a finite number",
                    ))
                }
            };
            if !x.is_finite() {
                return Err(r.err("rom", key, "not a finite number", "a finite number"));
            }
            if let Err((message, allowed)) = keys::check_rom_value(key, x) {
                return Err(r.err("rom", key, message, allowed));
            }
            *slot = x;
        }
    }
    let mut map = serde_json::Map::new();
    for (key, x) in &values {
        r.record("rom", key, fmt_f64(*x));
        map.insert(key.clone(), serde_json::json!(x));
    }
    let constants: RomConstants =
        serde_json::from_value(serde_json::Value::Object(map)).map_err(|e| {
            r.err(
                "rom",
                "(constants)",
                format!("the constants do not form a valid set: {e}"),
                "the keys of the constants table",
            )
        })?;
    // Each value was checked on its own above; the model's check of the whole set is the
    // safety net, so that nothing downstream meets constants the model refuses.
    if let Err(e) = constants.validate() {
        let (field, allowed) = match e {
            model::ModelError::Input { field, allowed, .. } => (field, allowed),
            _ => ("(constants)", "the admissible range of each constant"),
        };
        return Err(r.err("rom", field, e.to_string(), allowed));
    }
    Ok(constants)
}

/// Read a constants file: a TOML table of ROM keys (at top level or under `[rom]`).
pub fn read_constants_file(path: &Path, text: &str) -> Result<Vec<(String, f64)>, CliError> {
    let doc = ImDocument::parse(text).map_err(|e| {
        CliError::input(
            path,
            e.span().map(|s| line_of(text, s.start)),
            "(syntax)",
            syntax_message(&e),
            "TOML syntax",
        )
    })?;
    let root = doc.as_table();
    let line_of_key = |table: &dyn toml_edit::TableLike, key: &str| {
        table
            .get_key_value(key)
            .and_then(|(k, _)| k.span())
            .map(|s| line_of(text, s.start))
    };
    let table: &dyn toml_edit::TableLike = match root.get("rom") {
        None => root,
        Some(item) => {
            let Some(t) = item.as_table_like() else {
                return Err(CliError::input(
                    path,
                    line_of_key(root, "rom"),
                    "rom",
                    "`rom` must be one section [rom] of constants, not a value or a list of sections",
                    "[rom] followed by the constants, or the constants at the top of the file",
                ));
            };
            // With a [rom] section, anything outside it (but the posterior `stria fit`
            // writes) would be silently ignored.
            if let Some((other, _)) = root.iter().find(|(k, _)| *k != "rom" && *k != "posterior") {
                return Err(CliError::input(
                    path,
                    line_of_key(root, other),
                    shown_name(other),
                    format!("`{}` is outside the [rom] section", shown_name(other)),
                    "the constants all under [rom], or all at the top of the file",
                ));
            }
            t
        }
    };
    // the posterior's shape is checked here, so a study never loads a damaged one
    crate::fit::posterior::parse(path, text)?;
    let known: Vec<String> = keys::rom_keys().into_iter().map(|(k, _)| k).collect();
    let mut out = Vec::new();
    for (key, item) in table.iter() {
        if key == "posterior" && item.is_table() {
            continue;
        }
        let line = line_of_key(table, key);
        if !known.iter().any(|k| k == key) {
            let (msg, allowed) = unknown_key_help("rom", key);
            return Err(CliError::input(path, line, shown_name(key), msg, allowed));
        }
        let x = item
            .as_float()
            .or_else(|| item.as_integer().map(|i| i as f64))
            .filter(|x| x.is_finite())
            .ok_or_else(|| {
                CliError::input(path, line, key, "expected a finite number", "a number")
            })?;
        if let Err((message, allowed)) = keys::check_rom_value(key, x) {
            return Err(CliError::input(path, line, key, message, allowed));
        }
        out.push((key.to_string(), x));
    }
    Ok(out)
}

fn read_variables(
    r: &mut Reader,
    baseline: &Design,
    plant: &super::plant::PlantSpec,
) -> Result<Vec<DesignVariable>, CliError> {
    let mut out = Vec::new();
    for stage in 1..=plant.later_stages.len() + 1 {
        for kind in VariableKind::ALL {
            let v = DesignVariable {
                kind,
                lower: 0.0,
                upper: 0.0,
                stage,
            };
            let section = v.section();
            if !r.raw.has_section(&section) {
                continue;
            }
            if stage > 1 && kind == VariableKind::WaterRecovery {
                continue;
            }
            let (suffix, to_si) = kind.bound_unit();
            let lo_key = format!("lower{suffix}");
            let hi_key = format!("upper{suffix}");
            let lo = r.float_req(&section, &lo_key)?;
            let hi = r.float_req(&section, &hi_key)?;
            if lo >= hi {
                return Err(r.err(
                    &section,
                    &hi_key,
                    format!("upper bound {hi} is not above lower bound {lo}"),
                    format!("{hi_key} > {lo_key}"),
                ));
            }
            if kind == VariableKind::CellPairVoltage
                && !matches!(baseline.operation.drive, Drive::Voltage { .. })
            {
                return Err(r.err(
                    &section,
                    &lo_key,
                    "the cell-pair voltage is a variable but the study is driven by current",
                    "give operation.cell_pair_voltage_V instead of cell_current_A",
                ));
            }
            if kind == VariableKind::WaterRecovery
                && !matches!(
                    plant.concentrate_loop,
                    model::plant::ConcentrateLoop::FeedAndBleed { .. }
                )
            {
                return Err(r.err(
                    &section,
                    &lo_key,
                    "the water recovery is a variable only with a feed-and-bleed concentrate loop",
                    "[concentrate_loop] mode = \"feed_and_bleed\" with its water_recovery",
                ));
            }
            out.push(DesignVariable {
                kind,
                lower: lo * to_si,
                upper: hi * to_si,
                stage,
            });
        }
    }
    // A stage variable of a stage that does not exist.
    for n in plant.later_stages.len() + 2..=keys::MAX_STAGES {
        for kind in VariableKind::ALL {
            let section = format!("variables.stage{n}.{}", kind.name());
            if r.raw.has_section(&section) {
                let (file, line) = r.locate(&section, "");
                return Err(CliError::input(
                    file,
                    line,
                    section,
                    format!("stage {n} is not in the study"),
                    format!(
                        "a [stages.{n}] section, or variables of stages 1 to {}",
                        plant.later_stages.len() + 1
                    ),
                ));
            }
        }
    }
    Ok(out)
}

fn read_constraints(
    r: &mut Reader,
    plant: &super::plant::PlantSpec,
) -> Result<Vec<Constraint>, CliError> {
    let mut out = Vec::new();
    if let Some(x) = r.float("constraints", "max_product_mol_m3")? {
        out.push(Constraint::MaxProduct(x));
    }
    if let Some(x) = r.float("constraints", "max_pressure_drop_kPa")? {
        out.push(Constraint::MaxPressureDrop(x * 1e3));
    }
    if let Some(x) = r.float("constraints", "max_reynolds")? {
        out.push(Constraint::MaxReynolds(x));
    }
    if let Some(x) = r.float("constraints", "max_stack_voltage_V")? {
        out.push(Constraint::MaxStackVoltage(x));
    }
    if let Some(x) = r.float("constraints", "min_water_recovery")? {
        out.push(Constraint::MinWaterRecovery(x));
    }
    for key in ["max_concentrate_calcite_si", "max_concentrate_gypsum_si"] {
        if let Some(x) = r.float("constraints", key)? {
            if plant.analysis.is_none() {
                return Err(r.err(
                    "constraints",
                    key,
                    "a saturation-index limit needs a water analysis",
                    "add a [water.analysis] section, or remove this constraint",
                ));
            }
            out.push(if key.contains("calcite") {
                Constraint::MaxConcentrateCalciteSi(x)
            } else {
                Constraint::MaxConcentrateGypsumSi(x)
            });
        }
    }
    Ok(out)
}

fn read_optimizer(r: &mut Reader, n_objectives: usize) -> Result<OptimizerSettings, CliError> {
    let algorithm = r.choose("optimizer", "algorithm", &keys::ALGORITHMS)?;
    let seed = r.int("optimizer", "seed")?.unwrap_or(1);
    let population = r.int("optimizer", "population")?.unwrap_or(40) as usize;
    let max_evaluations = r.int("optimizer", "max_evaluations")?.unwrap_or(2000);
    let hours = r.float("optimizer", "hours")?;
    let stall_generations = r.int("optimizer", "stall_generations")?;
    let archive_epsilon = r.float_list("optimizer", "archive_epsilon")?;
    if let Some(eps) = &archive_epsilon {
        let allowed = "one number from 1e-12 up per objective, in the objective's unit, in the order of objectives.list";
        if eps.len() != n_objectives {
            return Err(r.err(
                "optimizer",
                "archive_epsilon",
                format!("{} values given for {} objectives", eps.len(), n_objectives),
                allowed,
            ));
        }
        // Below 1e-12 the grid index of an objective (its value over the grid size) leaves the
        // integers that a box is numbered by, and every design lands in one box.
        if let Some(e) = eps.iter().find(|e| !(e.is_finite() && **e >= 1e-12)) {
            return Err(r.err(
                "optimizer",
                "archive_epsilon",
                format!("grid size {e} is too small (or not a number)"),
                allowed,
            ));
        }
    }
    if algorithm == AlgorithmChoice::Nsga2
        && max_evaluations >= LONG_RUN
        && archive_epsilon.is_none()
    {
        r.warn(
            "optimizer",
            "archive_epsilon",
            format!(
                "not set for a run of {max_evaluations} evaluations: the archive keeps every non-dominated design, so memory and front.csv grow with the front; set a grid per objective to bound them"
            ),
        );
    }
    if algorithm == AlgorithmChoice::Nsga2 && population % 2 == 1 {
        return Err(r.err(
            "optimizer",
            "population",
            format!("{population} is odd"),
            "an even number (NSGA-II mates in pairs)",
        ));
    }
    let solver = r.choose("optimizer", "solver", &keys::SOLVERS)?;
    let scalarisation = r.choose("optimizer", "scalarisation", &keys::SCALARISATIONS)?;
    let subproblems = r.int("optimizer", "subproblems")?.unwrap_or(11) as usize;
    let sampler = r.choose("optimizer", "sampler", &keys::SAMPLERS)?;
    Ok(OptimizerSettings {
        algorithm,
        seed,
        population,
        max_evaluations,
        hours,
        stall_generations,
        archive_epsilon,
        solver,
        scalarisation,
        subproblems,
        sampler,
    })
}
