//! Spin glasses and max-cut on sparse graphs: Erdős–Rényi G(n, d/n), random d-regular graphs,
//! and periodic L^D lattices (Edwards–Anderson).
//!
//! H(σ) = Σ_{(i,j) ∈ E} J_ij σ_i σ_j with J_ij i.i.d. N(0,1) (`gaussian`), ±1 (`pm1`) or −1 on
//! every edge (`cut`: maximising H maximises the cut, cut = (m + H)/2 for m edges). There is no
//! 1/√n factor: H/n is O(√d), and `energy_reduced` = H/(n·√d) is the scale on which sparse
//! graphs approach SK as d grows (Dembo, Montanari & Sen, Ann. Probab. 45 (2017), 1190).
//!
//! Storage: CSR with u32 neighbour indices and f64 couplings, each edge stored from both ends,
//! neighbours sorted. Local fields h_i = Σ_j J_ij σ_j; a flip costs O(deg).
//!
//! Sampling (all from streams named by the instance, never by thread order):
//! - Erdős–Rényi: row i lists its neighbours j > i by geometric skips (Batagelj & Brandes,
//!   Phys. Rev. E 71, 036113 (2005)) drawn from `(instance, Couplings, i)`, each followed by its
//!   coupling: O(n + m) work, rows in parallel.
//! - d-regular: configuration model (uniform pairing of n·d half-edges by a Fisher–Yates
//!   shuffle from `(instance, Couplings, 2^62)`), then every loop or repeated edge is removed by
//!   random degree-preserving double-edge switches with edges chosen uniformly (common
//!   practice; the result is close to, not exactly, uniform among simple d-regular graphs). The
//!   couplings of row i's edges j > i come from `(instance, Couplings, i)` in increasing j.
//! - Lattice: site x = (x_0, …, x_{D−1}), index Σ x_a L^a; site i owns the D edges to i + e_a
//!   (periodic), couplings drawn from `(instance, Couplings, i)` in the order a = 0…D−1.
//!
//! Correlated copy at correlation 1 − ε, drawn from `Perturbation` streams that do not depend
//! on ε (so copies for growing ε lie on one path):
//! - `gaussian`, `pm1`: the graph is kept; couplings resampled per edge exactly as for SK.
//! - `cut` on Erdős–Rényi: each edge is kept with probability 1 − ε (uniform from the row
//!   stream), and independent fresh edges are added at rate q = pε/(1 − p(1 − ε)) (p = d/n,
//!   rows of `(instance, Perturbation, 2^61 + i)`), so the copy is again G(n, d/n) and a
//!   fraction 1 − ε of the edges is kept.
//! - `cut` on d-regular graphs: round(ε·m/2) degree-preserving switches, each between two edges
//!   never touched before, so the copy is again d-regular and a fraction 1 − ε of edges is kept.

use super::Couplings;
use crate::rng::{Id, Purpose, Stream, stream};
use rayon::prelude::*;
use std::collections::HashSet;

/// Stream index of the regular graph's pairing shuffle and switches.
const STRUCTURE: u64 = 1 << 62;
/// Stream index offset of the fresh edges of a perturbed Erdős–Rényi `cut` graph.
const FRESH: u64 = 1 << 61;

/// Revision of the graph and lattice samplers. Bump when a seed's disorder changes.
pub const REVISION: u32 = 1;

/// An undirected graph with couplings, in CSR form.
pub struct Graph {
    n: usize,
    offsets: Vec<u64>,
    nbr: Vec<u32>,
    w: Vec<f64>,
    edges: usize,
}

use super::SendPtr;

/// Edges (i < j, J) of one row i, sorted by j.
type Row = Vec<(u32, f64)>;

impl Graph {
    /// Builds the CSR from per-row upper-triangle lists (row i lists j > i, increasing).
    pub fn from_rows(n: usize, rows: &[Row]) -> Graph {
        let mut deg = vec![0u64; n];
        let mut m = 0;
        for (i, r) in rows.iter().enumerate() {
            for &(j, _) in r {
                deg[i] += 1;
                deg[j as usize] += 1;
                m += 1;
            }
        }
        let mut offsets = vec![0u64; n + 1];
        for i in 0..n {
            offsets[i + 1] = offsets[i] + deg[i];
        }
        let total = offsets[n] as usize;
        let mut nbr = vec![0u32; total];
        let mut w = vec![0.0f64; total];
        let mut fill: Vec<u64> = offsets[..n].to_vec();
        // Lower neighbours first (rows in increasing i), then the row's own upper ones: each
        // adjacency list comes out sorted.
        for (i, r) in rows.iter().enumerate() {
            for &(j, x) in r {
                let j = j as usize;
                let a = fill[j] as usize;
                nbr[a] = i as u32;
                w[a] = x;
                fill[j] += 1;
            }
        }
        for (i, r) in rows.iter().enumerate() {
            for &(j, x) in r {
                let a = fill[i] as usize;
                nbr[a] = j;
                w[a] = x;
                fill[i] += 1;
            }
        }
        Graph {
            n,
            offsets,
            nbr,
            w,
            edges: m,
        }
    }

    /// Builds a graph from an edge list (any order, no loops or repeats), couplings given.
    pub fn from_edges(n: usize, edges: &[(u32, u32, f64)]) -> Graph {
        let mut rows: Vec<Row> = vec![Vec::new(); n];
        for &(a, b, x) in edges {
            assert!(a != b, "loop at {a}");
            let (i, j) = if a < b { (a, b) } else { (b, a) };
            rows[i as usize].push((j, x));
        }
        for r in &mut rows {
            r.sort_by_key(|e| e.0);
            assert!(r.windows(2).all(|w| w[0].0 != w[1].0), "repeated edge");
        }
        Graph::from_rows(n, &rows)
    }

    /// Builds the CSR straight from a simple graph's edge list (any order, either orientation),
    /// without per-row lists (at n = 10⁸ those cost more than the graph): degrees, offsets,
    /// neighbours scattered then each list sorted, then the couplings of row i's upper part
    /// (j > i, increasing) drawn from `(instance, Couplings, i)` and, when `perturb` holds ε,
    /// moved to the copy from `(instance, Perturbation, i)`, and mirrored into the lower ends.
    /// Every step is per vertex or order-free, so the result does not depend on the thread
    /// count, and it equals [`Graph::from_rows`] of the same rows bit for bit (tested).
    pub fn from_pairs(
        n: usize,
        edges: &[(u32, u32)],
        c: Couplings,
        instance: &Id,
        perturb: Option<f64>,
    ) -> Graph {
        use std::sync::atomic::{AtomicU32, AtomicU64, Ordering::Relaxed};
        let deg: Vec<AtomicU32> = (0..n).map(|_| AtomicU32::new(0)).collect();
        edges.par_iter().for_each(|&(a, b)| {
            deg[a as usize].fetch_add(1, Relaxed);
            deg[b as usize].fetch_add(1, Relaxed);
        });
        let mut offsets = vec![0u64; n + 1];
        for i in 0..n {
            offsets[i + 1] = offsets[i] + deg[i].load(Relaxed) as u64;
        }
        drop(deg);
        let total = offsets[n] as usize;
        let cursor: Vec<AtomicU64> = offsets[..n].iter().map(|&o| AtomicU64::new(o)).collect();
        let nbr: Vec<AtomicU32> = (0..total).map(|_| AtomicU32::new(0)).collect();
        edges.par_iter().for_each(|&(a, b)| {
            nbr[cursor[a as usize].fetch_add(1, Relaxed) as usize].store(b, Relaxed);
            nbr[cursor[b as usize].fetch_add(1, Relaxed) as usize].store(a, Relaxed);
        });
        drop(cursor);
        let mut nbr: Vec<u32> = nbr.into_iter().map(AtomicU32::into_inner).collect();
        let mut w = vec![0.0f64; total];
        let keep = perturb.map_or(1.0, |e| 1.0 - e);
        let fresh = perturb.map_or(0.0, |e| (e * (2.0 - e)).sqrt());
        // Sort each list (neighbours are distinct: a simple graph), then draw row i's upper
        // couplings into its own suffix.
        let wp = SendPtr(w.as_mut_ptr());
        let np = SendPtr(nbr.as_mut_ptr());
        (0..n).into_par_iter().for_each(|i| {
            let (np, wp) = (&np, &wp);
            let (lo, hi) = (offsets[i] as usize, offsets[i + 1] as usize);
            // SAFETY: row i's range [lo, hi) is written by this task only.
            let (list, ws) = unsafe {
                (
                    std::slice::from_raw_parts_mut(np.0.add(lo), hi - lo),
                    std::slice::from_raw_parts_mut(wp.0.add(lo), hi - lo),
                )
            };
            list.sort_unstable();
            let first_upper = list.partition_point(|&j| (j as usize) < i);
            let upper = &mut ws[first_upper..];
            let mut rng = stream(instance, Purpose::Couplings, i as u64);
            for x in upper.iter_mut() {
                *x = coupling(&mut rng, c);
            }
            if let Some(e) = perturb {
                let mut g = stream(instance, Purpose::Perturbation, i as u64);
                super::perturb(&mut g, c, keep, fresh, e, upper);
            }
        });
        // Mirror: row j's lower entries (i < j) read the coupling stored in row i's upper part.
        (0..n).into_par_iter().for_each(|j| {
            let wp = &wp;
            let (lo, hi) = (offsets[j] as usize, offsets[j + 1] as usize);
            for k in lo..hi {
                let i = nbr[k] as usize;
                if i >= j {
                    break;
                }
                let (a, b) = (offsets[i] as usize, offsets[i + 1] as usize);
                let at = a + nbr[a..b].partition_point(|&x| (x as usize) < j);
                // SAFETY: this task writes only row j's lower entries; it reads row i's upper
                // entries, which no task writes in this pass.
                unsafe { *wp.0.add(k) = *wp.0.add(at) };
            }
        });
        Graph {
            n,
            offsets,
            nbr,
            w,
            edges: edges.len(),
        }
    }

    pub fn n(&self) -> usize {
        self.n
    }

    /// Number of edges m.
    pub fn edges(&self) -> usize {
        self.edges
    }

    /// Neighbours and couplings of i.
    #[inline(always)]
    pub fn adj(&self, i: usize) -> (&[u32], &[f64]) {
        let (a, b) = (self.offsets[i] as usize, self.offsets[i + 1] as usize);
        (&self.nbr[a..b], &self.w[a..b])
    }

    pub fn degree(&self, i: usize) -> usize {
        (self.offsets[i + 1] - self.offsets[i]) as usize
    }

    /// Upper-triangle edges (i < j, J), sorted.
    pub fn edge_list(&self) -> Vec<(u32, u32, f64)> {
        let mut out = Vec::with_capacity(self.edges);
        for i in 0..self.n {
            let (nb, w) = self.adj(i);
            for (&j, &x) in nb.iter().zip(w) {
                if j as usize > i {
                    out.push((i as u32, j, x));
                }
            }
        }
        out
    }

    /// 2·max_i Σ_j |J_ij| when every coupling is an integer of magnitude ≤ 2^20 (±1 and cut
    /// couplings), else None: then fields are exact integers (sums of integers below 2^53).
    pub fn integer_gain_bound(&self) -> Option<usize> {
        if !self
            .w
            .iter()
            .all(|&x| x.fract() == 0.0 && x.abs() <= (1u32 << 20) as f64)
        {
            return None;
        }
        let mut best = 0.0f64;
        for i in 0..self.n {
            best = best.max(self.adj(i).1.iter().map(|x| x.abs()).sum());
        }
        Some(2 * best as usize)
    }

    /// The couplings as i8 in CSR order, when every one is an integer in [−127, 127] (±1 and
    /// cut couplings): the compact form the integer annealing loop runs on.
    pub fn small_integer_couplings(&self) -> Option<Vec<i8>> {
        self.w
            .iter()
            .map(|&x| (x.fract() == 0.0 && x.abs() <= 127.0).then_some(x as i8))
            .collect()
    }

    /// CSR row offsets (n + 1) and neighbour lists.
    pub fn csr(&self) -> (&[u64], &[u32]) {
        (&self.offsets, &self.nbr)
    }

    /// Σ_j J_ij σ_j for one vertex.
    #[inline(always)]
    fn field(&self, i: usize, s: &[i8]) -> f64 {
        let (nb, w) = self.adj(i);
        let mut acc = 0.0;
        for (&j, &x) in nb.iter().zip(w) {
            acc += x * s[j as usize] as f64;
        }
        acc
    }

    /// Local fields h_i = Σ_j J_ij σ_j.
    pub fn fields(&self, s: &[i8], h: &mut [f64]) {
        for (i, hi) in h.iter_mut().enumerate() {
            *hi = self.field(i, s);
        }
    }

    /// H(σ) = ½ Σ_i σ_i h_i, summed in a fixed order.
    pub fn energy(&self, s: &[i8]) -> f64 {
        let mut e = 0.0;
        for (i, &si) in s.iter().enumerate() {
            e += si as f64 * self.field(i, s);
        }
        0.5 * e
    }

    /// Flips spin k and updates its neighbours' fields.
    #[inline(always)]
    pub fn flip(&self, s: &mut [i8], h: &mut [f64], k: usize) {
        s[k] = -s[k];
        let c = 2.0 * s[k] as f64;
        let (nb, w) = self.adj(k);
        for (&j, &x) in nb.iter().zip(w) {
            h[j as usize] += c * x;
        }
    }

    /// y = J x (for the spectral method).
    pub fn matvec(&self, x: &[f64], y: &mut [f64]) {
        for (i, yi) in y.iter_mut().enumerate() {
            let (nb, w) = self.adj(i);
            let mut acc = 0.0;
            for (&j, &v) in nb.iter().zip(w) {
                acc += v * x[j as usize];
            }
            *yi = acc;
        }
    }
}

/// One coupling drawn by the law (the `cut` law draws nothing).
#[inline(always)]
fn coupling(rng: &mut Stream, c: Couplings) -> f64 {
    match c {
        Couplings::Gaussian => rng.normal(),
        Couplings::Pm1 => rng.sign(),
        Couplings::Cut => -1.0,
    }
}

/// Resamples the couplings of every row from `(instance, Perturbation, i)` (graph kept).
fn perturb_couplings(rows: &mut [Row], c: Couplings, instance: &Id, epsilon: f64) {
    let keep = 1.0 - epsilon;
    let fresh = (epsilon * (2.0 - epsilon)).sqrt();
    rows.par_iter_mut().enumerate().for_each(|(i, r)| {
        let mut g = stream(instance, Purpose::Perturbation, i as u64);
        let mut xs: Vec<f64> = r.iter().map(|e| e.1).collect();
        super::perturb(&mut g, c, keep, fresh, epsilon, &mut xs);
        for (e, x) in r.iter_mut().zip(xs) {
            e.1 = x;
        }
    });
}

/// Row i of G(n, p) by geometric skips over j ∈ (i, n); each edge followed by its coupling.
fn skip_row(rng: &mut Stream, i: usize, n: usize, p: f64, c: Couplings) -> Row {
    let mut out = Vec::new();
    if p <= 0.0 {
        return out;
    }
    let log_q = libm::log1p(-p.min(1.0 - 1e-16));
    let mut j = i as f64;
    loop {
        // Skip: number of non-edges before the next edge is Geometric(p).
        let u = 1.0 - rng.uniform(); // (0, 1]
        j += 1.0 + (libm::log(u) / log_q).floor();
        if j >= n as f64 {
            break;
        }
        out.push((j as u32, coupling(rng, c)));
    }
    out
}

/// Erdős–Rényi G(n, d/n).
pub fn erdos_renyi(n: usize, d: f64, c: Couplings, instance: &Id, epsilon: f64) -> Graph {
    let p = (d / n as f64).min(1.0);
    let mut rows: Vec<Row> = (0..n)
        .into_par_iter()
        .map(|i| {
            let mut rng = stream(instance, Purpose::Couplings, i as u64);
            skip_row(&mut rng, i, n, p, c)
        })
        .collect();
    if epsilon > 0.0 {
        if c == Couplings::Cut {
            let q = p * epsilon / (1.0 - p * (1.0 - epsilon));
            rows.par_iter_mut().enumerate().for_each(|(i, r)| {
                let mut g = stream(instance, Purpose::Perturbation, i as u64);
                let kept: Vec<(u32, f64)> = r
                    .iter()
                    .copied()
                    .filter(|_| g.uniform() >= epsilon)
                    .collect();
                let mut f = stream(instance, Purpose::Perturbation, FRESH + i as u64);
                let fresh = skip_row(&mut f, i, n, q, c);
                let mut merged: Row = kept.into_iter().chain(fresh).collect();
                merged.sort_by_key(|e| e.0);
                merged.dedup_by_key(|e| e.0);
                *r = merged;
            });
        } else {
            perturb_couplings(&mut rows, c, instance, epsilon);
        }
    }
    Graph::from_rows(n, &rows)
}

/// An edge key with a < b.
#[inline(always)]
fn key(a: u32, b: u32) -> u64 {
    let (a, b) = if a < b { (a, b) } else { (b, a) };
    ((a as u64) << 32) | b as u64
}

/// The structure of a random d-regular multigraph made simple: edges (a, b), a ≠ b, distinct.
fn regular_edges(n: usize, d: usize, rng: &mut Stream) -> Vec<(u32, u32)> {
    let mut stubs: Vec<u32> = (0..n * d).map(|k| (k / d) as u32).collect();
    rng.shuffle(&mut stubs);
    let mut edges: Vec<(u32, u32)> = stubs.chunks_exact(2).map(|p| (p[0], p[1])).collect();
    drop(stubs);
    // Count multiplicities; collect bad edges (loops and every copy beyond the first).
    let mut seen: HashSet<u64> = HashSet::with_capacity(edges.len());
    let mut bad: Vec<usize> = Vec::new();
    for (k, &(a, b)) in edges.iter().enumerate() {
        if a == b || !seen.insert(key(a, b)) {
            bad.push(k);
        }
    }
    // Switch each bad edge with a uniformly chosen edge until both new edges are simple.
    let m = edges.len() as u64;
    while let Some(&k) = bad.last() {
        let (a, b) = edges[k];
        let l = rng.below(m) as usize;
        if l == k {
            continue;
        }
        let (c, e) = edges[l];
        let (x1, x2) = if rng.sign() > 0.0 {
            ((a, c), (b, e))
        } else {
            ((a, e), (b, c))
        };
        if x1.0 == x1.1 || x2.0 == x2.1 || key(x1.0, x1.1) == key(x2.0, x2.1) {
            continue;
        }
        if seen.contains(&key(x1.0, x1.1)) || seen.contains(&key(x2.0, x2.1)) {
            continue;
        }
        // Edge l is a good edge unless it is itself on the bad list; bad edges hold no entry
        // in `seen` of their own (loops never do; a repeat's entry belongs to its first copy).
        let l_bad = bad.contains(&l);
        if !l_bad {
            seen.remove(&key(c, e));
        }
        seen.insert(key(x1.0, x1.1));
        seen.insert(key(x2.0, x2.1));
        edges[k] = x1;
        edges[l] = x2;
        bad.pop();
        if l_bad {
            bad.retain(|&z| z != l);
        }
    }
    edges
}

/// Rows (i < j, J) from a structure, couplings from `(instance, Couplings, i)` in increasing j:
/// the construction [`Graph::from_pairs`] replaced, kept as its reference in the tests.
#[cfg(test)]
fn rows_with_couplings(n: usize, edges: &[(u32, u32)], c: Couplings, instance: &Id) -> Vec<Row> {
    let mut rows: Vec<Row> = vec![Vec::new(); n];
    for &(a, b) in edges {
        let (i, j) = if a < b { (a, b) } else { (b, a) };
        rows[i as usize].push((j, 0.0));
    }
    rows.par_iter_mut().enumerate().for_each(|(i, r)| {
        r.sort_by_key(|e| e.0);
        let mut rng = stream(instance, Purpose::Couplings, i as u64);
        for e in r.iter_mut() {
            e.1 = coupling(&mut rng, c);
        }
    });
    rows
}

/// Random d-regular graph (n·d even, d < n).
pub fn regular(n: usize, d: usize, c: Couplings, instance: &Id, epsilon: f64) -> Graph {
    let mut rng = stream(instance, Purpose::Couplings, STRUCTURE);
    let mut edges = regular_edges(n, d, &mut rng);
    if epsilon > 0.0 && c == Couplings::Cut {
        // Sorted structure first, so the switches do not depend on the pairing order.
        edges = edges
            .into_iter()
            .map(|(a, b)| (a.min(b), a.max(b)))
            .collect();
        edges.sort_unstable();
        switch_fraction(&mut edges, epsilon, instance);
    }
    let perturb = (epsilon > 0.0 && c != Couplings::Cut).then_some(epsilon);
    Graph::from_pairs(n, &edges, c, instance, perturb)
}

/// round(ε·m/2) degree-preserving switches, each between two edges never touched before.
fn switch_fraction(edges: &mut [(u32, u32)], epsilon: f64, instance: &Id) {
    let m = edges.len();
    let target = (epsilon * m as f64 / 2.0).round() as usize;
    let mut rng = stream(instance, Purpose::Perturbation, STRUCTURE);
    let mut present: HashSet<u64> = edges.iter().map(|&(a, b)| key(a, b)).collect();
    let mut untouched: Vec<usize> = (0..m).collect();
    let mut done = 0;
    let mut attempts: u64 = 0;
    let cap = 1000 + 200 * target as u64;
    while done < target && untouched.len() >= 2 && attempts < cap {
        attempts += 1;
        let u1 = rng.below(untouched.len() as u64) as usize;
        let u2 = rng.below(untouched.len() as u64) as usize;
        let flip = rng.sign() > 0.0;
        if u1 == u2 {
            continue;
        }
        let (k, l) = (untouched[u1], untouched[u2]);
        let ((a, b), (c, e)) = (edges[k], edges[l]);
        let (x1, x2) = if flip {
            ((a, c), (b, e))
        } else {
            ((a, e), (b, c))
        };
        if x1.0 == x1.1 || x2.0 == x2.1 || key(x1.0, x1.1) == key(x2.0, x2.1) {
            continue;
        }
        if present.contains(&key(x1.0, x1.1)) || present.contains(&key(x2.0, x2.1)) {
            continue;
        }
        present.remove(&key(a, b));
        present.remove(&key(c, e));
        present.insert(key(x1.0, x1.1));
        present.insert(key(x2.0, x2.1));
        edges[k] = x1;
        edges[l] = x2;
        let (hi, lo) = if u1 > u2 { (u1, u2) } else { (u2, u1) };
        untouched.swap_remove(hi);
        untouched.swap_remove(lo);
        done += 1;
    }
}

/// Periodic L^D lattice (L ≥ 3), nearest-neighbour couplings.
pub fn lattice(l: usize, dim: usize, c: Couplings, instance: &Id, epsilon: f64) -> Graph {
    let n = l.pow(dim as u32);
    let mut rows: Vec<Row> = vec![Vec::new(); n];
    let stride: Vec<usize> = (0..dim).map(|a| l.pow(a as u32)).collect();
    let owned: Vec<Vec<(u32, f64)>> = (0..n)
        .into_par_iter()
        .map(|i| {
            let mut rng = stream(instance, Purpose::Couplings, i as u64);
            // The perturbation stream only for a correlated copy (a hash per site otherwise).
            let mut g = (epsilon > 0.0).then(|| stream(instance, Purpose::Perturbation, i as u64));
            let keep = 1.0 - epsilon;
            let fresh = (epsilon * (2.0 - epsilon)).sqrt();
            (0..dim)
                .map(|a| {
                    let x = (i / stride[a]) % l;
                    let j = if x + 1 == l {
                        i - x * stride[a]
                    } else {
                        i + stride[a]
                    };
                    let mut v = [coupling(&mut rng, c)];
                    if let Some(g) = g.as_mut() {
                        super::perturb(g, c, keep, fresh, epsilon, &mut v);
                    }
                    (j as u32, v[0])
                })
                .collect()
        })
        .collect();
    for (i, es) in owned.into_iter().enumerate() {
        for (j, x) in es {
            let (a, b) = if i < j as usize {
                (i, j)
            } else {
                (j as usize, i as u32)
            };
            rows[a].push((b, x));
        }
    }
    rows.par_iter_mut().for_each(|r| r.sort_by_key(|e| e.0));
    Graph::from_rows(n, &rows)
}

/// Peak bytes of a sparse instance with about m edges on n vertices: CSR (2m·12 B + 8(n+1))
/// plus the row lists it is built from (m·16 B + 24n) and, for regular graphs, the stubs and
/// the edge set (≈ 40 B per edge).
pub fn instance_bytes(n: u64, m: f64) -> u128 {
    let m = m.max(1.0) as u128;
    let n = n as u128;
    24 * m + 8 * (n + 1) + 16 * m + 24 * n + 40 * m + 64 * n
}

/// The graph behind the plain [`crate::model::SpinModel`] methods only: no integer gain bound
/// and no `as_graph`, so loops specialised to small integer couplings take their generic path.
/// Tests compare the two paths through it.
#[cfg(test)]
pub(crate) struct Plain<'a>(pub &'a Graph);

#[cfg(test)]
impl crate::model::SpinModel for Plain<'_> {
    fn n(&self) -> usize {
        self.0.n()
    }
    fn fields(&self, s: &[i8], h: &mut [f64]) {
        self.0.fields(s, h)
    }
    fn energy(&self, s: &[i8]) -> f64 {
        self.0.energy(s)
    }
    fn flip(&self, s: &mut [i8], h: &mut [f64], k: usize) {
        self.0.flip(s, h, k)
    }
}

#[cfg(test)]
mod tests {

    /// The CSR built straight from the edge list equals the per-row construction it replaced
    /// (rows, couplings, perturbation, mirrored), bit for bit, on regular graphs of every law.
    #[test]
    fn pairs_build_the_same_graph_as_rows() {
        for (n, d) in [(10usize, 3usize), (1000, 3), (501, 4)] {
            for c in [Couplings::Gaussian, Couplings::Pm1, Couplings::Cut] {
                for eps in [0.0, 0.3] {
                    let inst = [n as u8 ^ 5; 32];
                    let mut rng = stream(&inst, Purpose::Couplings, STRUCTURE);
                    let edges = regular_edges(n, d, &mut rng);
                    let mut rows = rows_with_couplings(n, &edges, c, &inst);
                    let perturb = (eps > 0.0 && c != Couplings::Cut).then_some(eps);
                    if let Some(e) = perturb {
                        perturb_couplings(&mut rows, c, &inst, e);
                    }
                    let a = Graph::from_rows(n, &rows);
                    let b = Graph::from_pairs(n, &edges, c, &inst, perturb);
                    assert_eq!(a.offsets, b.offsets);
                    assert_eq!(a.nbr, b.nbr);
                    let bits = |g: &Graph| g.w.iter().map(|x| x.to_bits()).collect::<Vec<_>>();
                    assert_eq!(bits(&a), bits(&b), "n {n} {c:?} ε {eps}");
                    assert_eq!(a.edges, b.edges);
                }
            }
        }
    }
    use super::*;

    #[test]
    fn csr_round_trip_and_flip() {
        let edges = vec![(0, 1, 1.5), (2, 1, -0.5), (3, 0, 2.0), (2, 3, 1.0)];
        let g = Graph::from_edges(4, &edges);
        assert_eq!(g.edges(), 4);
        assert_eq!(g.adj(1).0, &[0, 2]);
        let s = [1i8, -1, 1, 1];
        // H = 1.5·(1)(−1) + (−0.5)(1)(−1)·… computed directly:
        let brute: f64 = edges
            .iter()
            .map(|&(a, b, x)| x * (s[a as usize] * s[b as usize]) as f64)
            .sum();
        assert!((g.energy(&s) - brute).abs() < 1e-15);
        let mut s = s.to_vec();
        let mut h = vec![0.0; 4];
        g.fields(&s, &mut h);
        for k in [2, 0, 3, 2] {
            let before = g.energy(&s);
            let gain = -2.0 * s[k] as f64 * h[k];
            g.flip(&mut s, &mut h, k);
            assert!((g.energy(&s) - before - gain).abs() < 1e-12);
        }
    }
}

#[cfg(test)]
mod pinned {
    use super::*;

    /// The first edges and couplings of seeded instances, one per family (value stability:
    /// a change here alters numbers and must bump the family's revision).
    fn head(g: &Graph) -> Vec<(u32, u32, u64)> {
        g.edge_list()
            .iter()
            .take(3)
            .map(|e| (e.0, e.1, e.2.to_bits()))
            .collect()
    }

    #[test]
    fn pinned_first_edges() {
        let got = [
            head(&erdos_renyi(1000, 3.0, Couplings::Gaussian, &[7; 32], 0.0)),
            head(&regular(1000, 3, Couplings::Gaussian, &[7; 32], 0.0)),
            head(&lattice(5, 2, Couplings::Gaussian, &[7; 32], 0.0)),
        ];
        assert_eq!(got, PINNED);
    }
    const PINNED: [[(u32, u32, u64); 3]; 3] = [
        [
            (0, 35, 4605877391546009412),
            (0, 113, 13826413862522968340),
            (0, 117, 13818073017479018013),
        ],
        [
            (0, 101, 13827543671507869249),
            (0, 140, 13830036210168299481),
            (0, 976, 4601811070258746072),
        ],
        [
            (0, 1, 13827543671507869249),
            (0, 4, 4605578438544787331),
            (0, 5, 13830036210168299481),
        ],
    ];
}
