//! Solutions through the cache (zero temperature, and the free energy at β): each solve is keyed by the mixture, the
//! solver's settings and its revision, stored checksummed (see [`crate::store::theory`]), and
//! reused by `kiln theory`, `kiln plot` and incremental AMP's callers.

use crate::cell::Canon;
use crate::store::StoreError;
use crate::store::cache::{Cache, Lookup};
use crate::theory::{Mixture, cube, full};

/// Revision of the k-step solver; enters the cache key of its solutions.
const SOLVER_REVISION: u32 = 1;

fn floats(v: &serde_json::Value, f: &str) -> Option<Vec<f64>> {
    v[f].as_array()?.iter().map(|x| x.as_f64()).collect()
}

fn read_full(v: &serde_json::Value) -> Option<full::FullRsb> {
    Some(full::FullRsb {
        value: v["value"].as_f64()?,
        q: floats(v, "q")?,
        m: floats(v, "m")?,
        iterations: v["iterations"].as_u64()? as usize,
        gradient: v["gradient"].as_f64()?,
    })
}

fn full_json(key: &str, sol: &full::FullRsb) -> serde_json::Value {
    serde_json::json!({"key": key, "value": sol.value, "q": sol.q, "m": sol.m,
        "iterations": sol.iterations, "gradient": sol.gradient})
}

fn settings_key(xi: &Mixture, s: &full::FullSettings, what: &str) -> String {
    hex::encode(
        Canon::map()
            .with("mixture", xi.canon())
            .with("levels", s.levels)
            .with("grid", s.grid)
            .with("half_width", s.half_width)
            .with("power", s.power)
            .with("max_iterations", s.max_iterations)
            .with("revision", full::REVISION)
            .with_if(s.zoom != 1, "zoom", s.zoom)
            .hash(what),
    )
}

/// The full-RSB solution with free breakpoints ([`full::full_rsb_free`]) at the given
/// settings, from the cache or solved and stored.
fn full_rsb_at(
    cache: &Cache,
    xi: &Mixture,
    s: &full::FullSettings,
) -> Result<full::FullRsb, StoreError> {
    let hex_key = settings_key(xi, s, "theory-full-rsb");
    if let Lookup::Hit(v) = crate::store::theory::read(cache, &hex_key)?
        && let Some(sol) = read_full(&v)
    {
        return Ok(sol);
    }
    let sol = full::full_rsb_free(xi, s, full::FREE_ROUNDS);
    crate::store::theory::write(cache, &hex_key, &full_json(&hex_key, &sol))?;
    Ok(sol)
}

/// The full-RSB solution at default settings.
pub fn full_rsb(cache: &Cache, xi: &Mixture) -> Result<full::FullRsb, StoreError> {
    full_rsb_at(cache, xi, &full::FullSettings::default())
}

/// The algorithmic threshold on the cube ([`full::algorithmic`], default settings) with the
/// value each start reached, from the cache or solved and stored.
/// Where ξ''(0) = 0 the three starts' best is refined near q = 0 on the zoomed lattice
/// ([`full::algorithmic_near_zero`]); the key names that lattice ([`alg_settings`]).
pub fn algorithmic(cache: &Cache, xi: &Mixture) -> Result<(full::FullRsb, Vec<f64>), StoreError> {
    let s = full::FullSettings::default();
    let hex_key = settings_key(xi, &alg_settings(xi), "theory-cube-alg");
    if let Lookup::Hit(v) = crate::store::theory::read(cache, &hex_key)?
        && let (Some(sol), Some(starts)) = (read_full(&v), floats(&v, "starts"))
    {
        return Ok((sol, starts));
    }
    let parisi = full_rsb(cache, xi)?;
    let (sol, starts) = full::algorithmic(xi, &s, &parisi);
    let sol = full::algorithmic_near_zero(xi, &s, &sol);
    let mut v = full_json(&hex_key, &sol);
    v["starts"] = serde_json::json!(starts);
    crate::store::theory::write(cache, &hex_key, &v)?;
    Ok((sol, starts))
}

/// The settings the cube's algorithmic threshold is evaluated with: the defaults, zoomed near
/// q = 0 where ξ''(0) = 0 ([`full::near_zero_settings`]; the zoom does nothing elsewhere).
pub fn alg_settings(xi: &Mixture) -> full::FullSettings {
    let s = full::FullSettings::default();
    if full::flat_at_zero(xi) {
        full::near_zero_settings(&s)
    } else {
        s
    }
}

/// Re-solves on the grid below q_max in [`at_temperature`].
const TEMPERATURE_ROUNDS: usize = 2;

/// The Parisi free energy at inverse temperature β and uniform field h (H + hΣσ_i; 0 for
/// none) ([`full::free_energy_refined_field`], default settings) with the Gibbs mean energy per
/// spin E(β) = dP/dβ ([`full::energy_at_field`]), from the cache or solved and stored:
/// (solution, E(β)). With a field the grid cannot place a breakpoint at the replica-symmetric
/// q*, so the replica-symmetric step x = 1{q ≥ q*} is evaluated too and the lower of the two
/// kept (each is an upper bound on the infimum).
pub fn at_temperature(
    cache: &Cache,
    xi: &Mixture,
    beta: f64,
    field: f64,
) -> Result<(full::FullRsb, f64), StoreError> {
    let s = full::FullSettings::default();
    let hex_key = hex::encode(
        Canon::map()
            .with("settings", settings_key(xi, &s, "theory-beta-settings"))
            .with("beta", beta)
            .with_if(field != 0.0, "field", field)
            .with("rounds", TEMPERATURE_ROUNDS)
            .hash("theory-beta"),
    );
    if let Lookup::Hit(v) = crate::store::theory::read(cache, &hex_key)?
        && let (Some(sol), Some(e)) = (read_full(&v), v["energy"].as_f64())
    {
        return Ok((sol, e));
    }
    let mut sol = full::free_energy_refined_field(xi, beta, field, &s, TEMPERATURE_ROUNDS);
    if field != 0.0 {
        let rs = crate::theory::temperature::rs_field(xi, beta, field);
        let (q, m) = (vec![0.0, rs.q, 1.0], vec![0.0, 1.0]);
        let value = full::evaluate_at(xi, beta, field, &s, &q, &m);
        if value < sol.value {
            sol = full::FullRsb {
                value,
                q,
                m,
                iterations: 0,
                gradient: 0.0,
            };
        }
    }
    let e = full::energy_at_field(xi, beta, field, &s, &sol);
    let mut v = full_json(&hex_key, &sol);
    v["energy"] = serde_json::json!(e);
    crate::store::theory::write(cache, &hex_key, &v)?;
    Ok((sol, e))
}

fn k_rsb_key(xi: &Mixture, k: usize, s: &cube::Settings) -> String {
    hex::encode(
        Canon::map()
            .with("mixture", xi.canon())
            .with("k", k)
            .with("grid", s.grid)
            .with("half_width", s.half_width)
            .with("nodes", s.nodes)
            .with("revision", SOLVER_REVISION)
            .hash("theory-krsb"),
    )
}

fn stored_k_rsb(cache: &Cache, hex_key: &str) -> Result<Option<cube::Solution>, StoreError> {
    if let Lookup::Hit(v) = crate::store::theory::read(cache, hex_key)?
        && let (Some(value), Some(q), Some(m)) =
            (v["value"].as_f64(), floats(&v, "q"), floats(&v, "m"))
    {
        return Ok(Some(cube::Solution {
            value,
            steps: cube::Steps { q, m },
        }));
    }
    Ok(None)
}

/// The k-step RSB solution, from the cache or solved and stored.
pub fn k_rsb(
    cache: &Cache,
    xi: &Mixture,
    k: usize,
    s: &cube::Settings,
) -> Result<cube::Solution, StoreError> {
    let hex_key = k_rsb_key(xi, k, s);
    if let Some(sol) = stored_k_rsb(cache, &hex_key)? {
        return Ok(sol);
    }
    let sol = cube::k_rsb(xi, k, s);
    let v =
        serde_json::json!({"key": hex_key, "value": sol.value, "q": sol.steps.q, "m": sol.steps.m});
    crate::store::theory::write(cache, &hex_key, &v)?;
    Ok(sol)
}

/// A k-step solution's value as kiln prints it: the functional re-evaluated on the full-RSB
/// solver's lattice (whose error is exponentially small once every step is resolved), or None
/// where the lattice cannot resolve the solution (a step narrower than the grid spacing). The
/// k-step solver's own quadrature-and-interpolation value can lie spuriously low when a
/// large m on a tiny interval leaves a kink (measured: 2.5e-5 on pure p = 4 between 60 and
/// 100 nodes), so only resolved values count as bounds.
pub fn k_step_value(xi: &Mixture, sol: &cube::Solution) -> Option<f64> {
    let mut q = sol.steps.q.clone();
    q.push(1.0);
    full::evaluate(xi, &full::FullSettings::default(), &q, &sol.steps.m)
}

/// The best (least) upper bound kiln has on the Parisi value of the cube: the full-RSB value
/// with free breakpoints, or a k-step value (k = 1, 2) re-evaluated on the lattice, whichever
/// is lower, with the name of the solution. Every one of them is an upper bound (the Parisi
/// value is the infimum of the functional).
pub fn parisi_best(cache: &Cache, xi: &Mixture) -> Result<(f64, String), StoreError> {
    let full = full_rsb(cache, xi)?;
    let s = cube::Settings::default();
    let ks = (1..=2)
        .map(|k| k_rsb(cache, xi, k, &s))
        .collect::<Result<Vec<_>, _>>()?;
    Ok(best_bound(xi, &full, &ks))
}

/// The least of the full-RSB value and the resolved k-step values (`ks[k − 1]` is the k-step
/// solution), with the name of the solution that attains it.
fn best_bound(xi: &Mixture, full: &full::FullRsb, ks: &[cube::Solution]) -> (f64, String) {
    let mut bounds = vec![(
        full.value,
        format!("full RSB on {} free q-intervals", full.m.len()),
    )];
    for (k, sol) in ks.iter().enumerate() {
        if let Some(v) = k_step_value(xi, sol) {
            bounds.push((v, format!("{}-step RSB", k + 1)));
        }
    }
    least(bounds)
}

/// [`stored`]: the best Parisi bound with its solution's name, and the algorithmic threshold.
pub type Stored = (Option<(f64, String)>, Option<f64>);

/// What the cache already holds, without solving anything (for `kiln fit`, which must stay
/// fast): the best Parisi bound as [`parisi_best`] gives it, and the algorithmic threshold's
/// value, each None where its solutions were never stored (by `kiln theory` or `kiln plot`).
pub fn stored(cache: &Cache, xi: &Mixture) -> Result<Stored, StoreError> {
    let s = full::FullSettings::default();
    let read = |key: &str| -> Result<Option<full::FullRsb>, StoreError> {
        Ok(match crate::store::theory::read(cache, key)? {
            Lookup::Hit(v) => read_full(&v),
            _ => None,
        })
    };
    let alg = read(&settings_key(xi, &alg_settings(xi), "theory-cube-alg"))?.map(|a| a.value);
    let Some(full) = read(&settings_key(xi, &s, "theory-full-rsb"))? else {
        return Ok((None, alg));
    };
    let s = cube::Settings::default();
    let ks = (1..=2)
        .map(|k| stored_k_rsb(cache, &k_rsb_key(xi, k, &s)))
        .collect::<Result<Option<Vec<_>>, _>>()?;
    Ok((ks.map(|ks| best_bound(xi, &full, &ks)), alg))
}

/// The least of several upper bounds on the Parisi value, with its name (the first of equals).
pub fn least(bounds: impl IntoIterator<Item = (f64, String)>) -> (f64, String) {
    bounds
        .into_iter()
        .reduce(|a, b| if b.0 < a.0 { b } else { a })
        .expect("at least one bound")
}
