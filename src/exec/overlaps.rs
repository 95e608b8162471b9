//! The replica tables of a run with `sweep.replicas = K ≥ 2`: the outputs of every (algorithm,
//! n, seed) read back from the cache, their overlaps measured ([`crate::measure`]) and written;
//! with ε > 0 levels, also the disorder-chaos table of the outputs on the correlated instances.

/// `overlaps.parquet` (every pair of replicas) and `triples.parquet` (every triple, overlaps
/// sorted) for each (algorithm, n, seed) whose replicas all have their output in the cache,
/// encoded: (path, bytes) for the caller to write with the rest of the run's files.
pub fn encode_overlaps(
    spec: &crate::spec::Spec,
    plan: &crate::spec::plan::Plan,
    cache: &crate::store::cache::Cache,
    dir: &std::path::Path,
) -> Result<Vec<(std::path::PathBuf, Vec<u8>)>, crate::store::StoreError> {
    use std::collections::BTreeMap;
    let sphere = !spec.model.family.spins();
    let mut groups: BTreeMap<(usize, u64, u64), Vec<(u32, crate::cell::Key)>> = BTreeMap::new();
    for c in plan.cells.iter().filter(|c| c.epsilon == 0.0) {
        groups
            .entry((c.algo, c.n, c.seed))
            .or_default()
            .push((c.replica, c.key));
    }
    let mut pairs = crate::store::table::Overlaps::default();
    let mut triples = crate::store::table::Triples::default();
    for ((algo, n, seed), mut reps) in groups {
        reps.sort();
        let mut outs: Vec<Vec<f64>> = Vec::new();
        for (_, key) in &reps {
            match output(sphere, cache, key)? {
                Some(v) => outs.push(v),
                None => break,
            }
        }
        if outs.len() != reps.len() {
            continue;
        }
        let label = spec.algorithms[algo].label.as_str();
        let (ps, ts) = crate::measure::replica_overlaps(&outs);
        for (a, b, q) in ps {
            pairs.push(label, n, seed, a, b, q);
        }
        for (r, qs) in ts {
            triples.push(label, n, seed, r, qs);
        }
    }
    let (p, t) = (dir.join("overlaps.parquet"), dir.join("triples.parquet"));
    let sym = spec.model.symmetric();
    let mut files = vec![
        (p.clone(), pairs.encode(&p, &spec.name, sym)?),
        (t.clone(), triples.encode(&t, &spec.name, sym)?),
    ];
    if spec.epsilons.iter().any(|&e| e > 0.0) {
        let c = dir.join("chaos.parquet");
        files.push((
            c.clone(),
            chaos(spec, plan, cache)?.encode(&c, &spec.name, sym)?,
        ));
    }
    Ok(files)
}

/// The output of a cell from the cache (the point on the sphere, else the spins), if there.
fn output(
    sphere: bool,
    cache: &crate::store::cache::Cache,
    key: &crate::cell::Key,
) -> Result<Option<Vec<f64>>, crate::store::StoreError> {
    use crate::store::cache::Lookup;
    Ok(if sphere {
        match cache.read_point(key)? {
            Lookup::Hit(x) => Some(x),
            _ => None,
        }
    } else {
        match cache.read_spins(key)? {
            Lookup::Hit(s) => Some(s.iter().map(|&x| x as f64).collect()),
            _ => None,
        }
    })
}

/// One row per (algorithm, n, seed, ε > 0) whose 2K outputs are all in the cache.
fn chaos(
    spec: &crate::spec::Spec,
    plan: &crate::spec::plan::Plan,
    cache: &crate::store::cache::Cache,
) -> Result<crate::store::table::Chaos, crate::store::StoreError> {
    use std::collections::BTreeMap;
    let sphere = !spec.model.family.spins();
    // (algo, n, seed) → ε bits → replica → key; ε = 0 under bits 0.
    type Group = BTreeMap<u64, BTreeMap<u32, crate::cell::Key>>;
    let mut groups: BTreeMap<(usize, u64, u64), Group> = BTreeMap::new();
    for c in &plan.cells {
        groups
            .entry((c.algo, c.n, c.seed))
            .or_default()
            .entry(c.epsilon.to_bits())
            .or_default()
            .insert(c.replica, c.key);
    }
    let mut table = crate::store::table::Chaos::default();
    let sym = spec.model.symmetric();
    for ((algo, n, seed), levels) in groups {
        let Some(base) = levels.get(&0f64.to_bits()) else {
            continue;
        };
        let Some(on_j) = outputs(sphere, cache, base)? else {
            continue;
        };
        for &eps in spec.epsilons.iter().filter(|&&e| e > 0.0) {
            let Some(on_jp) = levels.get(&eps.to_bits()) else {
                continue;
            };
            let Some(on_jp) = outputs(sphere, cache, on_jp)? else {
                continue;
            };
            if on_jp.len() != on_j.len() {
                continue;
            }
            let q = crate::measure::chaos_overlaps(&on_j, &on_jp, sym);
            table.push(
                &spec.algorithms[algo].label,
                n,
                seed,
                eps,
                on_j.len() as u32,
                q,
            );
        }
    }
    Ok(table)
}

/// Every replica's output, in replica order, or None if one is missing.
fn outputs(
    sphere: bool,
    cache: &crate::store::cache::Cache,
    keys: &std::collections::BTreeMap<u32, crate::cell::Key>,
) -> Result<Option<Vec<Vec<f64>>>, crate::store::StoreError> {
    let mut v = Vec::with_capacity(keys.len());
    for key in keys.values() {
        match output(sphere, cache, key)? {
            Some(x) => v.push(x),
            None => return Ok(None),
        }
    }
    Ok(Some(v))
}
