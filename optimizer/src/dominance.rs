//! Pareto dominance, constrained domination, fast non-dominated sorting and crowding distance
//! (Deb, Pratap, Agarwal and Meyarivan, IEEE Trans. Evol. Comput. 6 (2002) 182).

use crate::problem::Evaluated;
use std::cmp::Ordering;

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

enum Relation {
    First,
    Second,
    Neither,
}

/// Pareto relation of two objective vectors in one pass.
fn relation(a: &[f64], b: &[f64]) -> Relation {
    let (mut a_better, mut b_better) = (false, false);
    for (x, y) in a.iter().zip(b) {
        if x < y {
            a_better = true;
        } else if y < x {
            b_better = true;
        }
    }
    match (a_better, b_better) {
        (true, false) => Relation::First,
        (false, true) => Relation::Second,
        _ => Relation::Neither,
    }
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

/// Fast non-dominated sort under constrained domination. Returns the fronts (indices into
/// `pop`, each front in ascending index order) and the rank of every member (0 = first front).
pub fn non_dominated_sort(pop: &[Evaluated]) -> (Vec<Vec<usize>>, Vec<usize>) {
    let n = pop.len();
    let feasible: Vec<bool> = pop.iter().map(|e| e.is_feasible()).collect();
    let mut dominated_by_count = vec![0usize; n];
    let mut dominates_list: Vec<Vec<usize>> = vec![Vec::new(); n];
    for i in 0..n {
        for j in (i + 1)..n {
            let rel = match (feasible[i], feasible[j]) {
                (true, false) => Relation::First,
                (false, true) => Relation::Second,
                (false, false) => match pop[i].violation.total_cmp(&pop[j].violation) {
                    Ordering::Less => Relation::First,
                    Ordering::Greater => Relation::Second,
                    Ordering::Equal => Relation::Neither,
                },
                (true, true) => relation(&pop[i].objectives, &pop[j].objectives),
            };
            match rel {
                Relation::First => {
                    dominates_list[i].push(j);
                    dominated_by_count[j] += 1;
                }
                Relation::Second => {
                    dominates_list[j].push(i);
                    dominated_by_count[i] += 1;
                }
                Relation::Neither => {}
            }
        }
    }
    let mut rank = vec![0usize; n];
    let mut fronts = Vec::new();
    let mut current: Vec<usize> = (0..n).filter(|&i| dominated_by_count[i] == 0).collect();
    let mut r = 0;
    while !current.is_empty() {
        let mut next = Vec::new();
        for &i in &current {
            rank[i] = r;
            for &j in &dominates_list[i] {
                dominated_by_count[j] -= 1;
                if dominated_by_count[j] == 0 {
                    next.push(j);
                }
            }
        }
        next.sort_unstable();
        fronts.push(current);
        current = next;
        r += 1;
    }
    (fronts, rank)
}

/// Crowding distance of each member of one front (Deb et al. 2002, section III-B): the sum
/// over objectives of the normalised side lengths of the cuboid formed by the two neighbours;
/// boundary members get infinity. Failed members (no objectives) get zero.
pub fn crowding_distance(pop: &[Evaluated], front: &[usize]) -> Vec<f64> {
    let n = front.len();
    let mut d = vec![0.0; n];
    let with_obj: Vec<usize> = (0..n)
        .filter(|&k| !pop[front[k]].objectives.is_empty())
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
    let m = pop[front[with_obj[0]]].objectives.len();
    for obj in 0..m {
        let mut order = with_obj.clone();
        // Stable sort with ties broken by position: deterministic.
        order.sort_by(|&a, &b| {
            pop[front[a]].objectives[obj]
                .total_cmp(&pop[front[b]].objectives[obj])
                .then(a.cmp(&b))
        });
        let lo = pop[front[order[0]]].objectives[obj];
        let hi = pop[front[*order.last().expect("non-empty")]].objectives[obj];
        d[order[0]] = f64::INFINITY;
        d[*order.last().expect("non-empty")] = f64::INFINITY;
        let span = hi - lo;
        if span <= 0.0 {
            continue;
        }
        for w in 1..order.len() - 1 {
            let prev = pop[front[order[w - 1]]].objectives[obj];
            let next = pop[front[order[w + 1]]].objectives[obj];
            d[order[w]] += (next - prev) / span;
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
