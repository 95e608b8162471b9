//! `kiln run`: run the missing cells of a spec, then write the table and the manifest.

use super::{RunArgs, out};
use crate::exec::{self, Options, Provenance, memory};
use crate::spec::plan::expand;
use crate::spec::shard::{self, Shard};
use crate::store::cache::Cache;
use crate::store::manifest::{Manifest, utc_now};
use crate::store::{table, write_all_atomic};
use anyhow::Context;
use std::collections::HashMap;
use std::process::ExitCode;
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
        .part
        .as_deref()
        .map(Shard::parse)
        .transpose()
        .map_err(|m| super::InputError(format!("--part: {m}")))?;
    let mut plan = expand(&spec);
    if let Some(sh) = shard {
        plan.cells = shard::cells_of(&spec, &plan, sh);
    }
    for (flag, v, lo, hi) in [
        ("--lease", a.lease, 0.2, 1e6),
        ("--grace", a.grace, 0.0, 1e6),
    ] {
        if !(lo..=hi).contains(&v) {
            return Err(super::InputError(format!(
                "{flag} {v}: give a number of seconds from {lo} to {hi}"
            ))
            .into());
        }
    }
    let cache =
        Cache::new(c.folders.cache_dir()).with_lease(std::time::Duration::from_secs_f64(a.lease));
    cache.prepare()?;
    let talk = !a.quiet && !c.json;
    if jobs < jobs_wanted && !c.json {
        eprintln!(
            "note: running {jobs} cells at a time instead of {jobs_wanted}: more would not fit in memory"
        );
    }

    super::signals::install(a.grace, "writing the table");

    let host = crate::store::this_host().to_string();
    let prov = Provenance {
        host: host.clone(),
        kiln_version: crate::VERSION.into(),
        threads: jobs as u32,
        computed_by: format!("{host}:{}:{started}", std::process::id()),
    };
    let outputs = Outputs {
        spec: &spec,
        plan: &plan,
        cache: &cache,
        dir: c.folders.results.join(&spec.name),
        host: &host,
        jobs,
        started: &started,
    };
    // Check up front that the table can be written, so a run does not compute for nothing.
    if shard.is_none() {
        outputs.check_writable()?;
    }
    let grace = std::time::Duration::from_secs_f64(a.grace);
    let (done, finished) = std::sync::mpsc::channel::<()>();
    let report = std::thread::scope(|s| {
        let outputs = &outputs;
        s.spawn(move || watchdog(finished, grace, outputs, shard.is_some()));
        let r = exec::execute(
            &spec,
            &plan,
            &cache,
            &Options {
                jobs,
                progress: talk,
                note: (jobs < jobs_wanted).then(|| format!("{jobs} at a time (memory)")),
            },
            &prov,
        );
        drop(done);
        r
    })
    .context("the run stopped")?;
    if !c.json {
        for t in &report.takeovers {
            eprintln!("note: {t}");
        }
    }
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

    let (table_path, manifest_path, rows) = outputs.write(&report.records, &report.counts)?;
    let k = &report.counts;
    let wall = t0.elapsed().as_secs_f64();
    if c.json {
        let v = serde_json::json!({
            "experiment": spec.name,
            "spec_hash": plan.spec_hash.hex(),
            "cells": counts_json(k),
            "rows": rows,
            "table": table_path.display().to_string(),
            "manifest": manifest_path.display().to_string(),
            "cache": cache.root().display().to_string(),
            "jobs": jobs,
            "wall_seconds": wall,
            "interrupted": report.interrupted,
            "stopped": report.stopped,
            "failures": failures_json(&report),
            "damaged": report.damaged,
            "takeovers": report.takeovers,
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
        &format!("the table holds the {rows} rows done so far"),
    ))
}

/// A part writes only to the cache; it reports its counts.
fn shard_summary(a: &RunArgs, name: &str, sh: Shard, report: &exec::Report, wall: f64) -> ExitCode {
    let k = &report.counts;
    if a.common.json {
        let v = serde_json::json!({
            "experiment": name,
            "part": sh.label(),
            "cells": counts_json(k),
            "wall_seconds": wall,
            "interrupted": report.interrupted,
            "stopped": report.stopped,
            "failures": failures_json(report),
            "damaged": report.damaged,
        });
        out(&format!("{v}\n"));
    } else if !a.quiet {
        out(&format!(
            "{name} part {}: {} cells · {} computed · {} cached · {} failed · {wall:.1} s\n(the table is written by a plain `kiln run` once every part is done)\n",
            sh.label(),
            k.total,
            k.computed,
            k.cached,
            k.failed
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
    for s in &report.stopped {
        eprintln!("stop: {s}; nothing of it is recorded");
    }
    if report.interrupted {
        eprintln!(
            "interrupted: {} cells not run; {done}. Run the same command again to resume.",
            report.counts.skipped
        );
        return ExitCode::from(super::signals::exit_status());
    }
    if report.counts.failed > 0 {
        ExitCode::from(1)
    } else {
        ExitCode::SUCCESS
    }
}

/// What a run writes at its end: the table, the replica tables and the manifest, all or none.
struct Outputs<'a> {
    spec: &'a crate::spec::Spec,
    plan: &'a crate::spec::plan::Plan,
    cache: &'a Cache,
    dir: std::path::PathBuf,
    host: &'a str,
    jobs: usize,
    started: &'a str,
}

impl Outputs<'_> {
    /// Fails now, naming the path, if the results folder cannot be written.
    fn check_writable(&self) -> anyhow::Result<()> {
        crate::store::check_writable(&self.dir).with_context(|| {
            format!(
                "the results folder {} cannot be written; nothing was computed",
                self.dir.display()
            )
        })
    }

    /// Records computed before `magnetisation` existed, completed from the cached spins of
    /// their reference cell (`base`), so a table rewritten from an older cache has the column
    /// too; None when no record needs it. A record whose reference spins are gone keeps it empty.
    fn with_magnetisation(
        &self,
        records: &HashMap<crate::cell::Key, crate::store::cache::Record>,
    ) -> Option<HashMap<crate::cell::Key, crate::store::cache::Record>> {
        use crate::store::cache::Lookup;
        if !self.spec.model.family.spins() || records.values().all(|r| r.magnetisation.is_some()) {
            return None;
        }
        let mut by_base: HashMap<String, Option<f64>> = HashMap::new();
        let mut out = records.clone();
        for r in out.values_mut().filter(|r| r.magnetisation.is_none()) {
            let m = by_base.entry(r.base.clone()).or_insert_with(|| {
                let key = crate::cell::Key::from_hex(&r.base)?;
                match self.cache.read_spins(&key) {
                    Ok(Lookup::Hit(s)) if !s.is_empty() => Some(crate::measure::magnetisation(&s)),
                    _ => None,
                }
            });
            r.magnetisation = *m;
        }
        Some(out)
    }

    /// Writes the table (plan order) and the manifest naming the tables' checksums; returns
    /// (table, manifest, rows).
    fn write(
        &self,
        records: &HashMap<crate::cell::Key, crate::store::cache::Record>,
        counts: &crate::store::manifest::CellCounts,
    ) -> anyhow::Result<(std::path::PathBuf, std::path::PathBuf, usize)> {
        let spec = self.spec;
        let patched = self.with_magnetisation(records);
        let records = patched.as_ref().unwrap_or(records);
        let rows: Vec<table::Row> = self
            .plan
            .cells
            .iter()
            .filter(|cell| cell.replica == 0)
            .filter_map(|cell| {
                records.get(&cell.key).map(|r| table::Row {
                    symmetric: spec.model.symmetric(),
                    field: spec.model.field,
                    violations: spec.model.family.counts_violations(),
                    solved_at_zero: spec.model.family.solved_at_zero(),
                    experiment: &spec.name,
                    label: &spec.algorithms[cell.algo].label,
                    record: r,
                })
            })
            .collect();
        let table_path = self.dir.join("cells.parquet");
        let manifest_path = self.dir.join("manifest.toml");
        let mut files = vec![(
            table_path.clone(),
            table::encode(&table_path, &rows, &self.plan.spec_hash.hex())?,
        )];
        if spec.replicas > 1 {
            files.extend(crate::exec::overlaps::encode_overlaps(
                spec, self.plan, self.cache, &self.dir,
            )?);
        }
        files.extend(crate::exec::traces::encode_traces(
            spec, self.plan, self.cache, &self.dir,
        )?);
        let tables = files
            .iter()
            .map(|(p, b)| {
                use sha2::{Digest, Sha256};
                (
                    p.file_name().expect("named").to_string_lossy().into_owned(),
                    hex::encode(Sha256::digest(b)),
                )
            })
            .collect();
        let mut manifest = Manifest {
            experiment: spec.name.clone(),
            note: spec.note.clone(),
            spec_origin: spec.origin.clone(),
            spec_hash: self.plan.spec_hash.hex(),
            kiln_version: crate::VERSION.into(),
            git_revision: crate::GIT_REVISION.into(),
            rustc: crate::RUSTC.into(),
            host: self.host.to_string(),
            threads: self.jobs as u32,
            started: self.started.to_string(),
            finished: utc_now(),
            cells: counts.clone(),
            tables,
            revisions: crate::store::manifest::revisions(spec),
            spec: spec.text.clone(),
            runs: Vec::new(),
        };
        let previous = std::fs::read_to_string(&manifest_path).ok();
        manifest.runs = crate::store::manifest::run_log(
            previous.as_deref(),
            &manifest.spec_hash,
            crate::store::manifest::run_entry(&manifest),
        );
        files.push((manifest_path.clone(), manifest.to_toml().into_bytes()));
        let list: Vec<(&std::path::Path, &[u8])> =
            files.iter().map(|(p, b)| (p.as_path(), &b[..])).collect();
        write_all_atomic(&list)?;
        Ok((table_path, manifest_path, rows.len()))
    }
}

/// Watches a run for a stop signal: once one has come, gives the cells in flight `grace` to
/// finish and then [`super::signals::AFTER_GRACE`] to reach a step boundary; if the run is
/// still going then (a cell that reports no steps), releases the claims it holds, writes the
/// table of what the cache holds (not for a shard) and exits with the signal's status.
fn watchdog(
    finished: std::sync::mpsc::Receiver<()>,
    grace: std::time::Duration,
    outputs: &Outputs,
    shard: bool,
) {
    use std::sync::mpsc::RecvTimeoutError;
    let limit = grace + super::signals::AFTER_GRACE;
    let mut since: Option<Instant> = None;
    loop {
        match finished.recv_timeout(std::time::Duration::from_millis(50)) {
            Err(RecvTimeoutError::Timeout) => {}
            _ => return,
        }
        if since.is_none() && super::signals::received() {
            since = Some(Instant::now());
        }
        if since.is_some_and(|t| t.elapsed() >= limit) {
            break;
        }
    }
    crate::store::claims::release_all();
    eprintln!(
        "stop: cells still in flight {:.0} s after the signal report no step to stop at; abandoned (their claims released)",
        limit.as_secs_f64()
    );
    if !shard {
        let damaged = std::sync::Mutex::new(Vec::new());
        let written = exec::lookup(outputs.spec, outputs.plan, outputs.cache, &damaged)
            .map_err(anyhow::Error::from)
            .and_then(|(records, missing)| {
                let counts = crate::store::manifest::CellCounts {
                    total: (records.len() + missing.len()) as u64,
                    cached: records.len() as u64,
                    skipped: missing.len() as u64,
                    ..Default::default()
                };
                outputs.write(&records, &counts)
            });
        match written {
            Ok((table, _, rows)) => eprintln!(
                "stop: the table {} holds the {rows} rows done. Run the same command again to resume.",
                table.display()
            ),
            Err(e) => eprintln!("error: the table could not be written: {e:#}"),
        }
    }
    std::process::exit(super::signals::exit_status() as i32);
}
