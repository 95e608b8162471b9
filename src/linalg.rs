//! Small dense linear algebra kiln needs itself: the top eigenpair of a symmetric operator by
//! Lanczos with full reorthogonalisation and restarts, and the eigen-decomposition of the
//! symmetric tridiagonal matrix it produces (implicit QL with Wilkinson shifts; Golub & Van
//! Loan, Matrix Computations, 4th ed., §8.3; common practice).

/// Top eigenpair found by [`top_eigen`].
#[derive(Clone, Debug)]
pub struct Eigen {
    pub value: f64,
    /// Unit vector.
    pub vector: Vec<f64>,
    /// Operator applications.
    pub matvecs: u64,
    /// ‖Av − λv‖ at the end.
    pub residual: f64,
    pub converged: bool,
}

/// Eigenvalues (ascending) and eigenvectors (columns of `z`, row-major k×k) of the symmetric
/// tridiagonal matrix with diagonal `d` and off-diagonal `e` (`e[i] = T[i][i+1]`).
pub fn tridiagonal_eigen(d: &[f64], e: &[f64]) -> Result<(Vec<f64>, Vec<f64>), String> {
    let n = d.len();
    let mut d = d.to_vec();
    let mut e: Vec<f64> = (0..n).map(|i| if i + 1 < n { e[i] } else { 0.0 }).collect();
    let mut z = vec![0.0; n * n];
    for i in 0..n {
        z[i * n + i] = 1.0;
    }
    for l in 0..n {
        let mut iter = 0;
        loop {
            let mut m = l;
            while m + 1 < n {
                let dd = d[m].abs() + d[m + 1].abs();
                if e[m].abs() <= f64::EPSILON * dd {
                    break;
                }
                m += 1;
            }
            if m == l {
                break;
            }
            iter += 1;
            if iter > 100 {
                return Err(format!("tridiagonal QL did not converge at row {l}"));
            }
            let mut g = (d[l + 1] - d[l]) / (2.0 * e[l]);
            let mut r = g.hypot(1.0);
            g = d[m] - d[l] + e[l] / (g + if g >= 0.0 { r.abs() } else { -r.abs() });
            let (mut s, mut c, mut p) = (1.0, 1.0, 0.0);
            let mut early = false;
            let mut i = m;
            while i > l {
                i -= 1;
                let f = s * e[i];
                let b = c * e[i];
                r = f.hypot(g);
                e[i + 1] = r;
                if r == 0.0 {
                    d[i + 1] -= p;
                    e[m] = 0.0;
                    early = true;
                    break;
                }
                s = f / r;
                c = g / r;
                g = d[i + 1] - p;
                r = (d[i] - g) * s + 2.0 * c * b;
                p = s * r;
                d[i + 1] = g + p;
                g = c * r - b;
                for k in 0..n {
                    let f = z[k * n + i + 1];
                    z[k * n + i + 1] = s * z[k * n + i] + c * f;
                    z[k * n + i] = c * z[k * n + i] - s * f;
                }
            }
            if early {
                continue;
            }
            d[l] -= p;
            e[l] = g;
            e[m] = 0.0;
        }
    }
    // Sort ascending, moving columns along.
    let mut idx: Vec<usize> = (0..n).collect();
    idx.sort_by(|&a, &b| d[a].total_cmp(&d[b]));
    let vals: Vec<f64> = idx.iter().map(|&i| d[i]).collect();
    let mut zs = vec![0.0; n * n];
    for (new, &old) in idx.iter().enumerate() {
        for k in 0..n {
            zs[k * n + new] = z[k * n + old];
        }
    }
    Ok((vals, zs))
}

use crate::kernels::{axpy, dot};

fn normalize(v: &mut [f64]) -> f64 {
    crate::kernels::normalize_with(v, dot)
}

/// Top (largest algebraic) eigenpair of the symmetric operator `op` (y = A x) on R^n, from
/// `start`: Lanczos with a basis of at most `basis` vectors, full reorthogonalisation (twice),
/// restarted from the current Ritz vector until ‖Av − λv‖ ≤ tol·max(1, |λ|) or `max_matvecs`.
pub fn top_eigen(
    n: usize,
    mut op: impl FnMut(&[f64], &mut [f64]),
    start: &[f64],
    tol: f64,
    basis: usize,
    max_matvecs: u64,
) -> Result<Eigen, String> {
    let basis = basis.clamp(2, n.max(2));
    let mut v0 = start.to_vec();
    if normalize(&mut v0) == 0.0 {
        return Err("Lanczos start vector is zero".into());
    }
    let mut matvecs = 0u64;
    let mut w = vec![0.0; n];
    loop {
        let mut q: Vec<Vec<f64>> = vec![v0.clone()];
        let (mut alpha, mut beta): (Vec<f64>, Vec<f64>) = (Vec::new(), Vec::new());
        let mut ritz = (0.0, v0.clone());
        for j in 0..basis.min(n) {
            op(&q[j], &mut w);
            matvecs += 1;
            let a = dot(&w, &q[j]);
            alpha.push(a);
            for _ in 0..2 {
                for qi in &q {
                    let c = dot(&w, qi);
                    axpy(&mut w, -c, qi);
                }
            }
            let b = dot(&w, &w).sqrt();
            // Ritz pair of the current tridiagonal matrix.
            let k = alpha.len();
            let (vals, z) = tridiagonal_eigen(&alpha, &beta)?;
            let theta = vals[k - 1];
            let ylast = z[(k - 1) * k + (k - 1)];
            let res = (b * ylast).abs();
            let done = res <= tol * theta.abs().max(1.0)
                || j + 1 == n
                || b <= f64::EPSILON * theta.abs().max(1.0)
                || matvecs >= max_matvecs;
            if done || j + 1 == basis.min(n) {
                let mut v = vec![0.0; n];
                for (i, qi) in q.iter().enumerate() {
                    axpy(&mut v, z[i * k + (k - 1)], qi);
                }
                normalize(&mut v);
                ritz = (theta, v);
                if done {
                    let converged = res <= tol * theta.abs().max(1.0)
                        || j + 1 == n
                        || b <= f64::EPSILON * theta.abs().max(1.0);
                    return Ok(Eigen {
                        value: ritz.0,
                        vector: ritz.1,
                        matvecs,
                        residual: res,
                        converged,
                    });
                }
                break;
            }
            beta.push(b);
            let mut next = w.clone();
            next.iter_mut().for_each(|x| *x /= b);
            q.push(next);
        }
        v0 = ritz.1;
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Every returned pair satisfies T z = λ z, and the eigenvalues of a known matrix (the
    /// path-graph Laplacian-like tridiagonal 2, −1: λ_k = 2 − 2cos(kπ/(n+1)), common practice).
    #[test]
    fn tridiagonal_known_spectrum() {
        let n = 12;
        let d = vec![2.0; n];
        let e = vec![-1.0; n - 1];
        let (vals, z) = tridiagonal_eigen(&d, &e).unwrap();
        for (k, v) in vals.iter().enumerate() {
            let want = 2.0 - 2.0 * (((k + 1) as f64) * std::f64::consts::PI / (n + 1) as f64).cos();
            assert!((v - want).abs() < 1e-12, "{k}: {v} vs {want}");
            for i in 0..n {
                let mut tz = d[i] * z[i * n + k];
                if i > 0 {
                    tz += e[i - 1] * z[(i - 1) * n + k];
                }
                if i + 1 < n {
                    tz += e[i] * z[(i + 1) * n + k];
                }
                assert!((tz - v * z[i * n + k]).abs() < 1e-12);
            }
        }
    }

    /// A diagonal operator with a known top eigenvalue and a small gap, with a small basis
    /// so that restarts happen.
    #[test]
    fn lanczos_with_restarts() {
        let n = 500;
        let diag: Vec<f64> = (0..n).map(|i| i as f64 / n as f64).collect();
        let start: Vec<f64> = (0..n).map(|i| 1.0 + (i % 7) as f64).collect();
        let e = top_eigen(
            n,
            |x, y| {
                y.iter_mut()
                    .enumerate()
                    .for_each(|(i, v)| *v = diag[i] * x[i])
            },
            &start,
            1e-10,
            20,
            100_000,
        )
        .unwrap();
        assert!(e.converged);
        assert!((e.value - diag[n - 1]).abs() < 1e-12);
        assert!(e.vector[n - 1].abs() > 1.0 - 1e-8);
    }
}
