//! Along the channel: potentiostatic integration of the diluate concentration with an
//! embedded Runge-Kutta pair and error control, fixed-length and product-target modes.
//!
//! Balances (co-current): dc_d/dx = -xi i / (F h_d u_d); the concentrate gains what the
//! diluate loses, c_c = c_c,in + r (c_d,in - c_d) with r = h_d u_d / (h_c u_c), so one
//! differential equation carries the salt. Counter-current: c_c(x) = c_c(0) - r (c_d,in -
//! c_d(x)) with the concentrate outlet c_c(0) found by an outer bracketed solve (Brent), or
//! known directly in product-target mode.
//!
//! Independent variable s = (x / L)^(1/3): the Leveque layer makes the local current vary as
//! x^(1/3) near the inlet, which is smooth in s. Integrator: Dormand and Prince 5(4)
//! (Dormand and Prince, J. Comput. Appl. Math. 6 (1980) 19), FSAL, local error control on the
//! diluate concentration and the current integral. The control aims at the outlet (within
//! 1e-6 relative at the default rel_tol 1e-7, checked on random designs): relative down to the
//! point-solve floor, per unit step for short steps (bounded accumulation), kinks located to
//! 100 rel_tol, and the knee of each layer's classic branch resolved in bounded voltage moves
//! (see the constants below for why each is needed). The current and the removed salt are
//! integrated as extra components with the same stages, so the salt balance
//! (c_in - c_out) Q_d F = integral xi i dA holds to round-off (Runge-Kutta preserves linear
//! invariants).

use crate::cell::{Cell, Guess, PointSolution};
use crate::constants::FARADAY;
use crate::numerics::secant_then_brent;
use crate::output::Profiles;
use crate::ModelError;

/// Number of integrated components: the diluate salt flow per unit inlet flow (the diluate
/// concentration when no water crosses the membranes), int i dx, int xi i dx, int alpha dx,
/// int lambda dx (where electroconvective), length with electroconvection, and the diluate
/// flow per unit inlet flow (1 without water transport). Salt and water flows are linear in
/// the state, so both balances close to round-off (Runge-Kutta preserves linear invariants).
const N: usize = 7;
type State = [f64; N];

/// Work counters over all integrations of one evaluation.
#[derive(Debug, Clone, Copy, Default, PartialEq)]
pub struct Stats {
    /// Full channel integrations.
    pub integrations: u32,
    /// Point solves.
    pub point_solves: u64,
}

/// What fixes the end of the integration.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum End {
    /// Integrate to the full length.
    Length,
    /// Stop where the diluate reaches this concentration, mol/m^3.
    Target(f64),
}

/// Boundary conditions of one integration.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Streams {
    /// Diluate inlet concentration, mol/m^3.
    pub c_d_in: f64,
    /// Concentrate inlet concentration, mol/m^3.
    pub c_c_in: f64,
    /// Diluate velocity, m/s.
    pub u_d: f64,
    /// Concentrate velocity, m/s.
    pub u_c: f64,
    /// True for counter-current flow.
    pub counter: bool,
}

/// Result of one integration along the channel.
#[derive(Debug, Clone, PartialEq)]
pub struct ChannelResult {
    /// Length integrated (the channel length, or the length found in target mode), m.
    pub length_m: f64,
    /// Diluate outlet concentration, mol/m^3.
    pub c_d_out: f64,
    /// Concentrate outlet concentration, mol/m^3.
    pub c_c_out: f64,
    /// Diluate salt flow at the outlet per unit diluate inlet flow, mol/m^3 (equal to
    /// `c_d_out` without water transport).
    pub salt_out_mol_m3: f64,
    /// Diluate outlet flow / diluate inlet flow, - (1 without water transport).
    pub diluate_flow_ratio: f64,
    /// Concentrate outlet flow / concentrate inlet flow, - (1 without water transport).
    pub concentrate_flow_ratio: f64,
    /// Current per channel width, integral of i dx, A/m.
    pub current_per_width: f64,
    /// Integral of xi i dx, A/m (salt removal in current units).
    pub salt_current_per_width: f64,
    /// Length-mean active-area fraction of the patterned membrane, -.
    pub alpha_mean: f64,
    /// Mean vortex wavelength over the electroconvective part, m; None when none.
    pub wavelength_mean: Option<f64>,
    /// Largest CEM layer voltage at an accepted point, thermal units.
    pub max_v_cem: f64,
    /// Largest AEM layer voltage at an accepted point, thermal units.
    pub max_v_aem: f64,
    /// Largest water-splitting share, -.
    pub max_water_splitting: f64,
    /// Accepted steps.
    pub steps: u32,
    /// Right-hand-side evaluations (one point solve each).
    pub rhs_evaluations: u32,
    /// Profiles at the accepted steps and at every 1/PROFILE_INTERVALS of the length, when
    /// requested.
    pub profiles: Option<Profiles>,
}

/// How closely (thermal units) a step end is put on a kink of the current (onset of
/// electroconvection or of water splitting), per unit of `rel_tol`, and its bounds. The step
/// after a landing starts this close before the kink and carries it a hair into the step; the
/// error estimate does not see that slope jump, and measured on the demo and on random designs
/// a fixed 1e-3 left errors of tens of `rel_tol` there. 100 rel_tol (1e-5 at the default) puts
/// them below the tolerance; the secant search needs about one point solve more for it.
const KINK_TOL_PER_TOL: f64 = 100.0;
const KINK_TOL_MIN: f64 = 1e-8;
const KINK_TOL_MAX: f64 = 1e-3;

/// Diluate concentration, as a share of the feed, below which the point solve is evaluated at
/// this floor instead (the laws need c > 0). It sits five decades
/// below [`RELATIVE_FLOOR`]: the clamp puts a kink into the right-hand side that the error
/// control cannot see, and with the clamp at 1e-12 of the feed (the first layout) outlets
/// emptied to about that level missed the 1e-6 claim (3.5e-6 on 1 of 300 random designs;
/// 0 of 2,100 with this layout, measured with `--example tolsweep` over seven seeds).
const CONCENTRATION_CLAMP: f64 = 1e-18;

/// The same floor for the concentrate, at 1e-12 of the diluate feed: the concentrate only
/// nears zero on the trial outlets of the counter-current shooting, where a lower floor made
/// the membrane potential ln(c_c / c_d) so large that the step control failed (a random
/// counter-current design in `energy_never_below_thermodynamic_minimum`).
const CONCENTRATE_CLAMP: f64 = 1e-12;

/// Diluate flow, as a share of its inlet flow, below which an integration stops with an error:
/// water transport (osmosis from a very strong concentrate over a long channel) has taken
/// nearly all of the diluate, and the product, if any, is outside what the model describes.
pub const DILUATE_FLOW_FLOOR: f64 = 0.05;

/// Share of the feed down to which the step control is relative (below it, absolute at
/// rel_tol times this share of the feed). The outlet claim (1e-6 relative) is made down to
/// 1e-12 of the feed; the control holds ten times tighter, so the absolute errors of many
/// steps below that level stay inside the claim.
const RELATIVE_FLOOR: f64 = 1e-13;

/// Steps shorter than this (in s) are error-controlled per unit step: their tolerance is
/// rel_tol h / H_REF. Local errors add up along the channel (where the current is about
/// proportional to c, as on the plateau and in the ohmic range, a relative error made early
/// keeps its size to the outlet), and a design that empties its diluate by many orders of
/// magnitude needs hundreds of steps of a few thousandths. With this rule the tolerances of all
/// steps sum to at most 2 / H_REF full-tolerance steps, whatever their number, while steps of a
/// tenth and longer are controlled as before. 0.1 rather than the first 0.05: over 2,100
/// random designs (seven seeds of `--example tolsweep`, one in four of high removal) the
/// worst outlet error fell from 9.85e-7 to 5.4e-7, for 2 % more point solves on ordinary
/// designs and 12 % more on deep-removal ones.
const H_REF: f64 = 0.1;

/// Largest change (thermal units) of a layer voltage on its classic branch (below the
/// electroconvective onset) over one step, at rel_tol = 1e-7; it scales as rel_tol^(1/5), the
/// way the steps of a fifth-order method do. The classic current i_het (1 - exp(-v/2)) turns
/// from the ohmic range onto its plateau over a few thermal units, in a short stretch of
/// channel; a step across that knee sees an error estimate (the difference of the 5th and
/// 4th-order solutions) that is not yet asymptotic and measured 10 to 700 times below the true
/// local error. Resolving the knee in steps of at most 4 thermal units makes the estimate hold.
const KNEE_DV: f64 = 4.0;

/// Fraction t of the trial step [s, s + h] at which `layer` (0 CEM, 1 AEM) comes within
/// `kink_tol` short of the kink voltage `kv`, found by point solves along the cubic Hermite
/// interpolant of the trial step (the concentration barely changes over one step, so the
/// interpolant's error hardly moves the crossing). v(t) is smooth on the start side of the
/// kink only, so the iteration extrapolates with secants through start-side points and
/// falls back to regula falsi against the far side. Voltages v0 at t = 0 and v1 at t = 1.
#[allow(clippy::too_many_arguments)]
fn locate_kink(
    rhs: &mut Rhs,
    s: f64,
    h: f64,
    y: &State,
    k0: &State,
    y1: &State,
    k1: &State,
    layer: usize,
    kv: f64,
    v0: f64,
    v1: f64,
    kink_tol: f64,
) -> f64 {
    let herm = |t: f64, c: usize| {
        let t2 = t * t;
        let t3 = t2 * t;
        (2.0 * t3 - 3.0 * t2 + 1.0) * y[c]
            + (t3 - 2.0 * t2 + t) * h * k0[c]
            + (-2.0 * t3 + 3.0 * t2) * y1[c]
            + (t3 - t2) * h * k1[c]
    };
    // Aim half a tolerance short of the kink, on the start side.
    let dir = (v1 - v0).signum();
    let aim = kv - 0.5 * kink_tol * dir;
    let (mut ta, mut fa) = (0.0, v0 - aim);
    let mut fa_weight = fa;
    let mut prev: Option<(f64, f64)> = None;
    let (mut tb, mut fb) = (1.0, v1 - aim);
    let mut far_in_a_row = 0;
    for _ in 0..40 {
        let secant = prev.map(|(tp, fp)| ta - fa * (ta - tp) / (fa - fp));
        let mut t = match secant {
            Some(t) if t > ta && t < tb => t,
            // Illinois regula falsi: the start-side value is halved after repeated far-side
            // hits, so the bracket closes from both ends.
            _ => (ta * fb - tb * fa_weight) / (fb - fa_weight),
        };
        if !(t > ta && t < tb) {
            t = 0.5 * (ta + tb);
        }
        let sol = rhs.point(s + t * h, herm(t, 0), herm(t, 6));
        let v = if layer == 0 { sol.v_cem } else { sol.v_aem };
        let f = v - aim;
        if f * fa > 0.0 {
            prev = Some((ta, fa));
            ta = t;
            fa = f;
            fa_weight = f;
            far_in_a_row = 0;
            if f.abs() < 0.5 * kink_tol {
                return t;
            }
        } else {
            tb = t;
            fb = f;
            prev = None;
            far_in_a_row += 1;
            if far_in_a_row >= 2 {
                fa_weight *= 0.5;
            }
        }
        if tb - ta < 1e-12 {
            break;
        }
    }
    if ta > 0.0 {
        ta
    } else {
        tb
    }
}

// Dormand-Prince 5(4) tableau.
const C: [f64; 7] = [0.0, 0.2, 0.3, 0.8, 8.0 / 9.0, 1.0, 1.0];
const A: [[f64; 6]; 7] = [
    [0.0; 6],
    [0.2, 0.0, 0.0, 0.0, 0.0, 0.0],
    [3.0 / 40.0, 9.0 / 40.0, 0.0, 0.0, 0.0, 0.0],
    [44.0 / 45.0, -56.0 / 15.0, 32.0 / 9.0, 0.0, 0.0, 0.0],
    [
        19372.0 / 6561.0,
        -25360.0 / 2187.0,
        64448.0 / 6561.0,
        -212.0 / 729.0,
        0.0,
        0.0,
    ],
    [
        9017.0 / 3168.0,
        -355.0 / 33.0,
        46732.0 / 5247.0,
        49.0 / 176.0,
        -5103.0 / 18656.0,
        0.0,
    ],
    [
        35.0 / 384.0,
        0.0,
        500.0 / 1113.0,
        125.0 / 192.0,
        -2187.0 / 6784.0,
        11.0 / 84.0,
    ],
];
/// 5th-order minus embedded 4th-order weights.
const E: [f64; 7] = [
    71.0 / 57600.0,
    0.0,
    -71.0 / 16695.0,
    71.0 / 1920.0,
    -17253.0 / 339200.0,
    22.0 / 525.0,
    -1.0 / 40.0,
];

struct Rhs<'a> {
    cell: &'a Cell,
    streams: Streams,
    length: f64,
    u: f64,
    /// Concentrate concentration at x = 0, mol/m^3.
    c_c_at0: f64,
    /// Concentrate flow at x = 0 per unit concentrate inlet flow (1 for co-current flow).
    w_at0: f64,
    /// Water crosses the membranes.
    water: bool,
    /// h_d u_d / (h_c u_c).
    ratio: f64,
    /// F h_d u_d.
    flux: f64,
    /// Counter-current concentrate uses the channel-mean layer thickness.
    delta_c_mean: f64,
    guess: Guess,
    /// The last three points of distinct s (s, solution) for the warm start.
    history: [(f64, Guess); 3],
    evaluations: u32,
}

/// The layer voltages at `s` predicted by the quadratic through the three history points
/// (None when they are not all solved points or `s` lies too far outside their span).
fn predict(h: &[(f64, Guess); 3], s: f64) -> Option<(f64, f64)> {
    let [(s0, g0), (s1, g1), (s2, g2)] = *h;
    if h.iter().any(|(_, g)| g.slope_cem <= 0.0) {
        return None;
    }
    let lo = s0.min(s1).min(s2);
    let hi = s0.max(s1).max(s2);
    let span = hi - lo;
    if span.is_nan()
        || span <= 0.0
        || s < lo - MAX_EXTRAPOLATION * span
        || s > hi + MAX_EXTRAPOLATION * span
    {
        return None;
    }
    let l0 = (s - s1) * (s - s2) / ((s0 - s1) * (s0 - s2));
    let l1 = (s - s0) * (s - s2) / ((s1 - s0) * (s1 - s2));
    let l2 = (s - s0) * (s - s1) / ((s2 - s0) * (s2 - s1));
    if !(l0.is_finite() && l1.is_finite() && l2.is_finite()) {
        return None;
    }
    Some((
        l0 * g0.v_cem + l1 * g1.v_cem + l2 * g2.v_cem,
        l0 * g0.v_aem + l1 * g1.v_aem + l2 * g2.v_aem,
    ))
}

/// How far (in units of the span of the history points) the warm-start quadratic is
/// extrapolated.
const MAX_EXTRAPOLATION: f64 = 3.0;

impl Rhs<'_> {
    fn c_c(&self, c_d: f64) -> f64 {
        let gained = self.ratio * (self.streams.c_d_in - c_d);
        if self.streams.counter {
            self.c_c_at0 - gained
        } else {
            self.c_c_at0 + gained
        }
    }

    /// Diluate and concentrate concentrations (clamped for the point solve) from the salt
    /// and water components of the state.
    #[inline]
    fn conc(&self, y0: f64, y6: f64) -> (f64, f64) {
        if !self.water {
            let c_d = y0.max(CONCENTRATION_CLAMP * self.streams.c_d_in);
            return (
                c_d,
                self.c_c(c_d).max(CONCENTRATE_CLAMP * self.streams.c_d_in),
            );
        }
        let c_d = (y0 / y6).max(CONCENTRATION_CLAMP * self.streams.c_d_in);
        (
            c_d,
            self.c_c_water(y0, y6)
                .max(CONCENTRATE_CLAMP * self.streams.c_d_in),
        )
    }

    /// Concentrate concentration with water transport: its salt flow over its flow, both per
    /// unit concentrate inlet flow.
    fn c_c_water(&self, y0: f64, y6: f64) -> f64 {
        let salt = self.ratio * (self.streams.c_d_in - y0);
        let water = self.ratio * (1.0 - y6);
        let n0 = self.c_c_at0 * self.w_at0;
        if self.streams.counter {
            (n0 - salt) / (self.w_at0 - water)
        } else {
            (n0 + salt) / (self.w_at0 + water)
        }
    }

    /// Diluate and concentrate concentrations of a state, unclamped (for profiles and
    /// outlets).
    fn outlets(&self, y0: f64, y6: f64) -> (f64, f64) {
        if self.water {
            (y0 / y6, self.c_c_water(y0, y6))
        } else {
            (y0, self.c_c(y0))
        }
    }

    #[allow(clippy::float_cmp)] // exact on purpose: the history is keyed by the exact s of a solved point
    fn point(&mut self, s: f64, y0: f64, y6: f64) -> PointSolution {
        let cell = self.cell;
        let s = s.max(1e-4);
        let delta_d = cell.sh_d.delta_at_s(s, self.length);
        let delta_c = if self.streams.counter {
            self.delta_c_mean
        } else {
            cell.sh_c.delta_at_s(s, self.length)
        };
        let (c_d, c_c) = self.conc(y0, y6);
        let p = cell.point(delta_d, delta_c, c_d, c_c);
        self.evaluations += 1;
        // Warm start: the layer voltages extrapolated (or interpolated) in s along a
        // quadratic through the last three points of distinct s.
        if let Some((vc, va)) = predict(&self.history, s) {
            self.guess.v_cem = vc.max(0.0);
            self.guess.v_aem = va.max(0.0);
        }
        let sol = cell.solve(&p, self.u, &mut self.guess);
        if s == self.history[2].0 {
            self.history[2].1 = self.guess;
        } else {
            self.history = [self.history[1], self.history[2], (s, self.guess)];
        }
        sol
    }

    fn eval(&mut self, s: f64, y: &State) -> (State, PointSolution) {
        let dxds = 3.0 * self.length * s * s;
        if dxds == 0.0 {
            return ([0.0; N], PointSolution::default());
        }
        let sol = self.point(s, y[0], y[6]);
        let i = sol.current_density;
        let ec = sol.wavelength > 0.0;
        // Salt leaves the diluate by migration (xi i / F) and comes back by diffusion.
        let d_salt = if self.cell.physics.salt_back_diffusion {
            -dxds * (sol.xi * i - sol.back_a_m2) / self.flux
        } else {
            -dxds * sol.xi * i / self.flux
        };
        let d_water = if self.water {
            -dxds * sol.water_m_s * FARADAY / self.flux
        } else {
            0.0
        };
        (
            [
                d_salt,
                dxds * i,
                dxds * sol.xi * i,
                dxds * sol.alpha,
                dxds * sol.wavelength,
                if ec { dxds } else { 0.0 },
                d_water,
            ],
            sol,
        )
    }
}

/// Coefficients of the continuous extension of Dormand-Prince 5(4), order 4 (Hairer, Norsett
/// and Wanner, Solving ODEs I, II.6, and their code DOPRI5): the weights of k1, k3, ..., k7 in
/// the last term of the interpolant (k2 has weight 0). They sum to zero.
const DENSE: [f64; 7] = [
    -12_715_105_075.0 / 11_282_082_432.0,
    0.0,
    87_487_479_700.0 / 32_700_410_799.0,
    -10_690_763_975.0 / 1_880_347_072.0,
    701_980_252_875.0 / 199_316_789_632.0,
    -1_453_857_185.0 / 822_651_844.0,
    69_997_945.0 / 29_380_423.0,
];

/// The diluate concentration at fraction `theta` of an accepted step of length `h` from `y0`
/// to `y1` with stages `k` (the continuous extension of order 4: its error is of the order of
/// the step's local error, so interior points are as accurate as the step ends).
fn dense_c(y0: f64, y1: f64, k: &[State; 7], h: f64, theta: f64) -> f64 {
    dense(y0, y1, k, h, theta, 0)
}

/// [`dense_c`] for component `comp` of the state.
fn dense(y0: f64, y1: f64, k: &[State; 7], h: f64, theta: f64, comp: usize) -> f64 {
    let diff = y1 - y0;
    let b = h * k[0][comp] - diff;
    let c = diff - h * k[6][comp] - b;
    let d = h * DENSE
        .iter()
        .zip(k.iter())
        .map(|(w, kj)| w * kj[comp])
        .sum::<f64>();
    let t1 = 1.0 - theta;
    y0 + theta * (diff + t1 * (b + theta * (c + t1 * d)))
}

/// Profiles get a point at every 1/PROFILE_INTERVALS of the channel length besides the step
/// ends (taken from the continuous extension and a point solve there), so a profile read at
/// mid-length or plotted downstream, where the steps are long, is not a straight line between
/// step ends (linear interpolation between step ends missed the demo's mid-length
/// concentration by 0.4 %).
const PROFILE_INTERVALS: u32 = 20;

/// One Dormand-Prince step from (s, y) with derivative k0; returns (y_new, k_new, error
/// vector, solution at the end); the stages are left in `k`.
fn dp_step(
    rhs: &mut Rhs,
    s: f64,
    y: &State,
    k0: &State,
    h: f64,
    k: &mut [State; 7],
) -> (State, State, State, PointSolution) {
    k[0] = *k0;
    let mut end_sol = PointSolution::default();
    for st in 1..7 {
        let mut yt = *y;
        for (j, kj) in k.iter().enumerate().take(st) {
            let a = A[st][j];
            if a != 0.0 {
                for c in 0..N {
                    yt[c] += h * a * kj[c];
                }
            }
        }
        let (f, sol) = rhs.eval(s + C[st] * h, &yt);
        k[st] = f;
        if st == 6 {
            end_sol = sol;
        }
    }
    // Stage 7 is at the 5th-order solution (FSAL): y_new = y + h sum A[6][j] k_j.
    let mut y_new = *y;
    let mut err = [0.0; N];
    for c in 0..N {
        let mut acc = 0.0;
        let mut e = 0.0;
        for j in 0..6 {
            acc += A[6][j] * k[j][c];
        }
        for (j, kj) in k.iter().enumerate() {
            e += E[j] * kj[c];
        }
        y_new[c] += h * acc;
        err[c] = h * e;
    }
    (y_new, k[6], err, end_sol)
}

fn push_profile(p: &mut Profiles, x: f64, c_d: f64, c_c: f64, sol: &PointSolution) {
    p.x_m.push(x);
    p.diluate_mol_m3.push(c_d);
    p.concentrate_mol_m3.push(c_c);
    p.current_density_A_m2.push(sol.current_density);
    p.limiting_current_density_A_m2.push(sol.limiting);
    p.active_area_fraction.push(sol.alpha);
    p.cem_layer_voltage_thermal.push(sol.v_cem);
    p.aem_layer_voltage_thermal.push(sol.v_aem);
}

/// Target mode: when the accepted trial step [s, s + h] carries the product to `target`,
/// re-step exactly to the crossing; returns the state, derivative and solution there and its s.
#[allow(clippy::too_many_arguments, clippy::float_cmp)] // a zero slope is exact: no current
fn locate_target(
    rhs: &mut Rhs,
    (s, h, y, k0): (f64, f64, &State, &State),
    (y_new, k_new): (&State, &State),
    stages: &mut [State; 7],
    target: f64,
    water: bool,
    rel_tol: f64,
) -> Option<(State, State, PointSolution, f64)> {
    // The product reaches the target where the salt flow equals the target times the
    // diluate flow: z = y0 - target y6 = 0, linear in the state (without water
    // transport y6 = 1 and the test is on y0 itself).
    let (z, zt): (fn(&State, f64) -> f64, f64) = if water {
        (|y, target| y[0] - target * y[6], 0.0)
    } else {
        (|y, _| y[0], target)
    };
    if z(y_new, target) <= zt {
        // Locate the crossing on a cubic Hermite interpolant of c_d(s), then re-step
        // exactly to it and correct with secant steps.
        let (y0a, y0b, fa, fb) = (
            z(y, target),
            z(y_new, target),
            z(k0, target) * h,
            z(k_new, target) * h,
        );
        let herm = |t: f64| {
            let t2 = t * t;
            let t3 = t2 * t;
            (2.0 * t3 - 3.0 * t2 + 1.0) * y0a
                + (t3 - 2.0 * t2 + t) * fa
                + (-2.0 * t3 + 3.0 * t2) * y0b
                + (t3 - t2) * fb
        };
        let mut lo = 0.0;
        let mut hi = 1.0;
        for _ in 0..60 {
            let mid = 0.5 * (lo + hi);
            if herm(mid) > zt {
                lo = mid;
            } else {
                hi = mid;
            }
        }
        let mut hs = h * 0.5 * (lo + hi);
        let (mut y_acc, mut k_acc, mut sol_acc) = (*y_new, *k_new, PointSolution::default());
        for _ in 0..8 {
            let (yt, kt, _, st) = dp_step(rhs, s, y, k0, hs, stages);
            y_acc = yt;
            k_acc = kt;
            sol_acc = st;
            let miss = z(&yt, target) - zt;
            let slope = z(&kt, target);
            if miss.abs() <= 1e-4 * rel_tol * target || slope == 0.0 {
                break;
            }
            hs = (hs - miss / slope).clamp(1e-3 * h, h);
        }
        return Some((y_acc, k_acc, sol_acc, s + hs));
    }
    None
}

/// Integrate one channel at cell-pair voltage `u` with the concentrate at x = 0 given.
#[allow(clippy::too_many_arguments)]
fn integrate_once(
    cell: &Cell,
    streams: Streams,
    length: f64,
    u: f64,
    (c_c_at0, w_at0): (f64, f64),
    end: End,
    rel_tol: f64,
    want_profiles: bool,
    stats: &mut Stats,
) -> Result<ChannelResult, ModelError> {
    stats.integrations += 1;
    let water = cell.physics.water_transport;
    let mut rhs = Rhs {
        cell,
        streams,
        length,
        u,
        c_c_at0,
        w_at0,
        water,
        ratio: cell.gap_d * streams.u_d / (cell.gap_c * streams.u_c),
        flux: FARADAY * cell.gap_d * streams.u_d,
        delta_c_mean: cell.sh_c.hydraulic_diameter_m / cell.sh_c.mean(length),
        guess: Guess::default(),
        history: [
            (-3.0, Guess::default()),
            (-2.0, Guess::default()),
            (-1.0, Guess::default()),
        ],
        evaluations: 0,
    };
    let mut profiles = want_profiles.then(Profiles::default);
    // The layer voltages at the inlet start the knee and kink tracking (they are not zero
    // where the layer does not develop from the inlet, as in spacer-filled channels).
    let inlet = rhs.point(0.0, streams.c_d_in, 1.0);
    if let Some(p) = profiles.as_mut() {
        let (c_d, c_c) = rhs.outlets(streams.c_d_in, 1.0);
        push_profile(p, 0.0, c_d, c_c, &inlet);
    }
    let mut y: State = [streams.c_d_in, 0.0, 0.0, 0.0, 0.0, 0.0, 1.0];
    let mut s = 0.0;
    let (mut k0, _) = rhs.eval(s, &y);
    // The inlet layer develops over s of a few hundredths: start there.
    let mut h: f64 = 0.03;
    // Relative control holds down to RELATIVE_FLOOR of the feed: a product emptied by many
    // orders of magnitude is still converged relative to itself, which is what the outlet
    // claim is about (an absolute floor of 1e-6 of the feed left errors of 3e-4 relative on
    // such outlets).
    let atol0 = rel_tol * RELATIVE_FLOOR * streams.c_d_in;
    // The combined relative tolerance is kept above a few hundred units of round-off, where
    // the error estimate is noise.
    let tol_floor = rel_tol.min(2e-13);
    let kink_tol = (KINK_TOL_PER_TOL * rel_tol).clamp(KINK_TOL_MIN, KINK_TOL_MAX);
    let knee_dv = (KNEE_DV * (rel_tol / 1e-7).powf(0.2)).clamp(0.5, 20.0);
    let onset = cell.k.onset_voltage;
    let classic = |v: f64| v.min(onset);
    // Move of the layer voltages through the knee over a step, in units of knee_dv, largest
    // of the two layers.
    let knee_ratio = |c0: f64, c1: f64, a0: f64, a1: f64| {
        let q = |v0: f64, v1: f64| (classic(v1) - classic(v0)).abs() / knee_dv;
        q(c0, c1).max(q(a0, a1))
    };
    // Knee move per unit s of the last accepted step (0 = none yet).
    let mut knee_rate_prev = 0.0f64;
    // The current integral is error-controlled in concentration units (its change times
    // xi / (F h_d u_d) is the concentration change), so both carry the same accuracy.
    let to_conc = cell.xi0 / rhs.flux;
    // Layer voltages at the start of the step (kink detection), and consecutive rejections.
    let (mut v_start_cem, mut v_start_aem) = (inlet.v_cem, inlet.v_aem);
    let mut rejected = 0u32;
    let mut en_prev: f64 = 1e-4;
    let mut landing = false;
    let mut h_before_landing = 0.0;
    // Kinks of each layer's law: its onset and its own water-splitting onset.
    let kinks = [
        [cell.k.onset_voltage, cell.k.water_splitting_onset],
        [cell.k.onset_voltage, cell.k.water_splitting_onset_aem],
    ];
    let mut steps = 0u32;
    let (mut max_v_cem, mut max_v_aem, mut max_ws) = (0.0f64, 0.0f64, 0.0f64);
    let mut end_s = 1.0;
    let mut done = false;
    // Warm-start history at the last accepted point: a discarded trial step restores it, so
    // the retry does not extrapolate from points beyond where it starts.
    let mut history_acc = (rhs.history, rhs.guess);
    // Stages of the last Dormand-Prince step (the accepted one, when a step is accepted).
    let mut stages = [[0.0; N]; 7];
    while !done {
        (rhs.history, rhs.guess) = history_acc;
        if steps > 20_000 {
            return Err(ModelError::Numerical(
                "along-channel integration took more than 20000 steps".into(),
            ));
        }
        h = h.min(1.0 - s);
        let (y_new, k_new, err, sol) = dp_step(&mut rhs, s, &y, &k0, h, &mut stages);
        let tol_step = (rel_tol * (h / H_REF).min(1.0)).max(tol_floor);
        let sc0 = atol0 + tol_step * y[0].abs().max(y_new[0].abs());
        let mut en = (err[0].abs() / sc0).max(err[1].abs() * to_conc / sc0);
        if water {
            // The diluate flow (about 1) to the same relative tolerance.
            en = en.max(err[6].abs() / (tol_step * y[6].abs().max(y_new[6].abs())));
        }
        // Largest move of a layer voltage along its classic branch over the trial step.
        let q_knee = knee_ratio(v_start_cem, sol.v_cem, v_start_aem, sol.v_aem);
        if !en.is_finite() || y_new.iter().any(|v| !v.is_finite()) {
            if h < 1e-12 {
                return Err(ModelError::Numerical(
                    "non-finite state along the channel".into(),
                ));
            }
            h *= 0.25;
            continue;
        }
        // Too long a step through the knee of the classic branch: shorten it before anything
        // else (before a kink search, which would be wasted). The next accepted step is capped
        // in advance; the slack of 1.25 keeps a step that the cap aimed at the limit from
        // being thrown away. The layer voltage rises ever faster through the knee, so a step
        // cut in proportion (1.2 / q) comes out below the limit.
        if q_knee > 1.25 {
            landing = false;
            h *= (1.2 / q_knee).max(0.2);
            if h < 1e-12 {
                return Err(ModelError::Numerical(
                    "step size underflow in the knee of a layer".into(),
                ));
            }
            continue;
        }
        // A layer crossing its onset (or a water-splitting onset) makes the current kink,
        // and no error estimate holds across a kink (a step across one can even pass the
        // test). Locate the crossing (point solves along the Hermite interpolant of the
        // trial step) and end the step exactly there, so every step sees a smooth
        // right-hand side.
        if !landing {
            let mut best: Option<f64> = None;
            for (layer, (v0, v1)) in [(v_start_cem, sol.v_cem), (v_start_aem, sol.v_aem)]
                .into_iter()
                .enumerate()
            {
                for kv in kinks[layer] {
                    if (v0 - kv) * (v1 - kv) < 0.0 && (v0 - kv).abs() > 10.0 * kink_tol {
                        let t = locate_kink(
                            &mut rhs, s, h, &y, &k0, &y_new, &k_new, layer, kv, v0, v1, kink_tol,
                        );
                        best = Some(best.map_or(t, |b: f64| b.min(t)));
                    }
                }
            }
            if let Some(t) = best.filter(|&t| t > 1e-6) {
                h_before_landing = h * (0.9 * en.max(1e-10).powf(-0.2)).clamp(0.2, 1.0);
                h *= t.max(1e-6);
                landing = true;
                continue;
            }
        }
        if en > 1.0 {
            rejected += 1;
            landing = false;
            let factor = if rejected > 1 {
                0.3
            } else {
                (0.9 * en.powf(-0.2)).max(0.2)
            };
            h *= factor;
            if h < 1e-12 {
                return Err(ModelError::Numerical(
                    "step size underflow along the channel".into(),
                ));
            }
            continue;
        }
        // Accepted step. Event check in target mode.
        let mut y_acc = y_new;
        let mut k_acc = k_new;
        let mut sol_acc = sol;
        let mut s_acc = s + h;
        if let End::Target(target) = end {
            if let Some((ya, ka, sa, s_end)) = locate_target(
                &mut rhs,
                (s, h, &y, &k0),
                (&y_new, &k_new),
                &mut stages,
                target,
                water,
                rel_tol,
            ) {
                (y_acc, k_acc, sol_acc, s_acc) = (ya, ka, sa, s_end);
                end_s = s_acc;
                done = true;
            }
        }
        steps += 1;
        rejected = 0;
        let landed = landing;
        landing = false;
        let h_acc = s_acc - s;
        if let Some(p) = profiles.as_mut() {
            // The grid points inside this step; their point solves leave the warm start and
            // the work counter as they were, so a run with profiles takes the same steps.
            let saved = (rhs.history, rhs.guess, rhs.evaluations);
            let n = PROFILE_INTERVALS as f64;
            let first = (s * s * s * n).floor() as u32 + 1;
            for j in first..PROFILE_INTERVALS {
                let frac = j as f64 / n;
                let s_j = frac.cbrt();
                if s_j >= s_acc {
                    break;
                }
                if s_j <= s {
                    continue;
                }
                let theta = (s_j - s) / h_acc;
                let c = dense_c(y[0], y_acc[0], &stages, h_acc, theta);
                let q = dense(y[6], y_acc[6], &stages, h_acc, theta, 6);
                let sol_j = rhs.point(s_j, c, q);
                let (c_d, c_c) = rhs.outlets(c, q);
                push_profile(p, length * frac, c_d.max(0.0), c_c, &sol_j);
            }
            (rhs.history, rhs.guess, rhs.evaluations) = saved;
        }
        let q_acc = knee_ratio(v_start_cem, sol_acc.v_cem, v_start_aem, sol_acc.v_aem);
        v_start_cem = sol_acc.v_cem;
        v_start_aem = sol_acc.v_aem;
        y = y_acc;
        k0 = k_acc;
        s = s_acc;
        max_v_cem = max_v_cem.max(sol_acc.v_cem);
        max_v_aem = max_v_aem.max(sol_acc.v_aem);
        max_ws = max_ws.max(sol_acc.ws_cem).max(sol_acc.ws_aem);
        if water && (y[6] < DILUATE_FLOW_FLOOR || y[6].is_nan()) {
            return Err(ModelError::Numerical(format!(
                "water transport takes more than {:.0} % of the diluate flow (osmosis from the \
                 concentrate, electro-osmosis): outside the model",
                100.0 * (1.0 - DILUATE_FLOW_FLOOR)
            )));
        }
        if let Some(p) = profiles.as_mut() {
            let (c_d, c_c) = rhs.outlets(y[0], y[6]);
            push_profile(p, length * s * s * s, c_d, c_c, &sol_acc);
        }
        history_acc = (rhs.history, rhs.guess);
        if s >= 1.0 {
            done = true;
        }
        // Step-size control with the PI term of Hairer, Norsett and Wanner (Solving ODEs I,
        // II.4, DOPRI5: beta = 0.04), which damps the accept/reject oscillation.
        let en_c = en.max(1e-10);
        if landed {
            // The step was cut to a kink: restart the controller from the step before.
            h = h_before_landing;
        } else {
            h *= (0.9 * en_c.powf(-0.17) * en_prev.powf(0.04)).clamp(0.2, 5.0);
            en_prev = en_c.max(1e-4);
        }
        // The layer voltages move smoothly along the channel: cap the next step so that it
        // moves them through the knee by about knee_dv, from the last step's rate and its
        // growth over the step before (the voltage accelerates into the knee).
        if q_acc > 0.0 {
            let rate = q_acc / h_acc;
            let growth = if knee_rate_prev > 0.0 {
                (rate / knee_rate_prev).clamp(1.0, 4.0)
            } else {
                1.0
            };
            h = h.min(1.0 / (rate * growth));
        }
        knee_rate_prev = q_acc / h_acc;
    }
    stats.point_solves += rhs.evaluations as u64;
    let (c_d_end, c_c_end) = rhs.outlets(y[0], y[6]);
    if let End::Target(target) = end {
        if end_s >= 1.0 && c_d_end > target {
            return Err(ModelError::TargetUnreachable {
                target_mol_m3: target,
                max_length_m: length,
                outlet_mol_m3: c_d_end,
            });
        }
    }
    let l = length * end_s * end_s * end_s;
    let c_c_out = if streams.counter { c_c_at0 } else { c_c_end };
    // Concentrate outlet flow per unit inlet flow: at x = 0 for counter-current flow.
    let concentrate_flow_ratio = match (water, streams.counter) {
        (false, _) => 1.0,
        (true, true) => w_at0,
        (true, false) => w_at0 + rhs.ratio * (1.0 - y[6]),
    };
    Ok(ChannelResult {
        length_m: l,
        // A diluate emptied of salt may overshoot zero by the local error tolerance.
        c_d_out: c_d_end.max(0.0),
        c_c_out,
        salt_out_mol_m3: y[0].max(0.0),
        diluate_flow_ratio: y[6],
        concentrate_flow_ratio,
        current_per_width: y[1],
        salt_current_per_width: y[2],
        alpha_mean: y[3] / l,
        wavelength_mean: (y[5] > 0.0).then(|| y[4] / y[5]),
        max_v_cem,
        max_v_aem,
        max_water_splitting: max_ws,
        steps,
        rhs_evaluations: rhs.evaluations,
        profiles,
    })
}

/// How an evaluation of an outer search over whole integrations (the counter-current
/// shooting, the voltage of a given current) ends the search: a failed integration, or a
/// point whose residual is small enough.
pub(crate) enum Shot {
    Model(ModelError),
    Root(f64),
}

/// An outer search over whole integrations. `at(x)` integrates and returns the residual and
/// the result; a residual within `close_enough(x)` ends the search there. `search` drives
/// the residual function (its errors pass through, `Shot::Root` included). Returns the root
/// and, when it was one of the integrations made, that integration's result (so the caller
/// need not repeat it).
#[allow(clippy::float_cmp)] // exact on purpose: the root is one of the evaluated points, found by its exact value
pub(crate) fn outer_search(
    mut at: impl FnMut(f64) -> Result<(f64, ChannelResult), ModelError>,
    close_enough: impl Fn(f64) -> f64,
    search: impl FnOnce(&mut dyn FnMut(f64) -> Result<f64, Shot>) -> Result<f64, Shot>,
) -> Result<(f64, Option<ChannelResult>), ModelError> {
    let mut done: Vec<(f64, ChannelResult)> = Vec::new();
    let mut residual = |x: f64| -> Result<f64, Shot> {
        let (miss, r) = at(x).map_err(Shot::Model)?;
        done.push((x, r));
        if miss.abs() <= close_enough(x) {
            return Err(Shot::Root(x));
        }
        Ok(miss)
    };
    let root = match search(&mut residual) {
        Ok(root) | Err(Shot::Root(root)) => root,
        Err(Shot::Model(e)) => return Err(e),
    };
    let kept = done.into_iter().find(|(x, _)| *x == root).map(|(_, r)| r);
    Ok((root, kept))
}

/// The counter-current concentrate at x = 0 (concentration, flow per unit inlet flow) from the
/// diluate outlet's salt flow and flow ratio, by the salt and water balances.
fn concentrate_at0(streams: Streams, ratio: f64, water: bool, salt: f64, flow: f64) -> (f64, f64) {
    let n0 = streams.c_c_in + ratio * (streams.c_d_in - salt);
    if water {
        let w0 = 1.0 + ratio * (1.0 - flow);
        (n0 / w0, w0)
    } else {
        (n0, 1.0)
    }
}

/// Integrate the channel at cell-pair voltage `u` (V): `length` is the channel length
/// (fixed mode) or the longest length searched (target mode).
#[allow(clippy::too_many_arguments)]
pub fn integrate(
    cell: &Cell,
    streams: Streams,
    length: f64,
    u: f64,
    end: End,
    rel_tol: f64,
    want_profiles: bool,
    stats: &mut Stats,
) -> Result<ChannelResult, ModelError> {
    let ratio = cell.gap_d * streams.u_d / (cell.gap_c * streams.u_c);
    let water = cell.physics.water_transport;
    // The concentrate at x = 0 (concentration, flow per unit concentrate inlet flow): its inlet
    // for co-current flow; for counter-current flow its outlet, which follows from the diluate
    // outlet's salt flow per unit inlet flow (`salt`) and flow ratio (`flow`) by the salt and
    // water balances.
    let at0 = |salt: f64, flow: f64| concentrate_at0(streams, ratio, water, salt, flow);
    if !streams.counter {
        return integrate_once(
            cell,
            streams,
            length,
            u,
            (streams.c_c_in, 1.0),
            end,
            rel_tol,
            want_profiles,
            stats,
        );
    }
    // Counter-current flow with water transport: the diluate outlet flow is not known in
    // advance either. A fixed point on it around the salt solve (osmosis ties the water to
    // the concentrate only weakly, so it converges in a few rounds); without water transport
    // the first round is the only one.
    let flow_tol = 1e-2 * rel_tol;
    let mut flow = 1.0;
    let mut x_start = streams.c_d_in;
    for _ in 0..30 {
        let (r, root) = if let End::Target(target) = end {
            // Known from the target in target mode.
            let r = integrate_once(
                cell,
                streams,
                length,
                u,
                at0(target * flow, flow),
                end,
                rel_tol,
                want_profiles,
                stats,
            )?;
            (r, target * flow)
        } else {
            // Otherwise found by shooting: the diluate outlet salt flow c such that integrating
            // with the concentrate outlet that the balances give returns c. The shooting stops
            // at an outlet that reproduces itself to 1e-2 rel_tol (relative, down to the
            // relative floor): the root's error then stays a hundred times inside the
            // integration's own.
            let c_floor = RELATIVE_FLOOR * streams.c_d_in;
            let at = |c_out: f64| {
                let r = integrate_once(
                    cell,
                    streams,
                    length,
                    u,
                    at0(c_out, flow),
                    end,
                    rel_tol,
                    false,
                    stats,
                )?;
                Ok((r.salt_out_mol_m3 - c_out, r))
            };
            let close_enough = |c_out: f64| 1e-2 * rel_tol * c_out.abs().max(c_floor);
            // Secant steps from the outlet with the concentrate at its inlet concentration
            // (c = c_in; in later rounds, the last round's outlet) and, one fixed-point step
            // on, the outlet that integration gave: the outlet depends only weakly on the
            // concentrate, so they converge in a few integrations. Brent takes over when they
            // stall, with c = 0 (where the miss is never negative) and c = c_in as the ends
            // of the bracket that the points may lack.
            // With salt back-diffusion a weak current can leave the diluate saltier than fed,
            // so the outlet may lie above c = c_in, up to all the salt of both feeds.
            let hi = streams.c_d_in;
            let hi_max = if cell.physics.salt_back_diffusion {
                hi + streams.c_c_in / ratio
            } else {
                hi
            };
            let search = |g: &mut dyn FnMut(f64) -> Result<f64, Shot>| -> Result<f64, Shot> {
                let x0 = x_start;
                let g0 = g(x0)?;
                let x1 = (x0 + g0).clamp(0.0, hi_max);
                let pts = vec![(x0, g0), (x1, g(x1)?)];
                let tol = 1e-3 * rel_tol * streams.c_d_in;
                // Exact on purpose: the first round starts at c_in itself, whose miss is known.
                #[allow(clippy::float_cmp)]
                let first_round = x0 == hi;
                let mut below = |g: &mut dyn FnMut(f64) -> Result<f64, Shot>| {
                    let (mut x, mut m) = (hi, if first_round { g0 } else { g(hi)? });
                    while m >= 0.0 && x < hi_max {
                        x = (x + 2.0 * m.max(1e-3 * hi)).min(hi_max);
                        m = g(x)?;
                    }
                    Ok((x, m))
                };
                secant_then_brent(
                    g,
                    pts,
                    (0.0, hi_max),
                    &mut below,
                    &mut |g| Ok((0.0, g(0.0)?)),
                    tol,
                )?
                .ok_or_else(|| {
                    Shot::Model(ModelError::Numerical(
                        "counter-current outlet not bracketed".into(),
                    ))
                })
            };
            let (root, kept) = outer_search(at, close_enough, search)?;
            let r = match kept.filter(|_| !want_profiles) {
                Some(r) => r,
                None => integrate_once(
                    cell,
                    streams,
                    length,
                    u,
                    at0(root, flow),
                    end,
                    rel_tol,
                    want_profiles,
                    stats,
                )?,
            };
            (r, root)
        };
        if !water || (r.diluate_flow_ratio - flow).abs() <= flow_tol {
            return Ok(r);
        }
        flow = r.diluate_flow_ratio;
        x_start = root;
    }
    Err(ModelError::Numerical(
        "counter-current water balance did not converge".into(),
    ))
}

#[cfg(test)]
#[allow(clippy::float_cmp)] // tests check exact values the code sets or copies
mod tests {
    use super::*;

    /// Stages of one Dormand-Prince step of the scalar y' = y cos(s) (y = exp(sin s)) in
    /// component 0.
    fn stages_of_test_ode(s: f64, y: f64, h: f64) -> ([State; 7], f64) {
        let f = |s: f64, y: f64| y * s.cos();
        let mut k = [[0.0; N]; 7];
        k[0][0] = f(s, y);
        for st in 1..7 {
            let yt = y + h * (0..st).map(|j| A[st][j] * k[j][0]).sum::<f64>();
            k[st][0] = f(s + C[st] * h, yt);
        }
        let y1 = y + h * (0..6).map(|j| A[6][j] * k[j][0]).sum::<f64>();
        (k, y1)
    }

    #[test]
    fn continuous_extension_is_of_order_four() {
        // Hairer, Norsett and Wanner, Solving ODEs I, II.6: the continuous extension of
        // Dormand-Prince 5(4) has order 4, so its error inside one step falls as h^5
        // (32 times per halving); a cubic Hermite interpolant, or a wrong coefficient, gives
        // h^4 (16 times) at best.
        let exact = |s: f64| s.sin().exp();
        let (s0, y0) = (0.3, exact(0.3));
        // The largest error over the step's interior (at a single theta the error's
        // coefficient can pass through zero).
        let err = |h: f64| {
            let (k, y1) = stages_of_test_ode(s0, y0, h);
            (1..10)
                .map(|j| {
                    let theta = j as f64 / 10.0;
                    (dense_c(y0, y1, &k, h, theta) - exact(s0 + theta * h)).abs()
                })
                .fold(0.0, f64::max)
        };
        for h in [0.2, 0.1] {
            let ratio = err(h) / err(0.5 * h);
            assert!(ratio > 26.0 && ratio < 40.0, "h {h}: ratio {ratio}");
        }
        // It passes through both step ends.
        let (k, y1) = stages_of_test_ode(s0, y0, 0.2);
        assert_eq!(dense_c(y0, y1, &k, 0.2, 0.0), y0);
        assert!((dense_c(y0, y1, &k, 0.2, 1.0) - y1).abs() < 1e-15);
    }
}
