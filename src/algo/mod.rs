//! Optimisation algorithms. One file per algorithm, one contract for all:
//! a params struct with documented defaults, `run(&params, &instance, &mut stream)` returning
//! an [`Output`] (spins plus an [`Info`]) or an [`AlgoError`] carrying data; never a panic on
//! numerical trouble. Each algorithm has a revision number that enters the cache key.

pub mod amp;
pub mod anneal;
pub mod descent;
pub mod exhaustive;
pub mod gradient;
pub mod hessian;
pub mod iamp;
pub mod lowrank;
pub mod spectral;
pub mod tempering;

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
    /// Value per spin of a relaxation the algorithm solved before rounding (lowrank), or of
    /// its pre-rounding point (amp, iamp: H(m)/n).
    pub relaxation: Option<f64>,
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

/// A fully resolved algorithm with its settings (defaults filled in).
#[derive(Clone, Debug, PartialEq)]
pub enum AlgoSpec {
    Descent(descent::Params),
    Anneal(anneal::Params),
    Exhaustive(exhaustive::Params),
    Spectral(spectral::Params),
    Gradient(gradient::Params),
    Tempering(tempering::Params),
    Lowrank(lowrank::Params),
    Hessian(hessian::Params),
    Amp(amp::Params),
    Iamp(iamp::Params),
}

impl AlgoSpec {
    pub const KINDS: [&'static str; 10] = [
        "descent",
        "anneal",
        "exhaustive",
        "spectral",
        "gradient",
        "tempering",
        "lowrank",
        "hessian",
        "amp",
        "iamp",
    ];

    pub fn kind(&self) -> &'static str {
        match self {
            AlgoSpec::Descent(_) => "descent",
            AlgoSpec::Anneal(_) => "anneal",
            AlgoSpec::Exhaustive(_) => "exhaustive",
            AlgoSpec::Spectral(_) => "spectral",
            AlgoSpec::Gradient(_) => "gradient",
            AlgoSpec::Tempering(_) => "tempering",
            AlgoSpec::Lowrank(_) => "lowrank",
            AlgoSpec::Hessian(_) => "hessian",
            AlgoSpec::Amp(_) => "amp",
            AlgoSpec::Iamp(_) => "iamp",
        }
    }

    pub fn revision(&self) -> u32 {
        match self {
            AlgoSpec::Descent(_) => descent::REVISION,
            AlgoSpec::Anneal(_) => anneal::REVISION,
            AlgoSpec::Exhaustive(_) => exhaustive::REVISION,
            AlgoSpec::Spectral(_) => spectral::REVISION,
            AlgoSpec::Gradient(_) => gradient::REVISION,
            AlgoSpec::Tempering(_) => tempering::REVISION,
            AlgoSpec::Lowrank(_) => lowrank::REVISION,
            AlgoSpec::Hessian(_) => hessian::REVISION,
            AlgoSpec::Amp(_) => amp::REVISION,
            AlgoSpec::Iamp(_) => iamp::REVISION,
        }
    }

    /// Whether the output carries a pre-rounding continuous point.
    pub fn has_point(&self) -> bool {
        !matches!(
            self,
            AlgoSpec::Descent(_)
                | AlgoSpec::Anneal(_)
                | AlgoSpec::Exhaustive(_)
                | AlgoSpec::Tempering(_)
        )
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
            AlgoSpec::Spectral(p) => p.canon(c),
            AlgoSpec::Gradient(p) => p.canon(c),
            AlgoSpec::Tempering(p) => p.canon(c),
            AlgoSpec::Lowrank(p) => p.canon(c),
            AlgoSpec::Hessian(p) => p.canon(c),
            AlgoSpec::Amp(p) => p.canon(c),
            AlgoSpec::Iamp(p) => p.canon(c),
        }
    }

    /// The settings as one canonical string (the `settings` column).
    pub fn settings(&self) -> String {
        self.canon().encode()
    }

    /// Work-space bytes beyond the instance for size n.
    pub fn work_bytes(&self, n: u64) -> u128 {
        let n = n as u128;
        match self {
            // Lanczos basis (basis + 2 vectors of f64) and the point.
            AlgoSpec::Spectral(p) => 8 * n * (p.basis.max(2) as u128 + 4),
            // point, gradient, spins.
            AlgoSpec::Gradient(_) => n * (8 + 8 + 8 + 1),
            // spins and fields per replica, plus the best state.
            AlgoSpec::Tempering(p) => n * (9 * p.replicas.max(2) as u128 + 10),
            // the n×k factor (k ≤ sqrt(2n) + 1 by default) and the point.
            AlgoSpec::Lowrank(p) => {
                let k = p.rank_for(n as usize) as u128;
                8 * n * (k + 2) + n
            }
            // iterates, fields, signs.
            AlgoSpec::Amp(_) => 8 * n * 5,
            // the iterates m⁰…m^K it keeps for the Onsager sum, plus x, z, z_old, f.
            AlgoSpec::Iamp(p) => 8 * n * (p.steps() as u128 + 5),
            // the dense Hessian, the Lanczos basis (64) and a few vectors.
            AlgoSpec::Hessian(_) => 8 * n * n + 8 * n * 72,
            // spins (i8), fields (f64), an order permutation (u32), a copy of the reference.
            _ => n * (1 + 8 + 4 + 1),
        }
    }

    /// Relative cost of one run at size n when one spin flip (or one coordinate of a
    /// matrix–vector product) touches `flip` entries, for ordering work and sharding.
    pub fn cost(&self, n: u64, flip: f64) -> f64 {
        let n = n as f64;
        match self {
            AlgoSpec::Descent(_) => n * flip,
            AlgoSpec::Anneal(p) => n * flip * (1.0 + 0.3 * p.sweeps as f64),
            AlgoSpec::Exhaustive(_) => flip * 2f64.powf(n - 1.0),
            AlgoSpec::Spectral(_) => 200.0 * n * flip,
            AlgoSpec::Gradient(_) => 300.0 * n * flip,
            AlgoSpec::Tempering(p) => n * flip * 0.3 * (p.sweeps * p.replicas) as f64,
            AlgoSpec::Lowrank(p) => n * flip * p.rank_for(n as usize) as f64 * 50.0,
            AlgoSpec::Hessian(p) => p.steps as f64 * (3.0 * n * flip + 60.0 * n * n),
            AlgoSpec::Amp(p) => 0.3 * p.max_iterations as f64 * n * flip,
            AlgoSpec::Iamp(p) => p.steps() as f64 * n * flip,
        }
    }

    /// Why this algorithm cannot run on the model, if it cannot (checked by the spec).
    pub fn unsupported(&self, m: &crate::model::ModelSpec) -> Option<&'static str> {
        let quadratic = m.xi.terms.iter().all(|&(p, _)| p == 2);
        match self {
            AlgoSpec::Descent(_)
            | AlgoSpec::Anneal(_)
            | AlgoSpec::Exhaustive(_)
            | AlgoSpec::Tempering(_) => (!m.family.is_cube())
                .then_some("it moves ±1 spins; the sphere family has real coordinates"),
            AlgoSpec::Lowrank(_) => (!m.family.is_cube() || (!quadratic && !m.family.is_sparse()))
                .then_some("it relaxes a quadratic H on the cube (sk, a graph, or cube with xi = { 2 = … })"),
            AlgoSpec::Spectral(_) => (!quadratic && !m.family.is_sparse()).then_some(
                "it needs a quadratic H (a p = 2 model: sk, a graph, or xi = { 2 = … })",
            ),
            AlgoSpec::Gradient(_) => None,
            AlgoSpec::Hessian(_) => {
                (m.family.is_cube()).then_some("Hessian ascent runs on the sphere family")
            }
            AlgoSpec::Amp(_) => (!m.family.is_cube() || m.family.is_sparse())
                .then_some("AMP's Onsager term is that of a dense mean-field model on the cube (sk or cube)"),
            AlgoSpec::Iamp(_) => (!m.family.is_cube()
                || m.family.is_sparse()
                || m.xi.d2(0.0) <= 0.0)
                .then_some("incremental AMP needs a dense cube model with a p = 2 term (sk, or cube with xi = { 2 = …, … })"),
        }
    }

    pub fn run(&self, inst: &Instance, rng: &mut Stream) -> Result<Output, AlgoError> {
        let kind = self.kind();
        match (self, inst) {
            (AlgoSpec::Descent(p), Instance::Dense(d)) => Ok(descent::run(p, d, rng)),
            (AlgoSpec::Descent(p), Instance::Mixed(d)) => Ok(descent::run(p, d, rng)),
            (AlgoSpec::Descent(p), Instance::Sparse(d)) => Ok(descent::run(p, d, rng)),
            (AlgoSpec::Anneal(p), Instance::Dense(d)) => Ok(anneal::run(p, d, rng)),
            (AlgoSpec::Anneal(p), Instance::Mixed(d)) => Ok(anneal::run(p, d, rng)),
            (AlgoSpec::Anneal(p), Instance::Sparse(d)) => Ok(anneal::run(p, d, rng)),
            (AlgoSpec::Tempering(p), Instance::Dense(d)) => Ok(tempering::run(p, d, rng)),
            (AlgoSpec::Tempering(p), Instance::Mixed(d)) => Ok(tempering::run(p, d, rng)),
            (AlgoSpec::Tempering(p), Instance::Sparse(d)) => Ok(tempering::run(p, d, rng)),
            (AlgoSpec::Exhaustive(p), Instance::Dense(d)) => Ok(exhaustive::run(p, d)),
            (AlgoSpec::Exhaustive(p), Instance::Mixed(d)) => Ok(exhaustive::run(p, d)),
            (AlgoSpec::Exhaustive(p), Instance::Sparse(d)) => Ok(exhaustive::run(p, d)),
            (AlgoSpec::Spectral(p), Instance::Dense(d)) => {
                Ok(spectral::run(p, d.n(), |x, y| d.matvec(x, y), rng)?.0)
            }
            (AlgoSpec::Spectral(p), Instance::Sparse(g)) => {
                Ok(spectral::run(p, g.n(), |x, y| g.matvec(x, y), rng)?.0)
            }
            (AlgoSpec::Spectral(p), Instance::Mixed(m) | Instance::Sphere(m)) => {
                match (m.dense(), m.is_quadratic()) {
                    (Some(d), true) => Ok(spectral::run(p, d.n(), |x, y| d.matvec(x, y), rng)?.0),
                    _ => Err(AlgoError::Unsupported {
                        kind,
                        why: "H is not quadratic",
                    }),
                }
            }
            (AlgoSpec::Gradient(p), Instance::Sphere(m)) => Ok(gradient::run(p, m, rng)),
            (AlgoSpec::Gradient(p), Instance::Dense(d)) => {
                Ok(gradient::run_cube(p, d.n(), |x, y| d.matvec(x, y), rng))
            }
            (AlgoSpec::Gradient(p), Instance::Sparse(g)) => {
                Ok(gradient::run_cube(p, g.n(), |x, y| g.matvec(x, y), rng))
            }
            (AlgoSpec::Gradient(p), Instance::Mixed(m)) => Ok(gradient::run_cube(
                p,
                m.n(),
                |x, y| {
                    m.value_grad(x, y);
                },
                rng,
            )),
            (AlgoSpec::Lowrank(p), Instance::Dense(d)) => {
                Ok(with_relaxation(lowrank::run(p, d, rng)))
            }
            (AlgoSpec::Lowrank(p), Instance::Sparse(g)) => {
                Ok(with_relaxation(lowrank::run(p, g, rng)))
            }
            (AlgoSpec::Lowrank(p), Instance::Mixed(m)) => match (m.dense(), m.is_quadratic()) {
                (Some(d), true) => Ok(with_relaxation(lowrank::run(p, d, rng))),
                _ => Err(AlgoError::Unsupported {
                    kind,
                    why: "H is not quadratic",
                }),
            },
            (AlgoSpec::Hessian(p), Instance::Sphere(m)) => hessian::run(p, m, rng),
            (AlgoSpec::Amp(p), Instance::Dense(d)) => amp::run(
                p,
                d.n(),
                &crate::theory::Mixture::sk(),
                |x, y| d.value_grad(x, y),
                rng,
            ),
            (AlgoSpec::Amp(p), Instance::Mixed(m)) => {
                amp::run(p, m.n(), m.mixture(), |x, y| m.value_grad(x, y), rng)
            }
            (AlgoSpec::Iamp(p), Instance::Dense(d)) => iamp::run(
                p,
                d.n(),
                &crate::theory::Mixture::sk(),
                |x, y| d.value_grad(x, y),
                rng,
            ),
            (AlgoSpec::Iamp(p), Instance::Mixed(m)) => {
                iamp::run(p, m.n(), m.mixture(), |x, y| m.value_grad(x, y), rng)
            }
            (AlgoSpec::Amp(_) | AlgoSpec::Iamp(_), _) => Err(AlgoError::Unsupported {
                kind,
                why: "it runs on dense models on the cube (sk, cube)",
            }),
            (AlgoSpec::Hessian(_), _) => Err(AlgoError::Unsupported {
                kind,
                why: "Hessian ascent runs on the sphere",
            }),
            (AlgoSpec::Lowrank(_), Instance::Sphere(_)) => Err(AlgoError::Unsupported {
                kind,
                why: "the relaxation is of the cube",
            }),
            (
                AlgoSpec::Descent(_)
                | AlgoSpec::Anneal(_)
                | AlgoSpec::Exhaustive(_)
                | AlgoSpec::Tempering(_),
                Instance::Sphere(_),
            ) => Err(AlgoError::Unsupported {
                kind,
                why: "it moves ±1 spins; the sphere has real coordinates",
            }),
        }
    }
}

fn with_relaxation((mut out, value): (Output, f64)) -> Output {
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
