//! Optimisation algorithms. One file per algorithm, one contract for all:
//! a params struct with documented defaults, `run(&params, &instance, &mut stream)` returning
//! an [`Output`] (spins plus an [`Info`]) or an [`AlgoError`] carrying data; never a panic on
//! numerical trouble. Each algorithm has a revision number that enters the cache key.

pub mod amp;
pub mod anneal;
pub mod descent;
pub mod exhaustive;
pub mod glauber;
pub mod gradient;
pub mod hessian;
pub mod iamp;
pub mod langevin;
pub mod least_distance;
pub mod localization;
pub mod lowrank;
pub mod spectral;
pub mod tempering;
pub mod walksat;

use std::collections::BTreeMap;

use crate::cell::Canon;
use crate::model::{Instance, ModelSpec};
use crate::registry::{Named, Registry};
use crate::rng::Stream;
use crate::spec::{Settings, SpecError};

/// What an algorithm reports about its own run.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct Info {
    /// Elementary steps: accepted spin flips.
    pub iterations: u64,
    /// Passes over all spins (a greedy pass counts as one).
    pub sweeps: u64,
    /// Whether the algorithm reached its stopping criterion (not a budget cap).
    pub converged: bool,
    /// Value per spin of a relaxation the algorithm solved before rounding (lowrank), or of
    /// its pre-rounding point (amp, iamp: H(m)/n).
    pub relaxation: Option<f64>,
    /// Samplers: the integrated autocorrelation time of the energy over the second half of
    /// the run, in sweeps (steps for Langevin), by Sokal's windowing
    /// ([`crate::measure::integrated_autocorrelation`]).
    pub autocorrelation_time: Option<f64>,
    /// Samplers: the overlap of the output with the start, σ_0·σ/n (x_0·x/n on the sphere).
    pub overlap_initial: Option<f64>,
    /// Samplers: the energy trace, thinned (kept as a cache artifact, not in the table).
    pub trace: Option<EnergyTrace>,
}

/// A sampler's energy trace: block means of H/n over consecutive blocks of `block` sweeps
/// (steps for Langevin), at most [`EnergyTrace::POINTS`] of them.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct EnergyTrace {
    pub block: u64,
    pub energy: Vec<f64>,
}

impl EnergyTrace {
    /// The most points a stored trace keeps.
    pub const POINTS: usize = 256;
}

/// The result of one run.
#[derive(Clone, Debug)]
pub struct Output {
    /// Final configuration, entries ±1 (on the sphere: the signs of the point).
    pub spins: Vec<i8>,
    /// The continuous point before rounding (norm √n), for algorithms that have one; on the
    /// sphere it is the output.
    pub point: Option<Vec<f64>>,
    pub info: Info,
}

impl Output {
    /// The output with a sampler's mixing diagnostics from its trace of H: the autocorrelation
    /// time and the thinned trace of H/n.
    pub fn with_mixing(mut self, trace: &crate::measure::Trace) -> Output {
        let n = self.spins.len().max(1) as f64;
        self.info.autocorrelation_time = trace.autocorrelation_time();
        let (energy, block) = trace.thinned(EnergyTrace::POINTS);
        self.info.trace = (!energy.is_empty()).then(|| EnergyTrace {
            block,
            energy: energy.into_iter().map(|e| e / n).collect(),
        });
        self
    }
}

/// Numerical failure, with the data needed to understand it.
#[derive(Debug, thiserror::Error)]
pub enum AlgoError {
    #[error("{kind} does not apply to this instance: {why}")]
    Unsupported {
        kind: &'static str,
        why: &'static str,
    },
    #[error("numerical failure: {message}")]
    Numerical { message: String },
}

// ---------------------------------------------------------------- the registry

/// Cost units of one Metropolis attempt besides its flip (a draw, a branch, the spin's field),
/// for [`Algorithm::cost`]: annealing a 3-regular graph at n = 10⁸ took 8.8 ns per attempt
/// here, flips included (1.8 units at `kiln slurm`'s 2·10⁸ units per second, of which the
/// model's flips at 0.3 per attempt account for 0.9). Counting the attempt keeps the estimate
/// an upper one on sparse graphs, where an attempt costs as much as a flip.
pub const ATTEMPT: f64 = 4.0;

/// Sweeps a descent to a 1-flip-stable state is charged for: the most measured on the SK
/// example (24 at n = 400, 8–15 on average) and twice the 11–12 of a 3-regular graph at
/// n = 10⁷. In random order each attempt is charged three times: the sweep's shuffle and a
/// cache miss per attempt on a large instance (40 ns per attempt measured at n = 10⁷).
pub const DESCENT_SWEEPS: f64 = 24.0;

/// What every algorithm kind implements: its identity, its settings' canonical form, its costs,
/// what it supports and how it runs. An implementation is the kind's resolved settings (its
/// `Params`), so a value of it is one fully specified algorithm.
///
/// Every method but `run` is cheap and pure; `run` dispatches on the instance once and then
/// calls a monomorphic kernel (never a trait object inside a loop over spins).
pub trait Algorithm: std::fmt::Debug + Send + Sync + 'static {
    /// The kind's name, as written in `kind = "…"`.
    fn kind(&self) -> &'static str;
    /// Revision of the kind's code. Enters every cache key; bump it when a seed's numbers change.
    fn revision(&self) -> u32;
    /// Appends every setting (defaults included) to the canonical map.
    fn canon(&self, c: Canon) -> Canon;
    /// Whether the output carries a pre-rounding continuous point.
    fn has_point(&self) -> bool {
        false
    }
    /// Work-space bytes beyond the instance for size n.
    fn work_bytes(&self, n: u64) -> u128;
    /// Relative cost of one run at size n when one spin flip (or one coordinate of a
    /// matrix–vector product) touches `flip` entries, for ordering work and sharding.
    fn cost(&self, n: u64, flip: f64) -> f64;
    /// Why this algorithm cannot run on the model, if it cannot (checked by the spec).
    fn unsupported(&self, m: &ModelSpec) -> Option<&'static str>;
    /// Why size n is out of reach for this algorithm whatever the memory, as (message, hint).
    fn size_problem(&self, _n: u64) -> Option<(String, String)> {
        None
    }
    /// For a sampler, the inverse temperature β of the Gibbs measure exp(βH) its output is a
    /// sample of (figures draw the Gibbs mean energy at β beside its energies).
    fn gibbs_beta(&self) -> Option<f64> {
        None
    }
    /// Runs on one instance with the cell's algorithm stream.
    fn run(&self, inst: &Instance, rng: &mut Stream) -> Result<Output, AlgoError>;
    /// The settings as `Any`, so a caller that knows the kind can read its `Params`.
    fn as_any(&self) -> &dyn std::any::Any;
}

/// One accepted key of a kind: its name, its type and default as the reference shows them,
/// and one line of documentation.
#[derive(Clone, Copy, Debug)]
pub struct Key {
    pub name: &'static str,
    pub ty: &'static str,
    pub default: &'static str,
    pub doc: &'static str,
}

/// A kind's entry in the registry: its name, a one-line summary, its keys, and the parser that
/// turns an `[[algorithm]]` table (already checked to hold only these keys) into settings.
#[derive(Clone, Copy)]
pub struct Kind {
    pub name: &'static str,
    pub summary: &'static str,
    pub keys: &'static [Key],
    pub parse: fn(&Settings<'_>) -> Result<AlgoSpec, SpecError>,
}

/// The one list of the kinds kiln ships. A new kind is one file under `algo/` and one line here.
const BUILTIN: &[Kind] = &[
    descent::KIND,
    anneal::KIND,
    exhaustive::KIND,
    spectral::KIND,
    gradient::KIND,
    tempering::KIND,
    lowrank::KIND,
    hessian::KIND,
    amp::KIND,
    iamp::KIND,
    glauber::KIND,
    langevin::KIND,
    localization::KIND,
    walksat::KIND,
    least_distance::KIND,
];

/// The kinds: the built-in list, then those registered at run time.
static KINDS: Registry<Kind> = Registry::new(BUILTIN, "an algorithm kind");

impl Named for Kind {
    fn name(&self) -> &'static str {
        self.name
    }
}

/// Adds a kind to the registry for this process. Refused when its name is taken.
pub fn register(kind: Kind) -> Result<(), String> {
    KINDS.register(kind)
}

/// The kinds kiln ships, in list order.
pub fn builtin() -> &'static [Kind] {
    KINDS.builtin()
}

/// Every kind: the built-in list, then those registered at run time, in registration order.
pub fn kinds() -> Vec<Kind> {
    KINDS.all()
}

/// The kind named `name`, if any.
pub fn find(name: &str) -> Option<Kind> {
    KINDS.find(name)
}

/// The kinds' names, in list order.
pub fn kind_names() -> Vec<&'static str> {
    KINDS.names()
}

/// A fully resolved algorithm with its settings (defaults filled in). Cheap to clone; equal
/// when the canonical settings are equal.
#[derive(Clone, Debug)]
pub struct AlgoSpec(std::sync::Arc<dyn Algorithm>);

impl PartialEq for AlgoSpec {
    fn eq(&self, other: &Self) -> bool {
        self.settings() == other.settings()
    }
}

impl AlgoSpec {
    /// Wraps a kind's settings.
    pub fn new(a: impl Algorithm) -> AlgoSpec {
        AlgoSpec(std::sync::Arc::new(a))
    }

    /// The kind's settings, when it is of type `A`.
    pub fn params<A: Algorithm>(&self) -> Option<&A> {
        self.0.as_any().downcast_ref()
    }

    pub fn kind(&self) -> &'static str {
        self.0.kind()
    }

    pub fn revision(&self) -> u32 {
        self.0.revision()
    }

    /// Whether the output carries a pre-rounding continuous point.
    pub fn has_point(&self) -> bool {
        self.0.has_point()
    }

    /// The inverse temperature a sampler samples at (see [`Algorithm::gibbs_beta`]).
    pub fn gibbs_beta(&self) -> Option<f64> {
        self.0.gibbs_beta()
    }

    /// Canonical identity (kind, revision and every setting, defaults included).
    pub fn canon(&self) -> Canon {
        let c = Canon::map()
            .with("kind", self.kind())
            .with("revision", self.revision());
        self.0.canon(c)
    }

    /// The settings as one canonical string (the `settings` column).
    pub fn settings(&self) -> String {
        self.canon().encode()
    }

    /// Work-space bytes beyond the instance for size n.
    pub fn work_bytes(&self, n: u64) -> u128 {
        self.0.work_bytes(n)
    }

    /// Relative cost of one run at size n (see [`Algorithm::cost`]).
    pub fn cost(&self, n: u64, flip: f64) -> f64 {
        self.0.cost(n, flip)
    }

    /// Why this algorithm cannot run on the model, if it cannot.
    pub fn unsupported(&self, m: &ModelSpec) -> Option<&'static str> {
        self.0.unsupported(m)
    }

    /// Why size n is out of reach for this algorithm, as (message, hint).
    pub fn size_problem(&self, n: u64) -> Option<(String, String)> {
        self.0.size_problem(n)
    }

    pub fn run(&self, inst: &Instance, rng: &mut Stream) -> Result<Output, AlgoError> {
        self.0.run(inst, rng)
    }
}

/// A kind with every setting at its default.
pub fn default_settings(k: &Kind) -> Result<AlgoSpec, SpecError> {
    let empty = BTreeMap::new();
    let loc = crate::spec::error::Locator {
        origin: "defaults",
        text: "",
    };
    (k.parse)(&Settings {
        at: format!("algorithm `{}`", k.name),
        loc: &loc,
        values: &empty,
        anchor: None,
    })
}

/// The kinds that can run on a model (with their defaults).
pub fn kinds_for(m: &ModelSpec) -> Vec<&'static str> {
    kinds()
        .iter()
        .filter(|k| default_settings(k).is_ok_and(|a| a.unsupported(m).is_none()))
        .map(|k| k.name)
        .collect()
}

/// The spec reference of the kinds, as Markdown: a heading per kind, its summary, and a table
/// of its keys. The README's reference section is this text for [`builtin`] (a test keeps
/// them equal).
pub fn reference(kinds: &[Kind]) -> String {
    let mut out = String::new();
    for k in kinds {
        out.push_str(&format!(
            "#### `kind = \"{}\"`\n\n{}\n\n",
            k.name, k.summary
        ));
        out.push_str(&crate::spec::key_table(k.keys, "No settings."));
    }
    out
}

/// The identity methods every `impl Algorithm` in a kind's file has: `kind` (its `KIND`'s
/// name), `revision` (its `REVISION`) and `as_any`.
macro_rules! identity {
    () => {
        fn kind(&self) -> &'static str {
            KIND.name
        }
        fn revision(&self) -> u32 {
            REVISION
        }
        fn as_any(&self) -> &dyn std::any::Any {
            self
        }
    };
}
pub(crate) use identity;

/// The refusal of the kinds that move ±1 spins, on the sphere.
pub(crate) fn spins_only(m: &ModelSpec) -> Option<&'static str> {
    (!m.family.spins()).then_some("it moves ±1 spins; the sphere family has real coordinates")
}

/// Runs a kernel generic over [`crate::model::SpinModel`] on whichever ±1 instance this is: one
/// monomorphic call per variant, and the refusal on the sphere.
macro_rules! on_cube {
    ($inst:expr, $kind:expr, |$d:ident| $body:expr) => {
        match $inst {
            Instance::Sk($d) => Ok($body),
            Instance::Cube($d) => Ok($body),
            Instance::Graph($d) => Ok($body),
            Instance::Spins($d) => Ok($body),
            Instance::Clauses($d) => Ok($body),
            Instance::Patterns($d, crate::model::Domain::Cube) => Ok($body),
            Instance::Fielded(inner, h) => {
                let h = *h;
                match &**inner {
                    Instance::Sk(x) => {
                        let $d = &crate::model::Fielded { inner: x, h };
                        Ok($body)
                    }
                    Instance::Cube(x) => {
                        let $d = &crate::model::Fielded { inner: x, h };
                        Ok($body)
                    }
                    Instance::Graph(x) => {
                        let $d = &crate::model::Fielded { inner: x, h };
                        Ok($body)
                    }
                    Instance::Spins(x) => {
                        let $d = &crate::model::Fielded { inner: x, h };
                        Ok($body)
                    }
                    _ => Err(super::not_for($kind, "a field applies to ±1 spins only")),
                }
            }
            Instance::Sphere(_) | Instance::Patterns(_, crate::model::Domain::Sphere) => Err(
                super::not_for($kind, "it moves ±1 spins; the sphere has real coordinates"),
            ),
        }
    };
}
pub(crate) use on_cube;

/// Runs a kernel that needs n, ξ and the value-and-gradient of H on a dense model on the cube
/// (sk, cube), the field (if any) added to the gradient; other instances are refused.
macro_rules! on_dense_cube {
    ($inst:expr, $kind:expr, |$n:ident, $xi:ident, $grad:ident| $body:expr) => {{
        let (inst, h) = $inst.split_field();
        match inst {
            Instance::Sk(d) => {
                let ($n, $xi) = (d.n(), &Mixture::sk());
                let $grad =
                    |x: &[f64], y: &mut [f64]| super::with_field(h, d.value_grad(x, y), x, y);
                $body
            }
            Instance::Cube(m) => {
                let ($n, $xi) = (m.n(), m.mixture());
                let $grad =
                    |x: &[f64], y: &mut [f64]| super::with_field(h, m.value_grad(x, y), x, y);
                $body
            }
            _ => Err(super::not_for(
                $kind,
                "it runs on dense models on the cube (sk, cube)",
            )),
        }
    }};
}
pub(crate) use on_dense_cube;

/// The error for running a kind on an instance it does not support (the spec refuses these
/// before anything runs; this is the guard behind it).
pub(crate) fn not_for(kind: &'static str, why: &'static str) -> AlgoError {
    AlgoError::Unsupported { kind, why }
}

/// A value and gradient of H with a uniform field h added: ∇ + h, value + hΣx (unchanged,
/// bit for bit, when h = 0).
pub(crate) fn with_field(h: f64, value: f64, x: &[f64], grad: &mut [f64]) -> f64 {
    if h == 0.0 {
        return value;
    }
    grad.iter_mut().for_each(|g| *g += h);
    value + h * x.iter().sum::<f64>()
}

/// The output of a run on the couplings alone (which cannot tell σ from −σ) turned toward a
/// field h: of σ and −σ, the one with hΣσ ≥ 0 (the point flipped with it).
pub(crate) fn toward_field(mut out: Output, h: f64) -> Output {
    if h * (crate::measure::spin_sum(&out.spins) as f64) < 0.0 {
        out.spins.iter_mut().for_each(|s| *s = -*s);
        if let Some(x) = &mut out.point {
            x.iter_mut().for_each(|v| *v = -*v);
        }
    }
    out
}

pub(crate) fn with_relaxation((mut out, value): (Output, f64)) -> Output {
    out.info.relaxation = Some(value);
    out
}

/// Metropolis acceptance probabilities exp(βg) for a gain g < 0. When every gain is an even
/// integer of bounded size (integer couplings on graphs and lattices), the values for the
/// current β are tabulated once: the same `libm::exp` of the same argument (g = −k exactly),
/// so the decisions are bit-identical to computing them per attempt, at a table lookup's cost.
pub(crate) struct Metropolis {
    beta: f64,
    bound: Option<usize>,
    table: Vec<f64>,
}

impl Metropolis {
    pub(crate) fn new(bound: Option<usize>) -> Self {
        Metropolis {
            beta: f64::NAN,
            bound,
            table: Vec::new(),
        }
    }

    pub(crate) fn set_beta(&mut self, beta: f64) {
        if beta.to_bits() == self.beta.to_bits() {
            return;
        }
        self.beta = beta;
        if let Some(b) = self.bound {
            self.table.clear();
            self.table
                .extend((0..=b).map(|k| libm::exp(beta * -(k as f64))));
        }
    }

    /// The tabulated e^{−βk}, k = 0..=bound (empty without a bound).
    pub(crate) fn table(&self) -> &[f64] {
        &self.table
    }

    /// exp(βg) for g < 0.
    #[inline(always)]
    pub(crate) fn prob(&self, g: f64) -> f64 {
        let k = -g;
        if self.bound.is_some() && k == (k as usize) as f64 && (k as usize) < self.table.len() {
            return self.table[k as usize];
        }
        libm::exp(self.beta * g)
    }

    /// The Metropolis decision `u < exp(βg)` for a uniform u and a gain g < 0, exactly as
    /// [`Metropolis::prob`] decides it, but without evaluating exp when cheap bounds settle
    /// it: with y = βg ≤ 0, 1 + y ≤ e^y ≤ 1/(1 − y + y²/2) (common practice). A relative margin
    /// of 1e-12 covers the rounding of the bounds and of `libm::exp` (below 1 ulp), so every
    /// decision equals the one made with the computed exp (unit test over 10⁶ pairs).
    #[inline(always)]
    pub(crate) fn accept(&self, u: f64, g: f64) -> bool {
        if self.bound.is_none() {
            let y = self.beta * g;
            if u * (1.0 + y * (-1.0 + 0.5 * y)) > 1.0 + 1e-12 {
                return false;
            }
            if u < (1.0 + y) * (1.0 - 1e-12) {
                return true;
            }
        }
        u < self.prob(g)
    }
}

/// σ = sign(x), with sign(0) = +1: how every continuous algorithm rounds.
pub(crate) fn signs(x: &[f64]) -> Vec<i8> {
    x.iter().map(|&v| if v < 0.0 { -1 } else { 1 }).collect()
}

/// The output of an algorithm whose result is a point of any norm: σ = sign(x), and x
/// scaled to norm √n as the pre-rounding point.
pub(crate) fn rounded(x: &[f64], info: Info) -> Output {
    let norm = x
        .iter()
        .map(|v| v * v)
        .sum::<f64>()
        .sqrt()
        .max(f64::MIN_POSITIVE);
    let s = (x.len() as f64).sqrt() / norm;
    Output {
        spins: signs(x),
        point: Some(x.iter().map(|v| v * s).collect()),
        info,
    }
}

/// A uniformly random start in {±1}^n.
pub(crate) fn random_start(n: usize, rng: &mut Stream) -> Vec<i8> {
    (0..n).map(|_| rng.sign() as i8).collect()
}

#[cfg(test)]
mod tests {
    use super::Metropolis;
    use crate::rng::{Purpose, stream};

    /// The bounds never change a decision: over 10⁶ (u, g) pairs, with g spread over many
    /// scales and u also placed exactly at, and one ulp either side of, the computed exp,
    /// `accept` equals `u < libm::exp(βg)`.
    #[test]
    fn bounded_decisions_equal_computed_ones() {
        let mut m = Metropolis::new(None);
        let mut r = stream(&[3; 32], Purpose::Algorithm, 0);
        for beta in [0.1, 1.0, 4.7] {
            m.set_beta(beta);
            for i in 0..333_334u32 {
                let g = -(10f64.powf(6.0 * r.uniform() - 4.0));
                let c = libm::exp(beta * g);
                let u = match i % 4 {
                    0 => c,
                    1 => f64::from_bits(c.to_bits() + 1),
                    2 => f64::from_bits(c.to_bits().saturating_sub(1)),
                    _ => r.uniform(),
                };
                assert_eq!(m.accept(u, g), u < c, "β {beta} g {g} u {u} exp {c}");
            }
        }
    }
}
