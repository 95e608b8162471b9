//! Metropolis simulated annealing (Kirkpatrick, Gelatt & Vecchi, Science 220, 671 (1983)).
//!
//! Sequential sweeps i = 0..n−1; β grows linearly from `beta[0]` (first sweep) to `beta[1]`
//! (last sweep). A flip with gain g = −2σ_i h_i is accepted if g ≥ 0, else with probability
//! e^{βg} (the uniform is drawn only for downhill moves). Fields are updated in O(n) per
//! accepted flip. Afterwards the fields are recomputed from scratch (removing rounding drift)
//! and, if `quench` is set, a sequential descent brings the state to a 1-flip-stable one.

use super::{Algorithm, Key, Kind};
use super::{Info, Output, descent, random_start};
use crate::cell::Canon;
use crate::model::SpinModel;
use crate::model::{Instance, ModelSpec};
use crate::rng::Stream;
use crate::spec::{Settings, SpecError};

/// Revision of this algorithm's code. Bump when its numbers change.
pub const REVISION: u32 = 1;

/// Settings of the annealer.
#[derive(Clone, Debug, PartialEq)]
pub struct Params {
    /// Number of sweeps (≥ 1). Default: 200.
    pub sweeps: u64,
    /// Inverse temperature at the first and the last sweep (increasing, first ≥ 0).
    /// Default: [0.1, 4.0].
    pub beta: [f64; 2],
    /// Finish with a zero-temperature sequential descent. Default: true.
    pub quench: bool,
}

impl Default for Params {
    fn default() -> Self {
        Params {
            sweeps: 200,
            beta: [0.1, 4.0],
            quench: true,
        }
    }
}

/// The registry entry of `anneal`.
pub const KIND: Kind = Kind {
    name: "anneal",
    summary: "Metropolis simulated annealing with sequential sweeps and a schedule linear in β. Every ±1 family.",
    keys: &[
        Key {
            name: "sweeps",
            ty: "integer ≥ 1",
            default: "200",
            doc: "number of sweeps of n attempted flips",
        },
        Key {
            name: "beta",
            ty: "`[start, end]`, 0 ≤ start < end",
            default: "`[0.1, 4.0]`",
            doc: "inverse temperature at the first and the last sweep, linear in between",
        },
        Key {
            name: "quench",
            ty: "boolean",
            default: "`true`",
            doc: "finish with a zero-temperature sequential descent",
        },
    ],
    parse,
};

fn parse(s: &Settings<'_>) -> Result<super::AlgoSpec, SpecError> {
    let mut p = Params::default();
    if let Some(x) = s.count("sweeps", 1_000_000_000)? {
        p.sweeps = x;
    }
    if let Some(b) = s.beta_range("beta")? {
        p.beta = b;
    }
    if let Some(q) = s.flag("quench")? {
        p.quench = q;
    }
    Ok(super::AlgoSpec::new(p))
}

impl Algorithm for Params {
    super::identity!();
    fn canon(&self, c: Canon) -> Canon {
        c.with("sweeps", self.sweeps)
            .with("beta", vec![self.beta[0], self.beta[1]])
            .with("quench", self.quench)
    }
    fn work_bytes(&self, n: u64) -> u128 {
        // spins (i8), fields (f64), an order permutation (u32), a copy of the reference.
        n as u128 * (1 + 8 + 4 + 1)
    }
    fn cost(&self, n: u64, flip: f64) -> f64 {
        let quench = if self.quench {
            super::DESCENT_SWEEPS * super::ATTEMPT
        } else {
            0.0
        };
        n as f64 * (flip + self.sweeps as f64 * (super::ATTEMPT + 0.3 * flip) + quench)
    }
    fn unsupported(&self, m: &ModelSpec) -> Option<&'static str> {
        super::spins_only(m)
    }
    fn run(&self, inst: &Instance, rng: &mut Stream) -> Result<Output, super::AlgoError> {
        super::on_cube!(inst, KIND.name, |d| run(self, d, rng))
    }
}

/// β at sweep `sweep` of `steps`.
fn beta_at(p: &Params, sweep: u64, steps: u64) -> f64 {
    if steps > 1 {
        p.beta[0] + (p.beta[1] - p.beta[0]) * sweep as f64 / (steps - 1) as f64
    } else {
        p.beta[1]
    }
}

/// Anneals from a random start drawn from `rng`.
pub fn run<M: SpinModel>(p: &Params, d: &M, rng: &mut Stream) -> Output {
    let n = d.n();
    let mut s = random_start(n, rng);
    let mut info = Info::default();
    let steps = p.sweeps.max(1);
    let small = d
        .as_graph()
        .and_then(|g| g.small_integer_form().map(|(w, b)| (g, w, b)));
    // The f64 fields: the generic loop's state, and what the quench starts from.
    let mut h = if let Some((g, w, bound)) = small {
        let it = Integer { p, g, w: &w, bound };
        let (accepted, h) = sweeps_integer(it, &mut s, rng);
        info.iterations = accepted;
        h
    } else {
        let mut h = vec![0.0; n];
        d.fields(&s, &mut h);
        let mut accept = super::Metropolis::new(d.integer_gain_bound());
        for sweep in 0..steps {
            crate::exec::progress::step(sweep, steps, "sweep");
            accept.set_beta(beta_at(p, sweep, steps));
            for i in 0..n {
                let g = -2.0 * (s[i] as f64) * h[i];
                if g >= 0.0 || accept.accept(rng.uniform(), g) {
                    d.flip(&mut s, &mut h, i);
                    info.iterations += 1;
                }
            }
        }
        h
    };
    info.sweeps = steps;
    info.converged = true;
    if p.quench {
        let q = descent::quench(d, &mut s, &mut h, rng);
        info.iterations += q.iterations;
        info.sweeps += q.sweeps;
        info.converged = q.converged;
    }
    Output {
        spins: s,
        point: None,
        info,
    }
}

/// Exact integer fields for [`sweeps_integer`]: i8 when every |h| ≤ 127 is guaranteed (the
/// gain bound says so; 3-regular ±1 graphs), which keeps the field array in cache, else i32.
trait IntField: Copy + Send + Sync {
    fn get(self) -> i32;
    fn set(v: i32) -> Self;
}

macro_rules! int_field {
    ($t:ty) => {
        impl IntField for $t {
            #[inline(always)]
            fn get(self) -> i32 {
                self as i32
            }
            #[inline(always)]
            fn set(v: i32) -> Self {
                v as $t
            }
        }
    };
}
int_field!(i8);
int_field!(i32);

/// What the integer sweeps read and never change: the schedule, the graph, its couplings as
/// i8 in CSR order, and the bound on the integer gains.
#[derive(Clone, Copy)]
struct Integer<'a> {
    p: &'a Params,
    g: &'a crate::model::sparse::Graph,
    w: &'a [i8],
    bound: usize,
}

/// The sweeps on a graph whose couplings are small integers: fields kept as exact integers
/// (i8 when the gain bound allows, else i32), the couplings as i8, acceptance from the per-β
/// table. Every decision and draw is the one the generic loop makes (the fields are the same
/// integers; the table holds the same `libm::exp(β·g)`), so the output is bit-identical
/// (tested); it is only more compact. Returns the accepted flips and, when the schedule ends
/// with a quench, the final fields as f64 (else nothing: at n = 10⁸ an f64 field array is
/// 0.8 GB that the sweeps never read).
fn sweeps_integer(it: Integer<'_>, s: &mut [i8], rng: &mut Stream) -> (u64, Vec<f64>) {
    // |h_i| ≤ bound/2 for every i.
    if it.bound / 2 <= i8::MAX as usize {
        sweeps_typed::<i8>(it, s, rng)
    } else {
        sweeps_typed::<i32>(it, s, rng)
    }
}

/// How many spins ahead [`sweeps_direct`] and [`integer_fields`] prefetch the neighbours'
/// entries.
const AHEAD: usize = 16;

fn sweeps_typed<F: IntField>(it: Integer<'_>, s: &mut [i8], rng: &mut Stream) -> (u64, Vec<f64>) {
    let mut hi = integer_fields::<F>(it.g, it.w, s);
    let accepted = if s.len() > BLOCKED_ABOVE {
        sweeps_blocked(it, s, &mut hi, rng, BLOCK_SHIFT)
    } else {
        sweeps_direct(it, s, &mut hi, rng)
    };
    let h = if it.p.quench {
        hi.iter().map(|v| v.get() as f64).collect()
    } else {
        Vec::new()
    };
    (accepted, h)
}

/// The integer fields h_i = Σ_j J_ij σ_j, in parallel over blocks of spins (each field its
/// own sum, so the same for any thread count; the f64 fields of the generic loop are the same
/// integers). The gathers of σ_j miss the caches at n = 10⁸: they are prefetched [`AHEAD`]
/// spins ahead, and the serial pass with an f64 array took 3.2 s there.
fn integer_fields<F: IntField>(g: &crate::model::sparse::Graph, w: &[i8], s: &[i8]) -> Vec<F> {
    use rayon::prelude::*;
    const CHUNK: usize = 1 << 16;
    let (offsets, nbr) = g.csr();
    let n = s.len();
    let mut hi: Vec<F> = vec![F::set(0); n];
    crate::kernels::huge_pages(&mut hi);
    hi.par_chunks_mut(CHUNK).enumerate().for_each(|(c, out)| {
        let lo = c * CHUNK;
        for (k, v) in out.iter_mut().enumerate() {
            let i = lo + k;
            prefetch_neighbours(offsets, nbr, s, i + AHEAD);
            let (a, b) = (offsets[i] as usize, offsets[i + 1] as usize);
            let x: i32 = nbr[a..b]
                .iter()
                .zip(&w[a..b])
                .map(|(&j, &wj)| wj as i32 * s[j as usize] as i32)
                .sum();
            *v = F::set(x);
        }
    });
    hi
}

/// Asks for `data[j]` of every neighbour j of spin `i` (nothing past the last spin): the
/// entries a loop over spins will gather or update [`AHEAD`] spins later (a hint; results
/// unchanged).
#[inline(always)]
fn prefetch_neighbours<T>(offsets: &[u64], nbr: &[u32], data: &[T], i: usize) {
    if i + 1 < offsets.len() {
        let (a, b) = (offsets[i] as usize, offsets[i + 1] as usize);
        for &j in &nbr[a..b] {
            crate::kernels::prefetch(data.as_ptr().wrapping_add(j as usize));
        }
    }
}

/// The sweeps with every field update applied at once (prefetched [`AHEAD`] spins ahead).
fn sweeps_direct<F: IntField>(
    it: Integer<'_>,
    s: &mut [i8],
    hi: &mut [F],
    rng: &mut Stream,
) -> u64 {
    let Integer { p, g, w, bound } = it;
    let (offsets, nbr) = g.csr();
    let n = s.len();
    let mut accepted = 0u64;
    integer_schedule(p, bound, |table| {
        for i in 0..n {
            // On a graph larger than the caches every field update is a miss: ask for the
            // fields of the neighbours of spin i + AHEAD now (a hint; results unchanged).
            prefetch_lists(offsets, nbr, w, i, n);
            prefetch_neighbours(offsets, nbr, hi, i + AHEAD);
            if accepts(s[i] as i32 * hi[i].get(), table, rng) {
                s[i] = -s[i];
                let c = 2 * s[i] as i32;
                let (a, b) = (offsets[i] as usize, offsets[i + 1] as usize);
                for (&j, &wj) in nbr[a..b].iter().zip(&w[a..b]) {
                    let v = &mut hi[j as usize];
                    *v = F::set(v.get() + c * wj as i32);
                }
                accepted += 1;
            }
        }
    });
    accepted
}

/// Runs `sweep(table)` for each sweep of the schedule: reports progress, sets β, and passes
/// the table e^{−βk} of the integer gains k ≤ `bound`.
fn integer_schedule(p: &Params, bound: usize, mut sweep: impl FnMut(&[f64])) {
    let steps = p.sweeps.max(1);
    let mut accept = super::Metropolis::new(Some(bound));
    for k in 0..steps {
        crate::exec::progress::step(k, steps, "sweep");
        accept.set_beta(beta_at(p, k, steps));
        sweep(accept.table());
    }
}

/// The Metropolis decision at the integer x = σ_i·h_i (gain −2x): level and uphill moves are
/// accepted without a draw, others with probability e^{−2βx} (one draw).
#[inline(always)]
fn accepts(x: i32, table: &[f64], rng: &mut Stream) -> bool {
    x <= 0 || rng.uniform() < table[(2 * x) as usize]
}

/// How many spins ahead [`prefetch_lists`] asks for the row offsets (the lists half as far).
const LIST_AHEAD: usize = 64;

/// Asks, every fourth spin, for the offsets of spin i + [`LIST_AHEAD`] and the neighbours and
/// couplings of spin i + LIST_AHEAD/2 (below `end`). A spin's adjacency is read only when it
/// flips, a pattern the hardware prefetcher does not follow (a hint; results unchanged).
#[inline(always)]
fn prefetch_lists(offsets: &[u64], nbr: &[u32], w: &[i8], i: usize, end: usize) {
    if i & 3 == 0 && i + LIST_AHEAD < end {
        crate::kernels::prefetch(offsets.as_ptr().wrapping_add(i + LIST_AHEAD));
        let k = offsets[i + LIST_AHEAD / 2] as usize;
        crate::kernels::prefetch(nbr.as_ptr().wrapping_add(k));
        crate::kernels::prefetch(w.as_ptr().wrapping_add(k));
    }
}

/// Above this many spins the fields outgrow the caches and [`sweeps_blocked`] runs instead.
const BLOCKED_ABOVE: usize = 1 << 22;

/// log₂ of the spins per block of [`sweeps_blocked`]: 262 144, so a block's fields (256 KiB as
/// i8) stay in the 1 MiB L2 while it is swept, and the buckets' tails (one line each, 382 at
/// n = 10⁸: 24 KiB) stay in the 32 KiB L1 between appends. Measured at n = 10⁸, 100 sweeps
/// (ns per attempt, one process, the same instance and draws): 2^16 7.6 and 8.2, 2^17 7.2,
/// 2^18 6.8, 7.1 and 7.3, 2^19 7.1; 2^20 was slower than 2^16 in a 30-sweep trial.
const BLOCK_SHIFT: u32 = 18;

/// The same sweeps with the field updates to other blocks of 2^`shift` spins deferred
/// (propagation blocking, Beamer, Asanović & Patterson 2017, "Reducing PageRank communication
/// via propagation blocking"): an accepted flip appends (spin, change) to the bucket of each
/// neighbour's block, and a block's bucket is applied just before the block is swept, while
/// its fields are hot. A field is read only when its spin is visited, and by then every
/// earlier flip's change has been applied: the fields are exact integers, so the order of the
/// additions does not matter (the integers wrap in between, and the visited value fits), and
/// every decision and draw is the one [`sweeps_direct`] makes (unit test). A bucket never
/// overflows: between two visits of a block each other spin flips at most once, so the
/// changes waiting for a block number at most its spins' degrees, the size of its slice of
/// the neighbour array, which the buckets mirror. Random writes over the whole field array
/// (a cache miss each at n = 10⁸) become appends to a few hundred bucket tails.
fn sweeps_blocked<F: IntField>(
    it: Integer<'_>,
    s: &mut [i8],
    hi: &mut [F],
    rng: &mut Stream,
    shift: u32,
) -> u64 {
    let Integer { p, g, w, bound } = it;
    // An entry keeps the spin's index in its block in the low `shift` bits and the change
    // (±2·J, |J| ≤ 127: 10 bits with its sign) in the bits above.
    debug_assert!(
        shift <= 22,
        "a bucket entry keeps the change in 32 − shift bits"
    );
    let (offsets, nbr) = g.csr();
    let n = s.len();
    let block = 1usize << shift;
    let blocks = n.div_ceil(block);
    // Bucket b fills pending[start[b]..tail[b]], within the slice of nbr of block b's spins.
    let start: Vec<usize> = (0..blocks).map(|b| offsets[b << shift] as usize).collect();
    let mut tail = start.clone();
    // 2 MiB pages keep the bucket tails' translations in the TLB (382 tails at n = 10⁸, 3 MiB
    // apart). The pages are mapped from all threads before the first sweep, which would
    // otherwise take their faults one by one (2.5 s of a run at n = 10⁸ here, 1.2–1.4 s so).
    let mut pending = vec![0u32; nbr.len()];
    crate::kernels::huge_pages(&mut pending);
    crate::kernels::prefault_zeroed(&mut pending);
    let mask = (1u32 << shift) - 1;
    let apply = |hi: &mut [F], lo: usize, entries: &[u32]| {
        for &e in entries {
            let j = lo + (e & mask) as usize;
            hi[j] = F::set(hi[j].get().wrapping_add((e as i32) >> shift));
        }
    };
    // Fields per cache line.
    let line = (64 / std::mem::size_of::<F>()).max(1);
    let mut accepted = 0u64;
    integer_schedule(p, bound, |table| {
        for b in 0..blocks {
            let (lo, end) = (b << shift, ((b + 1) << shift).min(n));
            apply(hi, lo, &pending[start[b]..tail[b]]);
            tail[b] = start[b];
            for i in lo..end {
                // Bring the next block's fields in while this one is swept: its bucket is
                // applied to them in random order first, before the sequential pass.
                if i & (line - 1) == 0 {
                    crate::kernels::prefetch(hi.as_ptr().wrapping_add(i + block));
                }
                prefetch_lists(offsets, nbr, w, i, end);
                if accepts(s[i] as i32 * hi[i].get(), table, rng) {
                    s[i] = -s[i];
                    let c = 2 * s[i] as i32;
                    let (a, e) = (offsets[i] as usize, offsets[i + 1] as usize);
                    for (&j, &wj) in nbr[a..e].iter().zip(&w[a..e]) {
                        let (j, d) = (j as usize, c * wj as i32);
                        if (lo..end).contains(&j) {
                            hi[j] = F::set(hi[j].get().wrapping_add(d));
                        } else {
                            let bj = j >> shift;
                            pending[tail[bj]] = (j - (bj << shift)) as u32 | ((d as u32) << shift);
                            tail[bj] += 1;
                        }
                    }
                    accepted += 1;
                }
            }
        }
    });
    for b in 0..blocks {
        apply(hi, b << shift, &pending[start[b]..tail[b]]);
    }
    accepted
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::model::Couplings;
    use crate::model::sk::sample;
    use crate::rng::{Purpose, stream};

    /// More sweeps give a higher energy on average (a property of annealing, common practice):
    /// over 6 instances at n = 200, 300 sweeps beat 3 sweeps on the mean.
    #[test]
    fn longer_schedules_do_better() {
        let n = 200;
        let mut short = 0.0;
        let mut long = 0.0;
        for seed in 0..6u8 {
            let d = sample(n, Couplings::Gaussian, &[seed; 32], 0.0);
            for (sweeps, acc) in [(3u64, &mut short), (300u64, &mut long)] {
                let p = Params {
                    sweeps,
                    quench: false,
                    ..Params::default()
                };
                let out = run(
                    &p,
                    &d,
                    &mut stream(&[100 + seed; 32], Purpose::Algorithm, 0),
                );
                *acc += d.energy(&out.spins) / n as f64;
            }
        }
        assert!(long > short + 6.0 * 0.02, "long {long} short {short}");
    }

    /// The blocked sweeps make every decision the direct ones make: on random graphs with
    /// integer couplings (±1 in i8 fields; up to ±40 with degrees up to 12 in i32 fields, whose
    /// deferred partial sums may leave the visited range), with blocks of 16 and 64 spins, the
    /// spins, the fields and the count of accepted flips are identical.
    #[test]
    fn blocked_sweeps_equal_direct_ones() {
        use crate::model::sparse::Graph;
        let mut r = stream(&[7; 32], Purpose::Algorithm, 0);
        for (n, degree, top) in [(1000usize, 3usize, 1i32), (700, 12, 40)] {
            let mut edges = Vec::new();
            let mut seen = std::collections::HashSet::new();
            while edges.len() < n * degree / 2 {
                let a = (r.uniform() * n as f64) as u32;
                let b = (r.uniform() * n as f64) as u32;
                let x = 1 + (r.uniform() * top as f64) as i32;
                if a != b && seen.insert((a.min(b), a.max(b))) {
                    edges.push((a, b, (x * if r.uniform() < 0.5 { -1 } else { 1 }) as f64));
                }
            }
            let g = Graph::from_edges(n, &edges);
            let (w, bound) = g.small_integer_form().unwrap();
            assert_eq!(Some(bound), g.integer_gain_bound());
            // From hot (most moves accepted) to cold, in units of the couplings.
            let p = Params {
                sweeps: 40,
                beta: [0.02 / top as f64, 3.0 / top as f64],
                ..Params::default()
            };
            let start = random_start(n, &mut r);
            let mut h0 = vec![0.0; n];
            for (i, hv) in h0.iter_mut().enumerate() {
                let (nb, ws) = g.adj(i);
                *hv = nb
                    .iter()
                    .zip(ws)
                    .map(|(&j, x)| x * start[j as usize] as f64)
                    .sum();
            }
            // One run in fields of type F: direct (None) or blocked in blocks of 2^shift.
            fn sweep<F: IntField>(
                args: (&Params, &Graph, &[i8], usize, &[i8], &[f64]),
                shift: Option<u32>,
            ) -> (Vec<i8>, Vec<i32>, u64) {
                let (p, g, w, bound, start, h0) = args;
                let mut s = start.to_vec();
                let mut rng = stream(&[8; 32], Purpose::Algorithm, 0);
                let mut hi: Vec<F> = h0.iter().map(|&x| F::set(x as i32)).collect();
                let it = Integer { p, g, w, bound };
                let a = match shift {
                    None => sweeps_direct(it, &mut s, &mut hi, &mut rng),
                    Some(k) => sweeps_blocked(it, &mut s, &mut hi, &mut rng, k),
                };
                (s, hi.iter().map(|v| v.get()).collect(), a)
            }
            let args = (&p, &g, &w[..], bound, &start[..], &h0[..]);
            let typed = |shift| {
                if top == 1 {
                    sweep::<i8>(args, shift)
                } else {
                    sweep::<i32>(args, shift)
                }
            };
            let direct = typed(None);
            assert!(
                direct.2 > n as u64,
                "too few flips to test anything: {}",
                direct.2
            );
            for shift in [4, 6, 9] {
                assert_eq!(typed(Some(shift)), direct, "n = {n}, blocks of 2^{shift}");
            }
        }
    }

    #[test]
    fn deterministic_and_quenched() {
        let n = 80;
        let d = sample(n, Couplings::Gaussian, &[9; 32], 0.0);
        let p = Params::default();
        let a = run(&p, &d, &mut stream(&[1; 32], Purpose::Algorithm, 0));
        let b = run(&p, &d, &mut stream(&[1; 32], Purpose::Algorithm, 0));
        assert_eq!(a.spins, b.spins);
        let e = d.energy(&a.spins);
        let mut s = a.spins.clone();
        for k in 0..n {
            s[k] = -s[k];
            assert!(d.energy(&s) <= e + 1e-9);
            s[k] = -s[k];
        }
    }

    /// The integer loop for graphs with small integer couplings (table of e^{βg}, i32 fields,
    /// i8 couplings) is bit-identical to the generic loop (exp per attempt, f64 fields): the
    /// same graph behind a wrapper that hides both specialisations gives the same spins and
    /// the same count of accepted flips, for ±1 (regular) and cut (Erdős–Rényi) couplings,
    /// with i8 fields and (degree 140) i32 fields.
    #[test]
    fn integer_loop_equals_generic_loop() {
        use crate::model::sparse::{Plain, erdos_renyi, regular};
        // Fields fit i8 on the first two (|h| ≤ degree); degree 140 needs the i32 path.
        let graphs = [
            regular(3000, 3, Couplings::Pm1, &[4; 32], 0.0),
            erdos_renyi(3000, 4.0, Couplings::Cut, &[5; 32], 0.0),
            regular(600, 140, Couplings::Pm1, &[7; 32], 0.0),
        ];
        for g in &graphs {
            assert!(g.small_integer_form().is_some());
            // With the quench (which starts from the integer loop's fields) and without.
            for quench in [true, false] {
                let p = Params {
                    sweeps: 50,
                    quench,
                    ..Params::default()
                };
                let a = run(&p, g, &mut stream(&[6; 32], Purpose::Algorithm, 0));
                let b = run(&p, &Plain(g), &mut stream(&[6; 32], Purpose::Algorithm, 0));
                assert_eq!(a.spins, b.spins);
                assert_eq!(a.info, b.info);
            }
        }
    }
}
