//! Optimisation algorithms. One file per algorithm, one contract for all:
//! a params struct with documented defaults, `run(&params, &instance, &mut stream)` returning
//! an [`Output`] (spins plus an [`Info`]) or an [`AlgoError`] carrying data; never a panic on
//! numerical trouble. Each algorithm has a revision number that enters the cache key.

pub mod anneal;
pub mod descent;
pub mod exhaustive;

use crate::cell::Canon;
use crate::model::Instance;
use crate::rng::Stream;

/// What an algorithm reports about its own run.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct Info {
    /// Elementary steps: accepted spin flips.
    pub iterations: u64,
    /// Passes over all spins (a greedy pass counts as one).
    pub sweeps: u64,
    /// Whether the algorithm reached its stopping criterion (not a budget cap).
    pub converged: bool,
}

/// The result of one run.
#[derive(Clone, Debug)]
pub struct Output {
    /// Final configuration, entries ±1.
    pub spins: Vec<i8>,
    pub info: Info,
}

/// Numerical failure, with the data needed to understand it.
#[derive(Debug, thiserror::Error)]
pub enum AlgoError {
    #[error("{kind} does not apply to the {family} family")]
    Unsupported {
        kind: &'static str,
        family: &'static str,
    },
}

/// A fully resolved algorithm with its settings (defaults filled in).
#[derive(Clone, Debug, PartialEq)]
pub enum AlgoSpec {
    Descent(descent::Params),
    Anneal(anneal::Params),
    Exhaustive(exhaustive::Params),
}

impl AlgoSpec {
    pub const KINDS: [&'static str; 3] = ["descent", "anneal", "exhaustive"];

    pub fn kind(&self) -> &'static str {
        match self {
            AlgoSpec::Descent(_) => "descent",
            AlgoSpec::Anneal(_) => "anneal",
            AlgoSpec::Exhaustive(_) => "exhaustive",
        }
    }

    pub fn revision(&self) -> u32 {
        match self {
            AlgoSpec::Descent(_) => descent::REVISION,
            AlgoSpec::Anneal(_) => anneal::REVISION,
            AlgoSpec::Exhaustive(_) => exhaustive::REVISION,
        }
    }

    /// Canonical identity (kind, revision and every setting, defaults included).
    pub fn canon(&self) -> Canon {
        let c = Canon::map()
            .with("kind", self.kind())
            .with("revision", self.revision());
        match self {
            AlgoSpec::Descent(p) => p.canon(c),
            AlgoSpec::Anneal(p) => p.canon(c),
            AlgoSpec::Exhaustive(p) => p.canon(c),
        }
    }

    /// The settings as one canonical string (the `settings` column).
    pub fn settings(&self) -> String {
        self.canon().encode()
    }

    /// Work-space bytes beyond the instance for size n.
    pub fn work_bytes(&self, n: u64) -> u128 {
        // spins (i8), fields (f64), an order permutation (u32), a copy of the reference spins.
        (n as u128) * (1 + 8 + 4 + 1)
    }

    /// Relative cost of one run at size n, for ordering work (largest first) and sharding.
    pub fn cost(&self, n: u64) -> f64 {
        let n = n as f64;
        match self {
            AlgoSpec::Descent(_) => n * n,
            AlgoSpec::Anneal(p) => n * n * (1.0 + 0.3 * p.sweeps as f64),
            AlgoSpec::Exhaustive(_) => n * 2f64.powf(n - 1.0),
        }
    }

    pub fn run(&self, inst: &Instance, rng: &mut Stream) -> Result<Output, AlgoError> {
        match (self, inst) {
            (AlgoSpec::Descent(p), Instance::Dense(d)) => Ok(descent::run(p, d, rng)),
            (AlgoSpec::Anneal(p), Instance::Dense(d)) => Ok(anneal::run(p, d, rng)),
            (AlgoSpec::Exhaustive(p), Instance::Dense(d)) => Ok(exhaustive::run(p, d)),
        }
    }
}

/// A uniformly random start in {±1}^n.
pub(crate) fn random_start(n: usize, rng: &mut Stream) -> Vec<i8> {
    (0..n).map(|_| rng.sign() as i8).collect()
}
