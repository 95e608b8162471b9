//! The energy traces of a run's samplers: every ε = 0 cell whose trace artifact is in the
//! cache, gathered into `traces.parquet` (one row per trace point).

/// `traces.parquet` for the run, encoded as (path, bytes), or None when no cell of the plan has
/// a trace (optimisers keep none), so experiments without samplers gain no empty table.
pub fn encode_traces(
    spec: &crate::spec::Spec,
    plan: &crate::spec::plan::Plan,
    cache: &crate::store::cache::Cache,
    dir: &std::path::Path,
) -> Result<Option<(std::path::PathBuf, Vec<u8>)>, crate::store::StoreError> {
    use crate::store::cache::Lookup;
    let mut table = crate::store::table::Traces::default();
    let unit = if spec.model.family.spins() {
        "sweep"
    } else {
        "step"
    };
    let mut cells: Vec<_> = plan.cells.iter().filter(|c| c.epsilon == 0.0).collect();
    cells.sort_by_key(|c| (c.algo, c.n, c.seed, c.replica));
    for c in cells {
        let algo = &spec.algorithms[c.algo];
        if algo.algo.gibbs_beta().is_none() {
            continue;
        }
        if let Lookup::Hit(t) = cache.read_trace(&c.key)? {
            table.push(&algo.label, c.n, c.seed, c.replica, unit, &t);
        }
    }
    if table.is_empty() {
        return Ok(None);
    }
    let p = dir.join("traces.parquet");
    let bytes = table.encode(&p, &spec.name)?;
    Ok(Some((p, bytes)))
}
