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

/// How the couplings of an SK instance are held (`[model] storage`), a part of the cell key
/// when not the default.
/// - `F64`: the full symmetric matrix in f64 (8n² bytes), each row contiguous;
/// - `F32`: one triangle in f32 (2n(n−1) bytes): the f64 couplings sampled exactly as for
///   `F64`, then rounded once to f32; kernels read f32 and accumulate in f64. Its instance is
///   the f64 one rounded, so its numbers differ from f64 storage by that rounding;
/// - `Implicit`: no matrix: every coupling recomputed from a counter-based generator keyed by
///   (instance, i, j) ([`super::implicit`]); O(n) memory, n²/2 generations per product. A
///   different instance of the same law as the stored ones.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub enum Storage {
    #[default]
    F64,
    F32,
    Implicit,
}

impl Storage {
    /// The names written in `storage = "…"`, in variant order.
    pub const NAMES: [&'static str; 3] = ["f64", "f32", "implicit"];

    pub fn name(self) -> &'static str {
        Self::NAMES[self as usize]
    }

    pub fn from_index(i: usize) -> Storage {
        [Storage::F64, Storage::F32, Storage::Implicit][i]
    }
}

/// Peak bytes of a dense SK instance of size n held as f64: the n×n matrix plus O(n) work space.
pub fn instance_bytes(n: u64) -> u128 {
    instance_bytes_as(Storage::F64, n)
}

/// Peak bytes of a dense SK instance of size n under `storage`: the couplings plus work space
/// (f32: one row in f64 per sampling thread; implicit: the product's [`BLOCKS`] partial sums).
pub fn instance_bytes_as(storage: Storage, n: u64) -> u128 {
    let n = n as u128;
    match storage {
        Storage::F64 => 8 * n * n + 64 * n,
        Storage::F32 => 4 * n * n.saturating_sub(1) / 2 + 64 * n + 8 * n * 64,
        Storage::Implicit => 8 * n * BLOCKS as u128 + 64 * n,
    }
}

/// Dense symmetric coupling matrix A = J/√n, zero diagonal, in one of three storages.
pub struct Dense {
    n: usize,
    store: Store,
}

enum Store {
    /// Row-major n×n.
    Full(Vec<f64>),
    /// The upper triangle, row by row: row i's entries j = i+1..n from [`upper_offset`]`(n, i)`.
    Upper(Vec<f32>),
    /// No storage.
    Implicit(super::implicit::Generator),
}

/// Where row i's upper part (j = i+1..n) starts in the packed triangle.
#[inline(always)]
fn upper_offset(n: usize, i: usize) -> usize {
    i * (2 * n - i - 1) / 2
}

/// Fixed blocks of rows of an implicit product (each a partial sum, added in block order), so
/// the result does not depend on the thread count.
pub const BLOCKS: usize = 64;

use super::SendPtr;

/// Samples the instance (ε = 0) or its correlated copy (ε > 0), held as f64.
pub fn sample(n: usize, couplings: Couplings, instance: &Id, epsilon: f64) -> Dense {
    sample_weighted(n, couplings, 0.5, instance, epsilon)
}

/// Samples the instance or its copy under `storage` (see [`Storage`]).
pub fn sample_as(
    storage: Storage,
    n: usize,
    couplings: Couplings,
    instance: &Id,
    epsilon: f64,
) -> Dense {
    sample_weighted_as(storage, n, couplings, 0.5, instance, epsilon)
}

/// The p = 2 term of a mixture with weight c2 = c_2² under `storage`: [`sample_weighted`]'s
/// matrix held in full (f64), rounded once into one f32 triangle, or recomputed on demand by
/// the implicit generator with the same scale sqrt(2·c2)/√n (c2 = 1/2 is SK's bit for bit).
pub fn sample_weighted_as(
    storage: Storage,
    n: usize,
    couplings: Couplings,
    c2: f64,
    instance: &Id,
    epsilon: f64,
) -> Dense {
    match storage {
        Storage::F64 => sample_weighted(n, couplings, c2, instance, epsilon),
        Storage::F32 => {
            let mut t = vec![0.0f32; n * n.saturating_sub(1) / 2];
            crate::kernels::huge_pages(&mut t);
            let mut parts: Vec<&mut [f32]> = Vec::with_capacity(n);
            let mut rest = &mut t[..];
            for i in 0..n {
                let (row, tail) = rest.split_at_mut(n - 1 - i);
                parts.push(row);
                rest = tail;
            }
            parts.into_par_iter().enumerate().for_each(|(i, out)| {
                let mut row = vec![0.0f64; n - 1 - i];
                upper_row(&mut row, i, couplings, c2, instance, epsilon, n);
                for (o, v) in out.iter_mut().zip(&row) {
                    *o = *v as f32;
                }
            });
            Dense {
                n,
                store: Store::Upper(t),
            }
        }
        Storage::Implicit => Dense {
            n,
            store: Store::Implicit(super::implicit::Generator::new(
                couplings,
                instance,
                epsilon,
                (2.0 * c2).sqrt() / (n as f64).sqrt(),
            )),
        },
    }
}

/// Row i's upper part (j > i) of the f64 sampler: drawn, perturbed, scaled.
fn upper_row(
    upper: &mut [f64],
    i: usize,
    couplings: Couplings,
    c2: f64,
    instance: &Id,
    epsilon: f64,
    n: usize,
) {
    let scale = (2.0 * c2).sqrt() / (n as f64).sqrt();
    let keep = 1.0 - epsilon;
    let fresh = (epsilon * (2.0 - epsilon)).sqrt();
    let mut js = stream(instance, Purpose::Couplings, i as u64);
    super::draw(&mut js, couplings, upper);
    if epsilon > 0.0 {
        let mut gs = stream(instance, Purpose::Perturbation, i as u64);
        super::perturb(&mut gs, couplings, keep, fresh, epsilon, upper);
    }
    for x in upper.iter_mut() {
        *x *= scale;
    }
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
    crate::kernels::huge_pages(&mut a);
    a.par_chunks_mut(n).enumerate().for_each(|(i, row)| {
        upper_row(&mut row[i + 1..], i, couplings, c2, instance, epsilon, n);
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
    Dense {
        n,
        store: Store::Full(a),
    }
}

impl Dense {
    /// Builds an instance from an explicit coupling matrix J (full, symmetric, zero diagonal;
    /// entries before the 1/√n scaling). For tests and tools.
    pub fn from_couplings(n: usize, j: &[f64]) -> Dense {
        assert_eq!(j.len(), n * n);
        let scale = 1.0 / (n as f64).sqrt();
        Dense {
            n,
            store: Store::Full(j.iter().map(|x| x * scale).collect()),
        }
    }

    pub fn n(&self) -> usize {
        self.n
    }

    /// How the couplings are held.
    pub fn storage(&self) -> Storage {
        match self.store {
            Store::Full(_) => Storage::F64,
            Store::Upper(_) => Storage::F32,
            Store::Implicit(_) => Storage::Implicit,
        }
    }

    /// Row i of A = J/√n, when the matrix is held in full (f64 storage).
    #[inline(always)]
    pub fn full_row(&self, i: usize) -> Option<&[f64]> {
        match &self.store {
            Store::Full(a) => Some(&a[i * self.n..(i + 1) * self.n]),
            _ => None,
        }
    }

    #[inline(always)]
    fn row(&self, i: usize) -> &[f64] {
        self.full_row(i).expect("f64 storage")
    }

    /// Row i's upper part (j = i+1..n) of the f32 triangle.
    #[inline(always)]
    fn upper(t: &[f32], n: usize, i: usize) -> &[f32] {
        let o = upper_offset(n, i);
        &t[o..o + (n - 1 - i)]
    }

    /// Calls f(j, A_kj) for every j ≠ k of the f32 triangle, in increasing j: column k of the
    /// rows above (one entry per row, its index advanced by the row lengths, no per-entry
    /// offset arithmetic), then row k's own contiguous upper part. Entries widened exactly.
    #[inline(always)]
    fn visit_row(t: &[f32], n: usize, k: usize, mut f: impl FnMut(usize, f64)) {
        // Entry (j, k) for j < k sits at upper_offset(n, j) + k − j − 1; from row j to j + 1
        // that moves by the length of row j's upper part less one, n − 2 − j.
        let mut at = k.wrapping_sub(1);
        for j in 0..k {
            f(j, t[at] as f64);
            at = at.wrapping_add(n - 2 - j);
        }
        for (m, v) in Self::upper(t, n, k).iter().enumerate() {
            f(k + 1 + m, *v as f64);
        }
    }

    /// A_ij in any storage (f32 entries widened exactly).
    pub fn coupling(&self, i: usize, j: usize) -> f64 {
        let n = self.n;
        match &self.store {
            Store::Full(a) => a[i * n + j],
            Store::Upper(t) => match i.cmp(&j) {
                std::cmp::Ordering::Equal => 0.0,
                std::cmp::Ordering::Less => t[upper_offset(n, i) + j - i - 1] as f64,
                std::cmp::Ordering::Greater => t[upper_offset(n, j) + i - j - 1] as f64,
            },
            Store::Implicit(g) => g.a(i, j),
        }
    }

    /// Writes row i of A into `out` (length n), in any storage.
    pub fn row_into(&self, i: usize, out: &mut [f64]) {
        let n = self.n;
        match &self.store {
            Store::Full(_) => out.copy_from_slice(self.row(i)),
            Store::Upper(t) => {
                out[i] = 0.0;
                Self::visit_row(t, n, i, |j, a| out[j] = a);
            }
            Store::Implicit(g) => out.par_chunks_mut(CHUNK).enumerate().for_each(|(c, o)| {
                for (k, v) in o.iter_mut().enumerate() {
                    *v = g.a(i, c * CHUNK + k);
                }
            }),
        }
    }

    /// Local fields h = Aσ.
    pub fn fields(&self, s: &[i8], h: &mut [f64]) {
        match &self.store {
            Store::Full(_) => {
                for (i, hi) in h.iter_mut().enumerate() {
                    *hi = dot_signs(self.row(i), s);
                }
            }
            _ => {
                let x: Vec<f64> = s.iter().map(|&v| v as f64).collect();
                self.matvec(&x, h);
            }
        }
    }

    /// y = A x. f64: reading only the upper triangle, four rows at a time: rows i..i+4 add
    /// their parts right of the 4×4 diagonal block to y_i..y_{i+3} (dot products) and
    /// x_i..x_{i+3} times those parts to y_j, j ≥ i + 4, in one pass
    /// ([`crate::kernels::sym4`]); the diagonal block and the last n mod 4 rows are summed in a
    /// fixed scalar order. Half the memory traffic of a full product; deterministic. f32: the
    /// same pattern, eight rows at a time, on the packed triangle
    /// ([`crate::kernels::sym_f32`]). Implicit: [`BLOCKS`]
    /// fixed blocks of rows in parallel, each generating its pairs once into its own partial
    /// sum, added in block order.
    pub fn matvec(&self, x: &[f64], y: &mut [f64]) {
        let n = self.n;
        y.iter_mut().for_each(|v| *v = 0.0);
        match &self.store {
            Store::Full(_) => {
                // Row i + r's entries from column i + 4 on.
                let part = |i: usize| -> [&[f64]; 4] {
                    std::array::from_fn(|r| &self.row(i + r)[i + 4..])
                };
                self.blocked(x, y, part, crate::kernels::sym4);
            }
            Store::Upper(t) => {
                const R: usize = crate::kernels::ROWS32;
                // Row i + r's entries from column i + R on start R − 1 − r places into its
                // packed part.
                let part = |i: usize| -> [&[f32]; R] {
                    std::array::from_fn(|r| &Self::upper(t, n, i + r)[R - 1 - r..])
                };
                self.blocked(x, y, part, crate::kernels::sym_f32);
            }
            Store::Implicit(g) => {
                let bounds = blocks(n);
                let parts: Vec<Vec<f64>> = bounds
                    .par_windows(2)
                    .map(|w| {
                        let mut part = vec![0.0f64; n];
                        for i in w[0]..w[1] {
                            let xi = x[i];
                            let mut acc = 0.0;
                            for j in i + 1..n {
                                let a = g.a(i, j);
                                acc += a * x[j];
                                part[j] += a * xi;
                            }
                            part[i] += acc;
                        }
                        part
                    })
                    .collect();
                y.par_chunks_mut(CHUNK).enumerate().for_each(|(c, yc)| {
                    for part in &parts {
                        for (k, v) in yc.iter_mut().enumerate() {
                            *v += part[c * CHUNK + k];
                        }
                    }
                });
            }
        }
    }

    /// The stored symmetric product, R rows per pass: the R×R diagonal block in a fixed scalar
    /// order, then `kernel` on the rows' parts right of it (`part(i)`: rows i..i+R from column
    /// i + R on), given the next block's parts to prefetch; the last n mod R rows scalar.
    fn blocked<'a, T: 'a, const R: usize>(
        &'a self,
        x: &[f64],
        y: &mut [f64],
        part: impl Fn(usize) -> [&'a [T]; R],
        kernel: impl Fn([&'a [T]; R], &[f64], &mut [f64], [f64; R], [&'a [T]; R]) -> [f64; R],
    ) {
        let n = self.n;
        let mut i = 0;
        while i + R <= n {
            self.add_block(i, i + R, x, y);
            let c: [f64; R] = std::array::from_fn(|r| x[i + r]);
            let (head, tail) = y.split_at_mut(i + R);
            let next = if i + 2 * R <= n {
                part(i + R)
            } else {
                [&[][..]; R]
            };
            let s = kernel(part(i), &x[i + R..], tail, c, next);
            for r in 0..R {
                head[i + r] += s[r];
            }
            i += R;
        }
        self.add_block(i, n, x, y);
    }

    /// The pairs lo ≤ a < b < hi of a symmetric product, in a fixed scalar order.
    fn add_block(&self, lo: usize, hi: usize, x: &[f64], y: &mut [f64]) {
        for a in lo..hi {
            for b in a + 1..hi {
                let v = self.coupling(a, b);
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
        match &self.store {
            Store::Full(_) => {
                let mut e = 0.0;
                for (i, &si) in s.iter().enumerate() {
                    e += si as f64 * dot_signs(self.row(i), s);
                }
                0.5 * e
            }
            _ => {
                let mut h = vec![0.0; self.n];
                self.fields(s, &mut h);
                0.5 * dot_signs(&h, s)
            }
        }
    }

    /// Flips spin k in `s` and updates the fields: h += 2 σ_k' A_{k·}. f64: one contiguous
    /// row. f32: row k's upper part is contiguous, its lower part (column k of the triangle)
    /// strided. Implicit: n − 1 couplings generated, in parallel chunks for large n. Every
    /// update is elementwise, so the result does not depend on the split.
    #[inline(always)]
    pub fn flip(&self, s: &mut [i8], h: &mut [f64], k: usize) {
        s[k] = -s[k];
        let c = 2.0 * s[k] as f64;
        let n = self.n;
        match &self.store {
            Store::Full(a) => crate::kernels::axpy(h, c, &a[k * n..(k + 1) * n]),
            Store::Upper(t) => Self::visit_row(t, n, k, |j, a| h[j] += c * a),
            Store::Implicit(g) => {
                let update = |base: usize, hc: &mut [f64]| {
                    for (m, hj) in hc.iter_mut().enumerate() {
                        *hj += c * g.a(k, base + m);
                    }
                };
                if n >= 4 * CHUNK {
                    h.par_chunks_mut(CHUNK)
                        .enumerate()
                        .for_each(|(b, hc)| update(b * CHUNK, hc));
                } else {
                    update(0, h);
                }
            }
        }
    }
}

/// Elements per parallel chunk of the implicit generator's elementwise loops.
const CHUNK: usize = 4096;

/// [`BLOCKS`] row ranges of about equal triangle area (row i has n − 1 − i pairs): bounds
/// b_0 = 0 ≤ … ≤ b_BLOCKS = n, fixed by n alone.
fn blocks(n: usize) -> Vec<usize> {
    let total = (n as f64) * (n as f64 - 1.0) / 2.0;
    let mut b = vec![0usize];
    let mut done = 0.0;
    let mut i = 0usize;
    for k in 1..BLOCKS {
        let target = total * k as f64 / BLOCKS as f64;
        while i < n && done < target {
            done += (n - 1 - i) as f64;
            i += 1;
        }
        b.push(i);
    }
    b.push(n);
    b
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

    /// The f32 triangle is the f64 instance rounded once, entry by entry, for the instance and
    /// its correlated copy.
    #[test]
    fn f32_storage_rounds_the_f64_instance() {
        let n = 37;
        for eps in [0.0, 0.3] {
            let d = sample(n, Couplings::Gaussian, &inst(8), eps);
            let t = sample_as(Storage::F32, n, Couplings::Gaussian, &inst(8), eps);
            assert_eq!(t.storage(), Storage::F32);
            for i in 0..n {
                for j in 0..n {
                    let want = (d.row(i)[j] as f32) as f64;
                    assert_eq!(t.coupling(i, j).to_bits(), want.to_bits(), "({i},{j})");
                }
            }
        }
    }

    /// Every storage's operations agree with the plain sums over its own couplings (read
    /// through `coupling`): the product, fields, energy, row copies and flips. Tolerance
    /// n·ε_mach relative to the sums' size, common practice for reordered sums.
    #[test]
    fn every_storage_computes_the_same_operations() {
        for n in [1usize, 5, 33, 70] {
            for storage in [Storage::F64, Storage::F32, Storage::Implicit] {
                for couplings in [Couplings::Gaussian, Couplings::Pm1] {
                    let d = sample_as(storage, n, couplings, &inst(9), 0.1);
                    let a = |i: usize, j: usize| d.coupling(i, j);
                    for i in 0..n {
                        assert_eq!(a(i, i), 0.0);
                        for j in 0..n {
                            assert_eq!(a(i, j).to_bits(), a(j, i).to_bits());
                        }
                        let mut row = vec![f64::NAN; n];
                        d.row_into(i, &mut row);
                        for (j, v) in row.iter().enumerate() {
                            assert_eq!(v.to_bits(), a(i, j).to_bits());
                        }
                    }
                    let mut r = stream(&inst(10), Purpose::Algorithm, n as u64);
                    let x: Vec<f64> = (0..n).map(|_| r.normal()).collect();
                    let mut y = vec![0.0; n];
                    d.matvec(&x, &mut y);
                    let tol = 1e-13 * (n as f64 + 1.0);
                    for (i, yi) in y.iter().enumerate() {
                        let want: f64 = (0..n).map(|j| a(i, j) * x[j]).sum();
                        assert!((yi - want).abs() < tol, "{storage:?} n={n}: {yi} vs {want}");
                    }
                    let mut s: Vec<i8> = (0..n).map(|_| r.sign() as i8).collect();
                    let mut h = vec![0.0; n];
                    d.fields(&s, &mut h);
                    let brute: f64 = (0..n)
                        .flat_map(|i| (i + 1..n).map(move |j| (i, j)))
                        .map(|(i, j)| a(i, j) * (s[i] * s[j]) as f64)
                        .sum();
                    assert!((d.energy(&s) - brute).abs() < tol * n as f64);
                    for _ in 0..3 * n {
                        let k = r.below(n as u64) as usize;
                        d.flip(&mut s, &mut h, k);
                    }
                    let mut fresh = vec![0.0; n];
                    d.fields(&s, &mut fresh);
                    for (u, v) in h.iter().zip(&fresh) {
                        assert!((u - v).abs() < tol * n as f64, "{storage:?}: {u} vs {v}");
                    }
                }
            }
        }
    }

    /// The implicit product's blocks cover the rows once, in order, for any n.
    #[test]
    fn implicit_blocks_cover_the_rows() {
        for n in [0usize, 1, 2, 63, 64, 65, 1000, 4097] {
            let b = blocks(n);
            assert_eq!(b.len(), BLOCKS + 1);
            assert_eq!((b[0], b[BLOCKS]), (0, n));
            assert!(b.windows(2).all(|w| w[0] <= w[1]), "{b:?}");
        }
    }

    /// Value stability of the compact storages: the f32 triangle's first entries (the f64
    /// pins rounded) and the implicit instance's (the generator's, scaled by 1/√n).
    #[test]
    fn pinned_first_couplings_of_each_storage() {
        let pairs = [(0, 1), (0, 2), (0, 3), (1, 2)];
        let t = sample_as(Storage::F32, 4, Couplings::Gaussian, &inst(6), 0.0);
        for (&(i, j), &bits) in pairs.iter().zip(&PINNED) {
            let want = (f64::from_bits(bits) as f32) as f64;
            assert_eq!(t.coupling(i, j).to_bits(), want.to_bits());
        }
        let m = sample_as(Storage::Implicit, 4, Couplings::Gaussian, &inst(6), 0.0);
        let got: Vec<u64> = pairs
            .iter()
            .map(|&(i, j)| m.coupling(i, j).to_bits())
            .collect();
        assert_eq!(got, PINNED_IMPLICIT, "{got:?}");
    }
    const PINNED_IMPLICIT: [u64; 4] = [
        4608507290665320466,
        13826895822758101086,
        13831667471158523080,
        4604494267944878170,
    ];

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
