//! Sherrington–Kirkpatrick model, dense storage.
//!
//! H(σ) = n^{-1/2} Σ_{i<j} J_ij σ_i σ_j (Sherrington & Kirkpatrick, PRL 35, 1792 (1975)), with
//! J_ij i.i.d. N(0,1) (`gaussian`) or ±1 (`pm1`). Stored as the full symmetric matrix
//! A = J/√n with zero diagonal, row-major f64, so H = ½ σᵀAσ, the local field is h = Aσ, the
//! gain of flipping i is −2σ_i h_i, and after a flip of k the fields change by 2σ_k' A_{k·}
//! (one contiguous row: O(n), vectorisable).
//!
//! Row i's couplings J_ij (j > i) come from the stream `(instance, Couplings, i)`, drawn in
//! increasing j. Rows are generated in parallel; the result is identical to serial generation.
//!
//! Correlated copy at correlation 1 − ε (row i, j > i, drawn from `(instance, Perturbation, i)`):
//! - gaussian: J' = (1−ε)J + sqrt(1−(1−ε)²) G with G i.i.d. N(0,1);
//! - pm1: per coupling a uniform u and a fresh sign s are drawn; J' = s if u < ε, else J.
//!
//! Both give corr(J, J') = 1 − ε exactly. The draws do not depend on ε, so the copies for
//! different ε lie on one path.

use super::Couplings;
use crate::rng::{Id, Purpose, stream};
use rayon::prelude::*;

/// Revision of this sampler. Bump when a seed's numbers change.
pub const REVISION: u32 = 1;

/// Peak bytes of a dense SK instance of size n: the n×n f64 matrix plus O(n) work space.
pub fn instance_bytes(n: u64) -> u128 {
    let n = n as u128;
    8 * n * n + 64 * n
}

/// Dense symmetric coupling matrix A = J/√n, zero diagonal.
pub struct Dense {
    n: usize,
    a: Vec<f64>,
}

struct SendPtr(*mut f64);
unsafe impl Send for SendPtr {}
unsafe impl Sync for SendPtr {}

/// Samples the instance (ε = 0) or its correlated copy (ε > 0).
pub fn sample(n: usize, couplings: Couplings, instance: &Id, epsilon: f64) -> Dense {
    sample_weighted(n, couplings, 0.5, instance, epsilon)
}

/// The p = 2 term of a mixture with weight c2 = c_2²: A = sqrt(2·c2)·J/√n (c2 = 1/2 is SK,
/// bit for bit: sqrt(1) = 1 exactly).
pub fn sample_weighted(
    n: usize,
    couplings: Couplings,
    c2: f64,
    instance: &Id,
    epsilon: f64,
) -> Dense {
    let mut a = vec![0.0f64; n * n];
    let scale = (2.0 * c2).sqrt() / (n as f64).sqrt();
    let keep = 1.0 - epsilon;
    let fresh = (epsilon * (2.0 - epsilon)).sqrt();
    a.par_chunks_mut(n).enumerate().for_each(|(i, row)| {
        let mut js = stream(instance, Purpose::Couplings, i as u64);
        let upper = &mut row[i + 1..];
        super::draw(&mut js, couplings, upper);
        if epsilon > 0.0 {
            let mut gs = stream(instance, Purpose::Perturbation, i as u64);
            super::perturb(&mut gs, couplings, keep, fresh, epsilon, upper);
        }
        for x in upper.iter_mut() {
            *x *= scale;
        }
    });
    // Mirror the upper triangle into the lower one. Row i writes only a[i][j] for j < i and
    // reads only a[j][i] for j < i (upper triangle), so rows are independent.
    let p = SendPtr(a.as_mut_ptr());
    (0..n).into_par_iter().for_each(|i| {
        let p = &p;
        for j in 0..i {
            // SAFETY: (i, j) with j < i is in the lower triangle, written only by row i;
            // (j, i) is in the upper triangle, which no task writes in this pass.
            unsafe {
                *p.0.add(i * n + j) = *p.0.add(j * n + i);
            }
        }
    });
    Dense { n, a }
}

impl Dense {
    /// Builds an instance from an explicit coupling matrix J (full, symmetric, zero diagonal;
    /// entries before the 1/√n scaling). For tests and tools.
    pub fn from_couplings(n: usize, j: &[f64]) -> Dense {
        assert_eq!(j.len(), n * n);
        let scale = 1.0 / (n as f64).sqrt();
        Dense {
            n,
            a: j.iter().map(|x| x * scale).collect(),
        }
    }

    pub fn n(&self) -> usize {
        self.n
    }

    /// Row i of A = J/√n.
    #[inline(always)]
    pub fn row(&self, i: usize) -> &[f64] {
        &self.a[i * self.n..(i + 1) * self.n]
    }

    /// Local fields h = Aσ.
    pub fn fields(&self, s: &[i8], h: &mut [f64]) {
        for (i, hi) in h.iter_mut().enumerate() {
            *hi = dot_signs(self.row(i), s);
        }
    }

    /// y = A x, reading only the upper triangle, four rows at a time: rows i..i+4 add their
    /// parts right of the 4×4 diagonal block to y_i..y_{i+3} (dot products) and x_i..x_{i+3}
    /// times those parts to y_j, j ≥ i + 4, in one pass ([`crate::kernels::sym4`]); the
    /// diagonal block and the last n mod 4 rows are summed in a fixed scalar order. Half the
    /// memory traffic of a full product; deterministic.
    pub fn matvec(&self, x: &[f64], y: &mut [f64]) {
        let n = self.n;
        y.iter_mut().for_each(|v| *v = 0.0);
        let mut i = 0;
        while i + 4 <= n {
            self.add_block(i, i + 4, x, y);
            let rows = [
                &self.row(i)[i + 4..],
                &self.row(i + 1)[i + 4..],
                &self.row(i + 2)[i + 4..],
                &self.row(i + 3)[i + 4..],
            ];
            let c = [x[i], x[i + 1], x[i + 2], x[i + 3]];
            let (head, tail) = y.split_at_mut(i + 4);
            let next = if i + 8 <= n {
                [
                    &self.row(i + 4)[i + 8..],
                    &self.row(i + 5)[i + 8..],
                    &self.row(i + 6)[i + 8..],
                    &self.row(i + 7)[i + 8..],
                ]
            } else {
                [&[][..]; 4]
            };
            let s = crate::kernels::sym4(rows, &x[i + 4..], tail, c, next);
            for r in 0..4 {
                head[i + r] += s[r];
            }
            i += 4;
        }
        self.add_block(i, n, x, y);
    }

    /// The pairs lo ≤ a < b < hi of a symmetric product, in a fixed scalar order.
    fn add_block(&self, lo: usize, hi: usize, x: &[f64], y: &mut [f64]) {
        for a in lo..hi {
            for b in a + 1..hi {
                let v = self.a[a * self.n + b];
                y[a] += v * x[b];
                y[b] += v * x[a];
            }
        }
    }

    /// H(x) = ½ xᵀAx for a real point, writing ∇H(x) = Ax into `g`.
    pub fn value_grad(&self, x: &[f64], g: &mut [f64]) -> f64 {
        self.matvec(x, g);
        0.5 * dot(x, g)
    }

    /// H(σ) = ½ σᵀAσ, from scratch, summed in a fixed order.
    pub fn energy(&self, s: &[i8]) -> f64 {
        let mut e = 0.0;
        for (i, &si) in s.iter().enumerate() {
            e += si as f64 * dot_signs(self.row(i), s);
        }
        0.5 * e
    }

    /// Flips spin k in `s` and updates the fields: h += 2 σ_k' A_{k·}.
    #[inline(always)]
    pub fn flip(&self, s: &mut [i8], h: &mut [f64], k: usize) {
        s[k] = -s[k];
        let c = 2.0 * s[k] as f64;
        crate::kernels::axpy(h, c, self.row(k));
    }
}

pub(crate) use crate::kernels::{dot, dot_signs};

impl super::SpinModel for Dense {
    fn n(&self) -> usize {
        self.n
    }
    /// A quadratic form: H(−σ) = H(σ).
    fn symmetric(&self) -> bool {
        true
    }
    fn fields(&self, s: &[i8], h: &mut [f64]) {
        Dense::fields(self, s, h)
    }
    fn energy(&self, s: &[i8]) -> f64 {
        Dense::energy(self, s)
    }
    #[inline(always)]
    fn flip(&self, s: &mut [i8], h: &mut [f64], k: usize) {
        Dense::flip(self, s, h, k)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn inst(b: u8) -> Id {
        [b; 32]
    }

    /// J_ij recovered from A (undo the 1/√n scaling).
    fn coupling(d: &Dense, i: usize, j: usize) -> f64 {
        d.row(i)[j] * (d.n as f64).sqrt()
    }

    #[test]
    fn symmetric_zero_diagonal() {
        let d = sample(37, Couplings::Gaussian, &inst(1), 0.0);
        for i in 0..37 {
            assert_eq!(d.row(i)[i], 0.0);
            for j in 0..37 {
                assert_eq!(d.row(i)[j], d.row(j)[i]);
            }
        }
    }

    /// Row generation in parallel equals serial generation from the documented streams.
    #[test]
    fn parallel_equals_serial_rows() {
        let n = 50;
        let scale = 1.0 / (n as f64).sqrt();
        let d = sample(n, Couplings::Gaussian, &inst(2), 0.0);
        for i in 0..n {
            let mut s = stream(&inst(2), Purpose::Couplings, i as u64);
            for j in i + 1..n {
                let expected = s.normal() * scale;
                assert_eq!(d.row(i)[j].to_bits(), expected.to_bits(), "({i},{j})");
                assert_eq!(d.row(j)[i].to_bits(), expected.to_bits(), "({j},{i})");
            }
        }
    }

    #[test]
    fn pm1_entries() {
        let n = 20;
        let d = sample(n, Couplings::Pm1, &inst(3), 0.0);
        for i in 0..n {
            for j in 0..n {
                if i != j {
                    assert!((coupling(&d, i, j).abs() - 1.0).abs() < 1e-12);
                }
            }
        }
    }

    /// Energy from scratch, energy from fields, and brute force Σ_{i<j} agree; flips keep the
    /// fields equal to Aσ up to rounding (tolerance: n ε_mach per update, common practice).
    #[test]
    fn energy_fields_and_flips_agree() {
        let n = 64;
        let d = sample(n, Couplings::Gaussian, &inst(4), 0.0);
        let mut r = stream(&inst(9), Purpose::Algorithm, 0);
        let mut s: Vec<i8> = (0..n).map(|_| r.sign() as i8).collect();
        let mut brute = 0.0;
        for i in 0..n {
            for j in i + 1..n {
                brute += d.row(i)[j] * (s[i] * s[j]) as f64;
            }
        }
        assert!((d.energy(&s) - brute).abs() < 1e-10);
        let mut h = vec![0.0; n];
        d.fields(&s, &mut h);
        for _ in 0..500 {
            let k = r.below(n as u64) as usize;
            let before = d.energy(&s);
            let gain = -2.0 * s[k] as f64 * h[k];
            d.flip(&mut s, &mut h, k);
            assert!((d.energy(&s) - before - gain).abs() < 1e-9);
        }
        let mut fresh = vec![0.0; n];
        d.fields(&s, &mut fresh);
        for (a, b) in h.iter().zip(&fresh) {
            assert!((a - b).abs() < 1e-11, "{a} vs {b}");
        }
    }

    /// The correlated copy has corr(J, J') = 1 − ε. With m = n(n−1)/2 couplings, the sample
    /// correlation has standard error ≤ 1/sqrt(m); tolerance 5 SE.
    #[test]
    fn correlated_copy_has_the_right_correlation() {
        let n = 400;
        let m = (n * (n - 1) / 2) as f64;
        for couplings in [Couplings::Gaussian, Couplings::Pm1] {
            let d0 = sample(n, couplings, &inst(5), 0.0);
            for eps in [0.01, 0.2, 0.7] {
                let d1 = sample(n, couplings, &inst(5), eps);
                let (mut sxy, mut sxx, mut syy) = (0.0, 0.0, 0.0);
                for i in 0..n {
                    for j in i + 1..n {
                        let (x, y) = (coupling(&d0, i, j), coupling(&d1, i, j));
                        sxy += x * y;
                        sxx += x * x;
                        syy += y * y;
                    }
                }
                let corr = sxy / (sxx * syy).sqrt();
                assert!(
                    (corr - (1.0 - eps)).abs() < 5.0 / m.sqrt(),
                    "{couplings:?} eps {eps}: corr {corr}"
                );
            }
        }
    }

    /// Value stability: the first couplings of a seeded instance are pinned.
    #[test]
    fn pinned_first_couplings() {
        let d = sample(4, Couplings::Gaussian, &inst(6), 0.0);
        let got: Vec<u64> = [(0, 1), (0, 2), (0, 3), (1, 2)]
            .iter()
            .map(|&(i, j)| d.row(i)[j].to_bits())
            .collect();
        assert_eq!(got, PINNED);
    }
    const PINNED: [u64; 4] = [
        13826087312658413982,
        13824288547858821693,
        13804665198987349707,
        13830222647538005883,
    ];
}
