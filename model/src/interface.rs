//! One diluate-side membrane boundary layer: the current-voltage law of the reduced-order
//! model (ROM), classic and overlimiting.
//!
//! In thermal units v (layer voltage / V_T), with i_lim the Peers limit of the homogeneous
//! membrane at the local delta:
//!
//! - funnelling: i_lim,het = i_lim Phi, Phi the exact limiting-current factor of a periodic
//!   strip array under a Nernst film (see [`Funnel`]; f = open fraction; Phi -> 1 for
//!   pitch << delta, -> f for pitch >> delta);
//! - classic branch: i_cl = i_lim,het (1 - exp(-v/2)) (ideal membrane, binary salt);
//! - vortex wavelength: lambda_v = a_lambda delta (v / v_c)^q for v > v_c;
//! - active-area fraction: alpha(v) = alpha_0' + (alpha_max' - alpha_0') L P(f), with the
//!   Gaussian lock-in window L = exp(-ln(pitch/lambda_v)^2 / (2 sigma^2)), the pinning
//!   efficiency P(f) = (f/phi*)^(kappa phi*) ((1-f)/(1-phi*))^(kappa (1-phi*)) (zero for
//!   f = 1, one at phi*), and alpha_0' = min(alpha_0, f), alpha_max' = min(alpha_max, f), so
//!   alpha never exceeds f;
//! - overlimiting current (n = 1): i_ec = i_lim (g / alpha_0) integral_{v_c}^{v} alpha(w) dw,
//!   in closed form with error functions; for n != 1 the model uses
//!   i_ec = i_lim (g / alpha_0) (v - v_c)^(n-1) integral alpha dw, i.e. the mean alpha over
//!   [v_c, v] times the unpatterned law i_lim g (v - v_c)^n. Both are products/integrals of
//!   positive increasing factors, so i(v) is strictly increasing for every admissible input;
//! - water splitting: a share ws(v) = (v - v_ws) / (v - v_ws + s_ws) of the current is carried
//!   by H+/OH- above v_ws (it desalinates nothing).

use crate::constants::RomConstants;
use crate::design::{Salt, Spacer};
use crate::hydraulics::channel_flow;
use crate::numerics::{erf, erfc, newton_bracketed};
use crate::properties::properties;
use crate::transfer::{peers_limit, SherwoodModel};

/// Which membrane a layer sits on.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
pub enum MembraneKind {
    /// Cation-exchange membrane (counter-ion: the cation).
    Cem,
    /// Anion-exchange membrane (counter-ion: the anion).
    Aem,
}

impl MembraneKind {
    /// The usual abbreviation, "CEM" or "AEM".
    pub fn name(self) -> &'static str {
        match self {
            MembraneKind::Cem => "CEM",
            MembraneKind::Aem => "AEM",
        }
    }

    /// "cation-exchange" or "anion-exchange".
    pub fn exchange(self) -> &'static str {
        match self {
            MembraneKind::Cem => "cation-exchange",
            MembraneKind::Aem => "anion-exchange",
        }
    }
}

/// Funnelling factor Phi = i_lim,het / i_lim of a striped surface: the exact factor of a
/// Nernst film of thickness `funnel_layer_ratio` x `delta_m` (see [`Funnel`]).
#[inline]
pub fn funnelling(pitch_m: f64, delta_m: f64, open_fraction: f64, k: &RomConstants) -> f64 {
    if open_fraction >= 1.0 {
        return 1.0;
    }
    Funnel::new(open_fraction).phi(pitch_m / (k.funnel_layer_ratio * delta_m))
}

/// The exact funnelling factor of a periodic array of conducting strips (share f of the
/// pitch) under a Nernst film of thickness delta, as a function of r = pitch / delta.
///
/// Problem (docs/physics.md#funnelling): Laplace's equation for the concentration in the cell
/// 0 < x < p, 0 < y < delta; c = c_b at y = delta, c = 0 on the conducting share f p of the
/// wall, no flux on the inert share; Phi = mean wall flux / (D c_b / delta). A
/// Schwarz-Christoffel map (Jacobi's sn with K'(k)/K(k) = 2 delta / p) takes the symmetric half
/// cell onto a half plane and a second one onto a rectangle, giving in closed form
///
/// Phi = (2 / r) K(kappa) / K'(kappa), kappa = k sn(f K(k), k), kappa' = dn(f K(k), k),
///
/// with K the complete elliptic integral of the first kind. Evaluated through theta series in
/// the nome q = exp(-2 pi / r) for r <= 2 and, by Jacobi's imaginary transformation, in
/// q' = exp(-pi r / 2) for r > 2 (Abramowitz and Stegun 16.36; DLMF 20.7.30), each at most
/// exp(-pi) so that five terms reach round-off; K/K' from the nome series (A and S 17.3.21).
/// Outside 0.05 <= r <= 150 / min(f, 1 - f) the two exact asymptotes are used, to relative
/// 1e-50 or better: Phi = 1 / (1 + (r / pi) ln(1 / sin(pi f / 2))) (the constriction of a strip
/// array, Rubinstein, Staude and Kedem, Desalination 69 (1988) 101) and
/// Phi = f + (4 ln 2 / pi) / r (two independent edges). Held to a finite-volume solution with
/// Richardson extrapolation and to an independent evaluation of the same closed form
/// (acceptance tests `funnelling_*` in tests/tests/acceptance/model_refs.rs).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Funnel {
    f: f64,
    /// ln(1 / sin(pi f / 2)), the deep-layer constriction of the strip array.
    constriction: f64,
    /// sin((2n + 1) pi f / 2), n = 0..4.
    sin_odd: [f64; 5],
    /// cos(2 n pi f / 2), n = 1..4 (index n - 1).
    cos_even: [f64; 4],
}

/// 4 ln 2 / pi: the extra limiting current of the two edges of a wide strip, in units of
/// delta / pitch (the large-pitch limit Phi = f + (4 ln 2 / pi) delta / pitch).
pub const EDGE_CONSTANT: f64 = 4.0 * std::f64::consts::LN_2 / std::f64::consts::PI;

impl Funnel {
    /// The funnelling law of open fraction `f` (0 < f <= 1).
    pub fn new(f: f64) -> Self {
        let f = f.clamp(f64::MIN_POSITIVE, 1.0);
        let z = 0.5 * std::f64::consts::PI * f;
        let mut sin_odd = [0.0; 5];
        let mut cos_even = [0.0; 4];
        for (n, s) in sin_odd.iter_mut().enumerate() {
            *s = ((2 * n + 1) as f64 * z).sin();
        }
        for (n, c) in cos_even.iter_mut().enumerate() {
            *c = (2.0 * (n + 1) as f64 * z).cos();
        }
        Funnel {
            f,
            constriction: -z.sin().ln(),
            sin_odd,
            cos_even,
        }
    }

    /// Phi at r = pitch / delta (> 0).
    pub fn phi(&self, r: f64) -> f64 {
        use std::f64::consts::PI;
        let f = self.f;
        if f >= 1.0 {
            return 1.0;
        }
        if r < 0.05 {
            // Deep layer: the series constriction, exact to a relative 1e-50 here.
            return 1.0 / (1.0 + r * self.constriction / PI);
        }
        if r * f.min(1.0 - f) > 150.0 {
            // Wide strips and gaps: independent edges, exact to a relative 1e-100 here.
            return f + EDGE_CONSTANT / r;
        }
        let ratio = if r <= 2.0 {
            // Nome q = exp(-2 pi / r) <= exp(-pi): theta series in q.
            let h = (-0.5 * PI / r).exp(); // q^(1/4)
            let q = (h * h) * (h * h);
            let q2 = q * q;
            let qn2 = [q, q2 * q2, q2 * q2 * q2 * q2 * q, q2.powi(8)]; // q^(n^2), n = 1..4
            let qnn = [1.0, q2, q2 * q2 * q2, q2.powi(6), q2.powi(10)]; // q^(n^2 + n), n = 0..4
            let (mut t3, mut t4, mut t3z, mut t4z) = (1.0, 1.0, 1.0, 1.0);
            let mut sign = -1.0;
            for (qn, cos) in qn2.iter().zip(self.cos_even) {
                t3 += 2.0 * qn;
                t4 += 2.0 * sign * qn;
                t3z += 2.0 * qn * cos;
                t4z += 2.0 * sign * qn * cos;
                sign = -sign;
            }
            let (mut p2, mut s1) = (0.0, 0.0);
            let mut sign = 1.0;
            for (qn, sin) in qnn.iter().zip(self.sin_odd) {
                p2 += qn;
                s1 += sign * qn * sin;
                sign = -sign;
            }
            // kappa = k sn(fK) = (theta2/theta3)(0) theta1(z)/theta4(z); kappa' = dn(fK).
            let kappa = 4.0 * h * h * p2 * s1 / (t3 * t4z);
            let kappa_c = t4 * t3z / (t3 * t4z);
            if kappa <= kappa_c {
                k_ratio_small(kappa, kappa_c)
            } else {
                k_ratio_large(kappa, kappa_c.ln())
            }
        } else {
            // Complementary nome A = exp(-pi r / 2) <= exp(-pi), Jacobi's imaginary
            // transformation; every series term scaled to at most 1.
            let w1 = 0.25 * PI * f * r;
            let w2 = 0.25 * PI * (1.0 - f) * r;
            let (h1, h2) = ((-w1).exp(), (-w2).exp());
            let a = (h1 * h2) * (h1 * h2);
            let ab = h2 * h2;
            let d = h1 * h1;
            let one_minus_d = if w1 > 0.5 {
                1.0 - d
            } else {
                -(-2.0 * w1).exp_m1()
            };
            let a2 = a * a;
            let (a4, a9) = (a2 * a2, a2 * a2 * a2 * a2 * a);
            let t3a = 1.0 + 2.0 * (a + a4 + a9);
            let t4a = 1.0 - 2.0 * a + 2.0 * a4 - 2.0 * a9;
            let pa = 1.0 + a2 + a2 * a2 * a2 + a2.powi(6);
            // C' and S' (n = 0..3): A^(n^2) (AB)^n (1 +- D^(2n+1)) / 2.
            let g = [1.0, a * ab, a4 * ab * ab, a9 * ab * ab * ab];
            let d2 = d * d;
            let mut dpow = d; // D^(2n+1)
            let mut geo = 1.0; // 1 + D + ... + D^(2n)
            let (mut c, mut s) = (0.0, 0.0);
            let mut sign = 1.0;
            for gn in g {
                c += gn * (1.0 + dpow);
                s += sign * gn * one_minus_d * geo;
                geo += dpow * (1.0 + d);
                dpow *= d2;
                sign = -sign;
            }
            c *= 0.5;
            s *= 0.5;
            let kappa = t4a / t3a * s / c;
            // kappa' = (P / theta3) h1 (1 + sum_n h1^(2n^2-2n) h2^(2n^2) (1 + h1^(4n))) / C'.
            let h2s = h2 * h2;
            let (h2s2, d4) = (h2s * h2s, d2 * d2);
            let b = h2s * (1.0 + d2)
                + d2 * h2s2 * h2s2 * (1.0 + d4)
                + d4 * d2 * h2s2.powi(4) * h2s * (1.0 + d4 * d2);
            let ln_kc = -w1 + ((1.0 + b) * pa / (t3a * c)).ln();
            if ln_kc > -std::f64::consts::LN_2 * 0.5 {
                // kappa <= 1/sqrt(2) <= kappa'.
                k_ratio_small(kappa, ln_kc.exp())
            } else {
                k_ratio_large(kappa, ln_kc)
            }
        };
        2.0 / r * ratio
    }
}

/// ln(q) / e - 1 for the nome series q = e + 2 e^5 + 15 e^9 + 150 e^13 + 1707 e^17
/// (Abramowitz and Stegun 17.3.21), as ln(1 + x) to third order in x = 2 e^4 + ... <= 7e-6.
#[inline]
fn nome_series_log(e: f64) -> f64 {
    let e4 = (e * e) * (e * e);
    let x = e4 * (2.0 + e4 * (15.0 + e4 * (150.0 + e4 * 1707.0)));
    x * (1.0 - x * (0.5 - x / 3.0))
}

/// K(kappa) / K'(kappa) for kappa <= 1/sqrt(2), from kappa and kappa' = sqrt(1 - kappa^2):
/// K'/K = -ln(q) / pi with the nome q from its series in
/// e = (1 - sqrt(kappa')) / (2 (1 + sqrt(kappa'))) <= 0.0433.
#[inline]
fn k_ratio_small(kappa: f64, kappa_c: f64) -> f64 {
    // 1 - sqrt(kappa') = kappa^2 / ((1 + kappa') (1 + sqrt(kappa'))), no cancellation.
    let sc = kappa_c.sqrt();
    let e = kappa * kappa / ((1.0 + kappa_c) * 2.0 * (1.0 + sc) * (1.0 + sc));
    std::f64::consts::PI / -(e.ln() + nome_series_log(e))
}

/// K(kappa) / K'(kappa) for kappa >= 1/sqrt(2), from kappa and ln kappa' (finite where
/// kappa' underflows): the same series for the complementary modulus.
#[inline]
fn k_ratio_large(kappa: f64, ln_kappa_c: f64) -> f64 {
    let sk = kappa.sqrt();
    let ln_e = 2.0 * ln_kappa_c - ((1.0 + kappa) * 2.0 * (1.0 + sk) * (1.0 + sk)).ln();
    let corr = if ln_e > -12.0 {
        nome_series_log(ln_e.exp())
    } else {
        0.0
    };
    -(ln_e + corr) / std::f64::consts::PI
}

/// Pinning efficiency P(f) in [0, 1]: zero for a homogeneous surface (f = 1) and for f -> 0,
/// one at f = phi*: P = (f/phi*)^(kappa phi*) ((1-f)/(1-phi*))^(kappa (1-phi*)).
#[inline]
pub fn pinning_efficiency(open_fraction: f64, k: &RomConstants) -> f64 {
    let f = open_fraction;
    if f <= 0.0 || f >= 1.0 {
        return 0.0;
    }
    let p = k.best_open_fraction;
    let kp = k.pinning_sharpness;
    (kp * p * (f / p).ln() + kp * (1.0 - p) * ((1.0 - f) / (1.0 - p)).ln()).exp()
}

/// Scaled complementary error function erfcx(x) = exp(x^2) erfc(x): direct below x = 26
/// (where exp(x^2) is finite and erfc(x) still normal), above it the asymptotic series
/// (Abramowitz and Stegun 7.1.23) to the x^-8 term, relative error at most 2e-13 there.
fn erfcx(x: f64) -> f64 {
    if x < 26.0 {
        return (x * x).exp() * erfc(x);
    }
    let r = 1.0 / (2.0 * x * x);
    (1.0 - r * (1.0 - 3.0 * r * (1.0 - 5.0 * r * (1.0 - 7.0 * r))))
        / (x * std::f64::consts::PI.sqrt())
}

/// Share of the current carried by water-splitting products at layer voltage `v`:
/// 0 below the onset `v_ws`, (v - v_ws) / (v - v_ws + s_ws) above.
#[inline]
pub fn water_splitting_share(v: f64, onset: f64, scale: f64) -> f64 {
    if v <= onset {
        0.0
    } else {
        (v - onset) / (v - onset + scale)
    }
}

/// erf at a fixed lower point a, kept in the form that avoids cancellation in the tails:
/// erfc(a) when a >= 0, erfc(-a) when a < 0 (and erf(a) for the mixed case).
#[derive(Debug, Clone, Copy, PartialEq)]
struct ErfAt {
    a: f64,
    tail: f64,
    erf: f64,
}

impl ErfAt {
    fn new(a: f64) -> Self {
        let tail = erfc(a.abs());
        // erf(a) is only needed for a < 0, where it equals erfc(-a) - 1.
        ErfAt {
            a,
            tail,
            erf: if a < 0.0 { tail - 1.0 } else { 1.0 - tail },
        }
    }

    /// erf(b) - erf(a) for b >= a, one error-function call.
    #[inline]
    fn diff_to(&self, b: f64) -> f64 {
        if self.a >= 0.0 {
            self.tail - erfc(b)
        } else if b <= 0.0 {
            erfc(-b) - self.tail
        } else {
            erf(b) - self.erf
        }
    }
}

/// The current-voltage law of one layer, with everything that does not depend on v
/// precomputed (one per membrane per point along the channel).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Layer {
    /// Peers limit of the homogeneous membrane, A/m^2.
    pub i_lim: f64,
    /// Funnelling factor Phi, -.
    pub phi: f64,
    /// Heterogeneous limit i_lim Phi, A/m^2.
    pub i_het: f64,
    /// Diffusion-layer thickness, m.
    pub delta_m: f64,
    /// Onset v_c, thermal units.
    v_c: f64,
    /// i_lim g / alpha_0, A/m^2 per thermal unit.
    gain: f64,
    /// Exponent n.
    n: f64,
    /// alpha_0' = min(alpha_0, f).
    a0: f64,
    /// (alpha_max' - alpha_0') P(f).
    amp: f64,
    /// ln(pitch / (a_lambda delta)).
    z0: f64,
    /// q.
    q: f64,
    /// sigma.
    sigma: f64,
    /// Prefactor of the lock-in integral: (v_c sigma / q) sqrt(pi/2) exp(z0/q + sigma^2/(2 q^2)).
    j_pref: f64,
    /// Error function at the argument belonging to v_c.
    erf_c: ErfAt,
    /// With a lock-in window so wide against its growth (sigma / q) that the exponential of
    /// `j_pref` overflows: `j_pref` holds (v_c sigma / q) sqrt(pi/2) alone, and this is
    /// exp(-z0^2 / (2 sigma^2)) erfcx(-b_c), the v_c end of the integral in scaled form (see
    /// [`Layer::wide_integral`]); None otherwise.
    wide_c: Option<f64>,
    /// Vortex wavelength at onset a_lambda delta, m.
    lambda0: f64,
    /// Classic current at onset, A/m^2.
    i_onset: f64,
}

/// The v-independent part of a surface's law: the pattern and the ROM constants, computed
/// once per design (the layer law itself changes with delta and i_lim along the channel).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Surface {
    /// Stripe pitch, m.
    pub pitch_m: f64,
    /// Open fraction f (1 = unpatterned), -.
    pub open_fraction: f64,
    /// alpha_0' = min(alpha_0, f).
    a0: f64,
    /// (alpha_max' - alpha_0') P(f).
    amp: f64,
    /// The funnelling law of this open fraction.
    funnel: Funnel,
    /// 1 - exp(-v_c / 2).
    onset_factor: f64,
    k: RomConstants,
}

impl Surface {
    /// The surface of stripe `pitch_m` and `open_fraction` (1 = unpatterned).
    pub fn new(pitch_m: f64, open_fraction: f64, k: &RomConstants) -> Self {
        let f = open_fraction.min(1.0);
        let a0 = k.alpha_0.min(f);
        let amax = k.alpha_max.min(f);
        Surface {
            pitch_m,
            open_fraction: f,
            a0,
            amp: (amax - a0) * pinning_efficiency(f, k),
            funnel: Funnel::new(f),
            onset_factor: 1.0 - (-0.5 * k.onset_voltage).exp(),
            k: *k,
        }
    }

    /// The layer law on this surface for a layer of thickness `delta_m` whose homogeneous
    /// Peers limit is `i_lim` (A/m^2).
    #[inline]
    #[allow(clippy::float_cmp)] // exact on purpose: n = 1 exactly selects the closed form; any other value takes the general one
    pub fn layer(&self, i_lim: f64, delta_m: f64) -> Layer {
        let k = &self.k;
        let f = self.open_fraction;
        let phi = if f >= 1.0 {
            1.0
        } else {
            self.funnel
                .phi(self.pitch_m / (k.funnel_layer_ratio * delta_m))
        };
        let lambda0 = k.wavelength_prefactor * delta_m;
        let (q, sigma, v_c) = (k.wavelength_exponent, k.lockin_width, k.onset_voltage);
        let mut wide_c = None;
        let (z0, j_pref, erf_c) = if self.amp != 0.0 {
            let z0 = (self.pitch_m / lambda0).ln();
            let mut j_pref = v_c * sigma / q
                * (0.5 * std::f64::consts::PI).sqrt()
                * (z0 / q + sigma * sigma / (2.0 * q * q)).exp();
            let b_c = -(z0 + sigma * sigma / q) / (sigma * std::f64::consts::SQRT_2);
            if !j_pref.is_finite() {
                j_pref = v_c * sigma / q * (0.5 * std::f64::consts::PI).sqrt();
                wide_c = Some((-z0 * z0 / (2.0 * sigma * sigma)).exp() * erfcx(-b_c));
            }
            (z0, j_pref, ErfAt::new(b_c))
        } else {
            (
                0.0,
                0.0,
                ErfAt {
                    a: 0.0,
                    tail: 1.0,
                    erf: 0.0,
                },
            )
        };
        let i_het = i_lim * phi;
        Layer {
            i_lim,
            phi,
            i_het,
            delta_m,
            v_c,
            gain: i_lim * k.overlimiting_conductance / k.alpha_0,
            n: k.overlimiting_exponent,
            a0: self.a0,
            amp: self.amp,
            z0,
            q,
            sigma,
            j_pref,
            erf_c,
            wide_c,
            lambda0,
            i_onset: i_het * self.onset_factor,
        }
    }
}

impl Layer {
    /// Build the law of a layer of thickness `delta_m` whose homogeneous Peers limit is
    /// `i_lim`, on a surface of stripe `pitch_m` and `open_fraction` (1 = unpatterned).
    pub fn new(
        i_lim: f64,
        delta_m: f64,
        pitch_m: f64,
        open_fraction: f64,
        k: &RomConstants,
    ) -> Self {
        Surface::new(pitch_m, open_fraction, k).layer(i_lim, delta_m)
    }

    /// True for a law without pattern-dependent lock-in (cheap to evaluate and invert).
    #[inline]
    pub fn is_plain(&self) -> bool {
        self.amp == 0.0
    }

    /// Onset voltage v_c, thermal units.
    pub fn onset(&self) -> f64 {
        self.v_c
    }

    /// Active-area fraction alpha at layer voltage `v` (its onset value below onset).
    #[inline]
    pub fn alpha(&self, v: f64) -> f64 {
        if self.amp == 0.0 {
            return self.a0;
        }
        let s = (v.max(self.v_c) / self.v_c).ln();
        let z = self.z0 - self.q * s;
        self.a0 + self.amp * (-z * z / (2.0 * self.sigma * self.sigma)).exp()
    }

    /// (alpha(v), vortex wavelength at v or 0 at and below onset) sharing one logarithm.
    #[inline]
    pub fn alpha_and_wavelength(&self, v: f64) -> (f64, f64) {
        if v <= self.v_c {
            return (self.alpha(v), 0.0);
        }
        let s = (v / self.v_c).ln();
        let alpha = if self.amp == 0.0 {
            self.a0
        } else {
            let z = self.z0 - self.q * s;
            self.a0 + self.amp * (-z * z / (2.0 * self.sigma * self.sigma)).exp()
        };
        (alpha, self.lambda0 * (self.q * s).exp())
    }

    /// Natural vortex wavelength at `v`, m; None at or below onset.
    #[inline]
    pub fn wavelength(&self, v: f64) -> Option<f64> {
        (v > self.v_c).then(|| self.lambda0 * (v / self.v_c).powf(self.q))
    }

    /// integral_{v_c}^{v} alpha(w) dw (closed form), for v > v_c.
    #[inline]
    fn alpha_integral(&self, v: f64) -> f64 {
        if self.amp == 0.0 {
            return self.a0 * (v - self.v_c);
        }
        self.alpha_and_integral(v).1
    }

    /// (alpha(v), integral_{v_c}^{v} alpha dw) sharing one logarithm, for v > v_c.
    #[inline]
    fn alpha_and_integral(&self, v: f64) -> (f64, f64) {
        let base = self.a0 * (v - self.v_c);
        if self.amp == 0.0 {
            return (self.a0, base);
        }
        let s = (v / self.v_c).ln();
        let z = self.z0 - self.q * s;
        let window = (-z * z / (2.0 * self.sigma * self.sigma)).exp();
        let alpha = self.a0 + self.amp * window;
        let b = (-z - self.sigma * self.sigma / self.q) / (self.sigma * std::f64::consts::SQRT_2);
        if let Some(c) = self.wide_c {
            return (alpha, base + self.amp * self.wide_integral(v, window, b, c));
        }
        (alpha, base + self.amp * self.j_pref * self.erf_c.diff_to(b))
    }

    /// The lock-in integral, integral_{v_c}^{v} exp(-z(w)^2 / (2 sigma^2)) dw, when
    /// exp(z0/q + sigma^2/(2 q^2)) overflows (sigma / q above about 38 at z0 = 0): the same
    /// closed form with erfc(x) = exp(-x^2) erfcx(x), where the exponentials combine to
    /// exp(s - z^2/(2 sigma^2)) = (v / v_c) window at v and exp(-z0^2/(2 sigma^2)) at v_c.
    /// Then b_c <= b <= 0 for every finite v (the window's centre lies beyond v_c e^709);
    /// where the window has underflowed (v infinite) its end term is 0.
    fn wide_integral(&self, v: f64, window: f64, b: f64, c: f64) -> f64 {
        let end = if window > 0.0 {
            v / self.v_c * window * erfcx(-b)
        } else {
            0.0
        };
        self.j_pref * (end - c)
    }

    /// Overlimiting (electroconvective) current density at `v`, A/m^2 (0 at or below onset).
    #[inline]
    #[allow(clippy::float_cmp)] // exact on purpose: n = 1 exactly selects the closed form; any other value takes the general one
    pub fn overlimiting(&self, v: f64) -> f64 {
        if v <= self.v_c {
            return 0.0;
        }
        let i1 = self.alpha_integral(v);
        if self.n == 1.0 {
            self.gain * i1
        } else {
            self.gain * i1 * (v - self.v_c).powf(self.n - 1.0)
        }
    }

    /// Current density and its derivative di/dv at layer voltage `v` (thermal units).
    #[inline]
    #[allow(clippy::float_cmp)] // exact on purpose: n = 1 exactly selects the closed form; any other value takes the general one
    pub fn current(&self, v: f64) -> (f64, f64) {
        let e = (-0.5 * v).exp();
        let mut i = self.i_het * (1.0 - e);
        let mut di = 0.5 * self.i_het * e;
        if v > self.v_c {
            let (alpha, i1) = self.alpha_and_integral(v);
            if self.n == 1.0 {
                i += self.gain * i1;
                di += self.gain * alpha;
            } else {
                let dv = v - self.v_c;
                let pw = dv.powf(self.n - 1.0);
                i += self.gain * i1 * pw;
                di += self.gain * (alpha * pw + i1 * (self.n - 1.0) * pw / dv);
            }
        }
        (i, di)
    }

    /// Layer voltage (thermal units) that carries current density `i` >= 0, and di/dv there.
    ///
    /// Closed form on the classic branch (v = -2 ln(1 - i / i_lim,het) while below onset);
    /// above onset a bracketed Newton solve on [v_c, v_hi], with v_hi from the lower bound
    /// i >= i_onset + i_lim (g/alpha_0) min(alpha) (v - v_c)^n. Infinite when the current
    /// cannot be carried (g = 0 and i >= i_lim,het).
    #[allow(clippy::float_cmp)] // exact on purpose: an exact zero amplitude and n = 1 select the closed form
    pub fn voltage(&self, i: f64, guess: f64) -> (f64, f64) {
        if i <= 0.0 {
            return (0.0, 0.5 * self.i_het);
        }
        if i <= self.i_onset {
            let r = 1.0 - i / self.i_het;
            return (-2.0 * r.ln(), 0.5 * self.i_het * r);
        }
        let a_min = self.a0.min(self.a0 + self.amp);
        let slope = self.gain * a_min;
        if slope <= 0.0 {
            // No overlimiting branch: only the classic branch carries current, below i_het.
            let r = 1.0 - i / self.i_het;
            return if r > 0.0 {
                (-2.0 * r.ln(), 0.5 * self.i_het * r)
            } else {
                (f64::INFINITY, 0.0)
            };
        }
        if self.amp == 0.0 && self.n == 1.0 {
            // Unpatterned, n = 1: i = i_het (1 - e^(-v/2)) + slope (v - v_c), v > v_c.
            // Newton from the estimate that freezes e^(-v/2) at the guess; the iteration map
            // is a contraction (e^(-v/2) <= e^(-v_c/2)), and each iterate is kept inside
            // [v_c, v_c + (i - i_onset)/slope], where the root lies.
            let hi = self.v_c + (i - self.i_onset) / slope;
            let vg = guess.clamp(self.v_c, hi);
            let mut v = (self.v_c + (i - self.i_het * (1.0 - (-0.5 * vg).exp())) / slope)
                .clamp(self.v_c, hi);
            let mut d = slope;
            for _ in 0..50 {
                let e = (-0.5 * v).exp();
                let f = self.i_het * (1.0 - e) + slope * (v - self.v_c) - i;
                d = 0.5 * self.i_het * e + slope;
                let next = (v - f / d).clamp(self.v_c, hi);
                let step = (next - v).abs();
                v = next;
                // Newton's next error is about step^2 f''/(2 f'), f'' = i_het e / 4.
                if step * step * (0.125 * self.i_het * e / d) <= 1e-13 * (1.0 + v) {
                    break;
                }
            }
            return (v, d);
        }
        let v_hi = self.v_c + ((i - self.i_onset) / slope).powf(1.0 / self.n) * 1.000_001 + 1e-9;
        let (v, _) = newton_bracketed(
            |v| {
                let (iv, d) = self.current(v);
                (iv - i, d)
            },
            self.v_c,
            v_hi,
            guess,
            1e-11 * (1.0 + v_hi),
            // The overlimiting branch alone: no kink inside [v_c, v_hi].
            |_, _| false,
        );
        let (_, d) = self.current(v);
        (v, d)
    }
}

/// Conditions at one diluate-side membrane interface (what a CFD case simulates).
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct InterfaceConditions {
    /// Dissolved salt.
    pub salt: Salt,
    /// Temperature, K.
    pub temperature_k: f64,
    /// Bulk concentration, mol/m^3.
    pub concentration_mol_m3: f64,
    /// Mean channel velocity, m/s.
    pub velocity_m_s: f64,
    /// Channel gap, m.
    pub gap_m: f64,
    /// Distance from the channel inlet, m (sets the local delta).
    pub position_m: f64,
    /// Stripe pitch, m.
    pub pitch_m: f64,
    /// Conducting share of the pitch (1 = unpatterned), -.
    pub open_fraction: f64,
    /// Counter-ion transport number in the membrane, -.
    pub membrane_transport_number: f64,
    /// Channel filling.
    pub spacer: Spacer,
    /// Which membrane (sets the solution transport number of the counter-ion).
    pub membrane: MembraneKind,
}

/// State of one interface at a given layer voltage.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct InterfaceState {
    /// Current density, A/m^2.
    pub current_density_a_m2: f64,
    /// Peers limit of the homogeneous membrane at the local delta, A/m^2.
    pub limiting_current_density_a_m2: f64,
    /// Funnelling-reduced limit i_lim Phi, A/m^2.
    pub heterogeneous_limit_a_m2: f64,
    /// Active-area fraction alpha (its onset value below onset), -.
    pub active_area_fraction: f64,
    /// Natural vortex wavelength, m; None at or below onset.
    pub vortex_wavelength_m: Option<f64>,
    /// Local diffusion-layer thickness delta, m.
    pub boundary_layer_thickness_m: f64,
    /// Overlimiting (electroconvective) part of the current density, A/m^2.
    pub overlimiting_current_density_a_m2: f64,
    /// Share of the current carried by water-splitting products, -.
    pub water_splitting_share: f64,
}

impl InterfaceConditions {
    /// The layer law at these conditions (delta from the local Sherwood number).
    pub fn layer(&self, k: &RomConstants) -> Layer {
        let p = properties(self.salt, self.temperature_k, self.concentration_mol_m3);
        let flow = channel_flow(
            self.spacer,
            self.gap_m,
            self.position_m,
            self.velocity_m_s,
            p.density_kg_m3,
            p.dynamic_viscosity_pa_s,
            p.salt_diffusivity_m2_s,
        );
        let sh = SherwoodModel::new(self.spacer, &flow);
        let delta = sh.delta(self.position_m);
        let t = match self.membrane {
            MembraneKind::Cem => p.cation_transport_number,
            MembraneKind::Aem => 1.0 - p.cation_transport_number,
        };
        let i_lim = peers_limit(
            p.salt_diffusivity_m2_s,
            self.concentration_mol_m3,
            self.membrane_transport_number,
            t,
            delta,
        );
        Layer::new(i_lim, delta, self.pitch_m, self.open_fraction, k)
    }
}

/// Solve one interface at diffusion-layer voltage `layer_voltage_thermal` (in units of RT/F).
pub fn solve(
    c: &InterfaceConditions,
    layer_voltage_thermal: f64,
    k: &RomConstants,
) -> InterfaceState {
    let layer = c.layer(k);
    let v = layer_voltage_thermal;
    let (i, _) = layer.current(v);
    let onset = match c.membrane {
        MembraneKind::Cem => k.water_splitting_onset,
        MembraneKind::Aem => k.water_splitting_onset_aem,
    };
    InterfaceState {
        current_density_a_m2: i,
        limiting_current_density_a_m2: layer.i_lim,
        heterogeneous_limit_a_m2: layer.i_het,
        active_area_fraction: layer.alpha(v),
        vortex_wavelength_m: layer.wavelength(v),
        boundary_layer_thickness_m: layer.delta_m,
        overlimiting_current_density_a_m2: layer.overlimiting(v),
        water_splitting_share: water_splitting_share(v, onset, k.water_splitting_scale),
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::numerics::gauss_legendre;

    fn patterned(k: &RomConstants, pitch: f64, f: f64) -> Layer {
        Layer::new(100.0, 1e-4, pitch, f, k)
    }

    #[test]
    fn funnelling_meets_both_exact_asymptotes_and_is_continuous_at_its_branches() {
        use std::f64::consts::PI;
        for f in [0.02, 0.1, 0.3, 0.5, 0.7, 0.9, 0.98] {
            let law = Funnel::new(f);
            let l = (1.0 / (0.5 * PI * f).sin()).ln();
            // Deep film (strip constriction in series; exact up to exp(-2 pi / r) terms).
            for r in [0.06, 0.2, 0.5] {
                let want = 1.0 / (1.0 + r * l / PI);
                assert!((law.phi(r) / want - 1.0).abs() < 1e-6, "f={f} r={r}");
            }
            // Wide strips and gaps: f + (4 ln 2 / pi) / r.
            let r = 60.0 / f.min(1.0 - f);
            assert!(
                (law.phi(r) / (f + EDGE_CONSTANT / r) - 1.0).abs() < 1e-9,
                "f={f} r={r}"
            );
            // Branch points: continuous to round-off, and Phi falls with r throughout.
            let hi = 150.0 / f.min(1.0 - f);
            for r0 in [0.05, 2.0, hi] {
                let (a, b) = (law.phi(r0 * (1.0 - 1e-12)), law.phi(r0 * (1.0 + 1e-12)));
                assert!((a - b).abs() < 1e-9 * a, "f={f} r={r0}: {a} {b}");
            }
            let mut last = 1.0;
            for j in 0..=400 {
                let r = 1e-3 * 10f64.powf(j as f64 * 7.0 / 400.0);
                let p = law.phi(r);
                assert!(p < last && p > f, "f={f} r={r}: {p} after {last}");
                last = p;
            }
        }
    }

    #[test]
    fn closed_form_integral_matches_quadrature() {
        let k = RomConstants::default();
        for (pitch, f) in [(1e-4, 0.5), (3e-4, 0.3), (2e-5, 0.8), (5e-3, 0.5)] {
            let l = patterned(&k, pitch, f);
            for v in [21.0, 30.0, 60.0, 150.0] {
                // 40 panels of 12-point Gauss-Legendre: reference to ~1e-12.
                let n = 40;
                let h = (v - l.v_c) / n as f64;
                let mut q = 0.0;
                for j in 0..n {
                    let a = l.v_c + j as f64 * h;
                    q += gauss_legendre(a, a + h, |w| l.alpha(w));
                }
                let c = l.alpha_integral(v);
                assert!((c - q).abs() < 1e-9 * q.abs().max(1.0), "{c} vs {q}");
            }
        }
    }

    #[test]
    fn derivative_matches_finite_difference() {
        let mut k = RomConstants::default();
        for n in [1.0, 1.7] {
            k.overlimiting_exponent = n;
            let l = patterned(&k, 1.5e-4, 0.5);
            for v in [5.0, 25.0, 45.0, 90.0] {
                let h = 1e-5;
                let fd = (l.current(v + h).0 - l.current(v - h).0) / (2.0 * h);
                let (_, d) = l.current(v);
                assert!(
                    (fd - d).abs() < 1e-5 * d.abs().max(1.0),
                    "n={n} v={v}: {fd} vs {d}"
                );
            }
        }
    }

    #[test]
    fn voltage_inverts_current() {
        let k = RomConstants::default();
        let l = patterned(&k, 1.2e-4, 0.5);
        for v in [0.5, 3.0, 19.0, 20.5, 35.0, 80.0, 300.0] {
            let (i, _) = l.current(v);
            let (w, _) = l.voltage(i, 30.0);
            assert!((w - v).abs() < 1e-8 * v.max(1.0), "{v} -> {i} -> {w}");
        }
    }
}
