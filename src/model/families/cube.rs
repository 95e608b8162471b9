//! `cube`: the mixed p-spin model on the hypercube {±1}^n with covariance ξ(q) = Σ c_p² q^p.

use std::sync::Arc;

use super::{XI, mixed_bytes, mixed_disorder, mixed_flip_cost, mixed_size_problem, read_xi};
use crate::cell::Canon;
use crate::model::{Couplings, Family, FamilyEntry, Instance, mixed::Mixed};
use crate::rng::Id;
use crate::spec::{Settings, SpecError};
use crate::theory::Mixture;

/// The registry entry of `cube`.
pub const ENTRY: FamilyEntry = FamilyEntry {
    name: "cube",
    summary: "Mixed p-spin model on the hypercube {±1}^n: a Gaussian process with covariance n·ξ(⟨σ, σ'⟩/n).",
    keys: &[XI],
    couplings: &[Couplings::Gaussian, Couplings::Pm1],
    sizes: "the numbers of spins n",
    parse,
};

fn parse(s: &Settings<'_>) -> Result<Arc<dyn Family>, SpecError> {
    Ok(Arc::new(Cube {
        xi: read_xi(s, ENTRY.name)?,
    }))
}

/// The cube's parameter: its mixture ξ.
#[derive(Clone, Debug, PartialEq)]
pub struct Cube {
    pub xi: Mixture,
}

impl Family for Cube {
    fn name(&self) -> &'static str {
        ENTRY.name
    }
    fn revision(&self) -> u32 {
        super::MIXED_REVISION
    }
    fn params_canon(&self, c: Canon) -> Canon {
        c.with("xi", self.xi.canon())
    }
    fn disorder_canon(&self, _sampler: Canon, couplings: Couplings) -> Canon {
        mixed_disorder(&self.xi, couplings)
    }
    fn spins(&self) -> bool {
        true
    }
    fn mixture(&self) -> Option<&Mixture> {
        Some(&self.xi)
    }
    fn size_problem(&self, n: u64) -> Option<(String, String)> {
        mixed_size_problem(&self.xi, n)
    }
    fn instance_bytes(&self, n: u64) -> u128 {
        mixed_bytes(&self.xi, n)
    }
    fn flip_cost(&self, n: u64) -> f64 {
        mixed_flip_cost(&self.xi, n)
    }
    fn sample(&self, n: usize, couplings: Couplings, instance: &Id, epsilon: f64) -> Instance {
        Instance::Cube(Mixed::sample(n, &self.xi, couplings, instance, epsilon))
    }
    fn as_any(&self) -> &dyn std::any::Any {
        self
    }
}
