//! Pareto dominance, constrained domination, fast non-dominated sorting and crowding distance
//! (Deb, Pratap, Agarwal and Meyarivan, IEEE Trans. Evol. Comput. 6 (2002) 182).

use crate::problem::Evaluated;
use std::borrow::Borrow;
use std::cmp::Ordering;

/// [`dominates`] for three objectives, written out (the same result, NaN included).
#[inline]
fn dominates3(a: &[f64], b: &[f64]) -> bool {
    let (a, b) = (&a[..3], &b[..3]);
    !(a[0] > b[0] || a[1] > b[1] || a[2] > b[2]) && (a[0] < b[0] || a[1] < b[1] || a[2] < b[2])
}

/// `a` Pareto-dominates `b` (all objectives minimised): no worse in all, better in one.
pub fn dominates(a: &[f64], b: &[f64]) -> bool {
    let mut better = false;
    for (x, y) in a.iter().zip(b) {
        if x > y {
            return false;
        }
        if x < y {
            better = true;
        }
    }
    better
}

/// Constrained domination (Deb et al. 2002, section IV): a feasible design beats an infeasible
/// one, of two infeasible designs the one with less violation wins, and two feasible designs
/// compare by Pareto dominance. A failed evaluation carries the largest violation.
pub fn constrained_dominates(a: &Evaluated, b: &Evaluated) -> bool {
    match (a.is_feasible(), b.is_feasible()) {
        (true, false) => true,
        (false, true) => false,
        (false, false) => a.violation < b.violation,
        (true, true) => dominates(&a.objectives, &b.objectives),
    }
}

/// Non-dominated sort under constrained domination. Returns the fronts (indices into `pop`,
/// each front in ascending index order) and the rank of every member (0 = first front).
///
/// The fronts are those of the fast non-dominated sort of Deb et al. (2002); they are found
/// with the efficient non-dominated sort, sequential search (Zhang, Tian, Cheng and Jin, IEEE
/// Trans. Evol. Comput. 19 (2015) 201): feasible designs in lexicographic order of their
/// objectives, each placed in the first front none of whose members dominates it. Infeasible
/// designs follow in fronts of equal violation, least violation first (constrained
/// domination orders them by violation alone).
pub fn non_dominated_sort<E: Borrow<Evaluated>>(pop: &[E]) -> (Vec<Vec<usize>>, Vec<usize>) {
    let n = pop.len();
    let ev = |i: usize| pop[i].borrow();
    let feasible: Vec<usize> = (0..n).filter(|&i| ev(i).is_feasible()).collect();
    let mut infeasible: Vec<usize> = (0..n).filter(|&i| !ev(i).is_feasible()).collect();
    let m = feasible.first().map_or(0, |&i| ev(i).objectives.len());
    // The feasible designs' objectives side by side in lexicographic order (ties by index; a
    // front is searched through this copy, not through the designs), and each front's
    // members as positions in it. Two and three objectives sort fixed-size keys.
    let (feasible, flat) = match m {
        2 => lexicographic::<2, E>(pop, &feasible),
        3 => lexicographic::<3, E>(pop, &feasible),
        _ => {
            let mut feasible = feasible;
            feasible.sort_unstable_by(|&a, &b| {
                let (fa, fb) = (&ev(a).objectives, &ev(b).objectives);
                fa.iter()
                    .zip(fb)
                    .map(|(x, y)| x.total_cmp(y))
                    .find(|o| o.is_ne())
                    .unwrap_or(Ordering::Equal)
                    .then(a.cmp(&b))
            });
            let mut flat: Vec<f64> = Vec::with_capacity(m * feasible.len());
            for &i in &feasible {
                flat.extend_from_slice(&ev(i).objectives);
            }
            (feasible, flat)
        }
    };
    let mut fronts: Vec<Vec<usize>> = Vec::new();
    let row = |p: usize| &flat[p * m..(p + 1) * m];
    let mut members: Vec<Vec<usize>> = Vec::new();
    for (p, &i) in feasible.iter().enumerate() {
        let f = row(p);
        // Only a design earlier in lexicographic order can dominate this one. With two
        // objectives a front's last member has its lowest second objective, so it dominates
        // a later design whenever any member does: one test a front instead of one a member.
        let k = members
            .iter()
            .position(|front| {
                if m == 2 {
                    let last = *front.last().expect("a front is never empty");
                    !dominates(row(last), f)
                } else if m == 3 {
                    !front.iter().rev().any(|&q| dominates3(row(q), f))
                } else {
                    !front.iter().rev().any(|&q| dominates(row(q), f))
                }
            })
            .unwrap_or(fronts.len());
        if k == fronts.len() {
            fronts.push(Vec::new());
            members.push(Vec::new());
        }
        fronts[k].push(i);
        members[k].push(p);
    }
    infeasible.sort_by(|&a, &b| ev(a).violation.total_cmp(&ev(b).violation).then(a.cmp(&b)));
    let mut last_violation: Option<f64> = None;
    for &i in &infeasible {
        let v = ev(i).violation;
        if last_violation.is_some_and(|w| w.total_cmp(&v).is_eq()) {
            fronts.last_mut().expect("a front was opened").push(i);
        } else {
            fronts.push(vec![i]);
            last_violation = Some(v);
        }
    }
    let mut rank = vec![0usize; n];
    for (r, front) in fronts.iter_mut().enumerate() {
        front.sort_unstable();
        for &i in front.iter() {
            rank[i] = r;
        }
    }
    (fronts, rank)
}

/// The members `feasible` of `pop` (all with `M` objectives) in lexicographic order of their
/// objectives (`total_cmp`, ties by index: a total order, so an unstable sort gives the one
/// result), and their objectives side by side in that order.
fn lexicographic<const M: usize, E: Borrow<Evaluated>>(
    pop: &[E],
    feasible: &[usize],
) -> (Vec<usize>, Vec<f64>) {
    let mut keyed: Vec<([i64; M], usize)> = feasible
        .iter()
        .map(|&i| {
            let o = &pop[i].borrow().objectives;
            (std::array::from_fn(|j| total_key(o[j])), i)
        })
        .collect();
    keyed.sort_unstable();
    let order: Vec<usize> = keyed.iter().map(|k| k.1).collect();
    let mut flat = Vec::with_capacity(M * order.len());
    for &i in &order {
        flat.extend_from_slice(&pop[i].borrow().objectives[..M]);
    }
    (order, flat)
}

/// An integer that orders as `f64::total_cmp` orders `x` (the same bit transform): sorting
/// by it gives the same order with integer comparisons.
#[inline]
fn total_key(x: f64) -> i64 {
    let b = x.to_bits() as i64;
    b ^ (((b >> 63) as u64) >> 1) as i64
}

/// The fronts by the O(M N^2) fast non-dominated sort of Deb et al. (2002), section III-A,
/// kept as the reference that [`non_dominated_sort`] is tested against.
pub fn non_dominated_sort_reference(pop: &[Evaluated]) -> Vec<Vec<usize>> {
    let n = pop.len();
    let mut count = vec![0usize; n];
    let mut dominated: Vec<Vec<usize>> = vec![Vec::new(); n];
    for i in 0..n {
        for j in 0..n {
            if i != j && constrained_dominates(&pop[i], &pop[j]) {
                dominated[i].push(j);
                count[j] += 1;
            }
        }
    }
    let mut fronts = Vec::new();
    let mut current: Vec<usize> = (0..n).filter(|&i| count[i] == 0).collect();
    while !current.is_empty() {
        let mut next = Vec::new();
        for &i in &current {
            for &j in &dominated[i] {
                count[j] -= 1;
                if count[j] == 0 {
                    next.push(j);
                }
            }
        }
        next.sort_unstable();
        fronts.push(current);
        current = next;
    }
    fronts
}

/// Crowding distance of each member of one front (Deb et al. 2002, section III-B): the sum
/// over objectives of the normalised side lengths of the cuboid formed by the two neighbours;
/// boundary members get infinity. Failed members (no objectives) get zero.
pub fn crowding_distance<E: Borrow<Evaluated>>(pop: &[E], front: &[usize]) -> Vec<f64> {
    let n = front.len();
    let ev = |i: usize| pop[i].borrow();
    let mut d = vec![0.0; n];
    let with_obj: Vec<usize> = (0..n)
        .filter(|&k| !ev(front[k]).objectives.is_empty())
        .collect();
    if with_obj.is_empty() {
        return d;
    }
    if with_obj.len() <= 2 {
        for &k in &with_obj {
            d[k] = f64::INFINITY;
        }
        return d;
    }
    let m = ev(front[with_obj[0]]).objectives.len();
    let mut keyed: Vec<(i64, usize)> = Vec::with_capacity(with_obj.len());
    let mut order: Vec<(f64, usize)> = Vec::with_capacity(with_obj.len());
    for obj in 0..m {
        keyed.clear();
        keyed.extend(
            with_obj
                .iter()
                .map(|&k| (total_key(ev(front[k]).objectives[obj]), k)),
        );
        // Ties broken by position: a total order (`total_cmp`, then position), so the
        // result is deterministic.
        keyed.sort_unstable();
        order.clear();
        order.extend(
            keyed
                .iter()
                .map(|&(_, k)| (ev(front[k]).objectives[obj], k)),
        );
        let (lo, first) = order[0];
        let (hi, last) = *order.last().expect("non-empty");
        d[first] = f64::INFINITY;
        d[last] = f64::INFINITY;
        let span = hi - lo;
        if span <= 0.0 {
            continue;
        }
        for w in 1..order.len() - 1 {
            let (prev, next) = (order[w - 1].0, order[w + 1].0);
            d[order[w].1] += (next - prev) / span;
        }
    }
    d
}

/// Rank and crowding distance of every member of `pop`.
pub fn rank_and_crowding(pop: &[Evaluated]) -> (Vec<usize>, Vec<f64>) {
    let (fronts, rank) = non_dominated_sort(pop);
    let mut crowd = vec![0.0; pop.len()];
    for front in &fronts {
        let d = crowding_distance(pop, front);
        for (k, &i) in front.iter().enumerate() {
            crowd[i] = d[k];
        }
    }
    (rank, crowd)
}

/// Crowded comparison (Deb et al. 2002, section III-C): lower rank first, then larger
/// crowding distance. `Less` means `a` is preferred.
pub fn crowded_compare(rank: &[usize], crowd: &[f64], a: usize, b: usize) -> Ordering {
    rank[a]
        .cmp(&rank[b])
        .then_with(|| crowd[b].total_cmp(&crowd[a]))
}

/// Indices of the members of `points` that no other member dominates (plain Pareto
/// dominance; of exact duplicates the first is kept).
pub fn non_dominated_indices(points: &[Vec<f64>]) -> Vec<usize> {
    let mut keep = Vec::new();
    'outer: for i in 0..points.len() {
        for j in 0..points.len() {
            if i != j && (dominates(&points[j], &points[i]) || (j < i && points[j] == points[i])) {
                continue 'outer;
            }
        }
        keep.push(i);
    }
    keep
}

#[cfg(test)]
mod tests {
    use super::*;

    fn ev(i: u64, f: Vec<f64>, violation: f64, failed: bool) -> Evaluated {
        Evaluated {
            id: i,
            generation: 0,
            x: vec![],
            objectives: if failed { vec![] } else { f },
            constraints: vec![],
            violation: if failed { f64::MAX } else { violation },
            failure: failed.then(|| "failed".to_string()),
        }
    }

    #[test]
    fn efficient_sort_equals_the_fast_non_dominated_sort() {
        // Zhang et al. (2015): ENS gives the same fronts as Deb's fast non-dominated sort.
        let mut s = 99u64;
        let mut next = |k: u64| {
            s = s
                .wrapping_mul(6364136223846793005)
                .wrapping_add(1442695040888963407);
            ((s >> 33) % k) as f64
        };
        for m in 2..=4 {
            for _ in 0..30 {
                let pop: Vec<Evaluated> = (0..40)
                    .map(|i| {
                        let f: Vec<f64> = (0..m).map(|_| next(6)).collect();
                        let kind = next(10);
                        let violation = if kind < 2.0 { next(3) + 1.0 } else { 0.0 };
                        ev(i, f, violation, kind > 8.0)
                    })
                    .collect();
                assert_eq!(
                    non_dominated_sort(&pop).0,
                    non_dominated_sort_reference(&pop)
                );
            }
        }
    }
}
