//! `kiln check`: validate a spec and print its plan. Writes nothing.

use super::{CommonArgs, out};
use crate::exec::memory;
use crate::spec::plan::expand;
use crate::store::cache::Cache;
use std::process::ExitCode;

pub fn run(a: &CommonArgs) -> anyhow::Result<ExitCode> {
    let spec = a.load_spec()?;
    let max_memory = a.max_memory()?;
    let jobs = a.jobs()?;
    let budget = memory::budget(max_memory);
    let fit_in_memory = memory::cells_that_fit(&spec, budget)?;
    let plan = expand(&spec);
    let cache = Cache::new(a.folders.cache_dir());
    // The distinct cells, cached or still to run (one look at the cache each).
    let (done, todo): (Vec<_>, Vec<_>) = plan.distinct().partition(|c| cache.has_record(&c.key));
    let (total, cached) = (done.len() + todo.len(), done.len());
    let (largest, largest_n) = memory::largest_cell(&spec);
    let parallel = jobs.min(fit_in_memory).min(total.max(1));
    let sweep = format!(
        "{} sizes × {}{} seeds × {} ε × {} algorithms",
        spec.sizes.len(),
        if spec.models.len() > 1 {
            format!("{} densities × ", spec.models.len())
        } else {
            String::new()
        },
        spec.seeds.len(),
        spec.epsilons.len(),
        spec.algorithms.len()
    );
    // Time: the cost model `kiln slurm` sizes its tasks with (conservative units per second
    // per job), over the cells still to run. The ε cells start once the instances' cells are
    // done, and within each phase `parallel` jobs take cells as they free up, which finishes
    // within total/p + (1 − 1/p)·largest (list scheduling).
    let p = parallel.max(1) as f64;
    // Per phase: its bound in seconds with each cell's cost at `speed(algorithm)` units per
    // second, and its cells (a phase with fewer cells than jobs leaves some idle).
    let phase = |base: bool, speed: &dyn Fn(usize) -> f64| {
        let costs = todo.iter().filter(|c| c.is_base() == base);
        let (total, largest, cells) = costs
            .map(|c| spec.cell_cost(c) / speed(c.algo))
            .fold((0.0, 0.0f64, 0), |(t, l, k), x| (t + x, l.max(x), k + 1));
        (total / p + (1.0 - 1.0 / p) * largest, cells)
    };
    let model = |_: usize| super::slurm::COST_PER_SECOND;
    let (instances, epsilons) = (phase(true, &model), phase(false, &model));
    let bound = instances.0 + epsilons.0;
    let busy = instances.1.max(epsilons.1).min(parallel);
    // The same bound at the speed this host measured on the plan's cached cells, where it has
    // any: a realistic figure beside the conservative one (an extended study, a rerun). Only
    // read when something is left to run (it reads every cached cell's record).
    let (rates, measured_cells) = if todo.is_empty() {
        (Vec::new(), 0)
    } else {
        measured_speeds(&spec, &done, &cache)
    };
    let measured = (measured_cells > 0).then(|| {
        let speed = |a: usize| rates[a].unwrap_or(super::slurm::COST_PER_SECOND);
        phase(true, &speed).0 + phase(false, &speed).0
    });
    if a.json {
        let v = serde_json::json!({
            "experiment": spec.name,
            "spec": spec.origin,
            "spec_hash": plan.spec_hash.hex(),
            "cells": { "total": total, "cached": cached, "to_run": total - cached },
            "memory": {
                "largest_cell_bytes": largest as u64,
                "largest_cell_n": largest_n,
                "parallel_cells": parallel,
                "total_bytes": (largest * parallel as u128) as u64,
                "available_bytes": budget,
            },
            "time": {
                "upper_bound_seconds": bound, "jobs": parallel, "busy_jobs": busy,
                "measured_seconds": measured, "measured_from_cells": measured_cells,
            },
            "algorithms": spec.algorithms.iter().map(|a| serde_json::json!({
                "label": a.label, "kind": a.algo.kind(), "settings": a.algo.settings(),
            })).collect::<Vec<_>>(),
        });
        out(&format!("{v}\n"));
    } else {
        let mut s = String::new();
        s += &format!(
            "experiment  {}  (spec {}, hash {})\n",
            spec.name,
            spec.origin,
            &plan.spec_hash.hex()[..12]
        );
        if !spec.note.is_empty() {
            s += &format!("note        {}\n", spec.note);
        }
        s += &format!(
            "model       {}, {} couplings{}\n",
            spec.model.family.name(),
            spec.model.couplings.name(),
            if spec.models.len() > 1 {
                format!(
                    ", densities {}",
                    spec.models
                        .iter()
                        .filter_map(|m| m.family.density())
                        .map(|a| a.to_string())
                        .collect::<Vec<_>>()
                        .join(", ")
                )
            } else {
                String::new()
            }
        );
        s += &format!("sweep       {sweep}\n");
        // Every setting the cells run with, defaults filled in (the table's `settings`).
        let width = spec
            .algorithms
            .iter()
            .map(|a| a.label.len())
            .max()
            .unwrap_or(0);
        for (i, a) in spec.algorithms.iter().enumerate() {
            s += &format!(
                "{}{:width$}  {}\n",
                if i == 0 {
                    "algorithms  "
                } else {
                    "            "
                },
                a.label,
                a.algo.settings()
            );
        }
        s += &format!(
            "cells       {total} in total · {cached} cached · {} to run\n",
            total - cached
        );
        s += &format!(
            "memory      largest cell {} (n = {largest_n}) · {} with {parallel} in parallel{}\n",
            memory::human(largest),
            memory::human(largest * parallel as u128),
            budget.map_or(String::new(), |b| format!(
                " · {} available",
                memory::human(b as u128)
            ))
        );
        if todo.is_empty() {
            s += "time        nothing to run: every cell is cached\n";
        } else {
            let jobs = if busy < parallel {
                format!(
                    "{parallel} jobs, at most {busy} busy at once (each ε cell waits for its instance's cell)"
                )
            } else {
                format!("{parallel} job{}", if parallel == 1 { "" } else { "s" })
            };
            s += &format!(
                "time        at most about {} on {jobs} (an upper estimate: kiln's cost model at {:.0e} updates/s per job, the one `kiln slurm` sizes its tasks with)\n",
                duration(bound),
                super::slurm::COST_PER_SECOND
            );
        }
        if let Some(m) = measured {
            let all = rates.iter().all(Option::is_some);
            s += &format!(
                "            about {} at the speed {measured_cells} cached cell{} of this plan ran at on this host (each algorithm's largest cached size{})\n",
                duration(m),
                if measured_cells == 1 { "" } else { "s" },
                if all {
                    ""
                } else {
                    "; the others at the cost model's speed"
                }
            );
        }
        out(&s);
    }
    Ok(ExitCode::SUCCESS)
}

/// Cells under this many seconds are mostly overhead; their speed says little.
const MEASURED_MIN_SECONDS: f64 = 0.05;

/// The speed, in cost units per second, at which this host ran each algorithm's cached cells
/// (`done`): the median over its cells at the largest size it has cached (the closest to the
/// sizes still to run), from the records' wall time; None for an algorithm without such a
/// cell. Also the number of cells the speeds come from.
fn measured_speeds(
    spec: &crate::spec::Spec,
    done: &[&crate::spec::plan::Cell],
    cache: &Cache,
) -> (Vec<Option<f64>>, usize) {
    use crate::store::cache::Lookup;
    let host = crate::store::this_host();
    // Per algorithm: (n, speed) of each usable cached cell.
    let mut seen: Vec<Vec<(u64, f64)>> = vec![Vec::new(); spec.algorithms.len()];
    for c in done {
        if let Ok(Lookup::Hit(r)) = cache.read_record(&c.key)
            && r.host == host
            && r.wall_seconds >= MEASURED_MIN_SECONDS
        {
            seen[c.algo].push((c.n, spec.cell_cost(c) / r.wall_seconds));
        }
    }
    let mut used = 0;
    let rates = seen
        .into_iter()
        .map(|cells| {
            let top = cells.iter().map(|x| x.0).max()?;
            let mut at: Vec<f64> = cells.iter().filter(|x| x.0 == top).map(|x| x.1).collect();
            at.sort_by(f64::total_cmp);
            used += at.len();
            Some(at[at.len() / 2])
        })
        .collect();
    (rates, used)
}

/// Seconds as the largest two units: `40 s`, `3 min 20 s`, `2 h 5 min`.
fn duration(secs: f64) -> String {
    let s = secs.max(0.0).ceil() as u64;
    match s {
        0..60 => format!("{s} s"),
        60..3600 => format!("{} min {} s", s / 60, s % 60),
        _ => format!("{} h {} min", s / 3600, (s % 3600) / 60),
    }
}
