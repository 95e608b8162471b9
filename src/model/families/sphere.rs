//! `sphere`: the mixed p-spin model on the sphere ‖x‖² = n with covariance ξ(q) = Σ c_p² q^p.

use std::sync::Arc;

use super::{XI, mixed_bytes, mixed_disorder, mixed_flip_cost, mixed_size_problem, read_xi};
use crate::cell::Canon;
use crate::model::{Couplings, Family, FamilyEntry, Instance, mixed::Mixed};
use crate::rng::Id;
use crate::spec::{Settings, SpecError};
use crate::theory::Mixture;

/// The registry entry of `sphere`.
pub const ENTRY: FamilyEntry = FamilyEntry {
    name: "sphere",
    summary: "Mixed p-spin model on the sphere ‖x‖² = n: the same process on real points (its couplings are the cube's for the same ξ).",
    keys: &[XI],
    couplings: &[Couplings::Gaussian, Couplings::Pm1],
    sizes: "the numbers of spins n",
    parse,
};

fn parse(s: &Settings<'_>) -> Result<Arc<dyn Family>, SpecError> {
    Ok(Arc::new(Sphere {
        xi: read_xi(s, ENTRY.name)?,
    }))
}

/// The sphere's parameter: its mixture ξ.
#[derive(Clone, Debug, PartialEq)]
pub struct Sphere {
    pub xi: Mixture,
}

impl Family for Sphere {
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
        false
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
        Instance::Sphere(Mixed::sample(n, &self.xi, couplings, instance, epsilon))
    }
    fn as_any(&self) -> &dyn std::any::Any {
        self
    }
}
