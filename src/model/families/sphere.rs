//! `sphere`: the mixed p-spin model on the sphere ‖x‖² = n with covariance ξ(q) = Σ c_p² q^p.

use std::sync::Arc;

use super::{MIXTURE_STORAGE, MixtureFamily, XI, read_storage, read_xi};
use crate::model::{Couplings, Family, FamilyEntry};
use crate::spec::{Settings, SpecError};

/// The registry entry of `sphere`.
pub const ENTRY: FamilyEntry = FamilyEntry {
    name: "sphere",
    title: "sphere",
    summary: "Mixed p-spin model on the sphere ‖x‖² = n: the same process on real points (its couplings are the cube's for the same ξ).",
    keys: &[XI, MIXTURE_STORAGE],
    couplings: &[Couplings::Gaussian, Couplings::Pm1],
    sizes: "the numbers of spins n",
    parse,
};

fn parse(s: &Settings<'_>) -> Result<Arc<dyn Family>, SpecError> {
    let xi = read_xi(s, ENTRY.name)?;
    let storage = read_storage(s, &xi)?;
    Ok(Arc::new(Sphere { xi, storage }))
}

/// The sphere's parameter: its mixture ξ.
pub type Sphere = MixtureFamily<true>;
