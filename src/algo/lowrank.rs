//! Low-rank semidefinite relaxation of max H over {±1}^n for quadratic H = ½σᵀAσ:
//! max ½ Σ_{i≠j} A_ij ⟨v_i, v_j⟩ over unit vectors v_i ∈ R^k (the Burer–Monteiro factorisation
//! of the SDP, Burer & Monteiro, Math. Program. 95 (2003)), solved by block-coordinate ascent
//! (each v_i ← g_i/‖g_i‖ with g_i = Σ_j A_ij v_j, which maximises the objective in v_i; the
//! "mixing method", Wang, Chang & Kolter, arXiv:1706.00476), then random-hyperplane rounding
//! σ_i = sign⟨v_i, r⟩ (Goemans & Williamson, J. ACM 42 (1995)), the best of `roundings`
//! hyperplanes. With k ≥ sqrt(2n) the factorised problem has no spurious local maxima for
//! generic A (Boumal, Voroninski & Bandeira, arXiv:1606.04970), so the default rank is
//! ⌈sqrt(2n)⌉. The relaxation value per spin is reported (`relaxation`); on SK it approaches
//! λ_max/2 → 1 (Montanari & Sen, arXiv:1504.05910) and never exceeds λ_max/2.

use super::{Algorithm, Key, Kind};
use super::{Info, Output};
use crate::cell::Canon;
use crate::model::{Instance, ModelSpec};
use crate::rng::Stream;
use crate::spec::{Settings, SpecError};

/// Revision of this algorithm's code.
/// 2: sweeps track their gain instead of recomputing the objective (the stopping sweep can
/// move by one, and with it the rounded output).
pub const REVISION: u32 = 2;

/// Settings.
#[derive(Clone, Debug, PartialEq)]
pub struct Params {
    /// Rank k of the factorisation; 0 means ⌈sqrt(2n)⌉. Default 0.
    pub rank: u64,
    /// Stop when a sweep raises the objective by less than tol·|objective|. Default 1e-7.
    pub tol: f64,
    /// Budget of sweeps. Default 500.
    pub max_sweeps: u64,
    /// Random hyperplanes tried; the best rounding is kept. Default 16.
    pub roundings: u64,
}

impl Default for Params {
    fn default() -> Self {
        Params {
            rank: 0,
            tol: 1e-7,
            max_sweeps: 500,
            roundings: 16,
        }
    }
}

impl Params {
    /// The rank used at size n.
    pub fn rank_for(&self, n: usize) -> usize {
        if self.rank > 0 {
            self.rank as usize
        } else {
            ((2.0 * n as f64).sqrt().ceil() as usize).max(2)
        }
    }
}

/// Row access to a symmetric coupling matrix with zero diagonal.
pub trait Rows: Sync {
    fn n(&self) -> usize;
    /// Calls f(j, A_ij) for the nonzero entries of row i.
    fn row_for_each(&self, i: usize, f: impl FnMut(usize, f64));
    /// H(σ) = ½σᵀAσ.
    fn energy(&self, s: &[i8]) -> f64;
}

impl Rows for crate::model::sk::Dense {
    fn n(&self) -> usize {
        crate::model::sk::Dense::n(self)
    }
    #[inline]
    fn row_for_each(&self, i: usize, mut f: impl FnMut(usize, f64)) {
        // f64 storage lends its row; the compact ones write it into a buffer.
        let buf;
        let row = match self.full_row(i) {
            Some(row) => row,
            None => {
                let mut b = vec![0.0; self.n()];
                self.row_into(i, &mut b);
                buf = b;
                &buf
            }
        };
        for (j, &a) in row.iter().enumerate() {
            f(j, a)
        }
    }
    fn energy(&self, s: &[i8]) -> f64 {
        crate::model::sk::Dense::energy(self, s)
    }
}

impl Rows for crate::model::sparse::Graph {
    fn n(&self) -> usize {
        crate::model::sparse::Graph::n(self)
    }
    #[inline]
    fn row_for_each(&self, i: usize, mut f: impl FnMut(usize, f64)) {
        let (nb, w) = self.adj(i);
        for (&j, &a) in nb.iter().zip(w) {
            f(j as usize, a)
        }
    }
    fn energy(&self, s: &[i8]) -> f64 {
        crate::model::sparse::Graph::energy(self, s)
    }
}

/// The registry entry of `lowrank`.
pub const KIND: Kind = Kind {
    name: "lowrank",
    summary: "Rank-k Burer–Monteiro relaxation of the cube by block coordinate ascent, then the best of several random-hyperplane roundings. p = 2 cube models and graphs; the table's `relaxation` column holds the relaxation's value per spin.",
    keys: &[
        Key {
            name: "rank",
            ty: "integer ≥ 1",
            default: "⌈√(2n)⌉",
            doc: "rank k of the factorisation",
        },
        Key {
            name: "tol",
            ty: "number in (0, 1)",
            default: "1e-7",
            doc: "stop when a sweep raises the objective by less than tol·|objective|",
        },
        Key {
            name: "max_sweeps",
            ty: "integer ≥ 1",
            default: "500",
            doc: "budget of sweeps",
        },
        Key {
            name: "roundings",
            ty: "integer ≥ 1",
            default: "16",
            doc: "random hyperplanes tried; the best rounding is kept",
        },
    ],
    parse,
};

fn parse(s: &Settings<'_>) -> Result<super::AlgoSpec, SpecError> {
    let mut p = Params::default();
    if let Some(r) = s.count("rank", 100_000)? {
        p.rank = r;
    }
    if let Some(t) = s.tolerance("tol")? {
        p.tol = t;
    }
    if let Some(m) = s.count("max_sweeps", 1_000_000_000)? {
        p.max_sweeps = m;
    }
    if let Some(r) = s.count("roundings", 1_000_000)? {
        p.roundings = r;
    }
    Ok(super::AlgoSpec::new(p))
}

impl Algorithm for Params {
    super::identity!();
    fn canon(&self, c: Canon) -> Canon {
        c.with("rank", self.rank)
            .with("tol", self.tol)
            .with("max_sweeps", self.max_sweeps)
            .with("roundings", self.roundings)
    }
    fn has_point(&self) -> bool {
        true
    }
    fn work_bytes(&self, n: u64) -> u128 {
        // the n×k factor (k ≤ sqrt(2n) + 1 by default) and the point.
        let k = self.rank_for(n as usize) as u128;
        let n = n as u128;
        8 * n * (k + 2) + n
    }
    fn cost(&self, n: u64, flip: f64) -> f64 {
        n as f64 * flip * self.rank_for(n as usize) as f64 * 50.0
    }
    fn unsupported(&self, m: &ModelSpec) -> Option<&'static str> {
        (!m.family.spins() || !m.family.quadratic()).then_some(
            "it relaxes a quadratic H on the cube (sk, a graph, or cube with xi = { 2 = … })",
        )
    }
    fn run(&self, inst: &Instance, rng: &mut Stream) -> Result<Output, super::AlgoError> {
        // With a field the relaxation is of the couplings alone; the field picks the sign of
        // the rounded output.
        let (inst, h) = inst.split_field();
        let out = match inst {
            Instance::Sk(d) => Ok(super::with_relaxation(run(self, d, rng))),
            Instance::Graph(g) => Ok(super::with_relaxation(run(self, g, rng))),
            Instance::Cube(m) => match (m.dense(), m.is_quadratic()) {
                (Some(d), true) => Ok(super::with_relaxation(run(self, d, rng))),
                _ => Err(super::not_for(KIND.name, "H is not quadratic")),
            },
            Instance::Sphere(_) => Err(super::not_for(KIND.name, "the relaxation is of the cube")),
            Instance::Spins(_) | Instance::Clauses(_) | Instance::Patterns(..) => {
                Err(super::not_for(KIND.name, "H is not quadratic"))
            }
            Instance::Fielded(..) => unreachable!("split above"),
        };
        out.map(|o| super::toward_field(o, h))
    }
}

/// Runs the relaxation and the rounding. Returns the output and the relaxation value per spin.
pub fn run<A: Rows>(p: &Params, a: &A, rng: &mut Stream) -> (Output, f64) {
    let n = a.n();
    let k = p.rank_for(n);
    let mut v = vec![0.0f64; n * k];
    for i in 0..n {
        let row = &mut v[i * k..(i + 1) * k];
        row.iter_mut().for_each(|x| *x = rng.normal());
        normalize(row);
    }
    let mut g = vec![0.0f64; k];
    let objective = |v: &[f64]| -> f64 {
        let mut s = 0.0;
        for i in 0..n {
            let vi = &v[i * k..(i + 1) * k];
            a.row_for_each(i, |j, x| {
                s += x * dot(vi, &v[j * k..(j + 1) * k]);
            });
        }
        0.5 * s
    };
    // The objective is linear in each v_i with coefficient g_i = Σ_j A_ij v_j, so an update
    // gains ⟨v_i' − v_i, g_i⟩ = ‖g_i‖ − ⟨v_i, g_i⟩: sweeps track their gain without another pass
    // over the couplings; the exact value is recomputed once at the end.
    let mut value = objective(&v);
    let mut info = Info::default();
    while info.sweeps < p.max_sweeps {
        info.sweeps += 1;
        crate::exec::progress::step_upto(info.sweeps, p.max_sweeps, "sweep");
        let mut gain = 0.0;
        for i in 0..n {
            g.iter_mut().for_each(|x| *x = 0.0);
            a.row_for_each(i, |j, x| {
                if x != 0.0 {
                    for (gg, &vj) in g.iter_mut().zip(&v[j * k..(j + 1) * k]) {
                        *gg += x * vj;
                    }
                }
            });
            let along = dot(&v[i * k..(i + 1) * k], &g);
            let norm = normalize(&mut g);
            if norm > 0.0 {
                v[i * k..(i + 1) * k].copy_from_slice(&g);
                gain += norm - along;
            }
            info.iterations += 1;
        }
        value += gain;
        if gain <= p.tol * value.abs().max(1e-300) {
            info.converged = true;
            break;
        }
    }
    let value = objective(&v);
    // Rounding: the best of several random hyperplanes.
    let mut best: Option<(f64, Vec<i8>, Vec<f64>)> = None;
    let mut r = vec![0.0; k];
    for _ in 0..p.roundings.max(1) {
        r.iter_mut().for_each(|x| *x = rng.normal());
        let proj: Vec<f64> = (0..n).map(|i| dot(&v[i * k..(i + 1) * k], &r)).collect();
        let s: Vec<i8> = proj.iter().map(|&x| if x < 0.0 { -1 } else { 1 }).collect();
        let e = a.energy(&s);
        if best.as_ref().is_none_or(|b| e > b.0) {
            best = Some((e, s, proj));
        }
    }
    let (_, spins, mut point) = best.expect("one rounding");
    normalize(&mut point);
    let scale = (n as f64).sqrt();
    point.iter_mut().for_each(|x| *x *= scale);
    (
        Output {
            spins,
            point: Some(point),
            info,
        },
        value / n as f64,
    )
}

use crate::kernels::dot_sequential as dot;

fn normalize(x: &mut [f64]) -> f64 {
    crate::kernels::normalize_with(x, dot)
}
