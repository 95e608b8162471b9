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

pub mod mixed;
pub mod sk;
pub mod sparse;
pub mod tensor;

use crate::cell::Canon;
use crate::rng::Stream;
use crate::theory::Mixture;

/// Coupling law of a family.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Couplings {
    /// i.i.d. standard normal.
    Gaussian,
    /// i.i.d. ±1 with equal probability.
    Pm1,
    /// −1 on every edge of a sparse graph: maximising H is max-cut.
    Cut,
}

impl Couplings {
    pub const NAMES: [&'static str; 3] = ["gaussian", "pm1", "cut"];
    pub fn name(self) -> &'static str {
        match self {
            Couplings::Gaussian => "gaussian",
            Couplings::Pm1 => "pm1",
            Couplings::Cut => "cut",
        }
    }
    pub fn parse(s: &str) -> Option<Self> {
        match s {
            "gaussian" => Some(Couplings::Gaussian),
            "pm1" => Some(Couplings::Pm1),
            "cut" => Some(Couplings::Cut),
            _ => None,
        }
    }
}

/// Fills `xs` with couplings of the law, in order.
pub(crate) fn draw(rng: &mut Stream, c: Couplings, xs: &mut [f64]) {
    match c {
        Couplings::Gaussian => xs.iter_mut().for_each(|x| *x = rng.normal()),
        Couplings::Pm1 => xs.iter_mut().for_each(|x| *x = rng.sign()),
        Couplings::Cut => xs.iter_mut().for_each(|x| *x = -1.0),
    }
}

/// Moves couplings to their copy correlated at 1 − ε (`keep` = 1 − ε, `fresh` =
/// sqrt(1 − (1 − ε)²)): gaussian (1 − ε)J + fresh·G; pm1 a fresh sign with probability ε (a
/// uniform then a sign drawn per coupling); cut couplings never change.
pub(crate) fn perturb(
    rng: &mut Stream,
    c: Couplings,
    keep: f64,
    fresh: f64,
    epsilon: f64,
    xs: &mut [f64],
) {
    match c {
        Couplings::Gaussian => xs
            .iter_mut()
            .for_each(|x| *x = keep * *x + fresh * rng.normal()),
        Couplings::Pm1 => xs.iter_mut().for_each(|x| {
            let u = rng.uniform();
            let s = rng.sign();
            if u < epsilon {
                *x = s;
            }
        }),
        Couplings::Cut => {}
    }
}

/// Model families kiln knows.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Family {
    /// Sherrington–Kirkpatrick: H(σ) = n^{-1/2} Σ_{i<j} J_ij σ_i σ_j.
    Sk,
    /// Mixed p-spin on the hypercube {±1}^n, ξ(q) = Σ c_p² q^p.
    Cube,
    /// Mixed p-spin on the sphere ‖x‖² = n.
    Sphere,
    /// Erdős–Rényi graph G(n, d/n).
    ErdosRenyi,
    /// Random d-regular graph.
    Regular,
    /// Periodic L^D lattice (Edwards–Anderson).
    Lattice,
}

impl Family {
    pub const ALL: [Family; 6] = [
        Family::Sk,
        Family::Cube,
        Family::Sphere,
        Family::ErdosRenyi,
        Family::Regular,
        Family::Lattice,
    ];
    pub const NAMES: [&'static str; 6] =
        ["sk", "cube", "sphere", "erdos-renyi", "regular", "lattice"];
    pub fn name(self) -> &'static str {
        Family::NAMES[self as usize]
    }
    pub fn parse(s: &str) -> Option<Self> {
        Family::ALL.into_iter().find(|f| f.name() == s)
    }
    /// Whether the configurations are ±1 spins (every family but the sphere).
    pub fn is_cube(self) -> bool {
        self != Family::Sphere
    }
    /// Families stored densely (matrix and tensors): sk, cube, sphere.
    pub fn is_dense(self) -> bool {
        matches!(self, Family::Sk | Family::Cube | Family::Sphere)
    }

    /// Whether the family is a sparse graph (couplings may be `cut`).
    pub fn is_sparse(self) -> bool {
        matches!(self, Family::ErdosRenyi | Family::Regular | Family::Lattice)
    }
}

/// A fully resolved model: what determines the disorder apart from n and the seed.
#[derive(Clone, Debug, PartialEq)]
pub struct ModelSpec {
    pub family: Family,
    pub couplings: Couplings,
    /// ξ for `cube` and `sphere` (terms sorted by p); `sk` is ξ = q²/2.
    pub xi: Mixture,
    /// Mean degree (Erdős–Rényi) or degree (regular); 2D for lattices.
    pub degree: f64,
    /// Lattice dimension D.
    pub dimension: u32,
}

impl ModelSpec {
    /// The SK model with the given coupling law.
    pub fn sk(couplings: Couplings) -> ModelSpec {
        ModelSpec {
            family: Family::Sk,
            couplings,
            xi: Mixture::sk(),
            degree: 0.0,
            dimension: 0,
        }
    }

    /// Revision of the sampling code of this family. Enters the cache key.
    pub fn revision(&self) -> u32 {
        match self.family {
            Family::Sk => sk::REVISION,
            Family::Cube | Family::Sphere => 1,
            Family::ErdosRenyi | Family::Regular | Family::Lattice => 1,
        }
    }

    /// Canonical identity (for cell keys): the disorder's identity plus, for dense families,
    /// the shared kernels' summation pattern, which moves energies in the last bits (so it is
    /// part of every dense cell's key, but not of the instance id: couplings do not change).
    pub fn canon(&self) -> Canon {
        self.sampler_canon()
            .with_if(self.family.is_dense(), "kernels", crate::kernels::REVISION)
    }

    /// Family, couplings, sampler revision and family parameters.
    fn sampler_canon(&self) -> Canon {
        let c = Canon::map()
            .with("family", self.family.name())
            .with("couplings", self.couplings.name())
            .with("revision", self.revision());
        match self.family {
            Family::Sk => c,
            Family::Cube | Family::Sphere => c.with("xi", self.xi.canon()),
            Family::ErdosRenyi | Family::Regular => c.with("degree", self.degree),
            Family::Lattice => c.with("dimension", self.dimension as u64),
        }
    }

    /// Identity of the disorder (names the instance streams). Cube and sphere with the same ξ
    /// share their couplings, and the mixture ξ = q²/2 shares SK's, so `family = "sk"` and
    /// `family = "cube"` with `xi = { 2 = 0.5 }` give the same numbers bit for bit.
    pub fn disorder_canon(&self) -> Canon {
        match self.family {
            Family::Cube | Family::Sphere if self.xi == Mixture::sk() => {
                ModelSpec::sk(self.couplings).sampler_canon()
            }
            Family::Cube | Family::Sphere => Canon::map()
                .with("family", "mixed")
                .with("couplings", self.couplings.name())
                .with("revision", self.revision())
                .with("xi", self.xi.canon()),
            _ => self.sampler_canon(),
        }
    }

    /// Expected number of edges at size n (sparse families).
    pub fn edges(&self, n: u64) -> f64 {
        let n = n as f64;
        match self.family {
            Family::ErdosRenyi => self.degree * (n - 1.0) / 2.0,
            Family::Regular | Family::Lattice => self.degree * n / 2.0,
            _ => n * (n - 1.0) / 2.0,
        }
    }

    /// Bytes a cell of size n needs for its instance (peak, including the correlated copy,
    /// which replaces the original).
    pub fn instance_bytes(&self, n: u64) -> u128 {
        match self.family {
            Family::Sk => sk::instance_bytes(n),
            Family::Cube | Family::Sphere => {
                let mut b: u128 = 64 * n as u128;
                for &(p, _) in &self.xi.terms {
                    b = b.saturating_add(if p == 2 {
                        sk::instance_bytes(n)
                    } else {
                        tensor::tuples(n, p).saturating_mul(8)
                    });
                }
                b
            }
            // Erdős–Rényi: 6 standard deviations above the mean edge count.
            Family::ErdosRenyi => {
                let m = self.edges(n);
                sparse::instance_bytes(n, m + 6.0 * m.sqrt() + 16.0)
            }
            Family::Regular | Family::Lattice => sparse::instance_bytes(n, self.edges(n)),
        }
    }

    /// Relative cost of one spin flip (entries touched), for scheduling.
    pub fn flip_cost(&self, n: u64) -> f64 {
        match self.family {
            Family::Sk => n as f64,
            Family::Cube | Family::Sphere => self
                .xi
                .terms
                .iter()
                .map(|&(p, _)| tensor::tuples(n.saturating_sub(1), p - 1) as f64)
                .sum::<f64>()
                .max(1.0),
            _ => self.degree.max(1.0),
        }
    }

    /// The side L of a lattice with n = L^D sites.
    pub fn side(&self, n: u64) -> usize {
        let mut l = (n as f64).powf(1.0 / self.dimension as f64).round() as usize;
        while (l as u64).pow(self.dimension) > n {
            l -= 1;
        }
        while ((l + 1) as u64).pow(self.dimension) <= n {
            l += 1;
        }
        l
    }

    /// Samples the instance; `epsilon > 0` gives the copy correlated at 1 − ε.
    pub fn sample(&self, n: usize, instance: &crate::rng::Id, epsilon: f64) -> Instance {
        let c = self.couplings;
        match self.family {
            Family::Sk => Instance::Dense(sk::sample(n, c, instance, epsilon)),
            Family::Cube => {
                Instance::Mixed(mixed::Mixed::sample(n, &self.xi, c, instance, epsilon))
            }
            Family::Sphere => {
                Instance::Sphere(mixed::Mixed::sample(n, &self.xi, c, instance, epsilon))
            }
            Family::ErdosRenyi => {
                Instance::Sparse(sparse::erdos_renyi(n, self.degree, c, instance, epsilon))
            }
            Family::Regular => Instance::Sparse(sparse::regular(
                n,
                self.degree as usize,
                c,
                instance,
                epsilon,
            )),
            Family::Lattice => Instance::Sparse(sparse::lattice(
                self.side(n as u64),
                self.dimension as usize,
                c,
                instance,
                epsilon,
            )),
        }
    }

    /// √d for the sparse families (`energy_reduced` = energy/√d), else None.
    pub fn reduced_scale(&self) -> Option<f64> {
        self.family.is_sparse().then(|| self.degree.sqrt())
    }
}

/// What every ±1 (hypercube) instance offers the algorithms: energy, local fields h_i with
/// gain −2σ_i h_i for flipping i, and the O(cost) update of all fields after a flip.
pub trait Cube: Sync {
    fn n(&self) -> usize;
    /// h = ∂H/∂σ (all fields, from scratch).
    fn fields(&self, s: &[i8], h: &mut [f64]);
    /// H(σ) from scratch.
    fn energy(&self, s: &[i8]) -> f64;
    /// Flips spin k in `s` and updates every field.
    fn flip(&self, s: &mut [i8], h: &mut [f64], k: usize);
    /// When every coupling is an integer, the fields stay exact integers and every gain
    /// −2σ_i h_i is an even integer of magnitude at most this bound; None otherwise.
    fn integer_gain_bound(&self) -> Option<usize> {
        None
    }
    /// The instance as a sparse graph, for loops specialised to it.
    fn as_graph(&self) -> Option<&sparse::Graph> {
        None
    }
}

impl Cube for sparse::Graph {
    fn n(&self) -> usize {
        sparse::Graph::n(self)
    }
    fn integer_gain_bound(&self) -> Option<usize> {
        sparse::Graph::integer_gain_bound(self)
    }
    fn as_graph(&self) -> Option<&sparse::Graph> {
        Some(self)
    }
    fn fields(&self, s: &[i8], h: &mut [f64]) {
        sparse::Graph::fields(self, s, h)
    }
    fn energy(&self, s: &[i8]) -> f64 {
        sparse::Graph::energy(self, s)
    }
    #[inline(always)]
    fn flip(&self, s: &mut [i8], h: &mut [f64], k: usize) {
        sparse::Graph::flip(self, s, h, k)
    }
}

/// A sampled instance. Dispatch on the variant happens once per cell, never inside a kernel.
pub enum Instance {
    /// SK.
    Dense(sk::Dense),
    /// Mixed p-spin on the cube.
    Mixed(mixed::Mixed),
    /// Mixed p-spin on the sphere.
    Sphere(mixed::Mixed),
    /// Sparse graphs and lattices.
    Sparse(sparse::Graph),
}

impl Instance {
    pub fn n(&self) -> usize {
        match self {
            Instance::Dense(d) => d.n(),
            Instance::Mixed(m) | Instance::Sphere(m) => m.n(),
            Instance::Sparse(g) => g.n(),
        }
    }
    /// H(σ) of a ±1 configuration (on the sphere: at the point σ, norm √n).
    pub fn energy(&self, s: &[i8]) -> f64 {
        match self {
            Instance::Dense(d) => d.energy(s),
            Instance::Mixed(m) => Cube::energy(m, s),
            Instance::Sphere(m) => m.value(s),
            Instance::Sparse(g) => g.energy(s),
        }
    }
    /// H(x) at a real point (sphere); for ±1 families x must be ±1.
    pub fn value(&self, x: &[f64]) -> f64 {
        match self {
            Instance::Sphere(m) | Instance::Mixed(m) => m.value(x),
            _ => {
                let s: Vec<i8> = x.iter().map(|&v| if v < 0.0 { -1 } else { 1 }).collect();
                self.energy(&s)
            }
        }
    }
    /// Number of edges (sparse graphs).
    pub fn edges(&self) -> Option<usize> {
        match self {
            Instance::Sparse(g) => Some(g.edges()),
            _ => None,
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// NAMES is indexed by the enum's declaration order: every family parses back to itself.
    #[test]
    fn family_names_round_trip() {
        for f in Family::ALL {
            assert_eq!(Family::parse(f.name()), Some(f));
        }
        assert_eq!(Family::parse("sk-like"), None);
    }
}
