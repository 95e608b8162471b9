//! `kiln status`: where a spec stands in a cache — cells done, running (claimed), failed,
//! missing — overall and per part. Reads only; verifies nothing (see `kiln verify`).

use super::{SpecArgs, out};
use crate::spec::plan::expand;
use crate::spec::shard;
use crate::store::cache::Cache;
use crate::store::claims::{State, Verdict};
use clap::Args;
use std::collections::BTreeMap;
use std::process::ExitCode;

#[derive(Args, Debug)]
pub struct StatusArgs {
    #[command(flatten)]
    pub common: SpecArgs,
    /// Report per part of an N-way split, parts counted from 1 (as `kiln run --part i/N` and
    /// `kiln slurm --parts N` make it).
    #[arg(long, value_name = "N", default_value_t = 1)]
    pub parts: u32,
}

#[derive(Default, Clone, Copy)]
struct Tally {
    cells: u64,
    done: u64,
    running: u64,
    failed: u64,
    missing: u64,
}

pub fn run(a: &StatusArgs) -> anyhow::Result<ExitCode> {
    let spec = a.common.load_spec()?;
    if a.parts == 0 {
        return Err(super::InputError("--parts 0: give at least 1".into()).into());
    }
    let plan = expand(&spec);
    let cache = Cache::new(a.common.folders.cache_dir());
    let assign = shard::assign(&spec, &plan, a.parts).shard_of;
    let mut per: BTreeMap<u32, Tally> = (0..a.parts).map(|i| (i, Tally::default())).collect();
    for c in plan.distinct() {
        let t = per.get_mut(&assign[&c.base]).expect("part");
        t.cells += 1;
        if cache.has_record(&c.key) {
            t.done += 1;
        } else if let State::Held(Verdict::Live(_)) = cache.claim_state(&c.key)? {
            t.running += 1;
        } else if cache.failure_path(&c.key).exists() {
            t.failed += 1;
        } else {
            t.missing += 1;
        }
    }
    // The user's `i/N` of 0-based part i.
    let part = |i: u32| {
        shard::Shard {
            index: i,
            count: a.parts,
        }
        .label()
    };
    let mut all = Tally::default();
    for t in per.values() {
        all.cells += t.cells;
        all.done += t.done;
        all.running += t.running;
        all.failed += t.failed;
        all.missing += t.missing;
    }
    if a.common.json {
        let row = |t: &Tally| serde_json::json!({"cells": t.cells, "done": t.done, "running": t.running, "failed": t.failed, "missing": t.missing});
        let v = serde_json::json!({
            "experiment": spec.name,
            "cache": cache.root().display().to_string(),
            "all": row(&all),
            "parts": per.iter().map(|(i, t)| {
                let mut r = row(t);
                r["part"] = serde_json::json!(part(*i));
                r
            }).collect::<Vec<_>>(),
        });
        out(&format!("{v}\n"));
    } else {
        let mut s = format!(
            "{} in {}\n{:>8} {:>8} {:>8} {:>8} {:>8} {:>8}\n",
            spec.name,
            cache.root().display(),
            "part",
            "cells",
            "done",
            "running",
            "failed",
            "missing"
        );
        let line = |label: String, t: &Tally| {
            format!(
                "{label:>8} {:>8} {:>8} {:>8} {:>8} {:>8}\n",
                t.cells, t.done, t.running, t.failed, t.missing
            )
        };
        if a.parts > 1 {
            for (i, t) in &per {
                s += &line(part(*i), t);
            }
        }
        s += &line("all".into(), &all);
        out(&s);
    }
    Ok(ExitCode::SUCCESS)
}
