//! `cube`: the mixed p-spin model on the hypercube {±1}^n with covariance ξ(q) = Σ c_p² q^p.

use std::sync::Arc;

use super::{MIXTURE_STORAGE, MixtureFamily, XI, read_storage, read_xi};
use crate::model::{Couplings, Family, FamilyEntry};
use crate::spec::{Settings, SpecError};

/// The registry entry of `cube`.
pub const ENTRY: FamilyEntry = FamilyEntry {
    name: "cube",
    title: "cube",
    summary: "Mixed p-spin model on the hypercube {±1}^n: a Gaussian process with covariance n·ξ(⟨σ, σ'⟩/n).",
    keys: &[XI, MIXTURE_STORAGE],
    couplings: &[Couplings::Gaussian, Couplings::Pm1],
    sizes: "the numbers of spins n",
    parse,
};

fn parse(s: &Settings<'_>) -> Result<Arc<dyn Family>, SpecError> {
    let xi = read_xi(s, ENTRY.name)?;
    let storage = read_storage(s, &xi)?;
    Ok(Arc::new(Cube { xi, storage }))
}

/// The cube's parameter: its mixture ξ.
pub type Cube = MixtureFamily<false>;
