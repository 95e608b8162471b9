//! Projected gradient ascent, the simplest stable algorithm and a baseline (common practice).
//!
//! - On the sphere {‖x‖² = n}: x ← √n·(x + η∇H(x))/‖x + η∇H(x)‖ from a uniformly random start,
//!   until the tangential gradient is small. For a quadratic H it is the power method on
//!   I + ηA and converges to the top eigenvector.
//! - On the cube's convex hull [−1, 1]^n (every ±1 family): x ← clip(x + η∇H(x)) from
//!   x = 0.1·g (g Gaussian), until a step moves x by less than tol·√n; then σ = sign(x). The
//!   pre-rounding point x (scaled to norm √n) is returned too.

use super::{Info, Output};
use crate::cell::Canon;
use crate::model::mixed::Mixed;
use crate::rng::Stream;

/// Revision of this algorithm's code.
pub const REVISION: u32 = 1;

/// Settings.
#[derive(Clone, Debug, PartialEq)]
pub struct Params {
    /// Step size η. Default 0.5.
    pub step: f64,
    /// Stop when ‖∇_T H‖/√n (the tangential gradient) falls below this. Default 1e-6.
    pub tol: f64,
    /// Budget of iterations. Default 10 000.
    pub max_iterations: u64,
}

impl Default for Params {
    fn default() -> Self {
        Params {
            step: 0.5,
            tol: 1e-6,
            max_iterations: 10_000,
        }
    }
}

impl Params {
    pub(crate) fn canon(&self, c: Canon) -> Canon {
        c.with("step", self.step)
            .with("tol", self.tol)
            .with("max_iterations", self.max_iterations)
    }
}

/// Ascent on [−1, 1]^n with gradient `grad`, then rounding.
pub fn run_cube(
    p: &Params,
    n: usize,
    mut grad: impl FnMut(&[f64], &mut [f64]),
    rng: &mut Stream,
) -> Output {
    let mut x: Vec<f64> = (0..n).map(|_| 0.1 * rng.normal()).collect();
    let mut g = vec![0.0; n];
    let mut info = Info::default();
    while info.iterations < p.max_iterations {
        grad(&x, &mut g);
        let mut moved = 0.0;
        for (xi, &gi) in x.iter_mut().zip(&g) {
            let next = (*xi + p.step * gi).clamp(-1.0, 1.0);
            moved += (next - *xi).powi(2);
            *xi = next;
        }
        info.iterations += 1;
        if (moved / n as f64).sqrt() < p.tol {
            info.converged = true;
            break;
        }
    }
    info.sweeps = info.iterations;
    super::rounded(&x, info)
}

/// Scales x to norm √n.
pub(crate) fn project(x: &mut [f64]) {
    let n = x.len() as f64;
    let norm = x.iter().map(|v| v * v).sum::<f64>().sqrt();
    let s = n.sqrt() / norm;
    x.iter_mut().for_each(|v| *v *= s);
}

pub fn run(p: &Params, m: &Mixed, rng: &mut Stream) -> Output {
    let n = m.n();
    let x: Vec<f64> = (0..n).map(|_| rng.normal()).collect();
    ascend_sphere(p, m, x)
}

/// Projected ascent on the sphere from the point `x` (any non-zero norm; projected first).
pub fn ascend_sphere(p: &Params, m: &Mixed, mut x: Vec<f64>) -> Output {
    let n = m.n();
    project(&mut x);
    let mut g = vec![0.0; n];
    let mut info = Info::default();
    while info.iterations < p.max_iterations {
        m.value_grad(&x, &mut g);
        // Tangential part: g − (g·x/n) x.
        let radial = g.iter().zip(&x).map(|(a, b)| a * b).sum::<f64>() / n as f64;
        let tang = g
            .iter()
            .zip(&x)
            .map(|(a, b)| (a - radial * b).powi(2))
            .sum::<f64>()
            .sqrt()
            / (n as f64).sqrt();
        if tang < p.tol {
            info.converged = true;
            break;
        }
        x.iter_mut().zip(&g).for_each(|(a, b)| *a += p.step * b);
        project(&mut x);
        info.iterations += 1;
    }
    info.sweeps = info.iterations;
    Output {
        spins: super::signs(&x),
        point: Some(x),
        info,
    }
}
