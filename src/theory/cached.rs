//! Zero-temperature solutions through the cache: each solve is keyed by the mixture, the
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

/// The full-RSB solution (default settings), from the cache or solved and stored.
pub fn full_rsb(cache: &Cache, xi: &Mixture) -> Result<full::FullRsb, StoreError> {
    let s = full::FullSettings::default();
    let hex_key = hex::encode(
        Canon::map()
            .with("mixture", xi.canon())
            .with("levels", s.levels)
            .with("grid", s.grid)
            .with("half_width", s.half_width)
            .with("nodes", s.nodes)
            .with("power", s.power)
            .with("max_iterations", s.max_iterations)
            .with("revision", full::REVISION)
            .hash("theory-full-rsb"),
    );
    if let Lookup::Hit(v) = crate::store::theory::read(cache, &hex_key)?
        && let (Some(value), Some(q), Some(m), Some(it), Some(g)) = (
            v["value"].as_f64(),
            floats(&v, "q"),
            floats(&v, "m"),
            v["iterations"].as_u64(),
            v["gradient"].as_f64(),
        )
    {
        return Ok(full::FullRsb {
            value,
            q,
            m,
            iterations: it as usize,
            gradient: g,
        });
    }
    let sol = full::full_rsb(xi, &s);
    let v = serde_json::json!({"key": hex_key, "value": sol.value, "q": sol.q, "m": sol.m,
        "iterations": sol.iterations, "gradient": sol.gradient});
    crate::store::theory::write(cache, &hex_key, &v)?;
    Ok(sol)
}

/// The k-step RSB solution, from the cache or solved and stored.
pub fn k_rsb(
    cache: &Cache,
    xi: &Mixture,
    k: usize,
    s: &cube::Settings,
) -> Result<cube::Solution, StoreError> {
    let hex_key = hex::encode(
        Canon::map()
            .with("mixture", xi.canon())
            .with("k", k)
            .with("grid", s.grid)
            .with("half_width", s.half_width)
            .with("nodes", s.nodes)
            .with("revision", SOLVER_REVISION)
            .hash("theory-krsb"),
    );
    if let Lookup::Hit(v) = crate::store::theory::read(cache, &hex_key)?
        && let (Some(value), Some(q), Some(m)) =
            (v["value"].as_f64(), floats(&v, "q"), floats(&v, "m"))
    {
        return Ok(cube::Solution {
            value,
            steps: cube::Steps { q, m },
        });
    }
    let sol = cube::k_rsb(xi, k, s);
    let v =
        serde_json::json!({"key": hex_key, "value": sol.value, "q": sol.steps.q, "m": sol.steps.m});
    crate::store::theory::write(cache, &hex_key, &v)?;
    Ok(sol)
}

/// The best (least) upper bound kiln has on the Parisi value of the cube: the full-RSB value
/// or a k-step value (k = 1, 2), whichever is lower, with the name of the solution. Every one
/// of them is an upper bound (the Parisi value is the infimum of the functional); a full-RSB
/// value on its fixed q-grid can lie above the 2-step one when γ has a large jump.
pub fn parisi_best(cache: &Cache, xi: &Mixture) -> Result<(f64, String), StoreError> {
    let full = full_rsb(cache, xi)?;
    let s = cube::Settings::default();
    let mut bounds = vec![(
        full.value,
        format!("full RSB on {} q-intervals", full.m.len()),
    )];
    for k in 1..=2 {
        bounds.push((k_rsb(cache, xi, k, &s)?.value, format!("{k}-step RSB")));
    }
    Ok(least(bounds))
}

/// The least of several upper bounds on the Parisi value, with its name (the first of equals).
pub fn least(bounds: impl IntoIterator<Item = (f64, String)>) -> (f64, String) {
    bounds
        .into_iter()
        .reduce(|a, b| if b.0 < a.0 { b } else { a })
        .expect("at least one bound")
}
