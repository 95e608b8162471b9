//! `ksat`: random k-SAT at clause density α = m/n (see [`crate::model::ksat`]).

use std::sync::Arc;

use crate::algo::Key;
use crate::cell::Canon;
use crate::model::ksat::{Formula, MAX_K, REVISION, clauses_at};
use crate::model::{Couplings, Family, FamilyEntry, Instance};
use crate::rng::Id;
use crate::spec::{Settings, SpecError};

/// The registry entry of `ksat`.
pub const ENTRY: FamilyEntry = FamilyEntry {
    name: "ksat",
    title: "random k-SAT",
    summary: "Random k-SAT: m = round(α·n) clauses of k distinct variables with independent random negations; H(σ) = −(unsatisfied clauses), so `energy` = −unsatisfied/n and a satisfying assignment scores 0 (σ_i = +1 is \"true\"). The correlated copy replaces each clause by a fresh one with probability ε. Columns `unsatisfied` and `satisfied` count the reference output's violated clauses.",
    keys: &[K, DENSITY],
    couplings: &[Couplings::Pm1],
    sizes: "the numbers of variables n (n ≥ k, round(α·n) ≥ 1)",
    parse,
};

const K: Key = Key {
    name: "k",
    ty: "integer in [2, 16]",
    default: "required",
    doc: "the clause width k (literals per clause)",
};

/// The constraint density key, shared with other constraint families.
pub(crate) const DENSITY: Key = Key {
    name: "density",
    ty: "number in (0, 10⁴]",
    default: "required (or `[sweep] densities`)",
    doc: "the density α = m/n of constraints per variable; `[sweep] densities = [...]` makes it an axis of the sweep",
};

/// Reads `density` (a number in (0, 10⁴]); `None` when absent.
pub(crate) fn read_density(s: &Settings<'_>) -> Result<Option<f64>, SpecError> {
    let Some(a) = s.number("density")? else {
        return Ok(None);
    };
    if !(a > 0.0 && a <= 1e4) {
        return Err(s.fail(
            "density",
            format!("density {a} is not in (0, 10⁴]"),
            "α = m/n is the number of constraints per variable, e.g. density = 4.2",
        ));
    }
    Ok(Some(a))
}

fn parse(s: &Settings<'_>) -> Result<Arc<dyn Family>, SpecError> {
    let k = match s.value("k") {
        None => {
            return Err(s.missing(
                "k",
                format!("the `{}` family needs `k`", ENTRY.name),
                "add e.g. k = 3 (literals per clause) under [model]",
            ));
        }
        Some(toml::Value::Integer(k)) if (2..=MAX_K as i64).contains(k) => *k as usize,
        Some(v) => {
            return Err(s.fail(
                "k",
                format!("k = {v} is not a clause width"),
                format!("a whole k from 2 to {MAX_K}, e.g. k = 3"),
            ));
        }
    };
    let Some(density) = read_density(s)? else {
        return Err(s.missing(
            "density",
            format!("the `{}` family needs `density`", ENTRY.name),
            "add e.g. density = 4.2 under [model], or densities = [3.8, 4.2] under [sweep]",
        ));
    };
    Ok(Arc::new(Ksat { k, density }))
}

/// The clause width k and the density α.
#[derive(Clone, Debug, PartialEq)]
pub struct Ksat {
    pub k: usize,
    pub density: f64,
}

impl Ksat {
    fn clauses(&self, n: u64) -> u64 {
        clauses_at(n, self.density)
    }
}

impl Family for Ksat {
    fn name(&self) -> &'static str {
        ENTRY.name
    }
    fn revision(&self) -> u32 {
        REVISION
    }
    fn params_canon(&self, c: Canon) -> Canon {
        c.with("k", self.k as u64).with("density", self.density)
    }
    fn spins(&self) -> bool {
        true
    }
    fn takes_field(&self) -> bool {
        false
    }
    fn density(&self) -> Option<f64> {
        Some(self.density)
    }
    fn at_density(&self, alpha: f64) -> Option<Arc<dyn Family>> {
        Some(Arc::new(Ksat {
            k: self.k,
            density: alpha,
        }))
    }
    fn counts_violations(&self) -> bool {
        true
    }
    fn size_problem(&self, n: u64) -> Option<(String, String)> {
        let m = self.clauses(n);
        if n < self.k as u64 {
            Some((
                format!(
                    "n = {n} variables cannot hold a clause of k = {} distinct ones",
                    self.k
                ),
                "k-SAT needs n ≥ k".into(),
            ))
        } else if m == 0 {
            Some((
                format!("m = round({}·{n}) = 0 clauses", self.density),
                "use a larger n or density so that the formula has clauses".into(),
            ))
        } else if m >= 1 << 31 || m.saturating_mul(self.k as u64) >= u32::MAX as u64 {
            Some((
                format!("{m} clauses of width {} exceed 2³² literals", self.k),
                "kiln indexes literals with 32 bits; use a smaller n or density".into(),
            ))
        } else {
            None
        }
    }
    fn instance_bytes(&self, n: u64) -> u128 {
        Formula::bytes(n, self.k as u64, self.clauses(n))
    }
    /// A flip visits k·α clauses of k literals each.
    fn flip_cost(&self, _n: u64) -> f64 {
        (self.k as f64 * self.k as f64 * self.density).max(1.0)
    }
    fn sample(&self, n: usize, _couplings: Couplings, instance: &Id, epsilon: f64) -> Instance {
        Instance::Clauses(Formula::sample(
            n,
            self.k,
            self.clauses(n as u64) as usize,
            instance,
            epsilon,
        ))
    }
    fn as_any(&self) -> &dyn std::any::Any {
        self
    }
}
