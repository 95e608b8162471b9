//! The short text table `kiln run` prints: per algorithm and size, the mean energy per spin
//! over seeds with its standard error, and the mean distance at each ε (after rounding, and
//! before it for algorithms with a pre-rounding point), modulo the global flip for models
//! where σ and −σ are one state. Constraint families (k-SAT) add the density α and the
//! fraction of instances whose output satisfies every constraint.

use crate::cell::Key;
use crate::spec::Spec;
use crate::spec::plan::Plan;
use crate::store::cache::Record;
use std::collections::HashMap;

use crate::fit::mean_se;

pub fn render(spec: &Spec, plan: &Plan, records: &HashMap<Key, Record>) -> String {
    let eps: Vec<f64> = spec.epsilons.iter().copied().filter(|&e| e > 0.0).collect();
    let width = spec
        .algorithms
        .iter()
        .map(|a| a.label.chars().count())
        .max()
        .unwrap_or(9)
        .max(9);
    let density = spec.model.family.density().is_some();
    let counts = spec.model.family.solved_at_zero();
    let mut s = format!("{:<width$}", "algorithm");
    if density {
        s += &format!("  {:>7}", "α");
    }
    s += &format!("  {:>7}  {:>17}", "n", "energy/n ± se");
    if counts {
        s += &format!("  {:>16}", "solved ± se");
    }
    let points = records.values().any(|r| r.distance_point.is_some());
    // Distances modulo the global flip where σ and −σ are one state (the `_sym` columns).
    let flip = spec.model.symmetric();
    let sym = |d: f64| crate::measure::distance_sym(d, flip);
    let head = if flip {
        "   distance mod ± at ε ="
    } else {
        "   distance at ε ="
    };
    if !eps.is_empty() {
        s += head;
        for e in &eps {
            s += &format!(" {e:>6}");
        }
        if points {
            s += "   before rounding";
        }
    }
    s += "\n";
    for (ai, a) in spec.algorithms.iter().enumerate() {
        for (mi, model) in spec.models.iter().enumerate() {
            for &(n, _) in &spec.sizes {
                let rows: Vec<&Record> = plan
                    .cells
                    .iter()
                    .filter(|c| c.algo == ai && c.model == mi && c.n == n && c.replica == 0)
                    .filter_map(|c| records.get(&c.key))
                    .collect();
                let energies: Vec<f64> = rows
                    .iter()
                    .filter(|r| r.epsilon == 0.0)
                    .map(|r| r.energy)
                    .collect();
                if energies.is_empty() {
                    continue;
                }
                let (m, se) = mean_se(&energies);
                s += &format!("{:<width$}", a.label);
                if let Some(alpha) = model.family.density().filter(|_| density) {
                    s += &format!("  {alpha:>7}");
                }
                s += &format!("  {n:>7}  {m:>8.4} ± {se:<6.4}");
                if counts {
                    // Solved: energy 0 (no constraint violated); binomial standard error.
                    let k = energies.iter().filter(|&&e| e == 0.0).count() as u64;
                    let (p, se) = crate::fit::binomial(k, energies.len() as u64);
                    s += &format!("  {p:>7.3} ± {se:<6.3}");
                }
                if !eps.is_empty() {
                    // Mean of one column per ε level ("-" where no record has it).
                    let means = |f: &dyn Fn(&Record) -> Option<f64>| -> String {
                        eps.iter()
                            .map(|&e| {
                                let d: Vec<f64> = rows
                                    .iter()
                                    .filter(|r| r.epsilon == e)
                                    .filter_map(|r| f(r))
                                    .collect();
                                if d.is_empty() {
                                    format!(" {:>6}", "-")
                                } else {
                                    format!(" {:>6.3}", mean_se(&d).0)
                                }
                            })
                            .collect()
                    };
                    s += &" ".repeat(head.chars().count());
                    s += &means(&|r| Some(sym(r.distance)));
                    if points {
                        s += "  ";
                        s += &means(&|r| r.distance_point.map(sym));
                    }
                }
                s += "\n";
            }
        }
    }
    s
}
