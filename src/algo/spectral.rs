//! Spectral rounding: the top eigenvector v of the coupling operator (dense A = J/√n, the p = 2
//! matrix of a mixture, or a sparse graph's J) by Lanczos, then σ = sign(v) on the cube, or
//! x = √n·v on the sphere, where it is the exact maximiser of H = ½ xᵀAx (H/n = λ_max/2).
//! On SK, H(sign v)/n → 2/π ≈ 0.6366, far below the ground state (sign of a delocalised
//! eigenvector, a standard derivation of the trade); a baseline.
//!
//! The eigenvector's sign is fixed by a positive overlap with the random start vector, so the
//! same algorithm randomness gives comparable outputs on correlated instances. The
//! pre-rounding point √n·v is returned alongside the spins.

use super::{AlgoError, Info, Output};
use super::{Algorithm, Key, Kind};
use crate::cell::Canon;
use crate::linalg::top_eigen;
use crate::model::{Instance, ModelSpec};
use crate::rng::Stream;
use crate::spec::{Settings, SpecError};

/// Revision of this algorithm's code.
/// 2: Lanczos sums with the shared 16-lane kernels (last-bit changes).
pub const REVISION: u32 = 2;

/// Settings.
#[derive(Clone, Debug, PartialEq)]
pub struct Params {
    /// Relative residual ‖Av − λv‖/max(1, |λ|) to stop at. Default 1e-10.
    pub tol: f64,
    /// Lanczos basis size before a restart. Default 64.
    pub basis: u64,
    /// Budget of operator applications. Default 20 000.
    pub max_matvecs: u64,
}

impl Default for Params {
    fn default() -> Self {
        Params {
            tol: 1e-10,
            basis: 64,
            max_matvecs: 20_000,
        }
    }
}

/// The registry entry of `spectral`.
pub const KIND: Kind = Kind {
    name: "spectral",
    summary: "Top eigenvector of the coupling matrix (restarted Lanczos), then signs. p = 2 models and graphs; on the sphere with ξ = c q² it is the exact maximum.",
    keys: &[
        Key {
            name: "tol",
            ty: "number in (0, 1)",
            default: "1e-10",
            doc: "relative residual ‖Av − λv‖/max(1, |λ|) to stop at",
        },
        Key {
            name: "basis",
            ty: "integer ≥ 2",
            default: "64",
            doc: "Lanczos basis size before a restart",
        },
        Key {
            name: "max_matvecs",
            ty: "integer ≥ 1",
            default: "20000",
            doc: "budget of matrix–vector products",
        },
    ],
    parse,
};

fn parse(s: &Settings<'_>) -> Result<super::AlgoSpec, SpecError> {
    let mut p = Params::default();
    if let Some(t) = s.tolerance("tol")? {
        p.tol = t;
    }
    if let Some(b) = s.count("basis", 10_000)? {
        p.basis = b.max(2);
    }
    if let Some(m) = s.count("max_matvecs", 1_000_000_000)? {
        p.max_matvecs = m;
    }
    Ok(super::AlgoSpec::new(p))
}

impl Algorithm for Params {
    super::identity!();
    fn canon(&self, c: Canon) -> Canon {
        c.with("tol", self.tol)
            .with("basis", self.basis)
            .with("max_matvecs", self.max_matvecs)
    }
    fn has_point(&self) -> bool {
        true
    }
    fn work_bytes(&self, n: u64) -> u128 {
        // Lanczos basis (basis + 2 vectors of f64) and the point.
        8 * n as u128 * (self.basis.max(2) as u128 + 4)
    }
    fn cost(&self, n: u64, flip: f64) -> f64 {
        200.0 * n as f64 * flip
    }
    fn unsupported(&self, m: &ModelSpec) -> Option<&'static str> {
        (!m.family.quadratic())
            .then_some("it needs a quadratic H (a p = 2 model: sk, a graph, or xi = { 2 = … })")
    }
    fn run(&self, inst: &Instance, rng: &mut Stream) -> Result<Output, AlgoError> {
        // With a field the eigenvector is of the couplings alone; the field picks its sign.
        let (inst, h) = inst.split_field();
        let out = match inst {
            Instance::Sk(d) => Ok(run(self, d.n(), |x, y| d.matvec(x, y), rng)?.0),
            Instance::Graph(g) => Ok(run(self, g.n(), |x, y| g.matvec(x, y), rng)?.0),
            Instance::Spins(_) | Instance::Clauses(_) | Instance::Patterns(..) => {
                Err(super::not_for(KIND.name, "H is not quadratic"))
            }
            Instance::Cube(m) | Instance::Sphere(m) => match (m.dense(), m.is_quadratic()) {
                (Some(d), true) => Ok(run(self, d.n(), |x, y| d.matvec(x, y), rng)?.0),
                _ => Err(super::not_for(KIND.name, "H is not quadratic")),
            },
            Instance::Fielded(..) => unreachable!("split above"),
        };
        out.map(|o| super::toward_field(o, h))
    }
}

/// Runs Lanczos on `op` and rounds. Returns (spins, point = √n v, λ_max, info).
pub fn run(
    p: &Params,
    n: usize,
    op: impl FnMut(&[f64], &mut [f64]),
    rng: &mut Stream,
) -> Result<(Output, f64), AlgoError> {
    let start: Vec<f64> = (0..n).map(|_| rng.normal()).collect();
    let e = top_eigen(n, op, &start, p.tol, p.basis as usize, p.max_matvecs)
        .map_err(|m| AlgoError::Numerical { message: m })?;
    let along: f64 = e.vector.iter().zip(&start).map(|(a, b)| a * b).sum();
    let sgn = if along < 0.0 { -1.0 } else { 1.0 };
    let scale = sgn * (n as f64).sqrt();
    let point: Vec<f64> = e.vector.iter().map(|v| v * scale).collect();
    Ok((
        Output {
            spins: super::signs(&point),
            point: Some(point),
            info: Info {
                iterations: e.matvecs,
                sweeps: 0,
                converged: e.converged,
                relaxation: None,
                ..Default::default()
            },
        },
        e.value,
    ))
}
