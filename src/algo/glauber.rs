//! Glauber (heat-bath) dynamics at inverse temperature β: a sampler of the Gibbs measure
//! μ_β(σ) ∝ exp(β H(σ)) on every ±1 family (Glauber, J. Math. Phys. 4, 294 (1963)).
//!
//! From a uniformly random start, each attempt picks a site i (in order, or uniformly at random
//! with `scan = "random"`), and sets σ_i = +1 with probability 1/(1 + e^{−2β h_i}), else −1,
//! where h_i = ∂H/∂σ_i is the local field (H is multilinear, so H = σ_i h_i + terms free of σ_i
//! and this is the exact conditional law). One uniform per attempt (two with a random scan:
//! the site, then the uniform), drawn whether or not the spin changes, so the sequence of
//! draws does not depend on the state. Fields are updated as in annealing when a spin changes.
//! A sweep is n attempts. The output is the state after the last sweep: one sample, whose law
//! tends to μ_β as the number of sweeps grows (exponentially slowly at low temperature: use
//! tempering's sampling mode there).

use super::{Algorithm, Key, Kind};
use super::{Info, Output, random_start};
use crate::cell::Canon;
use crate::model::SpinModel;
use crate::model::{Instance, ModelSpec};
use crate::rng::Stream;
use crate::spec::{Settings, SpecError};

/// Revision of this algorithm's code. Bump when its numbers change (2: records the mixing
/// diagnostics `autocorrelation_time` and `overlap_initial`; the samples are unchanged).
pub const REVISION: u32 = 2;

/// Order in which sites are visited.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Scan {
    /// i = 0, 1, …, n − 1 in every sweep.
    Sequential,
    /// n sites drawn uniformly, with replacement, per sweep.
    Random,
}

const SCANS: [&str; 2] = ["random", "sequential"];

/// Settings of the sampler.
#[derive(Clone, Debug, PartialEq)]
pub struct Params {
    /// Inverse temperature (0, 100]. Default 1.0.
    pub beta: f64,
    /// Sweeps of n attempts (≥ 1). Default 1000.
    pub sweeps: u64,
    /// Site order. Default random.
    pub scan: Scan,
}

impl Default for Params {
    fn default() -> Self {
        Params {
            beta: 1.0,
            sweeps: 1000,
            scan: Scan::Random,
        }
    }
}

/// The registry entry of `glauber`.
pub const KIND: Kind = Kind {
    name: "glauber",
    summary: "Heat-bath (Glauber) sampler of the Gibbs measure exp(βH) at one inverse temperature; the output is the state after the last sweep. Every ±1 family.",
    keys: &[
        Key {
            name: "beta",
            ty: "number in (0, 100]",
            default: "1.0",
            doc: "inverse temperature of the measure sampled",
        },
        Key {
            name: "sweeps",
            ty: "integer ≥ 1",
            default: "1000",
            doc: "sweeps of n single-site updates",
        },
        Key {
            name: "scan",
            ty: "`\"random\"` or `\"sequential\"`",
            default: "`\"random\"`",
            doc: "sites drawn uniformly at random, or visited in order",
        },
    ],
    parse,
};

fn parse(s: &Settings<'_>) -> Result<super::AlgoSpec, SpecError> {
    let mut p = Params::default();
    if let Some(b) = s.beta_one("beta")? {
        p.beta = b;
    }
    if let Some(x) = s.count("sweeps", 1_000_000_000)? {
        p.sweeps = x;
    }
    if let Some(i) = s.choice("scan", "scan", &SCANS)? {
        p.scan = [Scan::Random, Scan::Sequential][i];
    }
    Ok(super::AlgoSpec::new(p))
}

impl Algorithm for Params {
    super::identity!();
    fn canon(&self, c: Canon) -> Canon {
        c.with("beta", self.beta).with("sweeps", self.sweeps).with(
            "scan",
            match self.scan {
                Scan::Random => "random",
                Scan::Sequential => "sequential",
            },
        )
    }
    fn work_bytes(&self, n: u64) -> u128 {
        // spins (i8) and fields (f64).
        n as u128 * 9
    }
    fn cost(&self, n: u64, flip: f64) -> f64 {
        n as f64 * (flip + self.sweeps as f64 * (super::ATTEMPT + 0.5 * flip))
    }
    fn unsupported(&self, m: &ModelSpec) -> Option<&'static str> {
        super::spins_only(m)
    }
    fn gibbs_beta(&self) -> Option<f64> {
        Some(self.beta)
    }
    fn run(&self, inst: &Instance, rng: &mut Stream) -> Result<Output, super::AlgoError> {
        super::on_cube!(inst, KIND.name, |d| run(self, d, rng))
    }
}

/// Samples from a random start drawn from `rng`.
///
/// With the sample it reports the mixing diagnostics: the integrated autocorrelation time of
/// the energy per sweep over the second half of the run, and the overlap with the start.
pub fn run<M: SpinModel>(p: &Params, d: &M, rng: &mut Stream) -> Output {
    let mut trace = crate::measure::Trace::new(TRACE_BLOCKS);
    let out = run_observed(p, d, rng, |_, e| trace.push(e));
    out.with_mixing(&trace)
}

/// Block means kept of the energy trace (see [`crate::measure::Trace`]).
pub const TRACE_BLOCKS: usize = 4096;

/// [`run`], calling `seen(sweep, H)` with the energy after every sweep (for traces and tests;
/// the draws are the same). H is tracked from the start's energy by the exact changes of the
/// accepted flips.
pub fn run_observed<M: SpinModel>(
    p: &Params,
    d: &M,
    rng: &mut Stream,
    mut seen: impl FnMut(u64, f64),
) -> Output {
    let n = d.n();
    let mut s = random_start(n, rng);
    let start = s.clone();
    let mut h = vec![0.0; n];
    d.fields(&s, &mut h);
    let mut energy = d.energy(&s);
    let mut info = Info::default();
    let two_beta = 2.0 * p.beta;
    // Graphs with small integer couplings (|h| ≤ 127): the byte-field loop, with the factors
    // 1 + e^{−2βh} tabulated once from the same `libm::exp` of the same arguments.
    let small = d
        .as_graph()
        .and_then(|g| Some((g, g.small_integer_form()?)))
        .filter(|(_, (_, b))| b / 2 <= i8::MAX as usize)
        .map(|(g, (w, b))| (g, w, (b / 2) as i64));
    if let Some((g, w, off)) = small {
        let t: Vec<f64> = (-off..=off)
            .map(|k| 1.0 + libm::exp(-two_beta * k as f64))
            .collect();
        info.iterations = match p.scan {
            Scan::Sequential => {
                sweeps_small::<false>(p, g, &w, &t, off, &mut s, rng, energy, &mut seen)
            }
            Scan::Random => sweeps_small::<true>(p, g, &w, &t, off, &mut s, rng, energy, &mut seen),
        };
    } else {
        for sweep in 0..p.sweeps {
            crate::exec::progress::step(sweep, p.sweeps, "sweep");
            for t in 0..n {
                let i = match p.scan {
                    Scan::Sequential => t,
                    Scan::Random => rng.below(n as u64) as usize,
                };
                // σ_i = +1 with probability 1/(1 + e^{−2βh_i}); an overflow to ∞ gives −1.
                let up = rng.uniform() * (1.0 + libm::exp(-two_beta * h[i])) < 1.0;
                if up != (s[i] > 0) {
                    energy -= 2.0 * (s[i] as f64) * h[i];
                    d.flip(&mut s, &mut h, i);
                    info.iterations += 1;
                }
            }
            seen(sweep, energy);
        }
    }
    info.sweeps = p.sweeps;
    info.converged = true;
    info.overlap_initial = Some(crate::measure::overlap(&start, &s));
    Output {
        spins: s,
        point: None,
        info,
    }
}

/// The sweeps on a graph whose couplings are small integers (|h| ≤ 127): fields as i8, the
/// couplings as i8, the factors 1 + e^{−2βh} from `table` (index h + `off`), one scan order
/// per instantiation (`RANDOM`: sites drawn uniformly). Every draw and decision is the generic
/// loop's (the same integers, the same tabulated `libm::exp`), and the energy passed to `seen`
/// is the same exact integer, so the output is bit-identical (tested); the arrays are only
/// smaller (1 byte per field instead of 8). Returns the spins changed.
#[allow(clippy::too_many_arguments)]
fn sweeps_small<const RANDOM: bool>(
    p: &Params,
    g: &crate::model::sparse::Graph,
    w: &[i8],
    table: &[f64],
    off: i64,
    s: &mut [i8],
    rng: &mut Stream,
    start_energy: f64,
    seen: &mut impl FnMut(u64, f64),
) -> u64 {
    let (offsets, nbr) = g.csr();
    let n = s.len();
    assert!(offsets.len() == n + 1 && nbr.len() == w.len());
    // Checked once here, so the neighbour updates below index `h` without a bounds check.
    assert!(nbr.iter().all(|&j| (j as usize) < n));
    // A regular graph's neighbour lists start at i·d: no offsets to load per flip.
    let degree = (n > 0 && offsets.windows(2).all(|o| o[1] - o[0] == offsets[1]))
        .then(|| offsets[1] as usize);
    let mut h: Vec<i8> = (0..n)
        .map(|i| {
            let (a, b) = (offsets[i] as usize, offsets[i + 1] as usize);
            nbr[a..b]
                .iter()
                .zip(&w[a..b])
                .map(|(&j, &wj)| wj as i32 * s[j as usize] as i32)
                .sum::<i32>() as i8
        })
        .collect();
    // Indexed by the field's byte with its sign bit flipped (h + 128), a 256-entry table
    // needs no bounds check; |h| ≤ off ≤ 127, so only the entries h + off of `table` are read.
    let mut by_byte = [1.0f64; 256];
    for x in -off..=off {
        by_byte[(x + 128) as usize] = table[(x + off) as usize];
    }
    let h = &mut h[..n];
    let mut change = 0i64;
    let mut flips = 0u64;
    for sweep in 0..p.sweeps {
        crate::exec::progress::step(sweep, p.sweeps, "sweep");
        for t in 0..n {
            let i = if RANDOM {
                rng.below(n as u64) as usize
            } else {
                t
            };
            let x = h[i];
            let up = rng.uniform() * by_byte[(x as u8 ^ 0x80) as usize] < 1.0;
            let x = x as i64;
            if up != (s[i] > 0) {
                change -= 2 * s[i] as i64 * x;
                s[i] = -s[i];
                let c = 2 * s[i];
                let (a, b) = match degree {
                    Some(d) => (i * d, i * d + d),
                    None => (offsets[i] as usize, offsets[i + 1] as usize),
                };
                for (&j, &wj) in nbr[a..b].iter().zip(&w[a..b]) {
                    // SAFETY: every neighbour index is below n = h.len() (asserted above).
                    let v = unsafe { h.get_unchecked_mut(j as usize) };
                    *v = v.wrapping_add(c.wrapping_mul(wj));
                }
                flips += 1;
            }
        }
        seen(sweep, start_energy + change as f64);
    }
    flips
}

#[cfg(test)]
pub(crate) mod tests {
    use super::*;
    use crate::model::Couplings;
    use crate::model::sk::sample;
    use crate::rng::{Purpose, stream};

    /// Mean energy per spin of SK at β < 1 is β/2 as n → ∞: the quenched free energy equals
    /// the annealed one, log 2 + β²/4 (Aizenman, Lebowitz & Ruelle, Commun. Math. Phys. 112, 3
    /// (1987)). At finite n the annealed value is exact for E Z: log E Z = n log 2 + β²(n − 1)/4
    /// (kiln's normalisation: Var H = (n − 1)/2), so the reference is β(n − 1)/(2n); the
    /// quenched correction is O(1/n) (recalled from the same paper: −β³/(2(1 − β²)n) at leading
    /// order, 8e-5 here), inside the tolerance.
    ///
    /// One chain per instance at n = 1000, β = 0.5: 200 sweeps of burn-in (the chain mixes in
    /// O(1) sweeps at this temperature), then the time average of H/n over 800 sweeps. The
    /// standard error is estimated from 8 independent instances; the check is 4 standard errors.
    #[test]
    fn mean_energy_at_high_temperature_is_the_annealed_value() {
        let (n, beta) = (1000usize, 0.5);
        let p = Params {
            beta,
            sweeps: 1000,
            scan: Scan::Random,
        };
        let mut means = Vec::new();
        for seed in 0..8u8 {
            let d = sample(n, Couplings::Gaussian, &[40 + seed; 32], 0.0);
            let (mut sum, mut count, mut last) = (0.0, 0u32, 0.0);
            let out = run_observed(
                &p,
                &d,
                &mut stream(&[seed; 32], Purpose::Algorithm, 0),
                |sweep, e| {
                    last = e;
                    if sweep >= 200 {
                        sum += e / n as f64;
                        count += 1;
                    }
                },
            );
            // The tracked energy is the output's.
            assert!((last - d.energy(&out.spins)).abs() < 1e-9 * n as f64);
            means.push(sum / count as f64);
        }
        let (m, se) = crate::fit::mean_se(&means);
        let want = beta * (n - 1) as f64 / (2.0 * n as f64);
        assert!(
            (m - want).abs() < 4.0 * se + 2e-4,
            "mean {m} ± {se}, annealed {want}"
        );
        assert!(
            se < 2e-3,
            "the time averages scatter more than expected: {se}"
        );
    }

    /// The tabulated path for integer fields makes the decisions of the generic path: a ±1
    /// 3-regular graph and an Erdős–Rényi max-cut graph behind a wrapper that hides their
    /// integer couplings give the same spins and flips.
    #[test]
    fn integer_table_equals_generic_path() {
        use crate::model::sparse::{Plain, erdos_renyi, regular};
        let graphs = [
            regular(2000, 3, Couplings::Pm1, &[4; 32], 0.0),
            erdos_renyi(2000, 4.0, Couplings::Cut, &[5; 32], 0.0),
        ];
        for g in &graphs {
            assert!(SpinModel::integer_gain_bound(g).is_some());
            for scan in [Scan::Random, Scan::Sequential] {
                let p = Params {
                    beta: 0.7,
                    sweeps: 30,
                    scan,
                };
                let a = run(&p, g, &mut stream(&[6; 32], Purpose::Algorithm, 0));
                let b = run(&p, &Plain(g), &mut stream(&[6; 32], Purpose::Algorithm, 0));
                assert_eq!(a.spins, b.spins);
                assert_eq!(a.info, b.info);
            }
        }
    }

    /// The critical value of χ² with 15 degrees of freedom at significance 0.001: 37.70
    /// (recalled from standard χ² tables, e.g. Abramowitz & Stegun 1964, Table 26.8; the
    /// Wilson–Hilferty approximation gives 37.8).
    pub(crate) const CHI2_15_AT_0_001: f64 = 37.70;

    /// Pearson's χ² of `draws` samples of `draw(k)` against the exact Gibbs measure
    /// exp(βH)/Z of an instance small enough to enumerate: the 2^n states sorted by energy are
    /// cut into 16 bins of nearly equal Gibbs probability (so every expected count is about
    /// draws/16), and the statistic has 15 degrees of freedom.
    pub(crate) fn chi_square<M: SpinModel>(
        d: &M,
        beta: f64,
        draws: u64,
        mut draw: impl FnMut(u64) -> Vec<i8>,
    ) -> f64 {
        let n = d.n();
        let states: Vec<(f64, usize)> = (0..1usize << n)
            .map(|x| {
                let s: Vec<i8> = (0..n)
                    .map(|i| if x >> i & 1 == 1 { 1 } else { -1 })
                    .collect();
                (d.energy(&s), x)
            })
            .collect();
        let top = states.iter().map(|e| e.0).fold(f64::MIN, f64::max);
        let mut order: Vec<usize> = (0..states.len()).collect();
        order.sort_by(|&a, &b| states[a].0.total_cmp(&states[b].0));
        let z: f64 = states.iter().map(|e| (beta * (e.0 - top)).exp()).sum();
        let mut bin_of = vec![0usize; states.len()];
        let mut expected = [0.0; 16];
        let mut acc = 0.0;
        for &k in &order {
            let p = (beta * (states[k].0 - top)).exp() / z;
            let b = ((acc + p / 2.0) * 16.0).floor().min(15.0) as usize;
            bin_of[states[k].1] = b;
            expected[b] += p;
            acc += p;
        }
        let mut seen = [0u64; 16];
        for k in 0..draws {
            let s = draw(k);
            let x = s
                .iter()
                .enumerate()
                .fold(0usize, |x, (i, &v)| x | (usize::from(v > 0) << i));
            seen[bin_of[x]] += 1;
        }
        seen.iter()
            .zip(&expected)
            .map(|(&o, &p)| {
                let e = p * draws as f64;
                (o as f64 - e).powi(2) / e
            })
            .sum()
    }

    /// The heat-bath rule samples the Gibbs measure exactly (in the limit of many sweeps): at
    /// n = 10, 20,000 independent chains of 60 sweeps, both scans, β = 0.5 and 1.5, pass
    /// Pearson's χ² test against enumeration at significance 0.001; the same chains run at a
    /// β 30% off fail it (so the test has the power to see a wrong rule).
    #[test]
    fn samples_the_exact_gibbs_measure_of_a_small_system() {
        let n = 10;
        let d = sample(n, Couplings::Gaussian, &[77; 32], 0.0);
        for scan in [Scan::Random, Scan::Sequential] {
            for beta in [0.5, 1.5] {
                let chi2 = |run_beta: f64| {
                    let p = Params {
                        beta: run_beta,
                        sweeps: 60,
                        scan,
                    };
                    chi_square(&d, beta, 20_000, |k| {
                        run(&p, &d, &mut stream(&[3; 32], Purpose::Algorithm, k)).spins
                    })
                };
                let right = chi2(beta);
                eprintln!("{scan:?} β = {beta}: χ² = {right}");
                assert!(
                    right < CHI2_15_AT_0_001,
                    "{scan:?} β = {beta}: χ² = {right}"
                );
                let wrong = chi2(1.3 * beta);
                eprintln!("{scan:?} β = {beta} run at 1.3β: χ² = {wrong}");
                assert!(
                    wrong > CHI2_15_AT_0_001,
                    "{scan:?} β = {beta}: a wrong β passes, χ² = {wrong}"
                );
            }
        }
    }
}
