//! `kiln replay PATH`: recompute a stratified sample of a results folder's cells from scratch
//! and compare them bit for bit with its table; `PATH` may also be a bundle (`kiln bundle`),
//! whose checksum list is checked first.
//!
//! Order of checks: checksums (a bundle's list, the manifest's table checksums, the table's
//! own digest), then the revisions the folder was made with against this binary's (a mismatch
//! exits with status 3 before anything is computed: the numbers are expected to differ), then
//! the sample. The cache is a fresh temporary folder, removed at the end: nothing the folder's
//! authors computed is reused.

use super::{InputError, out};
use crate::exec::{self, Options, Provenance, memory};
use crate::rng::{Purpose, stream};
use crate::spec::Spec;
use crate::spec::plan::{Plan, expand};
use crate::store::bundle;
use crate::store::cache::Cache;
use crate::store::table::{self, PROVENANCE_COLUMNS};
use clap::Args;
use polars::prelude::*;
use std::collections::{BTreeMap, BTreeSet, HashMap};
use std::path::PathBuf;
use std::process::ExitCode;
use std::time::Instant;

#[derive(Args, Debug)]
pub struct ReplayArgs {
    /// A results folder (with `cells.parquet` and `manifest.toml`), or a bundle written by
    /// `kiln bundle`.
    pub path: PathBuf,
    /// How many cells to recompute, spread over the strata (algorithm, n, ε) so that every
    /// algorithm, size and ε appears. More than the table holds means every cell.
    #[arg(long, short = 'k', value_name = "K", default_value_t = 36)]
    pub cells: usize,
    /// Seed of the sample: the same seed picks the same cells.
    #[arg(long, value_name = "S", default_value_t = 1)]
    pub seed: u64,
    /// The most compute the sample may cost, in seconds of the wall times the folder records
    /// per cell (an ε cell counts its reference run too). Cheap cells of each stratum go
    /// first; a stratum whose cheapest cell does not fit is reported as skipped.
    #[arg(long, value_name = "SECONDS", default_value_t = 300.0)]
    pub budget: f64,
    /// Check the checksum list of a bundle and stop.
    #[arg(long)]
    pub checksums_only: bool,
    /// Cells recomputed in parallel. Default: the number of cores.
    #[arg(long, short = 'j', value_name = "N")]
    pub jobs: Option<usize>,
    /// No progress display.
    #[arg(long, short = 'q')]
    pub quiet: bool,
    /// Print a machine-readable JSON summary on stdout instead of text.
    #[arg(long)]
    pub json: bool,
}

/// Exit status when the folder was made with other revisions than this binary's.
pub const EXIT_REVISIONS: u8 = 3;

/// A temporary folder removed when dropped.
struct Scratch(PathBuf);

impl Scratch {
    fn new() -> anyhow::Result<Scratch> {
        let nanos = std::time::SystemTime::now()
            .duration_since(std::time::UNIX_EPOCH)
            .map_or(0, |d| d.subsec_nanos());
        let p = std::env::temp_dir().join(format!("kiln-replay-{}-{nanos:09}", std::process::id()));
        std::fs::create_dir_all(&p).map_err(|source| crate::store::StoreError::Write {
            path: p.clone(),
            source,
        })?;
        Ok(Scratch(p))
    }
}

impl Drop for Scratch {
    fn drop(&mut self) {
        let _ = std::fs::remove_dir_all(&self.0);
    }
}

/// A stratum: (algorithm index, index of n in the sweep, index of ε in the sweep).
type Stratum = (usize, usize, usize);

#[derive(Default)]
struct StratumReport {
    replayed: usize,
    identical: usize,
    different: usize,
    skipped: Option<String>,
}

struct Difference {
    label: String,
    n: u64,
    seed: u64,
    epsilon: f64,
    key: String,
    column: String,
    folder: String,
    replay: String,
}

pub fn run(a: &ReplayArgs) -> anyhow::Result<ExitCode> {
    let t0 = Instant::now();
    if !(a.budget.is_finite() && a.budget >= 0.0) {
        return Err(InputError(format!(
            "--budget {}: give a number of seconds ≥ 0",
            a.budget
        ))
        .into());
    }
    if a.cells == 0 {
        return Err(InputError("--cells 0: give at least 1".into()).into());
    }
    let scratch = Scratch::new()?;
    let folder = if a.path.is_file() {
        bundle::unpack(&a.path, &scratch.0.join("bundle"))?
    } else if a.path.is_dir() {
        a.path.clone()
    } else {
        return Err(InputError(format!(
            "{}: no such folder or bundle (give a results folder such as results/<experiment>, or a .tar from `kiln bundle`)",
            a.path.display()
        ))
        .into());
    };
    let shown = a.path.display().to_string();

    // 1. Checksums.
    let mut integrity: Vec<String> = Vec::new();
    let sums = bundle::check(&folder)?;
    if let Some(r) = &sums {
        for (f, why) in &r.failed {
            integrity.push(format!("{f}: {why} (CHECKSUMS.sha256)"));
        }
    }
    if a.checksums_only {
        let Some(r) = sums else {
            return Err(InputError(format!(
                "{shown}: no {} in it, so there is nothing to check; `kiln bundle` writes one (or run `kiln replay {shown}` to recompute cells)",
                bundle::CHECKSUMS
            ))
            .into());
        };
        return Ok(checksums_only(a, &shown, &r));
    }
    for f in ["manifest.toml", "cells.parquet"] {
        if !folder.join(f).is_file() {
            return Err(InputError(format!(
                "{shown}: no {f}; give a results folder written by `kiln run` (results/<experiment>) or its bundle"
            ))
            .into());
        }
    }
    let manifest_path = folder.join("manifest.toml");
    let manifest: toml::Table = std::fs::read_to_string(&manifest_path)?
        .parse()
        .map_err(|e| {
            InputError(format!(
                "{}: not a kiln manifest ({e})",
                manifest_path.display()
            ))
        })?;
    let get = |k: &str| manifest.get(k).and_then(|v| v.as_str()).unwrap_or("");
    let (df, findings) = table::read_lenient(&folder.join("cells.parquet"))?;
    integrity.extend(findings.into_iter().map(|f| format!("cells.parquet: {f}")));

    // 2. The spec, the version and the revisions.
    let folder_version = get("kiln_version").to_string();
    let spec = match crate::spec::parse(get("spec"), &format!("{} (spec)", manifest_path.display()))
    {
        Ok(s) => s,
        Err(e) => {
            return Ok(mismatch(
                a,
                &shown,
                &folder_version,
                &[format!("its spec does not parse with this kiln: {e}")],
            ));
        }
    };
    let stored = Stored::new(&df)?;
    let plan = expand(&spec);
    let (mismatches, basis) = revision_mismatches(&spec, &manifest, &stored, &plan);
    if !mismatches.is_empty() {
        return Ok(mismatch(a, &shown, &folder_version, &mismatches));
    }
    let mut key_index: HashMap<String, usize> = HashMap::new();
    for (i, c) in plan.cells.iter().enumerate() {
        if c.replica == 0 {
            key_index.entry(c.key.hex()).or_insert(i);
        }
    }
    let strange = stored
        .key
        .iter()
        .filter(|k| !key_index.contains_key(k.as_str()))
        .count();
    if strange > 0 {
        integrity.push(format!(
            "cells.parquet: {strange} of {} rows have a cell key that the manifest's spec does not give (the table or the spec was changed after the run)",
            stored.key.len()
        ));
    }

    // 3. The sample.
    let rows: HashMap<&str, usize> = stored
        .key
        .iter()
        .enumerate()
        .map(|(i, k)| (k.as_str(), i))
        .collect();
    let sample = choose(a, &spec, &plan, &rows, &stored);
    let needed: BTreeSet<usize> = sample.needed.clone();
    let sub = Plan {
        cells: needed.iter().map(|&i| plan.cells[i].clone()).collect(),
        spec_hash: plan.spec_hash,
    };
    let talk = !a.quiet && !a.json;
    if talk {
        eprintln!(
            "replay of {shown}: {} cells of {} chosen (seed {}), {} of recorded compute for a budget of {}",
            sample.chosen,
            stored.key.len(),
            a.seed,
            seconds(sample.spent),
            seconds(a.budget)
        );
    }
    let jobs = super::jobs(a.jobs)?.min(memory::cells_that_fit(&spec, memory::budget(None))?);
    let cache = Cache::new(scratch.0.join("cache"));
    cache.prepare()?;
    super::signals::install(f64::INFINITY, "comparing what is done");
    let host = crate::store::this_host().to_string();
    let prov = Provenance {
        host: host.clone(),
        kiln_version: crate::VERSION.into(),
        threads: jobs as u32,
        computed_by: format!("{host}:{}:replay", std::process::id()),
    };
    let report = exec::execute(
        &spec,
        &sub,
        &cache,
        &Options {
            jobs,
            progress: talk,
            note: Some("replay".into()),
        },
        &prov,
    )?;

    // 4. Compare.
    let computed: Vec<(usize, &crate::store::cache::Record)> = needed
        .iter()
        .filter_map(|&i| report.records.get(&plan.cells[i].key).map(|r| (i, r)))
        .collect();
    let replay_rows: Vec<table::Row> = computed
        .iter()
        .map(|&(i, r)| table::Row {
            symmetric: spec.model.symmetric(),
            field: spec.model.field,
            violations: spec.model.family.counts_violations(),
            solved_at_zero: spec.model.family.solved_at_zero(),
            experiment: &spec.name,
            label: &spec.algorithms[plan.cells[i].algo].label,
            record: r,
        })
        .collect();
    let replayed = table::frame(&replay_rows)?;
    let mut strata: BTreeMap<Stratum, StratumReport> = BTreeMap::new();
    for (s, why) in &sample.skipped {
        strata.entry(*s).or_default().skipped = Some(why.clone());
    }
    let mut differences = Vec::new();
    let skip: Vec<&str> = PROVENANCE_COLUMNS
        .iter()
        .copied()
        .chain(["kiln_version"])
        .collect();
    for (q, &(i, _)) in computed.iter().enumerate() {
        let cell = &plan.cells[i];
        let Some(&r) = rows.get(cell.key.hex().as_str()) else {
            continue;
        };
        let st = strata.entry(stratum(&spec, cell)).or_default();
        st.replayed += 1;
        let mut first = None;
        for col in df.columns() {
            let name = col.name().as_str();
            if skip.contains(&name) {
                continue;
            }
            let theirs = exact(col, r)?;
            let Ok(ours) = replayed.column(name) else {
                continue;
            };
            let ours = exact(ours, q)?;
            if theirs.0 != ours.0 {
                first = Some((name.to_string(), theirs.1, ours.1));
                break;
            }
        }
        match first {
            None => st.identical += 1,
            Some((column, folder, replay)) => {
                st.different += 1;
                differences.push(Difference {
                    label: spec.algorithms[cell.algo].label.clone(),
                    n: cell.n,
                    seed: cell.seed,
                    epsilon: cell.epsilon,
                    key: cell.key.hex(),
                    column,
                    folder,
                    replay,
                });
            }
        }
    }
    let failed: Vec<String> = report
        .failures
        .iter()
        .map(|(k, m)| format!("cell {}: {m}", &k[..12.min(k.len())]))
        .collect();
    let names = |d: &DataFrame| -> BTreeSet<String> {
        d.get_column_names().iter().map(|c| c.to_string()).collect()
    };
    let (theirs, ours) = (names(&df), names(&replayed));
    let unshared: Vec<String> = theirs
        .symmetric_difference(&ours)
        .map(|c| {
            let side = if theirs.contains(c) {
                "folder"
            } else {
                "this kiln"
            };
            format!("{c} (only in {side})")
        })
        .collect();
    let n_replayed: usize = strata.values().map(|s| s.replayed).sum();
    let n_identical: usize = strata.values().map(|s| s.identical).sum();
    let wall = t0.elapsed().as_secs_f64();

    if a.json {
        let v = serde_json::json!({
            "folder": shown,
            "kiln_version_folder": folder_version,
            "kiln_version": crate::VERSION,
            "revisions": "agree",
            "revisions_judged": basis,
            "chosen": sample.chosen,
            "checksums": sums.as_ref().map(|r| serde_json::json!({"checked": r.checked, "failed": r.failed.len(), "unlisted": r.unlisted})),
            "integrity": integrity,
            "columns_not_compared": unshared,
            "seed": a.seed,
            "budget_seconds": a.budget,
            "estimated_seconds": sample.spent,
            "rows": stored.key.len(),
            "replayed": n_replayed,
            "identical": n_identical,
            "different": differences.len(),
            "failed": failed,
            "interrupted": report.interrupted,
            "skipped_strata": strata.values().filter(|s| s.skipped.is_some()).count(),
            "strata": strata.iter().map(|(s, r)| serde_json::json!({
                "algorithm": spec.algorithms[s.0].label,
                "n": spec.sizes[s.1].0,
                "epsilon": spec.epsilons[s.2],
                "replayed": r.replayed,
                "identical": r.identical,
                "different": r.different,
                "skipped": r.skipped,
            })).collect::<Vec<_>>(),
            "differences": differences.iter().map(|d| serde_json::json!({
                "algorithm": d.label, "n": d.n, "seed": d.seed, "epsilon": d.epsilon,
                "cell_key": d.key, "column": d.column, "folder": d.folder, "replay": d.replay,
            })).collect::<Vec<_>>(),
            "wall_seconds": wall,
        });
        out(&format!("{v}\n"));
    } else {
        let mut s = format!(
            "replay of {shown}\n  made by kiln {folder_version}, replayed by kiln {}; revisions agree ({basis})\n  sample: {} cells chosen (seed {}) and the {} reference runs they need; {} of recorded compute, budget {}\n",
            crate::VERSION,
            sample.chosen,
            a.seed,
            sample.needed.len() - sample.chosen,
            seconds(sample.spent),
            seconds(a.budget)
        );
        if let Some(r) = &sums {
            s += &format!(
                "  checksums: {} of {} files match {}\n",
                r.checked - r.failed.len(),
                r.checked,
                bundle::CHECKSUMS
            );
        }
        for f in &integrity {
            s += &format!("  integrity: {f}\n");
        }
        if !unshared.is_empty() {
            s += &format!(
                "  columns not compared (the table formats differ): {}\n",
                unshared.join(", ")
            );
        }
        s += &format!(
            "\n  {:<16} {:>7} {:>7}  {:>8} {:>9} {:>9}  note\n",
            "algorithm", "n", "ε", "replayed", "identical", "different"
        );
        for (st, r) in &strata {
            let line = format!(
                "  {:<16} {:>7} {:>7}  {:>8} {:>9} {:>9}  {}",
                spec.algorithms[st.0].label,
                spec.sizes[st.1].0,
                spec.epsilons[st.2],
                r.replayed,
                r.identical,
                r.different,
                r.skipped
                    .as_deref()
                    .map_or(String::new(), |w| format!("skipped: {w}"))
            );
            s += line.trim_end();
            s.push('\n');
        }
        let unsampled = count_strata(&spec) - strata.len();
        if unsampled > 0 {
            s += &format!("  ({unsampled} more strata not sampled: raise --cells)\n");
        }
        for d in &differences {
            s += &format!(
                "\n  different: {} n={} seed={} ε={} (cell {}): column `{}` is {} in the folder, {} replayed",
                d.label,
                d.n,
                d.seed,
                d.epsilon,
                &d.key[..12],
                d.column,
                d.folder,
                d.replay
            );
        }
        if !differences.is_empty() {
            s.push('\n');
        }
        for f in &failed {
            s += &format!("\n  failed: {f}");
        }
        s += &format!(
            "\n{n_replayed} cells replayed · {n_identical} identical · {} different · {} strata skipped · {wall:.1} s\n",
            differences.len(),
            strata.values().filter(|s| s.skipped.is_some()).count()
        );
        out(&s);
    }
    if report.interrupted {
        return Ok(ExitCode::from(super::signals::exit_status()));
    }
    if n_replayed == 0 && !a.json {
        eprintln!("nothing was replayed: raise --budget (or --cells)");
    }
    let ok = differences.is_empty() && integrity.is_empty() && failed.is_empty() && n_replayed > 0;
    Ok(if ok {
        ExitCode::SUCCESS
    } else {
        ExitCode::from(1)
    })
}

/// The columns of the folder's table replay needs, by row.
struct Stored {
    key: Vec<String>,
    label: Vec<String>,
    settings: Vec<String>,
    wall: Vec<f64>,
}

impl Stored {
    fn new(df: &DataFrame) -> anyhow::Result<Stored> {
        let strings = |name: &str| -> anyhow::Result<Vec<String>> {
            Ok(df
                .column(name)?
                .str()?
                .iter()
                .map(|s| s.unwrap_or("").to_string())
                .collect())
        };
        Ok(Stored {
            key: strings("cell_key")?,
            label: strings("algorithm")?,
            settings: strings("settings")?,
            wall: df
                .column("wall_seconds")?
                .f64()?
                .iter()
                .map(|w| w.filter(|w| w.is_finite() && *w > 0.0).unwrap_or(0.0))
                .collect(),
        })
    }
}

/// What differs between the folder's revisions and this binary's, by name. Folders whose
/// manifest records no revisions (made before kiln wrote them) are judged by the algorithms'
/// canonical settings in the table (which carry each kind's revision) and by the cell keys.
fn revision_mismatches(
    spec: &Spec,
    manifest: &toml::Table,
    stored: &Stored,
    plan: &Plan,
) -> (Vec<String>, &'static str) {
    let ours = crate::store::manifest::revisions(spec);
    let mut out = Vec::new();
    if let Some(theirs) = manifest.get("revisions").and_then(|v| v.as_table()) {
        let names: BTreeSet<&String> = ours.keys().chain(theirs.keys()).collect();
        // The table format only adds columns; the shared ones are compared.
        for k in names.into_iter().filter(|k| *k != "table_format") {
            let t = theirs.get(k).and_then(|v| v.as_str());
            let o = ours.get(k).map(String::as_str);
            if t != o {
                out.push(format!(
                    "{k}: {} in the folder, {} in this kiln",
                    t.unwrap_or("absent"),
                    o.unwrap_or("absent")
                ));
            }
        }
        return (out, "by the manifest's list");
    }
    let mut seen = BTreeSet::new();
    for (label, settings) in stored.label.iter().zip(&stored.settings) {
        let Some(entry) = spec.algorithms.iter().find(|e| &e.label == label) else {
            continue;
        };
        let now = entry.algo.settings();
        if *settings == now || !seen.insert(label.clone()) {
            continue;
        }
        let revision = |s: &str| {
            serde_json::from_str::<serde_json::Value>(s)
                .ok()
                .and_then(|v| v.get("revision").and_then(|r| r.as_u64()))
        };
        match (revision(settings), revision(&now)) {
            (Some(t), Some(o)) if t != o => out.push(format!(
                "kind.{}: {t} in the folder, {o} in this kiln (algorithm `{label}`)",
                entry.algo.kind()
            )),
            _ => out.push(format!(
                "algorithm `{label}`: settings {settings} in the folder, {now} in this kiln"
            )),
        }
    }
    if out.is_empty() {
        let keys: BTreeSet<String> = plan.cells.iter().map(|c| c.key.hex()).collect();
        let strange = stored.key.iter().filter(|k| !keys.contains(*k)).count();
        if strange > 0 {
            out.push(format!(
                "{strange} of {} cell keys are not this kiln's for the spec, and the folder records no revisions to say which changed (a family, kernel or format revision)",
                stored.key.len()
            ));
        }
    }
    (
        out,
        "by the table's settings and cell keys; the manifest lists none",
    )
}

fn mismatch(a: &ReplayArgs, shown: &str, version: &str, why: &[String]) -> ExitCode {
    if a.json {
        let v = serde_json::json!({
            "folder": shown,
            "kiln_version_folder": version,
            "kiln_version": crate::VERSION,
            "revisions": "differ",
            "mismatches": why,
            "replayed": 0,
        });
        out(&format!("{v}\n"));
    } else {
        let mut s = format!(
            "replay of {shown}: made by kiln {version} with other revisions than this kiln {}; its numbers are expected to differ, so nothing was recomputed\n",
            crate::VERSION
        );
        for w in why {
            s += &format!("  revision: {w}\n");
        }
        s += "Replay it with the kiln that made it (the manifest names its version and git revision).\n";
        out(&s);
    }
    ExitCode::from(EXIT_REVISIONS)
}

fn checksums_only(a: &ReplayArgs, shown: &str, r: &bundle::ChecksumReport) -> ExitCode {
    if a.json {
        let v = serde_json::json!({
            "folder": shown,
            "checked": r.checked,
            "failed": r.failed.iter().map(|(f, w)| serde_json::json!({"file": f, "problem": w})).collect::<Vec<_>>(),
            "unlisted": r.unlisted,
        });
        out(&format!("{v}\n"));
    } else {
        let mut s = format!(
            "{shown}: {} of {} files match {}\n",
            r.checked - r.failed.len(),
            r.checked,
            bundle::CHECKSUMS
        );
        for (f, w) in &r.failed {
            s += &format!("  {f}: {w}\n");
        }
        for f in &r.unlisted {
            s += &format!("  {f}: not in the list (not checked)\n");
        }
        out(&s);
    }
    if r.failed.is_empty() {
        ExitCode::SUCCESS
    } else {
        ExitCode::from(1)
    }
}

fn stratum(spec: &Spec, c: &crate::spec::plan::Cell) -> Stratum {
    let ni = spec.sizes.iter().position(|s| s.0 == c.n).unwrap_or(0);
    let ei = spec
        .epsilons
        .iter()
        .position(|e| e.to_bits() == c.epsilon.to_bits())
        .unwrap_or(0);
    (c.algo, ni, ei)
}

fn count_strata(spec: &Spec) -> usize {
    spec.algorithms.len() * spec.sizes.len() * spec.epsilons.len()
}

/// The sample: plan indices to compute (chosen cells and their reference cells), the recorded
/// seconds they cost, and the strata skipped as too expensive.
struct Sample {
    needed: BTreeSet<usize>,
    chosen: usize,
    spent: f64,
    skipped: Vec<(Stratum, String)>,
}

/// Chooses the cells to replay. Strata are visited in an order drawn from the seed, those
/// that bring an algorithm, size or ε not yet covered first; each visit takes one cell, drawn
/// among the cheapest of its stratum (recorded wall time within 50% of the cheapest), until
/// K cells are chosen or no stratum has an affordable cell left.
fn choose(
    a: &ReplayArgs,
    spec: &Spec,
    plan: &Plan,
    rows: &HashMap<&str, usize>,
    stored: &Stored,
) -> Sample {
    let id = crate::cell::Canon::map()
        .with("spec", plan.spec_hash.hex())
        .with("seed", a.seed)
        .hash("replay");
    let mut rng = stream(&id, Purpose::Replay, 0);
    let wall = |i: usize| -> f64 {
        rows.get(plan.cells[i].key.hex().as_str())
            .map_or(0.0, |&r| stored.wall[r])
    };
    let mut base_of: HashMap<crate::cell::Key, usize> = HashMap::new();
    for (i, c) in plan.cells.iter().enumerate() {
        if c.replica == 0 && c.is_base() {
            base_of.entry(c.key).or_insert(i);
        }
    }
    // Candidates: cells with a row, one per key, by stratum.
    let mut by_stratum: BTreeMap<Stratum, Vec<usize>> = BTreeMap::new();
    let mut seen = BTreeSet::new();
    for (i, c) in plan.cells.iter().enumerate() {
        if c.replica == 0 && rows.contains_key(c.key.hex().as_str()) && seen.insert(c.key) {
            by_stratum.entry(stratum(spec, c)).or_default().push(i);
        }
    }
    let mut order: Vec<Stratum> = by_stratum.keys().copied().collect();
    rng.shuffle(&mut order);
    let mut priority = Vec::with_capacity(order.len());
    let (mut ca, mut cn, mut ce) = (BTreeSet::new(), BTreeSet::new(), BTreeSet::new());
    while !order.is_empty() {
        let gain = |s: &Stratum| {
            usize::from(!ca.contains(&s.0))
                + usize::from(!cn.contains(&s.1))
                + usize::from(!ce.contains(&s.2))
        };
        let best = (0..order.len())
            .max_by_key(|&i| (gain(&order[i]), std::cmp::Reverse(i)))
            .expect("not empty");
        let s = order.remove(best);
        ca.insert(s.0);
        cn.insert(s.1);
        ce.insert(s.2);
        priority.push(s);
    }
    for cells in by_stratum.values_mut() {
        rng.shuffle(cells);
    }
    let mut sample = Sample {
        needed: BTreeSet::new(),
        chosen: 0,
        spent: 0.0,
        skipped: Vec::new(),
    };
    let mut first_round = true;
    loop {
        let mut progress = false;
        for s in &priority {
            if sample.chosen >= a.cells {
                break;
            }
            if sample.skipped.iter().any(|(t, _)| t == s) {
                continue;
            }
            let cells = by_stratum.get_mut(s).expect("a stratum of the list");
            let cost = |i: usize, needed: &BTreeSet<usize>| {
                let c = &plan.cells[i];
                let base = (!c.is_base())
                    .then(|| base_of.get(&c.base).copied())
                    .flatten()
                    .filter(|b| !needed.contains(b))
                    .map_or(0.0, wall);
                wall(i) + base
            };
            let Some(cheapest) = cells
                .iter()
                .map(|&i| cost(i, &sample.needed))
                .min_by(f64::total_cmp)
            else {
                continue;
            };
            let left = (a.budget - sample.spent).max(0.0);
            if cheapest > left {
                if first_round {
                    sample.skipped.push((
                        *s,
                        format!(
                            "cheapest cell {} > {} left of the budget",
                            seconds(cheapest),
                            seconds(left)
                        ),
                    ));
                }
                continue;
            }
            let pos = cells
                .iter()
                .position(|&i| {
                    let c = cost(i, &sample.needed);
                    c <= left && c <= cheapest * 1.5 + 1e-3
                })
                .expect("the cheapest is among them");
            let i = cells.remove(pos);
            let c = &plan.cells[i];
            sample.spent += cost(i, &sample.needed);
            sample.needed.insert(i);
            if !c.is_base()
                && let Some(&b) = base_of.get(&c.base)
            {
                sample.needed.insert(b);
            }
            sample.chosen += 1;
            progress = true;
        }
        first_round = false;
        if !progress || sample.chosen >= a.cells {
            break;
        }
    }
    sample
}

/// Seconds with two significant digits below 10 s.
fn seconds(x: f64) -> String {
    if x >= 10.0 {
        format!("{x:.0} s")
    } else if x >= 1.0 {
        format!("{x:.1} s")
    } else if x > 0.0 {
        let d = (-x.log10().floor()) as usize + 1;
        format!("{x:.d$} s")
    } else {
        "0 s".into()
    }
}

/// A cell's value, exactly (floats by their bits) and as printed.
fn exact(c: &Column, i: usize) -> PolarsResult<(String, String)> {
    Ok(match c.get(i)? {
        AnyValue::Float64(x) => (format!("f64:{:016x}", x.to_bits()), format!("{x:?}")),
        AnyValue::Null => ("null".into(), "null".into()),
        v => {
            let s = format!("{v}");
            (s.clone(), s)
        }
    })
}
