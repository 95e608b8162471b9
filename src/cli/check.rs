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
    let total = plan.distinct().count();
    let cached = plan.distinct().filter(|c| cache.has_record(&c.key)).count();
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
    let todo: Vec<_> = plan
        .distinct()
        .filter(|c| !cache.has_record(&c.key))
        .collect();
    let p = parallel.max(1) as f64;
    // Per phase: its bound in cost units, and its cells (a phase with fewer cells than jobs
    // leaves some idle).
    let phase = |base: bool| {
        let costs = todo.iter().filter(|c| c.is_base() == base);
        let (total, largest, cells) = costs
            .map(|c| spec.cell_cost(c))
            .fold((0.0, 0.0f64, 0), |(t, l, k), x| (t + x, l.max(x), k + 1));
        (total / p + (1.0 - 1.0 / p) * largest, cells)
    };
    let (instances, epsilons) = (phase(true), phase(false));
    let bound = (instances.0 + epsilons.0) / super::slurm::COST_PER_SECOND;
    let busy = instances.1.max(epsilons.1).min(parallel);
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
            "time": { "upper_bound_seconds": bound, "jobs": parallel, "busy_jobs": busy },
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
        out(&s);
    }
    Ok(ExitCode::SUCCESS)
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
