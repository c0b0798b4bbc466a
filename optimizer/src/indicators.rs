//! Quality indicators of an approximation front: hypervolume, IGD and IGD+.
//!
//! Hypervolume (Zitzler and Thiele 1998): the measure of the region dominated by the front and
//! bounded by a reference point (all objectives minimised). Exact algorithms:
//! - 2 objectives: one sweep in the first objective, O(n log n);
//! - 3 objectives: the dimension sweep of Beume, Fonseca, Lopez-Ibanez, Paquete and Vahrenhold
//!   (IEEE Trans. Evol. Comput. 13 (2009) 1075), a sweep in the third objective keeping the
//!   2-D staircase of the points seen in an ordered map, O(n log n);
//! - more objectives: slicing along the last objective (the HSO idea of While, Hingston,
//!   Barone and Huband, IEEE Trans. Evol. Comput. 10 (2006) 29), recursing down to the 3-D
//!   sweep; exact, O(n^(m-2) log n).

/// Exact hypervolume of `points` with respect to `reference` (minimisation). Points that do
/// not strictly dominate the reference point contribute nothing; non-finite points are
/// ignored. Returns 0 for an empty set.
pub fn hypervolume(points: &[Vec<f64>], reference: &[f64]) -> f64 {
    hypervolume_of(points.iter().map(|p| p.as_slice()), reference)
}

/// [`hypervolume`] of borrowed points (no copy of the set).
pub fn hypervolume_of<'a>(points: impl IntoIterator<Item = &'a [f64]>, reference: &[f64]) -> f64 {
    let m = reference.len();
    let pts: Vec<&[f64]> = points
        .into_iter()
        .filter(|p| p.len() == m && p.iter().zip(reference).all(|(a, r)| a.is_finite() && a < r))
        .collect();
    hv_rec(&pts, reference)
}

fn hv_rec(pts: &[&[f64]], r: &[f64]) -> f64 {
    if pts.is_empty() {
        return 0.0;
    }
    match r.len() {
        0 => 0.0,
        1 => r[0] - pts.iter().map(|p| p[0]).fold(f64::INFINITY, f64::min),
        2 => hv2(pts, r),
        3 => hv3(pts, r),
        m => {
            let last = m - 1;
            let mut order: Vec<&[f64]> = pts.to_vec();
            order.sort_by(|a, b| a[last].total_cmp(&b[last]));
            let mut vol = 0.0;
            for i in 0..order.len() {
                let next = if i + 1 < order.len() {
                    order[i + 1][last]
                } else {
                    r[last]
                };
                let depth = next - order[i][last];
                if depth > 0.0 {
                    let proj: Vec<&[f64]> = order[..=i].iter().map(|p| &p[..last]).collect();
                    vol += depth * hv_rec(&proj, &r[..last]);
                }
            }
            vol
        }
    }
}

fn hv2(pts: &[&[f64]], r: &[f64]) -> f64 {
    let mut p: Vec<(f64, f64)> = pts.iter().map(|p| (p[0], p[1])).collect();
    p.sort_by(|a, b| a.0.total_cmp(&b.0).then(a.1.total_cmp(&b.1)));
    let mut area = 0.0;
    let mut cur_y = r[1];
    for (x, y) in p {
        if y < cur_y {
            area += (r[0] - x) * (cur_y - y);
            cur_y = y;
        }
    }
    area
}

fn hv3(pts: &[&[f64]], r: &[f64]) -> f64 {
    let mut p: Vec<[f64; 3]> = pts.iter().map(|p| [p[0], p[1], p[2]]).collect();
    p.sort_by(|a, b| a[0].total_cmp(&b[0]));
    sweep3(p.into_iter(), r)
}

/// Hypervolume in two or three objectives of points already in ascending order of their first
/// objective (third zero for two objectives), skipping those outside the reference box.
pub(crate) fn hypervolume_sorted(points: impl Iterator<Item = [f64; 3]>, r: &[f64]) -> f64 {
    match r.len() {
        2 => {
            let mut area = 0.0;
            let mut cur = r[1];
            for p in points.filter(|p| p[0] < r[0] && p[1] < r[1]) {
                if p[1] < cur {
                    area += (r[0] - p[0]) * (cur - p[1]);
                    cur = p[1];
                }
            }
            area
        }
        3 => sweep3(
            points.filter(|p| p[0] < r[0] && p[1] < r[1] && p[2] < r[2]),
            r,
        ),
        _ => unreachable!("only two or three objectives"),
    }
}

/// The 3-D sweep along the first objective (points in ascending order of it, all inside the
/// reference box), keeping the staircase of the (second, third) projections seen so far.
fn sweep3(points: impl Iterator<Item = [f64; 3]>, r: &[f64]) -> f64 {
    // Staircase: second objective ascending, third descending. A sorted vector: the
    // staircase of a front stays small, so shifting is cheaper than a tree.
    let mut stairs: Vec<(f64, f64)> = Vec::new();
    let mut area = 0.0;
    let mut vol = 0.0;
    let mut prev: Option<f64> = None;
    for [ps, px, py] in points {
        if let Some(s0) = prev {
            vol += area * (ps - s0);
        }
        prev = Some(ps);
        // First entry with x >= px, and the entry before it (x < px).
        let at = stairs.partition_point(|q| q.0 < px);
        let dominated = stairs
            .get(at)
            .is_some_and(|q| q.0.total_cmp(&px).is_eq() && q.1 <= py)
            || (at > 0 && stairs[at - 1].1 <= py);
        if dominated {
            continue;
        }
        let mut h = if at > 0 { stairs[at - 1].1 } else { r[2] };
        let mut xcur = px;
        let mut added = 0.0;
        let mut end = at;
        while end < stairs.len() {
            let (qx, qy) = stairs[end];
            added += (qx - xcur) * (h - py);
            xcur = qx;
            if qy >= py {
                h = qy;
                end += 1;
            } else {
                break;
            }
        }
        if end == stairs.len() {
            added += (r[1] - xcur) * (h - py);
        }
        stairs.splice(at..end, [(px, py)]);
        area += added;
    }
    if let Some(s0) = prev {
        vol += area * (r[0] - s0);
    }
    vol
}

/// Inverted generational distance (Coello Coello and Reyes Sierra 2004): the mean, over the
/// points of the reference front, of the Euclidean distance to the nearest point of the
/// approximation. Infinite when the approximation is empty.
pub fn igd(approximation: &[Vec<f64>], reference_front: &[Vec<f64>]) -> f64 {
    mean_min(approximation, reference_front, |a, z| {
        a.iter()
            .zip(z)
            .map(|(x, y)| (x - y) * (x - y))
            .sum::<f64>()
            .sqrt()
    })
}

/// IGD+ (Ishibuchi, Masuda, Tanigaki and Nojima, EMO 2015): as IGD, but only the amount by
/// which an approximation point is worse than a reference point counts,
/// `d+(z, a) = sqrt(sum max(a_i - z_i, 0)^2)`; weakly Pareto compliant.
pub fn igd_plus(approximation: &[Vec<f64>], reference_front: &[Vec<f64>]) -> f64 {
    mean_min(approximation, reference_front, |a, z| {
        a.iter()
            .zip(z)
            .map(|(x, y)| (x - y).max(0.0).powi(2))
            .sum::<f64>()
            .sqrt()
    })
}

fn mean_min(
    approximation: &[Vec<f64>],
    reference_front: &[Vec<f64>],
    d: impl Fn(&[f64], &[f64]) -> f64,
) -> f64 {
    if approximation.is_empty() || reference_front.is_empty() {
        return f64::INFINITY;
    }
    let total: f64 = reference_front
        .iter()
        .map(|z| {
            approximation
                .iter()
                .map(|a| d(a, z))
                .fold(f64::INFINITY, f64::min)
        })
        .sum();
    total / reference_front.len() as f64
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn single_point_is_a_box() {
        let hv = hypervolume(&[vec![0.25, 0.5, 0.0, 0.5]], &[1.0, 1.0, 1.0, 1.0]);
        assert!((hv - 0.75 * 0.5 * 1.0 * 0.5).abs() < 1e-15);
    }

    #[test]
    fn two_points_in_two_dimensions() {
        // Worked by hand: union of [0.2,1]x[0.6,1] and [0.5,1]x[0.1,1] = 0.32 + 0.5*0.5 = 0.57.
        let hv = hypervolume(&[vec![0.2, 0.6], vec![0.5, 0.1]], &[1.0, 1.0]);
        assert!((hv - 0.57).abs() < 1e-12);
    }

    #[test]
    fn igd_of_the_front_itself_is_zero() {
        let f = vec![vec![0.0, 1.0], vec![1.0, 0.0]];
        assert!(igd(&f, &f).abs() < 1e-15);
        assert!(igd_plus(&f, &f).abs() < 1e-15);
        // A point better than the reference front has zero IGD+ distance but positive IGD.
        let better = vec![vec![-0.1, 0.9], vec![0.9, -0.1]];
        assert!(igd_plus(&better, &f).abs() < 1e-15);
        assert!(igd(&better, &f) > 0.1);
    }
}
