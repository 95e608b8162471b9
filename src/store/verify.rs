//! Checking a whole cache: every entry kind (records, spins, point and trace artifacts, claims,
//! theory solutions) read through the same checks as a run uses; damaged entries moved to
//! `quarantine/`, orphaned temporary files and stale claims removed.

use std::path::{Path, PathBuf};

use super::cache::{Cache, Lookup};
use super::{StoreError, temp_is_orphan};
use crate::cell::Key;

/// What a check of a cache found and did.
#[derive(Default, Debug)]
pub struct Report {
    pub records: u64,
    pub spins: u64,
    pub points: u64,
    pub traces: u64,
    pub theory: u64,
    /// `path (reason) → where it was moved`, one per damaged entry.
    pub damaged: Vec<String>,
    pub leftovers_removed: u64,
    pub stale_claims_removed: u64,
    /// Files that are not kiln entries (left alone).
    pub unknown: u64,
}

/// The files of a two-level entry folder (`<sub>/<shard>/<file>`), sorted.
fn sharded_files(dir: &Path) -> Vec<PathBuf> {
    let mut files = Vec::new();
    if let Ok(shards) = std::fs::read_dir(dir) {
        for shard in shards.flatten() {
            if let Ok(entries) = std::fs::read_dir(shard.path()) {
                files.extend(entries.flatten().map(|e| e.path()));
            }
        }
    }
    files.sort();
    files
}

fn name_of(path: &Path) -> String {
    path.file_name()
        .and_then(|s| s.to_str())
        .unwrap_or("")
        .to_string()
}

/// Removes an orphaned temporary file; true if `name` is a temporary file at all.
fn temporary(path: &Path, name: &str, report: &mut Report) -> bool {
    if name.starts_with('.') && name.contains(".tmp-") {
        if temp_is_orphan(name) && std::fs::remove_file(path).is_ok() {
            report.leftovers_removed += 1;
        }
        return true;
    }
    false
}

fn note<T>(lookup: Lookup<T>, report: &mut Report) {
    if let Lookup::Damaged {
        path,
        reason,
        moved_to,
    } = lookup
    {
        report.damaged.push(format!(
            "{} ({reason}) → {}",
            path.display(),
            moved_to.display()
        ));
    }
}

/// Checks every entry of the cache at `cache.root()`.
pub fn verify(cache: &Cache) -> Result<Report, StoreError> {
    let root = cache.root().to_path_buf();
    let mut r = Report::default();
    for (sub, ext) in [
        ("records", "rec"),
        ("spins", "spins"),
        ("points", "point"),
        ("traces", "trace"),
    ] {
        for path in sharded_files(&root.join(sub)) {
            let name = name_of(&path);
            if temporary(&path, &name, &mut r) {
                continue;
            }
            let Some(key) = name
                .strip_suffix(&format!(".{ext}"))
                .and_then(Key::from_hex)
            else {
                r.unknown += 1;
                continue;
            };
            match ext {
                "rec" => {
                    r.records += 1;
                    note(cache.read_record(&key)?, &mut r);
                }
                "spins" => {
                    r.spins += 1;
                    note(cache.read_spins(&key)?, &mut r);
                }
                "point" => {
                    r.points += 1;
                    note(cache.read_point(&key)?, &mut r);
                }
                "trace" => {
                    r.traces += 1;
                    note(cache.read_trace(&key)?, &mut r);
                }
                _ => unreachable!("kinds listed above"),
            }
        }
    }
    // Claims (`<key>.<generation>.claim`): temporary clock probes of killed runners removed,
    // stale claims removed; a claim released while verify runs is not counted.
    for path in sharded_files(&root.join("claims")) {
        let name = name_of(&path);
        if !temporary(&path, &name, &mut r) && !name.ends_with(".claim") {
            r.unknown += 1;
        }
    }
    r.stale_claims_removed = cache.sweep_stale_claims()?;
    let mut theory: Vec<PathBuf> = std::fs::read_dir(root.join("theory"))
        .map(|d| d.flatten().map(|e| e.path()).collect())
        .unwrap_or_default();
    theory.sort();
    for path in theory {
        let name = name_of(&path);
        if temporary(&path, &name, &mut r) {
            continue;
        }
        match name.strip_suffix(".json") {
            Some(hex_key) if Key::from_hex(hex_key).is_some() => {
                r.theory += 1;
                note(super::theory::read(cache, hex_key)?, &mut r);
            }
            _ => r.unknown += 1,
        }
    }
    Ok(r)
}
