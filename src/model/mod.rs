//! Disorder families: sampling, correlated resampling, energy and local fields.
//!
//! Conventions (shared by every family, documented in the README):
//! - kiln *maximises* H. The reported `energy` is H(σ)/n.
//! - A model names its family, its coupling law and a revision number. The revision enters
//!   every cache key; bump it whenever a change alters the numbers a seed produces.
//! - Disorder is a pure function of the instance identity (model, n, seed): rows of couplings
//!   come from streams `(instance, Couplings, row)`, the independent copy used for the
//!   correlated instance from `(instance, Perturbation, row)`. So every algorithm sees the same
//!   instance, and every ε sees the same perturbation direction (J' moves continuously with ε).

pub mod sk;

use crate::cell::Canon;

/// Coupling law of a family.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Couplings {
    /// i.i.d. standard normal.
    Gaussian,
    /// i.i.d. ±1 with equal probability.
    Pm1,
}

impl Couplings {
    pub const NAMES: [&'static str; 2] = ["gaussian", "pm1"];
    pub fn name(self) -> &'static str {
        match self {
            Couplings::Gaussian => "gaussian",
            Couplings::Pm1 => "pm1",
        }
    }
    pub fn parse(s: &str) -> Option<Self> {
        match s {
            "gaussian" => Some(Couplings::Gaussian),
            "pm1" => Some(Couplings::Pm1),
            _ => None,
        }
    }
}

/// Model families kiln knows.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Family {
    /// Sherrington–Kirkpatrick: H(σ) = n^{-1/2} Σ_{i<j} J_ij σ_i σ_j.
    Sk,
}

impl Family {
    pub const NAMES: [&'static str; 1] = ["sk"];
    pub fn name(self) -> &'static str {
        match self {
            Family::Sk => "sk",
        }
    }
    pub fn parse(s: &str) -> Option<Self> {
        match s {
            "sk" => Some(Family::Sk),
            _ => None,
        }
    }
}

/// A fully resolved model: what determines the disorder apart from n and the seed.
#[derive(Clone, Debug, PartialEq)]
pub struct ModelSpec {
    pub family: Family,
    pub couplings: Couplings,
}

impl ModelSpec {
    /// Revision of the sampling code of this family. Enters the cache key.
    pub fn revision(&self) -> u32 {
        match self.family {
            Family::Sk => sk::REVISION,
        }
    }

    /// Canonical identity (for keys).
    pub fn canon(&self) -> Canon {
        Canon::map()
            .with("family", self.family.name())
            .with("couplings", self.couplings.name())
            .with("revision", self.revision())
    }

    /// Bytes a cell of size n needs for its instance (peak, including the correlated copy,
    /// which is built in place).
    pub fn instance_bytes(&self, n: u64) -> u128 {
        match self.family {
            Family::Sk => sk::instance_bytes(n),
        }
    }

    /// Samples the instance; `epsilon > 0` gives the copy correlated at 1 − ε.
    pub fn sample(&self, n: usize, instance: &crate::rng::Id, epsilon: f64) -> Instance {
        match self.family {
            Family::Sk => Instance::Dense(sk::sample(n, self.couplings, instance, epsilon)),
        }
    }
}

/// A sampled instance. Dispatch on the variant happens once per cell, never inside a kernel.
pub enum Instance {
    Dense(sk::Dense),
}

impl Instance {
    pub fn n(&self) -> usize {
        match self {
            Instance::Dense(d) => d.n(),
        }
    }
    /// H(σ) computed from scratch.
    pub fn energy(&self, s: &[i8]) -> f64 {
        match self {
            Instance::Dense(d) => d.energy(s),
        }
    }
}
