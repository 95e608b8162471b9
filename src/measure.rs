//! Measurements on outputs: overlap and distance (spins: integer sums, so exact; points: f64
//! sums in a fixed order).

/// Σσ_i of a ±1 configuration (exact).
pub fn spin_sum(s: &[i8]) -> i64 {
    s.iter().map(|&x| x as i64).sum()
}

/// The magnetisation Σσ_i/n (0 for n = 0).
pub fn magnetisation(s: &[i8]) -> f64 {
    spin_sum(s) as f64 / s.len().max(1) as f64
}

/// σ·τ/n.
pub fn overlap(a: &[i8], b: &[i8]) -> f64 {
    assert_eq!(a.len(), b.len());
    let s: i64 = a.iter().zip(b).map(|(&x, &y)| (x * y) as i64).sum();
    s as f64 / a.len() as f64
}

/// ‖σ − τ‖/√n for σ, τ ∈ {±1}^n: 2·sqrt(#differing / n).
pub fn distance(a: &[i8], b: &[i8]) -> f64 {
    assert_eq!(a.len(), b.len());
    let diff = a.iter().zip(b).filter(|(x, y)| x != y).count();
    2.0 * (diff as f64 / a.len() as f64).sqrt()
}

/// x·y/n for points on the sphere of radius √n.
pub fn overlap_points(a: &[f64], b: &[f64]) -> f64 {
    assert_eq!(a.len(), b.len());
    a.iter().zip(b).map(|(x, y)| x * y).sum::<f64>() / a.len() as f64
}

/// ‖x − y‖/√n.
pub fn distance_points(a: &[f64], b: &[f64]) -> f64 {
    assert_eq!(a.len(), b.len());
    (a.iter().zip(b).map(|(x, y)| (x - y).powi(2)).sum::<f64>() / a.len() as f64).sqrt()
}

/// A distance as the `_sym` columns report it: modulo the global flip when the model has that
/// symmetry ([`distance_modulo_flip`]), else unchanged.
pub fn distance_sym(d: f64, symmetric: bool) -> f64 {
    if symmetric {
        distance_modulo_flip(d)
    } else {
        d
    }
}

/// An overlap as the `_sym` columns report it: |q| when the model has the global-flip
/// symmetry, else unchanged.
pub fn overlap_sym(q: f64, symmetric: bool) -> f64 {
    if symmetric { q.abs() } else { q }
}

/// The distance to the nearer of y and −y, given d = ‖x − y‖/√n for two points of norm √n
/// (±1 spins, or points on the sphere): ‖x + y‖²/n = 4 − d², so it is min(d, √(4 − d²)). For a
/// model with H(−x) = H(x), x and −x are one state, and this is how far an output moved.
/// Returns d itself (the same bits) when it is the nearer.
pub fn distance_modulo_flip(d: f64) -> f64 {
    if d * d <= 2.0 {
        d
    } else {
        (4.0 - d * d).max(0.0).sqrt()
    }
}

/// Every pair (a < b) of replica outputs with its overlap, and every triple (a < b < c) with
/// its three overlaps sorted increasingly.
#[allow(clippy::type_complexity)]
pub fn replica_overlaps(outs: &[Vec<f64>]) -> (Vec<(u32, u32, f64)>, Vec<([u32; 3], [f64; 3])>) {
    let q = |a: usize, b: usize| overlap_points(&outs[a], &outs[b]);
    let k = outs.len();
    let (mut pairs, mut triples) = (Vec::new(), Vec::new());
    for a in 0..k {
        for b in a + 1..k {
            pairs.push((a as u32, b as u32, q(a, b)));
            for c in b + 1..k {
                let mut qs = [q(a, b), q(a, c), q(b, c)];
                qs.sort_by(f64::total_cmp);
                triples.push(([a as u32, b as u32, c as u32], qs));
            }
        }
    }
    (pairs, triples)
}

/// Disorder chaos of K independent samples on J (`on_j`) and K on J' (`on_jp`), sample a on J'
/// being the coupled rerun of sample a on J. Returns the means of f(R) over: pairs a < b on J
/// (within), pairs a < b on J' (within, perturbed), pairs a ≠ b across (cross: independent
/// samples of μ_J and μ_J'), and the K coupled pairs (a, a); f(R) = |R| for models whose σ and
/// −σ are one state, else R.
pub fn chaos_overlaps(on_j: &[Vec<f64>], on_jp: &[Vec<f64>], symmetric: bool) -> [f64; 4] {
    let f = |x: &[f64], y: &[f64]| overlap_sym(overlap_points(x, y), symmetric);
    let k = on_j.len().min(on_jp.len());
    let mean = |v: Vec<f64>| v.iter().sum::<f64>() / v.len().max(1) as f64;
    let mut within = Vec::new();
    let mut within_p = Vec::new();
    let mut cross = Vec::new();
    for a in 0..k {
        for b in 0..k {
            if a < b {
                within.push(f(&on_j[a], &on_j[b]));
                within_p.push(f(&on_jp[a], &on_jp[b]));
            }
            if a != b {
                cross.push(f(&on_j[a], &on_jp[b]));
            }
        }
    }
    let coupled = (0..k).map(|a| f(&on_j[a], &on_jp[a])).collect();
    [mean(within), mean(within_p), mean(cross), mean(coupled)]
}

/// A time series kept in at most `cap` block means: when full, neighbouring blocks are merged
/// and the block length doubles, so a run of any length keeps a bounded, evenly thinned trace.
#[derive(Clone, Debug)]
pub struct Trace {
    cap: usize,
    block: u64,
    blocks: Vec<f64>,
    partial: f64,
    filled: u64,
}

impl Trace {
    /// `cap` ≥ 2, rounded up to an even number.
    pub fn new(cap: usize) -> Trace {
        Trace {
            cap: cap.max(2).div_ceil(2) * 2,
            block: 1,
            blocks: Vec::new(),
            partial: 0.0,
            filled: 0,
        }
    }

    pub fn push(&mut self, x: f64) {
        self.partial += x;
        self.filled += 1;
        if self.filled == self.block {
            self.blocks.push(self.partial / self.block as f64);
            self.partial = 0.0;
            self.filled = 0;
            if self.blocks.len() == self.cap {
                self.blocks = self.blocks.chunks(2).map(|p| 0.5 * (p[0] + p[1])).collect();
                self.block *= 2;
            }
        }
    }

    /// The block means (an incomplete last block is dropped) and the block length.
    pub fn blocks(&self) -> (&[f64], u64) {
        (&self.blocks, self.block)
    }

    /// The block means merged further, by neighbouring pairs, until at most `max` remain (an
    /// odd last block is dropped), with their block length.
    pub fn thinned(&self, max: usize) -> (Vec<f64>, u64) {
        let (mut v, mut block) = (self.blocks.clone(), self.block);
        while v.len() > max.max(1) {
            v = v.chunks_exact(2).map(|p| 0.5 * (p[0] + p[1])).collect();
            block *= 2;
        }
        (v, block)
    }

    /// The integrated autocorrelation time of the series after its first half (the first half
    /// is burn-in), in units of pushes: [`integrated_autocorrelation`] of the block means times
    /// the block length. None with fewer than 16 blocks left.
    pub fn autocorrelation_time(&self) -> Option<f64> {
        let half = &self.blocks[self.blocks.len() / 2..];
        (half.len() >= 16).then(|| integrated_autocorrelation(half) * self.block as f64)
    }
}

/// The integrated autocorrelation time τ = 1/2 + Σ_{k=1}^{M} ρ(k) of a series, with Sokal's
/// automatic window: the smallest M with M ≥ 5τ(M) (A. D. Sokal, Monte Carlo Methods in
/// Statistical Mechanics: Foundations and New Algorithms, 1997; recalled), M at most a
/// quarter of the length. 1/2 for a series without correlation; a constant series gives 1/2.
/// Independent samples have τ = 1/2 in this convention, so the effective number of samples
/// is length/(2τ).
pub fn integrated_autocorrelation(x: &[f64]) -> f64 {
    let n = x.len();
    if n < 2 {
        return 0.5;
    }
    let mean = x.iter().sum::<f64>() / n as f64;
    let c = |k: usize| -> f64 {
        x[..n - k]
            .iter()
            .zip(&x[k..])
            .map(|(a, b)| (a - mean) * (b - mean))
            .sum::<f64>()
            / n as f64
    };
    let c0 = c(0);
    if c0 <= 0.0 {
        return 0.5;
    }
    let mut tau = 0.5;
    for m in 1..=(n / 4).max(1) {
        tau += c(m) / c0;
        if m as f64 >= 5.0 * tau {
            break;
        }
    }
    tau
}

#[cfg(test)]
mod tests {
    /// An AR(1) series x_t = a x_{t−1} + noise has τ = (1 + a)/(2(1 − a)) in this convention
    /// (a textbook identity: Σ_k a^|k| / 2); a = 0.8 gives 4.5. 200,000 steps: the windowed
    /// estimator's relative error is about √(2(2M + 1)/n) ≈ 2%, checked to 10%. White noise
    /// gives 1/2; the trace keeps at most `cap` blocks and their mean is the series' mean.
    #[test]
    fn autocorrelation_of_an_ar1_series() {
        let mut rng = crate::rng::stream(&[9; 32], crate::rng::Purpose::Algorithm, 0);
        let a = 0.8;
        let mut x = 0.0;
        let mut series = Vec::new();
        let mut trace = Trace::new(1000);
        let mut white = Vec::new();
        for _ in 0..200_000 {
            x = a * x + rng.normal();
            series.push(x);
            trace.push(x);
            white.push(rng.normal());
        }
        let tau = integrated_autocorrelation(&series);
        assert!((tau - 4.5).abs() < 0.45, "τ = {tau}");
        let w = integrated_autocorrelation(&white);
        assert!((w - 0.5).abs() < 0.1, "white τ = {w}");
        let (blocks, len) = trace.blocks();
        assert!(
            blocks.len() <= 1000 && blocks.len() >= 500,
            "{}",
            blocks.len()
        );
        assert_eq!(len, 256);
        let m = series[..blocks.len() * len as usize].iter().sum::<f64>()
            / (blocks.len() as f64 * len as f64);
        let mb = blocks.iter().sum::<f64>() / blocks.len() as f64;
        assert!((m - mb).abs() < 1e-9);
        // Thinning keeps block means of the same series: at most the cap, the block length
        // doubled per halving, the first thinned value the mean of its original blocks.
        let (t, tl) = trace.thinned(100);
        assert!(t.len() <= 100 && t.len() > 50, "{}", t.len());
        let k = (tl / len) as usize;
        let first = blocks[..k].iter().sum::<f64>() / k as f64;
        assert!((t[0] - first).abs() < 1e-12 && tl == len * k as u64);
    }

    use super::*;

    #[test]
    fn overlap_and_distance() {
        let a = [1, 1, -1, -1];
        let b = [1, -1, -1, 1];
        assert_eq!(overlap(&a, &a), 1.0);
        assert_eq!(overlap(&a, &b), 0.0);
        assert_eq!(distance(&a, &a), 0.0);
        // ‖a − b‖² = 4 + 4 = 8, n = 4 → sqrt(2); and distance² = 2(1 − overlap).
        assert!((distance(&a, &b) - 2f64.sqrt()).abs() < 1e-15);
        let c = [-1, -1, 1, 1];
        assert_eq!(overlap(&a, &c), -1.0);
        assert_eq!(distance(&a, &c), 2.0);
    }
}
