//! WalkSAT, the focused random walk for satisfiability (Selman, Kautz & Cohen 1994, "Noise
//! strategies for improving local search", AAAI-94): from a uniformly random assignment, pick
//! an unsatisfied clause uniformly; if one of its variables breaks no clause (turns no
//! satisfied clause unsatisfied) flip it, otherwise with probability `noise` flip a uniformly
//! chosen variable of the clause and else one that breaks the fewest (ties uniformly). Stops
//! at a satisfying assignment (`converged`) or after `flips`·n flips; the output is the
//! assignment with the fewest unsatisfied clauses seen (the first one reaching that count).
//!
//! State per clause: its number of true literals and the XOR of their variables, packed in one
//! word (one cache line visited per clause), so a clause with one true literal names its
//! critical variable at once and a variable's break count is one pass over its occurrences
//! (common practice in fast focused local search). The walk
//! keeps the flips since a snapshot of the best assignment, so recovering it costs O(n)
//! memory whatever the budget.

use super::{Algorithm, Info, Key, Kind, Output, random_start};
use crate::cell::Canon;
use crate::model::ksat::Formula;
use crate::model::{Instance, ModelSpec};
use crate::rng::Stream;
use crate::spec::{Settings, SpecError};

/// Revision of this algorithm's code. Bump when its numbers change.
pub const REVISION: u32 = 1;

/// Settings of the walk.
#[derive(Clone, Debug, PartialEq)]
pub struct Params {
    /// Probability of a random (rather than least-breaking) variable. Default 0.567, near the
    /// best noise for random 3-SAT reported for this rule (recalled from the literature on
    /// WalkSAT's noise, not checked here).
    pub noise: f64,
    /// Budget in flips per variable (the walk stops after `flips`·n). Default 1000.
    pub flips: u64,
}

impl Default for Params {
    fn default() -> Self {
        Params {
            noise: 0.567,
            flips: 1000,
        }
    }
}

/// The registry entry of `walksat`.
pub const KIND: Kind = Kind {
    name: "walksat",
    summary: "WalkSAT (Selman, Kautz & Cohen 1994): a focused random walk on the variables of unsatisfied clauses; a free move when one breaks nothing, else a random variable of the clause with probability `noise`, else the one that breaks fewest. Output: the best assignment seen. Families with clauses (ksat).",
    keys: &[
        Key {
            name: "noise",
            ty: "number in [0, 1]",
            default: "0.567",
            doc: "the probability of flipping a random variable of the chosen clause instead of a least-breaking one",
        },
        Key {
            name: "flips",
            ty: "integer ≥ 1",
            default: "1000",
            doc: "budget in flips per variable: the walk stops after flips·n without a satisfying assignment (`converged = false`)",
        },
    ],
    parse,
};

fn parse(s: &Settings<'_>) -> Result<super::AlgoSpec, SpecError> {
    let mut p = Params::default();
    if let Some(x) = s.nonnegative("noise", 1.0)? {
        p.noise = x;
    }
    if let Some(f) = s.count("flips", 1_000_000_000)? {
        p.flips = f;
    }
    Ok(super::AlgoSpec::new(p))
}

impl Algorithm for Params {
    super::identity!();
    fn canon(&self, c: Canon) -> Canon {
        c.with("noise", self.noise).with("flips", self.flips)
    }
    fn work_bytes(&self, n: u64) -> u128 {
        // spins, a snapshot, the flip log (≤ 2n), and per clause a count, an XOR and a place
        // in the unsatisfied list (clauses ≤ 10⁴·n are bounded by the family's estimate; count
        // 16 bytes per variable for them at density ≤ 2).
        n as u128 * (1 + 1 + 8 + 2 * 16)
    }
    fn cost(&self, n: u64, flip: f64) -> f64 {
        n as f64 * flip * self.flips as f64
    }
    fn unsupported(&self, m: &ModelSpec) -> Option<&'static str> {
        (!m.family.as_any().is::<crate::model::families::ksat::Ksat>())
            .then_some("it walks on the variables of unsatisfied clauses: a clause family (ksat)")
    }
    fn run(&self, inst: &Instance, rng: &mut Stream) -> Result<Output, super::AlgoError> {
        match inst {
            Instance::Clauses(f) => Ok(run(self, f, rng)),
            _ => Err(super::not_for(KIND.name, "the instance has no clauses")),
        }
    }
}

/// The walk's state: the assignment, per clause its true-literal count (high 32 bits) and the
/// XOR of its true variables (low 32 bits), and the unsatisfied clauses as a list with each
/// one's place in it.
struct Walk<'a> {
    f: &'a Formula,
    s: Vec<i8>,
    state: Vec<u64>,
    unsat: Vec<u32>,
    place: Vec<u32>,
}

const NOWHERE: u32 = u32::MAX;
/// A count of one true literal in the packed clause state.
const ONE: u64 = 1 << 32;

impl<'a> Walk<'a> {
    fn new(f: &'a Formula, s: Vec<i8>) -> Walk<'a> {
        let m = f.clauses();
        let k = f.k();
        let mut w = Walk {
            f,
            s,
            state: vec![0; m],
            unsat: Vec::new(),
            place: vec![NOWHERE; m],
        };
        for (c, lits) in f.literals().chunks_exact(k).enumerate() {
            for &l in lits {
                if Formula::is_true(l, &w.s) {
                    w.state[c] += ONE;
                    w.state[c] ^= (l >> 1) as u64;
                }
            }
            if w.state[c] >> 32 == 0 {
                w.place[c] = w.unsat.len() as u32;
                w.unsat.push(c as u32);
            }
        }
        w
    }

    /// The clauses v's flip would turn unsatisfied: those where v is the only true literal.
    #[inline(always)]
    fn breaks(&self, v: u32) -> u32 {
        let mut b = 0;
        for &o in self.f.occurrences(v as usize) {
            let c = (o >> 1) as usize;
            b += (self.state[c] == ONE | v as u64) as u32;
        }
        b
    }

    #[inline(always)]
    fn flip(&mut self, v: u32) {
        let plain_true_before = self.s[v as usize] > 0;
        for &o in self.f.occurrences(v as usize) {
            let c = (o >> 1) as usize;
            let was_true = plain_true_before == (o & 1 == 0);
            self.state[c] ^= v as u64;
            if was_true {
                self.state[c] -= ONE;
                if self.state[c] >> 32 == 0 {
                    self.place[c] = self.unsat.len() as u32;
                    self.unsat.push(c as u32);
                }
            } else {
                if self.state[c] >> 32 == 0 {
                    let at = self.place[c] as usize;
                    let last = *self.unsat.last().expect("c is listed");
                    self.unsat[at] = last;
                    self.place[last as usize] = at as u32;
                    self.unsat.pop();
                    self.place[c] = NOWHERE;
                }
                self.state[c] += ONE;
            }
        }
        self.s[v as usize] = -self.s[v as usize];
    }
}

/// Runs the walk from a uniformly random assignment drawn from `rng`.
pub fn run(p: &Params, f: &Formula, rng: &mut Stream) -> Output {
    let n = f.n();
    let k = f.k();
    let start = random_start(n, rng);
    let mut w = Walk::new(f, start.clone());
    // `log` holds the flips from `base` to the current state. The best assignment is `base`
    // with `log[..t]` applied when `best_at = Some(t)`, else the copy `kept`. Every 2n flips
    // the best is materialised and the log restarts from the current state: O(1) per flip.
    let mut base = start.clone();
    let mut kept = start;
    let mut log: Vec<u32> = Vec::with_capacity(2 * n);
    let mut best = w.unsat.len();
    let mut best_at: Option<usize> = None;
    let budget = p.flips.saturating_mul(n as u64);
    let mut flips = 0u64;
    let lits = f.literals();
    let replay = |base: &[i8], log: &[u32]| {
        let mut s = base.to_vec();
        for &v in log {
            s[v as usize] = -s[v as usize];
        }
        s
    };
    while !w.unsat.is_empty() && flips < budget {
        if flips.is_multiple_of(4096) {
            crate::exec::progress::step_upto(flips, budget, "flip");
        }
        let c = w.unsat[rng.below(w.unsat.len() as u64) as usize] as usize;
        let clause = &lits[c * k..c * k + k];
        // Least-breaking variables of the clause, ties chosen uniformly (reservoir).
        let mut fewest = u32::MAX;
        let mut pick = 0u32;
        let mut ties = 0u64;
        for &l in clause {
            let v = l >> 1;
            let b = w.breaks(v);
            if b < fewest {
                fewest = b;
                pick = v;
                ties = 1;
            } else if b == fewest {
                ties += 1;
                if rng.below(ties) == 0 {
                    pick = v;
                }
            }
        }
        if fewest > 0 && rng.uniform() < p.noise {
            pick = clause[rng.below(k as u64) as usize] >> 1;
        }
        w.flip(pick);
        log.push(pick);
        flips += 1;
        if w.unsat.len() < best {
            best = w.unsat.len();
            best_at = Some(log.len());
        }
        if log.len() >= 2 * n {
            if let Some(t) = best_at.take() {
                kept = replay(&base, &log[..t]);
            }
            base.copy_from_slice(&w.s);
            log.clear();
        }
    }
    let spins = match best_at {
        Some(t) => replay(&base, &log[..t]),
        None => kept,
    };
    debug_assert_eq!(f.unsatisfied(&spins), best);
    Output {
        spins,
        point: None,
        info: Info {
            iterations: flips,
            sweeps: flips / n.max(1) as u64,
            converged: best == 0,
            ..Info::default()
        },
    }
}
