//! `kiln run`: run the missing cells of a spec, then write the table and the manifest.

use super::{RunArgs, out};
use crate::exec::{self, INTERRUPTED, Options, Provenance, memory};
use crate::spec::plan::expand;
use crate::spec::shard::{self, Shard};
use crate::store::cache::Cache;
use crate::store::manifest::{Manifest, utc_now};
use crate::store::{table, write_atomic};
use anyhow::Context;
use std::process::ExitCode;
use std::sync::atomic::Ordering;
use std::time::Instant;

pub fn run(a: &RunArgs) -> anyhow::Result<ExitCode> {
    let c = &a.common;
    let t0 = Instant::now();
    let started = utc_now();
    let spec = c.load_spec()?;
    let max_memory = c.max_memory()?;
    let jobs_wanted = c.jobs()?;
    let fit_in_memory = memory::cells_that_fit(&spec, memory::budget(max_memory))?;
    let jobs = jobs_wanted.min(fit_in_memory);
    let shard = a
        .shard
        .as_deref()
        .map(Shard::parse)
        .transpose()
        .map_err(|m| super::InputError(format!("--shard: {m}")))?;
    let mut plan = expand(&spec);
    if let Some(sh) = shard {
        plan.cells = shard::cells_of(&spec, &plan, sh);
    }
    let cache = Cache::new(c.folders.cache_dir());
    cache.prepare()?;
    let talk = !a.quiet && !c.json;
    if jobs < jobs_wanted && !c.json {
        eprintln!(
            "note: running {jobs} cells at a time instead of {jobs_wanted}: more would not fit in memory"
        );
    }

    let _ = ctrlc::set_handler(|| {
        if INTERRUPTED.swap(true, Ordering::SeqCst) {
            // Second Ctrl-C: leave now. Records are written atomically, so nothing is torn.
            std::process::exit(130);
        }
        eprintln!(
            "\ninterrupt: finishing the cells in flight, then writing the table (Ctrl-C again to leave at once)"
        );
    });

    let host = crate::store::this_host().to_string();
    let prov = Provenance {
        host: host.clone(),
        kiln_version: crate::VERSION.into(),
        threads: jobs as u32,
        computed_by: format!("{host}:{}:{started}", std::process::id()),
    };
    let report = exec::execute(
        &spec,
        &plan,
        &cache,
        &Options {
            jobs,
            progress: talk,
            note: (jobs < jobs_wanted).then(|| format!("{jobs} at a time (memory)")),
        },
        &prov,
    )
    .context("the run stopped")?;
    if !c.json {
        for d in &report.damaged {
            eprintln!("warning: {d}");
        }
    }

    if let Some(sh) = shard {
        return Ok(shard_summary(
            a,
            &spec.name,
            sh,
            &report,
            t0.elapsed().as_secs_f64(),
        ));
    }

    // Assemble the table in plan order.
    let rows: Vec<table::Row> = plan
        .cells
        .iter()
        .filter(|cell| cell.replica == 0)
        .filter_map(|cell| {
            report.records.get(&cell.key).map(|r| table::Row {
                experiment: &spec.name,
                label: &spec.algorithms[cell.algo].label,
                record: r,
            })
        })
        .collect();
    let dir = c.folders.results.join(&spec.name);
    let table_path = dir.join("cells.parquet");
    let manifest_path = dir.join("manifest.toml");
    table::write(&table_path, &rows, &plan.spec_hash.hex())?;
    let manifest = Manifest {
        experiment: spec.name.clone(),
        note: spec.note.clone(),
        spec_origin: spec.origin.clone(),
        spec_hash: plan.spec_hash.hex(),
        kiln_version: crate::VERSION.into(),
        git_revision: crate::GIT_REVISION.into(),
        rustc: crate::RUSTC.into(),
        host,
        threads: jobs as u32,
        started,
        finished: utc_now(),
        cells: report.counts.clone(),
        spec: spec.text.clone(),
    };
    write_atomic(&manifest_path, manifest.to_toml().as_bytes())?;
    if spec.replicas > 1 {
        crate::exec::overlaps::write_overlaps(&spec, &plan, &cache, &dir)?;
    }

    let k = &report.counts;
    let wall = t0.elapsed().as_secs_f64();
    if c.json {
        let v = serde_json::json!({
            "experiment": spec.name,
            "spec_hash": plan.spec_hash.hex(),
            "cells": counts_json(k),
            "rows": rows.len(),
            "table": table_path.display().to_string(),
            "manifest": manifest_path.display().to_string(),
            "cache": cache.root().display().to_string(),
            "jobs": jobs,
            "wall_seconds": wall,
            "interrupted": report.interrupted,
            "failures": failures_json(&report),
            "damaged": report.damaged,
        });
        out(&format!("{v}\n"));
    } else if !a.quiet {
        out(&super::summary::render(&spec, &plan, &report.records));
        out(&format!(
            "\n{}: {} cells · {} computed · {} cached · {} failed · {:.1} s\ntable     {}\nmanifest  {}\n",
            spec.name,
            k.total,
            k.computed,
            k.cached,
            k.failed,
            wall,
            table_path.display(),
            manifest_path.display()
        ));
    }
    Ok(finish(
        &report,
        &format!("the table holds the {} rows done so far", rows.len()),
    ))
}

/// A shard writes only to the cache; it reports its counts.
fn shard_summary(a: &RunArgs, name: &str, sh: Shard, report: &exec::Report, wall: f64) -> ExitCode {
    let k = &report.counts;
    if a.common.json {
        let v = serde_json::json!({
            "experiment": name,
            "shard": format!("{}/{}", sh.index, sh.count),
            "cells": counts_json(k),
            "wall_seconds": wall,
            "interrupted": report.interrupted,
            "failures": failures_json(report),
            "damaged": report.damaged,
        });
        out(&format!("{v}\n"));
    } else if !a.quiet {
        out(&format!(
            "{name} shard {}/{}: {} cells · {} computed · {} cached · {} failed · {wall:.1} s\n(the table is written by a plain `kiln run` once every shard is done)\n",
            sh.index, sh.count, k.total, k.computed, k.cached, k.failed
        ));
    }
    finish(report, "the cache holds what is done")
}

fn counts_json(k: &crate::store::manifest::CellCounts) -> serde_json::Value {
    serde_json::json!({
        "total": k.total, "cached": k.cached, "computed": k.computed,
        "failed": k.failed, "skipped": k.skipped,
    })
}

fn failures_json(report: &exec::Report) -> serde_json::Value {
    report
        .failures
        .iter()
        .map(|(key, m)| serde_json::json!({"cell_key": key, "error": m}))
        .collect()
}

/// Prints failures and the resume hint; the exit status of a run.
fn finish(report: &exec::Report, done: &str) -> ExitCode {
    for (key, m) in &report.failures {
        eprintln!("failed: cell {}: {m}", &key[..12]);
    }
    if report.interrupted {
        eprintln!(
            "interrupted: {} cells not run; {done}. Run the same command again to resume.",
            report.counts.skipped
        );
        return ExitCode::from(130);
    }
    if report.counts.failed > 0 {
        ExitCode::from(1)
    } else {
        ExitCode::SUCCESS
    }
}
