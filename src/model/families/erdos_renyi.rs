//! `erdos-renyi`: spin glass or max-cut on the Erdős–Rényi graph G(n, d/n).

use std::sync::Arc;

use super::{cut_fraction, degree_key};
use crate::algo::Key;
use crate::cell::Canon;
use crate::model::{Couplings, Family, FamilyEntry, Instance, sparse};
use crate::rng::Id;
use crate::spec::{Settings, SpecError};

/// The registry entry of `erdos-renyi`.
pub const ENTRY: FamilyEntry = FamilyEntry {
    name: "erdos-renyi",
    title: "erdos-renyi",
    summary: "Erdős–Rényi graph G(n, d/n), H(σ) = Σ_{edges} J_ij σ_i σ_j; with `cut` couplings maximising H is max-cut.",
    keys: &[DEGREE],
    couplings: &[Couplings::Gaussian, Couplings::Pm1, Couplings::Cut],
    sizes: "the numbers of vertices n",
    parse,
};

const DEGREE: Key = degree_key(
    "the mean degree d (edge probability d/n)",
    "number in (0, 10⁶]",
);

fn parse(s: &Settings<'_>) -> Result<Arc<dyn Family>, SpecError> {
    let Some(d) = s.number("degree")? else {
        return Err(s.missing(
            "degree",
            format!("the `{}` family needs `degree`", ENTRY.name),
            "add e.g. degree = 5 (mean degree d) under [model]",
        ));
    };
    if !(d > 0.0 && d.is_finite() && d <= 1e6) {
        return Err(s.fail(
            "degree",
            format!("degree {d} is out of range"),
            "a degree between 1 and 10⁶",
        ));
    }
    Ok(Arc::new(ErdosRenyi { degree: d }))
}

/// The mean degree d.
#[derive(Clone, Debug, PartialEq)]
pub struct ErdosRenyi {
    pub degree: f64,
}

impl Family for ErdosRenyi {
    /// Pairwise couplings and no field: H(−σ) = H(σ).
    fn symmetric(&self) -> bool {
        true
    }
    fn name(&self) -> &'static str {
        ENTRY.name
    }
    fn revision(&self) -> u32 {
        sparse::REVISION
    }
    fn params_canon(&self, c: Canon) -> Canon {
        c.with("degree", self.degree)
    }
    fn spins(&self) -> bool {
        true
    }
    fn sparse(&self) -> bool {
        true
    }
    /// Six standard deviations above the mean edge count.
    fn instance_bytes(&self, n: u64) -> u128 {
        let m = self.degree * (n as f64 - 1.0) / 2.0;
        sparse::instance_bytes(n, m + 6.0 * m.sqrt() + 16.0)
    }
    fn flip_cost(&self, _n: u64) -> f64 {
        self.degree.max(1.0)
    }
    /// [`crate::model::sparse::SAMPLE_COST`] per stored neighbour.
    fn sample_cost(&self, n: u64) -> f64 {
        sparse::SAMPLE_COST * n as f64 * self.flip_cost(n)
    }
    fn sample(&self, n: usize, couplings: Couplings, instance: &Id, epsilon: f64) -> Instance {
        Instance::Graph(sparse::erdos_renyi(
            n,
            self.degree,
            couplings,
            instance,
            epsilon,
        ))
    }
    fn reduced_scale(&self) -> Option<f64> {
        Some(self.degree.sqrt())
    }
    fn cut_fraction(&self, couplings: Couplings, inst: &Instance, energy: f64) -> Option<f64> {
        cut_fraction(couplings, inst, energy)
    }
    fn as_any(&self) -> &dyn std::any::Any {
        self
    }
}
