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
        "{} sizes × {} seeds × {} ε × {} algorithms",
        spec.sizes.len(),
        spec.seeds.len(),
        spec.epsilons.len(),
        spec.algorithms.len()
    );
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
            "model       {}, {} couplings\n",
            spec.model.family.name(),
            spec.model.couplings.name()
        );
        s += &format!("sweep       {sweep}\n");
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
        out(&s);
    }
    Ok(ExitCode::SUCCESS)
}
