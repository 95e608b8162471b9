//! Hessian ascent on the sphere (Subag, "Following the ground states of full-RSB spherical spin
//! glasses", Commun. Pure Appl. Math. (2021), arXiv:1812.04588): from x = 0, grow the radius in
//! K steps, each along the top eigenvector v of the Hessian ∇²H(x) restricted to the space
//! orthogonal to x: x ← x ± sqrt(δn)·v (δ = 1/K, the sign that gives the larger H), so that
//! ‖x‖² = n at the end. Each step gains ≈ δn·λ_max/2 with λ_max ≈ 2·sqrt(ξ''(q)), so H/n reaches
//! ∫₀¹ sqrt(ξ''(q)) dq (2·sqrt((p−1)/p) for pure p) as n → ∞ and δ → 0. The top eigenvector is
//! found by kiln's Lanczos (the Hessian is formed densely once per step: one pass over each
//! tensor, then O(n²) per product).

use super::{AlgoError, Info, Output};
use super::{Algorithm, Key, Kind};
use crate::cell::Canon;
use crate::linalg::top_eigen;
use crate::model::mixed::Mixed;
use crate::model::{Instance, ModelSpec};
use crate::rng::Stream;
use crate::spec::{Settings, SpecError};

/// Revision of this algorithm's code.
pub const REVISION: u32 = 2;

/// Settings.
#[derive(Clone, Debug, PartialEq)]
pub struct Params {
    /// Number of radial steps K (δ = 1/K). Default 40 (at n = 300 the best of 10, 20, 40, 80:
    /// each step uses up an edge direction of the Hessian, so K must stay well below n).
    pub steps: u64,
    /// Lanczos relative residual. Default 1e-6.
    pub tol: f64,
    /// Finish with projected gradient ascent on the sphere (step 0.2, tangential gradient
    /// below 1e-6 or 10 000 iterations) to remove the O(sqrt(δ)) discretisation loss of the
    /// finite steps. Default true (common practice; Subag's analysis has δ → 0 instead).
    pub polish: bool,
}

impl Default for Params {
    fn default() -> Self {
        Params {
            steps: 40,
            tol: 1e-6,
            polish: true,
        }
    }
}

/// The registry entry of `hessian`.
pub const KIND: Kind = Kind {
    name: "hessian",
    summary: "Hessian ascent (Subag 2018): the radius grows in `steps` along the top eigenvector of the tangential Hessian. The sphere family.",
    keys: &[
        Key {
            name: "steps",
            ty: "integer ≥ 1",
            default: "40",
            doc: "number of radial steps K (δ = 1/K); keep K well below n",
        },
        Key {
            name: "tol",
            ty: "number in (0, 1)",
            default: "1e-6",
            doc: "Lanczos relative residual",
        },
        Key {
            name: "polish",
            ty: "boolean",
            default: "`true`",
            doc: "finish with projected gradient ascent on the sphere",
        },
    ],
    parse,
};

fn parse(s: &Settings<'_>) -> Result<super::AlgoSpec, SpecError> {
    let mut p = Params::default();
    if let Some(x) = s.count("steps", 1_000_000)? {
        p.steps = x;
    }
    if let Some(t) = s.tolerance("tol")? {
        p.tol = t;
    }
    if let Some(b) = s.flag("polish")? {
        p.polish = b;
    }
    Ok(super::AlgoSpec::new(p))
}

impl Algorithm for Params {
    super::identity!();
    fn canon(&self, c: Canon) -> Canon {
        c.with("steps", self.steps)
            .with("tol", self.tol)
            .with("polish", self.polish)
    }
    fn has_point(&self) -> bool {
        true
    }
    fn work_bytes(&self, n: u64) -> u128 {
        // the dense Hessian, the Lanczos basis (64) and a few vectors.
        let n = n as u128;
        8 * n * n + 8 * n * 72
    }
    fn cost(&self, n: u64, flip: f64) -> f64 {
        let n = n as f64;
        self.steps as f64 * (3.0 * n * flip + 60.0 * n * n)
    }
    fn unsupported(&self, m: &ModelSpec) -> Option<&'static str> {
        (m.family.spins() || m.mixture().is_none())
            .then_some("Hessian ascent runs on the sphere family")
    }
    fn run(&self, inst: &Instance, rng: &mut Stream) -> Result<Output, AlgoError> {
        match inst {
            Instance::Sphere(m) => run(self, m, rng),
            _ => Err(super::not_for(
                KIND.name,
                "Hessian ascent runs on the sphere",
            )),
        }
    }
}

pub fn run(p: &Params, m: &Mixed, rng: &mut Stream) -> Result<Output, AlgoError> {
    let n = m.n();
    let k = p.steps.max(1);
    let step = (n as f64 / k as f64).sqrt();
    let mut x = vec![0.0f64; n];
    let mut info = Info::default();
    let mut y = vec![0.0; n];
    for _ in 0..k {
        let hess = m.hessian(&x);
        let r2: f64 = x.iter().map(|v| v * v).sum();
        let project = |v: &mut [f64], x: &[f64]| {
            if r2 > 0.0 {
                let c = v.iter().zip(x).map(|(a, b)| a * b).sum::<f64>() / r2;
                v.iter_mut().zip(x).for_each(|(a, b)| *a -= c * b);
            }
        };
        let mut start: Vec<f64> = (0..n).map(|_| rng.normal()).collect();
        project(&mut start, &x);
        let op = |v: &[f64], out: &mut [f64]| {
            // P H P v (v is already tangential up to rounding: project both sides).
            let mut w = v.to_vec();
            project(&mut w, &x);
            for (i, o) in out.iter_mut().enumerate() {
                *o = crate::kernels::dot(&hess[i * n..(i + 1) * n], &w);
            }
            project(out, &x);
        };
        let e = top_eigen(n, op, &start, p.tol, 64, 20_000)
            .map_err(|message| AlgoError::Numerical { message })?;
        info.iterations += e.matvecs;
        info.converged = e.converged;
        // Both signs; keep the larger H.
        for (yi, (&xi, &vi)) in y.iter_mut().zip(x.iter().zip(&e.vector)) {
            *yi = xi + step * vi;
        }
        let up = m.value(&y);
        let mut down_x = x.clone();
        down_x
            .iter_mut()
            .zip(&e.vector)
            .for_each(|(a, b)| *a -= step * b);
        if m.value(&down_x) > up {
            x = down_x;
        } else {
            x.copy_from_slice(&y);
        }
        info.sweeps += 1;
    }
    if p.polish {
        let ascent = super::gradient::Params {
            step: 0.2,
            ..Default::default()
        };
        let out = super::gradient::ascend_sphere(&ascent, m, x);
        info.iterations += out.info.iterations;
        x = out.point.expect("the sphere ascent returns its point");
    } else {
        // Rounding errors aside ‖x‖² = n already; normalise exactly.
        super::gradient::project(&mut x);
    }
    Ok(Output {
        spins: super::signs(&x),
        point: Some(x),
        info,
    })
}
