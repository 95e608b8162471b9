//! Positive temperature on the cube: the replica-symmetric solution of the Parisi formula.
//!
//! lim (1/n) E log Σ_σ e^{βH(σ)} ≤ P_RS(β), where P_RS(β) is log 2 + E log cosh(β √ξ'(q) Z)
//! plus (β²/2)[ξ'(1) − ξ'(q)] minus (β²/2)[g(1) − g(q)], with g(t) = t ξ'(t) − ξ(t),
//! at the fixed point q = E tanh²(β √ξ'(q) Z) (Sherrington & Kirkpatrick, PRL 35, 1792 (1975);
//! for SK this is log 2 + E log cosh(β√q Z) + β²(1 − q)²/4). At high temperature q = 0 and the
//! value is log 2 + β² ξ(1)/2 — for SK log 2 + β²/4, which is exact for β < 1 (Aizenman,
//! Lebowitz & Ruelle, Commun. Math. Phys. 112, 3 (1987)).

use super::Mixture;

/// E f(Z) for an even f whose features have width ~1/s: composite Simpson on [0, 10] with a
/// step below 1/(10 s) (Gauss–Hermite with fixed nodes cannot resolve large s).
fn even_expectation<F: Fn(f64) -> f64>(f: F, s: f64) -> f64 {
    let h_target = (0.1 / s.max(1.0)).min(0.01);
    let n = ((10.0 / h_target).ceil() as usize).div_ceil(2) * 2;
    let h = 10.0 / n as f64;
    let phi = |z: f64| (-0.5 * z * z).exp() / (2.0 * std::f64::consts::PI).sqrt();
    let g = |z: f64| f(z) * phi(z);
    let mut acc = g(0.0) + g(10.0);
    for i in 1..n {
        acc += g(i as f64 * h) * if i % 2 == 1 { 4.0 } else { 2.0 };
    }
    2.0 * acc * h / 3.0
}

/// E f(Z) for any f whose features have width ~1/s: composite Simpson on [−10, 10], as
/// [`even_expectation`] but without the symmetry (for a field).
fn expectation<F: Fn(f64) -> f64>(f: F, s: f64) -> f64 {
    even_expectation(|z| 0.5 * (f(z) + f(-z)), s)
}

/// ln cosh without overflow.
fn ln_cosh(x: f64) -> f64 {
    let a = x.abs();
    a + (-2.0 * a).exp().ln_1p() - std::f64::consts::LN_2
}

/// The replica-symmetric fixed point q(β) (the largest stable one, found from q = 1 down).
pub fn rs_overlap(xi: &Mixture, beta: f64) -> f64 {
    iterate_from_one(|q: f64| -> f64 {
        let s = beta * xi.d1(q).max(0.0).sqrt();
        even_expectation(|z| (s * z).tanh().powi(2), s)
    })
}

/// Iterates q ← map(q) from q = 1 until it moves less than 1e-14 (at most 20,000 steps).
fn iterate_from_one(map: impl Fn(f64) -> f64) -> f64 {
    let mut q = 1.0;
    for _ in 0..20_000 {
        let next = map(q);
        if (next - q).abs() < 1e-14 {
            return next;
        }
        q = next;
    }
    q
}

/// The replica-symmetric fixed point with a uniform field h (kiln's convention: H + h Σσ_i,
/// Gibbs weight e^{βH}, so the cavity field is βh + β√ξ'(q) Z): q = E tanh²(βh + β√ξ'(q) Z),
/// iterated from q = 1 down (the largest fixed point; unique for h ≠ 0 at high temperature).
/// In the convention e^{βH_J + h'Σσ} of Talagrand's book, h' = βh.
pub fn rs_overlap_field(xi: &Mixture, beta: f64, h: f64) -> f64 {
    if h == 0.0 {
        return rs_overlap(xi, beta);
    }
    iterate_from_one(|q: f64| -> f64 {
        let s = beta * xi.d1(q).max(0.0).sqrt();
        expectation(|z| (beta * h + s * z).tanh().powi(2), s)
    })
}

/// The replica-symmetric solution at (β, h): what `kiln theory --beta --field` prints.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct RsField {
    /// The fixed point q.
    pub q: f64,
    /// P_RS(β, h) = log 2 + E log cosh(βh + β√ξ'(q) Z) + (β²/2)[ξ(1) − ξ(q) − (1 − q)ξ'(q)].
    pub free_energy: f64,
    /// The mean magnetisation per spin E tanh(βh + β√ξ'(q) Z).
    pub magnetisation: f64,
    /// β² ξ''(q) E sech⁴(βh + β√ξ'(q) Z): the replica-symmetric solution is stable (above the
    /// de Almeida–Thouless line) when this is at most 1 (de Almeida & Thouless, J. Phys. A 11,
    /// 983 (1978); for SK, ξ'' = 1: β² E sech⁴(h' + β√q Z) ≤ 1 with h' = βh).
    pub at: f64,
}

/// [`RsField`] at (β, h).
pub fn rs_field(xi: &Mixture, beta: f64, h: f64) -> RsField {
    let q = rs_overlap_field(xi, beta, h);
    let s = beta * xi.d1(q).max(0.0).sqrt();
    let b2 = beta * beta;
    let c = |z: f64| beta * h + s * z;
    let elc = expectation(|z| ln_cosh(c(z)), s);
    let free_energy =
        std::f64::consts::LN_2 + elc + 0.5 * b2 * (xi.xi(1.0) - xi.xi(q) - (1.0 - q) * xi.d1(q));
    let magnetisation = expectation(|z| c(z).tanh(), s);
    let sech4 = expectation(|z| c(z).cosh().powi(-4), s);
    RsField {
        q,
        free_energy,
        magnetisation,
        at: b2 * xi.d2(q) * sech4,
    }
}

/// P_RS(β) at the fixed point, and the fixed point.
pub fn rs_free_energy(xi: &Mixture, beta: f64) -> (f64, f64) {
    let q = rs_overlap(xi, beta);
    let s = beta * xi.d1(q).max(0.0).sqrt();
    let elc = even_expectation(|z| ln_cosh(s * z), s);
    let g = |t: f64| t * xi.d1(t) - xi.xi(t);
    let b2 = beta * beta;
    let p = std::f64::consts::LN_2 + elc + 0.5 * b2 * (xi.d1(1.0) - xi.d1(q))
        - 0.5 * b2 * (g(1.0) - g(q));
    (p, q)
}

#[cfg(test)]
mod tests {
    use super::*;

    /// With a field: the fixed point solves q = E tanh²(βh + β√q Z) for SK, checked against an
    /// independent 80-node Gauss–Hermite rule; at h = 0 everything reduces to the zero-field
    /// solution; P_RS(β, h) agrees with the zero-field formula at h = 0 and grows with |h|
    /// (∂P/∂h = β·magnetisation > 0 for h > 0, checked by a central difference).
    #[test]
    fn replica_symmetric_with_a_field() {
        let sk = Mixture::sk();
        let (beta, h) = (0.5, 1.0);
        let r = rs_field(&sk, beta, h);
        let rule = super::super::quad::gauss_hermite(80);
        let e = |f: &dyn Fn(f64) -> f64| -> f64 { rule.iter().map(|&(z, w)| w * f(z)).sum() };
        let rhs = e(&|z| (beta * h + beta * r.q.sqrt() * z).tanh().powi(2));
        assert!((r.q - rhs).abs() < 1e-10, "{} vs {rhs}", r.q);
        let m = e(&|z| (beta * h + beta * r.q.sqrt() * z).tanh());
        assert!((r.magnetisation - m).abs() < 1e-10);
        let zero = rs_field(&sk, 1.5, 0.0);
        let (p, q) = rs_free_energy(&sk, 1.5);
        assert!((zero.free_energy - p).abs() < 1e-10 && zero.q == q);
        let d = 1e-4;
        let dp = (rs_field(&sk, beta, h + d).free_energy - rs_field(&sk, beta, h - d).free_energy)
            / (2.0 * d);
        assert!(
            (dp - beta * r.magnetisation).abs() < 1e-6,
            "{dp} vs {}",
            beta * r.magnetisation
        );
        // The AT quantity: below 1 at high temperature with a field, above 1 at β = 2, h = 0.1.
        assert!(r.at < 1.0, "{}", r.at);
        assert!(rs_field(&sk, 2.0, 0.05).at > 1.0);
    }

    /// High temperature: q = 0 and P = log 2 + β²/4 for SK at β < 1 (Aizenman, Lebowitz &
    /// Ruelle 1987, from memory as in the shared references), to rounding.
    #[test]
    fn high_temperature_identity() {
        for beta in [0.2, 0.5, 0.9] {
            let (p, q) = rs_free_energy(&Mixture::sk(), beta);
            assert!(q < 1e-6, "β = {beta}: q = {q}");
            assert!(
                (p - (std::f64::consts::LN_2 + beta * beta / 4.0)).abs() < 1e-10,
                "β = {beta}: {p}"
            );
        }
    }

    /// Below the transition the fixed point is non-trivial and satisfies q = E tanh²(β√q Z)
    /// for SK (Sherrington & Kirkpatrick 1975); and P_RS/β tends to the RS ground state
    /// √(2/π) as β → ∞ (the zero-temperature module's value), within the T·S correction.
    #[test]
    fn low_temperature_fixed_point_and_limit() {
        let sk = Mixture::sk();
        let beta = 1.5;
        let q = rs_overlap(&sk, beta);
        assert!(q > 0.3 && q < 1.0, "{q}");
        // Checked with an independent rule: 60-node Gauss–Hermite at this moderate β.
        let rule = super::super::quad::gauss_hermite(60);
        let rhs: f64 = rule
            .iter()
            .map(|&(z, w)| w * (beta * q.sqrt() * z).tanh().powi(2))
            .sum();
        assert!((q - rhs).abs() < 1e-9, "{q} vs {rhs}");
        let (p, _) = rs_free_energy(&sk, 200.0);
        // RS entropy at T = 0 is −1/(2π): P/β = E + T·S, so the gap is about 0.16/β.
        assert!(
            (p / 200.0 - super::super::cube::replica_symmetric(&sk)).abs() < 2e-3,
            "{}",
            p / 200.0
        );
    }
}
