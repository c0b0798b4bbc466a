//! One evaluation: drive (voltage or current), along-channel integration, and the assembly of
//! every output (docs/physics.md#energy-and-cost; the fields: docs/formats.md#design-sheet-json).

use crate::cell::{Cell, Guess};
use crate::channel::{integrate, outer_search, ChannelResult, End, Shot, Stats, Streams};
use crate::constants::FARADAY;
use crate::design::{Design, Drive, FlowArrangement, LengthMode, Options, PatternSide};
use crate::energy::{
    capital_recovery_factor, levelised_cost, minimum_work_flows, minimum_work_streams, J_PER_KWH,
};
use crate::hydraulics::{channel_flow, pumping_power};
use crate::numerics::secant_then_brent;
use crate::output::*;
use crate::properties::{debye_length, properties};
use crate::transfer::peers_limit;
use crate::validity::{check_design, warnings, Observed};
use crate::{ModelError, RomConstants};

/// One point of the cell-pair current-voltage curve.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct IvPoint {
    /// Cell-pair voltage, V.
    pub voltage_v: f64,
    /// Current density, A/m^2.
    pub current_density_a_m2: f64,
    /// CEM diluate-side layer voltage, thermal units.
    pub cem_layer_voltage_thermal: f64,
    /// Active-area fraction of the patterned membrane, -.
    pub active_area_fraction: f64,
}

fn streams(d: &Design) -> Streams {
    Streams {
        c_d_in: d.water.feed_concentration_mol_m3,
        c_c_in: d.water.concentrate_feed_concentration_mol_m3,
        u_d: d.operation.velocity_m_s,
        u_c: d.operation.concentrate_velocity_m_s,
        counter: d.operation.flow == FlowArrangement::CounterCurrent,
    }
}

/// Cell-pair current-voltage curve at the channel inlet: feed concentrations on both sides,
/// diffusion layers at their channel-mean thickness (d_h / mean Sh). For report figures.
/// Voltages at or below the membrane potential give zero current; a NaN voltage gives a point
/// of NaNs. Invalid designs give an empty curve.
pub fn iv_curve(design: &Design, constants: &RomConstants, voltages_v: &[f64]) -> Vec<IvPoint> {
    if check_design(design, &Options::default()).is_err() || constants.validate().is_err() {
        return Vec::new();
    }
    let cell = Cell::new(design, constants);
    let l = design.channel.length_m;
    let delta_d = cell.sh_d.hydraulic_diameter_m / cell.sh_d.mean(l);
    let delta_c = cell.sh_c.hydraulic_diameter_m / cell.sh_c.mean(l);
    let p = cell.point(
        delta_d,
        delta_c,
        design.water.feed_concentration_mol_m3,
        design.water.concentrate_feed_concentration_mol_m3,
    );
    let mut guess = Guess::default();
    voltages_v
        .iter()
        .map(|&u| {
            if u.is_nan() {
                return IvPoint {
                    voltage_v: u,
                    current_density_a_m2: f64::NAN,
                    cem_layer_voltage_thermal: f64::NAN,
                    active_area_fraction: f64::NAN,
                };
            }
            let s = cell.solve(&p, u, &mut guess);
            IvPoint {
                voltage_v: u,
                current_density_a_m2: s.current_density,
                cem_layer_voltage_thermal: s.v_cem,
                active_area_fraction: s.alpha,
            }
        })
        .collect()
}

/// Run the channel for the drive of the design; returns the voltage used and the result.
#[allow(clippy::float_cmp)] // exact on purpose: only a guess returned unchanged, bit for bit, reuses the integration
fn run_drive(
    d: &Design,
    cell: &Cell,
    opts: &Options,
    stats: &mut Stats,
) -> Result<(f64, ChannelResult), ModelError> {
    let st = streams(d);
    let end = match d.operation.length_mode {
        LengthMode::Fixed => End::Length,
        LengthMode::ProductTarget {
            product_concentration_mol_m3,
        } => End::Target(product_concentration_mol_m3),
    };
    let l = d.channel.length_m;
    match d.operation.drive {
        Drive::Voltage {
            cell_pair_voltage_v,
        } => {
            let r = integrate(
                cell,
                st,
                l,
                cell_pair_voltage_v,
                end,
                opts.rel_tol,
                opts.profiles,
                stats,
            )?;
            Ok((cell_pair_voltage_v, r))
        }
        Drive::Current { cell_current_a } => {
            // The total current rises monotonically with the cell-pair voltage. Secant steps
            // from a first guess (the inlet law at the channel-mean layers carrying the mean
            // current density) and a second one scaled by the current it gave; a voltage whose
            // current is within 1e-2 rel_tol of the target ends the search (its integration is
            // kept, not repeated). Brent takes over when the steps stall, on a bracket
            // completed by the inlet membrane potential (no current) and, above, by doubling
            // the drive.
            let w = d.channel.width_m;
            let target = cell_current_a;
            // The membrane potential at the inlet (no current below it). Salt diffusing
            // back into the diluate and water leaving it can lower the potential downstream,
            // where current then flows below the inlet's potential: the bracket starts at 0.
            let ph = &d.membranes.physics;
            let e_in = if ph.salt_back_diffusion || ph.water_transport {
                0.0
            } else {
                let dd = cell.sh_d.hydraulic_diameter_m / cell.sh_d.mean(l);
                let dc = cell.sh_c.hydraulic_diameter_m / cell.sh_c.mean(l);
                cell.point(dd, dc, st.c_d_in, st.c_c_in).e_mem.max(0.0)
            };
            let at = |u: f64| {
                let r = integrate(cell, st, l, u, end, opts.rel_tol, false, stats)?;
                Ok((w * r.current_per_width - target, r))
            };
            let u_max = 50.0;
            let guess = {
                // The outlets follow from the current by the salt balance (water splitting
                // aside); the law is taken at their log-mean concentrations. On 397 random
                // designs driven by the current of a random voltage (`--example drives`):
                // 5.7 integrations per solve, against 12.7 with Brent from a doubling
                // bracket; floors of the outlet at 0.1 to 0.5 of the feed did not do better.
                let removed = cell.xi0 * target / (FARADAY * cell.gap_d * st.u_d * w);
                let c_out = (st.c_d_in - removed).max(0.01 * st.c_d_in);
                let c_c_out =
                    st.c_c_in + (st.c_d_in - c_out) * cell.gap_d * st.u_d / (cell.gap_c * st.u_c);
                let log_mean = |a: f64, b: f64| {
                    if (a - b).abs() <= 1e-9 * a {
                        a
                    } else {
                        (a - b) / (a / b).ln()
                    }
                };
                let p = cell.point(
                    cell.sh_d.hydraulic_diameter_m / cell.sh_d.mean(l),
                    cell.sh_c.hydraulic_diameter_m / cell.sh_c.mean(l),
                    log_mean(st.c_d_in, c_out),
                    log_mean(c_c_out, st.c_c_in),
                );
                let u = cell.voltage_at(&p, target / (w * l));
                if u.is_finite() && u > e_in {
                    u.min(u_max)
                } else {
                    e_in + 0.25
                }
            };
            let search = |f: &mut dyn FnMut(f64) -> Result<f64, Shot>| -> Result<f64, Shot> {
                let m0 = f(guess)?;
                let scale = if m0 + target > 0.0 {
                    (target / (m0 + target)).clamp(0.1, 10.0)
                } else {
                    2.0
                };
                let u1 = (e_in + (guess - e_in) * scale).min(u_max);
                let pts = if u1 != guess {
                    vec![(guess, m0), (u1, f(u1)?)]
                } else {
                    vec![(guess, m0)]
                };
                let top = guess.max(u1);
                secant_then_brent(
                    f,
                    pts,
                    (e_in, u_max),
                    &mut |f| {
                        let lo = e_in + 1e-9;
                        Ok((lo, f(lo)?))
                    },
                    &mut |f| {
                        let mut hi = top;
                        loop {
                            hi = (e_in + 2.0 * (hi - e_in)).min(u_max);
                            let m = f(hi)?;
                            if m > 0.0 {
                                return Ok((hi, m));
                            }
                            if hi >= u_max {
                                return Err(Shot::Model(ModelError::Input {
                                    field: "cell_current_a",
                                    value: cell_current_a,
                                    allowed: "a current this cell pair carries below 50 V",
                                }));
                            }
                        }
                    },
                    1e-3 * opts.rel_tol * top,
                )?
                .ok_or_else(|| {
                    Shot::Model(ModelError::Numerical(
                        "cell voltage for the given current not bracketed".into(),
                    ))
                })
            };
            let (u, kept) = outer_search(at, |_| 1e-2 * opts.rel_tol * target, search)?;
            if let Some(r) = kept.filter(|_| !opts.profiles) {
                return Ok((u, r));
            }
            let r = integrate(cell, st, l, u, end, opts.rel_tol, opts.profiles, stats)?;
            Ok((u, r))
        }
    }
}

/// Evaluate one design: along-channel integration of the cell pair, energy, cost, warnings.
///
/// Errors: [`ModelError::Input`] for an input (or ROM constant) outside its physical range,
/// [`ModelError::TargetUnreachable`] when a product target is not reached within
/// `channel.length_m`, [`ModelError::Numerical`] when the integration fails.
pub fn evaluate(
    design: &Design,
    constants: &RomConstants,
    options: &Options,
) -> Result<Evaluation, ModelError> {
    check_design(design, options)?;
    constants.validate()?;
    let d = design;
    let k = constants;
    let cell = Cell::new(d, k);
    let mut stats = Stats::default();
    let (u, run) = run_drive(d, &cell, options, &mut stats)?;
    let w = &d.water;
    let ch = &d.channel;
    let m = &d.membranes;
    let op = &d.operation;
    let e = &d.economics;
    let l = run.length_m;
    let props = cell.props;

    // Hydraulics over the length used.
    let flow = |gap, u_s, c| {
        let p = properties(w.salt, w.temperature_k, c);
        channel_flow(
            ch.spacer,
            gap,
            l,
            u_s,
            p.density_kg_m3,
            p.dynamic_viscosity_pa_s,
            p.salt_diffusivity_m2_s,
        )
    };
    let flow_d = flow(ch.gap_m, op.velocity_m_s, w.feed_concentration_mol_m3);
    let flow_c = flow(
        ch.concentrate_gap_m,
        op.concentrate_velocity_m_s,
        w.concentrate_feed_concentration_mol_m3,
    );

    // Transfer at the feed.
    let sh_mean = cell.sh_d.mean(l);
    let delta_mean = cell.sh_d.hydraulic_diameter_m / sh_mean;
    let tp = props.cation_transport_number;
    let d_salt = props.salt_diffusivity_m2_s;
    let c_f = w.feed_concentration_mol_m3;
    let ilim_cem = peers_limit(d_salt, c_f, m.cem_transport_number, tp, delta_mean);
    let ilim_aem = peers_limit(d_salt, c_f, m.aem_transport_number, 1.0 - tp, delta_mean);
    let (layer_cem, layer_aem) = (
        cell.cem.layer(ilim_cem, delta_mean),
        cell.aem.layer(ilim_aem, delta_mean),
    );
    let (het_cem, het_aem) = (layer_cem.i_het, layer_aem.i_het);
    // An unpatterned surface has Phi = 1, so the smaller is the patterned membrane's.
    let funnelling_factor = layer_cem.phi.min(layer_aem.phi);
    let cem_limits = het_cem <= het_aem;

    // Performance.
    let width = ch.width_m;
    let q_d = ch.gap_m * op.velocity_m_s * width;
    let q_c = ch.concentrate_gap_m * op.concentrate_velocity_m_s * width;
    let current = width * run.current_per_width;
    let c_out = run.c_d_out;
    // Salt removed per unit diluate inlet flow (the concentration drop when no water crosses
    // the membranes), and the product flow.
    let removed = c_f - run.salt_out_mol_m3;
    let q_d_out = q_d * run.diluate_flow_ratio;
    let q_c_out = q_c * run.concentrate_flow_ratio;
    let current_efficiency = if current > 0.0 {
        removed * q_d * FARADAY / current
    } else {
        0.0
    };
    let electrical = u * current / q_d_out / J_PER_KWH;
    let pumping = (pumping_power(flow_d.pressure_drop_pa, q_d, e.pump_efficiency)
        + pumping_power(flow_c.pressure_drop_pa, q_c, e.pump_efficiency))
        / q_d_out
        / J_PER_KWH;
    let w_min = minimum_work_of(d, (q_d, q_c), (q_d_out, q_c_out), c_out, run.c_c_out) / J_PER_KWH;
    let specific = electrical + pumping;

    // Economics: one cell pair has one CEM and one AEM of area L W.
    let area_cell = l * width;
    let product_m3_day = q_d_out * 86_400.0;
    let area_per_capacity = 2.0 * area_cell / product_m3_day;
    let patterned_membranes = match m.pattern_side {
        _ if m.open_fraction >= 1.0 => 0.0,
        PatternSide::Both => 2.0,
        _ => 1.0,
    };
    let membrane_cost_per_m3_day = area_cell
        * (2.0 * e.membrane_price_per_m2 + patterned_membranes * e.pattern_surcharge_per_m2)
        / product_m3_day;
    let crf = capital_recovery_factor(e.discount_rate, e.membrane_life_years);
    let lcow = levelised_cost(
        membrane_cost_per_m3_day,
        crf,
        e.operating_hours_per_year,
        specific,
        e.electricity_price_per_kwh,
    );

    let debye_min_c = debye_length(
        props.relative_permittivity,
        w.temperature_k,
        c_out.max(1e-6),
    );
    let observed = Observed {
        reynolds: flow_d.reynolds,
        debye_length_min_c_m: debye_min_c,
        max_v_cem: run.max_v_cem,
        max_v_aem: run.max_v_aem,
        max_water_splitting: run.max_water_splitting,
        outlet_mol_m3: c_out,
        concentrate_outlet_mol_m3: run.c_c_out,
        diluate_flow_ratio: run.diluate_flow_ratio,
    };
    let warnings = warnings(d, k, &observed);
    let wavelength = run.wavelength_mean;
    Ok(Evaluation {
        inputs: InputsEcho {
            salt: w.salt.name().into(),
            temperature_K: w.temperature_k,
            feed_concentration_mol_m3: c_f,
            gap_m: ch.gap_m,
            length_m: l,
            width_m: width,
            velocity_m_s: op.velocity_m_s,
            spacer: ch.spacer.name().into(),
            pitch_m: m.pitch_m,
            open_fraction: m.open_fraction,
            cell_pair_voltage_V: u,
            cem_transport_number: m.cem_transport_number,
            aem_transport_number: m.aem_transport_number,
        },
        properties: PropertiesOut {
            salt_diffusivity_m2_s: d_salt,
            cation_transport_number: tp,
            density_kg_m3: props.density_kg_m3,
            dynamic_viscosity_Pa_s: props.dynamic_viscosity_pa_s,
            kinematic_viscosity_m2_s: props.kinematic_viscosity_m2_s,
            conductivity_S_m: props.conductivity_s_m,
            debye_length_m: props.debye_length_m,
            thermal_voltage_V: props.thermal_voltage_v,
        },
        hydraulics: HydraulicsOut {
            hydraulic_diameter_m: flow_d.hydraulic_diameter_m,
            reynolds: flow_d.reynolds,
            schmidt: flow_d.schmidt,
            pressure_drop_Pa: flow_d.pressure_drop_pa,
        },
        transfer: TransferOut {
            sherwood_mean: sh_mean,
            boundary_layer_thickness_mean_m: delta_mean,
            limiting_current_density_feed_A_m2: if cem_limits { ilim_cem } else { ilim_aem },
            limiting_membrane: if cem_limits { "CEM" } else { "AEM" }.into(),
            heterogeneous_limiting_current_density_feed_A_m2: het_cem.min(het_aem),
            funnelling_factor,
        },
        performance: PerformanceOut {
            outlet_concentration_mol_m3: c_out,
            concentrate_outlet_concentration_mol_m3: run.c_c_out,
            water_recovery: q_d_out / (q_d + q_c),
            salt_removal_fraction: (c_f - c_out) / c_f,
            mean_current_density_A_m2: run.current_per_width / l,
            cell_current_A: current,
            diluate_flow_m3_s: q_d,
            diluate_outlet_flow_m3_s: q_d_out,
            concentrate_outlet_flow_m3_s: q_c_out,
            current_efficiency,
            electrical_energy_kWh_m3: electrical,
            pumping_energy_kWh_m3: pumping,
            specific_energy_kWh_m3: specific,
            thermodynamic_minimum_kWh_m3: w_min,
            active_area_fraction: run.alpha_mean,
            vortex_wavelength_m: wavelength,
            pitch_over_wavelength: wavelength.map(|lv| m.pitch_m / lv),
            max_cem_layer_voltage_thermal: run.max_v_cem,
            max_aem_layer_voltage_thermal: run.max_v_aem,
        },
        economics: EconomicsOut {
            salt_removal_rate_mol_m2_s: removed * q_d / area_cell,
            membrane_area_m2_per_m3_day: area_per_capacity,
            membrane_cost_per_m3_day,
            levelised_cost_per_m3: lcow,
            plant_membrane_area_m2: area_per_capacity * e.plant_capacity_m3_day,
        },
        membranes: membranes_out(&cell, d, &run),
        warnings,
        numerics: NumericsOut {
            integration_steps: run.steps,
            point_solves: stats.point_solves,
            channel_integrations: stats.integrations,
        },
        profiles: run.profiles,
    })
}

/// Each membrane's transport number and area resistance at the diluate inlet and outlet (the
/// concentrate there: its inlet and outlet for co-current flow, the other way round for
/// counter-current flow).
fn membranes_out(cell: &Cell, d: &Design, run: &ChannelResult) -> MembranesOut {
    let w = &d.water;
    let ph = &d.membranes.physics;
    let c_d = [w.feed_concentration_mol_m3, run.c_d_out];
    let c_c = if d.operation.flow == FlowArrangement::CounterCurrent {
        [run.c_c_out, w.concentrate_feed_concentration_mol_m3]
    } else {
        [w.concentrate_feed_concentration_mol_m3, run.c_c_out]
    };
    let one = |m: &crate::membrane::Membrane, t_given: f64| {
        let t = |j: usize| {
            if ph.donnan {
                m.transport_number(c_d[j], c_c[j])
            } else {
                t_given
            }
        };
        let r = |j: usize| {
            if ph.concentration_dependent_resistance {
                m.area_resistance(
                    cell.kappa_ref,
                    cell.cond.conductivity(c_d[j].max(1e-12)),
                    cell.cond.conductivity(c_c[j].max(1e-12)),
                )
            } else {
                m.area_resistance_ref_ohm_m2
            }
        };
        MembraneOut {
            fixed_charge_mol_m3: m
                .fixed_charge_mol_m3
                .is_finite()
                .then_some(m.fixed_charge_mol_m3),
            transport_number_inlet: t(0),
            transport_number_outlet: t(1),
            area_resistance_inlet_Ohm_m2: r(0),
            area_resistance_outlet_Ohm_m2: r(1),
        }
    };
    MembranesOut {
        cem: one(&cell.mem_cem, d.membranes.cem_transport_number),
        aem: one(&cell.mem_aem, d.membranes.aem_transport_number),
    }
}

/// The thermodynamic minimum for the streams of a run, J per m^3 of product (with the outlet
/// flows when water crosses the membranes).
fn minimum_work_of(
    d: &Design,
    (q_d, q_c): (f64, f64),
    (q_d_out, q_c_out): (f64, f64),
    c_out: f64,
    c_c_out: f64,
) -> f64 {
    let w = &d.water;
    let c_f = w.feed_concentration_mol_m3;
    if d.membranes.physics.water_transport {
        minimum_work_flows(
            w.temperature_k,
            (q_d, q_c),
            (c_f, w.concentrate_feed_concentration_mol_m3),
            (q_d_out, q_c_out),
            (c_out, c_c_out),
        )
    } else {
        minimum_work_streams(
            w.temperature_k,
            q_d,
            q_c,
            c_f,
            w.concentrate_feed_concentration_mol_m3,
            c_out,
            c_c_out,
        )
    }
}
