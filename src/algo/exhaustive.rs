//! Exhaustive search: the exact maximum of H over {±1}^n for n ≤ 30, by Gray-code enumeration
//! (each step flips one spin: the gain −2σ_i h_i is O(1) from the fields, which are then updated
//! in O(n)), stopping early at a state that reaches a known ceiling of H (k-SAT: all clauses
//! satisfied). When the instance has the symmetry H(σ) = H(−σ) the last spin stays +1, so
//! 2^{n−1} states are visited; without it (odd-p terms, a field) all 2^n are. Ties keep the first maximiser in Gray-code order. Common practice; exact ground
//! states anchor the small-n points of a scaling plot and test every other algorithm.

use super::{Algorithm, Kind};
use super::{Info, Output};
use crate::cell::Canon;
use crate::model::SpinModel;
use crate::model::{Instance, ModelSpec};
use crate::rng::Stream;
use crate::spec::{Settings, SpecError};

/// Revision of this algorithm's code.
pub const REVISION: u32 = 2;
/// Largest n enumerated (2^29 states).
pub const MAX_N: u64 = 30;

/// No settings.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct Params {}

/// The registry entry of `exhaustive`.
pub const KIND: Kind = Kind {
    name: "exhaustive",
    summary: "Exact maximum by Gray-code enumeration (2^(n−1) states, up to the global flip). Every ±1 family, every n ≤ 30.",
    keys: &[],
    parse,
};

fn parse(_s: &Settings<'_>) -> Result<super::AlgoSpec, SpecError> {
    Ok(super::AlgoSpec::new(Params {}))
}

impl Algorithm for Params {
    super::identity!();
    fn canon(&self, c: Canon) -> Canon {
        c
    }
    fn work_bytes(&self, n: u64) -> u128 {
        // spins (i8), fields (f64), an order permutation (u32), a copy of the reference.
        n as u128 * (1 + 8 + 4 + 1)
    }
    fn cost(&self, n: u64, flip: f64) -> f64 {
        flip * 2f64.powf(n as f64 - 1.0)
    }
    fn unsupported(&self, m: &ModelSpec) -> Option<&'static str> {
        super::spins_only(m)
    }
    fn size_problem(&self, n: u64) -> Option<(String, String)> {
        (n > MAX_N).then(|| {
            (
                format!("exhaustive search cannot enumerate n = {n}: 2^{} states", n - 1),
                format!("exhaustive search needs every size ≤ {MAX_N}; run it in a spec of its own with small sizes"),
            )
        })
    }
    fn run(&self, inst: &Instance, _rng: &mut Stream) -> Result<Output, super::AlgoError> {
        super::on_cube!(inst, KIND.name, |d| run(self, d))
    }
}

/// Enumerates all states (n ≤ [`MAX_N`], checked by the spec) in Gray-code order: the 2^(n−1)
/// with the last spin fixed at +1 when the instance is symmetric under σ → −σ (the other half
/// mirrors them), all 2^n otherwise (a field or an odd-p term breaks the symmetry).
pub fn run<M: SpinModel>(_p: &Params, d: &M) -> Output {
    let n = d.n();
    let free = if d.symmetric() {
        n.saturating_sub(1)
    } else {
        n
    };
    if let Some((best_s, _, done)) = d.exhaustive(free) {
        return enumerated(best_s, done);
    }
    let mut s = vec![1i8; n];
    let mut h = vec![0.0; n];
    d.fields(&s, &mut h);
    let mut e = d.energy(&s);
    let mut best = e;
    let mut best_s = s.clone();
    let steps: u64 = if free == 0 { 0 } else { (1u64 << free) - 1 };
    // A state at the model's ceiling (k-SAT: satisfying) cannot be beaten; it is the first
    // maximiser in Gray-code order, so stopping there changes no output.
    let ceiling = d.ceiling().unwrap_or(f64::INFINITY);
    let mut done = 0;
    for k in 1..=steps {
        if best >= ceiling {
            break;
        }
        let i = k.trailing_zeros() as usize;
        e += -2.0 * s[i] as f64 * h[i];
        d.flip(&mut s, &mut h, i);
        done = k;
        if e > best {
            best = e;
            best_s.copy_from_slice(&s);
        }
    }
    enumerated(best_s, done)
}

/// The output of an enumeration: its best state, and its steps as iterations.
fn enumerated(best_s: Vec<i8>, done: u64) -> Output {
    Output {
        spins: best_s,
        point: None,
        info: Info {
            iterations: done,
            sweeps: 1,
            converged: true,
            relaxation: None,
            ..Default::default()
        },
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::algo::{anneal, descent};
    use crate::model::Couplings;
    use crate::model::sk::sample;
    use crate::rng::{Purpose, stream};

    fn brute_force(d: &crate::model::sk::Dense) -> f64 {
        let n = d.n();
        (0u64..1 << n)
            .map(|b| {
                let s: Vec<i8> = (0..n)
                    .map(|i| if b >> i & 1 == 1 { -1 } else { 1 })
                    .collect();
                d.energy(&s)
            })
            .fold(f64::NEG_INFINITY, f64::max)
    }

    /// Equals brute force over all 2^n states (energy from scratch) for n ≤ 12, and no other
    /// algorithm beats it on n = 16 instances (it is exact).
    #[test]
    fn exact_and_never_beaten() {
        for n in [2usize, 3, 7, 12] {
            for seed in 0..3u8 {
                let d = sample(n, Couplings::Gaussian, &[seed + 10 * n as u8; 32], 0.0);
                let out = run(&Params {}, &d);
                let e = d.energy(&out.spins);
                assert!((e - brute_force(&d)).abs() < 1e-9, "n = {n}: {e}");
            }
        }
        for seed in 0..5u8 {
            let d = sample(16, Couplings::Pm1, &[seed; 32], 0.0);
            let exact = d.energy(&run(&Params {}, &d).spins);
            let mut r = stream(&[seed; 32], Purpose::Algorithm, 0);
            let de = d.energy(&descent::run(&descent::Params::default(), &d, &mut r).spins);
            let an = d.energy(&anneal::run(&anneal::Params::default(), &d, &mut r).spins);
            assert!(
                de <= exact + 1e-9 && an <= exact + 1e-9,
                "{de} {an} > {exact}"
            );
        }
    }
}
