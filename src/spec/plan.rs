//! Expansion of a spec into its plan: one cell per (algorithm, density, n, seed, ε), each with
//! its key (the density only for a sweep over `[sweep] densities`; it is part of the model).
//!
//! Identities (all SHA-256 over canonical encodings, see [`crate::cell`]):
//! - instance = {model (with revision), n, seed}: names the disorder; every algorithm and every
//!   ε of the same (model, n, seed) sees the same couplings.
//! - run = {instance, algorithm (with revision and settings)}: seeds the algorithm's own
//!   randomness; ε is not part of it, so a perturbed run reuses the reference run's randomness.
//! - cell = {model, n, seed, algorithm, ε}: the cache key. The base (reference) cell of a cell is
//!   the same cell at ε = 0.
//!
//! - replica r ≥ 1 = the cell at ε = 0 with `replica: r` added: an independent run of the same
//!   algorithm on the same instance (algorithm stream index r); and for each ε > 0 the cell
//!   with `replica: r` added, which reruns replica r on the correlated instance with the same
//!   stream (its base is replica r at ε = 0). Together they give K independent samples on J
//!   and K on J' (`chaos.parquet`).
//!
//! Labels, notes, the experiment name and the order of entries in the spec are not part of any
//! key. Plans are ordered by (algorithm as listed, density as listed, n as listed, seed as
//! listed, ε as listed).

use super::Spec;
use crate::cell::{Canon, Key};
use crate::rng::Id;

/// One cell of a plan.
#[derive(Clone, Debug)]
pub struct Cell {
    /// Index into `spec.algorithms`.
    pub algo: usize,
    /// Index into `spec.models` (the density, for a sweep over densities; else 0).
    pub model: usize,
    pub n: u64,
    pub seed: u64,
    pub epsilon: f64,
    pub key: Key,
    /// Key of the ε = 0 cell of the same (instance, algorithm).
    pub base: Key,
    pub instance: Id,
    pub run: Id,
    /// Replica index: 0 for the reference run and every ε; r ≥ 1 for the extra independent
    /// runs (`sweep.replicas`), whose algorithm stream has index r, at ε = 0 and at every ε.
    pub replica: u32,
}

impl Plan {
    /// Each distinct cell once (two labels with identical settings share their cells), in
    /// plan order.
    pub fn distinct(&self) -> impl Iterator<Item = &Cell> {
        let mut seen = std::collections::HashSet::new();
        self.cells.iter().filter(move |c| seen.insert(c.key))
    }
}

impl Cell {
    pub fn is_base(&self) -> bool {
        self.epsilon == 0.0
    }
}

/// The cells of a spec and the hash of the resolved spec.
#[derive(Clone, Debug)]
pub struct Plan {
    pub cells: Vec<Cell>,
    /// Hash of the resolved spec (model, sweep, algorithms with labels, name): formatting,
    /// comments and key order in the file do not change it.
    pub spec_hash: Key,
}

pub fn instance_id(spec: &Spec, model: usize, n: u64, seed: u64) -> Id {
    Canon::map()
        .with("model", spec.models[model].disorder_canon())
        .with("n", n)
        .with("seed", seed)
        .hash("instance")
}

pub fn expand(spec: &Spec) -> Plan {
    let mut cells = Vec::new();
    for (ai, entry) in spec.algorithms.iter().enumerate() {
        let algo = entry.algo.canon();
        for (mi, model) in spec.models.iter().enumerate() {
            let model_canon = model.canon();
            for &(n, _) in &spec.sizes {
                for &seed in &spec.seeds {
                    let instance = instance_id(spec, mi, n, seed);
                    let run = Canon::map()
                        .with("instance", hex::encode(instance))
                        .with("algorithm", algo.clone())
                        .hash("run");
                    // Replica r ≥ 1 adds `replica: r` (replica 0, the reference run, has no
                    // such field, so its keys are those of a spec without replicas).
                    let cell_key = |eps: f64, r: u32| {
                        Key(Canon::map()
                            .with("model", model_canon.clone())
                            .with("n", n)
                            .with("seed", seed)
                            .with("algorithm", algo.clone())
                            .with("epsilon", eps)
                            .with_if(r > 0, "replica", r as u64)
                            .hash("cell"))
                    };
                    // `spec.epsilons` starts with 0: each replica's base comes first.
                    for replica in 0..spec.replicas {
                        let base = cell_key(0.0, replica);
                        for &epsilon in &spec.epsilons {
                            cells.push(Cell {
                                algo: ai,
                                model: mi,
                                n,
                                seed,
                                epsilon,
                                key: if epsilon == 0.0 {
                                    base
                                } else {
                                    cell_key(epsilon, replica)
                                },
                                base,
                                instance,
                                run,
                                replica,
                            });
                        }
                    }
                }
            }
        }
    }
    let spec_hash = Key(Canon::map()
        .with("name", spec.name.as_str())
        .with("model", spec.model.canon())
        .with_if(
            spec.models.len() > 1,
            "models",
            Canon::List(spec.models.iter().map(|m| m.canon()).collect()),
        )
        .with(
            "sizes",
            spec.sizes.iter().map(|s| s.0).collect::<Vec<u64>>(),
        )
        .with("seeds", spec.seeds.clone())
        .with("epsilons", spec.epsilons.clone())
        .with_if(spec.replicas > 1, "replicas", spec.replicas as u64)
        .with(
            "algorithms",
            Canon::List(
                spec.algorithms
                    .iter()
                    .map(|a| a.algo.canon().with("label", a.label.as_str()))
                    .collect(),
            ),
        )
        .hash("spec"));
    Plan { cells, spec_hash }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::spec::parse;

    const A: &str = r#"
[experiment]
name = "a"
[model]
family = "sk"
[sweep]
sizes = [8, 16]
seeds = 2
epsilons = [0.0, 0.1]
[[algorithm]]
label = "d"
kind = "descent"
[[algorithm]]
label = "s"
kind = "anneal"
"#;

    fn keys(text: &str) -> Vec<Key> {
        let mut k: Vec<Key> = expand(&parse(text, "t").unwrap())
            .cells
            .iter()
            .map(|c| c.key)
            .collect();
        k.sort();
        k
    }

    #[test]
    fn counts_and_bases() {
        let p = expand(&parse(A, "t").unwrap());
        assert_eq!(p.cells.len(), 2 * 2 * 2 * 2);
        for c in &p.cells {
            assert_eq!(c.is_base(), c.key == c.base);
        }
    }

    #[test]
    fn labels_order_and_defaults_do_not_change_keys() {
        let k = keys(A);
        assert_eq!(k, keys(&A.replace("label = \"d\"", "label = \"other\"")));
        assert_eq!(
            k,
            keys(&A.replace("name = \"a\"", "name = \"b\"\nnote = \"x\""))
        );
        assert_eq!(
            k,
            keys(&A.replace(
                "kind = \"anneal\"",
                "kind = \"anneal\"\nsweeps = 200\nbeta = [0.1, 4]\nquench = true"
            ))
        );
        assert_eq!(k, keys(&A.replace("[8, 16]", "[16, 8]")));
        assert_ne!(
            k,
            keys(&A.replace("kind = \"anneal\"", "kind = \"anneal\"\nsweeps = 201"))
        );
    }

    #[test]
    fn instances_shared_across_algorithms() {
        let p = expand(&parse(A, "t").unwrap());
        let d = p
            .cells
            .iter()
            .find(|c| c.algo == 0 && c.n == 8 && c.seed == 1)
            .unwrap();
        let s = p
            .cells
            .iter()
            .find(|c| c.algo == 1 && c.n == 8 && c.seed == 1)
            .unwrap();
        assert_eq!(d.instance, s.instance);
        assert_ne!(d.run, s.run);
    }
}
