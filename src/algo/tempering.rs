//! Parallel tempering (replica exchange Monte Carlo; Hukushima & Nemoto, J. Phys. Soc. Jpn. 65,
//! 1604 (1996), arXiv:cond-mat/9512035): R chains at inverse temperatures spaced
//! geometrically between `beta[0]` and `beta[1]`, each doing sequential Metropolis sweeps;
//! after every sweep, neighbouring temperatures swap configurations with probability
//! min(1, exp((β_{k+1} − β_k)(H_k − H_{k+1}))) (even pairs after even sweeps, odd pairs after
//! odd ones). The output is the best configuration seen, quenched to a 1-flip-stable state: the
//! strong baseline for ground states at moderate n. All draws come from the run's one stream,
//! in a fixed order, so the result does not depend on threads.

use super::{Algorithm, Key, Kind};
use super::{Info, Output, descent, random_start};
use crate::cell::Canon;
use crate::model::SpinModel;
use crate::model::{Instance, ModelSpec};
use crate::rng::Stream;
use crate::spec::{Settings, SpecError};

/// Revision of this algorithm's code.
pub const REVISION: u32 = 1;

/// Settings.
#[derive(Clone, Debug, PartialEq)]
pub struct Params {
    /// Number of temperatures on the ladder (one chain each), ≥ 2. Default 16.
    pub temperatures: u64,
    /// Smallest and largest inverse temperature, geometric in between. Default [0.2, 3.0].
    pub beta: [f64; 2],
    /// Sweeps per replica. Default 1000.
    pub sweeps: u64,
}

impl Default for Params {
    fn default() -> Self {
        Params {
            temperatures: 16,
            beta: [0.2, 3.0],
            sweeps: 1000,
        }
    }
}

impl Params {
    /// The ladder of inverse temperatures, increasing.
    pub fn ladder(&self) -> Vec<f64> {
        let r = self.temperatures.max(2) as usize;
        let ratio = (self.beta[1] / self.beta[0]).powf(1.0 / (r - 1) as f64);
        (0..r)
            .map(|k| self.beta[0] * ratio.powi(k as i32))
            .collect()
    }
}

/// The registry entry of `tempering`.
pub const KIND: Kind = Kind {
    name: "tempering",
    summary: "Parallel tempering (replica exchange) on a geometric β ladder; the best state seen is quenched and returned. Every ±1 family.",
    keys: &[
        Key {
            name: "temperatures",
            ty: "integer ≥ 2",
            default: "16",
            doc: "number of temperatures on the ladder",
        },
        Key {
            name: "beta",
            ty: "`[smallest, largest]`, 0 < smallest < largest",
            default: "`[0.2, 3.0]`",
            doc: "ends of the geometric ladder of inverse temperatures",
        },
        Key {
            name: "sweeps",
            ty: "integer ≥ 1",
            default: "1000",
            doc: "sweeps per replica",
        },
    ],
    parse,
};

fn parse(s: &Settings<'_>) -> Result<super::AlgoSpec, SpecError> {
    let mut p = Params::default();
    if let Some(r) = s.count("temperatures", 4096)? {
        p.temperatures = r.max(2);
    }
    if let Some(b) = s.beta_range("beta")? {
        if b[0] <= 0.0 {
            return Err(s.fail(
                "beta",
                "the ladder is geometric: the smallest β must be > 0",
                "e.g. beta = [0.2, 3.0]",
            ));
        }
        p.beta = b;
    }
    if let Some(x) = s.count("sweeps", 1_000_000_000)? {
        p.sweeps = x;
    }
    Ok(super::AlgoSpec::new(p))
}

impl Algorithm for Params {
    super::identity!();
    fn canon(&self, c: Canon) -> Canon {
        // Canonical name kept from before the key was renamed, so cache keys do not change.
        c.with("replicas", self.temperatures)
            .with("beta", vec![self.beta[0], self.beta[1]])
            .with("sweeps", self.sweeps)
    }
    fn work_bytes(&self, n: u64) -> u128 {
        // spins and fields per replica, plus the best state.
        n as u128 * (9 * self.temperatures.max(2) as u128 + 10)
    }
    fn cost(&self, n: u64, flip: f64) -> f64 {
        n as f64 * flip * 0.3 * (self.sweeps * self.temperatures) as f64
    }
    fn unsupported(&self, m: &ModelSpec) -> Option<&'static str> {
        super::spins_only(m)
    }
    fn run(&self, inst: &Instance, rng: &mut Stream) -> Result<Output, super::AlgoError> {
        super::on_cube!(inst, KIND.name, |d| run(self, d, rng))
    }
}

pub fn run<M: SpinModel>(p: &Params, d: &M, rng: &mut Stream) -> Output {
    let n = d.n();
    let betas = p.ladder();
    let r = betas.len();
    let mut spins: Vec<Vec<i8>> = (0..r).map(|_| random_start(n, rng)).collect();
    let mut fields: Vec<Vec<f64>> = spins
        .iter()
        .map(|s| {
            let mut h = vec![0.0; n];
            d.fields(s, &mut h);
            h
        })
        .collect();
    let mut energy: Vec<f64> = spins.iter().map(|s| d.energy(s)).collect();
    // at[k] = replica currently at temperature k.
    let mut at: Vec<usize> = (0..r).collect();
    let mut best = f64::NEG_INFINITY;
    let mut best_s = spins[0].clone();
    let mut info = Info::default();
    let bound = d.integer_gain_bound();
    let mut accept: Vec<super::Metropolis> = betas
        .iter()
        .map(|&b| {
            let mut m = super::Metropolis::new(bound);
            m.set_beta(b);
            m
        })
        .collect();
    for sweep in 0..p.sweeps {
        for (k, acc) in accept.iter_mut().enumerate() {
            let rep = at[k];
            let (s, h) = (&mut spins[rep], &mut fields[rep]);
            for i in 0..n {
                let g = -2.0 * (s[i] as f64) * h[i];
                if g >= 0.0 || acc.accept(rng.uniform(), g) {
                    d.flip(s, h, i);
                    energy[rep] += g;
                    info.iterations += 1;
                }
            }
            if energy[rep] > best {
                best = energy[rep];
                best_s.copy_from_slice(s);
            }
        }
        let start = (sweep % 2) as usize;
        for k in (start..r - 1).step_by(2) {
            let (x, y) = (at[k], at[k + 1]);
            let a = (betas[k + 1] - betas[k]) * (energy[x] - energy[y]);
            if a >= 0.0 || rng.uniform() < libm::exp(a) {
                at.swap(k, k + 1);
            }
        }
    }
    info.sweeps = p.sweeps;
    // Quench the best configuration found.
    let mut s = best_s;
    let mut h = vec![0.0; n];
    let q = descent::quench(d, &mut s, &mut h, rng);
    info.iterations += q.iterations;
    info.converged = q.converged;
    Output {
        spins: s,
        point: None,
        info,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn ladder_is_geometric_and_spans_the_range() {
        let p = Params::default();
        let l = p.ladder();
        assert_eq!(l.len(), 16);
        assert!((l[0] - 0.2).abs() < 1e-15 && (l[15] - 3.0).abs() < 1e-12);
        let r = l[1] / l[0];
        for w in l.windows(2) {
            assert!((w[1] / w[0] - r).abs() < 1e-12);
        }
    }
}
