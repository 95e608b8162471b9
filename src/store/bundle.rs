//! Deposit bundles: one reproducible archive of a results folder, with a checksum list and a
//! generated guide, and the checks a reader runs on it.
//!
//! Layout of a bundle `<experiment>.tar` (uncompressed POSIX tar, GNU long names):
//! every entry lies under `<experiment>/`; the folder's own files (tables, manifest, figures
//! with their sidecars, LaTeX tables, theory values, summaries) keep their relative paths,
//! hidden files (the cache) are left out; `spec.toml` is the spec exactly as run (taken from
//! the manifest); `README.txt` says what each file is; `CHECKSUMS.sha256` lists the SHA-256 of
//! every other entry as `<hex>  <path>` lines.
//!
//! Reproducible: entries in byte order of their paths, every header with mode 0644, owner 0,
//! and the time the manifest records as the run's end, so the same folder gives the same bytes.

use super::StoreError;
use sha2::{Digest, Sha256};
use std::collections::BTreeMap;
use std::path::{Component, Path, PathBuf};

/// Name of the checksum list inside a bundle.
pub const CHECKSUMS: &str = "CHECKSUMS.sha256";
/// Name of the generated guide inside a bundle.
pub const GUIDE: &str = "README.txt";
/// Name of the spec as run inside a bundle.
pub const SPEC: &str = "spec.toml";

/// What went wrong with a bundle or a folder to bundle.
#[derive(Debug, thiserror::Error)]
pub enum BundleError {
    #[error(transparent)]
    Store(#[from] StoreError),
    #[error("{path}: {message}")]
    Refused { path: PathBuf, message: String },
}

fn refused(path: &Path, message: impl Into<String>) -> BundleError {
    BundleError::Refused {
        path: path.to_path_buf(),
        message: message.into(),
    }
}

fn read(path: &Path) -> Result<Vec<u8>, StoreError> {
    std::fs::read(path).map_err(|source| StoreError::Read {
        path: path.to_path_buf(),
        source,
    })
}

/// The folder's files to deposit, by path relative to it ('/'-separated), sorted: every
/// regular file except hidden ones, leftovers of interrupted writes, and the three files a
/// bundle generates.
pub fn folder_files(dir: &Path) -> Result<BTreeMap<String, PathBuf>, StoreError> {
    fn walk(dir: &Path, rel: &str, out: &mut BTreeMap<String, PathBuf>) -> Result<(), StoreError> {
        let entries = std::fs::read_dir(dir).map_err(|source| StoreError::Read {
            path: dir.to_path_buf(),
            source,
        })?;
        for e in entries {
            let e = e.map_err(|source| StoreError::Read {
                path: dir.to_path_buf(),
                source,
            })?;
            let name = e.file_name().to_string_lossy().into_owned();
            if name.starts_with('.') || name.contains(".tmp-") {
                continue;
            }
            let path = e.path();
            let r = if rel.is_empty() {
                name.clone()
            } else {
                format!("{rel}/{name}")
            };
            let kind = e.file_type().map_err(|source| StoreError::Read {
                path: path.clone(),
                source,
            })?;
            if kind.is_dir() {
                walk(&path, &r, out)?;
            } else if kind.is_file()
                && !(rel.is_empty() && [CHECKSUMS, GUIDE, SPEC].contains(&&*name))
            {
                out.insert(r, path);
            }
        }
        Ok(())
    }
    let mut out = BTreeMap::new();
    walk(dir, "", &mut out)?;
    Ok(out)
}

/// The parts of a folder's `manifest.toml` a bundle needs.
pub struct ManifestFacts {
    pub experiment: String,
    pub spec: String,
    pub finished: String,
    pub kiln_version: String,
    pub tables: BTreeMap<String, String>,
}

/// Reads the facts from `<dir>/manifest.toml`.
pub fn manifest_facts(dir: &Path) -> Result<ManifestFacts, BundleError> {
    let path = dir.join("manifest.toml");
    let text = String::from_utf8(read(&path)?).map_err(|_| refused(&path, "not UTF-8 text"))?;
    let v: toml::Table = text
        .parse()
        .map_err(|e| refused(&path, format!("not a kiln manifest ({e})")))?;
    let s = |k: &str| -> Result<String, BundleError> {
        v.get(k)
            .and_then(|x| x.as_str())
            .map(str::to_string)
            .ok_or_else(|| refused(&path, format!("no `{k}` in the manifest")))
    };
    let tables = v
        .get("tables")
        .and_then(|t| t.as_table())
        .map(|t| {
            t.iter()
                .filter_map(|(k, x)| x.as_str().map(|x| (k.clone(), x.to_string())))
                .collect()
        })
        .unwrap_or_default();
    Ok(ManifestFacts {
        experiment: s("experiment")?,
        spec: s("spec")?,
        finished: s("finished").unwrap_or_default(),
        kiln_version: s("kiln_version").unwrap_or_default(),
        tables,
    })
}

/// Unix seconds of `YYYY-MM-DDTHH:MM:SSZ` (days from civil, Hinnant's algorithm).
fn parse_utc(s: &str) -> Option<u64> {
    let b = s.as_bytes();
    if b.len() != 20 || b[4] != b'-' || b[7] != b'-' || b[10] != b'T' || b[19] != b'Z' {
        return None;
    }
    let num = |r: std::ops::Range<usize>| s.get(r)?.parse::<i64>().ok();
    let (y, m, d) = (num(0..4)?, num(5..7)?, num(8..10)?);
    let (hh, mm, ss) = (num(11..13)?, num(14..16)?, num(17..19)?);
    let y = if m <= 2 { y - 1 } else { y };
    let era = y.div_euclid(400);
    let yoe = y - era * 400;
    let mp = (m + 9) % 12;
    let doy = (153 * mp + 2) / 5 + d - 1;
    let doe = yoe * 365 + yoe / 4 - yoe / 100 + doy;
    let days = era * 146_097 + doe - 719_468;
    u64::try_from(days * 86_400 + hh * 3600 + mm * 60 + ss).ok()
}

/// The generated guide of a bundle.
fn guide(facts: &ManifestFacts, files: &[String]) -> String {
    let archive = format!("{}.tar", facts.experiment);
    let describe = |f: &str| -> &'static str {
        let ext = f.rsplit('.').next().unwrap_or("");
        match f {
            "cells.parquet" => "one row per cell: energies, overlaps, distances, keys, provenance",
            "manifest.toml" => "the run's spec, environment, revisions and the tables' SHA-256",
            "overlaps.parquet" => "pairwise overlaps of independent replica outputs",
            "triples.parquet" => "overlap triples of replica outputs",
            "chaos.parquet" => "disorder chaos: overlaps of independent outputs on both instances",
            "traces.parquet" => "samplers' energy traces, thinned block means of energy per spin",
            "extrapolation.parquet" => "finite-size-scaling fits: energy per spin at n = infinity",
            "differences.parquet" => "paired differences between algorithms on the same instances",
            "extrapolation.tex" => "the fits as a LaTeX table",
            "theory.csv" => "theory values used (Parisi value, thresholds) with their provenance",
            "summary.txt" => "the text summary of the sweep",
            SPEC => "the experiment spec exactly as run",
            CHECKSUMS => "SHA-256 of every other file in this bundle",
            GUIDE => "this file",
            _ if f.starts_with("figures/") => match ext {
                "csv" => "a figure's data, with its caption and theory values in the header",
                "tex" => "a figure's caption (LaTeX)",
                "svg" | "pdf" | "png" => "a figure",
                _ => "a figure's companion file",
            },
            _ if f.starts_with("slurm/") => "the cluster job script and its logs",
            _ => match ext {
                "parquet" => "a results table",
                "tex" => "a LaTeX table",
                "csv" => "a table (CSV)",
                _ => "a file of the results folder",
            },
        }
    };
    let width = files.iter().map(|f| f.len()).max().unwrap_or(0);
    let title = format!(
        "{}: results made by kiln {}",
        facts.experiment, facts.kiln_version
    );
    let mut s = format!(
        "{title}\n{}\n\n\
         Every number in these tables is a pure function of spec.toml: kiln derives each\n\
         instance and each algorithm's randomness from a hash of the cell, never from the\n\
         machine, the thread count or the order of work.\n\n\
         Files (paths inside the folder {}/):\n\n",
        "=".repeat(title.chars().count()),
        facts.experiment,
    );
    for f in files {
        s += &format!("  {f:<width$}  {}\n", describe(f));
    }
    s += &format!(
        "\nTo check this bundle (named {archive} here: use the name it was deposited under;\n\
         build kiln from its sources with `cargo install --path .`, or run it from a\n\
         checkout with `cargo run --release --`):\n\n\
         1. Checksums only (seconds): every file against CHECKSUMS.sha256.\n\n\
         \x20     kiln replay {archive} --checksums-only\n\n\
         2. Checksums, then a stratified sample of cells recomputed from scratch in a\n\
         \x20  temporary cache and compared bit for bit with cells.parquet (minutes):\n\n\
         \x20     kiln replay {archive}\n\n\
         \x20  `--cells K`, `--seed S` and `--budget SECONDS` choose how many cells, which ones,\n\
         \x20  and how much recorded compute time the sample may cost. Exit status 0: every\n\
         \x20  replayed cell is identical; 1: a difference or a checksum failure; 3: this kiln\n\
         \x20  has other revisions than the one that made the folder (the numbers are expected\n\
         \x20  to differ; use the kiln version named above).\n"
    );
    s
}

/// Writes a bundle of the results folder `dir` to `out` (atomically) and returns the list of
/// files it holds. Refuses a folder whose tables do not match its manifest.
pub fn write(dir: &Path, out: &Path) -> Result<Vec<String>, BundleError> {
    let facts = manifest_facts(dir)?;
    if !dir.join("cells.parquet").is_file() {
        return Err(refused(
            dir,
            "no cells.parquet: not a results folder of kiln run",
        ));
    }
    for (name, want) in &facts.tables {
        let got = hex::encode(Sha256::digest(read(&dir.join(name))?));
        if &got != want {
            return Err(refused(
                &dir.join(name),
                "does not match the checksum its manifest.toml records; rewrite it with the \
                 `kiln run` that made it before depositing",
            ));
        }
    }
    let mut contents: BTreeMap<String, Vec<u8>> = BTreeMap::new();
    for (rel, path) in folder_files(dir)? {
        contents.insert(rel, read(&path)?);
    }
    contents.insert(SPEC.into(), facts.spec.clone().into_bytes());
    let mut listed: Vec<String> = contents.keys().cloned().collect();
    listed.extend([GUIDE.to_string(), CHECKSUMS.to_string()]);
    listed.sort();
    contents.insert(GUIDE.into(), guide(&facts, &listed).into_bytes());
    let sums: String = contents
        .iter()
        .map(|(rel, b)| format!("{}  {rel}\n", hex::encode(Sha256::digest(b))))
        .collect();
    contents.insert(CHECKSUMS.into(), sums.into_bytes());

    let mtime = parse_utc(&facts.finished).unwrap_or(0);
    let mut builder = tar::Builder::new(Vec::new());
    for (rel, bytes) in &contents {
        let mut h = tar::Header::new_gnu();
        h.set_entry_type(tar::EntryType::Regular);
        h.set_size(bytes.len() as u64);
        h.set_mode(0o644);
        h.set_uid(0);
        h.set_gid(0);
        h.set_mtime(mtime);
        builder
            .append_data(&mut h, format!("{}/{rel}", facts.experiment), &bytes[..])
            .map_err(|source| StoreError::Write {
                path: out.to_path_buf(),
                source,
            })?;
    }
    let bytes = builder.into_inner().map_err(|source| StoreError::Write {
        path: out.to_path_buf(),
        source,
    })?;
    super::write_atomic(out, &bytes)?;
    Ok(contents.into_keys().collect())
}

/// Unpacks a bundle into `into` (which must be empty) and returns the folder it holds.
/// Refuses entries that are not regular files under one top folder, or that would leave it.
pub fn unpack(archive: &Path, into: &Path) -> Result<PathBuf, BundleError> {
    let file = std::fs::File::open(archive).map_err(|source| StoreError::Read {
        path: archive.to_path_buf(),
        source,
    })?;
    let bad = |m: String| refused(archive, format!("not a kiln bundle: {m}"));
    let mut top: Option<String> = None;
    let mut ar = tar::Archive::new(file);
    let entries = ar.entries().map_err(|e| bad(e.to_string()))?;
    for e in entries {
        let mut e = e.map_err(|e| bad(e.to_string()))?;
        if e.header().entry_type() != tar::EntryType::Regular {
            return Err(bad(format!(
                "entry {} is not a regular file",
                String::from_utf8_lossy(&e.path_bytes())
            )));
        }
        let path = e.path().map_err(|e| bad(e.to_string()))?.into_owned();
        let parts: Vec<String> = path
            .components()
            .map(|c| match c {
                Component::Normal(s) => Ok(s.to_string_lossy().into_owned()),
                _ => Err(bad(format!("entry {} leaves the bundle", path.display()))),
            })
            .collect::<Result<_, _>>()?;
        if parts.len() < 2 {
            return Err(bad(format!(
                "entry {} is not under one folder",
                path.display()
            )));
        }
        match &top {
            None => top = Some(parts[0].clone()),
            Some(t) if *t != parts[0] => {
                return Err(bad(format!("entries under {t}/ and {}/", parts[0])));
            }
            _ => {}
        }
        let dest = into.join(&path);
        if let Some(parent) = dest.parent() {
            std::fs::create_dir_all(parent).map_err(|source| StoreError::Write {
                path: parent.to_path_buf(),
                source,
            })?;
        }
        let mut bytes = Vec::new();
        std::io::Read::read_to_end(&mut e, &mut bytes).map_err(|e| bad(e.to_string()))?;
        std::fs::write(&dest, bytes).map_err(|source| StoreError::Write {
            path: dest.clone(),
            source,
        })?;
    }
    top.map(|t| into.join(t))
        .ok_or_else(|| bad("it is empty".into()))
}

/// The outcome of checking a folder against its `CHECKSUMS.sha256`.
#[derive(Debug, Default)]
pub struct ChecksumReport {
    pub checked: usize,
    /// (path, what is wrong): different content, or missing.
    pub failed: Vec<(String, String)>,
    /// Files in the folder the list does not name.
    pub unlisted: Vec<String>,
}

/// Checks every file `<dir>/CHECKSUMS.sha256` lists. `None` if the folder has no list.
pub fn check(dir: &Path) -> Result<Option<ChecksumReport>, BundleError> {
    let list = dir.join(CHECKSUMS);
    if !list.is_file() {
        return Ok(None);
    }
    let text = String::from_utf8(read(&list)?).map_err(|_| refused(&list, "not UTF-8 text"))?;
    let mut r = ChecksumReport::default();
    let mut named = std::collections::BTreeSet::new();
    for (i, line) in text.lines().enumerate() {
        let Some((hexsum, rel)) = line.split_once("  ") else {
            return Err(refused(
                &list,
                format!("line {}: expected `<sha256>  <path>`", i + 1),
            ));
        };
        let rel_path = Path::new(rel);
        if hexsum.len() != 64
            || rel_path
                .components()
                .any(|c| !matches!(c, Component::Normal(_)))
        {
            return Err(refused(
                &list,
                format!("line {}: expected `<sha256>  <relative path>`", i + 1),
            ));
        }
        named.insert(rel.to_string());
        r.checked += 1;
        match std::fs::read(dir.join(rel_path)) {
            Ok(b) if hex::encode(Sha256::digest(&b)) == hexsum => {}
            Ok(_) => r
                .failed
                .push((rel.to_string(), "content differs from its checksum".into())),
            Err(_) => r.failed.push((rel.to_string(), "missing".into())),
        }
    }
    for rel in folder_files(dir)?.into_keys() {
        if !named.contains(&rel) {
            r.unlisted.push(rel);
        }
    }
    for own in [GUIDE, SPEC] {
        if dir.join(own).is_file() && !named.contains(own) {
            r.unlisted.push(own.into());
        }
    }
    Ok(Some(r))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn utc_round_trip() {
        for secs in [0i64, 951_782_400, 1_798_761_599, 1_764_759_600] {
            let s = super::super::manifest::format_utc(secs);
            assert_eq!(parse_utc(&s), Some(secs as u64), "{s}");
        }
        assert_eq!(parse_utc("2026-13"), None);
    }
}
