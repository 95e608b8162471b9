//! Metropolis simulated annealing (Kirkpatrick, Gelatt & Vecchi, Science 220, 671 (1983)).
//!
//! Sequential sweeps i = 0..n−1; β grows linearly from `beta[0]` (first sweep) to `beta[1]`
//! (last sweep). A flip with gain g = −2σ_i h_i is accepted if g ≥ 0, else with probability
//! e^{βg} (the uniform is drawn only for downhill moves). Fields are updated in O(n) per
//! accepted flip. Afterwards the fields are recomputed from scratch (removing rounding drift)
//! and, if `quench` is set, a sequential descent brings the state to a 1-flip-stable one.

use super::{Info, Output, descent, random_start};
use crate::cell::Canon;
use crate::model::Cube;
use crate::rng::Stream;

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

impl Params {
    pub(crate) fn canon(&self, c: Canon) -> Canon {
        c.with("sweeps", self.sweeps)
            .with("beta", vec![self.beta[0], self.beta[1]])
            .with("quench", self.quench)
    }
}

/// Anneals from a random start drawn from `rng`.
pub fn run<M: Cube>(p: &Params, d: &M, rng: &mut Stream) -> Output {
    let n = d.n();
    let mut s = random_start(n, rng);
    let mut h = vec![0.0; n];
    d.fields(&s, &mut h);
    let mut info = Info::default();
    let mut accept = super::Metropolis::new(d.integer_gain_bound());
    let steps = p.sweeps.max(1);
    for sweep in 0..steps {
        let beta = if steps > 1 {
            p.beta[0] + (p.beta[1] - p.beta[0]) * sweep as f64 / (steps - 1) as f64
        } else {
            p.beta[1]
        };
        accept.set_beta(beta);
        for i in 0..n {
            let g = -2.0 * (s[i] as f64) * h[i];
            if g >= 0.0 || rng.uniform() < accept.prob(g) {
                d.flip(&mut s, &mut h, i);
                info.iterations += 1;
            }
        }
    }
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
}
