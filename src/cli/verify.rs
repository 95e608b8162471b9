//! `kiln verify`: check every record and artifact of a cache, move damaged ones aside, remove
//! temporary files left by killed runs, and report counts. Exit 1 if anything was damaged.

use super::out;
use crate::cell::Key;
use crate::store::cache::{Cache, Lookup};
use crate::store::temp_is_orphan;
use clap::Args;
use std::path::PathBuf;
use std::process::ExitCode;

#[derive(Args, Debug)]
pub struct VerifyArgs {
    #[command(flatten)]
    pub folders: super::Folders,
    /// Print a JSON summary.
    #[arg(long)]
    pub json: bool,
}

#[derive(Default, Debug)]
struct Counts {
    records: u64,
    spins: u64,
    damaged: Vec<String>,
    leftovers_removed: u64,
    stale_claims_removed: u64,
    unknown: u64,
}

pub fn run(a: &VerifyArgs) -> anyhow::Result<ExitCode> {
    let root = a.folders.cache_dir();
    if !root.is_dir() {
        return Err(super::InputError(format!(
            "no cache at {}: nothing to verify (give --cache DIR or --results DIR)",
            root.display()
        ))
        .into());
    }
    let cache = Cache::new(&root);
    let mut c = Counts::default();
    for (sub, ext) in [("records", "rec"), ("spins", "spins"), ("claims", "claim")] {
        let dir = root.join(sub);
        let Ok(shards) = std::fs::read_dir(&dir) else {
            continue;
        };
        let mut files: Vec<PathBuf> = Vec::new();
        for shard in shards.flatten() {
            if let Ok(entries) = std::fs::read_dir(shard.path()) {
                files.extend(entries.flatten().map(|e| e.path()));
            }
        }
        files.sort();
        for path in files {
            let name = path
                .file_name()
                .and_then(|s| s.to_str())
                .unwrap_or("")
                .to_string();
            if name.starts_with('.') && name.contains(".tmp-") {
                if temp_is_orphan(&name) && std::fs::remove_file(&path).is_ok() {
                    c.leftovers_removed += 1;
                }
                continue;
            }
            let key = name
                .strip_suffix(&format!(".{ext}"))
                .and_then(Key::from_hex);
            let Some(key) = key else {
                c.unknown += 1;
                continue;
            };
            let lookup = match ext {
                "rec" => {
                    c.records += 1;
                    cache.read_record(&key)?.map_hit()
                }
                "spins" => {
                    c.spins += 1;
                    cache.read_spins(&key)?.map_hit()
                }
                _ => {
                    // A claim: stale if its holder on this host is gone.
                    if let crate::store::cache::Claim::Acquired(g) =
                        cache.claim(&key, crate::store::this_host(), "verify")?
                    {
                        drop(g);
                        c.stale_claims_removed += 1;
                    }
                    continue;
                }
            };
            if let Lookup::Damaged {
                path,
                reason,
                moved_to,
            } = lookup
            {
                c.damaged.push(format!(
                    "{} ({reason}){}",
                    path.display(),
                    moved_to.map_or(String::new(), |m| format!(" → {}", m.display()))
                ));
            }
        }
    }
    if a.json {
        let v = serde_json::json!({
            "cache": root.display().to_string(),
            "records": c.records,
            "spins": c.spins,
            "damaged": c.damaged.len(),
            "damaged_entries": c.damaged,
            "leftovers_removed": c.leftovers_removed,
            "stale_claims_removed": c.stale_claims_removed,
            "unknown_files": c.unknown,
        });
        out(&format!("{v}\n"));
    } else {
        for d in &c.damaged {
            eprintln!("damaged: {d}");
        }
        out(&format!(
            "{}: {} records, {} spins artifacts checked · {} damaged (moved to quarantine/) · {} leftover temporary files removed · {} stale claims removed\n",
            root.display(),
            c.records,
            c.spins,
            c.damaged.len(),
            c.leftovers_removed,
            c.stale_claims_removed
        ));
    }
    Ok(if c.damaged.is_empty() {
        ExitCode::SUCCESS
    } else {
        ExitCode::from(1)
    })
}
