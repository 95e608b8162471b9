//! Mixed p-spin models: H = Σ_p H_p with ξ(q) = Σ_p c_p² q^p, on the hypercube {±1}^n or on
//! the sphere {x : ‖x‖² = n}.
//!
//! The p = 2 term is a dense symmetric matrix A = sqrt(2c_2²)·J/√n (the SK sampler, same
//! streams: with c_2² = 1/2 it is bit-for-bit the `sk` family), H_2 = ½ xᵀAx; each p ≥ 3 term
//! is a [`Tensor`] over sorted tuples. Every sum runs over distinct indices (the diagonal
//! convention of [`super::tensor`]), so E[H(σ)H(σ')] = n·ξ(R) up to a relative O(p²/n).

use super::Couplings;
use super::sk::{self, Dense, Storage};
use super::tensor::{Tensor, Val};
use crate::rng::Id;
use crate::theory::Mixture;

/// A sampled mixed instance.
pub struct Mixed {
    n: usize,
    xi: Mixture,
    dense: Option<Dense>,
    tensors: Vec<Tensor>,
}

impl Mixed {
    /// Samples with the p = 2 term held under `storage` (the tensors are always f64).
    pub fn sample_as(
        storage: Storage,
        n: usize,
        xi: &Mixture,
        c: Couplings,
        instance: &Id,
        epsilon: f64,
    ) -> Mixed {
        let mut dense = None;
        let mut tensors = Vec::new();
        for &(p, c2) in &xi.terms {
            if c2 == 0.0 {
                continue;
            }
            if p == 2 {
                dense = Some(sk::sample_weighted_as(storage, n, c, c2, instance, epsilon));
            } else {
                tensors.push(Tensor::sample(n, p as usize, c2, c, instance, epsilon));
            }
        }
        Mixed {
            n,
            xi: xi.clone(),
            dense,
            tensors,
        }
    }

    /// The covariance ξ the instance was drawn from.
    pub fn mixture(&self) -> &Mixture {
        &self.xi
    }

    pub fn n(&self) -> usize {
        self.n
    }

    /// The p = 2 part, if any.
    pub fn dense(&self) -> Option<&Dense> {
        self.dense.as_ref()
    }

    /// Whether H is quadratic (only a p = 2 term).
    pub fn is_quadratic(&self) -> bool {
        self.tensors.is_empty() && self.dense.is_some()
    }

    /// H(x) and ∇H(x) (with distinct-index sums the gradient at ±1 points is the local field).
    pub fn value_grad<T: Val>(&self, x: &[T], g: &mut [f64]) -> f64 {
        g.iter_mut().for_each(|v| *v = 0.0);
        let mut e = self.quadratic(x, g);
        for t in &self.tensors {
            e += t.accumulate(x, g);
        }
        e
    }

    /// H(x).
    pub fn value<T: Val>(&self, x: &[T]) -> f64 {
        let mut g = vec![0.0; if self.dense.is_some() { self.n } else { 0 }];
        let mut e = self.quadratic(x, &mut g);
        for t in &self.tensors {
            e += t.energy(x);
        }
        e
    }

    /// The p = 2 part: writes Ax into `g` and returns ½ xᵀAx (0 without a p = 2 term).
    fn quadratic<T: Val>(&self, x: &[T], g: &mut [f64]) -> f64 {
        let Some(d) = &self.dense else {
            return 0.0;
        };
        let xf: Vec<f64> = x.iter().map(|v| v.f()).collect();
        d.matvec(&xf, g);
        0.5 * xf.iter().zip(g.iter()).map(|(a, b)| a * b).sum::<f64>()
    }

    /// The Hessian ∇²H(x) as a dense row-major n×n matrix (zero diagonal).
    pub fn hessian(&self, x: &[f64]) -> Vec<f64> {
        let n = self.n;
        let mut m = vec![0.0; n * n];
        if let Some(d) = &self.dense {
            for i in 0..n {
                d.row_into(i, &mut m[i * n..(i + 1) * n]);
            }
        }
        for t in &self.tensors {
            t.hessian_add(x, &mut m);
        }
        m
    }

    /// Relative cost of one spin flip (entries touched).
    pub fn flip_cost(&self) -> f64 {
        let n = self.n as f64;
        let mut c = if self.dense.is_some() { n } else { 0.0 };
        for t in &self.tensors {
            c += super::tensor::tuples(self.n as u64 - 1, t.p() as u32 - 1) as f64;
        }
        c.max(1.0)
    }
}

impl super::SpinModel for Mixed {
    fn n(&self) -> usize {
        self.n
    }
    /// Even when every term has even p.
    fn symmetric(&self) -> bool {
        self.xi.terms.iter().all(|&(p, _)| p % 2 == 0)
    }
    fn fields(&self, s: &[i8], h: &mut [f64]) {
        match &self.dense {
            Some(d) => d.fields(s, h),
            None => h.iter_mut().for_each(|v| *v = 0.0),
        }
        for t in &self.tensors {
            t.accumulate(s, h);
        }
    }
    fn energy(&self, s: &[i8]) -> f64 {
        let mut e = self.dense.as_ref().map_or(0.0, |d| d.energy(s));
        for t in &self.tensors {
            e += t.energy(s);
        }
        e
    }
    #[inline]
    fn flip(&self, s: &mut [i8], h: &mut [f64], k: usize) {
        for t in &self.tensors {
            t.flip_update(s, h, k);
        }
        match &self.dense {
            Some(d) => d.flip(s, h, k),
            None => s[k] = -s[k],
        }
    }
}
