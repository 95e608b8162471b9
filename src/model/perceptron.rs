//! The perceptron: m = round(α·n) Gaussian patterns g_a ∈ R^n and a margin κ. A configuration
//! x (±1 spins on the cube, or a point with ‖x‖² = n on the sphere) satisfies pattern a when
//! its projection t_a(x) = ⟨g_a, x⟩/√n reaches the margin, t_a ≥ κ.
//!
//! kiln maximises, so H(x) = Σ_a u(t_a − κ) with u one of two constraint functions:
//! - the step u(t) = −𝟙(t < 0) (the default): H = −(unsatisfied patterns) and `energy` =
//!   −unsatisfied/n, as for k-SAT;
//! - the quadratic u(t) = −½·min(t, 0)², the energy of soft spheres at contact that the
//!   perceptron's jamming literature uses (Franz & Parisi 2016, J. Phys. A 49, 145001;
//!   recalled): continuously differentiable, so gradient methods and Langevin dynamics run on
//!   the sphere, and zero exactly at a solution.
//!
//! Either way a solution, and only a solution, scores 0.
//!
//! Storage: the patterns scaled by 1/√n, spin-major (the m entries g_{·i}/√n of spin i are
//! contiguous), so a projection is a sum of columns and a spin flip moves every t_a by one
//! contiguous column.
//!
//! As a ±1 model ([`SpinModel`]) the field of spin j is h_j = −σ_j·gain_j/2 with gain_j the
//! exact change in H when j flips (an integer: patterns gained minus patterns lost), so every
//! spin algorithm reads −2σ_j h_j = gain_j as for the other families. A flip recomputes the
//! projections and every gain: O(m·n), the price of H not being a low-degree polynomial.
//! Exhaustive search instead walks the projections (O(m) a state, see [`Patterns::gray_walk`]).
//!
//! Sampling (streams named by the instance, never by thread order): pattern a is n standard
//! normals from `(instance, Couplings, a)`; the copy correlated at 1 − ε is
//! g'_a = (1 − ε)·g_a + sqrt(1 − (1 − ε)²)·G_a with G_a from `(instance, Perturbation, a)`, so
//! each pattern keeps its law and E⟨g_a, g'_a⟩/n = 1 − ε.

use super::{Couplings, SpinModel};
use crate::rng::{Id, Purpose, stream};
use rayon::prelude::*;

/// Revision of the perceptron sampler. Bump when a seed's patterns change.
pub const REVISION: u32 = 1;

/// The constraint function u of H = Σ_a u(t_a − κ).
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Constraint {
    /// u(t) = −𝟙(t < 0): H counts the unsatisfied patterns.
    Step,
    /// u(t) = −½·min(t, 0)².
    Quadratic,
}

impl Constraint {
    pub const NAMES: [&'static str; 2] = ["step", "quadratic"];
    pub fn name(self) -> &'static str {
        match self {
            Constraint::Step => "step",
            Constraint::Quadratic => "quadratic",
        }
    }
    pub fn parse(s: &str) -> Option<Constraint> {
        match s {
            "step" => Some(Constraint::Step),
            "quadratic" => Some(Constraint::Quadratic),
            _ => None,
        }
    }
}

/// The patterns of one instance, its margin and its constraint function.
#[derive(Clone, Debug)]
pub struct Patterns {
    n: usize,
    m: usize,
    kappa: f64,
    constraint: Constraint,
    /// c[i·m + a] = g_{a,i}/√n.
    c: Vec<f64>,
}

/// The number of patterns at density α: round(α·n).
pub fn patterns_at(n: u64, alpha: f64) -> u64 {
    (alpha * n as f64).round() as u64
}

impl Patterns {
    /// Samples m patterns in R^n with margin κ; `epsilon > 0` gives the copy correlated at
    /// 1 − ε (see the module notes).
    pub fn sample(n: usize, m: usize, kappa: f64, instance: &Id, epsilon: f64) -> Patterns {
        assert!(n >= 1 && m >= 1, "a perceptron needs n ≥ 1 and m ≥ 1");
        let keep = 1.0 - epsilon;
        let fresh = (epsilon * (2.0 - epsilon)).sqrt();
        let mut rows = vec![0.0f64; m * n];
        rows.par_chunks_mut(n).enumerate().for_each(|(a, row)| {
            let mut r = stream(instance, Purpose::Couplings, a as u64);
            super::draw(&mut r, Couplings::Gaussian, row);
            if epsilon > 0.0 {
                let mut g = stream(instance, Purpose::Perturbation, a as u64);
                super::perturb(&mut g, Couplings::Gaussian, keep, fresh, epsilon, row);
            }
        });
        Patterns::from_rows(n, kappa, &rows)
    }

    /// An instance from its patterns, row a at `rows[a·n..(a + 1)·n]` (unscaled).
    pub fn from_rows(n: usize, kappa: f64, rows: &[f64]) -> Patterns {
        assert!(
            n >= 1 && rows.len().is_multiple_of(n),
            "ragged pattern list"
        );
        let m = rows.len() / n;
        let scale = 1.0 / (n as f64).sqrt();
        let mut c = vec![0.0f64; n * m];
        c.par_chunks_mut(m).enumerate().for_each(|(i, col)| {
            for (a, x) in col.iter_mut().enumerate() {
                *x = rows[a * n + i] * scale;
            }
        });
        Patterns {
            n,
            m,
            kappa,
            constraint: Constraint::Step,
            c,
        }
    }

    /// The instance with another constraint function (the patterns are the same).
    pub fn with_constraint(mut self, constraint: Constraint) -> Patterns {
        self.constraint = constraint;
        self
    }

    /// The constraint function.
    pub fn constraint(&self) -> Constraint {
        self.constraint
    }

    /// Whether H has a gradient the real-point algorithms use (the quadratic constraint).
    pub fn differentiable(&self) -> bool {
        self.constraint == Constraint::Quadratic
    }

    /// u(t − κ) for one projection t.
    #[inline(always)]
    fn term(&self, t: f64) -> f64 {
        match self.constraint {
            Constraint::Step => -((t < self.kappa) as u8 as f64),
            Constraint::Quadratic => {
                let d = (self.kappa - t).max(0.0);
                -0.5 * d * d
            }
        }
    }

    /// H from the projections: Σ_a u(t_a − κ), summed in pattern order (the step's terms are
    /// integers, so its sum is exact; 0 − count, so a solution scores +0.0).
    pub fn score(&self, t: &[f64]) -> f64 {
        match self.constraint {
            Constraint::Step => 0.0 - self.violated(t) as f64,
            Constraint::Quadratic => t.iter().fold(0.0, |acc, &v| acc + self.term(v)),
        }
    }

    /// H at a real point and its gradient ∇H into `g`: ∂H/∂x_i = Σ_a u'(t_a − κ)·g_ai/√n, with
    /// u'(t − κ) = 0 for the step (almost everywhere) and (κ − t)_+ for the quadratic.
    pub fn value_grad(&self, x: &[f64], g: &mut [f64]) -> f64 {
        let t = self.projected(|i| x[i]);
        let value = self.score(&t);
        match self.constraint {
            Constraint::Step => g.iter_mut().for_each(|v| *v = 0.0),
            Constraint::Quadratic => {
                let w: Vec<f64> = t.iter().map(|&v| (self.kappa - v).max(0.0)).collect();
                for (i, gi) in g.iter_mut().enumerate() {
                    *gi = self.column(i).iter().zip(&w).map(|(c, w)| c * w).sum();
                }
            }
        }
        value
    }

    /// The instance with its first `m` patterns only (patterns are drawn one stream each, so
    /// the first m of a larger instance are an instance of m patterns).
    pub fn prefix(&self, m: usize) -> Patterns {
        let m = m.min(self.m);
        let mut c = Vec::with_capacity(self.n * m);
        for i in 0..self.n {
            c.extend_from_slice(&self.column(i)[..m]);
        }
        Patterns {
            n: self.n,
            m,
            kappa: self.kappa,
            constraint: self.constraint,
            c,
        }
    }

    pub fn n(&self) -> usize {
        self.n
    }
    /// The number of patterns m.
    pub fn patterns(&self) -> usize {
        self.m
    }
    /// The margin κ.
    pub fn margin(&self) -> f64 {
        self.kappa
    }
    /// The m entries g_{a,i}/√n of spin i.
    #[inline(always)]
    pub fn column(&self, i: usize) -> &[f64] {
        &self.c[i * self.m..(i + 1) * self.m]
    }

    /// The projections t_a = ⟨g_a, x⟩/√n into `t` (a sum of columns in spin order, so the
    /// same x always gives the same bits).
    pub fn projections(&self, x: impl Fn(usize) -> f64, t: &mut [f64]) {
        t.iter_mut().for_each(|v| *v = 0.0);
        for i in 0..self.n {
            let xi = x(i);
            for (v, &g) in t.iter_mut().zip(self.column(i)) {
                *v += xi * g;
            }
        }
    }

    /// The projections of x, freshly allocated.
    fn projected(&self, x: impl Fn(usize) -> f64) -> Vec<f64> {
        let mut t = vec![0.0; self.m];
        self.projections(x, &mut t);
        t
    }

    /// The number of patterns with t_a < κ.
    pub fn violated(&self, t: &[f64]) -> usize {
        t.iter().filter(|&&v| v < self.kappa).count()
    }

    /// The patterns a point x violates (any norm; the sphere's points have ‖x‖² = n).
    pub fn unsatisfied_at(&self, x: &[f64]) -> usize {
        self.violated(&self.projected(|i| x[i]))
    }

    /// The patterns a ±1 configuration violates.
    pub fn unsatisfied(&self, s: &[i8]) -> usize {
        self.violated(&self.projected(|i| s[i] as f64))
    }

    /// H at a real point.
    pub fn value(&self, x: &[f64]) -> f64 {
        self.score(&self.projected(|i| x[i]))
    }

    /// Bytes of an instance with m patterns in R^n (the patterns twice while sampling, then
    /// once) plus the projections.
    pub fn bytes(n: u64, m: u64) -> u128 {
        (n as u128 * m as u128) * 16 + m as u128 * 8
    }

    /// Walks the states with `free` moving spins in Gray-code order from σ = (+1, …, +1) (spin
    /// i flips at step k when i is the lowest set bit of k), keeping the projections current
    /// at O(m) a state (recomputed from scratch every 4096 steps, so rounding cannot drift),
    /// and calls `visit(σ, t)` at each state, the start included, until it returns false.
    /// Returns the steps taken.
    fn walk(&self, free: usize, mut visit: impl FnMut(&[i8], &[f64]) -> bool) -> u64 {
        let mut s = vec![1i8; self.n];
        let mut t = self.projected(|i| s[i] as f64);
        if !visit(&s, &t) {
            return 0;
        }
        let steps: u64 = if free == 0 { 0 } else { (1u64 << free) - 1 };
        for k in 1..=steps {
            let i = k.trailing_zeros() as usize;
            s[i] = -s[i];
            if k.is_multiple_of(4096) {
                self.projections(|j| s[j] as f64, &mut t);
            } else {
                let d = 2.0 * s[i] as f64;
                for (v, &g) in t.iter_mut().zip(self.column(i)) {
                    *v += d * g;
                }
            }
            if !visit(&s, &t) {
                return k;
            }
        }
        steps
    }

    /// Exhaustive search's walk (the Gray walk over `free` spins): the first best state in
    /// Gray order, its H, and the steps taken; it stops at the first state with every pattern
    /// satisfied (H = 0, for either constraint function). A state that looks better than the
    /// best so far is re-scored from scratch before it is kept, so a kept energy is exact.
    pub fn gray_walk(&self, free: usize) -> (Vec<i8>, f64, u64) {
        let mut best = f64::NEG_INFINITY;
        let mut best_s = Vec::new();
        let done = self.walk(free, |s, t| {
            if self.score(t) > best {
                let exact = SpinModel::energy(self, s);
                if exact > best {
                    best = exact;
                    best_s = s.to_vec();
                }
            }
            best < 0.0
        });
        (best_s, best, done)
    }

    /// The instance's capacity: the largest m' ≤ m such that its first m' patterns are
    /// satisfied by one ±1 configuration (patterns are nested, so the instance at density
    /// m'/n is satisfiable iff m' ≤ this). One walk through all 2^n states, with the exact
    /// re-scoring of [`Patterns::gray_walk`].
    pub fn capacity(&self) -> usize {
        let first_violated = |t: &[f64]| t.iter().position(|&v| v < self.kappa).unwrap_or(t.len());
        let mut best = 0;
        self.walk(self.n, |s, t| {
            if t[..=best.min(self.m - 1)].iter().all(|&v| v >= self.kappa) {
                best = best.max(first_violated(&self.projected(|j| s[j] as f64)));
            }
            best < self.m
        });
        best
    }
}

impl super::Smooth for Patterns {
    fn n(&self) -> usize {
        self.n
    }
    fn value_grad(&self, x: &[f64], g: &mut [f64]) -> f64 {
        Patterns::value_grad(self, x, g)
    }
}

impl SpinModel for Patterns {
    fn n(&self) -> usize {
        self.n
    }
    /// Every pattern satisfied.
    fn ceiling(&self) -> Option<f64> {
        Some(0.0)
    }
    fn energy(&self, s: &[i8]) -> f64 {
        self.score(&self.projected(|i| s[i] as f64))
    }
    /// gain_j = Σ_a u(t_a − 2σ_j c_ja − κ) − u(t_a − κ), and h_j = −σ_j·gain_j/2 (for the
    /// step exact: the gains are integers).
    fn fields(&self, s: &[i8], h: &mut [f64]) {
        let t = self.projected(|i| s[i] as f64);
        for (j, hj) in h.iter_mut().enumerate() {
            let d = -2.0 * s[j] as f64;
            let mut gain = 0.0;
            for (&v, &g) in t.iter().zip(self.column(j)) {
                gain += self.term(v + d * g) - self.term(v);
            }
            *hj = -(s[j] as f64) * gain / 2.0;
        }
    }
    /// Every projection moves, so every gain is recomputed: O(m·n).
    fn flip(&self, s: &mut [i8], h: &mut [f64], k: usize) {
        s[k] = -s[k];
        self.fields(s, h);
    }
    fn exhaustive(&self, free: usize) -> Option<(Vec<i8>, f64, u64)> {
        Some(self.gray_walk(free))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Every field is the change in H of its flip, before and after flips: exactly for the
    /// step, to rounding (1e-12) for the quadratic.
    #[test]
    fn fields_are_flip_gains() {
        for (kappa, c) in [
            (0.0, Constraint::Step),
            (0.7, Constraint::Step),
            (-0.3, Constraint::Step),
            (0.4, Constraint::Quadratic),
        ] {
            let p = Patterns::sample(9, 13, kappa, &[4; 32], 0.0).with_constraint(c);
            let tol = if c == Constraint::Step { 0.0 } else { 1e-12 };
            let mut s: Vec<i8> = (0..9).map(|i| if i % 3 == 0 { -1 } else { 1 }).collect();
            let mut h = vec![0.0; 9];
            p.fields(&s, &mut h);
            for step in 0..6 {
                for j in 0..9 {
                    let mut f = s.clone();
                    f[j] = -f[j];
                    let gain = p.energy(&f) - p.energy(&s);
                    let d = (-2.0 * s[j] as f64 * h[j] - gain).abs();
                    assert!(d <= tol, "κ {kappa} {c:?} j {j}: off by {d}");
                }
                let k = (step * 5 + 2) % 9;
                p.flip(&mut s, &mut h, k);
            }
        }
    }

    /// The Gray walk finds the maximum of brute force over all 2^n states, and its energy is
    /// that of its state.
    #[test]
    fn gray_walk_is_exact() {
        for seed in 0..6u8 {
            let c = [Constraint::Step, Constraint::Quadratic][seed as usize % 2];
            let p = Patterns::sample(10, 14, 0.2, &[seed; 32], 0.0).with_constraint(c);
            let (s, e, _) = p.gray_walk(10);
            assert_eq!(e, p.energy(&s));
            let brute = (0u32..1 << 10)
                .map(|b| {
                    let s: Vec<i8> = (0..10).map(|i| 1 - 2 * (b >> i & 1) as i8).collect();
                    p.energy(&s)
                })
                .fold(f64::NEG_INFINITY, f64::max);
            assert_eq!(e, brute, "seed {seed}");
        }
    }

    /// The quadratic's gradient equals central differences of its value (1e-6 relative), and
    /// the step's is zero.
    #[test]
    fn quadratic_gradient_is_the_derivative() {
        let p = Patterns::sample(12, 20, 0.3, &[7; 32], 0.0).with_constraint(Constraint::Quadratic);
        let x: Vec<f64> = (0..12).map(|i| ((i * 7 % 5) as f64 - 2.0) * 0.6).collect();
        let mut g = vec![0.0; 12];
        let v = p.value_grad(&x, &mut g);
        assert!(v < 0.0 && (v - p.value(&x)).abs() < 1e-15);
        for i in 0..12 {
            let h = 1e-6;
            let (mut a, mut b) = (x.clone(), x.clone());
            a[i] += h;
            b[i] -= h;
            let fd = (p.value(&a) - p.value(&b)) / (2.0 * h);
            assert!(
                (fd - g[i]).abs() < 1e-6 * (1.0 + g[i].abs()),
                "{i}: {fd} vs {}",
                g[i]
            );
        }
        let step = p.clone().with_constraint(Constraint::Step);
        step.value_grad(&x, &mut g);
        assert!(g.iter().all(|&v| v == 0.0));
    }

    /// The capacity equals a search over prefixes by the Gray walk, and is the largest
    /// satisfiable prefix.
    #[test]
    fn capacity_is_the_largest_satisfiable_prefix() {
        for seed in 0..8u8 {
            let p = Patterns::sample(11, 16, 0.0, &[seed + 40; 32], 0.0);
            let c = p.capacity();
            let sat = |m: usize| m == 0 || p.prefix(m).gray_walk(11).1 == 0.0;
            assert!(sat(c), "seed {seed}: prefix {c} unsatisfiable");
            assert!(
                c == 16 || !sat(c + 1),
                "seed {seed}: prefix {} satisfiable",
                c + 1
            );
        }
    }

    /// The correlated copy: each pattern has unit variance per entry and correlation 1 − ε
    /// with the original, within 5 standard errors over m·n entries (a product of two unit
    /// normals has variance 1 + ρ² ≤ 2, a squared one 2; common practice).
    #[test]
    fn correlated_copy_has_its_correlation() {
        let (n, m) = (200, 300);
        let a = Patterns::sample(n, m, 0.0, &[9; 32], 0.0);
        for eps in [0.1, 0.5] {
            let b = Patterns::sample(n, m, 0.0, &[9; 32], eps);
            let (mut xy, mut yy) = (0.0, 0.0);
            for (x, y) in a.c.iter().zip(&b.c) {
                xy += x * y * n as f64;
                yy += y * y * n as f64;
            }
            let k = (n * m) as f64;
            let (corr, var) = (xy / k, yy / k);
            assert!(
                (corr - (1.0 - eps)).abs() < 5.0 * 2f64.sqrt() / k.sqrt(),
                "ε {eps}: {corr}"
            );
            assert!(
                (var - 1.0).abs() < 5.0 * 2f64.sqrt() / k.sqrt(),
                "ε {eps}: {var}"
            );
        }
    }
}
