//! `kiln cell`: one cell of a cache, found by the first digits of its key (as messages print
//! them): what it ran, what it measured, who computed it, and where its artifacts are.

use super::{Folders, InputError, out};
use crate::cell::Key;
use crate::store::cache::{Cache, Lookup};
use clap::Args;
use std::process::ExitCode;

#[derive(Args, Debug)]
pub struct CellArgs {
    /// The first hex digits of the cell's key (at least 4), e.g. from `failed: cell 1a2b3c4d5e6f`
    /// or the `cell_key` column.
    pub key: String,
    #[command(flatten)]
    pub folders: Folders,
    /// Print the record and the artifacts' paths as JSON.
    #[arg(long)]
    pub json: bool,
}

/// Keys in the cache's records that start with `prefix` (lowercase hex, ≥ 2 digits).
fn matching(cache: &Cache, prefix: &str) -> std::io::Result<Vec<String>> {
    let dir = cache.root().join("records").join(&prefix[..2]);
    let mut keys = Vec::new();
    let entries = match std::fs::read_dir(&dir) {
        Ok(e) => e,
        Err(e) if e.kind() == std::io::ErrorKind::NotFound => return Ok(keys),
        Err(e) => return Err(e),
    };
    for e in entries {
        let name = e?.file_name();
        let name = name.to_string_lossy();
        if let Some(hex) = name.strip_suffix(".rec")
            && hex.starts_with(prefix)
        {
            keys.push(hex.to_string());
        }
    }
    keys.sort();
    Ok(keys)
}

pub fn run(a: &CellArgs) -> anyhow::Result<ExitCode> {
    let prefix = a.key.trim().to_ascii_lowercase();
    if prefix.len() < 4 || prefix.len() > 64 || !prefix.chars().all(|c| c.is_ascii_hexdigit()) {
        return Err(InputError(format!(
            "`{}` is not the start of a cell key: give 4 to 64 hex digits, e.g. 1a2b3c4d5e6f",
            a.key
        ))
        .into());
    }
    let cache = Cache::new(a.folders.cache_dir());
    let keys = matching(&cache, &prefix)?;
    let hex = match keys.as_slice() {
        [] => {
            // No record: a cell that failed leaves its message instead.
            let dir = cache.root().join("failed").join(&prefix[..2]);
            let failed: Vec<std::path::PathBuf> = std::fs::read_dir(&dir)
                .map(|d| {
                    d.filter_map(|e| e.ok())
                        .filter(|e| e.file_name().to_string_lossy().starts_with(&prefix))
                        .map(|e| e.path())
                        .collect()
                })
                .unwrap_or_default();
            if let [f] = failed.as_slice() {
                let message = std::fs::read_to_string(f).unwrap_or_default();
                let name = f.file_stem().map(|s| s.to_string_lossy().to_string());
                return Err(InputError(format!(
                    "cell {} has no record: it failed: {}",
                    name.unwrap_or_default(),
                    message.trim()
                ))
                .into());
            }
            return Err(InputError(format!(
                "no cell of {} has a key starting {prefix} (give --cache or --results if the cache is elsewhere)",
                cache.root().display()
            ))
            .into());
        }
        [one] => one.clone(),
        many => {
            return Err(InputError(format!(
                "{prefix} starts {} cell keys ({}{}); give more digits",
                many.len(),
                many.iter()
                    .take(5)
                    .map(|k| &k[..16])
                    .collect::<Vec<_>>()
                    .join(", "),
                if many.len() > 5 { ", …" } else { "" }
            ))
            .into());
        }
    };
    let key = Key::from_hex(&hex).expect("a record's file name is its key");
    let record = match cache.read_record(&key)? {
        Lookup::Hit(r) => r,
        _ => {
            return Err(anyhow::anyhow!(
                "the record of {hex} does not read back (run `kiln verify` on {})",
                cache.root().display()
            ));
        }
    };
    let artifacts: Vec<(&str, std::path::PathBuf)> = [
        ("record", cache.record_path(&key)),
        ("spins", cache.spins_path(&key)),
        ("point", cache.point_path(&key)),
        ("trace", cache.trace_path(&key)),
    ]
    .into_iter()
    .filter(|(_, p)| p.is_file())
    .collect();
    if a.json {
        let mut v = serde_json::to_value(&record)?;
        v["artifacts"] = serde_json::json!(
            artifacts
                .iter()
                .map(|(k, p)| (k.to_string(), p.display().to_string()))
                .collect::<std::collections::BTreeMap<_, _>>()
        );
        out(&format!("{v}\n"));
        return Ok(ExitCode::SUCCESS);
    }
    let r = &record;
    let opt = |x: Option<f64>| x.map_or("—".to_string(), |v| format!("{v}"));
    let mut s = format!("cell {}\n", r.key);
    s += &format!(
        "  reference cell   {}{}\n",
        r.base,
        if r.base == r.key {
            " (itself: ε = 0)"
        } else {
            ""
        }
    );
    s += "what ran\n";
    s += &format!(
        "  model            {} ({} couplings){}\n",
        r.family,
        r.couplings,
        r.density
            .map_or(String::new(), |a| format!(", density α = {a}"))
    );
    s += &format!(
        "  n, seed, ε       {}, {}, {}{}\n",
        r.n,
        r.seed,
        r.epsilon,
        if r.replica > 0 {
            format!(", replica {}", r.replica)
        } else {
            String::new()
        }
    );
    s += &format!("  algorithm        {}\n", r.kind);
    s += &format!("  settings         {}\n", r.settings);
    s += "what it measured\n";
    s += &format!(
        "  energy           {} (H/n of the reference output)\n",
        r.energy
    );
    s += &format!("  energy_perturbed {}\n", r.energy_perturbed);
    s += &format!("  overlap          {}\n", r.overlap);
    s += &format!("  distance         {}\n", r.distance);
    s += &format!(
        "  iterations       {}   sweeps {}   converged {}\n",
        r.iterations, r.sweeps, r.converged
    );
    for (name, v) in [
        ("energy_reduced", r.energy_reduced),
        ("cut_fraction", r.cut_fraction),
        ("relaxation", r.relaxation),
        ("distance_point", r.distance_point),
        ("autocorrelation_time", r.autocorrelation_time),
        ("overlap_initial", r.overlap_initial),
        ("magnetisation", r.magnetisation),
    ] {
        if v.is_some() {
            s += &format!("  {name:<16} {}\n", opt(v));
        }
    }
    s += "who computed it\n";
    s += &format!("  kiln             {}\n", r.kiln_version);
    s += &format!(
        "  by               {} on {} ({} threads), {:.3} s\n",
        r.computed_by, r.host, r.threads, r.wall_seconds
    );
    s += "artifacts\n";
    for (k, p) in &artifacts {
        s += &format!("  {k:<16} {}\n", p.display());
    }
    out(&s);
    Ok(ExitCode::SUCCESS)
}
