//! `sk`: Sherrington–Kirkpatrick, H(σ) = n^{-1/2} Σ_{i<j} J_ij σ_i σ_j (ξ(q) = q²/2).

use std::sync::{Arc, LazyLock};

use crate::algo::Key;
use crate::cell::Canon;
use crate::model::sk::{self as dense, Storage};
use crate::model::{Couplings, Family, FamilyEntry, Instance};
use crate::rng::Id;
use crate::spec::{Settings, SpecError};
use crate::theory::Mixture;

/// The registry entry of `sk`.
pub const ENTRY: FamilyEntry = FamilyEntry {
    name: "sk",
    title: "SK",
    summary: "Sherrington–Kirkpatrick: H(σ) = n^{-1/2} Σ_{i<j} J_ij σ_i σ_j on {±1}^n, ξ(q) = q²/2.",
    keys: &[STORAGE],
    couplings: &[Couplings::Gaussian, Couplings::Pm1],
    sizes: "the numbers of spins n",
    parse,
};

const STORAGE: Key = Key {
    name: "storage",
    ty: "\"f64\", \"f32\" or \"implicit\"",
    default: "\"f64\"",
    doc: "how the couplings are held: the full f64 matrix (8n² bytes); one f32 triangle (2n² bytes; the f64 instance rounded once, so its numbers differ by that rounding); or none, each coupling recomputed from a counter-based generator (O(n) bytes, n²/2 generations per product; a different instance of the same law). Enters the cell key unless f64",
};

fn parse(s: &Settings<'_>) -> Result<Arc<dyn Family>, SpecError> {
    Ok(Arc::new(Sk {
        storage: super::read_storage(s, &XI)?,
    }))
}

/// SK's one parameter: how its couplings are held.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub struct Sk {
    pub storage: Storage,
}

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
    /// The storage only when it is not the default, so f64 keys are those of every earlier
    /// release.
    fn params_canon(&self, c: Canon) -> Canon {
        c.with_if(self.storage != Storage::F64, "storage", self.storage.name())
    }
    /// Every storage draws from the f64 instance's streams (f32 rounds that instance; the
    /// implicit generator is keyed by the same instance id).
    fn disorder_canon(&self, _sampler: Canon, couplings: Couplings) -> Canon {
        Sk::default().params_canon(
            Canon::map()
                .with("family", ENTRY.name)
                .with("couplings", couplings.name())
                .with("revision", dense::REVISION),
        )
    }
    fn spins(&self) -> bool {
        true
    }
    fn mixture(&self) -> Option<&Mixture> {
        Some(&XI)
    }
    fn instance_bytes(&self, n: u64) -> u128 {
        dense::instance_bytes_as(self.storage, n)
    }
    fn flip_cost(&self, n: u64) -> f64 {
        match self.storage {
            Storage::F64 => n as f64,
            // Half the row strided over the triangle, a cache and TLB miss per entry: a descent
            // at n = 65 536 took 33 ns per entry on average (6.6 units), doubled for the margin.
            Storage::F32 => 12.0 * n as f64,
            // One generation (about 30 ns, some 100 row entries' time) per coupling.
            Storage::Implicit => 100.0 * n as f64,
        }
    }
    /// One draw per coupling of the triangle (f64 and f32); nothing for the implicit storage.
    fn sample_cost(&self, n: u64) -> f64 {
        match self.storage {
            Storage::F64 | Storage::F32 => n as f64 * n as f64,
            Storage::Implicit => n as f64,
        }
    }
    fn sample(&self, n: usize, couplings: Couplings, instance: &Id, epsilon: f64) -> Instance {
        Instance::Sk(dense::sample_as(
            self.storage,
            n,
            couplings,
            instance,
            epsilon,
        ))
    }
    fn as_any(&self) -> &dyn std::any::Any {
        self
    }
}
