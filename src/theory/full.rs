//! Full replica-symmetry breaking at zero temperature on the cube: the Auffinger–Chen functional
//! (arXiv:1606.05335) minimised over γ on a fixed fine grid of K intervals in q, with
//! q_j = 1 − (1 − j/K)² (denser towards q = 1, where γ grows fastest).
//!
//! γ = m_j on [q_j, q_{j+1}) with 0 < m_0 ≤ … ≤ m_{K−1}; the Parisi PDE is solved exactly
//! between grid points (the recursion of [`super::cube`]), so the only discretisation is the
//! step approximation of γ and the x-grid. The functional is convex in γ (Auffinger & Chen,
//! arXiv:1606.05335, Theorem 3), so a local minimiser is the minimiser. Minimisation: L-BFGS
//! on u with m_j = Σ_{i≤j} e^{u_i} (monotone and positive by construction), with the gradient
//! from one backward pass (Ψ_j and ∂Ψ_j/∂m_j on the grid) and one forward pass (the law of the
//! tilted process X_j: X_0 = 0, X_{j+1} = X_j + a_j Z reweighted by e^{m_j(Ψ_{j+1} − Ψ_j)}):
//!
//! ∂P/∂m_j = E[∂Ψ_j/∂m_j (X_j)] − ½ (g(q_{j+1}) − g(q_j)), g(t) = t ξ'(t) − ξ(t),
//!
//! (common practice for Parisi-type recursions: the derivative of Ψ_0(0) with respect to Ψ_j is
//! the law of X_j); the forward pass deposits mass with the interpolation weights of the
//! backward pass, so this is the exact gradient of the discrete functional.

use super::Mixture;
use super::cube::{constant_gamma, last_level};
use super::quad::gauss_hermite;
use std::f64::consts::LN_2;

/// Revision of the full-RSB solver; enters the cache key of its solutions.
pub const REVISION: u32 = 1;

/// Numerical settings (documented defaults).
#[derive(Clone, Debug)]
pub struct FullSettings {
    /// Intervals K of the q-grid. Default 16.
    pub levels: usize,
    /// Grid points for Ψ on [−X, X]. Default 801.
    pub grid: usize,
    /// Half-width X in units of √ξ'(1). Default 9.
    pub half_width: f64,
    /// Gauss–Hermite nodes per step. Default 24.
    pub nodes: usize,
    /// L-BFGS iterations at most. Default 300.
    pub max_iterations: usize,
    /// Grid map exponent r: q_j = 1 − (1 − j/K)^r. Default 2.
    pub power: f64,
}

impl Default for FullSettings {
    fn default() -> Self {
        FullSettings {
            levels: 16,
            grid: 801,
            half_width: 9.0,
            nodes: 24,
            max_iterations: 300,
            power: 2.0,
        }
    }
}

/// A full-RSB solution: γ = `m[j]` on `[q[j], q[j+1])`.
#[derive(Clone, Debug)]
pub struct FullRsb {
    pub value: f64,
    pub q: Vec<f64>,
    pub m: Vec<f64>,
    pub iterations: usize,
    /// max |∂P/∂u| at the end.
    pub gradient: f64,
}

struct Problem {
    /// None: zero temperature (Ψ(1, x) = |x|); Some(β): Φ(1, y) = log cosh y, steps β·a_j.
    beta: Option<f64>,
    a: Vec<f64>,
    dg: Vec<f64>,
    xs: Vec<f64>,
    half: f64,
    dx: f64,
    rule: Vec<(f64, f64)>,
}

impl Problem {
    fn new(xi: &Mixture, q: &[f64], s: &FullSettings, beta: Option<f64>) -> Problem {
        let k = q.len() - 1;
        let b = beta.unwrap_or(1.0);
        let g = |t: f64| t * xi.d1(t) - xi.xi(t);
        let a = (0..k)
            .map(|j| b * (xi.d1(q[j + 1]) - xi.d1(q[j])).max(0.0).sqrt())
            .collect();
        let dg = (0..k).map(|j| b * b * (g(q[j + 1]) - g(q[j]))).collect();
        let half = s.half_width * b * xi.d1(1.0).sqrt();
        let grid = s.grid | 1; // odd: x = 0 is a grid point
        let dx = 2.0 * half / (grid - 1) as f64;
        Problem {
            beta,
            a,
            dg,
            xs: (0..grid).map(|i| -half + i as f64 * dx).collect(),
            half,
            dx,
            rule: gauss_hermite(s.nodes),
        }
    }

    /// One Parisi step on the grid: Ψ(x) = (1/m) log E exp(m·next(x + aZ)) and ∂Ψ/∂m
    /// (at m → 0: the expectation, and ∂/∂m = Var/2).
    fn level(&self, next: &[f64], mj: f64, aj: f64) -> (Vec<f64>, Vec<f64>) {
        let g = self.xs.len();
        let mut vals = vec![0.0; self.rule.len()];
        let mut p = Vec::with_capacity(g);
        let mut d = Vec::with_capacity(g);
        for &x in &self.xs {
            for (v, &(z, _)) in vals.iter_mut().zip(&self.rule) {
                *v = stencil(-self.half, self.dx, g, x + aj * z)
                    .iter()
                    .map(|&(i, w)| w * next[i])
                    .sum();
            }
            if mj < 1e-9 {
                let e1: f64 = vals.iter().zip(&self.rule).map(|(v, r)| r.1 * v).sum();
                let e2: f64 = vals.iter().zip(&self.rule).map(|(v, r)| r.1 * v * v).sum();
                p.push(e1);
                d.push(0.5 * (e2 - e1 * e1));
                continue;
            }
            let mx = vals.iter().cloned().fold(f64::NEG_INFINITY, f64::max);
            let (mut s0, mut s1) = (0.0, 0.0);
            for (&v, &(_, w)) in vals.iter().zip(&self.rule) {
                let e = w * (mj * (v - mx)).exp();
                s0 += e;
                s1 += e * v;
            }
            let ps = mx + s0.ln() / mj;
            p.push(ps);
            d.push((s1 / s0 - ps) / mj);
        }
        (p, d)
    }

    /// P(m) and ∂P/∂m.
    fn value_grad(&self, m: &[f64]) -> (f64, Vec<f64>) {
        let k = m.len();
        let g = self.xs.len();
        let mid = (g - 1) / 2;
        let mut psi: Vec<Vec<f64>> = vec![Vec::new(); k + 1];
        let mut dpsi: Vec<Vec<f64>> = vec![Vec::new(); k];
        let first_quadrature = match self.beta {
            None => {
                // Zero temperature: the last step from |x| in closed form.
                let (ml, al) = (m[k - 1], self.a[k - 1]);
                psi[k - 1] = self.xs.iter().map(|&x| last_level(x, ml, al)).collect();
                let h = 1e-5 * ml.max(1.0);
                let (lo, hi) = ((ml - h).max(0.0), ml + h);
                dpsi[k - 1] = self
                    .xs
                    .iter()
                    .map(|&x| (last_level(x, hi, al) - last_level(x, lo, al)) / (hi - lo))
                    .collect();
                k - 1
            }
            Some(_) => {
                // log cosh y, computed without overflow.
                psi[k] = self
                    .xs
                    .iter()
                    .map(|&y| y.abs() + (-2.0 * y.abs()).exp().ln_1p() - std::f64::consts::LN_2)
                    .collect();
                k
            }
        };
        for j in (0..first_quadrature).rev() {
            let (p, d) = self.level(&psi[j + 1], m[j], self.a[j]);
            psi[j] = p;
            dpsi[j] = d;
        }
        let penalty: f64 = m.iter().zip(&self.dg).map(|(a, b)| 0.5 * a * b).sum();
        let value = psi[0][mid] - penalty + if self.beta.is_some() { LN_2 } else { 0.0 };
        // Forward: law of X_j on the grid.
        let mut rho = vec![0.0; g];
        rho[mid] = 1.0;
        let mut grad = vec![0.0; k];
        for j in 0..k {
            grad[j] = rho.iter().zip(&dpsi[j]).map(|(r, d)| r * d).sum::<f64>() - 0.5 * self.dg[j];
            if j + 1 == k {
                break;
            }
            let (mj, aj) = (m[j], self.a[j]);
            let nv = &psi[j + 1];
            let mut new = vec![0.0; g];
            for (i, &r) in rho.iter().enumerate() {
                if r == 0.0 {
                    continue;
                }
                let x = self.xs[i];
                for &(z, w) in &self.rule {
                    let st = stencil(-self.half, self.dx, g, x + aj * z);
                    let v: f64 = st.iter().map(|&(i, w)| w * nv[i]).sum();
                    let c = if mj < 1e-9 {
                        r * w
                    } else {
                        r * w * (mj * (v - psi[j][i])).exp()
                    };
                    for &(i, sw) in &st {
                        new[i] += sw * c;
                    }
                }
            }
            rho = new;
        }
        (value, grad)
    }
}

/// The interpolation of [`Grid::at`] as explicit weights: value(y) = Σ w_r·v[i_r]
/// (Catmull–Rom inside, with the same end rules; linear extrapolation outside). The forward
/// pass deposits mass with these weights, which makes the gradient the exact adjoint of the
/// backward pass.
fn stencil(x0: f64, dx: f64, n: usize, y: f64) -> [(usize, f64); 4] {
    let t = (y - x0) / dx;
    if t <= 0.0 {
        return [(0, 1.0 - t), (1, t), (0, 0.0), (0, 0.0)];
    }
    let last = (n - 1) as f64;
    if t >= last {
        let e = t - last;
        return [(n - 1, 1.0 + e), (n - 2, -e), (0, 0.0), (0, 0.0)];
    }
    let i = t.floor() as usize;
    let f = t - i as f64;
    let (f2, f3) = (f * f, f * f * f);
    let mut w0 = 0.5 * (-f + 2.0 * f2 - f3);
    let mut w1 = 1.0 + 0.5 * (-5.0 * f2 + 3.0 * f3);
    let mut w2 = 0.5 * (f + 4.0 * f2 - 3.0 * f3);
    let mut w3 = 0.5 * (-f2 + f3);
    if i == 0 {
        // p0 = 2 p1 − p2
        w1 += 2.0 * w0;
        w2 -= w0;
        w0 = 0.0;
    }
    if i + 2 >= n {
        // p3 = 2 p2 − p1
        w2 += 2.0 * w3;
        w1 -= w3;
        w3 = 0.0;
    }
    [
        (i.saturating_sub(1), w0),
        (i, w1),
        (i + 1, w2),
        ((i + 2).min(n - 1), w3),
    ]
}

fn to_m(u: &[f64]) -> Vec<f64> {
    let mut acc = 0.0;
    u.iter()
        .map(|&x| {
            acc += x.exp();
            acc
        })
        .collect()
}

/// m from u: zero temperature m_j = Σ_{i≤j} e^{u_i}; positive temperature (u has one more,
/// slack entry) m_j = Σ_{i≤j} e^{u_i} / Σ_i e^{u_i}, so 0 < m_0 ≤ … ≤ m_{K−1} < 1.
fn m_of(p: &Problem, u: &[f64]) -> Vec<f64> {
    let m = to_m(u);
    match p.beta {
        None => m,
        Some(_) => {
            let t = m[m.len() - 1];
            m[..m.len() - 1].iter().map(|x| x / t).collect()
        }
    }
}

/// Objective in u and its gradient (chain rule through the cumulative sum).
fn objective(p: &Problem, u: &[f64]) -> (f64, Vec<f64>) {
    if p.beta.is_some() {
        let m = m_of(p, u);
        let (v, gm) = p.value_grad(&m);
        let t: f64 = u.iter().map(|x| x.exp()).sum();
        let mean: f64 = gm.iter().zip(&m).map(|(g, m)| g * m).sum();
        let k = gm.len();
        let mut gu = vec![0.0; k + 1];
        let mut tail = 0.0;
        for i in (0..=k).rev() {
            if i < k {
                tail += gm[i];
            }
            gu[i] = u[i].exp() / t * (tail - mean);
        }
        return (v, gu);
    }
    let m = to_m(u);
    // The quadrature resolves the tilt e^{m a z} only while m·a stays well inside the nodes;
    // beyond, the discrete functional decreases spuriously. Treat it as infeasible.
    let zmax = p.rule.iter().fold(0.0f64, |a, r| a.max(r.0));
    if m.iter().zip(&p.a).any(|(m, a)| m * a > 0.5 * zmax) {
        return (f64::INFINITY, vec![0.0; u.len()]);
    }
    let (v, gm) = p.value_grad(&m);
    let k = u.len();
    let mut gu = vec![0.0; k];
    let mut tail = 0.0;
    for i in (0..k).rev() {
        tail += gm[i];
        gu[i] = u[i].exp() * tail;
    }
    (v, gu)
}

/// Minimises on the grid of K intervals from `m0` (one value per interval).
fn solve_on(xi: &Mixture, k: usize, s: &FullSettings, m0: &[f64], beta: Option<f64>) -> FullRsb {
    let power = if beta.is_some() { 1.0 } else { s.power };
    let q: Vec<f64> = (0..=k)
        .map(|j| 1.0 - (1.0 - j as f64 / k as f64).powf(power))
        .collect();
    solve_grid(xi, q, s, m0, beta)
}

/// Minimises on the given q-grid (0 = q_0 < … < q_K = 1) from `m0` (one value per interval).
fn solve_grid(
    xi: &Mixture,
    q: Vec<f64>,
    s: &FullSettings,
    m0: &[f64],
    beta: Option<f64>,
) -> FullRsb {
    let k = q.len() - 1;
    let p = Problem::new(xi, &q, s, beta);
    // Starting point: m0 (one value per interval), made strictly increasing.
    assert_eq!(m0.len(), k);
    let mut m = m0.to_vec();
    for j in 1..k {
        if m[j] <= m[j - 1] {
            m[j] = m[j - 1] * (1.0 + 1e-3);
        }
    }
    let mut u: Vec<f64> = (0..k)
        .map(|j| (if j == 0 { m[0] } else { m[j] - m[j - 1] }).max(1e-9).ln())
        .collect();
    if beta.is_some() {
        // Slack: 1 − m_{K−1} (m0 must then lie in (0, 1)).
        u.push((1.0 - m[k - 1]).max(1e-9).ln());
    }
    let (u, f, g, it) = super::lbfgs(|u| objective(&p, u), &u, s.max_iterations, 1e-9);
    FullRsb {
        value: f,
        q,
        m: m_of(&p, &u),
        iterations: it,
        gradient: g.iter().fold(0.0f64, |a, b| a.max(b.abs())),
    }
}

/// Full-RSB solution on the grid of `s.levels` intervals. The start is γ(q) = c·(0.1 + q)/√(1 − q)
/// with c set by the constant-γ solution, the shape of zero-temperature order parameters
/// (γ diverges like (1 − q)^{−1/2} as q → 1; common practice, e.g. Oppermann, Schmidt &
/// Sherrington, PRL 98, 127201 (2007)).
pub fn full_rsb(xi: &Mixture, s: &FullSettings) -> FullRsb {
    let k = s.levels.max(2);
    let mc = constant_gamma(xi).steps.m[0];
    let start: Vec<f64> = (0..k)
        .map(|j| {
            let q = 1.0 - (1.0 - (j as f64 + 0.5) / k as f64).powf(s.power);
            0.5 * mc * (0.1 + q) / (1.0 - q).sqrt()
        })
        .collect();
    solve_on(xi, k, s, &start, None)
}

/// Full-RSB solution on a q-grid refined where γ jumps. Starting from [`full_rsb`]'s grid,
/// each round bisects the intervals on both sides of the `split` largest relative jumps
/// (m_j − m_{j−1})/m_j of γ, and the last interval (where γ diverges), then minimises again
/// from the previous γ. A step γ can only jump at grid points, so a fixed grid cannot place
/// the large jump of a one-step-like order parameter (pure p ≥ 3, where the value on 16 fixed
/// intervals lies above the 2-step value); refining there lets the breakpoints move towards
/// it. Rounds stop when the value no longer falls by more than 1e-9. The refined grids nest,
/// so each round's minimum is at most the previous one.
pub fn full_rsb_adaptive(xi: &Mixture, s: &FullSettings, rounds: usize, split: usize) -> FullRsb {
    let mut sol = full_rsb(xi, s);
    for _ in 0..rounds {
        let k = sol.m.len();
        let mut jumps: Vec<(f64, usize)> = (1..k)
            .map(|j| ((sol.m[j] - sol.m[j - 1]) / sol.m[j].max(1e-300), j))
            .collect();
        jumps.sort_by(|a, b| b.0.total_cmp(&a.0).then(a.1.cmp(&b.1)));
        let mut halve = std::collections::BTreeSet::from([k - 1]);
        for &(_, j) in jumps.iter().take(split) {
            halve.insert(j - 1);
            halve.insert(j);
        }
        let (mut q, mut m0) = (Vec::new(), Vec::new());
        for i in 0..k {
            q.push(sol.q[i]);
            m0.push(sol.m[i]);
            if halve.contains(&i) {
                q.push(0.5 * (sol.q[i] + sol.q[i + 1]));
                m0.push(sol.m[i]);
            }
        }
        q.push(1.0);
        let next = solve_grid(xi, q, s, &m0, None);
        let gain = sol.value - next.value;
        if next.value < sol.value {
            sol = FullRsb {
                iterations: sol.iterations + next.iterations,
                ..next
            };
        }
        if gain <= 1e-9 {
            break;
        }
    }
    sol
}

/// The Parisi field of a zero-temperature solution at given times: Φ(t, ·) on a uniform grid,
/// Φ(t, x) = (1/m_j) log E exp(m_j Φ(q_{j+1}, x + sqrt(ξ'(q_{j+1}) − ξ'(t)) Z)) for t in
/// [q_j, q_{j+1}), and in the last interval the closed form from Φ(1, x) = |x|. Its x-derivatives
/// drive incremental AMP (Montanari, arXiv:1812.10897): the drift γ(t)ξ''(t)∂ₓΦ and the
/// martingale increments ∂ₓₓΦ dB.
pub struct Field {
    /// Grid start and spacing.
    pub x0: f64,
    pub dx: f64,
    /// γ at each requested time.
    pub gamma: Vec<f64>,
    /// Φ(t_k, x0 + i·dx) for each requested time t_k.
    pub phi: Vec<Vec<f64>>,
}

pub fn field(xi: &Mixture, sol: &FullRsb, s: &FullSettings, times: &[f64]) -> Field {
    let p = Problem::new(xi, &sol.q, s, None);
    let k = sol.m.len();
    let mut psi: Vec<Vec<f64>> = vec![Vec::new(); k];
    psi[k - 1] =
        p.xs.iter()
            .map(|&x| last_level(x, sol.m[k - 1], p.a[k - 1]))
            .collect();
    for j in (0..k - 1).rev() {
        psi[j] = p.level(&psi[j + 1], sol.m[j], p.a[j]).0;
    }
    let mut gamma = Vec::with_capacity(times.len());
    let mut phi = Vec::with_capacity(times.len());
    for &t in times {
        let j = (0..k).rfind(|&j| sol.q[j] <= t).unwrap_or(0);
        let a = (xi.d1(sol.q[j + 1]) - xi.d1(t)).max(0.0).sqrt();
        gamma.push(sol.m[j]);
        phi.push(if j + 1 == k {
            p.xs.iter().map(|&x| last_level(x, sol.m[j], a)).collect()
        } else {
            p.level(&psi[j + 1], sol.m[j], a).0
        });
    }
    Field {
        x0: -p.half,
        dx: p.dx,
        gamma,
        phi,
    }
}

/// The Parisi free energy lim (1/n) E log Σ_σ e^{βH(σ)} at inverse temperature β on the cube:
/// inf over x of log 2 + Φ_x(0, 0) − (β²/2) ∫₀¹ x(q) q ξ''(q) dq, ∂_qΦ = −(β²ξ''/2)(Φ_yy +
/// x (Φ_y)²), Φ(1, y) = log cosh y (Parisi formula: Talagrand, Ann. Math. 163 (2006); Panchenko,
/// The Sherrington–Kirkpatrick Model (2013)). x is a step function with values in (0, 1) on a
/// uniform grid of `s.levels` intervals, minimised like the zero-temperature problem (the
/// same recursion with steps β·a_j and log cosh at the end). Returns the solution (γ = x).
pub fn free_energy(xi: &Mixture, beta: f64, s: &FullSettings) -> FullRsb {
    let k = s.levels.max(2);
    let start: Vec<f64> = (0..k).map(|j| 0.2 + 0.6 * j as f64 / k as f64).collect();
    solve_on(xi, k, s, &start, Some(beta))
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The adjoint gradient is the exact gradient of the discrete functional: it agrees with
    /// central finite differences (error O(h²) ≈ 1e-8).
    #[test]
    fn gradient_matches_finite_differences() {
        let xi = Mixture::sk();
        let s = FullSettings::default();
        let k = 8;
        let q: Vec<f64> = (0..=k).map(|j| j as f64 / k as f64).collect();
        let p = Problem::new(&xi, &q, &s, None);
        let m: Vec<f64> = (0..k).map(|j| 0.5 + 0.4 * j as f64).collect();
        let (_, g) = p.value_grad(&m);
        for j in [0, 3, 7] {
            let h = 1e-4;
            let mut up = m.clone();
            up[j] += h;
            let mut dn = m.clone();
            dn[j] -= h;
            let fd = (p.value_grad(&up).0 - p.value_grad(&dn).0) / (2.0 * h);
            assert!((fd - g[j]).abs() < 1e-7, "j {j}: {fd} vs {}", g[j]);
        }
    }

    /// Positive temperature. High temperature: log 2 + β²ξ(1)/2, i.e. log 2 + β²/4 for SK at
    /// β < 1 (Aizenman, Lebowitz & Ruelle, Commun. Math. Phys. 112, 3 (1987); from memory).
    /// Low temperature: below the replica-symmetric value (the Parisi formula is an infimum
    /// and RS is one candidate), and between the ground state and ground state + log 2/β
    /// (e^{β max H} ≤ Z ≤ 2^n e^{β max H}; common practice).
    #[test]
    fn positive_temperature() {
        let xi = Mixture::sk();
        let s = FullSettings {
            levels: 16,
            ..FullSettings::default()
        };
        for beta in [0.5, 0.9] {
            let f = free_energy(&xi, beta, &s);
            let want = LN_2 + beta * beta / 4.0;
            // 1e-6: near β = 1 the functional is flat in x (a continuous transition), so the
            // optimiser's stopping point shows at the 1e-7 level.
            assert!(
                (f.value - want).abs() < 1e-6,
                "β {beta}: {} vs {want}",
                f.value
            );
        }
        for beta in [1.5, 3.0] {
            let t = std::time::Instant::now();
            let f = free_energy(&xi, beta, &s);
            let (rs, _) = crate::theory::temperature::rs_free_energy(&xi, beta);
            eprintln!(
                "β {beta}: Parisi {:.7} RS {rs:.7} ({:.1} s, {} its)",
                f.value,
                t.elapsed().as_secs_f64(),
                f.iterations
            );
            assert!(f.value < rs - 1e-5, "β {beta}: {} vs RS {rs}", f.value);
            let gs = 0.7631667;
            assert!(f.value / beta > gs && f.value / beta < gs + LN_2 / beta);
        }
    }

    /// Refining the q-grid where γ jumps never raises the minimum (the refined grids nest), and
    /// on the pure 4-spin cube (ξ = q⁴), whose order parameter is nearly one-step, it moves the
    /// jump and lowers the value well below the fixed grid's (measured at default settings:
    /// 1.1673928 → 1.1673350 in two rounds, below the 1-step 1.1673916). Coarse settings here
    /// to keep the suite fast.
    #[test]
    fn refining_where_gamma_jumps_lowers_the_value() {
        let xi = Mixture::pure(4);
        let s = FullSettings {
            levels: 8,
            grid: 401,
            nodes: 20,
            ..FullSettings::default()
        };
        let fixed = full_rsb(&xi, &s);
        let refined = full_rsb_adaptive(&xi, &s, 2, 2);
        assert!(refined.m.len() > fixed.m.len());
        assert!(
            refined.value < fixed.value - 1e-5,
            "{} vs {}",
            refined.value,
            fixed.value
        );
        assert!(refined.q.windows(2).all(|w| w[0] < w[1]));
        assert!(refined.m.windows(2).all(|w| w[0] <= w[1]));
    }
}
