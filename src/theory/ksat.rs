//! The large-density asymptote of random MAX-k-SAT.
//!
//! For a uniformly random clause, the indicator that σ violates it has mean 2^{-k} and, for two
//! assignments at overlap q, covariance 2^{-2k}[(1 + q)^k − 1] (both violate it when each of
//! its k literals is false under both: probability ((1 + q)/4)^k). So with m = αn clauses the
//! number of violated clauses is αn/2^k plus a centred process of covariance
//! αn·2^{-2k}·ξ_k(q), ξ_k(q) = (1 + q)^k − 1 = Σ_{p=1}^k C(k, p) q^p, and as α → ∞
//!
//!   min_σ unsatisfied/n = α/2^k − √α·c_k/2^k + o(√α),
//!
//! with c_k the zero-temperature Parisi value of ξ_k on the cube (Panchenko 2018, "On the K-sat
//! model with large number of clauses", arXiv:1608.06256). ξ_k has a p = 1 term (a random
//! field of variance k), which the cube's functional averages over ([`super::cube`]). kiln's
//! energy is −unsatisfied/n, so the line it draws is −α/2^k + √α·c_k/2^k: an asymptote in α,
//! not a finite-α value.

use super::Mixture;
use super::cube;

/// ξ_k(q) = (1 + q)^k − 1, by its binomial terms.
pub fn mixture(k: u32) -> Mixture {
    let mut terms = Vec::new();
    let mut c = 1.0;
    for p in 1..=k {
        c = c * (k - p + 1) as f64 / p as f64;
        terms.push((p, c));
    }
    Mixture { terms }
}

/// The most RSB steps used for c_k (each step costs about four times the one before); with
/// this many, the full-RSB solution is a candidate too.
pub const MAX_STEPS: usize = 2;

/// c_k and how it was obtained: the least of the upper bounds on the Parisi value kiln has —
/// the replica-symmetric value, the k-step RSB values for 1..=min(`steps`, [`MAX_STEPS`])
/// steps re-evaluated on the full-RSB lattice, and with `steps` ≥ [`MAX_STEPS`] the full-RSB
/// value with free breakpoints ([`super::cached::parisi_best`]); the lattice averages over the
/// p = 1 term's field exactly (a lattice Gaussian), where the k-step quadrature's Gauss–Hermite
/// rule meets the kink of |x|. Solved on ξ_k/λ with λ = ξ_k'(1) = k·2^{k−1}, whose scale is
/// SK's, and multiplied by √λ (H → √λ·H scales every value of the functional by √λ).
pub fn parisi_value(
    cache: &crate::store::cache::Cache,
    k: u32,
    steps: usize,
) -> Result<(f64, String), crate::store::StoreError> {
    let xi = mixture(k);
    let lambda = xi.d1(1.0);
    let scaled = Mixture {
        terms: xi.terms.iter().map(|&(p, c)| (p, c / lambda)).collect(),
    };
    let mut bounds = vec![(
        cube::replica_symmetric(&scaled),
        "replica symmetric".to_string(),
    )];
    if steps >= MAX_STEPS {
        bounds.push(super::cached::parisi_best(cache, &scaled)?);
    } else {
        for r in 1..=steps {
            let sol = super::cached::k_rsb(cache, &scaled, r, &cube::Settings::default())?;
            if let Some(v) = super::cached::k_step_value(&scaled, &sol) {
                bounds.push((v, format!("{r}-step RSB")));
            }
        }
    }
    let (v, how) = super::cached::least(bounds);
    Ok((lambda.sqrt() * v, how))
}

/// kiln's energy per variable on the asymptote at density α: −(α − √α·c_k)/2^k.
pub fn asymptote(k: u32, alpha: f64, c_k: f64) -> f64 {
    -(alpha - alpha.sqrt() * c_k) / 2f64.powi(k as i32)
}

#[cfg(test)]
mod tests {
    use super::*;

    /// ξ_k is (1 + q)^k − 1 at every q.
    #[test]
    fn mixture_is_the_binomial_expansion() {
        for k in 2..=5u32 {
            let xi = mixture(k);
            for q in [-0.5, 0.0, 0.3, 1.0] {
                let want = (1.0f64 + q).powi(k as i32) - 1.0;
                assert!((xi.xi(q) - want).abs() < 1e-12, "k {k} q {q}");
            }
            assert_eq!(xi.d1(0.0), k as f64);
        }
    }

    /// The field's average against an independent evaluation of the one-step functional with
    /// γ = 0 on [0, q₁) and m on [q₁, 1): E over x ~ N(0, ξ'(q₁)) (the field and the first
    /// interval together) of the closed-form last step, by a 4001-point trapezoid over ±12
    /// standard deviations, minus ½m[g(1) − g(q₁)]. The functional reads its lattice by
    /// interpolation and averages by Gauss–Hermite; agreement to 1e-6.
    #[test]
    fn functional_with_a_field_matches_an_independent_quadrature() {
        let s = cube::Settings::default();
        let rule = super::super::quad::gauss_hermite(s.nodes);
        for (k, q1, m) in [(2u32, 0.5, 0.7), (3, 0.3, 0.4), (3, 0.8, 1.1)] {
            let xi = mixture(k);
            let steps = cube::Steps {
                q: vec![0.0, q1],
                m: vec![0.0, m],
            };
            let v = cube::functional(&xi, &steps, &s, &rule);
            let a = (xi.d1(1.0) - xi.d1(q1)).sqrt();
            let sd = xi.d1(q1).sqrt();
            let pts = 4001;
            let h = 24.0 * sd / (pts - 1) as f64;
            let mut e = 0.0;
            for i in 0..pts {
                let x = -12.0 * sd + i as f64 * h;
                let w = if i == 0 || i == pts - 1 { 0.5 } else { 1.0 };
                let density =
                    (-0.5 * (x / sd).powi(2)).exp() / (sd * (2.0 * std::f64::consts::PI).sqrt());
                e += w * h * density * cube::last_level(x, m, a);
            }
            let g = |t: f64| t * xi.d1(t) - xi.xi(t);
            let want = e - 0.5 * m * (g(1.0) - g(q1));
            assert!((v - want).abs() < 1e-6, "k {k}: {v} vs {want}");
        }
    }

    /// The full-RSB lattice averages over the p = 1 field where there is a closed form: one
    /// step of small γ on [0, 1] gives the replica-symmetric E|√ξ'(1) Z| (to 1e-5 at m = 1e-4,
    /// the step's own O(m) effect), whatever the split between the field and the rest. Read at
    /// the origin instead of averaged, it would be E|√(ξ'(1) − ξ'(0)) Z|, far off.
    #[test]
    fn lattice_averages_over_the_field() {
        use super::super::full;
        let s = full::FullSettings::default();
        for k in 2..=3u32 {
            let xi = mixture(k);
            let lambda = xi.d1(1.0);
            let scaled = Mixture {
                terms: xi.terms.iter().map(|&(p, c)| (p, c / lambda)).collect(),
            };
            let rs = cube::replica_symmetric(&scaled);
            let v = full::evaluate(&scaled, &s, &[0.0, 1.0], &[1e-4]).expect("resolved");
            assert!((v - rs).abs() < 1e-5, "k {k}: {v} vs {rs}");
        }
    }

    /// The field's average is exact where it has a closed form: with γ ≡ 0 the functional is
    /// E|√ξ'(1) Z| whatever the split between the field and the rest (replica symmetric).
    #[test]
    fn functional_with_a_field_matches_the_replica_symmetric_closed_form() {
        let s = cube::Settings::default();
        let rule = super::super::quad::gauss_hermite(s.nodes);
        for k in 2..=4u32 {
            let xi = mixture(k);
            let steps = cube::Steps {
                q: vec![0.0],
                m: vec![0.0],
            };
            let v = cube::functional(&xi, &steps, &s, &rule);
            let rs = cube::replica_symmetric(&xi);
            assert!((v - rs).abs() < 1e-6, "k {k}: {v} vs {rs}");
        }
    }
}
