//! Weighted linear least squares by Householder QR of the weighted design matrix, and the
//! closed-form normal equations (used as an independent check in tests).

// Small dense matrix code reads best with explicit indices.
#![allow(clippy::needless_range_loop)]

/// Solution of min Σ w_i (y_i − x_iᵀβ)²: β and its covariance (XᵀWX)^{-1}.
#[derive(Clone, Debug)]
pub struct Solution {
    pub beta: Vec<f64>,
    pub cov: Vec<Vec<f64>>,
    /// Σ w_i r_i².
    pub chi2: f64,
}

/// Solves by QR of √W X (numerically stable). `None` if X is rank deficient.
pub fn solve(x: &[Vec<f64>], y: &[f64], w: &[f64]) -> Option<Solution> {
    let m = x.len();
    let p = x.first()?.len();
    if m < p {
        return None;
    }
    // A = √W X (m × p), b = √W y, column-major copy for Householder.
    let mut a: Vec<Vec<f64>> = (0..p)
        .map(|j| (0..m).map(|i| w[i].sqrt() * x[i][j]).collect())
        .collect();
    let mut b: Vec<f64> = (0..m).map(|i| w[i].sqrt() * y[i]).collect();
    for k in 0..p {
        let norm = a[k][k..].iter().map(|v| v * v).sum::<f64>().sqrt();
        if norm == 0.0 {
            return None;
        }
        let alpha = if a[k][k] > 0.0 { -norm } else { norm };
        let mut v: Vec<f64> = a[k][k..].to_vec();
        v[0] -= alpha;
        let vnorm2: f64 = v.iter().map(|t| t * t).sum();
        if vnorm2 == 0.0 {
            continue;
        }
        for col in a.iter_mut().skip(k) {
            let dot: f64 = v.iter().zip(&col[k..]).map(|(s, t)| s * t).sum();
            let f = 2.0 * dot / vnorm2;
            for (c, vi) in col[k..].iter_mut().zip(&v) {
                *c -= f * vi;
            }
        }
        let dot: f64 = v.iter().zip(&b[k..]).map(|(s, t)| s * t).sum();
        let f = 2.0 * dot / vnorm2;
        for (c, vi) in b[k..].iter_mut().zip(&v) {
            *c -= f * vi;
        }
    }
    // R is the upper p×p block: R[i][j] = a[j][i].
    let r = |i: usize, j: usize| a[j][i];
    let scale = (0..p).map(|i| r(i, i).abs()).fold(0.0, f64::max);
    if (0..p).any(|i| r(i, i).abs() <= 1e-13 * scale) {
        return None;
    }
    let mut beta = vec![0.0; p];
    for i in (0..p).rev() {
        let s: f64 = (i + 1..p).map(|j| r(i, j) * beta[j]).sum();
        beta[i] = (b[i] - s) / r(i, i);
    }
    // R^{-1} by back substitution, then cov = R^{-1} R^{-T}.
    let mut rinv = vec![vec![0.0; p]; p];
    for c in 0..p {
        for i in (0..p).rev() {
            let e = if i == c { 1.0 } else { 0.0 };
            let s: f64 = (i + 1..p).map(|j| r(i, j) * rinv[j][c]).sum();
            rinv[i][c] = (e - s) / r(i, i);
        }
    }
    let cov: Vec<Vec<f64>> = (0..p)
        .map(|i| {
            (0..p)
                .map(|j| (0..p).map(|k| rinv[i][k] * rinv[j][k]).sum())
                .collect()
        })
        .collect();
    let chi2 = (0..m)
        .map(|i| {
            let f: f64 = (0..p).map(|j| x[i][j] * beta[j]).sum();
            w[i] * (y[i] - f) * (y[i] - f)
        })
        .sum();
    Some(Solution { beta, cov, chi2 })
}

/// The same problem through the normal equations XᵀWX β = XᵀWy, solved by Gauss–Jordan
/// elimination with partial pivoting. Less stable; an independent check of [`solve`].
pub fn normal_equations(x: &[Vec<f64>], y: &[f64], w: &[f64]) -> Option<(Vec<f64>, Vec<Vec<f64>>)> {
    let p = x.first()?.len();
    let mut m = vec![vec![0.0; 2 * p + 1]; p];
    for (i, row) in x.iter().enumerate() {
        for a in 0..p {
            for b in 0..p {
                m[a][b] += w[i] * row[a] * row[b];
            }
            m[a][2 * p] += w[i] * row[a] * y[i];
        }
    }
    for (a, row) in m.iter_mut().enumerate() {
        row[p + a] = 1.0;
    }
    for c in 0..p {
        let piv = (c..p).max_by(|&i, &j| m[i][c].abs().total_cmp(&m[j][c].abs()))?;
        if m[piv][c] == 0.0 {
            return None;
        }
        m.swap(c, piv);
        let d = m[c][c];
        for v in m[c].iter_mut() {
            *v /= d;
        }
        for r in 0..p {
            if r != c {
                let f = m[r][c];
                let pivot_row = m[c].clone();
                for (v, pv) in m[r].iter_mut().zip(&pivot_row) {
                    *v -= f * pv;
                }
            }
        }
    }
    let beta = (0..p).map(|a| m[a][2 * p]).collect();
    let inv = (0..p).map(|a| m[a][p..2 * p].to_vec()).collect();
    Some((beta, inv))
}

#[cfg(test)]
mod tests {
    use super::*;

    /// QR and the closed-form normal equations agree to 1e-10 (relative) on a well-posed
    /// scaling problem: e(n) = e∞ + a n^{-2/3} + b n^{-4/3} at six sizes.
    #[test]
    fn qr_matches_normal_equations() {
        let ns = [32.0f64, 64.0, 128.0, 256.0, 512.0, 1024.0];
        let x: Vec<Vec<f64>> = ns
            .iter()
            .map(|&n: &f64| vec![1.0, n.powf(-2.0 / 3.0), n.powf(-4.0 / 3.0)])
            .collect();
        let y: Vec<f64> = ns
            .iter()
            .enumerate()
            .map(|(i, &n)| {
                0.76 - 0.7 * n.powf(-2.0 / 3.0)
                    + 0.3 * n.powf(-4.0 / 3.0)
                    + 1e-4 * ((i * 7 % 5) as f64 - 2.0)
            })
            .collect();
        let w: Vec<f64> = (0..6)
            .map(|i| 1.0 / (1e-4 * (1.0 + i as f64)).powi(2))
            .collect();
        let s = solve(&x, &y, &w).unwrap();
        let (beta, cov) = normal_equations(&x, &y, &w).unwrap();
        for j in 0..3 {
            assert!(
                (s.beta[j] - beta[j]).abs() <= 1e-10 * beta[j].abs().max(1.0),
                "{j}"
            );
            for k in 0..3 {
                assert!(
                    (s.cov[j][k] - cov[j][k]).abs() <= 1e-10 * cov[j][k].abs().max(1e-12),
                    "{j}{k}"
                );
            }
        }
    }

    #[test]
    fn exact_line_and_rank_deficiency() {
        let x = vec![vec![1.0, 1.0], vec![1.0, 2.0], vec![1.0, 3.0]];
        let y = vec![3.0, 5.0, 7.0];
        let s = solve(&x, &y, &[1.0, 1.0, 1.0]).unwrap();
        assert!((s.beta[0] - 1.0).abs() < 1e-12 && (s.beta[1] - 2.0).abs() < 1e-12);
        assert!(s.chi2 < 1e-20);
        let x = vec![vec![1.0, 2.0], vec![2.0, 4.0], vec![3.0, 6.0]];
        assert!(solve(&x, &y, &[1.0, 1.0, 1.0]).is_none());
    }
}
