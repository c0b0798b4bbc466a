//! The plant sections of a study: `[stack]`, `[stages.N]`, `[concentrate_loop]` and
//! `[water.analysis]`, read into a [`PlantSpec`] from which each design's `model::plant::Plant`
//! is built.

use model::plant::{ConcentrateLoop, Plant, PlantCosts, Stage};
use model::scaling::WaterAnalysis;
use model::stack::{ShuntGeometry, Stack};
use model::{Design, Drive};

use super::choices::LoopModeChoice;
use super::keys::MAX_STAGES;
use super::reader::Reader;
use crate::error::CliError;

/// What a later stage changes from the first stage's design (SI); `None` follows stage 1.
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub struct StageOverrides {
    /// Flow-path length, m.
    pub length_m: Option<f64>,
    /// Diluate gap, m.
    pub gap_m: Option<f64>,
    /// Stripe pitch, m.
    pub pitch_m: Option<f64>,
    /// Open fraction.
    pub open_fraction: Option<f64>,
    /// Diluate velocity, m/s.
    pub velocity_m_s: Option<f64>,
    /// Cell-pair voltage, V.
    pub cell_pair_voltage_v: Option<f64>,
    /// Cell pairs per stack.
    pub cell_pairs: Option<u32>,
}

/// The plant of a study, checked.
#[derive(Debug, Clone, PartialEq)]
pub struct PlantSpec {
    /// The first stage's stack (a single cell pair without electrodes when `[stack]` is absent).
    pub stack: Stack,
    /// Stages 2, 3, ... in order.
    pub later_stages: Vec<StageOverrides>,
    /// The concentrate stream.
    pub concentrate_loop: ConcentrateLoop,
    /// Capital beyond the membranes.
    pub costs: PlantCosts,
    /// Water analysis of the feed.
    pub analysis: Option<WaterAnalysis>,
}

impl PlantSpec {
    /// The plant whose first stage is `first`; later stages follow it except where they
    /// override. `gap_follows` and `velocity_follows` carry the concentrate along as in stage 1.
    pub fn plant(&self, first: &Design, gap_follows: bool, velocity_follows: bool) -> Plant {
        let mut stages = vec![Stage {
            design: *first,
            stack: self.stack,
        }];
        for o in &self.later_stages {
            let mut d = *first;
            let mut stack = self.stack;
            if let Some(x) = o.length_m {
                d.channel.length_m = x;
            }
            if let Some(x) = o.gap_m {
                d.channel.gap_m = x;
                if gap_follows {
                    d.channel.concentrate_gap_m = x;
                }
            }
            if let Some(x) = o.pitch_m {
                d.membranes.pitch_m = x;
            }
            if let Some(x) = o.open_fraction {
                d.membranes.open_fraction = x;
            }
            if let Some(x) = o.velocity_m_s {
                d.operation.velocity_m_s = x;
                if velocity_follows {
                    d.operation.concentrate_velocity_m_s = x;
                }
            }
            if let Some(x) = o.cell_pair_voltage_v {
                d.operation.drive = Drive::Voltage {
                    cell_pair_voltage_v: x,
                };
            }
            if let Some(n) = o.cell_pairs {
                stack.cell_pairs = n;
            }
            stages.push(Stage { design: d, stack });
        }
        Plant {
            stages,
            concentrate_loop: self.concentrate_loop,
            costs: self.costs,
            analysis: self.analysis,
        }
    }

    /// Whether the study is a plant beyond the single cell pair (any plant section given).
    pub fn is_single_cell_pair(&self) -> bool {
        self.later_stages.is_empty()
            && self.stack == Stack::single_cell_pair()
            && self.concentrate_loop == ConcentrateLoop::OnceThrough
            && self.analysis.is_none()
    }
}

/// Read the plant sections. `temperature_c` is the feed's, for the water analysis.
pub fn read_plant(
    r: &mut Reader,
    baseline: &Design,
    temperature_c: f64,
) -> Result<PlantSpec, CliError> {
    let (stack, costs) = if r.raw.has_section("stack") {
        read_stack(r)?
    } else {
        (Stack::single_cell_pair(), PlantCosts::none())
    };
    let mut later_stages = Vec::new();
    for n in 2..=MAX_STAGES {
        let section = format!("stages.{n}");
        if !r.raw.has_section(&section) {
            if let Some(m) =
                (n + 1..=MAX_STAGES).find(|m| r.raw.has_section(&format!("stages.{m}")))
            {
                let later = format!("stages.{m}");
                let (file, line) = r.locate(&later, "");
                return Err(CliError::input(
                    file,
                    line,
                    later,
                    format!("[stages.{m}] is given but [stages.{n}] is not"),
                    "stages numbered 2, 3, ... without gaps (an empty [stages.N] repeats stage 1)",
                ));
            }
            break;
        }
        later_stages.push(read_stage(r, &section, baseline)?);
    }
    let concentrate_loop = if r.raw.has_section("concentrate_loop") {
        match r.choose("concentrate_loop", "mode", &super::keys::LOOP_MODES)? {
            LoopModeChoice::FeedAndBleed => {
                let w = r
                    .float("concentrate_loop", "water_recovery")?
                    .ok_or_else(|| {
                        r.err(
                            "concentrate_loop",
                            "water_recovery",
                            "feed_and_bleed needs the water recovery",
                            "water_recovery = 0.01 to 0.99 (product over plant feed)",
                        )
                    })?;
                ConcentrateLoop::FeedAndBleed { water_recovery: w }
            }
            LoopModeChoice::OnceThrough => {
                if r.given("concentrate_loop", "water_recovery") {
                    return Err(r.err(
                        "concentrate_loop",
                        "water_recovery",
                        "once-through concentrate has no recovery setting (the flows set it)",
                        "remove it, or set mode = \"feed_and_bleed\"",
                    ));
                }
                ConcentrateLoop::OnceThrough
            }
        }
    } else {
        ConcentrateLoop::OnceThrough
    };
    let analysis = if r.raw.has_section("water.analysis") {
        Some(read_analysis(r, temperature_c)?)
    } else {
        None
    };
    Ok(PlantSpec {
        stack,
        later_stages,
        concentrate_loop,
        costs,
        analysis,
    })
}

fn read_stack(r: &mut Reader) -> Result<(Stack, PlantCosts), CliError> {
    let s = "stack";
    let cell_pairs = r.int(s, "cell_pairs")?.ok_or_else(|| {
        r.err(
            s,
            "cell_pairs",
            "missing `cell_pairs` in [stack]",
            "the number of cell pairs per stack, 1 to 5000",
        )
    })? as u32;
    let electrode = r.float_req(s, "electrode_voltage_V")?;
    let rectifier = r.float_req(s, "rectifier_efficiency")?;
    let shunt = match r.float(s, "manifold_diameter_mm")? {
        Some(d) => {
            let typical = ShuntGeometry::typical();
            let mut mm = |key: &str, default_m: f64| -> Result<f64, CliError> {
                Ok(match r.float(s, key)? {
                    Some(x) => x * 1e-3,
                    None => {
                        r.record(s, key, super::reader::fmt_f64(default_m * 1e3));
                        default_m
                    }
                })
            };
            Some(ShuntGeometry {
                manifold_diameter_m: d * 1e-3,
                feed_channel_length_m: mm("feed_channel_length_mm", typical.feed_channel_length_m)?,
                feed_channel_width_m: mm("feed_channel_width_mm", typical.feed_channel_width_m)?,
                membrane_thickness_m: mm("membrane_thickness_mm", typical.membrane_thickness_m)?,
            })
        }
        None => {
            for key in [
                "feed_channel_length_mm",
                "feed_channel_width_mm",
                "membrane_thickness_mm",
            ] {
                if r.given(s, key) {
                    return Err(r.err(
                        s,
                        key,
                        format!("`{key}` is only used with the shunt model"),
                        "set manifold_diameter_mm too, or remove it",
                    ));
                }
            }
            None
        }
    };
    let costs = PlantCosts {
        electrode_price_per_m2: r.float_req(s, "electrode_price_per_m2")?,
        spacer_price_per_m2: r.float_req(s, "spacer_price_per_m2")?,
        stack_hardware_price_per_stack: r.float_req(s, "hardware_price_per_stack")?,
        rectifier_price_per_kW: r.float_req(s, "rectifier_price_per_kW")?,
        plant_life_years: r.float_req(s, "plant_life_years")?,
    };
    Ok((
        Stack {
            cell_pairs,
            electrode_voltage_v: electrode,
            rectifier_efficiency: rectifier,
            shunt,
        },
        costs,
    ))
}

fn read_stage(r: &mut Reader, s: &str, baseline: &Design) -> Result<StageOverrides, CliError> {
    let voltage = r.float(s, "cell_pair_voltage_V")?;
    if voltage.is_some() && matches!(baseline.operation.drive, Drive::Current { .. }) {
        return Err(r.err(
            s,
            "cell_pair_voltage_V",
            "a stage voltage needs voltage drive, but [operation] sets cell_current_A",
            "remove it, or drive the study by cell_pair_voltage_V",
        ));
    }
    let o = StageOverrides {
        length_m: r.float(s, "length_m")?,
        gap_m: r.float(s, "gap_mm")?.map(|x| x * 1e-3),
        pitch_m: r.float(s, "pitch_um")?.map(|x| x * 1e-6),
        open_fraction: r.float(s, "open_fraction")?,
        velocity_m_s: r.float(s, "velocity_cm_s")?.map(|x| x * 1e-2),
        cell_pair_voltage_v: voltage,
        cell_pairs: r.int(s, "cell_pairs")?.map(|n| n as u32),
    };
    // Keys left out follow stage 1; the resolved study says so (and keeps the section, so
    // an empty stage survives a reload).
    for key in super::keys::section_keys(s) {
        if !r.given(s, key) {
            r.record_comment(s, key, "the first stage's".into(), "follows stage 1");
        }
    }
    Ok(o)
}

fn read_analysis(r: &mut Reader, temperature_c: f64) -> Result<WaterAnalysis, CliError> {
    let s = "water.analysis";
    if temperature_c > 90.0 {
        return Err(r.err(
            "water",
            "temperature_C",
            format!("{temperature_c} C is above the scaling screen's range"),
            "at most 90 C with a [water.analysis] (Plummer and Busenberg's fit range)",
        ));
    }
    let w = WaterAnalysis {
        na_mg_l: r.float_req(s, "na_mg_L")?,
        k_mg_l: r.float_req(s, "k_mg_L")?,
        ca_mg_l: r.float_req(s, "ca_mg_L")?,
        mg_mg_l: r.float_req(s, "mg_mg_L")?,
        cl_mg_l: r.float_req(s, "cl_mg_L")?,
        so4_mg_l: r.float_req(s, "so4_mg_L")?,
        alkalinity_mg_l_hco3: r.float_req(s, "alkalinity_mg_L_as_HCO3")?,
        ph: r.float_req(s, "pH")?,
        temperature_c,
    };
    if w.tds_mg_l() > 3e5 {
        return Err(r.err(
            s,
            "na_mg_L",
            format!("the analysis sums to {} mg/L", w.tds_mg_l()),
            "a total of at most 300000 mg/L",
        ));
    }
    let imbalance = w.charge_imbalance_percent();
    if imbalance.abs() > model::scaling::IMBALANCE_WARN_PERCENT {
        r.warn(
            s,
            "na_mg_L",
            format!(
                "the analysis is out of charge balance by {imbalance:.1} % (cations minus anions \
                 over their sum, in equivalents; above {} % an ion is usually missing or \
                 mis-measured)",
                model::scaling::IMBALANCE_WARN_PERCENT
            ),
        );
    }
    // Speciate once here, so a water the screen cannot speciate is refused at its section.
    if let Err(e) = model::scaling::saturation_indices(&w) {
        return Err(r.err(
            s,
            "pH",
            format!("the water analysis cannot be speciated: {e}"),
            "a consistent analysis (alkalinity above the hydroxide alkalinity at this pH)",
        ));
    }
    Ok(w)
}
