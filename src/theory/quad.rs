//! Gaussian expectations: Gauss–Hermite quadrature for E f(Z), Z ~ N(0, 1), and the normal
//! distribution function.

/// Nodes and weights of the n-point rule for E f(Z) (probabilists' form, weights sum to 1),
/// for 2 ≤ n ≤ 100 (the root guesses lose the larger roots beyond that).
/// Computed by Newton's method on the orthonormal Hermite recurrence (Golub & Welsch 1969
/// give the same rule; this is the classic root-polishing form).
pub fn gauss_hermite(n: usize) -> Vec<(f64, f64)> {
    assert!(
        (2..=100).contains(&n),
        "Gauss–Hermite rules are provided for 2 to 100 nodes"
    );
    // Physicists' rule for ∫ e^{-x²} f(x) dx, then x → √2 x, w → w/√π.
    let mut out = vec![(0.0, 0.0); n];
    let m = n.div_ceil(2);
    let pim4 = std::f64::consts::PI.powf(-0.25);
    let mut z = 0.0f64;
    for i in 0..m {
        z = match i {
            0 => (2.0 * n as f64 + 1.0).sqrt() - 1.85575 * (2.0 * n as f64 + 1.0).powf(-1.0 / 6.0),
            1 => z - 1.14 * (n as f64).powf(0.426) / z,
            2 => 1.86 * z - 0.86 * out[0].0,
            3 => 1.91 * z - 0.91 * out[1].0,
            _ => 2.0 * z - out[i - 2].0,
        };
        let mut pp = 0.0;
        for _ in 0..100 {
            let mut p1 = pim4;
            let mut p2 = 0.0;
            for j in 1..=n {
                let p3 = p2;
                p2 = p1;
                p1 = z * (2.0 / j as f64).sqrt() * p2 - ((j as f64 - 1.0) / j as f64).sqrt() * p3;
            }
            pp = (2.0 * n as f64).sqrt() * p2;
            let z1 = z;
            z = z1 - p1 / pp;
            if (z - z1).abs() <= 1e-15 {
                break;
            }
        }
        out[i] = (z, 2.0 / (pp * pp));
        out[n - 1 - i] = (-z, 2.0 / (pp * pp));
    }
    let sqrt_pi = std::f64::consts::PI.sqrt();
    out.into_iter()
        .map(|(x, w)| (x * std::f64::consts::SQRT_2, w / sqrt_pi))
        .collect()
}

/// Φ(x), the standard normal distribution function.
pub fn normal_cdf(x: f64) -> f64 {
    0.5 * libm::erfc(-x / std::f64::consts::SQRT_2)
}

/// ln Φ(x), accurate far in the lower tail (asymptotic series below −30).
pub fn ln_normal_cdf(x: f64) -> f64 {
    if x > -30.0 {
        normal_cdf(x).ln()
    } else {
        // Φ(x) ≈ φ(x)/|x| (1 − 1/x² + 3/x⁴).
        let x2 = x * x;
        -0.5 * x2 - (-x).ln() - 0.5 * (2.0 * std::f64::consts::PI).ln()
            + (1.0 - 1.0 / x2 + 3.0 / (x2 * x2)).ln()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Moments of N(0,1): E Z^{2k} = (2k−1)!! exactly for 2k < 2n (common practice).
    #[test]
    fn hermite_rule_integrates_moments() {
        let r = gauss_hermite(40);
        assert!((r.iter().map(|p| p.1).sum::<f64>() - 1.0).abs() < 1e-13);
        let m = |k: i32| r.iter().map(|&(x, w)| w * x.powi(k)).sum::<f64>();
        assert!((m(2) - 1.0).abs() < 1e-12);
        assert!((m(4) - 3.0).abs() < 1e-11);
        assert!((m(6) - 15.0).abs() < 1e-10);
        assert!(m(3).abs() < 1e-12);
    }

    #[test]
    fn largest_supported_rule() {
        let r = gauss_hermite(100);
        assert!((r.iter().map(|p| p.1).sum::<f64>() - 1.0).abs() < 1e-12);
        assert!((r.iter().map(|&(x, w)| w * x.powi(4)).sum::<f64>() - 3.0).abs() < 1e-10);
    }

    #[test]
    fn cdf_values() {
        // Φ(1) = 0.8413447460685429 (standard table).
        assert!((normal_cdf(1.0) - 0.8413447460685429).abs() < 1e-15);
        assert!((ln_normal_cdf(-29.9) - normal_cdf(-29.9).ln()).abs() < 1e-9);
        let a = ln_normal_cdf(-30.0 - 1e-9);
        let b = normal_cdf(-30.0).ln();
        assert!((a - b).abs() < 1e-6, "{a} {b}");
    }
}
