//! `regular`: spin glass or max-cut on a uniformly random d-regular graph.

use std::sync::Arc;

use super::{cut_fraction, degree_key};
use crate::algo::Key;
use crate::cell::Canon;
use crate::model::{Couplings, Family, FamilyEntry, Instance, sparse};
use crate::rng::Id;
use crate::spec::{Settings, SpecError};

/// The registry entry of `regular`.
pub const ENTRY: FamilyEntry = FamilyEntry {
    name: "regular",
    title: "regular",
    summary: "Random d-regular graph, H(σ) = Σ_{edges} J_ij σ_i σ_j; with `cut` couplings maximising H is max-cut.",
    keys: &[DEGREE],
    couplings: &[Couplings::Gaussian, Couplings::Pm1, Couplings::Cut],
    sizes: "the numbers of vertices n (n > d, n·d even)",
    parse,
};

const DEGREE: Key = degree_key("the degree d of every vertex", "integer in [1, 10⁶]");

fn parse(s: &Settings<'_>) -> Result<Arc<dyn Family>, SpecError> {
    let d = match s.value("degree") {
        None => {
            return Err(s.missing(
                "degree",
                format!("the `{}` family needs `degree`", ENTRY.name),
                "add e.g. degree = 3 under [model]",
            ));
        }
        Some(toml::Value::Integer(i)) => *i,
        Some(_) => {
            return Err(s.fail(
                "degree",
                "degree must be a number",
                "a whole degree d ≥ 1, e.g. degree = 3",
            ));
        }
    };
    if !(1..=1_000_000).contains(&d) {
        return Err(s.fail(
            "degree",
            format!("degree {d} is out of range"),
            "a degree between 1 and 10⁶",
        ));
    }
    Ok(Arc::new(Regular { degree: d as u64 }))
}

/// The degree d.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct Regular {
    pub degree: u64,
}

impl Family for Regular {
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
        // A real in the canonical form, as it always was (keys do not change).
        c.with("degree", self.degree as f64)
    }
    fn spins(&self) -> bool {
        true
    }
    fn sparse(&self) -> bool {
        true
    }
    fn size_problem(&self, n: u64) -> Option<(String, String)> {
        let d = self.degree;
        if d >= n {
            Some((
                format!("no simple {d}-regular graph on n = {n} vertices"),
                "a d-regular graph needs n > d".into(),
            ))
        } else if (n * d) % 2 == 1 {
            Some((
                format!("n·d = {n}·{d} is odd: no {d}-regular graph on {n} vertices"),
                "use an even n (or an even degree)".into(),
            ))
        } else {
            None
        }
    }
    fn instance_bytes(&self, n: u64) -> u128 {
        sparse::regular_bytes(n, self.degree as f64 * n as f64 / 2.0)
    }
    fn flip_cost(&self, _n: u64) -> f64 {
        (self.degree as f64).max(1.0)
    }
    /// [`crate::model::sparse::SAMPLE_COST`] per stored neighbour.
    fn sample_cost(&self, n: u64) -> f64 {
        sparse::SAMPLE_COST * n as f64 * self.flip_cost(n)
    }
    fn sample(&self, n: usize, couplings: Couplings, instance: &Id, epsilon: f64) -> Instance {
        Instance::Graph(sparse::regular(
            n,
            self.degree as usize,
            couplings,
            instance,
            epsilon,
        ))
    }
    fn reduced_scale(&self) -> Option<f64> {
        Some((self.degree as f64).sqrt())
    }
    fn cut_fraction(&self, couplings: Couplings, inst: &Instance, energy: f64) -> Option<f64> {
        cut_fraction(couplings, inst, energy)
    }
    fn as_any(&self) -> &dyn std::any::Any {
        self
    }
}
