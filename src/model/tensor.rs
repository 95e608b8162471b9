//! One p-spin term (p ≥ 3) of a mixed model, stored as a symmetric tensor over sorted index
//! tuples.
//!
//! H_p(x) = c_p·sqrt(p!)·n^{−(p−1)/2} Σ_{i_1<…<i_p} g_{i_1…i_p} x_{i_1}⋯x_{i_p}, g i.i.d. N(0,1)
//! or ±1. The factor sqrt(p!) makes E[H_p(σ)H_p(σ')] = c_p²·p!·n^{−(p−1)}·e_p(σ∘σ'), where e_p
//! is the elementary symmetric polynomial of the products σ_iσ'_i: n·c_p²·R^p up to the
//! excluded diagonal (tuples with a repeated index), a relative correction O(p²/n). This is the
//! documented diagonal convention of kiln's mixed models.
//!
//! Storage: one f64 per sorted tuple, in colexicographic order, so the tuple (i_1<…<i_p) sits
//! at Σ_r C(i_r, r) (the combinatorial number system). The slice of tuples whose largest index
//! is k is contiguous (C(k, p−1) entries from offset C(k, p)) and is drawn from the stream
//! `(instance, Couplings, p·2^48 + k)` (its correlated copy from `Perturbation` with the same
//! index), so slices are generated in parallel and equal serial generation.

use super::Couplings;
use crate::kernels::dot;
use crate::rng::{Id, Purpose, stream};
use rayon::prelude::*;

/// A value a tensor can contract with: ±1 spins or real coordinates.
pub trait Val: Copy + Sync {
    fn f(self) -> f64;
}
impl Val for i8 {
    #[inline(always)]
    fn f(self) -> f64 {
        self as f64
    }
}
impl Val for f64 {
    #[inline(always)]
    fn f(self) -> f64 {
        self
    }
}

/// C(i, r) for 0 ≤ i ≤ n, 0 ≤ r ≤ p, saturating (only sizes that fit are ever indexed).
fn binomials(n: usize, p: usize) -> Vec<u64> {
    let mut b = vec![0u64; (p + 1) * (n + 1)];
    for i in 0..=n {
        b[i] = 1; // C(i, 0)
        for r in 1..=p {
            b[r * (n + 1) + i] = if i == 0 {
                0
            } else {
                b[(r - 1) * (n + 1) + i - 1].saturating_add(b[r * (n + 1) + i - 1])
            };
        }
    }
    b
}

/// Number of sorted p-tuples of n indices, C(n, p), as u128 (for memory estimates).
pub fn tuples(n: u64, p: u32) -> u128 {
    let mut c: u128 = 1;
    for r in 0..p as u128 {
        let f = (n as u128).saturating_sub(r);
        c = c.saturating_mul(f) / (r + 1);
    }
    c
}

/// Advances a strictly increasing tuple to its colexicographic successor (the next storage
/// index); the caller detects the end by the last entry reaching the universe size.
#[inline(always)]
fn colex_next(t: &mut [usize]) {
    let p = t.len();
    let mut r = 0;
    while r + 1 < p && t[r] + 1 == t[r + 1] {
        t[r] = r;
        r += 1;
    }
    t[r] += 1;
}

/// The stream index of slice k of the p-tensor.
fn slice_index(p: usize, k: usize) -> u64 {
    ((p as u64) << 48) | k as u64
}

pub struct Tensor {
    n: usize,
    p: usize,
    /// Scaled values c_p·sqrt(p!)·n^{−(p−1)/2}·g, colex order.
    a: Vec<f64>,
    binom: Vec<u64>,
}

impl Tensor {
    /// Samples the p-term with weight c2 = c_p² (ε > 0: the copy correlated at 1 − ε).
    pub fn sample(
        n: usize,
        p: usize,
        c2: f64,
        couplings: Couplings,
        instance: &Id,
        epsilon: f64,
    ) -> Tensor {
        assert!(p >= 3 && n >= p);
        let binom = binomials(n, p);
        let total = binom[p * (n + 1) + n] as usize;
        let mut a = vec![0.0f64; total];
        let fact: f64 = (1..=p).map(|x| x as f64).product();
        let scale = (c2 * fact).sqrt() / (n as f64).powf((p as f64 - 1.0) / 2.0);
        // Split into slices by largest index.
        let mut slices: Vec<(usize, &mut [f64])> = Vec::with_capacity(n);
        let mut rest: &mut [f64] = &mut a;
        for k in 0..n {
            let len = binom[(p - 1) * (n + 1) + k] as usize;
            let (head, tail) = rest.split_at_mut(len);
            slices.push((k, head));
            rest = tail;
        }
        let keep = 1.0 - epsilon;
        let fresh = (epsilon * (2.0 - epsilon)).sqrt();
        slices.into_par_iter().for_each(|(k, slice)| {
            let mut js = stream(instance, Purpose::Couplings, slice_index(p, k));
            super::draw(&mut js, couplings, slice);
            if epsilon > 0.0 {
                let mut gs = stream(instance, Purpose::Perturbation, slice_index(p, k));
                super::perturb(&mut gs, couplings, keep, fresh, epsilon, slice);
            }
            for x in slice.iter_mut() {
                *x *= scale;
            }
        });
        Tensor { n, p, a, binom }
    }

    pub fn p(&self) -> usize {
        self.p
    }

    /// The raw scaled entries in colex order (for tests).
    pub fn entries(&self) -> &[f64] {
        &self.a
    }

    #[inline(always)]
    fn c(&self, i: usize, r: usize) -> u64 {
        self.binom[r * (self.n + 1) + i]
    }

    /// Storage index of a sorted tuple.
    pub fn index(&self, t: &[usize]) -> usize {
        t.iter()
            .enumerate()
            .map(|(r, &i)| self.c(i, r + 1))
            .sum::<u64>() as usize
    }

    /// H_p(x) alone (one pass in storage order).
    pub fn energy<T: Val>(&self, x: &[T]) -> f64 {
        if self.p == 3 {
            let xf: Vec<f64> = x.iter().map(|v| v.f()).collect();
            return self.cubic(&xf, &mut [], false);
        }
        self.walk(x, None)
    }

    /// Adds this term's H_p(x) to the return value and ∂H_p/∂x to `h` (one pass over the
    /// tensor in storage order).
    pub fn accumulate<T: Val>(&self, x: &[T], h: &mut [f64]) -> f64 {
        if self.p == 3 {
            // The gradient is summed on its own, then added: fields do not depend on what `h`
            // held before.
            let xf: Vec<f64> = x.iter().map(|v| v.f()).collect();
            let mut g = vec![0.0; self.n];
            let e = self.cubic(&xf, &mut g, true);
            h.iter_mut().zip(&g).for_each(|(a, b)| *a += b);
            return e;
        }
        self.walk(x, Some(h))
    }

    /// Any p: one pass over the tuples in colex order, adding the gradient to `h` if given.
    fn walk<T: Val>(&self, x: &[T], mut h: Option<&mut [f64]>) -> f64 {
        let p = self.p;
        let mut t: Vec<usize> = (0..p).collect();
        let mut e = 0.0;
        for &a in &self.a {
            let mut prod = a;
            for &i in &t {
                prod *= x[i].f();
            }
            e += prod;
            if let Some(h) = h.as_deref_mut() {
                // ∂/∂x_i of a·Π x = a·Π_{j≠i} x_j; computed without division (x may be 0).
                for r in 0..p {
                    let mut q = a;
                    for (s, &j) in t.iter().enumerate() {
                        if s != r {
                            q *= x[j].f();
                        }
                    }
                    h[t[r]] += q;
                }
            }
            colex_next(&mut t);
        }
        e
    }

    /// Fields update for flipping ±1 spin k (`s[k]` still holds the old value): every tuple
    /// containing k changes sign, so h_j += −2·a·Π_{T∖{j}} σ for each other member j.
    pub fn flip_update(&self, s: &[i8], h: &mut [f64], k: usize) {
        if self.p == 3 {
            return self.cubic_flip(s, h, k);
        }
        let n = self.n;
        let m = self.p - 1;
        // (p−1)-subsets of the n−1 other indices, colex order, mapped around k.
        let mut c: Vec<usize> = (0..m).collect();
        let mut o = vec![0usize; m];
        let sk = s[k] as f64;
        loop {
            let mut idx = 0u64;
            let mut below = 0;
            let mut prod = 1.0;
            for r in 0..m {
                let j = c[r] + usize::from(c[r] >= k);
                o[r] = j;
                prod *= s[j] as f64;
                if j < k {
                    below += 1;
                    idx += self.c(j, r + 1);
                } else {
                    idx += self.c(j, r + 2);
                }
            }
            idx += self.c(k, below + 1);
            let base = -2.0 * self.a[idx as usize] * sk * prod;
            for &j in &o {
                h[j] += base * s[j] as f64;
            }
            // Colex successor over the universe 0..n−1.
            colex_next(&mut c);
            if c[m - 1] >= n - 1 {
                break;
            }
        }
    }
}

impl Tensor {
    /// Adds the Hessian ∂²H_p/∂x_i∂x_j at x to the dense row-major n×n matrix `m`, which must
    /// be symmetric on entry (zero diagonal: distinct-index sums).
    pub fn hessian_add(&self, x: &[f64], m: &mut [f64]) {
        let n = self.n;
        if self.p == 3 {
            // Tuple (i < j < k): M_ij += a x_k, M_ik += a x_j, M_jk += a x_i (and symmetric).
            for k in 2..n {
                let slice = self.c(k, 3) as usize;
                for j in 1..k {
                    let base = slice + self.c(j, 2) as usize;
                    let row = &self.a[base..base + j];
                    let (xj, xk) = (x[j], x[k]);
                    let mut mjk = 0.0;
                    for (i, &a) in row.iter().enumerate() {
                        m[i * n + j] += a * xk;
                        m[i * n + k] += a * xj;
                        mjk += a * x[i];
                    }
                    m[j * n + k] += mjk;
                }
            }
        } else {
            let p = self.p;
            let mut t: Vec<usize> = (0..p).collect();
            for &a in &self.a {
                for r in 0..p {
                    for q in r + 1..p {
                        let mut v = a;
                        for (u, &i) in t.iter().enumerate() {
                            if u != r && u != q {
                                v *= x[i];
                            }
                        }
                        m[t[r] * n + t[q]] += v;
                    }
                }
                colex_next(&mut t);
            }
        }
        // The loops filled the upper triangle (i < j); mirror it.
        for i in 0..n {
            for j in i + 1..n {
                let v = m[i * n + j] - m[j * n + i];
                // Only the upper-triangle increments were added; move them across.
                m[j * n + i] += v;
            }
        }
    }

    /// p = 3, energy (and gradient into `g` when `grad`), looping over the storage in order:
    /// slice k, row j (contiguous i < j), so the inner loop is a vectorisable axpy and dot.
    fn cubic(&self, x: &[f64], g: &mut [f64], grad: bool) -> f64 {
        let n = self.n;
        let mut e = 0.0;
        for k in 2..n {
            let xk = x[k];
            let slice = self.c(k, 3) as usize;
            let mut gk = 0.0;
            for j in 1..k {
                let xj = x[j];
                let base = slice + self.c(j, 2) as usize;
                let row = &self.a[base..base + j];
                let acc = dot(row, &x[..j]);
                e += acc * xj * xk;
                if grad {
                    let xjk = xj * xk;
                    for (gi, &ai) in g[..j].iter_mut().zip(row) {
                        *gi += ai * xjk;
                    }
                    g[j] += acc * xk;
                    gk += acc * xj;
                }
            }
            if grad {
                g[k] += gk;
            }
        }
        e
    }

    /// p = 3 flip of k: every tuple {i, j, k} changes sign. With c = −2σ_k (old value),
    /// h_i += c·a·σ_j and h_j += c·a·σ_i.
    fn cubic_flip(&self, s: &[i8], h: &mut [f64], k: usize) {
        let n = self.n;
        let c = -2.0 * s[k] as f64;
        let ck2 = self.c(k, 2) as usize;
        let slice_k = self.c(k, 3) as usize;
        for j in 0..n {
            if j == k {
                continue;
            }
            let sj = s[j] as f64;
            let f = c * sj;
            let mut acc = 0.0;
            if j < k {
                // Tuples i < j < k: contiguous row of slice k.
                let base = slice_k + self.c(j, 2) as usize;
                let row = &self.a[base..base + j];
                for ((hi, &ai), &si) in h[..j].iter_mut().zip(row).zip(&s[..j]) {
                    *hi += f * ai;
                    acc += ai * si as f64;
                }
            } else {
                let slice_j = self.c(j, 3) as usize;
                // Tuples i < k < j: contiguous.
                let base = slice_j + ck2;
                let row = &self.a[base..base + k];
                for ((hi, &ai), &si) in h[..k].iter_mut().zip(row).zip(&s[..k]) {
                    *hi += f * ai;
                    acc += ai * si as f64;
                }
                // Tuples k < i < j: entry C(j,3) + C(i,2) + k.
                for i in k + 1..j {
                    let ai = self.a[slice_j + self.c(i, 2) as usize + k];
                    h[i] += f * ai;
                    acc += ai * s[i] as f64;
                }
            }
            h[j] += c * acc;
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The colex index of every sorted tuple is its position in the enumeration.
    #[test]
    fn colex_index_matches_storage_order() {
        let t = Tensor::sample(9, 3, 1.0, Couplings::Gaussian, &[1; 32], 0.0);
        let mut pos = 0;
        for k in 0..9 {
            for j in 0..k {
                for i in 0..j {
                    assert_eq!(t.index(&[i, j, k]), pos);
                    pos += 1;
                }
            }
        }
        assert_eq!(pos, t.entries().len());
        assert_eq!(tuples(9, 3), 84);
    }

    fn brute(t: &Tensor, x: &[f64]) -> f64 {
        let n = x.len();
        let mut e = 0.0;
        if t.p() == 3 {
            for k in 0..n {
                for j in 0..k {
                    for i in 0..j {
                        e += t.entries()[t.index(&[i, j, k])] * x[i] * x[j] * x[k];
                    }
                }
            }
        } else {
            for l in 0..n {
                for k in 0..l {
                    for j in 0..k {
                        for i in 0..j {
                            e += t.entries()[t.index(&[i, j, k, l])] * x[i] * x[j] * x[k] * x[l];
                        }
                    }
                }
            }
        }
        e
    }

    /// Energy against brute force; fields against finite differences (the energy is
    /// multilinear, so a central difference is exact up to rounding); flip updates against
    /// fields from scratch.
    #[test]
    fn energy_fields_and_flips() {
        for p in [3, 4] {
            let n = 13;
            let t = Tensor::sample(n, p, 0.7, Couplings::Gaussian, &[2; 32], 0.0);
            let mut r = stream(&[3; 32], Purpose::Algorithm, 0);
            let x: Vec<f64> = (0..n).map(|_| r.normal()).collect();
            let mut h = vec![0.0; n];
            let e = t.accumulate(&x, &mut h);
            assert!((e - brute(&t, &x)).abs() < 1e-12);
            for i in 0..n {
                let mut y = x.clone();
                y[i] += 1.0;
                let up = brute(&t, &y);
                y[i] -= 2.0;
                let down = brute(&t, &y);
                assert!((h[i] - (up - down) / 2.0).abs() < 1e-11, "p {p} i {i}");
            }
            let mut s: Vec<i8> = (0..n).map(|_| r.sign() as i8).collect();
            let mut h = vec![0.0; n];
            t.accumulate(&s, &mut h);
            for step in 0..40 {
                let k = r.below(n as u64) as usize;
                t.flip_update(&s, &mut h, k);
                s[k] = -s[k];
                let mut fresh = vec![0.0; n];
                t.accumulate(&s, &mut fresh);
                for (a, b) in h.iter().zip(&fresh) {
                    assert!((a - b).abs() < 1e-11, "p {p} step {step}");
                }
            }
        }
    }

    /// Parallel slices equal serial draws from the documented streams.
    #[test]
    fn slices_come_from_their_streams() {
        let n = 11;
        let t = Tensor::sample(n, 3, 1.0, Couplings::Pm1, &[4; 32], 0.0);
        let scale = 6f64.sqrt() / n as f64;
        for k in [2, 7, 10] {
            let mut s = stream(&[4; 32], Purpose::Couplings, (3u64 << 48) | k as u64);
            for j in 0..k {
                for i in 0..j {
                    let want = s.sign() * scale;
                    assert_eq!(t.entries()[t.index(&[i, j, k])], want);
                }
            }
        }
    }

    /// Value stability: the first entries of a seeded p = 3 tensor are pinned (a change here
    /// alters numbers and must bump the cube/sphere revision).
    #[test]
    fn pinned_first_entries() {
        let t = Tensor::sample(6, 3, 1.0, Couplings::Gaussian, &[7; 32], 0.0);
        let got: Vec<u64> = t.entries()[..4].iter().map(|x| x.to_bits()).collect();
        assert_eq!(got, PINNED);
    }
    const PINNED: [u64; 4] = [
        13827132546985388382,
        4591365348681866926,
        4603320353366055999,
        13823724391212871756,
    ];

    /// The Hessian equals central differences of the gradient (exact for a multilinear H up to
    /// rounding), for p = 3 (specialised loop) and p = 4 (generic).
    #[test]
    fn hessian_matches_gradient_differences() {
        for p in [3, 4] {
            let n = 9;
            let t = Tensor::sample(n, p, 1.0, Couplings::Gaussian, &[8; 32], 0.0);
            let mut r = stream(&[9; 32], Purpose::Algorithm, 0);
            let x: Vec<f64> = (0..n).map(|_| r.normal()).collect();
            let mut m = vec![0.0; n * n];
            t.hessian_add(&x, &mut m);
            for j in 0..n {
                let mut up = x.clone();
                up[j] += 0.5;
                let mut dn = x.clone();
                dn[j] -= 0.5;
                let (mut gu, mut gd) = (vec![0.0; n], vec![0.0; n]);
                t.accumulate(&up, &mut gu);
                t.accumulate(&dn, &mut gd);
                for i in 0..n {
                    let fd = gu[i] - gd[i];
                    assert!(
                        (m[i * n + j] - fd).abs() < 1e-10,
                        "p {p} ({i},{j}): {} vs {fd}",
                        m[i * n + j]
                    );
                }
            }
        }
    }
}
