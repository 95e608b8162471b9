//! Incremental approximate message passing on the cube (Montanari, "Optimization of the
//! Sherrington–Kirkpatrick Hamiltonian", arXiv:1812.10897; for mixtures, El Alaoui, Montanari
//! & Sellke, "Optimization of mean-field spin glasses", arXiv:2001.00904), driven by the
//! full-RSB solution that `kiln theory` computes ([`crate::theory::full`]).
//!
//! With γ the zero-temperature Parisi order parameter of ξ and Φ(t, x) its Parisi field
//! (∂ₜΦ + ½ξ''(t)(∂ₓₓΦ + γ(t)(∂ₓΦ)²) = 0, Φ(1, x) = |x|), the algorithm discretises
//! dX = ξ''(t)γ(t)∂ₓΦ(t, X) dt + dZ, d⟨Z⟩ = ξ''(t) dt, and the martingale dM = ∂ₓₓΦ dZ on
//! t_k = kδ. The increments of Z come from the AMP iteration for H (tensor AMP, with the
//! Onsager sum over the whole history):
//!
//! - m⁰ = √δ·s (s uniform random signs: the algorithm's randomness), z⁰ = 0;
//! - z^{k+1} = ∇H(m^k) − Σ_{j=1..k} ξ''(⟨m^k, m^{j−1}⟩/n)·b_{k,j}·m^{j−1},
//!   b_{k,k} = c_k⟨u_{k−1}⟩, b_{k,j} = c_j⟨u_{j−1}⟩ − c_{j+1}⟨u_j⟩ (j < k): the mean
//!   derivative ⟨∂m^k/∂z^j⟩ (terms with a fresh increment as factor average to zero);
//! - x^{k+1} = x^k + δ ξ''(t_k)γ(t_k)∂ₓΦ(t_k, x^k) + (z^{k+1} − z^k),
//!   m^{k+1} = m^k + c_{k+1}·u_k ⊙ (z^{k+1} − z^k), with u_k = ∂ₓₓΦ(t_k, x^k).
//!
//! c_k rescales each increment of m to ‖m^k − m^{k−1}‖²/n = δ exactly: the factor tends to 1
//! (E[ξ''(t)(∂ₓₓΦ)²] = 1 on the support of γ, the optimality condition), and without it the
//! finite-n errors are amplified near t = 1 where ∂ₓₓΦ is large (measured on SK at n = 2000,
//! δ = 0.02: ‖m‖²/n reached 1.19 and sign(m) scored 0.710; with it 0.729). For SK (ξ'' = 1)
//! the Onsager sum telescopes to Montanari's single term. The run stops at t = 1 − δ; the
//! output is σ = sign(m) and the pre-rounding point m (scaled to norm √n); `relaxation` is
//! H(m)/n. H(m)/n → the Parisi value as n → ∞ and δ → 0 when ξ has no overlap gap (believed
//! for SK).
//!
//! `order` chooses γ: `"extended"` (default) is the minimiser of the same functional over γ
//! positive but not necessarily monotone, whose value is the algorithmic threshold ALG (El
//! Alaoui, Montanari & Sellke 2021, Theorem 3: iAMP driven by it reaches ALG); `"parisi"` is
//! the Parisi minimiser (the same γ where the Parisi minimiser is strictly increasing, as for
//! SK).
//!
//! Applies to dense models on the cube. The iteration starts from a random point m⁰ = √q₀·s
//! of overlap q₀ (`start`, default δ) that carries no information about H. With a p = 2 term
//! (ξ''(0) > 0) and the default start the field is read from t = 0, as in Montanari's SK
//! algorithm (revision 3's numbers). Without one (pure p ≥ 3: ξ''(0) = 0, so the first
//! increments of Z carry almost no signal and the extended γ diverges at q → 0), the field is
//! read from t = q₀ on, so the iterate's overlap and the field's time agree from the first
//! step: kiln's choice, a random start in place of the path from 0 to q₀, which forfeits at
//! most the energy that stretch could add, about ∫₀^{q₀}√ξ'' dq (1e-3 for ξ = q³/2 at
//! q₀ = 0.01).
//!
//! `decorrelate` (default, revision 4): before it is used, each increment z^k − z^{k−1} loses
//! its component along m^{k−1}, w = ⟨z^k − z^{k−1}, m^{k−1}⟩/‖m^{k−1}‖². Under state evolution
//! the increment is independent of the iterate, so w → 0 as n → ∞ and the limit the theorem
//! describes is unchanged; it is a correction of order n^−1/2 per step, kiln's own. Without it
//! the finite-n iteration leaves its state evolution on the pure p = 3 cube: the increments
//! correlate with m (rms correlation 0.32 to 0.41 at n = 400, 0.25 to 0.33 at n = 1200, where
//! noise would be n^−1/2), ‖m‖²/n oscillates with a period of about eight steps and a growing
//! amplitude instead of growing by δ per step, and smaller steps make it worse. The likely
//! mechanism: for a homogeneous ξ of degree p, ∇²H(m)m = (p − 1)∇H(m), so along m the Hessian
//! has an outlier near twice the bulk edge at small q, and an error of the increment along m
//! grows from step to step where the Onsager sum only cancels its n → ∞ part. Removing that one
//! component (removing all of span{m⁰ … m^{k−1}} cost k/n of each increment's degrees of
//! freedom and did worse) keeps ‖m‖²/n within 0.02 of t up to t = 1/2 (0.07 at the end, at
//! n = 300) and the increments' variance at its state-evolution value. On ξ = q³/2 with 8
//! instances n = 200, 400, 800 went from 0.655, 0.695, 0.731 to 0.732, 0.743, 0.749 at
//! δ = 0.01, and smaller steps now help (0.765 at δ = 0.005 and 0.768 at δ = 0.0025, n = 800).
//! On ξ = q²/2 + q³/4 it gained 0.01 to 0.02; on SK it changed nothing measurable (32
//! instances, n = 500 and 2000: +0.005(4), −0.002(2)). The README's iAMP studies give the
//! extrapolations (the pure 3-spin cube reaches ALG within its error bars once n and then δ
//! are extrapolated, at the finite-size exponent 1/2 the steps share), and the stability cost
//! measured on SK (distance at ε = 0.001 up from 0.53–0.88 to 0.89–0.92 at n ≤ 2000).

use super::{AlgoError, Info, Output};
use super::{Algorithm, Key, Kind};
use crate::cell::Canon;
use crate::kernels::dot;
use crate::model::{Instance, ModelSpec};
use crate::rng::Stream;
use crate::spec::{Settings, SpecError};
use crate::theory::Mixture;
use crate::theory::full::{self, Field, FullSettings};
use std::collections::HashMap;
use std::sync::{Arc, Mutex, OnceLock};

/// Revision of this algorithm's code (the full-RSB solver's revision is part of the canon).
/// 2: the tensor-AMP form for mixtures (m⁰ = √δ·s is part of m). 3: `order`, default the
/// extended minimiser. 4: `decorrelate`, default on (each increment of Z loses its component
/// along the iterate it is added to).
pub const REVISION: u32 = 4;

/// Settings.
#[derive(Clone, Debug, PartialEq)]
pub struct Params {
    /// Time step δ (1/δ − 1 matrix–vector products). Default 0.01 (at n = 4000: 0.744 against
    /// 0.732 with δ = 0.02).
    pub step: f64,
    /// Intervals of the full-RSB order parameter the field is computed from. Default 16
    /// (the `kiln theory` default: SK value within 2e-6 of the published one).
    pub levels: u64,
    /// The order parameter: the extended minimiser (true, default; aims at ALG) or the Parisi
    /// minimiser (false).
    pub extended: bool,
    /// The overlap q₀ of the random point the iteration starts from, the field taken from
    /// t = q₀ (None: q₀ = δ, with the field from t = 0 where ξ''(0) > 0, revision 3's numbers).
    pub start: Option<f64>,
    /// Remove from each increment z^k − z^{k−1} its component along m^{k−1} (default true).
    /// State evolution makes that component vanish as n → ∞, so the limit is unchanged; at
    /// finite n it keeps the iteration on its state evolution (module docs).
    pub decorrelate: bool,
}

impl Default for Params {
    fn default() -> Self {
        Params {
            step: 0.01,
            levels: 16,
            extended: true,
            start: None,
            decorrelate: true,
        }
    }
}

impl Params {
    /// Number of AMP steps K from t = 0 (t_K = 1 − δ).
    pub fn steps(&self) -> usize {
        self.steps_from(0.0)
    }

    /// Number of AMP steps from t = t₀ to t ≈ 1 − δ.
    fn steps_from(&self, t0: f64) -> usize {
        (((1.0 - t0) / self.step).round() as usize).max(2)
    }
}

/// The Parisi field at t_k = kδ, k < K, with ∂ₓΦ and ∂ₓₓΦ on the grid; computed once per
/// process for each (ξ, δ, levels) (the full-RSB solve takes seconds, a cell much less).
struct Drive {
    x0: f64,
    dx: f64,
    /// ξ''(t_k)·γ(t_k), the drift's factor.
    drift: Vec<f64>,
    /// Per time: (∂ₓΦ, ∂ₓₓΦ) on the grid.
    d1: Vec<Vec<f64>>,
    d2: Vec<Vec<f64>>,
}

type DriveCache = Mutex<HashMap<(String, u64, u64, bool, u64), Arc<Drive>>>;

/// The field at t_k = t₀ + kδ, k < [`Params::steps_from`]`(t₀)`.
fn drive(p: &Params, xi: &Mixture, t0: f64) -> Arc<Drive> {
    static CACHE: OnceLock<DriveCache> = OnceLock::new();
    let key = (
        xi.canon().encode(),
        p.step.to_bits(),
        p.levels,
        p.extended,
        t0.to_bits(),
    );
    let cache = CACHE.get_or_init(Default::default);
    if let Some(d) = cache.lock().expect("drive cache").get(&key) {
        return d.clone();
    }
    let s = FullSettings {
        levels: p.levels as usize,
        ..FullSettings::default()
    };
    let parisi = full::full_rsb_free(xi, &s, full::FREE_ROUNDS);
    let sol = if p.extended {
        full::algorithmic(xi, &s, &parisi).0
    } else {
        parisi
    };
    let times: Vec<f64> = (0..p.steps_from(t0))
        .map(|k| t0 + k as f64 * p.step)
        .collect();
    let Field { x0, dx, gamma, phi } = full::field(xi, &sol, &s, &times);
    let drift = gamma
        .iter()
        .zip(&times)
        .map(|(g, &t)| g * xi.d2(t))
        .collect();
    let mut d1 = Vec::with_capacity(phi.len());
    let mut d2 = Vec::with_capacity(phi.len());
    for f in &phi {
        let g = f.len();
        let mut a = vec![0.0; g];
        let mut b = vec![0.0; g];
        for i in 1..g - 1 {
            a[i] = (f[i + 1] - f[i - 1]) / (2.0 * dx);
            b[i] = (f[i + 1] - 2.0 * f[i] + f[i - 1]) / (dx * dx);
        }
        (a[0], a[g - 1]) = (a[1], a[g - 2]);
        (b[0], b[g - 1]) = (b[1], b[g - 2]);
        d1.push(a);
        d2.push(b);
    }
    let d = Arc::new(Drive {
        x0,
        dx,
        drift,
        d1,
        d2,
    });
    cache.lock().expect("drive cache").insert(key, d.clone());
    d
}

impl Drive {
    /// (∂ₓΦ, ∂ₓₓΦ)(t_k, x) by linear interpolation (clamped at the grid ends).
    #[inline]
    fn at(&self, k: usize, x: f64) -> (f64, f64) {
        let g = self.d1[k].len();
        let t = ((x - self.x0) / self.dx).clamp(0.0, (g - 1) as f64 - 1e-9);
        let i = t as usize;
        let f = t - i as f64;
        let (a, b) = (&self.d1[k], &self.d2[k]);
        (a[i] + f * (a[i + 1] - a[i]), b[i] + f * (b[i + 1] - b[i]))
    }
}

/// The registry entry of `iamp`.
pub const KIND: Kind = Kind {
    name: "iamp",
    summary: "Incremental AMP (Montanari 2019; tensor form of El Alaoui, Montanari & Sellke 2020), driven by kiln's own solution of the extended (default; aims at the algorithmic threshold) or Parisi variational problem for the spec's ξ; about 1/step gradient evaluations; the output is the signs of the last iterate. sk or cube (pure p ≥ 3 from a random start at overlap δ).",
    keys: &[
        Key {
            name: "step",
            ty: "number in (0, 0.25]",
            default: "0.01",
            doc: "time step δ (about 1/δ matrix–vector products)",
        },
        Key {
            name: "levels",
            ty: "integer ≥ 2",
            default: "16",
            doc: "intervals of the full-RSB order parameter the field is computed from",
        },
        Key {
            name: "start",
            ty: "number in (0, 0.5]",
            default: "the step δ",
            doc: "overlap q₀ of the random point the iteration starts from; the field is taken from t = q₀ (from t = 0 by default when ξ has a p = 2 term)",
        },
        Key {
            name: "decorrelate",
            ty: "true or false",
            default: "true",
            doc: "remove from each increment of Z its component along the current iterate m (zero in the n → ∞ limit; keeps the finite-n iteration on its state evolution)",
        },
        Key {
            name: "order",
            ty: "\"extended\" or \"parisi\"",
            default: "\"extended\"",
            doc: "γ from the extended (non-monotone) minimiser, aiming at the algorithmic threshold, or from the Parisi minimiser",
        },
    ],
    parse,
};

fn parse(s: &Settings<'_>) -> Result<super::AlgoSpec, SpecError> {
    let mut p = Params::default();
    if let Some(v) = s.number("step")? {
        if !(v > 0.0 && v <= 0.25) {
            return Err(s.fail(
                "step",
                format!("step = {v} is not a time step in (0, 0.25]"),
                "the run takes about 1/step matrix–vector products; e.g. step = 0.02",
            ));
        }
        p.step = v;
    }
    if let Some(l) = s.count("levels", 64)? {
        p.levels = l.max(2);
    }
    if let Some(v) = s.number("start")? {
        if !(v > 0.0 && v <= 0.5) {
            return Err(s.fail(
                "start",
                format!("start = {v} is not an overlap in (0, 0.5]"),
                "the iteration starts from a random point of norm² start·n; e.g. start = 0.05",
            ));
        }
        p.start = Some(v);
    }
    if let Some(b) = s.flag("decorrelate")? {
        p.decorrelate = b;
    }
    if let Some(i) = s.choice("order", "order parameter", &["extended", "parisi"])? {
        p.extended = i == 0;
    }
    Ok(super::AlgoSpec::new(p))
}

impl Algorithm for Params {
    super::identity!();
    fn canon(&self, c: Canon) -> Canon {
        c.with("step", self.step)
            .with("levels", self.levels)
            .with("order", if self.extended { "extended" } else { "parisi" })
            .with("decorrelate", self.decorrelate)
            .with("theory_revision", full::REVISION)
            .with_if(self.start.is_some(), "start", self.start.unwrap_or(0.0))
    }
    fn has_point(&self) -> bool {
        true
    }
    fn work_bytes(&self, n: u64) -> u128 {
        // the iterates m⁰…m^K it keeps for the Onsager sum, plus x, z, z_old, f.
        8 * n as u128 * (self.steps() as u128 + 5)
    }
    fn cost(&self, n: u64, flip: f64) -> f64 {
        self.steps() as f64 * n as f64 * flip
    }
    fn unsupported(&self, m: &ModelSpec) -> Option<&'static str> {
        (!m.family.spins() || m.mixture().is_none()).then_some(
            "incremental AMP needs a dense model on the cube (sk, or cube with xi = { … })",
        )
    }
    fn run(&self, inst: &Instance, rng: &mut Stream) -> Result<Output, AlgoError> {
        super::on_dense_cube!(inst, KIND.name, |n, xi, grad| run(self, n, xi, grad, rng))
    }
}

/// Runs IAMP for covariance ξ with gradient `grad` (writes ∇H(x), returns H(x)).
pub fn run(
    p: &Params,
    n: usize,
    xi: &Mixture,
    mut grad: impl FnMut(&[f64], &mut [f64]) -> f64,
    rng: &mut Stream,
) -> Result<Output, AlgoError> {
    let delta = p.step;
    // With a p = 2 term and no explicit start: m⁰ = √δ·s and the field from t = 0 (revision
    // 3's numbers). Otherwise m⁰ = √q₀·s and the field from t = q₀, up to t ≈ 1 − δ.
    let (t0, scale) = match (p.start, xi.d2(0.0) > 0.0) {
        (None, true) => (0.0, delta.sqrt()),
        (q0, _) => {
            let q0 = q0.unwrap_or(delta);
            (q0, q0.sqrt())
        }
    };
    let k_max = p.steps_from(t0);
    let drive = drive(p, xi, t0);
    let nf = n as f64;
    // History: m^0..m^k, and per step c_k and ⟨u_{k−1}⟩ (index k; entry 0 unused).
    let mut ms: Vec<Vec<f64>> = vec![(0..n).map(|_| rng.sign() * scale).collect()];
    let (mut cs, mut us) = (vec![0.0], vec![0.0]);
    let mut x = vec![0.0; n];
    let mut z_old = vec![0.0; n];
    let mut z = vec![0.0; n];
    let mut f = vec![0.0; n];
    let mut info = Info::default();
    for k in 1..k_max {
        crate::exec::progress::step(k as u64, k_max as u64, "product");
        // z^k = ∇H(m^{k−1}) − Σ_{j=1..k−1} ξ''(⟨m^{k−1}, m^{j−1}⟩/n) b_{k−1,j} m^{j−1}.
        let last = ms.len() - 1;
        grad(&ms[last], &mut z);
        info.iterations += 1;
        for j in 1..=last {
            let b = if j == last {
                cs[j] * us[j]
            } else {
                cs[j] * us[j] - cs[j + 1] * us[j + 1]
            };
            let w = xi.d2(dot(&ms[last], &ms[j - 1]) / nf) * b;
            crate::kernels::axpy(&mut z, -w, &ms[j - 1]);
        }
        if p.decorrelate {
            // z^k − z^{k−1} loses its component along m^{k−1} (zero under state evolution).
            let m = &ms[last];
            let w = (dot(&z, m) - dot(&z_old, m)) / dot(m, m);
            crate::kernels::axpy(&mut z, -w, m);
        }
        // Increment of Z, then x and m at t_k (u and the drift at t_{k−1}, x^{k−1}).
        let (a, mut ub, mut ss) = (drive.drift[k - 1], 0.0, 0.0);
        for i in 0..n {
            let dz = z[i] - z_old[i];
            let (u1, u2) = drive.at(k - 1, x[i]);
            f[i] = u2 * dz;
            x[i] += delta * a * u1 + dz;
            ub += u2;
            ss += f[i] * f[i];
        }
        std::mem::swap(&mut z, &mut z_old);
        if ss.is_nan() || ss <= 0.0 {
            return Err(AlgoError::Numerical {
                message: format!("IAMP increment vanished at step {k} of {k_max} (δ = {delta})"),
            });
        }
        let c = (delta * nf / ss).sqrt();
        let mut next = ms[last].clone();
        crate::kernels::axpy(&mut next, c, &f);
        if !next.iter().all(|v| v.is_finite()) {
            return Err(AlgoError::Numerical {
                message: format!("IAMP iterate not finite at step {k} of {k_max} (δ = {delta})"),
            });
        }
        ms.push(next);
        cs.push(c);
        us.push(ub / nf);
        info.sweeps += 1;
    }
    let m = ms.pop().expect("at least one iterate");
    info.converged = true;
    info.relaxation = Some(grad(&m, &mut z) / nf);
    // The norm with the kernels' sum (not `super::rounded`'s): the point's bits are part of
    // revision 2's results.
    let s = nf.sqrt() / dot(&m, &m).sqrt().max(f64::MIN_POSITIVE);
    Ok(Output {
        spins: super::signs(&m),
        point: Some(m.iter().map(|v| v * s).collect()),
        info,
    })
}
