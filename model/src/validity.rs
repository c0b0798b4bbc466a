//! Input checks (errors) and validity warnings (the model's range of trust).
//!
//! An input outside its physical range is an error ([`check_design`]); a result outside the
//! range where the correlations and the ROM were built is a warning that names the quantity,
//! its value and the bound ([`warnings`]). The model never extrapolates silently.

use crate::design::{Design, Drive, LengthMode, Options, Spacer};
use crate::output::Warning;
use crate::properties::properties;
use crate::ModelError;

/// Laminar bound of the Reynolds number in an open slit (transition near 2000-2800 for
/// parallel plates; common practice).
pub const RE_LAMINAR_MAX: f64 = 2000.0;
/// Range of the Schock-Miquel correlations, Re.
pub const RE_SPACER_RANGE: (f64, f64) = (100.0, 1000.0);
/// Smallest stripe pitch that can be made economically on a membrane, m (embossing and
/// printing resolve about 20 um; common practice).
pub const PITCH_MANUFACTURABLE_MIN_M: f64 = 20e-6;
/// The pitch should exceed this many Debye lengths (a thin double layer, as the ROM assumes).
pub const PITCH_DEBYE_MIN: f64 = 10.0;
/// Open fractions below this leave almost no conducting surface.
pub const OPEN_FRACTION_MIN: f64 = 0.1;
/// Open fractions above this (but below 1) are a pattern in name only.
pub const OPEN_FRACTION_MAX: f64 = 0.95;
/// Property data range, mol/m^3 (conductivity checked 0.5 mM to 0.5 M).
pub const SALINITY_RANGE: (f64, f64) = (0.5, 500.0);
/// Below this outlet concentration, mol/m^3, the diluate resistance dominates the cell
/// (about 60 mg/L NaCl; common practice).
pub const OUTLET_RESISTIVE_MIN: f64 = 1.0;
/// Temperature range of the Stokes-Einstein scaling of the 25 C ionic data, K.
pub const TEMPERATURE_RANGE_K: (f64, f64) = (278.15, 323.15);
/// Lowest feed concentration accepted, mol/m^3: about 0.06 mg/L NaCl, whose conductivity
/// (1.3e-5 S/m from the CRC Handbook limiting molar conductivity) is only twice that of pure
/// water (5.5e-6 S/m at 25 C, from memory), whose own ions the model leaves out.
pub const FEED_MIN_MOL_M3: f64 = 1e-3;
/// Highest feed concentration accepted, mol/m^3 (beyond the handbook data of NaCl and KCl).
pub const FEED_MAX_MOL_M3: f64 = 6000.0;
/// Margin by which a membrane's counter-ion transport number must exceed the solution's own.
pub const TRANSPORT_MARGIN: f64 = 0.01;

/// The transport numbers a membrane must exceed (CEM, AEM): the solution's own cation and
/// anion transport numbers at the feed, plus [`TRANSPORT_MARGIN`] (a membrane no more selective
/// than the solution does not desalinate).
pub fn transport_number_minima(w: &crate::design::Water) -> (f64, f64) {
    let tp =
        properties(w.salt, w.temperature_k, w.feed_concentration_mol_m3).cation_transport_number;
    (tp + TRANSPORT_MARGIN, 1.0 - tp + TRANSPORT_MARGIN)
}

/// Largest price accepted (electricity per kWh, membrane per m^2), in any currency unit.
pub const PRICE_MAX: f64 = 1e9;

fn input(
    field: &'static str,
    value: f64,
    ok: bool,
    allowed: &'static str,
) -> Result<(), ModelError> {
    if ok && value.is_finite() {
        Ok(())
    } else {
        Err(ModelError::Input {
            field,
            value,
            allowed,
        })
    }
}

/// The membrane material data of a design against their ranges.
fn check_materials(m: &crate::design::Membranes) -> Result<(), ModelError> {
    for (prefix, mat) in [("cem", &m.physics.cem), ("aem", &m.physics.aem)] {
        let name =
            |field: &'static str, cem: &'static str| if prefix == "cem" { cem } else { field };
        input(
            name(
                "aem_solution_resistance_share",
                "cem_solution_resistance_share",
            ),
            mat.solution_resistance_share,
            (0.0..=1.0).contains(&mat.solution_resistance_share),
            "0 to 1",
        )?;
        input(
            name("aem_salt_permeance_m_s", "cem_salt_permeance_m_s"),
            mat.salt_permeance_m_s,
            (0.0..=1e-4).contains(&mat.salt_permeance_m_s),
            "0 to 1e-4 m/s",
        )?;
        input(
            name(
                "aem_water_permeability_m_s_pa",
                "cem_water_permeability_m_s_pa",
            ),
            mat.water_permeability_m_s_pa,
            (0.0..=1e-10).contains(&mat.water_permeability_m_s_pa),
            "0 to 1e-10 m/(s Pa)",
        )?;
        input(
            name("aem_water_transport_number", "cem_water_transport_number"),
            mat.water_transport_number,
            (0.0..=50.0).contains(&mat.water_transport_number),
            "0 to 50 mol water per faraday",
        )?;
    }
    Ok(())
}

/// Check a design and the options against their physical ranges.
pub fn check_design(d: &Design, o: &Options) -> Result<(), ModelError> {
    let w = &d.water;
    input(
        "temperature_k",
        w.temperature_k,
        (273.15..=373.15).contains(&w.temperature_k),
        "273.15 to 373.15 K",
    )?;
    // Below FEED_MIN_MOL_M3 the water's own ions carry as much current as the salt (the
    // model leaves them out), and a concentration near the smallest normal number makes the
    // current-voltage inversion divide by zero.
    input(
        "feed_concentration_mol_m3",
        w.feed_concentration_mol_m3,
        (FEED_MIN_MOL_M3..=FEED_MAX_MOL_M3).contains(&w.feed_concentration_mol_m3),
        "1e-3 to 6000 mol/m^3",
    )?;
    input(
        "concentrate_feed_concentration_mol_m3",
        w.concentrate_feed_concentration_mol_m3,
        (FEED_MIN_MOL_M3..=FEED_MAX_MOL_M3).contains(&w.concentrate_feed_concentration_mol_m3),
        "1e-3 to 6000 mol/m^3",
    )?;
    if let crate::design::Salt::Custom {
        cation_diffusivity_m2_s,
        anion_diffusivity_m2_s,
        cation_limiting_conductivity_s_m2_mol,
        anion_limiting_conductivity_s_m2_mol,
    } = w.salt
    {
        for (f, v) in [
            ("cation_diffusivity_m2_s", cation_diffusivity_m2_s),
            ("anion_diffusivity_m2_s", anion_diffusivity_m2_s),
        ] {
            input(f, v, v > 1e-11 && v < 1e-7, "1e-11 to 1e-7 m^2/s")?;
        }
        for (f, v) in [
            (
                "cation_limiting_conductivity_s_m2_mol",
                cation_limiting_conductivity_s_m2_mol,
            ),
            (
                "anion_limiting_conductivity_s_m2_mol",
                anion_limiting_conductivity_s_m2_mol,
            ),
        ] {
            input(f, v, v > 0.0 && v < 0.1, "above 0 up to 0.1 S m^2/mol")?;
        }
    }
    let c = &d.channel;
    input(
        "gap_m",
        c.gap_m,
        c.gap_m >= 1e-5 && c.gap_m <= 0.01,
        "1e-5 to 0.01 m",
    )?;
    input(
        "concentrate_gap_m",
        c.concentrate_gap_m,
        c.concentrate_gap_m >= 1e-5 && c.concentrate_gap_m <= 0.01,
        "1e-5 to 0.01 m",
    )?;
    // No shorter or narrower than the smallest gap: a subnormal length overflowed the
    // Leveque Sherwood number (L^(-1/3)) and a subnormal width gave a zero flow.
    input(
        "length_m",
        c.length_m,
        c.length_m >= 1e-5 && c.length_m <= 100.0,
        "1e-5 to 100 m",
    )?;
    input(
        "width_m",
        c.width_m,
        c.width_m >= 1e-5 && c.width_m <= 10.0,
        "1e-5 to 10 m",
    )?;
    match c.spacer {
        Spacer::None => {}
        Spacer::SchockMiquel {
            porosity,
            shadow_factor,
        } => {
            input(
                "porosity",
                porosity,
                porosity > 0.3 && porosity <= 1.0,
                "0.3 to 1",
            )?;
            input(
                "shadow_factor",
                shadow_factor,
                (1.0..=10.0).contains(&shadow_factor),
                "1 to 10",
            )?;
        }
        Spacer::Multiplier {
            sherwood,
            friction,
            shadow_factor,
        } => {
            input(
                "sherwood",
                sherwood,
                sherwood > 0.0 && sherwood <= 100.0,
                "above 0 up to 100",
            )?;
            input(
                "friction",
                friction,
                friction > 0.0 && friction <= 1000.0,
                "above 0 up to 1000",
            )?;
            input(
                "shadow_factor",
                shadow_factor,
                (1.0..=10.0).contains(&shadow_factor),
                "1 to 10",
            )?;
        }
    }
    let m = &d.membranes;
    let (cem_min, aem_min) = transport_number_minima(w);
    input(
        "cem_transport_number",
        m.cem_transport_number,
        m.cem_transport_number > cem_min && m.cem_transport_number <= 1.0,
        "above the solution cation transport number (+0.01) up to 1",
    )?;
    input(
        "aem_transport_number",
        m.aem_transport_number,
        m.aem_transport_number > aem_min && m.aem_transport_number <= 1.0,
        "above the solution anion transport number (+0.01) up to 1",
    )?;
    input(
        "cem_area_resistance_ohm_m2",
        m.cem_area_resistance_ohm_m2,
        (0.0..=0.1).contains(&m.cem_area_resistance_ohm_m2),
        "0 to 0.1 Ohm m^2",
    )?;
    input(
        "aem_area_resistance_ohm_m2",
        m.aem_area_resistance_ohm_m2,
        (0.0..=0.1).contains(&m.aem_area_resistance_ohm_m2),
        "0 to 0.1 Ohm m^2",
    )?;
    input(
        "pitch_m",
        m.pitch_m,
        m.pitch_m >= 1e-7 && m.pitch_m <= 0.1,
        "1e-7 to 0.1 m",
    )?;
    input(
        "open_fraction",
        m.open_fraction,
        m.open_fraction >= 0.01 && m.open_fraction <= 1.0,
        "0.01 to 1 (1 = unpatterned)",
    )?;
    check_materials(m)?;
    let op = &d.operation;
    input(
        "velocity_m_s",
        op.velocity_m_s,
        op.velocity_m_s >= 1e-4 && op.velocity_m_s <= 5.0,
        "1e-4 to 5 m/s",
    )?;
    input(
        "concentrate_velocity_m_s",
        op.concentrate_velocity_m_s,
        op.concentrate_velocity_m_s >= 1e-4 && op.concentrate_velocity_m_s <= 5.0,
        "1e-4 to 5 m/s",
    )?;
    match op.drive {
        Drive::Voltage {
            cell_pair_voltage_v,
        } => input(
            "cell_pair_voltage_v",
            cell_pair_voltage_v,
            cell_pair_voltage_v > 0.0 && cell_pair_voltage_v <= 50.0,
            "above 0 up to 50 V per cell pair",
        )?,
        Drive::Current { cell_current_a } => {
            input(
                "cell_current_a",
                cell_current_a,
                cell_current_a > 0.0 && cell_current_a <= 1e4,
                "above 0 up to 1e4 A",
            )?;
            if let LengthMode::ProductTarget {
                product_concentration_mol_m3,
            } = op.length_mode
            {
                input("product_concentration_mol_m3", product_concentration_mol_m3, false, "a product target needs voltage drive (with current drive the target fixes the current)")?;
            }
        }
    }
    if let LengthMode::ProductTarget {
        product_concentration_mol_m3: t,
    } = op.length_mode
    {
        input(
            "product_concentration_mol_m3",
            t,
            t > 0.0 && t < w.feed_concentration_mol_m3,
            "above 0 and below the feed concentration",
        )?;
    }
    // Economics: the bounds keep the energy and cost figures finite (a pump efficiency, a
    // membrane life or operating hours near zero, or a price or capacity near the largest
    // float, overflowed them); they are far outside any real plant in any currency.
    let e = &d.economics;
    input(
        "electricity_price_per_kwh",
        e.electricity_price_per_kwh,
        (0.0..=PRICE_MAX).contains(&e.electricity_price_per_kwh),
        "0 to 1e9 per kWh",
    )?;
    input(
        "pump_efficiency",
        e.pump_efficiency,
        (0.01..=1.0).contains(&e.pump_efficiency),
        "0.01 to 1",
    )?;
    input(
        "membrane_price_per_m2",
        e.membrane_price_per_m2,
        (0.0..=PRICE_MAX).contains(&e.membrane_price_per_m2),
        "0 to 1e9 per m^2",
    )?;
    input(
        "pattern_surcharge_per_m2",
        e.pattern_surcharge_per_m2,
        (0.0..=PRICE_MAX).contains(&e.pattern_surcharge_per_m2),
        "0 to 1e9 per m^2",
    )?;
    input(
        "membrane_life_years",
        e.membrane_life_years,
        (0.01..=100.0).contains(&e.membrane_life_years),
        "0.01 to 100 years",
    )?;
    input(
        "discount_rate",
        e.discount_rate,
        (0.0..=1.0).contains(&e.discount_rate),
        "0 to 1 per year",
    )?;
    input(
        "operating_hours_per_year",
        e.operating_hours_per_year,
        (1.0..=8784.0).contains(&e.operating_hours_per_year),
        "1 to 8784 h",
    )?;
    input(
        "plant_capacity_m3_day",
        e.plant_capacity_m3_day,
        e.plant_capacity_m3_day > 0.0 && e.plant_capacity_m3_day <= 1e9,
        "above 0 up to 1e9 m^3/day",
    )?;
    input(
        "rel_tol",
        o.rel_tol,
        (1e-13..=1e-2).contains(&o.rel_tol),
        "1e-13 to 1e-2",
    )?;
    Ok(())
}

/// What the warnings look at.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Observed {
    /// Diluate Reynolds number.
    pub reynolds: f64,
    /// Debye length at the lowest diluate concentration, m.
    pub debye_length_min_c_m: f64,
    /// Largest CEM layer voltage, thermal units.
    pub max_v_cem: f64,
    /// Largest AEM layer voltage, thermal units.
    pub max_v_aem: f64,
    /// Largest water-splitting share, -.
    pub max_water_splitting: f64,
    /// Diluate outlet, mol/m^3.
    pub outlet_mol_m3: f64,
    /// Concentrate outlet, mol/m^3.
    pub concentrate_outlet_mol_m3: f64,
    /// Diluate outlet flow / inlet flow, - (1 without water transport).
    pub diluate_flow_ratio: f64,
}

/// Share of the diluate's water lost to the concentrate above which a warning is given.
pub const WATER_LOSS_WARN: f64 = 0.1;

fn warn(out: &mut Vec<Warning>, quantity: &str, value: f64, bound: f64, message: String) {
    out.push(Warning {
        quantity: quantity.into(),
        value,
        bound,
        message,
    });
}

/// The validity warnings of one evaluated design (docs/physics.md#validity).
pub fn warnings(d: &Design, k: &crate::RomConstants, o: &Observed) -> Vec<Warning> {
    let mut w = Vec::new();
    match d.channel.spacer {
        Spacer::SchockMiquel { .. } => {
            let (lo, hi) = RE_SPACER_RANGE;
            if o.reynolds < lo || o.reynolds > hi {
                let b = if o.reynolds < lo { lo } else { hi };
                warn(&mut w, "reynolds", o.reynolds, b, format!("Reynolds number {:.0} is outside the range {lo:.0}-{hi:.0} of the Schock-Miquel correlations", o.reynolds));
            }
        }
        _ => {
            if o.reynolds > RE_LAMINAR_MAX {
                warn(&mut w, "reynolds", o.reynolds, RE_LAMINAR_MAX, format!("Reynolds number {:.0} is above the laminar range ({RE_LAMINAR_MAX:.0}) of the slit correlations", o.reynolds));
            }
        }
    }
    let m = &d.membranes;
    let patterned = m.open_fraction < 1.0;
    if patterned {
        let bound = PITCH_DEBYE_MIN * o.debye_length_min_c_m;
        if m.pitch_m < bound {
            warn(&mut w, "pitch_m", m.pitch_m, bound, format!("pitch {:.3e} m is below ten Debye lengths ({bound:.3e} m at the lowest diluate concentration): the thin-double-layer ROM does not hold", m.pitch_m));
        }
        if m.pitch_m < PITCH_MANUFACTURABLE_MIN_M {
            warn(&mut w, "pitch_m", m.pitch_m, PITCH_MANUFACTURABLE_MIN_M, format!("pitch {:.3e} m is below what can be made economically on a membrane ({PITCH_MANUFACTURABLE_MIN_M:.0e} m)", m.pitch_m));
        }
        if m.open_fraction < OPEN_FRACTION_MIN {
            warn(&mut w, "open_fraction", m.open_fraction, OPEN_FRACTION_MIN, format!("open fraction {:.3} is near 0: almost no conducting surface, the funnelling and pinning laws are extrapolated", m.open_fraction));
        }
        if m.open_fraction > OPEN_FRACTION_MAX {
            warn(&mut w, "open_fraction", m.open_fraction, OPEN_FRACTION_MAX, format!("open fraction {:.3} is near 1: the pattern barely differs from a plain membrane", m.open_fraction));
        }
    }
    let vmax = o.max_v_cem.max(o.max_v_aem);
    if vmax > k.calibrated_voltage_max {
        warn(
            &mut w,
            "layer_voltage_thermal",
            vmax,
            k.calibrated_voltage_max,
            format!(
                "diffusion-layer voltage {vmax:.0} V_T is beyond the calibrated range ({:.0} V_T)",
                k.calibrated_voltage_max
            ),
        );
    }
    if o.max_water_splitting > 0.0 {
        let onset = k.water_splitting_onset.min(k.water_splitting_onset_aem);
        warn(&mut w, "water_splitting_share", o.max_water_splitting, 0.0, format!("water splitting carries up to {:.0} % of the current (layer voltage above {onset:.0} V_T): pH shifts and scaling risk; check with the membrane supplier", 100.0 * o.max_water_splitting));
    }
    if o.outlet_mol_m3 < OUTLET_RESISTIVE_MIN {
        warn(&mut w, "outlet_concentration_mol_m3", o.outlet_mol_m3, OUTLET_RESISTIVE_MIN, format!("outlet concentration {:.3} mol/m^3 is so low that the diluate resistance dominates", o.outlet_mol_m3));
    }
    let (lo, hi) = SALINITY_RANGE;
    let feed = d.water.feed_concentration_mol_m3;
    for (q, v) in [
        ("feed_concentration_mol_m3", feed),
        ("outlet_concentration_mol_m3", o.outlet_mol_m3),
        (
            "concentrate_outlet_concentration_mol_m3",
            o.concentrate_outlet_mol_m3,
        ),
    ] {
        if v > hi {
            warn(
                &mut w,
                q,
                v,
                hi,
                format!("{q} = {v:.1} is above the property data range ({hi} mol/m^3)"),
            );
        } else if v < lo && q != "outlet_concentration_mol_m3" {
            warn(
                &mut w,
                q,
                v,
                lo,
                format!("{q} = {v:.3} is below the property data range ({lo} mol/m^3)"),
            );
        }
    }
    if o.outlet_mol_m3 < lo && o.outlet_mol_m3 >= 0.0 {
        warn(&mut w, "outlet_concentration_mol_m3", o.outlet_mol_m3, lo, format!("outlet concentration {:.3} mol/m^3 is below the property data range ({lo} mol/m^3)", o.outlet_mol_m3));
    }
    let lost = 1.0 - o.diluate_flow_ratio;
    if lost > WATER_LOSS_WARN {
        warn(&mut w, "diluate_water_loss", lost, WATER_LOSS_WARN, format!("{:.0} % of the diluate's water crosses into the concentrate (osmosis and electro-osmosis): the water-transport constants are from memory, check them against the membrane supplier's data", 100.0 * lost));
    }
    let t = d.water.temperature_k;
    let (tlo, thi) = TEMPERATURE_RANGE_K;
    if t < tlo || t > thi {
        let b = if t < tlo { tlo } else { thi };
        warn(&mut w, "temperature_K", t, b, format!("temperature {t:.2} K is outside {tlo}-{thi} K, where the 25 C ionic data are scaled by Stokes-Einstein"));
    }
    w
}
