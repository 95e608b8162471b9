//! The dense inner loops every dense model and algorithm shares: dot products (f64·f64 and
//! f64·±1), the field update y += c·x, and four rows of a symmetric product.
//!
//! Determinism: each reduction uses [`LANES`] partial sums in a fixed pattern (element k goes
//! to partial sum k mod LANES; the partial sums are combined in a fixed tree, then the tail),
//! so the result is the same bits whatever instruction set runs it. Rust never reassociates or
//! contracts floating-point operations, so the AVX2 copies below (same source, compiled with
//! `target_feature(enable = "avx2")` and chosen at run time) give identical results to the
//! baseline x86-64 code; they are faster because four doubles fit a register and sixteen
//! partial sums hide the adder latency (measured: scripts/bench.sh).

// Index loops here state the summation pattern explicitly; iterator chains would hide it.
#![allow(clippy::needless_range_loop)]

/// Partial sums per reduction.
pub const LANES: usize = 16;

/// Revision of these kernels' arithmetic (the summation pattern). It enters the cache key of
/// every dense cell (see `ModelSpec::canon`): changing the pattern moves energies in the last
/// bits. 1: four partial sums; 2: sixteen.
pub const REVISION: u32 = 2;

#[inline(always)]
fn combine(acc: &[f64; LANES]) -> f64 {
    let mut a = *acc;
    let mut w = LANES;
    while w > 1 {
        w /= 2;
        for i in 0..w {
            a[i] += a[i + w];
        }
    }
    a[0]
}

#[inline(always)]
fn dot_plain(a: &[f64], b: &[f64]) -> f64 {
    let n = a.len().min(b.len());
    let (a, b) = (&a[..n], &b[..n]);
    let mut acc = [0.0f64; LANES];
    let ac = a.chunks_exact(LANES);
    let bc = b.chunks_exact(LANES);
    let mut tail = 0.0;
    for (&x, &y) in ac.remainder().iter().zip(bc.remainder()) {
        tail += x * y;
    }
    for (r, q) in ac.zip(bc) {
        let r: &[f64; LANES] = r.try_into().expect("chunk");
        let q: &[f64; LANES] = q.try_into().expect("chunk");
        for k in 0..LANES {
            acc[k] += r[k] * q[k];
        }
    }
    combine(&acc) + tail
}

#[inline(always)]
fn dot_signs_plain(a: &[f64], s: &[i8]) -> f64 {
    let n = a.len().min(s.len());
    let (a, s) = (&a[..n], &s[..n]);
    let mut acc = [0.0f64; LANES];
    let ac = a.chunks_exact(LANES);
    let sc = s.chunks_exact(LANES);
    let mut tail = 0.0;
    for (&x, &y) in ac.remainder().iter().zip(sc.remainder()) {
        tail += x * y as f64;
    }
    for (r, q) in ac.zip(sc) {
        let r: &[f64; LANES] = r.try_into().expect("chunk");
        let q: &[i8; LANES] = q.try_into().expect("chunk");
        for k in 0..LANES {
            acc[k] += r[k] * q[k] as f64;
        }
    }
    combine(&acc) + tail
}

/// Four rows of a symmetric product at once: for each row r, Σ_k a_r[k]·x[k] with four
/// partial sums (k mod 4, combined as (s0 + s2) + (s1 + s3), then the tail), and
/// y[k] += (c0·a0[k] + c1·a1[k]) + (c2·a2[k] + c3·a3[k]). x and y are read once for four rows.
#[inline(always)]
fn sym4_plain(a: [&[f64]; 4], x: &[f64], y: &mut [f64], c: [f64; 4]) -> [f64; 4] {
    let n = x.len().min(y.len());
    let full = n / 4 * 4;
    let mut acc = [[0.0f64; 4]; 4];
    for k0 in (0..full).step_by(4) {
        for l in 0..4 {
            let k = k0 + l;
            for r in 0..4 {
                acc[r][l] += a[r][k] * x[k];
            }
            y[k] += (c[0] * a[0][k] + c[1] * a[1][k]) + (c[2] * a[2][k] + c[3] * a[3][k]);
        }
    }
    let mut out = [0.0; 4];
    for r in 0..4 {
        let mut tail = 0.0;
        for k in full..n {
            tail += a[r][k] * x[k];
        }
        out[r] = ((acc[r][0] + acc[r][2]) + (acc[r][1] + acc[r][3])) + tail;
    }
    for k in full..n {
        y[k] += (c[0] * a[0][k] + c[1] * a[1][k]) + (c[2] * a[2][k] + c[3] * a[3][k]);
    }
    out
}

/// Rows of a symmetric product held in f32 (the `storage = "f32"` triangle), [`ROWS32`] at a
/// time, with fused multiply–adds (IEEE fma: one rounding, the same on every machine —
/// `f64::mul_add`): each entry widened exactly to f64; for each row r, four partial sums
/// s_l ← fma(a_r[k], x[k], s_l) over k ≡ l (mod 4), combined as (s0 + s2) + (s1 + s3), then
/// the tail by fma; and y[k] ← fma(a_7[k], c_7, … fma(a_0[k], c_0, y[k]) …), rows in order.
/// Eight rows share one pass over x and y (four left the product short of the memory's
/// bandwidth: x and y traffic, measured with scripts/bench.sh).
#[inline(always)]
fn sym_f32_plain(a: [&[f32]; ROWS32], x: &[f64], y: &mut [f64], c: [f64; ROWS32]) -> [f64; ROWS32] {
    let n = x.len().min(y.len());
    let full = n / 4 * 4;
    let w = |r: usize, k: usize| a[r][k] as f64;
    let upd = |yk: f64, k: usize| (0..ROWS32).fold(yk, |v, r| w(r, k).mul_add(c[r], v));
    let mut acc = [[0.0f64; 4]; ROWS32];
    for k0 in (0..full).step_by(4) {
        for l in 0..4 {
            let k = k0 + l;
            for r in 0..ROWS32 {
                acc[r][l] = w(r, k).mul_add(x[k], acc[r][l]);
            }
            y[k] = upd(y[k], k);
        }
    }
    let mut out = [0.0; ROWS32];
    for r in 0..ROWS32 {
        let mut s = (acc[r][0] + acc[r][2]) + (acc[r][1] + acc[r][3]);
        for k in full..n {
            s = w(r, k).mul_add(x[k], s);
        }
        out[r] = s;
    }
    for k in full..n {
        y[k] = upd(y[k], k);
    }
    out
}

/// Rows per pass of the f32 symmetric product.
pub const ROWS32: usize = 8;

#[inline(always)]
fn axpy_plain(y: &mut [f64], c: f64, x: &[f64]) {
    for (yi, &xi) in y.iter_mut().zip(x) {
        *yi += c * xi;
    }
}

#[cfg(target_arch = "x86_64")]
mod avx2 {
    //! The same arithmetic with explicit 256-bit operations: register j holds partial sums
    //! 4j..4j+3, each step is a separate multiply then add (no fused multiply–add), so every
    //! partial sum sees the same operations in the same order as the baseline code.
    use super::{LANES, PREFETCH_AHEAD, PREFETCH_AHEAD_F32, ROWS32, combine};
    use std::arch::x86_64::*;

    /// The sixteen partial sums held in four registers, in lane order.
    #[target_feature(enable = "avx2")]
    fn lanes(r: &[__m256d; 4]) -> [f64; LANES] {
        let mut acc = [0.0f64; LANES];
        for (j, rj) in r.iter().enumerate() {
            // SAFETY: acc has 16 entries; 4j + 3 < 16.
            unsafe { _mm256_storeu_pd(acc.as_mut_ptr().add(4 * j), *rj) };
        }
        acc
    }

    #[target_feature(enable = "avx2")]
    pub(super) fn dot(a: &[f64], b: &[f64]) -> f64 {
        let n = a.len().min(b.len());
        let full = n / LANES * LANES;
        let (pa, pb) = (a.as_ptr(), b.as_ptr());
        let mut r = [_mm256_setzero_pd(); 4];
        let mut k = 0;
        while k < full {
            for (j, rj) in r.iter_mut().enumerate() {
                // SAFETY: k + 4j + 3 < full ≤ n, within both slices.
                unsafe {
                    let x = _mm256_loadu_pd(pa.add(k + 4 * j));
                    let y = _mm256_loadu_pd(pb.add(k + 4 * j));
                    *rj = _mm256_add_pd(*rj, _mm256_mul_pd(x, y));
                }
            }
            k += LANES;
        }
        let acc = lanes(&r);
        let mut tail = 0.0;
        for i in full..n {
            tail += a[i] * b[i];
        }
        combine(&acc) + tail
    }

    #[target_feature(enable = "avx2")]
    pub(super) fn dot_signs(a: &[f64], s: &[i8]) -> f64 {
        let n = a.len().min(s.len());
        let full = n / LANES * LANES;
        let (pa, ps) = (a.as_ptr(), s.as_ptr());
        let mut r = [_mm256_setzero_pd(); 4];
        let mut k = 0;
        while k < full {
            for (j, rj) in r.iter_mut().enumerate() {
                // SAFETY: k + 4j + 3 < full ≤ n, within both slices; the 4-byte load is
                // unaligned-safe.
                unsafe {
                    let x = _mm256_loadu_pd(pa.add(k + 4 * j));
                    let b4 = (ps.add(k + 4 * j) as *const i32).read_unaligned();
                    let y = _mm256_cvtepi32_pd(_mm_cvtepi8_epi32(_mm_cvtsi32_si128(b4)));
                    *rj = _mm256_add_pd(*rj, _mm256_mul_pd(x, y));
                }
            }
            k += LANES;
        }
        let acc = lanes(&r);
        let mut tail = 0.0;
        for i in full..n {
            tail += a[i] * s[i] as f64;
        }
        combine(&acc) + tail
    }

    /// Prefetches element t of every row in `p` (rows of length n), or, past their ends,
    /// element t − n of the `next` rows that have one. A hint only: never changes a result.
    #[inline(always)]
    fn prefetch_rows<T, const HINT: i32>(p: &[*const T], next: &[&[T]], t: usize, n: usize) {
        if t < n {
            for r in p {
                // SAFETY: a prefetch of any address is harmless (wrapping_add: no UB).
                unsafe { _mm_prefetch::<HINT>(r.wrapping_add(t) as *const i8) };
            }
        } else {
            for r in next {
                if t - n < r.len() {
                    // SAFETY: as above.
                    unsafe { _mm_prefetch::<HINT>(r.as_ptr().wrapping_add(t - n) as *const i8) };
                }
            }
        }
    }

    #[target_feature(enable = "avx2")]
    pub(super) fn sym4(
        a: [&[f64]; 4],
        x: &[f64],
        y: &mut [f64],
        c: [f64; 4],
        next: [&[f64]; 4],
    ) -> [f64; 4] {
        let n = x.len().min(y.len());
        assert!(a.iter().all(|r| r.len() >= n));
        let full = n / 4 * 4;
        let (px, py) = (x.as_ptr(), y.as_mut_ptr());
        let p = [a[0].as_ptr(), a[1].as_ptr(), a[2].as_ptr(), a[3].as_ptr()];
        let cv = [
            _mm256_set1_pd(c[0]),
            _mm256_set1_pd(c[1]),
            _mm256_set1_pd(c[2]),
            _mm256_set1_pd(c[3]),
        ];
        let mut acc = [_mm256_setzero_pd(); 4];
        let mut k = 0;
        while k < full {
            if k % 8 == 0 {
                // One prefetch per cache line and row, PREFETCH_AHEAD doubles ahead: the
                // hardware prefetcher alone keeps too few lines in flight on four streams,
                // and it cannot know where the next block's rows start. Near the rows' ends
                // the prefetches run on into `next` (never into the parts of rows the
                // product does not read). Hints only: results are unchanged.
                prefetch_rows::<_, _MM_HINT_T0>(&p, &next, k + PREFETCH_AHEAD, n);
            }
            // SAFETY: k + 3 < full ≤ n ≤ every slice's length (asserted above).
            unsafe {
                let xv = _mm256_loadu_pd(px.add(k));
                let a0 = _mm256_loadu_pd(p[0].add(k));
                let a1 = _mm256_loadu_pd(p[1].add(k));
                let a2 = _mm256_loadu_pd(p[2].add(k));
                let a3 = _mm256_loadu_pd(p[3].add(k));
                acc[0] = _mm256_add_pd(acc[0], _mm256_mul_pd(a0, xv));
                acc[1] = _mm256_add_pd(acc[1], _mm256_mul_pd(a1, xv));
                acc[2] = _mm256_add_pd(acc[2], _mm256_mul_pd(a2, xv));
                acc[3] = _mm256_add_pd(acc[3], _mm256_mul_pd(a3, xv));
                let s01 = _mm256_add_pd(_mm256_mul_pd(cv[0], a0), _mm256_mul_pd(cv[1], a1));
                let s23 = _mm256_add_pd(_mm256_mul_pd(cv[2], a2), _mm256_mul_pd(cv[3], a3));
                let yv = _mm256_loadu_pd(py.add(k));
                _mm256_storeu_pd(py.add(k), _mm256_add_pd(yv, _mm256_add_pd(s01, s23)));
            }
            k += 4;
        }
        let mut out = [0.0; 4];
        for r in 0..4 {
            let mut l = [0.0f64; 4];
            // SAFETY: l has four entries.
            unsafe { _mm256_storeu_pd(l.as_mut_ptr(), acc[r]) };
            let mut tail = 0.0;
            for i in full..n {
                tail += a[r][i] * x[i];
            }
            out[r] = ((l[0] + l[2]) + (l[1] + l[3])) + tail;
        }
        for i in full..n {
            y[i] += (c[0] * a[0][i] + c[1] * a[1][i]) + (c[2] * a[2][i] + c[3] * a[3][i]);
        }
        out
    }

    /// [`super::sym_f32_plain`]'s arithmetic: four f32 entries widened to four doubles
    /// (exact), the fused multiply–adds in the same order.
    #[target_feature(enable = "avx2,fma")]
    pub(super) fn sym_f32(
        a: [&[f32]; ROWS32],
        x: &[f64],
        y: &mut [f64],
        c: [f64; ROWS32],
        next: [&[f32]; ROWS32],
    ) -> [f64; ROWS32] {
        let n = x.len().min(y.len());
        assert!(a.iter().all(|r| r.len() >= n));
        let full = n / 4 * 4;
        let (px, py) = (x.as_ptr(), y.as_mut_ptr());
        let p = a.map(|r| r.as_ptr());
        let cv = c.map(|v| _mm256_set1_pd(v));
        let mut acc = [_mm256_setzero_pd(); ROWS32];
        // One step: four columns of the rows (the order of `sym_f32_plain`).
        let step = |k: usize, acc: &mut [__m256d; ROWS32]| {
            // SAFETY: callers pass k + 3 < full ≤ n ≤ every slice's length (asserted above).
            unsafe {
                let xv = _mm256_loadu_pd(px.add(k));
                let mut yv = _mm256_loadu_pd(py.add(k));
                for r in 0..ROWS32 {
                    let ar = _mm256_cvtps_pd(_mm_loadu_ps(p[r].add(k)));
                    acc[r] = _mm256_fmadd_pd(ar, xv, acc[r]);
                    yv = _mm256_fmadd_pd(ar, cv[r], yv);
                }
                _mm256_storeu_pd(py.add(k), yv);
            }
        };
        let lines = full / 16 * 16;
        let mut k = 0;
        while k < lines {
            // One prefetch per cache line (16 floats) and row, 4 KiB ahead into L2, running on
            // into `next` near the rows' ends, as in `sym4`. Hints only.
            prefetch_rows::<_, _MM_HINT_T1>(&p, &next, k + PREFETCH_AHEAD_F32, n);
            step(k, &mut acc);
            step(k + 4, &mut acc);
            step(k + 8, &mut acc);
            step(k + 12, &mut acc);
            k += 16;
        }
        while k < full {
            step(k, &mut acc);
            k += 4;
        }
        let w = |r: usize, i: usize| a[r][i] as f64;
        let mut out = [0.0; ROWS32];
        for r in 0..ROWS32 {
            let mut l = [0.0f64; 4];
            // SAFETY: l has four entries.
            unsafe { _mm256_storeu_pd(l.as_mut_ptr(), acc[r]) };
            let mut s = (l[0] + l[2]) + (l[1] + l[3]);
            for i in full..n {
                s = w(r, i).mul_add(x[i], s);
            }
            out[r] = s;
        }
        for i in full..n {
            y[i] = (0..ROWS32).fold(y[i], |v, r| w(r, i).mul_add(c[r], v));
        }
        out
    }

    #[target_feature(enable = "avx2")]
    pub(super) fn axpy(y: &mut [f64], c: f64, x: &[f64]) {
        let n = y.len().min(x.len());
        let full = n / 4 * 4;
        let (py, px) = (y.as_mut_ptr(), x.as_ptr());
        let cv = _mm256_set1_pd(c);
        let mut k = 0;
        while k < full {
            // SAFETY: k + 3 < full ≤ n, within both slices.
            unsafe {
                let v = _mm256_loadu_pd(py.add(k));
                let w = _mm256_mul_pd(cv, _mm256_loadu_pd(px.add(k)));
                _mm256_storeu_pd(py.add(k), _mm256_add_pd(v, w));
            }
            k += 4;
        }
        for i in full..n {
            y[i] += c * x[i];
        }
    }
}

/// How far ahead (in doubles) [`sym4`] prefetches its four row streams: 2 KiB. Chosen by a
/// sweep over 64–512 at n = 4096 and 8192 (bytes read per second against a sequential sum).
#[cfg(target_arch = "x86_64")]
const PREFETCH_AHEAD: usize = 256;

/// How far ahead (in floats) [`sym_f32`] prefetches its eight row streams into L2: 4 KiB.
/// Chosen by trials of 128–2048 floats into L1 or L2 at n = 4096 and 8192, each paired with a
/// sequential sum (the machine's load moved both by ±25%; this one was best in the pairs).
#[cfg(target_arch = "x86_64")]
const PREFETCH_AHEAD_F32: usize = 1024;

#[cfg(target_arch = "x86_64")]
#[inline(always)]
fn has_avx2() -> bool {
    std::arch::is_x86_feature_detected!("avx2")
}

/// Asks the kernel to back a large, not yet written buffer with 2 MiB pages (Linux, where
/// transparent huge pages are often "madvise" only): a flip on the f32 triangle reads column k
/// with a stride of a row, and a sweep on a large random graph updates fields all over memory,
/// one 4 KiB page per access. A hint only: it never changes a result, and is ignored where
/// unsupported.
pub fn huge_pages<T>(v: &mut [T]) {
    #[cfg(target_os = "linux")]
    {
        const HUGE: usize = 2 << 20;
        let p = v.as_mut_ptr() as usize;
        let (start, end) = (
            (p + HUGE - 1) & !(HUGE - 1),
            (p + std::mem::size_of_val(v)) & !(HUGE - 1),
        );
        if end > start {
            // SAFETY: the range lies inside the buffer; MADV_HUGEPAGE changes no contents.
            unsafe { libc::madvise(start as *mut libc::c_void, end - start, libc::MADV_HUGEPAGE) };
        }
    }
    #[cfg(not(target_os = "linux"))]
    let _ = v;
}

/// Maps the pages of a large, freshly zeroed buffer (`vec![0; n]`, whose pages the kernel
/// maps on first touch) from all threads at once, by writing a zero (`T::default()`) to one
/// value per 4 KiB page: the page faults a serial loop would otherwise take one by one in its
/// first pass are shared by the pool. A buffer of zeros stays zeros. On this 2-core VM a first
/// touch costs about 2 s per GB from one thread (the 1.2 GB of the blocked sweep's buckets at
/// n = 10⁸: 2.5 s serially, 1.1–1.3 s from two threads).
pub fn prefault_zeroed<T: Copy + Send + Default>(v: &mut [T]) {
    use rayon::prelude::*;
    let page = (4096 / std::mem::size_of::<T>().max(1)).max(1);
    v.par_chunks_mut(page * 64).for_each(|c| {
        for x in c.iter_mut().step_by(page) {
            // SAFETY: `x` is a valid, aligned element of the slice; volatile so that the store
            // of the value the page already holds is not elided.
            unsafe { std::ptr::write_volatile(x, T::default()) };
        }
    });
}

/// Prefetches the cache line holding `x` into the first-level cache, to be read or written
/// soon (a hint: never changes a result).
#[inline(always)]
pub fn prefetch<T>(x: *const T) {
    #[cfg(target_arch = "x86_64")]
    // SAFETY: a prefetch of any address is harmless.
    unsafe {
        std::arch::x86_64::_mm_prefetch::<{ std::arch::x86_64::_MM_HINT_T0 }>(x as *const i8)
    };
    #[cfg(not(target_arch = "x86_64"))]
    let _ = x;
}

/// Σ a_k b_k summed left to right, one term at a time: for short vectors (a rank-k row, a
/// q-grid) whose pinned numbers were computed in this order. Long vectors use [`dot`].
#[inline]
pub fn dot_sequential(a: &[f64], b: &[f64]) -> f64 {
    a.iter().zip(b).map(|(x, y)| x * y).sum()
}

/// Scales v to unit norm under `dot` (left as is when zero); returns the norm it had.
#[inline]
pub fn normalize_with(v: &mut [f64], dot: impl Fn(&[f64], &[f64]) -> f64) -> f64 {
    let s = dot(v, v).sqrt();
    if s > 0.0 {
        v.iter_mut().for_each(|x| *x /= s);
    }
    s
}

/// Σ a_k b_k over the common length.
#[inline]
pub fn dot(a: &[f64], b: &[f64]) -> f64 {
    #[cfg(target_arch = "x86_64")]
    if has_avx2() {
        // SAFETY: the CPU supports AVX2 (checked at run time).
        return unsafe { avx2::dot(a, b) };
    }
    dot_plain(a, b)
}

/// Σ a_k s_k for signs s_k ∈ {±1} (any i8), over the common length.
#[inline]
pub fn dot_signs(a: &[f64], s: &[i8]) -> f64 {
    #[cfg(target_arch = "x86_64")]
    if has_avx2() {
        // SAFETY: as in `dot`.
        return unsafe { avx2::dot_signs(a, s) };
    }
    dot_signs_plain(a, s)
}

/// Four rows of a symmetric matrix–vector product in one pass (see `sym4_plain` for the
/// fixed order of every sum). `next` are the rows the caller will pass next (empty at the
/// end); they are only prefetched, so they never change the result.
#[inline]
pub fn sym4(a: [&[f64]; 4], x: &[f64], y: &mut [f64], c: [f64; 4], next: [&[f64]; 4]) -> [f64; 4] {
    #[cfg(target_arch = "x86_64")]
    if has_avx2() {
        // SAFETY: as in `dot`.
        return unsafe { avx2::sym4(a, x, y, c, next) };
    }
    let _ = next;
    sym4_plain(a, x, y, c)
}

/// [`ROWS32`] rows of a symmetric product held in f32 (see `sym_f32_plain` for the fixed
/// order and the fused multiply–adds): entries widened exactly, sums in f64.
#[inline]
pub fn sym_f32(
    a: [&[f32]; ROWS32],
    x: &[f64],
    y: &mut [f64],
    c: [f64; ROWS32],
    next: [&[f32]; ROWS32],
) -> [f64; ROWS32] {
    #[cfg(target_arch = "x86_64")]
    if has_avx2() && std::arch::is_x86_feature_detected!("fma") {
        // SAFETY: the CPU supports AVX2 and FMA (checked at run time).
        return unsafe { avx2::sym_f32(a, x, y, c, next) };
    }
    let _ = next;
    sym_f32_plain(a, x, y, c)
}

/// y += c·x (elementwise, no reduction: identical on every path).
#[inline]
pub fn axpy(y: &mut [f64], c: f64, x: &[f64]) {
    #[cfg(target_arch = "x86_64")]
    if has_avx2() {
        // SAFETY: as in `dot`.
        return unsafe { avx2::axpy(y, c, x) };
    }
    axpy_plain(y, c, x)
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The dispatched kernels equal the baseline code bit for bit (so results do not depend on
    /// the CPU), on lengths around the lane count and with awkward values.
    #[test]
    fn dispatch_is_bit_identical() {
        let mut v = 0.3f64;
        let mut next = || {
            v = (v * 3.987 + 0.1234).fract();
            (v - 0.5) * 10f64.powi(((v * 7.0) as i32) - 3)
        };
        for n in [0usize, 1, 15, 16, 17, 31, 33, 100, 1001] {
            let a: Vec<f64> = (0..n).map(|_| next()).collect();
            let b: Vec<f64> = (0..n).map(|_| next()).collect();
            let s: Vec<i8> = b.iter().map(|&x| if x < 0.0 { -1 } else { 1 }).collect();
            assert_eq!(dot(&a, &b).to_bits(), dot_plain(&a, &b).to_bits());
            assert_eq!(
                dot_signs(&a, &s).to_bits(),
                dot_signs_plain(&a, &s).to_bits()
            );
            let mut y1 = b.clone();
            let mut y2 = b.clone();
            axpy(&mut y1, -2.0, &a);
            axpy_plain(&mut y2, -2.0, &a);
            assert_eq!(y1, y2);
            if n >= 4 {
                let rows = [&a[..], &b[..], &a[1..], &b[1..]];
                let m = n - 1;
                let (mut y5, mut y6) = (b[..m].to_vec(), b[..m].to_vec());
                let c = [0.5, -1.5, 2.0, 0.25];
                let r1 = sym4(rows, &a[..m], &mut y5, c, [&b[..m / 2]; 4]);
                let r2 = sym4_plain(rows, &a[..m], &mut y6, c);
                assert_eq!(r1.map(f64::to_bits), r2.map(f64::to_bits));
                assert_eq!(y5, y6);
                let f: Vec<f32> = a.iter().map(|&v| v as f32).collect();
                let g: Vec<f32> = b.iter().map(|&v| v as f32).collect();
                let rows32: [&[f32]; ROWS32] =
                    std::array::from_fn(|r| if r % 2 == 0 { &f[r / 2..] } else { &g[r / 2..] });
                let m = n - ROWS32.min(n) / 2;
                let c8: [f64; ROWS32] = std::array::from_fn(|r| 0.5 - r as f64 * 0.75);
                let (mut y7, mut y8) = (b[..m].to_vec(), b[..m].to_vec());
                let r3 = sym_f32(rows32, &a[..m], &mut y7, c8, [&g[..m / 2]; ROWS32]);
                let r4 = sym_f32_plain(rows32, &a[..m], &mut y8, c8);
                assert_eq!(r3.map(f64::to_bits), r4.map(f64::to_bits));
                assert_eq!(y7, y8);
            }
            // And the pattern is the documented one: lanes k mod 16, tree, then the tail.
            let mut lanes = [0.0f64; LANES];
            let full = n / LANES * LANES;
            for k in 0..full {
                lanes[k % LANES] += a[k] * b[k];
            }
            let mut tail = 0.0;
            for k in full..n {
                tail += a[k] * b[k];
            }
            assert_eq!(dot(&a, &b).to_bits(), (combine(&lanes) + tail).to_bits());
        }
    }
}
