//! Energy and cost: electrical and pumping energy per product volume, the thermodynamic
//! minimum, membrane area and cost, and the levelised cost of water.

use crate::constants::GAS_CONSTANT;

/// Joules per kWh.
pub const J_PER_KWH: f64 = 3.6e6;

/// Minimum (reversible) work of separating a feed of `c_f` into product `c_p` at recovery
/// `r` (product flow / feed flow), ideal 1:1 solution, J per m^3 of product:
/// w = 2RT [c_p ln(c_p/c_f) + ((1-r)/r) c_b ln(c_b/c_f)], c_b = (c_f - r c_p)/(1 - r)
/// (Mistry and Lienhard, Entropy 15 (2013) 2046). Limit r -> 0: 2RT [c_p ln(c_p/c_f) + c_f - c_p];
/// c_p = 0 gives pi_f ln(1/(1-r))/r with pi_f = 2 R T c_f. Requires 0 <= r < 1, c_p <= c_f.
pub fn minimum_work(temperature_k: f64, c_f: f64, c_p: f64, r: f64) -> f64 {
    let xlnx = |c: f64| if c > 0.0 { c * (c / c_f).ln() } else { 0.0 };
    let brine = if r < 1e-9 {
        c_f - c_p
    } else {
        let c_b = (c_f - r * c_p) / (1.0 - r);
        (1.0 - r) / r * xlnx(c_b)
    };
    2.0 * GAS_CONSTANT * temperature_k * (xlnx(c_p) + brine)
}

/// Minimum work of turning two inlet streams into two outlet streams (ideal 1:1 solution, no
/// water transfer), J per m^3 of diluate product: the Gibbs energy change
/// 2RT [Q_d g(c_d,out) + Q_c g(c_c,out) - Q_d g(c_d,in) - Q_c g(c_c,in)] / Q_d with
/// g(c) = c (ln c - 1). Equal to [`minimum_work`] when both inlets carry the same feed.
pub fn minimum_work_streams(
    temperature_k: f64,
    q_d: f64,
    q_c: f64,
    c_d_in: f64,
    c_c_in: f64,
    c_d_out: f64,
    c_c_out: f64,
) -> f64 {
    // Relative to a common reference concentration to avoid cancellation.
    let c_ref = (q_d * c_d_in + q_c * c_c_in) / (q_d + q_c);
    let g = |c: f64| {
        if c > 0.0 {
            c * (c / c_ref).ln() - c
        } else {
            0.0
        }
    };
    let dg = q_d * (g(c_d_out) - g(c_d_in)) + q_c * (g(c_c_out) - g(c_c_in));
    2.0 * GAS_CONSTANT * temperature_k * dg / q_d
}

/// Minimum work of turning two inlet streams into two outlet streams when water also moves
/// between them (osmosis, electro-osmosis), ideal 1:1 solution, J per m^3 of diluate product:
/// 2RT [sum_out Q g(c) - sum_in Q g(c)] / Q_d,out with g(c) = c (ln c - 1). The solvent's
/// own free-energy term, about constant per volume, cancels because the total volume flow is
/// conserved (the salt's partial volume neglected), and so does the salt's standard term by
/// the salt balance. With equal inlet and outlet flows it is [`minimum_work_streams`].
/// Flows `(diluate, concentrate)` in m^3/s (any common scale), concentrations in mol/m^3.
pub fn minimum_work_flows(
    temperature_k: f64,
    q_in: (f64, f64),
    c_in: (f64, f64),
    q_out: (f64, f64),
    c_out: (f64, f64),
) -> f64 {
    let c_ref = (q_in.0 * c_in.0 + q_in.1 * c_in.1) / (q_in.0 + q_in.1);
    let g = |c: f64| {
        if c > 0.0 {
            c * (c / c_ref).ln() - c
        } else {
            0.0
        }
    };
    let dg = q_out.0 * g(c_out.0) + q_out.1 * g(c_out.1) - q_in.0 * g(c_in.0) - q_in.1 * g(c_in.1);
    2.0 * GAS_CONSTANT * temperature_k * dg / q_out.0
}

/// Capital recovery factor i (1+i)^n / ((1+i)^n - 1) for discount rate i per year over n
/// years (1/n at i = 0): the annuity that repays one unit of capital.
pub fn capital_recovery_factor(rate: f64, years: f64) -> f64 {
    if rate.abs() < 1e-12 {
        return 1.0 / years;
    }
    let a = (1.0 + rate).powf(years);
    rate * a / (a - 1.0)
}

/// Levelised cost of water, currency per m^3 of product: membrane capital (cost per unit
/// daily capacity times the capital recovery factor, spread over the yearly production
/// `capacity/24 * operating hours`) plus energy at the electricity price. Stack hardware,
/// pumps, pre-treatment and labour are outside this screening figure.
pub fn levelised_cost(
    membrane_cost_per_m3_day: f64,
    crf: f64,
    operating_hours_per_year: f64,
    specific_energy_kwh_m3: f64,
    electricity_price_per_kwh: f64,
) -> f64 {
    let m3_per_year_per_m3_day = operating_hours_per_year / 24.0;
    membrane_cost_per_m3_day * crf / m3_per_year_per_m3_day
        + specific_energy_kwh_m3 * electricity_price_per_kwh
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn stream_form_equals_published_form_for_one_feed() {
        let (t, cf, cp) = (298.15, 34.2, 5.0);
        for r in [0.2, 0.5, 0.75] {
            let qd = r;
            let qc = 1.0 - r;
            let cb = (cf - r * cp) / (1.0 - r);
            let a = minimum_work(t, cf, cp, r);
            let b = minimum_work_streams(t, qd, qc, cf, cf, cp, cb);
            assert!((a - b).abs() < 1e-9 * a);
        }
    }

    #[test]
    fn crf_tends_to_one_over_n() {
        assert!((capital_recovery_factor(1e-9, 7.0) - 1.0 / 7.0).abs() < 1e-6);
        // 6 %, 7 years: 0.17914 (annuity tables).
        assert!((capital_recovery_factor(0.06, 7.0) - 0.17914).abs() < 1e-4);
    }
}
