//! Random k-SAT: n Boolean variables (kiln's ±1 spins, σ_i = +1 is "true"), m = round(α·n)
//! clauses, each the OR of k literals on k distinct variables chosen uniformly, every literal
//! negated with probability 1/2 independently.
//!
//! kiln maximises, so H(σ) = −(number of unsatisfied clauses) and `energy` = −unsatisfied/n:
//! a satisfying assignment scores 0.
//!
//! Storage: the clauses flat, one u32 per literal (variable << 1 | negated), and per variable
//! its occurrences as clause << 1 | negated (CSR), so a flip costs O(occurrences · k) and
//! finding a clause needs no division by k.
//!
//! As a ±1 model (the [`SpinModel`] every spin algorithm uses) H is the multilinear polynomial
//! −Σ_c Π_{l ∈ c} (1 − s_l σ_l)/2, with s_l = +1 for a plain and −1 for a negated literal. Its
//! derivative is h_j = Σ_{c ∋ j} (s_{j,c}/2) · 1[every other literal of c is false], a
//! multiple of 1/2 kept exactly in f64, and −2σ_j h_j is the change in H when j flips (the
//! clauses it makes minus those it breaks), as for every other family.
//!
//! Sampling (streams named by the instance, never by thread order): clauses come in blocks
//! of [`BLOCK`], block b drawn from `(instance, Couplings, b)` — k variables by rejection
//! (a repeat is redrawn), then one word whose low k bits are the negations. The correlated
//! copy at 1 − ε: block b of `(instance, Perturbation, b)` gives every clause a uniform u and a
//! fresh clause drawn the same way; the clause is replaced when u < ε. The fresh clauses do not
//! depend on ε, so copies for growing ε are nested (those replaced at ε are replaced at every
//! larger ε), and the copy has the law of the original with a fraction 1 − ε of clauses kept
//! in expectation.

use super::SpinModel;
use crate::rng::{Id, Purpose, Stream, stream};
use rayon::prelude::*;

/// Revision of the k-SAT sampler. Bump when a seed's formula changes.
pub const REVISION: u32 = 1;
/// Clauses per sampling stream.
pub const BLOCK: usize = 4096;
/// Largest clause width k.
pub const MAX_K: usize = 16;

/// A k-SAT formula with its occurrence lists.
#[derive(Clone, Debug)]
pub struct Formula {
    n: usize,
    k: usize,
    /// Literal j of clause c at c·k + j: variable << 1 | negated.
    lits: Vec<u32>,
    /// occ[start[v]..start[v+1]] are v's occurrences, clause c << 1 | negated, c increasing.
    start: Vec<usize>,
    occ: Vec<u32>,
}

/// The number of clauses at density α: round(α·n).
pub fn clauses_at(n: u64, alpha: f64) -> u64 {
    (alpha * n as f64).round() as u64
}

/// Draws one clause (k distinct variables, then the negations) into `out`.
#[inline]
fn draw_clause(rng: &mut Stream, n: usize, out: &mut [u32]) {
    let k = out.len();
    let mut j = 0;
    while j < k {
        let v = rng.below(n as u64) as u32;
        if out[..j].iter().any(|&l| l >> 1 == v) {
            continue;
        }
        out[j] = v << 1;
        j += 1;
    }
    let bits = rng.next_u64();
    for (j, l) in out.iter_mut().enumerate() {
        *l |= ((bits >> j) & 1) as u32;
    }
}

impl Formula {
    /// Samples m clauses of width k over n variables; `epsilon > 0` gives the copy correlated
    /// at 1 − ε (see the module notes).
    pub fn sample(n: usize, k: usize, m: usize, instance: &Id, epsilon: f64) -> Formula {
        assert!((2..=MAX_K).contains(&k) && n >= k, "k-SAT needs 2 ≤ k ≤ n");
        let mut lits = vec![0u32; m * k];
        lits.par_chunks_mut(BLOCK * k)
            .enumerate()
            .for_each(|(b, block)| {
                let mut rng = stream(instance, Purpose::Couplings, b as u64);
                for c in block.chunks_exact_mut(k) {
                    draw_clause(&mut rng, n, c);
                }
                if epsilon > 0.0 {
                    let mut rng = stream(instance, Purpose::Perturbation, b as u64);
                    let mut fresh = vec![0u32; k];
                    for c in block.chunks_exact_mut(k) {
                        let u = rng.uniform();
                        draw_clause(&mut rng, n, &mut fresh);
                        if u < epsilon {
                            c.copy_from_slice(&fresh);
                        }
                    }
                }
            });
        Formula::from_literals(n, k, lits)
    }

    /// A formula from its flat literals (variable << 1 | negated, k per clause). Panics on a
    /// variable ≥ n or a ragged list (a programming error).
    pub fn from_literals(n: usize, k: usize, lits: Vec<u32>) -> Formula {
        assert!(k >= 1 && lits.len().is_multiple_of(k), "ragged clause list");
        assert!(
            lits.len() / k < 1 << 31,
            "too many clauses for 31-bit indices"
        );
        let mut start = vec![0usize; n + 1];
        for &l in &lits {
            let v = (l >> 1) as usize;
            assert!(v < n, "variable {v} ≥ n = {n}");
            start[v + 1] += 1;
        }
        for v in 0..n {
            start[v + 1] += start[v];
        }
        let mut fill = start.clone();
        let mut occ = vec![0u32; lits.len()];
        for (p, &l) in lits.iter().enumerate() {
            let v = (l >> 1) as usize;
            occ[fill[v]] = ((p / k) as u32) << 1 | (l & 1);
            fill[v] += 1;
        }
        Formula {
            n,
            k,
            lits,
            start,
            occ,
        }
    }

    pub fn n(&self) -> usize {
        self.n
    }
    /// The clause width k.
    pub fn k(&self) -> usize {
        self.k
    }
    /// The number of clauses m.
    pub fn clauses(&self) -> usize {
        self.lits.len() / self.k
    }
    /// The literals, k per clause (variable << 1 | negated).
    pub fn literals(&self) -> &[u32] {
        &self.lits
    }
    /// Variable v's occurrences: clause c << 1 | 1 where v is negated in c.
    #[inline(always)]
    pub fn occurrences(&self, v: usize) -> &[u32] {
        &self.occ[self.start[v]..self.start[v + 1]]
    }

    /// Whether literal `l` is true under σ.
    #[inline(always)]
    pub fn is_true(l: u32, s: &[i8]) -> bool {
        // Plain literal (bit 0 clear) is true at σ = +1, a negated one at σ = −1.
        (s[(l >> 1) as usize] < 0) == (l & 1 == 1)
    }

    /// The number of clauses σ leaves unsatisfied.
    pub fn unsatisfied(&self, s: &[i8]) -> usize {
        self.lits
            .chunks_exact(self.k)
            .filter(|c| !c.iter().any(|&l| Formula::is_true(l, s)))
            .count()
    }

    /// Bytes of a formula with m clauses of width k over n variables (literals, occurrence
    /// positions, offsets, and the counting pass's copy of the offsets).
    pub fn bytes(n: u64, k: u64, m: u64) -> u128 {
        (m as u128 * k as u128) * 8 + (n as u128 + 1) * 16
    }
}

impl SpinModel for Formula {
    fn n(&self) -> usize {
        self.n
    }
    /// Every clause satisfied.
    fn ceiling(&self) -> Option<f64> {
        Some(0.0)
    }
    fn energy(&self, s: &[i8]) -> f64 {
        // 0 − u, so a satisfying assignment scores +0.0 (not −0.0).
        0.0 - self.unsatisfied(s) as f64
    }
    fn fields(&self, s: &[i8], h: &mut [f64]) {
        h.iter_mut().for_each(|x| *x = 0.0);
        for c in self.lits.chunks_exact(self.k) {
            let t = c.iter().filter(|&&l| Formula::is_true(l, s)).count();
            match t {
                0 => c.iter().for_each(|&l| {
                    // Every other literal is false: s_j/2 for each j.
                    h[(l >> 1) as usize] += if l & 1 == 0 { 0.5 } else { -0.5 };
                }),
                1 => {
                    let &l = c.iter().find(|&&l| Formula::is_true(l, s)).expect("one");
                    h[(l >> 1) as usize] += if l & 1 == 0 { 0.5 } else { -0.5 };
                }
                _ => {}
            }
        }
    }
    /// For each clause c ∋ k, with z true literals among c's others: the term of j ≠ k in c
    /// changes only when every literal but j and k is false (z = 0, or z = 1 and j is the
    /// true one); k's own term does not depend on k.
    #[inline]
    fn flip(&self, s: &mut [i8], h: &mut [f64], v: usize) {
        let k = self.k;
        let was_true_plain = s[v] > 0;
        for &o in self.occurrences(v) {
            let c = (o >> 1) as usize;
            let clause = &self.lits[c * k..c * k + k];
            // Whether v's literal in c is true before the flip.
            let before = was_true_plain == (o & 1 == 0);
            let mut z = 0;
            let mut last = 0u32;
            for &l in clause {
                if (l >> 1) as usize != v && Formula::is_true(l, s) {
                    z += 1;
                    last = l;
                }
            }
            // j's others-false indicator is [v's literal false]·[the rest false]: it rises
            // when v's literal turns false (it was true) and falls when it turns true.
            let d = if before { 1.0 } else { -1.0 };
            match z {
                0 => {
                    for &l in clause {
                        if (l >> 1) as usize != v {
                            h[(l >> 1) as usize] += if l & 1 == 0 { 0.5 * d } else { -0.5 * d };
                        }
                    }
                }
                1 => {
                    h[(last >> 1) as usize] += if last & 1 == 0 { 0.5 * d } else { -0.5 * d };
                }
                _ => {}
            }
        }
        s[v] = -s[v];
    }
}

/// Whether a 2-SAT formula is satisfiable: the implication graph (¬a → b and ¬b → a per
/// clause a ∨ b) has no variable in the same strongly connected component as its negation
/// (Aspvall, Plass & Tarjan 1979). Components by an iterative Tarjan search; O(n + m).
pub fn two_sat_satisfiable(f: &Formula) -> bool {
    assert_eq!(f.k, 2, "the implication graph decides 2-SAT only");
    let nodes = 2 * f.n;
    // Node of a literal: 2v for σ_v = +1 true ("v"), 2v + 1 for "¬v"; negation is ^ 1.
    let node = |l: u32| l as usize;
    let mut deg = vec![0usize; nodes + 1];
    for c in f.lits.chunks_exact(2) {
        deg[node(c[0] ^ 1) + 1] += 1;
        deg[node(c[1] ^ 1) + 1] += 1;
    }
    for i in 0..nodes {
        deg[i + 1] += deg[i];
    }
    let mut fill = deg.clone();
    let mut adj = vec![0u32; deg[nodes]];
    for c in f.lits.chunks_exact(2) {
        let (a, b) = (node(c[0]), node(c[1]));
        adj[fill[a ^ 1]] = b as u32;
        fill[a ^ 1] += 1;
        adj[fill[b ^ 1]] = a as u32;
        fill[b ^ 1] += 1;
    }
    const NONE: usize = usize::MAX;
    let mut index = vec![NONE; nodes];
    let mut low = vec![0usize; nodes];
    let mut comp = vec![NONE; nodes];
    let mut on_stack = vec![false; nodes];
    let mut stack: Vec<usize> = Vec::new();
    let mut call: Vec<(usize, usize)> = Vec::new();
    let (mut next, mut comps) = (0usize, 0usize);
    for root in 0..nodes {
        if index[root] != NONE {
            continue;
        }
        call.push((root, deg[root]));
        index[root] = next;
        low[root] = next;
        next += 1;
        stack.push(root);
        on_stack[root] = true;
        while let Some(&mut (u, ref mut e)) = call.last_mut() {
            if *e < deg[u + 1] {
                let w = adj[*e] as usize;
                *e += 1;
                if index[w] == NONE {
                    index[w] = next;
                    low[w] = next;
                    next += 1;
                    stack.push(w);
                    on_stack[w] = true;
                    call.push((w, deg[w]));
                } else if on_stack[w] {
                    low[u] = low[u].min(index[w]);
                }
            } else {
                call.pop();
                if let Some(&(parent, _)) = call.last() {
                    low[parent] = low[parent].min(low[u]);
                }
                if low[u] == index[u] {
                    loop {
                        let w = stack.pop().expect("u is on the stack");
                        on_stack[w] = false;
                        comp[w] = comps;
                        if w == u {
                            break;
                        }
                    }
                    comps += 1;
                }
            }
        }
    }
    (0..f.n).all(|v| comp[2 * v] != comp[2 * v + 1])
}

#[cfg(test)]
mod tests {
    use super::*;

    fn id(b: u8) -> Id {
        [b; 32]
    }

    /// The fields are the exact gains: for every σ of small formulas and every j, flipping j
    /// changes H by −2σ_j h_j, and `flip` leaves the fields equal to a fresh computation.
    #[test]
    fn fields_are_gains_and_flips_update_them() {
        for (k, m) in [(2, 9), (3, 20), (4, 14)] {
            let f = Formula::sample(7, k, m, &id(k as u8), 0.0);
            let mut s = vec![1i8; 7];
            let mut h = vec![0.0; 7];
            f.fields(&s, &mut h);
            let mut r = stream(&id(9), Purpose::Algorithm, 0);
            for _ in 0..300 {
                let e = f.energy(&s);
                for j in 0..7 {
                    let mut t = s.clone();
                    t[j] = -t[j];
                    assert_eq!(f.energy(&t) - e, -2.0 * s[j] as f64 * h[j]);
                }
                let v = r.below(7) as usize;
                f.flip(&mut s, &mut h, v);
                let mut fresh = vec![0.0; 7];
                f.fields(&s, &mut fresh);
                assert_eq!(h, fresh);
            }
        }
    }

    /// Sampling: m clauses of k distinct variables; about half the literals negated; the copy
    /// keeps a fraction 1 − ε of the clauses (binomial, 5 standard errors), nested in ε.
    #[test]
    fn sampling_and_correlated_copy() {
        let (n, k, m) = (500, 3, 20_000);
        let f = Formula::sample(n, k, m, &id(1), 0.0);
        assert_eq!(f.clauses(), m);
        for c in f.literals().chunks_exact(k) {
            assert!(c[0] >> 1 != c[1] >> 1 && c[0] >> 1 != c[2] >> 1 && c[1] >> 1 != c[2] >> 1);
        }
        let neg = f.literals().iter().filter(|&&l| l & 1 == 1).count() as f64;
        let total = (m * k) as f64;
        assert!((neg / total - 0.5).abs() < 5.0 * (0.25 / total).sqrt());
        let kept = |g: &Formula| {
            f.literals()
                .chunks_exact(k)
                .zip(g.literals().chunks_exact(k))
                .map(|(a, b)| a == b)
                .collect::<Vec<bool>>()
        };
        let a = kept(&Formula::sample(n, k, m, &id(1), 0.1));
        let b = kept(&Formula::sample(n, k, m, &id(1), 0.3));
        for (eps, x) in [(0.1, &a), (0.3, &b)] {
            let frac = x.iter().filter(|&&t| t).count() as f64 / m as f64;
            let se = (eps * (1.0 - eps) / m as f64).sqrt();
            assert!(
                (frac - (1.0 - eps)).abs() < 5.0 * se,
                "ε {eps}: kept {frac}"
            );
        }
        // Nested: a clause kept at ε = 0.3 is kept at ε = 0.1.
        assert!(a.iter().zip(&b).all(|(&x, &y)| x || !y));
    }

    /// The implication-graph decision equals exhaustive search on 300 small 2-SAT formulas
    /// around the threshold (both outcomes occur).
    #[test]
    fn two_sat_decision_matches_enumeration() {
        let mut seen = [0usize; 2];
        for seed in 0..300u32 {
            let n = 6 + (seed % 7) as usize;
            let m = (n as f64 * (0.8 + 0.005 * seed as f64)) as usize;
            let mut i = [0u8; 32];
            i[..4].copy_from_slice(&seed.to_le_bytes());
            let f = Formula::sample(n, 2, m, &i, 0.0);
            let brute = (0..1u32 << n).any(|x| {
                let s: Vec<i8> = (0..n)
                    .map(|b| if x >> b & 1 == 1 { 1 } else { -1 })
                    .collect();
                f.unsatisfied(&s) == 0
            });
            assert_eq!(two_sat_satisfiable(&f), brute, "seed {seed}");
            seen[brute as usize] += 1;
        }
        assert!(seen[0] > 20 && seen[1] > 20, "{seen:?}");
    }
}
