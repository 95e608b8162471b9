//! An exact feasibility decision for the spherical perceptron at κ ≥ 0, by least-distance
//! programming (Lawson & Hanson 1974, *Solving Least Squares Problems*, ch. 23).
//!
//! A point x with ‖x‖² = n satisfies every pattern when ⟨g_a, y⟩ ≥ κ for y = x/√n, ‖y‖ = 1.
//! The least-norm y with ⟨g_a, y⟩ ≥ 1 for all a (the least-distance problem, LDP) answers every
//! κ ≥ 0 at once: it exists exactly when the patterns are strictly separable through the
//! origin, and then the instance's largest margin is κ* = 1/‖y‖ (scaling y by κ solves the
//! problem with right-hand side κ, and a longer y only lowers the projections of ‖y‖ = 1).
//! So the instance is satisfiable at κ = 0 iff the LDP is feasible, and at κ > 0 iff also
//! κ ≤ κ*. The LDP is solved through its dual, a non-negative least-squares problem:
//! min ‖E u − f‖ over u ≥ 0 with E = [Gᵀ; 1ᵀ] (n + 1 rows, one column per pattern) and
//! f = (0, …, 0, 1); with r = E u − f, the LDP is infeasible iff r = 0, else y = −r₁..ₙ/r_{n+1}.
//! NNLS is the active-set method of Lawson & Hanson (finite, exact in exact arithmetic), here
//! on the Gram matrix EᵀE = GGᵀ + 11ᵀ with a Cholesky factor of the passive set grown one
//! column at a time (refactored when columns leave).
//!
//! The decision is certified: an instance is reported satisfiable only when the output point
//! x = √n·y/‖y‖ satisfies every pattern as the table counts them (the `satisfied` column is
//! the decision). Output: that max-margin point; for patterns that are not separable, the
//! Hebb point Σ_a g_a scaled to ‖x‖² = n (a decision procedure has no optimiser's output to
//! give there; its `energy` is that point's, not an optimum).

use super::{AlgoError, Algorithm, Info, Kind, Output};
use crate::cell::Canon;
use crate::model::perceptron::Patterns;
use crate::model::{Domain, Instance, ModelSpec};
use crate::rng::Stream;
use crate::spec::{Settings, SpecError};

/// Revision of this algorithm's code. Bump when its numbers change.
pub const REVISION: u32 = 1;

/// No settings.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct Params {}

/// The registry entry of `least-distance`.
pub const KIND: Kind = Kind {
    name: "least-distance",
    summary: "Exact satisfiability of the spherical perceptron at margin κ ≥ 0: the least-norm y with ⟨g_a, y⟩ ≥ 1 (least-distance programming by non-negative least squares, Lawson & Hanson 1974) gives the largest margin κ* = 1/‖y‖, and the instance is satisfiable iff it exists and κ ≤ κ*. Output: the max-margin point (satisfied iff the instance is), else the Hebb point Σ_a g_a. `perceptron` with `domain = \"sphere\"` and margin ≥ 0.",
    keys: &[],
    parse,
};

fn parse(_s: &Settings<'_>) -> Result<super::AlgoSpec, SpecError> {
    Ok(super::AlgoSpec::new(Params {}))
}

impl Algorithm for Params {
    super::identity!();
    fn canon(&self, c: Canon) -> Canon {
        c
    }
    fn has_point(&self) -> bool {
        true
    }
    /// The Gram matrix and its factor are counted by the family (they grow with m²).
    fn work_bytes(&self, n: u64) -> u128 {
        n as u128 * 3 * 8
    }
    /// The Gram matrix costs m²·n with `flip` = 2·m·n entries.
    fn cost(&self, n: u64, flip: f64) -> f64 {
        flip * flip / (4.0 * n.max(1) as f64)
    }
    fn unsupported(&self, m: &ModelSpec) -> Option<&'static str> {
        match m
            .family
            .as_any()
            .downcast_ref::<crate::model::families::perceptron::Perceptron>()
        {
            Some(p) if p.domain == Domain::Sphere && p.margin >= 0.0 => None,
            Some(p) if p.domain == Domain::Sphere => Some(
                "a negative margin makes the feasible set non-convex; least-distance decides κ ≥ 0",
            ),
            _ => Some(
                "it decides the spherical perceptron (family perceptron with domain = \"sphere\")",
            ),
        }
    }
    fn run(&self, inst: &Instance, _rng: &mut Stream) -> Result<Output, AlgoError> {
        match inst {
            Instance::Patterns(p, Domain::Sphere) if p.margin() >= 0.0 => run(p),
            _ => Err(super::not_for(
                KIND.name,
                "it decides the spherical perceptron at κ ≥ 0",
            )),
        }
    }
}

/// The largest margin of the patterns and the point that attains it, from
/// [`max_margin`]; the output as described in the module notes.
pub fn run(p: &Patterns) -> Result<Output, AlgoError> {
    let n = p.n();
    let (y, iterations) = max_margin(p)?;
    // The max-margin direction, or the Hebb point Σ_a g_a; scaled to ‖x‖² = n.
    let x = y.unwrap_or_else(|| (0..n).map(|i| p.column(i).iter().sum()).collect());
    Ok(super::rounded(
        &x,
        Info {
            iterations,
            sweeps: 1,
            converged: true,
            ..Default::default()
        },
    ))
}

/// The least-norm y with ⟨g_a, y⟩ ≥ 1 for every pattern (g_a the unscaled patterns), or None
/// when the patterns are not strictly separable, with the NNLS iterations taken. A returned y
/// is checked: every ⟨g_a, y⟩ is > 0.
pub fn max_margin(p: &Patterns) -> Result<(Option<Vec<f64>>, u64), AlgoError> {
    let (n, m) = (p.n(), p.patterns());
    // Gram matrix A = G Gᵀ + 1 1ᵀ (G's rows the unscaled patterns: g_a = √n·column entries).
    let mut a = vec![0.0f64; m * m];
    for i in 0..n {
        let c = p.column(i);
        for (r, &ca) in c.iter().enumerate() {
            let row = &mut a[r * m..(r + 1) * m];
            for (v, &cb) in row.iter_mut().zip(c) {
                *v += ca * cb;
            }
        }
    }
    let nf = n as f64;
    a.iter_mut().for_each(|v| *v = *v * nf + 1.0);
    // Tolerance on the dual gradient: 10·eps·‖E‖₁·m (the choice of common NNLS codes).
    let col_sum = (0..m)
        .map(|a_| (0..n).map(|i| p.column(i)[a_].abs()).sum::<f64>() * nf.sqrt() + 1.0)
        .fold(0.0, f64::max);
    let tol = 10.0 * f64::EPSILON * col_sum * m as f64;
    let (u, iterations) = nnls(&a, m, tol)?;
    // s = 1ᵀu; ‖r‖² = 1 − s at the optimum; y = Gᵀu/(1 − s).
    let s: f64 = u.iter().sum();
    if 1.0 - s <= 1e-12 {
        return Ok((None, iterations));
    }
    let mut y = vec![0.0; n];
    for (i, v) in y.iter_mut().enumerate() {
        let c = p.column(i);
        *v = c.iter().zip(&u).map(|(g, w)| g * w).sum::<f64>() * nf.sqrt() / (1.0 - s);
    }
    let mut t = vec![0.0; m];
    p.projections(|i| y[i], &mut t);
    Ok((t.iter().all(|&v| v > 0.0).then_some(y), iterations))
}

/// Lawson–Hanson NNLS on the normal equations: minimises ½uᵀAu − 1ᵀu over u ≥ 0 for the m×m
/// positive semi-definite A (row-major). Returns u and the outer iterations.
fn nnls(a: &[f64], m: usize, tol: f64) -> Result<(Vec<f64>, u64), AlgoError> {
    let mut u = vec![0.0f64; m];
    let mut passive: Vec<usize> = Vec::new();
    let mut in_p = vec![false; m];
    let mut blocked = vec![false; m];
    let mut chol = Cholesky::default();
    let mut w = vec![0.0f64; m];
    let limit = 20 * m as u64 + 100;
    let mut outer = 0u64;
    loop {
        // w = 1 − A u.
        for (r, wr) in w.iter_mut().enumerate() {
            *wr = 1.0
                - a[r * m..(r + 1) * m]
                    .iter()
                    .zip(&u)
                    .map(|(x, y)| x * y)
                    .sum::<f64>();
        }
        let Some(t) = (0..m)
            .filter(|&j| !in_p[j] && !blocked[j] && w[j] > tol)
            .max_by(|&i, &j| w[i].total_cmp(&w[j]).then(j.cmp(&i)))
        else {
            return Ok((u, outer));
        };
        outer += 1;
        if outer > limit {
            return Err(AlgoError::Numerical {
                message: format!("NNLS did not settle within {limit} steps (m = {m})"),
            });
        }
        if !chol.push(a, m, &passive, t) {
            // Column t depends on the passive ones (to rounding): not a candidate until u moves.
            blocked[t] = true;
            continue;
        }
        passive.push(t);
        in_p[t] = true;
        loop {
            let z = chol.solve(&vec![1.0; passive.len()]);
            if z.iter().all(|&v| v > 0.0) {
                for (&j, &v) in passive.iter().zip(&z) {
                    u[j] = v;
                }
                break;
            }
            // Step from u toward z until the first passive coordinate reaches zero (jmin);
            // it leaves, with any other that the step brought to zero (to rounding).
            let (mut step, mut jmin) = (f64::INFINITY, passive[0]);
            for (&j, &v) in passive.iter().zip(&z) {
                if v <= 0.0 {
                    let r = u[j] / (u[j] - v);
                    if r < step {
                        (step, jmin) = (r, j);
                    }
                }
            }
            for (&j, &v) in passive.iter().zip(&z) {
                u[j] += step * (v - u[j]);
            }
            let floor = 1e-15 * u.iter().fold(0.0f64, |x, &y| x.max(y));
            u[jmin] = 0.0;
            let keep: Vec<usize> = passive.iter().copied().filter(|&j| u[j] > floor).collect();
            for &j in &passive {
                if u[j] <= floor {
                    u[j] = 0.0;
                    in_p[j] = false;
                }
            }
            passive = keep;
            chol = Cholesky::default();
            let mut kept = Vec::with_capacity(passive.len());
            for &j in &passive {
                if chol.push(a, m, &kept, j) {
                    kept.push(j);
                } else {
                    u[j] = 0.0;
                    in_p[j] = false;
                }
            }
            passive = kept;
            if passive.is_empty() {
                break;
            }
        }
        // u moved: every candidate is back, except t if rounding sent it straight out again
        // (its z was not positive), which would otherwise be chosen forever.
        blocked.iter_mut().for_each(|b| *b = false);
        blocked[t] = !in_p[t];
    }
}

/// The lower Cholesky factor L of A restricted to an ordered index set, grown a row at a time.
#[derive(Default)]
struct Cholesky {
    rows: Vec<Vec<f64>>,
}

impl Cholesky {
    /// Appends index t after `set` (the indices already factored, in order); false when t's
    /// column is dependent on them to rounding (the factor is then unchanged).
    fn push(&mut self, a: &[f64], m: usize, set: &[usize], t: usize) -> bool {
        let k = self.rows.len();
        let mut l = vec![0.0; k + 1];
        for r in 0..k {
            let dot: f64 = (0..r).map(|c| self.rows[r][c] * l[c]).sum();
            l[r] = (a[set[r] * m + t] - dot) / self.rows[r][r];
        }
        let att = a[t * m + t];
        let d2 = att - l[..k].iter().map(|v| v * v).sum::<f64>();
        if d2 <= 1e-10 * att {
            return false;
        }
        l[k] = d2.sqrt();
        self.rows.push(l);
        true
    }

    /// Solves L Lᵀ z = b.
    fn solve(&self, b: &[f64]) -> Vec<f64> {
        let k = self.rows.len();
        let mut z = b.to_vec();
        for r in 0..k {
            let dot: f64 = (0..r).map(|c| self.rows[r][c] * z[c]).sum();
            z[r] = (z[r] - dot) / self.rows[r][r];
        }
        for r in (0..k).rev() {
            let dot: f64 = (r + 1..k).map(|c| self.rows[c][r] * z[c]).sum();
            z[r] = (z[r] - dot) / self.rows[r][r];
        }
        z
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The solution is a least-norm point: it satisfies every constraint, and the KKT
    /// conditions hold — y = Σ λ_a g_a with λ ≥ 0 supported on the tight constraints (checked
    /// by solving for λ on the tight set and comparing). Also: at m ≤ n the patterns are
    /// always separable (Cover 1965), and 2 opposite patterns never are.
    #[test]
    fn least_norm_point_and_trivial_cases() {
        for (n, m, seed) in [(20, 10, 1u8), (20, 30, 2), (30, 50, 3), (50, 40, 4)] {
            let p = Patterns::sample(n, m, 0.0, &[seed; 32], 0.0);
            let (y, _) = max_margin(&p).unwrap();
            let Some(y) = y else {
                assert!(m > n, "m ≤ n must be separable");
                continue;
            };
            let mut t = vec![0.0; m];
            p.projections(|i| y[i], &mut t);
            let sq = (n as f64).sqrt();
            // ⟨g_a, y⟩ = √n·t_a ≥ 1.
            assert!(t.iter().all(|&v| v * sq > 1.0 - 1e-9), "{t:?}");
            let tight: Vec<usize> = (0..m).filter(|&a| (t[a] * sq - 1.0).abs() < 1e-7).collect();
            assert!(!tight.is_empty() && tight.len() <= n);
            // y in the cone of the tight patterns: least squares for λ on them, residual ≈ 0.
            let g = |a: usize, i: usize| p.column(i)[a] * sq;
            let k = tight.len();
            let mut gram = vec![0.0; k * k];
            let mut rhs = vec![0.0; k];
            for (r, &ar) in tight.iter().enumerate() {
                for (c, &ac) in tight.iter().enumerate() {
                    gram[r * k + c] = (0..n).map(|i| g(ar, i) * g(ac, i)).sum();
                }
                rhs[r] = (0..n).map(|i| g(ar, i) * y[i]).sum();
            }
            let mut chol = Cholesky::default();
            let idx: Vec<usize> = (0..k).collect();
            for j in 0..k {
                assert!(chol.push(&gram, k, &idx[..j], j));
            }
            let lambda = chol.solve(&rhs);
            assert!(lambda.iter().all(|&l| l > -1e-9), "λ {lambda:?}");
            for (i, &yi) in y.iter().enumerate() {
                let back: f64 = tight.iter().zip(&lambda).map(|(&a, l)| l * g(a, i)).sum();
                assert!((back - yi).abs() < 1e-7, "n {n} m {m}: {back} vs {yi}");
            }
        }
        let rows = [1.0, 0.5, -1.0, -0.5];
        let p = Patterns::from_rows(2, 0.0, &rows);
        assert!(max_margin(&p).unwrap().0.is_none());
    }
}
