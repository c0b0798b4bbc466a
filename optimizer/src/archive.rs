//! A non-dominated archive of every feasible design seen, with an optional epsilon grid that
//! bounds its size (epsilon-dominance: Laumanns, Thiele, Deb and Zitzler, "Combining
//! convergence and diversity in evolutionary multiobjective optimization", Evol. Comput. 10
//! (2002) 263).

use crate::dominance::dominates;
use crate::problem::Evaluated;
use serde::{Deserialize, Serialize};

/// Non-dominated feasible designs, in the order they were found (ascending id).
#[derive(Debug, Clone, Default, Serialize, Deserialize)]
pub struct Archive {
    epsilon: Option<Vec<f64>>,
    members: Vec<Evaluated>,
    /// Members' objectives in lexicographic order (two or three objectives), a cache for
    /// [`Archive::insert_batch`]; not part of the state.
    #[serde(skip)]
    order: Vec<SortKey>,
}

impl PartialEq for Archive {
    fn eq(&self, other: &Self) -> bool {
        self.epsilon == other.epsilon && self.members == other.members
    }
}

/// Objectives (third zero for two objectives) and id.
type SortKey = ([f64; 3], u64);

fn sort_key(e: &Evaluated) -> SortKey {
    let f = &e.objectives;
    ([f[0], f[1], f.get(2).copied().unwrap_or(0.0)], e.id)
}

fn key_cmp(a: &SortKey, b: &SortKey) -> std::cmp::Ordering {
    a.0[0]
        .total_cmp(&b.0[0])
        .then(a.0[1].total_cmp(&b.0[1]))
        .then(a.0[2].total_cmp(&b.0[2]))
        .then(a.1.cmp(&b.1))
}

fn grid_box(f: &[f64], eps: &[f64]) -> Vec<i64> {
    // `as` saturates, so a huge objective lands in the last box instead of wrapping.
    f.iter()
        .zip(eps)
        .map(|(v, e)| (v / e).floor() as i64)
        .collect()
}

fn box_dominates(a: &[i64], b: &[i64]) -> bool {
    a.iter().zip(b).all(|(x, y)| x <= y) && a != b
}

fn corner_distance(f: &[f64], b: &[i64], eps: &[f64]) -> f64 {
    f.iter()
        .zip(b)
        .zip(eps)
        .map(|((v, bi), e)| {
            let d = (v - *bi as f64 * e) / e;
            d * d
        })
        .sum()
}

impl Archive {
    /// An empty archive; with `epsilon` (one positive value per objective) at most one design
    /// is kept per grid box, so the archive size is bounded by the grid.
    pub fn new(epsilon: Option<Vec<f64>>) -> Archive {
        Archive {
            epsilon,
            members: Vec::new(),
            order: Vec::new(),
        }
    }

    /// The archived designs, in ascending id order.
    pub fn members(&self) -> &[Evaluated] {
        &self.members
    }

    /// Number of archived designs.
    pub fn len(&self) -> usize {
        self.members.len()
    }

    /// True when nothing is archived.
    pub fn is_empty(&self) -> bool {
        self.members.is_empty()
    }

    /// The objective vectors of the archived designs.
    pub fn objectives(&self) -> Vec<Vec<f64>> {
        self.members.iter().map(|e| e.objectives.clone()).collect()
    }

    /// With two or three objectives after a batch insertion: the members' objectives in
    /// ascending lexicographic order (third zero for two objectives).
    pub(crate) fn sorted_objectives(&self) -> Option<impl Iterator<Item = [f64; 3]> + '_> {
        (self.order.len() == self.members.len() && !self.members.is_empty())
            .then(|| self.order.iter().map(|k| k.0))
    }

    /// The epsilon grid, if any.
    pub fn epsilon(&self) -> Option<&[f64]> {
        self.epsilon.as_deref()
    }

    /// Offer a design; infeasible and failed designs are ignored. Returns whether it was kept.
    pub fn insert(&mut self, e: &Evaluated) -> bool {
        if !e.is_feasible() {
            return false;
        }
        // The sort cache is only kept by batch insertion.
        self.order.clear();
        match self.epsilon.clone() {
            None => self.insert_plain(e),
            Some(eps) => self.insert_epsilon(e, &eps),
        }
    }

    /// Offer a batch of designs (ids ascending, all above the archive's). The result is the
    /// same as offering them one by one with [`Archive::insert`]: the non-dominated set of
    /// archive and batch, of equal objective vectors the earliest kept. With two or three
    /// objectives and no epsilon grid this is a sort-and-sweep, O(n log n) in the archive
    /// size (Kung, Luccio and Preparata, J. ACM 22 (1975) 469).
    pub fn insert_batch(&mut self, batch: &[Evaluated]) {
        self.insert_batch_measured(batch, None);
    }

    /// As [`Archive::insert_batch`]; with a `reference` point, when the sort-and-sweep path
    /// runs and every archived point lies strictly inside the reference box, the archive's
    /// hypervolume is measured in the same sweep and returned (the sweep is that of
    /// [`crate::indicators`]).
    pub(crate) fn insert_batch_measured(
        &mut self,
        batch: &[Evaluated],
        reference: Option<&[f64]>,
    ) -> Option<f64> {
        let m = self.members.first().map_or(0, |e| e.objectives.len());
        let feasible: Vec<&Evaluated> = batch.iter().filter(|e| e.is_feasible()).collect();
        let m = if m == 0 {
            feasible.first().map_or(0, |e| e.objectives.len())
        } else {
            m
        };
        if self.epsilon.is_some() || !(m == 2 || m == 3) || feasible.len() < 8 {
            for e in feasible {
                self.insert(e);
            }
            return None;
        }
        // Sort keys of the members, kept between calls (derived data, rebuilt after a
        // deserialisation or a one-by-one insertion).
        if self.order.len() != self.members.len() {
            self.order = self.members.iter().map(sort_key).collect();
            self.order.sort_unstable_by(key_cmp);
        }
        let mut fresh: Vec<SortKey> = feasible.iter().map(|e| sort_key(e)).collect();
        fresh.sort_unstable_by(key_cmp);
        // Merge the two sorted key lists.
        let old = std::mem::take(&mut self.order);
        let mut merged = Vec::with_capacity(old.len() + fresh.len());
        let (mut i, mut j) = (0, 0);
        while i < old.len() || j < fresh.len() {
            if j == fresh.len() || (i < old.len() && key_cmp(&old[i], &fresh[j]).is_le()) {
                merged.push(old[i]);
                i += 1;
            } else {
                merged.push(fresh[j]);
                j += 1;
            }
        }
        // Sweep in sorted order: a point is dominated (or a later duplicate) exactly when an
        // earlier one is no worse in the remaining objectives.
        let mut kept: Vec<SortKey> = Vec::with_capacity(merged.len());
        let r = reference.filter(|r| r.len() == m);
        let mut inside = r.is_some();
        let mut vol = 0.0;
        if m == 2 {
            let mut best = f64::INFINITY;
            for k in merged {
                if k.0[1] < best {
                    if let Some(r) = r {
                        inside &= k.0[0] < r[0] && k.0[1] < r[1];
                        if inside {
                            vol += (r[0] - k.0[0]) * (best.min(r[1]) - k.0[1]);
                        }
                    }
                    best = k.0[1];
                    kept.push(k);
                }
            }
        } else {
            let mut stairs = Staircase::default();
            let bound = r.map(|r| (r[1], r[2]));
            let mut area = 0.0;
            for k in merged {
                let Some(added) = stairs.insert(k.0[1], k.0[2], bound) else {
                    continue;
                };
                if let Some(r) = r {
                    inside &= k.0[0] < r[0] && k.0[1] < r[1] && k.0[2] < r[2];
                    if let Some(prev) = kept.last() {
                        vol += area * (k.0[0] - prev.0[0]);
                    }
                    area += added;
                }
                kept.push(k);
            }
            if let (Some(r), Some(last)) = (r, kept.last()) {
                vol += area * (r[0] - last.0[0]);
            }
        }
        let mut ids: Vec<u64> = kept.iter().map(|k| k.1).collect();
        ids.sort_unstable();
        // Both lists ascend by id: keep members in place, then append the new survivors.
        let mut next = ids.iter().peekable();
        self.members.retain(|e| {
            let keep = next.peek().is_some_and(|&&id| id == e.id);
            if keep {
                next.next();
            }
            keep
        });
        for e in feasible {
            if next.peek().is_some_and(|&&id| id == e.id) {
                next.next();
                self.members.push(e.clone());
            }
        }
        self.order = kept;
        (inside && !self.members.is_empty()).then_some(vol)
    }

    fn insert_plain(&mut self, e: &Evaluated) -> bool {
        let f = &e.objectives;
        if self
            .members
            .iter()
            .any(|m| dominates(&m.objectives, f) || m.objectives == *f)
        {
            return false;
        }
        self.members.retain(|m| !dominates(f, &m.objectives));
        self.members.push(e.clone());
        true
    }

    fn insert_epsilon(&mut self, e: &Evaluated, eps: &[f64]) -> bool {
        let f = &e.objectives;
        let b = grid_box(f, eps);
        let mut same_box: Option<usize> = None;
        for (i, m) in self.members.iter().enumerate() {
            let mb = grid_box(&m.objectives, eps);
            if box_dominates(&mb, &b) {
                return false;
            }
            if mb == b {
                same_box = Some(i);
            }
        }
        if let Some(i) = same_box {
            let old = &self.members[i].objectives;
            let better = dominates(f, old)
                || (!dominates(old, f)
                    && corner_distance(f, &b, eps) < corner_distance(old, &b, eps));
            if !better {
                return false;
            }
            self.members.remove(i);
        }
        self.members
            .retain(|m| !box_dominates(&b, &grid_box(&m.objectives, eps)));
        self.members.push(e.clone());
        true
    }
}

/// Mutually non-dominated 2-D points (x ascending, y descending), in a sorted vector.
#[derive(Default)]
struct Staircase(Vec<(f64, f64)>);

impl Staircase {
    /// Insert (x, y) unless dominated (then `None`); with a `bound` (the reference point in
    /// the two coordinates, every point inside it) also return the area the point adds to the
    /// region the staircase dominates within the bound (as in the 3-D hypervolume sweep).
    fn insert(&mut self, x: f64, y: f64, bound: Option<(f64, f64)>) -> Option<f64> {
        let at = self.0.partition_point(|q| q.0 <= x);
        if at > 0 && self.0[at - 1].1 <= y {
            return None;
        }
        let start = self.0.partition_point(|q| q.0 < x);
        let mut end = start;
        let mut added = 0.0;
        match bound {
            None => {
                while end < self.0.len() && self.0[end].1 >= y {
                    end += 1;
                }
            }
            Some((rx, ry)) => {
                let mut h = if start > 0 { self.0[start - 1].1 } else { ry };
                let mut xcur = x;
                let mut open = true;
                while end < self.0.len() {
                    let (qx, qy) = self.0[end];
                    added += (qx - xcur) * (h - y);
                    xcur = qx;
                    if qy >= y {
                        h = qy;
                        end += 1;
                    } else {
                        open = false;
                        break;
                    }
                }
                if open {
                    added += (rx - xcur) * (h - y);
                }
            }
        }
        self.0.splice(start..end, [(x, y)]);
        Some(added)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn ev(id: u64, f: &[f64]) -> Evaluated {
        Evaluated {
            id,
            generation: 0,
            x: vec![],
            objectives: f.to_vec(),
            constraints: vec![],
            violation: 0.0,
            failure: None,
        }
    }

    #[test]
    fn keeps_only_non_dominated() {
        let mut a = Archive::new(None);
        assert!(a.insert(&ev(0, &[1.0, 1.0])));
        assert!(a.insert(&ev(1, &[0.5, 2.0])));
        assert!(!a.insert(&ev(2, &[1.5, 1.5])));
        assert!(!a.insert(&ev(3, &[1.0, 1.0])));
        assert!(a.insert(&ev(4, &[0.5, 0.5])));
        assert_eq!(a.len(), 1);
        assert_eq!(a.members()[0].id, 4);
    }

    #[test]
    fn batch_insertion_equals_one_by_one() {
        // Random integer-valued points (many ties and duplicates), 2 and 3 objectives.
        let mut state = 12345u64;
        let mut next = || {
            state = state
                .wrapping_mul(6364136223846793005)
                .wrapping_add(1442695040888963407);
            ((state >> 33) % 7) as f64
        };
        for m in [2, 3] {
            let mut one = Archive::new(None);
            let mut batch = Archive::new(None);
            let mut id = 0;
            for _ in 0..20 {
                let b: Vec<Evaluated> = (0..15)
                    .map(|_| {
                        id += 1;
                        let f: Vec<f64> = (0..m).map(|_| next()).collect();
                        ev(id, &f)
                    })
                    .collect();
                for e in &b {
                    one.insert(e);
                }
                batch.insert_batch(&b);
                assert_eq!(one, batch);
            }
        }
    }

    #[test]
    fn hypervolume_measured_in_the_sweep_equals_a_fresh_computation() {
        // Random real-valued points in the unit cube, reference (1.2, ...): every point
        // inside, so the sweep measures the hypervolume.
        let mut state = 777u64;
        let mut next = || {
            state = state
                .wrapping_mul(6364136223846793005)
                .wrapping_add(1442695040888963407);
            (state >> 11) as f64 / (1u64 << 53) as f64
        };
        for m in [2, 3] {
            let r = vec![1.2; m];
            let mut a = Archive::new(None);
            let mut id = 0;
            for _ in 0..10 {
                let b: Vec<Evaluated> = (0..30)
                    .map(|_| {
                        id += 1;
                        let f: Vec<f64> = (0..m).map(|_| next()).collect();
                        ev(id, &f)
                    })
                    .collect();
                let measured = a.insert_batch_measured(&b, Some(&r)).expect("all inside");
                let fresh = crate::indicators::hypervolume(&a.objectives(), &r);
                assert!(
                    (measured - fresh).abs() <= 1e-12 * fresh,
                    "{measured} vs {fresh}"
                );
            }
        }
    }

    #[test]
    fn epsilon_grid_bounds_the_size() {
        // On the line f1 + f2 = 1 an epsilon grid of 0.1 holds at most about 1/0.1 + 1 boxes
        // along the front (Laumanns et al. 2002, theorem on the archive size).
        let mut a = Archive::new(Some(vec![0.1, 0.1]));
        for i in 0..=1000 {
            let t = i as f64 / 1000.0;
            a.insert(&ev(i, &[t, 1.0 - t]));
        }
        assert!(a.len() <= 11, "{}", a.len());
        assert!(a.len() >= 5);
    }
}
