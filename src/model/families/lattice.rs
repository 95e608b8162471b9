//! `lattice`: the Edwards–Anderson spin glass on the periodic lattice of side L in dimension D
//! (n = L^D sites, nearest-neighbour couplings, degree 2D).

use std::sync::Arc;

use crate::algo::Key;
use crate::cell::Canon;
use crate::model::{Couplings, Family, FamilyEntry, Instance, sparse};
use crate::rng::Id;
use crate::spec::{Settings, SpecError};

/// The registry entry of `lattice`.
pub const ENTRY: FamilyEntry = FamilyEntry {
    name: "lattice",
    title: "lattice",
    summary: "Edwards–Anderson glass on the periodic L^D lattice: H(σ) = Σ_{⟨ij⟩} J_ij σ_i σ_j over nearest neighbours.",
    keys: &[Key {
        name: "dimension",
        ty: "integer 1 to 4",
        default: "required",
        doc: "the dimension D (2 and 3 are the usual glasses)",
    }],
    couplings: &[Couplings::Gaussian, Couplings::Pm1],
    sizes: "side lengths L ≥ 3 (the cell's n is L^D)",
    parse,
};

fn parse(s: &Settings<'_>) -> Result<Arc<dyn Family>, SpecError> {
    let d = match s.value("dimension") {
        None => {
            return Err(s.missing(
                "dimension",
                format!("the `{}` family needs `dimension`", ENTRY.name),
                "add e.g. dimension = 2 under [model]",
            ));
        }
        Some(toml::Value::Integer(i)) => *i,
        Some(v) => {
            return Err(s.fail(
                "dimension",
                format!(
                    "invalid type: {} `{v}`, expected a whole number",
                    v.type_str()
                ),
                "e.g. dimension = 2",
            ));
        }
    };
    if !(1..=4).contains(&d) {
        return Err(s.fail(
            "dimension",
            format!("dimension {d} is not supported"),
            "lattices of dimension D = 1 to 4 (2 and 3 are the usual glasses)",
        ));
    }
    Ok(Arc::new(Lattice {
        dimension: d as u32,
    }))
}

/// The dimension D.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct Lattice {
    pub dimension: u32,
}

impl Lattice {
    /// The degree 2D of every site.
    pub fn degree(&self) -> u64 {
        2 * self.dimension as u64
    }

    /// The side L with L^D = n (exact integer arithmetic; n comes from [`Family::size`]).
    pub fn side(&self, n: u64) -> usize {
        let mut l = 1u64;
        while (l + 1).checked_pow(self.dimension).is_some_and(|x| x <= n) {
            l += 1;
        }
        l as usize
    }
}

impl Family for Lattice {
    /// Pairwise couplings and no field: H(−σ) = H(σ).
    fn symmetric(&self) -> bool {
        true
    }
    fn name(&self) -> &'static str {
        ENTRY.name
    }
    fn revision(&self) -> u32 {
        sparse::REVISION
    }
    fn params_canon(&self, c: Canon) -> Canon {
        c.with("dimension", self.dimension as u64)
    }
    fn spins(&self) -> bool {
        true
    }
    fn sparse(&self) -> bool {
        true
    }
    fn size(&self, l: u64) -> Result<u64, (String, String)> {
        if l < 3 {
            return Err((
                format!("side length L = {l} is too small for a periodic lattice"),
                "lattice sizes are side lengths L ≥ 3 (n = L^D sites)".into(),
            ));
        }
        match l.checked_pow(self.dimension) {
            Some(n) if n <= crate::spec::MAX_N as u64 => Ok(n),
            _ => Err((
                format!(
                    "L = {l} gives more than {} sites in dimension {}",
                    crate::spec::MAX_N,
                    self.dimension
                ),
                "use a smaller side length".into(),
            )),
        }
    }
    fn instance_bytes(&self, n: u64) -> u128 {
        sparse::instance_bytes(n, self.degree() as f64 * n as f64 / 2.0)
    }
    fn flip_cost(&self, _n: u64) -> f64 {
        self.degree() as f64
    }
    fn sample(&self, n: usize, couplings: Couplings, instance: &Id, epsilon: f64) -> Instance {
        Instance::Graph(sparse::lattice(
            self.side(n as u64),
            self.dimension as usize,
            couplings,
            instance,
            epsilon,
        ))
    }
    fn reduced_scale(&self) -> Option<f64> {
        Some((self.degree() as f64).sqrt())
    }
    fn as_any(&self) -> &dyn std::any::Any {
        self
    }
}
