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

pub mod families;
pub mod implicit;
pub mod ksat;
pub mod mixed;
pub mod perceptron;
pub mod sk;
pub mod sparse;
pub mod tensor;

use std::sync::Arc;

use crate::cell::Canon;
use crate::registry::{Named, Registry};
use crate::rng::{Id, Stream};
use crate::spec::{Settings, SpecError};
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

// ---------------------------------------------------------------- the family registry

/// What every model family implements: its identity and parameters, how its sizes are read, its
/// memory and cost, sampling with the correlated copy, and its table extras. A value is one
/// fully resolved family (its parameters carried in its own type: `xi` only on cube and
/// sphere, `degree` only on graphs, `dimension` only on lattices).
pub trait Family: std::fmt::Debug + Send + Sync + 'static {
    /// The name, as written in `family = "…"`.
    fn name(&self) -> &'static str;
    /// Revision of the sampling code. Enters every cache key; bump it when a seed's disorder
    /// changes.
    fn revision(&self) -> u32;
    /// Appends the family's parameters to its canonical map.
    fn params_canon(&self, c: Canon) -> Canon;
    /// The identity of the disorder that names the instance streams, given the sampler's own
    /// canonical map (the default) — a family whose couplings are another family's overrides it.
    fn disorder_canon(&self, sampler: Canon, _couplings: Couplings) -> Canon {
        sampler
    }
    /// Whether configurations are ±1 spins (every family but the sphere).
    fn spins(&self) -> bool;
    /// Whether H(−σ) = H(σ) for every configuration (on the sphere H(−x) = H(x)): no field and
    /// no odd-p term. Stability is then also reported modulo the global flip (the `_sym`
    /// columns). The default, false, is always safe: the `_sym` columns equal the raw ones.
    fn symmetric(&self) -> bool {
        false
    }
    /// Whether `[model] field = h` applies (the ±1 families whose H is a spin glass; not the
    /// constraint families, whose H counts violations).
    fn takes_field(&self) -> bool {
        self.spins()
    }
    /// The constraint density α = m/n of a constraint family (k-SAT); None for the others.
    fn density(&self) -> Option<f64> {
        None
    }
    /// The family at another density, for `[sweep] densities`; None for a family without one.
    fn at_density(&self, _alpha: f64) -> Option<Arc<dyn Family>> {
        None
    }
    /// Whether H = −(violated constraints), so `energy`·n counts them (the table's
    /// `unsatisfied` column).
    fn counts_violations(&self) -> bool {
        false
    }
    /// Whether H = 0 exactly when every constraint holds and H < 0 otherwise (the table's
    /// `satisfied` column and the threshold view): every constraint family.
    fn solved_at_zero(&self) -> bool {
        self.counts_violations()
    }
    /// Whether H of a family without a mixture or a graph has a gradient the real-point
    /// algorithms use (the perceptron with its quadratic constraint).
    fn differentiable(&self) -> bool {
        false
    }
    /// The covariance ξ of a dense mean-field family (sk: q²/2); None for the others.
    fn mixture(&self) -> Option<&Mixture> {
        None
    }
    /// Whether the family is a sparse graph (its instance is a [`sparse::Graph`]).
    fn sparse(&self) -> bool {
        false
    }
    /// Whether H is a quadratic form with a matrix–vector product (p = 2 models, graphs).
    fn quadratic(&self) -> bool {
        self.sparse()
            || self
                .mixture()
                .is_some_and(|x| x.terms.iter().all(|&(p, _)| p == 2))
    }
    /// The number of spins n for a size as written in `sweep.sizes` (lattices: a side L), or
    /// why it is refused, as (message, hint).
    fn size(&self, written: u64) -> Result<u64, (String, String)> {
        Ok(written)
    }
    /// Why n spins do not fit the family's parameters, if they do not: (message, hint).
    fn size_problem(&self, _n: u64) -> Option<(String, String)> {
        None
    }
    /// Peak bytes of an instance of size n (the correlated copy replaces the original).
    fn instance_bytes(&self, n: u64) -> u128;
    /// Relative cost of one spin flip (entries touched), for scheduling.
    fn flip_cost(&self, n: u64) -> f64;
    /// Cost of sampling an instance (or its copy) of size n, in the units of
    /// [`crate::algo::Algorithm::cost`]: by default one unit per entry a flip touches, n times.
    fn sample_cost(&self, n: u64) -> f64 {
        n as f64 * self.flip_cost(n)
    }
    /// Samples the instance; `epsilon > 0` gives the copy correlated at 1 − ε.
    fn sample(&self, n: usize, couplings: Couplings, instance: &Id, epsilon: f64) -> Instance;
    /// √d for the sparse families (`energy_reduced` = energy/√d), else None.
    fn reduced_scale(&self) -> Option<f64> {
        None
    }
    /// The fraction of edges cut by the output (max-cut couplings), else None.
    fn cut_fraction(&self, _couplings: Couplings, _inst: &Instance, _energy: f64) -> Option<f64> {
        None
    }
    /// The parameters as `Any`, so a caller that knows the family can read them.
    fn as_any(&self) -> &dyn std::any::Any;
}

/// A family's entry in the registry: its name, a summary, its `[model]` keys, the coupling laws
/// it takes, and the parser that reads its keys into a [`Family`].
#[derive(Clone, Copy)]
pub struct FamilyEntry {
    pub name: &'static str,
    /// How figures and captions name the family (e.g. "SK").
    pub title: &'static str,
    pub summary: &'static str,
    pub keys: &'static [crate::algo::Key],
    pub couplings: &'static [Couplings],
    /// What `sweep.sizes` lists, for the reference (e.g. "n" or "side lengths L").
    pub sizes: &'static str,
    pub parse: fn(&Settings<'_>) -> Result<Arc<dyn Family>, SpecError>,
}

/// The one list of the families kiln ships. A new family is one file under `model/families/`
/// and one line here.
const BUILTIN: &[FamilyEntry] = &[
    families::sk::ENTRY,
    families::cube::ENTRY,
    families::sphere::ENTRY,
    families::erdos_renyi::ENTRY,
    families::regular::ENTRY,
    families::lattice::ENTRY,
    families::ksat::ENTRY,
    families::perceptron::ENTRY,
];

/// The families: the built-in list, then those registered at run time.
static FAMILIES: Registry<FamilyEntry> = Registry::new(BUILTIN, "a family");

impl Named for FamilyEntry {
    fn name(&self) -> &'static str {
        self.name
    }
}

/// Adds a family to the registry for this process. Refused when its name is taken.
pub fn register(entry: FamilyEntry) -> Result<(), String> {
    FAMILIES.register(entry)
}

/// The families kiln ships, in list order.
pub fn builtin() -> &'static [FamilyEntry] {
    FAMILIES.builtin()
}

/// Every family: the built-in list, then those registered at run time.
pub fn families() -> Vec<FamilyEntry> {
    FAMILIES.all()
}

/// The family named `name`, if any.
pub fn find(name: &str) -> Option<FamilyEntry> {
    FAMILIES.find(name)
}

/// The families' names, in list order.
pub fn family_names() -> Vec<&'static str> {
    FAMILIES.names()
}

/// The `[model]` reference of the families, as Markdown (the README's family section).
pub fn reference(entries: &[FamilyEntry]) -> String {
    let mut out = String::from(
        "Every spin-glass family with ±1 spins (`sk`, `cube`, `erdos-renyi`, `regular`, `lattice`; not `sphere`, nor the constraint families `ksat` and `perceptron`, whose H counts violations) also takes `field = h` (a number, |h| ≤ 100; default 0): a uniform external field, H + h Σσ_i. It enters every cell key when non-zero, not the couplings (an instance has the same J at every h), removes the σ ↔ −σ symmetry, and is supported by every kind that runs on the family; `spectral` and `lowrank` relax the couplings alone and let the field choose the output's global sign.\n\n",
    );
    for f in entries {
        out.push_str(&format!(
            "#### `family = \"{}\"`\n\n{} Couplings: {}. `sweep.sizes` lists {}.\n\n",
            f.name,
            f.summary,
            f.couplings
                .iter()
                .map(|c| format!("`{}`", c.name()))
                .collect::<Vec<_>>()
                .join(", "),
            f.sizes
        ));
        out.push_str(&crate::spec::key_table(f.keys, "No other keys."));
    }
    out
}

/// A fully resolved model: the family with its parameters, the coupling law, and the uniform
/// external field h of the ±1 families (H + h Σσ_i; 0 for none).
#[derive(Clone, Debug)]
pub struct ModelSpec {
    pub family: Arc<dyn Family>,
    pub couplings: Couplings,
    pub field: f64,
}

impl PartialEq for ModelSpec {
    fn eq(&self, other: &Self) -> bool {
        self.canon().encode() == other.canon().encode()
    }
}

impl ModelSpec {
    /// A model of a family with a coupling law.
    pub fn new(family: impl Family, couplings: Couplings) -> ModelSpec {
        ModelSpec {
            family: Arc::new(family),
            couplings,
            field: 0.0,
        }
    }

    /// The SK model with the given coupling law.
    pub fn sk(couplings: Couplings) -> ModelSpec {
        ModelSpec::new(families::sk::Sk::default(), couplings)
    }

    /// The mixed p-spin model on the cube.
    pub fn cube(xi: Mixture, couplings: Couplings) -> ModelSpec {
        ModelSpec::new(families::cube::Cube::new(xi), couplings)
    }

    /// The mixed p-spin model on the sphere.
    pub fn sphere(xi: Mixture, couplings: Couplings) -> ModelSpec {
        ModelSpec::new(families::sphere::Sphere::new(xi), couplings)
    }

    /// The family's name.
    pub fn name(&self) -> &'static str {
        self.family.name()
    }

    /// Whether H(−σ) = H(σ): a symmetric family and no field.
    pub fn symmetric(&self) -> bool {
        self.field == 0.0 && self.family.symmetric()
    }

    /// Revision of the sampling code of this family. Enters the cache key.
    pub fn revision(&self) -> u32 {
        self.family.revision()
    }

    /// ξ of a mean-field family (sk: q²/2).
    pub fn mixture(&self) -> Option<&Mixture> {
        self.family.mixture()
    }

    /// Canonical identity (for cell keys): the disorder's identity plus, for dense families,
    /// the shared kernels' summation pattern, which moves energies in the last bits (so it is
    /// part of every dense cell's key, but not of the instance id: couplings do not change).
    /// A field enters the key (only when non-zero, so keys without one are unchanged) but not
    /// the disorder's identity: the couplings of an instance are the same at every h.
    pub fn canon(&self) -> Canon {
        self.sampler_canon()
            .with_if(
                self.family.mixture().is_some(),
                "kernels",
                crate::kernels::REVISION,
            )
            .with_if(self.field != 0.0, "field", self.field)
    }

    /// Family, couplings, sampler revision and family parameters.
    fn sampler_canon(&self) -> Canon {
        self.family.params_canon(
            Canon::map()
                .with("family", self.family.name())
                .with("couplings", self.couplings.name())
                .with("revision", self.revision()),
        )
    }

    /// Identity of the disorder (names the instance streams). Cube and sphere with the same ξ
    /// share their couplings, and the mixture ξ = q²/2 shares SK's, so `family = "sk"` and
    /// `family = "cube"` with `xi = { 2 = 0.5 }` give the same numbers bit for bit.
    pub fn disorder_canon(&self) -> Canon {
        self.family
            .disorder_canon(self.sampler_canon(), self.couplings)
    }

    /// Bytes a cell of size n needs for its instance.
    pub fn instance_bytes(&self, n: u64) -> u128 {
        self.family.instance_bytes(n)
    }

    /// Relative cost of one spin flip (entries touched), for scheduling.
    pub fn flip_cost(&self, n: u64) -> f64 {
        self.family.flip_cost(n)
    }

    /// Cost of sampling an instance of size n (see [`Family::sample_cost`]).
    pub fn sample_cost(&self, n: u64) -> f64 {
        self.family.sample_cost(n)
    }

    /// Samples the instance; `epsilon > 0` gives the copy correlated at 1 − ε (the field is
    /// not resampled).
    pub fn sample(&self, n: usize, instance: &Id, epsilon: f64) -> Instance {
        let inst = self.family.sample(n, self.couplings, instance, epsilon);
        if self.field != 0.0 {
            Instance::Fielded(Box::new(inst), self.field)
        } else {
            inst
        }
    }

    /// √d for the sparse families (`energy_reduced` = energy/√d), else None.
    pub fn reduced_scale(&self) -> Option<f64> {
        self.family.reduced_scale()
    }

    /// The family's table extras for an output of energy per spin `energy`:
    /// (energy_reduced, cut_fraction).
    pub fn extras(&self, inst: &Instance, energy: f64) -> (Option<f64>, Option<f64>) {
        (
            self.reduced_scale().map(|s| energy / s),
            self.family.cut_fraction(self.couplings, inst, energy),
        )
    }
}

/// A raw pointer that parallel tasks may share, for filling disjoint parts of one buffer (each
/// use states, at its `unsafe`, why the parts are disjoint).
pub(crate) struct SendPtr<T>(pub(crate) *mut T);
// SAFETY: the pointer is only dereferenced where the caller proves the accesses disjoint.
unsafe impl<T> Send for SendPtr<T> {}
// SAFETY: as above.
unsafe impl<T> Sync for SendPtr<T> {}

/// What every ±1 instance (SK, the cube's mixtures, graphs, lattices) offers the algorithms:
/// energy, local fields h_i with gain −2σ_i h_i for flipping i, and the O(cost) update of all
/// fields after a flip.
pub trait SpinModel: Sync {
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
    /// Whether H(−σ) = H(σ) for every σ (no field, no odd-p term). Exhaustive search uses it
    /// to enumerate half the states; the default, false, is always safe.
    fn symmetric(&self) -> bool {
        false
    }
    /// A value H never exceeds, when one is known (k-SAT: 0, every clause satisfied):
    /// exhaustive search stops at the first state that reaches it.
    fn ceiling(&self) -> Option<f64> {
        None
    }
    /// Exhaustive search by a walk cheaper than the field updates, when the model has one:
    /// the first best state in Gray-code order with `free` moving spins (the order and the
    /// stop at [`SpinModel::ceiling`] of [`crate::algo::exhaustive::run`]), its H, and the
    /// steps taken. None (the default) uses the fields.
    fn exhaustive(&self, _free: usize) -> Option<(Vec<i8>, f64, u64)> {
        None
    }
}

impl SpinModel for sparse::Graph {
    fn n(&self) -> usize {
        sparse::Graph::n(self)
    }
    /// Pairwise couplings, no field.
    fn symmetric(&self) -> bool {
        true
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

/// What the algorithms on real points (the sphere's gradient ascent, Hessian ascent's polish,
/// Langevin dynamics) need of an instance: n and the value and gradient of H at a point.
pub trait Smooth: Sync {
    fn n(&self) -> usize;
    /// H(x), with ∇H(x) written into `g`.
    fn value_grad(&self, x: &[f64], g: &mut [f64]) -> f64;
}

impl Smooth for mixed::Mixed {
    fn n(&self) -> usize {
        mixed::Mixed::n(self)
    }
    fn value_grad(&self, x: &[f64], g: &mut [f64]) -> f64 {
        mixed::Mixed::value_grad(self, x, g)
    }
}

/// A sampled instance. Dispatch on the variant happens once per cell, never inside a kernel.
pub enum Instance {
    /// SK (a dense coupling matrix).
    Sk(sk::Dense),
    /// Mixed p-spin on the cube (a dense p = 2 matrix and p ≥ 3 tensors).
    Cube(mixed::Mixed),
    /// Mixed p-spin on the sphere (the same couplings, real points).
    Sphere(mixed::Mixed),
    /// Graphs and lattices (sparse couplings).
    Graph(sparse::Graph),
    /// A ±1 instance of a family registered from outside the crate (dynamic dispatch per
    /// flip: fine for small studies; kiln's own families use the variants above).
    Spins(Box<dyn SpinModel + Send>),
    /// A ±1 instance with a uniform external field h: H + h Σσ_i.
    Fielded(Box<Instance>, f64),
    /// Random k-SAT (H = −unsatisfied clauses).
    Clauses(ksat::Formula),
    /// The perceptron (H = −unsatisfied patterns), on the cube or on the sphere.
    Patterns(perceptron::Patterns, Domain),
}

/// Where a family's configurations live: ±1 spins, or points with ‖x‖² = n.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Domain {
    Cube,
    Sphere,
}

/// A ±1 model with a uniform field h added: fields h_i + h, energy H + h Σσ_i. Flips move only
/// the coupling part of the fields, so the inner model's update is the update. No graph view
/// and no integer gains (the specialised loops know nothing of the field).
pub struct Fielded<'a, M: ?Sized> {
    pub inner: &'a M,
    pub h: f64,
}

impl<M: SpinModel + ?Sized> SpinModel for Fielded<'_, M> {
    fn n(&self) -> usize {
        self.inner.n()
    }
    fn fields(&self, s: &[i8], h: &mut [f64]) {
        self.inner.fields(s, h);
        h.iter_mut().for_each(|x| *x += self.h);
    }
    fn energy(&self, s: &[i8]) -> f64 {
        self.inner.energy(s) + self.h * crate::measure::spin_sum(s) as f64
    }
    #[inline(always)]
    fn flip(&self, s: &mut [i8], h: &mut [f64], k: usize) {
        self.inner.flip(s, h, k)
    }
}

impl SpinModel for Box<dyn SpinModel + Send> {
    fn n(&self) -> usize {
        (**self).n()
    }
    fn fields(&self, s: &[i8], h: &mut [f64]) {
        (**self).fields(s, h)
    }
    fn energy(&self, s: &[i8]) -> f64 {
        (**self).energy(s)
    }
    fn flip(&self, s: &mut [i8], h: &mut [f64], k: usize) {
        (**self).flip(s, h, k)
    }
    fn integer_gain_bound(&self) -> Option<usize> {
        (**self).integer_gain_bound()
    }
    fn as_graph(&self) -> Option<&sparse::Graph> {
        (**self).as_graph()
    }
    fn symmetric(&self) -> bool {
        (**self).symmetric()
    }
    fn ceiling(&self) -> Option<f64> {
        (**self).ceiling()
    }
    fn exhaustive(&self, free: usize) -> Option<(Vec<i8>, f64, u64)> {
        (**self).exhaustive(free)
    }
}

impl Instance {
    pub fn n(&self) -> usize {
        match self {
            Instance::Sk(d) => d.n(),
            Instance::Cube(m) | Instance::Sphere(m) => m.n(),
            Instance::Graph(g) => g.n(),
            Instance::Spins(b) => b.n(),
            Instance::Fielded(i, _) => i.n(),
            Instance::Clauses(f) => f.n(),
            Instance::Patterns(p, _) => p.n(),
        }
    }

    /// The instance without its field, and the field (0 for none).
    pub fn split_field(&self) -> (&Instance, f64) {
        match self {
            Instance::Fielded(i, h) => (i, *h),
            other => (other, 0.0),
        }
    }
    /// H(σ) of a ±1 configuration (on the sphere: at the point σ, norm √n).
    pub fn energy(&self, s: &[i8]) -> f64 {
        match self {
            Instance::Sk(d) => d.energy(s),
            Instance::Cube(m) => SpinModel::energy(m, s),
            Instance::Sphere(m) => m.value(s),
            Instance::Graph(g) => g.energy(s),
            Instance::Spins(b) => b.energy(s),
            Instance::Fielded(i, h) => i.energy(s) + h * crate::measure::spin_sum(s) as f64,
            Instance::Clauses(f) => SpinModel::energy(f, s),
            Instance::Patterns(p, _) => SpinModel::energy(p, s),
        }
    }
    /// H(x) at a real point (sphere); for ±1 families x must be ±1.
    pub fn value(&self, x: &[f64]) -> f64 {
        match self {
            Instance::Sphere(m) | Instance::Cube(m) => m.value(x),
            Instance::Patterns(p, _) => p.value(x),
            _ => {
                let s: Vec<i8> = x.iter().map(|&v| if v < 0.0 { -1 } else { 1 }).collect();
                self.energy(&s)
            }
        }
    }
    /// Number of edges (sparse graphs).
    pub fn edges(&self) -> Option<usize> {
        match self {
            Instance::Graph(g) => Some(g.edges()),
            _ => None,
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Every built-in family parses with its example keys and names itself.
    #[test]
    fn family_names_are_unique() {
        let names = family_names();
        let set: std::collections::BTreeSet<_> = names.iter().collect();
        assert_eq!(set.len(), names.len(), "{names:?}");
        assert!(find("sk-like").is_none());
    }
}
