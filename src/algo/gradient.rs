//! Projected gradient ascent on the sphere {‖x‖² = n}: x ← √n·(x + η∇H(x))/‖x + η∇H(x)‖ from a
//! uniformly random start, until the tangential gradient is small. The simplest stable
//! algorithm and a baseline (common practice). For a quadratic H it is the power method on
//! I + ηA and converges to the top eigenvector.

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

fn project(x: &mut [f64]) {
    let n = x.len() as f64;
    let norm = x.iter().map(|v| v * v).sum::<f64>().sqrt();
    let s = n.sqrt() / norm;
    x.iter_mut().for_each(|v| *v *= s);
}

pub fn run(p: &Params, m: &Mixed, rng: &mut Stream) -> Output {
    let n = m.n();
    let mut x: Vec<f64> = (0..n).map(|_| rng.normal()).collect();
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
    let spins = x.iter().map(|&v| if v < 0.0 { -1 } else { 1 }).collect();
    Output {
        spins,
        point: Some(x),
        info,
    }
}
