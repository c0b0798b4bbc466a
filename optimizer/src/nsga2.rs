//! NSGA-II (Deb, Pratap, Agarwal and Meyarivan, "A fast and elitist multiobjective genetic
//! algorithm: NSGA-II", IEEE Trans. Evol. Comput. 6 (2002) 182, doi:10.1109/4235.996017):
//! binary crowded tournament, simulated binary crossover (Deb and Agrawal, Complex Systems 9
//! (1995) 115), polynomial mutation, constrained domination, elitist survival by rank and
//! crowding distance, and elimination of exact duplicate offspring.

use crate::doe::{self, InitialDesign};
use crate::dominance::{crowded_compare, crowding_distance, non_dominated_sort, rank_and_crowding};
use crate::problem::{Evaluated, Variable};
use rand::Rng;
use rand_chacha::ChaCha8Rng;
use serde::{Deserialize, Serialize};
use std::collections::HashSet;

/// Settings of NSGA-II. [`Default`] gives the usual settings of Deb et al. (2002).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(default)]
pub struct Nsga2Config {
    /// Population size N (at least 4).
    pub population_size: usize,
    /// Probability that a pair of parents is recombined by SBX (0.9).
    pub crossover_probability: f64,
    /// Distribution index of simulated binary crossover (20).
    pub crossover_eta: f64,
    /// Distribution index of polynomial mutation (20).
    pub mutation_eta: f64,
    /// Per-variable mutation probability; `None` means 1/n for n variables.
    pub mutation_probability: Option<f64>,
    /// How the initial population is drawn.
    pub initial: InitialDesign,
}

impl Default for Nsga2Config {
    fn default() -> Self {
        Nsga2Config {
            population_size: 100,
            crossover_probability: 0.9,
            crossover_eta: 20.0,
            mutation_eta: 20.0,
            mutation_probability: None,
            initial: InitialDesign::LatinHypercube,
        }
    }
}

impl Nsga2Config {
    pub(crate) fn validate(&self) -> Result<(), String> {
        if self.population_size < 4 {
            return Err(format!(
                "population_size is {}, must be at least 4",
                self.population_size
            ));
        }
        if !(0.0..=1.0).contains(&self.crossover_probability) {
            return Err("crossover_probability must be in [0, 1]".into());
        }
        if !(self.crossover_eta.is_finite() && self.crossover_eta >= 0.0) {
            return Err("crossover_eta must be finite and >= 0".into());
        }
        if !(self.mutation_eta.is_finite() && self.mutation_eta >= 0.0) {
            return Err("mutation_eta must be finite and >= 0".into());
        }
        if let Some(p) = self.mutation_probability {
            if !(0.0..=1.0).contains(&p) {
                return Err("mutation_probability must be in [0, 1]".into());
            }
        }
        Ok(())
    }
}

/// Simulated binary crossover of one pair, bounded form as in Deb's reference NSGA-II code:
/// each variable is recombined with probability 0.5.
fn sbx(
    p1: &[f64],
    p2: &[f64],
    vars: &[Variable],
    eta: f64,
    rng: &mut ChaCha8Rng,
) -> (Vec<f64>, Vec<f64>) {
    let mut c1 = p1.to_vec();
    let mut c2 = p2.to_vec();
    for (i, v) in vars.iter().enumerate() {
        // The draws happen whatever the branch, so that their count is fixed per variable.
        let r_var: f64 = rng.random();
        let u: f64 = rng.random();
        let r_swap: f64 = rng.random();
        if r_var > 0.5 || (p1[i] - p2[i]).abs() <= 1e-14 || v.upper <= v.lower {
            continue;
        }
        let (yl, yu) = (v.lower, v.upper);
        let y1 = p1[i].min(p2[i]);
        let y2 = p1[i].max(p2[i]);
        let e1 = eta + 1.0;
        let betaq = |beta: f64| {
            let alpha = 2.0 - pow(beta, -e1);
            if u <= 1.0 / alpha {
                (u * alpha).powf(1.0 / e1)
            } else {
                (1.0 / (2.0 - u * alpha)).powf(1.0 / e1)
            }
        };
        let b1 = betaq(1.0 + 2.0 * (y1 - yl) / (y2 - y1));
        let a = (0.5 * ((y1 + y2) - b1 * (y2 - y1))).clamp(yl, yu);
        let b2 = betaq(1.0 + 2.0 * (yu - y2) / (y2 - y1));
        let b = (0.5 * ((y1 + y2) + b2 * (y2 - y1))).clamp(yl, yu);
        if r_swap <= 0.5 {
            c1[i] = b;
            c2[i] = a;
        } else {
            c1[i] = a;
            c2[i] = b;
        }
    }
    (c1, c2)
}

/// Polynomial mutation (Deb and Goyal 1996; the bounded form of Deb's reference code).
fn polynomial_mutation(x: &mut [f64], vars: &[Variable], eta: f64, pm: f64, rng: &mut ChaCha8Rng) {
    for (i, v) in vars.iter().enumerate() {
        let r_mut: f64 = rng.random();
        let u: f64 = rng.random();
        if r_mut >= pm || v.upper <= v.lower {
            continue;
        }
        let (yl, yu) = (v.lower, v.upper);
        let y = x[i];
        let d1 = (y - yl) / (yu - yl);
        let d2 = (yu - y) / (yu - yl);
        let p = 1.0 / (eta + 1.0);
        let dq = if u <= 0.5 {
            let val = 2.0 * u + (1.0 - 2.0 * u) * pow(1.0 - d1, eta + 1.0);
            val.powf(p) - 1.0
        } else {
            let val = 2.0 * (1.0 - u) + 2.0 * (u - 0.5) * pow(1.0 - d2, eta + 1.0);
            1.0 - val.powf(p)
        };
        x[i] = (y + dq * (yu - yl)).clamp(yl, yu);
    }
}

/// `x^e`, by repeated multiplication when `e` is a small whole number (the usual distribution
/// indices are), otherwise `powf`.
fn pow(x: f64, e: f64) -> f64 {
    if e.fract() == 0.0 && e.abs() <= 64.0 {
        powi(x, e as i32)
    } else {
        x.powf(e)
    }
}

/// `x^k` by binary powering, the same multiplications in the same order as `f64::powi` does
/// them (`__powidf2`), so the same bits (unit test `inline_powi_equals_std_powi`), but inlined:
/// no call per use.
#[inline]
fn powi(mut x: f64, k: i32) -> f64 {
    let mut bits = k.unsigned_abs();
    let mut acc = 1.0;
    loop {
        if bits & 1 != 0 {
            acc *= x;
        }
        bits >>= 1;
        if bits == 0 {
            break;
        }
        x *= x;
    }
    if k < 0 {
        1.0 / acc
    } else {
        acc
    }
}

/// A fast, deterministic hasher for the duplicate check (the set is only queried, never
/// iterated, so its order cannot leak into results).
#[derive(Default)]
struct BitsHasher(u64);

impl std::hash::Hasher for BitsHasher {
    fn finish(&self) -> u64 {
        self.0
    }
    fn write(&mut self, bytes: &[u8]) {
        // A `[u64]` is hashed as its bytes in one call: take them eight at a time.
        let mut chunks = bytes.chunks_exact(8);
        for c in &mut chunks {
            self.write_u64(u64::from_le_bytes(c.try_into().expect("eight bytes")));
        }
        for b in chunks.remainder() {
            self.write_u64(u64::from(*b));
        }
    }
    fn write_u64(&mut self, v: u64) {
        self.0 = (self.0.rotate_left(5) ^ v).wrapping_mul(0x517c_c1b7_2722_0a95);
    }
    fn write_usize(&mut self, v: usize) {
        self.write_u64(v as u64);
    }
}

type BuildBits = std::hash::BuildHasherDefault<BitsHasher>;

/// A design's variables compared and hashed bit for bit (no copy).
struct Bits<'a>(&'a [f64]);

impl PartialEq for Bits<'_> {
    fn eq(&self, other: &Self) -> bool {
        same_bits(self.0, other.0)
    }
}

impl Eq for Bits<'_> {}

impl std::hash::Hash for Bits<'_> {
    fn hash<H: std::hash::Hasher>(&self, state: &mut H) {
        for v in self.0 {
            state.write_u64(v.to_bits());
        }
    }
}

fn same_bits(a: &[f64], b: &[f64]) -> bool {
    a.len() == b.len() && a.iter().zip(b).all(|(x, y)| x.to_bits() == y.to_bits())
}

fn bits_hash(x: &[f64]) -> u64 {
    use std::hash::BuildHasher;
    BuildBits::default().hash_one(Bits(x))
}

/// The initial population: `count` points of the configured design.
pub(crate) fn initial(
    cfg: &Nsga2Config,
    vars: &[Variable],
    rng: &mut ChaCha8Rng,
    count: usize,
) -> Vec<Vec<f64>> {
    doe::design(cfg.initial, vars, count, rng)
}

/// `count` offspring of `pop` by crowded binary tournament, SBX and polynomial mutation; an
/// offspring identical to a member of `pop` or to an earlier offspring is discarded and
/// replaced (up to a bounded number of tries).
pub(crate) fn offspring(
    cfg: &Nsga2Config,
    vars: &[Variable],
    rng: &mut ChaCha8Rng,
    pop: &[Evaluated],
    ranking: Option<Ranking>,
    count: usize,
) -> Vec<Vec<f64>> {
    let (rank, crowd) = match ranking {
        Some(r) if r.0.len() == pop.len() => r,
        _ => rank_and_crowding(pop),
    };
    let n = pop.len();
    let pm = cfg
        .mutation_probability
        .unwrap_or(1.0 / vars.len().max(1) as f64);
    // Designs seen: the parents (borrowed), and the offspring kept so far by hash, checked
    // bit for bit against `out` on a hash match.
    let mut parents: HashSet<Bits, BuildBits> =
        HashSet::with_capacity_and_hasher(2 * n, Default::default());
    parents.extend(pop.iter().map(|e| Bits(&e.x)));
    let mut kept: HashSet<u64, BuildBits> =
        HashSet::with_capacity_and_hasher(2 * count, Default::default());
    let mut out: Vec<Vec<f64>> = Vec::with_capacity(count);
    let mut tries = 0usize;
    let max_tries = 20 * count + 100;
    let tournament = |rng: &mut ChaCha8Rng| {
        let a = rng.random_range(0..n);
        let b = rng.random_range(0..n);
        let coin: bool = rng.random();
        match crowded_compare(&rank, &crowd, a, b) {
            std::cmp::Ordering::Less => a,
            std::cmp::Ordering::Greater => b,
            std::cmp::Ordering::Equal => {
                if coin {
                    a
                } else {
                    b
                }
            }
        }
    };
    while out.len() < count {
        let i = tournament(rng);
        let j = tournament(rng);
        let r_cross: f64 = rng.random();
        let (mut c1, mut c2) = if r_cross < cfg.crossover_probability {
            sbx(&pop[i].x, &pop[j].x, vars, cfg.crossover_eta, rng)
        } else {
            (pop[i].x.clone(), pop[j].x.clone())
        };
        polynomial_mutation(&mut c1, vars, cfg.mutation_eta, pm, rng);
        polynomial_mutation(&mut c2, vars, cfg.mutation_eta, pm, rng);
        for c in [c1, c2] {
            if out.len() >= count {
                break;
            }
            tries += 1;
            let h = bits_hash(&c);
            let seen = parents.contains(&Bits(&c))
                || (kept.contains(&h) && out.iter().any(|o| same_bits(o, &c)));
            if seen && tries <= max_tries {
                continue;
            }
            kept.insert(h);
            out.push(c);
        }
    }
    out
}

/// Rank and crowding distance of every member of a population, as
/// [`rank_and_crowding`] gives them.
pub(crate) type Ranking = (Vec<usize>, Vec<f64>);

/// A population's [`Ranking`] kept from its survival for the next generation's tournament.
/// Derived from the population alone, it is not part of a run's state: it is not serialised,
/// does not count in comparisons, and is recomputed when missing (after a resume).
#[derive(Debug, Clone, Default)]
pub(crate) struct RankingCache(pub(crate) Option<Ranking>);

impl PartialEq for RankingCache {
    fn eq(&self, _: &Self) -> bool {
        true
    }
}

/// Elitist survival: the best `n` of the population and its offspring `new` (taken together in
/// that order) by constrained non-dominated rank, the last front cut by crowding distance
/// (ties kept in index order, so the result is deterministic). Only the offspring that survive
/// are copied. Also returns the survivors' ranking, the same as [`rank_and_crowding`] of
/// them: every front but the last one taken is whole and in the same order, so its ranks and
/// crowding distances carry over; the last one's distances are measured again among the
/// members kept. `None` when everyone survives without a sort.
pub(crate) fn survive(
    population: Vec<Evaluated>,
    new: &[Evaluated],
    n: usize,
) -> (Vec<Evaluated>, Option<Ranking>) {
    if population.len() + new.len() <= n {
        let mut all = population;
        all.extend_from_slice(new);
        return (all, None);
    }
    let merged: Vec<&Evaluated> = population.iter().chain(new).collect();
    let (fronts, _) = non_dominated_sort(&merged);
    let mut chosen: Vec<usize> = Vec::with_capacity(n);
    let mut rank: Vec<usize> = Vec::with_capacity(n);
    let mut crowd: Vec<f64> = Vec::with_capacity(n);
    let mut cut: Option<std::ops::Range<usize>> = None;
    for (r, front) in fronts.into_iter().enumerate() {
        let d = crowding_distance(&merged, &front);
        if chosen.len() + front.len() <= n {
            chosen.extend_from_slice(&front);
            crowd.extend_from_slice(&d);
        } else {
            let mut order: Vec<usize> = (0..front.len()).collect();
            order.sort_by(|&a, &b| d[b].total_cmp(&d[a]).then(a.cmp(&b)));
            let need = n - chosen.len();
            cut = Some(chosen.len()..n);
            chosen.extend(order.into_iter().take(need).map(|k| front[k]));
            crowd.resize(n, 0.0);
        }
        rank.resize(chosen.len(), r);
        if chosen.len() >= n {
            break;
        }
    }
    drop(merged);
    let old = population.len();
    let mut slots: Vec<Option<Evaluated>> = population.into_iter().map(Some).collect();
    let survivors: Vec<Evaluated> = chosen
        .into_iter()
        .map(|i| match i.checked_sub(old) {
            Some(k) => new[k].clone(),
            None => slots[i].take().expect("each chosen once"),
        })
        .collect();
    if let Some(range) = cut {
        let members: Vec<usize> = range.clone().collect();
        let d = crowding_distance(&survivors, &members);
        crowd[range].copy_from_slice(&d);
    }
    (survivors, Some((rank, crowd)))
}

#[cfg(test)]
mod tests {
    use super::*;
    use rand::SeedableRng;

    fn vars(n: usize) -> Vec<Variable> {
        (0..n)
            .map(|i| Variable::new(format!("x{i}"), 0.0, 1.0))
            .collect()
    }

    #[test]
    fn sbx_and_mutation_stay_in_bounds() {
        let v = vars(5);
        let mut rng = ChaCha8Rng::seed_from_u64(3);
        for _ in 0..2000 {
            let p1: Vec<f64> = (0..5).map(|_| rng.random()).collect();
            let p2: Vec<f64> = (0..5).map(|_| rng.random()).collect();
            let (mut a, b) = sbx(&p1, &p2, &v, 20.0, &mut rng);
            polynomial_mutation(&mut a, &v, 20.0, 1.0, &mut rng);
            assert!(a.iter().chain(&b).all(|x| (0.0..=1.0).contains(x)));
        }
    }

    #[test]
    fn offspring_never_repeat_a_parent_or_each_other() {
        // Duplicate elimination (as in the module doc): without crossover and with mutation
        // of one variable in two, about half of all candidates are copies of a parent; none
        // may be kept while the tries last.
        let v = vars(1);
        let mut rng = ChaCha8Rng::seed_from_u64(8);
        let pop: Vec<Evaluated> = (0..20)
            .map(|i| Evaluated {
                id: i,
                generation: 0,
                x: vec![i as f64 / 20.0],
                objectives: vec![i as f64, 20.0 - i as f64],
                constraints: vec![],
                violation: 0.0,
                failure: None,
            })
            .collect();
        let cfg = Nsga2Config {
            crossover_probability: 0.0,
            mutation_probability: Some(0.5),
            ..Nsga2Config::default()
        };
        let out = offspring(&cfg, &v, &mut rng, &pop, None, 20);
        assert_eq!(out.len(), 20);
        for (k, c) in out.iter().enumerate() {
            assert!(
                pop.iter().all(|e| !same_bits(&e.x, c)),
                "{c:?} repeats a parent"
            );
            assert!(out[..k].iter().all(|o| !same_bits(o, c)), "{c:?} repeated");
        }
    }

    #[test]
    fn survivors_ranking_equals_a_fresh_ranking() {
        // The ranking kept from survival must be exactly `rank_and_crowding` of the survivors
        // (the fast non-dominated sort and crowding distance of Deb et al. 2002), including
        // tied objectives, infeasible and failed members, and a cut through the last front.
        let mut rng = ChaCha8Rng::seed_from_u64(21);
        for case in 0..300 {
            let m = 2 + case % 3;
            let member = |id: u64, rng: &mut ChaCha8Rng| {
                let kind: f64 = rng.random();
                let objectives: Vec<f64> = (0..m)
                    .map(|_| f64::from(rng.random_range(0..6u8)))
                    .collect();
                let failed = kind > 0.95;
                Evaluated {
                    id,
                    generation: 0,
                    x: vec![id as f64],
                    objectives: if failed { vec![] } else { objectives },
                    constraints: vec![],
                    violation: if failed {
                        f64::MAX
                    } else if kind < 0.15 {
                        f64::from(rng.random_range(1..4u8))
                    } else {
                        0.0
                    },
                    failure: failed.then(|| "failed".to_string()),
                }
            };
            let pop: Vec<Evaluated> = (0..30).map(|i| member(i, &mut rng)).collect();
            let new: Vec<Evaluated> = (30..60).map(|i| member(i, &mut rng)).collect();
            let (survivors, ranking) = survive(pop, &new, 30);
            let (rank, crowd) = ranking.expect("a sort was needed");
            let (want_rank, want_crowd) = rank_and_crowding(&survivors);
            assert_eq!(rank, want_rank, "case {case}");
            let bits = |v: &[f64]| v.iter().map(|x| x.to_bits()).collect::<Vec<_>>();
            assert_eq!(bits(&crowd), bits(&want_crowd), "case {case}");
        }
    }

    #[test]
    fn inline_powi_equals_std_powi() {
        // Reference: the standard library's `f64::powi`, bit for bit, over the exponents the
        // distribution indices give (eta + 1 and its negative) and a few more.
        let mut rng = ChaCha8Rng::seed_from_u64(12);
        for k in (-65..=65).chain([i32::MIN + 1, i32::MAX]) {
            for _ in 0..200 {
                let x: f64 = rng.random_range(-3.0..3.0);
                let want = std::hint::black_box(x).powi(std::hint::black_box(k));
                assert_eq!(powi(x, k).to_bits(), want.to_bits(), "{x}^{k}");
            }
        }
    }

    #[test]
    fn sbx_preserves_the_mean_of_the_parents() {
        // Property of SBX (Deb and Agrawal 1995): children are symmetric about the parents'
        // mean when no bound is hit.
        let v = vec![Variable::new("x", -1e6, 1e6)];
        let mut rng = ChaCha8Rng::seed_from_u64(5);
        for _ in 0..500 {
            let (a, b) = sbx(&[0.3], &[0.7], &v, 20.0, &mut rng);
            assert!((a[0] + b[0] - 1.0).abs() < 1e-9);
        }
    }
}
