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
use crate::cell::Canon;
use crate::linalg::top_eigen;
use crate::rng::Stream;

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

impl Params {
    pub(crate) fn canon(&self, c: Canon) -> Canon {
        c.with("tol", self.tol)
            .with("basis", self.basis)
            .with("max_matvecs", self.max_matvecs)
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
            },
        },
        e.value,
    ))
}
