//! `sk`: Sherrington–Kirkpatrick, H(σ) = n^{-1/2} Σ_{i<j} J_ij σ_i σ_j (ξ(q) = q²/2).

use std::sync::{Arc, LazyLock};

use crate::cell::Canon;
use crate::model::{Couplings, Family, FamilyEntry, Instance, sk as dense};
use crate::rng::Id;
use crate::spec::{Settings, SpecError};
use crate::theory::Mixture;

/// The registry entry of `sk`.
pub const ENTRY: FamilyEntry = FamilyEntry {
    name: "sk",
    title: "SK",
    summary: "Sherrington–Kirkpatrick: H(σ) = n^{-1/2} Σ_{i<j} J_ij σ_i σ_j on {±1}^n, ξ(q) = q²/2.",
    keys: &[],
    couplings: &[Couplings::Gaussian, Couplings::Pm1],
    sizes: "the numbers of spins n",
    parse,
};

fn parse(_s: &Settings<'_>) -> Result<Arc<dyn Family>, SpecError> {
    Ok(Arc::new(Sk))
}

/// SK has no parameters.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct Sk;

static XI: LazyLock<Mixture> = LazyLock::new(Mixture::sk);

impl Family for Sk {
    /// Pairwise couplings and no field: H(−σ) = H(σ).
    fn symmetric(&self) -> bool {
        true
    }
    fn name(&self) -> &'static str {
        ENTRY.name
    }
    fn revision(&self) -> u32 {
        dense::REVISION
    }
    fn params_canon(&self, c: Canon) -> Canon {
        c
    }
    fn spins(&self) -> bool {
        true
    }
    fn mixture(&self) -> Option<&Mixture> {
        Some(&XI)
    }
    fn instance_bytes(&self, n: u64) -> u128 {
        dense::instance_bytes(n)
    }
    fn flip_cost(&self, n: u64) -> f64 {
        n as f64
    }
    fn sample(&self, n: usize, couplings: Couplings, instance: &Id, epsilon: f64) -> Instance {
        Instance::Sk(dense::sample(n, couplings, instance, epsilon))
    }
    fn as_any(&self) -> &dyn std::any::Any {
        self
    }
}
