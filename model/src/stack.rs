//! A stack of identical cell pairs between two electrodes: stack voltage and current, power,
//! and the shunt (ionic shortcut) currents through the manifolds.
//!
//! **Voltage.** U_stack = N U_cp + U_el: N cell pairs at the cell-pair voltage the model solved,
//! plus the electrode compartments as one voltage U_el (the electrode reactions' equilibrium
//! potentials, their overpotentials and the rinse solution's ohmic drop). The default
//! [`DEFAULT_ELECTRODE_VOLTAGE_V`] is common practice for gas-evolving electrodes (about 2-3 V
//! in all; water splitting alone needs 1.23 V). The electrodes make hydrogen at the cathode and
//! oxygen, and chlorine from chloride waters, at the anode: the rinse must be vented.
//!
//! **Shunt currents.** Every compartment opens through its feed channels (one at the inlet, one
//! at the outlet) into a manifold that runs through the whole stack; the manifolds' solution
//! conducts and bypasses the membranes. The equivalent circuit is that of Veerman, Post, Saakes,
//! Metz and Harmsen, J. Membr. Sci. 310 (2008) 418 (their model of ionic shortcut currents in a
//! stack, validated there on reverse-electrodialysis stacks), written here for a driven stack:
//! - the membranes: 2N resistors in series through the 2N compartments (diluate and concentrate
//!   alternate), each r = R_cp/2 with R_cp = U_cp / I_cp the cell pair's secant resistance at
//!   its operating point, the two end ones r/2 (the stack's resistance is N R_cp, as without
//!   shunts);
//! - each compartment connects to its stream's inlet and outlet manifolds through its feed
//!   channel, R_ch = L_ch / (kappa w_ch g) (channel length, width, the compartment's gap as its
//!   depth, at that stream's inlet or outlet conductivity);
//! - the four manifolds (diluate and concentrate, inlet and outlet) are chains of segments one
//!   cell pair thick, R_m = t_cp / (kappa pi d^2 / 4), t_cp = both gaps plus two membranes;
//!   their ends at the end plates are closed (external piping taken as non-conducting).
//!
//! The network is linear; it is solved exactly (banded Cholesky factorisation of the nodal
//! conductance matrix, 6 unknowns per cell pair) for the terminal voltage N U_cp. Since the
//! membrane resistors are equal, the membrane current averaged over the stack's thickness is
//! then I_cp, the cell pair's design current, whatever the shunts; the terminals carry more,
//! I_stack = I_cp / (1 - f), f = the shunt fraction, the share of the stack current that
//! bypasses the membranes. Screening simplification (stated): the cell pairs near the middle
//! see a little less voltage than those near the ends; the model's cell pair stands for their
//! mean, with the secant resistance standing for the cell's nonlinear characteristic.
//!
//! **Power.** P = U_stack I_stack / eta_rect, eta_rect the rectifier's efficiency (AC in, DC out).

use crate::properties::ConductivityModel;
use crate::{ModelError, Salt};
use serde::{Deserialize, Serialize};

/// Electrode compartments' voltage, V: common practice for gas-evolving electrodes (about 2-3 V
/// in all, overpotentials and rinse included).
pub const DEFAULT_ELECTRODE_VOLTAGE_V: f64 = 2.5;
/// Rectifier efficiency, -: common practice for industrial thyristor or switched-mode DC supplies
/// (about 0.9-0.97; from memory).
pub const DEFAULT_RECTIFIER_EFFICIENCY: f64 = 0.95;
/// Direct voltage above which a stack is hazardous to touch: 120 V ripple-free DC, the
/// extra-low-voltage limit of IEC 61140 (from memory).
pub const HAZARDOUS_DC_VOLTAGE_V: f64 = 120.0;
/// The caution that goes with every stack voltage.
pub const STACK_CAUTION: &str = "an ED stack is a DC source on wet equipment: above about \
120 V DC it is hazardous to touch (extra-low-voltage limit, IEC 61140), and the electrode \
rinse carries hydrogen, oxygen and, from chloride waters, chlorine that must be vented. \
Design the electrical installation, earthing, interlocks and venting to local codes with a \
licensed electrical engineer.";

/// Manifold and feed-channel geometry for the shunt-current model.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct ShuntGeometry {
    /// Diameter of each of the four manifolds (circular), m.
    pub manifold_diameter_m: f64,
    /// Length of the feed channel from a manifold into a compartment, m.
    pub feed_channel_length_m: f64,
    /// Width of that feed channel, m (its depth is the compartment's gap).
    pub feed_channel_width_m: f64,
    /// Thickness of one membrane, m (with the two gaps, the cell-pair thickness).
    pub membrane_thickness_m: f64,
}

impl ShuntGeometry {
    /// A plausible small-stack geometry (common practice order of magnitude): 20 mm manifolds,
    /// feed channels 30 mm long and 5 mm wide, 0.15 mm membranes.
    pub fn typical() -> ShuntGeometry {
        ShuntGeometry {
            manifold_diameter_m: 0.020,
            feed_channel_length_m: 0.030,
            feed_channel_width_m: 0.005,
            membrane_thickness_m: 0.15e-3,
        }
    }
}

/// A stack's design.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct Stack {
    /// Number of cell pairs, >= 1.
    pub cell_pairs: u32,
    /// Electrode compartments as one voltage, V.
    pub electrode_voltage_v: f64,
    /// Rectifier efficiency, 0..1.
    pub rectifier_efficiency: f64,
    /// Manifold geometry; None leaves the shunt currents out.
    pub shunt: Option<ShuntGeometry>,
}

impl Stack {
    /// One cell pair with no electrode voltage, an ideal rectifier and no shunts: the cell
    /// pair alone, as the model evaluates it.
    pub fn single_cell_pair() -> Stack {
        Stack {
            cell_pairs: 1,
            electrode_voltage_v: 0.0,
            rectifier_efficiency: 1.0,
            shunt: None,
        }
    }

    /// Check every field against its physical range.
    pub fn check(&self) -> Result<(), ModelError> {
        let bad = |field, value, allowed| {
            Err(ModelError::Input {
                field,
                value,
                allowed,
            })
        };
        if !(1..=5000).contains(&self.cell_pairs) {
            return bad("cell_pairs", self.cell_pairs as f64, "1 to 5000");
        }
        if !(self.electrode_voltage_v.is_finite()
            && (0.0..=50.0).contains(&self.electrode_voltage_v))
        {
            return bad("electrode_voltage_v", self.electrode_voltage_v, "0 to 50 V");
        }
        if !(self.rectifier_efficiency.is_finite()
            && self.rectifier_efficiency > 0.01
            && self.rectifier_efficiency <= 1.0)
        {
            return bad(
                "rectifier_efficiency",
                self.rectifier_efficiency,
                "0.01 to 1",
            );
        }
        if let Some(g) = self.shunt {
            for (field, v) in [
                ("manifold_diameter_m", g.manifold_diameter_m),
                ("feed_channel_length_m", g.feed_channel_length_m),
                ("feed_channel_width_m", g.feed_channel_width_m),
                ("membrane_thickness_m", g.membrane_thickness_m),
            ] {
                if !(v.is_finite() && (1e-6..=1.0).contains(&v)) {
                    return bad(field, v, "1e-6 to 1 m");
                }
            }
        }
        Ok(())
    }
}

/// The cell pair's operating point and streams, as the stack sees them.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct CellPairPoint {
    /// Cell-pair voltage, V.
    pub voltage_v: f64,
    /// Current through one cell pair, A.
    pub current_a: f64,
    /// Diluate gap, m.
    pub gap_m: f64,
    /// Concentrate gap, m.
    pub concentrate_gap_m: f64,
    /// Salt and temperature (K) for the conductivities.
    pub salt: Salt,
    /// Temperature, K.
    pub temperature_k: f64,
    /// Diluate inlet and outlet, concentrate inlet and outlet concentrations, mol/m^3.
    pub concentrations_mol_m3: [f64; 4],
}

/// What a stack gives.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct StackResult {
    /// Number of cell pairs.
    pub cell_pairs: u32,
    /// Voltage across the stack's terminals, V.
    pub stack_voltage_V: f64,
    /// Current through the terminals, A.
    pub stack_current_A: f64,
    /// Electrode compartments' voltage, V.
    pub electrode_voltage_V: f64,
    /// Share of the stack current that bypasses the membranes through the manifolds, -.
    pub shunt_current_fraction: f64,
    /// Power drawn from the grid by one stack (rectifier losses included), kW.
    pub power_kW: f64,
}

/// Evaluate a stack of `s.cell_pairs` copies of the cell pair at `p`.
pub fn evaluate_stack(s: &Stack, p: &CellPairPoint) -> Result<StackResult, ModelError> {
    s.check()?;
    if !(p.voltage_v.is_finite() && p.current_a.is_finite() && p.current_a > 0.0) {
        return Err(ModelError::Numerical(format!(
            "a stack needs a cell pair that carries current (voltage {} V, current {} A)",
            p.voltage_v, p.current_a
        )));
    }
    let n = s.cell_pairs as usize;
    let f = match s.shunt {
        Some(g) => {
            let net = ShuntNetwork::new(n, p.voltage_v / p.current_a, &g, p);
            net.shunt_fraction()?
        }
        None => 0.0,
    };
    let voltage = n as f64 * p.voltage_v + s.electrode_voltage_v;
    let current = p.current_a / (1.0 - f);
    Ok(StackResult {
        cell_pairs: s.cell_pairs,
        stack_voltage_V: voltage,
        stack_current_A: current,
        electrode_voltage_V: s.electrode_voltage_v,
        shunt_current_fraction: f,
        power_kW: voltage * current / s.rectifier_efficiency / 1000.0,
    })
}

/// The resistances of the shunt circuit (see the module docs), Ohm.
#[derive(Debug, Clone, PartialEq)]
pub struct ShuntNetwork {
    /// Number of cell pairs.
    pub cell_pairs: usize,
    /// One membrane with half of each neighbouring compartment, R_cp / 2.
    pub membrane: f64,
    /// Feed channels: diluate inlet, diluate outlet, concentrate inlet, concentrate outlet.
    pub feed_channel: [f64; 4],
    /// Manifold segments one cell pair long, in the same order.
    pub manifold: [f64; 4],
}

impl ShuntNetwork {
    /// The circuit of `n` cell pairs of secant resistance `r_cp` (Ohm) with geometry `g`.
    pub fn new(n: usize, r_cp: f64, g: &ShuntGeometry, p: &CellPairPoint) -> ShuntNetwork {
        let k = ConductivityModel::new(p.salt, p.temperature_k);
        let t_cp = p.gap_m + p.concentrate_gap_m + 2.0 * g.membrane_thickness_m;
        let a_m = std::f64::consts::PI * g.manifold_diameter_m.powi(2) / 4.0;
        let gaps = [p.gap_m, p.gap_m, p.concentrate_gap_m, p.concentrate_gap_m];
        let mut feed_channel = [0.0; 4];
        let mut manifold = [0.0; 4];
        for i in 0..4 {
            let kappa = k.conductivity(p.concentrations_mol_m3[i]);
            feed_channel[i] = g.feed_channel_length_m / (kappa * g.feed_channel_width_m * gaps[i]);
            manifold[i] = t_cp / (kappa * a_m);
        }
        ShuntNetwork {
            cell_pairs: n,
            membrane: r_cp / 2.0,
            feed_channel,
            manifold,
        }
    }

    /// Every resistor as (node a, node b, Ohm), nodes numbered 6j + {0: diluate compartment,
    /// 1: concentrate compartment, 2..5: the manifold nodes in [`Self::feed_channel`]'s order};
    /// `TOP` is the terminal at the stack voltage, `GROUND` the other. The membrane resistors
    /// come first, in order from `TOP`.
    pub fn resistors(&self) -> Vec<(usize, usize, f64)> {
        let n = self.cell_pairs;
        let r = self.membrane;
        let mut out = Vec::with_capacity(10 * n);
        for j in 0..n {
            let d = 6 * j;
            let before = if j == 0 { TOP } else { d - 5 };
            out.push((before, d, if j == 0 { r / 2.0 } else { r }));
            out.push((d, d + 1, r));
        }
        // The last concentrate compartment to ground.
        out.push((6 * (n - 1) + 1, GROUND, r / 2.0));
        for j in 0..n {
            let d = 6 * j;
            for m in 0..4 {
                let compartment = if m < 2 { d } else { d + 1 };
                out.push((compartment, d + 2 + m, self.feed_channel[m]));
                if j + 1 < n {
                    out.push((d + 2 + m, d + 8 + m, self.manifold[m]));
                }
            }
        }
        out
    }

    /// Membrane currents for a terminal voltage of 1 V (Ohm's law on the solved potentials),
    /// in order from `TOP`, and the node potentials.
    pub fn solve_unit(&self) -> Result<(Vec<f64>, Vec<f64>), ModelError> {
        let n = 6 * self.cell_pairs;
        let resistors = self.resistors();
        // Banded nodal matrix: half-bandwidth 6 in this numbering.
        let mut band = Banded::new(n, 6);
        let mut rhs = vec![0.0; n];
        for &(a, b, r) in &resistors {
            let g = 1.0 / r;
            match (a, b) {
                (TOP, x) | (x, TOP) => {
                    band.add(x, x, g);
                    rhs[x] += g;
                }
                (GROUND, x) | (x, GROUND) => band.add(x, x, g),
                (x, y) => {
                    band.add(x, x, g);
                    band.add(y, y, g);
                    band.add(x.min(y), x.max(y), -g);
                }
            }
        }
        let phi = band.solve(rhs)?;
        let at = |x: usize| match x {
            TOP => 1.0,
            GROUND => 0.0,
            x => phi[x],
        };
        let membranes = resistors[..2 * self.cell_pairs + 1]
            .iter()
            .map(|&(a, b, r)| (at(a) - at(b)) / r)
            .collect();
        Ok((membranes, phi))
    }

    /// The shunt fraction: 1 - (membrane current averaged over the stack's thickness) / (the
    /// terminal current).
    pub fn shunt_fraction(&self) -> Result<f64, ModelError> {
        let (i, _) = self.solve_unit()?;
        let resistors = self.resistors();
        let total_r: f64 = resistors[..i.len()].iter().map(|x| x.2).sum();
        let mean = i.iter().zip(&resistors).map(|(i, x)| i * x.2).sum::<f64>() / total_r;
        Ok(1.0 - mean / i[0])
    }
}

/// Node number of the terminal held at the stack voltage.
pub const TOP: usize = usize::MAX;
/// Node number of the grounded terminal.
pub const GROUND: usize = usize::MAX - 1;

/// A symmetric positive definite band matrix (upper band stored by rows) with an in-place
/// Cholesky solve.
struct Banded {
    n: usize,
    w: usize,
    a: Vec<f64>, // a[i * (w + 1) + (j - i)] for i <= j <= i + w
}

impl Banded {
    fn new(n: usize, w: usize) -> Banded {
        Banded {
            n,
            w,
            a: vec![0.0; n * (w + 1)],
        }
    }

    fn add(&mut self, i: usize, j: usize, v: f64) {
        debug_assert!(i <= j && j - i <= self.w);
        self.a[i * (self.w + 1) + (j - i)] += v;
    }

    /// Solve A x = b by Cholesky (A = U^T U), O(n w^2).
    // Band indices read more plainly than iterator chains here.
    #[allow(clippy::needless_range_loop)]
    fn solve(mut self, mut b: Vec<f64>) -> Result<Vec<f64>, ModelError> {
        let (n, w) = (self.n, self.w);
        let idx = |i: usize, j: usize| i * (w + 1) + (j - i);
        for i in 0..n {
            let d = self.a[idx(i, i)];
            if !(d > 0.0 && d.is_finite()) {
                return Err(ModelError::Numerical(
                    "shunt network matrix is not positive definite".into(),
                ));
            }
            let u = d.sqrt();
            self.a[idx(i, i)] = u;
            for j in i + 1..(i + w + 1).min(n) {
                self.a[idx(i, j)] /= u;
            }
            for k in i + 1..(i + w + 1).min(n) {
                let uik = self.a[idx(i, k)];
                if uik == 0.0 {
                    continue;
                }
                for j in k..(i + w + 1).min(n) {
                    self.a[idx(k, j)] -= uik * self.a[idx(i, j)];
                }
            }
        }
        // U^T y = b.
        for i in 0..n {
            let s = b[i] / self.a[idx(i, i)];
            b[i] = s;
            for j in i + 1..(i + w + 1).min(n) {
                b[j] -= self.a[idx(i, j)] * s;
            }
        }
        // U x = y.
        for i in (0..n).rev() {
            let mut s = b[i];
            for j in i + 1..(i + w + 1).min(n) {
                s -= self.a[idx(i, j)] * b[j];
            }
            b[i] = s / self.a[idx(i, i)];
        }
        Ok(b)
    }
}

/// Warnings of a stack: hazardous voltage.
pub fn warnings(r: &StackResult) -> Vec<crate::output::Warning> {
    let mut out = Vec::new();
    if r.stack_voltage_V > HAZARDOUS_DC_VOLTAGE_V {
        out.push(crate::output::Warning {
            quantity: "stack_voltage_V".into(),
            value: r.stack_voltage_V,
            bound: HAZARDOUS_DC_VOLTAGE_V,
            message: format!(
                "the stack voltage {:.0} V is above {HAZARDOUS_DC_VOLTAGE_V} V DC: {STACK_CAUTION}",
                r.stack_voltage_V
            ),
        });
    }
    out
}

#[cfg(test)]
#[allow(clippy::float_cmp)] // sums of exactly representable values
mod tests {
    use super::*;

    fn point() -> CellPairPoint {
        CellPairPoint {
            voltage_v: 1.2,
            current_a: 2.0,
            gap_m: 0.5e-3,
            concentrate_gap_m: 0.5e-3,
            salt: Salt::NaCl,
            temperature_k: 298.15,
            concentrations_mol_m3: [40.0, 10.0, 40.0, 70.0],
        }
    }

    #[test]
    fn without_shunts_the_stack_is_its_cell_pairs_in_series() {
        // Series circuit (Kirchhoff's voltage law): U = N U_cp + U_el, I = I_cp.
        let s = Stack {
            cell_pairs: 200,
            electrode_voltage_v: 2.5,
            rectifier_efficiency: 0.95,
            shunt: None,
        };
        let r = evaluate_stack(&s, &point()).unwrap();
        assert_eq!(r.stack_voltage_V, 200.0 * 1.2 + 2.5);
        assert_eq!(r.stack_current_A, 2.0);
        assert_eq!(r.shunt_current_fraction, 0.0);
        assert!((r.power_kW - 242.5 * 2.0 / 0.95 / 1000.0).abs() < 1e-12);
        assert!(!warnings(&r).is_empty());
    }

    #[test]
    fn shunts_grow_with_the_manifold_and_the_cell_count() {
        let mut s = Stack {
            cell_pairs: 50,
            electrode_voltage_v: 2.5,
            rectifier_efficiency: 0.95,
            shunt: Some(ShuntGeometry::typical()),
        };
        let f50 = evaluate_stack(&s, &point()).unwrap().shunt_current_fraction;
        s.cell_pairs = 300;
        let f300 = evaluate_stack(&s, &point()).unwrap().shunt_current_fraction;
        let mut g = ShuntGeometry::typical();
        g.manifold_diameter_m *= 2.0;
        s.shunt = Some(g);
        let f300_wide = evaluate_stack(&s, &point()).unwrap().shunt_current_fraction;
        assert!(f50 > 0.0 && f50 < f300 && f300 < f300_wide && f300_wide < 1.0);
    }

    /// Dense Gaussian elimination with partial pivoting (the test's own solver).
    #[allow(clippy::needless_range_loop)]
    fn dense_solve(mut a: Vec<Vec<f64>>, mut b: Vec<f64>) -> Vec<f64> {
        let n = b.len();
        for c in 0..n {
            let p = (c..n)
                .max_by(|&i, &j| a[i][c].abs().total_cmp(&a[j][c].abs()))
                .unwrap();
            a.swap(c, p);
            b.swap(c, p);
            for r in c + 1..n {
                let f = a[r][c] / a[c][c];
                for k in c..n {
                    a[r][k] -= f * a[c][k];
                }
                b[r] -= f * b[c];
            }
        }
        let mut x = vec![0.0; n];
        for r in (0..n).rev() {
            let s: f64 = (r + 1..n).map(|k| a[r][k] * x[k]).sum();
            x[r] = (b[r] - s) / a[r][r];
        }
        x
    }

    #[test]
    fn shunt_circuit_matches_a_direct_nodal_solve() {
        // Exact reference: the circuit of Veerman et al. (2008) for a driven stack, written out
        // here node by node from the geometry (its own numbering: compartments 0..2n from the
        // top terminal, then each manifold's n nodes), solved by dense elimination.
        let p = point();
        let g = ShuntGeometry::typical();
        for n in [1usize, 2, 7, 25] {
            let r_cp = p.voltage_v / p.current_a;
            let k = ConductivityModel::new(p.salt, p.temperature_k);
            let t_cp = p.gap_m + p.concentrate_gap_m + 2.0 * g.membrane_thickness_m;
            let area = std::f64::consts::PI * 0.25 * g.manifold_diameter_m.powi(2);
            let nodes = 2 * n + 4 * n;
            let mut a = vec![vec![0.0; nodes]; nodes];
            let mut b = vec![0.0; nodes];
            // Terminal nodes: -1 is the 1 V terminal, -2 ground.
            let mut stamp = |x: isize, y: isize, r: f64| {
                let gc = 1.0 / r;
                for (u, v) in [(x, y), (y, x)] {
                    if u >= 0 {
                        a[u as usize][u as usize] += gc;
                        if v >= 0 {
                            a[u as usize][v as usize] -= gc;
                        } else if v == -1 {
                            b[u as usize] += gc;
                        }
                    }
                }
            };
            let rm = r_cp / 2.0;
            stamp(-1, 0, rm / 2.0);
            for c in 0..2 * n - 1 {
                stamp(c as isize, c as isize + 1, rm);
            }
            stamp(2 * n as isize - 1, -2, rm / 2.0);
            for m in 0..4 {
                let kappa = k.conductivity(p.concentrations_mol_m3[m]);
                let gap = if m < 2 { p.gap_m } else { p.concentrate_gap_m };
                let r_ch = g.feed_channel_length_m / (kappa * g.feed_channel_width_m * gap);
                let r_seg = t_cp / (kappa * area);
                for j in 0..n {
                    let node = (2 * n + m * n + j) as isize;
                    let compartment = (2 * j + usize::from(m >= 2)) as isize;
                    stamp(compartment, node, r_ch);
                    if j + 1 < n {
                        stamp(node, node + 1, r_seg);
                    }
                }
            }
            let phi = dense_solve(a, b);
            let i_top = (1.0 - phi[0]) / (rm / 2.0);
            let i_bottom = phi[2 * n - 1] / (rm / 2.0);
            // Kirchhoff: what enters at the top leaves at the bottom.
            assert!((i_top - i_bottom).abs() < 1e-9 * i_top, "n {n}");
            let ours = ShuntNetwork::new(n, r_cp, &g, &p);
            let (membranes, _) = ours.solve_unit().unwrap();
            assert!((membranes[0] - i_top).abs() < 1e-9 * i_top, "n {n}");
            for c in 0..2 * n - 1 {
                let i_ref = (phi[c] - phi[c + 1]) / rm;
                assert!(
                    (membranes[c + 1] - i_ref).abs() < 1e-9 * i_top,
                    "n {n} link {c}"
                );
            }
            let f = ours.shunt_fraction().unwrap();
            let mean = 1.0 / (n as f64 * r_cp);
            assert!((f - (1.0 - mean / i_top)).abs() < 1e-9, "n {n}: {f}");
            if n == 1 {
                assert!(f.abs() < 1e-12, "one cell pair has nothing to bypass: {f}");
            }
        }
    }
}
