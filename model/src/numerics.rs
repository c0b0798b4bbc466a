//! Small numerical kernels of the hot path: bracketed root finders and Gauss-Legendre
//! quadrature. Written here (not taken from a crate) because they run millions of times per
//! study without allocation and need the derivative the model already has in closed form.

/// Nodes of the 12-point Gauss-Legendre rule on [-1, 1] (Abramowitz and Stegun, table 25.4).
pub const GL12_NODES: [f64; 12] = [
    0.981_560_634_246_719_2,
    0.904_117_256_370_474_8,
    0.769_902_674_194_304_7,
    0.587_317_954_286_617_5,
    0.367_831_498_998_180_2,
    0.125_233_408_511_468_94,
    -0.125_233_408_511_468_9,
    -0.367_831_498_998_180_2,
    -0.587_317_954_286_617_5,
    -0.769_902_674_194_304_7,
    -0.904_117_256_370_474_8,
    -0.981_560_634_246_719_2,
];

/// Weights of the 12-point Gauss-Legendre rule on [-1, 1].
pub const GL12_WEIGHTS: [f64; 12] = [
    0.047_175_336_386_511_835,
    0.106_939_325_995_318_18,
    0.160_078_328_543_346_33,
    0.203_167_426_723_065_84,
    0.233_492_536_538_354_78,
    0.249_147_045_813_402_88,
    0.249_147_045_813_402_88,
    0.233_492_536_538_354_78,
    0.203_167_426_723_065_84,
    0.160_078_328_543_346_33,
    0.106_939_325_995_318_18,
    0.047_175_336_386_511_835,
];

/// Integral of `f` over [a, b] by 12-point Gauss-Legendre (exact for polynomials of degree 23).
pub fn gauss_legendre(a: f64, b: f64, mut f: impl FnMut(f64) -> f64) -> f64 {
    let mid = 0.5 * (a + b);
    let half = 0.5 * (b - a);
    let mut sum = 0.0;
    for k in 0..12 {
        sum += GL12_WEIGHTS[k] * f(mid + half * GL12_NODES[k]);
    }
    sum * half
}

/// Cube root of a positive finite `x`, to within a few units in the last place: a first guess
/// from the exponent bits (the exponent divided by three), then three Halley steps
/// y <- y (y^3 + 2x) / (2y^3 + x), each of which cubes the relative error. About three times
/// cheaper than the correctly rounded library cube root on the hot path.
#[inline]
pub fn cbrt_pos(x: f64) -> f64 {
    let mut y = f64::from_bits(x.to_bits() / 3 + 0x2A9F_7893_782D_A1CE);
    for _ in 0..3 {
        let y3 = y * y * y;
        y *= (y3 + 2.0 * x) / (2.0 * y3 + x);
    }
    y
}

// The error function from the platform's C math library (C99 `erf`/`erfc`: glibc, musl, the
// macOS and Windows C runtimes), the library the standard library already calls for `exp` and
// `ln`. On the demo evaluation it is 10 % faster than the `libm` crate's port (the
// overlimiting law calls erfc on every Newton step), for the same accuracy (a test below
// compares the two).
extern "C" {
    #[link_name = "erf"]
    fn c_erf(x: f64) -> f64;
    #[link_name = "erfc"]
    fn c_erfc(x: f64) -> f64;
}

/// The error function erf(x).
#[inline]
pub fn erf(x: f64) -> f64 {
    // SAFETY: a pure C99 math function of one double: no pointers, no state beyond errno.
    unsafe { c_erf(x) }
}

/// The complementary error function erfc(x) = 1 - erf(x), accurate in the tail.
#[inline]
pub fn erfc(x: f64) -> f64 {
    // SAFETY: as for `erf`.
    unsafe { c_erfc(x) }
}

/// Root of an increasing function on a bracket by Newton steps kept inside the bracket.
///
/// `f` returns (value, derivative). Requires f(lo) <= 0 <= f(hi) (not checked: the caller
/// builds the bracket from the physics). Each Newton step that leaves the current bracket, or
/// does not halve the residual, is replaced by bisection, so convergence is guaranteed and
/// at least linear; near the root it is quadratic. Stops when the step is below `x_tol`, or
/// when the error left after the last Newton step, (f'' / 2 f') step^2 with f'' measured from
/// the derivatives at the last two Newton iterates (or from the residual the last step left,
/// whichever is larger), is below `x_tol / 4`, unless
/// `kinked(x, next)` says that the step from x to next crosses a kink of `f` (a jump of the
/// derivative: the curvature measured on one side says nothing of the other). Returns the
/// root and the number of function calls.
#[allow(clippy::float_cmp)] // exact on purpose: a repeated abscissa, bit for bit, would divide by zero
pub fn newton_bracketed(
    mut f: impl FnMut(f64) -> (f64, f64),
    mut lo: f64,
    mut hi: f64,
    x0: f64,
    x_tol: f64,
    kinked: impl Fn(f64, f64) -> bool,
) -> (f64, u32) {
    let mut x = if x0 > lo && x0 < hi {
        x0
    } else {
        0.5 * (lo + hi)
    };
    let mut calls = 0;
    let mut last_abs = f64::INFINITY;
    // Last Newton iterate and its derivative (for the measured curvature).
    let mut prev: Option<(f64, f64)> = None;
    for _ in 0..200 {
        let (fx, dfx) = f(x);
        calls += 1;
        if fx == 0.0 {
            return (x, calls);
        }
        if fx < 0.0 {
            lo = x;
        } else {
            hi = x;
        }
        let newton = x - fx / dfx;
        let inside = dfx > 0.0 && newton > lo && newton < hi;
        let good = inside && (fx.abs() < 0.5 * last_abs || last_abs.is_infinite());
        let next = if good { newton } else { 0.5 * (lo + hi) };
        last_abs = fx.abs();
        let step = (next - x).abs();
        if step <= x_tol || hi - lo <= x_tol {
            return (next, calls);
        }
        if good {
            if let Some((xp, dfp)) = prev.filter(|p| p.0 != x) {
                // Two measures of f'' / 2f': the change of the derivative over the last step,
                // and the residual that step left (a Newton step leaves about
                // (f'' / 2) step^2). The larger one counts: where f'' varies, the derivatives at
                // two points can agree by chance while the residual shows the curvature.
                let dx = x - xp;
                let k = (((dfx - dfp) / dx).abs() / (2.0 * dfx)).max(fx.abs() / (dfx * dx * dx));
                if k * step * step <= 0.25 * x_tol && !kinked(x, next) {
                    return (next, calls);
                }
            }
            prev = Some((x, dfx));
        } else {
            prev = None;
        }
        x = next;
    }
    (x, calls)
}

/// Brent's method (Brent, Algorithms for Minimization without Derivatives, 1973, ch. 4) for a
/// root of `f` in [a, b] where f(a) and f(b) differ in sign (given as `fa`, `fb`).
/// Inverse quadratic interpolation with bisection safeguards; stops when the bracket is below
/// `tol` (absolute). Returns the root, or None when the values do not bracket a root or `f`
/// fails (returns Err), in which case the error is passed on.
#[allow(clippy::float_cmp)] // exact on purpose: a degenerate bracket (the same point twice) switches to bisection
pub fn brent<E>(
    mut f: impl FnMut(f64) -> Result<f64, E>,
    mut a: f64,
    mut b: f64,
    mut fa: f64,
    mut fb: f64,
    tol: f64,
    max_iter: u32,
) -> Result<Option<f64>, E> {
    if fa == 0.0 {
        return Ok(Some(a));
    }
    if fb == 0.0 {
        return Ok(Some(b));
    }
    if fa.signum() == fb.signum() {
        return Ok(None);
    }
    let (mut c, mut fc) = (a, fa);
    let mut d = b - a;
    let mut e = d;
    for _ in 0..max_iter {
        if fb.signum() == fc.signum() {
            c = a;
            fc = fa;
            d = b - a;
            e = d;
        }
        if fc.abs() < fb.abs() {
            a = b;
            b = c;
            c = a;
            fa = fb;
            fb = fc;
            fc = fa;
        }
        let tol1 = 2.0 * f64::EPSILON * b.abs() + 0.5 * tol;
        let xm = 0.5 * (c - b);
        if xm.abs() <= tol1 || fb == 0.0 {
            return Ok(Some(b));
        }
        if e.abs() >= tol1 && fa.abs() > fb.abs() {
            let s = fb / fa;
            let (mut p, mut q);
            if a == c {
                p = 2.0 * xm * s;
                q = 1.0 - s;
            } else {
                let qq = fa / fc;
                let r = fb / fc;
                p = s * (2.0 * xm * qq * (qq - r) - (b - a) * (r - 1.0));
                q = (qq - 1.0) * (r - 1.0) * (s - 1.0);
            }
            if p > 0.0 {
                q = -q;
            }
            p = p.abs();
            let min1 = 3.0 * xm * q - (tol1 * q).abs();
            let min2 = (e * q).abs();
            if 2.0 * p < min1.min(min2) {
                e = d;
                d = p / q;
            } else {
                d = xm;
                e = d;
            }
        } else {
            d = xm;
            e = d;
        }
        a = b;
        fa = fb;
        b += if d.abs() > tol1 { d } else { tol1.copysign(xm) };
        fb = f(b)?;
    }
    Ok(Some(b))
}

/// Root of a monotone function whose evaluations are costly (a whole channel integration):
/// secant steps from the last two of the evaluated points `pts` (x, f(x)), as long as each step
/// stays inside `domain` and halves |f| (at most eight), then Brent ([`brent`]) on the
/// tightest bracket among all evaluated points (the negative value closest to zero and the
/// positive one closest to zero). `below` and `above` supply an evaluated point with f < 0 and
/// f > 0 when none is among them yet (for example an end of the domain, or a doubling search).
/// `f` may end the search early with an error, e.g. once its residual is small enough. Returns
/// the root (x within `tol`); None when Brent finds no sign change.
// The supplier closures take the function itself, so their type spells it out.
#[allow(clippy::type_complexity)]
#[allow(clippy::float_cmp)] // exact on purpose: a step that lands back on the bracket end, bit for bit, is refused
pub fn secant_then_brent<E>(
    f: &mut dyn FnMut(f64) -> Result<f64, E>,
    mut pts: Vec<(f64, f64)>,
    domain: (f64, f64),
    below: &mut dyn FnMut(&mut dyn FnMut(f64) -> Result<f64, E>) -> Result<(f64, f64), E>,
    above: &mut dyn FnMut(&mut dyn FnMut(f64) -> Result<f64, E>) -> Result<(f64, f64), E>,
    tol: f64,
) -> Result<Option<f64>, E> {
    for _ in 0..8 {
        if pts.len() < 2 {
            break;
        }
        let (xa, fa) = pts[pts.len() - 2];
        let (xb, fb) = pts[pts.len() - 1];
        let x = xb - fb * (xb - xa) / (fb - fa);
        if !(x.is_finite() && x >= domain.0 && x <= domain.1) || x == xb {
            break;
        }
        let fx = f(x)?;
        if fx == 0.0 {
            return Ok(Some(x));
        }
        pts.push((x, fx));
        if fx.abs() > 0.5 * fb.abs() {
            break;
        }
    }
    if let Some(&(x, _)) = pts.iter().find(|p| p.1 == 0.0) {
        return Ok(Some(x));
    }
    let neg = pts
        .iter()
        .filter(|p| p.1 < 0.0)
        .max_by(|p, q| p.1.total_cmp(&q.1))
        .copied();
    let pos = pts
        .iter()
        .filter(|p| p.1 > 0.0)
        .min_by(|p, q| p.1.total_cmp(&q.1))
        .copied();
    let (a, fa) = match neg {
        Some(p) => p,
        None => below(f)?,
    };
    let (b, fb) = match pos {
        Some(p) => p,
        None => above(f)?,
    };
    brent(f, a, b, fa, fb, tol, 100)
}

#[cfg(test)]
#[allow(clippy::float_cmp)] // erfc(0) = 1 exactly
mod tests {
    use super::*;

    #[test]
    fn gauss_legendre_integrates_degree_23_exactly() {
        let v = gauss_legendre(0.0, 2.0, |x| x.powi(23));
        assert!((v - 2f64.powi(24) / 24.0).abs() < 1e-9 * v);
    }

    #[test]
    fn cbrt_pos_agrees_with_the_library_cube_root() {
        // Reference: the standard library's correctly rounded cube root.
        let mut x = 1e-30;
        while x < 1e30 {
            assert!((cbrt_pos(x) / x.cbrt() - 1.0).abs() < 1e-15, "{x}");
            x *= 1.013;
        }
    }

    #[test]
    fn erf_and_erfc_agree_with_the_libm_crate() {
        // Reference: the `libm` crate (a port of the musl C library's erf/erfc).
        let mut x = -6.0;
        while x <= 27.0 {
            let (a, b) = (erfc(x), libm::erfc(x));
            assert!(
                (a - b).abs() <= 4.0 * f64::EPSILON * b.abs(),
                "erfc({x}): {a} vs {b}"
            );
            let (a, b) = (erf(x), libm::erf(x));
            assert!(
                (a - b).abs() <= 4.0 * f64::EPSILON * b.abs().max(1e-300),
                "erf({x}): {a} vs {b}"
            );
            x += 0.0137;
        }
        // erfc(0) = 1 (exact); erfc(1) = 1 - erf(1) = 0.157299207050285... (Abramowitz and
        // Stegun, table 7.1, erf(1) = 0.842700792949715; from memory)
        assert_eq!(erfc(0.0), 1.0);
        assert!((erfc(1.0) - 0.157_299_207_050_285_1).abs() < 1e-16);
    }

    #[test]
    fn newton_bracketed_finds_cube_root() {
        let (x, calls) = newton_bracketed(
            |x| (x * x * x - 2.0, 3.0 * x * x),
            0.0,
            2.0,
            1.9,
            1e-14,
            |_, _| false,
        );
        assert!((x - 2f64.cbrt()).abs() < 1e-12);
        assert!(calls < 20);
    }

    #[test]
    fn newton_bracketed_does_not_stop_on_a_step_across_a_kink() {
        // Analytic: f = (x - 1) - 0.01 (x - 1)^2 up to the kink at xk = 1 - 1e-5, then slope
        // 10; the root is xk - f(xk) / 10. From 0.95 the Newton iterates of the concave left
        // branch stay left of the kink until a short last step, which lands near the left
        // branch's own root, 1; told of the kink, the solve goes on to the true root.
        let xk = 1.0 - 1e-5;
        let left = |x: f64| (x - 1.0) - 0.01 * (x - 1.0) * (x - 1.0);
        let f = |x: f64| {
            if x <= xk {
                (left(x), 1.0 - 0.02 * (x - 1.0))
            } else {
                (left(xk) + 10.0 * (x - xk), 10.0)
            }
        };
        let root = xk - left(xk) / 10.0;
        let kink = |a: f64, b: f64| (a - xk) * (b - xk) <= 0.0;
        let (x, _) = newton_bracketed(f, 0.0, 2.0, 0.95, 1e-10, kink);
        assert!((x - root).abs() < 1e-10, "{x} vs {root}");
        // Without the kink the curvature stop accepts the left branch's root.
        let (x, _) = newton_bracketed(f, 0.0, 2.0, 0.95, 1e-10, |_, _| false);
        assert!((x - root).abs() > 1e-7, "{x}");
    }

    #[test]
    fn brent_finds_root_of_cosine() {
        let r: Result<Option<f64>, ()> = brent(
            |x: f64| Ok(x.cos() - x),
            0.0,
            1.0,
            1.0,
            1f64.cos() - 1.0,
            1e-14,
            100,
        );
        assert!((r.unwrap().unwrap() - 0.739_085_133_215_160_6).abs() < 1e-12);
    }

    #[test]
    fn secant_then_brent_finds_roots_of_monotone_functions() {
        // Analytic roots: x^3 + x - 1 = 0 at x = 0.682327803828019... (the real root of the
        // cubic, by Cardano's formula), and the decreasing 2 - x - 0.05 x^2 at
        // x = 10 (sqrt(1.4) - 1) = 1.83215956619923...
        let cardano = {
            let d = (1.0f64 / 4.0 + 1.0 / 27.0).sqrt();
            (0.5 + d).cbrt() + (0.5 - d).cbrt()
        };
        let mut calls = 0;
        let mut f = |x: f64| -> Result<f64, ()> {
            calls += 1;
            Ok(x * x * x + x - 1.0)
        };
        let pts = vec![(2.0, f(2.0).unwrap()), (1.0, f(1.0).unwrap())];
        let mut below = |f: &mut dyn FnMut(f64) -> Result<f64, ()>| Ok((0.0, f(0.0)?));
        let mut above = |_: &mut dyn FnMut(f64) -> Result<f64, ()>| unreachable!();
        let r = secant_then_brent(&mut f, pts, (0.0, 2.0), &mut below, &mut above, 1e-13)
            .unwrap()
            .unwrap();
        assert!((r - cardano).abs() < 1e-12, "{r} vs {cardano}");
        assert!(calls <= 12, "{calls} evaluations");
        let g_root = 10.0 * (1.4f64.sqrt() - 1.0);
        let mut g = |x: f64| -> Result<f64, ()> { Ok(2.0 - x - 0.05 * x * x) };
        let pts = vec![(0.0, 2.0), (0.1, g(0.1).unwrap())];
        let r = secant_then_brent(&mut g, pts, (0.0, 5.0), &mut below, &mut above, 1e-13)
            .unwrap()
            .unwrap();
        assert!((r - g_root).abs() < 1e-12);
        // A secant step that leaves the domain hands over to Brent with the points supplied.
        let mut h = |x: f64| -> Result<f64, ()> { Ok((x - 0.3).tanh()) };
        let pts = vec![(4.0, h(4.0).unwrap()), (3.9, h(3.9).unwrap())];
        let mut below_h = |f: &mut dyn FnMut(f64) -> Result<f64, ()>| Ok((0.0, f(0.0)?));
        let r = secant_then_brent(&mut h, pts, (0.0, 4.0), &mut below_h, &mut above, 1e-13)
            .unwrap()
            .unwrap();
        assert!((r - 0.3).abs() < 1e-12);
        // An early stop passes through.
        let mut stop = |x: f64| -> Result<f64, f64> {
            let v = x * x * x + x - 1.0;
            if v.abs() < 1e-6 {
                Err(x)
            } else {
                Ok(v)
            }
        };
        let pts = vec![(1.0, 1.0), (0.5, -0.375)];
        let mut b2 = |_: &mut dyn FnMut(f64) -> Result<f64, f64>| unreachable!();
        let mut a2 = |_: &mut dyn FnMut(f64) -> Result<f64, f64>| unreachable!();
        let e = secant_then_brent(&mut stop, pts, (0.0, 2.0), &mut b2, &mut a2, 1e-13);
        assert!(matches!(e, Err(x) if (x - cardano).abs() < 1e-5));
    }
}
