//! The replica tables of a run with `sweep.replicas = K ≥ 2`: the outputs of every (algorithm,
//! n, seed) read back from the cache, their overlaps measured ([`crate::measure`]) and written.

/// `overlaps.parquet` (every pair of replicas) and `triples.parquet` (every triple, overlaps
/// sorted) for each (algorithm, n, seed) whose replicas all have their output in the cache,
/// encoded: (path, bytes) for the caller to write with the rest of the run's files.
pub fn encode_overlaps(
    spec: &crate::spec::Spec,
    plan: &crate::spec::plan::Plan,
    cache: &crate::store::cache::Cache,
    dir: &std::path::Path,
) -> Result<Vec<(std::path::PathBuf, Vec<u8>)>, crate::store::StoreError> {
    use crate::store::cache::Lookup;
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
            let v = if sphere {
                match cache.read_point(key)? {
                    Lookup::Hit(x) => x,
                    _ => break,
                }
            } else {
                match cache.read_spins(key)? {
                    Lookup::Hit(s) => s.iter().map(|&x| x as f64).collect(),
                    _ => break,
                }
            };
            outs.push(v);
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
    let sym = spec.model.family.symmetric();
    Ok(vec![
        (p.clone(), pairs.encode(&p, &spec.name, sym)?),
        (t.clone(), triples.encode(&t, &spec.name, sym)?),
    ])
}
