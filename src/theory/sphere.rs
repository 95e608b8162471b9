//! Spherical models at zero temperature.
//!
//! Ground state from the Crisanti–Sommers functional (Crisanti & Sommers, Z. Phys. B 87, 341
//! (1992); zero-temperature form of Chen & Sen, Commun. Math. Phys. 2017):
//! GS = inf_{L, γ} ½ [ ξ'(1) L − ∫₀¹ ξ''(q) α(q) dq + ∫₀¹ dq / (L − α(q)) ], α(q) = ∫₀^q γ.
//! Here with the one-step form γ = 0 on [0, q₀), m on [q₀, 1) (exact for pure p ≥ 3, where
//! q₀ = 0), minimised over (L, m, q₀).
//!
//! Algorithmic value ALG = ∫₀¹ √ξ''(q) dq, reached by Hessian ascent (Subag, "Following the
//! ground states of full-RSB spherical spin glasses", arXiv:1812.04588); it equals the ground
//! state when ξ''(q)^{-1/2} is concave on (0, 1].

use super::{Mixture, nelder_mead};

/// ∫_a^b f by composite Simpson with `n` (even) panels.
fn simpson<F: Fn(f64) -> f64>(f: F, a: f64, b: f64, n: usize) -> f64 {
    let h = (b - a) / n as f64;
    let mut s = f(a) + f(b);
    for i in 1..n {
        s += f(a + i as f64 * h) * if i % 2 == 1 { 4.0 } else { 2.0 };
    }
    s * h / 3.0
}

/// The one-step Crisanti–Sommers value for (L, m, q₀).
fn cs_one_step(xi: &Mixture, l: f64, m: f64, q0: f64) -> f64 {
    // α(q) = 0 below q₀, m (q − q₀) above.
    // ∫_{q₀}^1 ξ''(q) m (q − q₀) dq = m [ (ξ'(1) − ξ(1)) − (q₀ ξ'(q₀) − ξ(q₀)) ] − m q₀ (ξ'(1) − ξ'(q₀)),
    // using ∫ q ξ'' = q ξ' − ξ.
    let g = |t: f64| t * xi.d1(t) - xi.xi(t);
    let int_xi_alpha = m * (g(1.0) - g(q0)) - m * q0 * (xi.d1(1.0) - xi.d1(q0));
    let am = m * (1.0 - q0);
    let int_inv = q0 / l
        + if m > 0.0 {
            (l / (l - am)).ln() / m
        } else {
            (1.0 - q0) / l
        };
    0.5 * (xi.d1(1.0) * l - int_xi_alpha + int_inv)
}

/// Ground state energy (max H/n) by the one-step Crisanti–Sommers functional.
pub fn ground_state(xi: &Mixture) -> (f64, f64, f64, f64) {
    // Parameters: L = α(1) + e^{u0}, m = e^{u1}, q₀ = sigmoid(u2).
    let decode = |u: &[f64]| {
        let m = u[1].exp();
        let q0 = 1.0 / (1.0 + (-u[2]).exp());
        let l = m * (1.0 - q0) + u[0].exp();
        (l, m, q0)
    };
    let f = |u: &[f64]| {
        let (l, m, q0) = decode(u);
        cs_one_step(xi, l, m, q0)
    };
    let mut best = (vec![0.0; 3], f64::INFINITY);
    for start in [[0.0, 0.5, -3.0], [-1.0, 1.0, 0.0], [0.5, 0.0, 1.0]] {
        let (x, _) = nelder_mead(f, &start, 0.5, 20_000, 1e-15);
        let (x, v) = nelder_mead(f, &x, 0.05, 20_000, 1e-16);
        if v < best.1 {
            best = (x, v);
        }
    }
    let (l, m, q0) = decode(&best.0);
    (best.1, l, m, q0)
}

/// The zero-temperature Crisanti–Sommers functional for a step γ = m_j on [q_j, q_{j+1}),
/// m nondecreasing, in closed form. With B = L − α(1) > 0 and D_j = L − α(q_j) = B +
/// Σ_{i≥j} m_i Δq_i (so D_K = B), integrating by parts ∫₀¹ ξ''α = ξ'(1)α(1) − Σ m_j Δξ_j, and on
/// each interval ∫ dq/(L − α) = ln(D_j/D_{j+1})/m_j; hence
///
/// F = ½ [ ξ'(1) B + Σ_j m_j Δξ_j + Σ_j ln(1 + m_j Δq_j / D_{j+1}) / m_j ].
///
/// Returns F and its gradient in (B, m_0, …, m_{K−1}).
fn cs_steps(xi: &Mixture, q: &[f64], b: f64, m: &[f64]) -> (f64, Vec<f64>) {
    let k = m.len();
    // D_{j+1} for j = K−1 down to 0.
    let mut d_next = vec![0.0; k];
    let mut d = b;
    for j in (0..k).rev() {
        d_next[j] = d;
        d += m[j] * (q[j + 1] - q[j]);
    }
    let mut value = xi.d1(1.0) * b;
    let mut grad = vec![0.0; k + 1];
    grad[0] = xi.d1(1.0);
    // Σ_{i<j} ∂h_i/∂D_{i+1}, accumulated upwards in j.
    let mut below = 0.0;
    for j in 0..k {
        let dq = q[j + 1] - q[j];
        let dxi = xi.xi(q[j + 1]) - xi.xi(q[j]);
        let dn = d_next[j];
        let x = m[j] * dq / dn;
        // h = ln(1 + x)/m, ∂h/∂m at fixed D, ∂h/∂D; series for small x (m → 0: h → Δq/D).
        let (h, dh_dm) = if x < 1e-5 {
            let r = dq / dn;
            (
                r * (1.0 - x / 2.0 + x * x / 3.0),
                r * r * (-0.5 + 2.0 * x / 3.0 - 0.75 * x * x),
            )
        } else {
            let l = x.ln_1p();
            (l / m[j], (x / (1.0 + x) - l) / (m[j] * m[j]))
        };
        let dh_dd = -dq / (dn * (dn + m[j] * dq));
        value += m[j] * dxi + h;
        grad[1 + j] = dxi + dh_dm + dq * below;
        grad[0] += dh_dd;
        below += dh_dd;
    }
    (0.5 * value, grad.iter().map(|g| 0.5 * g).collect())
}

/// A zero-temperature Crisanti–Sommers solution over step order parameters.
#[derive(Clone, Debug)]
pub struct FullCs {
    pub value: f64,
    /// B = L − α(1).
    pub b: f64,
    pub q: Vec<f64>,
    pub m: Vec<f64>,
}

impl FullCs {
    /// The structure of the minimiser: "one-step" if γ takes one positive value (after a
    /// possible zero part), else "full RSB part on [a, b]" over the q where γ still grows.
    pub fn structure(&self) -> String {
        let alpha1: f64 = (0..self.m.len())
            .map(|j| self.m[j] * (self.q[j + 1] - self.q[j]))
            .sum();
        if alpha1 < 1e-6 * self.b {
            return "γ ≈ 0 (replica symmetric)".into();
        }
        let top = self.m.iter().copied().fold(0.0f64, f64::max);
        let tol = 1e-4 * top.max(1e-12);
        let grows: Vec<usize> = (1..self.m.len())
            .filter(|&j| self.m[j] - self.m[j - 1] > tol && self.m[j - 1] > tol)
            .collect();
        match (grows.first(), grows.last()) {
            (Some(&a), Some(&b)) => format!(
                "γ grows continuously on [{:.3}, {:.3}] (a full-RSB part)",
                self.q[a], self.q[b]
            ),
            _ => "one step (γ constant where positive)".into(),
        }
    }
}

/// Ground state of the spherical model from the zero-temperature Crisanti–Sommers functional
/// over step order parameters on `k` q-intervals (uniform in q), γ nondecreasing: the
/// parametrisation m_j = Σ_{i≤j} e^{u_i}, B = e^{u_B}, minimised by L-BFGS with the exact
/// gradient, started from the one-step solution. A one-step γ with q₀ = 0 (pure p) is on every
/// grid, so the value then equals the one-step value; where the minimiser has a full-RSB part
/// the grid approximates it, from above.
pub fn ground_state_full(xi: &Mixture, k: usize) -> FullCs {
    let q: Vec<f64> = (0..=k).map(|j| j as f64 / k as f64).collect();
    let (_, l1, m1, q01) = ground_state(xi);
    let decode = |u: &[f64]| -> (f64, Vec<f64>) {
        let mut acc = 0.0;
        let m = u[1..]
            .iter()
            .map(|&v| {
                acc += v.exp();
                acc
            })
            .collect();
        (u[0].exp(), m)
    };
    let f = |u: &[f64]| -> (f64, Vec<f64>) {
        let (b, m) = decode(u);
        let (v, g) = cs_steps(xi, &q, b, &m);
        // Chain rule: ∂/∂u_B = B ∂/∂B; ∂/∂u_i = e^{u_i} Σ_{j≥i} ∂/∂m_j.
        let mut gu = vec![0.0; u.len()];
        gu[0] = b * g[0];
        let mut tail = 0.0;
        for i in (0..k).rev() {
            tail += g[1 + i];
            gu[1 + i] = u[1 + i].exp() * tail;
        }
        (v, gu)
    };
    // Start: the one-step γ (m₁ on [q₀, 1)) with small increments, B = L − α(1).
    let b1 = (l1 - m1 * (1.0 - q01)).max(1e-6);
    let mut u = vec![b1.ln()];
    let mut prev = 0.0;
    for j in 0..k {
        let mid = 0.5 * (q[j] + q[j + 1]);
        let target: f64 = if mid >= q01 { m1 } else { 0.0 };
        let inc = (target - prev).max(1e-8 * (1.0 + m1));
        u.push(inc.ln());
        prev += inc;
    }
    // The functional is convex in (B, γ) (1/(L − α) is convex, the rest linear), but in u an
    // increment near zero has a vanishing gradient, so the one-step start cannot grow a
    // full-RSB part: a second, smooth start γ(q) ∝ q can. The lower end wins.
    let mut smooth = vec![0.0f64];
    for _ in 0..k {
        smooth.push((m1.max(0.1) / k as f64).ln());
    }
    let (mut best, mut value) = (Vec::new(), f64::INFINITY);
    for u0 in [u, smooth] {
        let (x, v, _, _) = super::lbfgs(f, &u0, 20_000, 1e-13);
        if v < value {
            (best, value) = (x, v);
        }
    }
    let u = best;
    let (b, m) = decode(&u);
    FullCs { value, b, q, m }
}

/// The Gibbs mean energy per spin lim (1/n) E⟨H⟩ at inverse temperature β on the sphere, for
/// the pure p = 2 mixtures ξ = a q² (spherical SK), where it is known in closed form: with
/// s = √(2a), E = s·e(βs), e(b) = b/2 for b ≤ 1 and 1 − 1/(2b) above (the free energy b²/4 and
/// b − 3/4 − (log b)/2; Kosterlitz, Thouless & Jones, PRL 36, 1217 (1976), recalled from
/// memory). It tends to the ground state s as β → ∞. None for other mixtures.
pub fn gibbs_energy_pure2(xi: &Mixture, beta: f64) -> Option<f64> {
    let a = match xi.terms.iter().filter(|t| t.1 > 0.0).collect::<Vec<_>>()[..] {
        [&(2, a)] => a,
        _ => return None,
    };
    let s = (2.0 * a).sqrt();
    let b = beta * s;
    Some(s * if b <= 1.0 { 0.5 * b } else { 1.0 - 0.5 / b })
}

/// ALG = ∫₀¹ √ξ''(q) dq and whether Subag's condition (ξ''^{-1/2} concave on (0, 1]) holds,
/// so that ALG is also the ground state.
pub fn algorithmic(xi: &Mixture) -> (f64, bool) {
    // √ξ'' may behave like q^{(p−2)/2} near 0: substitute q = t² to keep Simpson accurate.
    let alg = simpson(|t| 2.0 * t * xi.d2(t * t).max(0.0).sqrt(), 0.0, 1.0, 4000);
    let h = |q: f64| xi.d2(q).powf(-0.5);
    let concave = (1..200).all(|i| {
        let q = i as f64 / 200.0;
        let d = 1e-3;
        h(q - d) + h(q + d) - 2.0 * h(q) <= 1e-9
    });
    (alg, concave)
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Spherical SK: E(β) is the annealed β ξ(1) = β/2 at high temperature, continuous at the
    /// critical β = 1, and tends to kiln's own ground state (1 for ξ = q²/2) as β → ∞; scaling ξ
    /// by 4 doubles H, so E at β equals twice E at 2β of the unscaled model. Mixtures with
    /// another term get none.
    #[test]
    fn spherical_sk_gibbs_energy() {
        let sk = Mixture {
            terms: vec![(2, 0.5)],
        };
        let e = |b| gibbs_energy_pure2(&sk, b).unwrap();
        assert_eq!(e(0.5), 0.25);
        assert!((e(1.0 - 1e-9) - e(1.0 + 1e-9)).abs() < 1e-8);
        let gs = ground_state_full(&sk, 16).value;
        assert!((e(1e6) - gs).abs() < 1e-5, "{} vs {gs}", e(1e6));
        let big = Mixture {
            terms: vec![(2, 2.0)],
        };
        assert!((gibbs_energy_pure2(&big, 0.7).unwrap() - 2.0 * e(1.4)).abs() < 1e-12);
        assert!(
            gibbs_energy_pure2(
                &Mixture {
                    terms: vec![(2, 0.5), (3, 0.1)]
                },
                1.0
            )
            .is_none()
        );
    }

    /// Pure spherical 3-spin ground state 1.657 (Crisanti & Sommers, Z. Phys. B 87, 341
    /// (1992)); p = 2 in SK normalisation is half the semicircle edge, 1 (Füredi & Komlós 1981).
    #[test]
    fn spherical_ground_states() {
        let (gs3, ..) = ground_state(&Mixture::pure(3));
        assert!((gs3 - 1.657).abs() < 5e-4, "{gs3}");
        let (gs2, ..) = ground_state(&Mixture::sk());
        assert!((gs2 - 1.0).abs() < 1e-6, "{gs2}");
    }

    /// Pure p: ALG = 2√((p−1)/p) (Subag 2018; Sellke 2025, arXiv:2504.04632), and the
    /// concavity condition fails (ξ''^{-1/2} ∝ q^{-(p−2)/2} is convex), so ALG < GS.
    #[test]
    fn algorithmic_values() {
        for (p, want) in [(3u32, 1.6329932), (4, 1.7320508)] {
            let (alg, cond) = algorithmic(&Mixture::pure(p));
            assert!((alg - want).abs() < 1e-6, "p = {p}: {alg}");
            assert!(!cond);
        }
        let (gs3, ..) = ground_state(&Mixture::pure(3));
        assert!(algorithmic(&Mixture::pure(3)).0 < gs3);
        // SK-normalised p = 2: ξ'' = 1, ALG = 1 = the ground state; the condition holds.
        let (alg, cond) = algorithmic(&Mixture::sk());
        assert!((alg - 1.0).abs() < 1e-9 && cond);
    }

    /// The closed-form gradient of the step functional agrees with central differences.
    #[test]
    fn cs_gradient_matches_finite_differences() {
        let xi = Mixture {
            terms: vec![(2, 0.5), (4, 1.0 / 12.0)],
        };
        let k = 6;
        let q: Vec<f64> = (0..=k).map(|j| j as f64 / k as f64).collect();
        let m = vec![0.0, 1e-7, 0.3, 0.3, 0.9, 2.0];
        let b = 0.7;
        let (_, g) = cs_steps(&xi, &q, b, &m);
        let h = 1e-6;
        for (i, gi) in g.iter().enumerate() {
            let (mut up, mut dn) = ((b, m.clone()), (b, m.clone()));
            if i == 0 {
                up.0 += h;
                dn.0 -= h;
            } else {
                up.1[i - 1] += h;
                dn.1[i - 1] -= h;
            }
            let fd =
                (cs_steps(&xi, &q, up.0, &up.1).0 - cs_steps(&xi, &q, dn.0, &dn.1).0) / (2.0 * h);
            assert!((fd - gi).abs() < 1e-7, "{i}: {fd} vs {gi}");
        }
    }

    /// The full zero-temperature Crisanti–Sommers solution (64 q-intervals):
    /// - pure p = 3: the one-step value to 1e-9 (the minimiser is one-step with q₀ = 0, on
    ///   every grid; Crisanti & Sommers 1992);
    /// - SK-normalised p = 2: 1 (Füredi & Komlós 1981);
    /// - ξ = q²/2 + q⁴/48, where ξ''^{-1/2} = (1 + q²/4)^{-1/2} is concave on (0, 1]: the
    ///   ground state equals ∫₀¹ √ξ'' (Subag 2018, arXiv:1812.04588, Theorem 4; Chen & Sen
    ///   2017, Commun. Math. Phys., arXiv:1512.08492, full-RSB case) to 1e-7, with a full-RSB
    ///   part;
    /// - ξ = q²/2 + q⁴/12 (concave on part of (0, 1] only): ∫₀¹ √ξ'' ≤ ground state ≤ one-step
    ///   (a lower bound by the algorithmic threshold, an upper bound by a restriction of γ).
    #[test]
    fn full_crisanti_sommers_ground_states() {
        let p3 = Mixture::pure(3);
        let f = ground_state_full(&p3, 64);
        assert!((f.value - ground_state(&p3).0).abs() < 1e-9, "{}", f.value);
        assert!(f.structure().starts_with("one step"), "{}", f.structure());
        let sk = ground_state_full(&Mixture::sk(), 64);
        assert!((sk.value - 1.0).abs() < 1e-9, "{}", sk.value);
        let concave = Mixture {
            terms: vec![(2, 0.5), (4, 1.0 / 48.0)],
        };
        let (alg, cond) = algorithmic(&concave);
        assert!(cond);
        let f = ground_state_full(&concave, 64);
        assert!((f.value - alg).abs() < 1e-7, "{} vs {alg}", f.value);
        assert!(f.structure().contains("full-RSB"), "{}", f.structure());
        let part = Mixture {
            terms: vec![(2, 0.5), (4, 1.0 / 12.0)],
        };
        let (alg, cond) = algorithmic(&part);
        assert!(!cond);
        let f = ground_state_full(&part, 64);
        let one = ground_state(&part).0;
        assert!(
            alg <= f.value && f.value <= one,
            "{alg} ≤ {} ≤ {one}",
            f.value
        );
        assert!(one - f.value > 1e-5, "{} vs one-step {one}", f.value);
    }

    /// For every mixture ∫₀¹ √ξ'' ≤ ground state ≤ one-step value (the algorithmic threshold
    /// bounds from below, the one-step form is a restriction of γ): checked on random mixtures
    /// of p = 2 … 6 (a fixed generator, 32 q-intervals), each within solver tolerance 1e-9.
    #[test]
    fn ground_state_lies_between_its_bounds_for_random_mixtures() {
        let mut next = crate::theory::test_uniform(20261203);
        for _ in 0..4 {
            let terms: Vec<(u32, f64)> = (2..=6)
                .filter_map(|p| {
                    let c = next();
                    (c > 0.4 || p == 2).then_some((p, c * c))
                })
                .collect();
            let xi = Mixture { terms };
            let (alg, _) = algorithmic(&xi);
            let one = ground_state(&xi).0;
            let full = ground_state_full(&xi, 32).value;
            assert!(
                alg <= full + 1e-9 && full <= one + 1e-9,
                "{:?}: {alg} ≤ {full} ≤ {one}",
                xi.terms
            );
        }
    }
}
