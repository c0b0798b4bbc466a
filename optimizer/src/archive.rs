//! A non-dominated archive of every feasible design seen, with an optional epsilon grid that
//! bounds its size (epsilon-dominance: Laumanns, Thiele, Deb and Zitzler, "Combining
//! convergence and diversity in evolutionary multiobjective optimization", Evol. Comput. 10
//! (2002) 263).

use crate::dominance::dominates;
use crate::problem::Evaluated;
use serde::{Deserialize, Serialize};

/// Non-dominated feasible designs, in the order they were found (ascending id).
#[derive(Debug, Clone, PartialEq, Default, Serialize, Deserialize)]
pub struct Archive {
    epsilon: Option<Vec<f64>>,
    members: Vec<Evaluated>,
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

    /// The epsilon grid, if any.
    pub fn epsilon(&self) -> Option<&[f64]> {
        self.epsilon.as_deref()
    }

    /// Offer a design; infeasible and failed designs are ignored. Returns whether it was kept.
    pub fn insert(&mut self, e: &Evaluated) -> bool {
        if !e.is_feasible() {
            return false;
        }
        match self.epsilon.clone() {
            None => self.insert_plain(e),
            Some(eps) => self.insert_epsilon(e, &eps),
        }
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
