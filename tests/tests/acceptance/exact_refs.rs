//! The model's relations held to exact solutions computed here: the funnelling factor of a
//! striped surface (finite volumes with Richardson extrapolation, and the closed form evaluated
//! by an independent algorithm), checked values from docs/references.md.

use model::constants::RomConstants;
use model::interface::{funnelling, Funnel, EDGE_CONSTANT};
use std::f64::consts::PI;

/// Arithmetic-geometric mean.
fn agm(mut a: f64, mut b: f64) -> f64 {
    // Quadratic convergence: 40 steps reach round-off from any ratio down to 1e-300.
    for _ in 0..40 {
        (a, b) = (0.5 * (a + b), (a * b).sqrt());
    }
    a
}

/// sn, cn, dn by the descending arithmetic-geometric mean (Abramowitz and Stegun 16.4),
/// modulus k with complement kc.
fn jacobi(u: f64, k: f64, kc: f64) -> (f64, f64, f64) {
    let (mut a, mut b) = (1.0f64, kc);
    let mut cs = vec![k];
    let mut as_ = vec![1.0];
    // At least one step, so that dn comes out of the recursion even for a tiny modulus.
    while cs.len() == 1 || (cs.last().unwrap().abs() > 1e-17 && cs.len() < 60) {
        let c = 0.5 * (a - b);
        (a, b) = (0.5 * (a + b), (a * b).sqrt());
        cs.push(c);
        as_.push(a);
    }
    let n = cs.len() - 1;
    let mut phi = 2f64.powi(n as i32) * as_[n] * u;
    let mut prev = phi;
    for j in (1..=n).rev() {
        prev = phi;
        phi = 0.5 * (phi + (cs[j] / as_[j] * phi.sin()).asin());
    }
    (phi.sin(), phi.cos(), phi.cos() / (prev - phi).cos())
}

/// The funnelling factor from its closed form (docs/physics.md#funnelling), computed
/// independently of the model's theta-series route: the modulus k from K'(k)/K(k) = 2/r by
/// bisection on arithmetic-geometric means, sn and dn of f K by the descending AGM,
/// Phi = (2 / r) K(kappa) / K'(kappa) with kappa = k sn(fK), kappa' = dn(fK). Well
/// conditioned while dn(fK) is above about 1e-9 (r up to about 30 here).
fn phi_closed_form(f: f64, r: f64) -> f64 {
    // K'/K = agm(1, k') / agm(1, k) ... as K = pi / (2 agm(1, k')).
    let target = 2.0 / r;
    let ratio = |k: f64, kc: f64| agm(1.0, kc) / agm(1.0, k);
    // Parameterise by t = ln(k / k'); the ratio K'/K falls as t grows.
    let (mut lo, mut hi) = (-200.0f64, 200.0f64);
    for _ in 0..200 {
        let t = 0.5 * (lo + hi);
        let (k, kc) = (
            1.0 / (1.0 + (-2.0 * t).exp()).sqrt(),
            1.0 / (1.0 + (2.0 * t).exp()).sqrt(),
        );
        if ratio(k, kc) > target {
            lo = t;
        } else {
            hi = t;
        }
    }
    let t = 0.5 * (lo + hi);
    let (k, kc) = (
        1.0 / (1.0 + (-2.0 * t).exp()).sqrt(),
        1.0 / (1.0 + (2.0 * t).exp()).sqrt(),
    );
    let big_k = PI / (2.0 * agm(1.0, kc));
    let (sn, _, dn) = jacobi(f * big_k, k, kc);
    let (kappa, kappa_c) = (k * sn, dn);
    2.0 / r * agm(1.0, kappa) / agm(1.0, kappa_c)
}

/// Finite-volume funnelling factor of the symmetric half cell [0, r/2] x [0, 1] (lengths in
/// delta), cell-centred, `n` cells per delta in both directions, electrode [0, f r/2] at
/// y = 0 ending on a cell face. The bottom-face fluxes g of the electrode cells are the
/// unknowns: the discrete Neumann-to-Dirichlet map of the rest of the grid is built from its
/// cosine modes in x (exact for the 5-point scheme: a three-term recurrence in y per mode), and
/// (G + h/2 I) g = 1 is solved by Cholesky. Phi = total flux / (r / 2).
fn fv_phi(f: f64, r: f64, n: usize) -> f64 {
    let w = 0.5 * r;
    let ny = n;
    let hy = 1.0 / ny as f64;
    let nx = (w * n as f64).round() as usize;
    let hx = w / nx as f64;
    let ne = (f * nx as f64).round() as usize;
    assert!(
        (ne as f64 - f * nx as f64).abs() < 1e-9 && (nx as f64 - w * n as f64).abs() < 1e-9,
        "grid does not fit the cell"
    );
    // t[k] = sum_m a_m cos(theta_m k): G_ij = (t[i+j+1] + t[|i-j|]) / 2.
    let mut t = vec![0.0; 2 * nx + 2];
    for m in 0..nx {
        let th = PI * m as f64 / nx as f64;
        let a = (2.0 * hy / hx * (0.5 * th).sin()).powi(2);
        // Row recurrence from the top (Dirichlet face: ghost = -last row): c_j = s c_(j-1).
        let mut s = 1.0 / (3.0 + a);
        for _ in 1..ny - 1 {
            s = 1.0 / (2.0 + a - s);
        }
        // Bottom row with flux g out of its bottom face: c_0 = -g hy / (1 + a - s).
        let gamma = hy / (1.0 + a - s);
        let weight = if m == 0 { 1.0 } else { 2.0 } / nx as f64;
        for (k, tk) in t.iter_mut().enumerate() {
            *tk += gamma * weight * (th * k as f64).cos();
        }
    }
    let mut g = vec![0.0; ne * ne];
    for i in 0..ne {
        for j in 0..ne {
            g[i * ne + j] = 0.5 * (t[i + j + 1] + t[i.abs_diff(j)]);
        }
        // The wall at c = 0 half a cell below the centre.
        g[i * ne + i] += 0.5 * hy;
    }
    for j in 0..ne {
        let mut d = g[j * ne + j];
        for k in 0..j {
            d -= g[j * ne + k] * g[j * ne + k];
        }
        let d = d.sqrt();
        g[j * ne + j] = d;
        for i in j + 1..ne {
            let mut v = g[i * ne + j];
            for k in 0..j {
                v -= g[i * ne + k] * g[j * ne + k];
            }
            g[i * ne + j] = v / d;
        }
    }
    let mut y = vec![1.0; ne];
    for i in 0..ne {
        for k in 0..i {
            y[i] -= g[i * ne + k] * y[k];
        }
        y[i] /= g[i * ne + i];
    }
    for i in (0..ne).rev() {
        for k in i + 1..ne {
            y[i] -= g[k * ne + i] * y[k];
        }
        y[i] /= g[i * ne + i];
    }
    y.iter().sum::<f64>() * hx / w
}

/// Richardson extrapolation of the finite-volume factor from grids n, 2n, 4n, 8n: the value
/// from the last three, and the discretisation error stated as the change from the
/// extrapolation of the first three (at least the spread of the observed orders' effect).
fn fv_extrapolated(f: f64, r: f64, n: usize) -> (f64, f64, f64) {
    let p: Vec<f64> = [n, 2 * n, 4 * n, 8 * n]
        .iter()
        .map(|&m| fv_phi(f, r, m))
        .collect();
    let extrap = |a: f64, b: f64, c: f64| {
        let order = ((a - b) / (b - c)).log2();
        (c + (c - b) / (2f64.powf(order) - 1.0), order)
    };
    let (e1, _) = extrap(p[0], p[1], p[2]);
    let (e2, order) = extrap(p[1], p[2], p[3]);
    (e2, (e2 - e1).abs(), order)
}

#[test]
fn funnelling_matches_finite_volumes() {
    // Cells chosen so that the electrode edge falls on a cell face at every grid.
    // Source: exact solution of the 2-D Nernst-film problem, computed here; the first four
    // are also the checked values of docs/references.md#interface-law.
    let cases = [
        (0.5, 0.1, Some(0.9891), 400),
        (0.5, 1.0, Some(0.9006), 20),
        (0.2, 3.0, Some(0.4766), 10),
        (0.2, 10.0, Some(0.2882), 10),
        (0.2, 1.0, None, 20),
        (0.8, 0.5, None, 40),
        (0.5, 4.0, None, 10),
        (0.1, 2.0, None, 20),
    ];
    for (f, r, checked, n) in cases {
        let (fv, err, order) = fv_extrapolated(f, r, n);
        let model = Funnel::new(f).phi(r);
        println!("f={f} p/delta={r}: finite volumes {fv:.7} +- {err:.1e} (order {order:.2}), law {model:.7}");
        // First order at the singular edge of the mixed boundary (square-root singularity).
        assert!((0.8..1.3).contains(&order), "f={f} r={r}: order {order}");
        assert!(
            (model - fv).abs() <= 3.0 * err + 2e-6,
            "f={f} r={r}: model {model} vs finite volumes {fv} +- {err}"
        );
        if let Some(c) = checked {
            assert!((model - c).abs() < 6e-5, "f={f} r={r}: {model} vs {c}");
        }
    }
}

#[test]
fn funnelling_matches_its_closed_form_on_a_grid() {
    // 9 x 8 = 72 points over f in [0.1, 0.9], p/delta in [0.03, 100]. Reference: the closed
    // form by an independent algorithm (AGM, descending Landen for sn and dn; Abramowitz and
    // Stegun 16.4, 17.6) up to p/delta = 30; at 100 the wide-strip asymptote
    // f + (4 ln 2 / pi) delta / p, exact there to exp(-pi min(f, 1 - f) p / (2 delta)) < 2e-7.
    let k = RomConstants::default();
    let mut worst: f64 = 0.0;
    let mut n = 0;
    for i in 1..=9 {
        let f = i as f64 / 10.0;
        for r in [0.03, 0.1, 0.3, 1.0, 3.0, 10.0, 30.0, 100.0] {
            let want = if r < 50.0 {
                phi_closed_form(f, r)
            } else {
                f + EDGE_CONSTANT / r
            };
            let have = funnelling(r * 1e-4, 1e-4, f, &k);
            worst = worst.max((have / want - 1.0).abs());
            n += 1;
        }
    }
    assert!(n >= 40);
    println!("funnelling vs closed form on {n} points: worst relative {worst:.1e}");
    // The issue asked for 5 %; the law is the exact solution, so hold it to 1e-6.
    assert!(worst < 1e-6, "worst relative deviation {worst:e}");
}

#[test]
fn funnelling_follows_both_published_asymptotes_for_every_open_fraction() {
    // Small pitch: 1 - Phi ~ (p / (pi delta)) ln(1 / sin(pi f / 2)) (strip constriction;
    // Rubinstein, Staude and Kedem, Desalination 69 (1988) 101); large pitch: Phi -> f.
    let k = RomConstants::default();
    for i in 1..20 {
        let f = i as f64 / 20.0;
        let r = 1e-3;
        let deficit = 1.0 - funnelling(r * 1e-4, 1e-4, f, &k);
        let want = r / PI * (1.0 / (0.5 * PI * f).sin()).ln();
        assert!(
            (deficit / want - 1.0).abs() < 2e-3,
            "f={f}: {deficit} vs {want}"
        );
        assert!(
            (funnelling(1e4 * 1e-4, 1e-4, f, &k) - f).abs() < 1e-4,
            "f={f}"
        );
        assert!((funnelling(1e-4, 1e-4, 1.0, &k) - 1.0).abs() < 1e-15);
    }
}

/// One Graetz mode: eigenvalue lambda_n and its weight a_n in the mixed-mean concentration,
/// theta_m = sum a_n exp(-lambda_n^2 xi).
struct Mode {
    lambda: f64,
    weight: f64,
}

/// Shoot phi'' = -lambda^2 (1 - eta^2) phi, phi(0) = 1, phi'(0) = 0 (the channel's centre
/// plane) to the wall eta = 1 by classical Runge-Kutta, 30 lambda steps or more; returns
/// (phi(1), phi'(1), integral of (1 - eta^2) phi^2 by Simpson with Hermite midpoints).
fn graetz_shoot(lambda: f64) -> (f64, f64, f64) {
    let n = (30.0 * lambda).max(2000.0) as usize;
    let h = 1.0 / n as f64;
    let l2 = lambda * lambda;
    let w = |e: f64| 1.0 - e * e;
    let rhs = |e: f64, p: f64, q: f64| (q, -l2 * w(e) * p);
    let (mut p, mut q, mut norm) = (1.0f64, 0.0f64, 0.0f64);
    for i in 0..n {
        let e = i as f64 * h;
        let (k1p, k1q) = rhs(e, p, q);
        let (k2p, k2q) = rhs(e + 0.5 * h, p + 0.5 * h * k1p, q + 0.5 * h * k1q);
        let (k3p, k3q) = rhs(e + 0.5 * h, p + 0.5 * h * k2p, q + 0.5 * h * k2q);
        let (k4p, k4q) = rhs(e + h, p + h * k3p, q + h * k3q);
        let p1 = p + h / 6.0 * (k1p + 2.0 * k2p + 2.0 * k3p + k4p);
        let q1 = q + h / 6.0 * (k1q + 2.0 * k2q + 2.0 * k3q + k4q);
        let mid = 0.5 * (p + p1) + h / 8.0 * (q - q1);
        norm += h / 6.0 * (w(e) * p * p + 4.0 * w(e + 0.5 * h) * mid * mid + w(e + h) * p1 * p1);
        (p, q) = (p1, q1);
    }
    (p, q, norm)
}

/// The first `count` modes of the Graetz problem for parallel plates with a parabolic
/// profile and both walls at constant concentration. Each eigenvalue is bracketed around
/// its asymptote 4n + 5/3 and bisected; a_n = (3/2) g_n^2 / N_n with
/// g_n = integral (1 - eta^2) phi_n = -phi_n'(1) / lambda_n^2 and N_n the weighted norm.
fn graetz_modes(count: usize) -> Vec<Mode> {
    (0..count)
        .map(|n| {
            let guess = 4.0 * n as f64 + 5.0 / 3.0;
            let (mut lo, mut hi) = (guess - 1.0, guess + 1.0);
            let mut f_lo = graetz_shoot(lo).0;
            assert!(f_lo * graetz_shoot(hi).0 < 0.0, "mode {n} not bracketed");
            for _ in 0..40 {
                let mid = 0.5 * (lo + hi);
                let f_mid = graetz_shoot(mid).0;
                if f_mid * f_lo > 0.0 {
                    (lo, f_lo) = (mid, f_mid);
                } else {
                    hi = mid;
                }
            }
            let lambda = 0.5 * (lo + hi);
            let (_, dphi, norm) = graetz_shoot(lambda);
            let g = -dphi / (lambda * lambda);
            Mode {
                lambda,
                weight: 1.5 * g * g / norm,
            }
        })
        .collect()
}

/// Exact (mean, local) Sherwood numbers on d_h at x* = x / (d_h Re Sc): with
/// xi = (32/3) x*, Sh_mean = -ln(theta_m) / (4 x*), Sh_local = -(d ln theta_m / d x*) / 4.
fn graetz_sherwood(modes: &[Mode], x_star: f64) -> (f64, f64) {
    let xi = 32.0 / 3.0 * x_star;
    let (mut th, mut dth) = (0.0, 0.0);
    for m in modes {
        let e = m.weight * (-m.lambda * m.lambda * xi).exp();
        th += e;
        dth += e * m.lambda * m.lambda;
    }
    (-th.ln() / (4.0 * x_star), 32.0 / 3.0 * dth / th / 4.0)
}

/// The model's Sherwood law of an open slit set up so that x* = x / (d_h Re Sc) = x in metres
/// over `gz` metres.
fn model_sherwood(gz: f64) -> model::transfer::SherwoodModel {
    model::transfer::SherwoodModel {
        hydraulic_diameter_m: 1e-3,
        leveque_a: model::transfer::leveque_local_coefficient() * gz.cbrt(),
        fully_developed: model::transfer::SH_FD_BOTH_WALLS_CONSTANT_C,
        multiplier: 1.0,
    }
}

#[test]
fn graetz_exact_solution_reproduces_the_checked_values() {
    // Source: docs/references.md (exact references, computed by Chebyshev collocation with 240
    // modes): lowest eigenvalue giving Sh_inf = 7.5407, and the mean Sherwood numbers below;
    // Shah and London (1978), Nu_m,T = 7.541 + 0.0235 / x* for x* > 0.006, within 1 %.
    let modes = graetz_modes(130);
    assert!((8.0 / 3.0 * modes[0].lambda.powi(2) - 7.5407).abs() < 1e-4);
    // The weights sum to 1 (theta_m = 1 at the inlet) up to the modes left out.
    let total: f64 = modes.iter().map(|m| m.weight).sum();
    assert!((total - 1.0).abs() < 2e-4, "{total}");
    let table = [
        (3e-4, 27.657),
        (1e-3, 18.752),
        (3e-3, 13.409),
        (1e-2, 9.825),
        (3e-2, 8.323),
        (0.1, 7.776),
        (0.3, 7.619),
        (1.0, 7.564),
    ];
    for (x, want) in table {
        let (mean, _) = graetz_sherwood(&modes, x);
        assert!((mean - want).abs() < 1.5e-3, "x*={x}: {mean} vs {want}");
        if x > 0.006 {
            let sl = 7.541 + 0.0235 / x;
            assert!(
                (mean / sl - 1.0).abs() < 0.01,
                "x*={x}: {mean} vs Shah-London {sl}"
            );
        }
    }
    // Small x*: the Leveque limit, local 1.2326 x*^(-1/3) and mean 1.5 times that, to the
    // size of its first correction (about 0.4 / 57 at x* = 1e-5).
    let (mean, local) = graetz_sherwood(&modes, 1e-5);
    let lev = model::transfer::leveque_local_coefficient() * 1e5f64.cbrt();
    assert!((local / lev - 1.0).abs() < 0.01 && (mean / (1.5 * lev) - 1.0).abs() < 0.01);
}

#[test]
fn sherwood_law_within_two_percent_of_graetz() {
    // Local and mean Sherwood numbers of the model's open-slit law against the exact Graetz
    // solution (eigenfunction series, 130 modes: the last weighs below 1e-30 at x* = 1e-5)
    // on 37 points, x* = 1e-5 to 10 at 6 per decade, offset from the grid its blend constant
    // was fitted on.
    let modes = graetz_modes(130);
    let gz = 1.0;
    let sh = model_sherwood(gz);
    let (mut worst_local, mut worst_mean): (f64, f64) = (0.0, 0.0);
    for j in 0..37 {
        let x = 10f64.powf(-5.0 + j as f64 / 6.0 + 0.01);
        let x = x.min(10.0);
        let (mean, local) = graetz_sherwood(&modes, x);
        worst_local = worst_local.max((sh.local(x * gz) / local - 1.0).abs());
        worst_mean = worst_mean.max((sh.mean(x * gz) / mean - 1.0).abs());
    }
    println!("Sherwood law vs Graetz: worst local {worst_local:.4}, worst mean {worst_mean:.4}");
    assert!(worst_local < 0.02, "local {worst_local}");
    assert!(worst_mean < 0.02, "mean {worst_mean}");
}

#[test]
fn solution_constriction_matches_a_conduction_solution_and_saturates() {
    use model::cell::constriction_length;
    // The constriction resistance of a solution layer of thickness H over a striped face:
    // finite volumes of the 2-D conduction problem (potential fixed on the stripes and at H,
    // no current through the inert share; the same discrete solver as the funnelling
    // reference), R kappa = H (1 / Phi_fv - 1).
    let h = 5e-4;
    for (f, r, n) in [(0.5, 1.0, 20), (0.2, 3.0, 10), (0.5, 4.0, 10)] {
        let (fv, err, _) = fv_extrapolated(f, r, n);
        let want = h * (1.0 / fv - 1.0);
        let have = constriction_length(r * h, f, h);
        let tol = h * 3.0 * err / (fv * fv) + 1e-12;
        assert!(
            (have - want).abs() <= tol,
            "f={f} p/H={r}: {have} vs {want} +- {tol}"
        );
    }
    // Limits: the classic strip constriction (p / pi) ln(1 / sin(pi f / 2)) for p << H, and
    // saturation at H (1/f - 1) for p >> H (it no longer grows with the pitch).
    for f in [0.2, 0.5, 0.8] {
        let p = 1e-3 * h;
        let classic = p / PI * (1.0 / (0.5 * PI * f).sin()).ln();
        assert!((constriction_length(p, f, h) / classic - 1.0).abs() < 1e-6);
        let wide = constriction_length(1e4 * h, f, h);
        assert!((wide / (h * (1.0 / f - 1.0)) - 1.0).abs() < 1e-3, "f={f}");
        assert!(constriction_length(1e5 * h, f, h) < h * (1.0 / f - 1.0));
    }
}
