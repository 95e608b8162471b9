//! `kiln verify`: check every entry of a cache ([`crate::store::verify`]) and print what it
//! found. Exit 1 if anything was damaged.

use super::out;
use crate::store::cache::Cache;
use clap::Args;
use std::process::ExitCode;

#[derive(Args, Debug)]
pub struct VerifyArgs {
    #[command(flatten)]
    pub folders: super::Folders,
    /// Print a JSON summary.
    #[arg(long)]
    pub json: bool,
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
    let c = crate::store::verify::verify(&cache)?;
    if a.json {
        let v = serde_json::json!({
            "cache": root.display().to_string(),
            "records": c.records,
            "spins": c.spins,
            "points": c.points,
            "traces": c.traces,
            "theory": c.theory,
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
            "{}: {} records, {} spins, {} point and {} trace artifacts, {} theory solutions checked · {} damaged (moved to quarantine/) · {} leftover temporary files removed · {} stale claims removed\n",
            root.display(),
            c.records,
            c.spins,
            c.points,
            c.traces,
            c.theory,
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
