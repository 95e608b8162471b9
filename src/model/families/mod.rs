//! The families kiln ships, one file each; the list that gathers them is
//! [`crate::model::builtin`]. Helpers shared by several families live here: reading ξ, and the
//! instance size and cost of a mixture.

pub mod cube;
pub mod erdos_renyi;
pub mod ksat;
pub mod lattice;
pub mod perceptron;
pub mod regular;
pub mod sk;
pub mod sphere;

use crate::algo::Key;
use crate::cell::Canon;
use crate::model::sk::Storage;
use crate::model::{Couplings, Instance, mixed::Mixed, sk as dense, tensor};
use crate::rng::Id;
use crate::spec::{Settings, SpecError};
use crate::theory::Mixture;

/// Largest degree p of a mixture term.
pub const MAX_P: u32 = 8;

/// The `xi` key of the mixture families.
pub(crate) const XI: Key = Key {
    name: "xi",
    ty: "table `{ p = c_p², … }`, 2 ≤ p ≤ 8, c_p² ≥ 0",
    default: "required",
    doc: "the weights c_p² of ξ(q) = Σ c_p² q^p, e.g. `{ 2 = 0.5, 3 = 0.25 }`",
};

/// Reads `xi = { p = c_p², … }`: degrees 2..=MAX_P, weights finite and ≥ 0, zero weights
/// dropped, at least one left; terms sorted by p.
pub(crate) fn read_xi(s: &Settings<'_>, family: &str) -> Result<Mixture, SpecError> {
    let Some(v) = s.value("xi") else {
        return Err(s.missing(
            "xi",
            format!("the `{family}` family needs `xi`"),
            "add e.g. xi = { 2 = 0.5, 4 = 0.25 } (ξ(q) = Σ c_p² q^p) under [model]",
        ));
    };
    let Some(table) = v.as_table() else {
        return Err(s.fail(
            "xi",
            format!("invalid type: {} `{v}`, expected a table", v.type_str()),
            "e.g. xi = { 2 = 0.5, 3 = 0.25 }",
        ));
    };
    let mut terms = Vec::new();
    for (k, w) in table {
        let p: u32 = match k.parse() {
            Ok(p) if (2..=MAX_P).contains(&p) => p,
            _ => {
                return Err(s.fail_sub(
                    "xi",
                    k,
                    format!("`{k}` is not a degree p"),
                    format!("keys of xi are degrees p from 2 to {MAX_P}, values the weights c_p²"),
                ));
            }
        };
        let c = match w {
            toml::Value::Float(x) => *x,
            toml::Value::Integer(x) => *x as f64,
            _ => f64::NAN,
        };
        if !(c >= 0.0 && c.is_finite()) {
            return Err(s.fail_sub(
                "xi",
                k,
                format!("weight {w} is not a number ≥ 0"),
                "values of xi are the weights c_p² ≥ 0 of ξ(q) = Σ c_p² q^p".to_string(),
            ));
        }
        if c > 0.0 {
            terms.push((p, c));
        }
    }
    if terms.is_empty() {
        return Err(s.fail(
            "xi",
            "every weight of xi is zero",
            "give at least one positive c_p², e.g. xi = { 3 = 1.0 }",
        ));
    }
    terms.sort_by_key(|t| t.0);
    Ok(Mixture { terms })
}

/// The `storage` key of the mixture families.
pub(crate) const MIXTURE_STORAGE: Key = Key {
    name: "storage",
    ty: "\"f64\", \"f32\" or \"implicit\"",
    default: "\"f64\"",
    doc: "how the p = 2 term's couplings are held, as for `sk`: the full f64 matrix; one f32 triangle (the f64 term rounded once); or none, recomputed from the counter-based generator (a different instance of the same law). Only with a p = 2 term in xi; the tensors of p ≥ 3 stay f64. Enters the cell key unless f64",
};

/// Reads `storage`, how the p = 2 term of ξ is held (for `sk` the whole model), refused when ξ
/// has no p = 2 term.
pub(crate) fn read_storage(s: &Settings<'_>, xi: &Mixture) -> Result<Storage, SpecError> {
    let Some(i) = s.choice("storage", "storage", &Storage::NAMES)? else {
        return Ok(Storage::F64);
    };
    let storage = Storage::from_index(i);
    if storage != Storage::F64 && !xi.terms.iter().any(|t| t.0 == 2) {
        return Err(s.fail(
            "storage",
            format!(
                "storage = \"{}\" holds the p = 2 term, and xi has none",
                storage.name()
            ),
            "remove `storage`, or add a p = 2 term to xi (e.g. 2 = 0.5); the p ≥ 3 tensors are always f64",
        ));
    }
    Ok(storage)
}

/// Revision of the mixture sampler (cube and sphere share their couplings).
pub const MIXED_REVISION: u32 = 1;

/// The disorder identity of a mixture: SK's when ξ = q²/2 (so `sk` and `cube` with
/// `xi = { 2 = 0.5 }` give the same numbers bit for bit), else the shared "mixed" sampler's.
pub(crate) fn mixed_disorder(xi: &Mixture, couplings: Couplings) -> Canon {
    if *xi == Mixture::sk() {
        crate::model::ModelSpec::sk(couplings).disorder_canon()
    } else {
        Canon::map()
            .with("family", "mixed")
            .with("couplings", couplings.name())
            .with("revision", MIXED_REVISION)
            .with("xi", xi.canon())
    }
}

/// The mixed p-spin model with covariance ξ: on the cube (`SPHERE = false`, ±1 spins) or on
/// the sphere ‖x‖² = n (`SPHERE = true`). The two share their couplings for the same ξ, so one
/// implementation serves both files.
#[derive(Clone, Debug, PartialEq)]
pub struct MixtureFamily<const SPHERE: bool> {
    pub xi: Mixture,
    /// How the p = 2 term is held (f64 unless the spec says otherwise).
    pub storage: Storage,
}

impl<const SPHERE: bool> MixtureFamily<SPHERE> {
    /// The mixture with its p = 2 term (if any) in f64.
    pub fn new(xi: Mixture) -> Self {
        MixtureFamily {
            xi,
            storage: Storage::F64,
        }
    }

    /// The p = 2 term as the `sk` family holds it (its costs are SK's under the same storage).
    fn quadratic_term(&self) -> sk::Sk {
        sk::Sk {
            storage: self.storage,
        }
    }
}

impl<const SPHERE: bool> crate::model::Family for MixtureFamily<SPHERE> {
    /// Symmetric when every term of ξ has even p.
    fn symmetric(&self) -> bool {
        self.xi.terms.iter().all(|&(p, _)| p % 2 == 0)
    }
    fn name(&self) -> &'static str {
        if SPHERE {
            sphere::ENTRY.name
        } else {
            cube::ENTRY.name
        }
    }
    fn revision(&self) -> u32 {
        MIXED_REVISION
    }
    /// The storage only when it is not the default, so f64 keys are those of every earlier
    /// release.
    fn params_canon(&self, c: Canon) -> Canon {
        c.with("xi", self.xi.canon()).with_if(
            self.storage != Storage::F64,
            "storage",
            self.storage.name(),
        )
    }
    fn disorder_canon(&self, _sampler: Canon, couplings: Couplings) -> Canon {
        mixed_disorder(&self.xi, couplings)
    }
    fn spins(&self) -> bool {
        !SPHERE
    }
    fn mixture(&self) -> Option<&Mixture> {
        Some(&self.xi)
    }
    fn size_problem(&self, n: u64) -> Option<(String, String)> {
        let p = self.xi.terms.iter().map(|t| t.0).max().unwrap_or(2) as u64;
        (n < p).then(|| {
            (
                format!("n = {n} is smaller than the largest degree p = {p}"),
                "a p-spin term needs n ≥ p".into(),
            )
        })
    }
    fn instance_bytes(&self, n: u64) -> u128 {
        let mut b: u128 = 64 * n as u128;
        for &(p, _) in &self.xi.terms {
            b = b.saturating_add(if p == 2 {
                dense::instance_bytes_as(self.storage, n)
            } else {
                tensor::tuples(n, p).saturating_mul(8)
            });
        }
        b
    }
    /// Entries a flip touches; the p = 2 term's as SK's under the same storage.
    fn flip_cost(&self, n: u64) -> f64 {
        self.xi
            .terms
            .iter()
            .map(|&(p, _)| match p {
                2 => self.quadratic_term().flip_cost(n),
                _ => tensor::tuples(n.saturating_sub(1), p - 1) as f64,
            })
            .sum::<f64>()
            .max(1.0)
    }
    /// One draw per coupling (none for an implicit p = 2 term).
    fn sample_cost(&self, n: u64) -> f64 {
        self.xi
            .terms
            .iter()
            .map(|&(p, _)| match p {
                2 => self.quadratic_term().sample_cost(n),
                _ => tensor::tuples(n, p) as f64,
            })
            .sum()
    }
    fn sample(&self, n: usize, couplings: Couplings, instance: &Id, epsilon: f64) -> Instance {
        let m = Mixed::sample_as(self.storage, n, &self.xi, couplings, instance, epsilon);
        if SPHERE {
            Instance::Sphere(m)
        } else {
            Instance::Cube(m)
        }
    }
    fn as_any(&self) -> &dyn std::any::Any {
        self
    }
}

/// The `degree` key of the graph families.
pub(crate) const fn degree_key(doc: &'static str, ty: &'static str) -> Key {
    Key {
        name: "degree",
        ty,
        default: "required",
        doc,
    }
}

/// The fraction of edges cut, for max-cut couplings on a graph: H = −(m − 2·cut) for
/// all-(−1) couplings, so cut = (m + H)/2.
pub(crate) fn cut_fraction(c: Couplings, inst: &Instance, energy: f64) -> Option<f64> {
    match (c, inst.edges()) {
        (Couplings::Cut, Some(m)) if m > 0 => {
            let h = energy * inst.n() as f64;
            Some(((m as f64 + h) / 2.0).round() / m as f64)
        }
        _ => None,
    }
}
