//! Projected gradient ascent, the simplest stable algorithm and a baseline (common practice).
//!
//! - On the sphere {‖x‖² = n}: x ← √n·(x + η∇H(x))/‖x + η∇H(x)‖ from a uniformly random start,
//!   until the tangential gradient is small. For a quadratic H it is the power method on
//!   I + ηA and converges to the top eigenvector.
//! - On the cube's convex hull [−1, 1]^n (every ±1 family): x ← clip(x + η∇H(x)) from
//!   x = 0.1·g (g Gaussian), until a step moves x by less than tol·√n; then σ = sign(x). The
//!   pre-rounding point x (scaled to norm √n) is returned too.

use super::{Algorithm, Key, Kind};
use super::{Info, Output};
use crate::cell::Canon;
use crate::model::{Instance, ModelSpec, Smooth};
use crate::rng::Stream;
use crate::spec::{Settings, SpecError};

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

/// The registry entry of `gradient`.
pub const KIND: Kind = Kind {
    name: "gradient",
    summary: "Projected gradient ascent: on the sphere x ← √n (x + η∇H)/‖·‖; on ±1 families x ← clip(x + η∇H, −1, 1), then signs. Every family.",
    keys: &[
        Key {
            name: "step",
            ty: "number in (0, 1000]",
            default: "0.5",
            doc: "step size η",
        },
        Key {
            name: "tol",
            ty: "number in (0, 1)",
            default: "1e-6",
            doc: "stop when the step is this small: sphere, tangential gradient/√n; cube, step length/√n",
        },
        Key {
            name: "max_iterations",
            ty: "integer ≥ 1",
            default: "10000",
            doc: "budget of iterations",
        },
    ],
    parse,
};

/// Largest step size: beyond it x + η∇H is ∇H alone to double precision, and near 1e308
/// the sum overflows.
const MAX_STEP: f64 = 1e3;

fn parse(s: &Settings<'_>) -> Result<super::AlgoSpec, SpecError> {
    let mut p = Params::default();
    if let Some(t) = s.tolerance("tol")? {
        p.tol = t;
    }
    if let Some(x) = s.number("step")? {
        if !(x > 0.0 && x <= MAX_STEP) {
            return Err(s.fail(
                "step",
                format!("step {x} is not a step size in (0, {MAX_STEP}]"),
                "a step size η > 0, e.g. step = 0.5 (beyond 1000 the update is the gradient alone, and near 1e308 it overflows)",
            ));
        }
        p.step = x;
    }
    if let Some(m) = s.count("max_iterations", 1_000_000_000)? {
        p.max_iterations = m;
    }
    Ok(super::AlgoSpec::new(p))
}

impl Algorithm for Params {
    super::identity!();
    fn canon(&self, c: Canon) -> Canon {
        c.with("step", self.step)
            .with("tol", self.tol)
            .with("max_iterations", self.max_iterations)
    }
    fn has_point(&self) -> bool {
        true
    }
    fn work_bytes(&self, n: u64) -> u128 {
        // point, gradient, spins.
        n as u128 * (8 + 8 + 8 + 1)
    }
    fn cost(&self, n: u64, flip: f64) -> f64 {
        300.0 * n as f64 * flip
    }
    fn unsupported(&self, m: &ModelSpec) -> Option<&'static str> {
        (m.mixture().is_none() && !m.family.sparse() && !m.family.differentiable()).then_some(
            "it needs ∇H: a mean-field mixture (sk, cube, sphere), a graph, or the perceptron with constraint = \"quadratic\"",
        )
    }
    fn run(&self, inst: &Instance, rng: &mut Stream) -> Result<Output, super::AlgoError> {
        let (inst, h) = inst.split_field();
        let field = |x: &[f64], y: &mut [f64]| {
            super::with_field(h, 0.0, x, y);
        };
        Ok(match inst {
            Instance::Sphere(m) => run(self, m, rng),
            Instance::Sk(d) => run_cube(
                self,
                d.n(),
                |x, y| {
                    d.matvec(x, y);
                    field(x, y)
                },
                rng,
            ),
            Instance::Graph(g) => run_cube(
                self,
                g.n(),
                |x, y| {
                    g.matvec(x, y);
                    field(x, y)
                },
                rng,
            ),
            Instance::Patterns(p, crate::model::Domain::Sphere) if p.differentiable() => {
                run(self, p, rng)
            }
            Instance::Patterns(p, crate::model::Domain::Cube) if p.differentiable() => {
                run_cube(self, p.n(), |x, y| _ = p.value_grad(x, y), rng)
            }
            Instance::Spins(_) | Instance::Clauses(_) | Instance::Patterns(..) => {
                return Err(super::not_for(KIND.name, "the instance has no gradient"));
            }
            Instance::Cube(m) => run_cube(
                self,
                m.n(),
                |x, y| {
                    m.value_grad(x, y);
                    field(x, y)
                },
                rng,
            ),
            Instance::Fielded(..) => unreachable!("split above"),
        })
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
        crate::exec::progress::step_upto(info.iterations, p.max_iterations, "step");
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

pub fn run<S: Smooth>(p: &Params, m: &S, rng: &mut Stream) -> Output {
    let n = m.n();
    let x: Vec<f64> = (0..n).map(|_| rng.normal()).collect();
    ascend_sphere(p, m, x)
}

/// Projected ascent on the sphere from the point `x` (any non-zero norm; projected first).
pub fn ascend_sphere<S: Smooth>(p: &Params, m: &S, mut x: Vec<f64>) -> Output {
    let n = m.n();
    project(&mut x);
    let mut g = vec![0.0; n];
    let mut info = Info::default();
    while info.iterations < p.max_iterations {
        crate::exec::progress::step_upto(info.iterations, p.max_iterations, "step");
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
