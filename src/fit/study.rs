//! A study's finite-size-scaling fits: the table's energies grouped per (family, couplings, ε,
//! algorithm), one weighted fit per group (with the same fit dropping the smallest size), and a
//! paired bootstrap over instance seeds — one draw of seeds per size shared by every algorithm
//! of the group, so differences between algorithms carry the pairing (common practice for
//! paired comparisons; streams from the group's identity, so replicates are reproducible).

use std::collections::BTreeMap;

use super::{Fit, Params, Point};
use crate::cell::Canon;
use crate::rng::{Purpose, stream};
use crate::store::table::Cells;

/// (model, couplings, ε bits) → algorithm label → (n → seed → energy). The model is the
/// family, with its density for constraint families (`ksat α=4.2`, see
/// [`Cells::model`]), so rows at different densities are fitted apart.
type Groups = BTreeMap<(String, String, u64), BTreeMap<String, BTreeMap<u64, BTreeMap<u64, f64>>>>;

/// One fit: a (family, couplings, ε, algorithm) group of the table.
pub struct Row {
    pub family: String,
    pub couplings: String,
    pub epsilon: f64,
    pub algorithm: String,
    pub sizes: usize,
    pub min_n: u64,
    pub max_n: u64,
    pub fit: Fit,
    /// Standard deviation of e∞ over the paired bootstrap replicates.
    pub boot_se: Option<f64>,
    /// The same fit without the smallest size.
    pub drop: Option<Fit>,
}

pub(crate) fn points_of(by_n: &BTreeMap<u64, BTreeMap<u64, f64>>) -> Vec<Point> {
    let samples: Vec<(u64, f64)> = by_n
        .iter()
        .flat_map(|(&n, seeds)| seeds.values().map(move |&e| (n, e)))
        .collect();
    super::points(&samples)
}

/// The difference of two algorithms' e∞ in one group, with its paired-bootstrap error.
pub struct Difference {
    pub family: String,
    pub couplings: String,
    pub epsilon: f64,
    pub a: String,
    pub b: String,
    pub difference: f64,
    pub se: f64,
}

/// Every fit of a table, the paired differences, and the groups that could not be fitted.
pub struct Study {
    pub rows: Vec<Row>,
    pub differences: Vec<Difference>,
    pub problems: Vec<String>,
}

/// Fits every group of the table: only the sizes in `sizes`, only ε = 0 when
/// `reference_only`, `bootstrap` paired replicates (0 to skip).
pub fn extrapolate(
    cells: &Cells,
    params: &Params,
    sizes: std::ops::RangeInclusive<u64>,
    reference_only: bool,
    bootstrap: usize,
) -> Study {
    let (coup, alg) = (&cells.couplings, &cells.algorithm);
    let (ns, seeds, eps) = (&cells.n, &cells.seed, &cells.epsilon);
    let energy = &cells.energy_perturbed;
    let mut groups: Groups = BTreeMap::new();
    for i in 0..cells.len() {
        if !sizes.contains(&ns[i]) || (reference_only && eps[i] != 0.0) {
            continue;
        }
        groups
            .entry((cells.model(i), coup[i].clone(), eps[i].to_bits()))
            .or_default()
            .entry(alg[i].clone())
            .or_default()
            .entry(ns[i])
            .or_default()
            .insert(seeds[i], energy[i]);
    }

    let mut rows: Vec<Row> = Vec::new();
    let mut diffs: Vec<Difference> = Vec::new();
    let mut problems: Vec<String> = Vec::new();
    for ((family, couplings, eps_bits), algs) in &groups {
        let epsilon = f64::from_bits(*eps_bits);
        let mut fits: BTreeMap<&String, Fit> = BTreeMap::new();
        for (label, by_n) in algs {
            let pts = points_of(by_n);
            match super::fit(&pts, params) {
                Ok(f) => {
                    let drop = (pts.len() > 1)
                        .then(|| super::fit(&pts[1..], params).ok())
                        .flatten();
                    fits.insert(label, f.clone());
                    rows.push(Row {
                        family: family.clone(),
                        couplings: couplings.clone(),
                        epsilon,
                        algorithm: label.clone(),
                        sizes: pts.len(),
                        min_n: pts.first().map_or(0, |p| p.n as u64),
                        max_n: pts.last().map_or(0, |p| p.n as u64),
                        fit: f,
                        boot_se: None,
                        drop,
                    });
                }
                Err(e) => problems.push(format!("{family}/{label}/ε={epsilon}: {e}")),
            }
        }
        if bootstrap == 0 || fits.is_empty() {
            continue;
        }
        // Paired bootstrap: one draw of seeds per size, shared by all algorithms of the group.
        let id = Canon::map()
            .with("family", family.as_str())
            .with("couplings", couplings.as_str())
            .with("epsilon", epsilon)
            .hash("bootstrap");
        let labels: Vec<&String> = fits.keys().copied().collect();
        let mut reps: BTreeMap<&String, Vec<f64>> = BTreeMap::new();
        // Per size, the seeds of the group (from its first algorithm), and each algorithm's
        // original points: fixed across replicates, so computed once.
        let seeds_by_n: Vec<(u64, Vec<u64>)> = labels
            .iter()
            .flat_map(|l| algs[*l].keys().copied())
            .collect::<std::collections::BTreeSet<u64>>()
            .into_iter()
            .filter_map(|n| {
                let seeds: Vec<u64> = algs[labels[0]].get(&n)?.keys().copied().collect();
                (!seeds.is_empty()).then_some((n, seeds))
            })
            .collect();
        let originals: Vec<Vec<Point>> = labels.iter().map(|l| points_of(&algs[*l])).collect();
        for b in 0..bootstrap {
            let mut rng = stream(&id, Purpose::Bootstrap, b as u64);
            // Per size: the group's seeds resampled with replacement.
            let draw: BTreeMap<u64, Vec<u64>> = seeds_by_n
                .iter()
                .map(|(n, seeds)| {
                    let d = (0..seeds.len())
                        .map(|_| seeds[rng.below(seeds.len() as u64) as usize])
                        .collect();
                    (*n, d)
                })
                .collect();
            for (&l, original) in labels.iter().zip(&originals) {
                let pts: Vec<Point> = original
                    .iter()
                    .filter_map(|p| {
                        let n = p.n as u64;
                        let m = algs[l].get(&n)?;
                        let d = draw.get(&n)?;
                        let xs: Vec<f64> = d.iter().filter_map(|s| m.get(s).copied()).collect();
                        (!xs.is_empty()).then(|| Point {
                            mean: xs.iter().sum::<f64>() / xs.len() as f64,
                            ..p.clone()
                        })
                    })
                    .collect();
                if let Ok(f) = super::fit(&pts, params) {
                    reps.entry(l).or_default().push(f.e_inf);
                }
            }
        }
        let sd = |xs: &[f64]| super::mean_var(xs).1.sqrt();
        for r in rows.iter_mut().filter(|r| {
            r.family == *family && r.couplings == *couplings && r.epsilon.to_bits() == *eps_bits
        }) {
            if let Some(v) = reps.get(&r.algorithm)
                && v.len() > 1
            {
                r.boot_se = Some(sd(v));
            }
        }
        for i in 0..labels.len() {
            for j in i + 1..labels.len() {
                let (x, y) = (&reps.get(labels[i]), &reps.get(labels[j]));
                if let (Some(x), Some(y)) = (x, y)
                    && x.len() == y.len()
                    && x.len() > 1
                {
                    let d: Vec<f64> = x.iter().zip(y.iter()).map(|(p, q)| p - q).collect();
                    diffs.push(Difference {
                        family: family.clone(),
                        couplings: couplings.clone(),
                        epsilon,
                        a: labels[i].clone(),
                        b: labels[j].clone(),
                        difference: fits[labels[i]].e_inf - fits[labels[j]].e_inf,
                        se: sd(&d),
                    });
                }
            }
        }
    }
    Study {
        rows,
        differences: diffs,
        problems,
    }
}

/// One (algorithm, n, α) cell of the threshold view of a constraint family: how many of its
/// formulas the algorithm's reference output (ε = 0) satisfies completely (energy 0).
#[derive(Clone, Debug, PartialEq)]
pub struct Solved {
    pub algorithm: String,
    pub n: u64,
    pub density: f64,
    pub solved: u64,
    pub formulas: u64,
}

impl Solved {
    /// The fraction solved and its binomial standard error √(p(1 − p)/N).
    pub fn fraction(&self) -> (f64, f64) {
        super::binomial(self.solved, self.formulas)
    }
}

/// The threshold view of a table: per (algorithm in table order, n, α increasing), the
/// formulas solved at ε = 0. Empty for tables without a density.
pub fn solved(cells: &Cells) -> Vec<Solved> {
    let mut order: Vec<&String> = Vec::new();
    let mut counts: BTreeMap<(usize, u64, u64), (u64, u64)> = BTreeMap::new();
    for i in 0..cells.len() {
        let Some(alpha) = cells.density[i] else {
            continue;
        };
        if cells.epsilon[i] != 0.0 {
            continue;
        }
        let label = &cells.algorithm[i];
        let a = match order.iter().position(|l| *l == label) {
            Some(a) => a,
            None => {
                order.push(label);
                order.len() - 1
            }
        };
        let c = counts.entry((a, cells.n[i], alpha.to_bits())).or_default();
        c.0 += (cells.energy[i] == 0.0) as u64;
        c.1 += 1;
    }
    let mut rows: Vec<Solved> = counts
        .into_iter()
        .map(|((a, n, bits), (solved, formulas))| Solved {
            algorithm: order[a].clone(),
            n,
            density: f64::from_bits(bits),
            solved,
            formulas,
        })
        .collect();
    // Densities are positive, so their bits order as the numbers do; keep (algorithm, n, α).
    rows.sort_by(|x, y| {
        let ax = order.iter().position(|l| **l == x.algorithm);
        let ay = order.iter().position(|l| **l == y.algorithm);
        ax.cmp(&ay)
            .then(x.n.cmp(&y.n))
            .then(x.density.total_cmp(&y.density))
    });
    rows
}
